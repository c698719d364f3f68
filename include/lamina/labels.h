/*
 * lamina/labels.h - label files ("lamina-labels/1" JSON): regions of known
 * layer count marked on an image, for calibration (lamina/calibrate.h).
 *
 *   {"schema": "lamina-labels/1",
 *    "labels": [{"layers": 2, "polygon": [[x, y], [x, y], [x, y], ...]},
 *               {"layers": 1, "point": [x, y]}]}
 *
 * Coordinates are pixels of the image, origin top-left, pixel centres at
 * +0.5. A polygon labels the pixels inside it (even-odd rule); a point
 * labels the whole segmented region that contains it, which the caller
 * finds (lam_calib_labels_from_json does). Later labels cover earlier ones.
 * The file is read strictly (lamina/jsonfile.h): unknown keys, layer counts
 * outside 1..40, polygons of fewer than 3 or more than
 * LAM_RASTER_MAX_VERTICES points and points that are not [x, y] numbers are
 * errors naming the label ("labels[2].polygon: ...") and the file.
 *
 * Labels can also come as a label map: a PNG (8- or 16-bit, grey or RGB;
 * the first channel counts) coded like the layer map of an analysis or the
 * truth map of a render: 0 substrate, N layers, 254/255 ignored.
 *
 * Ownership: lam_labels_load / lam_labels_parse fill caller storage whose
 * items are released by lam_labels_clear; lam_labels_load_map returns a
 * malloc'd map the caller frees.
 */
#ifndef LAMINA_LABELS_H
#define LAMINA_LABELS_H

#include <stddef.h>
#include <stdint.h>
#include "lamina/error.h"
#include "lamina/raster.h"

struct lam_setup;

#define LAM_LABEL_MAX_LAYERS 40

typedef enum lam_label_kind { LAM_LABEL_POLYGON, LAM_LABEL_POINT } lam_label_kind;

typedef struct lam_label {
    int layers;              /* 1..LAM_LABEL_MAX_LAYERS */
    lam_label_kind kind;
    size_t vertices;         /* POLYGON: 3..LAM_RASTER_MAX_VERTICES; POINT: 1 */
    double x[LAM_RASTER_MAX_VERTICES], y[LAM_RASTER_MAX_VERTICES];
} lam_label;

typedef struct lam_labels {
    size_t count;
    lam_label *items;        /* count entries, owned */
} lam_labels;

/* Read a label file (at most 4 MiB). Errors name the file and the label. */
lam_status lam_labels_load(const char *path, lam_labels *out, lam_error *err);

/* Parse label-file text (errors name the label, not a file). */
lam_status lam_labels_parse(const char *json, lam_labels *out, lam_error *err);

/* Release the items; l may be NULL. */
void lam_labels_clear(lam_labels *l);

/* Read a label map image into *map (width*height codes, malloc'd; the
 * codes are read as stored, not as light). Errors name the file. */
lam_status lam_labels_load_map(const char *path, uint8_t **map, size_t *width, size_t *height,
                               lam_error *err);

/* The label map of one image from 'labels': a layer-map PNG
 * (lam_labels_load_map) or, for a name ending in .json, a lamina-labels/1
 * file rasterised at the image's size (points take the region of the
 * image's segmentation with 'setup' that contains them:
 * lam_calib_labels_from_json of lamina/calibrate.h). *map is malloc'd.
 * Errors name the label file or the image. */
lam_status lam_labels_map_for_image(const char *labels, const char *image,
                                    const struct lam_setup *setup, uint8_t **map, size_t *width,
                                    size_t *height, lam_error *err);

/* Write a polygon label's layer count into every pixel it covers of an
 * 8-bit width x height map (a point label writes nothing). */
void lam_label_fill(const lam_label *label, uint8_t *map, size_t width, size_t height);

#endif
