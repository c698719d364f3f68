/* infer.c - region posteriors with the shared parameters' uncertainty
 * (Laplace leave-one-out), labels and flags, the usable rectangle. */
#include "lamina/infer.h"
#include "estimate_internal.h"
#include "lamina/parallel.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <gsl/gsl_cdf.h>

/* A region informs the shared parameters only with enough interior pixels
 * for its mean to be worth more than its edges. */
#define MIN_INTERIOR_FOR_FIT 60

static const char *const flag_names[LAM_FLAG_COUNT] = {"ambiguous", "unmodelled", "saturated",
                                                       "touches_border", "small", "doped"};

const char *lam_flag_name(int bit)
{
    return bit >= 0 && bit < LAM_FLAG_COUNT ? flag_names[bit] : "?";
}

lam_infer_options lam_infer_options_default(void)
{
    lam_infer_options o = {0.95, 1e-4, 100, 6};
    return o;
}

void lam_region_measure(const lam_region_stats *r, const double noise[3], double kappa,
                        size_t channels, lam_est_region *out)
{
    memset(out, 0, sizeof *out);
    double n = r->interior ? (double)r->interior : 1.0;
    for (size_t c = 0; c < channels; c++) {
        out->mean[c] = r->sum[c] / n;
        out->var[c] = kappa * noise[c] * noise[c] / n;
    }
    out->use = r->interior >= MIN_INTERIOR_FOR_FIT && r->clipped * 100 <= r->area &&
               r->depth_max >= LAM_RIBBON_DEPTH;
}

/* ---- leave-one-out parameter shift and covariance ---- */

typedef struct loo {
    size_t n;
    double shift[LAM__MAT_MAX];
    lam__mat cov;
    lam__region_fixed fixed; /* the region's variance and the terms it fixes */
} loo;

/* The one-step leave-one-out shift is linear in the region's gradient: for
 * a region that carries much of the information on a weakly identified
 * parameter (one large trilayer pinning the response) it can throw the
 * prediction far past where a refit would go. The shift is limited to one
 * standard deviation of the fit's own posterior (Mahalanobis length 1). */
#define LOO_MAX_SHIFT 1.0
static void damp_shift(loo *out, const lam__mat fit_prec, size_t n)
{
    double q = 0;
    for (size_t a = 0; a < n; a++)
        for (size_t b = 0; b < n; b++)
            q += out->shift[a] * fit_prec[a][b] * out->shift[b];
    if (q > LOO_MAX_SHIFT * LOO_MAX_SHIFT)
        for (size_t a = 0; a < n; a++)
            out->shift[a] *= LOO_MAX_SHIFT / sqrt(q);
}

/* Remove region r's information (its responsibility-weighted Gauss-Newton
 * Hessian and gradient) from the posterior of the view's parameters; out
 * also keeps what every hypothesis shares: the region's own variance, its
 * normaliser and its unmodelled term. */
static void leave_out(const lam_estimate *e, const lam_est_view *v, const lam_est_region *r,
                      const double *resp, loo *out)
{
    size_t n = v->nfree, K = e->max_layers, nc = e->channels;
    out->n = n;
    memset(out->shift, 0, sizeof out->shift);
    lam__region_fixed_of(e, r, &v->ladder, &out->fixed);
    lam__mat l, prec;
    for (size_t a = 0; a < n; a++)
        for (size_t b = 0; b < n; b++)
            out->cov[a][b] = v->cov[a][b];
    if (!r->use || n == 0)
        return;
    lam__cholesky_ridged(out->cov, n, l);
    lam__cholesky_inverse(l, n, prec);
    lam__mat fit_prec;
    memcpy(fit_prec, prec, sizeof fit_prec);
    double g[LAM__MAT_MAX] = {0};
    for (size_t h = 1; h <= K; h++) {
        if (resp[h] < 1e-6)
            continue;
        for (size_t c = 0; c < nc; c++) {
            double pred = v->ladder.contrast[h][c];
            double w = resp[h] / out->fixed.var[c];
            for (size_t a = 0; a < n; a++) {
                g[a] += w * v->grad[a][h][c] * (r->mean[c] - pred);
                for (size_t b = 0; b < n; b++)
                    prec[a][b] -= w * v->grad[a][h][c] * v->grad[b][h][c];
            }
        }
    }
    lam__cholesky_ridged(prec, n, l);
    lam__cholesky_inverse(l, n, out->cov);
    for (size_t a = 0; a < n; a++)
        for (size_t b = 0; b < n; b++)
            out->shift[a] -= out->cov[a][b] * g[b];
    damp_shift(out, fit_prec, n);
}

