/*
 * lamina/setup.h - the setup profile: microscope, camera, illuminant,
 * substrate stack and flake material ("lamina-setup/1" JSON, docs/setup.md).
 *
 * Every key is optional except "schema"; a missing key takes the default
 * listed in calib/default-setup.json (compiled in; a test keeps the two
 * equal) and its name is recorded in 'defaulted' so reports can say which
 * values were assumed. Paths inside a file are relative to its folder.
 *
 * Ownership: lam_setup_default fills caller storage; lam_setup_load may
 * allocate material and spectrum tables, released by lam_setup_clear.
 */
#ifndef LAMINA_SETUP_H
#define LAMINA_SETUP_H

#include <stddef.h>
#include "lamina/colour.h"
#include "lamina/conductivity.h"
#include "lamina/error.h"
#include "lamina/material.h"
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
    char flake[32];         /* "graphene" */
    double interlayer_nm;   /* sheet spacing of N-layer graphene */
    int flake_as_film;      /* model N layers as a film of N * interlayer_nm ... */
    lam_material flake_film;/* ... with this index (conductivity.model "film") */
    lam_sheet_params sheet;
    double grid_lo_nm, grid_hi_nm, grid_step_nm;
    lam_setup_sigma sigma;
    size_t defaulted_count;
    const char *defaulted[LAM_SETUP_MAX_DEFAULTED];
    char source[256];       /* file the setup was read from, or "" */
} lam_setup;

/* The built-in defaults (all keys listed as defaulted). */
void lam_setup_default(lam_setup *s);

/* Read a setup file on top of the defaults. Errors name the file and key. */
lam_status lam_setup_load(const char *path, lam_setup *s, lam_error *err);

/* Parse setup JSON text; 'base_dir' resolves relative paths. */
lam_status lam_setup_parse(const char *json, const char *base_dir, lam_setup *s,
                           lam_error *err);

void lam_setup_clear(lam_setup *s);

/* Replace the substrate by a stack file: the "substrate" object of a setup
 * on its own ({"stack": [...], "base": ...}), paths relative to its folder. */
lam_status lam_setup_load_stack(const char *path, lam_setup *s, lam_error *err);

/* Set the thickness of the first SiO2 layer (adds one on the base when the
 * stack has none). LAM_ERANGE for thickness < 0 or > 5000 nm. */
lam_status lam_setup_set_oxide(lam_setup *s, double nm, lam_error *err);

/* Thickness of the first SiO2 layer, or -1 when there is none. */
double lam_setup_oxide(const lam_setup *s);
size_t lam_setup_oxide_layer(const lam_setup *s); /* index, or layers if none */

/* Write the setup as lamina-setup/1 JSON (atomically). Built-in materials
 * are written by name, tables by the path they were read from. 'extra' (may
 * be NULL) is a cJSON object added under the key "calibration". */
struct cJSON;
lam_status lam_setup_save(const lam_setup *s, const char *path, const struct cJSON *extra,
                          lam_error *err);

/* Was a key taken from the defaults? */
int lam_setup_is_default(const lam_setup *s, const char *key);

#endif
