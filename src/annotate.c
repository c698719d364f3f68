/* annotate.c - the annotated picture (STEM.annotated.png): the input with
 * antialiased region outlines, usable rectangles, labels placed without
 * overlap, a legend and a scale bar on backing panels. */
#include "lamina/report.h"
#include "lamina/bigalloc.h"
#include "lamina/contour.h"
#include "lamina/draw.h"
#include "lamina/jpeg.h"
#include "lamina/png.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

typedef struct box {
    double x, y, w, h;
} box;

typedef struct scene {
    lam_analysis *a;
    cairo_t *cr;
    const lam_contours *ct;
    double s, fs;           /* line scale and font size, from the image size */
    box taken[512];         /* legend, scale bar and placed labels */
    unsigned owner[512];    /* region id of each, 0 for the panels */
    size_t n_taken;
    int dry;                /* place only (lam_report_annotation_layout) */
} scene;

void lam_report_palette(unsigned v, uint8_t rgb[3])
{
    uint32_t c = lam_draw_layer_colour(v == 254 ? LAM_DRAW_THICK
                                       : v == 255 || v == 0 ? LAM_DRAW_UNASSIGNED
                                                            : (int)v);
    rgb[0] = (uint8_t)(c >> 16), rgb[1] = (uint8_t)(c >> 8), rgb[2] = (uint8_t)c;
}

static int colour_index(const lam_region_result *r)
{
    unsigned v = lam_report_layer_value(r);
    return v == 254 ? LAM_DRAW_THICK : v == 255 ? LAM_DRAW_UNASSIGNED : (int)v;
}

/* How a region is drawn: its layer count's colour, or for a film crystal
 * (hBN) its thickness band's; dashed when unassigned, or when a film's
 * interference order is ambiguous; 'answered' when it has a count or a
 * thickness (gets a usable rectangle and a probability). */
typedef struct look {
    uint32_t rgb;
    int dashed, answered;
    double p;
} look;

static look region_look(const lam_analysis *a, size_t i)
{
    const lam_region_result *r = &a->results[i];
    int ci = colour_index(r);
    if (a->thickness) {
        const lam_thickness_result *t = &a->thickness[i];
        if (ci != LAM_DRAW_UNASSIGNED && t->evaluated)
            return (look){lam_draw_result_colour(0, t->estimate), t->order_ambiguous, 1,
                          t->probability};
        return (look){lam_draw_layer_colour(LAM_DRAW_UNASSIGNED), 1, 0, NAN};
    }
    double p = ci >= 1 ? r->p[r->layers] : ci == LAM_DRAW_THICK ? r->p[a->max_layers + 1] : NAN;
    return (look){lam_draw_layer_colour(ci), ci == LAM_DRAW_UNASSIGNED, ci >= 1, p};
}

/* The 3-byte display in place to cairo's 4-byte xRGB words (and back), so
 * the picture costs one extra byte per pixel, not a second copy. A picture
 * decoded again from a kept JPEG has the room already
 * (lam_load_options.display8_xrgb_room): the realloc stays in place. */
static uint32_t *expand_display(lam_analysis *a)
{
    size_t n = a->width * a->height;
    uint8_t *p = lam_big_realloc(a->display, n * 4);
    if (!p)
        return NULL;
    a->display = p;
    uint32_t *q = (uint32_t *)(void *)p;
    for (size_t i = n; i-- > 0;) {
        uint32_t v = (uint32_t)p[3 * i] << 16 | (uint32_t)p[3 * i + 1] << 8 | p[3 * i + 2];
        q[i] = v; /* bytes 4i.. only overwrite sources of pixels >= i, already read */
    }
    return q;
}

static void compact_display(lam_analysis *a)
{
    size_t n = a->width * a->height;
    const uint32_t *q = (const uint32_t *)(void *)a->display;
    uint8_t *p = a->display;
    for (size_t i = 0; i < n; i++) {
        uint32_t v = q[i];
        p[3 * i] = (uint8_t)(v >> 16), p[3 * i + 1] = (uint8_t)(v >> 8), p[3 * i + 2] = (uint8_t)v;
    }
}

