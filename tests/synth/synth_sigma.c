/* synth_sigma.c - graphene's sheet conductivity per layer, in units of
 * sigma0 = e^2 / (4 hbar), time factor exp(-i w t) (Im > 0 inductive).
 *
 * Sources: Falkovsky, J. Phys.: Conf. Ser. 129, 012004 (2008) for the
 * intraband (Drude) and interband terms; the saddle-point and far-UV
 * Lorentz terms and their constants are the form planned as lamina's
 * default in issue 9; measured films by the thin-film limit of a
 * slab (a film of index N, thickness d -> 0 acts as a sheet of
 * Z0 sigma = -i k0 d (N^2 - 1)). */
#include "synth_internal.h"

#include <math.h>
#include <string.h>

double synth_photon_ev(double wl_nm)
{
    return SYNTH_HC_EVNM / wl_nm;
}

/* Share of interband transitions not blocked: 1/2 [tanh((E+2mu)/4kT) +
 * tanh((E-2mu)/4kT)]. */
double synth_pauli_b(double e, double mu, double kT)
{
    return 0.5 * (tanh((e + 2 * mu) / (4 * kT)) + tanh((e - 2 * mu) / (4 * kT)));
}

double complex synth_sigma_intraband(double e, double mu, double kT)
{
    /* ln(2 cosh x) without overflow: |x| + ln(1 + exp(-2|x|)) */
    double x = fabs(mu) / (2 * kT);
    double l = x + log1p(exp(-2 * x));
    return I * (8 * kT / SYNTH_PI) * l / (e + I * SYNTH_TAU_EV);
}

double complex synth_sigma_falkovsky_inter(double e, double mu, double kT)
{
    double m2 = 2 * fabs(mu), den = fabs(e - m2);
    if (den < 1e-9)
        den = 1e-9;   /* the T = 0 logarithm diverges at E = 2|mu| */
    return synth_pauli_b(e, mu, kT) - I / SYNTH_PI * log((e + m2) / den);
}

static double complex lorentz(double e, double e0, double gamma)
{
    return -I * e / (e0 * e0 - e * e - I * e * gamma);
}

double complex synth_sigma_lamina_default(double e, double mu, double kT)
{
    const double A = 3.442, delta = -0.038, B = 31.23;
    return synth_sigma_intraband(e, mu, kT) + (1 + delta) * synth_sigma_falkovsky_inter(e, mu, kT)
           + A * lorentz(e, 4.62, 2.5) + B * lorentz(e, 14.0, 3.0);
}

double complex synth_sigma_of_film(double complex N, double d_nm, double wl_nm)
{
    double k0 = 2 * SYNTH_PI / wl_nm;
    return -I * k0 * d_nm * (N * N - 1.0) / (SYNTH_PI * SYNTH_ALPHA);
}

static const char *film_file(synth_response kind)
{
    switch (kind) {
    case SYNTH_RESP_WEBER: return "graphene-Weber2010.yml";
    case SYNTH_RESP_SONG: return "graphene-Song2018.yml";
    case SYNTH_RESP_ELSAYED: return "graphene-ElSayed2021.yml";
    default: return NULL;
    }
}

int synth_graphene_load(synth_graphene *g, synth_response kind)
{
    memset(g, 0, sizeof *g);
    g->kind = kind;
    const char *f = film_file(kind);
    return f ? synth_material_load(f, &g->film) : 0;
}

void synth_graphene_free(synth_graphene *g)
{
    if (g)
        synth_material_free(&g->film);
}

double complex synth_graphene_sigma(const synth_graphene *g, double e)
{
    if (g->kind == SYNTH_RESP_SIGMA0)
        return 1.0;
    if (g->kind == SYNTH_RESP_LAMINA_DEFAULT)
        return synth_sigma_lamina_default(e, 0.0, SYNTH_KB_EVK * 295.0);
    double e_lo = g->film.ev[0];
    if (e < e_lo) {
        /* below the table: Re held at its edge value, Im not needed there */
        return creal(synth_sigma_of_film(synth_material_index(&g->film, SYNTH_HC_EVNM / e_lo),
                                         SYNTH_LAYER_NM, SYNTH_HC_EVNM / e_lo));
    }
    double wl = SYNTH_HC_EVNM / e;
    return synth_sigma_of_film(synth_material_index(&g->film, wl), SYNTH_LAYER_NM, wl);
}
