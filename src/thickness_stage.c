/* thickness_stage.c - the analysis stage for continuous-thickness crystals
 * (lamina/thickness.h): the image's oxide from its regions, then every
 * region's thickness posterior and its region result. */
#include "lamina/analyze.h"
#include "analyze_internal.h"
#include "lamina/parallel.h"
#include "lamina/thickness.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* The oxide profile: a coarse grid (4 nm over nominal +- 3 prior sd, at
 * most 40 nm), then 1 nm steps about the best; the thickness grid of the
 * profile is coarse (1.5 % steps), its model too (10 nm spectral steps, 4
 * cone nodes). */
#define COARSE_STEP_NM 4.0
#define FINE_STEP_NM 1.0
#define PROFILE_MAX_HALF_NM 40.0
#define COARSE_MAX_POINTS 21 /* 2 x 40 / 4 + 1 */
#define PROFILE_STEP_REL 0.015
#define OXIDE_SYSTEMATIC 0.015

/* The point the films are evaluated at: the setup's optics (the prior
 * centres of the estimate; the graphene-style fit that ran before knows
 * nothing of films of this thickness range). */
static lam_model_point prior_point(const lam_estimate *e)
{
    lam_model_point p = lam_estimate_point(e, 0);
    p.v[LAM_MP_NA] = e->shared[LAM_NU_NA].prior_mean;
    for (size_t c = 0; c < LAM_MAX_CHANNELS; c++) {
        p.v[LAM_MP_SHIFT + c] = e->shared[LAM_NU_SHIFT + c].prior_mean;
        p.v[LAM_MP_WIDTH + c] = e->shared[LAM_NU_WIDTH + c].prior_mean;
    }
    p.v[LAM_MP_OXIDE] = e->image[0].oxide.prior_mean;
    return p;
}

typedef struct profile_ctx {
    const lam_analysis *a;
    size_t threads;
    lam_model *coarse[LAM_MAX_THREADS]; /* the profile's model, one per worker */
    size_t workers;
    lam_model_point p;
    double scale_mean, scale_sd;     /* the index scale's prior */
    lam_thickness_noise nz;
    size_t used; /* regions that may inform the fit */
    double sd_shift[LAM_MAX_CHANNELS], sd_width[LAM_MAX_CHANNELS], sd_na; /* optics' priors */
    lam_thickness_table *optics_ref; /* the profile's first table, with the optics' variance */
    double prior_sd; /* the oxide prior's sd the profile's scores take: the estimate's, or the
                      * wide search's once a rival order is taken (coarse_scan) */
    double rival_nm; /* a rival order nearly as good and not taken (NAN: none) */
    double best_evidence; /* the regions' log evidence at the fine scan's best point */
} profile_ctx;

/* The optics' variance of a table at the context's point and prior scale. */
static lam_status add_optics(profile_ctx *x, lam_thickness_table *t, lam_model *m, double ox,
                             size_t threads, lam_error *err)
{
    lam_model_point p = x->p;
    p.v[LAM_MP_OXIDE] = ox;
    return lam_thickness_table_add_optics(t, m, &p, x->scale_mean, x->sd_shift, x->sd_width,
                                          x->sd_na, threads, err);
}

/* sum[f]: the log evidence of the regions that may inform the fit at each
 * index scale of the table (at most 255 scales). */
static lam_status image_scale_evidence(profile_ctx *x, const lam_thickness_table *t, double *sum,
                                       lam_error *err)
{
    size_t nf = lam_thickness_scales(t);
    double e[256];
    if (nf > 255)
        return lam_error_set(err, LAM_EINVAL, "too many index scales (%zu)", nf);
    for (size_t f = 0; f < nf; f++)
        sum[f] = 0;
    for (size_t i = 0; i < x->a->count; i++)
        if (x->a->measured[i].use) {
            lam_thickness_log_evidence_scales(t, &x->nz, &x->a->measured[i], e);
            for (size_t f = 0; f < nf; f++)
                sum[f] += e[f];
        }
    return LAM_OK;
}

