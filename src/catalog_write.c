/* catalog_write.c - the catalogue files: catalog.csv and catalog.json of
 * one schema (docs/catalog.md) and goto.csv in the stage's convention. */
#include "lamina/catalog.h"
#include "lamina/outfile.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

/* The columns, in order; CSV header and JSON keys alike. */
static const char *const columns[] = {
    "rank", "image", "region", "label", "class", "layers", "probability", "area_px",
    "area_um2", "bbox_px", "usable_rect_px", "usable_w_um", "usable_h_um", "centroid_x_px",
    "centroid_y_px", "chip_x_um", "chip_y_um", "flags", "also_seen_in", "thickness_nm",
    "thickness_interval_nm"};
#define NCOL (sizeof columns / sizeof columns[0])

/* A CSV field, quoted (RFC 4180) when it holds a comma, quote or newline. */
static void csv_text(FILE *f, const char *t)
{
    if (!strpbrk(t, ",\"\r\n")) {
        fputs(t, f);
        return;
    }
    fputc('"', f);
    for (; *t; t++) {
        if (*t == '"')
            fputc('"', f);
        fputc(*t, f);
    }
    fputc('"', f);
}

/* Numbers: shortest form that round-trips the value as printed in JSON. */
static void fmt_num(double v, int digits, char *out, size_t n)
{
    if (!isfinite(v))
        out[0] = '\0';
    else
        snprintf(out, n, "%.*f", digits, v);
}

typedef struct row {
    char v[NCOL][1100];
    int is_list[NCOL], is_num[NCOL];
} row;

static void list_of(char *out, size_t n, const double *v, int count, int digits)
{
    out[0] = '\0';
    for (int k = 0; k < count; k++) {
        char t[64];
        fmt_num(v[k], digits, t, sizeof t);
        size_t len = strlen(out);
        snprintf(out + len, n - len, "%s%s", k ? ";" : "", t);
    }
}

/* One row's values as text (lists ';'-joined, unknown empty). */
static void make_row(const lam_catalog *c, size_t i, size_t rank, row *r)
{
    const lam_catalog_entry *e = &c->entries[i];
    memset(r->is_list, 0, sizeof r->is_list);
    memset(r->is_num, 0, sizeof r->is_num);
    for (size_t k = 0; k < NCOL; k++)
        r->is_num[k] = k == 0 || k == 2 || (k >= 5 && k <= 8) || (k >= 11 && k <= 16) || k == 19;
    r->is_list[9] = r->is_list[10] = r->is_list[17] = r->is_list[18] = r->is_list[20] = 1;
    snprintf(r->v[0], sizeof r->v[0], "%zu", rank);
    snprintf(r->v[1], sizeof r->v[1], "%s", c->images[e->image].path);
    snprintf(r->v[2], sizeof r->v[2], "%u", e->region);
    snprintf(r->v[3], sizeof r->v[3], "%s", e->label);
    snprintf(r->v[4], sizeof r->v[4], "%s", e->class_);
    fmt_num(e->layers > 0 ? e->layers : NAN, 0, r->v[5], sizeof r->v[5]);
    fmt_num(e->probability, 4, r->v[6], sizeof r->v[6]);
    fmt_num(e->area_px, 0, r->v[7], sizeof r->v[7]);
    fmt_num(e->area_um2, 3, r->v[8], sizeof r->v[8]);
    list_of(r->v[9], sizeof r->v[9], e->bbox, 4, 0);
    if (e->usable[2] >= e->usable[0])
        list_of(r->v[10], sizeof r->v[10], e->usable, 4, 0);
    else
        r->v[10][0] = '\0';
    fmt_num(e->usable_um[0], 3, r->v[11], sizeof r->v[11]);
    fmt_num(e->usable_um[1], 3, r->v[12], sizeof r->v[12]);
    fmt_num(e->centroid[0], 1, r->v[13], sizeof r->v[13]);
    fmt_num(e->centroid[1], 1, r->v[14], sizeof r->v[14]);
    fmt_num(e->chip_um[0], 2, r->v[15], sizeof r->v[15]);
    fmt_num(e->chip_um[1], 2, r->v[16], sizeof r->v[16]);
    snprintf(r->v[17], sizeof r->v[17], "%s", e->flags);
    fmt_num(e->thickness_nm[0], 3, r->v[19], sizeof r->v[19]);
    r->v[20][0] = '\0';
    if (isfinite(e->thickness_nm[1]))
        list_of(r->v[20], sizeof r->v[20], e->thickness_nm + 1, 2, 3);
    r->v[18][0] = '\0';
    for (size_t j = 0; j < c->count; j++)
        if (c->entries[j].duplicate_of == i + 1) {
            size_t len = strlen(r->v[18]);
            snprintf(r->v[18] + len, sizeof r->v[18] - len, "%s%s#%u", len ? ";" : "",
                     c->images[c->entries[j].image].path, c->entries[j].region);
        }
}

