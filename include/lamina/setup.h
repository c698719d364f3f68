/*
 * lamina/setup.h - the setup profile: microscope, camera, illuminant,
 * substrate stack and flake material ("lamina-setup/1" JSON, docs/setup.md).
 *
 * Every key is optional except "schema"; a missing key takes the default
 * listed in calib/default-setup.json (compiled in; a test keeps the two
 * equal) and its name is recorded in 'defaulted' so reports can say which
 * values were assumed. The setters below record their key as given too, so
 * a value from a command-line option is not reported as a default.
 * Paths inside a file are relative to its folder.
 *
 * Files are read strictly: a key no reader knows is an error naming it with
 * its path and the nearest known key (lamina/jsonfile.h); so is a value of
 * the wrong type, outside its range, or a kind-specific key given with
 * another kind ("kelvin" for an LED lamp). Keys starting with '_' are
 * comments. File errors are LAM_EFORMAT (malformed) or LAM_ERANGE (out of
 * range) and name the file and the key.
 *
 * Adding a plain number key is one line of the table in src/setup.c (see
 * DEVELOPERS.md, "Adding a setup key").
 *
 * Ownership: lam_setup_default fills caller storage; lam_setup_load may
 * allocate material and spectrum tables, released by lam_setup_clear.
 */
#ifndef LAMINA_SETUP_H
#define LAMINA_SETUP_H

#include <stddef.h>
#include "lamina/colour.h"
#include "lamina/conductivity.h"
#include "lamina/crystal.h"
#include "lamina/error.h"
#include "lamina/material.h"
#include "lamina/names.h"
#include "lamina/transfer.h"

#define LAM_SETUP_MAX_LAYERS 8
#define LAM_SETUP_MAX_DEFAULTED 32

typedef enum lam_pupil_weight {
    LAM_PUPIL_SIN_COS = 0, /* sin(theta) cos(theta): Lambertian-like Koehler pupil (default) */
    LAM_PUPIL_SIN          /* sin(theta): uniform radiance per solid angle */
} lam_pupil_weight;

/* One standard deviation of values the profile gives, NAN when it says
 * nothing ("uncertainty" in the file; a calibration writes it). */
typedef struct lam_setup_sigma {
    double na, shift_nm, log_gain, log_width, resonance, background, continuum, oxide_nm;
} lam_setup_sigma;

/* Names of the pupil weights ("sin-cos", "sin") and of conductivity.model
 * ("kubo", "universal" for the sheet models of lamina/conductivity.h, and
 * "film", LAM_SETUP_FILM_MODEL, for graphene as a slab of tabulated n,k). */
#define LAM_SETUP_FILM_MODEL 100
extern const lam_name lam_pupil_weight_names[];
extern const lam_name lam_conductivity_model_names[];
const char *lam_pupil_weight_name(lam_pupil_weight weight);

/* A plain number key of a setup file: its path ("conductivity.puddle_eV"),
 * the accepted range (inclusive), where it is stored (offsetof a double
 * field of lam_setup), and the key listed as given when it is read (NULL:
 * the number's own key). */
typedef struct lam_setup_number {
    const char *key;
    double lo, hi;
    size_t offset;
    const char *records;
} lam_setup_number;

/* No oxide is known better than this (nm): a setup file's finer
 * uncertainty.oxide_nm is refused, and the estimation raises a finer sd to
 * it, so that the prior cannot make the fit singular. Ellipsometry of
 * thermal SiO2 is good to a few tenths of a nm (common practice). */
#define LAM_OXIDE_SD_MIN_NM 0.1

/* The model takes SiO2 as Malitson's fused silica; thermal oxide films
 * differ from it by up to ~1 % in index (Gao et al. 2013, one of the
 * tables in tests/data/nk), which reads as the same share of thickness.
 * A fitted oxide's sigma carries that share, common to every image of a
 * chip (so it is part of the shared, not the per-image, uncertainty). */
#define LAM_OXIDE_INDEX_REL 0.008

/* The bare substrate's colour as this camera and lamp record it, from a
 * calibration on a chip of known oxide ("substrate_colour" in the file;
 * lamina/substrate_colour.h uses it as an oxide gauge). oxide_nm is NAN
 * when none is recorded. */
