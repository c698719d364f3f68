/* planmap.c - contrast maps over wavelength x oxide and their SVG drawing. */
#include "lamina/planmap.h"
#include "lamina/model.h"
#include "lamina/outfile.h"
#include "lamina/font.h"
#include "lamina/png.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

void lam_planmap_free(lam_planmap *m)
{
    if (!m)
        return;
    free(m->contrast);
    free(m->channel);
    free(m);
}

lam_status lam_planmap_compute(const lam_setup *s, size_t layers, lam_planmap **out,
                               lam_error *err)
{
    lam_planmap *m = calloc(1, sizeof *m);
    if (!m)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a map");
    m->layers = layers;
    m->wl_lo = 400, m->wl_step = 5, m->n_wl = 71;  /* 400-750 nm */
    m->ox_lo = 0, m->ox_step = 5, m->n_ox = 71;    /* 0-350 nm */
    m->marked_oxide_nm = lam_setup_oxide(s);
    m->channels = s->camera.channels;
    m->contrast = malloc(m->n_wl * m->n_ox * sizeof *m->contrast);
    m->channel = malloc(m->channels * m->n_ox * sizeof *m->channel);
    lam_prediction *p = malloc(sizeof *p);
    lam_status st = LAM_OK;
    if (!m->contrast || !m->channel || !p) {
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate a map");
        goto done;
    }
    for (size_t j = 0; j < m->n_wl && !st; j++) {
        lam_model *mod;
        if ((st = lam_model_alloc(s, layers, m->wl_lo + m->wl_step * (double)j, &mod, err)))
            break;
        for (size_t i = 0; i < m->n_ox && !st; i++) {
            st = lam_model_eval(mod, m->ox_lo + m->ox_step * (double)i, s->sheet.fermi_ev, p, err);
            m->contrast[i * m->n_wl + j] = p->contrast[layers][0];
        }
        lam_model_free(mod);
    }
    if (!st) {
        lam_model *mod;
        if (!(st = lam_model_alloc(s, layers, 0, &mod, err))) {
            for (size_t i = 0; i < m->n_ox && !st; i++) {
                st = lam_model_eval(mod, m->ox_lo + m->ox_step * (double)i, s->sheet.fermi_ev, p,
                                    err);
                for (size_t c = 0; c < m->channels; c++)
                    m->channel[c * m->n_ox + i] = p->contrast[layers][c];
            }
            lam_model_free(mod);
        }
    }
done:
    free(p);
    if (st) {
        lam_planmap_free(m);
        return st;
    }
    *out = m;
    return LAM_OK;
}

/* Diverging scale: blue (flake brighter) - white - red (flake darker). */
static void scale_colour(double v, double vmax, int rgb[3])
{
    double t = vmax > 0 ? v / vmax : 0;
    t = t > 1 ? 1 : (t < -1 ? -1 : t);
    if (t >= 0) {
        rgb[0] = 255;
        rgb[1] = (int)lround(255 * (1 - 0.85 * t));
        rgb[2] = (int)lround(255 * (1 - t));
    } else {
        rgb[0] = (int)lround(255 * (1 + t));
        rgb[1] = (int)lround(255 * (1 + 0.6 * t));
        rgb[2] = 255;
    }
}

