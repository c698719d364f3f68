/* calibrate.c - measuring labelled (or latent) regions and fitting a setup
 * profile to them with the analysis' joint estimate. */
#include "lamina/contrast.h"
#include "lamina/calibrate.h"
#include "lamina/analyze.h"
#include "lamina/infer.h"
#include "lamina/labels.h"
#include "lamina/model.h"
#include "lamina/segment.h"
#include "lamina/substrate.h"
#include "lamina/substrate_colour.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <gsl/gsl_cdf.h>

#define MIN_LABEL_INTERIOR 50
#define REFUSE_PVALUE 1e-3
#define CONSTRAINED_FRACTION 0.5

void lam_calib_set_init(lam_calib_set *s)
{
    memset(s, 0, sizeof *s);
}

void lam_calib_set_clear(lam_calib_set *s)
{
    if (!s)
        return;
    for (size_t i = 0; i < s->images; i++)
        free(s->image[i].regions);
    memset(s, 0, sizeof *s);
}

void lam_calib_result_clear(lam_calib_result *r)
{
    free(r->residual);
    r->residual = NULL;
    r->residuals = 0;
}

static lam_calib_image *new_image(lam_calib_set *set, const char *path, lam_error *err)
{
    if (set->images >= LAM_CALIB_MAX_IMAGES) {
        lam_error_set(err, LAM_ETOOBIG, "at most %d calibration images", LAM_CALIB_MAX_IMAGES);
        return NULL;
    }
    lam_calib_image *im = &set->image[set->images];
    memset(im, 0, sizeof *im);
    snprintf(im->path, sizeof im->path, "%s", path);
    im->known_oxide = NAN;
    return im;
}

/* Regions of a label map, measured on the image's contrast map. */
static lam_status labelled_regions(const lam_contrast_map *contrast, const lam_substrate *sub,
                                   const uint8_t *labels, size_t channels, lam_calib_image *im,
                                   lam_error *err)
{
    size_t w = contrast->width, h = contrast->height;
    lam_segmentation *seg = NULL;
    lam_status st = lam_segmentation_alloc(w, h, &seg, err);
    if (st)
        return st;
    for (size_t k = 0; k < w * h; k++)
        seg->cls[k] = labels[k] >= 1 && labels[k] <= 40 ? labels[k] : (labels[k] ? LAM_CLASS_NONE : 0);
    lam_segment_options sgo = lam_segment_options_default();
    if (!(st = lam_segment_regions(contrast, &sgo, seg, err)))
        im->regions = calloc(seg->count ? seg->count : 1, sizeof *im->regions);
    if (!st && !im->regions)
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate regions");
    for (size_t i = 0; i < (st ? 0 : seg->count); i++) {
        const lam_region_stats *r = &seg->regions[i];
        if (r->interior < MIN_LABEL_INTERIOR)
            continue;
        lam_est_region *x = &im->regions[im->count++];
        lam_region_measure(r, sub->noise, sub->kappa, channels, x);
        x->use = 1;
        x->known_layers = r->cls;
    }
    if (!st && !im->count)
        st = lam_error_set(err, LAM_ERANGE, "no labelled region of %d interior pixels or more",
                           MIN_LABEL_INTERIOR);
    lam_segmentation_free(seg);
    return st;
}

/* Load an image in the setup's encoding and estimate its bare substrate
 * (*img NULL on error). */
static lam_status load_with_substrate(const char *path, const lam_setup *setup, lam_image **img,
                                      lam_substrate *sub, lam_error *err)
{
    lam_load_options lo = lam_load_options_default();
    if (!lam_setup_is_default(setup, "encoding"))
        lo.transfer = setup->encoding;
    lam_substrate_options so = lam_substrate_options_default();
    *img = NULL;
    lam_status st = lam_image_load(path, &lo, img, err);
    if (!st)
        st = lam_substrate_estimate(*img, &so, sub, err);
    if (st) {
        lam_image_free(*img);
        *img = NULL;
    }
    return st;
}

