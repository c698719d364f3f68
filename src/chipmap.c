/* chipmap.c - the chip map: tiles at their stage positions and the
 * candidates on them (lamina/chipmap.h). */
#include "lamina/chipmap.h"
#include "lamina/draw.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define MARGIN_L 80.0
#define MARGIN_T 70.0
#define MARGIN_R 30.0
#define MARGIN_B 110.0

/* Chip coordinates of image k's corners (pixel edges). */
static int corners(const lam_catalog *c, size_t k, double out[4][2])
{
    const lam_catalog_image *im = &c->images[k];
    if (!im->pos || !(im->um_per_px > 0))
        return 0;
    static const double fx[4] = {0, 1, 1, 0}, fy[4] = {0, 0, 1, 1};
    for (int q = 0; q < 4; q++) {
        double rd[2];
        lam_stage_reading(&c->stage, im->pos, im->width, im->height, im->um_per_px,
                          fx[q] * im->width - 0.5, fy[q] * im->height - 0.5, rd);
        lam_stage_chip(&c->stage, rd, out[q]);
    }
    return 1;
}

void lam_chipmap_layout(const lam_catalog *c, double width, lam_chipmap_view *v)
{
    memset(v, 0, sizeof *v);
    v->lo[0] = v->lo[1] = INFINITY;
    v->hi[0] = v->hi[1] = -INFINITY;
    v->sx = c->stage.x_sign, v->sy = c->stage.y_sign;
    for (size_t k = 0; k < c->n_images; k++) {
        double q[4][2];
        if (!corners(c, k, q))
            continue;
        v->tiles++;
        for (int i = 0; i < 4; i++)
            for (int d = 0; d < 2; d++)
                v->lo[d] = fmin(v->lo[d], q[i][d]), v->hi[d] = fmax(v->hi[d], q[i][d]);
    }
    if (!v->tiles)
        return;
    double spanx = fmax(v->hi[0] - v->lo[0], 1), spany = fmax(v->hi[1] - v->lo[1], 1);
    double draw_w = width - MARGIN_L - MARGIN_R;
    v->scale = draw_w / spanx;
    if (spany * v->scale > 1.2 * draw_w) /* a tall chip: keep the page at most ~square */
        v->scale = 1.2 * draw_w / spany;
    v->left = MARGIN_L, v->top = MARGIN_T;
    v->width = width;
    v->height = MARGIN_T + spany * v->scale + MARGIN_B;
}

void lam_chipmap_point(const lam_chipmap_view *v, const double chip[2], double page[2])
{
    /* readings growing right/down in the camera image grow right/down here */
    page[0] = v->left + (v->sx > 0 ? chip[0] - v->lo[0] : v->hi[0] - chip[0]) * v->scale;
    page[1] = v->top + (v->sy > 0 ? chip[1] - v->lo[1] : v->hi[1] - chip[1]) * v->scale;
}

int lam_chipmap_tile(const lam_catalog *c, const lam_chipmap_view *v, size_t k, double xy[4][2])
{
    double q[4][2];
    if (!corners(c, k, q))
        return 0;
    for (int i = 0; i < 4; i++)
        lam_chipmap_point(v, q[i], xy[i]);
    return 1;
}

static void draw_tiles(cairo_t *cr, const lam_catalog *c, const lam_chipmap_view *v)
{
    lam_text_style ts = {9, 0, 0x555555, 0, 0, 0};
    for (size_t k = 0; k < c->n_images; k++) {
        double q[4][2];
        if (!lam_chipmap_tile(c, v, k, q))
            continue;
        for (int i = 0; i < 4; i++)
            cairo_line_to(cr, q[i][0], q[i][1]);
        cairo_close_path(cr);
        lam_draw_rgba(cr, 0xb8b0d8, 0.35);
        cairo_fill_preserve(cr);
        lam_draw_rgb(cr, 0x6a6090);
        cairo_set_line_width(cr, 1);
        cairo_stroke(cr);
        double x = fmin(fmin(q[0][0], q[1][0]), fmin(q[2][0], q[3][0]));
        double y = fmin(fmin(q[0][1], q[1][1]), fmin(q[2][1], q[3][1]));
        double tw, th;
        char esc[300];
        lam_draw_escape(c->images[k].stem, esc, sizeof esc);
        lam_draw_text_size(cr, &ts, esc, &tw, &th);
        if (tw < fabs(q[1][0] - q[0][0]) - 4)
            lam_draw_text(cr, x + 3, y + 2, &ts, esc);
    }
}

int lam_chipmap_mark(const lam_chipmap_view *v, const lam_catalog *c, size_t i, double page[2],
                     double *radius)
{
    const lam_catalog_entry *e = &c->entries[i];
    if (!lam_catalog_is_candidate(c, i) || !isfinite(e->chip_um[0]))
        return 0;
    lam_chipmap_point(v, e->chip_um, page);
    double a = isfinite(e->area_um2) ? e->area_um2 : 100;
    *radius = fmin(11, fmax(4, sqrt(a) * 0.35));
    return 1;
}

