/* setup.c - the lamina-setup/1 profile: defaults, the strict JSON reader,
 * the setters the command line uses, and the writer. */
#include "lamina/setup.h"
#include "lamina/substrate_colour.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <cjson/cJSON.h>
#include "lamina/jsonfile.h"
#include "lamina/outfile.h"
#include "lamina/textfile.h"

#define SETUP_SCHEMA "lamina-setup/1"
#define SETUP_MAX_BYTES (1u << 20)
#define KEYS_MAX 48 /* known keys of one object, explicit and from the table */

/* The plain number keys, one line each: the reader, the writer, the
 * setters, the strict-key check and the tests all go by this table. A value
 * outside its range (an unset default such as um_per_px = 0) is written as
 * null, and null in a file means "not given". 'records' is the key listed
 * as given when the number is read (NULL: the number's own key). */
#define FIELD(f) offsetof(lam_setup, f)
static const lam_setup_number numbers[] = {
    {"um_per_px", 1e-4, 1000, FIELD(um_per_px), NULL},
    {"temperature_K", 1, 1000, FIELD(sheet.temperature_k), NULL},
    {"fermi_eV", -2, 2, FIELD(sheet.fermi_ev), NULL},
    {"conductivity.scattering_eV", 0, 1, FIELD(sheet.scattering_ev), "conductivity"},
    {"conductivity.puddle_eV", 0, 0.5, FIELD(sheet.puddle_ev), "conductivity"},
    {"spectrum.min_nm", 300, 1000, FIELD(grid_lo_nm), "spectrum"},
    {"spectrum.max_nm", 300, 1000, FIELD(grid_hi_nm), "spectrum"},
    {"spectrum.step_nm", 0.25, 50, FIELD(grid_step_nm), "spectrum"},
    /* graphene's visible response (lamina/conductivity.h): any of the three
     * marks the response as known */
    {"conductivity.resonance", 0, 30, FIELD(sheet.resonance), "conductivity.response"},
    {"conductivity.background", 0, 200, FIELD(sheet.background), "conductivity.response"},
    {"conductivity.continuum", -0.9, 2, FIELD(sheet.continuum), "conductivity.response"},
    /* one standard deviation of values the profile gives (a calibration
     * writes them; unset: the spread of a value set by hand, docs/setup.md) */
    {"uncertainty.illumination_na", 0, 0.5, FIELD(sigma.na), "uncertainty"},
    {"uncertainty.camera_shift_nm", 0, 100, FIELD(sigma.shift_nm), "uncertainty"},
    {"uncertainty.camera_log_gain", 0, 2, FIELD(sigma.log_gain), "uncertainty"},
    {"uncertainty.camera_log_width", 0, 2, FIELD(sigma.log_width), "uncertainty"},
    {"uncertainty.resonance", 0, 30, FIELD(sigma.resonance), "uncertainty"},
    {"uncertainty.background", 0, 200, FIELD(sigma.background), "uncertainty"},
    {"uncertainty.continuum", 0, 2, FIELD(sigma.continuum), "uncertainty"},
    {"uncertainty.oxide_nm", LAM_OXIDE_SD_MIN_NM, 500, FIELD(sigma.oxide_nm), "uncertainty"},
    /* the substrate's colour at a known oxide (a calibration writes it) */
    {"substrate_colour.oxide_nm", 0, 2000, FIELD(substrate_colour.oxide_nm), "substrate_colour"},
    {"substrate_colour.oxide_sd_nm", 0, 100, FIELD(substrate_colour.oxide_sd_nm),
     "substrate_colour"},
    {"substrate_colour.stability", 1e-4, 0.5, FIELD(substrate_colour.stability),
     "substrate_colour"},
    {"substrate_colour.lamp_tilt", 0, 1, FIELD(substrate_colour.lamp_tilt), "substrate_colour"},
    {"substrate_colour.second.oxide_nm", 0, 2000, FIELD(substrate_colour.second_oxide_nm),
     "substrate_colour"},
    {"substrate_colour.second.oxide_sd_nm", 0, 100, FIELD(substrate_colour.second_oxide_sd_nm),
     "substrate_colour"},
};
#define N_NUMBERS (sizeof numbers / sizeof numbers[0])

/* Keys recorded as defaulted until given, besides the numbers above whose
 * 'records' is NULL. */
static const char *const other_keys[] = {
    "objective.na", "objective.illumination_na", "objective.pupil_weight",
    "objective.immersion", "illuminant", "camera", "encoding", "substrate.stack",
    "substrate.base", "material", "conductivity", "conductivity.response", "spectrum"};
#define N_OTHER (sizeof other_keys / sizeof other_keys[0])

/* The keys each object's reader uses besides the table's numbers. */
static const char *const root_keys[] = {"schema", "objective", "illuminant", "camera",
                                        "encoding", "substrate", "material", "conductivity",
                                        "uncertainty", "calibration", "observation",
                                        "substrate_colour", "assumed", NULL};
static const char *const objective_keys[] = {"na", "illumination_na", "pupil_weight",
                                             "immersion", "cone_nodes", NULL};
static const char *const illuminant_keys[] = {"kind", "kelvin", "file", NULL};
static const char *const camera_keys[] = {"kind", "channels", "file", "shift_nm",
                                          "contrast_gain", "width_scale", NULL};
static const char *const channel_keys[] = {"centre_nm", "fwhm_nm", NULL};
static const char *const substrate_keys[] = {"stack", "base", NULL};
static const char *const layer_keys[] = {"material", "thickness_nm", NULL};
static const char *const conductivity_keys[] = {"model", "film", "exciton", NULL};
static const char *const gamma_keys[] = {"gamma", NULL};
static const char *const file_keys[] = {"file", NULL};

const lam_name lam_pupil_weight_names[] = {
    {LAM_PUPIL_SIN_COS, "sin-cos", 0}, {LAM_PUPIL_SIN, "sin", 0}, {0, NULL, 0}};

