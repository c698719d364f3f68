/*
 * lamina/thickness.h - the thickness of flakes of a continuous-thickness
 * crystal (hBN, lamina/crystal.h) per region, with every interference
 * order that fits.
 *
 * A flake is one transparent film of thickness d (one layer, 0.333 nm, to
 * 300 nm) with the crystal's in-plane index scaled as 1 + s (n - 1). The
 * published indices differ (hBN: Grudinin 2023, Lee 2019, Rah 2019 differ
 * by ~0.08, which alone moves d by ~10 %), so s is a nuisance with the
 * prior of lam_crystal_index_scale_prior over +-3 sd: the model is
 * evaluated at a few scales and interpolated in s to a fine grid (the
 * likelihood of a thick film is narrow in d, its contrast smooth in s).
 * For region i the measured contrast m_i (lam_est_region: mean and
 * statistical variance per channel) has the likelihood
 *   Normal(m_i; C(d, s, oxide), V_i + F(C)),
 *   F = diag((floor_abs_c + floor_rel |C_c|)^2)
 * with the absolute floor from the image's substrate (its prior in the
 * estimate) and the contrast offset's prior added in quadrature, and the
 * relative floor the crystal's combined with the per-channel gain prior's
 * spread (gain errors scale contrast). The Gaussian normalisation is kept.
 * d has a prior uniform in ln d over [min_nm, max_nm] (scale-free: no
 * interference order is favoured by the grid); besides a film, a region may
 * be bare substrate (prior mass 0.1) or unmodelled (0.1; a flat density over
 * the range of contrasts the films reach, widened): the masses of
 * lamina/estimate.h. The optics are the setup's (NA, camera, lamp).
 *
 * The oxide: on a grid over nominal +- 3 prior sd (at most 40 nm; 4 nm
 * steps, then 1 nm about the best), and as far about the oxide the layer
 * ladder's fit found and its rival order (lam_oxide_result.rival_nm) where
 * those lie beyond that reach (a chip mislabelled by an order; the rival
 * is weighed as the wide search weighs its fit: a 100 nm prior sd, taken
 * when its evidence is better by e^10, named in the warning
 * "oxide-ambiguous" when within that; and when a quarter of the informing
 * area is unmodelled at the best, +-200 nm in 8 nm steps weighed the same
 * way), every region that may inform the fit
 * votes with its marginal likelihood (its d and the alternatives integrated
 * out), under ONE index scale for the image (integrated over its prior);
 * coarse model (10 nm spectral steps, 4 cone nodes, 1.5 % thickness
 * steps). The best point is refined by a parabola; the sd is the profile's
 * curvature combined with a systematic 1.5 % of the oxide (SiO2 index
 * models differ by ~1.3 % in optical thickness, the pupil's filling by
 * ~1 %). The region posteriors integrate the oxide over 3 Gauss-Hermite
 * nodes and, conservatively, the index scale per region (a systematic
 * misfit must not pull every flake's index to an edge of its prior).
 *
 * The posterior over d is multimodal across interference orders. Modes are
 * the basins of the marginal posterior (a valley lower than half the
 * smaller peak separates two); every mode holding at least 1/mode_ratio of
 * the most probable mode's mass is reported with its posterior probability,
 * median and 95 % interval, most probable first; the region's estimate and
 * interval are those of the most probable mode. "order-ambiguous": the most
 * probable mode holds less than p_order of the film posterior.
 *
 * Ownership: caller storage; lam_thickness_table_build allocates a table
 * released with lam_thickness_table_free. Errors: the model's status.
 */
#ifndef LAMINA_THICKNESS_H
#define LAMINA_THICKNESS_H

#include <stddef.h>
#include "lamina/contrast.h"
#include "lamina/error.h"
#include "lamina/estimate.h"
#include "lamina/image.h"
#include "lamina/model.h"
#include "lamina/setup.h"

#define LAM_THICKNESS_MAX_MODES 4

typedef struct lam_thickness_mode {
    double estimate, lo, hi;  /* nm: posterior median and 95 % interval within the mode */
    double probability;       /* posterior mass of the mode */
} lam_thickness_mode;

typedef struct lam_thickness_result {
    int evaluated;            /* a film is the most probable hypothesis */
    double estimate, lo, hi;  /* nm: the most probable mode's median and 95 % interval */
    double probability;       /* its posterior probability */
    int order_ambiguous;      /* other orders hold more than 1 - p_order of the film posterior */
    size_t modes;             /* reported modes, most probable first */
    lam_thickness_mode mode[LAM_THICKNESS_MAX_MODES];
    double p_substrate, p_film, p_unmodelled;
    double chi2;              /* at the best film (thickness, index scale, oxide node) */
    double model[LAM_MAX_CHANNELS]; /* its contrast */
    double sigma[LAM_MAX_CHANNELS]; /* the total sigma there */
} lam_thickness_result;

