/* report_json.c - the analysis as "lamina-analysis/1" JSON: image, model,
 * the estimated nuisance parameters with their uncertainties, substrate and
 * oxide, doping statement, regions with posteriors, summary, warnings. */
#include "lamina/report.h"
#include "lamina/outfile.h"
#include "lamina/version.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

static cJSON *vec(const double *v, size_t n)
{
    return cJSON_CreateDoubleArray(v, (int)n);
}

static cJSON *num_or_null(double v)
{
    return isfinite(v) ? cJSON_CreateNumber(v) : cJSON_CreateNull();
}

static double round4(double v)
{
    return round(v * 1e4) / 1e4;
}

/* Geometry is written to 1e-3 (pixels, um, um^2): a value with few decimal
 * digits survives cJSON's print and parse bit for bit (its printer can drop
 * the last binary digit of a full-precision double), so a catalogue merged
 * from written files equals the one built in memory. */
static double round3(double v)
{
    return round(v * 1e3) / 1e3;
}

static void add_image(cJSON *root, const lam_analysis *a)
{
    cJSON *im = cJSON_AddObjectToObject(root, "image");
    const char *base = strrchr(a->file, '/');
    cJSON_AddStringToObject(im, "file", base ? base + 1 : a->file);
    cJSON_AddStringToObject(im, "path", a->file);
    if (a->content_hash[0])
        cJSON_AddStringToObject(im, "content_hash", a->content_hash);
    cJSON_AddNumberToObject(im, "width", (double)a->width);
    cJSON_AddNumberToObject(im, "height", (double)a->height);
    cJSON_AddNumberToObject(im, "channels", (double)a->channels);
    cJSON_AddStringToObject(im, "encoding", lam_transfer_name(&a->transfer));
    cJSON_AddNumberToObject(im, "bit_depth", a->bit_depth);
    cJSON_AddItemToObject(im, "um_per_px", a->um_per_px > 0 ? cJSON_CreateNumber(a->um_per_px)
                                                            : cJSON_CreateNull());
    cJSON_AddItemToObject(im, "um_per_px_source",
                          !(a->um_per_px > 0)     ? cJSON_CreateNull()
                          : a->um_per_px_from_file ? cJSON_CreateString("file")
                                                  : cJSON_CreateString("setup"));
    cJSON_AddNumberToObject(im, "saturated_pixels", (double)a->clipped_pixels);
}

static void add_model(cJSON *root, const lam_analysis *a)
{
    cJSON *model = cJSON_AddObjectToObject(root, "model");
    cJSON_AddStringToObject(model, "conductivity", a->conductivity);
    cJSON_AddNumberToObject(model, "illumination_na_setup", a->illumination_na);
    cJSON_AddStringToObject(model, "pupil_weight", a->pupil);
    cJSON_AddStringToObject(model, "camera", a->camera);
    cJSON_AddNumberToObject(model, "max_layers", (double)a->max_layers);
    cJSON_AddStringToObject(model, "prior",
                            "equal for each of 1..K layers and for 'thicker' (spread evenly "
                            "over K+1..40); 0.1 each for bare substrate and unmodelled");
    cJSON *dl = cJSON_AddArrayToObject(model, "defaults_used");
    for (size_t i = 0; i < a->defaulted_count; i++)
        cJSON_AddItemToArray(dl, cJSON_CreateString(a->defaulted[i]));
    cJSON *lad = cJSON_AddArrayToObject(model, "ladder");
    for (size_t N = 1; N <= a->max_layers; N++)
        cJSON_AddItemToArray(lad, vec(a->ladder.contrast[N], a->channels));
    const lam_estimate *e = a->estimate;
    cJSON *fl = cJSON_AddObjectToObject(model, "floor");
    cJSON_AddItemToObject(fl, "absolute", vec(e->floor_abs, a->channels));
    cJSON_AddNumberToObject(fl, "relative", round4(e->floor_rel));
}

static cJSON *nuisance_json(const lam_nuisance *n, int pooled)
{
    cJSON *o = cJSON_CreateObject();
    cJSON_AddNumberToObject(o, "value", round4(n->value));
    cJSON_AddItemToObject(o, "sigma", n->fitted ? num_or_null(round4(n->sigma)) : cJSON_CreateNull());
    double pr[2] = {round4(n->prior_mean), round4(n->prior_sd)};
    cJSON_AddItemToObject(o, "prior", vec(pr, 2));
    cJSON_AddStringToObject(o, "status", !n->fitted ? "given (fixed)"
                                         : pooled    ? "fitted (prior pooled over the run)"
                                                     : "fitted");
    cJSON_AddStringToObject(o, "source", n->source);
    return o;
}

