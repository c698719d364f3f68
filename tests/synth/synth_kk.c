/* synth_kk.c - Pauli blocking of any response with a numerical
 * Kramers-Kronig transform of the removed real part.
 *
 * For exp(-i w t) a causal sigma with even Re and odd Im obeys
 * Im sigma(E) = -(2E/pi) PV int_0^inf Re sigma(E') / (E'^2 - E^2) dE'.
 * The removed part X(E') = Re sigma(E') (1 - b(E'; mu)) vanishes above
 * L = 2|mu| + 40 kT, so the integral runs over [0, L]; the pole is taken
 * out by subtracting X(E): PV int_0^L dE'/(E'^2 - E^2) = ln|(L-E)/(L+E)|/(2E),
 * and the remaining smooth integrand is summed by the midpoint rule. */
#include "synth_internal.h"

#include <math.h>
#include <stdlib.h>

double synth_kk_transform(const double *x, int n, double L, double e, double xe)
{
    double h = L / n, sum = 0;
    for (int i = 0; i < n; i++) {
        double ep = (i + 0.5) * h, den = ep * ep - e * e;
        if (fabs(ep - e) < 1e-12 * L)
            continue;   /* the integrand's limit is finite; one node of weight h */
        sum += (x[i] - xe) / den;
    }
    double pv = sum * h + xe * log(fabs((L - e) / (L + e))) / (2 * e);
    return -(2 * e / SYNTH_PI) * pv;
}

static double removed(const synth_graphene *g, double e, double mu, double kT)
{
    return creal(synth_graphene_sigma(g, e)) * (1.0 - synth_pauli_b(e, mu, kT));
}

int synth_block_response(const synth_graphene *g, double mu, double kT,
                         double complex out[SYNTH_NL])
{
    if (g->kind == SYNTH_RESP_LAMINA_DEFAULT) {
        /* lamina's form carries its own mu (only its continuum is blocked) */
        for (int j = 0; j < SYNTH_NL; j++)
            out[j] = synth_sigma_lamina_default(synth_photon_ev(synth_wl(j)), mu, kT);
        return 0;
    }
    double L = 2 * fabs(mu) + 40 * kT;
    double h = fmin(kT / 10, L / 400);
    int n = (int)ceil(L / h);
    double *x = malloc((size_t)n * sizeof *x);
    if (!x)
        return synth_fail("out of memory");
    for (int i = 0; i < n; i++)
        x[i] = removed(g, (i + 0.5) * L / n, mu, kT);
    for (int j = 0; j < SYNTH_NL; j++) {
        double e = synth_photon_ev(synth_wl(j));
        double complex s = synth_graphene_sigma(g, e);
        double xe = e < L ? removed(g, e, mu, kT) : 0.0;
        double kk = synth_kk_transform(x, n, L, e, xe);
        out[j] = creal(s) * synth_pauli_b(e, mu, kT) + I * (cimag(s) - kk) +
                 synth_sigma_intraband(e, mu, kT);
    }
    free(x);
    return 0;
}
