/* calibrun.c - a calibration from image and label files, and the profile
 * written with its record (lamina/calibrun.h). */
#include "lamina/calibrun.h"
#include "lamina/labels.h"

#include <stdlib.h>
#include <cjson/cJSON.h>

/* Image i: its labelled regions and (unless labelled_only) its other
 * regions with latent counts, or (self) all its segmented regions. */
static lam_status measure(lam_calib_set *set, const lam_calibrun_options *o, size_t i,
                          const lam_setup *s, lam_error *err)
{
    const char *image = o->images[i];
    lam_status st;
    if (!o->labels) {
        if ((st = lam_calib_measure_self(set, image, s, err)))
            lam_error_set_file(err, image);
        return st;
    }
    uint8_t *codes = NULL;
    size_t w = 0, h = 0;
    if ((st = lam_labels_map_for_image(o->labels[i], image, s, &codes, &w, &h, err)))
        lam_error_set_file(err, o->labels[i]);
    else if ((st = lam_calib_measure_labels(set, image, codes, w, h, s, err)))
        lam_error_set_file(err, image);
    else if (!o->labelled_only)
        st = lam_calib_add_unlabelled(set, set->images - 1, codes, w, h, s, err);
    free(codes);
    return st;
}

lam_status lam_calibrun_fit(const lam_setup *start, const lam_calibrun_options *o,
                            lam_calib_result *res, lam_error *err)
{
    if (!o->count || o->count > LAM_CALIB_MAX_IMAGES)
        return lam_error_set(err, LAM_EINVAL, "a calibration takes 1 to %d images",
                             LAM_CALIB_MAX_IMAGES);
    lam_calib_set *set = malloc(sizeof *set); /* large: not on the stack */
    if (!set)
        return lam_error_set(err, LAM_ENOMEM, "cannot hold the calibration's regions");
    lam_calib_set_init(set);
    lam_status st = LAM_OK;
    for (size_t i = 0; i < o->count && !st; i++)
        st = measure(set, o, i, start, err);
    if (!st && o->second_chip)
        st = lam_calib_add_second_chip(set, o->second_chip, o->second_oxide_nm, start, err);
    if (!st)
        st = lam_calibrate(start, set, o->known_oxide_nm, o->known_na, res, err);
    lam_calib_set_clear(set);
    free(set);
    return st;
}

/* How the profile was fitted, for its "calibration" key. */
static cJSON *record(const lam_calib_result *r, const lam_calibrun_options *o)
{
    cJSON *cal = cJSON_CreateObject();
    const char *method = !o->labels        ? "joint fit, layer counts latent (self)"
                         : o->labelled_only ? "joint fit to labelled regions"
                                            : "joint fit to labelled regions, the images' other "
                                              "regions with latent layer counts";
    cJSON_AddStringToObject(cal, "method", method);
    cJSON_AddNumberToObject(cal, "labelled_regions", (double)r->labelled);
    cJSON_AddNumberToObject(cal, "latent_regions", (double)r->latent);
    cJSON_AddNumberToObject(cal, "chi2", r->chi2);
    cJSON_AddNumberToObject(cal, "values", r->dof);
    cJSON_AddNumberToObject(cal, "model_floor_relative", r->floor_rel);
    if (o->second_chip) {
        cJSON *sc = cJSON_AddObjectToObject(cal, "second_chip");
        cJSON_AddStringToObject(sc, "file", o->second_chip);
        cJSON_AddNumberToObject(sc, "oxide_nm", o->second_oxide_nm);
    }
    cJSON *nc = cJSON_AddArrayToObject(cal, "not_constrained");
    for (int k = 0; k < LAM_NU_COUNT; k++)
        if (r->shared[k].fitted && !r->shared[k].constrained)
            cJSON_AddItemToArray(nc, cJSON_CreateString(r->shared[k].name));
    cJSON *ims = cJSON_AddArrayToObject(cal, "images");
    for (size_t i = 0; i < r->images; i++) {
        cJSON *im = cJSON_CreateObject();
        cJSON_AddStringToObject(im, "file", o->images[i]);
        cJSON_AddNumberToObject(im, "oxide_nm", r->oxide[i].value);
        cJSON_AddNumberToObject(im, "oxide_sigma_nm", r->oxide[i].sigma);
        cJSON_AddBoolToObject(im, "oxide_known", !r->oxide[i].fitted);
        cJSON_AddItemToArray(ims, im);
    }
    return cal;
}

lam_status lam_calibrun_save(const lam_calib_result *res, const lam_calibrun_options *o,
                             const char *path, lam_error *err)
{
    cJSON *cal = record(res, o);
    if (!cal)
        return lam_error_set(err, LAM_ENOMEM, "cannot build the calibration record");
    lam_status st = lam_setup_save(&res->setup, path, cal, err);
    if (st)
        lam_error_set_file(err, path);
    cJSON_Delete(cal);
    return st;
}
