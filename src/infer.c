/* infer.c - region posteriors over layer count, oxide profile likelihood,
 * Fermi-level scan and the usable rectangle. */
#include "lamina/infer.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <gsl/gsl_cdf.h>

lam_infer_options lam_infer_options_default(void)
{
    lam_infer_options o = {0.005, 0.05, 0.95, 1e-3, 100, 6};
    return o;
}

void lam_region_moments(const lam_region_stats *r, const double noise[3], double kappa,
                        const lam_infer_options *opt, const double model[3], double mean[3],
                        double sigma[3])
{
    double n = r->interior ? (double)r->interior : 1.0;
    for (int c = 0; c < 3; c++) {
        mean[c] = r->sum[c] / n;
        double stat = kappa * noise[c] * noise[c] / n;
        double f = opt->floor_abs + opt->floor_rel * fabs(model ? model[c] : mean[c]);
        sigma[c] = sqrt(stat + f * f);
    }
}

double lam_region_chi2(const lam_region_stats *r, const double model[3], const double noise[3],
                       double kappa, const lam_infer_options *opt)
{
    double mean[3], sigma[3], x = 0;
    lam_region_moments(r, noise, kappa, opt, model, mean, sigma);
    for (int c = 0; c < 3; c++) {
        double d = (mean[c] - model[c]) / sigma[c];
        x += d * d;
    }
    return x;
}

void lam_infer_region(const lam_region_stats *r, const lam_prediction *P, size_t thick_to,
                      const double noise[3], double kappa, const lam_infer_options *opt,
                      lam_region_result *out)
{
    memset(out, 0, sizeof *out);
    size_t K = opt->max_layers;
    double chi[LAM_MODEL_MAX_LAYERS + 2];
    double best = INFINITY;
    size_t bestN = 1;
    /* N = 0: the region may be bare substrate that noise pushed off the ladder */
    for (size_t N = 0; N <= K; N++) {
        chi[N] = lam_region_chi2(r, P->contrast[N], noise, kappa, opt);
        if (chi[N] < best)
            best = chi[N], bestN = N;
    }
    /* thick: profile over the entries beyond K */
    double tbest = INFINITY;
    size_t tN = K + 1;
    for (size_t N = K + 1; N <= thick_to && N <= P->max_layers; N++) {
        double x = lam_region_chi2(r, P->contrast[N], noise, kappa, opt);
        if (x < tbest)
            tbest = x, tN = N;
    }
    chi[K + 1] = tbest;
    if (tbest < best)
        best = tbest, bestN = K + 1;
    double z = 0, p0 = exp(-0.5 * (chi[0] - best));
    for (size_t N = 1; N <= K + 1; N++)
        z += out->p[N] = isfinite(chi[N]) ? exp(-0.5 * (chi[N] - best)) : 0.0;
    z += p0;
    for (size_t N = 1; N <= K + 1; N++)
        out->p[N] /= z;
    out->p_substrate = p0 / z;
    const double *model = bestN <= K ? P->contrast[bestN] : P->contrast[tN];
    out->substrate_like = bestN == 0;
    lam_region_moments(r, noise, kappa, opt, model, out->mean, out->sigma);
    memcpy(out->model, model, sizeof out->model);
    out->chi2 = best;
    out->pvalue = gsl_cdf_chisq_Q(best, 3.0);
    if (out->pvalue < opt->p_unmodelled)
        out->flags |= LAM_FLAG_UNMODELLED;
    if ((bestN ? out->p[bestN] : out->p_substrate) < opt->p_confident)
        out->flags |= LAM_FLAG_AMBIGUOUS;
    if (r->clipped > r->area / 100)
        out->flags |= LAM_FLAG_SATURATED;
    if (r->touches_border)
        out->flags |= LAM_FLAG_BORDER;
    if ((double)r->area < opt->min_area_px)
        out->flags |= LAM_FLAG_SMALL;
    out->thick = bestN == K + 1;
    if (out->flags & (LAM_FLAG_UNMODELLED | LAM_FLAG_SATURATED)) {
        out->layers = 0;
        snprintf(out->label, sizeof out->label, "unassigned");
    } else if (bestN == 0) {
        out->layers = 0; /* indistinguishable from the bare substrate */
        out->flags |= LAM_FLAG_AMBIGUOUS;
        snprintf(out->label, sizeof out->label, "unassigned");
    } else if (out->thick) {
        out->layers = 0;
        snprintf(out->label, sizeof out->label, "thick");
    } else {
        out->layers = (int)bestN;
        snprintf(out->label, sizeof out->label, "%uL", (unsigned)(bestN % 100));
    }
    out->fermi.estimate = NAN;
}

