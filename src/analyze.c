/* analyze.c - the analysis pipeline for one image, stage by stage. */
#include "lamina/analyze.h"
#include "analyze_internal.h"
#include "lamina/bigalloc.h"
#include "lamina/clock.h"
#include "lamina/contrast.h"
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
    lam_analysis_drop_pictures(a);
    free(a->results);
    free(a->thickness);
    free(a->measured);
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
    uint8_t *out = lam_big_malloc(img->width * img->height * 3);
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

/* Pooling sharpens the shared parameters by the number of regions, but
 * the model family is not the true physics: its best values carry a bias
 * that more data do not shrink. The pooled prior's sd is therefore kept at
 * no less than POOL_SD_FLOOR of the setup's own prior sd (a quarter), and
 * the oxide's sigma is the one the image alone has (oxide_summary;
 * lam_est_image.oxide_sigma_alone): with the floor alone, 2-sigma
 * intervals held the truth in 91 % of the harness' pooled scans with the
 * microscope unknown, 87 % with ten tiles (docs/method.md). */
#define POOL_SD_FLOOR 0.25

void lam_shared_prior_apply(const lam_shared_prior *p, lam_estimate *e)
{
    if (!p || !p->set)
        return;
    for (int k = 0; k < LAM_NU_COUNT; k++)
        if (e->shared[k].fitted || p->sd[k] > 0) {
            double own = e->shared[k].fitted ? e->shared[k].prior_sd : 0;
            double sd = p->sd[k] > 0 ? fmax(p->sd[k], POOL_SD_FLOOR * e->shared[k].prior_sd) : 0;
            lam_estimate_set_prior(e, k, p->mean[k], sd, "pooled");
            e->shared[k].alone_sd = own > sd ? own : 0;
        }
    if (p->floor_rel > 0)
        e->floor_rel = e->floor_rel_prior = p->floor_rel;
}

/* ---- stages ---- */

#define MARK(r, k) ((r)->a->seconds[k] = lam_clock_seconds() - (r)->t0)

static const char *camera_name(lam_camera_kind k)
{
    return k == LAM_CAMERA_GAUSSIAN        ? "gaussian"
           : k == LAM_CAMERA_SRGB_OBSERVER ? "srgb-observer"
           : k == LAM_CAMERA_TABLE         ? "table"
                                           : "monochromatic";
}