static void add_estimates(cJSON *root, const lam_analysis *a)
{
    const lam_estimate *e = a->estimate;
    cJSON *es = cJSON_AddObjectToObject(root, "estimates");
    cJSON *resp = cJSON_AddObjectToObject(es, "graphene_response");
    cJSON_AddItemToObject(resp, "continuum", nuisance_json(&e->shared[LAM_NU_CONTINUUM], a->prior_pooled));
    cJSON_AddItemToObject(resp, "resonance", nuisance_json(&e->shared[LAM_NU_RESONANCE], a->prior_pooled));
    cJSON_AddItemToObject(resp, "background", nuisance_json(&e->shared[LAM_NU_BACKGROUND], a->prior_pooled));
    cJSON_AddItemToObject(es, "illumination_na", nuisance_json(&e->shared[LAM_NU_NA], a->prior_pooled));
    cJSON *sh = cJSON_AddArrayToObject(es, "channel_shift_nm");
    cJSON *gn = cJSON_AddArrayToObject(es, "log_contrast_gain");
    cJSON *wd = cJSON_AddArrayToObject(es, "log_channel_width");
    cJSON *of = cJSON_AddArrayToObject(es, "contrast_offset");
    for (size_t c = 0; c < a->channels; c++) {
        cJSON_AddItemToArray(sh, nuisance_json(&e->shared[LAM_NU_SHIFT + c], a->prior_pooled));
        cJSON_AddItemToArray(gn, nuisance_json(&e->shared[LAM_NU_GAIN + c], a->prior_pooled));
        cJSON_AddItemToArray(wd, nuisance_json(&e->shared[LAM_NU_WIDTH + c], a->prior_pooled));
        cJSON_AddItemToArray(of, nuisance_json(&e->shared[LAM_NU_OFFSET + c], a->prior_pooled));
    }
    cJSON_AddItemToObject(es, "oxide_nm", nuisance_json(&e->image[0].oxide, 0));
    cJSON_AddNumberToObject(es, "pooled_over_images", (double)a->prior_images);
    cJSON_AddNumberToObject(es, "iterations", (double)e->iterations);
}

static void add_substrate(cJSON *root, const lam_analysis *a)
{
    cJSON *sub = cJSON_AddObjectToObject(root, "substrate");
    cJSON_AddItemToObject(sub, "level", vec(a->substrate.level, a->channels));
    cJSON_AddItemToObject(sub, "noise", vec(a->substrate.noise, a->channels));
    cJSON_AddNumberToObject(sub, "flatfield_falloff", a->substrate.falloff);
    cJSON_AddNumberToObject(sub, "area_fraction", a->substrate.fraction);
    cJSON_AddNumberToObject(sub, "noise_correlation", a->substrate.kappa);
    cJSON *ox = cJSON_AddObjectToObject(sub, "oxide_nm");
    cJSON_AddItemToObject(ox, "nominal", num_or_null(a->oxide.nominal));
    cJSON_AddItemToObject(ox, "estimate", a->oxide.fitted ? num_or_null(round4(a->oxide.estimate))
                                                         : cJSON_CreateNull());
    cJSON_AddItemToObject(ox, "sigma", a->oxide.fitted ? num_or_null(round4(a->oxide.sigma))
                                                      : cJSON_CreateNull());
    cJSON_AddStringToObject(ox, "method", a->oxide.method);
    cJSON_AddNumberToObject(ox, "regions_used", (double)a->oxide.regions_used);
    cJSON_AddItemToObject(ox, "pass", a->oxide.fitted ? cJSON_CreateBool(a->oxide.pass)
                                                      : cJSON_CreateNull());
    const lam_colour_oxide *c = &a->oxide.colour;
    if (c->checked) {
        cJSON *co = cJSON_AddObjectToObject(ox, "from_colour");
        cJSON_AddItemToObject(co, "estimate", num_or_null(round4(c->estimate)));
        cJSON_AddItemToObject(co, "sigma", num_or_null(round4(c->sigma)));
        cJSON_AddItemToObject(co, "chi2", num_or_null(round4(c->chi2)));
        cJSON_AddItemToObject(co, "reference", num_or_null(c->reference_nm));
        cJSON_AddBoolToObject(co, "used", c->used);
        if (c->note[0])
            cJSON_AddStringToObject(co, "note", c->note);
    }
}

