/* estimate_starts.c - the fit's multistart: the first start settled, the
 * other maxima of each image's starting grid and the doubled and halved
 * contrast scale are settled too (side by side on the fit's threads where
 * they are independent), and the best point and the best distinct rival
 * are kept (estimate_fit_internal.h). */
#include "estimate_fit_internal.h"
#include "lamina/parallel.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#define ALT_MARGIN 10.0     /* grid maxima this close to the best are refitted */
#define MAX_MULTISTART_IMAGES 4

/* A start of the multistart: another local maximum (oxide, scale) of one
 * image's grid. */
typedef struct start_point {
    int image, alt;
} start_point;

/* alt >= 0: a grid maximum; DOUBLED / HALVED: the best cell read with
 * every layer count halved / doubled (the scale twice / half as large). */
#define START_DOUBLED (-1)
#define START_HALVED (-2)

static void apply_start(lam_estimate *e, const start_point *sp)
{
    if (sp->alt == START_DOUBLED)
        lam__start_rescaled(e, (size_t)sp->image, 2.0);
    else if (sp->alt == START_HALVED)
        lam__start_rescaled(e, (size_t)sp->image, 0.5);
    else
        lam__start_at(e, (size_t)sp->image, sp->alt);
}

/* A doubled or halved scale is only worth a start when the response can
 * reach it: the continuum's range bounds the scale. */
static int scale_reachable(const lam_estimate *e, double s)
{
    const lam_nuisance *c = &e->shared[LAM_NU_CONTINUUM];
    return c->fitted && s >= 1 + c->lo && s <= 1 + c->hi;
}

static size_t list_starts(const lam_estimate *e, start_point *sp, size_t cap)
{
    size_t n = 0;
    for (size_t j = 0; j < e->images && e->images <= MAX_MULTISTART_IMAGES; j++) {
        const lam_est_image *im = &e->image[j];
        for (int k = 0; k < 3 && n < cap; k++)
            if (isfinite(im->alt_oxide[k]) && im->alt_score[k] > im->grid_best - ALT_MARGIN)
                sp[n++] = (start_point){(int)j, k};
        if (j == 0 && n < cap && scale_reachable(e, 2 * im->grid_scale))
            sp[n++] = (start_point){0, START_DOUBLED};
        if (j == 0 && n < cap && scale_reachable(e, 0.5 * im->grid_scale))
            sp[n++] = (start_point){0, START_HALVED};
    }
    return n;
}

/* A start's fit with its floor: EM, the floor from the residuals, EM again
 * when the floor moved. */
lam_status lam__fit_settle(fit_ctx *f, double *lp, lam_error *err)
{
    lam_status st = lam__fit_run_em(f, f->e->opt.max_iterations, lp, err);
    return st ? st : lam__fit_refloor(f, lp, err);
}

/* The layer-count signature of a settled point: the most responsible
 * hypothesis of every informing region. */
static void signature(const lam_estimate *e, const img_work *w, uint8_t *sig)
{
    size_t H = e->max_layers + 3, k = 0;
    for (size_t j = 0; j < e->images; j++)
        for (size_t i = 0; i < e->image[j].count; i++, k++) {
            size_t best = 0;
            for (size_t h = 1; h < H; h++)
                if (w[j].resp[i * H + h] > w[j].resp[i * H + best])
                    best = h;
            sig[k] = e->image[j].regions[i].use ? (uint8_t)best : 255;
        }
}

/* Two points are different modes when a fifth of the informing regions
 * (at least one) changes its layer count between them. */
static int distinct(const uint8_t *a, const uint8_t *b, size_t n)
{
    size_t used = 0, changed = 0;
    for (size_t k = 0; k < n; k++)
        if (a[k] != 255) {
            used++;
            changed += a[k] != b[k];
        }
    return changed >= 1 && changed * 5 >= used;
}


/* Keep a settled point (its layer-count signature, parameters and log
 * posterior) if it beats the best, or is the best distinct rival so far. */
