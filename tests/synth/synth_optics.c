/* synth_optics.c - reflectance of a planar stack by characteristic
 * matrices (Born and Wolf, Principles of Optics, sec. 1.6), s and p, any
 * angle, complex indices n + ik with time factor exp(-i w t).
 *
 * In each layer the tangential fields at its top follow from those at its
 * bottom by [E; H]_top = [[cos d, -i sin d / eta], [-i eta sin d, cos d]]
 * [E; H]_bottom with d = k0 q thickness, q = sqrt(n^2 - kx^2) (the root
 * that decays downwards), eta = q (s) or n^2 / q (p), H in units of the
 * vacuum admittance. A conducting sheet makes H jump by Z0 sigma E_t: the
 * matrix [[1, 0], [y, 1]] for both polarisations. */
#include "synth_internal.h"

#include <math.h>

static double complex normal_q(double complex n, double kx)
{
    double complex q = csqrt(n * n - kx * kx);
    if (cimag(q) < 0 || (cimag(q) == 0 && creal(q) < 0))
        q = -q;
    return q;
}

static double complex admittance(double complex n, double complex q, synth_pol pol)
{
    return pol == SYNTH_S ? q : n * n / q;
}

void synth_bc_substrate(synth_bc *bc, double complex n_sub, double kx, synth_pol pol)
{
    bc->eta_sub = admittance(n_sub, normal_q(n_sub, kx), pol);
    bc->b = 1.0;
    bc->c = bc->eta_sub;
}

void synth_bc_add(synth_bc *bc, const synth_layer *l, double wl_nm, double kx, synth_pol pol)
{
    if (l->sheet) {
        bc->c += l->y * bc->b;
        return;
    }
    double complex cd, sd, eta;
    synth_film_matrix(l->n, l->d_nm, wl_nm, kx, pol, &cd, &sd, &eta);
    synth_bc_add_matrix(bc, cd, sd, eta);
}

void synth_bc_add_matrix(synth_bc *bc, double complex cd, double complex sd, double complex eta)
{
    double complex b = cd * bc->b - I * sd * bc->c / eta;
    double complex c = -I * eta * sd * bc->b + cd * bc->c;
    bc->b = b;
    bc->c = c;
}

void synth_film_matrix(double complex n, double d_nm, double wl_nm, double kx, synth_pol pol,
                       double complex *cd, double complex *sd, double complex *eta)
{
    double complex q = normal_q(n, kx);
    double complex d = 2.0 * SYNTH_PI / wl_nm * q * d_nm;
    *eta = admittance(n, q, pol);
    *cd = ccos(d);
    *sd = csin(d);
}

synth_rt synth_bc_finish(const synth_bc *bc, double n0, double kx, synth_pol pol)
{
    double complex eta0 = admittance(n0, normal_q(n0, kx), pol);
    double complex den = eta0 * bc->b + bc->c;
    synth_rt rt;
    rt.r = (eta0 * bc->b - bc->c) / den;
    rt.t = 2.0 * eta0 / den;
    rt.R = creal(rt.r * conj(rt.r));
    /* power into the substrate over incident power: Re(eta) |E_t|^2 each */
    rt.T = 4.0 * creal(eta0) * creal(bc->eta_sub) / creal(den * conj(den));
    return rt;
}

synth_rt synth_stack_solve(double n0, const synth_layer *layers, int count,
                           double complex n_sub, double wl_nm, double sin_t0, synth_pol pol)
{
    double kx = n0 * sin_t0;
    synth_bc bc;
    synth_bc_substrate(&bc, n_sub, kx, pol);
    for (int i = count - 1; i >= 0; i--)
        synth_bc_add(&bc, &layers[i], wl_nm, kx, pol);
    return synth_bc_finish(&bc, n0, kx, pol);
}
