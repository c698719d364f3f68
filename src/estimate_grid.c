/* estimate_grid.c - where the fit starts: a grid over oxide thickness x
 * contrast scale, with each channel's contrast factor profiled.
 *
 * The posterior has two kinds of far-apart modes: the oxide repeats its
 * colours, and an overall contrast scale trades against the layer counts
 * (a response 20 % stronger makes a trilayer look like a bilayer of the
 * default; a response twice as strong, a monolayer like a bilayer). What
 * tells them apart is the SHAPE of the ladder over N: contrast grows
 * sublinearly with N at a rate the interference sets. Each image is scored
 * on a grid of oxide x a common contrast scale s (the ladder multiplied by
 * s, with a log-normal prior for what the response family can do); in each
 * cell every channel also gets its own contrast factor, fitted to the
 * regions in two EM rounds with a log-normal prior (an unknown camera's
 * curves or lamp change one channel's contrast by tens of per cent: blue
 * most), so that the comparison is of shapes, not of one channel's level.
 * The fit starts at the best cell (the response's continuum set for the
 * scale, the camera gains for the factors), and a multistart tries the
 * next local maxima. */
#include "estimate_internal.h"
#include "linalg_internal.h"
#include "lamina/parallel.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#define GRID_LAYERS 12      /* ladder depth for the oxide grid (thick up to 12) */
#define SCALE_STEPS 13
#define SCALE_MIN 0.65
#define SCALE_MAX 1.5
#define SCALE_PRIOR_SD_LOG 0.18
#define FACTOR_PRIOR_SD_LOG 0.35 /* a channel's contrast about the scaled default */
#define GIVEN_FACTOR_SD_LOG 0.1  /* ... when the camera's curves are given */
#define DEFAULT_GAIN_SD 0.15     /* the gain prior's sd when the camera is not given */
#define FACTOR_MIN 0.4
#define FACTOR_MAX 2.5
#define FACTOR_ROUNDS 2

static double scale_at(int k)
{
    return SCALE_MIN * pow(SCALE_MAX / SCALE_MIN, k / (double)(SCALE_STEPS - 1));
}

typedef struct grid {
    size_t n;          /* oxide steps */
    double lo, step;
    double *score;     /* n x SCALE_STEPS */
    float *factor;     /* n x SCALE_STEPS x LAM_MAX_CHANNELS */
} grid;

static void scaled(const lam_prediction *P, double s, lam_prediction *out)
{
    *out = *P;
    for (size_t N = 0; N <= P->max_layers; N++)
        for (size_t c = 0; c < P->channels; c++)
            out->contrast[N][c] *= s;
}

/* How far a channel's contrast may stray from the scaled default: the
 * camera's curves unknown, tens of per cent (FACTOR_PRIOR_SD_LOG); given,
 * about what their stated uncertainty allows. With one channel a factor is
 * the scale itself: none. */
static double factor_sd(const lam_estimate *e, size_t c)
{
    if (e->channels < 2)
        return 0;
    const lam_nuisance *g = &e->shared[LAM_NU_GAIN + c];
    return g->prior_sd < 0.5 * DEFAULT_GAIN_SD ? GIVEN_FACTOR_SD_LOG : FACTOR_PRIOR_SD_LOG;
}

int lam__curves_unknown(const lam_estimate *e)
{
    return e->channels >= 2 && factor_sd(e, 0) == FACTOR_PRIOR_SD_LOG;
}

/* One channel's factor f for ladder Q: weighted least squares of the
 * regions' means on f x Q over the layer hypotheses (responsibilities
 * resp), shrunk in log f towards 0 by the prior. */
static double channel_factor(const lam_estimate *e, const lam_est_image *im, const double *resp,
                             const lam_prediction *Q, size_t c)
{
    double sd = factor_sd(e, c);
    if (!(sd > 0))
        return 1;
    size_t K = e->max_layers, H = K + 3;
    double a = 0, b = 0;
    for (size_t i = 0; i < im->count; i++) {
        const lam_est_region *r = &im->regions[i];
        if (!r->use)
            continue;
        for (size_t h = 1; h <= K; h++) {
            double q = Q->contrast[h][c], w = resp[i * H + h];
            if (w < 1e-6)
                continue;
            w /= r->var[c] + lam_estimate_floor_var(e, c, q);
            a += w * q * q;
            b += w * r->mean[c] * q;
        }
    }
    if (a <= 0 || b <= 0)
        return 1;
    double f = b / a, prec = a * f * f, prior = 1 / (sd * sd);
    double x = log(f) * prec / (prec + prior);
    return fmin(fmax(exp(x), FACTOR_MIN), FACTOR_MAX);
}

