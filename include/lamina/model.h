/*
 * lamina/model.h - predicted contrast of N-layer flakes as a camera sees it.
 *
 * For a setup (lamina/setup.h) the model integrates, per camera channel c,
 *   R_c(N) = sum_l w_c(l) <R(l, N)>_cone
 * where <.>_cone averages s and p reflectance over the illumination cone
 * 0..asin(NA_ill / n_ambient) with the pupil weight sin(t)cos(t) (default)
 * or sin(t), by Gauss-Legendre quadrature. N-layer graphene is N sheets,
 * interlayer_nm apart, on top of the substrate stack. The contrast is
 *   C_c(N) = (R_c(0) - R_c(N)) / R_c(0)     (positive: flake darker).
 * The ratio of channel integrals is not the integral of monochromatic
 * contrasts; the model always integrates reflectances first.
 *
 * Ownership: lam_model_alloc copies what it needs from the setup (the setup
 * may be cleared afterwards) and is released by lam_model_free. A model is
 * not safe for concurrent lam_model_eval calls; use one per thread.
 */
#ifndef LAMINA_MODEL_H
#define LAMINA_MODEL_H

#include <stddef.h>
#include "lamina/error.h"
#include "lamina/setup.h"

#define LAM_MODEL_MAX_LAYERS 40

typedef struct lam_model lam_model;

typedef struct lam_prediction {
    size_t channels, max_layers;
    double oxide_nm, fermi_ev;
    double substrate[LAM_MAX_CHANNELS];                       /* R_c(0) */
    double reflectance[LAM_MODEL_MAX_LAYERS + 1][LAM_MAX_CHANNELS]; /* R_c(N), N = 0..K */
    double contrast[LAM_MODEL_MAX_LAYERS + 1][LAM_MAX_CHANNELS];    /* C_c(N); row 0 is 0 */
} lam_prediction;

/* Build a model for N = 1..max_layers (<= LAM_MODEL_MAX_LAYERS). With
 * monochromatic_nm > 0 the camera becomes one channel at that wavelength. */
lam_status lam_model_alloc(const lam_setup *setup, size_t max_layers, double monochromatic_nm,
                           lam_model **out, lam_error *err);
void lam_model_free(lam_model *m);

/* The coarse copy used inside fits: 5 nm spectral step and 8 cone nodes
 * (contrasts within ~1e-4 of the full model, several times faster). */
lam_status lam_model_alloc_fast(const lam_setup *setup, size_t max_layers, lam_model **out,
                                lam_error *err);

size_t lam_model_channels(const lam_model *m);

/* Predict at an oxide thickness (the first SiO2 layer; ignored without one)
 * and Fermi level. */
lam_status lam_model_eval(lam_model *m, double oxide_nm, double fermi_ev,
                          lam_prediction *out, lam_error *err);

/* d C_c(N) / d oxide_nm by central differences (step 0.05 nm). */
lam_status lam_model_doxide(lam_model *m, double oxide_nm, double fermi_ev,
                            double (*dcontrast)[LAM_MAX_CHANNELS], lam_error *err);

#endif
