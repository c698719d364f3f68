/* linalg_internal.h - dense symmetric positive-definite algebra for the
 * small matrices of the estimation (at most LAM__MAT_MAX parameters):
 * Cholesky factor, solve, inverse, log-determinant. Row-major n x n arrays
 * with leading dimension LAM__MAT_MAX. Not public: shared by estimate.c and
 * infer.c. */
#ifndef LAMINA_LINALG_INTERNAL_H
#define LAMINA_LINALG_INTERNAL_H

#include <stddef.h>

#define LAM__MAT_MAX 20

typedef double lam__mat[LAM__MAT_MAX][LAM__MAT_MAX];

/* Cholesky factor L (lower) of the SPD matrix a (n x n) into l. Returns 0,
 * or -1 when a is not positive definite (a pivot <= 1e-300). */
int lam__cholesky(const lam__mat a, size_t n, lam__mat l);

/* Solve (L L^T) x = b in place (b becomes x). */
void lam__cholesky_solve(const lam__mat l, size_t n, double *b);

/* Inverse of L L^T into inv. */
void lam__cholesky_inverse(const lam__mat l, size_t n, lam__mat inv);

/* log det(L L^T). */
double lam__cholesky_logdet(const lam__mat l, size_t n);

/* Make a symmetric matrix positive definite for inversion: add a ridge of
 * 'ridge' times the largest diagonal until the factor exists. Returns the
 * ridge used (0 when none was needed). */
double lam__cholesky_ridged(const lam__mat a, size_t n, lam__mat l);

#endif