static double profile_total(lam_model *m, double d, double fermi, const lam_region_stats *R,
                            const int *use, size_t count, size_t thick_to, const double noise[3],
                            double kappa, const lam_infer_options *opt, lam_prediction *P,
                            lam_status *st, lam_error *err)
{
    *st = lam_model_eval(m, d, fermi, P, err);
    if (*st)
        return NAN;
    double tot = 0;
    for (size_t i = 0; i < count; i++) {
        if (!use[i])
            continue;
        double best = INFINITY;
        for (size_t N = 1; N <= opt->max_layers && N <= thick_to; N++)
            best = fmin(best, lam_region_chi2(&R[i], P->contrast[N], noise, kappa, opt));
        tot += best;
    }
    return tot;
}

lam_status lam_infer_oxide(lam_model *m, const lam_region_stats *R, const int *use, size_t count,
                           size_t thick_to, const double noise[3], double kappa,
                           const lam_infer_options *opt, double nominal, double half,
                           double fermi, double *estimate, double *sigma, size_t *used,
                           double *chi2_min, lam_error *err)
{
    size_t n_used = 0;
    for (size_t i = 0; i < count; i++)
        n_used += use[i] != 0;
    *used = n_used;
    if (!n_used) {
        *estimate = nominal;
        *sigma = NAN;
        *chi2_min = NAN;
        return LAM_OK;
    }
    lam_prediction *P = malloc(sizeof *P);
    if (!P)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a prediction");
    lam_status st = LAM_OK;
    /* the chi2 profile varies on a ~10 nm scale: a 2.5 nm grid finds the
     * basin, golden-section search the minimum */
    const double step = 2.5;
    size_t steps = (size_t)(2 * half / step) + 1;
    double best = INFINITY, bd = nominal;
    for (size_t i = 0; i < steps && !st; i++) {
        double d = nominal - half + step * (double)i;
        if (d < 0)
            continue;
        double t = profile_total(m, d, fermi, R, use, count, thick_to, noise, kappa, opt, P, &st, err);
        if (t < best)
            best = t, bd = d;
    }
    /* golden-section refinement inside +-1 step */
    double a = bd - step, b = bd + step, g = 0.6180339887498949;
    double x1 = b - g * (b - a), x2 = a + g * (b - a);
    double f1 = profile_total(m, x1, fermi, R, use, count, thick_to, noise, kappa, opt, P, &st, err);
    double f2 = profile_total(m, x2, fermi, R, use, count, thick_to, noise, kappa, opt, P, &st, err);
    for (int it = 0; it < 16 && !st; it++) {
        if (f1 < f2) {
            b = x2, x2 = x1, f2 = f1, x1 = b - g * (b - a);
            f1 = profile_total(m, x1, fermi, R, use, count, thick_to, noise, kappa, opt, P, &st, err);
        } else {
            a = x1, x1 = x2, f1 = f2, x2 = a + g * (b - a);
            f2 = profile_total(m, x2, fermi, R, use, count, thick_to, noise, kappa, opt, P, &st, err);
        }
    }
    if (!st) {
        double d0 = 0.5 * (a + b);
        double h = 0.5;
        double fm = profile_total(m, d0 - h, fermi, R, use, count, thick_to, noise, kappa, opt, P, &st, err);
        double f0 = profile_total(m, d0, fermi, R, use, count, thick_to, noise, kappa, opt, P, &st, err);
        double fp = profile_total(m, d0 + h, fermi, R, use, count, thick_to, noise, kappa, opt, P, &st, err);
        double curv = (fp - 2 * f0 + fm) / (h * h);
        *estimate = d0;
        /* chi2 = chi2_min + (d - d0)^2 / sigma^2  =>  sigma = sqrt(2 / curvature) */
        *sigma = curv > 0 ? sqrt(2.0 / curv) : NAN;
        *chi2_min = f0;
    }
    free(P);
    return st;
}

