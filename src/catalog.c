/* catalog.c - catalogue of regions over many images: ranking, chip
 * coordinates from stage positions, duplicates in overlapping tiles, CSV,
 * JSON and a contact sheet of the top candidates. */
#include "lamina/catalog.h"

#include "lamina/image.h"
#include "lamina/outfile.h"
#include "lamina/png.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <cjson/cJSON.h>

void lam_positions_clear(lam_positions *p)
{
    if (!p)
        return;
    free(p->items);
    p->items = NULL;
    p->count = 0;
}

static const char *base_name(const char *path)
{
    const char *b = strrchr(path, '/');
    return b ? b + 1 : path;
}

lam_status lam_positions_load(const char *path, lam_positions *out, lam_error *err)
{
    FILE *fp = fopen(path, "r");
    if (!fp) {
        lam_error_set(err, LAM_EIO, "cannot open positions: %s", strerror(errno));
        lam_error_set_file(err, path);
        return LAM_EIO;
    }
    lam_positions p = {0, NULL};
    size_t cap = 0, lineno = 0;
    int has_rot = 0, header = 0;
    char line[2048];
    lam_status st = LAM_OK;
    while (!st && fgets(line, sizeof line, fp)) {
        lineno++;
        line[strcspn(line, "\r\n")] = '\0';
        if (!line[0] || line[0] == '#')
            continue;
        if (!header) {
            header = 1;
            if (strncasecmp(line, "file,x_um,y_um", 14))
                st = lam_error_set(err, LAM_EFORMAT, "line %zu: expected the header file,x_um,y_um[,rotation_deg]", lineno);
            has_rot = strstr(line, "rotation_deg") != NULL;
            continue;
        }
        if (p.count == cap) {
            cap = cap ? 2 * cap : 64;
            if (cap > 1000000) {
                st = lam_error_set(err, LAM_ETOOBIG, "more than 500000 positions");
                break;
            }
            lam_position *n = realloc(p.items, cap * sizeof *n);
            if (!n) {
                st = lam_error_set(err, LAM_ENOMEM, "cannot grow the positions");
                break;
            }
            p.items = n;
        }
        lam_position *q = &p.items[p.count];
        memset(q, 0, sizeof *q);
        char *comma = strchr(line, ',');
        if (!comma || comma - line >= (long)sizeof q->file) {
            st = lam_error_set(err, LAM_EFORMAT, "line %zu: expected file,x_um,y_um", lineno);
            break;
        }
        memcpy(q->file, line, (size_t)(comma - line));
        char *s = comma + 1, *end;
        double v[3] = {0, 0, 0};
        int need = has_rot ? 3 : 2;
        for (int i = 0; i < need && !st; i++) {
            errno = 0;
            v[i] = strtod(s, &end);
            if (end == s || errno || !isfinite(v[i]) || (i + 1 < need && *end != ','))
                st = lam_error_set(err, LAM_EFORMAT, "line %zu: column %d is not a number", lineno, i + 2);
            s = end + 1;
        }
        q->x_um = v[0], q->y_um = v[1], q->rotation_deg = v[2];
        if (!st)
            p.count++;
    }
    fclose(fp);
    if (st) {
        lam_positions_clear(&p);
        lam_error_set_file(err, path);
        return st;
    }
    *out = p;
    return LAM_OK;
}

const lam_position *lam_positions_find(const lam_positions *p, const char *image_path)
{
    if (!p)
        return NULL;
    const char *b = base_name(image_path);
    for (size_t i = 0; i < p->count; i++)
        if (!strcmp(base_name(p->items[i].file), b))
            return &p->items[i];
    return NULL;
}

lam_status lam_catalog_init(lam_catalog *c)
{
    memset(c, 0, sizeof *c);
    return LAM_OK;
}

void lam_catalog_clear(lam_catalog *c)
{
    if (!c)
        return;
    free(c->entries);
    memset(c, 0, sizeof *c);
}

static double num(const cJSON *o, const char *k, double dflt)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, k);
    return cJSON_IsNumber(v) ? v->valuedouble : dflt;
}

static void arr(const cJSON *o, const char *k, double *out, int n, double dflt)
{
    const cJSON *a = cJSON_GetObjectItemCaseSensitive(o, k);
    for (int i = 0; i < n; i++) {
        const cJSON *v = cJSON_IsArray(a) ? cJSON_GetArrayItem(a, i) : NULL;
        out[i] = cJSON_IsNumber(v) ? v->valuedouble : dflt;
    }
}

