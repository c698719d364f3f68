/*
 * lamina/chipmap.h - the chip map: every tile of a scan outlined at its
 * stage position, the candidates marked by layer colour and numbered by
 * catalogue rank, with chip-coordinate axes and a scale bar.
 *
 * The map is oriented like the camera's pictures (stage axes flipped back
 * as lamina/stage.h's 'axes' says), so flakes sit where they look. Tiles
 * without a position are left out (the catalogue warns about them).
 *
 * lam_chipmap_view fixes where chip coordinates land on a page of a given
 * width; the run report uses it for its own (linked) SVG, and
 * lam_chipmap_write draws the map to a file (.svg, .pdf or .png).
 */
#ifndef LAMINA_CHIPMAP_H
#define LAMINA_CHIPMAP_H

#include <stddef.h>
#include "lamina/catalog.h"
#include "lamina/error.h"

typedef struct lam_chipmap_view {
    double lo[2], hi[2];      /* chip-coordinate extent (um) of all tiles */
    double scale;             /* page units per um */
    double sx, sy;            /* +1 or -1: the stage's axis directions */
    double left, top;         /* page position of the drawing area */
    double width, height;     /* page size */
    size_t tiles;             /* images with a position */
} lam_chipmap_view;

/* The view for a page 'width' wide (height follows the chip's shape);
 * tiles == 0 when no image has a position. */
void lam_chipmap_layout(const lam_catalog *c, double width, lam_chipmap_view *v);

/* Page coordinates of a chip point (um). */
void lam_chipmap_point(const lam_chipmap_view *v, const double chip_um[2], double page[2]);

/* Where catalogue entry i is marked on the map: its page point and the
 * dot's radius (grows with the area, 4 to 11). 0 for an entry that is not
 * marked (not a candidate, or no chip position). */
int lam_chipmap_mark(const lam_chipmap_view *v, const lam_catalog *c, size_t i, double page[2],
                     double *radius);

/* The four corners of image k on the page (false when it has no position). */
int lam_chipmap_tile(const lam_catalog *c, const lam_chipmap_view *v, size_t k, double xy[4][2]);

/* Draw the map to a file. LAM_EINVAL when no image has a position. */
lam_status lam_chipmap_write(const lam_catalog *c, const char *path, lam_error *err);

/* The chip map of a results folder: its lamina-analysis/1 results
 * (lam_catalog_add_folder) at the positions (borrowed) in the stage's
 * convention, drawn to path. Errors name the folder or the output file;
 * lam_catalog_finish's and lam_chipmap_write's. */
lam_status lam_chipmap_write_results(const char *dir, const lam_positions *pos,
                                     const lam_stage *stage, const char *path, lam_error *err);

#endif
