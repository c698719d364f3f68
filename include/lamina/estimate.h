/*
 * lamina/estimate.h - what the images of a run share (graphene's visible
 * response, the illumination NA, each camera channel's wavelength shift and
 * contrast gain) and what each image has of its own (the oxide thickness),
 * estimated jointly from all regions, with the layer counts as latent
 * integers.
 *
 * The physics model is a structured prior, not the truth: every quantity
 * the contrast depends on and a lab does not know to better than a few per
 * cent is a nuisance parameter with a prior (lamina/model.h lists them;
 * the prior comes from the setup: tight for what the profile gives, wide
 * for what it leaves to defaults). The observed contrast of region i is
 *   m_i ~ Normal(g o C(N_i; theta, d_j), V_i + F(N_i))
 * with g the per-channel contrast gains (stray light, tone-curve and
 * camera-curve errors all scale contrast) and a small per-channel offset
 * (lamina_estimate_observe), C the model ladder, V_i the
 * statistical variance of the region mean and F the model floor
 * diag((floor_abs_c + floor_rel |C_c|)^2): what the fitted family still
 * cannot reproduce. N_i is one of: bare substrate (0), 1..K layers, a
 * thicker flake (K+1..40, one hypothesis spread evenly over its entries),
 * or "unmodelled" (a broad density: residue, dust, another material); the
 * prior over them is stated in lam_hypothesis_prior.
 *
 * The fit maximises the posterior of (theta, d_1..d_n) with every N_i
 * marginalised (a mixture likelihood, by EM with Gauss-Newton M-steps);
 * each image's oxide starts from the best of a grid over nominal +-
 * search_half_nm (the likelihood is multimodal in the oxide); the floor is
 * then estimated from the residuals of the confidently assigned regions
 * (with a prior that keeps it near 3 % when few regions speak), and the
 * fit repeated. The result carries the Laplace covariance of all free
 * parameters, so every estimate has an uncertainty that includes the
 * others' (an oxide sigma that includes the response and NA uncertainty).
 *
 * Ownership: lam_estimate_alloc / lam_estimate_free. Regions are copied.
 * Not thread-safe; the fit runs on the calling thread.
 */
#ifndef LAMINA_ESTIMATE_H
#define LAMINA_ESTIMATE_H

#include <stddef.h>
#include "lamina/error.h"
#include "lamina/model.h"
#include "lamina/setup.h"

/* Shared nuisance parameters (indices into lam_estimate.shared). */
enum {
    LAM_NU_CONTINUUM = 0, /* graphene response family (lamina/conductivity.h) */
    LAM_NU_RESONANCE,
    LAM_NU_BACKGROUND,
    LAM_NU_NA,            /* illumination NA */
    LAM_NU_SHIFT,         /* per channel: wavelength shift, nm */
    LAM_NU_WIDTH = LAM_NU_SHIFT + LAM_MAX_CHANNELS, /* per channel: ln(width scale) */
    LAM_NU_GAIN = LAM_NU_WIDTH + LAM_MAX_CHANNELS, /* per channel: ln(contrast gain) */
    LAM_NU_OFFSET = LAM_NU_GAIN + LAM_MAX_CHANNELS, /* per channel: contrast offset */
    LAM_NU_COUNT = LAM_NU_OFFSET + LAM_MAX_CHANNELS
};

typedef struct lam_nuisance {
    const char *name;     /* "resonance", "illumination_na", "shift_r" ... */
    double value;         /* current / fitted */
    double prior_mean, prior_sd; /* Gaussian prior; sd 0 = fixed at prior_mean */
    double alone_sd;      /* the setup's own prior sd where a pooled prior replaced it
                           * (lamina/pool.h), else 0 */
    double lo, hi;        /* hard physical bounds */
    double sigma;         /* posterior sd after the fit (NAN before) */
    int fitted;           /* free in the fit */
    const char *source;   /* "setup", "setup (calibrated)", "default prior", "pooled" */
} lam_nuisance;

