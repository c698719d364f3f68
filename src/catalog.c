/* catalog.c - catalogue of regions over many images: ranking, chip
 * coordinates from stage positions, duplicates in overlapping tiles, and
 * the catalogue files (CSV and JSON of one schema, goto.csv). */
#include "lamina/catalog.h"
#include "lamina/jsonfile.h"
#include "lamina/outfile.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

static const char *base_name(const char *path)
{
    const char *b = strrchr(path, '/');
    return b ? b + 1 : path;
}

lam_status lam_catalog_init(lam_catalog *c)
{
    memset(c, 0, sizeof *c);
    c->stage = lam_stage_default();
    c->target_nm[0] = c->target_nm[1] = NAN;
    return LAM_OK;
}

void lam_catalog_set_target(lam_catalog *c, double lo_nm, double hi_nm)
{
    c->target_nm[0] = lo_nm;
    c->target_nm[1] = hi_nm;
}

/* A region's thickness (hBN) and its rank against the target: 0 inside
 * (one order), 99 outside (after the layer counts, before "thick"). */
static void read_thickness(const lam_catalog *c, const cJSON *r, lam_catalog_entry *e)
{
    const cJSON *t = cJSON_GetObjectItemCaseSensitive(r, "thickness_nm");
    e->thickness_nm[0] = lam_json_number_or(t, "estimate", NAN);
    e->thickness_nm[1] = lam_json_number_or(t, "lo", NAN);
    e->thickness_nm[2] = lam_json_number_or(t, "hi", NAN);
    e->target_distance = NAN;
    double d = e->thickness_nm[0], lo = c->target_nm[0], hi = c->target_nm[1];
    if (!isfinite(d) || !isfinite(lo) || strcmp(e->class_, "thickness"))
        return;
    e->target_distance = d < lo ? log(lo / d) : d > hi ? log(d / hi) : 0;
    const cJSON *amb = cJSON_GetObjectItemCaseSensitive(t, "order_ambiguous");
    e->rank = e->target_distance == 0 && !cJSON_IsTrue(amb) ? 0 : 99;
}

void lam_catalog_clear(lam_catalog *c)
{
    if (!c)
        return;
    free(c->entries);
    free(c->images);
    memset(c, 0, sizeof *c);
}

void lam_catalog_set_stage(lam_catalog *c, const lam_positions *p, const lam_stage *stage)
{
    c->positions = p;
    c->stage = stage ? *stage : lam_stage_default();
}

static void arr(const cJSON *o, const char *k, double *out, int n, double dflt)
{
    const cJSON *a = cJSON_GetObjectItemCaseSensitive(o, k);
    for (int i = 0; i < n; i++) {
        const cJSON *v = cJSON_IsArray(a) ? cJSON_GetArrayItem(a, i) : NULL;
        out[i] = cJSON_IsNumber(v) ? v->valuedouble : dflt;
    }
}

static void append(char *dst, size_t n, const char *item)
{
    size_t len = strlen(dst);
    if (len && len + 1 < n)
        dst[len++] = ';', dst[len] = '\0';
    snprintf(dst + len, n - len, "%s", item);
}

static const char *str(const cJSON *o, const char *k)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, k);
    return cJSON_IsString(v) ? v->valuestring : NULL;
}

/* The class and probability of a region: the analysis's own "class" and
 * "p_label" when it has them, else derived from the label, flags and
 * posteriors (for a region not assigned a layer count: 1 - the largest
 * posterior of any layer count or thick, i.e. how likely it is none). */
static void classify(const cJSON *r, lam_catalog_entry *e)
{
    const cJSON *p = cJSON_GetObjectItemCaseSensitive(r, "p_layers"), *v;
    const char *cls = str(r, "class");
    int unmodelled = strstr(e->flags, "unmodelled") || strstr(e->flags, "saturated");
    if (cls)
        snprintf(e->class_, sizeof e->class_, "%s", cls);
    else
        snprintf(e->class_, sizeof e->class_, "%s",
                 e->layers > 0 ? "layers" : !strcmp(e->label, "thick") ? "thick"
                 : unmodelled ? "unmodelled" : "ambiguous");
    if (strcmp(e->class_, "layers"))
        e->layers = 0; /* a count is only given for the "layers" class */
    double pl = lam_json_number_or(r, "p_label", NAN);
    if (isfinite(pl)) {
        e->probability = pl;
        return;
    }
    char key[16];
    snprintf(key, sizeof key, "%d", e->layers);
    if (e->layers > 0 || !strcmp(e->label, "thick")) {
        e->probability = lam_json_number_or(p, e->layers > 0 ? key : "thick", 0);
        return;
    }
    double best = 0;
    cJSON_ArrayForEach(v, p)
        if (cJSON_IsNumber(v) && strcmp(v->string, "0"))
            best = fmax(best, v->valuedouble);
    e->probability = 1 - best;
}

