/*
 * lamina/infer.h - layer counts with probabilities, oxide thickness and
 * Fermi level from region statistics and the contrast model.
 *
 * Region likelihood: the interior mean contrast m_c has variance
 *   sigma_c^2 = kappa * noise_c^2 / n_interior + (floor_abs + floor_rel |C_c|)^2
 * (pixel noise over the effective pixel count, plus a model floor for the
 * camera and optics model being imperfect). chi2(N) = sum_c (m_c - C_c(N))^2
 * / sigma_c^2; L(N) = exp(-chi2/2). Prior: uniform over N = 0 (bare
 * substrate that noise moved off the ladder), N = 1..K and one "thick"
 * hypothesis (the best of the ladder entries beyond K), i.e. no assumption
 * about how often each thickness occurs. Posterior normalised over these
 * K + 2 hypotheses; a region whose best hypothesis is N = 0 is reported as
 * unassigned and ambiguous. Flags: ambiguous (top posterior < 0.95),
 * unmodelled (chi2 p-value of the best hypothesis below 1e-3, 3 degrees of
 * freedom: residue, another material, dirt), saturated, touches_border, small.
 */
#ifndef LAMINA_INFER_H
#define LAMINA_INFER_H

#include <stddef.h>
#include "lamina/error.h"
#include "lamina/model.h"
#include "lamina/segment.h"

enum {
    LAM_FLAG_AMBIGUOUS = 1 << 0,
    LAM_FLAG_UNMODELLED = 1 << 1,
    LAM_FLAG_SATURATED = 1 << 2,
    LAM_FLAG_BORDER = 1 << 3,
    LAM_FLAG_SMALL = 1 << 4
};

typedef struct lam_infer_options {
    double floor_abs, floor_rel;   /* model floor (0.005, 0.05) */
    double p_confident;            /* 0.95 */
    double p_unmodelled;           /* 1e-3 */
    double min_area_px;            /* "small" below this (derived from --min-area) */
    size_t max_layers;             /* K */
} lam_infer_options;

typedef struct lam_fermi_estimate {
    double estimate, lo, hi; /* eV, |mu|; estimate NAN when unconstrained */
    int constrained, evaluated;
} lam_fermi_estimate;

typedef struct lam_region_result {
    int layers;                 /* 1..K, or 0 when not assigned */
    int thick;                  /* best hypothesis is "thicker than K" */
    char label[16];             /* "1L", "thick", "unassigned" */
    double p[LAM_MODEL_MAX_LAYERS + 2]; /* p[N] for N=1..K, p[K+1] thick */
    double p_substrate;         /* the region is bare substrate after all */
    int substrate_like;         /* that hypothesis won: not a flake */
    double mean[3], sigma[3], model[3];
    double chi2, pvalue;
    unsigned flags;
    lam_fermi_estimate fermi;
    size_t usable_px[2];        /* largest interior rectangle w, h */
    size_t usable_at[2];        /* its top-left corner x, y */
} lam_region_result;

lam_infer_options lam_infer_options_default(void);

/* Mean contrast and its sigma per channel for a region. */
void lam_region_moments(const lam_region_stats *r, const double noise[3], double kappa,
                        const lam_infer_options *opt, const double model[3], double mean[3],
                        double sigma[3]);

/* chi2 of a region's mean contrast against one model contrast vector. */
double lam_region_chi2(const lam_region_stats *r, const double model[3], const double noise[3],
                       double kappa, const lam_infer_options *opt);

/* Posterior over N for one region given the ladder at the fitted oxide. */
void lam_infer_region(const lam_region_stats *r, const lam_prediction *ladder, size_t thick_to,
                      const double noise[3], double kappa, const lam_infer_options *opt,
                      lam_region_result *out);

/* Oxide thickness by profiling chi2 over nominal +- half_range nm, using
 * the given regions (those flagged usable in 'use'). Returns the estimate,
 * its 1-sigma from the chi2 curvature and the number of regions used. */
lam_status lam_infer_oxide(lam_model *fast, const lam_region_stats *regions, const int *use,
                           size_t count, size_t thick_to, const double noise[3], double kappa,
                           const lam_infer_options *opt, double nominal, double half_range,
                           double fermi, double *estimate, double *sigma, size_t *used,
                           double *profile_chi2_min, lam_error *err);

/* The ladder over |mu| = 0, 0.05, ... 1.5 eV at one oxide thickness,
 * computed once per image and shared by all regions. */
#define LAM_FERMI_STEPS 31
typedef struct lam_fermi_scan {
    double mu[LAM_FERMI_STEPS];
    lam_prediction ladder[LAM_FERMI_STEPS];
} lam_fermi_scan;

lam_status lam_fermi_scan_alloc(lam_model *fast, double oxide_nm, lam_fermi_scan **out,
                                lam_error *err);
void lam_fermi_scan_free(lam_fermi_scan *scan);

/* |mu| of an N-layer region from the scan; 68 % interval from chi2 + 1.
 * Constrained only when that interval is closed on both sides (the
 * Pauli-blocking edge is seen); otherwise lo = 0 and hi is the largest |mu|
 * within chi2 + 4 (an upper limit), estimate NAN. */
void lam_infer_fermi(const lam_fermi_scan *scan, const lam_region_stats *r, int layers,
                     const double noise[3], double kappa, const lam_infer_options *opt,
                     lam_fermi_estimate *out);

/* Largest axis-aligned rectangle of interior pixels of region 'id'. */
void lam_usable_rectangle(const lam_segmentation *seg, const lam_region_stats *r,
                          size_t out_wh[2], size_t out_xy[2]);

#endif