const lam_name lam_conductivity_model_names[] = {
    {LAM_SHEET_KUBO, "kubo", 0},
    {LAM_SHEET_UNIVERSAL, "universal", 0},
    {LAM_SETUP_FILM_MODEL, "film", 0},
    {0, NULL, 0}};

const lam_setup_number *lam_setup_numbers(size_t *count)
{
    *count = N_NUMBERS;
    return numbers;
}

const char *lam_pupil_weight_name(lam_pupil_weight w)
{
    return lam_name_of(lam_pupil_weight_names, (int)w);
}

const char *lam_setup_conductivity_model(const lam_setup *s)
{
    int model = s->flake_as_film ? LAM_SETUP_FILM_MODEL : (int)s->sheet.model;
    return lam_name_of(lam_conductivity_model_names, model);
}

static void list_defaulted(lam_setup *s)
{
    s->defaulted_count = 0;
    for (size_t i = 0; i < N_OTHER; i++)
        s->defaulted[s->defaulted_count++] = other_keys[i];
    for (size_t i = 0; i < N_NUMBERS && s->defaulted_count < LAM_SETUP_MAX_DEFAULTED; i++)
        if (!numbers[i].records)
            s->defaulted[s->defaulted_count++] = numbers[i].key;
}

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
    s->crystal = lam_crystal_find("graphene");
    s->interlayer_nm = 0.335;
    s->sheet = lam_sheet_params_default();
    s->grid_lo_nm = 380;
    s->grid_hi_nm = 780;
    s->grid_step_nm = 2;
    for (int c = 0; c < LAM_MAX_CHANNELS; c++)
        s->camera_gain[c] = s->camera_width[c] = 1;
    s->sigma.na = s->sigma.shift_nm = s->sigma.log_gain = s->sigma.log_width = NAN;
    s->sigma.resonance = s->sigma.background = s->sigma.continuum = s->sigma.oxide_nm = NAN;
    s->substrate_colour.oxide_nm = NAN;
    s->substrate_colour.oxide_sd_nm = 0;
    s->substrate_colour.stability = 0.01;
    s->substrate_colour.lamp_tilt = 0.05;
    s->substrate_colour.second_oxide_nm = NAN;
    s->substrate_colour.second_oxide_sd_nm = 0;
    list_defaulted(s);
}

/* The table's own spelling of a defaultable key (the defaulted list
 * holds pointers into the tables), or NULL. */
static const char *defaultable_key(const char *key)
{
    for (size_t i = 0; i < N_OTHER; i++)
        if (!strcmp(other_keys[i], key))
            return other_keys[i];
    for (size_t i = 0; i < N_NUMBERS; i++)
        if (!numbers[i].records && !strcmp(numbers[i].key, key))
            return numbers[i].key;
    return NULL;
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
    for (size_t i = 0; i < s->flake_layer_films; i++)
        lam_material_clear(&s->flake_layer_film[i]);
    for (size_t i = 0; i < s->layers; i++)
        lam_material_clear(&s->layer_material[i]);
    lam_table_spectrum_clear(&s->illuminant.table);
    lam_table_spectrum_clear(&s->camera.table);
}

/* --- setters: each checks its value and records its key as given --- */

static const lam_setup_number *find_number(const char *key)
{
    for (size_t i = 0; i < N_NUMBERS; i++)
        if (!strcmp(numbers[i].key, key))
            return &numbers[i];
    return NULL;
}

static lam_status store_number(lam_setup *s, const lam_setup_number *n, double v, lam_error *err)
{
    char label[96];
    snprintf(label, sizeof label, "key %s", n->key);
    lam_status st = lam_check_range(err, label, v, n->lo, n->hi);
    if (st)
        return st;
    *(double *)((char *)s + n->offset) = v;
    mark_given(s, n->records ? n->records : n->key);
    return LAM_OK;
}

lam_status lam_setup_set_number(lam_setup *s, const char *key, double v, lam_error *err)
{
    const lam_setup_number *n = find_number(key);
    if (!n)
        return lam_error_set(err, LAM_EINVAL, "'%s' is not a number key of a setup", key);
    return store_number(s, n, v, err);
}

lam_status lam_setup_set_fermi(lam_setup *s, double ev, lam_error *err)
{
    return lam_setup_set_number(s, "fermi_eV", ev, err);
}

lam_status lam_setup_set_um_per_px(lam_setup *s, double um, lam_error *err)
{
    return lam_setup_set_number(s, "um_per_px", um, err);
}

/* An aperture must stay below the ambient index (NA = n sin theta). */
static double na_limit(const lam_setup *s)
{
    return creal(lam_material_index_eval(&s->ambient, 550)) * 0.999;
}

lam_status lam_setup_set_na(lam_setup *s, double na, lam_error *err)
{
    lam_status st = lam_check_range(err, "key objective.illumination_na", na, 0, na_limit(s));
    if (st)
        return st;
    s->illumination_na = na;
    if (na > s->objective_na)
        s->objective_na = na; /* the illumination cannot be wider than the objective */
    mark_given(s, "objective.illumination_na");
    return LAM_OK;
}

/* A crystal's films: the bulk (or continuous) film and the per-layer
 * tables, all built-in materials. */
static lam_status crystal_films(lam_setup *s, const lam_crystal *c, lam_error *err)
{
    lam_status st = lam_material_builtin(c->bulk, &s->flake_film, err);
    size_t n = 0;
    for (size_t j = 0; !st && j < LAM_CRYSTAL_LAYER_TABLES && c->layer_index[j]; j++, n++)
        st = lam_material_builtin(c->layer_index[j], &s->flake_layer_film[j], err);
    s->flake_layer_films = n;
    s->flake_as_film = !st;
    return st;
}

