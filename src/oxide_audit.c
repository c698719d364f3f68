/* oxide_audit.c - the oxide audit (lamina/oxide.h): the joint profile of
 * every image's regions against the oxide thickness (each image's shared
 * parameters held at its own fit), the absolute method (substrate colour
 * against a bare-Si reference), the generalised-least-squares combination
 * of the images' own estimates, and the verdict. */
#include "lamina/oxide.h"
#include "estimate_internal.h"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_linalg.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Regions of the profile: everything the fit measured, except saturated
 * ones; each through its whole mixture (substrate, 1..K, thick,
 * unmodelled), so a region no thickness explains adds a constant instead
 * of being dropped where the analysis' own oxide could not explain it. */
static int profile_region(const lam_analysis *a, size_t i)
{
    return a->measured && a->measured[i].use && !(a->results[i].flags & LAM_FLAG_SATURATED);
}

/* -2 ln L of image a's profile regions with its oxide set to d. */
static lam_status image_profile(const lam_analysis *a, lam_model *m, double d, lam_prediction *P,
                                double *out, lam_error *err)
{
    const lam_estimate *e = a->estimate;
    lam_model_point p = lam_estimate_point(e, 0);
    p.v[LAM_MP_OXIDE] = d;
    lam_status st = lam_model_eval_point(m, &p, 0, P, err);
    if (st)
        return st;
    lam_estimate_observe(e, P);
    size_t H = e->max_layers + 3;
    double lt[LAM_MODEL_MAX_LAYERS + 3], total = 0;
    lam__ladder_terms t;
    lam__ladder_terms_of(e, P, &t);
    for (size_t i = 0; i < a->count; i++) {
        if (!profile_region(a, i))
            continue;
        lam__region_logterms_in(e, &a->measured[i], P, &t, NULL, lt);
        total += lam__logsumexp(lt, H);
    }
    *out = -2 * total;
    return LAM_OK;
}

lam_status lam_oxide_joint_profile(const lam_analysis *const *an, size_t images,
                                   const lam_setup *setup, const double *grid, size_t n,
                                   double *joint, double *per_image, size_t *regions,
                                   lam_error *err)
{
    if (regions) {
        *regions = 0;
        for (size_t j = 0; j < images; j++)
            for (size_t i = 0; i < an[j]->count; i++)
                *regions += (size_t)profile_region(an[j], i);
    }
    lam_model *m = NULL;
    lam_prediction *P = malloc(sizeof *P);
    lam_status st = P ? lam_model_alloc_fast(setup, 16, &m, err)
                      : lam_error_set(err, LAM_ENOMEM, "cannot allocate a prediction");
    for (size_t g = 0; g < n && !st; g++) {
        joint[g] = 0;
        for (size_t j = 0; j < images && !st; j++) {
            double v = 0;
            if (!(st = image_profile(an[j], m, grid[g], P, &v, err))) {
                if (per_image)
                    per_image[j * n + g] = v;
                joint[g] += v;
            }
        }
    }
    lam_model_free(m);
    free(P);
    return st;
}

lam_status lam_reference_level(const char *path, const lam_load_options *load, double level[3],
                               lam_error *err)
{
    lam_image *img = NULL;
    lam_status st = lam_image_load(path, load, &img, err);
    if (st)
        return st;
    lam_substrate sub;
    lam_substrate_options so = lam_substrate_options_default();
    st = lam_substrate_estimate(img, &so, &sub, err);
    if (!st)
        lam_substrate_eval(&sub, (double)img->width / 2, (double)img->height / 2, level);
    lam_image_free(img);
    if (st)
        lam_error_set_file(err, path);
    return st;
}

