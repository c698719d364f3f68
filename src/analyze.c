/* analyze.c - the analysis pipeline for one image, stage by stage. */
#include "lamina/analyze.h"
#include "lamina/clock.h"
#include "lamina/nksource.h"
#include "lamina/parallel.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

lam_analysis_options lam_analysis_options_default(void)
{
    lam_analysis_options o;
    memset(&o, 0, sizeof o);
    o.load = lam_load_options_default();
    o.substrate = lam_substrate_options_default();
    o.segment = lam_segment_options_default();
    o.infer = lam_infer_options_default();
    o.estimate = lam_estimate_options_default();
    o.max_layers = 6;
    o.min_area_um2 = 4;
    o.min_area_px = 200;
    o.oxide_tolerance_nm = 10;
    o.fit_oxide = 1;
    o.fit_fermi = 1;
    o.threads = lam_cpu_count();
    return o;
}

void lam_analysis_free(lam_analysis *a)
{
    if (!a)
        return;
    lam_segmentation_free(a->seg);
    free(a->results);
    free(a->thickness);
    free(a->measured);
    free(a->display);
    lam_estimate_free(a->estimate);
    free(a);
}

/* ---- the display copy (8-bit sRGB, for the annotated image) ---- */

typedef struct display_ctx {
    const lam_image *img;
    uint8_t *out;
    uint8_t lut[4097];
} display_ctx;

static void display_rows(size_t begin, size_t end, size_t slice, void *vctx)
{
    (void)slice;
    const display_ctx *d = vctx;
    size_t w = d->img->width;
    for (size_t k = begin * w; k < end * w; k++)
        for (int c = 0; c < 3; c++) {
            float v = d->img->plane[c][k];
            int q = v <= 0 ? 0 : (v >= 1 ? 4096 : (int)(v * 4096.0f + 0.5f));
            d->out[k * 3 + (size_t)c] = d->lut[q];
        }
}

static uint8_t *display_copy(const lam_image *img, size_t threads)
{
    display_ctx *d = malloc(sizeof *d);
    uint8_t *out = malloc(img->width * img->height * 3);
    if (!d || !out) {
        free(d);
        free(out);
        return NULL;
    }
    lam_transfer t = {LAM_TRANSFER_SRGB, 0};
    for (int i = 0; i <= 4096; i++)
        d->lut[i] = (uint8_t)lround(255.0 * lam_transfer_encode(&t, i / 4096.0));
    d->img = img;
    d->out = out;
    lam_parallel_for(img->height, threads, display_rows, d);
    free(d);
    return out;
}

/* ---- shared priors ---- */

void lam_shared_prior_from(const lam_estimate *e, lam_shared_prior *p)
{
    memset(p, 0, sizeof *p);
    p->set = 1;
    for (int k = 0; k < LAM_NU_COUNT; k++) {
        const lam_nuisance *n = &e->shared[k];
        p->mean[k] = n->value;
        p->sd[k] = n->fitted && isfinite(n->sigma) ? n->sigma : (n->fitted ? n->prior_sd : 0);
    }
    p->floor_rel = e->floor_rel;
    p->images = e->images;
    for (size_t j = 0; j < e->images; j++)
        p->regions += e->image[j].regions_used;
}

void lam_shared_prior_apply(const lam_shared_prior *p, lam_estimate *e)
{
    if (!p || !p->set)
        return;
    for (int k = 0; k < LAM_NU_COUNT; k++)
        if (e->shared[k].fitted || p->sd[k] > 0)
            lam_estimate_set_prior(e, k, p->mean[k], p->sd[k], "pooled");
    if (p->floor_rel > 0)
        e->floor_rel = e->floor_rel_prior = p->floor_rel;
}

/* ---- stages ---- */

typedef struct run {
    lam_analysis *a;
    const lam_setup *setup;
    const lam_analysis_options *opt;
    lam_image *img;
    lam_model *model;        /* coarse, 40 layers: fits, ladders, posteriors */
    size_t threads;
    double t0;
} run;

#define MARK(r, k) ((r)->a->seconds[k] = lam_clock_seconds() - (r)->t0)

static const char *camera_name(lam_camera_kind k)
{
    return k == LAM_CAMERA_GAUSSIAN        ? "gaussian"
           : k == LAM_CAMERA_SRGB_OBSERVER ? "srgb-observer"
           : k == LAM_CAMERA_TABLE         ? "table"
                                           : "monochromatic";
}