lam_status lam_setup_set_material(lam_setup *s, const char *name, lam_error *err)
{
    const lam_crystal *c;
    if (lam_crystal_lookup(name, &c, err))
        return lam_error_prefix(err, LAM_ERANGE, "key material: ");
    int was_crystal = s->crystal && s->crystal->kind != LAM_CRYSTAL_SHEETS;
    if (was_crystal || c->kind != LAM_CRYSTAL_SHEETS) {
        /* the previous crystal's films go; graphene returns to sheets */
        lam_material_clear(&s->flake_film);
        for (size_t i = 0; i < s->flake_layer_films; i++)
            lam_material_clear(&s->flake_layer_film[i]);
        s->flake_layer_films = 0;
        s->flake_as_film = 0;
    }
    s->crystal = c;
    snprintf(s->flake, sizeof s->flake, "%s", c->name);
    s->interlayer_nm = c->layer_nm;
    lam_status st = c->kind == LAM_CRYSTAL_SHEETS ? LAM_OK : crystal_films(s, c, err);
    if (!st)
        mark_given(s, "material");
    return st;
}

lam_crystal_kind lam_setup_crystal_kind(const lam_setup *s)
{
    return s->crystal ? s->crystal->kind : LAM_CRYSTAL_SHEETS;
}

void lam_setup_describe_flake(const lam_setup *s, char *buf, size_t n)
{
    if (lam_setup_crystal_kind(s) == LAM_CRYSTAL_SHEETS)
        lam_sheet_describe(&s->sheet, buf, n);
    else
        snprintf(buf, n, "%s, %.3f nm per layer: %s", s->crystal->name, s->crystal->layer_nm,
                 s->crystal->note);
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
    lam_status st = lam_check_range(err, "oxide thickness (nm)", nm, 0, 5000);
    if (st)
        return st;
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

/* --- reading helpers: each names the key by its path in the file --- */

static void join_key(char *buf, size_t n, const char *path, const char *name)
{
    snprintf(buf, n, "%s%s%s", path, path[0] ? "." : "", name);
}

/* Strict keys of the object at 'path': its reader's keys plus the next
 * component of every table number below it. */
static lam_status check_keys(const cJSON *o, const char *path, const char *const explicit_keys[],
                             lam_error *err)
{
    const char *known[KEYS_MAX + 1];
    char names[N_NUMBERS][48];
    size_t count = 0, plen = strlen(path);
    for (size_t i = 0; explicit_keys[i] && count < KEYS_MAX; i++)
        known[count++] = explicit_keys[i];
    for (size_t i = 0; i < N_NUMBERS && count < KEYS_MAX; i++) {
        const char *k = numbers[i].key;
        if (plen && (strncmp(k, path, plen) || k[plen] != '.'))
            continue;
        const char *rest = plen ? k + plen + 1 : k;
        snprintf(names[i], sizeof names[i], "%.*s", (int)strcspn(rest, "."), rest);
        size_t j = 0;
        while (j < count && strcmp(known[j], names[i]))
            j++;
        if (j == count)
            known[count++] = names[i];
    }
    known[count] = NULL;
    return lam_json_check_keys(o, path, known, err);
}

static lam_status get_kind(const cJSON *o, const char *key, const lam_name *table, int *kind,
                           lam_error *err)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, "kind");
    if (!cJSON_IsString(v))
        return lam_error_set(err, LAM_EFORMAT, "key %s: expected a string", key);
    return lam_name_parse(table, key, v->valuestring, kind, err);
}

/* A key that only one kind reads, given with another kind. */
static lam_status only_with(const cJSON *o, const char *obj, const char *key, const char *kind,
                            int applies, lam_error *err)
{
    if (applies || !cJSON_GetObjectItemCaseSensitive(o, key))
        return LAM_OK;
    return lam_error_set(err, LAM_EFORMAT, "key %s.%s: only read with kind %s", obj, key, kind);
}

static lam_status get_material(const cJSON *v, const char *key, const char *dir,
                               lam_material *out, lam_error *err)
{
    if (cJSON_IsString(v)) {
        lam_status st = lam_material_builtin(v->valuestring, out, err);
        /* an unknown name is a fault of the file, not of an argument */
        return st ? lam_error_prefix(err, LAM_EFORMAT, "key %s: ", key) : LAM_OK;
    }
    const cJSON *f = cJSON_IsObject(v) ? cJSON_GetObjectItemCaseSensitive(v, "file") : NULL;
    if (!cJSON_IsString(f))
        return lam_error_set(err, LAM_EFORMAT,
                             "key %s: expected a material name or {\"file\": \"x.csv\"}", key);
    lam_status st = check_keys(v, key, file_keys, err);
    if (st)
        return st;
    char path[1024];
    lam_path_join(path, sizeof path, dir, f->valuestring);
    return lam_material_load_csv(path, out, err);
}

/* columns 0: as many as the header names (a camera: 1 to 3); a camera's
 * effective channels may dip below zero (its colour matrix). */
static lam_status get_table(const cJSON *o, const char *key, const char *dir, size_t columns,
                            int signed_values, lam_table_spectrum *out, lam_error *err)
{
    const cJSON *f = cJSON_GetObjectItemCaseSensitive(o, "file");
    if (!cJSON_IsString(f))
        return lam_error_set(err, LAM_EFORMAT, "key %s.file: expected a path", key);
    char path[1024];
    lam_path_join(path, sizeof path, dir, f->valuestring);
    return lam_table_spectrum_load_ex(path, columns, signed_values, out, err);
}

/* --- the objects of a setup file --- */

static lam_status parse_immersion(const cJSON *imm, lam_setup *s, const char *dir,
                                  lam_error *err)
{
    lam_material m;
    lam_status st = get_material(imm, "objective.immersion", dir, &m, err);
    if (st)
        return st;
    if (m.kind != LAM_MATERIAL_CONSTANT && m.kind != LAM_MATERIAL_SELLMEIER) {
        lam_material_clear(&m);
        return lam_error_set(err, LAM_EFORMAT,
                             "key objective.immersion: the ambient must be lossless");
    }
    s->ambient = m;
    mark_given(s, "objective.immersion");
    return LAM_OK;
}

