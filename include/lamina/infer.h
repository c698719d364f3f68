/*
 * lamina/infer.h - each region's posterior over what it is (bare
 * substrate, 1..K layers, thicker, unmodelled), with the uncertainty of
 * everything the image shares (lamina/estimate.h) carried into it.
 *
 * For region i of image j and hypothesis h the predictive density is
 *   Normal(m_i; P_h + J_h d_i, V_i + F_i + J_h S_i J_h^T)
 * where P_h is the fitted observed-scale ladder, J_h its gradient with
 * respect to the free nuisance parameters and the oxide, V_i the region's
 * statistical variance, F_i the model floor at its measured contrast
 * (lam_estimate_floor_var), and (d_i, S_i) the shift and
 * covariance of the parameters with region i LEFT OUT (a Laplace
 * leave-one-out: the region is not allowed to vouch for itself, so an image
 * whose only flake could be 1L with one response or 2L with another says
 * "ambiguous"). Thicker flakes (K+1..40) are one hypothesis with the
 * entries averaged; "unmodelled" is a broad density. The Gaussian
 * normalisation is kept (each hypothesis has its own covariance). Prior:
 * lam_hypothesis_prior (lamina/estimate.h). Posterior probabilities of
 * every hypothesis are reported; the label is the most probable one.
 *
 * Flags: ambiguous (label probability < p_confident), unmodelled (the broad
 * density wins, or the best hypothesis fits with a chi-square p-value below
 * p_unmodelled), saturated, touches_border, small (below min_area_px),
 * doped (Pauli blocking seen: a Fermi interval that excludes ordinary
 * doping, see lam_infer_fermi).
 */
#ifndef LAMINA_INFER_H
#define LAMINA_INFER_H

#include <stddef.h>
#include "lamina/error.h"
#include "lamina/estimate.h"
#include "lamina/model.h"
#include "lamina/segment.h"

enum {
    LAM_FLAG_AMBIGUOUS = 1 << 0,
    LAM_FLAG_UNMODELLED = 1 << 1,
    LAM_FLAG_SATURATED = 1 << 2,
    LAM_FLAG_BORDER = 1 << 3,
    LAM_FLAG_SMALL = 1 << 4,
    LAM_FLAG_DOPED = 1 << 5
};
#define LAM_FLAG_COUNT 6

/* Names of the flags in reports ("ambiguous", ...), index = bit number. */
const char *lam_flag_name(int bit);

typedef struct lam_infer_options {
    double p_confident;            /* 0.95 */
    double p_unmodelled;           /* chi-square p-value cut, 1e-4 */
    double min_area_px;            /* "small" below this (derived from --min-area) */
    size_t max_layers;             /* K */
} lam_infer_options;

typedef struct lam_fermi_estimate {
    double estimate, lo, hi; /* eV, |mu|: posterior median and 95 % interval; NAN when unset */
    double upper;            /* 95 % upper limit when blocking is not seen */
    int constrained, evaluated;
} lam_fermi_estimate;

/* Index of the thick and unmodelled hypotheses in lam_region_result.p */
#define LAM_P_THICK(K) ((K) + 1)
#define LAM_P_UNMODELLED(K) ((K) + 2)

typedef struct lam_region_result {
    int layers;                 /* 1..K, or 0 when not assigned */
    int thick;                  /* the label is "thicker than K" */
    char label[16];             /* "1L", "thick", "unassigned" */
    char cls[16];               /* "layers", "thick", "unmodelled", "ambiguous", "substrate" */
    double p[LAM_MODEL_MAX_LAYERS + 3]; /* p[0] substrate, p[1..K], thick, unmodelled */
    double p_label;             /* probability of the label (defined for every region) */
    double p_substrate;         /* = p[0] */
    int substrate_like;         /* the bare substrate is the most probable */
    size_t channels;
    double mean[3], sigma[3], model[3];  /* measured, its total sigma, model of the label */
    double chi2, pvalue;        /* of the most probable layered hypothesis */
    unsigned flags;
    lam_fermi_estimate fermi;
    size_t usable_px[2];        /* largest interior rectangle w, h */
    size_t usable_at[2];        /* its top-left corner x, y */
} lam_region_result;