static void keep(mode_set *m, const uint8_t *sig, const saved_point *pt, double lp,
                 size_t images)
{
    if (lp > m->best_lp + 1e-6) {
        if (distinct(sig, m->sig_best, m->regions)) { /* the old best becomes the rival */
            m->rival_lp = m->best_lp;
            lam__fit_copy_point(&m->rival, &m->best, images);
            memcpy(m->sig_rival, m->sig_best, m->regions);
        }
        m->best_lp = lp;
        lam__fit_copy_point(&m->best, pt, images);
        memcpy(m->sig_best, sig, m->regions);
    } else if (lp > m->rival_lp && distinct(sig, m->sig_best, m->regions)) {
        m->rival_lp = lp;
        lam__fit_copy_point(&m->rival, pt, images);
        memcpy(m->sig_rival, sig, m->regions);
    }
}

/* The same for the fit's current point. */
static void consider(fit_ctx *f, mode_set *m, double lp)
{
    signature(f->e, f->w, m->sig_now);
    lam__fit_save_point(f->e, &m->now);
    keep(m, m->sig_now, &m->now, lp, f->e->images);
}

static size_t total_regions(const lam_estimate *e)
{
    size_t n = 0;
    for (size_t j = 0; j < e->images; j++)
        n += e->image[j].count;
    return n;
}

int lam__mode_set_init(mode_set *m, const lam_estimate *e)
{
    size_t k = e->images ? e->images : 1, r = total_regions(e) ? total_regions(e) : 1;
    memset(m, 0, sizeof *m);
    m->regions = total_regions(e);
    m->best.oxide = malloc(k * sizeof(double));
    m->rival.oxide = malloc(k * sizeof(double));
    m->first.oxide = malloc(k * sizeof(double));
    m->now.oxide = malloc(k * sizeof(double));
    m->sig_best = malloc(r), m->sig_rival = malloc(r), m->sig_now = malloc(r);
    m->rival_lp = -INFINITY;
    return m->best.oxide && m->rival.oxide && m->first.oxide && m->now.oxide && m->sig_best &&
           m->sig_rival && m->sig_now;
}

void lam__mode_set_free(mode_set *m)
{
    free(m->best.oxide);
    free(m->rival.oxide);
    free(m->first.oxide);
    free(m->now.oxide);
    free(m->sig_best);
    free(m->sig_rival);
    free(m->sig_now);
}

/* A rescaled start read the other way: from the parameters alone, EM's
 * first responsibilities put the regions on "unmodelled" and the step goes
 * to the priors' centre, never reaching the other reading. When the
 * camera's curves are not given (where N and 2N readings compete: an
 * unknown dye camera near 300 nm), every
 * informing region whose count h in the best reading maps to a whole count
 * h / ratio (ratio 2: halved counts, the contrast scale doubled; 0.5:
 * doubled counts) carries that count as a label while the fit settles;
 * then the labels are released and the fit settles again. Labels a region
 * already has (calibration) stay. */
static lam_status settle_seeded(fit_ctx *f, const uint8_t *sig, double ratio, double *lp,
                                lam_error *err)
{
    lam_estimate *e = f->e;
    size_t K = e->max_layers, k = 0, seeded = 0;
    int *saved = malloc((total_regions(e) ? total_regions(e) : 1) * sizeof *saved);
    if (!saved)
        return lam_error_set(err, LAM_ENOMEM, "cannot seed a start");
    for (size_t j = 0; j < e->images; j++)
        for (size_t i = 0; i < e->image[j].count; i++, k++) {
            lam_est_region *r = &e->image[j].regions[i];
            double q = sig[k] == 255 ? 0 : (double)sig[k] / ratio;
            saved[k] = r->known_layers;
            if (saved[k] <= 0 && sig[k] >= 1 && sig[k] <= K && q >= 1 && q <= (double)K &&
                q == floor(q)) {
                r->known_layers = (int)q;
                seeded++;
            }
        }
    /* with labels the log posterior is not the start's: nothing is given
     * up before they are released */
    double give_up = f->give_up_below;
    f->give_up_below = -INFINITY;
    lam_status st = seeded ? lam__fit_settle(f, lp, err) : LAM_OK;
    f->give_up_below = give_up;
    k = 0;
    for (size_t j = 0; j < e->images; j++)
        for (size_t i = 0; i < e->image[j].count; i++, k++)
            e->image[j].regions[i].known_layers = saved[k];
    free(saved);
    return st ? st : lam__fit_settle(f, lp, err);
}

