/*
 * lamina/model.h - predicted contrast of N-layer flakes as a camera sees it.
 *
 * For a setup (lamina/setup.h) the model integrates, per camera channel c,
 *   R_c(N) = sum_l w_c(l) <R(l, N)>_cone
 * where <.>_cone averages s and p reflectance over the illumination cone
 * 0..asin(NA_ill / n_ambient) with the pupil weight sin(t)cos(t) (default)
 * or sin(t), by Gauss-Legendre quadrature, and w_c(l) is the channel
 * sensitivity times the illuminant, normalised (lamina/colour.h). N-layer
 * graphene is N sheets, interlayer_nm apart, on top of the substrate stack.
 * The contrast is
 *   C_c(N) = (R_c(0) - R_c(N)) / R_c(0)     (positive: flake darker).
 * The ratio of channel integrals is not the integral of monochromatic
 * contrasts; the model always integrates reflectances first.
 *
 * What the analysis treats as uncertain is a "model point": a vector of
 * LAM_MP_COUNT numbers (oxide thickness, illumination NA, Fermi level, the
 * three parameters of graphene's visible response - lamina/conductivity.h -
 * and a wavelength shift and width scale of each camera channel: a channel's
 * sensitivity S(l) becomes S(c + (l - shift - c) / exp(width)), c its
 * centroid). lam_model_eval_point
 * evaluates any point; lam_model_point_default gives the setup's. The model
 * caches what does not change between nearby points (sheet conductivity
 * per Fermi level, cone nodes per NA, the substrate's admittance per oxide
 * and NA, channel weights per shift), so a fit that varies one parameter at
 * a time pays only for what that parameter touches.
 *
 * Ownership: lam_model_alloc copies what it needs from the setup (the setup
 * may be cleared afterwards) and is released by lam_model_free. A model is
 * not safe for concurrent evaluation; use one per thread.
 */
#ifndef LAMINA_MODEL_H
#define LAMINA_MODEL_H

#include <stddef.h>
#include "lamina/error.h"
#include "lamina/setup.h"

#define LAM_MODEL_MAX_LAYERS 40

typedef struct lam_model lam_model;

/* Residue films (lam_model_set_residue): LAM_RESIDUE_FILMS thicknesses,
 * LAM_RESIDUE_FIRST_NM + k LAM_RESIDUE_STEP_NM (1 to 59.5 nm). The steps
 * are even so that one film's phase factor follows from the last by one
 * multiplication; 1.5 nm moves a polymer film's phase by 0.05 rad. */
#define LAM_RESIDUE_FILMS 40
#define LAM_RESIDUE_FIRST_NM 1.0
#define LAM_RESIDUE_STEP_NM 1.5

/* A ladder: predicted reflectance and contrast of N = 0..max_layers layers
 * per camera channel (channels 1 to 3). Row 0 of the contrast is 0. This is
 * the one ladder type of the library (segmentation and inference use it).
 * With a residue film, the residue films' contrasts too. */
typedef struct lam_prediction {
    size_t channels, max_layers;
    double oxide_nm, fermi_ev;
    double substrate[LAM_MAX_CHANNELS];                       /* R_c(0) */
    double reflectance[LAM_MODEL_MAX_LAYERS + 1][LAM_MAX_CHANNELS]; /* R_c(N), N = 0..K */
    double contrast[LAM_MODEL_MAX_LAYERS + 1][LAM_MAX_CHANNELS];    /* C_c(N); row 0 is 0 */
    size_t residues; /* residue films below: LAM_RESIDUE_FILMS, or 0 without a residue */
    double residue[LAM_RESIDUE_FILMS][LAM_MAX_CHANNELS]; /* C_c of residue film k */
} lam_prediction;

/* The parameters of a model point. */
typedef enum lam_model_param {
    LAM_MP_OXIDE = 0,   /* nm, the first SiO2 layer (ignored without one) */
    LAM_MP_NA,          /* illumination NA, 0 <= NA < n_ambient */
    LAM_MP_FERMI,       /* eV */
    LAM_MP_CONTINUUM,   /* visible-response family (lamina/conductivity.h) */
    LAM_MP_RESONANCE,
    LAM_MP_BACKGROUND,
    LAM_MP_SHIFT,       /* nm added to channel 1's wavelengths ... */
    LAM_MP_SHIFT_LAST = LAM_MP_SHIFT + LAM_MAX_CHANNELS - 1, /* ... to channel 3's */
    LAM_MP_WIDTH,       /* ln of each channel's width scale (about its centroid) */
    LAM_MP_WIDTH_LAST = LAM_MP_WIDTH + LAM_MAX_CHANNELS - 1,
    LAM_MP_COUNT
} lam_model_param;

typedef struct lam_model_point {
    double v[LAM_MP_COUNT];
} lam_model_point;

/* Build a model for N = 1..max_layers (<= LAM_MODEL_MAX_LAYERS). With
 * monochromatic_nm > 0 the camera becomes one channel at that wavelength. */
lam_status lam_model_alloc(const lam_setup *setup, size_t max_layers, double monochromatic_nm,
                           lam_model **out, lam_error *err);
void lam_model_free(lam_model *m);