lam_status lam_calib_add_second_chip(lam_calib_set *set, const char *path, double oxide_nm,
                                     const lam_setup *setup, lam_error *err)
{
    if (!(oxide_nm > 0))
        return lam_error_set(err, LAM_EINVAL, "the second chip's oxide must be positive");
    lam_image *img = NULL;
    lam_substrate sub;
    lam_status st = load_with_substrate(path, setup, &img, &sub, err);
    lam_image_free(img);
    if (st) {
        lam_error_set_file(err, path);
        return st;
    }
    lam_calib_colour_chip *c = &set->second_chip;
    snprintf(c->path, sizeof c->path, "%s", path);
    c->present = 1;
    c->oxide_nm = oxide_nm;
    memcpy(c->substrate_level, sub.level, sizeof sub.level);
    return LAM_OK;
}

lam_status lam_calib_measure_labels(lam_calib_set *set, const char *path, const uint8_t *labels,
                                    size_t w, size_t h, const lam_setup *setup, lam_error *err)
{
    lam_calib_image *im = new_image(set, path, err);
    if (!im)
        return LAM_ETOOBIG;
    lam_image *img = NULL;
    lam_substrate sub;
    lam_status st = load_with_substrate(path, setup, &img, &sub, err);
    if (!st && (img->width != w || img->height != h))
        st = lam_error_set(err, LAM_ESIZE, "labels are %zux%zu, the image %zux%zu", w, h,
                           img->width, img->height);
    if (!st) {
        memcpy(im->substrate_level, sub.level, sizeof sub.level);
        lam_contrast_map contrast;
        lam_contrast_in_place(img, &sub, 1);
        lam_contrast_compact(img, &contrast, 1);
        st = labelled_regions(&contrast, &sub, labels, setup->camera.channels, im, err);
        lam_contrast_map_free(&contrast);
    }
    lam_image_free(img);
    if (st) {
        free(im->regions);
        lam_error_set_file(err, path);
        return st;
    }
    set->images++;
    return LAM_OK;
}

lam_status lam_calib_measure_self(lam_calib_set *set, const char *path, const lam_setup *setup,
                                  lam_error *err)
{
    lam_calib_image *im = new_image(set, path, err);
    if (!im)
        return LAM_ETOOBIG;
    lam_analysis_options opt = lam_analysis_options_default();
    opt.fit_fermi = 0;
    lam_analysis *a = NULL;
    lam_status st = lam_analyze(path, setup, &opt, &a, err);
    if (st)
        return st;
    memcpy(im->substrate_level, a->substrate.level, sizeof a->substrate.level);
    im->regions = malloc((a->count ? a->count : 1) * sizeof *im->regions);
    if (!im->regions)
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate regions");
    for (size_t i = 0; i < a->count && !st; i++)
        if (a->measured[i].use)
            im->regions[im->count++] = a->measured[i];
    lam_analysis_free(a);
    if (!st && !im->count)
        st = lam_error_set(err, LAM_ERANGE, "no region large enough for self-calibration");
    if (st) {
        free(im->regions);
        lam_error_set_file(err, path);
        return st;
    }
    set->images++;
    return LAM_OK;
}

/* Whether a label map's code marks a flake (a layer count or another
 * labelled class), not the substrate (0) or "ignore" (254, 255). */
static int labelled_flake(uint8_t code)
{
    return code > 0 && code < 254;
}

/* Regions of the analysis that touch no labelled flake, appended to 'im'
 * with latent layer counts. */
