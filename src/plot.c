/* plot.c - the per-image contrast plot (STEM.contrast.svg) and the oxide
 * audit plot (oxide.svg), drawn with cairo through lamina/draw.h. */
#include "lamina/plot.h"
#include "lamina/draw.h"
#include "lamina/report.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static const uint32_t channel_colour[3] = {0xc0392b, 0x27ae60, 0x2e5cb8};
static const char *const channel_name[3] = {"red", "green", "blue"};

typedef struct placed {
    double x, y, w, h;
} placed;

/* Put a small id label beside a point where it overlaps no earlier one. */
static void id_label(cairo_t *cr, placed *done, size_t *n, size_t max, double px, double py,
                     const char *text, double fs)
{
    lam_text_style ts = {fs, 0, 0x333333, 0, 0.5, 0};
    double w, h;
    lam_draw_text_size(cr, &ts, text, &w, &h);
    static const double dx[4] = {1, -1, 0, 0}, dy[4] = {0, 0, -1, 1};
    for (int k = 0; k < 4; k++) {
        double x = px + dx[k] * (5 + (dx[k] < 0 ? w : 0)) - (dx[k] == 0 ? w / 2 : 0);
        double y = py + dy[k] * (h * 0.5 + 4) - h / 2;
        int free_ = 1;
        for (size_t q = 0; q < *n && free_; q++)
            free_ = !(x < done[q].x + done[q].w && done[q].x < x + w && y < done[q].y + done[q].h &&
                      done[q].y < y + h);
        if (!free_)
            continue;
        if (*n < max)
            done[(*n)++] = (placed){x, y, w, h};
        lam_draw_text(cr, x, y + h / 2, &ts, text);
        return;
    }
}

static void marker(cairo_t *cr, double x, double y, double r, int colour_index)
{
    cairo_arc(cr, x, y, r, 0, 2 * M_PI);
    if (colour_index == LAM_DRAW_UNASSIGNED) {
        lam_draw_rgb(cr, 0xffffff);
        cairo_fill_preserve(cr);
    } else {
        lam_draw_rgb(cr, lam_draw_layer_colour(colour_index));
        cairo_fill_preserve(cr);
    }
    cairo_set_line_width(cr, 1.2);
    lam_draw_rgb(cr, 0x222222);
    cairo_stroke(cr);
}

static void contrast_range(const lam_analysis *a, double *lo, double *hi)
{
    *lo = 0, *hi = 0;
    for (size_t N = 0; N <= a->max_layers; N++)
        for (int c = 0; c < 3; c++)
            *lo = fmin(*lo, a->ladder.contrast[N][c]), *hi = fmax(*hi, a->ladder.contrast[N][c]);
    for (size_t i = 0; i < a->count; i++)
        for (int c = 0; c < 3; c++)
            if (!(a->results[i].flags & LAM_FLAG_SMALL) && isfinite(a->results[i].mean[c])) {
                *lo = fmin(*lo, a->results[i].mean[c] - a->results[i].sigma[c]);
                *hi = fmax(*hi, a->results[i].mean[c] + a->results[i].sigma[c]);
            }
    lam_nice_range(lo, hi, 6);
}

/* One channel's panel: the model ladder and every region (not small) at
 * its assigned layer count, thick and unassigned in the last column. */
