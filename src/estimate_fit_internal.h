/* estimate_fit_internal.h - the fit's working state, shared by the fit
 * (estimate_fit.c: objective, EM / Gauss-Newton, floor, Laplace) and its
 * multistart (estimate_starts.c). Not public. */
#ifndef LAMINA_ESTIMATE_FIT_INTERNAL_H
#define LAMINA_ESTIMATE_FIT_INTERNAL_H

#include "estimate_internal.h"

#include <stdint.h>

/* Per-image work of one iteration. */
typedef struct img_work {
    lam_prediction ladder;              /* observed scale (gains applied), N = 0..top */
    lam_ladder_grad grad[LAM_NU_COUNT + 1]; /* free shared..., oxide last; N = 0..K */
    double *resp;                       /* count x (K + 3) */
} img_work;

typedef struct normal_eq {
    size_t n;                   /* free shared */
    lam__mat a_ss;
    double b_s[LAM__MAT_MAX];
    double *a_sd;               /* images x n */
    double *a_dd, *b_d;         /* images */
} normal_eq;

typedef struct saved_point {
    double shared[LAM_NU_COUNT];
    double floor_abs[LAM_MAX_CHANNELS], floor_rel;
    double *oxide;
} saved_point;

typedef struct fit_ctx {
    lam_estimate *e;
    lam_model *model;
    img_work *w;
    normal_eq q;
    saved_point base;
    double *ds, *dd;
    /* an EM run's accepted steps (the free shared, then every oxide;
     * step_len entries): the one being judged as taken, and the one
     * before in its priors' sds (estimate_fit.c step_turn) */
    double *step, *last_step;
    size_t step_len;
    double give_up_below; /* lam__fit_run_em stops where it cannot climb above
                           * this (LAM_HOPELESS_AFTER); -INFINITY: never
                           * (estimate_starts.c sets it for a start) */
} fit_ctx;

typedef struct mode_set {
    saved_point best, rival, first, now;
    uint8_t *sig_best, *sig_rival, *sig_now;
    double best_lp, rival_lp;
    size_t regions;
} mode_set;

/* The fit's objective: the log posterior at the current point, with every
 * image's observed ladder and responsibilities in w. */
lam_status lam__fit_objective(lam_estimate *e, lam_model *model, img_work *w, double *out,
                              lam_error *err);
/* A start that cannot climb above 'below' (LAM_HOPELESS_AFTER,
 * lamina/estimate.h), after 'done' iterations of an EM run with 'left' to
 * go: it creeps (none of its last three iterations, 'move', moved a
 * parameter by LAM_HOPELESS_MOVE of its prior sd), and even gaining in
 * each iteration left as much as the best of those three ('gain') it
 * would end below. */
int lam__start_hopeless(double lp, const double *gain, const double *move, size_t done,
                        size_t left, double below);

/* EM with damped Gauss-Newton steps (the damping grows only after a step
 * that turned back and gained under a quarter of its prediction:
 * estimate_fit.c next_damping), at most max_it iterations; a start of
 * the multistart stops early when lam__start_hopeless (f->give_up_below). */
lam_status lam__fit_run_em(fit_ctx *f, size_t max_it, double *logpost, lam_error *err);
/* Re-estimate the model floor from the residuals; refit when it moved. */
lam_status lam__fit_refloor(fit_ctx *f, double *lp, lam_error *err);
/* A start's fit with its floor: EM, the floor, EM again when it moved. */
lam_status lam__fit_settle(fit_ctx *f, double *lp, lam_error *err);

void lam__fit_save_point(const lam_estimate *e, saved_point *s);
void lam__fit_restore_point(lam_estimate *e, const saved_point *s);
void lam__fit_copy_point(saved_point *to, const saved_point *from, size_t images);

/* The working state of a fit of e with model; lam__fit_free_ctx releases
 * it and zeroes it, so a zeroed or released context may be freed again
 * (a failed init has released its own). */
lam_status lam__fit_init_ctx(fit_ctx *f, lam_estimate *e, lam_model *model, lam_error *err);
void lam__fit_free_ctx(fit_ctx *f);

/* The settled points a multistart keeps (the best and the best distinct
 * rival); 0 when out of memory. */
int lam__mode_set_init(mode_set *m, const lam_estimate *e);
void lam__mode_set_free(mode_set *m);

/* From the settled first start, the grid's other maxima and the doubled
 * and halved scale (estimate_starts.c): the best point is left in e, its
 * log posterior in *logpost, the rival in m. */
lam_status lam__multistart(fit_ctx *f, double *logpost, mode_set *m, lam_error *err);

#endif