/* The ladder of 1L and 2L over the Fermi level at an image's estimate
 * (gains applied), for the doping inference. Pauli blocking reaches the
 * visible only when 2|E_F| exceeds the photon energy (|E_F| >~ 0.8 eV for
 * the red end); below 0.5 eV the ladder barely moves, so the grid is coarse
 * there and fine above. Two priors use it: for the layer count, E_F is
 * ordinary (0-0.5 eV) with probability 0.8 and anywhere up to 1.6 eV
 * otherwise, so a heavily doped monolayer is still recognised as one; for
 * the Fermi interval, E_F is uniform over 0-1.6 eV. */
#define LAM_FERMI_GRID 50
#define LAM_FERMI_MAX_EV 1.6
typedef struct lam_fermi_table {
    size_t count;
    double mu[LAM_FERMI_GRID];
    double mix_weight[LAM_FERMI_GRID];  /* layer-count prior (sums to 1) */
    double flat_weight[LAM_FERMI_GRID]; /* interval prior (sums to 1) */
    double contrast[LAM_FERMI_GRID][3][LAM_MAX_CHANNELS]; /* N = 0, 1, 2 */
} lam_fermi_table;

/* The 1L and 2L ladders of image 'image' over the Fermi-level grid
 * (0-1.6 eV) at the estimate's fitted values, for the Fermi posterior of
 * lam_infer_region. The grid's points are shared out to 'count' threads,
 * one per model (models[0..count-1], alike, each used by one thread only;
 * the table is the same for any count); they need 2 layers (coarse ones
 * are enough). */
lam_status lam_fermi_table_build(const lam_estimate *e, size_t image, lam_model *const *models,
                                 size_t count, lam_fermi_table *out, lam_error *err);

/* p >= 0.95 for a label, goodness-of-fit cut p < 1e-4, "small" below
 * 100 px, K = 6. */
lam_infer_options lam_infer_options_default(void);

/* A region's measurement for the estimation: interior mean contrast and its
 * statistical variance kappa noise_c^2 / n_interior; 'use' when it may
 * inform the shared parameters (enough interior, not saturated). */
void lam_region_measure(const lam_region_stats *r, const double noise[3], double kappa,
                        size_t channels, lam_est_region *out);

/* The posterior of one region of image j, given the fitted estimate and
 * its view (lam_estimate_view). 'stats' supplies area, clipping, border.
 * With a Fermi table (may be NULL) the 1L and 2L hypotheses are averaged
 * over the Fermi level, and a region labelled 1L or 2L gets its Fermi
 * interval: the posterior median and 95 % interval, 'constrained' (and the
 * flag "doped") when ordinary doping (|E_F| <= 0.5 eV) is excluded at
 * 97.5 %, otherwise the 95 % upper limit. */
/* Mix a region's posterior with its posterior under a rival mode of the
 * fit (lam_estimate.rival) of weight w: p = (1 - w) p + w p_rival, and
 * label it again from the mixture (the flags of geometry and doping stay;
 * the fit-test flag follows the mixture's most probable hypothesis). The
 * model contrast and its sigma stay those of o's mode. */
void lam_infer_mix(lam_region_result *o, const lam_region_result *rival, double w,
                   const lam_infer_options *opt);

/* The posterior of one region (measurement r, statistics s) under the
 * fitted estimate e seen through 'view' (lam_estimate_view): leave-one-out
 * predictive densities of substrate, 1..K layers, thicker and unmodelled,
 * the label, its probability and flags, the model contrast with its sigma,
 * and with a Fermi table (may be NULL) the doping statement of 1L and 2L
 * regions. Fills *o entirely; no errors. */
void lam_infer_region(const lam_estimate *e, const lam_est_view *view,
                      const lam_fermi_table *fermi, const lam_est_region *region,
                      const lam_region_stats *stats, const lam_infer_options *opt,
                      lam_region_result *out);

#endif
