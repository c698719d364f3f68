/* thickness.c - film contrasts over a thickness grid with the index scale
 * and oxide integrated, and one region's posterior over the thickness:
 * its modes (interference orders), estimate, interval and alternatives.
 * The analysis stage (oxide profile, results) is in thickness_stage.c. */
#include "lamina/thickness.h"
#include "lamina/crystal.h"
#include "lamina/infer.h"
#include "lamina/parallel.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* The index scale: the model is evaluated at 'scale_nodes' values evenly
 * spaced over +-3 prior sd and interpolated (Lagrange, in s) to
 * 'scale_fine' values weighted by the Gaussian prior. For a thick film the
 * likelihood in d is narrower than the spacing of a few quadrature nodes
 * would resolve; the contrast itself is smooth in s (its phase moves by
 * under a radian over the prior at 300 nm), so the fine values cost only
 * the interpolation. */
#define SCALE_REACH 3.0

struct lam_thickness_table {
    size_t channels, count, nodes; /* thickness points; (oxide x fine scale) nodes */
    size_t n_oxide, n_scale;       /* nodes = n_oxide x n_scale, oxide-major */
    double *d;                     /* count, nm, uniform in ln d */
    double *log_w;                 /* nodes: ln of the quadrature weight (oxide x scale) */
    double oxide_logw[8];          /* ln of each oxide node's weight */
    double *scale_logw;            /* n_scale: ln of each scale's weight (prior, then image) */
    double *scale;                 /* n_scale: the index scale s of each */
    double (*optics)[LAM_MAX_CHANNELS]; /* count: variance the optics' uncertainty adds, or NULL */
    double (*c)[LAM_MAX_CHANNELS]; /* nodes x count contrasts */
    double box_lo[LAM_MAX_CHANNELS], box_hi[LAM_MAX_CHANNELS]; /* the contrasts' range */
};

/* Prior masses (lamina/estimate.h): film 1, substrate 0.1, unmodelled 0.1. */
#define P_FILM 1.0
#define P_OTHER 0.1

lam_thickness_options lam_thickness_options_default(void)
{
    lam_thickness_options o = {0.333, 300, 0.004, 20, 0.95, 5, 41, 1};
    return o;
}

int lam_thickness_applies(const lam_setup *s)
{
    return lam_setup_crystal_kind(s) == LAM_CRYSTAL_CONTINUOUS;
}

lam_thickness_noise lam_thickness_noise_from(const lam_estimate *e, const lam_setup *s)
{
    lam_thickness_noise nz;
    memset(&nz, 0, sizeof nz);
    nz.channels = e->channels;
    double gain = 0;
    for (size_t c = 0; c < e->channels; c++) {
        nz.floor_abs[c] = hypot(e->floor_abs_prior[c], e->shared[LAM_NU_OFFSET + c].prior_sd);
        gain = fmax(gain, e->shared[LAM_NU_GAIN + c].prior_sd);
    }
    nz.floor_rel = hypot(s->crystal ? s->crystal->floor_rel : 0.03, gain);
    return nz;
}

void lam_thickness_table_free(lam_thickness_table *t)
{
    if (!t)
        return;
    free(t->d);
    free(t->log_w);
    free(t->scale_logw);
    free(t->scale);
    free(t->optics);
    free(t->c);
    free(t);
}

static lam_thickness_table *table_alloc(size_t channels, size_t count, size_t n_oxide,
                                        size_t n_scale)
{
    lam_thickness_table *t = calloc(1, sizeof *t);
    if (!t)
        return NULL;
    size_t nodes = n_oxide * n_scale;
    t->channels = channels, t->count = count, t->nodes = nodes;
    t->n_oxide = n_oxide, t->n_scale = n_scale;
    t->d = malloc(count * sizeof *t->d);
    t->log_w = malloc(nodes * sizeof *t->log_w);
    t->scale_logw = malloc(n_scale * sizeof *t->scale_logw);
    t->scale = malloc(n_scale * sizeof *t->scale);
    t->c = malloc(nodes * count * sizeof *t->c);
    if (!t->d || !t->log_w || !t->scale_logw || !t->scale || !t->c) {
        lam_thickness_table_free(t);
        return NULL;
    }
    return t;
}