lam_status lam_planmap_write_svg(const lam_planmap *m, const char *path, lam_error *err)
{
    lam_outfile of;
    lam_status st = lam_outfile_open(&of, path, err);
    if (st)
        return st;
    FILE *f = of.fp;
    const double x0 = 80, y0 = 40, cw = 6, ch = 5; /* cell size in px */
    double W = x0 + cw * (double)m->n_wl, H = y0 + ch * (double)m->n_ox;
    double vmax = 0;
    for (size_t k = 0; k < m->n_wl * m->n_ox; k++)
        vmax = fmax(vmax, fabs(m->contrast[k]));
    double sx0 = W + 170, sw = 300; /* channel strip panel */
    fprintf(f, "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n"
               "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"%.0f\" height=\"%.0f\" "
               "font-family=\"sans-serif\" font-size=\"12\">\n"
               "<rect width=\"100%%\" height=\"100%%\" fill=\"white\"/>\n",
            sx0 + sw + 40, H + 70);
    fprintf(f, "<text x=\"%.0f\" y=\"20\" font-size=\"14\">%zu-layer graphene contrast "
               "(substrate - flake)/substrate, monochromatic</text>\n", x0, m->layers);
    for (size_t i = 0; i < m->n_ox; i++)
        for (size_t j = 0; j < m->n_wl; j++) {
            int c[3];
            scale_colour(m->contrast[i * m->n_wl + j], vmax, c);
            fprintf(f, "<rect x=\"%.0f\" y=\"%.0f\" width=\"%.0f\" height=\"%.0f\" "
                       "fill=\"rgb(%d,%d,%d)\"/>\n",
                    x0 + cw * (double)j, y0 + ch * (double)i, cw + 0.5, ch + 0.5, c[0], c[1], c[2]);
        }
    for (double wl = 400; wl <= 750; wl += 50) {
        double x = x0 + (wl - m->wl_lo) / m->wl_step * cw + cw / 2;
        fprintf(f, "<text x=\"%.1f\" y=\"%.0f\" text-anchor=\"middle\">%.0f</text>\n", x, H + 16, wl);
    }
    fprintf(f, "<text x=\"%.0f\" y=\"%.0f\" text-anchor=\"middle\">wavelength (nm)</text>\n",
            x0 + (W - x0) / 2, H + 34);
    for (double ox = 0; ox <= 350; ox += 50) {
        double y = y0 + (ox - m->ox_lo) / m->ox_step * ch + ch / 2;
        fprintf(f, "<text x=\"%.0f\" y=\"%.1f\" text-anchor=\"end\">%.0f</text>\n", x0 - 6, y + 4, ox);
    }
    fprintf(f, "<text x=\"18\" y=\"%.0f\" transform=\"rotate(-90 18 %.0f)\" "
               "text-anchor=\"middle\">SiO2 thickness (nm)</text>\n", y0 + (H - y0) / 2, y0 + (H - y0) / 2);
    if (m->marked_oxide_nm >= 0) {
        double y = y0 + (m->marked_oxide_nm - m->ox_lo) / m->ox_step * ch + ch / 2;
        fprintf(f, "<line x1=\"%.0f\" x2=\"%.0f\" y1=\"%.1f\" y2=\"%.1f\" stroke=\"black\" "
                   "stroke-dasharray=\"5,3\"/>\n<text x=\"%.0f\" y=\"%.1f\">setup %.0f nm</text>\n",
                x0, W, y, y, W + 4, y + 4, m->marked_oxide_nm);
    }
    /* colour scale */
    for (int k = 0; k <= 40; k++) {
        int c[3];
        double v = vmax * (1 - k / 20.0);
        scale_colour(v, vmax, c);
        fprintf(f, "<rect x=\"%.0f\" y=\"%.1f\" width=\"14\" height=\"%.2f\" fill=\"rgb(%d,%d,%d)\"/>\n",
                W + 100, y0 + k * (H - y0) / 41.0, (H - y0) / 41.0 + 0.5, c[0], c[1], c[2]);
    }
    fprintf(f, "<text x=\"%.0f\" y=\"%.0f\">%+.3f</text>\n<text x=\"%.0f\" y=\"%.0f\">%+.3f</text>\n",
            W + 92, y0 - 4, vmax, W + 92, H + 12, -vmax);
    /* channel strips: camera-channel contrast against oxide */
    static const char *names[3] = {"R", "G", "B"}, *colours[3] = {"#c0392b", "#27ae60", "#2e5cb8"};
    double cmax = 1e-9;
    for (size_t k = 0; k < m->channels * m->n_ox; k++)
        cmax = fmax(cmax, fabs(m->channel[k]));
    double mid = sx0 + sw / 2;
    fprintf(f, "<text x=\"%.0f\" y=\"%.0f\">camera channels</text>\n", sx0, y0 - 8);
    fprintf(f, "<line x1=\"%.0f\" x2=\"%.0f\" y1=\"%.0f\" y2=\"%.0f\" stroke=\"#888\"/>\n", mid,
            mid, y0, H);
    for (size_t c = 0; c < m->channels && c < 3; c++) {
        fprintf(f, "<polyline fill=\"none\" stroke=\"%s\" stroke-width=\"1.5\" points=\"",
                colours[c]);
        for (size_t i = 0; i < m->n_ox; i++)
            fprintf(f, "%.1f,%.1f ", mid + m->channel[c * m->n_ox + i] / cmax * sw / 2,
                    y0 + ch * (double)i + ch / 2);
        fprintf(f, "\"/>\n<text x=\"%.0f\" y=\"%.0f\" fill=\"%s\">%s</text>\n",
                sx0 + 10 + 20 * (double)c, H + 16, colours[c], names[c]);
    }
    fprintf(f, "<text x=\"%.0f\" y=\"%.0f\" text-anchor=\"end\">%+.3f</text>\n"
               "<text x=\"%.0f\" y=\"%.0f\" text-anchor=\"middle\">channel contrast "
               "(0 at the grey line)</text>\n",
            sx0 + sw, H + 16, cmax, mid, H + 34);
    if (m->marked_oxide_nm >= 0) {
        double y = y0 + (m->marked_oxide_nm - m->ox_lo) / m->ox_step * ch + ch / 2;
        fprintf(f, "<line x1=\"%.0f\" x2=\"%.0f\" y1=\"%.1f\" y2=\"%.1f\" stroke=\"black\" "
                   "stroke-dasharray=\"5,3\"/>\n", sx0, sx0 + sw, y, y);
    }
    fprintf(f, "</svg>\n");
    return lam_outfile_commit(&of, err);
}

