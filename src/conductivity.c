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
#include <stdlib.h>

#include "pv_quad.h"

#define KB_EV_PER_K 8.617333262e-5 /* exact SI: k_B / e */

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

/* The Fermi function 1 / (1 + e^y), without overflow. */
static double fermi_fn(double y)
{
    if (y > 0) {
        double t = exp(-y);
        return t / (1.0 + t);
    }
    return 1.0 / (1.0 + exp(y));
}

typedef struct pv_args {
    double mu, kt;
} pv_args;

/* 1 - G(eps) of Falkovsky's integral, G = sinh(x) / (cosh(m) + cosh(x))
 * (x = eps / kT, m = mu / kT): the same as f(eps - mu) + f(eps + mu) with
 * f the Fermi function, which stays finite for negative eps too. */
static double one_minus_g(double eps, const void *vp)
{
    const pv_args *a = vp;
    return fermi_fn((eps - a->mu) / a->kt) + fermi_fn((eps + a->mu) / a->kt);
}

/* The removed part of the resonance: X(E') = Re L(E') (1 - b(E'; mu)). */
static double blocked_real(double e, const void *vp)
{
    const pv_args *a = vp;
    return creal(lam_oscillator(e, LAM_SADDLE_EV, LAM_SADDLE_WIDTH_EV)) *
           (1.0 - lam_pauli_factor(e, a->mu, a->kt));
}

/* Both integrands have a step of width ~kT (poles pi kT or 2 pi kT off
 * the real axis), at mu and at 2 mu (their mirror images at -mu and -2 mu
 * are never nearer to a point of [0, U]), so the quadrature's finest
 * panels are 2 kT wide (pv_quad.h). Elsewhere they vary on the scale of
 * the photon energy and of the resonance's 2.5 eV width (poles 1.25 eV
 * off the axis), which panels of 0.5 eV resolve to ~1e-20. Against GSL's
 * QAWC the two agree within 1e-13 (tests/test_pv_quad.c). */
#define PANEL_KT 2.0
#define PANEL_COARSEST_EV 0.5

/* Quadrature rules per thread, kept for the thread's life (freed when it
 * ends): a rule samples its integrand once for one (mu, kT), and the same
 * mu comes back at every photon energy of a spectrum. MEMO_RULES per
 * integrand, so a puddle average's Gauss-Hermite Fermi levels all stay. */
#define MEMO_RULES 16

typedef struct memo_rule {
    double mu, kt;
    int ready;
    lam__pv_rule rule;
} memo_rule;

typedef struct thread_rules {
    memo_rule inter[MEMO_RULES], blocked[MEMO_RULES];
    size_t next_inter, next_blocked; /* the entry replaced next */
} thread_rules;

static pthread_key_t rules_key;
static pthread_once_t rules_once = PTHREAD_ONCE_INIT;
static int rules_key_ok;

static void rules_release(void *vp)
{
    thread_rules *t = vp;
    for (size_t i = 0; i < MEMO_RULES; i++) {
        lam__pv_rule_free(&t->inter[i].rule);
        lam__pv_rule_free(&t->blocked[i].rule);
    }
    free(t);
}

static void rules_key_make(void)
{
    rules_key_ok = pthread_key_create(&rules_key, rules_release) == 0;
}

/* This thread's rules, NULL when out of memory. Without a key (it could
 * not be made) rules the caller releases: *own is set. */
static thread_rules *thread_rules_get(int *own)
{
    pthread_once(&rules_once, rules_key_make);
    thread_rules *t = rules_key_ok ? pthread_getspecific(rules_key) : NULL;
    *own = 0;
    if (t)
        return t;
    t = calloc(1, sizeof *t);
    if (t && (!rules_key_ok || pthread_setspecific(rules_key, t)))
        *own = 1;
    return t;
}

/* The rule for integrand g at a = (mu, kT) from memo[] (built in entry
 * *next when missing): its step at 'step', panels on [0, upper]. NULL
 * when out of memory. */
static const lam__pv_rule *memo_rule_for(memo_rule *memo, size_t *next, const pv_args *a,
                                         double step, double upper, lam__pv_fn g)
{
    for (size_t i = 0; i < MEMO_RULES; i++)
        if (memo[i].ready && memo[i].mu == a->mu && memo[i].kt == a->kt)
            return &memo[i].rule;
    memo_rule *m = &memo[*next];
    *next = (*next + 1) % MEMO_RULES;
    m->ready = 0;
    if (lam__pv_rule_build(&m->rule, upper, &step, 1, PANEL_KT * a->kt, PANEL_COARSEST_EV, g, a))
        return NULL;
    m->mu = a->mu;
    m->kt = a->kt;
    m->ready = 1;
    return &m->rule;
}

/* PV int_0^U g(x) [1/(x - c) - 1/(x + c)] dx with the thread's rule for
 * (g, a): 'blocked' picks the resonance's integrand, else the interband's. */
static lam_status pv_difference(int blocked, const pv_args *a, double c, double *val,
                                const char *what, lam_error *err)
{
    int own = 0;
    thread_rules *t = thread_rules_get(&own);
    const lam__pv_rule *r = NULL;
    lam__pv_fn g = blocked ? blocked_real : one_minus_g;
    if (t && blocked) /* 1 - b < 1e-26 beyond 2 mu + 60 kT */
        r = memo_rule_for(t->blocked, &t->next_blocked, a, 2 * a->mu, 2 * a->mu + 60 * a->kt,
                          g);
    else if (t) /* 1 - G decays like exp(-(eps - mu)/kT): 45 kT past mu is the end */
        r = memo_rule_for(t->inter, &t->next_inter, a, a->mu, a->mu + 45 * a->kt, g);
    if (r)
        *val = lam__pv_integral(r, c, g, a) - lam__pv_integral(r, -c, g, a);
    if (own)
        rules_release(t);
    return r ? LAM_OK : lam_error_set(err, LAM_ENOMEM, "cannot allocate the %s", what);
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
    /* Im = -(4E/pi) PV int_0^inf (1 - G)/(E^2 - 4 eps^2) d eps, and with
     * c = E/2, 4E / (E^2 - 4 eps^2) = 1/(eps + c) - 1/(eps - c) */
    pv_args a = {mu, kt_ev};
    double val = 0;
    lam_status st = pv_difference(0, &a, e / 2.0, &val, "Kubo interband quadrature", err);
    if (st)
        return st;
    *out = lam_pauli_factor(e, mu, kt_ev) + I * (val / M_PI);
    return LAM_OK;
}

lam_status lam_resonance_blocked(double energy_ev, double mu_ev, double kt_ev,
                                 double complex *out, lam_error *err)
{
    double e = energy_ev, mu = fabs(mu_ev);
    /* below 1e-3 K the edge is a step; a 1e-6 eV width keeps the integrand
     * finite and changes nothing measurable */
    double kt = kt_ev > 1e-6 ? kt_ev : 1e-6;
    pv_args a = {mu, kt};
    /* Im(E) = -(2E/pi) PV int_0^inf X(E') / (E'^2 - E^2) dE', and
     * 2E / (E'^2 - E^2) = 1/(E' - E) - 1/(E' + E) */
    double val = 0;
    lam_status st = pv_difference(1, &a, e, &val, "Kramers-Kronig quadrature", err);
    if (st)
        return st;
    *out = blocked_real(e, &a) + I * (-val / M_PI);
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
