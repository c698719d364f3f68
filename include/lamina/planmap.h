/*
 * lamina/planmap.h - planning maps (`lamina plan`): N-layer contrast over
 * wavelength and oxide thickness, for choosing substrates and filters.
 *
 * lam_planmap_compute fills a grid of monochromatic contrast C(lambda, d)
 * (rows: oxide, columns: wavelength) and, per camera channel, C_c(d).
 * lam_planmap_write draws both with axes, a colour scale and the
 * setup's oxide marked, written atomically. Caller owns the lam_planmap
 * (lam_planmap_free).
 */
#ifndef LAMINA_PLANMAP_H
#define LAMINA_PLANMAP_H

#include <stddef.h>
#include "lamina/error.h"
#include "lamina/setup.h"

typedef struct lam_planmap {
    size_t layers, n_wl, n_ox, channels;
    double wl_lo, wl_step, ox_lo, ox_step, marked_oxide_nm;
    double *contrast;  /* n_ox x n_wl, monochromatic */
    double *channel;   /* channels x n_ox, camera channels */
} lam_planmap;

/* The contrast of 'layers'-layer flakes for the setup's optics over
 * 400-750 nm x 0-350 nm oxide (monochromatic) and per camera channel over
 * oxide; *out is allocated (LAM_ENOMEM, or the model's status). */
lam_status lam_planmap_compute(const lam_setup *s, size_t layers, lam_planmap **out,
                               lam_error *err);

/* Release a map from lam_planmap_compute; m may be NULL. */
void lam_planmap_free(lam_planmap *m);

/* Draw the map and the channel curves (axes, colour scale, the setup's
 * oxide marked); the format follows the file name: .svg, .pdf or .png.
 * Written atomically. */
lam_status lam_planmap_write(const lam_planmap *m, const char *path, lam_error *err);

#endif