static lam_status grow(void **items, size_t *cap, size_t count, size_t size, lam_error *err)
{
    if (count < *cap)
        return LAM_OK;
    size_t nc = *cap ? 2 * *cap : 64;
    void *n = realloc(*items, nc * size);
    if (!n)
        return lam_error_set(err, LAM_ENOMEM, "cannot grow the catalogue");
    *items = n;
    *cap = nc;
    return LAM_OK;
}

static lam_status add_image(lam_catalog *c, const cJSON *an, const char *path,
                            const lam_position *pos, lam_error *err)
{
    lam_status st = grow((void **)&c->images, &c->cap_images, c->n_images, sizeof *c->images, err);
    if (st)
        return st;
    lam_catalog_image *im = &c->images[c->n_images];
    memset(im, 0, sizeof *im);
    const cJSON *img = cJSON_GetObjectItemCaseSensitive(an, "image");
    snprintf(im->path, sizeof im->path, "%s", path);
    snprintf(im->results, sizeof im->results, "%s", c->results);
    snprintf(im->stem, sizeof im->stem, "%s", base_name(path));
    char *dot = strrchr(im->stem, '.');
    if (dot && dot != im->stem)
        *dot = '\0';
    const char *pic = str(cJSON_GetObjectItemCaseSensitive(an, "outputs"), "annotated");
    if (pic && pic[0] && !strchr(pic, '/')) /* a name in the results folder, nothing else */
        snprintf(im->annotated, sizeof im->annotated, "%s", pic);
    else
        snprintf(im->annotated, sizeof im->annotated, "%s.annotated.png", im->stem);
    im->width = lam_json_number_or(img, "width", 0), im->height = lam_json_number_or(img, "height", 0);
    im->um_per_px = lam_json_number_or(img, "um_per_px", NAN);
    const cJSON *ox = cJSON_GetObjectItemCaseSensitive(
        cJSON_GetObjectItemCaseSensitive(an, "substrate"), "oxide_nm");
    double est = lam_json_number_or(ox, "estimate", NAN);
    im->oxide_fitted = isfinite(est);
    im->oxide_nm = isfinite(est) ? est : lam_json_number_or(ox, "nominal", NAN);
    im->pos = pos;
    const cJSON *w, *warns = cJSON_GetObjectItemCaseSensitive(an, "warnings");
    cJSON_ArrayForEach(w, warns) {
        const char *m = cJSON_IsString(w) ? w->valuestring : str(w, "message");
        const char *code = str(w, "code");
        if (m)
            append(im->warnings, sizeof im->warnings, m);
        if (code)
            append(im->warning_codes, sizeof im->warning_codes, code);
    }
    if (c->positions && !pos)
    {
        append(im->warnings, sizeof im->warnings, "not in the positions file");
        append(im->own_warnings, sizeof im->own_warnings, "not in the positions file");
    }
    c->n_images++;
    return LAM_OK;
}