static void region_path(const scene *S, size_t i)
{
    const lam_contours *c = S->ct;
    cairo_new_path(S->cr);
    for (size_t l = c->loop_start[i]; l < c->loop_start[i + 1]; l++) {
        for (size_t k = c->point_start[l]; k < c->point_start[l + 1]; k++)
            cairo_line_to(S->cr, c->xy[2 * k], c->xy[2 * k + 1]);
        cairo_close_path(S->cr);
        cairo_new_sub_path(S->cr);
    }
}

/* A band of the layer colour just inside each outline (neighbours keep
 * their own bands side by side), then a dark line along every boundary so
 * the band reads on any substrate; small regions get a thin line only. */
static void draw_outlines(scene *S)
{
    cairo_t *cr = S->cr;
    lam_analysis *a = S->a;
    double band = 2.2 * S->s, dark = fmax(1.0, 1.1 * S->s);
    cairo_set_line_join(cr, CAIRO_LINE_JOIN_ROUND);
    cairo_set_fill_rule(cr, CAIRO_FILL_RULE_EVEN_ODD);
    for (int pass = 0; pass < 3; pass++)
        for (size_t i = 0; i < a->count; i++) {
            const lam_region_result *r = &a->results[i];
            int small = (r->flags & LAM_FLAG_SMALL) != 0;
            look lk = region_look(a, i);
            if ((pass < 2) == small)
                continue;
            region_path(S, i);
            cairo_set_dash(cr, NULL, 0, 0);
            if (pass == 0) {
                cairo_save(cr);
                cairo_clip_preserve(cr);
                if (lk.dashed) {
                    double d[2] = {4 * band, 2.5 * band};
                    cairo_set_dash(cr, d, 2, 0);
                }
                cairo_set_line_width(cr, 2 * band);
                lam_draw_rgb(cr, lk.rgb);
                cairo_stroke(cr);
                cairo_restore(cr);
            } else if (pass == 1) {
                cairo_set_line_width(cr, dark);
                lam_draw_rgba(cr, 0x000000, 0.85);
                cairo_stroke(cr);
            } else {
                cairo_set_line_width(cr, fmax(0.7, 0.45 * S->s));
                lam_draw_rgba(cr, lk.rgb, 0.65);
                cairo_stroke(cr);
            }
        }
}

static void draw_usable(scene *S)
{
    cairo_t *cr = S->cr;
    lam_analysis *a = S->a;
    double lw = fmax(1.0, 1.2 * S->s), d[2] = {5 * lw, 3 * lw};
    for (size_t i = 0; i < a->count; i++) {
        const lam_region_result *r = &a->results[i];
        look lk = region_look(a, i);
        if (!lk.answered || (r->flags & LAM_FLAG_SMALL) || !r->usable_px[0] || !r->usable_px[1])
            continue;
        double x = (double)r->usable_at[0], y = (double)r->usable_at[1];
        double w = (double)r->usable_px[0], h = (double)r->usable_px[1];
        cairo_rectangle(cr, x + lw / 2, y + lw / 2, w - lw, h - lw);
        cairo_set_dash(cr, NULL, 0, 0);
        cairo_set_line_width(cr, 2.2 * lw);
        lam_draw_rgba(cr, 0x000000, 0.6);
        cairo_stroke_preserve(cr);
        cairo_set_dash(cr, d, 2, 0);
        cairo_set_line_width(cr, lw);
        lam_draw_rgb(cr, lk.rgb);
        cairo_stroke(cr);
    }
    cairo_set_dash(cr, NULL, 0, 0);
}

static int overlaps(const box *p, const box *q)
{
    return p->x < q->x + q->w && q->x < p->x + p->w && p->y < q->y + q->h && q->y < p->y + p->h;
}

