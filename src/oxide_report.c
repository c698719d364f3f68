/* oxide_report.c - the oxide audit's outputs: oxide.json (schema
 * "lamina-oxide/2", docs/oxide.md) and the plot (lamina/plot.h). */
#include "lamina/oxide.h"
#include "lamina/outfile.h"
#include "lamina/plot.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

static cJSON *num(double v)
{
    return isfinite(v) ? cJSON_CreateNumber(v) : cJSON_CreateNull();
}

static cJSON *images_json(const lam_oxide_audit *a)
{
    cJSON *imgs = cJSON_CreateArray();
    for (size_t j = 0; j < a->n_images; j++) {
        const lam_oxide_audit_image *im = &a->images[j];
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "file", im->file);
        cJSON_AddItemToObject(o, "estimate_nm", num(im->fitted ? im->sample.estimate_nm : NAN));
        cJSON_AddItemToObject(o, "sigma_nm", num(im->fitted ? im->sample.sigma_nm : NAN));
        cJSON_AddItemToObject(o, "sigma_given_shared_nm",
                              num(im->fitted ? im->sample.sigma_given_shared_nm : NAN));
        cJSON_AddNumberToObject(o, "regions_used", (double)im->regions_used);
        cJSON_AddStringToObject(o, "verdict", lam_oxide_verdict_name(im->verdict));
        cJSON_AddItemToArray(imgs, o);
    }
    return imgs;
}

static cJSON *combined_json(const lam_oxide_audit *a)
{
    const lam_oxide_combined *c = &a->combined;
    cJSON *o = cJSON_CreateObject();
    cJSON_AddNumberToObject(o, "images", (double)c->n);
    cJSON_AddItemToObject(o, "estimate_nm", num(c->estimate_nm));
    cJSON_AddItemToObject(o, "sigma_nm", num(c->sigma_nm));
    cJSON_AddItemToObject(o, "sigma_shared_nm", num(c->sigma_shared_nm));
    cJSON *iv = cJSON_AddArrayToObject(o, "interval95_nm");
    cJSON_AddItemToArray(iv, num(c->lo95_nm));
    cJSON_AddItemToArray(iv, num(c->hi95_nm));
    cJSON_AddItemToObject(o, "chi2", num(c->chi2));
    cJSON_AddNumberToObject(o, "dof", (double)c->dof);
    cJSON_AddItemToObject(o, "p_value", num(c->p_value));
    cJSON_AddItemToObject(o, "consistent", c->n ? cJSON_CreateBool(c->consistent)
                                                : cJSON_CreateNull());
    cJSON_AddItemToObject(o, "tau_nm", num(c->tau_nm));
    cJSON_AddItemToObject(o, "spread_nm", num(c->spread_nm));
    cJSON_AddStringToObject(o, "method",
                            "generalised least squares over the images' own estimates; the "
                            "shared part of each sigma taken as fully correlated between images; "
                            "batch variation by Paule-Mandel");
    cJSON_AddStringToObject(o, "statement",
                            !c->n          ? "no image fitted its oxide"
                            : c->n == 1    ? "one image: no consistency test"
                            : c->consistent ? "the images agree with one thickness"
                                            : "the images disagree: the oxide varies across the "
                                              "batch (see spread_nm); tau_nm, the variation "
                                              "beyond the images' errors, widens the interval");
    return o;
}

static cJSON *orders_json(const lam_oxide_audit *a)
{
    cJSON *o = cJSON_CreateObject();
    cJSON_AddNumberToObject(o, "profile_regions", (double)a->profile_regions);
    cJSON_AddItemToObject(o, "best_nm", num(a->profile_regions ? a->profile_best_nm : NAN));
    cJSON_AddBoolToObject(o, "ambiguous", a->n_orders > 0);
    cJSON *al = cJSON_AddArrayToObject(o, "alternatives_nm");
    for (size_t k = 0; k < a->n_orders; k++)
        cJSON_AddItemToArray(al, cJSON_CreateNumber(a->orders_nm[k]));
    cJSON_AddBoolToObject(o, "decides", a->order_decides);
    cJSON_AddStringToObject(o, "statement",
                            a->order_decides ? "another thickness fits far better than any within "
                                               "the tolerance: the chip is not the nominal oxide"
                            : a->n_orders ? "another thickness one interference order away fits "
                                            "as well: the colours alone cannot tell them apart; "
                                            "the nominal value chose the reported one"
                            : !a->profile_regions ? "no measured region: no profile"
                                                  : "no other thickness within the grid fits "
                                                    "as well");
    cJSON_AddStringToObject(o, "note", "the profile holds each image's shared parameters at its "
                                       "fit: it finds orders, its curvature is not a sigma");
    return o;
}

