/* pv_quad.c - principal-value integrals on panels graded towards steps
 * (pv_quad.h). */
#include "pv_quad.h"

#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <gsl/gsl_integration.h>

#define GRADE 0.5 /* a panel's width: this times its distance to the nearest step */
#define SPLIT_MARGIN 1e-3

/* Gauss-Legendre nodes and weights on [-1, 1] from GSL, made once. */
static double unit_x[LAM__PV_POINTS], unit_w[LAM__PV_POINTS];
static int unit_ok;
static pthread_once_t unit_once = PTHREAD_ONCE_INIT;

static void unit_make(void)
{
    gsl_integration_glfixed_table *t = gsl_integration_glfixed_table_alloc(LAM__PV_POINTS);
    if (!t)
        return;
    for (size_t i = 0; i < LAM__PV_POINTS; i++)
        gsl_integration_glfixed_point(-1.0, 1.0, i, &unit_x[i], &unit_w[i], t);
    gsl_integration_glfixed_table_free(t);
    unit_ok = 1;
}

static double nearest_step(double x, const double *steps, size_t n)
{
    double d = INFINITY;
    for (size_t i = 0; i < n; i++)
        d = fmin(d, fabs(x - steps[i]));
    return d;
}

/* The panel bounds from 0 to upper into bound (when not NULL); their
 * count (panels + 1). Approaching a step, each panel ends half way to
 * it, so the walk reaches 'finest' there without stepping over it. */
static size_t walk(double upper, const double *steps, size_t nsteps, double finest,
                   double coarsest, double *bound)
{
    size_t k = 0;
    double x = 0;
    for (;;) {
        if (bound)
            bound[k] = x;
        k++;
        if (x >= upper)
            return k;
        double width = fmin(fmax(GRADE * nearest_step(x, steps, nsteps), finest), coarsest);
        x = x + width < upper ? x + width : upper;
    }
}

/* Nodes and weights of the panel [a, b] into x and w. */
static void panel_nodes(double a, double b, double *x, double *w)
{
    double half = 0.5 * (b - a), mid = 0.5 * (a + b);
    for (size_t i = 0; i < LAM__PV_POINTS; i++) {
        x[i] = mid + half * unit_x[i];
        w[i] = half * unit_w[i];
    }
}

/* Room for 'panels' panels: the bounds, then nodes, weights and samples,
 * in one block (kept when large enough). */
static int reserve(lam__pv_rule *r, size_t panels)
{
    if (panels <= r->cap)
        return 0;
    size_t n = panels * LAM__PV_POINTS;
    double *block = realloc(r->bound, (panels + 1 + 3 * n) * sizeof *block);
    if (!block)
        return -1;
    r->bound = block;
    r->x = block + panels + 1, r->w = r->x + n, r->g = r->w + n;
    r->cap = panels;
    return 0;
}

int lam__pv_rule_build(lam__pv_rule *r, double upper, const double *steps, size_t nsteps,
                       double finest, double coarsest, lam__pv_fn g, const void *args)
{
    r->panels = r->nodes = 0;
    pthread_once(&unit_once, unit_make);
    size_t count = walk(upper, steps, nsteps, finest, coarsest, NULL);
    if (!unit_ok || reserve(r, count - 1))
        return -1;
    walk(upper, steps, nsteps, finest, coarsest, r->bound);
    r->upper = upper;
    r->panels = count - 1;
    r->nodes = r->panels * LAM__PV_POINTS;
    for (size_t p = 0; p < r->panels; p++)
        panel_nodes(r->bound[p], r->bound[p + 1], r->x + p * LAM__PV_POINTS,
                    r->w + p * LAM__PV_POINTS);
    for (size_t i = 0; i < r->nodes; i++)
        r->g[i] = g(r->x[i], args);
    return 0;
}

/* The panel that holds c inside, or r->panels when none does. A c within
 * SPLIT_MARGIN of a panel's width from one of its bounds counts as on the
 * bound: every sample is then still a hundredth of a panel from c (the
 * first Gauss-Legendre node lies 0.013 of the width in), and no split
 * makes a sliver of a panel whose nodes round onto c. */
static size_t panel_of(const lam__pv_rule *r, double c)
{
    if (!(c > 0 && c < r->upper))
        return r->panels;
    size_t lo = 0, hi = r->panels; /* bound[lo] <= c < bound[hi] */
    while (hi - lo > 1) {
        size_t mid = (lo + hi) / 2;
        if (r->bound[mid] <= c)
            lo = mid;
        else
            hi = mid;
    }
    double margin = SPLIT_MARGIN * (r->bound[lo + 1] - r->bound[lo]);
    return c - r->bound[lo] > margin && r->bound[lo + 1] - c > margin ? lo : r->panels;
}

/* Sum of w (g - gc) / (x - c) over samples i0..i1. */
static double subtracted_sum(const lam__pv_rule *r, size_t i0, size_t i1, double c, double gc)
{
    double s = 0;
    for (size_t i = i0; i < i1; i++)
        s += r->w[i] * (r->g[i] - gc) / (r->x[i] - c);
    return s;
}

/* The same over [a, b] with fresh samples of g. */
static double subtracted_panel(double a, double b, double c, double gc, lam__pv_fn g,
                               const void *args)
{
    double x[LAM__PV_POINTS], w[LAM__PV_POINTS], s = 0;
    panel_nodes(a, b, x, w);
    for (size_t i = 0; i < LAM__PV_POINTS; i++)
        s += w[i] * (g(x[i], args) - gc) / (x[i] - c);
    return s;
}

double lam__pv_integral(const lam__pv_rule *r, double c, lam__pv_fn g, const void *args)
{
    double gc = g(c, args);
    size_t k = panel_of(r, c);
    double s;
    if (k == r->panels) {
        s = subtracted_sum(r, 0, r->nodes, c, gc);
    } else {
        s = subtracted_sum(r, 0, k * LAM__PV_POINTS, c, gc) +
            subtracted_sum(r, (k + 1) * LAM__PV_POINTS, r->nodes, c, gc) +
            subtracted_panel(r->bound[k], c, c, gc, g, args) +
            subtracted_panel(c, r->bound[k + 1], c, gc, g, args);
    }
    if (c != r->upper && gc != 0)
        s += gc * log(fabs((r->upper - c) / c));
    return s;
}

void lam__pv_rule_free(lam__pv_rule *r)
{
    free(r->bound); /* the block of all four */
    r->bound = r->x = r->w = r->g = NULL;
    r->cap = r->panels = r->nodes = 0;
}
