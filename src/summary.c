/* summary.c - the text the command line shows for batches and watched
 * images (lamina/summary.h), written into a memory stream. */
#include "lamina/summary.h"
#include "summary_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

lam_status lam__text_open(lam__text *t, lam_error *err)
{
    t->buf = NULL;
    t->len = 0;
    if (!(t->f = open_memstream(&t->buf, &t->len)))
        return lam_error_set(err, LAM_ENOMEM, "cannot open a text stream");
    return LAM_OK;
}

lam_status lam__text_close(lam__text *t, char **out, lam_error *err)
{
    int bad = ferror(t->f);
    if (fclose(t->f) || bad || !t->buf) {
        free(t->buf);
        return lam_error_set(err, LAM_ENOMEM, "cannot hold the text");
    }
    *out = t->buf;
    return LAM_OK;
}

/* ---- the batch table, from each image's JSON (as written, or as kept by
 * --resume: the table is the same either way) ---- */

static double num(const cJSON *o, const char *k)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, k);
    return cJSON_IsNumber(v) ? v->valuedouble : NAN;
}

static int has_flag(const cJSON *region, const char *flag)
{
    const cJSON *f;
    cJSON_ArrayForEach(f, cJSON_GetObjectItemCaseSensitive(region, "flags"))
        if (cJSON_IsString(f) && !strcmp(f->valuestring, flag))
            return 1;
    return 0;
}

/* The oxide column: the fitted value, or the nominal one in brackets (a
 * nominal value is never shown as if it were measured). */
static void oxide_cell(const cJSON *root, char *out, size_t n)
{
    const cJSON *ox = cJSON_GetObjectItemCaseSensitive(
        cJSON_GetObjectItemCaseSensitive(root, "substrate"), "oxide_nm");
    double est = num(ox, "estimate"), nom = num(ox, "nominal");
    if (isfinite(est))
        snprintf(out, n, "%.1f", est);
    else if (isfinite(nom) && nom >= 0) /* < 0: a stack without SiO2 */
        snprintf(out, n, "(%.0f)", nom);
    else
        snprintf(out, n, "-");
}

static void print_counts(FILE *f, const lam_batch *b, int *any_warning)
{
    fprintf(f, "%-28s %7s %4s %4s %4s %5s %6s %5s\n", "image", "oxide", "1L", "2L", "3L", "4L+",
            "thick", "other");
    for (size_t i = 0; i < b->count; i++) {
        const lam_batch_item *j = &b->items[i];
        if (j->failed || !j->json) {
            fprintf(f, "%-28.28s failed\n", j->stem);
            continue;
        }
        size_t by[5] = {0}, thick = 0, other = 0;
        const cJSON *r;
        cJSON_ArrayForEach(r, cJSON_GetObjectItemCaseSensitive(j->json, "regions")) {
            if (has_flag(r, "small"))
                continue;
            double L = num(r, "layers");
            const cJSON *lab = cJSON_GetObjectItemCaseSensitive(r, "label");
            const cJSON *cls = cJSON_GetObjectItemCaseSensitive(r, "class");
            if (L >= 1)
                by[L < 4 ? (int)L : 4]++;
            else if ((cJSON_IsString(lab) && !strcmp(lab->valuestring, "thick")) ||
                     (cJSON_IsString(cls) && !strcmp(cls->valuestring, "thickness")))
                thick++; /* hBN: a region with a thickness */
            else
                other++;
        }
        char ox[24], name[40];
        oxide_cell(j->json, ox, sizeof ox);
        int warned = cJSON_GetArraySize(cJSON_GetObjectItemCaseSensitive(j->json, "warnings")) > 0;
        *any_warning |= warned;
        snprintf(name, sizeof name, "%.26s%s", j->stem, warned ? " !" : "");
        fprintf(f, "%-28.28s %7s %4zu %4zu %4zu %5zu %6zu %5zu%s\n", name, ox, by[1], by[2], by[3],
                by[4], thick, other, j->resumed ? "  (kept)" : "");
    }
}

/* One monolayer candidate's line: area, usable rectangle, and where it is
 * (the stage reading that centres it, or its centroid in pixels). */