lam_status lam_catalog_add(lam_catalog *c, const cJSON *an, const char *image_path,
                           const lam_position *pos, lam_error *err)
{
    const cJSON *regs = cJSON_GetObjectItemCaseSensitive(an, "regions");
    const cJSON *img = cJSON_GetObjectItemCaseSensitive(an, "image");
    if (!cJSON_IsArray(regs) || !cJSON_IsObject(img))
        return lam_error_set(err, LAM_EFORMAT, "not a lamina-analysis/1 result (no regions)");
    double W = num(img, "width", 0), H = num(img, "height", 0), u = num(img, "um_per_px", NAN);
    const cJSON *r;
    cJSON_ArrayForEach(r, regs) {
        if (c->count == c->cap) {
            size_t nc = c->cap ? 2 * c->cap : 256;
            lam_catalog_entry *ne = realloc(c->entries, nc * sizeof *ne);
            if (!ne)
                return lam_error_set(err, LAM_ENOMEM, "cannot grow the catalogue");
            c->entries = ne;
            c->cap = nc;
        }
        lam_catalog_entry *e = &c->entries[c->count];
        memset(e, 0, sizeof *e);
        snprintf(e->image, sizeof e->image, "%s", image_path);
        e->region = (unsigned)num(r, "id", 0);
        const cJSON *lab = cJSON_GetObjectItemCaseSensitive(r, "label");
        snprintf(e->label, sizeof e->label, "%s", cJSON_IsString(lab) ? lab->valuestring : "?");
        e->layers = (int)num(r, "layers", 0);
        const cJSON *p = cJSON_GetObjectItemCaseSensitive(r, "p_layers");
        char key[16];
        if (e->layers > 0)
            snprintf(key, sizeof key, "%d", e->layers);
        else
            snprintf(key, sizeof key, "thick");
        e->probability = num(p, key, 0);
        e->area_px = num(r, "area_px", 0);
        e->area_um2 = num(r, "area_um2", NAN);
        arr(r, "usable_rect_px", e->usable_px, 4, 0);
        arr(r, "usable_rect_um", e->usable_um, 2, NAN);
        arr(r, "centroid", e->centroid, 2, 0);
        arr(r, "bbox", e->bbox, 4, 0);
        const cJSON *fl = cJSON_GetObjectItemCaseSensitive(r, "flags"), *f;
        cJSON_ArrayForEach(f, fl) {
            if (!cJSON_IsString(f))
                continue;
            if (e->flags[0])
                strncat(e->flags, ";", sizeof e->flags - strlen(e->flags) - 1);
            strncat(e->flags, f->valuestring, sizeof e->flags - strlen(e->flags) - 1);
            if (!strcmp(f->valuestring, "small"))
                e->small = 1;
        }
        e->chip_um[0] = e->chip_um[1] = NAN;
        if (pos && isfinite(u)) {
            double dx = (e->centroid[0] - W / 2) * u, dy = (e->centroid[1] - H / 2) * u;
            double t = pos->rotation_deg * M_PI / 180, ct = cos(t), st = sin(t);
            e->chip_um[0] = pos->x_um + ct * dx - st * dy;
            e->chip_um[1] = pos->y_um + st * dx + ct * dy;
            e->chip_box[0] = e->chip_box[1] = INFINITY;
            e->chip_box[2] = e->chip_box[3] = -INFINITY;
            for (int k = 0; k < 4; k++) {
                double px = (k & 1 ? e->bbox[2] + 1 : e->bbox[0]) - W / 2;
                double py = (k & 2 ? e->bbox[3] + 1 : e->bbox[1]) - H / 2;
                double cx = pos->x_um + (ct * px - st * py) * u, cy = pos->y_um + (st * px + ct * py) * u;
                e->chip_box[0] = fmin(e->chip_box[0], cx), e->chip_box[2] = fmax(e->chip_box[2], cx);
                e->chip_box[1] = fmin(e->chip_box[1], cy), e->chip_box[3] = fmax(e->chip_box[3], cy);
            }
        }
        const char *label = e->label;
        e->rank = e->layers > 0 ? e->layers : (!strcmp(label, "thick") ? 100 : 101);
        c->count++;
    }
    return LAM_OK;
}

static int cmp_entries(const void *x, const void *y)
{
    const lam_catalog_entry *a = x, *b = y;
    if (a->rank != b->rank)
        return a->rank - b->rank;
    if (a->small != b->small)
        return a->small - b->small;
    double ua = a->usable_px[2] * a->usable_px[3], ub = b->usable_px[2] * b->usable_px[3];
    if (ua != ub)
        return ua < ub ? 1 : -1;
    int s = strcmp(a->image, b->image);
    if (s)
        return s;
    return a->region < b->region ? -1 : (a->region > b->region);
}

