/* report.c - JSON analysis and layer map (the annotated picture is drawn in
 * annotate.c, the contrast plot in plot.c). */
#include "lamina/report.h"
#include "lamina/outfile.h"
#include "lamina/png.h"
#include "lamina/version.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

unsigned lam_report_layer_value(const lam_region_result *r)
{
    if (r->flags & (LAM_FLAG_UNMODELLED | LAM_FLAG_SATURATED))
        return 255u;
    if (r->layers > 0)
        return (unsigned)r->layers;
    return r->thick ? 254u : 255u;
}

static cJSON *triple(const double v[3])
{
    return cJSON_CreateDoubleArray(v, 3);
}

static cJSON *num_or_null(double v)
{
    return isfinite(v) ? cJSON_CreateNumber(v) : cJSON_CreateNull();
}

static const char *flag_names[] = {"ambiguous", "unmodelled", "saturated", "touches_border", "small"};

cJSON *lam_report_json(const lam_analysis *a)
{
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "schema", "lamina-analysis/1");
    cJSON *tool = cJSON_AddObjectToObject(root, "tool");
    cJSON_AddStringToObject(tool, "name", "lamina");
    cJSON_AddStringToObject(tool, "version", LAMINA_VERSION);
    cJSON *im = cJSON_AddObjectToObject(root, "image");
    const char *base = strrchr(a->file, '/');
    cJSON_AddStringToObject(im, "file", base ? base + 1 : a->file);
    cJSON_AddStringToObject(im, "path", a->file);
    if (a->content_hash[0])
        cJSON_AddStringToObject(im, "content_hash", a->content_hash);
    if (a->setup_hash[0])
        cJSON_AddStringToObject(root, "setup_hash", a->setup_hash);
    cJSON_AddNumberToObject(im, "width", (double)a->width);
    cJSON_AddNumberToObject(im, "height", (double)a->height);
    cJSON_AddStringToObject(im, "encoding", lam_transfer_name(&a->transfer));
    cJSON_AddNumberToObject(im, "bit_depth", a->bit_depth);
    cJSON_AddItemToObject(im, "um_per_px", a->um_per_px > 0 ? cJSON_CreateNumber(a->um_per_px)
                                                            : cJSON_CreateNull());
    cJSON_AddNumberToObject(im, "saturated_pixels", (double)a->clipped_pixels);
    cJSON_AddStringToObject(root, "contrast_convention", "(substrate - flake) / substrate");
    cJSON *model = cJSON_AddObjectToObject(root, "model");
    cJSON_AddStringToObject(model, "conductivity", a->conductivity);
    cJSON_AddNumberToObject(model, "illumination_na", a->illumination_na);
    cJSON_AddStringToObject(model, "pupil_weight", a->pupil);
    cJSON_AddStringToObject(model, "camera", a->camera);
    cJSON_AddNumberToObject(model, "max_layers", (double)a->max_layers);
    cJSON_AddStringToObject(model, "prior", "uniform over 1..K layers and thicker");
    cJSON *dl = cJSON_AddArrayToObject(model, "defaults_used");
    for (size_t i = 0; i < a->defaulted_count; i++)
        cJSON_AddItemToArray(dl, cJSON_CreateString(a->defaulted[i]));
    cJSON *lad = cJSON_AddArrayToObject(model, "ladder");
    for (size_t N = 1; N <= a->max_layers; N++)
        cJSON_AddItemToArray(lad, triple(a->ladder.contrast[N]));
    cJSON *sub = cJSON_AddObjectToObject(root, "substrate");
    cJSON_AddItemToObject(sub, "level", triple(a->substrate.level));
    cJSON_AddItemToObject(sub, "noise", triple(a->substrate.noise));
    cJSON_AddNumberToObject(sub, "flatfield_falloff", a->substrate.falloff);
    cJSON_AddNumberToObject(sub, "area_fraction", a->substrate.fraction);
    cJSON_AddNumberToObject(sub, "noise_correlation", a->substrate.kappa);
    cJSON *ox = cJSON_AddObjectToObject(sub, "oxide_nm");
    cJSON_AddItemToObject(ox, "nominal", num_or_null(a->oxide.nominal));
    cJSON_AddItemToObject(ox, "estimate", a->oxide.fitted ? num_or_null(a->oxide.estimate)
                                                         : cJSON_CreateNull());
    cJSON_AddItemToObject(ox, "sigma", a->oxide.fitted ? num_or_null(a->oxide.sigma)
                                                      : cJSON_CreateNull());
    cJSON_AddStringToObject(ox, "method", a->oxide.method);
    cJSON_AddNumberToObject(ox, "regions_used", (double)a->oxide.regions_used);
    cJSON_AddItemToObject(ox, "pass", a->oxide.fitted ? cJSON_CreateBool(a->oxide.pass)
                                                      : cJSON_CreateNull());
    cJSON *regs = cJSON_AddArrayToObject(root, "regions");
    size_t by[LAM_MODEL_MAX_LAYERS + 1] = {0}, thick = 0, unassigned = 0;
    double mono_px = 0;
    for (size_t i = 0; i < a->count; i++) {
        const lam_region_result *r = &a->results[i];
        const lam_region_stats *s = &a->seg->regions[i];
        cJSON *o = cJSON_CreateObject();
        cJSON_AddNumberToObject(o, "id", (double)s->id);
        cJSON_AddItemToObject(o, "layers", r->layers > 0 ? cJSON_CreateNumber(r->layers)
                                                         : cJSON_CreateNull());
        cJSON_AddStringToObject(o, "label", r->label);
        cJSON *p = cJSON_AddObjectToObject(o, "p_layers");
        for (size_t N = 1; N <= a->max_layers; N++)
            if (r->p[N] >= 1e-4) {
                char k[8];
                snprintf(k, sizeof k, "%zu", N);
                cJSON_AddNumberToObject(p, k, round(r->p[N] * 1e4) / 1e4);
            }
        if (r->p_substrate >= 1e-4)
            cJSON_AddNumberToObject(p, "0", round(r->p_substrate * 1e4) / 1e4);
        if (r->p[a->max_layers + 1] >= 1e-4)
            cJSON_AddNumberToObject(p, "thick", round(r->p[a->max_layers + 1] * 1e4) / 1e4);
        cJSON_AddNumberToObject(o, "area_px", (double)s->area);
        double u2 = a->um_per_px * a->um_per_px;
        cJSON_AddItemToObject(o, "area_um2", a->um_per_px > 0 ? cJSON_CreateNumber((double)s->area * u2)
                                                             : cJSON_CreateNull());
        double bb[4] = {(double)s->bbox[0], (double)s->bbox[1], (double)s->bbox[2], (double)s->bbox[3]};
        cJSON_AddItemToObject(o, "bbox", cJSON_CreateDoubleArray(bb, 4));
        double cen[2] = {s->sx / (double)s->area, s->sy / (double)s->area};
        cJSON_AddItemToObject(o, "centroid", cJSON_CreateDoubleArray(cen, 2));
        cJSON_AddItemToObject(o, "contrast", triple(r->mean));
        cJSON_AddItemToObject(o, "contrast_sigma", triple(r->sigma));
        cJSON_AddItemToObject(o, "model_contrast", triple(r->model));
        cJSON_AddNumberToObject(o, "chi2", r->chi2);
        cJSON_AddNumberToObject(o, "interior_px", (double)s->interior);
        if (r->fermi.evaluated) {
            cJSON *f = cJSON_AddObjectToObject(o, "fermi_eV");
            cJSON_AddItemToObject(f, "estimate", num_or_null(r->fermi.estimate));
            cJSON_AddNumberToObject(f, "lo", r->fermi.lo);
            cJSON_AddNumberToObject(f, "hi", r->fermi.hi);
            cJSON_AddBoolToObject(f, "constrained", r->fermi.constrained);
            cJSON_AddStringToObject(f, "interval", r->fermi.constrained ? "68 % (chi2 + 1)"
                                                                        : "allowed range (chi2 + 4)");
        } else {
            cJSON_AddNullToObject(o, "fermi_eV");
        }
        double upx[4] = {(double)r->usable_at[0], (double)r->usable_at[1],
                         (double)r->usable_px[0], (double)r->usable_px[1]};
        cJSON_AddItemToObject(o, "usable_rect_px", cJSON_CreateDoubleArray(upx, 4));
        if (a->um_per_px > 0 && r->usable_px[0]) {
            double uum[2] = {upx[2] * a->um_per_px, upx[3] * a->um_per_px};
            cJSON_AddItemToObject(o, "usable_rect_um", cJSON_CreateDoubleArray(uum, 2));
        } else {
            cJSON_AddNullToObject(o, "usable_rect_um");
        }
        cJSON *fl = cJSON_AddArrayToObject(o, "flags");
        for (int k = 0; k < 5; k++)
            if (r->flags & (1u << k))
                cJSON_AddItemToArray(fl, cJSON_CreateString(flag_names[k]));
        cJSON_AddItemToArray(regs, o);
        if (r->layers > 0)
            by[r->layers]++;
        else if (r->thick)
            thick++;
        else
            unassigned++;
        if (r->layers == 1)
            mono_px += (double)s->area;
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
    cJSON_AddItemToObject(sum, "monolayer_area_um2",
                          a->um_per_px > 0 ? cJSON_CreateNumber(mono_px * a->um_per_px * a->um_per_px)
                                           : cJSON_CreateNull());
    cJSON_AddStringToObject(sum, "caution", "layer counts are model estimates: confirm by Raman "
                                            "spectroscopy or AFM before fabrication");
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

lam_status lam_report_write_layers(const lam_analysis *a, const char *path, lam_error *err)
{
    size_t n = a->width * a->height;
    uint8_t *map = malloc(n);
    if (!map)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the layer map");
    for (size_t k = 0; k < n; k++) {
        uint32_t l = a->seg->label[k];
        map[k] = l ? (uint8_t)lam_report_layer_value(&a->results[l - 1])
                   : (a->seg->cls[k] == LAM_CLASS_SUBSTRATE ? 0 : 255);
    }
    lam_status st = lam_png_save_grey8(path, map, a->width, a->height, err);
    free(map);
    return st;
}