static int is_free(const scene *S, const box *b)
{
    for (size_t k = 0; k < S->n_taken; k++)
        if (overlaps(b, &S->taken[k]))
            return 0;
    return 1;
}

static void take(scene *S, box b, unsigned owner)
{
    if (S->n_taken < sizeof S->taken / sizeof S->taken[0]) {
        S->owner[S->n_taken] = owner;
        S->taken[S->n_taken++] = b;
    }
}

/* What a panel at b would hide: region pixels, those with an answer (a
 * count, or a film's thickness) and not small counting four times;
 * sampled every other pixel. */
static double covered(const scene *S, const box *b)
{
    const lam_analysis *a = S->a;
    size_t x0 = (size_t)fmax(0, b->x), y0 = (size_t)fmax(0, b->y);
    size_t x1 = (size_t)fmin((double)a->width, b->x + b->w);
    size_t y1 = (size_t)fmin((double)a->height, b->y + b->h);
    double sum = 0;
    for (size_t y = y0; y < y1; y += 2)
        for (size_t x = x0; x < x1; x += 2) {
            uint32_t l = a->seg->label[y * a->width + x];
            if (!l)
                continue;
            const lam_region_result *r = &a->results[l - 1];
            int answered = a->thickness ? region_look(a, l - 1).answered : r->layers > 0;
            sum += (r->flags & LAM_FLAG_SMALL) ? 0.2 : answered ? 4 : 1;
        }
    return sum;
}

/* Of the corners and edge middles, where a panel of w x h hides the least
 * (corners first on ties), avoiding what is already taken. */
static box place_panel(const scene *S, double w, double h)
{
    double m = 1.2 * S->fs, W = (double)S->a->width, H = (double)S->a->height;
    double xs[3] = {m, W - m - w, 0.5 * (W - w)}, ys[3] = {m, H - m - h, 0.5 * (H - h)};
    static const int order[8][2] = {{0, 0}, {1, 0}, {0, 1}, {1, 1}, {2, 0}, {2, 1}, {0, 2}, {1, 2}};
    box best = {m, m, w, h};
    double least = INFINITY;
    for (int k = 0; k < 8; k++) {
        box b = {xs[order[k][0]], ys[order[k][1]], w, h};
        if (!is_free(S, &b))
            continue;
        double c = covered(S, &b) + 0.01 * k;
        if (c < least)
            least = c, best = b;
    }
    return best;
}

static void panel(cairo_t *cr, const box *b, double r)
{
    lam_draw_round_rect(cr, b->x, b->y, b->w, b->h, r);
    lam_draw_rgba(cr, 0x101014, 0.86);
    cairo_fill(cr);
}

/* One entry of the legend's colour key. */
typedef struct legend_item {
    char text[24];
    uint32_t rgb;
    int dashed;
} legend_item;

/* The key: 1L..6L+, thick and unassigned; for a film crystal its
 * thickness bands, order-ambiguous and unassigned. Returns the count. */
static size_t legend_items(const lam_analysis *a, legend_item *it)
{
    size_t n = 0;
    if (a->thickness) {
        const double *e = lam_draw_thickness_edges;
        for (int b = 0; b < LAM_DRAW_THICKNESS_BANDS; b++, n++) {
            if (b == 0)
                snprintf(it[n].text, sizeof it[n].text, "&lt; %.0f nm", e[0]); /* markup */
            else if (b == LAM_DRAW_THICKNESS_BANDS - 1)
                snprintf(it[n].text, sizeof it[n].text, "\u2265 %.0f nm", e[b - 1]);
            else
                snprintf(it[n].text, sizeof it[n].text, "%.0f\u2013%.0f nm", e[b - 1], e[b]);
            it[n].rgb = lam_draw_thickness_colour(b), it[n].dashed = 0;
        }
        it[n++] = (legend_item){"order ambiguous", 0xffffff, 1};
    } else {
        size_t K = a->max_layers < 6 ? a->max_layers : 6;
        for (size_t k = 0; k < K; k++, n++) {
            snprintf(it[n].text, sizeof it[n].text, "%zuL%s", k + 1, k + 1 == 6 ? "+" : "");
            it[n].rgb = lam_draw_layer_colour((int)k + 1), it[n].dashed = 0;
        }
        it[n++] = (legend_item){"thick", lam_draw_layer_colour(LAM_DRAW_THICK), 0};
    }
    it[n++] = (legend_item){"unassigned", lam_draw_layer_colour(LAM_DRAW_UNASSIGNED), 1};
    return n;
}