void lam_catalog_finish(lam_catalog *c)
{
    qsort(c->entries, c->count, sizeof *c->entries, cmp_entries);
    /* after sorting, the first of a pair has the larger usable rectangle */
    for (size_t i = 0; i < c->count; i++) {
        lam_catalog_entry *a = &c->entries[i];
        if (a->duplicate_of || !isfinite(a->chip_um[0]))
            continue;
        for (size_t j = i + 1; j < c->count; j++) {
            lam_catalog_entry *b = &c->entries[j];
            if (b->duplicate_of || b->rank != a->rank || !isfinite(b->chip_um[0]) ||
                !strcmp(a->image, b->image))
                continue;
            int b_in_a = b->chip_um[0] >= a->chip_box[0] && b->chip_um[0] <= a->chip_box[2] &&
                         b->chip_um[1] >= a->chip_box[1] && b->chip_um[1] <= a->chip_box[3];
            int a_in_b = a->chip_um[0] >= b->chip_box[0] && a->chip_um[0] <= b->chip_box[2] &&
                         a->chip_um[1] >= b->chip_box[1] && a->chip_um[1] <= b->chip_box[3];
            if ((b_in_a || a_in_b) && !strcmp(a->label, b->label))
                b->duplicate_of = (int)i + 1;
        }
    }
}

/* A CSV number with 'digits' decimals, or an empty field when unknown. */
static void csv_num(FILE *f, double v, int digits)
{
    if (isfinite(v))
        fprintf(f, "%.*f", digits, v);
    fputc(',', f);
}

lam_status lam_catalog_write(const lam_catalog *c, const char *dir, lam_error *err)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/catalog.csv", dir);
    lam_outfile of;
    lam_status st = lam_outfile_open(&of, path, err);
    if (st)
        return st;
    fprintf(of.fp, "image,region,label,layers,probability,area_px,area_um2,usable_w_um,usable_h_um,"
                   "centroid_x,centroid_y,chip_x_um,chip_y_um,flags,duplicate_of\n");
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "schema", "lamina-catalog/1");
    cJSON_AddStringToObject(root, "order", "monolayers by usable area, then bilayers, ..., thick, unassigned");
    cJSON *list = cJSON_AddArrayToObject(root, "regions");
    size_t rank = 0;
    for (size_t i = 0; i < c->count; i++) {
        const lam_catalog_entry *e = &c->entries[i];
        if (e->duplicate_of)
            continue;
        rank++;
        fprintf(of.fp, "%s,%u,%s,%d,%.4f,%.0f,", e->image, e->region, e->label, e->layers,
                e->probability, e->area_px);
        csv_num(of.fp, e->area_um2, 3);
        csv_num(of.fp, e->usable_um[0], 3);
        csv_num(of.fp, e->usable_um[1], 3);
        fprintf(of.fp, "%.1f,%.1f,", e->centroid[0], e->centroid[1]);
        csv_num(of.fp, e->chip_um[0], 2);
        csv_num(of.fp, e->chip_um[1], 2);
        fprintf(of.fp, "%s,\n", e->flags);
        cJSON *o = cJSON_CreateObject();
        cJSON_AddNumberToObject(o, "rank", (double)rank);
        cJSON_AddStringToObject(o, "image", e->image);
        cJSON_AddNumberToObject(o, "region", e->region);
        cJSON_AddStringToObject(o, "label", e->label);
        cJSON_AddItemToObject(o, "layers", e->layers > 0 ? cJSON_CreateNumber(e->layers) : cJSON_CreateNull());
        cJSON_AddNumberToObject(o, "probability", e->probability);
        cJSON_AddNumberToObject(o, "area_px", e->area_px);
        cJSON_AddItemToObject(o, "area_um2", isfinite(e->area_um2) ? cJSON_CreateNumber(e->area_um2) : cJSON_CreateNull());
        cJSON_AddItemToObject(o, "usable_rect_px", cJSON_CreateDoubleArray(e->usable_px, 4));
        cJSON_AddItemToObject(o, "usable_rect_um", isfinite(e->usable_um[0]) ? cJSON_CreateDoubleArray(e->usable_um, 2) : cJSON_CreateNull());
        cJSON_AddItemToObject(o, "centroid", cJSON_CreateDoubleArray(e->centroid, 2));
        cJSON_AddItemToObject(o, "chip_um", isfinite(e->chip_um[0]) ? cJSON_CreateDoubleArray(e->chip_um, 2) : cJSON_CreateNull());
        cJSON_AddStringToObject(o, "flags", e->flags);
        cJSON *also = cJSON_AddArrayToObject(o, "also_seen_in");
        for (size_t j = 0; j < c->count; j++)
            if (c->entries[j].duplicate_of == (int)i + 1) {
                char t[1100];
                snprintf(t, sizeof t, "%s#%u", c->entries[j].image, c->entries[j].region);
                cJSON_AddItemToArray(also, cJSON_CreateString(t));
            }
        cJSON_AddItemToArray(list, o);
    }
    if ((st = lam_outfile_commit(&of, err))) {
        cJSON_Delete(root);
        return st;
    }
    char *text = cJSON_Print(root);
    cJSON_Delete(root);
    if (!text)
        return lam_error_set(err, LAM_ENOMEM, "cannot format the catalogue");
    snprintf(path, sizeof path, "%s/catalog.json", dir);
    st = lam_outfile_write_buffer(path, text, strlen(text), err);
    free(text);
    return st;
}