static lam_status append_unlabelled(const lam_analysis *a, const uint8_t *labels,
                                    lam_calib_image *im, lam_error *err)
{
    uint8_t *touched = calloc(a->count ? a->count : 1, 1);
    lam_est_region *grown = realloc(im->regions, (im->count + a->count + 1) * sizeof *grown);
    if (!touched || !grown) {
        free(touched);
        return lam_error_set(err, LAM_ENOMEM, "cannot hold the image's unlabelled regions");
    }
    im->regions = grown;
    size_t n = a->width * a->height;
    for (size_t k = 0; k < n; k++) {
        uint32_t id = a->seg->label[k];
        if (id && labelled_flake(labels[k]))
            touched[id - 1] = 1;
    }
    for (size_t i = 0; i < a->count; i++)
        if (a->measured[i].use && !touched[i]) {
            lam_est_region *x = &im->regions[im->count++];
            *x = a->measured[i];
            x->known_layers = 0;
        }
    free(touched);
    return LAM_OK;
}

lam_status lam_calib_add_unlabelled(lam_calib_set *set, size_t image, const uint8_t *labels,
                                    size_t w, size_t h, const lam_setup *setup, lam_error *err)
{
    if (image >= set->images)
        return lam_error_set(err, LAM_EINVAL, "no calibration image %zu", image);
    lam_calib_image *im = &set->image[image];
    lam_analysis_options opt = lam_analysis_options_default();
    opt.fit_fermi = 0;
    lam_analysis *a = NULL;
    lam_status st = lam_analyze(im->path, setup, &opt, &a, err);
    if (!st && (a->width != w || a->height != h))
        st = lam_error_set(err, LAM_ESIZE, "labels are %zux%zu, the image %zux%zu", w, h,
                           a->width, a->height);
    if (!st)
        st = append_unlabelled(a, labels, im, err);
    lam_analysis_free(a);
    if (st)
        lam_error_set_file(err, im->path);
    return st;
}

/* ---- the fit ---- */

static lam_status build_estimate(const lam_setup *start, const lam_calib_set *set,
                                 const double *known_oxide, double known_na, lam_estimate **out,
                                 lam_error *err)
{
    int top = 6;
    for (size_t j = 0; j < set->images; j++)
        for (size_t i = 0; i < set->image[j].count; i++)
            top = set->image[j].regions[i].known_layers > top ? set->image[j].regions[i].known_layers : top;
    lam_estimate_options eo = lam_estimate_options_default();
    eo.max_layers = (size_t)(top > 20 ? 20 : top);
    lam_status st = lam_estimate_alloc(start, start->camera.channels, &eo, out, err);
    if (st)
        return st;
    if (isfinite(known_na))
        lam_estimate_set_prior(*out, LAM_NU_NA, known_na, 0, "given (--known-na)");
    double nominal = lam_setup_oxide(start) >= 0 ? lam_setup_oxide(start) : 0;
    for (size_t j = 0; j < set->images && !st; j++) {
        const lam_calib_image *im = &set->image[j];
        double known = known_oxide ? known_oxide[j] : NAN;
        st = lam_estimate_add_image(*out, im->regions, im->count, isfinite(known) ? known : nominal,
                                    start->sigma.oxide_nm, NULL, err);
        if (!st && isfinite(known)) {
            (*out)->image[j].oxide.fitted = 0;
            (*out)->image[j].oxide.source = "given (--known-oxide)";
        }
    }
    return st;
}

static void take_value(lam_calib_value *v, const lam_nuisance *n)
{
    v->name = n->name;
    v->value = n->value;
    v->sigma = n->fitted ? n->sigma : 0;
    v->prior_sd = n->prior_sd;
    v->fitted = n->fitted;
    v->constrained = n->fitted && isfinite(n->sigma) && n->sigma < CONSTRAINED_FRACTION * n->prior_sd;
}