lam_status lam_oxide_absolute_profile(const lam_analysis *const *an, size_t images,
                                      const double ref[3], const lam_setup *setup,
                                      double stability, const double *grid, size_t n,
                                      double *chi2, lam_error *err)
{
    lam_model *m = NULL;
    lam_prediction *P = malloc(sizeof *P);
    lam_status st = P ? lam_model_alloc_fast(setup, 1, &m, err)
                      : lam_error_set(err, LAM_ENOMEM, "cannot allocate a prediction");
    double bare[3] = {0, 0, 0};
    if (!st && !(st = lam_model_eval(m, 0.0, setup->sheet.fermi_ev, P, err)))
        for (size_t c = 0; c < P->channels; c++)
            bare[c] = P->substrate[c];
    double (*q)[3] = malloc((images ? images : 1) * sizeof *q);
    if (!st && !q)
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate");
    size_t nc = st ? 0 : P->channels;
    for (size_t j = 0; !st && j < images; j++) {
        double b[3];
        lam_substrate_eval(&an[j]->substrate, (double)an[j]->width / 2,
                           (double)an[j]->height / 2, b);
        for (size_t c = 0; c < nc; c++)
            q[j][c] = b[c] / ref[c];
    }
    for (size_t g = 0; g < n && !st; g++) {
        if ((st = lam_model_eval(m, grid[g], setup->sheet.fermi_ev, P, err)))
            break;
        chi2[g] = 0;
        for (size_t j = 0; j < images; j++)
            for (size_t c = 0; c < nc; c++) {
                double r = P->substrate[c] / bare[c], d = (q[j][c] - r) / (stability * q[j][c]);
                chi2[g] += d * d;
            }
    }
    free(q);
    free(P);
    lam_model_free(m);
    return st;
}

/* ---- combination of the images' own estimates (see lamina/oxide.h) ---- */

static void combined_none(lam_oxide_combined *out)
{
    memset(out, 0, sizeof *out);
    out->estimate_nm = out->sigma_nm = out->sigma_shared_nm = NAN;
    out->chi2 = NAN;
    out->p_value = NAN;
    out->spread_nm = out->lo95_nm = out->hi95_nm = NAN;
}

/* The usable samples: estimate y, total sigma and shared part s. */
static size_t usable_samples(const lam_oxide_sample *s, size_t n, double *y, double *sig,
                             double *sh)
{
    size_t m = 0;
    for (size_t i = 0; i < n; i++) {
        double d = s[i].estimate_nm, t = s[i].sigma_nm, g = s[i].sigma_given_shared_nm;
        if (!isfinite(d) || !isfinite(t) || !(t > 0))
            continue;
        if (!isfinite(g) || g > t) /* unknown: nothing known to be shared */
            g = t;
        y[m] = d;
        sig[m] = t;
        sh[m] = sqrt(fmax(0, t * t - g * g));
        m++;
    }
    return m;
}

/* Sample standard deviation of y (NAN below two values). */
static double spread_of(const double *y, size_t n)
{
    if (n < 2)
        return NAN;
    double mean = 0, ss = 0;
    for (size_t i = 0; i < n; i++)
        mean += y[i] / (double)n;
    for (size_t i = 0; i < n; i++)
        ss += (y[i] - mean) * (y[i] - mean);
    return sqrt(ss / (double)(n - 1));
}

/* C = diag(sig^2 - sh^2 + tau2) + sh sh' in Cholesky form; then C^-1 1 and
 * C^-1 y by two solves. */
static lam_status gls_solve(const double *y, const double *sig, const double *sh, size_t n,
                            double tau2, double *ci1, double *ciy, lam_error *err)
{
    gsl_matrix *C = gsl_matrix_alloc(n, n);
    gsl_vector *b = gsl_vector_alloc(n), *x = gsl_vector_alloc(n);
    lam_status st = LAM_OK;
    if (!C || !b || !x) {
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate the oxide covariance (%zu images)", n);
        goto done;
    }
    for (size_t i = 0; i < n; i++)
        for (size_t j = 0; j < n; j++)
            gsl_matrix_set(C, i, j, i == j ? sig[i] * sig[i] + tau2 : sh[i] * sh[j]);
    if (gsl_linalg_cholesky_decomp1(C)) {
        st = lam_error_set(err, LAM_EINTERNAL, "the oxide covariance is not positive definite");
        goto done;
    }
    for (int pass = 0; pass < 2; pass++) {
        for (size_t i = 0; i < n; i++)
            gsl_vector_set(b, i, pass ? y[i] : 1.0);
        gsl_linalg_cholesky_solve(C, b, x);
        for (size_t i = 0; i < n; i++)
            (pass ? ciy : ci1)[i] = gsl_vector_get(x, i);
    }
done:
    gsl_matrix_free(C);
    gsl_vector_free(b);
    gsl_vector_free(x);
    return st;
}

