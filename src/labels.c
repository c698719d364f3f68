/* labels.c - reading lamina-labels/1 files: polygons and points of known
 * layer count for calibration. */
#include "lamina/labels.h"
#include "lamina/image.h"
#include "lamina/jsonfile.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

#define LABELS_SCHEMA "lamina-labels/1"
#define LABELS_MAX_BYTES (4u << 20)

static const char *const root_keys[] = {"schema", "labels", NULL};
static const char *const label_keys[] = {"layers", "polygon", "point", NULL};

void lam_labels_clear(lam_labels *l)
{
    if (!l)
        return;
    free(l->items);
    l->items = NULL;
    l->count = 0;
}

/* [x, y] of finite numbers */
static int read_xy(const cJSON *p, double *x, double *y)
{
    const cJSON *px = cJSON_GetArrayItem(p, 0), *py = cJSON_GetArrayItem(p, 1);
    if (!cJSON_IsArray(p) || cJSON_GetArraySize(p) != 2 || !cJSON_IsNumber(px) ||
        !cJSON_IsNumber(py) || !isfinite(px->valuedouble) || !isfinite(py->valuedouble))
        return -1;
    *x = px->valuedouble;
    *y = py->valuedouble;
    return 0;
}

static lam_status read_label(const cJSON *item, size_t idx, lam_label *L, lam_error *err)
{
    char path[32];
    snprintf(path, sizeof path, "labels[%zu]", idx);
    lam_status st = lam_json_check_keys(item, path, label_keys, err);
    if (st)
        return st;
    const cJSON *ly = cJSON_GetObjectItemCaseSensitive(item, "layers");
    const cJSON *poly = cJSON_GetObjectItemCaseSensitive(item, "polygon");
    const cJSON *pt = cJSON_GetObjectItemCaseSensitive(item, "point");
    if (!cJSON_IsNumber(ly) || !(ly->valuedouble >= 1 && ly->valuedouble <= LAM_LABEL_MAX_LAYERS))
        return lam_error_set(err, LAM_EFORMAT, "%s.layers: expected 1 to %d", path,
                             LAM_LABEL_MAX_LAYERS);
    L->layers = (int)ly->valuedouble;
    if (cJSON_IsArray(poly)) {
        int n = cJSON_GetArraySize(poly);
        L->kind = LAM_LABEL_POLYGON;
        L->vertices = (size_t)n;
        int ok = n >= 3 && n <= LAM_RASTER_MAX_VERTICES;
        for (int k = 0; ok && k < n; k++)
            ok = !read_xy(cJSON_GetArrayItem(poly, k), &L->x[k], &L->y[k]);
        if (!ok)
            return lam_error_set(err, LAM_EFORMAT, "%s.polygon: expected 3 to %d [x, y] points",
                                 path, LAM_RASTER_MAX_VERTICES);
        return LAM_OK;
    }
    if (pt) {
        L->kind = LAM_LABEL_POINT;
        L->vertices = 1;
        if (read_xy(pt, &L->x[0], &L->y[0]))
            return lam_error_set(err, LAM_EFORMAT, "%s.point: expected [x, y]", path);
        return LAM_OK;
    }
    return lam_error_set(err, LAM_EFORMAT, "%s: needs a polygon or a point", path);
}

static lam_status labels_reader(const cJSON *root, const char *dir, void *vout, lam_error *err)
{
    (void)dir; /* label files name no other files */
    lam_labels *out = vout;
    memset(out, 0, sizeof *out);
    lam_status st = lam_json_check_keys(root, "", root_keys, err);
    const cJSON *list = cJSON_GetObjectItemCaseSensitive(root, "labels");
    if (st)
        return st;
    if (!cJSON_IsArray(list))
        return lam_error_set(err, LAM_EFORMAT, "key labels: expected a list of labels");
    size_t n = (size_t)cJSON_GetArraySize(list);
    out->items = calloc(n ? n : 1, sizeof *out->items);
    if (!out->items)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate %zu labels", n);
    const cJSON *item;
    cJSON_ArrayForEach(item, list) {
        if ((st = read_label(item, out->count, &out->items[out->count], err))) {
            lam_labels_clear(out);
            return st;
        }
        out->count++;
    }
    return LAM_OK;
}

lam_status lam_labels_parse(const char *json, lam_labels *out, lam_error *err)
{
    memset(out, 0, sizeof *out);
    return lam_json_read_text(json, LABELS_SCHEMA, ".", labels_reader, out, err);
}

lam_status lam_labels_load(const char *path, lam_labels *out, lam_error *err)
{
    memset(out, 0, sizeof *out);
    return lam_json_read_file(path, LABELS_MAX_BYTES, "label", LABELS_SCHEMA, labels_reader, out,
                              err);
}

lam_status lam_labels_load_map(const char *path, uint8_t **map, size_t *width, size_t *height,
                               lam_error *err)
{
    lam_load_options lo = lam_load_options_default();
    lo.transfer.kind = LAM_TRANSFER_LINEAR; /* a label map holds codes, not light */
    lam_image *lab = NULL;
    lam_status st = lam_image_load(path, &lo, &lab, err);
    if (st)
        return st;
    size_t n = lab->width * lab->height;
    uint8_t *codes = malloc(n ? n : 1);
    if (!codes) {
        lam_image_free(lab);
        lam_error_set_file(err, path);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a %zux%zu label map", lab->width,
                             lab->height);
    }
    double full = lab->bit_depth == 16 ? 65535.0 : 255.0;
    for (size_t k = 0; k < n; k++) {
        double v = lab->plane[0][k] * full;
        codes[k] = (uint8_t)(v > 255 ? 255 : lround(v));
    }
    *map = codes;
    *width = lab->width;
    *height = lab->height;
    lam_image_free(lab);
    return LAM_OK;
}

void lam_label_fill(const lam_label *label, uint8_t *map, size_t width, size_t height)
{
    if (label->kind == LAM_LABEL_POLYGON)
        lam_raster_fill_u8(label->x, label->y, label->vertices, width, height, map,
                           (uint8_t)label->layers);
}