/* The score of one cell: ladder P (at an oxide whose prior term is
 * ox_prior) scaled by s, channel factors profiled. Q and resp are scratch;
 * the factors are returned in f. */
static double cell_score(const lam_estimate *e, size_t j, const lam_prediction *P,
                         double ox_prior, const lam__region_fixed *fixed, double s,
                         lam_prediction *Q, double *resp, double *f)
{
    const lam_est_image *im = &e->image[j];
    double zs = log(s) / SCALE_PRIOR_SD_LOG;
    for (size_t c = 0; c < LAM_MAX_CHANNELS; c++)
        f[c] = 1;
    scaled(P, s, Q);
    double score = lam__image_logpost_with(e, j, Q, ox_prior, fixed, resp);
    for (int round = 0; round < FACTOR_ROUNDS; round++) {
        double prior = 0;
        for (size_t c = 0; c < P->channels; c++) {
            double fc = channel_factor(e, im, resp, Q, c);
            for (size_t N = 0; N <= Q->max_layers; N++)
                Q->contrast[N][c] *= fc;
            f[c] *= fc;
            double sd = factor_sd(e, c), z = sd > 0 ? log(f[c]) / sd : 0;
            prior -= 0.5 * z * z;
        }
        score = lam__image_logpost_with(e, j, Q, ox_prior, fixed, resp) + prior;
    }
    return score - 0.5 * zs * zs;
}

/* The cells of one image's grid, scored on several threads: the ladders
 * of every oxide step are made first (the model is not shared across
 * threads), then each slice scores its cells with scratch of its own. */
typedef struct grid_job {
    const lam_estimate *e;
    size_t j, count, H;
    const lam_prediction *ladder; /* per oxide step */
    grid *g;
    lam_prediction *Q;            /* per slice */
    double *resp;                 /* per slice: count x H */
    lam__region_fixed *fixed;     /* per slice: count, of one oxide step's ladder */
} grid_job;

/* The regions' fixed terms against oxide step d's ladder: the same in all
 * the step's cells (the scale and the factors move only the layers). */
static void fix_regions(const grid_job *x, size_t d, lam__region_fixed *fixed)
{
    const lam_est_image *im = &x->e->image[x->j];
    for (size_t i = 0; i < im->count; i++)
        if (im->regions[i].use)
            lam__region_fixed_of(x->e, &im->regions[i], &x->ladder[d], &fixed[i]);
}

static void score_cells(size_t begin, size_t end, size_t slice, void *ctx)
{
    grid_job *x = ctx;
    const lam_nuisance *ox = &x->e->image[x->j].oxide;
    lam__region_fixed *fixed = x->fixed + slice * x->count;
    size_t fixed_step = SIZE_MAX;
    for (size_t cell = begin; cell < end; cell++) {
        size_t d = cell / SCALE_STEPS;
        if (d != fixed_step)
            fix_regions(x, fixed_step = d, fixed);
        double f[LAM_MAX_CHANNELS], oxide = x->g->lo + x->g->step * (double)d;
        x->g->score[cell] = cell_score(x->e, x->j, &x->ladder[d], lam__prior_at(ox, oxide), fixed,
                                       scale_at((int)(cell % SCALE_STEPS)), &x->Q[slice],
                                       x->resp + slice * x->count * x->H, f);
        for (size_t c = 0; c < LAM_MAX_CHANNELS; c++)
            x->g->factor[cell * LAM_MAX_CHANNELS + c] = (float)f[c];
    }
}

/* The ladder at every oxide step of the grid, the steps shared out to the
 * threads: slice 0 with the fit's model, the others each with a copy of
 * it (a model keeps caches, so it serves one thread; a copy gives the same
 * values). The points differ only in their oxide. */
typedef struct ladder_job {
    lam_model_point p;  /* the point, its oxide aside */
    const grid *g;
    lam_model **model;  /* per slice */
    lam_prediction *L;  /* per oxide step */
    lam_status *st;     /* per slice */
    lam_error *err;     /* per slice */
} ladder_job;

