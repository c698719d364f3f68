/* setup.c - the lamina-setup/1 profile: defaults and the JSON reader. */
#include "lamina/setup.h"

#include <errno.h>
#include <stddef.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <cjson/cJSON.h>
#include "lamina/outfile.h"
#include "lamina/textfile.h"

static const char *const all_keys[] = {
    "objective.na", "objective.illumination_na", "objective.pupil_weight",
    "objective.immersion", "illuminant", "camera", "encoding", "um_per_px",
    "substrate.stack", "substrate.base", "material", "temperature_K", "fermi_eV",
    "conductivity", "conductivity.response", "spectrum"};
#define N_KEYS (sizeof all_keys / sizeof all_keys[0])

void lam_setup_default(lam_setup *s)
{
    memset(s, 0, sizeof *s);
    s->objective_na = 0.8;
    s->illumination_na = 0.55;
    s->pupil = LAM_PUPIL_SIN_COS;
    s->cone_nodes = 24;
    lam_material_builtin("air", &s->ambient, NULL);
    s->illuminant.kind = LAM_ILLUM_BLACKBODY;
    s->illuminant.kelvin = 3200;
    s->camera.kind = LAM_CAMERA_GAUSSIAN;
    s->camera.channels = 3;
    const double centre[3] = {605, 535, 465}, fwhm[3] = {80, 75, 70};
    for (int c = 0; c < 3; c++) {
        s->camera.centre_nm[c] = centre[c];
        s->camera.fwhm_nm[c] = fwhm[c];
    }
    s->encoding.kind = LAM_TRANSFER_SRGB;
    s->um_per_px = 0;
    s->layers = 1;
    lam_material_builtin("SiO2", &s->layer_material[0], NULL);
    s->layer_nm[0] = 285;
    lam_material_builtin("Si", &s->base, NULL);
    snprintf(s->flake, sizeof s->flake, "graphene");
    s->interlayer_nm = 0.335;
    s->sheet = lam_sheet_params_default();
    s->grid_lo_nm = 380;
    s->grid_hi_nm = 780;
    s->grid_step_nm = 2;
    for (int c = 0; c < LAM_MAX_CHANNELS; c++)
        s->camera_gain[c] = s->camera_width[c] = 1;
    s->sigma.na = s->sigma.shift_nm = s->sigma.resonance = NAN;
    s->sigma.background = s->sigma.continuum = s->sigma.oxide_nm = s->sigma.log_gain = NAN;
    s->sigma.log_width = NAN;
    for (size_t i = 0; i < N_KEYS; i++)
        s->defaulted[i] = all_keys[i];
    s->defaulted_count = N_KEYS;
}

static void mark_given(lam_setup *s, const char *key)
{
    for (size_t i = 0; i < s->defaulted_count; i++) {
        if (!strcmp(s->defaulted[i], key)) {
            s->defaulted[i] = s->defaulted[--s->defaulted_count];
            return;
        }
    }
}

int lam_setup_is_default(const lam_setup *s, const char *key)
{
    for (size_t i = 0; i < s->defaulted_count; i++)
        if (!strcmp(s->defaulted[i], key))
            return 1;
    return 0;
}

void lam_setup_clear(lam_setup *s)
{
    if (!s)
        return;
    lam_material_clear(&s->ambient);
    lam_material_clear(&s->base);
    lam_material_clear(&s->flake_film);
    for (size_t i = 0; i < s->layers; i++)
        lam_material_clear(&s->layer_material[i]);
    lam_table_spectrum_clear(&s->illuminant.table);
    lam_table_spectrum_clear(&s->camera.table);
}

/* --- reading helpers: each names the key in its message --- */

static lam_status get_number(const cJSON *obj, const char *name, const char *key, double lo,
                             double hi, double *out, int *found, lam_error *err)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, name);
    *found = v != NULL;
    if (!v)
        return LAM_OK;
    if (!cJSON_IsNumber(v) || !isfinite(v->valuedouble))
        return lam_error_set(err, LAM_EFORMAT, "key %s: expected a number", key);
    if (v->valuedouble < lo || v->valuedouble > hi)
        return lam_error_set(err, LAM_ERANGE, "key %s: %g is outside %g to %g", key,
                             v->valuedouble, lo, hi);
    *out = v->valuedouble;
    return LAM_OK;
}

static void join_path(char *buf, size_t n, const char *dir, const char *file)
{
    if (file[0] == '/' || !dir || !dir[0])
        snprintf(buf, n, "%s", file);
    else
        snprintf(buf, n, "%s/%s", dir, file);
}