/* One point of the profile: the log evidence of the regions that may
 * inform the fit at one oxide, with the image's index scale integrated (one
 * crystal per image), and that plus the oxide's log prior (sd prior_sd). */
typedef struct profile_point {
    double score, evidence;
} profile_point;

/* The profile's table at oxide ox, made with 'model' (the caller's
 * worker's), with the optics' variance of the profile's first table: the
 * first one made becomes that reference (x->optics_ref, freed with the
 * profile, not by the caller). */
static lam_status profile_table(profile_ctx *x, lam_model *model, double ox,
                                lam_thickness_table **out, lam_error *err)
{
    lam_thickness_options o = lam_thickness_options_default();
    o.step_rel = PROFILE_STEP_REL;
    o.scale_nodes = 3;
    o.scale_fine = 9;
    double w = 1;
    lam_thickness_table *t = NULL;
    lam_status st = lam_thickness_table_build(model, &x->p, &ox, &w, 1, x->scale_mean,
                                              x->scale_sd, &o, &t, err);
    if (!st && !x->optics_ref) {
        /* the first table's optics' variance serves every oxide of the
         * profile (its derivatives vary slowly with the oxide), and the
         * table serves its own oxide: it is kept, not built again */
        if (!(st = add_optics(x, t, model, ox, 1, err)))
            x->optics_ref = t;
    } else if (!st) {
        st = lam_thickness_table_copy_optics(t, x->optics_ref, err);
    }
    if (st && t != x->optics_ref)
        lam_thickness_table_free(t);
    *out = st ? NULL : t;
    return st;
}

/* The profile at oxide ox, the table made with 'model'. */
static lam_status profile_at(profile_ctx *x, lam_model *model, double ox, double prior_sd,
                             profile_point *out, lam_error *err)
{
    lam_thickness_table *t = NULL;
    lam_status st = profile_table(x, model, ox, &t, err);
    if (st)
        return st;
    const lam_nuisance *po = &x->a->estimate->image[0].oxide;
    double zo = (ox - po->prior_mean) / prior_sd, s = -0.5 * zo * zo;
    double sum[256];
    st = image_scale_evidence(x, t, sum, err);
    if (!st) {
        /* one index scale for the image: its prior times every region's vote */
        double m = -INFINITY, z = 0;
        for (size_t f = 0; f < lam_thickness_scales(t); f++)
            m = fmax(m, sum[f] += lam_thickness_scale_logw(t, f));
        for (size_t f = 0; f < lam_thickness_scales(t); f++)
            z += exp(sum[f] - m);
        out->score = s + m + log(z);
        out->evidence = m + log(z);
    }
    if (t != x->optics_ref) /* the reference is freed with the profile */
        lam_thickness_table_free(t);
    return st;
}

/* The profile at n oxides, pt[i] at ox[i] with prior sd sd[i]. The oxides
 * are independent but for the first table's optics' variance
 * (profile_at), so the first is made on this thread and the rest are
 * handed out to the workers, each with its own model: the same points as
 * one after the other. Returns the first error in the order of ox. */
typedef struct profile_job {
    profile_ctx *x;
    const double *ox, *sd;
    profile_point *pt;
    lam_status *st;
    lam_error *err;
} profile_job;

static void profile_item(size_t i, size_t worker, void *vjob)
{
    const profile_job *j = vjob;
    j->st[i] = profile_at(j->x, j->x->coarse[worker], j->ox[i], j->sd[i], &j->pt[i], &j->err[i]);
}

static lam_status profile_many(profile_ctx *x, const double *ox, const double *sd, size_t n,
                               profile_point *pt, lam_error *err)
{
    size_t first = n && !x->optics_ref;
    lam_status st = first ? profile_at(x, x->coarse[0], ox[0], sd[0], &pt[0], err) : LAM_OK;
    if (st || n == first)
        return st;
    lam_status *sts = malloc((n - first) * sizeof *sts);
    lam_error *errs = malloc((n - first) * sizeof *errs);
    if (!sts || !errs) {
        free(sts);
        free(errs);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the oxide profile");
    }
    profile_job job = {x, ox + first, sd + first, pt + first, sts, errs};
    lam_parallel_each_worker(n - first, x->workers, profile_item, &job);
    st = lam_error_first(sts, errs, n - first, err);
    free(sts);
    free(errs);
    return st;
}