static void add_probabilities(cJSON *o, const lam_region_result *r, size_t K)
{
    cJSON *p = cJSON_AddObjectToObject(o, "p_layers");
    for (size_t N = 1; N <= K; N++)
        if (r->p[N] >= 1e-4) {
            char k[8];
            snprintf(k, sizeof k, "%zu", N);
            cJSON_AddNumberToObject(p, k, round4(r->p[N]));
        }
    if (r->p[0] >= 1e-4)
        cJSON_AddNumberToObject(p, "0", round4(r->p[0]));
    if (r->p[LAM_P_THICK(K)] >= 1e-4)
        cJSON_AddNumberToObject(p, "thick", round4(r->p[LAM_P_THICK(K)]));
    if (r->p[LAM_P_UNMODELLED(K)] >= 1e-4)
        cJSON_AddNumberToObject(p, "unmodelled", round4(r->p[LAM_P_UNMODELLED(K)]));
    cJSON_AddNumberToObject(o, "p_label", round4(r->p_label));
}

static void add_fermi(cJSON *o, const lam_fermi_estimate *f)
{
    if (!f->evaluated) {
        cJSON_AddNullToObject(o, "fermi_eV");
        return;
    }
    cJSON *j = cJSON_AddObjectToObject(o, "fermi_eV");
    cJSON_AddBoolToObject(j, "constrained", f->constrained);
    cJSON_AddItemToObject(j, "estimate", num_or_null(f->estimate));
    cJSON_AddItemToObject(j, "lo", num_or_null(f->lo));
    cJSON_AddItemToObject(j, "hi", num_or_null(f->hi));
    cJSON_AddItemToObject(j, "upper_limit", f->constrained ? cJSON_CreateNull() : num_or_null(f->upper));
    cJSON_AddStringToObject(j, "interval", f->constrained
                                               ? "posterior median and 95 % interval (Pauli blocking seen)"
                                               : "95 % upper limit: no Pauli blocking seen");
}

static void add_geometry(cJSON *o, const lam_analysis *a, const lam_region_result *r,
                         const lam_region_stats *s)
{
    cJSON_AddNumberToObject(o, "area_px", lam_region_area(s));
    double u2 = a->um_per_px * a->um_per_px;
    cJSON_AddItemToObject(o, "area_um2", a->um_per_px > 0 ? cJSON_CreateNumber(round3(lam_region_area(s) * u2))
                                                         : cJSON_CreateNull());
    double bb[4] = {(double)s->bbox[0], (double)s->bbox[1], (double)s->bbox[2], (double)s->bbox[3]};
    cJSON_AddItemToObject(o, "bbox", vec(bb, 4));
    double cen[2] = {round3(s->sx / (double)s->area), round3(s->sy / (double)s->area)};
    cJSON_AddItemToObject(o, "centroid", vec(cen, 2));
    double upx[4] = {(double)r->usable_at[0], (double)r->usable_at[1], (double)r->usable_px[0],
                     (double)r->usable_px[1]};
    cJSON_AddItemToObject(o, "usable_rect_px", vec(upx, 4));
    if (a->um_per_px > 0 && r->usable_px[0]) {
        double uum[2] = {round3(upx[2] * a->um_per_px), round3(upx[3] * a->um_per_px)};
        cJSON_AddItemToObject(o, "usable_rect_um", vec(uum, 2));
    } else {
        cJSON_AddNullToObject(o, "usable_rect_um");
    }
}

/* ---- continuous-thickness crystals (hBN, issue 14): each region's
 * thickness_nm {estimate, lo, hi, probability, order_ambiguous, modes} ---- */
static void add_thickness(cJSON *o, const lam_thickness_result *t)
{
    if (!t->evaluated) {
        cJSON_AddNullToObject(o, "thickness_nm");
        return;
    }
    cJSON *j = cJSON_AddObjectToObject(o, "thickness_nm");
    cJSON_AddNumberToObject(j, "estimate", round3(t->estimate));
    cJSON_AddNumberToObject(j, "lo", round3(t->lo));
    cJSON_AddNumberToObject(j, "hi", round3(t->hi));
    cJSON_AddNumberToObject(j, "probability", round4(t->probability));
    cJSON_AddBoolToObject(j, "order_ambiguous", t->order_ambiguous);
    cJSON *modes = cJSON_AddArrayToObject(j, "modes");
    for (size_t k = 0; k < t->modes; k++) {
        cJSON *m = cJSON_CreateObject();
        cJSON_AddNumberToObject(m, "estimate", round3(t->mode[k].estimate));
        cJSON_AddNumberToObject(m, "lo", round3(t->mode[k].lo));
        cJSON_AddNumberToObject(m, "hi", round3(t->mode[k].hi));
        cJSON_AddNumberToObject(m, "probability", round4(t->mode[k].probability));
        cJSON_AddItemToArray(modes, m);
    }
    cJSON_AddStringToObject(j, "interval", "posterior median and 95 % interval of the most "
                                           "probable interference order (mode)");
}