/* Contact sheet: up to max_items crops of 240x240 px (the region's box
 * with a margin, scaled to fit), 4 per row, each labelled. */
lam_status lam_catalog_contact_sheet(const lam_catalog *c, const char *path, size_t max_items,
                                     lam_error *err)
{
    enum { CELL = 240, PAD = 8, LABEL = 18, COLS = 4 };
    size_t items = 0;
    for (size_t i = 0; i < c->count && items < max_items; i++)
        if (!c->entries[i].duplicate_of && c->entries[i].layers > 0 && !c->entries[i].small)
            items++;
    if (!items)
        items = 1;
    size_t rows = (items + COLS - 1) / COLS;
    size_t W = COLS * (CELL + PAD) + PAD, H = rows * (CELL + LABEL + PAD) + PAD;
    uint8_t *sheet = malloc(W * H * 3);
    if (!sheet)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the contact sheet");
    memset(sheet, 40, W * H * 3);
    lam_transfer srgb = {LAM_TRANSFER_SRGB, 0};
    uint8_t lut[4097];
    for (int i = 0; i <= 4096; i++)
        lut[i] = (uint8_t)lround(255.0 * lam_transfer_encode(&srgb, i / 4096.0));
    lam_image *img = NULL;
    char loaded[1024] = "";
    size_t k = 0;
    static const uint8_t white[3] = {255, 255, 255}, gold[3] = {255, 214, 0};
    lam_status st = LAM_OK;
    for (size_t i = 0; i < c->count && k < max_items; i++) {
        const lam_catalog_entry *e = &c->entries[i];
        if (e->duplicate_of || e->layers <= 0 || e->small)
            continue;
        if (strcmp(loaded, e->image)) {
            lam_image_free(img);
            img = NULL;
            lam_error e2;
            lam_error_clear(&e2);
            if (lam_image_load(e->image, NULL, &img, &e2) != LAM_OK) {
                loaded[0] = '\0';
                continue; /* the image moved: leave its cell empty */
            }
            snprintf(loaded, sizeof loaded, "%s", e->image);
        }
        size_t cx = PAD + (k % COLS) * (CELL + PAD), cy = PAD + (k / COLS) * (CELL + LABEL + PAD);
        double x0 = e->bbox[0], y0 = e->bbox[1], x1 = e->bbox[2], y1 = e->bbox[3];
        double side = fmax(x1 - x0, y1 - y0) * 1.3 + 8, mx = 0.5 * (x0 + x1), my = 0.5 * (y0 + y1);
        double scale = side / CELL;
        for (size_t y = 0; y < CELL; y++)
            for (size_t x = 0; x < CELL; x++) {
                long sx = (long)(mx - side / 2 + ((double)x + 0.5) * scale);
                long sy = (long)(my - side / 2 + ((double)y + 0.5) * scale);
                uint8_t *d = sheet + ((cy + y) * W + cx + x) * 3;
                if (sx < 0 || sy < 0 || (size_t)sx >= img->width || (size_t)sy >= img->height)
                    continue;
                size_t s = (size_t)sy * img->width + (size_t)sx;
                for (int ch = 0; ch < 3; ch++) {
                    float v = img->plane[ch][s];
                    d[ch] = lut[v <= 0 ? 0 : (v >= 1 ? 4096 : (int)(v * 4096.0f + 0.5f))];
                }
            }
        char text[160];
        snprintf(text, sizeof text, "%zu. %s #%u %.60s", k + 1, e->label, e->region,
                 base_name(e->image));
        (void)text;
        k++;
    }
    lam_image_free(img);
    st = lam_png_save_rgb8(path, sheet, W, H, 3, err);
    free(sheet);
    return st;
}
