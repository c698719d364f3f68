/*
 * lamina/lamina.h - every public header of the lamina library at once.
 *
 * A program built against an installed copy:
 *   cc prog.c $(pkg-config --cflags --libs lamina)            (shared)
 *   cc prog.c $(pkg-config --static --cflags --libs lamina)   (static)
 * Each header included here is the manual of its module (units,
 * conventions, ownership, errors). tests/cli/test_install.sh checks that
 * this list names every header in include/lamina/.
 */
#ifndef LAMINA_LAMINA_H
#define LAMINA_LAMINA_H

#include "lamina/analyze.h"
#include "lamina/batch.h"
#include "lamina/bigalloc.h"
#include "lamina/calibrate.h"
#include "lamina/calibrun.h"
#include "lamina/catalog.h"
#include "lamina/chipmap.h"
#include "lamina/clock.h"
#include "lamina/colour.h"
#include "lamina/conductivity.h"
#include "lamina/contour.h"
#include "lamina/contrast.h"
#include "lamina/crops.h"
#include "lamina/crystal.h"
#include "lamina/draw.h"
#include "lamina/error.h"
#include "lamina/estimate.h"
#include "lamina/image.h"
#include "lamina/infer.h"
#include "lamina/inputs.h"
#include "lamina/jpeg.h"
#include "lamina/jsonfile.h"
#include "lamina/labels.h"
#include "lamina/material.h"
#include "lamina/model.h"
#include "lamina/names.h"
#include "lamina/nksource.h"
#include "lamina/outfile.h"
#include "lamina/oxide.h"
#include "lamina/parallel.h"
#include "lamina/planmap.h"
#include "lamina/plot.h"
#include "lamina/png.h"
#include "lamina/pool.h"
#include "lamina/raster.h"
#include "lamina/render.h"
#include "lamina/report.h"
#include "lamina/runreport.h"
#include "lamina/segment.h"
#include "lamina/setup.h"
#include "lamina/stage.h"
#include "lamina/substrate.h"
#include "lamina/substrate_colour.h"
#include "lamina/summary.h"
#include "lamina/textfile.h"
#include "lamina/thickness.h"
#include "lamina/tmm.h"
#include "lamina/transfer.h"
#include "lamina/version.h"
#include "lamina/warnings.h"
#include "lamina/watch.h"

#endif