static cJSON *region_json(const lam_analysis *a, size_t i)
{
    const lam_region_result *r = &a->results[i];
    const lam_region_stats *s = &a->seg->regions[i];
    size_t nc = a->channels;
    cJSON *o = cJSON_CreateObject();
    cJSON_AddNumberToObject(o, "id", (double)s->id);
    cJSON_AddItemToObject(o, "layers", r->layers > 0 ? cJSON_CreateNumber(r->layers)
                                                     : cJSON_CreateNull());
    cJSON_AddStringToObject(o, "label", r->label);
    cJSON_AddStringToObject(o, "class", r->cls);
    add_probabilities(o, r, a->max_layers);
    add_geometry(o, a, r, s);
    cJSON_AddItemToObject(o, "contrast", vec(r->mean, nc));
    cJSON_AddItemToObject(o, "contrast_sigma", vec(r->sigma, nc));
    cJSON_AddItemToObject(o, "model_contrast", vec(r->model, nc));
    cJSON_AddNumberToObject(o, "chi2", round4(r->chi2));
    cJSON_AddNumberToObject(o, "fit_pvalue", r->pvalue);
    cJSON_AddNumberToObject(o, "interior_px", (double)s->interior);
    cJSON_AddBoolToObject(o, "informs_fit", a->measured[i].use);
    add_fermi(o, &r->fermi);
    if (a->thickness)
        add_thickness(o, &a->thickness[i]); /* hBN: the thickness posterior */
    cJSON *fl = cJSON_AddArrayToObject(o, "flags");
    for (int k = 0; k < LAM_FLAG_COUNT; k++)
        if (r->flags & (1u << k))
            cJSON_AddItemToArray(fl, cJSON_CreateString(lam_flag_name(k)));
    return o;
}

/* One image-level statement on doping: blocking seen in some regions, or
 * the tightest upper limit over the 1L/2L regions. */
static void add_doping(cJSON *root, const lam_analysis *a)
{
    double limit = INFINITY;
    size_t seen = 0, checked = 0;
    for (size_t i = 0; i < a->count; i++) {
        const lam_fermi_estimate *f = &a->results[i].fermi;
        if (!f->evaluated)
            continue;
        checked++;
        if (f->constrained)
            seen++;
        else
            limit = fmin(limit, f->upper);
    }
    cJSON *d = cJSON_AddObjectToObject(root, "doping");
    cJSON_AddNumberToObject(d, "regions_checked", (double)checked);
    cJSON_AddNumberToObject(d, "blocking_seen_in", (double)seen);
    cJSON_AddItemToObject(d, "upper_limit_eV", isfinite(limit) ? cJSON_CreateNumber(round4(limit))
                                                               : cJSON_CreateNull());
    char text[256];
    if (!checked)
        snprintf(text, sizeof text, "no monolayer or bilayer to check for Pauli blocking");
    else if (isfinite(limit))
        snprintf(text, sizeof text,
                 "no Pauli blocking visible%s: |E_F| below %.2f eV (95 %%) where it is not seen; "
                 "ordinary doping (0.1-0.3 eV) needs Raman spectroscopy",
                 seen ? " in some regions" : "", limit);
    else
        snprintf(text, sizeof text, "Pauli blocking seen in %zu of %zu regions", seen, checked);
    cJSON_AddStringToObject(d, "statement", text);
}