/* log N(m; mean, S) for nc <= 3 with a full covariance; chi2 out. */
static double mvn_logpdf(const double *m, const double *mean, const double s[3][3], size_t nc,
                         double *chi2)
{
    lam__mat a, l;
    for (size_t i = 0; i < nc; i++)
        for (size_t j = 0; j < nc; j++)
            a[i][j] = s[i][j];
    lam__cholesky_ridged(a, nc, l);
    double d[LAM__MAT_MAX] = {0};
    for (size_t i = 0; i < nc; i++)
        d[i] = m[i] - mean[i];
    double x[LAM__MAT_MAX];
    memcpy(x, d, sizeof x);
    lam__cholesky_solve(l, nc, x);
    double q = 0;
    for (size_t i = 0; i < nc; i++)
        q += d[i] * x[i];
    if (chi2)
        *chi2 = q;
    return -0.5 * (q + lam__cholesky_logdet(l, nc) + (double)nc * log(2 * M_PI));
}

/* Predictive mean and covariance of hypothesis h (h <= K) with the
 * parameters left out. */
static void predictive(const lam_estimate *e, const lam_est_view *v, const loo *lo, size_t h,
                       double mean[3], double s[3][3])
{
    size_t nc = e->channels, n = lo->n;
    for (size_t c = 0; c < nc; c++) {
        mean[c] = v->ladder.contrast[h][c];
        for (size_t a = 0; a < n; a++)
            mean[c] += v->grad[a][h][c] * lo->shift[a];
    }
    for (size_t c = 0; c < nc; c++)
        for (size_t d = 0; d < nc; d++) {
            double t = 0;
            for (size_t a = 0; a < n; a++)
                for (size_t b = 0; b < n; b++)
                    t += v->grad[a][h][c] * lo->cov[a][b] * v->grad[b][h][d];
            s[c][d] = t;
        }
    for (size_t c = 0; c < nc; c++)
        s[c][c] += lo->fixed.var[c];
}

/* The goodness of fit of a region against its most probable layer count:
 * each channel against its own predictive spread. The correlations the
 * shared parameters put between channels are left out on purpose: an
 * image's own systematic errors (JPEG chroma steps move blue against
 * green) do not follow them, and a fit test that counts them flags good
 * flakes of lossy files as unmodelled. Residue and other materials miss
 * the ladder by far more than a channel's spread, and are still caught. */
static double diagonal_chi2(const double *m, const double *mean, const double s[3][3], size_t nc)
{
    double q = 0;
    for (size_t c = 0; c < nc; c++)
        q += (m[c] - mean[c]) * (m[c] - mean[c]) / s[c][c];
    return q;
}

/* log prior x predictive of every hypothesis; chi2 of each layered one. */
static void hypotheses(const lam_estimate *e, const lam_est_view *v, const lam_est_region *r,
                       const loo *lo, double *lt, double *chi2)
{
    size_t K = e->max_layers, nc = e->channels, top = v->ladder.max_layers;
    double mean[3], s[3][3];
    for (size_t h = 0; h <= K; h++) {
        predictive(e, v, lo, h, mean, s);
        lt[h] = log(lam_hypothesis_prior(h, K)) + mvn_logpdf(r->mean, mean, s, nc, &chi2[h]);
    }
    double thick[LAM_MODEL_MAX_LAYERS + 1];
    size_t nt = 0;
    for (size_t N = K + 1; N <= top; N++)
        thick[nt++] = lam__gauss_logpdf_norm(r->mean, v->ladder.contrast[N], lo->fixed.var, nc,
                                             lo->fixed.log_norm);
    lt[K + 1] = nt ? log(lam_hypothesis_prior(K + 1, K) / (double)nt) + lam__logsumexp(thick, nt)
                   : -INFINITY;
    lt[K + 2] = log(lam_hypothesis_prior(K + 2, K)) + lo->fixed.unmodelled;
}