static void put(uint8_t *img, size_t w, size_t h, long x, long y, const uint8_t c[3])
{
    if (x < 0 || y < 0 || (size_t)x >= w || (size_t)y >= h)
        return;
    memcpy(img + ((size_t)y * w + (size_t)x) * 3, c, 3);
}

static void line(uint8_t *img, size_t w, size_t h, long x0, long y0, long x1, long y1,
                 const uint8_t c[3])
{
    long dx = labs(x1 - x0), dy = -labs(y1 - y0), sx = x0 < x1 ? 1 : -1, sy = y0 < y1 ? 1 : -1;
    long e = dx + dy;
    for (;;) {
        put(img, w, h, x0, y0, c);
        put(img, w, h, x0 + 1, y0, c);
        if (x0 == x1 && y0 == y1)
            break;
        long e2 = 2 * e;
        if (e2 >= dy)
            e += dy, x0 += sx;
        if (e2 <= dx)
            e += dx, y0 += sy;
    }
}

lam_status lam_planmap_write_png(const lam_planmap *m, const char *path, lam_error *err)
{
    const long cw = 8, ch = 6, x0 = 70, y0 = 40;
    long W = x0 + cw * (long)m->n_wl, H = y0 + ch * (long)m->n_ox;
    long sx0 = W + 120, sw = 300, IW = sx0 + sw + 30, IH = H + 60;
    uint8_t *img = malloc((size_t)IW * (size_t)IH * 3);
    if (!img)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the map image");
    memset(img, 255, (size_t)IW * (size_t)IH * 3);
    double vmax = 0;
    for (size_t k = 0; k < m->n_wl * m->n_ox; k++)
        vmax = fmax(vmax, fabs(m->contrast[k]));
    for (size_t i = 0; i < m->n_ox; i++)
        for (size_t j = 0; j < m->n_wl; j++) {
            int c[3];
            scale_colour(m->contrast[i * m->n_wl + j], vmax, c);
            uint8_t u[3] = {(uint8_t)c[0], (uint8_t)c[1], (uint8_t)c[2]};
            for (long y = 0; y < ch; y++)
                for (long x = 0; x < cw; x++)
                    put(img, (size_t)IW, (size_t)IH, x0 + cw * (long)j + x, y0 + ch * (long)i + y, u);
        }
    static const uint8_t black[3] = {0, 0, 0}, grey[3] = {140, 140, 140};
    char t[96];
    snprintf(t, sizeof t, "%zuL CONTRAST (SUBSTRATE-FLAKE)/SUBSTRATE", m->layers);
    lam_font_draw(img, (size_t)IW, (size_t)IH, x0, 12, t, 2, black);
    for (double wl = 400; wl <= 750; wl += 50) {
        snprintf(t, sizeof t, "%.0f", wl);
        long x = x0 + (long)((wl - m->wl_lo) / m->wl_step * (double)cw);
        lam_font_draw(img, (size_t)IW, (size_t)IH, x - 8, H + 6, t, 1, black);
    }
    lam_font_draw(img, (size_t)IW, (size_t)IH, x0 + 90, H + 20, "WAVELENGTH (NM)", 1, black);
    for (double ox = 0; ox <= 350; ox += 50) {
        snprintf(t, sizeof t, "%.0f", ox);
        long y = y0 + (long)((ox - m->ox_lo) / m->ox_step * (double)ch);
        lam_font_draw(img, (size_t)IW, (size_t)IH, x0 - 26, y - 3, t, 1, black);
    }
    lam_font_draw(img, (size_t)IW, (size_t)IH, 4, y0 - 12, "SIO2 NM", 1, black);
    if (m->marked_oxide_nm >= 0) {
        long y = y0 + (long)((m->marked_oxide_nm - m->ox_lo) / m->ox_step * (double)ch) + ch / 2;
        for (long x = x0; x < W; x += 4)
            line(img, (size_t)IW, (size_t)IH, x, y, x + 1, y, black);
        for (long x = sx0; x < sx0 + sw; x += 4)
            line(img, (size_t)IW, (size_t)IH, x, y, x + 1, y, black);
    }
    for (long k = 0; k < H - y0; k++) {
        int c[3];
        scale_colour(vmax * (1 - 2.0 * (double)k / (double)(H - y0)), vmax, c);
        uint8_t u[3] = {(uint8_t)c[0], (uint8_t)c[1], (uint8_t)c[2]};
        for (long x = 0; x < 14; x++)
            put(img, (size_t)IW, (size_t)IH, W + 40 + x, y0 + k, u);
    }
    snprintf(t, sizeof t, "%+.3f", vmax);
    lam_font_draw(img, (size_t)IW, (size_t)IH, W + 30, y0 - 12, t, 1, black);
    snprintf(t, sizeof t, "%+.3f", -vmax);
    lam_font_draw(img, (size_t)IW, (size_t)IH, W + 30, H + 4, t, 1, black);
    double cmax = 1e-9;
    for (size_t k = 0; k < m->channels * m->n_ox; k++)
        cmax = fmax(cmax, fabs(m->channel[k]));
    long mid = sx0 + sw / 2;
    line(img, (size_t)IW, (size_t)IH, mid, y0, mid, H, grey);
    static const uint8_t cc[3][3] = {{192, 57, 43}, {39, 174, 96}, {46, 92, 184}};
    static const char *names[3] = {"R", "G", "B"};
    for (size_t c = 0; c < m->channels && c < 3; c++) {
        long px = -1, py = -1;
        for (size_t i = 0; i < m->n_ox; i++) {
            long x = mid + (long)(m->channel[c * m->n_ox + i] / cmax * (double)sw / 2);
            long y = y0 + ch * (long)i + ch / 2;
            if (px >= 0)
                line(img, (size_t)IW, (size_t)IH, px, py, x, y, cc[c]);
            px = x, py = y;
        }
        lam_font_draw(img, (size_t)IW, (size_t)IH, sx0 + 10 * (long)c, H + 6, names[c], 1, cc[c]);
    }
    lam_font_draw(img, (size_t)IW, (size_t)IH, sx0, y0 - 12, "CAMERA CHANNELS", 1, black);
    snprintf(t, sizeof t, "%+.3f", cmax);
    lam_font_draw(img, (size_t)IW, (size_t)IH, sx0 + sw - 40, H + 6, t, 1, black);
    lam_status st = lam_png_save_rgb8(path, img, (size_t)IW, (size_t)IH, 3, err);
    free(img);
    return st;
}