static void add_summary(cJSON *root, const lam_analysis *a)
{
    size_t by[LAM_MODEL_MAX_LAYERS + 1] = {0}, thick = 0, unassigned = 0;
    double mono_px = 0;
    for (size_t i = 0; i < a->count; i++) {
        const lam_region_result *r = &a->results[i];
        if (r->layers > 0)
            by[r->layers]++;
        else if (r->thick)
            thick++;
        else
            unassigned++;
        if (r->layers == 1)
            mono_px += lam_region_area(&a->seg->regions[i]);
    }
    cJSON *sum = cJSON_AddObjectToObject(root, "summary");
    cJSON_AddNumberToObject(sum, "regions", (double)a->count);
    cJSON *byl = cJSON_AddObjectToObject(sum, "by_layers");
    for (size_t N = 1; N <= a->max_layers; N++) {
        char k[8];
        snprintf(k, sizeof k, "%zu", N);
        cJSON_AddNumberToObject(byl, k, (double)by[N]);
    }
    cJSON_AddNumberToObject(byl, "thick", (double)thick);
    cJSON_AddNumberToObject(byl, "unassigned", (double)unassigned);
    cJSON_AddNumberToObject(sum, "monolayer_area_px", mono_px);
    double u2 = a->um_per_px * a->um_per_px;
    cJSON_AddItemToObject(sum, "monolayer_area_um2",
                          a->um_per_px > 0 ? cJSON_CreateNumber(mono_px * u2) : cJSON_CreateNull());
    cJSON_AddStringToObject(sum, "caution", "layer counts are model estimates: confirm by Raman "
                                            "spectroscopy or AFM before fabrication");
}

/* ---- nearly anti-reflecting substrates (issue 14: Si3N4 near 67 nm) ----
 * With the anti-reflection warning (analyze_checks.c) each region also
 * gets dR = C x R_sub (the model's substrate reflectance) and the
 * measurement's signal-to-noise |C| / sigma_stat per channel. */
static void add_antireflection(cJSON *regs, const lam_analysis *a)
{
    if (!lam_warnings_find(&a->warnings, "anti-reflection"))
        return;
    for (size_t i = 0; i < a->count; i++) {
        cJSON *o = cJSON_GetArrayItem(regs, (int)i);
        double dr[LAM_MAX_CHANNELS], snr[LAM_MAX_CHANNELS];
        for (size_t c = 0; c < a->channels; c++) {
            dr[c] = round(a->measured[i].mean[c] * a->ladder.substrate[c] * 1e6) / 1e6;
            double sd = sqrt(a->measured[i].var[c]);
            snr[c] = sd > 0 ? round(fabs(a->measured[i].mean[c]) / sd * 10) / 10 : 0;
        }
        cJSON_AddItemToObject(o, "delta_reflectance", vec(dr, a->channels));
        cJSON_AddItemToObject(o, "snr", vec(snr, a->channels));
    }
}

cJSON *lam_report_json(const lam_analysis *a)
{
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "schema", "lamina-analysis/1");
    cJSON *tool = cJSON_AddObjectToObject(root, "tool");
    cJSON_AddStringToObject(tool, "name", "lamina");
    cJSON_AddStringToObject(tool, "version", LAMINA_VERSION);
    if (a->setup_hash[0])
        cJSON_AddStringToObject(root, "setup_hash", a->setup_hash);
    add_image(root, a);
    cJSON_AddStringToObject(root, "contrast_convention", "(substrate - flake) / substrate");
    add_model(root, a);
    add_estimates(root, a);
    add_substrate(root, a);
    add_doping(root, a);
    cJSON *regs = cJSON_AddArrayToObject(root, "regions");
    for (size_t i = 0; i < a->count; i++)
        cJSON_AddItemToArray(regs, region_json(a, i));
    add_summary(root, a);
    cJSON *w = cJSON_AddArrayToObject(root, "warnings");
    for (size_t i = 0; i < a->warnings.count; i++) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "code", a->warnings.item[i].code);
        cJSON_AddStringToObject(o, "message", a->warnings.item[i].message);
        cJSON_AddItemToArray(w, o);
    }
    add_antireflection(regs, a);
    return root;
}

lam_status lam_report_write_json(const lam_analysis *a, const char *path, lam_error *err)
{
    cJSON *root = lam_report_json(a);
    if (!root)
        return lam_error_set(err, LAM_ENOMEM, "cannot format the JSON report");
    lam_status st = lam_report_save_json(root, path, err);
    cJSON_Delete(root);
    return st;
}

lam_status lam_report_save_json(const cJSON *root, const char *path, lam_error *err)
{
    char *text = cJSON_Print(root);
    if (!text)
        return lam_error_set(err, LAM_ENOMEM, "cannot format the JSON report");
    size_t n = strlen(text);
    text[n] = '\n';
    lam_status st = lam_outfile_write_buffer(path, text, n + 1, err);
    free(text);
    return st;
}