/* Hypotheses a region may be. */
typedef enum lam_hypothesis {
    LAM_HYP_SUBSTRATE = 0, /* followed by 1..K, then: */
    LAM_HYP_THICK_OFFSET = 1, /* index K + 1 */
    LAM_HYP_UNMODELLED_OFFSET = 2 /* index K + 2 */
} lam_hypothesis;

/* Prior masses, relative: each of 1..K layers 1, thick 1, substrate 0.1,
 * unmodelled 0.1; the unmodelled density is uniform over a contrast box of
 * side 2 (-1..1) per channel. */
double lam_hypothesis_prior(size_t hyp, size_t max_layers);
#define LAM_UNMODELLED_SIDE 2.0

typedef struct lam_est_region {
    double mean[LAM_MAX_CHANNELS]; /* interior mean contrast */
    double var[LAM_MAX_CHANNELS];  /* its statistical variance */
    int use;                       /* takes part in the fit */
    int known_layers;              /* > 0: a label (calibration); 0 latent */
} lam_est_region;

typedef struct lam_est_image {
    size_t count;
    lam_est_region *regions;       /* owned copy */
    lam_nuisance oxide;            /* this image's oxide thickness, nm; its sigma includes
                                    * the shared parameters' uncertainty */
    double oxide_sigma_given_shared; /* the oxide's sigma were the shared parameters known
                                    * exactly (the part that averages down over images);
                                    * the rest, sqrt(sigma^2 - this^2), is common to every
                                    * image the shared parameters describe */
    double oxide_sigma_alone;      /* the oxide's sigma with the setup's own priors of the
                                    * shared parameters where pooled ones replaced them
                                    * (alone_sd), at the same optimum: what one image alone
                                    * knows; = oxide.sigma without a pooled prior */
    double log_posterior;          /* this image's share at the optimum */
    double data_loglik;            /* ... without its oxide prior: how well its regions fit */
    double unmodelled_share;       /* of its informing regions, the mean responsibility of
                                    * the unmodelled hypothesis at the optimum */
    size_t regions_used, confident;
    double grid_best, grid_scale;  /* the starting grid's best score and its contrast scale */
    double grid_oxide;             /* ... and its oxide */
    double grid_factor[LAM_MAX_CHANNELS]; /* ... and its per-channel contrast factors */
    double alt_oxide[3], alt_scale[3], alt_score[3]; /* other grid maxima (NAN when none) */
    double alt_factor[3][LAM_MAX_CHANNELS];
} lam_est_image;

typedef struct lam_estimate_options {
    size_t max_layers;             /* K (the ladder the fit uses), default 6 */
    double search_half_nm;         /* oxide grid half width (default 60) */
    double search_step_nm;         /* its step (2) */
    double floor_abs, floor_rel;   /* starting model floor (0.003, 0.03) */
    int estimate_floor;            /* re-estimate floor_rel from residuals (1) */
    size_t max_iterations;         /* EM / Gauss-Newton iterations (30) */
    size_t threads;                /* threads for the starting grid (1); the result
                                    * does not depend on it */
    int give_up_starts;            /* the multistart leaves starts that cannot come
                                    * within LAM_RIVAL_MARGIN of the first (1; 0:
                                    * every start runs to convergence) */
    const struct lam_grid_ladders *ladders; /* borrowed, or NULL: the starting grid's
                                    * model ladders made beforehand
                                    * (lam_grid_ladders_make) */
} lam_estimate_options;

/* The starting grid's model ladders (every layer count the grid reads, at
 * every oxide step of a search, before the gains), made once for several
 * fits of one image: the nominal fit's +-60 nm are part of the wide
 * search's +-200 nm. A fit whose options carry them takes them where its
 * grid's oxides and its starting model point are the same to the bit (the
 * same numbers as making them), and makes its own otherwise. */
typedef struct lam_grid_ladders lam_grid_ladders;