typedef struct gls {
    double d, var, shared, chi2;
} gls;

/* The GLS mean, its variance, the shared part of it and the chi2 about it,
 * for an extra independent variance tau2. */
static lam_status gls_at(const double *y, const double *sig, const double *sh, size_t n,
                         double tau2, double *work, gls *g, lam_error *err)
{
    double *ci1 = work, *ciy = work + n;
    lam_status st = gls_solve(y, sig, sh, n, tau2, ci1, ciy, err);
    if (st)
        return st;
    double a = 0, b = 0, yy = 0, ws = 0;
    for (size_t i = 0; i < n; i++)
        a += ci1[i], b += ciy[i], yy += y[i] * ciy[i];
    g->d = b / a;
    g->var = 1 / a;
    for (size_t i = 0; i < n; i++)
        ws += ci1[i] / a * sh[i];
    g->shared = fabs(ws);
    /* (y - d1)' C^-1 (y - d1) = y'C^-1 y - 2 d 1'C^-1 y + d^2 1'C^-1 1 */
    g->chi2 = fmax(0, yy - 2 * g->d * b + g->d * g->d * a);
    return LAM_OK;
}

/* Paule-Mandel: the extra variance tau2 >= 0 with chi2(tau2) = n - 1 (chi2
 * falls as tau2 grows), by bisection on sqrt(tau2) up to the data's range. */
static lam_status paule_mandel(const double *y, const double *sig, const double *sh, size_t n,
                               double *work, double *tau2, gls *g, lam_error *err)
{
    *tau2 = 0;
    lam_status st = gls_at(y, sig, sh, n, 0, work, g, err);
    if (st || n < 2 || g->chi2 <= (double)(n - 1))
        return st;
    double lo = 0, hi = 0;
    for (size_t i = 0; i < n; i++)
        for (size_t j = 0; j < n; j++)
            hi = fmax(hi, fabs(y[i] - y[j]));
    for (int it = 0; it < 60 && !st; it++) {
        double mid = 0.5 * (lo + hi);
        st = gls_at(y, sig, sh, n, mid * mid, work, g, err);
        if (g->chi2 > (double)(n - 1))
            lo = mid;
        else
            hi = mid;
    }
    *tau2 = hi * hi;
    return st ? st : gls_at(y, sig, sh, n, *tau2, work, g, err);
}

lam_status lam_oxide_combine(const lam_oxide_sample *s, size_t n, lam_oxide_combined *out,
                             lam_error *err)
{
    combined_none(out);
    size_t alloc = n ? n : 1;
    double *buf = malloc(5 * alloc * sizeof *buf);
    if (!buf)
        return lam_error_set(err, LAM_ENOMEM, "cannot combine %zu oxide estimates", n);
    double *y = buf, *sig = buf + alloc, *sh = buf + 2 * alloc, *work = buf + 3 * alloc;
    size_t m = usable_samples(s, n, y, sig, sh);
    gls g0, g;
    double tau2 = 0;
    lam_status st = m ? gls_at(y, sig, sh, m, 0, work, &g0, err) : LAM_OK;
    if (m && !st) {
        out->n = m;
        out->dof = m - 1;
        out->chi2 = g0.chi2;
        out->p_value = m > 1 ? gsl_cdf_chisq_Q(g0.chi2, (double)(m - 1)) : 1.0;
        out->consistent = out->p_value >= LAM_OXIDE_P_CONSISTENT;
        g = g0; /* one thickness unless the images disagree */
        if (!out->consistent)
            st = paule_mandel(y, sig, sh, m, work, &tau2, &g, err);
    }
    if (m && !st) {
        out->tau_nm = sqrt(tau2);
        out->estimate_nm = g.d;
        out->sigma_nm = sqrt(g.var);
        out->sigma_shared_nm = g.shared;
        out->spread_nm = spread_of(y, m);
        out->lo95_nm = g.d - LAM_OXIDE_Z95 * out->sigma_nm;
        out->hi95_nm = g.d + LAM_OXIDE_Z95 * out->sigma_nm;
    }
    free(buf);
    return st;
}