static lam_status load_stage(lam__run *r, const char *path, lam_error *err)
{
    lam_analysis *a = r->a;
    lam_load_options lo = r->opt->load;
    if (lo.transfer.kind == LAM_TRANSFER_AUTO && !lam_setup_is_default(r->setup, "encoding"))
        lo.transfer = r->setup->encoding;
    lam_status st = lam__load_input(path, &lo, &r->img, &a->source, &a->source_size, err);
    if (st)
        return st;
    MARK(r, LAM_T_LOAD);
    lam_image *img = r->img;
    a->width = img->width;
    a->height = img->height;
    a->transfer = img->transfer;
    if (!(a->um_per_px > 0) && img->um_per_px_file > 0) { /* the setup gives none */
        a->um_per_px = img->um_per_px_file;
        a->um_per_px_from_file = 1;
    }
    a->bit_depth = img->bit_depth;
    a->jpeg_input = lam_image_block_coded(img);
    a->clipped_pixels = img->clipped_count;
    a->display = img->display8; /* taken over, or NULL for JPEG and 16-bit files */
    img->display8 = NULL;
    if (!a->display && !a->source && !(a->display = display_copy(img, r->threads)))
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

lam_status lam__new_estimate(lam__run *r, double centre_nm, double half_nm, double oxide_sd,
                             lam_estimate **out, lam_error *err)
{
    lam_analysis *a = r->a;
    lam_estimate_options eo = r->opt->estimate;
    eo.max_layers = r->opt->max_layers;
    eo.threads = r->threads;
    if (isfinite(half_nm))
        eo.search_half_nm = half_nm;
    lam_status st = lam_estimate_alloc(r->setup, lam_model_channels(r->model), &eo, out, err);
    if (st)
        return st;
    lam_shared_prior_apply(r->opt->shared_prior, *out);
    double centre = a->oxide.nominal < 0 ? 0 : isfinite(centre_nm) ? centre_nm : a->oxide.nominal;
    st = lam_estimate_add_image(*out, NULL, 0, centre,
                                isfinite(oxide_sd) ? oxide_sd : r->setup->sigma.oxide_nm, NULL, err);
    if (!st && (!r->opt->fit_oxide || a->oxide.nominal < 0))
        (*out)->image[0].oxide.fitted = 0;
    return st;
}

static lam_status model_stage(lam__run *r, lam_error *err)
{
    lam_analysis *a = r->a;
    const lam_analysis_options *opt = r->opt;
    if (opt->max_layers < 1 || opt->max_layers > 20)
        return lam_error_set(err, LAM_ERANGE, "--max-layers must be 1 to 20");
    a->max_layers = opt->max_layers;
    a->oxide.nominal = lam_setup_oxide(r->setup);
    a->oxide.estimate = a->oxide.nominal;
    a->oxide.rival_nm = NAN;
    a->prior_pooled = opt->shared_prior && opt->shared_prior->set;
    a->prior_images = a->prior_pooled ? opt->shared_prior->images : 0;
    a->prior_two_readings = a->prior_pooled ? opt->shared_prior->two_readings : 0;
    lam_status st = lam_model_alloc_fast(r->setup, LAM_MODEL_MAX_LAYERS, &r->model, err);
    if (!st)
        st = lam__new_estimate(r, NAN, NAN, NAN, &a->estimate, err);
    /* the ladder at the prior's centre, for the substrate and the first pass */
    if (!st)
        st = lam_estimate_ladder(a->estimate, 0, r->model, &a->ladder, err);
    MARK(r, LAM_T_MODEL);
    return st;
}

/* Above this share of clipped pixels a missing substrate is the exposure's
 * fault. */
#define SATURATED_FAILURE 0.2

static lam_status substrate_stage(lam__run *r, lam_error *err)
{
    lam_analysis *a = r->a;
    lam_substrate_options so = r->opt->substrate;
    so.threads = r->threads;
    /* With one channel, brightness alone cannot tell the substrate from a
     * thick flake against a ladder of unknown scale (a bright graphite
     * flake's contrast to the substrate looks like a monolayer's the other
     * way round): the largest uniform area is the substrate. */
    so.ladder = a->channels > 1 ? &a->ladder : NULL;
    lam_status st = lam_substrate_estimate(r->img, &so, &a->substrate, err);
    double clipped = (double)r->img->clipped_count / (double)(r->img->width * r->img->height);
    if (st == LAM_ERANGE && clipped > SATURATED_FAILURE) /* say why, not where to look */
        return lam_error_set(err, LAM_ERANGE,
                             "%.0f %% of the pixels are saturated: no bare substrate is left to "
                             "measure contrast against; lower the exposure or the lamp",
                             100 * clipped);
    if (st)
        return st;
    MARK(r, LAM_T_SUBSTRATE);
    lam_contrast_in_place(r->img, &a->substrate, r->threads);
    if ((st = lam_contrast_denoise(r->img, r->threads, err)))
        return st;
    /* before the label and class maps: they take the memory it frees */
    lam_contrast_compact(r->img, &r->contrast, r->threads);
    if ((st = lam_segmentation_alloc(r->img->width, r->img->height, &a->seg, err)))
        return st;
    MARK(r, LAM_T_CONTRAST);
    return LAM_OK;
}

/* The steps a file's coding makes in flat areas, as a relative change of
 * linear light at the substrate's level times 'darken', per channel: one
 * JPEG DC quantisation step (lam_image.jpeg_dc_step), and for any 8-bit
 * file at least one code (which matters in dark images). For a JPEG the
 * segmentation takes them at the darkest substrate level (1 - falloff): a
 * step is a larger share of the light in a vignetted corner, where noise
 * no longer dithers the blocks; the model floor's prior at the mean
 * level. */
static void file_steps(const lam_image *img, const lam_substrate *sub, size_t channels,
                       double darken, double out[3])
{
    for (size_t c = 0; c < 3; c++) {
        out[c] = 0;
        double level = darken * sub->level[c < channels ? c : 0], q = img->jpeg_dc_step[c];
        if (img->bit_depth == 8)
            q = fmax(q, 1.0);
        if (c >= channels || !(q > 0) || !(level > 0))
            continue;
        double v = lam_transfer_encode(&img->transfer, fmin(level, 1.0));
        double up = lam_transfer_decode(&img->transfer, fmin(v + q / 255.0, 1.0));
        out[c] = (up - level) / level;
    }
}

/* Regions smaller than this share of the image inform no shared fit
 * (beyond lam_region_measure's own minimum of interior pixels). A JPEG's
 * 8 x 8 blocks and the noise cut pieces off large flakes, and their number
 * grows with the pixels a flake covers, while the flakes in a field of
 * view do not: at 28-48 MP hundreds of pieces outvoted the few flakes and
 * the fit read a 90 nm chip as 270 nm, a 287 nm one as 119 nm
 * (docs/performance.md). 2e-5 is 6 px of a 640 x 480 image (no change
 * there), 240 of a 12 MP one, 960 of a 48 MP one. The pieces are still
 * labelled; they only do not steer the oxide and the response. */
#define FIT_MIN_IMAGE_SHARE 2e-5

void lam__measure_regions(lam_analysis *a)
{
    a->count = a->seg->count;
    double least = FIT_MIN_IMAGE_SHARE * (double)(a->width * a->height);
    for (size_t i = 0; i < a->count; i++) {
        lam_region_measure(&a->seg->regions[i], a->substrate.noise, a->substrate.kappa,
                           a->channels, &a->measured[i]);
        if ((double)a->seg->regions[i].interior < least)
            a->measured[i].use = 0;
    }
}

#define FAINT_OXIDE_SDS 2.0 /* the oxide range a TMD's faintest count is sought over */
#define FAINT_OXIDE_STEP 1.0 /* nm, or coarser: */
#define FAINT_MAX_STEPS 60    /* oxide values tried at most (a 500 nm sd would be 2000) */
#define FAINT_LAYERS 3       /* the counts a device needs */
#define FAINT_FLOOR 0.3      /* of the monolayer's largest channel at the prior's centre */

/* The segmentation scales its thresholds with the monolayer's contrast at
 * the prior's centre, and takes regions within 0.3 of its largest channel
 * of zero for substrate. A TMD's contrast is not monotonic in N and moves
 * fast with the oxide: WSe2 on a chip of 101 nm sold as 90 shows its 3L
 * at a third of the 1L's contrast at 90 nm, and the 3L flakes were taken
 * for substrate. For layered crystals the substrate's tolerance follows
 * the faintest of 1L..3L (its largest channel) anywhere within 2 sd of
 * the oxide's prior, but no less than FAINT_FLOOR of the monolayer's:
 * where a count nearly vanishes (WSe2 near 285 nm) it cannot be told from
 * the substrate anyway, and residue films would become regions. Returns 0
 * for other crystals (graphene's monolayer is its faintest count). */
static double segment_faint_step(lam__run *r)
{
    lam_analysis *a = r->a;
    if (lam_setup_crystal_kind(r->setup) != LAM_CRYSTAL_LAYERED)
        return 0;
    double one = 0;
    for (size_t c = 0; c < a->channels; c++)
        one = fmax(one, fabs(a->ladder.contrast[1][c]));
    lam_model_point p = lam_estimate_point(a->estimate, 0);
    const lam_nuisance *ox = &a->estimate->image[0].oxide;
    /* a fixed oxide (--no-oxide-fit) is the only one; counts above
     * --max-layers are not reported, so their faintness does not matter */
    double best = one, half = ox->fitted ? FAINT_OXIDE_SDS * ox->prior_sd : 0;
    double step = fmax(FAINT_OXIDE_STEP, 2 * half / FAINT_MAX_STEPS);
    size_t layers = a->max_layers < FAINT_LAYERS ? a->max_layers : FAINT_LAYERS;
    for (double d = ox->prior_mean - half; d <= ox->prior_mean + half; d += step) {
        lam_prediction pr;
        p.v[LAM_MP_OXIDE] = d;
        if (!(d > 0) || lam_model_eval_point(r->model, &p, layers, &pr, NULL))
            continue;
        lam_estimate_observe(a->estimate, &pr);
        for (size_t n = 1; n <= layers && n <= pr.max_layers; n++) {
            double m = 0;
            for (size_t c = 0; c < a->channels; c++)
                m = fmax(m, fabs(pr.contrast[n][c]));
            best = fmin(best, m);
        }
    }
    return fmax(best, FAINT_FLOOR * one);
}

/* Regions of uniform contrast (model-independent), measured. */
static lam_status segment_stage(lam__run *r, lam_error *err)
{
    lam_analysis *a = r->a;
    lam_segment_options so = r->opt->segment;
    so.faint_step = segment_faint_step(r);
    so.threads = r->threads;
    file_steps(r->img, &a->substrate, a->channels, 1.0, a->file_step);
    file_steps(r->img, &a->substrate, a->channels,
               lam_image_block_coded(r->img) ? 1 - a->substrate.falloff : 1.0, so.file_step);
    /* material hook (issue 14): other crystals' flakes may be brighter than the substrate */
    so.bright_scaling |= lam_setup_crystal_kind(r->setup) != LAM_CRYSTAL_SHEETS;
    lam_status st = lam_segment_uniform(&r->contrast, a->channels, a->ladder.contrast[1],
                                        a->substrate.noise, a->substrate.tile_scatter, &so,
                                        a->seg, err);
    if (st)
        return st;
    free(a->measured);
    a->measured = calloc(a->seg->count ? a->seg->count : 1, sizeof *a->measured);
    if (!a->measured)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate %zu regions", a->seg->count);
    /* the edge areas only set the size flags, and both crystal paths join
     * the flakes (join_stage, lamina/thickness.h) and take them then; what
     * decides a join does not read them */
    lam__measure_regions(a);
    MARK(r, LAM_T_SEGMENT);
    /* the substrate's own low-frequency errors set the floor's prior, and
     * no less than the file's coding steps (uniform rounding: step / sqrt 12) */
    for (size_t c = 0; c < a->channels; c++)
        lam_estimate_set_floor_prior(a->estimate, c,
                                     fmax(a->substrate.tile_scatter[c], a->file_step[c] / sqrt(12)));
    return lam_estimate_set_regions(a->estimate, 0, a->measured, a->count, err);
}

/* The flakes' oxide combined with the substrate colour's (inverse
 * variances), when that was used; against a colour recorded at a known
 * oxide only the difference from it depends on the index. The part of the
 * error every image of the setup shares (what the oxide audit does not
 * average down) is the flakes' shared part and the reference oxide's sd,
 * each with its weight. */
static void combine_colour(lam_oxide_result *o)
{
    const lam_colour_oxide *c = &o->colour;
    double index = LAM_OXIDE_INDEX_REL * fabs(c->estimate - c->reference_nm);
    double vg = c->sigma * c->sigma + index * index, vf = o->sigma * o->sigma;
    double wf = (1 / vf) / (1 / vf + 1 / vg), wg = 1 - wf;
    double given = isfinite(o->sigma_given_shared) ? o->sigma_given_shared : o->sigma;
    double shared_f = sqrt(fmax(0, vf - given * given));
    double shared = hypot(wf * shared_f, wg * hypot(c->reference_sd, index));
    o->estimate = wf * o->estimate + wg * c->estimate;
    o->sigma = 1 / sqrt(1 / vf + 1 / vg);
    o->sigma_given_shared = sqrt(fmax(0, o->sigma * o->sigma - shared * shared));
    size_t n = strlen(o->method);
    snprintf(o->method + n, sizeof o->method - n,
             "; combined with the substrate's colour against the calibration");
}

static void oxide_summary(lam_analysis *a, const lam_analysis_options *opt)
{
    const lam_est_image *im = &a->estimate->image[0];
    lam_oxide_result *o = &a->oxide;
    o->regions_used = im->regions_used;
    o->fitted = im->oxide.fitted && im->regions_used > 0;
    o->estimate = o->fitted ? im->oxide.value : o->nominal;
    double index = LAM_OXIDE_INDEX_REL * o->estimate;
    /* with a pooled prior, the sigma one image alone has (pooling pins the
     * shared parameters, not the model family's bias in them: on the
     * harness' pooled scans the oxide came no closer than alone) */
    double fit_sd = a->prior_pooled ? fmax(im->oxide.sigma, im->oxide_sigma_alone)
                                    : im->oxide.sigma;
    o->sigma = o->fitted ? sqrt(fit_sd * fit_sd + index * index) : NAN;
    o->sigma_given_shared = o->fitted ? im->oxide_sigma_given_shared : NAN;
    if (o->fitted)
        snprintf(o->method, sizeof o->method,
                 "joint fit with the shared parameters over %zu region(s); sigma includes them "
                 "%sand %.1f %% for the oxide's index",
                 im->regions_used, a->prior_pooled ? "(as this image alone knows them) " : "",
                 100 * LAM_OXIDE_INDEX_REL);
    else
        snprintf(o->method, sizeof o->method, o->nominal < 0 ? "no oxide in the stack"
                                              : "nominal (no region usable for a fit)");
    const lam_estimate *rv = a->estimate->rival;
    if (o->fitted && rv) { /* the mixture of the two modes' oxides */
        double w = a->estimate->rival_weight, m2 = rv->image[0].oxide.value;
        double s2 = rv->image[0].oxide.sigma, m1 = o->estimate, s1 = o->sigma;
        o->estimate = (1 - w) * m1 + w * m2;
        o->sigma = sqrt((1 - w) * (s1 * s1 + m1 * m1) + w * (s2 * s2 + m2 * m2) -
                        o->estimate * o->estimate);
    }
    if (o->fitted && o->colour.used)
        combine_colour(o);
    o->pass = fabs(o->estimate - o->nominal) <= opt->oxide_tolerance_nm;
}

/* The joint fit of the shared parameters and the oxide. */
static lam_status fit_stage(lam__run *r, lam_error *err)
{
    lam_analysis *a = r->a;
    lam__oxide_search o;
    lam_status st = lam__fit_searched(r, &o, err);
    /* material hook (issue 14): a TMD's other published n,k, kept when they
     * explain the regions better (lamina/nksource.h) */
    if (!st)
        st = lam_nksource_select(r->setup, r->opt->shared_prior, &a->estimate, &r->model,
                                 a->conductivity, sizeof a->conductivity, err);
    if (!st)
        st = lam__colour_oxide(a, r->setup, r->model, err);
    if (!st)
        st = lam_estimate_ladder(a->estimate, 0, r->model, &a->ladder, err);
    if (st)
        return st;
    oxide_summary(a, r->opt);
    a->oxide.rival_nm = o.rival_nm;
    if (o.colour_start && !o.off_nominal) {
        size_t n = strlen(a->oxide.method);
        snprintf(a->oxide.method + n, sizeof a->oxide.method - n,
                 "; started at the substrate colour's oxide (the flakes left the nominal one's "
                 "search)");
    }
    /* hBN's thickness stage fits the oxide again (about these searches'
     * oxides too) and warns of its own (a rival; off nominal: check_oxide in
     * analyze_checks.c) */
    int own_oxide = !lam_thickness_applies(r->setup);
    if (o.off_nominal && own_oxide)
        lam_warnings_add(&a->warnings, "oxide-off-nominal",
                         "the flakes do not fit the nominal %.1f nm of SiO2; searched %.0f nm "
                         "each side, they fit %.1f +- %.1f nm: check the chip and the setup; "
                         "the layer counts use the fitted value",
                         a->oxide.nominal, LAM__WIDE_HALF_NM, a->oxide.estimate, a->oxide.sigma);
    if (isfinite(o.rival_nm) && own_oxide)
        lam_warnings_add(&a->warnings, "oxide-ambiguous",
                         "the flakes fit %.1f nm of SiO2 and nearly as well %.1f nm (about one "
                         "interference order apart, where N layers look like others): the "
                         "layer counts assume %.1f nm; confirm the chip's oxide (a setup, its "
                         "colour, or a calibration)",
                         a->oxide.estimate, o.rival_nm, a->oxide.estimate);
    MARK(r, LAM_T_OXIDE);
    return LAM_OK;
}

/* The 1L/2L ladder over the Fermi level, on a 10 nm grid with 6 cone
 * nodes: the conductivity integrals per Fermi level are the cost here,
 * shared out to the analysis' threads (a copy of the model each). */
static lam_status fermi_table(lam__run *r, lam_fermi_table *ft, lam_error *err)
{
    lam_setup s = *r->setup;
    s.grid_step_nm = 10;
    s.cone_nodes = 6;
    lam_model *m[LAM_MAX_THREADS] = {NULL};
    size_t n = lam_parallel_slices(LAM_FERMI_GRID, r->threads);
    lam_status st = lam_model_alloc(&s, 2, 0, &m[0], err);
    if (!st && !(st = lam_model_clones(m[0], n, m, err))) {
        st = lam_fermi_table_build(r->a->estimate, 0, m, n, ft, err);
        lam_model_clones_free(m, n);
    }
    lam_model_free(m[0]);
    return st;
}

/* Posterior, flags and (with 'rectangles') usable rectangle of every
 * region; with a rival mode of the fit (view vr), each region's posterior
 * is the mixture of the two by their weights. Regions are independent, so
 * they are handed out one at a time to the analysis' threads (a flake's
 * rectangle costs its box's pixels, a speck's nothing). */
typedef struct infer_ctx {
    lam_analysis *a;
    const lam_est_view *v, *vr;
    const lam_fermi_table *ft;
    int rectangles;
} infer_ctx;

static void infer_one(size_t i, void *vctx)
{
    const infer_ctx *x = vctx;
    lam_analysis *a = x->a;
    const lam_estimate *rival = a->estimate->rival;
    lam_region_result *res = &a->results[i], alt;
    lam_infer_region(a->estimate, x->v, x->ft, &a->measured[i], &a->seg->regions[i], &a->infer,
                     res);
    if (x->vr) {
        lam_infer_region(rival, x->vr, NULL, &a->measured[i], &a->seg->regions[i], &a->infer,
                         &alt);
        lam_infer_mix(res, &alt, a->estimate->rival_weight, &a->infer);
    }
    if (x->rectangles)
        lam_usable_rectangle(a->seg, &a->seg->regions[i], res->usable_px, res->usable_at);
}

static void infer_all(lam__run *r, const lam_est_view *v, const lam_fermi_table *ft,
                      const lam_est_view *vr, int rectangles)
{
    infer_ctx x = {r->a, v, vr, ft, rectangles};
    lam_parallel_each(r->a->count, r->threads, infer_one, &x);
}

/* A region whose layer count is settled enough to join its neighbours of
 * the same count: its label's probability reaches 0.9 and the model
 * describes it. */
static int join_key(const lam_region_result *res)
{
    const unsigned bad = LAM_FLAG_UNMODELLED | LAM_FLAG_SATURATED;
    return res->layers > 0 && res->p_label >= 0.9 && !(res->flags & bad) ? res->layers : -1;
}

/* Regions labelled "thick" or "unassigned" (unmodelled) have no count to
 * match on, and a JPEG's chroma steps cut a graphite flake or a residue
 * patch into blocks (the 12 MP bench field's 25-layer flake came out as
 * 44 regions, its residue patch as 40, each labelled in the picture).
 * Regions of one such kind share a key when their contrasts agree within
 * 'fill' in every channel (the tolerance of the join's band pixels): each,
 * largest first, takes the key of the first larger one of its kind it
 * agrees with, or a new key (from UNCOUNTED_KEYS, above every count). The
 * join still needs them to touch or face each other across a thin band.
 * The label's probability is not asked for: what tells a piece of the same
 * graphite from a different flake is its contrast, not how sure "thick" is
 * against "unmodelled". Saturated regions stay apart. */
#define UNCOUNTED_KEYS 1000

/* 1 thick, 2 unmodelled, 0 neither (or saturated). */
static int uncounted_kind(const lam_region_result *res)
{
    if (res->flags & LAM_FLAG_SATURATED)
        return 0;
    if (res->flags & LAM_FLAG_UNMODELLED)
        return 2;
    return res->thick ? 1 : 0;
}

static int contrasts_agree(const lam_analysis *a, size_t i, size_t j, const double fill[3])
{
    int agree = 1;
    for (size_t c = 0; c < a->channels; c++)
        agree &= fabs(a->measured[i].mean[c] - a->measured[j].mean[c]) <= fill[c];
    return agree;
}

static void uncounted_keys(const lam_analysis *a, const double fill[3], int *key)
{
    size_t n = a->count, *order = malloc((n ? n : 1) * sizeof *order), m = 0;
    if (!order)
        return; /* their parts stay apart */
    for (size_t i = 0; i < n; i++)
        if (uncounted_kind(&a->results[i]))
            order[m++] = i;
    for (size_t s = 1; s < m; s++) /* largest first (insertion sort: few such regions) */
        for (size_t t = s; t > 0 && a->seg->regions[order[t]].area >
                                        a->seg->regions[order[t - 1]].area; t--) {
            size_t x = order[t];
            order[t] = order[t - 1], order[t - 1] = x;
        }
    for (size_t s = 0; s < m; s++) {
        int kind = uncounted_kind(&a->results[order[s]]);
        key[order[s]] = UNCOUNTED_KEYS + (int)s;
        for (size_t t = 0; t < s; t++)
            if (uncounted_kind(&a->results[order[t]]) == kind &&
                contrasts_agree(a, order[s], order[t], fill)) {
                key[order[s]] = key[order[t]];
                break;
            }
    }
    free(order);
}

/* Parts of one flake with one confident layer count become one region
 * (lam_segment_join), measured and inferred again. Band and hole pixels
 * join when every channel is within 0.3 of the monolayer step of the
 * strongest channel (the fraction that marks an edge there) plus 3 sigma of
 * the denoised pixel noise (the raw sigma / 3 after the 3 x 3 filter): a
 * channel where the monolayer barely shows (often blue) must not make JPEG
 * chroma errors look like features. */
static lam_status join_stage(lam__run *r, const lam_est_view *v, const lam_fermi_table *ft,
                             const lam_est_view *vr, lam_error *err)
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
        uncounted_keys(a, fill, key);
    if (!st)
        st = lam_segment_join(&r->contrast, a->channels, key, fill, r->threads, a->seg, map,
                              &joined, err);
    free(key);
    free(map);
    if (st)
        return st;
    lam__measure_regions(a);
    if ((st = lam_segment_edge_areas(&r->contrast, a->channels, r->threads, a->seg, err)))
        return st;
    infer_all(r, v, ft, vr, 1);
    return LAM_OK;
}