/* The coarse grid over the oxide: the best point (the first of equals).
 * About the prior's centre and about the oxides the layer ladder's fit
 * before this stage found where they lie beyond that grid's reach: its
 * wide search finds a chip at another interference order (a 200 nm chip
 * under a 285 nm setup: the estimate it leaves has the wide prior), and it
 * names a rival order that fits nearly as well (a 90 nm chip under a 285
 * nm setup); +-40 nm about the nominal reaches neither. The first two are
 * scored with the estimate's prior. The rival is weighed as the wide search
 * weighs its fit: with the wide prior, taken when the regions' evidence
 * beats the other windows' best by LAM__WIDE_MARGIN, and named (x->rival_nm)
 * when it comes within that margin. */
enum { WINDOW_NOMINAL, WINDOW_FITTED, WINDOW_RIVAL };

static size_t scan_centres(const profile_ctx *x, int half, double *centre, int *kind)
{
    const lam_nuisance *po = &x->a->estimate->image[0].oxide;
    double cand[3] = {po->prior_mean, po->value, x->a->oxide.rival_nm};
    size_t n = 0;
    for (int c = WINDOW_NOMINAL; c <= WINDOW_RIVAL; c++) {
        int near = !isfinite(cand[c]);
        for (size_t k = 0; k < n && !near; k++)
            near = fabs(cand[c] - centre[k]) <= COARSE_STEP_NM * half;
        if (!near)
            kind[n] = c, centre[n++] = cand[c];
    }
    return n;
}

/* A far oxide d weighed with the wide prior (its regions' log evidence
 * 'evidence'): taken as the chip's (*ox; the wide prior from then on) when
 * it beats the profile's best ('best_evidence') by LAM__WIDE_MARGIN, named
 * as the rival (x->rival_nm) when it comes within that. 1: taken. */
static int weigh_far(profile_ctx *x, double d, double evidence, double best_evidence,
                     double *ox)
{
    double gap = evidence - best_evidence;
    if (gap > LAM__WIDE_MARGIN) {
        *ox = d;
        x->prior_sd = LAM__WIDE_PRIOR_SD_NM;
        x->rival_nm = NAN;
        return 1;
    }
    if (gap > -LAM__WIDE_MARGIN && !isfinite(x->rival_nm))
        x->rival_nm = d;
    return 0;
}

/* The best point of the nominal and fitted windows, and of the rival's, by
 * score: best[0] and best[1] (indices into d; SIZE_MAX: none). */
static void window_bests(const profile_point *pt, const int *win, size_t n, size_t best[2])
{
    double top[2] = {-INFINITY, -INFINITY};
    best[0] = best[1] = SIZE_MAX;
    for (size_t i = 0; i < n; i++) {
        int k = win[i] == WINDOW_RIVAL;
        if (pt[i].score > top[k])
            top[k] = pt[i].score, best[k] = i;
    }
}