static void contrast_panel(cairo_t *cr, const lam_analysis *a, int c, const lam_axis *x,
                           const lam_axis *y, const char *const *cats)
{
    size_t K = a->max_layers;
    char title[64];
    snprintf(title, sizeof title, "%s channel", channel_name[c]);
    lam_draw_axes(cr, x, y, "layers", c == 0 ? "contrast (substrate \u2212 flake) / substrate"
                                             : NULL, 11);
    (void)cats;
    lam_text_style ts = {12, 1, channel_colour[c], 0, 1, 0};
    lam_draw_text(cr, x->p0, y->p1 - 6, &ts, title);
    cairo_set_line_width(cr, 1.6);
    lam_draw_rgb(cr, channel_colour[c]);
    for (size_t N = 0; N <= K; N++)
        cairo_line_to(cr, lam_axis_map(x, (double)N), lam_axis_map(y, a->ladder.contrast[N][c]));
    cairo_stroke(cr);
    for (size_t N = 0; N <= K; N++) {
        cairo_rectangle(cr, lam_axis_map(x, (double)N) - 3.5,
                        lam_axis_map(y, a->ladder.contrast[N][c]) - 3.5, 7, 7);
        cairo_fill(cr);
    }
    placed done[256];
    size_t nd = 0;
    for (size_t i = 0; i < a->count; i++) {
        const lam_region_result *r = &a->results[i];
        if (r->flags & LAM_FLAG_SMALL)
            continue;
        unsigned v = lam_report_layer_value(r);
        int ci = v == 254 ? LAM_DRAW_THICK : v == 255 ? LAM_DRAW_UNASSIGNED : (int)v;
        double N = ci >= 1 ? (double)r->layers : (double)K + 1;
        double px = lam_axis_map(x, N + ((double)(i % 7) - 3) * 0.06);
        double py = lam_axis_map(y, r->mean[c]);
        double e = fabs(lam_axis_map(y, r->mean[c] + r->sigma[c]) - py);
        cairo_set_line_width(cr, 1);
        lam_draw_rgb(cr, 0x222222);
        cairo_move_to(cr, px, py - e);
        cairo_line_to(cr, px, py + e);
        cairo_stroke(cr);
        marker(cr, px, py, 3.6, ci);
        char id[16];
        snprintf(id, sizeof id, "#%u", a->seg->regions[i].id);
        id_label(cr, done, &nd, 256, px, py, id, 9.5);
    }
}

/* ---- a crystal of continuous thickness (hBN): contrast against thickness ----
 * No layer ladder: each region at its thickness (the median of its most
 * probable mode) on a log axis, with the film model's contrast there, so
 * that the plot shows how well the model explains each flake; regions
 * without a film (substrate, unmodelled) in a last column. */
#define FILM_OTHER_X 3.0 /* the "other" column, past 100 nm (the model ends at 300) */

static const char *const film_cats[4] = {"1", "10", "100", "other"};

/* The log axis' coordinate of a thickness (0.5 nm and below at the left). */
static double film_axis(double nm)
{
    return log10(fmax(nm, 0.5));
}

static double film_x(const lam_thickness_result *t)
{
    return t->evaluated ? film_axis(t->estimate) : FILM_OTHER_X;
}

/* A dotted grey line from (x0, y0) to (x1, y1). */
static void dotted_line(cairo_t *cr, double x0, double y0, double x1, double y1)
{
    static const double dots[2] = {2, 3};
    cairo_set_dash(cr, dots, 2, 0);
    cairo_set_line_width(cr, 1);
    lam_draw_rgb(cr, 0x555555);
    cairo_move_to(cr, x0, y0);
    cairo_line_to(cr, x1, y1);
    cairo_stroke(cr);
    cairo_set_dash(cr, NULL, 0, 0);
}

static void film_range(const lam_analysis *a, double *lo, double *hi)
{
    *lo = 0, *hi = 0;
    for (size_t i = 0; i < a->count; i++) {
        const lam_region_result *r = &a->results[i];
        const lam_thickness_result *t = &a->thickness[i];
        for (int c = 0; c < 3 && !(r->flags & LAM_FLAG_SMALL); c++) {
            if (isfinite(r->mean[c]))
                *lo = fmin(*lo, r->mean[c] - r->sigma[c]), *hi = fmax(*hi, r->mean[c] + r->sigma[c]);
            if (t->evaluated && isfinite(t->model[c]))
                *lo = fmin(*lo, t->model[c]), *hi = fmax(*hi, t->model[c]);
        }
    }
    lam_nice_range(lo, hi, 6);
}

/* A region's other interference orders (modes holding at least
 * FILM_OTHER_ORDER of its film posterior): a dotted line from its circle
 * at height py to an open circle at each, so that a thickness the plot
 * shows is not read as the only one. */