/* Residual of every labelled region against the fitted ladder. */
static lam_status label_residuals(const lam_estimate *e, lam_model *m, lam_calib_result *res,
                                  lam_error *err)
{
    size_t n = 0;
    for (size_t j = 0; j < e->images; j++)
        for (size_t i = 0; i < e->image[j].count; i++)
            n += e->image[j].regions[i].known_layers > 0;
    res->residual = calloc(n ? n : 1, sizeof *res->residual);
    lam_prediction *P = malloc(sizeof *P);
    lam_status st = res->residual && P ? LAM_OK
                                       : lam_error_set(err, LAM_ENOMEM, "cannot allocate residuals");
    for (size_t j = 0; j < e->images && !st; j++) {
        if ((st = lam_estimate_ladder(e, j, m, P, err)))
            break;
        for (size_t i = 0; i < e->image[j].count; i++) {
            const lam_est_region *r = &e->image[j].regions[i];
            if (r->known_layers <= 0)
                continue;
            lam_calib_residual *x = &res->residual[res->residuals++];
            x->image = j, x->region = i, x->layers = r->known_layers;
            for (size_t c = 0; c < e->channels; c++) {
                x->measured[c] = r->mean[c];
                x->model[c] = P->contrast[r->known_layers][c];
                x->sigma[c] = sqrt(r->var[c] + lam_estimate_floor_var(e, c, r->mean[c]));
                double z = (x->measured[c] - x->model[c]) / x->sigma[c];
                x->chi2 += z * z;
            }
            x->pvalue = gsl_cdf_chisq_Q(x->chi2, (double)e->channels);
            res->chi2 += x->chi2;
            res->dof += (double)e->channels;
        }
    }
    free(P);
    return st;
}

/* The profile: the start setup with the constrained values and every
 * fitted spread. */
static void write_profile(const lam_estimate *e, const lam_setup *start, lam_calib_result *res)
{
    lam_setup *s = &res->setup;
    *s = *start;
    s->substrate_colour.oxide_nm = NAN; /* a start's colour belongs to its own fit */
    s->substrate_colour.second_oxide_nm = NAN;
    const lam_nuisance *sh = e->shared;
    s->sheet.continuum = sh[LAM_NU_CONTINUUM].value;
    s->sheet.resonance = sh[LAM_NU_RESONANCE].value;
    s->sheet.background = sh[LAM_NU_BACKGROUND].value;
    s->sigma.continuum = sh[LAM_NU_CONTINUUM].sigma;
    s->sigma.resonance = sh[LAM_NU_RESONANCE].sigma;
    s->sigma.background = sh[LAM_NU_BACKGROUND].sigma;
    s->illumination_na = sh[LAM_NU_NA].value;
    s->sigma.na = sh[LAM_NU_NA].fitted ? sh[LAM_NU_NA].sigma : 0;
    double ssd = 0, gsd = 0, wsd = 0;
    for (size_t c = 0; c < e->channels; c++) {
        s->camera_shift_nm[c] = sh[LAM_NU_SHIFT + c].value;
        s->camera_gain[c] = exp(sh[LAM_NU_GAIN + c].value);
        s->camera_width[c] = exp(sh[LAM_NU_WIDTH + c].value);
        ssd = fmax(ssd, sh[LAM_NU_SHIFT + c].sigma);
        gsd = fmax(gsd, sh[LAM_NU_GAIN + c].sigma);
        wsd = fmax(wsd, sh[LAM_NU_WIDTH + c].sigma);
    }
    s->sigma.shift_nm = ssd;
    s->sigma.log_gain = gsd;
    s->sigma.log_width = wsd;
}

/* An image's oxide sd: given, or fitted with its index share. */
static double oxide_sd(const lam_estimate *e, size_t j)
{
    const lam_nuisance *o = &e->image[j].oxide;
    double index = LAM_OXIDE_INDEX_REL * o->value;
    return o->fitted ? sqrt(o->sigma * o->sigma + index * index) : LAM_KNOWN_OXIDE_SD_NM;
}