static lam_status get_material(const cJSON *v, const char *key, const char *dir,
                               lam_material *out, lam_error *err)
{
    if (cJSON_IsString(v)) {
        lam_status st = lam_material_builtin(v->valuestring, out, err);
        if (st)
            return lam_error_set(err, st, "key %s: %s", key, err ? err->message : "");
        return LAM_OK;
    }
    const cJSON *f = cJSON_IsObject(v) ? cJSON_GetObjectItemCaseSensitive(v, "file") : NULL;
    if (!cJSON_IsString(f))
        return lam_error_set(err, LAM_EFORMAT,
                             "key %s: expected a material name or {\"file\": \"x.csv\"}", key);
    char path[1024];
    join_path(path, sizeof path, dir, f->valuestring);
    return lam_material_load_csv(path, out, err);
}

static lam_status parse_objective(const cJSON *o, lam_setup *s, const char *dir,
                                  lam_error *err)
{
    int found;
    lam_status st;
    if (!cJSON_IsObject(o))
        return lam_error_set(err, LAM_EFORMAT, "key objective: expected an object");
    const cJSON *imm = cJSON_GetObjectItemCaseSensitive(o, "immersion");
    if (imm) {
        lam_material m;
        if ((st = get_material(imm, "objective.immersion", dir, &m, err)))
            return st;
        if (m.kind != LAM_MATERIAL_CONSTANT && m.kind != LAM_MATERIAL_SELLMEIER) {
            lam_material_clear(&m);
            return lam_error_set(err, LAM_EINVAL,
                                 "key objective.immersion: the ambient must be lossless");
        }
        s->ambient = m;
        mark_given(s, "objective.immersion");
    }
    double n_amb = creal(lam_material_index_eval(&s->ambient, 550));
    if ((st = get_number(o, "na", "objective.na", 0, n_amb * 0.999, &s->objective_na, &found,
                         err)))
        return st;
    if (found)
        mark_given(s, "objective.na");
    if ((st = get_number(o, "illumination_na", "objective.illumination_na", 0, n_amb * 0.999,
                         &s->illumination_na, &found, err)))
        return st;
    if (found)
        mark_given(s, "objective.illumination_na");
    else if (!lam_setup_is_default(s, "objective.na"))
        s->illumination_na = s->objective_na; /* full-aperture illumination unless stated */
    const cJSON *pw = cJSON_GetObjectItemCaseSensitive(o, "pupil_weight");
    if (pw) {
        if (cJSON_IsString(pw) && !strcmp(pw->valuestring, "sin-cos"))
            s->pupil = LAM_PUPIL_SIN_COS;
        else if (cJSON_IsString(pw) && !strcmp(pw->valuestring, "sin"))
            s->pupil = LAM_PUPIL_SIN;
        else
            return lam_error_set(err, LAM_EINVAL,
                                 "key objective.pupil_weight: expected \"sin-cos\" or \"sin\"");
        mark_given(s, "objective.pupil_weight");
    }
    double nodes = (double)s->cone_nodes;
    if ((st = get_number(o, "cone_nodes", "objective.cone_nodes", 1, 96, &nodes, &found, err)))
        return st;
    s->cone_nodes = (size_t)nodes;
    return LAM_OK;
}

static lam_status parse_illuminant(const cJSON *o, lam_setup *s, const char *dir,
                                   lam_error *err)
{
    const cJSON *kind = cJSON_GetObjectItemCaseSensitive(o, "kind");
    if (!cJSON_IsString(kind))
        return lam_error_set(err, LAM_EFORMAT, "key illuminant.kind: expected a string");
    const char *k = kind->valuestring;
    int found;
    if (!strcmp(k, "blackbody")) {
        s->illuminant.kind = LAM_ILLUM_BLACKBODY;
        lam_status st = get_number(o, "kelvin", "illuminant.kelvin", 1000, 20000,
                                   &s->illuminant.kelvin, &found, err);
        if (st)
            return st;
    } else if (!strcmp(k, "cie-a")) {
        s->illuminant.kind = LAM_ILLUM_CIE_A;
    } else if (!strcmp(k, "led-white")) {
        s->illuminant.kind = LAM_ILLUM_LED_WHITE;
    } else if (!strcmp(k, "flat")) {
        s->illuminant.kind = LAM_ILLUM_FLAT;
    } else if (!strcmp(k, "table")) {
        const cJSON *f = cJSON_GetObjectItemCaseSensitive(o, "file");
        if (!cJSON_IsString(f))
            return lam_error_set(err, LAM_EFORMAT, "key illuminant.file: expected a path");
        char path[1024];
        join_path(path, sizeof path, dir, f->valuestring);
        s->illuminant.kind = LAM_ILLUM_TABLE;
        return lam_table_spectrum_load(path, 1, &s->illuminant.table, err);
    } else {
        return lam_error_set(err, LAM_EINVAL,
                             "key illuminant.kind: '%s' is not blackbody, cie-a, led-white, "
                             "flat or table", k);
    }
    return LAM_OK;
}