#define FILM_OTHER_ORDER 0.05
static void other_orders(cairo_t *cr, const lam_thickness_result *t, const lam_axis *x,
                         double px, double py)
{
    for (size_t k = 1; k < t->modes && k < LAM_THICKNESS_MAX_MODES; k++) {
        if (!(t->mode[k].probability >= FILM_OTHER_ORDER))
            continue;
        double qx = lam_axis_map(x, film_axis(t->mode[k].estimate));
        dotted_line(cr, px, py, qx, py);
        cairo_arc(cr, qx, py, 3.2, 0, 2 * M_PI);
        lam_draw_rgb(cr, 0xffffff);
        cairo_fill_preserve(cr);
        lam_draw_rgb(cr, 0x555555);
        cairo_stroke(cr);
    }
}

/* One region of a film panel: its 95 % interval in thickness, the model's
 * contrast there (a square), its other orders, its own contrast with 1
 * sigma, its id. */
static void film_region(cairo_t *cr, const lam_analysis *a, size_t i, int c, const lam_axis *x,
                        const lam_axis *y, placed *done, size_t *nd)
{
    const lam_region_result *r = &a->results[i];
    const lam_thickness_result *t = &a->thickness[i];
    double jitter = t->evaluated ? 0 : ((double)(i % 7) - 3) * 0.04;
    double px = lam_axis_map(x, film_x(t) + jitter), py = lam_axis_map(y, r->mean[c]);
    double e = fabs(lam_axis_map(y, r->mean[c] + r->sigma[c]) - py);
    if (t->evaluated)
        other_orders(cr, t, x, px, py);
    cairo_set_line_width(cr, 1);
    lam_draw_rgb(cr, 0x222222);
    if (t->evaluated) {
        cairo_move_to(cr, lam_axis_map(x, film_axis(t->lo)), py);
        cairo_line_to(cr, lam_axis_map(x, film_axis(t->hi)), py);
    }
    cairo_move_to(cr, px, py - e);
    cairo_line_to(cr, px, py + e);
    cairo_stroke(cr);
    if (t->evaluated && isfinite(t->model[c])) {
        lam_draw_rgb(cr, channel_colour[c]);
        cairo_rectangle(cr, px - 3, lam_axis_map(y, t->model[c]) - 3, 6, 6);
        cairo_fill(cr);
    }
    cairo_arc(cr, px, py, 3.6, 0, 2 * M_PI);
    lam_draw_rgb(cr, t->evaluated ? lam_draw_result_colour(0, t->estimate) : 0xffffff);
    cairo_fill_preserve(cr);
    cairo_set_line_width(cr, 1.2);
    lam_draw_rgb(cr, 0x222222);
    cairo_stroke(cr);
    char id[16];
    snprintf(id, sizeof id, "#%u", a->seg->regions[i].id);
    id_label(cr, done, nd, 256, px, py, id, 9.5);
}

static void film_panel(cairo_t *cr, const lam_analysis *a, int c, const lam_axis *x,
                       const lam_axis *y)
{
    char title[64];
    snprintf(title, sizeof title, "%s channel", channel_name[c]);
    lam_draw_axes(cr, x, y, "thickness (nm)",
                  c == 0 ? "contrast (substrate \u2212 flake) / substrate" : NULL, 11);
    lam_text_style ts = {12, 1, channel_colour[c], 0, 1, 0};
    lam_draw_text(cr, x->p0, y->p1 - 6, &ts, title);
    placed done[256];
    size_t nd = 0;
    for (size_t i = 0; i < a->count; i++)
        if (!(a->results[i].flags & LAM_FLAG_SMALL))
            film_region(cr, a, i, c, x, y, done, &nd);
}

