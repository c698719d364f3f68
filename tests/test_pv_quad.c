/* test_pv_quad.c - the principal-value quadrature (src/pv_quad.c) against
 * closed forms, and the conductivity integrals built on it against GSL's
 * adaptive QAWC (an independent method: Clenshaw-Curtis moments of the
 * Cauchy weight, bisected to a requested accuracy). */
#include "check.h"
#include "lamina/conductivity.h"
#include "../src/pv_quad.h"

#include <complex.h>
#include <math.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_integration.h>

#define KB 8.617333262e-5 /* eV/K, exact SI */

static double constant(double x, const void *a)
{
    (void)x;
    (void)a;
    return 1.0;
}

/* 1 / (1 + x^2): analytic, poles at +-i */
static double lorentz(double x, const void *a)
{
    (void)a;
    return 1.0 / (1.0 + x * x);
}

/* PV int_0^U dx / ((1 + x^2)(x - c)) by partial fractions */
static double lorentz_exact(double u, double c)
{
    double a = 1.0 / (1.0 + c * c);
    return a * log(fabs((u - c) / c)) - 0.5 * a * log(1.0 + u * u) - c * a * atan(u);
}

/* the larger of a worst difference so far and d; NaN once either is NaN
 * (fmax would drop it) */
static double worse(double worst, double d)
{
    return isnan(worst) || isnan(d) || d > worst ? d + 0 * worst : worst;
}

static void test_closed_forms(void)
{
    lam__pv_rule r = {0};
    double steps[1] = {1.3};
    check_int(lam__pv_rule_build(&r, 3.0, steps, 1, 0.01, 0.2, constant, NULL), 0, "rule built");
    double worst = 0;
    /* inside, on a step, on a node, on panel bounds, near the ends,
     * outside, negative */
    double cs[] = {0.2, 1.3, r.x[17], r.bound[3], r.bound[3] + 1e-14, 2.9999, 3.5, -0.7, 1e-6};
    for (size_t i = 0; i < sizeof cs / sizeof *cs; i++)
        worst = worse(worst, fabs(lam__pv_integral(&r, cs[i], constant, NULL) -
                                  log(fabs((3.0 - cs[i]) / cs[i]))));
    check_abs(worst, 0, 1e-13, "PV of 1/(x - c) = ln|(U - c)/c| for 9 poles");
    check_int(lam__pv_rule_build(&r, 5.0, steps, 1, 0.01, 0.2, lorentz, NULL), 0, "rebuilt");
    worst = 0;
    for (double c = -2.0; c < 7.0; c += 0.0137)
        worst = worse(worst, fabs(lam__pv_integral(&r, c, lorentz, NULL) - lorentz_exact(5.0, c)));
    check_abs(worst, 0, 1e-12, "PV of 1/((1 + x^2)(x - c)) by partial fractions, 657 poles");
    check_true(r.panels > 25 && r.panels < 80, "panels graded towards the step (%zu)", r.panels);
    lam__pv_rule_free(&r);
}

/* ---- the conductivity integrals against QAWC ---- */

typedef struct args {
    double e, mu, kt;
} args;

/* 1 - G(eps), G = sinh(x) / (cosh(m) + cosh(x)) with x = eps / kT and
 * m = mu / kT (Falkovsky 2008) as written there (lamina uses the equal
 * f(eps - mu) + f(eps + mu)), every exponential scaled by the largest */
static double empty(double eps, const args *a)
{
    double x = eps / a->kt, m = a->mu / a->kt, top = fmax(fabs(x), m);
    double num = exp(x - top) - exp(-x - top);
    double den = exp(m - top) + exp(-m - top) + exp(x - top) + exp(-x - top);
    return 1.0 - num / den;
}

static double inter_f(double eps, void *vp)
{
    const args *a = vp;
    return -empty(eps, a) / (4.0 * (eps + a->e / 2.0));
}