/* Lagrange weights of the evenly spaced base nodes u_0..u_{n-1} (units of
 * the prior sd) at u. */
static void lagrange(size_t n, const double *u, double at, double *l)
{
    for (size_t j = 0; j < n; j++) {
        l[j] = 1;
        for (size_t k = 0; k < n; k++)
            if (k != j)
                l[j] *= (at - u[k]) / (u[j] - u[k]);
    }
}

/* Position of fine scale f (of nf) in prior sds. */
static double fine_at(size_t f, size_t nf)
{
    return nf > 1 ? -SCALE_REACH + 2 * SCALE_REACH * (double)f / (double)(nf - 1) : 0;
}

/* log_w of every node from the oxide and scale weights. */
static void node_weights(lam_thickness_table *t)
{
    for (size_t o = 0; o < t->n_oxide; o++)
        for (size_t f = 0; f < t->n_scale; f++)
            t->log_w[o * t->n_scale + f] = t->oxide_logw[o] + t->scale_logw[f];
}

/* The fine scale values of one oxide node from its base contrasts
 * (base[b * stride + j]: scale node b, thickness j). */
static void fine_scale(lam_thickness_table *t, const double (*base)[LAM_MAX_CHANNELS],
                       size_t stride, size_t nb, size_t nf, size_t oxide_node)
{
    double u[16], l[16];
    for (size_t j = 0; j < nb; j++)
        u[j] = fine_at(j, nb);
    for (size_t f = 0; f < nf; f++) {
        size_t node = oxide_node * nf + f;
        lagrange(nb, u, fine_at(f, nf), l);
        for (size_t j = 0; j < t->count; j++)
            for (size_t c = 0; c < t->channels; c++) {
                double v = 0;
                for (size_t b = 0; b < nb; b++)
                    v += l[b] * base[b * stride + j][c];
                t->c[node * t->count + j][c] = v;
            }
    }
}

/* ---- film evaluations on several threads ----
 * Evaluation k (k < n) at point q[k] and index scale scale[k], on n_oxide
 * oxides, into out + k * n_oxide * count (lam_model_eval_films_oxides'
 * layout). A model keeps caches, so each worker has its own: the caller's
 * and clones of it (whose caches refill to the same values). The same
 * numbers on any number of threads. */
#define FILMS_MAX_EVALS 16

typedef struct films_job {
    lam_model *model[LAM_MAX_THREADS];
    const lam_model_point *q;
    const double *scale, *oxide_nm, *d;
    size_t n_oxide, count;
    double (*out)[LAM_MAX_CHANNELS];
    lam_status st[FILMS_MAX_EVALS];
    lam_error err[FILMS_MAX_EVALS];
} films_job;

static void films_item(size_t k, size_t worker, void *vjob)
{
    films_job *j = vjob;
    j->st[k] = lam_model_eval_films_oxides(j->model[worker], &j->q[k], j->oxide_nm, j->n_oxide,
                                           j->scale[k], j->d, j->count,
                                           j->out + k * j->n_oxide * j->count, &j->err[k]);
}

static lam_status films_run(films_job *j, lam_model *m, size_t n, size_t threads,
                            lam_error *err)
{
    if (n > FILMS_MAX_EVALS)
        return lam_error_set(err, LAM_EINVAL, "too many film evaluations (%zu)", n);
    size_t workers = lam_parallel_slices(n, threads);
    lam_status st = lam_model_clones(m, workers, j->model, err);
    if (st)
        return st;
    lam_parallel_each_worker(n, workers, films_item, j);
    st = lam_error_first(j->st, j->err, n, err);
    lam_model_clones_free(j->model, workers);
    return st;
}

/* The model's contrasts at the nb index scales about scale_mean (+-
 * SCALE_REACH sd) on every oxide: base[(k * n_oxide + o) * count + j].
 * All oxides of one scale in one evaluation (lam_model_eval_films_oxides:
 * the films' phases depend on the scale, not on the oxide); the scales on
 * 'threads' threads. */