/* The same row as a JSON object: numbers as numbers, empty as null, lists
 * as arrays (of numbers for boxes, of strings otherwise). */
static cJSON *json_row(const row *r)
{
    cJSON *o = cJSON_CreateObject();
    for (size_t k = 0; k < NCOL; k++) {
        const char *t = r->v[k];
        cJSON *item;
        if (r->is_list[k]) {
            item = cJSON_CreateArray();
            char buf[1100];
            snprintf(buf, sizeof buf, "%s", t);
            for (char *save = NULL, *tok = strtok_r(buf, ";", &save); tok;
                 tok = strtok_r(NULL, ";", &save))
                cJSON_AddItemToArray(item, k == 9 || k == 10 || k == 20
                                               ? cJSON_CreateNumber(atof(tok))
                                               : cJSON_CreateString(tok));
            if ((k == 10 || k == 20) && !t[0]) {
                cJSON_Delete(item);
                item = cJSON_CreateNull();
            }
        } else if (!t[0]) {
            item = cJSON_CreateNull();
        } else if (r->is_num[k]) {
            item = cJSON_CreateNumber(atof(t));
        } else {
            item = cJSON_CreateString(t);
        }
        cJSON_AddItemToObject(o, columns[k], item);
    }
    return o;
}

/* Images' warnings in the order of their paths, so that a catalogue merged
 * from shards equals the one of a single run. */
static const lam_catalog *sort_cat;
static int by_path(const void *a, const void *b)
{
    return strcmp(sort_cat->images[*(const size_t *)a].path,
                  sort_cat->images[*(const size_t *)b].path);
}

static void add_image_warnings(cJSON *root, const lam_catalog *c)
{
    cJSON *w = cJSON_AddArrayToObject(root, "warnings");
    size_t *order = malloc((c->n_images ? c->n_images : 1) * sizeof *order);
    if (!order)
        return;
    for (size_t k = 0; k < c->n_images; k++)
        order[k] = k;
    sort_cat = c;
    qsort(order, c->n_images, sizeof *order, by_path);
    for (size_t i = 0; i < c->n_images; i++) {
        const lam_catalog_image *im = &c->images[order[i]];
        if (im->warnings[0]) {
            char t[3200];
            snprintf(t, sizeof t, "%s: %s", im->path, im->warnings);
            cJSON_AddItemToArray(w, cJSON_CreateString(t));
        }
    }
    free(order);
}

static cJSON *json_header(const lam_catalog *c)
{
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "schema", "lamina-catalog/2");
    cJSON_AddStringToObject(root, "order", "monolayers by usable area, then bilayers, ..., thick, "
                                           "the rest; small regions after the others");
    cJSON_AddStringToObject(root, "documentation", "docs/catalog.md");
    cJSON *cols = cJSON_AddArrayToObject(root, "columns");
    for (size_t k = 0; k < NCOL; k++)
        cJSON_AddItemToArray(cols, cJSON_CreateString(columns[k]));
    if (c->positions) { /* what `lamina map` needs to redraw the chip from the folder */
        const lam_stage *st = &c->stage;
        cJSON *o = cJSON_AddObjectToObject(root, "stage");
        cJSON_AddStringToObject(o, "positions", c->positions->path);
        char axes[32];
        snprintf(axes, sizeof axes, "%s,%s", st->x_sign > 0 ? "right" : "left",
                 st->y_sign > 0 ? "down" : "up");
        cJSON_AddStringToObject(o, "axes", axes);
        cJSON_AddStringToObject(o, "units", lam_stage_unit_name(st, c->positions));
        cJSON_AddNumberToObject(o, "rotation_deg", st->rotation_deg);
        cJSON_AddItemToObject(o, "origin", st->origin_kind ? cJSON_CreateString(st->origin_text)
                                                          : cJSON_CreateNull());
    }
    add_image_warnings(root, c);
    return root;
}