static cJSON *absolute_json(const lam_oxide_audit *a)
{
    cJSON *o = cJSON_CreateObject();
    cJSON_AddStringToObject(o, "reference", a->reference ? a->reference : "");
    cJSON_AddNumberToObject(o, "stability", a->stability);
    cJSON_AddItemToObject(o, "estimate_nm", num(a->absolute_nm));
    cJSON_AddItemToObject(o, "sigma_nm", num(a->absolute_sigma_nm));
    cJSON_AddItemToObject(o, "chi2_min", num(a->absolute_chi2));
    cJSON *ca = cJSON_AddArrayToObject(o, "candidates_nm");
    for (size_t k = 0; k < a->n_absolute; k++)
        cJSON_AddItemToArray(ca, cJSON_CreateNumber(a->absolute_candidates_nm[k]));
    cJSON_AddStringToObject(o, "statement",
                            a->n_absolute > 1 ? "the substrate colour fits several thicknesses "
                                                "(interference orders): the one nearest the "
                                                "nominal value is reported"
                                              : "one thickness fits the substrate colour");
    cJSON_AddStringToObject(o, "note", "bare-Si reference taken as oxide-free (native oxide of "
                                       "~1-2 nm neglected)");
    return o;
}

cJSON *lam_oxide_audit_json(const lam_oxide_audit *a)
{
    cJSON *root = cJSON_CreateObject();
    if (!root)
        return NULL;
    cJSON_AddStringToObject(root, "schema", "lamina-oxide/2");
    cJSON_AddNumberToObject(root, "nominal_nm", a->nominal_nm);
    cJSON_AddNumberToObject(root, "tolerance_nm", a->tolerance_nm);
    cJSON_AddStringToObject(root, "verdict", lam_oxide_verdict_name(a->verdict));
    cJSON_AddStringToObject(root, "reason", a->reason);
    cJSON_AddStringToObject(root, "advice", a->advice);
    cJSON_AddItemToObject(root, "images", images_json(a));
    cJSON_AddItemToObject(root, "combined", combined_json(a));
    cJSON_AddItemToObject(root, "interference_orders", orders_json(a));
    if (a->absolute_set)
        cJSON_AddItemToObject(root, "absolute", absolute_json(a));
    cJSON *prof = cJSON_AddArrayToObject(root, "profile");
    for (size_t g = 0; g < a->n_grid; g++) {
        double pt[2] = {a->grid_nm[g], a->profile[g]};
        cJSON_AddItemToArray(prof, cJSON_CreateDoubleArray(pt, 2));
    }
    return root;
}

static lam_status write_plot(const lam_oxide_audit *a, const char *path, lam_error *err)
{
    lam_oxide_plot_image *pi = calloc(a->n_images ? a->n_images : 1, sizeof *pi);
    if (!pi)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the oxide plot");
    for (size_t j = 0; j < a->n_images; j++) {
        const lam_oxide_audit_image *im = &a->images[j];
        pi[j] = (lam_oxide_plot_image){im->file, im->sample.estimate_nm, im->sample.sigma_nm,
                                       im->fitted, im->regions_used};
    }
    const lam_oxide_combined *c = &a->combined;
    lam_oxide_plot op = {a->grid_nm, a->profile, a->n_grid, a->nominal_nm, a->tolerance_nm,
                         c->estimate_nm, c->sigma_nm, c->lo95_nm, c->hi95_nm,
                         lam_oxide_verdict_name(a->verdict), a->orders_nm, a->n_orders,
                         a->absolute_set ? a->absolute_nm : NAN, pi, a->n_images};
    lam_status st = lam_plot_oxide(&op, path, err);
    free(pi);
    return st;
}

lam_status lam_oxide_audit_write(const lam_oxide_audit *a, const char *dir, lam_error *err)
{
    char path[4096];
    lam_status st = lam_outfile_make_dir(dir, err);
    if (st)
        return st;
    cJSON *root = lam_oxide_audit_json(a);
    char *text = root ? cJSON_Print(root) : NULL;
    cJSON_Delete(root);
    if (!text)
        return lam_error_set(err, LAM_ENOMEM, "cannot format oxide.json");
    snprintf(path, sizeof path, "%s/oxide.json", dir);
    st = lam_outfile_write_buffer(path, text, strlen(text), err);
    free(text);
    if (st)
        lam_error_set_file(err, path);
    if (!st) {
        snprintf(path, sizeof path, "%s/oxide.svg", dir);
        if ((st = write_plot(a, path, err)))
            lam_error_set_file(err, path);
    }
    return st;
}