static lam_status parse_objective(const cJSON *o, lam_setup *s, const char *dir,
                                  lam_error *err)
{
    int found;
    lam_status st;
    if (!cJSON_IsObject(o))
        return lam_error_set(err, LAM_EFORMAT, "key objective: expected an object");
    if ((st = check_keys(o, "objective", objective_keys, err)))
        return st;
    const cJSON *imm = cJSON_GetObjectItemCaseSensitive(o, "immersion");
    if (imm && (st = parse_immersion(imm, s, dir, err)))
        return st;
    double top = na_limit(s);
    if ((st = lam_json_number(o, "na", "objective.na", 0, top, &s->objective_na, &found, err)))
        return st;
    if (found)
        mark_given(s, "objective.na");
    if ((st = lam_json_number(o, "illumination_na", "objective.illumination_na", 0, top,
                              &s->illumination_na, &found, err)))
        return st;
    if (found)
        mark_given(s, "objective.illumination_na");
    else if (!lam_setup_is_default(s, "objective.na"))
        s->illumination_na = s->objective_na; /* full-aperture illumination unless stated */
    const cJSON *pw = cJSON_GetObjectItemCaseSensitive(o, "pupil_weight");
    if (pw) {
        int w;
        if (!cJSON_IsString(pw))
            return lam_error_set(err, LAM_EFORMAT, "key objective.pupil_weight: expected a string");
        if ((st = lam_name_parse(lam_pupil_weight_names, "objective.pupil_weight",
                                 pw->valuestring, &w, err)))
            return st;
        s->pupil = (lam_pupil_weight)w;
        mark_given(s, "objective.pupil_weight");
    }
    double nodes = (double)s->cone_nodes;
    if ((st = lam_json_number(o, "cone_nodes", "objective.cone_nodes", 1, 96, &nodes, &found, err)))
        return st;
    s->cone_nodes = (size_t)nodes;
    return LAM_OK;
}

static lam_status parse_illuminant(const cJSON *o, lam_setup *s, const char *dir,
                                   lam_error *err)
{
    int kind, found;
    lam_status st;
    if ((st = check_keys(o, "illuminant", illuminant_keys, err)) ||
        (st = get_kind(o, "illuminant.kind", lam_illuminant_kind_names, &kind, err)) ||
        (st = only_with(o, "illuminant", "kelvin", "blackbody", kind == LAM_ILLUM_BLACKBODY,
                        err)) ||
        (st = only_with(o, "illuminant", "file", "table", kind == LAM_ILLUM_TABLE, err)))
        return st;
    s->illuminant.kind = (lam_illuminant_kind)kind;
    if (kind == LAM_ILLUM_BLACKBODY)
        st = lam_json_number(o, "kelvin", "illuminant.kelvin", 1000, 20000, &s->illuminant.kelvin,
                             &found, err);
    else if (kind == LAM_ILLUM_TABLE)
        st = get_table(o, "illuminant", dir, 1, 0, &s->illuminant.table, err);
    if (!st)
        mark_given(s, "illuminant");
    return st;
}

/* 1 to 3 Gaussian channels: one for a monochrome camera behind a filter,
 * else R, G, B in that order. */
static lam_status parse_channels(const cJSON *ch, lam_setup *s, lam_error *err)
{
    int n = cJSON_GetArraySize(ch);
    if (!cJSON_IsArray(ch) || n < 1 || n > LAM_MAX_CHANNELS)
        return lam_error_set(err, LAM_EFORMAT,
                             "key camera.channels: expected 1 (monochrome) to 3 (R, G, B) "
                             "channels");
    s->camera.channels = (size_t)n;
    for (int c = 0; c < n; c++) {
        const cJSON *item = cJSON_GetArrayItem(ch, c);
        int f1, f2;
        char path[48], key[64];
        snprintf(path, sizeof path, "camera.channels[%d]", c);
        lam_status st = check_keys(item, path, channel_keys, err);
        snprintf(key, sizeof key, "%s.centre_nm", path);
        if (!st)
            st = lam_json_number(item, "centre_nm", key, 350, 850, &s->camera.centre_nm[c], &f1,
                                 err);
        snprintf(key, sizeof key, "%s.fwhm_nm", path);
        if (!st)
            st = lam_json_number(item, "fwhm_nm", key, 1, 400, &s->camera.fwhm_nm[c], &f2, err);
        if (st)
            return st;
        if (!f1 || !f2)
            return lam_error_set(err, LAM_EFORMAT, "key %s: needs centre_nm and fwhm_nm", path);
    }
    return LAM_OK;
}

/* "shift_nm", "contrast_gain", "width_scale": a calibration's corrections,
 * one value per channel. */
static lam_status parse_channel_values(const cJSON *o, const char *object, const char *name,
                                       size_t channels, double lo, double hi, double *out,
                                       lam_error *err)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, name);
    if (!v)
        return LAM_OK;
    if (!cJSON_IsArray(v) || (size_t)cJSON_GetArraySize(v) != channels)
        return lam_error_set(err, LAM_EFORMAT, "key %s.%s: expected %zu numbers (one per "
                             "channel)", object, name, channels);
    for (size_t c = 0; c < channels; c++) {
        const cJSON *x = cJSON_GetArrayItem(v, (int)c);
        if (!cJSON_IsNumber(x) || !(x->valuedouble >= lo && x->valuedouble <= hi))
            return lam_error_set(err, LAM_ERANGE, "key %s.%s[%zu]: expected %g to %g", object,
                                 name, c, lo, hi);
        out[c] = x->valuedouble;
    }
    return LAM_OK;
}

/* "substrate_colour.second": the second chip's levels, and the check that
 * it has its oxide, apart from the first's. */