static lam_status write_json(cJSON *root, const char *dir, lam_error *err)
{
    char *text = cJSON_Print(root);
    if (!text)
        return lam_error_set(err, LAM_ENOMEM, "cannot format the catalogue");
    char path[4096];
    snprintf(path, sizeof path, "%s/catalog.json", dir);
    size_t n = strlen(text);
    text[n] = '\n';
    lam_status st = lam_outfile_write_buffer(path, text, n + 1, err);
    free(text);
    return st;
}

/* goto.csv: candidates with their stage readings, in the stage's unit. */
static lam_status write_goto(const lam_catalog *c, const char *dir, lam_error *err)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/goto.csv", dir);
    lam_outfile of;
    lam_status st = lam_outfile_open(&of, path, err);
    if (st)
        return st;
    const char *u = lam_stage_unit_name(&c->stage, c->positions);
    double unit = lam_stage_unit_um(&c->stage, c->positions);
    int digits = unit > 1 ? 4 : 1;
    fprintf(of.fp, "rank,image,region,label,probability,area_um2,stage_x_%s,stage_y_%s,"
                   "chip_x_%s,chip_y_%s\n", u, u, u, u);
    size_t rank = 0;
    for (size_t i = 0; i < c->count; i++) {
        const lam_catalog_entry *e = &c->entries[i];
        if (e->duplicate_of)
            continue;
        rank++;
        if (!lam_catalog_is_candidate(c, i) || !isfinite(e->stage_um[0]))
            continue;
        fprintf(of.fp, "%zu,", rank);
        csv_text(of.fp, c->images[e->image].path);
        fprintf(of.fp, ",%u,%s,%.4f,", e->region, e->label, e->probability);
        if (isfinite(e->area_um2))
            fprintf(of.fp, "%.3f", e->area_um2);
        fprintf(of.fp, ",%.*f,%.*f,%.*f,%.*f\n", digits, e->stage_um[0] / unit, digits,
                e->stage_um[1] / unit, digits, e->chip_um[0] / unit, digits, e->chip_um[1] / unit);
    }
    return lam_outfile_commit(&of, err);
}

lam_status lam_catalog_write(const lam_catalog *c, const char *dir, lam_error *err)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/catalog.csv", dir);
    lam_outfile of;
    row *r = malloc(sizeof *r);
    cJSON *root = json_header(c);
    if (!r || !root) {
        free(r);
        cJSON_Delete(root);
        return lam_error_set(err, LAM_ENOMEM, "cannot format the catalogue");
    }
    lam_status st = lam_outfile_open(&of, path, err);
    if (st) {
        free(r);
        cJSON_Delete(root);
        return st;
    }
    for (size_t k = 0; k < NCOL; k++)
        fprintf(of.fp, "%s%s", k ? "," : "", columns[k]);
    fputc('\n', of.fp);
    cJSON *list = cJSON_AddArrayToObject(root, "regions");
    size_t rank = 0;
    for (size_t i = 0; i < c->count; i++) {
        if (c->entries[i].duplicate_of)
            continue;
        make_row(c, i, ++rank, r);
        for (size_t k = 0; k < NCOL; k++) {
            if (k)
                fputc(',', of.fp);
            csv_text(of.fp, r->v[k]);
        }
        fputc('\n', of.fp);
        cJSON_AddItemToArray(list, json_row(r));
    }
    free(r);
    if (!(st = lam_outfile_commit(&of, err)))
        st = write_json(root, dir, err);
    cJSON_Delete(root);
    if (!st && c->positions)
        st = write_goto(c, dir, err);
    return st;
}
