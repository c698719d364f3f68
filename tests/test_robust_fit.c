/* test_robust_fit.c - the bisquare fit of src/robust_fit.c against GSL's
 * gsl_multifit_robust (the reference implementation of the same
 * estimator, with an SVD per step where lamina uses a QR) on designs like
 * the substrate's: a flat field over a grid of tiles, with flakes as
 * outliers, with and without per-level offsets. */
#include "check.h"
#include "../src/robust_fit.h"

#include <math.h>
#include <string.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_multifit.h>

#define NX 40
#define NY 30
#define N (NX * NY)
#define P_MAX 9

static unsigned rng_state = 12345u;

/* uniform on (0, 1): a fixed linear congruential sequence */
static double uniform(void)
{
    rng_state = rng_state * 1664525u + 1013904223u;
    return ((double)(rng_state >> 8) + 0.5) / 16777216.0;
}

/* roughly normal: the sum of 12 uniforms less 6 */
static double normalish(void)
{
    double s = -6;
    for (int k = 0; k < 12; k++)
        s += uniform();
    return s;
}

/* The flat-field basis 1, u, v, u^2, uv, v^2, r^4 at tile i, then 'levels'
 * offsets (tile i in level i % (levels + 1), level 0 without one). */
static void design(double *X, size_t p, size_t levels)
{
    for (size_t i = 0; i < N; i++) {
        double u = 2.0 * (double)(i % NX) / (NX - 1) - 1, v = 2.0 * (double)(i / NX) / (NY - 1) - 1;
        double r2 = u * u + v * v, b[P_MAX] = {1, u, v, u * u, u * v, v * v, r2 * r2, 0, 0};
        size_t level = i % (levels + 1);
        if (level)
            b[6 + level] = 1;
        memcpy(X + i * p, b, p * sizeof *b);
    }
}

/* ln(level) of a vignetted field with noise, and flakes (outliers) over a
 * share of the tiles */
static void observations(const double *X, size_t p, double outliers, double *y)
{
    static const double truth[P_MAX] = {-0.4, 0.02, -0.03, -0.08, 0.01, -0.06, -0.02, 0.3, -0.2};
    for (size_t i = 0; i < N; i++) {
        double f = 0;
        for (size_t j = 0; j < p; j++)
            f += X[i * p + j] * truth[j];
        y[i] = f + 0.004 * normalish() + (uniform() < outliers ? 0.05 + 0.2 * uniform() : 0);
    }
}

/* GSL's fit; its status */
static int gsl_reference(const double *X, const double *y, size_t p, size_t maxiter, double *c)
{
    gsl_matrix_const_view xv = gsl_matrix_const_view_array(X, N, p);
    gsl_vector_const_view yv = gsl_vector_const_view_array(y, N);
    gsl_vector *cv = gsl_vector_alloc(p);
    gsl_matrix *cov = gsl_matrix_alloc(p, p);
    gsl_multifit_robust_workspace *ws = gsl_multifit_robust_alloc(gsl_multifit_robust_bisquare, N, p);
    gsl_multifit_robust_maxiter(maxiter, ws);
    int st = gsl_multifit_robust(&xv.matrix, &yv.vector, cv, cov, ws);
    for (size_t j = 0; j < p; j++)
        c[j] = gsl_vector_get(cv, j);
    gsl_vector_free(cv);
    gsl_matrix_free(cov);
    gsl_multifit_robust_free(ws);
    return st;
}

static double largest_difference(const double *a, const double *b, size_t p)
{
    double d = 0;
    for (size_t j = 0; j < p; j++)
        d = isnan(a[j] - b[j]) || fabs(a[j] - b[j]) > d ? fabs(a[j] - b[j]) : d;
    return d;
}

static void compare(size_t p, size_t levels, double outliers, size_t maxiter, const char *what)
{
    static double X[N * P_MAX], y[N];
    double mine[P_MAX], ref[P_MAX];
    design(X, p, levels);
    observations(X, p, outliers, y);
    int gs = gsl_reference(X, y, p, maxiter, ref);
    lam__robust_status st = lam__robust_bisquare(X, y, N, p, maxiter, mine);
    check_int(st, gs == GSL_EMAXITER ? LAM__ROBUST_MAXITER : gs ? -99 : LAM__ROBUST_CONVERGED,
              "%s: the same ending as GSL's (status %d)", what, gs);
    check_abs(largest_difference(mine, ref, p), 0, 1e-12, "%s: coefficients as GSL's", what);
}

static void test_against_gsl(void)
{
    gsl_error_handler_t *old = gsl_set_error_handler_off();
    compare(7, 0, 0.0, 30, "flat field, no outliers");
    compare(7, 0, 0.15, 30, "flat field, 15 % flakes");
    compare(7, 0, 0.45, 100, "flat field, 45 % flakes");
    compare(9, 2, 0.2, 100, "surface with two level offsets, 20 % flakes");
    compare(7, 0, 0.3, 2, "stopped after 2 steps");
    gsl_set_error_handler(old);
}

/* a column twice: GSL's SVD fit, exactly */
static void test_dependent_columns(void)
{
    static double X[N * 8], y[N];
    double mine[8], ref[8];
    design(X, 7, 0);
    observations(X, 7, 0.1, y);
    static double X8[N * 8];
    for (size_t i = 0; i < N; i++) {
        memcpy(X8 + i * 8, X + i * 7, 7 * sizeof *X);
        X8[i * 8 + 7] = X[i * 7 + 1]; /* u again */
    }
    gsl_error_handler_t *old = gsl_set_error_handler_off();
    int gs = gsl_reference(X8, y, 8, 30, ref);
    lam__robust_status st = lam__robust_bisquare(X8, y, N, 8, 30, mine);
    gsl_set_error_handler(old);
    check_int(st, gs == GSL_EMAXITER ? LAM__ROBUST_MAXITER : LAM__ROBUST_CONVERGED,
              "dependent columns: GSL's ending");
    check_true(!memcmp(mine, ref, sizeof mine), "dependent columns: GSL's coefficients exactly");
}

/* an exact fit: the scale's floor (1e-6 of y's spread) keeps it finite */
static void test_exact_fit(void)
{
    static double X[N * 7], y[N];
    double mine[7];
    design(X, 7, 0);
    for (size_t i = 0; i < N; i++)
        y[i] = 0.5 - 0.25 * X[i * 7 + 1] + 0.125 * X[i * 7 + 3];
    lam__robust_status st = lam__robust_bisquare(X, y, N, 7, 30, mine);
    double want[7] = {0.5, -0.25, 0, 0.125, 0, 0, 0};
    check_int(st, LAM__ROBUST_CONVERGED, "exact data: converged");
    check_abs(largest_difference(mine, want, 7), 0, 1e-13, "exact data: the exact coefficients");
    /* three outliers: the median residual is 0, the floor sets the scale */
    y[10] += 0.3, y[500] -= 0.2, y[900] += 0.1;
    st = lam__robust_bisquare(X, y, N, 7, 30, mine);
    check_int(st, LAM__ROBUST_CONVERGED, "exact data and 3 outliers: converged");
    check_abs(largest_difference(mine, want, 7), 0, 1e-12,
              "exact data and 3 outliers: the outliers weigh nothing");
}

int main(void)
{
    check_begin("test_robust_fit");
    test_against_gsl();
    test_dependent_columns();
    test_exact_fit();
    return check_summary();
}