static lam_status coarse_scan(profile_ctx *x, double *ox, lam_error *err)
{
    const lam_nuisance *po = &x->a->estimate->image[0].oxide;
    int half = (int)ceil(fmin(3 * po->prior_sd, PROFILE_MAX_HALF_NM) / COARSE_STEP_NM);
    half = half < COARSE_MAX_POINTS / 2 ? half : COARSE_MAX_POINTS / 2;
    enum { MAX = 3 * COARSE_MAX_POINTS };
    double centre[3], d[MAX], sd[MAX];
    int kind[3], win[MAX];
    profile_point pt[MAX];
    size_t centres = scan_centres(x, half, centre, kind), n = 0, best[2];
    for (size_t c = 0; c < centres; c++)
        for (int k = -half; k <= half; k++)
            if (centre[c] + COARSE_STEP_NM * k >= 0) {
                win[n] = kind[c], d[n] = centre[c] + COARSE_STEP_NM * k;
                sd[n++] = kind[c] == WINDOW_RIVAL ? LAM__WIDE_PRIOR_SD_NM : x->prior_sd;
            }
    *ox = po->prior_mean;
    lam_status st = profile_many(x, d, sd, n, pt, err);
    if (st)
        return st;
    window_bests(pt, win, n, best);
    if (best[0] != SIZE_MAX)
        *ox = d[best[0]];
    if (best[1] != SIZE_MAX)
        weigh_far(x, d[best[1]], pt[best[1]].evidence,
                  best[0] == SIZE_MAX ? -INFINITY : pt[best[0]].evidence, ox);
    return LAM_OK;
}

/* 1 nm steps about the coarse best: the best refined by a
 * parabola, the sd from the curvature (the prior when the profile is flat
 * or the best lies at the edge). */
static lam_status fine_scan(profile_ctx *x, double *ox, double *sd, lam_error *err)
{
    enum { HALF = 4, N = 2 * HALF + 1 };
    double score[N], centre = *ox, d[N];
    int kbest = 0, at[N];
    size_t n = 0;
    for (int i = 0; i < N; i++) { /* compared below before the centre's own is known */
        score[i] = -INFINITY;
        if (centre + FINE_STEP_NM * (i - HALF) >= 0)
            at[n] = i, d[n++] = centre + FINE_STEP_NM * (i - HALF);
    }
    double sds[N];
    profile_point got[N];
    for (int i = 0; i < N; i++)
        sds[i] = x->prior_sd;
    lam_status st = profile_many(x, d, sds, n, got, err);
    for (size_t i = 0; i < n && !st; i++) { /* in the order of k, as one after the other */
        int k = at[i] - HALF;
        score[at[i]] = got[i].score;
        if (score[k + HALF] > score[kbest + HALF])
            kbest = k;
    }
    x->best_evidence = -INFINITY; /* the regions' evidence at the best point */
    for (size_t i = 0; i < n && !st; i++)
        if (at[i] == kbest + HALF)
            x->best_evidence = got[i].evidence;
    *sd = x->prior_sd;
    *ox = centre + FINE_STEP_NM * kbest;
    if (st || kbest == -HALF || kbest == HALF)
        return st;
    double a = score[kbest + HALF - 1], b = score[kbest + HALF], c = score[kbest + HALF + 1];
    double curv = (a - 2 * b + c) / (FINE_STEP_NM * FINE_STEP_NM);
    if (curv < 0 && isfinite(curv)) {
        double step = 0.5 * (a - c) / (a - 2 * b + c);
        *ox += FINE_STEP_NM * fmax(-0.5, fmin(0.5, step));
        *sd = 1 / sqrt(-curv);
    }
    /* shared systematics the profile cannot see: SiO2 index models differ
     * by ~1.3 % in optical thickness (Malitson 1965 vs the Gao 2013 film),
     * the pupil's filling moves the phase by ~1 % */
    *sd = hypot(*sd, OXIDE_SYSTEMATIC * *ox);
    return LAM_OK;
}

/* ---- the profile's own wide search ----
 * The layer ladder's search does not always name the chip's order (a 90
 * nm chip under a 285 nm setup, Lee's index: no rival, read 278 nm with
 * 29 % of the flakes' area unmodelled). When that share at the profile's
 * best exceeds WIDE_DOUBT_SHARE (the layer fit's own doubt, analyze_oxide.c),
 * the profile looks over the wide search's range itself, in WIDE_STEP_NM
 * steps with the wide prior, and takes or names what it finds as it does
 * the ladder's rival (coarse_scan). */
#define WIDE_DOUBT_SHARE 0.25
#define WIDE_STEP_NM 8.0
#define WIDE_MAX_POINTS 51 /* 2 x 200 / 8 + 1 */

/* The share of the informing regions' area whose posterior under the
 * profile's table at ox is "unmodelled". */