static lam_status parse_second_colour(const cJSON *o, lam_setup *s, lam_error *err)
{
    static const char *const keys[] = {"ln_level", NULL};
    lam_substrate_colour *c = &s->substrate_colour;
    lam_status st = check_keys(o, "substrate_colour.second", keys, err);
    if (!st)
        st = parse_channel_values(o, "substrate_colour.second", "ln_level", s->camera.channels,
                                  -50, 50, c->second_ln_level, err);
    if (!st && (!cJSON_GetObjectItemCaseSensitive(o, "ln_level") || !isfinite(c->second_oxide_nm)))
        st = lam_error_set(err, LAM_EFORMAT,
                           "key substrate_colour.second: needs oxide_nm and ln_level");
    double apart = fabs(c->second_oxide_nm - c->oxide_nm);
    if (!st && !(apart >= LAM_COLOUR_SECOND_MIN_NM && apart <= LAM_COLOUR_SECOND_MAX_NM))
        st = lam_error_set(err, LAM_ERANGE,
                           "key substrate_colour.second.oxide_nm: %g nm is %g nm from the first "
                           "chip's %g nm; the colour's change is measured with %g to %g nm",
                           c->second_oxide_nm, apart, c->oxide_nm, LAM_COLOUR_SECOND_MIN_NM,
                           LAM_COLOUR_SECOND_MAX_NM);
    return st;
}

/* "substrate_colour": its numbers are read with the table's; here the
 * per-channel ratios, which need the camera's channel count, and the
 * check that a recorded colour has its oxide. */
static lam_status parse_substrate_colour(const cJSON *o, lam_setup *s, lam_error *err)
{
    static const char *const keys[] = {"ln_level", "second", NULL};
    lam_status st = check_keys(o, "substrate_colour", keys, err);
    if (!st)
        st = parse_channel_values(o, "substrate_colour", "ln_level", s->camera.channels, -50, 50,
                                  s->substrate_colour.ln_level, err);
    if (!st && (!cJSON_GetObjectItemCaseSensitive(o, "ln_level") ||
                !isfinite(s->substrate_colour.oxide_nm)))
        st = lam_error_set(err, LAM_EFORMAT, "key substrate_colour: needs oxide_nm and ln_level");
    const cJSON *second = cJSON_GetObjectItemCaseSensitive(o, "second");
    if (!st && second)
        st = parse_second_colour(second, s, err);
    return st;
}

static lam_status parse_camera(const cJSON *o, lam_setup *s, const char *dir, lam_error *err)
{
    int kind;
    lam_status st;
    if ((st = check_keys(o, "camera", camera_keys, err)) ||
        (st = get_kind(o, "camera.kind", lam_camera_kind_names, &kind, err)) ||
        (st = only_with(o, "camera", "channels", "gaussian", kind == LAM_CAMERA_GAUSSIAN, err)) ||
        (st = only_with(o, "camera", "file", "table", kind == LAM_CAMERA_TABLE, err)))
        return st;
    s->camera.kind = (lam_camera_kind)kind;
    s->camera.channels = 3;
    if (kind == LAM_CAMERA_GAUSSIAN)
        st = parse_channels(cJSON_GetObjectItemCaseSensitive(o, "channels"), s, err);
    else if (kind == LAM_CAMERA_TABLE && !(st = get_table(o, "camera", dir, 0, 1, &s->camera.table, err)))
        s->camera.channels = s->camera.table.columns;
    size_t n = s->camera.channels;
    if (!st)
        st = parse_channel_values(o, "camera", "shift_nm", n, -100, 100, s->camera_shift_nm, err);
    if (!st)
        st = parse_channel_values(o, "camera", "contrast_gain", n, 0.2, 2, s->camera_gain, err);
    if (!st)
        st = parse_channel_values(o, "camera", "width_scale", n, 0.4, 2.5, s->camera_width, err);
    if (!st)
        mark_given(s, "camera");
    return st;
}

static lam_status parse_encoding(const cJSON *v, lam_setup *s, lam_error *err)
{
    lam_status st;
    if (cJSON_IsString(v)) {
        int kind;
        if ((st = lam_name_parse(lam_transfer_kind_names, "encoding", v->valuestring, &kind, err)))
            return st;
        s->encoding = (lam_transfer){(lam_transfer_kind)kind, 0};
    } else if (cJSON_IsObject(v)) {
        double g = NAN;
        int found;
        if ((st = check_keys(v, "encoding", gamma_keys, err)) ||
            (st = lam_json_number(v, "gamma", "encoding.gamma", LAM_GAMMA_MIN, LAM_GAMMA_MAX, &g,
                                  &found, err)))
            return st;
        if (!found)
            return lam_error_set(err, LAM_EFORMAT, "key encoding.gamma: missing");
        s->encoding = (lam_transfer){LAM_TRANSFER_GAMMA, g};
    } else {
        return lam_error_set(err, LAM_EFORMAT,
                             "key encoding: expected \"srgb\", \"linear\" or {\"gamma\": g}");
    }
    mark_given(s, "encoding");
    return LAM_OK;
}

static lam_status parse_layer(const cJSON *L, const char *path, int i, lam_setup *s,
                              const char *dir, lam_error *err)
{
    char at[64], key[96];
    snprintf(at, sizeof at, "%s%sstack[%d]", path, path[0] ? "." : "", i);
    lam_status st = check_keys(L, at, layer_keys, err);
    if (st)
        return st;
    join_key(key, sizeof key, at, "material");
    const cJSON *m = cJSON_GetObjectItemCaseSensitive(L, "material");
    if (!m)
        return lam_error_set(err, LAM_EFORMAT, "key %s: missing", key);
    if ((st = get_material(m, key, dir, &s->layer_material[i], err)))
        return st;
    s->layers = (size_t)i + 1;
    join_key(key, sizeof key, at, "thickness_nm");
    int found;
    if ((st = lam_json_number(L, "thickness_nm", key, 0, 5000, &s->layer_nm[i], &found, err)))
        return st;
    return found ? LAM_OK : lam_error_set(err, LAM_EFORMAT, "key %s: missing", key);
}

