/*
 * lamina/report.h - the files an analysis writes (read them with
 * docs/user-guide.md):
 *   STEM.json           the analysis, schema "lamina-analysis/1"
 *   STEM.layers.png     8-bit grey: 0 substrate, 1..K layers, 254 thicker
 *                       than modelled, 255 not assigned
 *   STEM.annotated.png  the input with antialiased outlines, usable rectangles,
 *                       labels (layers, probability, area, id) placed without
 *                       overlap, legend and scale bar (annotate.c, cairo/Pango)
 *   STEM.contrast.svg   measured region contrasts over the model ladder, per
 *                       channel, with region ids and axes (plot.c; .pdf and
 *                       .png names give those formats)
 * Every file is written atomically. lam_report_json builds the cJSON tree
 * (caller deletes) so a batch can collect the regions for a catalogue.
 */
#ifndef LAMINA_REPORT_H
#define LAMINA_REPORT_H

#include "lamina/analyze.h"
#include "lamina/contour.h"
#include "lamina/error.h"

struct cJSON;

/* The analysis as a lamina-analysis/1 tree (the caller deletes it); NULL
 * when out of memory. */
struct cJSON *lam_report_json(const lam_analysis *a);

/* lam_report_json written to path, atomically. */
lam_status lam_report_write_json(const lam_analysis *a, const char *path, lam_error *err);

/* Write an already built JSON tree (e.g. from lam_report_json), newline-ended. */
lam_status lam_report_save_json(const struct cJSON *root, const char *path, lam_error *err);
lam_status lam_report_write_layers(const lam_analysis *a, const char *path, lam_error *err);
/* Draws over a->display and releases it (the copy of the input is
 * consumed: call last; lam_analysis_display decodes a JPEG input's again,
 * another's is gone). A path ending in .jpg or .jpeg
 * (lam_report_jpeg_path) gets a JPEG of quality 92 without chroma
 * subsampling, any other a PNG. */
lam_status lam_report_write_annotated(lam_analysis *a, const char *path, lam_error *err);
/* The same in two steps, so that the first can run on another thread
 * while the display is decoded (lam_analysis_display; the batch does so):
 * the regions' outlines, traced and simplified from the label map alone
 * (*out, free with lam_contours_free; NULL on error), then the picture
 * drawn with them. The two together are lam_report_write_annotated. */
lam_status lam_report_trace_outlines(const lam_analysis *a, lam_contours **out, lam_error *err);
lam_status lam_report_write_annotated_with(lam_analysis *a, const lam_contours *outlines,
                                           const char *path, lam_error *err);
lam_status lam_report_write_svg(const lam_analysis *a, const char *path, lam_error *err);

/* 1 when path ends in .jpg or .jpeg (any case): the annotated picture's
 * format. */
int lam_report_jpeg_path(const char *path);

/* Where the annotated picture puts its panels and labels (canvas pixels):
 * region 0 for the legend and the scale bar, else the labelled region's
 * id. Regions flagged small get no label; candidates always get one;
 * boxes do not overlap unless a candidate had no free place. Returns the
 * number of boxes (at most max). For tests and for tools that link to the
 * picture. */
typedef struct lam_annotation_box {
    unsigned region;
    double x, y, w, h;
} lam_annotation_box;

/* The layout above for analysis a. */
size_t lam_report_annotation_layout(lam_analysis *a, lam_annotation_box *out, size_t max);

/* Value of a region in the layer map. */
unsigned lam_report_layer_value(const lam_region_result *r);

/* The palette: colour of a layer-map value (1..K, 254, 255). */
void lam_report_palette(unsigned value, uint8_t rgb[3]);

#endif