typedef struct lam_substrate_colour {
    double oxide_nm;          /* the oxide it was recorded at */
    double oxide_sd_nm;       /* that oxide's standard deviation */
    double ln_level[LAM_MAX_CHANNELS]; /* ln of the substrate's linear level per channel,
                                        * the mean over channels removed (only differences
                                        * between channels count) */
    double stability;         /* sd of each channel's ln level from session to session
                               * beyond the exposure (white balance, camera), default 0.01 */
    double lamp_tilt;         /* sd of ln(B/R) from session to session from the lamp's
                               * colour temperature (a tilt in 1/wavelength), default 0.05 */
    /* A second chip of known oxide under the same lamp and white balance
     * ("substrate_colour.second"): it measures how the colour changes
     * with the oxide, which with a camera of unknown curves the model
     * cannot tell (lamina/substrate_colour.h). second_oxide_nm is NAN when
     * none is recorded. */
    double second_oxide_nm, second_oxide_sd_nm;
    double second_ln_level[LAM_MAX_CHANNELS];
} lam_substrate_colour;

typedef struct lam_setup {
    double objective_na;
    double illumination_na; /* the cone averaged over: asin(NA / n_ambient) */
    lam_pupil_weight pupil;
    size_t cone_nodes;      /* Gauss-Legendre nodes over the cone angle */
    lam_material ambient;
    lam_illuminant illuminant;
    lam_camera camera;
    double camera_shift_nm[LAM_MAX_CHANNELS]; /* calibrated wavelength shift per channel (0) */
    double camera_gain[LAM_MAX_CHANNELS];     /* calibrated contrast gain per channel (1) */
    double camera_width[LAM_MAX_CHANNELS];    /* calibrated width scale per channel (1) */
    lam_transfer encoding;
    double um_per_px;       /* 0 when unknown */
    size_t layers;          /* substrate films from the top down */
    lam_material layer_material[LAM_SETUP_MAX_LAYERS];
    double layer_nm[LAM_SETUP_MAX_LAYERS];
    lam_material base;
    int transmission;       /* observation "transmission": light through the stack into a thick
                             * transparent base (a stamp), contrast 1 - T_flake / T_substrate */
    char flake[32];         /* "graphene", or a crystal of lamina/crystal.h ("hBN") */
    const lam_crystal *crystal; /* its record (graphene's by default) */
    double interlayer_nm;   /* sheet spacing of N-layer graphene; layer thickness of crystals */
    int flake_as_film;      /* model N layers as a film of N * interlayer_nm ... */
    lam_material flake_film;/* ... with this index (conductivity.model "film"; a crystal's
                             * bulk or continuous film) ... */
    size_t flake_layer_films; /* ... except for N <= this many layers, which have ... */
    lam_material flake_layer_film[LAM_CRYSTAL_LAYER_TABLES]; /* ... their own n,k (TMDs) */
    lam_sheet_params sheet;
    double grid_lo_nm, grid_hi_nm, grid_step_nm;
    lam_setup_sigma sigma;
    lam_substrate_colour substrate_colour;
    size_t defaulted_count;
    const char *defaulted[LAM_SETUP_MAX_DEFAULTED];
    char source[256];       /* file the setup was read from, or "" */
} lam_setup;

/* The built-in defaults (all keys listed as defaulted). */
void lam_setup_default(lam_setup *s);

/* Read a setup file on top of what s holds (normally the defaults). Errors
 * name the file and the key; on failure s may be partly updated and must
 * still be released with lam_setup_clear. */
lam_status lam_setup_load(const char *path, lam_setup *s, lam_error *err);

/* Parse setup JSON text; 'base_dir' resolves relative paths. */
lam_status lam_setup_parse(const char *json, const char *base_dir, lam_setup *s,
                           lam_error *err);

/* The same from a parsed tree (a setup written inline in a scene); the
 * tree must carry "schema": "lamina-setup/1". */
struct cJSON;
lam_status lam_setup_from_json(const struct cJSON *root, const char *base_dir, lam_setup *s,
                               lam_error *err);

/* Release the tables a setup owns (materials, spectra); s may be NULL.
 * The struct itself is caller storage. */
void lam_setup_clear(lam_setup *s);

/* Replace the substrate by a stack file: the "substrate" object of a setup
 * on its own ({"stack": [...], "base": ...}), paths relative to its folder;
 * its keys are named without the "substrate." prefix in messages. */
lam_status lam_setup_load_stack(const char *path, lam_setup *s, lam_error *err);

/* Setters. Each checks its value (LAM_ERANGE with a message naming the
 * setup key, e.g. "key fermi_eV: 3 is outside -2 to 2"), stores it and
 * records the key as given. */

/* Any number key of the table by its path ("fermi_eV",
 * "conductivity.puddle_eV"); LAM_EINVAL for a key not in the table. */