static void legend_swatch(cairo_t *cr, const legend_item *it, double cx, double cy, double sw,
                          double fs)
{
    double d[2] = {0.3 * fs, 0.22 * fs};
    cairo_set_dash(cr, d, it->dashed ? 2 : 0, 0);
    cairo_set_line_width(cr, 0.3 * fs);
    lam_draw_rgb(cr, it->rgb);
    cairo_move_to(cr, cx, cy);
    cairo_line_to(cr, cx + sw, cy);
    cairo_stroke(cr);
    cairo_set_dash(cr, NULL, 0, 0);
}

/* The oxide line of the legend. */
static void legend_oxide(const lam_analysis *a, char *ox, size_t n)
{
    if (a->oxide.fitted && isfinite(a->oxide.sigma))
        snprintf(ox, n, "SiO\u2082 %.1f \u00b1 %.1f nm (fitted)", a->oxide.estimate,
                 a->oxide.sigma);
    else
        snprintf(ox, n, "SiO\u2082 %.0f nm (nominal)", a->oxide.nominal);
}

#define LEGEND_WARNING_CODES 3 /* codes named on the legend; more are counted */

/* The warnings line of the legend: that the image's answers are in doubt
 * and which warnings say why (their messages are in STEM.json and on
 * stderr); empty when there are none. Someone who looks only at the
 * picture must not take a doubted count for a sure one. */
static void legend_warnings(const lam_analysis *a, char *out, size_t n)
{
    size_t k = a->warnings.count, at;
    out[0] = 0;
    if (!k)
        return;
    at = (size_t)snprintf(out, n, "\u26a0 %s:", k == 1 ? "warning" : "warnings");
    for (size_t i = 0; i < k && i < LEGEND_WARNING_CODES && at < n; i++)
        at += (size_t)snprintf(out + at, n - at, "%s %s", i ? "," : "", a->warnings.item[i].code);
    if (k > LEGEND_WARNING_CODES && at < n)
        at += (size_t)snprintf(out + at, n - at, " +%zu more", k - LEGEND_WARNING_CODES);
    if (at < n)
        snprintf(out + at, n - at, " (in the JSON)");
}

/* Legend: file, oxide, the image's warnings, the colour of each class, the
 * line styles; in a font a little smaller than the labels. */