/* ---- the Fermi level ---- */

#define ORDINARY_EF_EV 0.5      /* exfoliated graphene on SiO2: 0.1-0.3 eV (common practice) */
/* Heavy doping (|E_F| > 0.5 eV) needs intercalation or electrolyte gating:
 * rare on a fresh chip, so it gets 3 % of the prior - enough for a clearly
 * blocked flake to be recognised, not enough to explain every misfit. */
#define ORDINARY_PRIOR 0.97

static void fermi_grid(lam_fermi_table *t)
{
    size_t n = 0;
    for (int k = 0; k <= 5; k++)
        t->mu[n++] = 0.1 * k;             /* 0 .. 0.5: coarse, the ladder barely moves */
    while (n < LAM_FERMI_GRID)
        t->mu[n] = 0.5 + (LAM_FERMI_MAX_EV - 0.5) * (double)(n - 5) / (LAM_FERMI_GRID - 6), n++;
    t->count = n;
    for (size_t i = 0; i < n; i++) {
        double lo = i ? 0.5 * (t->mu[i - 1] + t->mu[i]) : 0;
        double hi = i + 1 < n ? 0.5 * (t->mu[i] + t->mu[i + 1]) : LAM_FERMI_MAX_EV;
        t->flat_weight[i] = (hi - lo) / LAM_FERMI_MAX_EV;
        t->mix_weight[i] = t->mu[i] <= ORDINARY_EF_EV + 1e-9 ? ORDINARY_PRIOR / 6
                                                            : (1 - ORDINARY_PRIOR) / (double)(n - 6);
    }
}

/* The grid's points are independent: slices of them run on as many
 * threads as there are models, each slice with its own model (they keep
 * caches), prediction and error; the first slice's error is reported. */
typedef struct fermi_job {
    const lam_estimate *e;
    size_t j;
    lam_model *const *model;
    lam_fermi_table *t;
    lam_status *st;
    lam_error *err;
} fermi_job;

static void fermi_points(size_t i0, size_t i1, size_t slice, void *vjob)
{
    const fermi_job *job = vjob;
    const lam_estimate *e = job->e;
    lam_error *err = &job->err[slice];
    lam_prediction *P = malloc(sizeof *P);
    lam_status st = P ? LAM_OK : lam_error_set(err, LAM_ENOMEM, "cannot allocate a prediction");
    lam_model_point p = lam_estimate_point(e, job->j);
    for (size_t i = i0; i < i1 && !st; i++) {
        p.v[LAM_MP_FERMI] = job->t->mu[i];
        if ((st = lam_model_eval_point(job->model[slice], &p, 2, P, err)))
            break;
        lam_estimate_observe(e, P);
        for (size_t N = 0; N <= 2; N++)
            for (size_t c = 0; c < e->channels; c++)
                job->t->contrast[i][N][c] = P->contrast[N][c];
    }
    free(P);
    job->st[slice] = st;
}

lam_status lam_fermi_table_build(const lam_estimate *e, size_t j, lam_model *const *models,
                                 size_t count, lam_fermi_table *t, lam_error *err)
{
    fermi_grid(t);
    count = lam_parallel_slices(t->count, count);
    lam_status *st = calloc(count, sizeof *st);
    lam_error *errs = calloc(count, sizeof *errs);
    if (!st || !errs) {
        free(st);
        free(errs);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the Fermi table");
    }
    fermi_job job = {e, j, models, t, st, errs};
    lam_parallel_for(t->count, count, fermi_points, &job);
    lam_status out = lam_error_first(st, errs, count, err);
    free(st);
    free(errs);
    return out;
}

/* log N(m; C_N(mu) + ladder shift, S) over the grid, S the predictive
 * covariance at the fitted Fermi level. */
static void fermi_loglik(const lam_estimate *e, const lam_est_view *v, const lam_fermi_table *t,
                         const lam_est_region *r, const loo *lo, size_t N, double *ll)
{
    double mean[3], s[3][3], shifted[3];
    predictive(e, v, lo, N, mean, s);
    for (size_t i = 0; i < t->count; i++) {
        for (size_t c = 0; c < e->channels; c++)
            shifted[c] = t->contrast[i][N][c] + (mean[c] - v->ladder.contrast[N][c]);
        ll[i] = mvn_logpdf(r->mean, shifted, s, e->channels, NULL);
    }
}