static lam_status base_tables(lam_model *m, const lam_model_point *p, const double *oxide_nm,
                              size_t n_oxide, double scale_mean, double scale_sd, size_t nb,
                              const double *d, size_t count, size_t threads,
                              double (*base)[LAM_MAX_CHANNELS], lam_error *err)
{
    films_job *j = malloc(sizeof *j);
    if (!j)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a table");
    lam_model_point q[FILMS_MAX_EVALS];
    double scale[FILMS_MAX_EVALS];
    for (size_t k = 0; k < nb && k < FILMS_MAX_EVALS; k++) {
        double u = nb > 1 ? -SCALE_REACH + 2 * SCALE_REACH * (double)k / (double)(nb - 1) : 0;
        q[k] = *p;
        scale[k] = fmax(0.5, scale_mean + scale_sd * u);
    }
    j->q = q, j->scale = scale, j->oxide_nm = oxide_nm, j->d = d;
    j->n_oxide = n_oxide, j->count = count, j->out = base;
    lam_status st = films_run(j, m, nb, threads, err);
    free(j);
    return st;
}

lam_status lam_thickness_table_build(lam_model *m, const lam_model_point *p,
                                     const double *oxide_nm, const double *oxide_weight,
                                     size_t n_oxide, double scale_mean, double scale_sd,
                                     const lam_thickness_options *opt,
                                     lam_thickness_table **out, lam_error *err)
{
    size_t nb = opt->scale_nodes < 1 ? 1 : opt->scale_nodes > 9 ? 9 : opt->scale_nodes;
    size_t nf = nb == 1 ? 1 : opt->scale_fine < nb ? nb : opt->scale_fine > 255 ? 255
                                                                             : opt->scale_fine;
    size_t nc = lam_model_channels(m);
    size_t count = 1 + (size_t)ceil(log(opt->max_nm / opt->min_nm) / opt->step_rel);
    lam_thickness_table *t = n_oxide <= 8 ? table_alloc(nc, count, n_oxide, nf) : NULL;
    double (*base)[LAM_MAX_CHANNELS] = malloc(n_oxide * nb * count * sizeof *base);
    if (!t || !base) {
        lam_thickness_table_free(t);
        free(base);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a thickness table");
    }
    for (size_t j = 0; j < count; j++)
        t->d[j] = opt->min_nm * exp(opt->step_rel * (double)j);
    double wsum = 0;
    for (size_t f = 0; f < nf; f++) {
        t->scale[f] = fmax(0.5, scale_mean + scale_sd * fine_at(f, nf));
        wsum += t->scale_logw[f] = exp(-0.5 * fine_at(f, nf) * fine_at(f, nf));
    }
    for (size_t f = 0; f < nf; f++)
        t->scale_logw[f] = log(t->scale_logw[f] / wsum);
    for (size_t o = 0; o < n_oxide; o++)
        t->oxide_logw[o] = log(oxide_weight[o]);
    node_weights(t);
    lam_status st = base_tables(m, p, oxide_nm, n_oxide, scale_mean, scale_sd, nb, t->d, count,
                                opt->threads, base, err);
    for (size_t o = 0; o < n_oxide && !st; o++)
        fine_scale(t, (const double (*)[LAM_MAX_CHANNELS])(base + o * count), n_oxide * count,
                   nb, nf, o);
    free(base);
    for (size_t c = 0; c < nc && !st; c++) {
        t->box_lo[c] = t->box_hi[c] = 0;
        for (size_t k = 0; k < t->nodes * count; k++) {
            t->box_lo[c] = fmin(t->box_lo[c], t->c[k][c]);
            t->box_hi[c] = fmax(t->box_hi[c], t->c[k][c]);
        }
    }
    if (st) {
        lam_thickness_table_free(t);
        return st;
    }
    *out = t;
    return LAM_OK;
}

#define OPTICS(t, j) ((t)->optics ? (t)->optics[j] : NULL)

/* ln Normal(m; C, V + F(C) + O) over the channels (O: the optics'
 * variance at this thickness, may be NULL), and chi^2 through 'chi2'. */
