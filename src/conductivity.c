/* conductivity.c - graphene sheet conductivity: universal, Kubo (Falkovsky
 * 2008) with Pauli blocking and puddle broadening, saddle-point tail. */
#include "lamina/conductivity.h"

#include <math.h>
#include <stdio.h>
#include <gsl/gsl_const_mksa.h>
#include <gsl/gsl_integration.h>

#define KB_EV_PER_K 8.617333262e-5 /* exact SI: k_B / e */

/* Saddle-point tail: Er from Mak, Shan, Heinz (2011); A and G fitted to
 * Weber et al. (2010) Re sigma (slab 0.335 nm), 400-750 nm, max 1.6 %. */
static const double exc_er = 4.62, exc_g = 0.79, exc_a = 10.250236270431179;

lam_sheet_params lam_sheet_params_default(void)
{
    lam_sheet_params p = {LAM_SHEET_KUBO, 0.2, 295.0, 0.01, 0.0, 1};
    return p;
}

double lam_sigma0_siemens(void)
{
    double e = GSL_CONST_MKSA_ELECTRON_CHARGE, hbar = GSL_CONST_MKSA_PLANCKS_CONSTANT_HBAR;
    return e * e / (4.0 * hbar);
}

double lam_z0_sigma0(void)
{
    double z0 = 1.0 / (GSL_CONST_MKSA_VACUUM_PERMITTIVITY * GSL_CONST_MKSA_SPEED_OF_LIGHT);
    return z0 * lam_sigma0_siemens();
}

/* ln(2 cosh x) without overflow */
static double log_2cosh(double x)
{
    x = fabs(x);
    return x + log1p(exp(-2.0 * x));
}

double complex lam_kubo_intraband(double energy_ev, double mu_ev, double kt_ev,
                                  double scattering_ev)
{
    double weight = kt_ev > 0 ? 2.0 * kt_ev * log_2cosh(mu_ev / (2.0 * kt_ev)) : fabs(mu_ev);
    /* (8 kT/pi) ln 2cosh(mu/2kT) = (4/pi) * weight */
    return I * (4.0 / M_PI) * weight / (energy_ev + I * scattering_ev);
}

/* 1 - G(eps), G = sinh(x)/(cosh(m)+cosh(x)), scaled to avoid overflow */
static double one_minus_g(double eps, double mu, double kt)
{
    double x = eps / kt, m = fabs(mu) / kt, top = x > m ? x : m;
    double num = exp(m - top) + exp(-m - top) + 2.0 * exp(-x - top);
    double den = exp(m - top) + exp(-m - top) + exp(x - top) + exp(-x - top);
    return num / den;
}

typedef struct pv_args {
    double e, mu, kt;
} pv_args;

/* f(eps) for QAWC: 1/(E^2 - 4 eps^2) = -1 / (4 (eps - E/2)(eps + E/2)) */
static double pv_numerator(double eps, void *vp)
{
    const pv_args *a = vp;
    return -one_minus_g(eps, a->mu, a->kt) / (4.0 * (eps + a->e / 2.0));
}

static double regular_integrand(double eps, void *vp)
{
    const pv_args *a = vp;
    return one_minus_g(eps, a->mu, a->kt) / (a->e * a->e - 4.0 * eps * eps);
}

lam_status lam_kubo_interband(double energy_ev, double mu_ev, double kt_ev,
                              double complex *out, lam_error *err)
{
    double e = energy_ev, mu = fabs(mu_ev);
    if (kt_ev <= KB_EV_PER_K * 1e-3) {
        double re = e > 2 * mu ? 1.0 : (e == 2 * mu ? 0.5 : 0.0);
        double im = mu > 0 ? -log(fabs((e + 2 * mu) / (e - 2 * mu))) / M_PI : 0.0;
        *out = re + I * im;
        return LAM_OK;
    }
    double re = 0.5 * (tanh((e + 2 * mu) / (4 * kt_ev)) + tanh((e - 2 * mu) / (4 * kt_ev)));
    /* Im = -(4E/pi) PV int_0^inf (1 - G)/(E^2 - 4 eps^2) d eps; 1 - G decays
     * like exp(-(eps - mu)/kT), so 45 kT past mu is the end. */
    double upper = mu + 45.0 * kt_ev;
    pv_args a = {e, mu, kt_ev};
    gsl_integration_workspace *ws = gsl_integration_workspace_alloc(200);
    if (!ws)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a quadrature workspace");
    double val = 0, abserr = 0;
    int st;
    gsl_function f;
    f.params = &a;
    if (e / 2.0 < upper * 0.999) {
        if (e / 2.0 >= upper * 0.9)
            upper = e; /* keep the pole well inside the interval */
        f.function = pv_numerator;
        st = gsl_integration_qawc(&f, 0.0, upper, e / 2.0, 1e-12, 1e-9, 200, ws, &val, &abserr);
    } else {
        f.function = regular_integrand;
        st = gsl_integration_qag(&f, 0.0, upper, 1e-12, 1e-9, 200, GSL_INTEG_GAUSS31, ws, &val,
                                 &abserr);
    }
    gsl_integration_workspace_free(ws);
    if (st)
        return lam_error_gsl(err, st, "Kubo interband principal-value integral");
    *out = re + I * (-(4.0 * e / M_PI) * val);
    return LAM_OK;
}

