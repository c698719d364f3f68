/* report.c - JSON analysis, layer map, annotated image and contrast plot. */
#include "lamina/report.h"
#include "lamina/font.h"
#include "lamina/outfile.h"
#include "lamina/png.h"
#include "lamina/version.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

/* Saturated colours that stay legible on violet, blue, gold or grey
 * substrates; every outline is drawn over a black halo. */
void lam_report_palette(unsigned v, uint8_t rgb[3])
{
    static const uint8_t pal[8][3] = {
        {255, 214, 0},   /* 1L gold */
        {0, 229, 255},   /* 2L cyan */
        {255, 64, 200},  /* 3L magenta */
        {120, 255, 60},  /* 4L lime */
        {255, 138, 0},   /* 5L orange */
        {170, 120, 255}, /* 6L lavender */
        {255, 255, 255}, /* 7L+ white */
        {255, 40, 40},   /* unassigned red */
    };
    const uint8_t *p = v == 255 ? pal[7] : v == 254 ? pal[6] : pal[v >= 1 && v <= 6 ? v - 1 : 6];
    memcpy(rgb, p, 3);
}

unsigned lam_report_layer_value(const lam_region_result *r)
{
    if (r->flags & (LAM_FLAG_UNMODELLED | LAM_FLAG_SATURATED))
        return 255u;
    if (r->layers > 0)
        return (unsigned)r->layers;
    return r->thick ? 254u : 255u;
}

lam_status lam_report_write_layers(const lam_analysis *a, const char *path, lam_error *err)
{
    size_t n = a->width * a->height;
    uint8_t *map = malloc(n);
    if (!map)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the layer map");
    for (size_t k = 0; k < n; k++) {
        uint32_t l = a->seg->label[k];
        map[k] = l ? (uint8_t)lam_report_layer_value(&a->results[l - 1])
                   : (a->seg->cls[k] == LAM_CLASS_SUBSTRATE ? 0 : 255);
    }
    lam_status st = lam_png_save_grey8(path, map, a->width, a->height, err);
    free(map);
    return st;
}

static void fill_rect(uint8_t *rgb, size_t w, size_t h, long x0, long y0, long x1, long y1,
                      const uint8_t c[3], int blend)
{
    for (long y = y0 < 0 ? 0 : y0; y < y1 && y < (long)h; y++)
        for (long x = x0 < 0 ? 0 : x0; x < x1 && x < (long)w; x++) {
            uint8_t *p = rgb + ((size_t)y * w + (size_t)x) * 3;
            for (int k = 0; k < 3; k++)
                p[k] = blend ? (uint8_t)((p[k] + 3 * c[k]) / 4) : c[k];
        }
}

static void text_box(uint8_t *rgb, size_t w, size_t h, long x, long y, const char *text, int s,
                     const uint8_t fg[3])
{
    static const uint8_t black[3] = {0, 0, 0};
    long tw = (long)lam_font_text_width(text, s);
    fill_rect(rgb, w, h, x - s, y - s, x + tw + s, y + (LAM_FONT_H + 1) * s, black, 1);
    lam_font_draw(rgb, w, h, x, y, text, s, fg);
}

