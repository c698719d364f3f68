/* conductivity.c - graphene sheet conductivity: universal, Kubo (Falkovsky
 * 2008) with Pauli blocking and puddle broadening, and the visible-response
 * family (saddle-point resonance blocked with the continuum, far-UV
 * background, continuum offset). */
#include "lamina/conductivity.h"

#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <gsl/gsl_const_mksa.h>
#include <gsl/gsl_integration.h>

#define KB_EV_PER_K 8.617333262e-5 /* exact SI: k_B / e */
#define QUAD_LIMIT 200

/* Fitted to the Re and Im of sigma implied by Weber et al. (2010) over
 * 400-750 nm at mu = 0.2 eV, 295 K (docs/method.md, tests/test_conductivity.c). */
#define DEFAULT_RESONANCE 3.442
#define DEFAULT_BACKGROUND 31.23
#define DEFAULT_CONTINUUM (-0.038)

lam_sheet_params lam_sheet_params_default(void)
{
    lam_sheet_params p = {LAM_SHEET_KUBO, 0.2,  295.0, 0.01, 0.0, 1, DEFAULT_RESONANCE,
                          DEFAULT_BACKGROUND, DEFAULT_CONTINUUM};
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

double lam_pauli_factor(double e, double mu, double kt)
{
    mu = fabs(mu);
    if (kt <= KB_EV_PER_K * 1e-3)
        return e > 2 * mu ? 1.0 : (e == 2 * mu ? 0.5 : 0.0);
    return 0.5 * (tanh((e + 2 * mu) / (4 * kt)) + tanh((e - 2 * mu) / (4 * kt)));
}

double complex lam_oscillator(double e, double centre, double width)
{
    return -I * e / (centre * centre - e * e - I * e * width);
}

/* 1 - G(eps), G = sinh(x)/(cosh(m)+cosh(x)), scaled to avoid overflow */
static double one_minus_g(double eps, double mu, double kt)
{
    double x = eps / kt, m = fabs(mu) / kt, top = x > m ? x : m;
    /* each exponential once (the compiler may not merge calls that can
     * set errno): the integrals call this ~10^6 times per Fermi table */
    double a = exp(m - top), b = exp(-m - top), d = exp(-x - top);
    double num = a + b + 2.0 * d;
    double den = a + b + exp(x - top) + d;
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

/* One quadrature workspace per thread, kept for the thread's life (freed
 * when it ends). A Fermi-level table takes ~50 000 of these integrals:
 * allocating a workspace for each made two threads queue on the
 * allocator's lock (a one-image analysis shares one malloc arena), and
 * GSL starts every integral afresh in whatever workspace it is given. */
static pthread_key_t workspace_key;
static pthread_once_t workspace_once = PTHREAD_ONCE_INIT;
static int workspace_key_ok;

static void workspace_release(void *ws)
{
    gsl_integration_workspace_free(ws);
}

static void workspace_key_make(void)
{
    workspace_key_ok = pthread_key_create(&workspace_key, workspace_release) == 0;
}

/* This thread's workspace, NULL when out of memory. Without a key (it
 * could not be made) a workspace the caller frees: *own is set. */
static gsl_integration_workspace *thread_workspace(int *own)
{
    pthread_once(&workspace_once, workspace_key_make);
    gsl_integration_workspace *ws = workspace_key_ok ? pthread_getspecific(workspace_key) : NULL;
    *own = 0;
    if (ws)
        return ws;
    ws = gsl_integration_workspace_alloc(QUAD_LIMIT);
    if (ws && (!workspace_key_ok || pthread_setspecific(workspace_key, ws)))
        *own = 1;
    return ws;
}

/* Integral of f(x) / (x - c) over [0, upper] as a principal value when c lies
 * inside, else as a plain integral of 'regular' (f(x) / (x - c) itself). */
static lam_status principal_value(double (*f)(double, void *), double (*regular)(double, void *),
                                  void *args, double c, double upper, double *val,
                                  const char *what, lam_error *err)
{
    int own = 0;
    gsl_integration_workspace *ws = thread_workspace(&own);
    if (!ws)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a quadrature workspace");
    double abserr = 0;
    int st;
    gsl_function fn;
    fn.params = args;
    if (c < upper * 0.999) {
        if (c >= upper * 0.9)
            upper = 2.0 * c; /* keep the pole well inside the interval */
        fn.function = f;
        st = gsl_integration_qawc(&fn, 0.0, upper, c, 1e-12, 1e-9, QUAD_LIMIT, ws, val, &abserr);
    } else {
        fn.function = regular;
        st = gsl_integration_qag(&fn, 0.0, upper, 1e-12, 1e-9, QUAD_LIMIT, GSL_INTEG_GAUSS31, ws,
                                 val, &abserr);
    }
    if (own)
        gsl_integration_workspace_free(ws);
    return st ? lam_error_gsl(err, st, what) : LAM_OK;
}

lam_status lam_kubo_interband(double energy_ev, double mu_ev, double kt_ev,
                              double complex *out, lam_error *err)
{
    double e = energy_ev, mu = fabs(mu_ev);
    if (kt_ev <= KB_EV_PER_K * 1e-3) {
        double im = mu > 0 ? -log(fabs((e + 2 * mu) / (e - 2 * mu))) / M_PI : 0.0;
        *out = lam_pauli_factor(e, mu, kt_ev) + I * im;
        return LAM_OK;
    }
    /* Im = -(4E/pi) PV int_0^inf (1 - G)/(E^2 - 4 eps^2) d eps; 1 - G decays
     * like exp(-(eps - mu)/kT), so 45 kT past mu is the end. */
    pv_args a = {e, mu, kt_ev};
    double val = 0;
    lam_status st = principal_value(pv_numerator, regular_integrand, &a, e / 2.0,
                                    mu + 45.0 * kt_ev, &val,
                                    "Kubo interband principal-value integral", err);
    if (st)
        return st;
    *out = lam_pauli_factor(e, mu, kt_ev) + I * (-(4.0 * e / M_PI) * val);
    return LAM_OK;
}

/* The removed part of the resonance: X(E') = Re L(E') (1 - b(E'; mu)), and
 * Im(E) = -(2E/pi) PV int_0^inf X(E') / (E'^2 - E^2) dE'. */
static double blocked_real(double e, const pv_args *a)
{
    return creal(lam_oscillator(e, LAM_SADDLE_EV, LAM_SADDLE_WIDTH_EV)) *
           (1.0 - lam_pauli_factor(e, a->mu, a->kt));
}

static double kk_numerator(double x, void *vp)
{
    const pv_args *a = vp;
    return blocked_real(x, a) / (x + a->e);
}

static double kk_regular(double x, void *vp)
{
    const pv_args *a = vp;
    return blocked_real(x, a) / (x * x - a->e * a->e);
}

lam_status lam_resonance_blocked(double energy_ev, double mu_ev, double kt_ev,
                                 double complex *out, lam_error *err)
{
    double e = energy_ev, mu = fabs(mu_ev);
    /* below 1e-3 K the edge is a step; a 1e-6 eV width keeps the integrand
     * finite and changes nothing measurable */
    double kt = kt_ev > 1e-6 ? kt_ev : 1e-6;
    pv_args a = {e, mu, kt};
    /* 1 - b < 1e-26 beyond 2 mu + 60 kT */
    double val = 0;
    lam_status st = principal_value(kk_numerator, kk_regular, &a, e, 2.0 * mu + 60.0 * kt, &val,
                                    "Kramers-Kronig transform of the blocked resonance", err);
    if (st)
        return st;
    *out = blocked_real(e, &a) + I * (-(2.0 * e / M_PI) * val);
    return LAM_OK;
}

/* Kubo intraband + interband and the blocked resonance at one mu. */
static lam_status terms_at(const lam_sheet_params *p, double e, double mu, double kt,
                           double complex *kubo_inter, double complex *intra,
                           double complex *blocked, lam_error *err)
{
    lam_status st = lam_kubo_interband(e, mu, kt, kubo_inter, err);
    if (st)
        return st;
    *intra = lam_kubo_intraband(e, mu, kt, p->scattering_ev);
    *blocked = 0;
    if (p->exciton && p->resonance != 0)
        st = lam_resonance_blocked(e, mu, kt, blocked, err);
    return st;
}

/* Gauss-Hermite average over mu (charge puddles): 12 nodes. */
static lam_status kubo_terms(const lam_sheet_params *p, double e, double kt,
                             double complex terms[3], lam_error *err)
{
    if (!(p->puddle_ev > 0))
        return terms_at(p, e, p->fermi_ev, kt, &terms[0], &terms[1], &terms[2], err);
    const size_t n = 12;
    gsl_integration_fixed_workspace *w =
        gsl_integration_fixed_alloc(gsl_integration_fixed_hermite, n, 0.0, 1.0, 0.0, 0.0);
    if (!w)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate Gauss-Hermite nodes");
    const double *x = gsl_integration_fixed_nodes(w), *wt = gsl_integration_fixed_weights(w);
    double complex sum[3] = {0, 0, 0};
    double wsum = 0;
    lam_status st = LAM_OK;
    for (size_t i = 0; i < n && !st; i++) {
        double complex t[3];
        double mu = p->fermi_ev + sqrt(2.0) * p->puddle_ev * x[i];
        st = terms_at(p, e, mu, kt, &t[0], &t[1], &t[2], err);
        for (int k = 0; k < 3; k++)
            sum[k] += wt[i] * t[k];
        wsum += wt[i];
    }
    gsl_integration_fixed_free(w);
    for (int k = 0; k < 3 && !st; k++)
        terms[k] = sum[k] / wsum;
    return st;
}

static lam_status check_params(const lam_sheet_params *p, double e, lam_error *err)
{
    if (!(e > 0) || !isfinite(e))
        return lam_error_set(err, LAM_ERANGE, "photon energy must be > 0 eV");
    if (p->model != LAM_SHEET_KUBO)
        return LAM_OK;
    if (!(p->temperature_k > 0) || !isfinite(p->fermi_ev) || !(p->scattering_ev >= 0) ||
        !(p->puddle_ev >= 0))
        return lam_error_set(err, LAM_ERANGE,
                             "Kubo parameters need T > 0, finite mu, hbar/tau >= 0, "
                             "puddle spread >= 0");
    if (p->exciton && (!(p->resonance >= 0) || !(p->background >= 0) || !(p->continuum > -1) ||
                       !isfinite(p->resonance + p->background + p->continuum)))
        return lam_error_set(err, LAM_ERANGE,
                             "visible response needs resonance >= 0, background >= 0 and "
                             "continuum > -1 (passivity)");
    return LAM_OK;
}

lam_status lam_sheet_basis(const lam_sheet_params *p, double energy_ev, double complex basis[4],
                           lam_error *err)
{
    lam_status st = check_params(p, energy_ev, err);
    if (st)
        return st;
    basis[1] = basis[2] = basis[3] = 0;
    if (p->model != LAM_SHEET_KUBO) {
        basis[0] = 1.0;
        return LAM_OK;
    }
    double complex t[3]; /* interband, intraband, blocked resonance */
    if ((st = kubo_terms(p, energy_ev, KB_EV_PER_K * p->temperature_k, t, err)))
        return st;
    basis[0] = t[0] + t[1];
    if (p->exciton) {
        basis[1] = t[0];
        basis[2] = lam_oscillator(energy_ev, LAM_SADDLE_EV, LAM_SADDLE_WIDTH_EV) - t[2];
        basis[3] = lam_oscillator(energy_ev, LAM_UV_EV, LAM_UV_WIDTH_EV);
    }
    return LAM_OK;
}

double complex lam_sheet_combine(const lam_sheet_params *p, const double complex basis[4])
{
    if (p->model != LAM_SHEET_KUBO || !p->exciton)
        return basis[0];
    return basis[0] + p->continuum * basis[1] + p->resonance * basis[2] +
           p->background * basis[3];
}

lam_status lam_sheet_conductivity(const lam_sheet_params *p, double energy_ev,
                                  double complex *out, lam_error *err)
{
    double complex b[4];
    lam_status st = lam_sheet_basis(p, energy_ev, b, err);
    if (!st)
        *out = lam_sheet_combine(p, b);
    return st;
}

void lam_sheet_describe(const lam_sheet_params *p, char *buf, unsigned long n)
{
    int k;
    if (p->model == LAM_SHEET_UNIVERSAL)
        k = snprintf(buf, n, "universal");
    else
        k = snprintf(buf, n, "kubo(mu=%.3g eV, T=%.4g K, hbar/tau=%.3g eV, puddles=%.3g eV)",
                     fabs(p->fermi_ev), p->temperature_k, p->scattering_ev, p->puddle_ev);
    if (p->model == LAM_SHEET_KUBO && p->exciton && k > 0 && (unsigned long)k < n)
        snprintf(buf + k, n - (unsigned long)k,
                 "+visible(resonance=%.4g at %.2f eV, background=%.4g at %.0f eV, "
                 "continuum=%+.3g)",
                 p->resonance, LAM_SADDLE_EV, p->background, LAM_UV_EV, p->continuum);
}