/* 1 to 3 Gaussian channels: one for a monochrome camera behind a filter,
 * else R, G, B in that order. */
static lam_status parse_gaussian(const cJSON *o, lam_setup *s, lam_error *err)
{
    const cJSON *ch = cJSON_GetObjectItemCaseSensitive(o, "channels");
    int n = cJSON_GetArraySize(ch);
    if (!cJSON_IsArray(ch) || n < 1 || n > LAM_MAX_CHANNELS)
        return lam_error_set(err, LAM_EFORMAT,
                             "key camera.channels: expected 1 (monochrome) to 3 (R, G, B) "
                             "channels");
    s->camera.kind = LAM_CAMERA_GAUSSIAN;
    s->camera.channels = (size_t)n;
    for (int c = 0; c < n; c++) {
        const cJSON *item = cJSON_GetArrayItem(ch, c);
        int f1, f2;
        char key[64];
        snprintf(key, sizeof key, "camera.channels[%d].centre_nm", c);
        lam_status st = get_number(item, "centre_nm", key, 350, 850, &s->camera.centre_nm[c], &f1,
                                   err);
        if (st)
            return st;
        snprintf(key, sizeof key, "camera.channels[%d].fwhm_nm", c);
        if ((st = get_number(item, "fwhm_nm", key, 1, 400, &s->camera.fwhm_nm[c], &f2, err)))
            return st;
        if (!f1 || !f2)
            return lam_error_set(err, LAM_EFORMAT,
                                 "key camera.channels[%d]: needs centre_nm and fwhm_nm", c);
    }
    return LAM_OK;
}

/* "shift_nm" and "contrast_gain": a calibration's corrections, one value
 * per channel. */
static lam_status parse_channel_values(const cJSON *o, const char *name, size_t channels,
                                       double lo, double hi, double *out, lam_error *err)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, name);
    if (!v)
        return LAM_OK;
    if (!cJSON_IsArray(v) || (size_t)cJSON_GetArraySize(v) != channels)
        return lam_error_set(err, LAM_EFORMAT, "key camera.%s: expected %zu numbers (one per "
                             "channel)", name, channels);
    for (size_t c = 0; c < channels; c++) {
        const cJSON *x = cJSON_GetArrayItem(v, (int)c);
        if (!cJSON_IsNumber(x) || !(x->valuedouble >= lo && x->valuedouble <= hi))
            return lam_error_set(err, LAM_ERANGE, "key camera.%s[%zu]: expected %g to %g", name,
                                 c, lo, hi);
        out[c] = x->valuedouble;
    }
    return LAM_OK;
}

static lam_status parse_camera(const cJSON *o, lam_setup *s, const char *dir, lam_error *err)
{
    const cJSON *kind = cJSON_GetObjectItemCaseSensitive(o, "kind");
    if (!cJSON_IsString(kind))
        return lam_error_set(err, LAM_EFORMAT, "key camera.kind: expected a string");
    const char *k = kind->valuestring;
    lam_status st = LAM_OK;
    s->camera.channels = 3;
    if (!strcmp(k, "srgb-observer")) {
        s->camera.kind = LAM_CAMERA_SRGB_OBSERVER;
    } else if (!strcmp(k, "gaussian")) {
        st = parse_gaussian(o, s, err);
    } else if (!strcmp(k, "table")) {
        const cJSON *f = cJSON_GetObjectItemCaseSensitive(o, "file");
        if (!cJSON_IsString(f))
            return lam_error_set(err, LAM_EFORMAT, "key camera.file: expected a path");
        char path[1024];
        join_path(path, sizeof path, dir, f->valuestring);
        s->camera.kind = LAM_CAMERA_TABLE;
        if (!(st = lam_table_spectrum_load_ex(path, 0, 1, &s->camera.table, err)))
            s->camera.channels = s->camera.table.columns;
    } else {
        return lam_error_set(err, LAM_EINVAL,
                             "key camera.kind: '%s' is not srgb-observer, gaussian or table", k);
    }
    if (!st)
        st = parse_channel_values(o, "shift_nm", s->camera.channels, -100, 100,
                                  s->camera_shift_nm, err);
    if (!st)
        st = parse_channel_values(o, "contrast_gain", s->camera.channels, 0.2, 2,
                                  s->camera_gain, err);
    if (!st)
        st = parse_channel_values(o, "width_scale", s->camera.channels, 0.4, 2.5,
                                  s->camera_width, err);
    return st;
}