lam_status lam_report_write_annotated(lam_analysis *a, const char *path, lam_error *err)
{
    size_t w = a->width, h = a->height;
    uint8_t *rgb = a->display; /* drawn over in place: no second 3 B/px buffer */
    if (!rgb)
        return lam_error_set(err, LAM_EINVAL, "the display copy was already used");
    const uint32_t *lab = a->seg->label;
    int s = w >= 1600 ? (int)(w / 800) : 1;
    /* outlines: region pixels with a 4-neighbour outside the region, drawn
     * max(1, s/2) pixels thick over a black halo so they stay visible on any
     * substrate and when the image is viewed scaled down */
    long r_out = s / 2 > 1 ? s / 2 : 1;
    static const uint8_t black[3] = {0, 0, 0};
    for (int pass = 0; pass < 2; pass++)
        for (size_t y = 0; y < h; y++)
            for (size_t x = 0; x < w; x++) {
                size_t k = y * w + x;
                uint32_t l = lab[k];
                if (!l)
                    continue;
                const lam_region_result *r = &a->results[l - 1];
                if ((r->flags & LAM_FLAG_SMALL) && r->layers == 0)
                    continue;
                int edge = x == 0 || y == 0 || x + 1 == w || y + 1 == h || lab[k - 1] != l ||
                           lab[k + 1] != l || lab[k - w] != l || lab[k + w] != l;
                if (!edge)
                    continue;
                uint8_t c[3];
                lam_report_palette(lam_report_layer_value(r), c);
                /* pass 0: halo one pixel wider; pass 1: the colour */
                long rr = pass == 0 ? r_out : r_out - 1;
                fill_rect(rgb, w, h, (long)x - rr, (long)y - rr, (long)x + rr + 1, (long)y + rr + 1,
                          pass == 0 ? black : c, 0);
            }
    /* labels at the top-left of each region's box */
    for (size_t i = 0; i < a->count; i++) {
        const lam_region_result *r = &a->results[i];
        const lam_region_stats *rs = &a->seg->regions[i];
        if ((r->flags & LAM_FLAG_SMALL) && r->layers != 1 && r->layers != 2)
            continue;
        char text[48];
        unsigned value = lam_report_layer_value(r);
        const char *lab_txt = value == 255 ? "?" : (value == 254 ? "THICK" : r->label);
        snprintf(text, sizeof text, "%s%s #%u", lab_txt,
                 (r->flags & LAM_FLAG_AMBIGUOUS) && r->layers > 0 ? "?" : "", rs->id);
        uint8_t c[3];
        lam_report_palette(lam_report_layer_value(r), c);
        /* at the centre of the usable rectangle (always inside the region,
         * unlike the centroid of a ring), kept inside the image */
        long tw = (long)lam_font_text_width(text, s);
        long tx = (long)(r->usable_at[0] + r->usable_px[0] / 2) - tw / 2;
        long ty = (long)(r->usable_at[1] + r->usable_px[1] / 2) - LAM_FONT_H * s / 2;
        if (tx < s)
            tx = s;
        if (tx + tw + s > (long)w)
            tx = (long)w - tw - s;
        text_box(rgb, w, h, tx, ty, text, s, c);
    }
    /* legend, top-left */
    long lx = 4 * s, ly = 4 * s;
    static const uint8_t white[3] = {255, 255, 255};
    size_t shown = a->max_layers < 6 ? a->max_layers : 6;
    for (size_t N = 1; N <= shown + 2; N++) {
        unsigned v = N <= shown ? (unsigned)N : (N == shown + 1 ? 254u : 255u);
        char t[32];
        if (v == 254)
            snprintf(t, sizeof t, "THICK");
        else if (v == 255)
            snprintf(t, sizeof t, "UNASSIGNED");
        else
            snprintf(t, sizeof t, "%uL", v);
        uint8_t c[3];
        lam_report_palette(v, c);
        text_box(rgb, w, h, lx, ly, t, s, c);
        ly += (LAM_FONT_H + 4) * s;
    }
    char ox[64];
    if (a->oxide.fitted)
        snprintf(ox, sizeof ox, "SIO2 %.1f NM (FIT)", a->oxide.estimate);
    else
        snprintf(ox, sizeof ox, "SIO2 %.0f NM (NOMINAL)", a->oxide.nominal);
    text_box(rgb, w, h, lx, ly, ox, s, white);
    /* scale bar, bottom-right */
    if (a->um_per_px > 0) {
        static const double nice[] = {1, 2, 5, 10, 20, 50, 100, 200, 500, 1000};
        double target = (double)w * a->um_per_px / 5, len = nice[0];
        for (size_t k = 0; k < sizeof nice / sizeof nice[0]; k++)
            if (nice[k] <= target)
                len = nice[k];
        long px = (long)lround(len / a->um_per_px);
        long x1 = (long)w - 8 * s, x0 = x1 - px, y1 = (long)h - 8 * s, y0 = y1 - 3 * s;
        fill_rect(rgb, w, h, x0 - s, y0 - s, x1 + s, y1 + s, black, 0);
        fill_rect(rgb, w, h, x0, y0, x1, y1, white, 0);
        char t[32];
        snprintf(t, sizeof t, "%.0f UM", len);
        text_box(rgb, w, h, x0, y0 - (LAM_FONT_H + 3) * s, t, s, white);
    }
    return lam_png_save_rgb8(path, rgb, w, h, 3, err);
}

