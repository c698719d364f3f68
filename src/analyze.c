/* analyze.c - the analysis pipeline for one image. */
#include "lamina/analyze.h"
#include "lamina/clock.h"
#include "lamina/parallel.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define MARK(k) (a->seconds[k] = lam_clock_seconds() - t0)

lam_analysis_options lam_analysis_options_default(void)
{
    lam_analysis_options o;
    memset(&o, 0, sizeof o);
    o.load = lam_load_options_default();
    o.substrate = lam_substrate_options_default();
    o.segment = lam_segment_options_default();
    o.infer = lam_infer_options_default();
    o.max_layers = 6;
    o.min_area_um2 = 4;
    o.min_area_px = 200;
    o.oxide_half_range_nm = 25;
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
    free(a->display);
    free(a);
}

/* 8-bit sRGB copy of the linear input (for the annotated image). */
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

static void make_ladder(const lam_prediction *P, size_t K, size_t thick_to, lam_ladder *L)
{
    L->entries = thick_to + 1;
    L->max_layers = K;
    for (size_t N = 0; N <= thick_to; N++)
        for (int c = 0; c < 3; c++)
            L->c[N][c] = P->contrast[N][c];
}

int lam_analysis_region_fits_oxide(const lam_analysis *a, size_t i)
{
    const lam_region_result *r = &a->results[i];
    return r->layers > 0 && !(r->flags & (LAM_FLAG_UNMODELLED | LAM_FLAG_SATURATED)) &&
           a->seg->regions[i].interior >= 100;
}

lam_status lam_oxide_joint_profile(const lam_analysis *const *an, size_t images,
                                   const lam_setup *setup, const double *grid, size_t n,
                                   double *joint, double *per_image, lam_error *err)
{
    size_t K = 1;
    for (size_t j = 0; j < images; j++)
        K = an[j]->max_layers > K ? an[j]->max_layers : K;
    lam_model *m = NULL;
    lam_prediction *P = malloc(sizeof *P);
    lam_status st = P ? lam_model_alloc_fast(setup, K, &m, err)
                      : lam_error_set(err, LAM_ENOMEM, "cannot allocate a prediction");
    /* one ladder per thickness, shared by every image and region */
    for (size_t g = 0; g < n && !st; g++) {
        if ((st = lam_model_eval(m, grid[g], setup->sheet.fermi_ev, P, err)))
            break;
        joint[g] = 0;
        for (size_t j = 0; j < images; j++) {
            const lam_analysis *a = an[j];
            double tot = 0;
            for (size_t i = 0; i < a->count; i++) {
                if (!lam_analysis_region_fits_oxide(a, i))
                    continue;
                double best = INFINITY;
                for (size_t N = 1; N <= a->max_layers; N++)
                    best = fmin(best, lam_region_chi2(&a->seg->regions[i], P->contrast[N],
                                                      a->substrate.noise, a->substrate.kappa,
                                                      &a->infer));
                tot += best;
            }
            if (per_image)
                per_image[j * n + g] = tot;
            joint[g] += tot;
        }
    }
    lam_model_free(m);
    free(P);
    return st;
}

static lam_status segment_and_infer(lam_analysis *a, const lam_image *con,
                                    const lam_segment_options *so, const lam_infer_options *io,
                                    lam_error *err)
{
    lam_ladder L;
    make_ladder(&a->ladder, a->max_layers, a->thick_to, &L);
    lam_status st = lam_segment_classify(con, &L, a->substrate.noise, so, a->seg, err);
    if (!st)
        st = lam_segment_regions(con, so, a->seg, err);
    if (st)
        return st;
    free(a->results);
    a->count = a->seg->count;
    a->results = calloc(a->count ? a->count : 1, sizeof *a->results);
    if (!a->results)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate %zu region results", a->count);
    for (size_t i = 0; i < a->count; i++)
        lam_infer_region(&a->seg->regions[i], &a->ladder, a->thick_to, a->substrate.noise,
                         a->substrate.kappa, io, &a->results[i]);
    return LAM_OK;
}