static void film_legend(cairo_t *cr, double m, double ny)
{
    lam_text_style note = {11, 0, 0x333333, 0, 0, 0};
    cairo_rectangle(cr, m + 1, ny + 3, 6, 6);
    lam_draw_rgb(cr, 0x555555);
    cairo_fill(cr);
    lam_draw_text(cr, m + 14, ny, &note,
                  "the film model\u2019s contrast at each region\u2019s thickness (the median "
                  "of its most probable interference order), at the oxide above");
    cairo_arc(cr, m + 4, ny + 26, 3.6, 0, 2 * M_PI);
    lam_draw_rgb(cr, lam_draw_thickness_colour(2));
    cairo_fill(cr);
    lam_draw_text(cr, m + 14, ny + 20, &note,
                  "regions (#id) at their thickness, filled with its colour band; bars: 1\u03c3 "
                  "of contrast, 95 % interval of thickness; \u201cother\u201d: no film (open)");
    dotted_line(cr, m - 4, ny + 46, m + 4, ny + 46);
    lam_draw_text(cr, m + 14, ny + 40, &note,
                  "dotted to an open circle: another interference order the region may be "
                  "(5 % of its film posterior or more; JSON: thickness.modes)");
}

/* The page's geometry: panel width and height, left margin, gap between
 * panels, top of the panels. */
static const double page_pw = 300, page_ph = 280, page_m = 80, page_gap = 40, page_top = 70;

/* A film's panels (contrast against thickness) and legend. */
static void film_page(cairo_t *cr, const lam_analysis *a)
{
    double lo, hi;
    film_range(a, &lo, &hi);
    for (int c = 0; c < 3; c++) {
        double x0 = page_m + (double)c * (page_pw + page_gap);
        lam_axis x = {-0.35, FILM_OTHER_X + 0.35, x0, x0 + page_pw, film_cats, 4, 0};
        lam_axis y = {lo, hi, page_top + page_ph, page_top, NULL, 0, 0};
        film_panel(cr, a, c, &x, &y);
    }
    film_legend(cr, page_m, page_top + page_ph + 52);
}

/* The layer ladder's panels and legend. */
static void ladder_page(cairo_t *cr, const lam_analysis *a)
{
    const double pw = page_pw, ph = page_ph, m = page_m, gap = page_gap, top = page_top;
    size_t K = a->max_layers;
    const char *cats[LAM_MODEL_MAX_LAYERS + 2];
    char names[LAM_MODEL_MAX_LAYERS + 2][8];
    for (size_t N = 0; N <= K + 1 && N < LAM_MODEL_MAX_LAYERS + 2; N++) {
        snprintf(names[N], sizeof names[N], "%zu", N);
        cats[N] = N <= K ? names[N] : "other";
    }
    double lo, hi;
    contrast_range(a, &lo, &hi);
    for (int c = 0; c < 3; c++) {
        double x0 = m + (double)c * (pw + gap);
        lam_axis x = {-0.5, (double)K + 1.5, x0, x0 + pw, cats, K + 2, 0};
        lam_axis y = {lo, hi, top + ph, top, NULL, 0, 0};
        contrast_panel(cr, a, c, &x, &y, cats);
    }
    lam_text_style note = {11, 0, 0x333333, 0, 0, 0};
    double ny = top + ph + 52;
    cairo_rectangle(cr, m, ny + 2, 8, 8);
    lam_draw_rgb(cr, 0x555555);
    cairo_fill(cr);
    lam_draw_text(cr, m + 14, ny, &note, "model ladder at the fitted oxide (0 = substrate)");
    marker(cr, m + 4, ny + 26, 3.6, 1);
    lam_draw_text(cr, m + 14, ny + 20, &note,
                  "regions (#id) at their assigned layer count, filled with the layer colour; "
                  "bars: 1\u03c3 including the model floor; \u201cother\u201d: thick (khaki) "
                  "or unassigned (open)");
}

/* The page: a title, one panel per channel and the legend, against the
 * layer ladder or, for a crystal of continuous thickness, against
 * thickness. */