const char *lam_oxide_verdict_name(lam_oxide_verdict v)
{
    switch (v) {
    case LAM_OXIDE_PASS: return "pass";
    case LAM_OXIDE_FAIL: return "fail";
    case LAM_OXIDE_UNDECIDED: return "undecided";
    default: return "no data";
    }
}

lam_oxide_verdict lam_oxide_verdict_of(double lo, double hi, double nominal, double tol)
{
    if (!isfinite(lo) || !isfinite(hi))
        return LAM_OXIDE_NO_DATA;
    double a = nominal - tol, b = nominal + tol;
    if (lo >= a && hi <= b)
        return LAM_OXIDE_PASS;
    if (hi < a || lo > b)
        return LAM_OXIDE_FAIL;
    return LAM_OXIDE_UNDECIDED;
}

/* ---- the audit ---- */

/* Orders farther than this from the reported thickness are "other". */
#define ORDER_SEPARATION_NM 40.0

lam_oxide_audit_options lam_oxide_audit_options_default(void)
{
    lam_oxide_audit_options o = {-1, 10, 200, 1, NULL, 0.01};
    return o;
}

void lam_oxide_audit_clear(lam_oxide_audit *a)
{
    if (!a)
        return;
    free(a->images);
    free(a->grid_nm);
    free(a->profile);
    memset(a, 0, sizeof *a);
}

/* Parabola through the three points around index i: vertex and curvature
 * sigma (NAN at an edge or where the curve is not convex). */
static void refine(const double *g, const double *c, size_t n, size_t i, double *d, double *sigma)
{
    if (i == 0 || i + 1 >= n) {
        *d = g[i];
        *sigma = NAN;
        return;
    }
    double h = g[i + 1] - g[i], a = c[i - 1], b = c[i], e = c[i + 1];
    double curv = (a - 2 * b + e) / (h * h);
    *d = curv > 0 ? g[i] + 0.5 * h * (a - e) / (a - 2 * b + e) : g[i];
    *sigma = curv > 0 ? sqrt(2.0 / curv) : NAN;
}

/* A strict local minimum (the first point of a flat bottom counts). */
static int local_min(const double *c, size_t n, size_t g)
{
    return g > 0 && g + 1 < n && c[g] < c[g - 1] && c[g] <= c[g + 1];
}

static lam_status audit_images(const lam_analysis *const *an, size_t n, lam_oxide_audit *out,
                               lam_error *err)
{
    out->images = calloc(n ? n : 1, sizeof *out->images);
    lam_oxide_sample *s = malloc((n ? n : 1) * sizeof *s);
    if (!out->images || !s) {
        free(s);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the audit of %zu images", n);
    }
    out->n_images = n;
    size_t m = 0;
    for (size_t j = 0; j < n; j++) {
        const lam_oxide_result *o = &an[j]->oxide;
        lam_oxide_audit_image *im = &out->images[j];
        const char *b = strrchr(an[j]->file, '/');
        im->file = b ? b + 1 : an[j]->file;
        im->fitted = o->fitted && isfinite(o->sigma);
        im->regions_used = o->regions_used;
        im->sample = (lam_oxide_sample){o->fitted ? o->estimate : NAN, o->fitted ? o->sigma : NAN,
                                        o->fitted ? o->sigma_given_shared : NAN};
        double half = LAM_OXIDE_Z95 * im->sample.sigma_nm;
        im->verdict = im->fitted ? lam_oxide_verdict_of(im->sample.estimate_nm - half,
                                                        im->sample.estimate_nm + half,
                                                        out->nominal_nm, out->tolerance_nm)
                                 : LAM_OXIDE_NO_DATA;
        if (im->fitted)
            s[m++] = im->sample;
    }
    lam_status st = lam_oxide_combine(s, m, &out->combined, err);
    free(s);
    return st;
}