static lam_status unmodelled_share(profile_ctx *x, double ox, double *share, lam_error *err)
{
    lam_thickness_table *t = NULL;
    lam_status st = profile_table(x, x->coarse[0], ox, &t, err);
    if (st)
        return st;
    const lam_analysis *a = x->a;
    lam_thickness_options o = lam_thickness_options_default();
    double all = 0, bad = 0;
    for (size_t i = 0; i < a->count; i++) {
        if (!a->measured[i].use)
            continue;
        lam_thickness_result r;
        lam_thickness_infer(t, &x->nz, &a->measured[i], &o, &r);
        all += (double)a->seg->regions[i].area;
        if (r.p_unmodelled > fmax(r.p_film, r.p_substrate))
            bad += (double)a->seg->regions[i].area;
    }
    *share = all > 0 ? bad / all : 0;
    if (t != x->optics_ref)
        lam_thickness_table_free(t);
    return LAM_OK;
}

/* The wide search, when the profile's best leaves too much unmodelled:
 * *moved when it took another oxide (*ox, to be refined). */
static lam_status wide_scan(profile_ctx *x, double *ox, int *moved, lam_error *err)
{
    const lam_nuisance *po = &x->a->estimate->image[0].oxide;
    double share = 0, d[WIDE_MAX_POINTS], sd[WIDE_MAX_POINTS];
    profile_point pt[WIDE_MAX_POINTS];
    *moved = 0;
    lam_status st = unmodelled_share(x, *ox, &share, err);
    if (st || share <= WIDE_DOUBT_SHARE)
        return st;
    size_t n = 0, best = SIZE_MAX;
    for (int k = -WIDE_MAX_POINTS / 2; k <= WIDE_MAX_POINTS / 2; k++)
        if (po->prior_mean + WIDE_STEP_NM * k >= 0) {
            sd[n] = LAM__WIDE_PRIOR_SD_NM;
            d[n++] = po->prior_mean + WIDE_STEP_NM * k;
        }
    if ((st = profile_many(x, d, sd, n, pt, err)))
        return st;
    for (size_t i = 0; i < n; i++) /* beyond the best's own basin */
        if (fabs(d[i] - *ox) > PROFILE_MAX_HALF_NM &&
            (best == SIZE_MAX || pt[i].score > pt[best].score))
            best = i;
    if (best != SIZE_MAX)
        *moved = weigh_far(x, d[best], pt[best].evidence, x->best_evidence, ox);
    return LAM_OK;
}

/* The image's oxide (estimate and sd) from its regions, or the nominal. */
static lam_status fit_oxide(lam_analysis *a, const lam_setup *s, profile_ctx *x, double *ox,
                            double *sd, lam_error *err)
{
    lam_nuisance *o = &a->estimate->image[0].oxide;
    *ox = o->prior_mean, *sd = 0;
    size_t usable = 0;
    for (size_t i = 0; i < a->count; i++)
        usable += a->measured[i].use != 0;
    a->oxide.regions_used = 0;
    if (!o->fitted || !usable || lam_setup_oxide(s) < 0) {
        a->oxide.fitted = 0;
        snprintf(a->oxide.method, sizeof a->oxide.method, "%s",
                 lam_setup_oxide(s) < 0 ? "no oxide in the stack"
                 : !o->fitted           ? "nominal (not fitted)"
                                        : "nominal (no region usable for a fit)");
        return LAM_OK;
    }
    lam_setup coarse = *s; /* a shallow copy: the model copies what it needs */
    coarse.grid_step_nm = 10;
    coarse.cone_nodes = 4;
    x->used = usable;
    x->prior_sd = o->prior_sd;
    x->rival_nm = NAN;
    x->workers = lam_parallel_slices(WIDE_MAX_POINTS, x->threads);
    lam_status st = lam_model_alloc(&coarse, 1, 0, &x->coarse[0], err);
    if (!st && !(st = lam_model_clones(x->coarse[0], x->workers, x->coarse, err))) {
        int moved = 0;
        if (!(st = coarse_scan(x, ox, err)) && !(st = fine_scan(x, ox, sd, err)) &&
            !(st = wide_scan(x, ox, &moved, err)) && moved)
            st = fine_scan(x, ox, sd, err);
        lam_model_clones_free(x->coarse, x->workers);
    }
    lam_model_free(x->coarse[0]);
    lam_thickness_table_free(x->optics_ref);
    x->optics_ref = NULL;
    if (st)
        return st;
    a->oxide.fitted = 1;
    a->oxide.regions_used = x->used;
    snprintf(a->oxide.method, sizeof a->oxide.method,
             "profile over %zu region(s), each film's thickness and the index scale integrated",
             x->used);
    return LAM_OK;
}