static void ladder_steps(size_t d0, size_t d1, size_t slice, void *vjob)
{
    const ladder_job *x = vjob;
    lam_model_point p = x->p;
    lam_status st = LAM_OK;
    for (size_t d = d0; d < d1 && !st; d++) {
        p.v[LAM_MP_OXIDE] = x->g->lo + x->g->step * (double)d;
        st = lam_model_eval_point(x->model[slice], &p, GRID_LAYERS, &x->L[d], &x->err[slice]);
    }
    x->st[slice] = st;
}

/* The model ladders at point p and every oxide step of g (before the
 * gains), the steps shared out to the threads. */
static lam_status model_ladders(lam_model_point p, lam_model *model, const grid *g,
                                size_t threads, lam_prediction *L, lam_error *err)
{
    size_t slices = lam_parallel_slices(g->n, threads);
    lam_model *models[LAM_MAX_THREADS];
    lam_status st[LAM_MAX_THREADS] = {LAM_OK}, out = lam_model_clones(model, slices, models, err);
    lam_error errs[LAM_MAX_THREADS];
    memset(errs, 0, slices * sizeof *errs);
    if (out)
        return out;
    ladder_job x = {p, g, models, L, st, errs};
    lam_parallel_for(g->n, slices, ladder_steps, &x);
    out = lam_error_first(st, errs, slices, err);
    lam_model_clones_free(models, slices);
    return out;
}

/* The oxide steps of a search +-half about the oxide prior's centre, in
 * steps of 'step', within [lo, hi]. */
static void grid_span(const lam_nuisance *ox, double lo, double hi, double half, double step,
                      grid *g)
{
    g->step = step;
    g->lo = fmax(lo, ox->prior_mean - half);
    g->n = (size_t)((fmin(hi, ox->prior_mean + half) - g->lo) / step) + 1;
}

struct lam_grid_ladders {
    lam_model_point p; /* the point they were made at, its oxide aside */
    grid g;            /* their oxides (no scores) */
    lam_prediction *L; /* per oxide step */
};

/* Whether t holds the model ladders of every oxide step of g at point p:
 * the same point and the same oxides to the bit, so the same numbers. */
static int lent_ladders_fit(const lam_grid_ladders *t, lam_model_point p, const grid *g,
                            size_t *first)
{
    if (!t)
        return 0;
    p.v[LAM_MP_OXIDE] = t->p.v[LAM_MP_OXIDE];
    if (t->g.step != g->step || g->lo < t->g.lo || memcmp(&p, &t->p, sizeof p))
        return 0;
    size_t d0 = (size_t)((g->lo - t->g.lo) / t->g.step + 0.5);
    if (d0 + g->n > t->g.n)
        return 0;
    for (size_t d = 0; d < g->n; d++)
        if (t->g.lo + t->g.step * (double)(d0 + d) != g->lo + g->step * (double)d)
            return 0;
    *first = d0;
    return 1;
}

/* The ladders of every oxide step (as lam__image_ladder at each): the
 * lent ones (e->opt.ladders) where they fit, else made here; the image's
 * oxide is left at the last step, as the grid's scan always left it. */
static lam_status grid_ladders(lam_estimate *e, size_t j, lam_model *model, const grid *g,
                               size_t threads, lam_prediction *L, lam_error *err)
{
    lam_model_point p = lam_estimate_point(e, j);
    size_t first = 0;
    lam_status out = LAM_OK;
    if (lent_ladders_fit(e->opt.ladders, p, g, &first))
        memcpy(L, e->opt.ladders->L + first, g->n * sizeof *L);
    else
        out = model_ladders(p, model, g, threads, L, err);
    for (size_t d = 0; d < g->n && !out; d++)
        lam_estimate_observe(e, &L[d]);
    if (!out)
        e->image[j].oxide.value = g->lo + g->step * (double)(g->n - 1);
    return out;
}

lam_status lam_grid_ladders_make(const lam_estimate *e, size_t j, lam_model *model,
                                 double half_nm, lam_grid_ladders **out, lam_error *err)
{
    const lam_nuisance *ox = &e->image[j].oxide;
    lam_grid_ladders *t = calloc(1, sizeof *t);
    *out = NULL;
    if (!t)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the grid's ladders");
    t->p = lam_estimate_point(e, j);
    grid_span(ox, 0, INFINITY, half_nm, e->opt.search_step_nm, &t->g);
    lam_status st = (t->L = malloc(t->g.n * sizeof *t->L))
                        ? model_ladders(t->p, model, &t->g, e->opt.threads ? e->opt.threads : 1,
                                        t->L, err)
                        : lam_error_set(err, LAM_ENOMEM, "cannot allocate the grid's ladders");
    if (st)
        lam_grid_ladders_free(t);
    else
        *out = t;
    return st;
}