static lam_status audit_profile(const lam_analysis *const *an, size_t n, const lam_setup *setup,
                                const lam_oxide_audit_options *opt, lam_oxide_audit *out,
                                lam_error *err)
{
    double step = opt->step_nm > 0 ? opt->step_nm : 1, span = fmax(opt->span_nm, step);
    size_t total = (size_t)(2 * span / step) + 1, g0 = 0;
    while (g0 < total && out->nominal_nm - span + step * (double)g0 < 0)
        g0++;
    out->n_grid = total - g0;
    out->grid_nm = malloc((out->n_grid ? out->n_grid : 1) * sizeof *out->grid_nm);
    out->profile = malloc((out->n_grid ? out->n_grid : 1) * sizeof *out->profile);
    if (!out->grid_nm || !out->profile)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the oxide profile");
    for (size_t g = 0; g < out->n_grid; g++)
        out->grid_nm[g] = out->nominal_nm - span + step * (double)(g + g0);
    lam_status st = lam_oxide_joint_profile(an, n, setup, out->grid_nm, out->n_grid, out->profile,
                                            NULL, &out->profile_regions, err);
    if (st || !out->n_grid)
        return st;
    size_t best = 0;
    for (size_t g = 0; g < out->n_grid; g++)
        if (out->profile[g] < out->profile[best])
            best = g;
    out->profile_best_nm = out->grid_nm[best];
    double ref = isfinite(out->combined.estimate_nm) ? out->combined.estimate_nm
                                                      : out->profile_best_nm;
    for (size_t g = 0; out->profile_regions && g < out->n_grid; g++)
        if (out->n_orders < LAM_OXIDE_MAX_ORDERS && local_min(out->profile, out->n_grid, g) &&
            out->profile[g] <= out->profile[best] + LAM_OXIDE_ORDER_DCHI2_SIMILAR &&
            fabs(out->grid_nm[g] - ref) > ORDER_SEPARATION_NM)
            out->orders_nm[out->n_orders++] = out->grid_nm[g];
    return LAM_OK;
}

/* Does another thickness fit far better than anything in the band? */
static int order_decides(const lam_oxide_audit *a, double *dchi2)
{
    double lo = a->nominal_nm - a->tolerance_nm, hi = a->nominal_nm + a->tolerance_nm;
    double inside = INFINITY, best = INFINITY;
    for (size_t g = 0; g < a->n_grid; g++) {
        best = fmin(best, a->profile[g]);
        if (a->grid_nm[g] >= lo && a->grid_nm[g] <= hi)
            inside = fmin(inside, a->profile[g]);
    }
    *dchi2 = inside - best;
    return a->profile_regions && (a->profile_best_nm < lo || a->profile_best_nm > hi) &&
           isfinite(inside) && *dchi2 > LAM_OXIDE_ORDER_DCHI2_FAIL;
}

/* What would turn "undecided" into a decision. */
static void advise(lam_oxide_audit *a)
{
    const lam_oxide_combined *c = &a->combined;
    double indep = sqrt(fmax(0, c->sigma_nm * c->sigma_nm -
                                 c->sigma_shared_nm * c->sigma_shared_nm));
    if (LAM_OXIDE_Z95 * c->sigma_shared_nm > a->tolerance_nm)
        snprintf(a->advice, sizeof a->advice,
                 "a calibrated setup: the shared part (%.1f nm: graphene response, NA, camera) "
                 "alone is wider than the tolerance and does not shrink with more images; "
                 "calibrate on a flake of known layer count or a chip of known oxide",
                 c->sigma_shared_nm);
    else if (c->sigma_shared_nm > indep)
        snprintf(a->advice, sizeof a->advice,
                 "a calibrated setup would shrink the shared part (%.1f nm of %.1f nm); more "
                 "flakes shrink only the independent part (%.1f nm)",
                 c->sigma_shared_nm, c->sigma_nm, indep);
    else
        snprintf(a->advice, sizeof a->advice,
                 "more flakes or images: the independent part (%.1f nm of %.1f nm) shrinks as "
                 "1/sqrt(images); the shared part (%.1f nm) needs a calibrated setup",
                 indep, c->sigma_nm, c->sigma_shared_nm);
}

