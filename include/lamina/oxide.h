/*
 * lamina/oxide.h - the oxide audit: is this chip (or batch) the SiO2
 * thickness the vendor claims?
 *
 * Each analysed image carries an honest oxide estimate d_i with sigma_i
 * (lam_oxide_result: it includes the uncertainty of the shared parameters
 * - graphene response, NA, camera - and g_i = sigma_given_shared, the part
 * that is independent from image to image). The audit combines them:
 *
 * Combined estimate (generalised least squares). With the shared part
 * s_i^2 = max(0, sigma_i^2 - g_i^2) taken as fully correlated between
 * images (the same microscope and flakes: it does not average down),
 *     C_ii = sigma_i^2,   C_ij = s_i s_j  (i != j),
 *     w = C^-1 1 / (1' C^-1 1),   d = w' y,   var(d) = 1 / (1' C^-1 1).
 * With equal s_i = s this is var(d) = s^2 + 1 / sum(1/g_i^2): more images
 * shrink only the independent part. A g_i that is missing (not finite) is
 * taken as sigma_i (nothing known to be shared).
 *
 * Consistency: chi2 = (y - d 1)' C^-1 (y - d 1) with n - 1 degrees of
 * freedom and p = P(chi2_{n-1} >= chi2). When p < LAM_OXIDE_P_CONSISTENT
 * the images do not agree with one thickness: the oxide varies across the
 * batch (or the images' own errors are larger than they say); the spread
 * (sample standard deviation of the d_i) is reported.
 *
 * Batch variation: when the images disagree, an extra independent
 * variance tau^2 is added to every C_ii, chosen so that the chi2 about the
 * mean equals n - 1: the Paule-Mandel estimator (Paule and Mandel,
 * J. Res. Natl. Bur. Stand. 87, 377 (1982)). The combined estimate and
 * sigma are the GLS values with tau^2 in C: the mean thickness of the
 * batch. Without it, nearly fully correlated errors with unequal s_i let
 * GLS extrapolate outside the data when the images disagree.
 *
 * Verdict against nominal +- tolerance, from the 95 % interval
 * d +- 1.96 sigma:
 *     pass      the interval lies inside the tolerance band;
 *     fail      it lies entirely outside, or the colours select another
 *               thickness (below);
 *     undecided it straddles an edge; lam_oxide_audit.advice says what
 *               would decide it (more flakes, a calibrated setup).
 *
 * Interference orders: the joint profile -2 ln L(d) of every image's
 * measured regions on a 1 nm grid (each image's shared parameters held at
 * its own fit) is kept as a picture and to find other thicknesses that fit
 * (local minima within LAM_OXIDE_ORDER_DCHI2_SIMILAR of the best). Its
 * curvature is not used for the sigma: it holds the shared parameters fixed
 * and shrinks as 1/sqrt(regions). When the profile's best minimum lies
 * outside the tolerance band and beats every thickness inside it by more
 * than LAM_OXIDE_ORDER_DCHI2_FAIL, the chip fails: the flakes' colours are
 * those of another thickness.
 *
 * The absolute method compares the substrate's colour with a bare-Si
 * reference image (same lamp, objective, exposure) and needs no flakes.
 *
 * Ownership: lam_oxide_audit_run fills a caller-owned lam_oxide_audit;
 * release it with lam_oxide_audit_clear. Analyses and setup are borrowed.
 * Errors: LAM_EINVAL for bad arguments, LAM_ENOMEM, the model's errors.
 */
#ifndef LAMINA_OXIDE_H
#define LAMINA_OXIDE_H

#include <stddef.h>
#include "lamina/analyze.h"
#include "lamina/error.h"
#include "lamina/setup.h"

struct cJSON;

/* Below this p-value the images disagree with one thickness. */
#define LAM_OXIDE_P_CONSISTENT 0.01
/* z of the two-sided 95 % normal interval. */
#define LAM_OXIDE_Z95 1.959963984540054
/* Other minima of the profile within this of the best are other orders
 * that fit as well (about 2 sigma). */