static lam_status parse_substrate(const cJSON *o, lam_setup *s, const char *dir,
                                  lam_error *err)
{
    if (!cJSON_IsObject(o))
        return lam_error_set(err, LAM_EFORMAT, "key substrate: expected an object");
    const cJSON *stack = cJSON_GetObjectItemCaseSensitive(o, "stack");
    lam_status st;
    if (stack) {
        int n = cJSON_GetArraySize(stack);
        if (!cJSON_IsArray(stack) || n > LAM_SETUP_MAX_LAYERS)
            return lam_error_set(err, LAM_EFORMAT,
                                 "key substrate.stack: expected a list of at most %d layers",
                                 LAM_SETUP_MAX_LAYERS);
        for (size_t i = 0; i < s->layers; i++)
            lam_material_clear(&s->layer_material[i]);
        s->layers = 0;
        for (int i = 0; i < n; i++) {
            const cJSON *L = cJSON_GetArrayItem(stack, i);
            char key[64];
            snprintf(key, sizeof key, "substrate.stack[%d].material", i);
            const cJSON *m = cJSON_GetObjectItemCaseSensitive(L, "material");
            if (!m)
                return lam_error_set(err, LAM_EFORMAT, "key %s: missing", key);
            if ((st = get_material(m, key, dir, &s->layer_material[i], err)))
                return st;
            s->layers = (size_t)i + 1;
            snprintf(key, sizeof key, "substrate.stack[%d].thickness_nm", i);
            int found;
            if ((st = get_number(L, "thickness_nm", key, 0, 5000, &s->layer_nm[i], &found, err)))
                return st;
            if (!found)
                return lam_error_set(err, LAM_EFORMAT, "key %s: missing", key);
        }
        mark_given(s, "substrate.stack");
    }
    const cJSON *base = cJSON_GetObjectItemCaseSensitive(o, "base");
    if (base) {
        lam_material_clear(&s->base);
        if ((st = get_material(base, "substrate.base", dir, &s->base, err))) {
            lam_material_builtin("Si", &s->base, NULL);
            return st;
        }
        mark_given(s, "substrate.base");
    }
    return LAM_OK;
}

/* The visible-response family (lamina/conductivity.h); giving any of its
 * three numbers marks the response as known ("conductivity.response"). */
static lam_status parse_response(const cJSON *o, lam_setup *s, lam_error *err)
{
    int f1 = 0, f2 = 0, f3 = 0;
    lam_status st;
    if ((st = get_number(o, "resonance", "conductivity.resonance", 0, 30, &s->sheet.resonance,
                         &f1, err)) ||
        (st = get_number(o, "background", "conductivity.background", 0, 200,
                         &s->sheet.background, &f2, err)) ||
        (st = get_number(o, "continuum", "conductivity.continuum", -0.9, 2, &s->sheet.continuum,
                         &f3, err)))
        return st;
    if (f1 || f2 || f3)
        mark_given(s, "conductivity.response");
    return LAM_OK;
}

/* "uncertainty": one standard deviation of values the profile gives (a
 * calibration writes them; without one, lamina assumes the spread of a
 * value set by hand, see docs/setup.md). */