lam_status lam_report_write_svg(const lam_analysis *a, const char *path, lam_error *err)
{
    lam_outfile of;
    lam_status st = lam_outfile_open(&of, path, err);
    if (st)
        return st;
    FILE *f = of.fp;
    const double pw = 300, ph = 260, m = 50;
    size_t K = a->max_layers;
    double cmin = 0, cmax = 0;
    for (size_t N = 0; N <= K; N++)
        for (int c = 0; c < 3; c++)
            cmin = fmin(cmin, a->ladder.contrast[N][c]), cmax = fmax(cmax, a->ladder.contrast[N][c]);
    for (size_t i = 0; i < a->count; i++)
        for (int c = 0; c < 3; c++)
            cmin = fmin(cmin, a->results[i].mean[c]), cmax = fmax(cmax, a->results[i].mean[c]);
    cmin -= 0.02, cmax += 0.02;
    fprintf(f, "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<svg xmlns=\"http://www.w3.org/2000/svg\" "
               "width=\"%.0f\" height=\"%.0f\" font-family=\"sans-serif\" font-size=\"11\">\n"
               "<rect width=\"100%%\" height=\"100%%\" fill=\"white\"/>\n"
               "<text x=\"%.0f\" y=\"18\" font-size=\"13\">region contrast (substrate - flake)/substrate "
               "against the model ladder, oxide %.1f nm%s</text>\n",
            3 * (pw + m) + m, ph + 2 * m, m, a->oxide.estimate, a->oxide.fitted ? " (fitted)" : "");
    static const char *names[3] = {"R", "G", "B"}, *col[3] = {"#c0392b", "#27ae60", "#2e5cb8"};
    for (int c = 0; c < 3; c++) {
        double x0 = m + (double)c * (pw + m), y0 = m;
#define PX(N) (x0 + (double)(N) / (double)(K + 1) * pw)
#define PY(v) (y0 + ph - ((v) - cmin) / (cmax - cmin) * ph)
        fprintf(f, "<rect x=\"%.1f\" y=\"%.1f\" width=\"%.0f\" height=\"%.0f\" fill=\"none\" "
                   "stroke=\"#444\"/>\n<text x=\"%.1f\" y=\"%.1f\" fill=\"%s\">channel %s</text>\n",
                x0, y0, pw, ph, x0 + 4, y0 + 14, col[c], names[c]);
        fprintf(f, "<line x1=\"%.1f\" x2=\"%.1f\" y1=\"%.1f\" y2=\"%.1f\" stroke=\"#bbb\"/>\n", x0,
                x0 + pw, PY(0.0), PY(0.0));
        fprintf(f, "<polyline fill=\"none\" stroke=\"%s\" points=\"", col[c]);
        for (size_t N = 0; N <= K; N++)
            fprintf(f, "%.1f,%.1f ", PX(N), PY(a->ladder.contrast[N][c]));
        fprintf(f, "\"/>\n");
        for (size_t N = 0; N <= K; N++)
            fprintf(f, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"2.5\" fill=\"%s\"/>"
                       "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\">%zu</text>\n",
                    PX(N), PY(a->ladder.contrast[N][c]), col[c], PX(N), y0 + ph + 14, N);
        for (size_t i = 0; i < a->count; i++) {
            const lam_region_result *r = &a->results[i];
            if (r->flags & LAM_FLAG_SMALL)
                continue;
            double N = r->layers > 0 ? (double)r->layers : (double)K + 0.7;
            double jitter = ((double)(i % 7) - 3) * 0.03;
            double x = PX(N + jitter), y = PY(r->mean[c]);
            double e = r->sigma[c] / (cmax - cmin) * ph;
            fprintf(f, "<line x1=\"%.1f\" x2=\"%.1f\" y1=\"%.1f\" y2=\"%.1f\" stroke=\"black\"/>"
                       "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"3\" fill=\"%s\" stroke=\"black\">"
                       "<title>region %u %s</title></circle>\n",
                    x, x, y - e, y + e, x, y, r->layers > 0 ? "white" : "#ff6060",
                    a->seg->regions[i].id, r->label);
        }
        fprintf(f, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\">layers</text>\n", x0 + pw / 2,
                y0 + ph + 28);
        fprintf(f, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">%.2f</text><text x=\"%.1f\" "
                   "y=\"%.1f\" text-anchor=\"end\">%.2f</text>\n",
                x0 - 3, y0 + 10, cmax, x0 - 3, y0 + ph, cmin);
#undef PX
#undef PY
    }
    fprintf(f, "<text x=\"%.0f\" y=\"%.0f\">white: assigned regions (error bar 1 sigma incl. model "
               "floor); red: unassigned or thick (right edge)</text>\n</svg>\n",
            m, ph + 2 * m - 6);
    return lam_outfile_commit(&of, err);
}
