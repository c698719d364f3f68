/* linalg.c - small dense SPD algebra (Cholesky) for the estimation. */
#include "linalg_internal.h"

#include <math.h>
#include <string.h>

int lam__cholesky(const lam__mat a, size_t n, lam__mat l)
{
    for (size_t i = 0; i < n; i++)
        for (size_t j = 0; j <= i; j++) {
            double s = a[i][j];
            for (size_t k = 0; k < j; k++)
                s -= l[i][k] * l[j][k];
            if (i == j) {
                if (!(s > 1e-300))
                    return -1;
                l[i][i] = sqrt(s);
            } else {
                l[i][j] = s / l[j][j];
            }
        }
    for (size_t i = 0; i < n; i++)
        for (size_t j = i + 1; j < n; j++)
            l[i][j] = 0;
    return 0;
}

void lam__cholesky_solve(const lam__mat l, size_t n, double *b)
{
    for (size_t i = 0; i < n; i++) {
        double s = b[i];
        for (size_t k = 0; k < i; k++)
            s -= l[i][k] * b[k];
        b[i] = s / l[i][i];
    }
    for (size_t i = n; i-- > 0;) {
        double s = b[i];
        for (size_t k = i + 1; k < n; k++)
            s -= l[k][i] * b[k];
        b[i] = s / l[i][i];
    }
}

void lam__cholesky_inverse(const lam__mat l, size_t n, lam__mat inv)
{
    for (size_t j = 0; j < n; j++) {
        double col[LAM__MAT_MAX] = {0};
        col[j] = 1;
        lam__cholesky_solve(l, n, col);
        for (size_t i = 0; i < n; i++)
            inv[i][j] = col[i];
    }
}

double lam__cholesky_logdet(const lam__mat l, size_t n)
{
    double s = 0;
    for (size_t i = 0; i < n; i++)
        s += 2 * log(l[i][i]);
    return s;
}

double lam__cholesky_ridged(const lam__mat a, size_t n, lam__mat l)
{
    if (lam__cholesky(a, n, l) == 0)
        return 0;
    double top = 0;
    for (size_t i = 0; i < n; i++)
        top = fmax(top, fabs(a[i][i]));
    if (!(top > 0))
        top = 1;
    lam__mat b;
    for (double ridge = 1e-12; ridge < 1e3; ridge *= 10) {
        memcpy(b, a, sizeof b);
        for (size_t i = 0; i < n; i++)
            b[i][i] += ridge * top;
        if (lam__cholesky(b, n, l) == 0)
            return ridge;
    }
    /* unreachable for a finite matrix; leave an identity factor */
    memset(l, 0, sizeof(lam__mat));
    for (size_t i = 0; i < n; i++)
        l[i][i] = 1;
    return INFINITY;
}