#define LAM_OXIDE_ORDER_DCHI2_SIMILAR 4.0
/* A minimum outside the tolerance band better than anything inside it by
 * this much (5 sigma; conservative because the profile holds the shared
 * parameters fixed) decides "fail". */
#define LAM_OXIDE_ORDER_DCHI2_FAIL 25.0
/* Most alternative orders reported. */
#define LAM_OXIDE_MAX_ORDERS 8

/* One image's estimate, as the combination sees it. */
typedef struct lam_oxide_sample {
    double estimate_nm, sigma_nm;   /* sigma includes the shared parameters */
    double sigma_given_shared_nm;   /* independent part; NAN: unknown (= sigma) */
} lam_oxide_sample;

typedef struct lam_oxide_combined {
    size_t n;                       /* images combined (finite, sigma > 0) */
    double estimate_nm, sigma_nm;   /* GLS mean and its sigma (with tau) */
    double sigma_shared_nm;         /* the part of sigma_nm that more images cannot reduce */
    double chi2, p_value;           /* consistency (tau = 0); p = 1 for a single image */
    size_t dof;                     /* n - 1 */
    int consistent;                 /* p >= LAM_OXIDE_P_CONSISTENT */
    double tau_nm;                  /* the batch's own variation (Paule-Mandel); 0 when
                                     * the images agree */
    double spread_nm;               /* sample sd of the estimates; NAN for n < 2 */
    double lo95_nm, hi95_nm;        /* estimate +- 1.96 sigma */
} lam_oxide_combined;

/* Combine n samples as above. Samples with a non-finite estimate or a
 * sigma <= 0 are skipped (out->n counts the rest); n == 0 after that gives
 * out->n = 0 and NAN values. LAM_ENOMEM, or LAM_EINTERNAL when C is not
 * positive definite (cannot happen for valid sigmas). */
lam_status lam_oxide_combine(const lam_oxide_sample *s, size_t n, lam_oxide_combined *out,
                             lam_error *err);

typedef enum lam_oxide_verdict {
    LAM_OXIDE_UNDECIDED = 0,
    LAM_OXIDE_PASS = 1,
    LAM_OXIDE_FAIL = 2,
    LAM_OXIDE_NO_DATA = 3           /* no image had a region usable for a fit */
} lam_oxide_verdict;

/* "pass", "fail", "undecided" or "no data". */
const char *lam_oxide_verdict_name(lam_oxide_verdict v);

/* The verdict of the interval [lo, hi] against nominal +- tolerance
 * (inclusive edges). NaN bounds give LAM_OXIDE_NO_DATA. */
lam_oxide_verdict lam_oxide_verdict_of(double lo_nm, double hi_nm, double nominal_nm,
                                       double tolerance_nm);

/* Per image of an audit. */
typedef struct lam_oxide_audit_image {
    const char *file;               /* borrowed from the analysis */
    int fitted;
    lam_oxide_sample sample;
    size_t regions_used;
    lam_oxide_verdict verdict;      /* of the image's own 95 % interval */
} lam_oxide_audit_image;

typedef struct lam_oxide_audit_options {
    double nominal_nm, tolerance_nm;
    double span_nm, step_nm;        /* the profile grid: nominal +- span (200, 1) */
    const char *reference;          /* bare-Si image for the absolute method, or NULL */
    double stability;               /* lamp/exposure repeatability for it (0.01) */
} lam_oxide_audit_options;

typedef struct lam_oxide_audit {
    double nominal_nm, tolerance_nm;
    size_t n_images;
    lam_oxide_audit_image *images;
    lam_oxide_combined combined;
    lam_oxide_verdict verdict;
    char reason[256];               /* why this verdict, in one sentence */
    char advice[256];               /* for undecided: what would decide it ("" otherwise) */
    /* the joint profile over the grid (n points, non-negative thickness) */
    size_t n_grid;
    double *grid_nm, *profile;      /* -2 ln L summed over images */
    size_t profile_regions;         /* regions in the profile */
    double profile_best_nm;         /* its global minimum on the grid */
    size_t n_orders;                /* other minima within DCHI2_SIMILAR, > 40 nm away */
    double orders_nm[LAM_OXIDE_MAX_ORDERS];
    int order_decides;              /* the verdict came from another order */
    /* the absolute method (absolute_set = 0 without a reference) */
    int absolute_set;
    double absolute_nm, absolute_sigma_nm, absolute_chi2;
    size_t n_absolute;              /* candidate thicknesses (0-1000 nm) */
    double absolute_candidates_nm[LAM_OXIDE_MAX_ORDERS];
    double stability;
    const char *reference;
} lam_oxide_audit;