void lam_grid_ladders_free(lam_grid_ladders *t)
{
    if (t)
        free(t->L);
    free(t);
}

static lam_status fill_grid(lam_estimate *e, size_t j, lam_model *model, grid *g,
                            lam_error *err)
{
    lam_est_image *im = &e->image[j];
    if (im->oxide.fitted)
        grid_span(&im->oxide, im->oxide.lo, im->oxide.hi, e->opt.search_half_nm,
                  e->opt.search_step_nm, g);
    else
        g->step = e->opt.search_step_nm, g->lo = im->oxide.value, g->n = 1;
    size_t threads = e->opt.threads ? e->opt.threads : 1, cells = g->n * SCALE_STEPS;
    threads = threads < cells ? threads : cells;
    grid_job x = {e, j, im->count ? im->count : 1, e->max_layers + 3, NULL, g, NULL, NULL, NULL};
    lam_prediction *L = malloc(g->n * sizeof *L);
    x.Q = malloc(threads * sizeof *x.Q);
    x.resp = malloc(threads * x.count * x.H * sizeof *x.resp);
    x.fixed = malloc(threads * x.count * sizeof *x.fixed);
    g->score = malloc(cells * sizeof *g->score);
    g->factor = malloc(cells * LAM_MAX_CHANNELS * sizeof *g->factor);
    lam_status st = g->score && g->factor && L && x.Q && x.resp && x.fixed
                        ? LAM_OK
                        : lam_error_set(err, LAM_ENOMEM, "cannot allocate the oxide grid");
    if (!st && !(st = grid_ladders(e, j, model, g, threads, L, err))) {
        x.ladder = L;
        lam_parallel_for(cells, threads, score_cells, &x);
    }
    free(L);
    free(x.Q);
    free(x.resp);
    free(x.fixed);
    return st;
}

static int is_peak(const grid *g, size_t d, int k)
{
    double v = g->score[d * SCALE_STEPS + (size_t)k];
    for (int dd = -1; dd <= 1; dd++)
        for (int dk = -1; dk <= 1; dk++) {
            long x = (long)d + dd, y = k + dk;
            if ((!dd && !dk) || x < 0 || y < 0 || (size_t)x >= g->n || y >= SCALE_STEPS)
                continue;
            double o = g->score[(size_t)x * SCALE_STEPS + (size_t)y];
            if (o > v || (o == v && (dd < 0 || (dd == 0 && dk < 0))))
                return 0;
        }
    return 1;
}

static void cell_to(const grid *g, size_t cell, double *oxide, double *scale, double *factor)
{
    *oxide = g->lo + g->step * (double)(cell / SCALE_STEPS);
    *scale = scale_at((int)(cell % SCALE_STEPS));
    for (size_t c = 0; c < LAM_MAX_CHANNELS; c++)
        factor[c] = g->factor[cell * LAM_MAX_CHANNELS + c];
}

/* The best cell and the next three local maxima of one image's grid. */
static void pick_cells(lam_est_image *im, const grid *g)
{
    size_t top[4];
    int n = 0;
    for (size_t cell = 0; cell < g->n * SCALE_STEPS; cell++) {
        if (!is_peak(g, cell / SCALE_STEPS, (int)(cell % SCALE_STEPS)))
            continue;
        int at = n < 4 ? n++ : 4; /* insertion into the top four, best first */
        while (at > 0 && g->score[cell] > g->score[top[at - 1]]) {
            if (at < 4)
                top[at] = top[at - 1];
            at--;
        }
        if (at < 4)
            top[at] = cell;
    }
    for (int k = 0; k < 3; k++) {
        im->alt_oxide[k] = im->alt_scale[k] = im->alt_score[k] = NAN;
        for (size_t c = 0; c < LAM_MAX_CHANNELS; c++)
            im->alt_factor[k][c] = 1;
    }
    im->grid_best = n ? g->score[top[0]] : -INFINITY;
    if (n)
        cell_to(g, top[0], &im->oxide.value, &im->grid_scale, im->grid_factor);
    im->grid_oxide = im->oxide.value;
    for (int k = 1; k < n; k++) {
        cell_to(g, top[k], &im->alt_oxide[k - 1], &im->alt_scale[k - 1], im->alt_factor[k - 1]);
        im->alt_score[k - 1] = g->score[top[k]];
    }
}