lam_status lam_report_write_svg(const lam_analysis *a, const char *path, lam_error *err)
{
    int film = a->thickness != NULL;
    lam_canvas cv;
    lam_status st = lam_canvas_open(&cv, path, page_m + 3 * page_pw + 2 * page_gap + 30,
                                    page_top + page_ph + 110, err);
    if (st)
        return st;
    const char *base = strrchr(a->file, '/');
    char esc[600], title[800];
    lam_draw_escape(base ? base + 1 : a->file, esc, sizeof esc);
    snprintf(title, sizeof title, "Region contrast against the %s \u2014 %s, "
                                  "SiO\u2082 %.1f nm%s", film ? "film model" : "model ladder",
             esc, a->oxide.estimate, a->oxide.fitted ? " (fitted)" : " (nominal)");
    lam_text_style ts = {15, 1, 0x111111, 0, 0, 0};
    lam_draw_text(cv.cr, page_m, 16, &ts, title);
    if (film)
        film_page(cv.cr, a);
    else
        ladder_page(cv.cr, a);
    return lam_canvas_finish(&cv, err);
}

/* ---- oxide audit ---- */

static void shade_band(cairo_t *cr, const lam_axis *x, const lam_axis *y, double a, double b,
                       uint32_t colour, double alpha)
{
    double xa = fmax(lam_axis_map(x, a), fmin(x->p0, x->p1));
    double xb = fmin(lam_axis_map(x, b), fmax(x->p0, x->p1));
    if (xb <= xa)
        return;
    cairo_rectangle(cr, xa, fmin(y->p0, y->p1), xb - xa, fabs(y->p0 - y->p1));
    lam_draw_rgba(cr, colour, alpha);
    cairo_fill(cr);
}

static void vline(cairo_t *cr, const lam_axis *x, const lam_axis *y, double v, uint32_t colour,
                  int dashed)
{
    double p = lam_axis_map(x, v);
    if (!isfinite(v) || p < fmin(x->p0, x->p1) || p > fmax(x->p0, x->p1))
        return;
    double d[2] = {5, 3};
    cairo_set_dash(cr, d, dashed ? 2 : 0, 0);
    cairo_set_line_width(cr, 1.5);
    lam_draw_rgb(cr, colour);
    cairo_move_to(cr, p, y->p0);
    cairo_line_to(cr, p, y->p1);
    cairo_stroke(cr);
    cairo_set_dash(cr, NULL, 0, 0);
}

static void profile_panel(cairo_t *cr, const lam_oxide_plot *p, const lam_axis *x,
                          const lam_axis *y, double zoom_lo, double zoom_hi)
{
    shade_band(cr, x, y, p->nominal_nm - p->tolerance_nm, p->nominal_nm + p->tolerance_nm,
               0x2e7d32, 0.16);
    shade_band(cr, x, y, zoom_lo, zoom_hi, 0x000000, 0.04);
    lam_draw_axes(cr, x, y, "SiO\u2082 thickness (nm)",
                  "\u221a(joint \u03c7\u00b2 \u2212 min)", 11);
    double cmin = INFINITY;
    for (size_t g = 0; g < p->n; g++)
        cmin = fmin(cmin, p->chi2[g]);
    cairo_save(cr);
    cairo_rectangle(cr, x->p0, y->p1, x->p1 - x->p0, y->p0 - y->p1);
    cairo_clip(cr);
    cairo_set_line_width(cr, 2);
    lam_draw_rgb(cr, 0x1f4e9c);
    for (size_t g = 0; g < p->n; g++)
        cairo_line_to(cr, lam_axis_map(x, p->grid_nm[g]),
                      lam_axis_map(y, fmin(sqrt(fmax(0, p->chi2[g] - cmin)), y->hi * 1.05)));
    cairo_stroke(cr);
    cairo_restore(cr);
    vline(cr, x, y, p->nominal_nm, 0x2e7d32, 1);
    vline(cr, x, y, p->estimate_nm, 0xc62828, 0);
    vline(cr, x, y, p->absolute_nm, 0x6a1b9a, 1);
    lam_text_style ts = {10.5, 0, 0x6a1b9a, 0.5, 1, 0};
    for (size_t k = 0; k < p->n_alternatives; k++) {
        double ax = lam_axis_map(x, p->alternatives_nm[k]);
        cairo_arc(cr, ax, y->p0 - 6, 5, 0, 2 * M_PI);
        lam_draw_rgb(cr, 0xc62828);
        cairo_set_line_width(cr, 1.5);
        cairo_stroke(cr);
        ts.colour = 0xc62828;
        lam_draw_text(cr, ax, y->p0 - 14, &ts, "another order?");
    }
}