/* The second chip given for the colour (lam_calib_add_second_chip). */
static lam_status record_given_chip(const lam_calib_colour_chip *c, size_t channels,
                                    lam_substrate_colour *sc, lam_error *err)
{
    double apart = fabs(c->oxide_nm - sc->oxide_nm);
    if (!(apart >= LAM_COLOUR_SECOND_MIN_NM && apart <= LAM_COLOUR_SECOND_MAX_NM))
        return lam_error_set(err, LAM_ERANGE,
                             "%s: the second chip's oxide %.1f nm is %.1f nm from the first "
                             "chip's %.1f nm; it measures the colour's change from %g to %g nm "
                             "apart",
                             c->path, c->oxide_nm, apart, sc->oxide_nm, LAM_COLOUR_SECOND_MIN_NM,
                             LAM_COLOUR_SECOND_MAX_NM);
    lam_status st = lam_substrate_colour_record(c->substrate_level, channels, sc->second_ln_level,
                                                err);
    if (st) {
        lam_error_set_file(err, c->path);
        return st;
    }
    sc->second_oxide_nm = c->oxide_nm;
    sc->second_oxide_sd_nm = LAM_KNOWN_OXIDE_SD_NM;
    return LAM_OK;
}

/* A second chip for the colour's change among the calibration's images:
 * the one farthest from the first in oxide, within the gauge's range,
 * whose oxide is well known. */
static void record_second(const lam_estimate *e, const lam_calib_set *set, size_t first,
                          lam_substrate_colour *sc)
{
    size_t pick = first;
    double d0 = e->image[first].oxide.value, far = 0;
    for (size_t j = 0; j < e->images; j++) {
        double apart = fabs(e->image[j].oxide.value - d0);
        if (j != first && oxide_sd(e, j) <= LAM_COLOUR_SECOND_SD_NM &&
            apart >= LAM_COLOUR_SECOND_MIN_NM && apart <= LAM_COLOUR_SECOND_MAX_NM && apart > far)
            pick = j, far = apart;
    }
    lam_error quiet;
    if (pick == first || lam_substrate_colour_record(set->image[pick].substrate_level,
                                                     e->channels, sc->second_ln_level, &quiet))
        return;
    sc->second_oxide_nm = e->image[pick].oxide.value;
    sc->second_oxide_sd_nm = oxide_sd(e, pick);
}

/* The substrate's colour at the oxide of the image whose oxide is best
 * known (given, else the fit's with its index share), and at a second
 * chip's when the calibration has one. */
static lam_status record_colour(const lam_estimate *e, const lam_calib_set *set,
                                lam_calib_result *res, lam_error *err)
{
    if (e->channels < 3)
        return set->second_chip.present
                   ? lam_error_set(err, LAM_EINVAL, "%s: a second chip's colour needs three "
                                   "channels", set->second_chip.path)
                   : LAM_OK;
    size_t best = 0;
    double best_sd = INFINITY;
    for (size_t j = 0; j < e->images; j++)
        if (oxide_sd(e, j) < best_sd)
            best = j, best_sd = oxide_sd(e, j);
    if (!isfinite(best_sd))
        return LAM_OK;
    lam_substrate_colour *sc = &res->setup.substrate_colour;
    lam_status st = lam_substrate_colour_record(set->image[best].substrate_level, e->channels,
                                                sc->ln_level, err);
    if (!st) {
        sc->oxide_nm = e->image[best].oxide.value;
        sc->oxide_sd_nm = best_sd;
        sc->second_oxide_nm = NAN;
        if (set->second_chip.present)
            st = record_given_chip(&set->second_chip, e->channels, sc, err);
        else
            record_second(e, set, best, sc);
    }
    return st;
}

static lam_status check_labels(const lam_calib_result *res, const lam_calib_set *set,
                               lam_error *err)
{
    const lam_calib_residual *worst = NULL;
    for (size_t k = 0; k < res->residuals; k++)
        if (!worst || res->residual[k].pvalue < worst->pvalue)
            worst = &res->residual[k];
    if (!worst || worst->pvalue >= REFUSE_PVALUE)
        return LAM_OK;
    return lam_error_set(err, LAM_ERANGE,
                         "the fitted model cannot reproduce a %dL label in %s (chi2 %.1f, p = "
                         "%.1e; measured contrast %.4f, model %.4f in channel 1): check the "
                         "label, the oxide and the image encoding; no profile written",
                         worst->layers, set->image[worst->image].path, worst->chi2, worst->pvalue,
                         worst->measured[0], worst->model[0]);
}