/* Average the 1L and 2L hypotheses over the Fermi level (layer-count prior). */
static void fermi_marginal(const lam_estimate *e, const lam_est_view *v, const lam_fermi_table *t,
                           const lam_est_region *r, const loo *lo, double *lt)
{
    double ll[LAM_FERMI_GRID];
    for (size_t N = 1; N <= 2 && N <= e->max_layers; N++) {
        fermi_loglik(e, v, t, r, lo, N, ll);
        for (size_t i = 0; i < t->count; i++)
            ll[i] += log(t->mix_weight[i]);
        lt[N] = log(lam_hypothesis_prior(N, e->max_layers)) + lam__logsumexp(ll, t->count);
    }
}

/* Quantile of a posterior on the grid, interpolated within cells. */
static double grid_quantile(const lam_fermi_table *t, const double *post, double q)
{
    double acc = 0;
    for (size_t i = 0; i < t->count; i++) {
        double lo = i ? 0.5 * (t->mu[i - 1] + t->mu[i]) : 0;
        double hi = i + 1 < t->count ? 0.5 * (t->mu[i] + t->mu[i + 1]) : LAM_FERMI_MAX_EV;
        if (acc + post[i] >= q && post[i] > 0)
            return lo + (hi - lo) * (q - acc) / post[i];
        acc += post[i];
    }
    return LAM_FERMI_MAX_EV;
}

static void fermi_interval(const lam_estimate *e, const lam_est_view *v,
                           const lam_fermi_table *t, const lam_est_region *r, const loo *lo,
                           size_t N, lam_fermi_estimate *f)
{
    double ll[LAM_FERMI_GRID], post[LAM_FERMI_GRID];
    fermi_loglik(e, v, t, r, lo, N, ll);
    for (size_t i = 0; i < t->count; i++)
        ll[i] += log(t->flat_weight[i]);
    double z = lam__logsumexp(ll, t->count), below = 0;
    for (size_t i = 0; i < t->count; i++) {
        post[i] = exp(ll[i] - z);
        if (t->mu[i] <= ORDINARY_EF_EV + 1e-9)
            below += post[i];
    }
    f->evaluated = 1;
    f->constrained = below < 0.025;
    f->estimate = grid_quantile(t, post, 0.5);
    f->lo = grid_quantile(t, post, 0.025);
    f->hi = grid_quantile(t, post, 0.975);
    f->upper = grid_quantile(t, post, 0.95);
    if (!f->constrained)
        f->estimate = f->lo = NAN;
}

/* ---- labels and flags ---- */

static void label_region(const lam_infer_options *opt, size_t K, size_t best,
                         lam_region_result *o)
{
    if (o->flags & (LAM_FLAG_UNMODELLED | LAM_FLAG_SATURATED)) {
        o->layers = 0;
        snprintf(o->label, sizeof o->label, "unassigned");
        snprintf(o->cls, sizeof o->cls, "unmodelled");
        o->p_label = o->p[LAM_P_UNMODELLED(K)];
        return;
    }
    o->p_label = o->p[best];
    if (o->p_label < opt->p_confident)
        o->flags |= LAM_FLAG_AMBIGUOUS;
    if (best == 0) {
        o->layers = 0;
        o->substrate_like = 1;
        o->flags |= LAM_FLAG_AMBIGUOUS;
        snprintf(o->label, sizeof o->label, "unassigned");
        snprintf(o->cls, sizeof o->cls, "substrate");
    } else if (best == LAM_P_THICK(K)) {
        o->layers = 0;
        o->thick = 1;
        snprintf(o->label, sizeof o->label, "thick");
        snprintf(o->cls, sizeof o->cls, "thick");
    } else {
        o->layers = (int)best;
        snprintf(o->label, sizeof o->label, "%uL", (unsigned)(best % 100));
        snprintf(o->cls, sizeof o->cls, "%s", (o->flags & LAM_FLAG_AMBIGUOUS) ? "ambiguous" : "layers");
    }
}

