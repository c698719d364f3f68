/* robust_fit.c - bisquare M-estimate by reweighted Householder least
 * squares (robust_fit.h). */
#include "robust_fit.h"

#include <float.h>
#include <stddef.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_multifit.h>

#define TUNE 4.685          /* GSL's bisquare default: 95 % efficiency at the normal */
#define LEVERAGE_MAX 0.9999
#define MAD_TO_SIGMA 0.6745
#define SIGMA_FLOOR 1e-6    /* of the standard deviation of y */
#define DEPENDENT 1e-10     /* a column's part outside the others' span, relative */

typedef struct work {
    size_t n, p;
    double *a;    /* p columns of n: the weighted design, then its reflectors and R */
    double *b;    /* n: the weighted y, then Q^T of it */
    double *diag; /* p: R's diagonal */
    double *r;    /* n: residuals */
    double *fac;  /* n: 1 / sqrt(1 - leverage) */
    double *w;    /* n: weights */
    double *sel;  /* n: scratch for the median */
} work;

static int work_alloc(work *k, size_t n, size_t p)
{
    k->n = n, k->p = p;
    k->a = malloc((p + 5) * n * sizeof *k->a + p * sizeof *k->a);
    if (!k->a)
        return -1;
    k->b = k->a + p * n;
    k->r = k->b + n;
    k->fac = k->r + n;
    k->w = k->fac + n;
    k->sel = k->w + n;
    k->diag = k->sel + n;
    return 0;
}

/* The weighted design (rows times sqrt(w); w NULL: all 1) into a and b,
 * column by column. */
static void weigh(work *k, const double *X, const double *y, const double *w)
{
    size_t n = k->n, p = k->p;
    for (size_t i = 0; i < n; i++) {
        double s = w ? sqrt(w[i]) : 1.0;
        for (size_t j = 0; j < p; j++)
            k->a[j * n + i] = s * X[i * p + j];
        k->b[i] = s * y[i];
    }
}

static double dot_from(const double *u, const double *v, size_t from, size_t n)
{
    double s = 0;
    for (size_t i = from; i < n; i++)
        s += u[i] * v[i];
    return s;
}

/* Reflect column v (rows from..n) by the reflector stored in u (tau). */
static void reflect(const double *u, double tau, double *v, size_t from, size_t n)
{
    double s = tau * dot_from(u, v, from, n);
    for (size_t i = from; i < n; i++)
        v[i] -= s * u[i];
}

/* Householder QR of a, applied to b too: column c keeps its reflector
 * from row c down, R's diagonal goes to diag and R's row c stands in row
 * c of the columns right of c. -1 when a column lies (nearly) in the span
 * of those before it (reflections keep each column's whole norm, so
 * 'whole' is the weighted column's own). */
static int factor(work *k)
{
    size_t n = k->n, p = k->p;
    for (size_t c = 0; c < p; c++) {
        double *col = k->a + c * n;
        double whole = sqrt(dot_from(col, col, 0, n)), norm = sqrt(dot_from(col, col, c, n));
        if (!(norm > DEPENDENT * whole))
            return -1;
        double alpha = col[c] > 0 ? -norm : norm, u0 = col[c] - alpha;
        double tau = -1.0 / (alpha * u0); /* 2 / |u|^2 */
        col[c] = u0;
        for (size_t j = c + 1; j < p; j++)
            reflect(col, tau, k->a + j * n, c, n);
        reflect(col, tau, k->b, c, n);
        k->diag[c] = alpha;
    }
    return 0;
}

/* R coef = (Q^T b)[0..p). */
static void solve(const work *k, double *coef)
{
    size_t n = k->n, p = k->p;
    for (size_t c = p; c-- > 0;) {
        double s = k->b[c];
        for (size_t j = c + 1; j < p; j++)
            s -= k->a[j * n + c] * coef[j];
        coef[c] = s / k->diag[c];
    }
}

/* Least squares with weights w (NULL: none). -1: dependent columns. */
static int least_squares(work *k, const double *X, const double *y, const double *w,
                         double *coef)
{
    weigh(k, X, y, w);
    if (factor(k))
        return -1;
    solve(k, coef);
    return 0;
}

/* 1 / sqrt(1 - h) per row, h = |R^-T x|^2 from the unweighted factors. */
static void leverage_factors(work *k, const double *X)
{
    size_t n = k->n, p = k->p;
    for (size_t i = 0; i < n; i++) {
        double z[LAM__ROBUST_MAX_TERMS], h = 0;
        for (size_t c = 0; c < p; c++) {
            double s = X[i * p + c];
            for (size_t j = 0; j < c; j++)
                s -= k->a[c * n + j] * z[j];
            z[c] = s / k->diag[c];
            h += z[c] * z[c];
        }
        k->fac[i] = 1.0 / sqrt(1.0 - (h > LEVERAGE_MAX ? LEVERAGE_MAX : h));
    }
}

static void residuals(work *k, const double *X, const double *y, const double *coef)
{
    for (size_t i = 0; i < k->n; i++) {
        double f = 0;
        for (size_t j = 0; j < k->p; j++)
            f += X[i * k->p + j] * coef[j];
        k->r[i] = y[i] - f;
    }
}

/* The k-th smallest of v[0..n) (v reordered): Hoare's selection
 * (FIND), partitioning around v[k] until k's place is fixed. */