/* A start from the fit's first point: the shared parameters back at the
 * priors' centre (a fresh start, as the first), the start's oxide and
 * scale. */
static void begin_start(lam_estimate *e, const saved_point *first, const start_point *sp)
{
    lam__fit_restore_point(e, first);
    for (int k = 0; k < LAM_NU_COUNT; k++)
        e->shared[k].value = e->shared[k].prior_mean;
    apply_start(e, sp);
}

/* Where a start is given up (LAM_HOPELESS_AFTER): LAM_RIVAL_MARGIN below
 * the best so far (during the side-by-side settling, the first start's,
 * the same for every slice and any thread count). */
static double give_up_below(const lam_estimate *e, const mode_set *m)
{
    return e->opt.give_up_starts ? m->best_lp - LAM_RIVAL_MARGIN : -INFINITY;
}

/* A start whose settling reads the best reading so far (settle_seeded):
 * its result holds only if the best reading is still the one it read when
 * its turn comes in the list's order. */
static int start_seeded(const lam_estimate *e, const start_point *sp)
{
    return sp->alt < 0 && lam__curves_unknown(e);
}

/* The count ratio a seeded start reads the best reading with. */
static double seed_ratio(const start_point *sp)
{
    return sp->alt == START_DOUBLED ? 2.0 : 0.5;
}

/* Start sp on g, from the fit's first point: settled (a seeded start
 * with the reading 'seed'), given up where hopeless against m's best. */
static lam_status settle_start(fit_ctx *g, const mode_set *m, const uint8_t *seed,
                               const start_point *sp, double *lp, lam_error *err)
{
    begin_start(g->e, &m->first, sp);
    g->give_up_below = give_up_below(g->e, m);
    lam_status st = start_seeded(g->e, sp) ? settle_seeded(g, seed, seed_ratio(sp), lp, err)
                                            : lam__fit_settle(g, lp, err);
    g->give_up_below = -INFINITY;
    return st;
}

/* What a start settled to. */
typedef struct start_result {
    saved_point pt;
    uint8_t *sig;
    double lp;
    size_t iterations;
    lam_status st;
    lam_error err;
} start_result;

/* The starts, in slices on the fit's threads: slice 0 on the fit itself,
 * every other slice on a copy of the estimate and of the model (the model
 * keeps caches), made before the threads start. A start's result depends
 * only on its start point and, for a seeded start, on the best reading it
 * is given (the first start's, 'seed'), so it is the same on any slice and
 * for any thread count. */
typedef struct worker {
    fit_ctx g;
    lam_estimate *copy;
    lam_model *model;
} worker;

typedef struct starts_job {
    fit_ctx *f;
    worker *crew;        /* slices 1.. */
    const mode_set *m;
    const start_point *sp;
    const uint8_t *seed; /* the first start's reading, for the seeded starts */
    start_result *res;
} starts_job;

static void settle_one(fit_ctx *g, const starts_job *job, size_t k)
{
    start_result *r = &job->res[k];
    size_t before = g->e->iterations;
    r->st = settle_start(g, job->m, job->seed, &job->sp[k], &r->lp, &r->err);
    r->iterations = g->e->iterations - before;
    g->e->iterations = before; /* added to the fit's count in the list's order */
    if (!r->st) {
        signature(g->e, g->w, r->sig);
        lam__fit_save_point(g->e, &r->pt);
    }
}

/* Start k on a worker's copy (worker 0: the fit itself). The starts are
 * handed out one at a time: they take from one to dozens of steps, and
 * fixed halves left a core idle. */
static void settle_item(size_t k, size_t who, void *vjob)
{
    const starts_job *job = vjob;
    settle_one(who ? &job->crew[who - 1].g : job->f, job, k);
}