static double loglik(const lam_thickness_noise *nz, const lam_est_region *r, const double *c,
                     const double *optics, double *chi2, double *sigma)
{
    double prod = 1, q = 0;
    for (size_t k = 0; k < nz->channels; k++) {
        double f = nz->floor_abs[k] + nz->floor_rel * fabs(c[k]);
        double v = r->var[k] + f * f + (optics ? optics[k] : 0), dm = r->mean[k] - c[k];
        q += dm * dm / v;
        prod *= 2 * M_PI * v; /* one logarithm for all channels */
        if (sigma)
            sigma[k] = sqrt(v);
    }
    if (chi2)
        *chi2 = q;
    return -0.5 * (q + log(prod));
}

/* ln of the substrate's and the unmodelled hypothesis' prior x density. */
static void other_terms(const lam_thickness_table *t, const lam_thickness_noise *nz,
                        const lam_est_region *r, double *substrate, double *unmodelled)
{
    double zero[LAM_MAX_CHANNELS] = {0};
    *substrate = log(P_OTHER) + loglik(nz, r, zero, NULL, NULL, NULL);
    double u = log(P_OTHER);
    for (size_t c = 0; c < nz->channels; c++) {
        double span = t->box_hi[c] - t->box_lo[c];
        u -= log(span + 2 * (0.1 + 0.5 * span)); /* the films' range, widened */
    }
    *unmodelled = u;
}

/* ll[j]: ln of the likelihood at thickness j with the nodes integrated;
 * best: the (node, j) of the largest term. */
static void film_terms(const lam_thickness_table *t, const lam_thickness_noise *nz,
                       const lam_est_region *r, double *ll, size_t *best_node, size_t *best_j)
{
    double top = -INFINITY, terms[1024];
    size_t nodes = t->nodes < 1024 ? t->nodes : 1024;
    for (size_t j = 0; j < t->count; j++) {
        double m = -INFINITY;
        for (size_t n = 0; n < nodes; n++) {
            terms[n] = t->log_w[n] + loglik(nz, r, t->c[n * t->count + j], OPTICS(t, j), NULL,
                                            NULL);
            if (terms[n] > top)
                top = terms[n], *best_node = n, *best_j = j;
            m = fmax(m, terms[n]);
        }
        double s = 0;
        for (size_t n = 0; n < nodes; n++)
            s += exp(terms[n] - m);
        ll[j] = m + log(s);
    }
}

size_t lam_thickness_scales(const lam_thickness_table *t)
{
    return t->n_scale;
}

double lam_thickness_scale_logw(const lam_thickness_table *t, size_t f)
{
    return f < t->n_scale ? t->scale_logw[f] : -INFINITY;
}

static double logsumexp3(double a, double b, double c)
{
    double top = fmax(a, fmax(b, c));
    return top + log(exp(a - top) + exp(b - top) + exp(c - top));
}

void lam_thickness_log_evidence_scales(const lam_thickness_table *t,
                                       const lam_thickness_noise *nz, const lam_est_region *r,
                                       double *out)
{
    double sub, unm, inv = log(P_FILM / (double)t->count);
    other_terms(t, nz, r, &sub, &unm);
    for (size_t f = 0; f < t->n_scale; f++) {
        double m = -INFINITY, z = 0; /* a running log-sum-exp */
        for (size_t o = 0; o < t->n_oxide; o++)
            for (size_t j = 0; j < t->count; j++) {
                double v = t->oxide_logw[o] +
                           loglik(nz, r, t->c[(o * t->n_scale + f) * t->count + j],
                                  OPTICS(t, j), NULL, NULL);
                if (v > m)
                    z = z * exp(m - v) + 1, m = v;
                else
                    z += exp(v - m);
            }
        out[f] = logsumexp3(m + log(z) + inv, sub, unm);
    }
}

/* ---- modes of the posterior over the thickness grid ---- */

typedef struct basin {
    size_t lo, hi, peak; /* grid indices, inclusive */
    double mass;
} basin;

/* Split the posterior p (count points) into basins at its minima, merging
 * neighbours whose valley is above half the smaller peak. */