/* 'path' is "substrate" in a setup file, "" in a stack file of its own. */
static lam_status parse_substrate(const cJSON *o, const char *path, lam_setup *s,
                                  const char *dir, lam_error *err)
{
    char key[64];
    if (!cJSON_IsObject(o))
        return lam_error_set(err, LAM_EFORMAT, "key %s: expected an object",
                             path[0] ? path : "substrate");
    lam_status st = check_keys(o, path, substrate_keys, err);
    const cJSON *stack = cJSON_GetObjectItemCaseSensitive(o, "stack");
    if (!st && stack) {
        int n = cJSON_GetArraySize(stack);
        join_key(key, sizeof key, path, "stack");
        if (!cJSON_IsArray(stack) || n > LAM_SETUP_MAX_LAYERS)
            return lam_error_set(err, LAM_EFORMAT, "key %s: expected a list of at most %d layers",
                                 key, LAM_SETUP_MAX_LAYERS);
        for (size_t i = 0; i < s->layers; i++)
            lam_material_clear(&s->layer_material[i]);
        s->layers = 0;
        for (int i = 0; i < n && !st; i++)
            st = parse_layer(cJSON_GetArrayItem(stack, i), path, i, s, dir, err);
        if (!st)
            mark_given(s, "substrate.stack");
    }
    const cJSON *base = cJSON_GetObjectItemCaseSensitive(o, "base");
    if (!st && base) {
        join_key(key, sizeof key, path, "base");
        lam_material_clear(&s->base);
        if ((st = get_material(base, key, dir, &s->base, err))) {
            lam_material_builtin("Si", &s->base, NULL);
            return st;
        }
        mark_given(s, "substrate.base");
    }
    return st;
}

/* "observation": "reflection" (default) or "transmission" (a stamp). */
static lam_status parse_observation(const cJSON *v, lam_setup *s, lam_error *err)
{
    if (cJSON_IsString(v) && !strcmp(v->valuestring, "reflection"))
        s->transmission = 0;
    else if (cJSON_IsString(v) && !strcmp(v->valuestring, "transmission"))
        s->transmission = 1;
    else
        return lam_error_set(err, LAM_EFORMAT,
                             "key observation: expected \"reflection\" or \"transmission\"");
    return LAM_OK;
}

static lam_status parse_material(const cJSON *v, lam_setup *s, lam_error *err)
{
    if (!cJSON_IsString(v))
        return lam_error_set(err, LAM_EFORMAT, "key material: expected a string");
    return lam_setup_set_material(s, v->valuestring, err);
}

static lam_status parse_conductivity(const cJSON *o, lam_setup *s, const char *dir,
                                     lam_error *err)
{
    if (!cJSON_IsObject(o))
        return lam_error_set(err, LAM_EFORMAT, "key conductivity: expected an object");
    lam_status st = check_keys(o, "conductivity", conductivity_keys, err);
    const cJSON *model = cJSON_GetObjectItemCaseSensitive(o, "model");
    if (!st && lam_setup_crystal_kind(s) != LAM_CRYSTAL_SHEETS &&
        (model || cJSON_GetObjectItemCaseSensitive(o, "film")))
        return lam_error_set(err, LAM_EFORMAT,
                             "key conductivity.%s: applies to graphene, not to material %s",
                             model ? "model" : "film", s->flake);
    int m = -1; /* not given: the model stays as it is */
    if (!st && model)
        st = cJSON_IsString(model)
                 ? lam_name_parse(lam_conductivity_model_names, "conductivity.model",
                                  model->valuestring, &m, err)
                 : lam_error_set(err, LAM_EFORMAT, "key conductivity.model: expected a string");
    if (!st)
        st = only_with(o, "conductivity", "film", "model \"film\"", m == LAM_SETUP_FILM_MODEL,
                       err);
    if (!st && m == LAM_SETUP_FILM_MODEL) {
        /* comparison model: graphene as a slab of tabulated n,k */
        const cJSON *nk = cJSON_GetObjectItemCaseSensitive(o, "film");
        if (!nk)
            return lam_error_set(err, LAM_EFORMAT,
                                 "key conductivity.film: needed with model \"film\" "
                                 "(a material name or {\"file\": \"x.csv\"})");
        lam_material_clear(&s->flake_film);
        st = get_material(nk, "conductivity.film", dir, &s->flake_film, err);
        s->flake_as_film = !st;
    } else if (!st && m >= 0) {
        s->sheet.model = (lam_sheet_model)m;
        s->flake_as_film = 0;
    }
    const cJSON *ex = cJSON_GetObjectItemCaseSensitive(o, "exciton");
    if (!st && ex) {
        if (!cJSON_IsBool(ex))
            return lam_error_set(err, LAM_EFORMAT,
                                 "key conductivity.exciton: expected true or false");
        s->sheet.exciton = cJSON_IsTrue(ex);
    }
    if (!st)
        mark_given(s, "conductivity");
    return st;
}

/* The table's numbers, wherever they sit; an object on a number's path
 * that is not an object is refused here (spectrum: 5). */
static lam_status read_numbers(const cJSON *root, lam_setup *s, lam_error *err)
{
    for (size_t i = 0; i < N_NUMBERS; i++) {
        const char *k = numbers[i].key, *dot;
        const cJSON *o = root;
        while (o && (dot = strchr(k, '.'))) {
            char part[48];
            snprintf(part, sizeof part, "%.*s", (int)(dot - k), k);
            o = cJSON_GetObjectItemCaseSensitive(o, part);
            if (o && !cJSON_IsObject(o))
                return lam_error_set(err, LAM_EFORMAT, "key %.*s: expected an object",
                                     (int)(dot - numbers[i].key), numbers[i].key);
            k = dot + 1;
        }
        double v;
        int found;
        lam_status st =
            o ? lam_json_number(o, k, numbers[i].key, -HUGE_VAL, HUGE_VAL, &v, &found, err)
              : LAM_OK;
        if (!st && o && found)
            st = store_number(s, &numbers[i], v, err);
        if (st)
            return st;
    }
    return LAM_OK;
}

