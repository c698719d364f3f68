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

static void print_counts(FILE *f, const lam_batch *b)
{
    fprintf(f, "%-28s %5s %4s %4s %4s %5s %6s %5s\n", "image", "oxide", "1L", "2L", "3L", "4L+",
            "thick", "other");
    for (size_t i = 0; i < b->count; i++) {
        const lam_batch_item *j = &b->items[i];
        if (j->failed || j->resumed) {
            fprintf(f, "%-28.28s %s\n", j->stem, j->failed ? "failed" : "(resumed: results kept)");
            continue;
        }
        size_t by[5] = {0}, thick = 0, other = 0;
        for (size_t r = 0; r < j->a->count; r++) {
            const lam_region_result *res = &j->a->results[r];
            if (res->flags & LAM_FLAG_SMALL)
                continue;
            if (res->layers > 0)
                by[res->layers < 4 ? res->layers : 4]++;
            else if (res->thick && !(res->flags & LAM_FLAG_UNMODELLED))
                thick++;
            else
                other++;
        }
        fprintf(f, "%-28.28s %5.1f %4zu %4zu %4zu %5zu %6zu %5zu\n", j->stem, j->a->oxide.estimate,
                by[1], by[2], by[3], by[4], thick, other);
    }
}

/* One monolayer candidate's line: area, usable rectangle, and where it is
 * (the stage reading that centres it, or its centroid in pixels). */
static void print_candidate(FILE *f, const lam_batch_item *j, size_t r, const lam_positions *pos,
                            const lam_stage *stage)
{
    const lam_region_result *res = &j->a->results[r];
    const lam_region_stats *s = &j->a->seg->regions[r];
    double u = j->a->um_per_px;
    char area[32], rect[48];
    if (u > 0) {
        snprintf(area, sizeof area, "%.1f um2", (double)s->area * u * u);
        snprintf(rect, sizeof rect, "%.1f x %.1f um", res->usable_px[0] * u, res->usable_px[1] * u);
    } else {
        snprintf(area, sizeof area, "%zu px", s->area);
        snprintf(rect, sizeof rect, "%zu x %zu px", res->usable_px[0], res->usable_px[1]);
    }
    double xy[2] = {s->sx / (double)s->area, s->sy / (double)s->area};
    const lam_position *ps = pos ? lam_positions_find(pos, j->path) : NULL;
    if (ps && u > 0) {
        double unit = lam_stage_unit_um(stage, pos);
        lam_stage_reading(stage, ps, (double)j->a->width, (double)j->a->height, u, xy[0], xy[1],
                          xy);
        fprintf(f, "%-28.28s %4u %7.3f %10s %16s %9.*f,%-9.*f\n", j->stem, s->id, res->p[1], area,
                rect, unit > 1 ? 4 : 1, xy[0] / unit, unit > 1 ? 4 : 1, xy[1] / unit);
    } else {
        fprintf(f, "%-28.28s %4u %7.3f %10s %16s %9.0f,%-9.0f\n", j->stem, s->id, res->p[1], area,
                rect, xy[0], xy[1]);
    }
}

lam_status lam_summary_batch(const lam_batch *b, const lam_positions *pos, const lam_stage *stage,
                             char **text, lam_error *err)
{
    lam__text t;
    lam_status st = lam__text_open(&t, err);
    if (st)
        return st;
    FILE *f = t.f;
    print_counts(f, b);
    fprintf(f, "\nmonolayer candidates (p >= 0.95, not small):\n");
    char where[48];
    snprintf(where, sizeof where, pos ? "stage x,y %s" : "centroid px",
             lam_stage_unit_name(stage, pos));
    fprintf(f, "%-28s %4s %7s %10s %16s %18s\n", "image", "id", "p(1L)", "area", "usable w x h",
            where);
    for (size_t i = 0; i < b->count; i++) {
        const lam_batch_item *j = &b->items[i];
        if (j->failed || j->resumed)
            continue;
        for (size_t r = 0; r < j->a->count; r++) {
            const lam_region_result *res = &j->a->results[r];
            if (res->layers == 1 && !(res->flags & (LAM_FLAG_SMALL | LAM_FLAG_AMBIGUOUS)))
                print_candidate(f, j, r, pos, stage);
        }
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
    if (best) {
        const cJSON *a = cJSON_GetObjectItemCaseSensitive(best, "area_um2");
        fprintf(f, "  largest 1L: #%d", cJSON_GetObjectItemCaseSensitive(best, "id")->valueint);
        if (cJSON_IsNumber(a))
            fprintf(f, " %.0f um2", a->valuedouble);
    }
    return lam__text_close(&t, text, err);
}