/* The coarse copy used inside fits: for graphene in reflection a 10 nm
 * spectral step and 6 cone nodes (1-5L contrasts within 6e-5 of the full
 * model up to 500 nm of SiO2, 1.5e-4 up to 1000 nm), for other crystals 5
 * nm and 6 nodes (1-5L of MoS2 and WSe2 within 1.3e-4 on 90-400 nm, WS2
 * within 1.7e-3, 1L 2.8e-4: its sharp A exciton; hBN films within 6e-5;
 * the nodes cost up to 1.3e-4 more at 400 nm and NA 0.9), in transmission
 * 5 nm and 8 nodes; several times faster. For
 * TMD flakes (LAM_CRYSTAL_LAYERED) in reflection it carries a PMMA residue
 * film (lam_model_set_residue), which the estimate's unmodelled hypothesis
 * weighs; graphene's models do not yet (with residue weighed, a graphene
 * calibration on a flake and latent regions read most counts wrong, see
 * docs/method.md). */
lam_status lam_model_alloc_fast(const lam_setup *setup, size_t max_layers, lam_model **out,
                                lam_error *err);

/* An independent copy of a model (same setup, same results, caches of its
 * own): for evaluating on several threads, one model per thread. */
lam_status lam_model_clone(const lam_model *m, lam_model **out, lam_error *err);

/* Models for n workers (n <= LAM_MAX_THREADS): out[0] = m and out[1..n)
 * clones of it. On error the clones made are freed and out[1..n) are NULL. */
lam_status lam_model_clones(lam_model *m, size_t n, lam_model **out, lam_error *err);

/* Free out[1..n) of lam_model_clones (out[0], the caller's model, stays). */
void lam_model_clones_free(lam_model **out, size_t n);

/* The camera channels (1 to 3) and the layers (K) a model evaluates. */
size_t lam_model_channels(const lam_model *m);
size_t lam_model_max_layers(const lam_model *m);

/* The setup's point: its oxide, NA, Fermi level, response; no shifts. */
lam_model_point lam_model_point_default(const lam_model *m);

/* Predict N = 0..layers (0: all the model's layers) at a point. LAM_ERANGE
 * for a point outside the physical ranges (negative oxide, NA beyond the
 * ambient index, a response that is not passive). */
lam_status lam_model_eval_point(lam_model *m, const lam_model_point *p, size_t layers,
                                lam_prediction *out, lam_error *err);

/* Predict at the setup's point with another oxide thickness and Fermi level. */
lam_status lam_model_eval(lam_model *m, double oxide_nm, double fermi_ev,
                          lam_prediction *out, lam_error *err);

/* d C_c(N) / d oxide_nm by central differences (step 0.05 nm). */
lam_status lam_model_doxide(lam_model *m, double oxide_nm, double fermi_ev,
                            double (*dcontrast)[LAM_MAX_CHANNELS], lam_error *err);

/* Derivatives of the contrast ladder with respect to the parameters listed
 * in 'which' (count of them) at point p, N = 0..layers:
 * grad[k][N][c] = d C_c(N) / d p.v[which[k]]. In reflection the oxide, an
 * NA above 0 and (for graphene's sheets) the three response terms are
 * analytic: one pass of derivative fields through the stack, to ~1e-11 of
 * the model's own differences (test_model). The channel shifts and widths,
 * the Fermi level, an NA of 0 and every parameter in transmission are
 * central differences with steps suited to each (lam_model_step). */
typedef double lam_ladder_grad[LAM_MODEL_MAX_LAYERS + 1][LAM_MAX_CHANNELS];
/* (The gradients above; LAM_ENOMEM or LAM_ERANGE outside a table.) */
lam_status lam_model_gradient(lam_model *m, const lam_model_point *p, size_t layers,
                              const int *which, size_t count, lam_ladder_grad *grad,
                              lam_error *err);

/* The finite-difference step of a parameter. */
double lam_model_step(lam_model_param k);

/* Give the model a transparent residue film (polymer left by the transfer
 * tape or resist, e.g. the built-in "PMMA") on top of the substrate:
 * lam_model_eval_point then also fills the prediction's residue contrasts
 * (reflection only; a transmission model ignores it). The film's index is
 * copied; clones keep it. */
lam_status lam_model_set_residue(lam_model *m, const lam_material *film, lam_error *err);

/* Crystals of continuous thickness (lamina/thickness.h): the contrast per
 * channel of the flake material as ONE film of each thickness
 * thickness_nm[k] (k < count), its index scaled as N = 1 + s (n - 1) + i k
 * with s = index_scale, on the substrate at point p (oxide, NA, channel
 * shifts and widths; the graphene response is not used):
 * contrast[k][c]. The film sits on the substrate's top film (Airy
 * reflection of the ambient|film|substrate-admittance system per
 * wavelength, cone node and polarisation), so a film costs a few complex
 * operations per node. LAM_EINVAL when the model's flake is not a film,
 * LAM_ERANGE for a point outside the physical ranges or a scale <= 0. */
lam_status lam_model_eval_films(lam_model *m, const lam_model_point *p, double index_scale,
                                const double *thickness_nm, size_t count,
                                double (*contrast)[LAM_MAX_CHANNELS], lam_error *err);

/* lam_model_eval_films at each of n_oxide oxides (p's own oxide is not
 * used) into contrast[o * count + k][c]: the same numbers as n_oxide
 * calls, to the bit, with the films' phases (the largest part of the
 * cost, and the same on every substrate) made once per group of up to six
 * oxides instead of once per oxide. */
lam_status lam_model_eval_films_oxides(lam_model *m, const lam_model_point *p,
                                       const double *oxide_nm, size_t n_oxide,
                                       double index_scale, const double *thickness_nm,
                                       size_t count, double (*contrast)[LAM_MAX_CHANNELS],
                                       lam_error *err);

#endif