static lam_status load_stage(run *r, const char *path, lam_error *err)
{
    lam_analysis *a = r->a;
    lam_load_options lo = r->opt->load;
    if (lo.transfer.kind == LAM_TRANSFER_AUTO && !lam_setup_is_default(r->setup, "encoding"))
        lo.transfer = r->setup->encoding;
    lo.keep_display8 = 1; /* 8-bit files: the report draws on the file's own codes */
    lam_status st = lam_image_load(path, &lo, &r->img, err);
    if (st)
        return st;
    MARK(r, LAM_T_LOAD);
    lam_image *img = r->img;
    a->width = img->width;
    a->height = img->height;
    a->transfer = img->transfer;
    a->bit_depth = img->bit_depth;
    a->clipped_pixels = img->clipped_count;
    a->display = img->display8; /* taken over, or NULL for 16-bit files */
    img->display8 = NULL;
    if (!a->display && !(a->display = display_copy(img, r->threads)))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the display copy");
    MARK(r, LAM_T_DISPLAY);
    return LAM_OK;
}

static void describe_setup(lam_analysis *a, const lam_setup *s)
{
    a->channels = s->camera.channels;
    a->um_per_px = s->um_per_px;
    a->illumination_na = s->illumination_na;
    a->fermi_ev = fabs(s->sheet.fermi_ev);
    a->pupil = s->pupil == LAM_PUPIL_SIN ? "sin" : "sin-cos";
    a->camera = camera_name(s->camera.kind);
    lam_setup_describe_flake(s, a->conductivity, sizeof a->conductivity);
    a->defaulted_count = s->defaulted_count;
    memcpy(a->defaulted, s->defaulted, sizeof a->defaulted);
}

static lam_status model_stage(run *r, lam_error *err)
{
    lam_analysis *a = r->a;
    const lam_analysis_options *opt = r->opt;
    if (opt->max_layers < 1 || opt->max_layers > 20)
        return lam_error_set(err, LAM_ERANGE, "--max-layers must be 1 to 20");
    a->max_layers = opt->max_layers;
    lam_estimate_options eo = opt->estimate;
    eo.max_layers = opt->max_layers;
    lam_status st = lam_model_alloc_fast(r->setup, LAM_MODEL_MAX_LAYERS, &r->model, err);
    if (!st)
        st = lam_estimate_alloc(r->setup, lam_model_channels(r->model), &eo, &a->estimate, err);
    if (st)
        return st;
    lam_shared_prior_apply(opt->shared_prior, a->estimate);
    a->prior_pooled = opt->shared_prior && opt->shared_prior->set;
    a->prior_images = a->prior_pooled ? opt->shared_prior->images : 0;
    a->oxide.nominal = lam_setup_oxide(r->setup);
    a->oxide.estimate = a->oxide.nominal;
    double nominal = a->oxide.nominal >= 0 ? a->oxide.nominal : 0;
    st = lam_estimate_add_image(a->estimate, NULL, 0, nominal, r->setup->sigma.oxide_nm, NULL, err);
    if (!st && (!opt->fit_oxide || a->oxide.nominal < 0))
        a->estimate->image[0].oxide.fitted = 0;
    /* the ladder at the prior's centre, for the substrate and the first pass */
    if (!st)
        st = lam_estimate_ladder(a->estimate, 0, r->model, &a->ladder, err);
    return st;
}

static void to_segment_ladder(const lam_prediction *P, size_t K, lam_ladder *L)
{
    L->entries = P->max_layers + 1;
    L->max_layers = K;
    for (size_t N = 0; N < L->entries; N++)
        for (size_t c = 0; c < 3; c++)
            L->c[N][c] = c < P->channels ? P->contrast[N][c] : P->contrast[N][P->channels - 1];
}

static lam_status substrate_stage(run *r, lam_error *err)
{
    lam_analysis *a = r->a;
    lam_substrate_options so = r->opt->substrate;
    so.threads = r->threads;
    double lad[LAM_MODEL_MAX_LAYERS][3];
    lam_ladder L;
    to_segment_ladder(&a->ladder, a->max_layers, &L);
    for (size_t N = 1; N <= LAM_MODEL_MAX_LAYERS; N++)
        memcpy(lad[N - 1], L.c[N], sizeof lad[0]);
    so.ladder = (const double (*)[3])lad;
    so.ladder_count = LAM_MODEL_MAX_LAYERS;
    lam_status st = lam_substrate_estimate(r->img, &so, &a->substrate, err);
    if (st)
        return st;
    MARK(r, LAM_T_SUBSTRATE);
    lam_contrast_in_place(r->img, &a->substrate, r->threads);
    if ((st = lam_contrast_denoise(r->img, r->threads, err)) ||
        (st = lam_segmentation_alloc(r->img->width, r->img->height, &a->seg, err)))
        return st;
    MARK(r, LAM_T_CONTRAST);
    return LAM_OK;
}