static void print_candidate(FILE *f, const lam_batch_item *j, const cJSON *r,
                            const lam_positions *pos, const lam_stage *stage)
{
    const cJSON *img = cJSON_GetObjectItemCaseSensitive(j->json, "image");
    double u = num(img, "um_per_px"), w = num(img, "width"), h = num(img, "height");
    const cJSON *rect = cJSON_GetObjectItemCaseSensitive(r, "usable_rect_px");
    const cJSON *cen = cJSON_GetObjectItemCaseSensitive(r, "centroid");
    double rw = cJSON_GetNumberValue(cJSON_GetArrayItem(rect, 2));
    double rh = cJSON_GetNumberValue(cJSON_GetArrayItem(rect, 3));
    double xy[2] = {cJSON_GetNumberValue(cJSON_GetArrayItem(cen, 0)),
                    cJSON_GetNumberValue(cJSON_GetArrayItem(cen, 1))};
    double p1 = num(cJSON_GetObjectItemCaseSensitive(r, "p_layers"), "1");
    char area[32], rc[48];
    if (u > 0) {
        snprintf(area, sizeof area, "%.1f um2", num(r, "area_px") * u * u);
        snprintf(rc, sizeof rc, "%.1f x %.1f um", rw * u, rh * u);
    } else {
        snprintf(area, sizeof area, "%.0f px", num(r, "area_px"));
        snprintf(rc, sizeof rc, "%.0f x %.0f px", rw, rh);
    }
    unsigned id = (unsigned)num(r, "id");
    const lam_position *ps = pos ? lam_positions_find(pos, j->path) : NULL;
    if (ps && u > 0) {
        double unit = lam_stage_unit_um(stage, pos);
        lam_stage_reading(stage, ps, w, h, u, xy[0], xy[1], xy);
        fprintf(f, "%-28.28s %4u %7.3f %10s %16s %9.*f,%-9.*f\n", j->stem, id, p1, area, rc,
                unit > 1 ? 4 : 1, xy[0] / unit, unit > 1 ? 4 : 1, xy[1] / unit);
    } else {
        fprintf(f, "%-28.28s %4u %7.3f %10s %16s %9.0f,%-9.0f\n", j->stem, id, p1, area, rc, xy[0],
                xy[1]);
    }
}

/* hBN analyses (issue 14): every region with a thickness (not small), the
 * median and 95 % interval of its most probable interference order, marked
 * when that order is not clear and when the flake lies in the target
 * window. Returns how many images had thicknesses. */
static size_t print_thickness(FILE *f, const lam_batch *b, const double target[2])
{
    size_t images = 0, rows = 0;
    for (size_t i = 0; i < b->count; i++) {
        const lam_batch_item *j = &b->items[i];
        if (j->failed || !j->json)
            continue;
        int any = 0;
        const cJSON *r;
        cJSON_ArrayForEach(r, cJSON_GetObjectItemCaseSensitive(j->json, "regions")) {
            const cJSON *t = cJSON_GetObjectItemCaseSensitive(r, "thickness_nm");
            any |= t != NULL;
            if (!cJSON_IsObject(t) || has_flag(r, "small"))
                continue;
            if (!rows++)
                fprintf(f, "\nflakes by thickness (nm; 95 %% interval of the most probable "
                           "order):\n%-28s %4s %8s %17s %6s  %s\n",
                        "image", "id", "estimate", "interval", "p", "notes");
            double est = num(t, "estimate");
            int amb = cJSON_IsTrue(cJSON_GetObjectItemCaseSensitive(t, "order_ambiguous"));
            int in = target && isfinite(target[0]) && est >= target[0] && est <= target[1] && !amb;
            fprintf(f, "%-28.28s %4u %8.1f %8.1f-%-8.1f %6.3f  %s%s\n", j->stem,
                    (unsigned)num(r, "id"), est, num(t, "lo"), num(t, "hi"),
                    num(t, "probability"), amb ? "order-ambiguous " : "", in ? "in target" : "");
        }
        images += any;
    }
    return images;
}

lam_status lam_summary_batch(const lam_batch *b, const lam_positions *pos, const lam_stage *stage,
                             char **text, lam_error *err)
{
    return lam_summary_batch_target(b, pos, stage, NULL, text, err);
}