static lam_status parse_uncertainty(const cJSON *o, lam_setup *s, lam_error *err)
{
    if (!cJSON_IsObject(o))
        return lam_error_set(err, LAM_EFORMAT, "key uncertainty: expected an object");
    static const struct { const char *name; double hi; size_t off; } keys[] = {
        {"illumination_na", 0.5, offsetof(lam_setup, sigma.na)},
        {"camera_shift_nm", 100, offsetof(lam_setup, sigma.shift_nm)},
        {"camera_log_gain", 2, offsetof(lam_setup, sigma.log_gain)},
        {"camera_log_width", 2, offsetof(lam_setup, sigma.log_width)},
        {"resonance", 30, offsetof(lam_setup, sigma.resonance)},
        {"background", 200, offsetof(lam_setup, sigma.background)},
        {"continuum", 2, offsetof(lam_setup, sigma.continuum)},
        {"oxide_nm", 500, offsetof(lam_setup, sigma.oxide_nm)},
    };
    for (size_t i = 0; i < sizeof keys / sizeof keys[0]; i++) {
        char key[64];
        int found;
        snprintf(key, sizeof key, "uncertainty.%s", keys[i].name);
        lam_status st = get_number(o, keys[i].name, key, 0, keys[i].hi,
                                   (double *)((char *)s + keys[i].off), &found, err);
        if (st)
            return st;
    }
    return LAM_OK;
}

static lam_status parse_conductivity(const cJSON *o, lam_setup *s, const char *dir,
                                     lam_error *err)
{
    if (!cJSON_IsObject(o))
        return lam_error_set(err, LAM_EFORMAT, "key conductivity: expected an object");
    const cJSON *model = cJSON_GetObjectItemCaseSensitive(o, "model");
    if (model) {
        if (cJSON_IsString(model) && !strcmp(model->valuestring, "kubo"))
            s->sheet.model = LAM_SHEET_KUBO;
        else if (cJSON_IsString(model) && !strcmp(model->valuestring, "universal"))
            s->sheet.model = LAM_SHEET_UNIVERSAL;
        else if (cJSON_IsString(model) && !strcmp(model->valuestring, "film")) {
            /* comparison model: graphene as a slab of tabulated n,k */
            const cJSON *nk = cJSON_GetObjectItemCaseSensitive(o, "film");
            if (!nk)
                return lam_error_set(err, LAM_EFORMAT,
                                     "key conductivity.film: needed with model \"film\" "
                                     "(a material name or {\"file\": \"x.csv\"})");
            lam_status fs = get_material(nk, "conductivity.film", dir, &s->flake_film, err);
            if (fs)
                return fs;
            s->flake_as_film = 1;
        } else
            return lam_error_set(err, LAM_EINVAL,
                                 "key conductivity.model: expected \"kubo\", \"universal\" or "
                                 "\"film\"");
    }
    int found;
    lam_status st;
    if ((st = get_number(o, "scattering_eV", "conductivity.scattering_eV", 0, 1,
                         &s->sheet.scattering_ev, &found, err)))
        return st;
    if ((st = get_number(o, "puddle_eV", "conductivity.puddle_eV", 0, 0.5, &s->sheet.puddle_ev,
                         &found, err)))
        return st;
    const cJSON *ex = cJSON_GetObjectItemCaseSensitive(o, "exciton");
    if (ex) {
        if (!cJSON_IsBool(ex))
            return lam_error_set(err, LAM_EFORMAT, "key conductivity.exciton: expected true or false");
        s->sheet.exciton = cJSON_IsTrue(ex);
    }
    mark_given(s, "conductivity");
    return parse_response(o, s, err);
}