static void decide(lam_oxide_audit *a)
{
    const lam_oxide_combined *c = &a->combined;
    double dchi2 = 0;
    a->order_decides = order_decides(a, &dchi2);
    if (a->order_decides) {
        a->verdict = LAM_OXIDE_FAIL;
        snprintf(a->reason, sizeof a->reason,
                 "the flakes' colours fit %.0f nm far better than any thickness within %.1f +- "
                 "%.1f nm (delta chi2 %.0f)",
                 a->profile_best_nm, a->nominal_nm, a->tolerance_nm, dchi2);
        return;
    }
    a->verdict = lam_oxide_verdict_of(c->lo95_nm, c->hi95_nm, a->nominal_nm, a->tolerance_nm);
    if (a->verdict == LAM_OXIDE_NO_DATA) {
        snprintf(a->reason, sizeof a->reason, "no image had a region usable for an oxide fit");
        return;
    }
    static const char *const where[] = {"straddles an edge of", "lies inside", "lies outside"};
    snprintf(a->reason, sizeof a->reason,
             "the 95 %% interval %.1f to %.1f nm %s the band %.1f to %.1f nm", c->lo95_nm,
             c->hi95_nm, where[a->verdict], a->nominal_nm - a->tolerance_nm,
             a->nominal_nm + a->tolerance_nm);
    if (a->verdict == LAM_OXIDE_UNDECIDED)
        advise(a);
}

/* The absolute method over 0-1000 nm: the candidate nearest the nominal
 * value among the minima within DCHI2_SIMILAR of the best. */
static lam_status audit_absolute(const lam_analysis *const *an, size_t n, const lam_setup *setup,
                                 const lam_oxide_audit_options *opt, lam_oxide_audit *out,
                                 lam_error *err)
{
    enum { NA = 1001 };
    double ref[3];
    lam_load_options lo = lam_load_options_default();
    lam_status st = lam_reference_level(opt->reference, &lo, ref, err);
    double *ag = malloc(NA * sizeof *ag), *ac = malloc(NA * sizeof *ac);
    if (!st && (!ag || !ac))
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate the absolute profile");
    for (size_t g = 0; !st && g < NA; g++)
        ag[g] = (double)g;
    if (!st)
        st = lam_oxide_absolute_profile(an, n, ref, setup, opt->stability, ag, NA, ac, err);
    if (!st) {
        size_t bi = 0, near = NA;
        for (size_t g = 0; g < NA; g++)
            bi = ac[g] < ac[bi] ? g : bi;
        for (size_t g = 1; g + 1 < NA; g++)
            if (ac[g] <= ac[g - 1] && ac[g] <= ac[g + 1] &&
                ac[g] <= ac[bi] + LAM_OXIDE_ORDER_DCHI2_SIMILAR) {
                if (out->n_absolute < LAM_OXIDE_MAX_ORDERS)
                    out->absolute_candidates_nm[out->n_absolute++] = ag[g];
                if (near == NA || fabs(ag[g] - out->nominal_nm) < fabs(ag[near] - out->nominal_nm))
                    near = g;
            }
        size_t gi = near < NA ? near : bi;
        refine(ag, ac, NA, gi, &out->absolute_nm, &out->absolute_sigma_nm);
        out->absolute_chi2 = ac[gi];
        out->absolute_set = 1;
        out->reference = opt->reference;
        out->stability = opt->stability;
    }
    free(ag);
    free(ac);
    return st;
}

lam_status lam_oxide_audit_run(const lam_analysis *const *an, size_t images,
                               const lam_setup *setup, const lam_oxide_audit_options *opt,
                               lam_oxide_audit *out, lam_error *err)
{
    memset(out, 0, sizeof *out);
    out->absolute_nm = out->absolute_sigma_nm = out->profile_best_nm = NAN;
    if (!(opt->nominal_nm > 0) || !(opt->tolerance_nm >= 0))
        return lam_error_set(err, LAM_EINVAL, "the oxide audit needs a nominal thickness > 0 "
                                              "and a tolerance >= 0");
    out->nominal_nm = opt->nominal_nm;
    out->tolerance_nm = opt->tolerance_nm;
    lam_status st = audit_images(an, images, out, err);
    if (!st)
        st = audit_profile(an, images, setup, opt, out, err);
    if (!st)
        decide(out);
    if (!st && opt->reference)
        st = audit_absolute(an, images, setup, opt, out, err);
    if (st)
        lam_oxide_audit_clear(out);
    return st;
}