static double clamp_to(double v, const lam_nuisance *n)
{
    return v < n->lo ? n->lo : (v > n->hi ? n->hi : v);
}

/* Shared starting values for scale s and channel factors f: the continuum
 * that scales the interband plateau by s, the gains that give f. */
static void start_shared(lam_estimate *e, double s, const double *f)
{
    lam_nuisance *c = &e->shared[LAM_NU_CONTINUUM];
    if (c->fitted)
        c->value = clamp_to((1 + c->prior_mean) * s - 1, c);
    for (size_t k = 0; k < e->channels; k++) {
        lam_nuisance *g = &e->shared[LAM_NU_GAIN + k];
        if (g->fitted)
            g->value = clamp_to(g->prior_mean + log(f[k]), g);
    }
}

void lam__start_at(lam_estimate *e, size_t j, int alt)
{
    lam_est_image *im = &e->image[j];
    im->oxide.value = im->alt_oxide[alt];
    start_shared(e, im->alt_scale[alt], im->alt_factor[alt]);
}

void lam__start_rescaled(lam_estimate *e, size_t j, double ratio)
{
    lam_est_image *im = &e->image[j];
    im->oxide.value = im->grid_oxide;
    start_shared(e, im->grid_scale * ratio, im->grid_factor);
}

/* Many images share one scale: the one best summed over the images (each
 * at its best cell for that scale); each image's oxide and factors are
 * then those of its best cell at that scale, the shared factors their
 * geometric mean. */
static int pooled_scale(const lam_estimate *e, const grid *g)
{
    double best = -INFINITY;
    int bk = 0;
    for (int k = 0; k < SCALE_STEPS; k++) {
        double tot = 0;
        for (size_t j = 0; j < e->images; j++) {
            double m = -INFINITY;
            for (size_t d = 0; d < g[j].n; d++)
                m = fmax(m, g[j].score[d * SCALE_STEPS + (size_t)k]);
            tot += m;
        }
        if (tot > best)
            best = tot, bk = k;
    }
    return bk;
}

static void start_pooled(lam_estimate *e, const grid *g)
{
    int k = pooled_scale(e, g);
    double logf[LAM_MAX_CHANNELS] = {0}, f[LAM_MAX_CHANNELS], s = scale_at(k);
    for (size_t j = 0; j < e->images; j++) {
        size_t bd = 0;
        for (size_t d = 1; d < g[j].n; d++)
            if (g[j].score[d * SCALE_STEPS + (size_t)k] > g[j].score[bd * SCALE_STEPS + (size_t)k])
                bd = d;
        double sc;
        cell_to(&g[j], bd * SCALE_STEPS + (size_t)k, &e->image[j].oxide.value, &sc, f);
        for (size_t c = 0; c < LAM_MAX_CHANNELS; c++)
            logf[c] += log(f[c]) / (double)e->images;
    }
    for (size_t c = 0; c < LAM_MAX_CHANNELS; c++)
        f[c] = exp(logf[c]);
    e->start_scale = s;
    start_shared(e, s, f);
}

lam_status lam__estimate_grids(lam_estimate *e, lam_model *model, lam_error *err)
{
    grid *g = calloc(e->images ? e->images : 1, sizeof *g);
    lam_status st = g ? LAM_OK : lam_error_set(err, LAM_ENOMEM, "cannot allocate the grid");
    for (size_t j = 0; j < e->images && !st; j++)
        if (!(st = fill_grid(e, j, model, &g[j], err)))
            pick_cells(&e->image[j], &g[j]);
    if (!st && e->images == 1) {
        e->start_scale = e->image[0].grid_scale;
        start_shared(e, e->image[0].grid_scale, e->image[0].grid_factor);
    } else if (!st) {
        start_pooled(e, g);
    }
    for (size_t j = 0; g && j < e->images; j++) {
        free(g[j].score);
        free(g[j].factor);
    }
    free(g);
    return st;
}