static void oxide_result(lam_analysis *a, double ox, double sd, double tolerance)
{
    lam_oxide_result *o = &a->oxide;
    lam_nuisance *n = &a->estimate->image[0].oxide;
    o->estimate = o->fitted ? ox : o->nominal;
    o->sigma = o->sigma_given_shared = o->fitted ? sd : NAN;
    o->pass = fabs(o->estimate - o->nominal) <= tolerance;
    n->value = o->estimate;
    n->sigma = o->sigma;
}

static void geometry(const lam_region_stats *s, const lam_infer_options *io,
                     lam_region_result *r)
{
    if (s->clipped > s->area / 100)
        r->flags |= LAM_FLAG_SATURATED;
    if (s->touches_border)
        r->flags |= LAM_FLAG_BORDER;
    if (lam_region_area(s) < io->min_area_px)
        r->flags |= LAM_FLAG_SMALL;
}

/* The region result of a thickness posterior: label "12.3 nm" (class
 * "thickness", the film drawn as "thick" in the layer map), "substrate" or
 * "unmodelled". */
static void region_result(const lam_analysis *a, size_t i, const lam_thickness_result *t,
                          lam_region_result *r)
{
    size_t K = a->max_layers, nc = a->channels;
    memset(r, 0, sizeof *r);
    r->channels = nc;
    r->p[0] = r->p_substrate = t->p_substrate;
    r->p[LAM_P_THICK(K)] = t->probability;
    r->p[LAM_P_UNMODELLED(K)] = t->p_unmodelled;
    r->chi2 = t->chi2;
    for (size_t c = 0; c < nc; c++) {
        r->mean[c] = a->measured[i].mean[c];
        r->sigma[c] = t->sigma[c];
        r->model[c] = t->model[c];
    }
    r->fermi.estimate = r->fermi.lo = r->fermi.hi = r->fermi.upper = NAN;
    geometry(&a->seg->regions[i], &a->infer, r);
    int unmodelled = t->p_unmodelled > fmax(t->p_film, t->p_substrate) ||
                     (r->flags & LAM_FLAG_SATURATED);
    if (unmodelled) {
        r->flags |= LAM_FLAG_UNMODELLED;
        snprintf(r->label, sizeof r->label, "unassigned");
        snprintf(r->cls, sizeof r->cls, "unmodelled");
        r->p_label = t->p_unmodelled;
    } else if (t->p_substrate > t->p_film) {
        r->substrate_like = 1;
        r->flags |= LAM_FLAG_AMBIGUOUS;
        snprintf(r->label, sizeof r->label, "unassigned");
        snprintf(r->cls, sizeof r->cls, "substrate");
        r->p_label = t->p_substrate;
    } else {
        r->thick = 1;
        snprintf(r->label, sizeof r->label, t->estimate < 10 ? "%.1f nm" : "%.0f nm",
                 t->estimate);
        snprintf(r->cls, sizeof r->cls, "thickness");
        r->p_label = t->probability;
        if (t->order_ambiguous)
            r->flags |= LAM_FLAG_AMBIGUOUS;
    }
}

/* Every region's posterior under a table. Regions are independent, so
 * they are handed out one at a time to the stage's threads. */
typedef struct infer_job {
    lam_analysis *a;
    const lam_thickness_table *t;
    const profile_ctx *x;
    const lam_thickness_options *opt;
} infer_job;