lam_status lam_setup_set_number(lam_setup *s, const char *key, double value, lam_error *err);

/* Fermi level in eV (key fermi_eV, -2 to 2). */
lam_status lam_setup_set_fermi(lam_setup *s, double ev, lam_error *err);

/* Pixel size at the sample in micrometres (key um_per_px, 1e-4 to 1000). */
lam_status lam_setup_set_um_per_px(lam_setup *s, double um, lam_error *err);

/* Illumination NA (key objective.illumination_na), 0 up to 0.999 times
 * the ambient index; the objective NA is raised to it when smaller. */
lam_status lam_setup_set_na(lam_setup *s, double na, lam_error *err);

/* Flake material (key material): "graphene" or a crystal of
 * lamina/crystal.h ("hBN", "MoS2", "MoS2/Song", "WS2", "WSe2", ...; any
 * case). A crystal's layers become films of its n,k (flake_as_film with
 * the per-layer tables); graphene returns to sheets. LAM_ERANGE naming
 * the key and listing the materials for any other name. */
lam_status lam_setup_set_material(lam_setup *s, const char *name, lam_error *err);

/* The flake model in words: the sheet conductivity of graphene
 * (lam_sheet_describe) or a crystal's n,k sources. */
void lam_setup_describe_flake(const lam_setup *s, char *buf, size_t n);

/* The kind of the flake material (LAM_CRYSTAL_SHEETS for graphene). */
lam_crystal_kind lam_setup_crystal_kind(const lam_setup *s);

/* Set the thickness of the first SiO2 layer (adds one on the base when the
 * stack has none; records substrate.stack). LAM_ERANGE for thickness < 0
 * or > 5000 nm, LAM_ETOOBIG when a layer is needed and the stack is full. */
lam_status lam_setup_set_oxide(lam_setup *s, double nm, lam_error *err);

/* Thickness of the first SiO2 layer, or -1 when there is none. */
double lam_setup_oxide(const lam_setup *s);

/* Index of the first SiO2 layer in the stack, or s->layers if none. */
size_t lam_setup_oxide_layer(const lam_setup *s);

/* Write the setup as lamina-setup/1 JSON (atomically). Built-in materials
 * are written by name, tables by the path they were read from; every key
 * the reader knows is written, so lam_setup_load gives the setup back.
 * 'extra' (may be NULL) is a cJSON object added under the key
 * "calibration". */
lam_status lam_setup_save(const lam_setup *s, const char *path, const struct cJSON *extra,
                          lam_error *err);

/* Was a key taken from the defaults? ("camera", "objective.na", ...: the
 * names listed under defaults_used in reports.) */
int lam_setup_is_default(const lam_setup *s, const char *key);

/* The table of plain number keys (for tests and documentation). */
const lam_setup_number *lam_setup_numbers(size_t *count);

/* conductivity.model of a setup: "kubo", "universal" or "film". */
const char *lam_setup_conductivity_model(const lam_setup *s);

/* ---- a setup from a file and values given beside it ---- */

/* What a user gives on top of the defaults: a setup file, a stack file and
 * single values (the command line's --setup, --stack, --material, --oxide,
 * --na, --fermi, --um-per-px). lam_setup_overrides_init marks each as not
 * given. */
typedef struct lam_setup_overrides {
    const char *setup_file; /* lamina-setup/1, or NULL: the defaults */
    const char *stack_file; /* a substrate on its own (lam_setup_load_stack), or NULL */
    const char *material;   /* flake material, or NULL */
    double oxide_nm;        /* < 0: not given */
    double na;              /* < 0: not given */
    double fermi_ev;        /* NAN: not given */
    double um_per_px;       /* <= 0: not given */
} lam_setup_overrides;

/* Nothing given: no files, NULL material, the "not given" values above. */
void lam_setup_overrides_init(lam_setup_overrides *o);

/* Build a setup: the defaults, then the setup file, then the stack file,
 * then each given value through its setter (so its key is not listed
 * under defaults_used). A file's errors are its reader's, with the file
 * recorded in err->file. A value a setter refuses is LAM_EINVAL (a bad
 * option: the command line exits 2) whatever the setter said, its message
 * after the option's command-line name ("--na: key
 * objective.illumination_na: 1.2 is outside 0 to 0.999"). On failure s is
 * released already; on success the caller releases it (lam_setup_clear). */
lam_status lam_setup_build(const lam_setup_overrides *o, lam_setup *s, lam_error *err);

#endif