static lam_status posterior_stage(lam__run *r, lam_error *err)
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
        lam_status st = lam_thickness_analyze(a, &r->contrast, r->setup, r->model,
                                              r->opt->oxide_tolerance_nm, r->threads, err);
        MARK(r, LAM_T_REGIONS);
        return st;
    }
    lam_est_view *v = malloc(2 * sizeof *v), *vr = NULL;
    /* material hook (issue 14): the Fermi level is graphene's */
    int fermi = r->opt->fit_fermi && lam_setup_crystal_kind(r->setup) == LAM_CRYSTAL_SHEETS;
    lam_fermi_table *ft = fermi ? malloc(sizeof *ft) : NULL;
    a->results = calloc(a->count ? a->count : 1, sizeof *a->results);
    lam_status st = LAM_OK;
    if (!v || !a->results || (fermi && !ft))
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate region results");
    else
        st = lam_estimate_view(a->estimate, 0, r->model, v, err);
    if (!st && a->estimate->rival && !(st = lam_estimate_view(a->estimate->rival, 0, r->model,
                                                              v + 1, err)))
        vr = v + 1;
    if (!st && ft)
        st = fermi_table(r, ft, err);
    if (!st) /* the join needs the layer counts only; rectangles after it */
        infer_all(r, v, ft, vr, 0);
    if (!st)
        st = join_stage(r, v, ft, vr, err);
    free(v);
    free(ft);
    MARK(r, LAM_T_REGIONS);
    return st;
}