lam_status lam_fermi_scan_alloc(lam_model *m, double oxide_nm, lam_fermi_scan **out,
                                lam_error *err)
{
    lam_fermi_scan *sc = malloc(sizeof *sc);
    if (!sc)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a Fermi-level scan");
    for (size_t i = 0; i < LAM_FERMI_STEPS; i++) {
        sc->mu[i] = 0.05 * (double)i; /* 0 .. 1.5 eV */
        lam_status st = lam_model_eval(m, oxide_nm, sc->mu[i], &sc->ladder[i], err);
        if (st) {
            free(sc);
            return st;
        }
    }
    *out = sc;
    return LAM_OK;
}

void lam_fermi_scan_free(lam_fermi_scan *sc)
{
    free(sc);
}

void lam_infer_fermi(const lam_fermi_scan *sc, const lam_region_stats *r, int layers,
                     const double noise[3], double kappa, const lam_infer_options *opt,
                     lam_fermi_estimate *out)
{
    enum { STEPS = LAM_FERMI_STEPS };
    double chi[STEPS];
    double best = INFINITY, worst = -INFINITY;
    size_t bi = 0;
    for (size_t i = 0; i < STEPS; i++) {
        chi[i] = lam_region_chi2(r, sc->ladder[i].contrast[layers], noise, kappa, opt);
        if (chi[i] < best)
            best = chi[i], bi = i;
        worst = fmax(worst, chi[i]);
    }
    const double *mu = sc->mu;
    size_t lo = bi, hi = bi;
    while (lo > 0 && chi[lo - 1] <= best + 1)
        lo--;
    while (hi + 1 < STEPS && chi[hi + 1] <= best + 1)
        hi++;
    out->evaluated = 1;
    /* constrained: the 68 % interval is closed on both sides, i.e. the
     * channels see the Pauli-blocking edge move */
    out->constrained = worst - best > 4 && chi[0] > best + 1 && hi + 1 < STEPS;
    out->lo = mu[lo];
    out->hi = mu[hi];
    out->estimate = out->constrained ? mu[bi] : NAN;
    if (!out->constrained) {
        /* report the range the data allow: up to where chi2 rises by 4 */
        size_t k = 0;
        while (k + 1 < STEPS && chi[k + 1] <= best + 4)
            k++;
        out->lo = 0;
        out->hi = mu[k];
    }
}

void lam_usable_rectangle(const lam_segmentation *seg, const lam_region_stats *r, size_t wh[2],
                          size_t xy[2])
{
    size_t x0 = r->bbox[0], x1 = r->bbox[2], y0 = r->bbox[1], y1 = r->bbox[3];
    size_t bw = x1 - x0 + 1, w = seg->width, hgt = seg->height;
    size_t *height = calloc(bw, sizeof *height), *stack = malloc((bw + 1) * sizeof *stack);
    wh[0] = wh[1] = 0;
    xy[0] = r->bbox[0], xy[1] = r->bbox[1];
    if (!height || !stack) {
        free(height);
        free(stack);
        return;
    }
    size_t best = 0;
    for (size_t y = y0; y <= y1; y++) {
        for (size_t x = x0; x <= x1; x++) {
            size_t k = y * w + x;
            int in = seg->label[k] == r->id && x > 0 && y > 0 && x + 1 < w && y + 1 < hgt &&
                     seg->label[k - 1] == r->id && seg->label[k + 1] == r->id &&
                     seg->label[k - w] == r->id && seg->label[k + w] == r->id;
            height[x - x0] = in ? height[x - x0] + 1 : 0;
        }
        /* largest rectangle in the histogram (monotone stack) */
        size_t top = 0;
        for (size_t i = 0; i <= bw; i++) {
            size_t hcur = i < bw ? height[i] : 0;
            while (top && height[stack[top - 1]] >= hcur) {
                size_t hh = height[stack[--top]];
                size_t left = top ? stack[top - 1] + 1 : 0;
                size_t width = i - left;
                if (hh * width > best) {
                    best = hh * width;
                    wh[0] = width;
                    wh[1] = hh;
                    xy[0] = x0 + left;
                    xy[1] = y + 1 - hh;
                }
            }
            stack[top++] = i;
        }
    }
    free(height);
    free(stack);
}