/* "assumed": the keys whose values are lamina's typical ones (a
 * calibration may have moved them), not the user's measurements: they
 * count as not given although the file writes them, so a saved profile
 * reads back exactly as it was fitted (lam_setup_save). */
static lam_status parse_assumed(const cJSON *v, lam_setup *s, lam_error *err)
{
    if (!cJSON_IsArray(v))
        return lam_error_set(err, LAM_EFORMAT, "key assumed: expected an array of key names");
    const cJSON *k;
    cJSON_ArrayForEach(k, v)
    {
        if (!cJSON_IsString(k))
            return lam_error_set(err, LAM_EFORMAT, "key assumed: an entry is not a key name");
        const char *key = defaultable_key(k->valuestring);
        if (!key)
            return lam_error_set(err, LAM_EFORMAT, "key assumed: '%s' is not a setup key",
                                 k->valuestring);
        if (!lam_setup_is_default(s, key) && s->defaulted_count < LAM_SETUP_MAX_DEFAULTED)
            s->defaulted[s->defaulted_count++] = key;
    }
    return LAM_OK;
}

static lam_status parse_root(const cJSON *root, const char *dir, lam_setup *s, lam_error *err)
{
    lam_status st;
    if ((st = lam_json_check_schema(root, SETUP_SCHEMA, err)) ||
        (st = check_keys(root, "", root_keys, err)))
        return st;
    const cJSON *v;
#define ITEM(name) (v = cJSON_GetObjectItemCaseSensitive(root, name))
    if ((ITEM("objective") && (st = parse_objective(v, s, dir, err))) ||
        (ITEM("illuminant") && (st = parse_illuminant(v, s, dir, err))) ||
        (ITEM("camera") && (st = parse_camera(v, s, dir, err))) ||
        (ITEM("encoding") && (st = parse_encoding(v, s, err))) ||
        (ITEM("substrate") && (st = parse_substrate(v, "substrate", s, dir, err))) ||
        (ITEM("material") && (st = parse_material(v, s, err))) ||
        (ITEM("observation") && (st = parse_observation(v, s, err))) ||
        (ITEM("conductivity") && (st = parse_conductivity(v, s, dir, err))) ||
        (st = read_numbers(root, s, err)))
        return st;
    if (s->transmission && cimag(lam_material_index_eval(&s->base, 550)) > 1e-3)
        return lam_error_set(err, LAM_ERANGE,
                             "key observation: transmission needs a transparent base (PDMS, "
                             "glass), not %s",
                             s->base.name);
    if (ITEM("uncertainty") && (st = check_keys(v, "uncertainty", (const char *const[]){NULL}, err)))
        return st;
    if (ITEM("substrate_colour") && (st = parse_substrate_colour(v, s, err)))
        return st;
    if (ITEM("spectrum")) {
        if ((st = check_keys(v, "spectrum", (const char *const[]){NULL}, err)))
            return st;
        if (s->grid_hi_nm <= s->grid_lo_nm)
            return lam_error_set(err, LAM_ERANGE, "key spectrum: max_nm must exceed min_nm");
        mark_given(s, "spectrum");
    }
    if (ITEM("assumed") && (st = parse_assumed(v, s, err)))
        return st;
#undef ITEM
    /* "calibration" is the record lam_setup_save keeps of a fit; nothing
     * reads it back yet, so its contents are not checked */
    return LAM_OK;
}

lam_status lam_setup_from_json(const cJSON *root, const char *base_dir, lam_setup *s,
                               lam_error *err)
{
    return parse_root(root, base_dir, s, err);
}

static lam_status setup_reader(const cJSON *root, const char *dir, void *s, lam_error *err)
{
    return parse_root(root, dir, s, err);
}

static lam_status stack_reader(const cJSON *root, const char *dir, void *s, lam_error *err)
{
    return parse_substrate(root, "", s, dir, err);
}

lam_status lam_setup_parse(const char *json, const char *base_dir, lam_setup *s,
                           lam_error *err)
{
    return lam_json_read_text(json, SETUP_SCHEMA, base_dir, setup_reader, s, err);
}

lam_status lam_setup_load(const char *path, lam_setup *s, lam_error *err)
{
    lam_status st =
        lam_json_read_file(path, SETUP_MAX_BYTES, "setup", SETUP_SCHEMA, setup_reader, s, err);
    if (!st)
        snprintf(s->source, sizeof s->source, "%s", path);
    return st;
}

lam_status lam_setup_load_stack(const char *path, lam_setup *s, lam_error *err)
{
    return lam_json_read_file(path, SETUP_MAX_BYTES, "stack", NULL, stack_reader, s, err);
}

/* --- the writer --- */

/* A file the setup names, as the saved profile in folder dir must name it
 * (lam_path_relative): the loader joined it with the setup's folder. */
static void add_file(cJSON *o, const char *dir, const char *file)
{
    char rel[1024];
    lam_path_relative(rel, sizeof rel, dir, file);
    cJSON_AddStringToObject(o, "file", rel);
}

static cJSON *material_json(const lam_material *m, const char *dir)
{
    if (m->file[0]) {
        cJSON *o = cJSON_CreateObject();
        add_file(o, dir, m->file);
        return o;
    }
    return cJSON_CreateString(m->name);
}

/* Put a table number at its path, creating the objects on the way. */
static void put_number(cJSON *root, const lam_setup *s, const lam_setup_number *n)
{
    const char *k = n->key, *dot;
    cJSON *o = root;
    while ((dot = strchr(k, '.'))) {
        char part[48];
        snprintf(part, sizeof part, "%.*s", (int)(dot - k), k);
        cJSON *next = cJSON_GetObjectItemCaseSensitive(o, part);
        o = next ? next : cJSON_AddObjectToObject(o, part);
        k = dot + 1;
    }
    double v = *(const double *)((const char *)s + n->offset);
    if (v >= n->lo && v <= n->hi)
        cJSON_AddNumberToObject(o, k, v);
    else
        cJSON_AddNullToObject(o, k);
}