lam_status lam_summary_batch_target(const lam_batch *b, const lam_positions *pos,
                                    const lam_stage *stage, const double target[2], char **text,
                                    lam_error *err)
{
    lam__text t;
    lam_status st = lam__text_open(&t, err);
    if (st)
        return st;
    FILE *f = t.f;
    int warned = 0;
    print_counts(f, b, &warned);
    if (warned)
        fprintf(f, "! = the image has warnings (printed above, and in its JSON)\n");
    size_t films = print_thickness(f, b, target), analysed = 0;
    for (size_t i = 0; i < b->count; i++)
        analysed += !b->items[i].failed && b->items[i].json;
    if (films && films == analysed) { /* hBN only: no layer counts to list */
        fprintf(f, "\nThicknesses are model estimates: confirm by AFM before committing a "
                   "flake\nto fabrication.\n");
        return lam__text_close(&t, text, err);
    }
    fprintf(f, "\nmonolayer candidates (p >= 0.95, not small):\n");
    char where[48];
    snprintf(where, sizeof where, pos ? "stage x,y %s" : "centroid px",
             lam_stage_unit_name(stage, pos));
    fprintf(f, "%-28s %4s %7s %10s %16s %18s\n", "image", "id", "p(1L)", "area", "usable w x h",
            where);
    for (size_t i = 0; i < b->count; i++) {
        const lam_batch_item *j = &b->items[i];
        if (j->failed || !j->json)
            continue;
        const cJSON *r;
        cJSON_ArrayForEach(r, cJSON_GetObjectItemCaseSensitive(j->json, "regions"))
            if (num(r, "layers") == 1 && !has_flag(r, "small") && !has_flag(r, "ambiguous"))
                print_candidate(f, j, r, pos, stage);
    }
    fprintf(f, "\nLayer counts are model estimates: confirm by Raman spectroscopy or AFM\n"
               "before committing a flake to fabrication.\n");
    return lam__text_close(&t, text, err);
}

lam_status lam_summary_image_line(const char *path, const cJSON *r, int resumed, char **text,
                                  lam_error *err)
{
    lam__text t;
    lam_status st = lam__text_open(&t, err);
    if (st)
        return st;
    FILE *f = t.f;
    const cJSON *ox = cJSON_GetObjectItemCaseSensitive(
        cJSON_GetObjectItemCaseSensitive(r, "substrate"), "oxide_nm");
    const cJSON *est = cJSON_GetObjectItemCaseSensitive(ox, "estimate");
    const cJSON *regs = cJSON_GetObjectItemCaseSensitive(r, "regions"), *g;
    size_t by[5] = {0};
    const cJSON *best = NULL;
    double best_area = 0;
    cJSON_ArrayForEach(g, regs)
    {
        const cJSON *L = cJSON_GetObjectItemCaseSensitive(g, "layers"), *fl;
        int small = 0;
        cJSON_ArrayForEach(fl, cJSON_GetObjectItemCaseSensitive(g, "flags")) small |=
            cJSON_IsString(fl) && !strcmp(fl->valuestring, "small");
        if (!cJSON_IsNumber(L) || small)
            continue;
        by[L->valueint < 4 ? L->valueint : 4]++;
        double area = cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(g, "area_px"));
        if (L->valueint == 1 && (!best || area > best_area))
            best = g, best_area = area;
    }
    const char *base = strrchr(path, '/');
    fprintf(f, "%-28s SiO2 %5.1f nm  1L %zu  2L %zu  3L %zu  4L+ %zu%s", base ? base + 1 : path,
            cJSON_IsNumber(est) ? est->valuedouble : NAN, by[1], by[2], by[3], by[4],
            resumed ? "  (results kept)" : "");
    size_t films = 0; /* hBN (issue 14): the flakes' thicknesses instead */
    double lo = INFINITY, hi = -INFINITY;
    cJSON_ArrayForEach(g, regs) {
        const cJSON *th = cJSON_GetObjectItemCaseSensitive(g, "thickness_nm");
        if (!cJSON_IsObject(th) || has_flag(g, "small"))
            continue;
        double d = num(th, "estimate");
        films++, lo = fmin(lo, d), hi = fmax(hi, d);
    }
    if (films)
        fprintf(f, "  %zu flake%s %.1f-%.1f nm", films, films == 1 ? "" : "s", lo, hi);
    if (best) {
        const cJSON *a = cJSON_GetObjectItemCaseSensitive(best, "area_um2");
        fprintf(f, "  largest 1L: #%d", cJSON_GetObjectItemCaseSensitive(best, "id")->valueint);
        if (cJSON_IsNumber(a))
            fprintf(f, " %.0f um2", a->valuedouble);
    }
    return lam__text_close(&t, text, err);
}