static size_t basins(const double *p, size_t count, basin *b, size_t max)
{
    size_t n = 0;
    for (size_t j = 0; j < count; j++) {
        int left = j == 0 || p[j] > p[j - 1], right = j + 1 == count || p[j] >= p[j + 1];
        if (left && right && n < max)
            b[n++] = (basin){0, 0, j, 0};
    }
    for (int merged = 1; merged && n > 1;) {
        merged = 0;
        for (size_t k = 0; k + 1 < n; k++) {
            double valley = INFINITY;
            for (size_t j = b[k].peak; j <= b[k + 1].peak; j++)
                valley = fmin(valley, p[j]);
            if (valley >= 0.5 * fmin(p[b[k].peak], p[b[k + 1].peak])) {
                if (p[b[k + 1].peak] > p[b[k].peak])
                    b[k].peak = b[k + 1].peak;
                memmove(&b[k + 1], &b[k + 2], (n - k - 2) * sizeof *b);
                n--, merged = 1;
                break;
            }
        }
    }
    /* edges at the valleys' minima */
    for (size_t k = 0; k < n; k++) {
        b[k].lo = k ? b[k - 1].hi + 1 : 0;
        size_t hi = count - 1;
        if (k + 1 < n) {
            hi = b[k].peak;
            for (size_t j = b[k].peak; j <= b[k + 1].peak; j++)
                if (p[j] < p[hi])
                    hi = j;
        }
        b[k].hi = hi;
        b[k].mass = 0;
        for (size_t j = b[k].lo; j <= b[k].hi; j++)
            b[k].mass += p[j];
    }
    return n;
}

/* The thickness at which the cumulative mass within [lo, hi] reaches q. */
static double quantile(const double *p, const double *d, size_t lo, size_t hi, double mass,
                       double q)
{
    double acc = 0, target = q * mass;
    for (size_t j = lo; j <= hi; j++) {
        if (acc + p[j] >= target) {
            double f = p[j] > 0 ? (target - acc) / p[j] : 0.5;
            /* each grid point stands for the cell [j - 1/2, j + 1/2] in ln d */
            double a = j > 0 ? sqrt(d[j] * d[j - 1]) : d[j];
            double b = j + 1 < hi + 1 ? sqrt(d[j] * d[j + 1]) : d[j];
            return a * pow(b / a, f);
        }
        acc += p[j];
    }
    return d[hi];
}

static int by_mass(const void *a, const void *b)
{
    double x = ((const basin *)a)->mass, y = ((const basin *)b)->mass;
    return x < y ? 1 : x > y ? -1 : 0;
}

/* Modes from the film posterior p (normalised to the film's probability). */
static void find_modes(const lam_thickness_table *t, const double *p,
                       const lam_thickness_options *opt, lam_thickness_result *o)
{
    basin b[64];
    size_t n = basins(p, t->count, b, 64);
    qsort(b, n, sizeof *b, by_mass);
    o->modes = 0;
    for (size_t k = 0; k < n && o->modes < LAM_THICKNESS_MAX_MODES; k++) {
        if (b[k].mass * opt->mode_ratio < b[0].mass)
            break;
        lam_thickness_mode *m = &o->mode[o->modes++];
        m->probability = b[k].mass;
        m->estimate = quantile(p, t->d, b[k].lo, b[k].hi, b[k].mass, 0.5);
        m->lo = quantile(p, t->d, b[k].lo, b[k].hi, b[k].mass, 0.025);
        m->hi = quantile(p, t->d, b[k].lo, b[k].hi, b[k].mass, 0.975);
    }
    o->order_ambiguous = n > 0 && b[0].mass < opt->p_order * o->p_film;
}

/* The region's hypotheses normalised: film (with p over the grid),
 * substrate, unmodelled. */
static void normalise(const lam_thickness_table *t, double *ll, double sub, double unm,
                      lam_thickness_result *o)
{
    double m = fmax(sub, unm);
    for (size_t j = 0; j < t->count; j++)
        m = fmax(m, ll[j] + log(P_FILM / (double)t->count));
    double z = exp(sub - m) + exp(unm - m);
    for (size_t j = 0; j < t->count; j++) {
        ll[j] = exp(ll[j] + log(P_FILM / (double)t->count) - m);
        z += ll[j];
    }
    o->p_film = 0;
    for (size_t j = 0; j < t->count; j++)
        o->p_film += ll[j] /= z;
    o->p_substrate = exp(sub - m) / z;
    o->p_unmodelled = exp(unm - m) / z;
}