static double inter_regular(double eps, void *vp)
{
    const args *a = vp;
    return empty(eps, a) / (a->e * a->e - 4.0 * eps * eps);
}

/* the resonance's removed part: Re L(E') (1 - b(E'; mu)) */
static double removed(double x, const args *a)
{
    double c = LAM_SADDLE_EV, g = LAM_SADDLE_WIDTH_EV;
    double complex l = -I * x / (c * c - x * x - I * x * g);
    double b = 0.5 * (tanh((x + 2 * a->mu) / (4 * a->kt)) + tanh((x - 2 * a->mu) / (4 * a->kt)));
    return creal(l) * (1.0 - b);
}

static double kk_f(double x, void *vp)
{
    const args *a = vp;
    return removed(x, a) / (x + a->e);
}

static double kk_regular(double x, void *vp)
{
    const args *a = vp;
    return removed(x, a) / (x * x - a->e * a->e);
}

/* PV int_0^upper f(x)/(x - c) by QAWC when c is inside, else QAG of the
 * regular form; upper is taken past 2c when the pole is near it. *err:
 * GSL's error estimate (it may stop short of the tolerance asked). */
static double qawc(double (*f)(double, void *), double (*regular)(double, void *), args *a,
                   double c, double upper, double *error)
{
    gsl_integration_workspace *ws = gsl_integration_workspace_alloc(1000);
    gsl_function fn = {f, a};
    double val = 0, err = 0;
    if (c < upper * 0.999) {
        if (c >= upper * 0.9)
            upper = 2.0 * c;
        gsl_integration_qawc(&fn, 0.0, upper, c, 1e-13, 1e-11, 1000, ws, &val, &err);
    } else {
        fn.function = regular;
        gsl_integration_qag(&fn, 0.0, upper, 1e-13, 1e-11, 1000, GSL_INTEG_GAUSS31, ws, &val,
                            &err);
    }
    gsl_integration_workspace_free(ws);
    *error = err;
    return val;
}

static void test_against_qawc(void)
{
    double energies[] = {0.3, 0.8, 1.55, 1.8, 2.0, 2.4, 2.8, 3.3};
    double mus[] = {0.0, 0.05, 0.2, 0.4, 0.9, 1.0, 1.2, 1.6};
    double temps[] = {4.0, 77.0, 295.0, 600.0};
    double worst_inter = 0, worst_kk = 0, ei = 0, ek = 0;
    gsl_error_handler_t *old = gsl_set_error_handler_off();
    for (size_t t = 0; t < 4; t++)
        for (size_t m = 0; m < 8; m++)
            for (size_t k = 0; k < 8; k++) {
                args a = {energies[k], mus[m], KB * temps[t]};
                double complex s, b;
                lam_kubo_interband(a.e, a.mu, a.kt, &s, NULL);
                lam_resonance_blocked(a.e, a.mu, a.kt, &b, NULL);
                double ri = -(4.0 * a.e / M_PI) *
                            qawc(inter_f, inter_regular, &a, a.e / 2, a.mu + 45 * a.kt, &ei);
                double rk = -(2.0 * a.e / M_PI) *
                            qawc(kk_f, kk_regular, &a, a.e, 2 * a.mu + 60 * a.kt, &ek);
                /* differences beyond the reference's own error estimate */
                worst_inter = worse(worst_inter, fabs(cimag(s) - ri) - (4.0 * a.e / M_PI) * ei);
                worst_kk = worse(worst_kk, fabs(cimag(b) - rk) - (2.0 * a.e / M_PI) * ek);
            }
    gsl_set_error_handler(old);
    check_abs(worst_inter, 0, 1e-10, "Im interband vs GSL QAWC, 256 (E, mu, T) down to 4 K");
    check_abs(worst_kk, 0, 1e-10, "Im of the blocked resonance vs GSL QAWC, 256 (E, mu, T)");
}

int main(void)
{
    check_begin("test_pv_quad");
    test_closed_forms();
    test_against_qawc();
    return check_summary();
}