static lam_status parse_root(const cJSON *root, const char *dir, lam_setup *s, lam_error *err)
{
    if (!cJSON_IsObject(root))
        return lam_error_set(err, LAM_EFORMAT, "expected a JSON object");
    const cJSON *schema = cJSON_GetObjectItemCaseSensitive(root, "schema");
    if (!cJSON_IsString(schema) || strcmp(schema->valuestring, "lamina-setup/1"))
        return lam_error_set(err, LAM_EFORMAT,
                             "key schema: expected \"lamina-setup/1\"");
    lam_status st;
    const cJSON *v;
    if ((v = cJSON_GetObjectItemCaseSensitive(root, "objective")) &&
        (st = parse_objective(v, s, dir, err)))
        return st;
    if ((v = cJSON_GetObjectItemCaseSensitive(root, "illuminant"))) {
        if ((st = parse_illuminant(v, s, dir, err)))
            return st;
        mark_given(s, "illuminant");
    }
    if ((v = cJSON_GetObjectItemCaseSensitive(root, "camera"))) {
        if ((st = parse_camera(v, s, dir, err)))
            return st;
        mark_given(s, "camera");
    }
    if ((v = cJSON_GetObjectItemCaseSensitive(root, "encoding"))) {
        const cJSON *g = cJSON_IsObject(v) ? cJSON_GetObjectItemCaseSensitive(v, "gamma") : NULL;
        if (cJSON_IsString(v) && (!strcmp(v->valuestring, "srgb") || !strcmp(v->valuestring, "linear")))
            lam_transfer_parse(v->valuestring, &s->encoding);
        else if (cJSON_IsNumber(g) && g->valuedouble >= 0.2 && g->valuedouble <= 5)
            s->encoding = (lam_transfer){LAM_TRANSFER_GAMMA, g->valuedouble};
        else
            return lam_error_set(err, LAM_EINVAL,
                                 "key encoding: expected \"srgb\", \"linear\" or {\"gamma\": 0.2..5}");
        mark_given(s, "encoding");
    }
    int found;
    if ((v = cJSON_GetObjectItemCaseSensitive(root, "um_per_px")) && !cJSON_IsNull(v)) {
        if ((st = get_number(root, "um_per_px", "um_per_px", 1e-4, 1000, &s->um_per_px, &found, err)))
            return st;
        mark_given(s, "um_per_px");
    }
    if ((v = cJSON_GetObjectItemCaseSensitive(root, "substrate")) &&
        (st = parse_substrate(v, s, dir, err)))
        return st;
    if ((v = cJSON_GetObjectItemCaseSensitive(root, "material"))) {
        if (!cJSON_IsString(v) || strcasecmp(v->valuestring, "graphene"))
            return lam_error_set(err, LAM_EINVAL,
                                 "key material: only \"graphene\" flakes are modelled so far");
        mark_given(s, "material");
    }
    if ((st = get_number(root, "temperature_K", "temperature_K", 1, 1000, &s->sheet.temperature_k,
                         &found, err)))
        return st;
    if (found)
        mark_given(s, "temperature_K");
    if ((st = get_number(root, "fermi_eV", "fermi_eV", -2, 2, &s->sheet.fermi_ev, &found, err)))
        return st;
    if (found)
        mark_given(s, "fermi_eV");
    if ((v = cJSON_GetObjectItemCaseSensitive(root, "conductivity")) &&
        (st = parse_conductivity(v, s, dir, err)))
        return st;
    if ((v = cJSON_GetObjectItemCaseSensitive(root, "spectrum"))) {
        if ((st = get_number(v, "min_nm", "spectrum.min_nm", 300, 1000, &s->grid_lo_nm, &found, err)) ||
            (st = get_number(v, "max_nm", "spectrum.max_nm", 300, 1000, &s->grid_hi_nm, &found, err)) ||
            (st = get_number(v, "step_nm", "spectrum.step_nm", 0.25, 50, &s->grid_step_nm, &found, err)))
            return st;
        if (s->grid_hi_nm <= s->grid_lo_nm)
            return lam_error_set(err, LAM_ERANGE, "key spectrum: max_nm must exceed min_nm");
        mark_given(s, "spectrum");
    }
    if ((v = cJSON_GetObjectItemCaseSensitive(root, "uncertainty")) &&
        (st = parse_uncertainty(v, s, err)))
        return st;
    return LAM_OK;
}

lam_status lam_setup_parse(const char *json, const char *base_dir, lam_setup *s,
                           lam_error *err)
{
    cJSON *root = cJSON_Parse(json);
    if (!root) {
        const char *at = cJSON_GetErrorPtr();
        long off = at ? (long)(at - json) : -1;
        return lam_error_set(err, LAM_EFORMAT, "not valid JSON (near byte %ld)", off);
    }
    lam_status st = parse_root(root, base_dir, s, err);
    cJSON_Delete(root);
    return st;
}

lam_status lam_setup_load(const char *path, lam_setup *s, lam_error *err)
{
    char *buf = NULL;
    lam_status st = lam_text_load(path, 1u << 20, "setup", &buf, err);
    if (st)
        return st;
    char dir[1024];
    lam_path_dir(path, dir, sizeof dir);
    st = lam_setup_parse(buf, dir, s, err);
    if (!st)
        snprintf(s->source, sizeof s->source, "%s", path);
    free(buf);
    if (st)
        lam_error_set_file(err, path);
    return st;
}

lam_status lam_setup_load_stack(const char *path, lam_setup *s, lam_error *err)
{
    char *buf = NULL;
    lam_status st = lam_text_load(path, 1u << 20, "stack", &buf, err);
    if (st)
        return st;
    cJSON *sub = cJSON_Parse(buf);
    free(buf);
    char dir[1024];
    lam_path_dir(path, dir, sizeof dir);
    st = sub ? parse_substrate(sub, s, dir, err)
             : lam_error_set(err, LAM_EFORMAT, "not valid JSON");
    cJSON_Delete(sub);
    if (st)
        lam_error_set_file(err, path);
    return st;
}