lam_status lam_calibrate(const lam_setup *start, const lam_calib_set *set,
                         const double *known_oxide, double known_na, lam_calib_result *res,
                         lam_error *err)
{
    memset(res, 0, sizeof *res);
    if (!set->images)
        return lam_error_set(err, LAM_EINVAL, "no calibration image");
    lam_model *m = NULL;
    lam_estimate *e = NULL;
    lam_status st = lam_model_alloc_fast(start, LAM_MODEL_MAX_LAYERS, &m, err);
    if (!st)
        st = build_estimate(start, set, known_oxide, known_na, &e, err);
    if (!st)
        st = lam_estimate_fit(e, m, m, err);
    if (!st)
        st = label_residuals(e, m, res, err);
    if (!st) {
        res->channels = e->channels;
        res->images = e->images;
        res->labelled = res->residuals;
        for (size_t j = 0; j < e->images; j++)
            for (size_t i = 0; i < e->image[j].count; i++)
                res->latent += e->image[j].regions[i].use && !e->image[j].regions[i].known_layers;
        res->floor_rel = e->floor_rel;
        for (int k = 0; k < LAM_NU_COUNT; k++)
            take_value(&res->shared[k], &e->shared[k]);
        for (size_t j = 0; j < e->images; j++)
            take_value(&res->oxide[j], &e->image[j].oxide);
        write_profile(e, start, res);
        st = record_colour(e, set, res, err);
    }
    if (!st)
        st = check_labels(res, set, err);
    lam_estimate_free(e);
    lam_model_free(m);
    if (st)
        lam_calib_result_clear(res);
    return st;
}

/* A point label takes the whole region of the image's segmentation that
 * contains it; the analysis is made once, for the first point. */
static lam_status label_point(const lam_label *L, size_t idx, const char *image_path,
                              const lam_setup *setup, size_t w, size_t h, lam_analysis **a,
                              uint8_t *map, lam_error *err)
{
    double x = L->x[0], y = L->y[0];
    if (!(x >= 0 && y >= 0 && x < (double)w && y < (double)h))
        return lam_error_set(err, LAM_ERANGE, "labels[%zu].point lies outside the image", idx);
    if (!*a) {
        lam_analysis_options opt = lam_analysis_options_default();
        opt.fit_fermi = 0;
        lam_status st = lam_analyze(image_path, setup, &opt, a, err);
        if (st)
            return st;
    }
    uint32_t id = (*a)->seg->label[(size_t)y * w + (size_t)x];
    if (!id)
        return lam_error_set(err, LAM_ERANGE,
                             "labels[%zu].point (%g, %g) is on no region "
                             "(an edge or the substrate)",
                             idx, x, y);
    for (size_t k = 0; k < w * h; k++)
        if ((*a)->seg->label[k] == id)
            map[k] = (uint8_t)L->layers;
    return LAM_OK;
}

lam_status lam_calib_labels_from_json(const char *json_path, const char *image_path,
                                      const lam_setup *setup, size_t w, size_t h, uint8_t *map,
                                      lam_error *err)
{
    lam_labels labels;
    lam_status st = lam_labels_load(json_path, &labels, err);
    if (st)
        return st;
    memset(map, 0, w * h);
    lam_analysis *a = NULL;
    for (size_t i = 0; i < labels.count && !st; i++) {
        const lam_label *L = &labels.items[i];
        if (L->kind == LAM_LABEL_POLYGON)
            lam_label_fill(L, map, w, h);
        else
            st = label_point(L, i, image_path, setup, w, h, &a, map, err);
    }
    lam_analysis_free(a);
    lam_labels_clear(&labels);
    if (st)
        lam_error_set_file(err, json_path);
    return st;
}