/* Nominal unset (-1: the caller must give it), tolerance 10 nm, the grid
 * nominal +- 200 nm in 1 nm steps, no reference, stability 0.01. */
lam_oxide_audit_options lam_oxide_audit_options_default(void);

/* The whole audit over analysed images (all of the same setup). The
 * verdict is LAM_OXIDE_NO_DATA when no image fitted its oxide and the
 * profile does not decide. On failure nothing stays allocated. */
lam_status lam_oxide_audit_run(const lam_analysis *const *analyses, size_t images,
                               const lam_setup *setup, const lam_oxide_audit_options *opt,
                               lam_oxide_audit *out, lam_error *err);
void lam_oxide_audit_clear(lam_oxide_audit *a);

/* oxide.json (schema "lamina-oxide/2", docs/oxide.md); NULL when out of
 * memory. The caller deletes it. */
struct cJSON *lam_oxide_audit_json(const lam_oxide_audit *a);

/* oxide.json and the plot (lam_plot_oxide) into a folder (created when
 * missing), atomically. */
lam_status lam_oxide_audit_write(const lam_oxide_audit *a, const char *dir, lam_error *err);

/* The joint profile: -2 ln L(d) on a grid, summed over images (joint) and
 * per image (per_image[j * n + g], may be NULL), each image's shared
 * parameters held at its fit; every measured region that is not saturated
 * counts, through its full mixture over layer counts (so a region that no
 * thickness explains adds a constant). *regions (may be NULL) receives
 * how many regions entered. */
lam_status lam_oxide_joint_profile(const lam_analysis *const *analyses, size_t images,
                                   const lam_setup *setup, const double *grid, size_t n,
                                   double *joint, double *per_image, size_t *regions,
                                   lam_error *err);

/* Absolute oxide from the substrate's colour: each image's fitted substrate
 * level at its centre over a bare-Si reference image's level (same lamp,
 * objective and exposure), against the model's R_c(SiO2 d on Si) / R_c(Si).
 * 'stability' is the assumed relative repeatability of lamp and exposure
 * between the two images (e.g. 0.01). chi2 over the grid, summed over images. */
lam_status lam_reference_level(const char *path, const lam_load_options *load, double level[3],
                               lam_error *err);
lam_status lam_oxide_absolute_profile(const lam_analysis *const *analyses, size_t images,
                                      const double reference_level[3], const lam_setup *setup,
                                      double stability, const double *grid, size_t n,
                                      double *chi2, lam_error *err);

/* An image that could not be analysed, for the caller to report. */
typedef void (*lam_oxide_failed_fn)(const char *path, const lam_error *err, void *user);

/* The audit of image files: each image analysed (lam_analyze with 'opt'),
 * one that cannot be given to on_failed (may be NULL) and left out, the
 * audit (lam_oxide_audit_run) over the rest; *analysed receives how many
 * entered it. When none could be analysed the result is LAM_OK with
 * *analysed = 0 and *out empty (lam_oxide_audit_clear is safe on it).
 * The audit's image names point into 'paths', which must outlive it.
 * Errors: LAM_ENOMEM, lam_oxide_audit_run's (the reference image's with
 * that file recorded). */
lam_status lam_oxide_audit_files(const char *const *paths, size_t n, const lam_setup *setup,
                                 const lam_analysis_options *opt,
                                 const lam_oxide_audit_options *ao, lam_oxide_failed_fn on_failed,
                                 void *user, lam_oxide_audit *out, size_t *analysed,
                                 lam_error *err);

#endif