size_t lam_setup_oxide_layer(const lam_setup *s)
{
    for (size_t i = 0; i < s->layers; i++)
        if (!strcasecmp(s->layer_material[i].name, "SiO2"))
            return i;
    return s->layers;
}

double lam_setup_oxide(const lam_setup *s)
{
    size_t i = lam_setup_oxide_layer(s);
    return i < s->layers ? s->layer_nm[i] : -1.0;
}

lam_status lam_setup_set_oxide(lam_setup *s, double nm, lam_error *err)
{
    if (!(nm >= 0 && nm <= 5000))
        return lam_error_set(err, LAM_ERANGE, "oxide thickness %g nm is outside 0 to 5000 nm", nm);
    size_t i = lam_setup_oxide_layer(s);
    if (i == s->layers) {
        if (s->layers == LAM_SETUP_MAX_LAYERS)
            return lam_error_set(err, LAM_ETOOBIG, "substrate stack is full");
        lam_material_builtin("SiO2", &s->layer_material[i], NULL);
        s->layers++;
    }
    s->layer_nm[i] = nm;
    mark_given(s, "substrate.stack");
    return LAM_OK;
}

static void add_sigma(cJSON *o, const char *name, double v)
{
    if (isfinite(v))
        cJSON_AddNumberToObject(o, name, v);
}

/* A per-channel array, written only when some value differs from 'neutral'. */
static void add_channel_values(cJSON *o, const char *name, const double *v, size_t n,
                               double neutral, double scale)
{
    int any = 0;
    for (size_t c = 0; c < n; c++)
        any |= v[c] != neutral;
    if (!any)
        return;
    double r[LAM_MAX_CHANNELS];
    for (size_t c = 0; c < n; c++)
        r[c] = round(v[c] * scale) / scale;
    cJSON_AddItemToObject(o, name, cJSON_CreateDoubleArray(r, (int)n));
}

static void add_uncertainty(cJSON *root, const lam_setup *s)
{
    const lam_setup_sigma *u = &s->sigma;
    if (!isfinite(u->na) && !isfinite(u->shift_nm) && !isfinite(u->resonance) &&
        !isfinite(u->background) && !isfinite(u->continuum) && !isfinite(u->oxide_nm) &&
        !isfinite(u->log_gain) && !isfinite(u->log_width))
        return;
    cJSON *o = cJSON_AddObjectToObject(root, "uncertainty");
    add_sigma(o, "illumination_na", u->na);
    add_sigma(o, "camera_shift_nm", u->shift_nm);
    add_sigma(o, "resonance", u->resonance);
    add_sigma(o, "background", u->background);
    add_sigma(o, "continuum", u->continuum);
    add_sigma(o, "camera_log_gain", u->log_gain);
    add_sigma(o, "camera_log_width", u->log_width);
    add_sigma(o, "oxide_nm", u->oxide_nm);
}

static cJSON *material_json(const lam_material *m)
{
    if (m->file[0]) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "file", m->file);
        return o;
    }
    return cJSON_CreateString(m->name);
}