typedef struct lam_thickness_options {
    double min_nm, max_nm;    /* thickness range (one layer, 300 nm) */
    double step_rel;          /* grid step in ln d (0.004) */
    double mode_ratio;        /* report modes above top mass / mode_ratio (20) */
    double p_order;           /* order-ambiguous below this (0.95) */
    size_t scale_nodes;       /* index scales the model is evaluated at, over +-3 sd (5) */
    size_t scale_fine;        /* ... interpolated to this many for the integral (41) */
    size_t threads;           /* threads the table's model evaluations use (1) */
} lam_thickness_options;

/* The defaults given in brackets above. */
lam_thickness_options lam_thickness_options_default(void);

/* Does the setup's flake material call for this module (a continuous
 * crystal)? */
int lam_thickness_applies(const lam_setup *s);

/* The noise model of one image (see the top of this file). */
typedef struct lam_thickness_noise {
    size_t channels;
    double floor_abs[LAM_MAX_CHANNELS];
    double floor_rel;
} lam_thickness_noise;

/* The noise model from an estimate's priors and the crystal's floor. */
lam_thickness_noise lam_thickness_noise_from(const lam_estimate *e, const lam_setup *s);

/* Contrasts of films over the thickness grid at nodes of the index scale
 * and the oxide, with their quadrature weights. */
typedef struct lam_thickness_table lam_thickness_table;

/* Build the table at point p (its oxide replaced by each of the n_oxide
 * oxide nodes with weights, which should sum to 1), the index scale
 * integrated with opt->scale_nodes nodes about (scale_mean, scale_sd). */
lam_status lam_thickness_table_build(lam_model *m, const lam_model_point *p,
                                     const double *oxide_nm, const double *oxide_weight,
                                     size_t n_oxide, double scale_mean, double scale_sd,
                                     const lam_thickness_options *opt,
                                     lam_thickness_table **out, lam_error *err);
void lam_thickness_table_free(lam_thickness_table *t);

/* The variance the optics' uncertainty adds to every film's contrast:
 * (dC_c/dshift_c sd_shift_c)^2 + (dC_c/dlnwidth_c sd_width_c)^2 +
 * (dC_c/dNA sd_na)^2 at point p and index scale 'scale' (forward
 * differences: 2 nm, 0.02, 0.02), per thickness of the table; the sds are
 * the estimate's priors (a camera the setup gives: 4 nm, 0.05; a default
 * camera 15 nm, 0.25; NA 0.05 or 0.2). A thick film's fringes sweep
 * through a channel as it shifts: without this its thickness would be
 * overconfident. lam_thickness_table_copy_optics copies it to a table of
 * the same thickness grid (an oxide profile's other points). */
lam_status lam_thickness_table_add_optics(lam_thickness_table *t, lam_model *m,
                                          const lam_model_point *p, double scale,
                                          const double *sd_shift, const double *sd_width,
                                          double sd_na, size_t threads, lam_error *err);
lam_status lam_thickness_table_copy_optics(lam_thickness_table *dst,
                                           const lam_thickness_table *src, lam_error *err);

/* One region's posterior. */
void lam_thickness_infer(const lam_thickness_table *t, const lam_thickness_noise *nz,
                         const lam_est_region *r, const lam_thickness_options *opt,
                         lam_thickness_result *out);

/* The index scale is one per image (one crystal): the number of the
 * table's scale values and their log weights (the prior's). */
size_t lam_thickness_scales(const lam_thickness_table *t);
double lam_thickness_scale_logw(const lam_thickness_table *t, size_t f);

/* The region's log marginal likelihood at each scale value (the thickness
 * and the oxide nodes integrated, with the substrate and unmodelled
 * alternatives): out[f], f < lam_thickness_scales(t). */
void lam_thickness_log_evidence_scales(const lam_thickness_table *t,
                                       const lam_thickness_noise *nz, const lam_est_region *r,
                                       double *out);

/* The whole stage for an analysis whose material is a continuous crystal
 * (the material hook of lam_analyze): the oxide from the regions (or the
 * setup's, when not fitted), then every region's thickness posterior into
 * a->thickness, and its lam_region_result (label "12.3 nm", class
 * "thickness", the label's probability that of the most probable mode, the
 * flag "ambiguous" when the order is ambiguous, "unmodelled", "substrate",
 * geometry flags) into a->results, with the usable rectangles. With the
 * contrast image (may be NULL), parts of one flake cut apart by image
 * artefacts (same thickness within 5 %, one order) are joined first
 * (lam_segment_join) and measured again. The oxide audit passes when the
 * estimate is within oxide_tolerance_nm of nominal. The oxide profile's
 * points and the regions are worked on 'threads' threads, with the same
 * results for any number. */
struct lam_analysis;
lam_status lam_thickness_analyze(struct lam_analysis *a, const lam_contrast_map *contrast,
                                 const lam_setup *s, lam_model *model, double oxide_tolerance_nm,
                                 size_t threads, lam_error *err);

#endif