void lam_thickness_infer(const lam_thickness_table *t, const lam_thickness_noise *nz,
                         const lam_est_region *r, const lam_thickness_options *opt,
                         lam_thickness_result *o)
{
    memset(o, 0, sizeof *o);
    o->estimate = o->lo = o->hi = NAN;
    double *p = malloc(t->count * sizeof *p), sub, unm;
    if (!p)
        return;
    size_t bn = 0, bj = 0;
    film_terms(t, nz, r, p, &bn, &bj);
    other_terms(t, nz, r, &sub, &unm);
    normalise(t, p, sub, unm, o);
    loglik(nz, r, t->c[bn * t->count + bj], OPTICS(t, bj), &o->chi2, o->sigma);
    memcpy(o->model, t->c[bn * t->count + bj], sizeof o->model);
    find_modes(t, p, opt, o);
    free(p);
    o->evaluated = o->modes > 0 && o->p_film >= o->p_substrate && o->p_film >= o->p_unmodelled;
    if (o->modes) {
        o->estimate = o->mode[0].estimate;
        o->lo = o->mode[0].lo;
        o->hi = o->mode[0].hi;
        o->probability = o->mode[0].probability;
    }
}

/* ---- the optics' uncertainty, linearised ----
 * A thick film's contrast moves fast with a camera channel's wavelength
 * shift or width and with the illumination NA (the fringes sweep through
 * the channel); each channel's shift and width touch only its own
 * contrast, so one film evaluation with every channel shifted (and one
 * widened, one at a larger NA) gives every derivative. */
#define OPTICS_SHIFT_NM 2.0
#define OPTICS_LOG_WIDTH 0.02
#define OPTICS_NA 0.02

lam_status lam_thickness_table_add_optics(lam_thickness_table *t, lam_model *m,
                                          const lam_model_point *p, double scale,
                                          const double *sd_shift, const double *sd_width,
                                          double sd_na, size_t threads, lam_error *err)
{
    double (*c)[LAM_MAX_CHANNELS] = malloc(4 * t->count * sizeof *c);
    films_job *job = malloc(sizeof *job);
    if (!t->optics)
        t->optics = malloc(t->count * sizeof *t->optics);
    if (!c || !job || !t->optics) {
        free(c);
        free(job);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the optics' variance");
    }
    lam_model_point q[4] = {*p, *p, *p, *p};
    for (size_t k = 0; k < t->channels; k++) {
        q[1].v[LAM_MP_SHIFT + k] += OPTICS_SHIFT_NM;
        q[2].v[LAM_MP_WIDTH + k] += OPTICS_LOG_WIDTH;
    }
    q[3].v[LAM_MP_NA] = p->v[LAM_MP_NA] + OPTICS_NA;
    double scales[4] = {scale, scale, scale, scale};
    job->q = q, job->scale = scales, job->oxide_nm = &p->v[LAM_MP_OXIDE], job->d = t->d;
    job->n_oxide = 1, job->count = t->count, job->out = c;
    lam_status st = films_run(job, m, 4, threads, err);
    free(job);
    for (size_t j = 0; j < t->count && !st; j++)
        for (size_t k = 0; k < t->channels; k++) {
            double c0 = c[j][k];
            double a = (c[t->count + j][k] - c0) / OPTICS_SHIFT_NM * sd_shift[k];
            double b = (c[2 * t->count + j][k] - c0) / OPTICS_LOG_WIDTH * sd_width[k];
            double n = (c[3 * t->count + j][k] - c0) / OPTICS_NA * sd_na;
            t->optics[j][k] = a * a + b * b + n * n;
        }
    free(c);
    return st;
}

lam_status lam_thickness_table_copy_optics(lam_thickness_table *dst,
                                           const lam_thickness_table *src, lam_error *err)
{
    if (!src->optics || src->count != dst->count)
        return LAM_OK;
    if (!dst->optics && !(dst->optics = malloc(dst->count * sizeof *dst->optics)))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the optics' variance");
    memcpy(dst->optics, src->optics, dst->count * sizeof *dst->optics);
    return LAM_OK;
}