static void infer_region(size_t i, void *vjob)
{
    const infer_job *j = vjob;
    lam_analysis *a = j->a;
    lam_thickness_infer(j->t, &j->x->nz, &a->measured[i], j->opt, &a->thickness[i]);
    region_result(a, i, &a->thickness[i], &a->results[i]);
    lam_usable_rectangle(a->seg, &a->seg->regions[i], a->results[i].usable_px,
                         a->results[i].usable_at);
}

static void infer_regions(lam_analysis *a, const lam_thickness_table *t, const profile_ctx *x,
                          const lam_thickness_options *opt)
{
    infer_job job = {a, t, x, opt};
    lam_parallel_each(a->count, x->threads, infer_region, &job);
}

/* Join keys: regions whose thickness is settled (one order, a film, not
 * unmodelled) share a key with those whose 95 % intervals overlap the
 * interval of the thinnest of their group (sorted by estimate, no
 * chaining), so parts of one flake cut apart by JPEG or demosaicing
 * artefacts can be joined, and two flakes of different thickness cannot.
 * -1: never. */
static void join_keys(const lam_analysis *a, int *key)
{
    size_t n = a->count, m = 0;
    size_t *order = malloc((n ? n : 1) * sizeof *order);
    for (size_t i = 0; i < n; i++) {
        const lam_thickness_result *t = &a->thickness[i];
        const lam_region_result *r = &a->results[i];
        key[i] = -1;
        if (order && t->evaluated && !t->order_ambiguous && r->thick &&
            !(r->flags & (LAM_FLAG_UNMODELLED | LAM_FLAG_SATURATED)))
            order[m++] = i;
    }
    if (!order)
        return;
    /* insertion sort by estimate (a few dozen regions) */
    for (size_t i = 1; i < m; i++)
        for (size_t j = i; j > 0 && a->thickness[order[j]].estimate <
                                        a->thickness[order[j - 1]].estimate; j--) {
            size_t tmp = order[j];
            order[j] = order[j - 1], order[j - 1] = tmp;
        }
    int cluster = 0;
    const lam_thickness_result *first = m ? &a->thickness[order[0]] : NULL;
    for (size_t i = 0; i < m; i++) {
        const lam_thickness_result *q = &a->thickness[order[i]];
        if (q->lo > first->hi) { /* no chaining: every member overlaps the first */
            cluster++;
            first = q;
        }
        key[order[i]] = cluster;
    }
    free(order);
}

/* Join the parts of one flake (lam_segment_join) and measure the regions
 * again. Band pixels join within 0.02 of the region's contrast plus the
 * pixel noise, per channel. */
static lam_status join_parts(lam_analysis *a, const lam_contrast_map *contrast, size_t threads,
                             lam_error *err)
{
    size_t n = a->count, joined = 0;
    int *key = malloc((n ? n : 1) * sizeof *key);
    uint32_t *map = malloc((n ? n : 1) * sizeof *map);
    lam_status st = key && map ? LAM_OK : lam_error_set(err, LAM_ENOMEM, "cannot join regions");
    double fill[3] = {0, 0, 0};
    for (size_t c = 0; c < a->channels; c++)
        fill[c] = 0.02 + a->substrate.noise[c];
    if (!st) {
        join_keys(a, key);
        st = lam_segment_join(contrast, a->channels, key, fill, threads, a->seg,
                              map, &joined, err);
    }
    free(key);
    free(map);
    if (st)
        return st;
    lam__measure_regions(a);
    return lam_segment_edge_areas(contrast, a->channels, threads, a->seg, err);
}

/* Every region's posterior under the table at the oxide's nodes, the parts
 * of one flake joined, and the joined regions' posteriors. */