static void geometry_flags(const lam_region_stats *s, const lam_infer_options *opt,
                           lam_region_result *o)
{
    if (s->clipped > s->area / 100)
        o->flags |= LAM_FLAG_SATURATED;
    if (s->touches_border)
        o->flags |= LAM_FLAG_BORDER;
    if (lam_region_area(s) < opt->min_area_px)
        o->flags |= LAM_FLAG_SMALL;
}

void lam_infer_region(const lam_estimate *e, const lam_est_view *v, const lam_fermi_table *ft,
                      const lam_est_region *r, const lam_region_stats *s,
                      const lam_infer_options *opt, lam_region_result *o)
{
    size_t K = e->max_layers, H = K + 3, nc = e->channels;
    double lt[LAM_MODEL_MAX_LAYERS + 3], chi2[LAM_MODEL_MAX_LAYERS + 3];
    memset(o, 0, sizeof *o);
    o->channels = nc;
    /* responsibilities at the fit, for the leave-one-out */
    lam__region_logterms(e, r, &v->ladder, lt);
    double z = lam__logsumexp(lt, H), resp[LAM_MODEL_MAX_LAYERS + 3];
    for (size_t h = 0; h < H; h++)
        resp[h] = exp(lt[h] - z);
    loo lo;
    leave_out(e, v, r, resp, &lo);
    hypotheses(e, v, r, &lo, lt, chi2);
    if (ft)
        fermi_marginal(e, v, ft, r, &lo, lt);
    z = lam__logsumexp(lt, H);
    size_t best = 0, best_layers = 1;
    for (size_t h = 0; h < H; h++) {
        o->p[h] = exp(lt[h] - z);
        if (o->p[h] > o->p[best])
            best = h;
        if (h >= 1 && h <= K && o->p[h] > o->p[best_layers])
            best_layers = h;
    }
    o->p_substrate = o->p[0];
    size_t shown = best >= 1 && best <= K ? best : best_layers;
    double mean[3], sc[3][3];
    predictive(e, v, &lo, best_layers, mean, sc);
    o->chi2 = diagonal_chi2(r->mean, mean, sc, nc);
    o->pvalue = gsl_cdf_chisq_Q(o->chi2, (double)nc);
    predictive(e, v, &lo, shown, mean, sc);
    for (size_t c = 0; c < nc; c++) {
        o->mean[c] = r->mean[c];
        o->model[c] = v->ladder.contrast[shown][c];
        o->sigma[c] = sqrt(sc[c][c]);
    }
    geometry_flags(s, opt, o);
    if (best == LAM_P_UNMODELLED(K) || (best >= 1 && best <= K && o->pvalue < opt->p_unmodelled))
        o->flags |= LAM_FLAG_UNMODELLED;
    o->fermi.estimate = o->fermi.lo = o->fermi.hi = o->fermi.upper = NAN;
    if (ft && best >= 1 && best <= 2 && r->use) {
        fermi_interval(e, v, ft, r, &lo, best, &o->fermi);
        if (o->fermi.constrained) {
            o->flags |= LAM_FLAG_DOPED;
            /* the undoped ladder was not the right yardstick for its fit */
            o->flags &= ~(unsigned)LAM_FLAG_UNMODELLED;
        }
    }
    label_region(opt, K, best, o);
}

void lam_infer_mix(lam_region_result *o, const lam_region_result *rival, double w,
                   const lam_infer_options *opt)
{
    size_t K = opt->max_layers, H = K + 3, best = 0;
    for (size_t h = 0; h < H; h++) {
        o->p[h] = (1 - w) * o->p[h] + w * rival->p[h];
        if (o->p[h] > o->p[best])
            best = h;
    }
    o->p_substrate = o->p[0];
    unsigned keep = LAM_FLAG_SATURATED | LAM_FLAG_BORDER | LAM_FLAG_SMALL | LAM_FLAG_DOPED;
    o->flags &= keep;
    if (best == LAM_P_UNMODELLED(K))
        o->flags |= LAM_FLAG_UNMODELLED;
    o->layers = 0;
    o->thick = o->substrate_like = 0;
    label_region(opt, K, best, o);
}
