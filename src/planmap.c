/* planmap.c - contrast maps over wavelength x oxide and their drawing
 * (SVG, PDF or PNG through lamina/draw.h). */
#include "lamina/planmap.h"
#include "lamina/model.h"
#include "lamina/outfile.h"
#include "lamina/draw.h"

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

/* The map as an image, one pixel per grid point, oxide growing upward. */
static cairo_surface_t *map_image(const lam_planmap *m, double vmax)
{
    cairo_surface_t *img = cairo_image_surface_create(CAIRO_FORMAT_RGB24, (int)m->n_wl,
                                                      (int)m->n_ox);
    if (cairo_surface_status(img) != CAIRO_STATUS_SUCCESS)
        return img;
    unsigned char *data = cairo_image_surface_get_data(img);
    size_t stride = (size_t)cairo_image_surface_get_stride(img);
    for (size_t i = 0; i < m->n_ox; i++) {
        uint32_t *row = (uint32_t *)(void *)(data + (m->n_ox - 1 - i) * stride);
        for (size_t j = 0; j < m->n_wl; j++) {
            int c[3];
            scale_colour(m->contrast[i * m->n_wl + j], vmax, c);
            row[j] = (uint32_t)c[0] << 16 | (uint32_t)c[1] << 8 | (uint32_t)c[2];
        }
    }
    cairo_surface_mark_dirty(img);
    return img;
}

static void draw_map_panel(cairo_t *cr, const lam_planmap *m, const lam_axis *x,
                           const lam_axis *y, double vmax)
{
    cairo_surface_t *img = map_image(m, vmax);
    cairo_save(cr);
    cairo_translate(cr, x->p0, y->p1);
    cairo_scale(cr, (x->p1 - x->p0) / (double)m->n_wl, (y->p0 - y->p1) / (double)m->n_ox);
    cairo_set_source_surface(cr, img, 0, 0);
    cairo_pattern_set_filter(cairo_get_source(cr), CAIRO_FILTER_GOOD);
    cairo_pattern_set_extend(cairo_get_source(cr), CAIRO_EXTEND_PAD);
    cairo_rectangle(cr, 0, 0, (double)m->n_wl, (double)m->n_ox);
    cairo_fill(cr);
    cairo_restore(cr);
    cairo_surface_destroy(img);
    lam_draw_axes(cr, x, y, "wavelength (nm)", "SiO\u2082 thickness (nm)", 11);
}

/* A vertical colour scale from -vmax (bottom) to +vmax with ticks. */
static void draw_scale(cairo_t *cr, double x0, const lam_axis *y, double vmax)
{
    const int steps = 120;
    double h = (y->p0 - y->p1) / steps;
    for (int k = 0; k < steps; k++) {
        int c[3];
        scale_colour(vmax * (1 - 2 * (k + 0.5) / steps), vmax, c);
        cairo_rectangle(cr, x0, y->p1 + k * h, 16, h + 0.6);
        cairo_set_source_rgb(cr, c[0] / 255.0, c[1] / 255.0, c[2] / 255.0);
        cairo_fill(cr);
    }
    lam_axis sy = {-vmax, vmax, y->p0, y->p1, NULL, 0, 0};
    double t[32], step;
    size_t n = lam_nice_ticks(-vmax, vmax, 6, t, 32, &step);
    lam_text_style ts = {10.5, 0, 0x333333, 0, 0.5, 0};
    for (size_t k = 0; k < n; k++) {
        double py = lam_axis_map(&sy, t[k]);
        char lab[32];
        lam_draw_tick_label(t[k], step, lab, sizeof lab);
        cairo_move_to(cr, x0 + 16, py);
        cairo_line_to(cr, x0 + 21, py);
        lam_draw_rgb(cr, 0x333333);
        cairo_set_line_width(cr, 1);
        cairo_stroke(cr);
        lam_draw_text(cr, x0 + 24, py, &ts, lab);
    }
    cairo_rectangle(cr, x0, y->p1, 16, y->p0 - y->p1);
    cairo_stroke(cr);
    lam_text_style tt = {11, 0, 0x111111, 0.5, 1, 90};
    lam_draw_text(cr, x0 + 70, 0.5 * (y->p0 + y->p1), &tt,
                  "contrast (red: flake darker, blue: brighter)");
}