/* A per-channel array, written only when some value differs from 'neutral'. */
static void add_channel_values(cJSON *o, const char *name, const double *v, size_t n,
                               double neutral)
{
    int any = 0;
    for (size_t c = 0; c < n; c++)
        any |= v[c] != neutral;
    if (!any)
        return;
    double r[LAM_MAX_CHANNELS];
    for (size_t c = 0; c < n; c++)
        r[c] = round(v[c] * 1e4) / 1e4;
    cJSON_AddItemToObject(o, name, cJSON_CreateDoubleArray(r, (int)n));
}

static void save_optics(cJSON *root, const lam_setup *s, const char *dir)
{
    cJSON *ob = cJSON_AddObjectToObject(root, "objective");
    cJSON_AddNumberToObject(ob, "na", s->objective_na);
    cJSON_AddNumberToObject(ob, "illumination_na", s->illumination_na);
    cJSON_AddStringToObject(ob, "pupil_weight", lam_pupil_weight_name(s->pupil));
    cJSON_AddItemToObject(ob, "immersion", material_json(&s->ambient, dir));
    cJSON_AddNumberToObject(ob, "cone_nodes", (double)s->cone_nodes);
    cJSON *il = cJSON_AddObjectToObject(root, "illuminant");
    cJSON_AddStringToObject(il, "kind", lam_illuminant_kind_name(s->illuminant.kind));
    if (s->illuminant.kind == LAM_ILLUM_BLACKBODY)
        cJSON_AddNumberToObject(il, "kelvin", s->illuminant.kelvin);
    if (s->illuminant.kind == LAM_ILLUM_TABLE)
        add_file(il, dir, s->illuminant.table.file);
    cJSON *cam = cJSON_AddObjectToObject(root, "camera");
    cJSON_AddStringToObject(cam, "kind", lam_camera_kind_name(s->camera.kind));
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
        add_file(cam, dir, s->camera.table.file);
    add_channel_values(cam, "shift_nm", s->camera_shift_nm, s->camera.channels, 0);
    add_channel_values(cam, "contrast_gain", s->camera_gain, s->camera.channels, 1);
    add_channel_values(cam, "width_scale", s->camera_width, s->camera.channels, 1);
    if (s->encoding.kind == LAM_TRANSFER_GAMMA) {
        cJSON *g = cJSON_AddObjectToObject(root, "encoding");
        cJSON_AddNumberToObject(g, "gamma", s->encoding.gamma);
    } else {
        lam_transfer_kind k = s->encoding.kind == LAM_TRANSFER_LINEAR ? LAM_TRANSFER_LINEAR
                                                                      : LAM_TRANSFER_SRGB;
        cJSON_AddStringToObject(root, "encoding", lam_name_of(lam_transfer_kind_names, (int)k));
    }
}

static void save_sample(cJSON *root, const lam_setup *s, const char *dir)
{
    cJSON *sub = cJSON_AddObjectToObject(root, "substrate");
    cJSON *st = cJSON_AddArrayToObject(sub, "stack");
    for (size_t i = 0; i < s->layers; i++) {
        cJSON *L = cJSON_CreateObject();
        cJSON_AddItemToObject(L, "material", material_json(&s->layer_material[i], dir));
        cJSON_AddNumberToObject(L, "thickness_nm", round(s->layer_nm[i] * 100) / 100);
        cJSON_AddItemToArray(st, L);
    }
    cJSON_AddItemToObject(sub, "base", material_json(&s->base, dir));
    cJSON_AddStringToObject(root, "observation", s->transmission ? "transmission" : "reflection");
    cJSON_AddStringToObject(root, "material", s->flake);
    cJSON *co = cJSON_AddObjectToObject(root, "conductivity");
    if (lam_setup_crystal_kind(s) == LAM_CRYSTAL_SHEETS) {
        /* a crystal's films follow from its name */
        cJSON_AddStringToObject(co, "model", lam_setup_conductivity_model(s));
        if (s->flake_as_film)
            cJSON_AddItemToObject(co, "film", material_json(&s->flake_film, dir));
    }
    cJSON_AddBoolToObject(co, "exciton", s->sheet.exciton);
    const lam_substrate_colour *sc = &s->substrate_colour;
    int colour = isfinite(sc->oxide_nm), second = colour && isfinite(sc->second_oxide_nm);
    for (size_t i = 0; i < N_NUMBERS; i++)
        if (strncmp(numbers[i].key, "substrate_colour.", 17) ||
            (colour && (second || strncmp(numbers[i].key, "substrate_colour.second.", 24))))
            put_number(root, s, &numbers[i]);
    if (colour) {
        cJSON *o = cJSON_GetObjectItemCaseSensitive(root, "substrate_colour");
        cJSON_AddItemToObject(o, "ln_level",
                              cJSON_CreateDoubleArray(sc->ln_level, (int)s->camera.channels));
        if (second)
            cJSON_AddItemToObject(cJSON_GetObjectItemCaseSensitive(o, "second"), "ln_level",
                                  cJSON_CreateDoubleArray(sc->second_ln_level,
                                                          (int)s->camera.channels));
    }
}

lam_status lam_setup_save(const lam_setup *s, const char *path, const cJSON *extra,
                          lam_error *err)
{
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "schema", SETUP_SCHEMA);
    char dir[1024];
    lam_path_dir(path, dir, sizeof dir);
    save_optics(root, s, dir);
    save_sample(root, s, dir);
    /* every value is written; what was not given stays not given */
    if (s->defaulted_count) {
        cJSON *as = cJSON_AddArrayToObject(root, "assumed");
        for (size_t i = 0; i < s->defaulted_count; i++)
            cJSON_AddItemToArray(as, cJSON_CreateString(s->defaulted[i]));
    }
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