/* One row of the lower panel: a bar from lo to hi and a dot at v. */
static void bar_row(cairo_t *cr, const lam_axis *x, double py, double v, double lo, double hi,
                    uint32_t colour)
{
    if (isfinite(lo) && isfinite(hi)) {
        cairo_set_line_width(cr, 1.5);
        lam_draw_rgb(cr, 0x222222);
        cairo_move_to(cr, fmax(lam_axis_map(x, lo), x->p0), py);
        cairo_line_to(cr, fmin(lam_axis_map(x, hi), x->p1), py);
        cairo_stroke(cr);
    }
    double cx = lam_axis_map(x, v);
    if (cx >= x->p0 && cx <= x->p1) {
        cairo_arc(cr, cx, py, 4, 0, 2 * M_PI);
        lam_draw_rgb(cr, colour);
        cairo_fill(cr);
    }
}

static void images_panel(cairo_t *cr, const lam_oxide_plot *p, const lam_axis *x,
                         const lam_axis *y, double row)
{
    shade_band(cr, x, y, p->nominal_nm - p->tolerance_nm, p->nominal_nm + p->tolerance_nm,
               0x2e7d32, 0.16);
    if (isfinite(p->lo95_nm) && isfinite(p->hi95_nm))
        shade_band(cr, x, y, p->lo95_nm, p->hi95_nm, 0xc62828, 0.15);
    lam_axis none = *y;
    none.hide_ticks = 1;
    lam_draw_axes(cr, x, &none, "SiO\u2082 thickness (nm), each image \u00b1 1\u03c3; "
                  "combined: 95 % interval", NULL, 11);
    vline(cr, x, y, p->nominal_nm, 0x2e7d32, 1);
    vline(cr, x, y, p->estimate_nm, 0xc62828, 0);
    lam_text_style name = {10.5, 0, 0x222222, 1, 0.5, 0};
    for (size_t j = 0; j < p->n_images; j++) {
        const lam_oxide_plot_image *im = &p->images[j];
        double py = y->p1 + row * ((double)j + 0.5);
        char esc[300];
        lam_draw_escape(im->name, esc, sizeof esc);
        lam_draw_text(cr, x->p0 - 8, py, &name, esc);
        if (!im->fitted || !isfinite(im->estimate_nm)) {
            lam_text_style ts = {10, 0, 0x777777, 0, 0.5, 0};
            lam_draw_text(cr, x->p0 + 6, py, &ts, "no usable region");
            continue;
        }
        bar_row(cr, x, py, im->estimate_nm, im->estimate_nm - im->sigma_nm,
                im->estimate_nm + im->sigma_nm, 0x1f4e9c);
    }
    double py = y->p1 + row * ((double)p->n_images + 0.5);
    char label[96];
    snprintf(label, sizeof label, "<b>combined: %s</b>", p->verdict ? p->verdict : "no data");
    lam_draw_text(cr, x->p0 - 8, py, &name, label);
    if (isfinite(p->estimate_nm))
        bar_row(cr, x, py, p->estimate_nm, p->lo95_nm, p->hi95_nm, 0xc62828);
}

/* The zoom of the lower panel: nominal +- 3 tolerances, widened to every
 * image's estimate and sigma. */