static lam_status regions(lam_analysis *a, const lam_contrast_map *contrast, lam_model *model,
                          profile_ctx *x, double ox, double sd, lam_error *err)
{
    static const double gx[3] = {-1.224744871391589, 0, 1.224744871391589};
    static const double gw[3] = {1.0 / 6, 2.0 / 3, 1.0 / 6};
    double nodes[3], w[3] = {1, 0, 0};
    size_t n = sd > 0.3 ? 3 : 1;
    for (size_t k = 0; k < n; k++) {
        nodes[k] = n == 1 ? ox : fmax(0, ox + M_SQRT2 * sd * gx[k]);
        w[k] = n == 1 ? 1 : gw[k];
    }
    lam_thickness_options opt = lam_thickness_options_default();
    opt.threads = x->threads;
    lam_thickness_table *t = NULL;
    lam_status st = lam_thickness_table_build(model, &x->p, nodes, w, n, x->scale_mean,
                                              x->scale_sd, &opt, &t, err);
    if (!st)
        st = add_optics(x, t, model, ox, x->threads, err);
    /* Each region keeps the index scale's prior (the published spread).
     * The regions' joint vote on the scale, which the oxide's profile
     * integrates, is not taken for the thickness: it absorbs misfits of
     * other parts of the model, and on make accuracy-crystals it moved the
     * scale away from the truth for images drawn with Lee's or Rah's
     * index (to 0.97-1.03 against their 0.93-0.945), whose flakes then
     * read 10-18 % thin. */
    if (!st) {
        infer_regions(a, t, x, &opt);
        if (contrast && !(st = join_parts(a, contrast, x->threads, err)))
            infer_regions(a, t, x, &opt);
    }
    lam_thickness_table_free(t);
    return st;
}

lam_status lam_thickness_analyze(lam_analysis *a, const lam_contrast_map *contrast,
                                 const lam_setup *s, lam_model *model, double oxide_tolerance_nm,
                                 size_t threads, lam_error *err)
{
    profile_ctx x;
    memset(&x, 0, sizeof x);
    x.a = a;
    x.threads = threads ? threads : 1;
    x.p = prior_point(a->estimate);
    x.nz = lam_thickness_noise_from(a->estimate, s);
    for (size_t c = 0; c < LAM_MAX_CHANNELS; c++) {
        x.sd_shift[c] = a->estimate->shared[LAM_NU_SHIFT + c].prior_sd;
        x.sd_width[c] = a->estimate->shared[LAM_NU_WIDTH + c].prior_sd;
    }
    x.sd_na = a->estimate->shared[LAM_NU_NA].prior_sd;
    free(a->thickness);
    a->thickness = calloc(a->count ? a->count : 1, sizeof *a->thickness);
    if (!a->thickness)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate thickness results");
    double ox, sd;
    lam_status st = lam_crystal_index_scale_prior(s->crystal, &x.scale_mean, &x.scale_sd, err);
    if (!st)
        st = fit_oxide(a, s, &x, &ox, &sd, err);
    if (st)
        return st;
    oxide_result(a, ox, sd, oxide_tolerance_nm);
    if (isfinite(x.rival_nm)) /* the layer ladder's fit leaves the oxide's warnings to this stage */
        lam_warnings_add(&a->warnings, "oxide-ambiguous",
                         "the films fit %.1f nm of SiO2 and nearly as well %.1f nm (about one "
                         "interference order apart, where one thickness looks like another): "
                         "the thicknesses assume %.1f nm; confirm the chip's oxide (a setup, its "
                         "colour, or a calibration)",
                         ox, x.rival_nm, ox);
    x.p.v[LAM_MP_OXIDE] = ox;
    /* the films' table: 10 nm spectral steps and 6 cone nodes (a 300 nm
     * film's fringes are 200 nm apart; thickness figures equal those of the
     * analysis' 5 nm / 8-node model on the independent renders) */
    (void)model;
    lam_setup mid = *s;
    mid.grid_step_nm = 10;
    mid.cone_nodes = 6;
    lam_model *mm = NULL;
    st = lam_model_alloc(&mid, 1, 0, &mm, err);
    if (!st)
        st = regions(a, contrast, mm, &x, ox, sd, err);
    lam_model_free(mm);
    return st;
}