static void draw_legend(scene *S)
{
    cairo_t *cr = S->cr;
    lam_analysis *a = S->a;
    double fs = 0.8 * S->fs, pad = 0.6 * fs, row = 1.4 * fs, sw = 1.4 * fs;
    char ox[160], name[700], warn[160];
    const char *base = strrchr(a->file, '/');
    lam_draw_escape(base ? base + 1 : a->file, name, sizeof name);
    legend_oxide(a, ox, sizeof ox);
    legend_warnings(a, warn, sizeof warn);
    double top = warn[0] ? 3.0 : 2.0; /* rows above the colour key */
    lam_text_style bold = {fs, 1, 0xffffff, 0, 0, 0}, plain = {fs, 0, 0xffffff, 0, 0, 0};
    lam_text_style alert = {fs, 1, 0xffc040, 0, 0, 0};
    lam_text_style note = {0.85 * fs, 0, 0xd0d0d0, 0, 0, 0};
    legend_item it[12];
    size_t items = legend_items(a, it), cols = a->thickness ? 3 : 4;
    const char *key = a->thickness ? "label: thickness \u00b7 p \u00b7 area \u00b7 #region"
                                   : "label: layers \u00b7 p \u00b7 area \u00b7 #region";
    double w0, w1, w2, w3 = 0, wt = 0, h, cell, last;
    lam_draw_text_size(cr, &bold, name, &w0, &h);
    if (warn[0])
        lam_draw_text_size(cr, &alert, warn, &w3, &h);
    lam_draw_text_size(cr, &plain, ox, &w1, &h);
    lam_draw_text_size(cr, &note, key, &w2, &h);
    for (size_t k = 0; k + 1 < items; k++) {
        double w;
        lam_draw_text_size(cr, &plain, it[k].text, &w, &h);
        wt = fmax(wt, w);
    }
    cell = sw + 0.3 * fs + wt + 0.8 * fs;
    lam_draw_text_size(cr, &plain, it[items - 1].text, &last, &h);
    size_t rows = (items + cols - 1) / cols, in_last = items - (rows - 1) * cols;
    double grid_w = fmax((double)cols * cell, (double)(in_last - 1) * cell + sw + 0.3 * fs + last);
    double W = fmax(fmax(fmax(w0, w1), w3), fmax(grid_w, sw + 0.3 * fs + w2)) + 2 * pad;
    double H = 2 * pad + row * (top + (double)rows) + 2 * 1.25 * fs;
    box b = place_panel(S, W, H);
    take(S, b, 0);
    if (S->dry)
        return;
    panel(cr, &b, 0.4 * fs);
    double x = b.x + pad, y = b.y + pad;
    lam_draw_text(cr, x, y, &bold, name);
    lam_draw_text(cr, x, y + row, &plain, ox);
    if (warn[0])
        lam_draw_text(cr, x, y + 2 * row, &alert, warn);
    plain.ay = 0.5;
    for (size_t k = 0; k < items; k++) {
        double cx = x + (double)(k % cols) * cell, cy = y + row * (top + 0.5 + (double)(k / cols));
        legend_swatch(cr, &it[k], cx, cy, sw, fs);
        lam_draw_text(cr, cx + sw + 0.3 * fs, cy, &plain, it[k].text);
    }
    double ky = y + row * (top + (double)rows) + 0.15 * fs;
    double d[2] = {0.25 * fs, 0.18 * fs};
    cairo_set_dash(cr, d, 2, 0);
    cairo_set_line_width(cr, 0.09 * fs);
    lam_draw_rgb(cr, 0xffffff);
    cairo_rectangle(cr, x + 0.1 * fs, ky + 0.15 * fs, sw - 0.2 * fs, 0.7 * fs);
    cairo_stroke(cr);
    cairo_set_dash(cr, NULL, 0, 0);
    lam_draw_text(cr, x + sw + 0.3 * fs, ky, &note, "usable rectangle");
    lam_draw_text(cr, x, ky + 1.25 * fs, &note, key);
}

/* Scale bar of a round length about a fifth of the image width. */
static void draw_scale_bar(scene *S)
{
    lam_analysis *a = S->a;
    if (!(a->um_per_px > 0))
        return;
    static const double nice[] = {0.5, 1, 2, 5, 10, 20, 50, 100, 200, 500, 1000, 2000, 5000};
    double target = (double)a->width * a->um_per_px / 5, len = nice[0];
    for (size_t k = 0; k < sizeof nice / sizeof nice[0]; k++)
        if (nice[k] <= target)
            len = nice[k];
    double px = len / a->um_per_px, fs = S->fs, pad = 0.6 * fs;
    char t[32];
    snprintf(t, sizeof t, len < 1 ? "%.1f \u00b5m" : "%.0f \u00b5m", len);
    lam_text_style ts = {fs, 1, 0xffffff, 0.5, 0, 0};
    double tw, th;
    lam_draw_text_size(S->cr, &ts, t, &tw, &th);
    box b = place_panel(S, fmax(px, tw) + 2 * pad, th + 0.5 * fs + 2 * pad);
    take(S, b, 0);
    if (S->dry)
        return;
    panel(S->cr, &b, 0.4 * fs);
    double cx = b.x + b.w / 2;
    lam_draw_text(S->cr, cx, b.y + pad, &ts, t);
    cairo_rectangle(S->cr, cx - px / 2, b.y + pad + th + 0.1 * fs, px, 0.4 * fs);
    lam_draw_rgb(S->cr, 0xffffff);
    cairo_fill(S->cr);
}

