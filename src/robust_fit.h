/* robust_fit.h - Tukey's bisquare M-estimate of a linear model y ~ X c by
 * iteratively reweighted least squares (internal to the substrate
 * module).
 *
 * The estimator is the one GSL's gsl_multifit_robust computes with its
 * bisquare weights, step for step: an ordinary least-squares start;
 * residuals divided by sqrt(1 - h) for each row's leverage h (at most
 * 0.9999; DuMouchel and O'Brien 1989); their scale the median absolute
 * residual without the p smallest, over 0.6745 (Street, Carroll and
 * Ruppert 1988), at least 1e-6 of the standard deviation of y; weights
 * (1 - u^2)^2 for u = residual / (4.685 scale) below 1, else 0; stop when
 * no coefficient moved by more than sqrt(DBL_EPSILON) of its size.
 *
 * Why: the substrate's flat field and brightness surfaces take six to
 * eight such fits per image over ~1500 tiles. GSL solves each weighted
 * step with a singular value decomposition and sorts the residuals for
 * the median: 3-4 ms per fit, 10-15 % of a 1 MP tile's analysis. Here a
 * step is a Householder QR of the weighted design and the median a
 * selection, several times faster, with the same coefficients to
 * rounding (tests/test_robust_fit.c compares with GSL). When a weighted
 * design's columns are (nearly) dependent the fit is GSL's own, whose SVD
 * drops the dependent direction.
 */
#ifndef LAMINA_ROBUST_FIT_H
#define LAMINA_ROBUST_FIT_H

#include <stddef.h>

#define LAM__ROBUST_MAX_TERMS 16

typedef enum lam__robust_status {
    LAM__ROBUST_CONVERGED = 0,
    LAM__ROBUST_MAXITER = 1, /* coef: the last iterate (GSL_EMAXITER's) */
    LAM__ROBUST_NOMEM = -1,
    LAM__ROBUST_FAILED = -2  /* GSL's fit (dependent columns) failed otherwise */
} lam__robust_status;

/* X: n rows of p values (row-major), 1 <= p <= LAM__ROBUST_MAX_TERMS,
 * n > p; at most maxiter reweighted steps. coef: p values out. */
lam__robust_status lam__robust_bisquare(const double *X, const double *y, size_t n, size_t p,
                                        size_t maxiter, double *coef);

#endif