static double select_kth(double *v, size_t n, size_t kth)
{
    ptrdiff_t lo = 0, hi = (ptrdiff_t)n - 1, k = (ptrdiff_t)kth;
    while (lo < hi) {
        double pivot = v[k];
        ptrdiff_t i = lo, j = hi;
        do {
            while (v[i] < pivot)
                i++;
            while (pivot < v[j])
                j--;
            if (i <= j) {
                double t = v[i];
                v[i++] = v[j];
                v[j--] = t;
            }
        } while (i <= j);
        if (j < k)
            lo = i;
        if (k < i)
            hi = j;
    }
    return v[k];
}

/* The median of |r| without its p - 1 smallest, over 0.6745. */
static double mad_sigma(work *k)
{
    size_t n = k->n, m = n - k->p + 1, k1 = k->p - 1 + (m - 1) / 2, k2 = k->p - 1 + m / 2;
    for (size_t i = 0; i < n; i++)
        k->sel[i] = fabs(k->r[i]);
    double v1 = select_kth(k->sel, n, k1), v2 = v1;
    if (k2 != k1) { /* the next larger: the least of those after k1 */
        v2 = k->sel[k1 + 1];
        for (size_t i = k1 + 2; i < n; i++)
            v2 = k->sel[i] < v2 ? k->sel[i] : v2;
    }
    return (v1 + v2) / 2 / MAD_TO_SIGMA;
}

static double sample_sd(const double *y, size_t n)
{
    double mean = 0, ss = 0;
    for (size_t i = 0; i < n; i++)
        mean += (y[i] - mean) / (double)(i + 1);
    for (size_t i = 0; i < n; i++)
        ss += (y[i] - mean) * (y[i] - mean);
    return n > 1 ? sqrt(ss / (double)(n - 1)) : 0;
}

static int converged(const double *prev, const double *coef, size_t p)
{
    const double tol = sqrt(DBL_EPSILON);
    for (size_t j = 0; j < p; j++)
        if (fabs(coef[j] - prev[j]) > tol * fmax(fabs(prev[j]), fabs(coef[j])))
            return 0;
    return 1;
}

/* Bisquare weights of the leverage-scaled residuals. */
static void bisquare_weights(work *k, double floor)
{
    for (size_t i = 0; i < k->n; i++)
        k->r[i] *= k->fac[i];
    double sigma = mad_sigma(k), scale = 1.0 / ((sigma > floor ? sigma : floor) * TUNE);
    for (size_t i = 0; i < k->n; i++) {
        double u = k->r[i] * scale;
        k->w[i] = fabs(u) < 1.0 ? (1 - u * u) * (1 - u * u) : 0.0;
    }
}

/* GSL's own fit, for designs whose columns are (nearly) dependent. */
static lam__robust_status gsl_fit(const double *X, const double *y, size_t n, size_t p,
                                  size_t maxiter, double *coef)
{
    gsl_matrix_const_view xv = gsl_matrix_const_view_array(X, n, p);
    gsl_vector_const_view yv = gsl_vector_const_view_array(y, n);
    gsl_vector *c = gsl_vector_alloc(p);
    gsl_matrix *cov = gsl_matrix_alloc(p, p);
    gsl_multifit_robust_workspace *ws =
        gsl_multifit_robust_alloc(gsl_multifit_robust_bisquare, n, p);
    lam__robust_status st = LAM__ROBUST_NOMEM;
    if (c && cov && ws) {
        gsl_multifit_robust_maxiter(maxiter, ws);
        int gs = gsl_multifit_robust(&xv.matrix, &yv.vector, c, cov, ws);
        st = !gs ? LAM__ROBUST_CONVERGED : gs == GSL_EMAXITER ? LAM__ROBUST_MAXITER
                                                              : LAM__ROBUST_FAILED;
        for (size_t j = 0; st >= 0 && j < p; j++)
            coef[j] = gsl_vector_get(c, j);
    }
    gsl_vector_free(c);
    gsl_matrix_free(cov);
    gsl_multifit_robust_free(ws);
    return st;
}

lam__robust_status lam__robust_bisquare(const double *X, const double *y, size_t n, size_t p,
                                        size_t maxiter, double *coef)
{
    if (p == 0 || p > LAM__ROBUST_MAX_TERMS || n <= p)
        return LAM__ROBUST_FAILED;
    work k;
    if (work_alloc(&k, n, p))
        return LAM__ROBUST_NOMEM;
    double sd = sample_sd(y, n), floor = SIGMA_FLOOR * sd, c[LAM__ROBUST_MAX_TERMS],
           prev[LAM__ROBUST_MAX_TERMS];
    if (floor == 0)
        floor = 1.0;
    int done = 0, dependent = least_squares(&k, X, y, NULL, c);
    if (!dependent) {
        leverage_factors(&k, X);
        residuals(&k, X, y, c);
    }
    for (size_t it = 1; !dependent && !done && it <= maxiter; it++) {
        bisquare_weights(&k, floor);
        memcpy(prev, c, p * sizeof *c);
        if ((dependent = least_squares(&k, X, y, k.w, c)))
            break;
        residuals(&k, X, y, c);
        done = converged(prev, c, p);
    }
    free(k.a);
    if (dependent)
        return gsl_fit(X, y, n, p, maxiter, coef);
    memcpy(coef, c, p * sizeof *c);
    return done ? LAM__ROBUST_CONVERGED : LAM__ROBUST_MAXITER;
}