static void zoom_range(const lam_oxide_plot *p, double *lo, double *hi)
{
    double t = fmax(p->tolerance_nm, 2);
    *lo = p->nominal_nm - 3 * t, *hi = p->nominal_nm + 3 * t;
    for (size_t j = 0; j < p->n_images; j++)
        if (p->images[j].fitted && isfinite(p->images[j].estimate_nm)) {
            double s = isfinite(p->images[j].sigma_nm) ? p->images[j].sigma_nm : 0;
            *lo = fmin(*lo, p->images[j].estimate_nm - s - 1);
            *hi = fmax(*hi, p->images[j].estimate_nm + s + 1);
        }
    if (isfinite(p->lo95_nm) && isfinite(p->hi95_nm))
        *lo = fmin(*lo, p->lo95_nm - 1), *hi = fmax(*hi, p->hi95_nm + 1);
    lam_nice_range(lo, hi, 8);
}

lam_status lam_plot_oxide(const lam_oxide_plot *p, const char *path, lam_error *err)
{
    if (p->n < 2)
        return lam_error_set(err, LAM_EINVAL, "the oxide profile has fewer than 2 points");
    double name_w = 220, W = 940, top = 64, ph = 260, row = 22;
    double h2 = fmax(60, row * (double)(p->n_images + 1)); /* + the combined row */
    lam_canvas cv;
    lam_status st = lam_canvas_open(&cv, path, W, top + ph + 90 + h2 + 130, err);
    if (st)
        return st;
    cairo_t *cr = cv.cr;
    char title[256];
    const char *verdict = p->verdict ? p->verdict : "no data";
    if (isfinite(p->estimate_nm))
        snprintf(title, sizeof title, "Oxide audit: %.1f \u00b1 %.1f nm against %.1f \u00b1 %.1f "
                                      "nm nominal \u2014 %s", p->estimate_nm, p->sigma_nm,
                 p->nominal_nm, p->tolerance_nm, verdict);
    else
        snprintf(title, sizeof title, "Oxide audit: no image fitted its oxide (nominal %.1f "
                                      "nm) \u2014 %s", p->nominal_nm, verdict);
    lam_text_style ts = {15, 1, 0x111111, 0, 0, 0};
    lam_draw_text(cr, name_w, 16, &ts, title);
    double zlo, zhi, cmin = INFINITY, cmax = -INFINITY;
    zoom_range(p, &zlo, &zhi);
    for (size_t g = 0; g < p->n; g++)
        cmin = fmin(cmin, p->chi2[g]), cmax = fmax(cmax, p->chi2[g]);
    double ylo = 0, yhi = fmin(sqrt(fmax(cmax - cmin, 1)), 10); /* in sigmas: a V, not a spike */
    lam_nice_range(&ylo, &yhi, 5);
    lam_axis x1 = {p->grid_nm[0], p->grid_nm[p->n - 1], name_w, W - 30, NULL, 0, 0};
    lam_axis y1 = {ylo, yhi, top + ph, top, NULL, 0, 0};
    profile_panel(cr, p, &x1, &y1, zlo, zhi);
    double t2 = top + ph + 90;
    lam_axis x2 = {zlo, zhi, name_w, W - 30, NULL, 0, 0};
    lam_axis y2 = {0, 1, t2 + h2, t2, NULL, 0, 0};
    images_panel(cr, p, &x2, &y2, h2 / (double)(p->n_images + 1));
    lam_text_style note = {11, 0, 0x333333, 0, 0, 0};
    double ny = t2 + h2 + 56;
    lam_draw_text(cr, name_w, ny, &note,
                  "<span foreground=\"#2e7d32\">green: nominal (dashed) \u00b1 tolerance</span>"
                  "   <span foreground=\"#c62828\">red: combined estimate, shaded: its 95 % "
                  "interval (the verdict)</span>");
    lam_draw_text(cr, name_w, ny + 18, &note,
                  "grey: the range of the lower panel; circles: other interference orders that "
                  "fit as well");
    lam_draw_text(cr, name_w, ny + 36, &note,
                  "top: \u221a\u0394\u03c7\u00b2 (distance in \u03c3, clipped at 10); purple "
                  "dashed: absolute method against a bare-Si reference");
    return lam_canvas_finish(&cv, err);
}