/* "1L 0.98 · 412 µm² #3": layers (in the layer colour), the posterior
 * probability (rounded down, and ">0.99" above 0.99: never "1.00", which
 * would read as certain), area. */
static void label_markup(const lam_analysis *a, size_t i, char *out, size_t n)
{
    const lam_region_result *r = &a->results[i];
    const lam_region_stats *s = &a->seg->regions[i];
    char area[64] = "";
    double u = a->um_per_px;
    double ar = u > 0 ? lam_region_area(s) * u * u : lam_region_area(s);
    snprintf(area, sizeof area, " \u00b7 %.*f %s", ar < 10 ? 1 : 0, ar,
             u > 0 ? "\u00b5m\u00b2" : "px");
    int ci = colour_index(r);
    look lk = region_look(a, i);
    char prob[32] = "", t[24];
    lam_draw_probability(lk.p, 2, t, sizeof t);
    if (isfinite(lk.p))
        snprintf(prob, sizeof prob, " %s", t[0] == '>' ? "&gt;0.99" : t);
    const char *what = ci >= 1 || ci == LAM_DRAW_THICK ? r->label /* "thick", "12.3 nm" */
                       : (r->flags & LAM_FLAG_UNMODELLED) ? "unmodelled" : "unassigned";
    snprintf(out, n, "<span foreground=\"#%06x\" weight=\"bold\">%s</span>%s%s"
                     "<span foreground=\"#a8a8a8\"> #%u</span>",
             (unsigned)lk.rgb, what, prob, area, s->id);
}

/* The point a label refers to: the middle of the usable rectangle (inside
 * the region, unlike the centroid of a ring), else the centroid. */
static void anchor_of(const scene *S, size_t i, double *ax, double *ay)
{
    const lam_region_result *r = &S->a->results[i];
    const lam_region_stats *s = &S->a->seg->regions[i];
    *ax = r->usable_px[0] ? (double)r->usable_at[0] + (double)r->usable_px[0] / 2
                          : s->sx / (double)s->area + 0.5;
    *ay = r->usable_px[1] ? (double)r->usable_at[1] + (double)r->usable_px[1] / 2
                          : s->sy / (double)s->area + 0.5;
}

/* Candidate places for a label box around the region, best first: inside
 * its usable rectangle, beside its box, then rings farther out. */
static size_t label_spots(const scene *S, size_t i, double w, double h, box *spots, size_t max)
{
    const lam_region_stats *s = &S->a->seg->regions[i];
    double ax, ay;
    anchor_of(S, i, &ax, &ay);
    double g = 0.4 * S->fs, bx0 = (double)s->bbox[0], by0 = (double)s->bbox[1];
    double bx1 = (double)s->bbox[2] + 1, by1 = (double)s->bbox[3] + 1, mx = 0.5 * (bx0 + bx1);
    size_t n = 0;
    spots[n++] = (box){ax - w / 2, ay - h / 2, w, h};
    spots[n++] = (box){mx - w / 2, by0 - g - h, w, h};
    spots[n++] = (box){mx - w / 2, by1 + g, w, h};
    spots[n++] = (box){bx1 + g, 0.5 * (by0 + by1) - h / 2, w, h};
    spots[n++] = (box){bx0 - g - w, 0.5 * (by0 + by1) - h / 2, w, h};
    for (int ring = 1; ring <= 6 && n + 8 <= max; ring++)
        for (int k = 0; k < 8; k++) {
            double t = k * M_PI / 4, d = ring * 1.6 * h + 0.5 * w * fabs(cos(t));
            spots[n++] = (box){ax + d * cos(t) - w / 2, ay - d * sin(t) - h / 2, w, h};
        }
    double W = (double)S->a->width, H = (double)S->a->height, m = 0.3 * S->fs;
    for (size_t k = 0; k < n; k++) {
        spots[k].x = fmax(m, fmin(spots[k].x, W - m - w));
        spots[k].y = fmax(m, fmin(spots[k].y, H - m - h));
    }
    return n;
}

