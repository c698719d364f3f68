/* pv_quad.h - principal-value integrals
 *     P(c) = PV int_0^U g(x) / (x - c) dx
 * of a function g that is smooth except for steps of known place and
 * width (Fermi edges), for many poles c with the same g (internal to the
 * conductivity module).
 *
 * Why: the graphene conductivity needs such an integral per photon energy
 * and Fermi level (the imaginary part of the interband term and of the
 * blocked resonance), ~4000 of them per Fermi-level table. GSL's adaptive
 * QAWC took ~10 us each, starting afresh every time although g depends on
 * the Fermi level and temperature only. Here g is sampled once per rule
 * and every c costs one pass over the samples (docs/performance.md).
 *
 * Method: singularity subtraction,
 *     P(c) = int_0^U (g(x) - g(c)) / (x - c) dx + g(c) ln|(U - c) / c|,
 * whose integrand is a divided difference of g, as smooth as g itself, for
 * any real c (inside [0, U] or not). It is integrated by Gauss-Legendre
 * panels of LAM__PV_POINTS points whose widths grow with the distance to
 * the nearest step: 'finest' at a step, half the distance beyond, at most
 * 'coarsest'. The panel that holds c is split at c and integrated with
 * fresh samples, so no sample lies closer to c than a fraction of a panel.
 * A Fermi step of width kT has its poles pi kT off the real axis; with
 * finest = 2 kT each panel's error is of order 1e-16 (Gauss-Legendre on an
 * analytic function: (pi + sqrt(1 + pi^2))^-20). tests/test_pv_quad.c
 * checks the rule against closed forms and against GSL's QAWC.
 */
#ifndef LAMINA_PV_QUAD_H
#define LAMINA_PV_QUAD_H

#include <stddef.h>

#define LAM__PV_POINTS 10

typedef double (*lam__pv_fn)(double x, const void *args);

typedef struct lam__pv_rule {
    double upper;   /* U */
    size_t panels;  /* bound[0] = 0 < ... < bound[panels] = U */
    size_t nodes;   /* panels * LAM__PV_POINTS: x, w, g in panel order */
    size_t cap;     /* panels the arrays hold */
    double *bound, *x, *w, *g; /* one block, from bound (freed through it) */
} lam__pv_rule;

/* Panels of [0, upper] graded towards steps[0..nsteps) (places anywhere on
 * the real line; 0 steps: all panels 'coarsest'), and g sampled on them
 * (g(x, args)). The rule's arrays are reused when large enough (a rule
 * starts zeroed). 0, or -1 when out of memory (the rule stays valid and
 * empty). Needs 0 < finest <= coarsest, upper > 0. */
int lam__pv_rule_build(lam__pv_rule *r, double upper, const double *steps, size_t nsteps,
                       double finest, double coarsest, lam__pv_fn g, const void *args);

/* P(c) for the g the rule was built with (the same g and args: it is
 * evaluated at c and on the split panel). c != 0; at c == U the log term,
 * g(U) times an infinite log, is left out: the rule is for g that has
 * vanished there. */
double lam__pv_integral(const lam__pv_rule *r, double c, lam__pv_fn g, const void *args);

void lam__pv_rule_free(lam__pv_rule *r);

#endif