static lam_status analyze_once(const char *path, const lam_setup *setup,
                               const lam_analysis_options *opt, lam_analysis **out,
                               lam_error *err)
{
    lam__run r;
    memset(&r, 0, sizeof r);
    r.opt = opt;
    r.setup = setup;
    r.threads = r.opt->threads ? r.opt->threads : 1;
    r.t0 = lam_clock_seconds();
    if (!(r.a = calloc(1, sizeof *r.a)))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate an analysis");
    snprintf(r.a->file, sizeof r.a->file, "%s", path);
    describe_setup(r.a, setup);
    lam_status st = load_stage(&r, path, err);
    if (!st)
        st = lam__check_channels(r.img, setup, err);
    if (!st) {
        r.a->transfer_from_file = r.img->transfer_from_file;
        st = model_stage(&r, err);
    }
    if (!st && !(st = substrate_stage(&r, err)) && !(st = segment_stage(&r, err)) &&
        !(st = fit_stage(&r, err)))
        st = posterior_stage(&r, err);
    if (!st)
        lam__check_analysis(r.a, r.img, setup, r.model);
    lam_model_free(r.model);
    lam_contrast_map_free(&r.contrast);
    lam_image_free(r.img);
    if (st) {
        lam_analysis_free(r.a);
        lam_error_set_file(err, path);
        return st;
    }
    *out = r.a;
    return LAM_OK;
}