static void read_entry(const lam_catalog *c, const cJSON *r, lam_catalog_entry *e)
{
    e->region = (unsigned)lam_json_number_or(r, "id", 0);
    const char *lab = str(r, "label");
    snprintf(e->label, sizeof e->label, "%s", lab ? lab : "unassigned");
    e->layers = (int)lam_json_number_or(r, "layers", 0);
    e->area_px = lam_json_number_or(r, "area_px", 0);
    e->area_um2 = lam_json_number_or(r, "area_um2", NAN);
    double u[4];
    arr(r, "usable_rect_px", u, 4, 0); /* the analysis gives x, y, w, h */
    e->usable[0] = u[0], e->usable[1] = u[1];
    e->usable[2] = u[0] + u[2] - 1, e->usable[3] = u[1] + u[3] - 1;
    arr(r, "usable_rect_um", e->usable_um, 2, NAN);
    arr(r, "centroid", e->centroid, 2, 0);
    arr(r, "bbox", e->bbox, 4, 0);
    const cJSON *f, *fl = cJSON_GetObjectItemCaseSensitive(r, "flags");
    cJSON_ArrayForEach(f, fl)
        if (cJSON_IsString(f)) {
            append(e->flags, sizeof e->flags, f->valuestring);
            e->small |= !strcmp(f->valuestring, "small");
        }
    classify(r, e);
    e->rank = e->layers > 0 ? e->layers : !strcmp(e->class_, "thick") ? 100 : 101;
    read_thickness(c, r, e);
    e->stage_um[0] = e->stage_um[1] = e->chip_um[0] = e->chip_um[1] = NAN;
}

lam_status lam_catalog_add(lam_catalog *c, const cJSON *an, const char *image_path,
                           const lam_position *pos, lam_error *err)
{
    const cJSON *regs = cJSON_GetObjectItemCaseSensitive(an, "regions"), *r;
    if (!cJSON_IsArray(regs) || !cJSON_IsObject(cJSON_GetObjectItemCaseSensitive(an, "image")))
        return lam_error_set(err, LAM_EFORMAT, "not a lamina-analysis/1 result (no regions)");
    lam_status st = add_image(c, an, image_path, pos, err);
    if (st)
        return st;
    lam_catalog_image *im = &c->images[c->n_images - 1];
    cJSON_ArrayForEach(r, regs) {
        if ((st = grow((void **)&c->entries, &c->cap, c->count, sizeof *c->entries, err)))
            return st;
        lam_catalog_entry *e = &c->entries[c->count];
        memset(e, 0, sizeof *e);
        e->image = c->n_images - 1;
        read_entry(c, r, e);
        im->regions++;
        c->count++;
    }
    return LAM_OK;
}

static int cmp_entries(const void *x, const void *y, void *ctx)
{
    const lam_catalog_entry *a = x, *b = y;
    const lam_catalog *c = ctx;
    if (a->rank != b->rank)
        return a->rank - b->rank;
    if (a->small != b->small)
        return a->small - b->small;
    if (a->rank == 99 && a->target_distance != b->target_distance)
        return a->target_distance < b->target_distance ? -1 : 1;
    double ua = (a->usable[2] - a->usable[0] + 1) * (a->usable[3] - a->usable[1] + 1);
    double ub = (b->usable[2] - b->usable[0] + 1) * (b->usable[3] - b->usable[1] + 1);
    if (ua != ub)
        return ua < ub ? 1 : -1;
    int s = strcmp(c->images[a->image].path, c->images[b->image].path);
    if (s)
        return s;
    return a->region < b->region ? -1 : (a->region > b->region);
}

/* Sort by cmp_entries: a bottom-up merge sort (stable, needs the
 * catalogue as context, which qsort cannot pass). */
static lam_status sort_entries(lam_catalog *c, lam_error *err)
{
    lam_catalog_entry *tmp = malloc((c->count ? c->count : 1) * sizeof *tmp);
    if (!tmp)
        return lam_error_set(err, LAM_ENOMEM, "cannot sort the catalogue");
    /* merge sort: deterministic and O(n log n) */
    for (size_t width = 1; width < c->count; width *= 2) {
        for (size_t lo = 0; lo < c->count; lo += 2 * width) {
            size_t mid = lo + width < c->count ? lo + width : c->count;
            size_t hi = lo + 2 * width < c->count ? lo + 2 * width : c->count;
            size_t i = lo, j = mid, k = lo;
            while (i < mid && j < hi)
                tmp[k++] = cmp_entries(&c->entries[j], &c->entries[i], c) < 0 ? c->entries[j++]
                                                                              : c->entries[i++];
            while (i < mid)
                tmp[k++] = c->entries[i++];
            while (j < hi)
                tmp[k++] = c->entries[j++];
        }
        memcpy(c->entries, tmp, c->count * sizeof *tmp);
    }
    free(tmp);
    return LAM_OK;
}