static void crew_free(worker *crew, size_t n)
{
    for (size_t i = 0; crew && i < n; i++) {
        lam__fit_free_ctx(&crew[i].g);
        lam_model_free(crew[i].model);
        lam_estimate_free(crew[i].copy);
    }
    free(crew);
}

/* Copies of the estimate and the model for slices 1..threads-1. */
static lam_status crew_alloc(const fit_ctx *f, size_t threads, worker **out, lam_error *err)
{
    size_t n = threads > 1 ? threads - 1 : 0;
    worker *crew = calloc(n ? n : 1, sizeof *crew);
    lam_status st = crew ? LAM_OK : lam_error_set(err, LAM_ENOMEM, "cannot allocate the multistart");
    for (size_t i = 0; i < n && !st; i++) {
        worker *w = &crew[i];
        if (!(w->copy = lam__estimate_clone(f->e)))
            st = lam_error_set(err, LAM_ENOMEM, "cannot copy the estimate");
        else if (!(st = lam_model_clone(f->model, &w->model, err)))
            st = lam__fit_init_ctx(&w->g, w->copy, w->model, err);
    }
    if (st) {
        crew_free(crew, n);
        crew = NULL;
    }
    *out = crew;
    return st;
}

static void free_results(start_result *res, size_t n)
{
    for (size_t k = 0; res && k < n; k++) {
        free(res[k].pt.oxide);
        free(res[k].sig);
    }
    free(res);
}

static start_result *alloc_results(const lam_estimate *e, size_t n, size_t regions)
{
    start_result *res = calloc(n ? n : 1, sizeof *res);
    int ok = res != NULL;
    for (size_t k = 0; ok && k < n; k++)
        ok = (res[k].pt.oxide = malloc((e->images ? e->images : 1) * sizeof(double))) &&
             (res[k].sig = malloc(regions ? regions : 1));
    if (!ok) {
        free_results(res, n);
        return NULL;
    }
    return res;
}

/* The other starts (grid maxima, the doubled and halved scale), each
 * settled and kept in the order of the list. They settle side by side, a
 * seeded start with the first start's reading; when a start before it in
 * the list has changed the best reading by its turn, it settles again, in
 * turn, with that one (rare: the first start is the grid's best cell). */
lam_status lam__multistart(fit_ctx *f, double *logpost, mode_set *m, lam_error *err)
{
    lam_estimate *e = f->e;
    start_point sp[16];
    size_t n = list_starts(e, sp, 16);
    lam__fit_save_point(e, &m->best);
    lam__fit_save_point(e, &m->first);
    signature(e, f->w, m->sig_best);
    m->best_lp = *logpost;
    uint8_t *seed = malloc(m->regions ? m->regions : 1);
    start_result *res = alloc_results(e, n, m->regions);
    lam_status st = seed && res ? LAM_OK
                                : lam_error_set(err, LAM_ENOMEM, "cannot allocate the multistart");
    size_t threads = lam_parallel_slices(n, e->opt.threads);
    worker *crew = NULL;
    if (!st && !(st = crew_alloc(f, threads, &crew, err))) {
        memcpy(seed, m->sig_best, m->regions);
        starts_job job = {f, crew, m, sp, seed, res};
        lam_parallel_each_worker(n, threads, settle_item, &job);
        crew_free(crew, threads - 1);
    }
    for (size_t i = 0; i < n && !st; i++) {
        start_result *r = &res[i];
        if (start_seeded(e, &sp[i]) && memcmp(seed, m->sig_best, m->regions)) {
            double lp;
            if (!(st = settle_start(f, m, m->sig_best, &sp[i], &lp, err)))
                consider(f, m, lp);
            continue;
        }
        e->iterations += r->iterations;
        if ((st = r->st))
            *err = r->err;
        else
            keep(m, r->sig, &r->pt, r->lp, e->images);
    }
    free_results(res, n);
    free(seed);
    if (!st) {
        lam__fit_restore_point(e, &m->best);
        st = lam__fit_objective(e, f->model, f->w, logpost, err);
    }
    return st;
}