/* Regions of uniform contrast (model-independent), measured. */
static lam_status segment_stage(run *r, lam_error *err)
{
    lam_analysis *a = r->a;
    lam_segment_options so = r->opt->segment;
    so.threads = r->threads;
    /* material hook (issue 14): other crystals' flakes may be brighter than the substrate */
    so.bright_scaling |= lam_setup_crystal_kind(r->setup) != LAM_CRYSTAL_SHEETS;
    lam_status st = lam_segment_uniform(r->img, a->channels, a->ladder.contrast[1],
                                        a->substrate.noise, a->substrate.tile_scatter, &so,
                                        a->seg, err);
    if (st)
        return st;
    free(a->measured);
    a->count = a->seg->count;
    a->measured = calloc(a->count ? a->count : 1, sizeof *a->measured);
    if (!a->measured)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate %zu regions", a->count);
    for (size_t i = 0; i < a->count; i++)
        lam_region_measure(&a->seg->regions[i], a->substrate.noise, a->substrate.kappa,
                           a->channels, &a->measured[i]);
    MARK(r, LAM_T_SEGMENT);
    /* the substrate's own low-frequency errors set the floor's prior */
    for (size_t c = 0; c < a->channels; c++)
        lam_estimate_set_floor_prior(a->estimate, c, a->substrate.tile_scatter[c]);
    return lam_estimate_set_regions(a->estimate, 0, a->measured, a->count, err);
}

static void oxide_summary(lam_analysis *a, const lam_analysis_options *opt)
{
    const lam_est_image *im = &a->estimate->image[0];
    lam_oxide_result *o = &a->oxide;
    o->regions_used = im->regions_used;
    o->fitted = im->oxide.fitted && im->regions_used > 0;
    o->estimate = o->fitted ? im->oxide.value : o->nominal;
    o->sigma = o->fitted ? im->oxide.sigma : NAN;
    o->sigma_given_shared = o->fitted ? im->oxide_sigma_given_shared : NAN;
    if (o->fitted)
        snprintf(o->method, sizeof o->method,
                 "joint fit with the shared parameters over %zu region(s); sigma includes them",
                 im->regions_used);
    else
        snprintf(o->method, sizeof o->method, o->nominal < 0 ? "no oxide in the stack"
                                              : "nominal (no region usable for a fit)");
    o->pass = fabs(o->estimate - o->nominal) <= opt->oxide_tolerance_nm;
}

/* The joint fit of the shared parameters and the oxide. */
static lam_status fit_stage(run *r, lam_error *err)
{
    lam_analysis *a = r->a;
    lam_status st = lam_estimate_fit(a->estimate, r->model, r->model, err);
    /* material hook (issue 14): a TMD's other published n,k, kept when they
     * explain the regions better (lamina/nksource.h) */
    if (!st)
        st = lam_nksource_select(r->setup, r->opt->shared_prior, &a->estimate, &r->model,
                                 a->conductivity, sizeof a->conductivity, err);
    if (!st)
        st = lam_estimate_ladder(a->estimate, 0, r->model, &a->ladder, err);
    if (st)
        return st;
    oxide_summary(a, r->opt);
    MARK(r, LAM_T_OXIDE);
    return LAM_OK;
}

/* The 1L/2L ladder over the Fermi level, on a 10 nm grid with 6 cone
 * nodes: the conductivity integrals per Fermi level are the cost here. */
static lam_status fermi_table(run *r, lam_fermi_table *ft, lam_error *err)
{
    lam_setup s = *r->setup;
    s.grid_step_nm = 10;
    s.cone_nodes = 6;
    lam_model *m = NULL;
    lam_status st = lam_model_alloc(&s, 2, 0, &m, err);
    if (!st)
        st = lam_fermi_table_build(r->a->estimate, 0, m, ft, err);
    lam_model_free(m);
    return st;
}

/* Posterior, usable rectangle and flags of every region. */
static void infer_all(run *r, const lam_est_view *v, const lam_fermi_table *ft)
{
    lam_analysis *a = r->a;
    for (size_t i = 0; i < a->count; i++) {
        lam_region_result *res = &a->results[i];
        lam_infer_region(a->estimate, v, ft, &a->measured[i], &a->seg->regions[i], &a->infer, res);
        lam_usable_rectangle(a->seg, &a->seg->regions[i], res->usable_px, res->usable_at);
    }
}

/* A region whose layer count is settled enough to join its neighbours of
 * the same count: its label's probability reaches 0.9 and the model
 * describes it. */
static int join_key(const lam_region_result *res)
{
    const unsigned bad = LAM_FLAG_UNMODELLED | LAM_FLAG_SATURATED;
    return res->layers > 0 && res->p_label >= 0.9 && !(res->flags & bad) ? res->layers : -1;
}

/* Parts of one flake with one confident layer count become one region
 * (lam_segment_join), measured and inferred again. Band and hole pixels
 * join when every channel is within 0.3 of the monolayer step of the
 * strongest channel (the fraction that marks an edge there) plus 3 sigma of
 * the denoised pixel noise (the raw sigma / 3 after the 3 x 3 filter): a
 * channel where the monolayer barely shows (often blue) must not make JPEG
 * chroma errors look like features. */