/* How well an analysis' regions fit, per informing region (the fit's
 * log-likelihood without the oxide prior). */
static double fit_per_region(const lam_analysis *a)
{
    const lam_est_image *im = &a->estimate->image[0];
    return im->regions_used ? im->data_loglik / (double)im->regions_used : -INFINITY;
}

/* A 16-bit file without colour metadata read with the setup's non-linear
 * encoding: most 16-bit microscope files are linear, and the wrong curve
 * doubles every layer count. Both readings are analysed; the one whose
 * regions fit markedly better (ENCODING_MARGIN per region, in ln L) is
 * kept, and the choice is a warning either way. */
#define ENCODING_MARGIN 1.0

static int encoding_doubtful(const lam_analysis *a, const lam_setup *s,
                             const lam_analysis_options *opt)
{
    return a->bit_depth == 16 && !a->transfer_from_file &&
           opt->load.transfer.kind == LAM_TRANSFER_AUTO && !lam_setup_is_default(s, "encoding") &&
           s->encoding.kind != LAM_TRANSFER_LINEAR;
}

static lam_status second_reading(const char *path, const lam_setup *setup,
                                 const lam_analysis_options *opt, lam_analysis **a,
                                 lam_error *err)
{
    lam_analysis_options lin = *opt;
    lin.load.transfer.kind = LAM_TRANSFER_LINEAR;
    lam_analysis *b = NULL;
    lam_status st = analyze_once(path, setup, &lin, &b, err);
    if (st)
        return st;
    double fa = fit_per_region(*a), fb = fit_per_region(b);
    const char *named = lam_transfer_name(&setup->encoding);
    if (fb > fa + ENCODING_MARGIN) {
        lam_analysis_free(*a);
        *a = b;
        lam_warnings_add(&b->warnings, "encoding-mismatch",
                         "a 16-bit file without colour metadata: the setup says %s, but the "
                         "flakes fit linear light much better (%.1f against %.1f per region in "
                         "ln L), so it was read as linear; set \"encoding\": \"linear\" for "
                         "this camera",
                         named, fb, fa);
    } else {
        lam_analysis_free(b);
        lam_warnings_add(&(*a)->warnings, "encoding-mismatch",
                         "a 16-bit file without colour metadata read as %s (the setup's): most "
                         "16-bit microscope files are linear; linear light did not fit better "
                         "(%.1f against %.1f per region in ln L), check the camera's export",
                         named, fb, fa);
    }
    return LAM_OK;
}

lam_status lam_analyze(const char *path, const lam_setup *setup, const lam_analysis_options *opt,
                       lam_analysis **out, lam_error *err)
{
    lam_analysis_options defaults = lam_analysis_options_default();
    if (!opt)
        opt = &defaults;
    lam_status st = analyze_once(path, setup, opt, out, err);
    if (!st && encoding_doubtful(*out, setup, opt)) {
        lam_error e2;
        lam_error_clear(&e2);
        if (second_reading(path, setup, opt, out, &e2)) /* keep the first reading then */
            lam_warnings_add(&(*out)->warnings, "encoding-mismatch",
                             "a 16-bit file without colour metadata read as the setup says; "
                             "reading it as linear failed: %s", e2.message);
    }
    return st;
}

int lam_analysis_region_fits_oxide(const lam_analysis *a, size_t i)
{
    return a->measured && a->measured[i].use && a->results[i].layers > 0 &&
           !(a->results[i].flags & (LAM_FLAG_UNMODELLED | LAM_FLAG_SATURATED));
}