typedef struct lam_estimate {
    size_t channels, max_layers;
    lam_nuisance shared[LAM_NU_COUNT];
    size_t images, cap;
    lam_est_image *image;
    double floor_abs[LAM_MAX_CHANNELS], floor_abs_prior[LAM_MAX_CHANNELS];
    double floor_rel, floor_rel_prior;
    double fermi_ev;               /* Fermi level of the ladder (the setup's) */
    double start_scale;            /* the contrast scale the fit started from */
    int fitted;
    size_t iterations;
    /* Laplace covariance of the free shared parameters (in the order of
     * 'free_index') and their cross terms with each image's oxide */
    size_t nfree;
    int free_index[LAM_NU_COUNT];
    double cov[LAM_NU_COUNT][LAM_NU_COUNT];
    double *cross;                 /* images x nfree: cov(shared_k, oxide_j) */
    lam_estimate_options opt;
    /* The posterior can have a second mode that the data hardly tell from
     * the first (a response half as strong with twice the layers, another
     * interference order). When its log posterior is within
     * LAM_RIVAL_MARGIN of the best, 'rival' is a full fitted estimate at
     * that mode (owned) with weight rival_weight = 1 / (1 + e^-d), d the
     * difference of the log posteriors (the best has 1 - rival_weight);
     * NULL otherwise. log_evidence (Laplace: log posterior + half the log
     * determinant of the covariance) is reported, not used: at a
     * parameter's bound its volume term is unreliable. */
    double log_evidence;
    struct lam_estimate *rival;
    double rival_weight;
} lam_estimate;

/* Second modes whose log evidence is this far below the best are dropped
 * (e^-8: one in 3000). */
#define LAM_RIVAL_MARGIN 8.0

/* The multistart's other starts are fitted only to find a better mode or
 * a rival within LAM_RIVAL_MARGIN of the best. From this many iterations
 * on, a start's EM stops when it creeps (none of its last three
 * iterations moved a parameter by LAM_HOPELESS_MOVE of its prior sd) and
 * would still end LAM_RIVAL_MARGIN below the first start were every
 * iteration left to gain as much as the best of those three. Its floor is
 * refitted all the same, and the EM after that is judged likewise: a
 * refitted floor raised a start of the D04 sample by 35, to within the
 * margin. Starts pressed against the search's edge, or with a camera
 * channel shifted tens of nm, crept up by thousandths per iteration to the
 * iteration limit in both EM runs (the bench images' wide search,
 * 2026-12-04). Without the creeping condition a start of the A07 sample
 * that was crossing 190 nm of oxide in 15 nm steps was stopped 94 below
 * where it would end (the mode another start found). */
#define LAM_HOPELESS_AFTER 5
#define LAM_HOPELESS_MOVE 0.02

/* K = 6, oxide grid nominal +- 60 nm in 2 nm steps, starting floor
 * 0.003 + 3 %, floor estimated, 30 iterations, one thread, hopeless
 * starts given up. */
lam_estimate_options lam_estimate_options_default(void);

/* Priors from a setup: what it gives is tight (its "uncertainty" block, or
 * the spread of a value set by hand), what it leaves to defaults is wide
 * (docs/method.md lists the numbers). */
lam_status lam_estimate_alloc(const lam_setup *setup, size_t channels,
                              const lam_estimate_options *opt, lam_estimate **out,
                              lam_error *err);
void lam_estimate_free(lam_estimate *e);

/* Add an image's regions with its nominal oxide and the prior sd of the
 * true oxide about it (<= 0 or NAN: the default, 8 % of nominal, at least
 * 8 nm; otherwise at least LAM_OXIDE_SD_MIN_NM, setup.h).
 * Returns the image's index through 'index' (may be NULL). */
lam_status lam_estimate_add_image(lam_estimate *e, const lam_est_region *regions, size_t count,
                                  double nominal_oxide_nm, double oxide_sd_nm, size_t *index,
                                  lam_error *err);

/* Fix a shared parameter (sd 0) or set its prior, e.g. to carry a pooled
 * estimate to a later image. */
void lam_estimate_set_prior(lam_estimate *e, int param, double mean, double sd,
                            const char *source);

