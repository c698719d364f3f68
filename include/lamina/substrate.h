/*
 * lamina/substrate.h - the bare substrate: which part of an image it is,
 * its smooth flat field per channel and its pixel noise.
 *
 * The image is cut into tiles; uniform tiles are clustered in brightness
 * (about a smooth fit) and chromaticity (ln R/G, ln B/G, which vignetting
 * and illumination gradients do not change); of the clusters, the
 * substrate is the one against which its neighbours look like graphene
 * layers in every channel (when a ladder is given and the evidence is
 * clear; src/substrate_modes.c), else the largest, or the tiles of a
 * user-given region. A robust fit (bisquare, as GSL's; src/robust_fit.h) of ln(level) per channel
 * over those tiles with the basis 1, x, y, x^2, xy, y^2, r^4 gives the flat
 * field B_c(x, y), refitted once over every tile close to it. Noise is the
 * median relative pixel standard deviation of substrate tiles; the
 * effective pixel count of a region mean is n / kappa, with kappa measured
 * from the scatter of tile means about the fit. The contrast map itself is
 * lamina/contrast.h.
 */
#ifndef LAMINA_SUBSTRATE_H
#define LAMINA_SUBSTRATE_H

#include <stddef.h>
#include "lamina/error.h"
#include "lamina/image.h"
#include "lamina/model.h"

#define LAM_SUBSTRATE_TERMS 7

typedef struct lam_substrate_options {
    size_t tile;          /* tile size in pixels (default 32) */
    int has_roi;          /* use roi as the substrate's seed */
    size_t roi[4];        /* x, y, w, h */
    size_t threads;       /* worker threads for the pixel passes (1) */
    const lam_prediction *ladder; /* optional: N = 1..max_layers of the model's ladder; the
                                   * substrate is the peak the others look like graphene
                                   * against (channels beyond its own repeat its last) */
} lam_substrate_options;

typedef struct lam_substrate {
    double coef[3][LAM_SUBSTRATE_TERMS]; /* ln B_c in the normalised basis */
    double level[3];      /* mean fitted level over the substrate tiles */
    double noise[3];      /* relative per-pixel sigma */
    double kappa;         /* correlation factor: n_eff = n / kappa (>= 1) */
    double tile_scatter[3]; /* robust sd of substrate tile means about the flat field:
                             * low-frequency errors (fit residuals, JPEG colour blocks) */
    double falloff;       /* 1 - min/max of the fitted G level over the image */
    double fraction;      /* fraction of tiles taken as substrate */
    size_t tiles_used, tiles_total;
    size_t width, height;
} lam_substrate;

/* 32-px tiles, no region of interest, one thread, no ladder (the largest
 * mode is the substrate). */
lam_substrate_options lam_substrate_options_default(void);

/* A region of interest "X,Y,W,H" in pixels (whole numbers, W and H >= 1)
 * as the substrate's seed (o->roi, o->has_roi). LAM_ERANGE naming NAME
 * otherwise, o unchanged. */
lam_status lam_substrate_roi_parse(lam_substrate_options *o, const char *name, const char *text,
                                   lam_error *err);

/* Estimate the substrate. LAM_ERANGE with a hint to --substrate-roi when no
 * substrate can be found. */
lam_status lam_substrate_estimate(const lam_image *img, const lam_substrate_options *opt,
                                  lam_substrate *out, lam_error *err);

/* Fitted substrate level at pixel (x, y) (pixel centres at +0.5). */
void lam_substrate_eval(const lam_substrate *s, double x, double y, double out[3]);

#endif
