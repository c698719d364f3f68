/* tmm.c - characteristic-matrix solver for films and conducting sheets. */
#include "lamina/tmm.h"

#include <math.h>

double complex lam_tmm_q(double complex index, double kx)
{
    double complex q = csqrt(index * index - kx * kx);
    /* exp(-i omega t): the transmitted wave exp(i q k0 z) must decay */
    if (cimag(q) < 0 || (cimag(q) == 0 && creal(q) < 0))
        q = -q;
    return q;
}

double complex lam_tmm_eta(double complex index, double complex q, lam_pol pol)
{
    return pol == LAM_POL_S ? q : index * index / q;
}

double complex lam_tmm_through_film(double complex y_below, double complex eta,
                                    double complex cos_d, double complex sin_d)
{
    /* [B;C] = M [1; Y]: B = cos d - i sin d Y / eta, C = -i eta sin d + cos d Y */
    double complex b = cos_d - I * sin_d * y_below / eta;
    double complex c = -I * eta * sin_d + cos_d * y_below;
    return c / b;
}

lam_tmm_result lam_tmm_solve(double n_ambient, const lam_tmm_layer *layers, size_t count,
                             double complex n_substrate, double wavelength_nm,
                             double sin_theta0, lam_pol pol)
{
    double kx = n_ambient * sin_theta0;
    double k0 = 2.0 * M_PI / wavelength_nm;
    double complex q_sub = lam_tmm_q(n_substrate, kx);
    double complex eta_sub = lam_tmm_eta(n_substrate, q_sub, pol);
    /* Track B and C (not only Y) so the transmission can be computed. */
    double complex b = 1.0, c = eta_sub;
    for (size_t i = count; i-- > 0;) {
        const lam_tmm_layer *L = &layers[i];
        if (L->kind == LAM_TMM_SHEET) {
            c += L->y * b;
        } else {
            double complex q = lam_tmm_q(L->index, kx);
            double complex eta = lam_tmm_eta(L->index, q, pol);
            double complex d = k0 * q * L->thickness_nm;
            double complex cd = ccos(d), sd = csin(d);
            double complex nb = cd * b - I * sd * c / eta;
            double complex nc = -I * eta * sd * b + cd * c;
            b = nb;
            c = nc;
        }
    }
    double complex q0 = lam_tmm_q(n_ambient, kx);
    double complex eta0 = lam_tmm_eta(n_ambient, q0, pol);
    lam_tmm_result res;
    double complex den = eta0 * b + c;
    res.r = (eta0 * b - c) / den;
    res.t = 2.0 * eta0 / den;
    res.R = creal(res.r * conj(res.r));
    res.T = 4.0 * creal(eta0) * creal(eta_sub) / creal(den * conj(den));
    res.A = 1.0 - res.R - res.T;
    return res;
}