/* Ladders for image j of e at its current model point, over the oxides
 * max(0, centre - half_nm) .. centre + half_nm in e's search step (centre:
 * the image's oxide prior centre), made on e's threads with copies of
 * model. */
lam_status lam_grid_ladders_make(const lam_estimate *e, size_t j, lam_model *model,
                                 double half_nm, lam_grid_ladders **out, lam_error *err);
void lam_grid_ladders_free(lam_grid_ladders *t);

/* The fit. 'fit_model' is a model of at least max_layers layers (the coarse
 * one); 'thick_model' one of LAM_MODEL_MAX_LAYERS layers (may be the same
 * object when it has 40 layers). Both must come from the setup the priors
 * came from. */
lam_status lam_estimate_fit(lam_estimate *e, lam_model *fit_model, lam_model *thick_model,
                            lam_error *err);

/* The model point of image j at the current parameter values, and the
 * contrast gains (linear). */
lam_model_point lam_estimate_point(const lam_estimate *e, size_t image);
void lam_estimate_gains(const lam_estimate *e, double gain[LAM_MAX_CHANNELS]);

/* The observed-scale ladder from a model ladder (in place): for N >= 1,
 * g C + eps (1 - g C) per channel, with g the gains and eps the offsets
 * (a colour-dependent bias of every flake against the substrate, as lossy
 * colour compression leaves it); the substrate row stays 0. */
void lam_estimate_observe(const lam_estimate *e, lam_prediction *ladder);

/* The ladder of image j as the analysis sees it: gains applied, N = 0..40. */
lam_status lam_estimate_ladder(const lam_estimate *e, size_t image, lam_model *thick_model,
                               lam_prediction *out, lam_error *err);

/* Fit again from the current values (after regions changed, e.g. a second
 * segmentation with the fitted ladder): no oxide grid, the oxides stay in
 * their basins. */
lam_status lam_estimate_refit(lam_estimate *e, lam_model *model, lam_error *err);

/* Replace image j's regions (copied). */
lam_status lam_estimate_set_regions(lam_estimate *e, size_t j, const lam_est_region *regions,
                                    size_t count, lam_error *err);

/* What the region posteriors of image j need: the observed-scale ladder
 * N = 0..40 at the estimate, its gradients for N = 0..K with respect to the
 * free parameters (the free shared ones in e->free_index order, then the
 * image's oxide), and their joint covariance (Laplace). */
typedef struct lam_est_view {
    size_t nfree;                  /* free shared + 1 (the oxide) */
    lam_prediction ladder;
    lam_ladder_grad grad[LAM_NU_COUNT + 1];
    double cov[LAM_NU_COUNT + 1][LAM_NU_COUNT + 1];
} lam_est_view;

/* Image j's view of a fitted estimate for the region posteriors: its
 * observed ladder of all 40 layers, the ladder's gradients in the free
 * shared parameters and its oxide, and their joint Laplace covariance
 * (the oxide last). LAM_ENOMEM or the model's errors. */
lam_status lam_estimate_view(const lam_estimate *e, size_t j, lam_model *model,
                             lam_est_view *view, lam_error *err);

/* Model floor variance of a region in a channel, (floor_abs + floor_rel
 * |measured|)^2, taken at the region's MEASURED contrast so that it is the
 * same under every hypothesis. Taken at each hypothesis' prediction (as
 * before 2026-12-05) it let a reading with larger contrasts buy variance
 * (under 2N the floor is about twice that under N), and its derivative in
 * the shared parameters was missing from the fit's Gauss-Newton steps, so
 * half of the EM's tries were rejected (docs/performance.md, fifteenth and
 * sixteenth stops). */
double lam_estimate_floor_var(const lam_estimate *e, size_t channel, double measured);

/* The prior centre of a channel's absolute floor: what the image's own
 * substrate says about its low-frequency errors (flat-field residuals, JPEG
 * colour blocks), at least the default. */
void lam_estimate_set_floor_prior(lam_estimate *e, size_t channel, double floor_abs);

#endif