lam_status lam_analyze(const char *path, const lam_setup *setup, const lam_analysis_options *opt,
                       lam_analysis **out, lam_error *err)
{
    lam_analysis_options defaults = lam_analysis_options_default();
    if (!opt)
        opt = &defaults;
    lam_analysis *a = calloc(1, sizeof *a);
    lam_image *img = NULL;
    lam_model *full = NULL, *fast = NULL;
    int *use = NULL;
    lam_fermi_scan *scan = NULL;
    lam_status st = LAM_OK;
    if (!a)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate an analysis");
    snprintf(a->file, sizeof a->file, "%s", path);
    if (opt->max_layers < 1 || opt->max_layers > 20) {
        st = lam_error_set(err, LAM_ERANGE, "--max-layers must be 1 to 20");
        goto fail;
    }
    a->max_layers = opt->max_layers;
    a->thick_to = LAM_MODEL_MAX_LAYERS; /* "thick" hypotheses reach 40 layers (~13 nm) */
    lam_load_options lo = opt->load;
    if (lo.transfer.kind == LAM_TRANSFER_AUTO && !lam_setup_is_default(setup, "encoding"))
        lo.transfer = setup->encoding;
    lo.keep_display8 = 1; /* 8-bit files: the report draws on the file's own codes */
    double t0 = lam_clock_seconds();
    if ((st = lam_image_load(path, &lo, &img, err)))
        goto fail;
    MARK(LAM_T_LOAD);
    a->width = img->width;
    a->height = img->height;
    a->transfer = img->transfer;
    a->bit_depth = img->bit_depth;
    a->clipped_pixels = img->clipped_count;
    a->um_per_px = setup->um_per_px;
    a->illumination_na = setup->illumination_na;
    a->fermi_ev = fabs(setup->sheet.fermi_ev);
    a->pupil = setup->pupil == LAM_PUPIL_SIN ? "sin" : "sin-cos";
    a->camera = setup->camera.kind == LAM_CAMERA_GAUSSIAN       ? "gaussian"
                : setup->camera.kind == LAM_CAMERA_SRGB_OBSERVER ? "srgb-observer"
                                                                : "table";
    lam_sheet_describe(&setup->sheet, a->conductivity, sizeof a->conductivity);
    a->defaulted_count = setup->defaulted_count;
    memcpy(a->defaulted, setup->defaulted, sizeof a->defaulted);
    size_t threads = opt->threads ? opt->threads : 1;
    lam_substrate_options so = opt->substrate;
    so.threads = threads;
    lam_segment_options sgo = opt->segment;
    sgo.threads = threads;
    a->display = img->display8; /* taken over, or NULL for 16-bit files */
    img->display8 = NULL;
    if (!a->display && !(a->display = display_copy(img, threads))) {
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate the display copy");
        goto fail;
    }
    MARK(LAM_T_DISPLAY);
    /* the ladder at the nominal oxide also tells the substrate from a flake
     * that covers most of the field */
    if ((st = lam_model_alloc(setup, a->thick_to, 0, &full, err)) ||
        (st = lam_model_alloc_fast(setup, a->max_layers, &fast, err)))
        goto fail;
    double nominal = lam_setup_oxide(setup);
    a->oxide.nominal = nominal;
    a->oxide.estimate = nominal;
    if (nominal < 0)
        nominal = 0;
    if ((st = lam_model_eval(full, nominal, setup->sheet.fermi_ev, &a->ladder, err)))
        goto fail;
    so.ladder = (const double (*)[3])&a->ladder.contrast[1];
    so.ladder_count = a->thick_to;
    if ((st = lam_substrate_estimate(img, &so, &a->substrate, err)))
        goto fail;
    MARK(LAM_T_SUBSTRATE);
    lam_contrast_in_place(img, &a->substrate, threads);
    if ((st = lam_contrast_denoise(img, threads, err)) ||
        (st = lam_segmentation_alloc(img->width, img->height, &a->seg, err)))
        goto fail;
    MARK(LAM_T_CONTRAST);
    lam_infer_options io = opt->infer;
    io.max_layers = a->max_layers;
    io.min_area_px = a->um_per_px > 0 ? opt->min_area_um2 / (a->um_per_px * a->um_per_px)
                                      : opt->min_area_px;
    a->infer = io;
    a->fermi_signed = setup->sheet.fermi_ev;
    MARK(LAM_T_MODEL);
    if ((st = segment_and_infer(a, img, &sgo, &io, err)))
        goto fail;
    MARK(LAM_T_SEGMENT);
    /* oxide: profile over confident, well-sampled regions */
    snprintf(a->oxide.method, sizeof a->oxide.method, "nominal (not fitted)");
    if (opt->fit_oxide && lam_setup_oxide(setup) >= 0) {
        use = calloc(a->count ? a->count : 1, sizeof *use);
        if (!use) {
            st = lam_error_set(err, LAM_ENOMEM, "cannot allocate");
            goto fail;
        }
        for (size_t i = 0; i < a->count; i++)
            use[i] = lam_analysis_region_fits_oxide(a, i);
        double est, sig, chi2min;
        size_t used;
        if ((st = lam_infer_oxide(fast, a->seg->regions, use, a->count, a->max_layers,
                                  a->substrate.noise, a->substrate.kappa, &io, nominal,
                                  opt->oxide_half_range_nm, setup->sheet.fermi_ev, &est, &sig,
                                  &used, &chi2min, err)))
            goto fail;
        a->oxide.regions_used = used;
        if (used) {
            a->oxide.fitted = 1;
            a->oxide.estimate = est;
            a->oxide.sigma = sig;
            snprintf(a->oxide.method, sizeof a->oxide.method,
                     "profile likelihood over %zu region(s), nominal +- %.0f nm", used,
                     opt->oxide_half_range_nm);
            if ((st = lam_model_eval(full, est, setup->sheet.fermi_ev, &a->ladder, err)))
                goto fail;
            /* a ladder shifted by more than 4 nm can move pixels between
             * classes: segment again (below that the classes are stable) */
            if (fabs(est - nominal) > 4.0 && (st = segment_and_infer(a, img, &sgo, &io, err)))
                goto fail;
            if (fabs(est - nominal) <= 4.0)
                for (size_t i = 0; i < a->count; i++)
                    lam_infer_region(&a->seg->regions[i], &a->ladder, a->thick_to,
                                     a->substrate.noise, a->substrate.kappa, &io, &a->results[i]);
        } else {
            snprintf(a->oxide.method, sizeof a->oxide.method,
                     "nominal (no region usable for a fit)");
        }
    }
    MARK(LAM_T_OXIDE);
    a->oxide.pass = fabs(a->oxide.estimate - a->oxide.nominal) <= opt->oxide_tolerance_nm;
    for (size_t i = 0; i < a->count; i++) {
        lam_region_result *r = &a->results[i];
        const lam_region_stats *rs = &a->seg->regions[i];
        lam_usable_rectangle(a->seg, rs, r->usable_px, r->usable_at);
        if (opt->fit_fermi && (r->layers == 1 || r->layers == 2) && rs->interior >= 100) {
            if (!scan && (st = lam_fermi_scan_alloc(fast, a->oxide.estimate, &scan, err)))
                goto fail;
            lam_infer_fermi(scan, rs, r->layers, a->substrate.noise, a->substrate.kappa, &io,
                            &r->fermi);
        }
    }
    lam_fermi_scan_free(scan);
    MARK(LAM_T_REGIONS);
    free(use);
    lam_model_free(full);
    lam_model_free(fast);
    lam_image_free(img);
    *out = a;
    return LAM_OK;
fail:
    lam_fermi_scan_free(scan);
    free(use);
    lam_model_free(full);
    lam_model_free(fast);
    lam_image_free(img);
    lam_analysis_free(a);
    lam_error_set_file(err, path);
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
        for (int c = 0; c < 3; c++)
            bare[c] = P->substrate[c];
    double (*q)[3] = malloc((images ? images : 1) * sizeof *q);
    if (!st && !q)
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate");
    for (size_t j = 0; !st && j < images; j++) {
        double b[3];
        lam_substrate_eval(&an[j]->substrate, (double)an[j]->width / 2, (double)an[j]->height / 2, b);
        for (int c = 0; c < 3; c++)
            q[j][c] = b[c] / ref[c];
    }
    for (size_t g = 0; g < n && !st; g++) {
        if ((st = lam_model_eval(m, grid[g], setup->sheet.fermi_ev, P, err)))
            break;
        chi2[g] = 0;
        for (size_t j = 0; j < images; j++)
            for (int c = 0; c < 3; c++) {
                double r = P->substrate[c] / bare[c], d = (q[j][c] - r) / (stability * q[j][c]);
                chi2[g] += d * d;
            }
    }
    free(q);
    free(P);
    lam_model_free(m);
    return st;
}