/* The label on its panel, with a leader line to the region when it had to
 * move away from it. */
static void draw_label(scene *S, size_t i, const box *b, const char *markup)
{
    cairo_t *cr = S->cr;
    double ax, ay;
    anchor_of(S, i, &ax, &ay);
    if (ax < b->x || ax > b->x + b->w || ay < b->y || ay > b->y + b->h) {
        double lx = fmax(b->x, fmin(ax, b->x + b->w)), ly = fmax(b->y, fmin(ay, b->y + b->h));
        cairo_move_to(cr, lx, ly);
        cairo_line_to(cr, ax, ay);
        cairo_set_line_width(cr, fmax(1.5, 0.3 * S->fs));
        lam_draw_rgba(cr, 0x000000, 0.7);
        cairo_stroke_preserve(cr);
        cairo_set_line_width(cr, fmax(0.75, 0.12 * S->fs));
        lam_draw_rgb(cr, 0xffffff);
        cairo_stroke(cr);
        cairo_arc(cr, ax, ay, fmax(1.5, 0.18 * S->fs), 0, 2 * M_PI);
        cairo_fill(cr);
    }
    panel(cr, b, 0.25 * S->fs);
    lam_text_style ts = {S->fs, 0, 0xffffff, 0, 0, 0};
    lam_draw_text(cr, b->x + 0.35 * S->fs, b->y + 0.18 * S->fs, &ts, markup);
}

static int label_order(const lam_analysis *a, size_t i)
{
    const lam_region_result *r = &a->results[i];
    return r->layers > 0 ? r->layers : r->thick ? 1000 : 1001;
}

/* Labels for every region that is not small: candidates first (fewest
 * layers, then largest), each at the first free spot; a candidate with no
 * free spot keeps its own place, other regions then go unlabelled. */
static void draw_labels(scene *S)
{
    lam_analysis *a = S->a;
    size_t *order = malloc(a->count * sizeof *order), n = 0;
    if (!order)
        return;
    for (size_t i = 0; i < a->count; i++)
        if (!(a->results[i].flags & LAM_FLAG_SMALL))
            order[n++] = i;
    for (size_t p = 1; p < n; p++) /* insertion sort: stable, few regions */
        for (size_t q = p; q > 0; q--) {
            size_t x = order[q - 1], y = order[q];
            int ox = label_order(a, x), oy = label_order(a, y);
            if (ox < oy || (ox == oy && a->seg->regions[x].area >= a->seg->regions[y].area))
                break;
            order[q - 1] = y, order[q] = x;
        }
    lam_text_style ts = {S->fs, 0, 0xffffff, 0, 0, 0};
    box spots[64];
    for (size_t k = 0; k < n; k++) {
        size_t i = order[k];
        char markup[256];
        label_markup(a, i, markup, sizeof markup);
        double w, h;
        lam_draw_text_size(S->cr, &ts, markup, &w, &h);
        w += 0.7 * S->fs, h += 0.36 * S->fs;
        size_t ns = label_spots(S, i, w, h, spots, 64), pick = ns;
        for (size_t q = 0; q < ns && pick == ns; q++)
            if (is_free(S, &spots[q]))
                pick = q;
        if (pick == ns && a->results[i].layers <= 0)
            continue;
        if (pick == ns)
            pick = 0;
        take(S, spots[pick], a->seg->regions[i].id);
        if (!S->dry)
            draw_label(S, i, &spots[pick], markup);
    }
    free(order);
}