static lam_status join_stage(run *r, const lam_est_view *v, const lam_fermi_table *ft,
                             lam_error *err)
{
    lam_analysis *a = r->a;
    size_t n = a->count, joined = 0;
    int *key = malloc((n ? n : 1) * sizeof *key);
    uint32_t *map = malloc((n ? n : 1) * sizeof *map);
    lam_status st = key && map ? LAM_OK : lam_error_set(err, LAM_ENOMEM, "cannot join regions");
    double fill[3] = {0, 0, 0}, step = 0;
    for (size_t c = 0; c < a->channels; c++)
        step = fmax(step, fabs(a->ladder.contrast[1][c]));
    for (size_t c = 0; c < a->channels; c++)
        fill[c] = 0.3 * step + a->substrate.noise[c];
    for (size_t i = 0; i < n && !st; i++)
        key[i] = join_key(&a->results[i]);
    if (!st)
        st = lam_segment_join(r->img, a->channels, key, fill, a->seg, map, &joined, err);
    free(key);
    free(map);
    if (st)
        return st;
    a->count = a->seg->count;
    for (size_t i = 0; i < a->count; i++)
        lam_region_measure(&a->seg->regions[i], a->substrate.noise, a->substrate.kappa,
                           a->channels, &a->measured[i]);
    infer_all(r, v, ft);
    return LAM_OK;
}

static lam_status posterior_stage(run *r, lam_error *err)
{
    lam_analysis *a = r->a;
    lam_infer_options io = r->opt->infer;
    io.max_layers = a->max_layers;
    io.min_area_px = a->um_per_px > 0 ? r->opt->min_area_um2 / (a->um_per_px * a->um_per_px)
                                      : r->opt->min_area_px;
    a->infer = io;
    /* ---- material hook (issue 14): a crystal of continuous thickness (hBN)
     * gets a thickness posterior per region instead of a layer count
     * (lamina/thickness.h: its own oxide profile and region results) ---- */
    if (lam_thickness_applies(r->setup)) {
        if (!(a->results = calloc(a->count ? a->count : 1, sizeof *a->results)))
            return lam_error_set(err, LAM_ENOMEM, "cannot allocate region results");
        lam_status st = lam_thickness_analyze(a, r->img, r->setup, r->model,
                                              r->opt->oxide_tolerance_nm, err);
        MARK(r, LAM_T_REGIONS);
        return st;
    }
    lam_est_view *v = malloc(sizeof *v);
    /* material hook (issue 14): the Fermi level is graphene's */
    int fermi = r->opt->fit_fermi && lam_setup_crystal_kind(r->setup) == LAM_CRYSTAL_SHEETS;
    lam_fermi_table *ft = fermi ? malloc(sizeof *ft) : NULL;
    a->results = calloc(a->count ? a->count : 1, sizeof *a->results);
    lam_status st = LAM_OK;
    if (!v || !a->results || (fermi && !ft))
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate region results");
    else
        st = lam_estimate_view(a->estimate, 0, r->model, v, err);
    if (!st && ft)
        st = fermi_table(r, ft, err);
    if (!st)
        infer_all(r, v, ft);
    if (!st)
        st = join_stage(r, v, ft, err);
    free(v);
    free(ft);
    MARK(r, LAM_T_REGIONS);
    return st;
}

lam_status lam_analyze(const char *path, const lam_setup *setup, const lam_analysis_options *opt,
                       lam_analysis **out, lam_error *err)
{
    lam_analysis_options defaults = lam_analysis_options_default();
    run r;
    memset(&r, 0, sizeof r);
    r.opt = opt ? opt : &defaults;
    r.setup = setup;
    r.threads = r.opt->threads ? r.opt->threads : 1;
    r.t0 = lam_clock_seconds();
    if (!(r.a = calloc(1, sizeof *r.a)))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate an analysis");
    snprintf(r.a->file, sizeof r.a->file, "%s", path);
    describe_setup(r.a, setup);
    lam_status st = load_stage(&r, path, err);
    if (!st && !(st = model_stage(&r, err)) && !(st = substrate_stage(&r, err)) &&
        !(st = segment_stage(&r, err)) && !(st = fit_stage(&r, err)))
        st = posterior_stage(&r, err);
    lam_model_free(r.model);
    lam_image_free(r.img);
    if (st) {
        lam_analysis_free(r.a);
        lam_error_set_file(err, path);
        return st;
    }
    *out = r.a;
    return LAM_OK;
}

int lam_analysis_region_fits_oxide(const lam_analysis *a, size_t i)
{
    return a->measured && a->measured[i].use && a->results[i].layers > 0 &&
           !(a->results[i].flags & (LAM_FLAG_UNMODELLED | LAM_FLAG_SATURATED));
}