static void draw_channels(cairo_t *cr, const lam_planmap *m, const lam_axis *x, const lam_axis *y)
{
    static const uint32_t colours[3] = {0xc0392b, 0x27ae60, 0x2e5cb8};
    static const char *const names[3] = {"red", "green", "blue"};
    lam_draw_axes(cr, x, y, "camera channel contrast", NULL, 11);
    lam_draw_rgb(cr, 0x888888);
    cairo_set_line_width(cr, 1);
    cairo_move_to(cr, lam_axis_map(x, 0), y->p0);
    cairo_line_to(cr, lam_axis_map(x, 0), y->p1);
    cairo_stroke(cr);
    lam_text_style ts = {11, 1, 0, 0, 0, 0};
    for (size_t c = 0; c < m->channels && c < 3; c++) {
        lam_draw_rgb(cr, colours[c]);
        cairo_set_line_width(cr, 1.8);
        for (size_t i = 0; i < m->n_ox; i++)
            cairo_line_to(cr, lam_axis_map(x, m->channel[c * m->n_ox + i]),
                          lam_axis_map(y, m->ox_lo + m->ox_step * (double)i));
        cairo_stroke(cr);
        ts.colour = colours[c];
        lam_draw_text(cr, x->p0 + 8 + 48 * (double)c, y->p1 - 18, &ts, names[c]);
    }
}

static void mark_oxide(cairo_t *cr, const lam_planmap *m, const lam_axis *x0, const lam_axis *x1,
                       const lam_axis *y)
{
    if (!(m->marked_oxide_nm >= 0))
        return;
    double py = lam_axis_map(y, m->marked_oxide_nm), d[2] = {6, 3};
    cairo_set_dash(cr, d, 2, 0);
    cairo_set_line_width(cr, 1.5);
    lam_draw_rgb(cr, 0x000000);
    cairo_move_to(cr, x0->p0, py);
    cairo_line_to(cr, x0->p1, py);
    cairo_move_to(cr, x1->p0, py);
    cairo_line_to(cr, x1->p1, py);
    cairo_stroke(cr);
    cairo_set_dash(cr, NULL, 0, 0);
    char t[64];
    snprintf(t, sizeof t, "setup %.0f nm", m->marked_oxide_nm);
    lam_text_style ts = {11, 1, 0x000000, 0, 1, 0};
    lam_draw_text(cr, x1->p0 + 4, py - 2, &ts, t);
}

lam_status lam_planmap_write(const lam_planmap *m, const char *path, lam_error *err)
{
    double vmax = 1e-9, cmax = 1e-9;
    for (size_t k = 0; k < m->n_wl * m->n_ox; k++)
        vmax = fmax(vmax, fabs(m->contrast[k]));
    for (size_t k = 0; k < m->channels * m->n_ox; k++)
        cmax = fmax(cmax, fabs(m->channel[k]));
    double lo = -cmax, hi = cmax;
    lam_nice_range(&lo, &hi, 4);
    const double L = 90, T = 70, S = 440;
    lam_canvas cv;
    lam_status st = lam_canvas_open(&cv, path, L + S + 130 + 300 + 40, T + S + 80, err);
    if (st)
        return st;
    cairo_t *cr = cv.cr;
    char title[160];
    snprintf(title, sizeof title, "%zu-layer graphene: contrast (substrate \u2212 flake) / "
                                  "substrate over wavelength and oxide", m->layers);
    lam_text_style ts = {15, 1, 0x111111, 0, 0, 0};
    lam_draw_text(cr, L, 14, &ts, title);
    lam_axis xw = {m->wl_lo - m->wl_step / 2, m->wl_lo + m->wl_step * ((double)m->n_wl - 0.5),
                   L, L + S, NULL, 0, 0};
    lam_axis y = {m->ox_lo - m->ox_step / 2, m->ox_lo + m->ox_step * ((double)m->n_ox - 0.5),
                  T + S, T, NULL, 0, 0};
    draw_map_panel(cr, m, &xw, &y, vmax);
    draw_scale(cr, L + S + 16, &y, vmax);
    lam_axis xc = {lo, hi, L + S + 130, L + S + 130 + 300, NULL, 0, 0};
    draw_channels(cr, m, &xc, &y);
    mark_oxide(cr, m, &xw, &xc, &y);
    lam_text_style note = {11, 0, 0x333333, 0, 0, 0};
    lam_draw_text(cr, L, T - 24, &note, "left: monochromatic light over the setup's illumination "
                                        "cone; right: the setup's camera channels");
    return lam_canvas_finish(&cv, err);
}