lam_status lam_report_trace_outlines(const lam_analysis *a, lam_contours **out, lam_error *err)
{
    lam_contours *ct = NULL;
    *out = NULL;
    lam_status st = lam_contours_trace(a->seg->label, a->width, 0, 0, a->width, a->height,
                                       a->count, &ct, err);
    if (st)
        return st;
    double side = (double)(a->width > a->height ? a->width : a->height);
    /* pixel noise along an edge is not the flake's shape */
    if ((st = lam_contours_simplify(ct, fmax(0.9, 0.9 * side / 1000), err))) {
        lam_contours_free(ct);
        return st;
    }
    *out = ct;
    return LAM_OK;
}

/* Quality of the annotated picture as a JPEG: at 92 without chroma
 * subsampling the 1-pixel outlines and the labels' text are as drawn to
 * the eye at 3x zoom, while the file is about a quarter of the PNG's (the
 * 12 MP bench picture 1.5 MB against 5.6; docs/performance.md). */
#define ANNOTATED_JPEG_QUALITY 92

int lam_report_jpeg_path(const char *path)
{
    const char *dot = strrchr(path, '.');
    return dot && (!strcasecmp(dot, ".jpg") || !strcasecmp(dot, ".jpeg"));
}

lam_status lam_report_write_annotated_with(lam_analysis *a, const lam_contours *outlines,
                                           const char *path, lam_error *err)
{
    lam_status st = lam_analysis_display(a, err);
    if (st)
        return st;
    double side = (double)(a->width > a->height ? a->width : a->height);
    uint32_t *px = expand_display(a);
    if (!px)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the annotated picture");
    lam_canvas cv;
    if ((st = lam_canvas_open_buffer(&cv, px, a->width, a->height, err))) {
        compact_display(a);
        return st;
    }
    scene *S = calloc(1, sizeof *S);
    if (S) {
        S->a = a, S->cr = cv.cr, S->ct = outlines;
        S->s = fmax(0.6, side / 1000);
        S->fs = fmax(11, 0.016 * side);
        draw_outlines(S);
        draw_usable(S);
        draw_legend(S);
        draw_scale_bar(S);
        draw_labels(S);
    }
    free(S);
    st = lam_canvas_finish(&cv, err);
    if (!st && lam_report_jpeg_path(path)) { /* from the drawn words: no conversion */
        st = lam_jpeg_save_xrgb32(path, px, a->width, a->height, ANNOTATED_JPEG_QUALITY, err);
    } else if (!st) {
        compact_display(a);
        st = lam_png_save_rgb8(path, a->display, a->width, a->height, 3, err);
    }
    free(a->display); /* consumed: drawn over */
    a->display = NULL;
    return st;
}

lam_status lam_report_write_annotated(lam_analysis *a, const char *path, lam_error *err)
{
    lam_contours *ct = NULL;
    lam_status st = lam_report_trace_outlines(a, &ct, err);
    if (!st)
        st = lam_report_write_annotated_with(a, ct, path, err);
    lam_contours_free(ct);
    return st;
}

size_t lam_report_annotation_layout(lam_analysis *a, lam_annotation_box *out, size_t max)
{
    cairo_surface_t *surf = cairo_image_surface_create(CAIRO_FORMAT_RGB24, 1, 1);
    cairo_t *cr = cairo_create(surf);
    scene *S = calloc(1, sizeof *S);
    size_t n = 0;
    if (S && cairo_status(cr) == CAIRO_STATUS_SUCCESS) {
        double side = (double)(a->width > a->height ? a->width : a->height);
        S->a = a, S->cr = cr, S->dry = 1;
        S->s = fmax(0.6, side / 1000);
        S->fs = fmax(11, 0.016 * side);
        draw_legend(S);
        draw_scale_bar(S);
        draw_labels(S);
        for (; n < S->n_taken && n < max; n++)
            out[n] = (lam_annotation_box){S->owner[n], S->taken[n].x, S->taken[n].y,
                                          S->taken[n].w, S->taken[n].h};
    }
    free(S);
    cairo_destroy(cr);
    cairo_surface_destroy(surf);
    return n;
}