double complex lam_exciton_term(double energy_ev)
{
    double e = energy_ev, d = exc_er * exc_er - e * e, eg = e * exc_g;
    /* A * (-i E G) / (D - i E G): Re = A E^2 G^2 / (D^2 + E^2 G^2) > 0 */
    return exc_a * (-I * eg) / (d - I * eg);
}

/* 12-point Gauss-Hermite nodes and weights (probabilists' form after the
 * change of variable), for the puddle average over mu. */
static lam_status puddle_average(const lam_sheet_params *p, double e, double kt,
                                 double complex *out, lam_error *err)
{
    const size_t n = 12;
    gsl_integration_fixed_workspace *w =
        gsl_integration_fixed_alloc(gsl_integration_fixed_hermite, n, 0.0, 1.0, 0.0, 0.0);
    if (!w)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate Gauss-Hermite nodes");
    const double *x = gsl_integration_fixed_nodes(w), *wt = gsl_integration_fixed_weights(w);
    double complex sum = 0;
    double wsum = 0;
    lam_status st = LAM_OK;
    for (size_t i = 0; i < n && !st; i++) {
        double mu = p->fermi_ev + sqrt(2.0) * p->puddle_ev * x[i];
        double complex inter;
        st = lam_kubo_interband(e, mu, kt, &inter, err);
        sum += wt[i] * (inter + lam_kubo_intraband(e, mu, kt, p->scattering_ev));
        wsum += wt[i];
    }
    gsl_integration_fixed_free(w);
    if (!st)
        *out = sum / wsum;
    return st;
}

lam_status lam_sheet_conductivity(const lam_sheet_params *p, double energy_ev,
                                  double complex *out, lam_error *err)
{
    if (!(energy_ev > 0) || !isfinite(energy_ev))
        return lam_error_set(err, LAM_ERANGE, "photon energy must be > 0 eV");
    double complex s = 1.0;
    if (p->model == LAM_SHEET_KUBO) {
        if (!(p->temperature_k > 0) || !isfinite(p->fermi_ev) || p->scattering_ev < 0 ||
            p->puddle_ev < 0)
            return lam_error_set(err, LAM_ERANGE,
                                 "Kubo parameters need T > 0, finite mu, hbar/tau >= 0, "
                                 "puddle spread >= 0");
        double kt = KB_EV_PER_K * p->temperature_k;
        lam_status st;
        if (p->puddle_ev > 0) {
            st = puddle_average(p, energy_ev, kt, &s, err);
        } else {
            double complex inter;
            st = lam_kubo_interband(energy_ev, p->fermi_ev, kt, &inter, err);
            s = inter + lam_kubo_intraband(energy_ev, p->fermi_ev, kt, p->scattering_ev);
        }
        if (st)
            return st;
    }
    if (p->exciton)
        s += lam_exciton_term(energy_ev);
    *out = s;
    return LAM_OK;
}

void lam_sheet_describe(const lam_sheet_params *p, char *buf, unsigned long n)
{
    int k;
    if (p->model == LAM_SHEET_UNIVERSAL)
        k = snprintf(buf, n, "universal");
    else
        k = snprintf(buf, n, "kubo(mu=%.3g eV, T=%.4g K, hbar/tau=%.3g eV, puddles=%.3g eV)",
                     fabs(p->fermi_ev), p->temperature_k, p->scattering_ev, p->puddle_ev);
    if (p->exciton && k > 0 && (unsigned long)k < n)
        snprintf(buf + k, n - (unsigned long)k, "+exciton(Er=4.62 eV)");
}
