/* estimate_internal.h - pieces of the joint likelihood shared by
 * estimate.c, estimate_fit.c and infer.c (not public). */
#ifndef LAMINA_ESTIMATE_INTERNAL_H
#define LAMINA_ESTIMATE_INTERNAL_H

#include "lamina/estimate.h"
#include "linalg_internal.h"

/* -0.5 sum_c [(m - mu)^2 / var + ln(2 pi var)], the logarithm's part
 * given (log_norm = ln prod_c 2 pi var_c, lam__region_fixed): one
 * logarithm per region instead of one per mean. */
double lam__gauss_logpdf_norm(const double *m, const double *mu, const double *var, size_t nc,
                              double log_norm);

double lam__logsumexp(const double *x, size_t n);

/* A region's variance in each channel, the same under every hypothesis:
 * its statistical variance plus the model floor at its measured contrast
 * (lam_estimate_floor_var). */
void lam__region_var(const lam_estimate *e, const lam_est_region *r,
                     double var[LAM_MAX_CHANNELS]);

/* What a region's terms share across ladders that differ only in their
 * layers' contrasts (the starting grid's scales and channel factors at one
 * oxide step): its variance, the normaliser and the unmodelled
 * hypothesis' term (the residue films are not scaled). */
typedef struct lam__region_fixed {
    double var[LAM_MAX_CHANNELS]; /* lam__region_var */
    double log_norm;              /* ln prod_c (2 pi var_c) */
    double unmodelled;            /* the unmodelled hypothesis' ln density (estimate.c) */
} lam__region_fixed;

void lam__region_fixed_of(const lam_estimate *e, const lam_est_region *r,
                          const lam_prediction *ladder, lam__region_fixed *out);

/* log(prior x likelihood) per hypothesis (K + 3 values: substrate, 1..K,
 * thick, unmodelled) of a region against an observed-scale ladder. */
void lam__region_logterms(const lam_estimate *e, const lam_est_region *r,
                          const lam_prediction *ladder, double *lt);

/* What every region's terms read of a ladder, made once for all the
 * regions scored against it: the "thick" hypothesis' span (the least and
 * most contrast of entries K+1..top per channel; any: the ladder has such
 * entries) and the logarithms of the hypotheses' priors. */
typedef struct lam__ladder_terms {
    double lo[LAM_MAX_CHANNELS], hi[LAM_MAX_CHANNELS];
    int any;
    double log_prior_substrate, log_prior_layers, log_prior_thick, log_prior_unmodelled;
} lam__ladder_terms;

void lam__ladder_terms_of(const lam_estimate *e, const lam_prediction *ladder,
                          lam__ladder_terms *t);

/* lam__region_logterms with the ladder's terms t made once for all the
 * regions scored against it, and the region's fixed terms (NULL: made
 * here) made once for all the ladders that share them (the same values:
 * the innermost call of the fit's starting grid). */
void lam__region_logterms_in(const lam_estimate *e, const lam_est_region *r,
                             const lam_prediction *ladder, const lam__ladder_terms *t,
                             const lam__region_fixed *fixed, double *lt);

/* The model parameter (LAM_MP_*) a shared nuisance moves, or -1 for the
 * gains (applied outside the model). */
int lam__model_param_of(int nuisance);

/* Gradient of the observed-scale contrast of N = 0..K of image j with
 * respect to the free shared parameters (in e->free_index order) and, last,
 * the image's oxide: grad[k][N][c]. 'ladder' is the model ladder at the
 * image's point (no gains). */
lam_status lam__image_gradient(const lam_estimate *e, size_t j, lam_model *model,
                               const lam_prediction *ladder, lam_ladder_grad *grad,
                               lam_error *err);

/* Image j's observed ladder of 'layers' layers at the current values. */
lam_status lam__image_ladder(const lam_estimate *e, size_t j, lam_model *model, size_t layers,
                            lam_prediction *out, lam_error *err);

/* Log posterior share of image j (its regions and its oxide prior) for a
 * ladder; fills responsibilities (count x (K + 3)) when resp is given. */
double lam__image_logpost(const lam_estimate *e, size_t j, const lam_prediction *ladder,
                          double *resp);
/* The same with the oxide prior's term given (the grid scores oxides other
 * than the image's current value, on several threads at once) and, unless
 * NULL, the regions' fixed terms against this ladder (one per region of
 * the image: the grid makes them once per oxide step). */
double lam__image_logpost_with(const lam_estimate *e, size_t j, const lam_prediction *ladder,
                               double oxide_prior, const lam__region_fixed *fixed, double *resp);
/* Colour channels whose curves the setup does not give (the gains keep
 * their wide default prior): contrast shape alone must tell N from 2N. */
int lam__curves_unknown(const lam_estimate *e);

/* The log prior of a nuisance at value v (0 when it is not fitted). */
double lam__prior_at(const lam_nuisance *n, double v);

/* The starting grid of every image (estimate_grid.c): sets each image's
 * oxide, grid_scale, grid_factor, the alternatives, and the shared
 * starting values (continuum for the scale, gains for the factors). */
lam_status lam__estimate_grids(lam_estimate *e, lam_model *model, lam_error *err);

/* Start from alternative 'alt' of image j's grid. */
void lam__start_at(lam_estimate *e, size_t j, int alt);

/* Start from image j's best grid cell with the contrast scale times
 * 'ratio' (2 or 1/2: the same colours read with every layer count doubled
 * or halved, a mode the grid's scale range may not show). */
void lam__start_rescaled(lam_estimate *e, size_t j, double ratio);

/* A deep copy of an estimate (its regions; not its rival nor its cross
 * terms, which its own fit makes), or NULL when out of memory. */
lam_estimate *lam__estimate_clone(const lam_estimate *e);

#endif