static void draw_candidates(cairo_t *cr, const lam_catalog *c, const lam_chipmap_view *v)
{
    lam_text_style ts = {10, 1, 0x111111, 0, 0.5, 0};
    for (size_t i = c->count; i-- > 0;) { /* best last, on top */
        const lam_catalog_entry *e = &c->entries[i];
        double p[2], r;
        if (!lam_chipmap_mark(v, c, i, p, &r))
            continue;
        cairo_arc(cr, p[0], p[1], r, 0, 2 * M_PI);
        lam_draw_rgb(cr, lam_draw_result_colour(e->layers, e->thickness_nm[0]));
        cairo_fill_preserve(cr);
        cairo_set_line_width(cr, 1.3);
        lam_draw_rgb(cr, 0x111111);
        cairo_stroke(cr);
        if (e->layers <= 2) {
            char t[32];
            snprintf(t, sizeof t, "%zu", lam_catalog_rank(c, i));
            lam_draw_text(cr, p[0] + r + 2, p[1], &ts, t);
        }
    }
}

static void draw_legend(cairo_t *cr, const lam_catalog *c, const lam_chipmap_view *v, double y)
{
    lam_text_style ts = {11, 0, 0x222222, 0, 0.5, 0};
    double x = v->left;
    for (int L = 1; L <= 6; L++) {
        cairo_arc(cr, x + 6, y, 6, 0, 2 * M_PI);
        lam_draw_rgb(cr, lam_draw_layer_colour(L));
        cairo_fill_preserve(cr);
        lam_draw_rgb(cr, 0x111111);
        cairo_set_line_width(cr, 1.2);
        cairo_stroke(cr);
        char t[16];
        snprintf(t, sizeof t, L == 6 ? "%dL+" : "%dL", L);
        lam_draw_text(cr, x + 16, y, &ts, t);
        x += 58;
    }
    lam_draw_text(cr, x + 10, y, &ts, "numbers: catalogue rank (1L and 2L); tiles outlined");
    if (c->stage.origin_kind) {
        double o[2] = {0, 0}, p[2];
        lam_chipmap_point(v, o, p);
        cairo_move_to(cr, p[0] - 8, p[1]);
        cairo_line_to(cr, p[0] + 8, p[1]);
        cairo_move_to(cr, p[0], p[1] - 8);
        cairo_line_to(cr, p[0], p[1] + 8);
        lam_draw_rgb(cr, 0xc62828);
        cairo_set_line_width(cr, 2);
        cairo_stroke(cr);
        lam_draw_text(cr, v->left, y + 20, &ts, "red cross: the chip origin");
    }
}

lam_status lam_chipmap_write(const lam_catalog *c, const char *path, lam_error *err)
{
    lam_chipmap_view v;
    lam_chipmap_layout(c, 1000, &v);
    if (!v.tiles)
        return lam_error_set(err, LAM_EINVAL, "no image has a stage position: a chip map needs "
                                              "--positions");
    lam_canvas cv;
    lam_status st = lam_canvas_open(&cv, path, v.width, v.height, err);
    if (st)
        return st;
    cairo_t *cr = cv.cr;
    size_t cand = 0, by[7] = {0};
    for (size_t i = 0; i < c->count; i++)
        if (lam_catalog_is_candidate(c, i))
            cand++, by[c->entries[i].layers < 6 ? c->entries[i].layers : 6]++;
    char title[256];
    snprintf(title, sizeof title, "Chip map \u2014 %zu tiles, %zu candidates (1L %zu, 2L %zu, "
                                  "3L %zu, more %zu)", v.tiles, cand, by[1], by[2], by[3],
             by[4] + by[5] + by[6]);
    lam_text_style ts = {15, 1, 0x111111, 0, 0, 0};
    lam_draw_text(cr, v.left, 16, &ts, title);
    double bottom = v.height - MARGIN_B;
    lam_axis x = {v.lo[0], v.hi[0], v.sx > 0 ? v.left : v.left + (v.hi[0] - v.lo[0]) * v.scale,
                  v.sx > 0 ? v.left + (v.hi[0] - v.lo[0]) * v.scale : v.left, NULL, 0, 0};
    lam_axis y = {v.lo[1], v.hi[1], v.sy > 0 ? v.top : bottom, v.sy > 0 ? bottom : v.top,
                  NULL, 0, 0};
    char xt[64], yt[64];
    snprintf(xt, sizeof xt, "chip x (\u00b5m%s)", c->stage.origin_kind ? " from the origin" : "");
    snprintf(yt, sizeof yt, "chip y (\u00b5m%s)", c->stage.origin_kind ? " from the origin" : "");
    lam_draw_axes(cr, &x, &y, xt, yt, 10.5);
    draw_tiles(cr, c, &v);
    draw_candidates(cr, c, &v);
    draw_legend(cr, c, &v, bottom + 62);
    return lam_canvas_finish(&cv, err);
}

lam_status lam_chipmap_write_results(const char *dir, const lam_positions *pos,
                                     const lam_stage *stage, const char *path, lam_error *err)
{
    lam_catalog cat;
    lam_catalog_init(&cat);
    lam_catalog_set_stage(&cat, pos, stage);
    lam_status st = lam_catalog_add_folder(&cat, dir, pos, NULL, err);
    if (st)
        lam_error_set_file(err, dir);
    else if (!(st = lam_catalog_finish(&cat, err)) && (st = lam_chipmap_write(&cat, path, err)))
        lam_error_set_file(err, path);
    lam_catalog_clear(&cat);
    return st;
}