/* Stage readings, chip coordinates and chip boxes of every entry. */
static void place_entries(lam_catalog *c)
{
    for (size_t i = 0; i < c->count; i++) {
        lam_catalog_entry *e = &c->entries[i];
        const lam_catalog_image *im = &c->images[e->image];
        if (!im->pos || !(im->um_per_px > 0))
            continue;
        lam_stage_reading(&c->stage, im->pos, im->width, im->height, im->um_per_px,
                          e->centroid[0], e->centroid[1], e->stage_um);
        lam_stage_chip(&c->stage, e->stage_um, e->chip_um);
        e->chip_box[0] = e->chip_box[1] = INFINITY;
        e->chip_box[2] = e->chip_box[3] = -INFINITY;
        for (int k = 0; k < 4; k++) {
            double rd[2], ch[2];
            lam_stage_reading(&c->stage, im->pos, im->width, im->height, im->um_per_px,
                              (k & 1 ? e->bbox[2] + 0.5 : e->bbox[0] - 0.5),
                              (k & 2 ? e->bbox[3] + 0.5 : e->bbox[1] - 0.5), rd);
            lam_stage_chip(&c->stage, rd, ch);
            for (int d = 0; d < 2; d++) {
                e->chip_box[d] = fmin(e->chip_box[d], ch[d]);
                e->chip_box[d + 2] = fmax(e->chip_box[d + 2], ch[d]);
            }
        }
    }
}

static lam_status resolve_origin(lam_catalog *c, lam_error *err)
{
    double w = 0, h = 0, u = 0;
    if (c->stage.origin_kind == 2)
        for (size_t k = 0; k < c->n_images; k++)
            if (!strcmp(base_name(c->images[k].path), base_name(c->stage.origin_tile)))
                w = c->images[k].width, h = c->images[k].height, u = c->images[k].um_per_px;
    if (c->stage.origin_kind == 2 && !(u > 0))
        return lam_error_set(err, LAM_EINVAL, "stage origin: tile %s was not analysed (or has "
                                              "no pixel size)", c->stage.origin_tile);
    return lam_stage_resolve(&c->stage, c->positions, w, h, u, err);
}

static int inside(const double p[2], const double box[4])
{
    return p[0] >= box[0] && p[0] <= box[2] && p[1] >= box[1] && p[1] <= box[3];
}

lam_status lam_catalog_finish(lam_catalog *c, lam_error *err)
{
    lam_status st = LAM_OK;
    if (c->positions && (st = resolve_origin(c, err)))
        return st;
    place_entries(c);
    if ((st = sort_entries(c, err)))
        return st;
    for (size_t k = 0; k < c->n_images; k++)
        c->images[k].candidates = 0;
    /* after sorting, the first of a pair has the larger usable rectangle */
    for (size_t i = 0; i < c->count; i++) {
        lam_catalog_entry *a = &c->entries[i];
        if (a->duplicate_of || !isfinite(a->chip_um[0]))
            continue;
        for (size_t j = i + 1; j < c->count; j++) {
            lam_catalog_entry *b = &c->entries[j];
            if (b->duplicate_of || b->rank != a->rank || !isfinite(b->chip_um[0]) ||
                b->image == a->image || strcmp(a->label, b->label))
                continue;
            if (inside(b->chip_um, a->chip_box) || inside(a->chip_um, b->chip_box))
                b->duplicate_of = i + 1;
        }
    }
    for (size_t i = 0; i < c->count; i++)
        if (lam_catalog_is_candidate(c, i))
            c->images[c->entries[i].image].candidates++;
    return LAM_OK;
}

int lam_catalog_is_candidate(const lam_catalog *c, size_t i)
{
    const lam_catalog_entry *e = &c->entries[i];
    return (e->layers > 0 || e->rank == 0) && !e->small && !e->duplicate_of;
}

const char *lam_catalog_image_warnings(const lam_catalog *c, size_t image)
{
    return c->images[image].warnings;
}

size_t lam_catalog_rank(const lam_catalog *c, size_t i)
{
    while (c->entries[i].duplicate_of)
        i = c->entries[i].duplicate_of - 1;
    size_t r = 0;
    for (size_t k = 0; k <= i; k++)
        r += !c->entries[k].duplicate_of;
    return r;
}