lam_status lam_setup_save(const lam_setup *s, const char *path, const cJSON *extra,
                          lam_error *err)
{
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "schema", "lamina-setup/1");
    cJSON *ob = cJSON_AddObjectToObject(root, "objective");
    cJSON_AddNumberToObject(ob, "na", s->objective_na);
    cJSON_AddNumberToObject(ob, "illumination_na", s->illumination_na);
    cJSON_AddStringToObject(ob, "pupil_weight", s->pupil == LAM_PUPIL_SIN ? "sin" : "sin-cos");
    cJSON_AddItemToObject(ob, "immersion", material_json(&s->ambient));
    cJSON *il = cJSON_AddObjectToObject(root, "illuminant");
    static const char *ik[] = {"blackbody", "cie-a", "led-white", "flat", "table"};
    cJSON_AddStringToObject(il, "kind", ik[s->illuminant.kind]);
    if (s->illuminant.kind == LAM_ILLUM_BLACKBODY)
        cJSON_AddNumberToObject(il, "kelvin", s->illuminant.kelvin);
    if (s->illuminant.kind == LAM_ILLUM_TABLE)
        cJSON_AddStringToObject(il, "file", s->illuminant.table.file);
    cJSON *cam = cJSON_AddObjectToObject(root, "camera");
    static const char *ck[] = {"srgb-observer", "gaussian", "table", "gaussian"};
    cJSON_AddStringToObject(cam, "kind", ck[s->camera.kind]);
    if (s->camera.kind == LAM_CAMERA_GAUSSIAN) {
        cJSON *ch = cJSON_AddArrayToObject(cam, "channels");
        for (size_t c = 0; c < s->camera.channels; c++) {
            cJSON *o = cJSON_CreateObject();
            cJSON_AddNumberToObject(o, "centre_nm", round(s->camera.centre_nm[c] * 10) / 10);
            cJSON_AddNumberToObject(o, "fwhm_nm", round(s->camera.fwhm_nm[c] * 10) / 10);
            cJSON_AddItemToArray(ch, o);
        }
    }
    if (s->camera.kind == LAM_CAMERA_TABLE)
        cJSON_AddStringToObject(cam, "file", s->camera.table.file);
    add_channel_values(cam, "shift_nm", s->camera_shift_nm, s->camera.channels, 0, 100);
    add_channel_values(cam, "contrast_gain", s->camera_gain, s->camera.channels, 1, 1e4);
    add_channel_values(cam, "width_scale", s->camera_width, s->camera.channels, 1, 1e4);
    if (s->encoding.kind == LAM_TRANSFER_GAMMA) {
        cJSON *g = cJSON_AddObjectToObject(root, "encoding");
        cJSON_AddNumberToObject(g, "gamma", s->encoding.gamma);
    } else {
        cJSON_AddStringToObject(root, "encoding", s->encoding.kind == LAM_TRANSFER_LINEAR ? "linear" : "srgb");
    }
    if (s->um_per_px > 0)
        cJSON_AddNumberToObject(root, "um_per_px", s->um_per_px);
    else
        cJSON_AddNullToObject(root, "um_per_px");
    cJSON *sub = cJSON_AddObjectToObject(root, "substrate");
    cJSON *st = cJSON_AddArrayToObject(sub, "stack");
    for (size_t i = 0; i < s->layers; i++) {
        cJSON *L = cJSON_CreateObject();
        cJSON_AddItemToObject(L, "material", material_json(&s->layer_material[i]));
        cJSON_AddNumberToObject(L, "thickness_nm", round(s->layer_nm[i] * 100) / 100);
        cJSON_AddItemToArray(st, L);
    }
    cJSON_AddItemToObject(sub, "base", material_json(&s->base));
    cJSON_AddStringToObject(root, "material", s->flake);
    cJSON_AddNumberToObject(root, "temperature_K", s->sheet.temperature_k);
    cJSON_AddNumberToObject(root, "fermi_eV", s->sheet.fermi_ev);
    cJSON *co = cJSON_AddObjectToObject(root, "conductivity");
    cJSON_AddStringToObject(co, "model", s->flake_as_film ? "film" : s->sheet.model == LAM_SHEET_KUBO ? "kubo" : "universal");
    if (s->flake_as_film)
        cJSON_AddItemToObject(co, "film", material_json(&s->flake_film));
    cJSON_AddNumberToObject(co, "scattering_eV", s->sheet.scattering_ev);
    cJSON_AddNumberToObject(co, "puddle_eV", s->sheet.puddle_ev);
    cJSON_AddBoolToObject(co, "exciton", s->sheet.exciton);
    cJSON_AddNumberToObject(co, "resonance", s->sheet.resonance);
    cJSON_AddNumberToObject(co, "background", s->sheet.background);
    cJSON_AddNumberToObject(co, "continuum", s->sheet.continuum);
    add_uncertainty(root, s);
    cJSON *sp = cJSON_AddObjectToObject(root, "spectrum");
    cJSON_AddNumberToObject(sp, "min_nm", s->grid_lo_nm);
    cJSON_AddNumberToObject(sp, "max_nm", s->grid_hi_nm);
    cJSON_AddNumberToObject(sp, "step_nm", s->grid_step_nm);
    if (extra)
        cJSON_AddItemToObject(root, "calibration", cJSON_Duplicate(extra, 1));
    char *text = cJSON_Print(root);
    cJSON_Delete(root);
    if (!text)
        return lam_error_set(err, LAM_ENOMEM, "cannot format the setup");
    lam_status r = lam_outfile_write_buffer(path, text, strlen(text), err);
    free(text);
    return r;
}
