/*
 * lamina/render.h - synthetic microscope images from a scene description
 * ("lamina-scene/1" JSON, docs/scene.md), with their true layer maps.
 *
 * The scene gives a setup (inline object or path), the true oxide, image
 * size, flakes as polygons (pixel coordinates) with layer counts and Fermi
 * levels - or, per flake, another material: a crystal of lamina/crystal.h
 * (MoS2 N layers, hBN of a thickness) or graphite of a thickness (the
 * ordinary-ray n,k of Djurisic and Li 1999) - polymer residue films, dust,
 * vignetting, an illumination gradient, blur, shot and read noise. The
 * setup's observation (reflection or transmission) applies to all. Each pixel's linear value is
 *   exposure * R_c(class) / R_c(substrate) * flatfield(x, y)
 * before blur and noise, so a white-balanced camera is imitated.
 *
 * Ownership: lam_scene_load fills caller storage released with
 * lam_scene_clear; lam_render allocates the image and truth map.
 */
#ifndef LAMINA_RENDER_H
#define LAMINA_RENDER_H

#include <stddef.h>
#include <stdint.h>
#include "lamina/error.h"
#include "lamina/image.h"
#include "lamina/setup.h"

#define LAM_SCENE_MAX_OBJECTS 256
#define LAM_SCENE_MAX_VERTICES 64

typedef enum lam_scene_kind { LAM_SCENE_FLAKE, LAM_SCENE_RESIDUE, LAM_SCENE_DUST } lam_scene_kind;

typedef struct lam_scene_object {
    lam_scene_kind kind;
    int layers;          /* FLAKE */
    double fermi_ev;     /* FLAKE */
    double thickness_nm; /* RESIDUE (PMMA film); FLAKE of a film material (hBN, graphite) */
    char material[32];   /* FLAKE: "" the setup's; a crystal of lamina/crystal.h, "graphite" */
    size_t vertices;
    double x[LAM_SCENE_MAX_VERTICES], y[LAM_SCENE_MAX_VERTICES];
} lam_scene_object;

typedef struct lam_scene {
    lam_setup setup;
    double oxide_nm;
    size_t width, height;
    double exposure;          /* substrate linear level, 0..1 */
    double vignetting;        /* fractional fall-off at the corners */
    double gradient[2];       /* fractional change across the width / height */
    double blur_px;           /* Gaussian sigma */
    double full_well;         /* electrons at full scale (shot noise); 0 = none */
    double read_noise;        /* fraction of full scale */
    unsigned long seed;
    int jpeg_quality;
    int absolute;             /* pixel = exposure * R_c (no per-scene normalisation) */
    size_t count;
    lam_scene_object *objects; /* count entries, owned */
} lam_scene;

/* Read a scene file (at most 4 MiB) into caller storage, defaults first
 * (the setup's defaults, exposure 0.55, 640 x 480, seed 1, quality 92).
 * The file is read strictly like a setup (lamina/jsonfile.h): unknown keys
 * are errors with a suggestion; errors name the file and the key
 * ("flakes[2].layers"). On failure nothing is left to clear. */
lam_status lam_scene_load(const char *path, lam_scene *scene, lam_error *err);

/* Parse scene JSON text; 'base_dir' resolves a setup given as a path. */
lam_status lam_scene_parse(const char *json, const char *base_dir, lam_scene *scene,
                           lam_error *err);

/* Release what a scene owns (its objects and setup tables); scene may be
 * NULL. */
void lam_scene_clear(lam_scene *scene);

/* Render: linear-light image (caller frees) and truth layer map
 * (width*height bytes, malloc'd; 0 substrate, N layers, 255 residue/dust). */
lam_status lam_render(const lam_scene *scene, lam_image **image, uint8_t **truth,
                      lam_error *err);

/* Save a rendered image: ".png" 8-bit sRGB (or 16-bit linear when
 * linear16 != 0), ".jpg"/".jpeg" 8-bit sRGB at the scene's quality. The
 * picture of a one-channel (monochrome) camera is grey: R = G = B in 8-bit
 * files, one channel in 16-bit PNG. */
lam_status lam_render_save(const lam_image *img, const char *path, int linear16,
                           int jpeg_quality, lam_error *err);

/* Render the scene file scene_path and save the image as out
 * (lam_render_save: .png, or .jpg/.jpeg at the scene's quality) and its
 * truth map as OUT_STEM.truth.png, whose path goes to truth_path (n
 * bytes). Errors name the scene file or the output. */
lam_status lam_render_files(const char *scene_path, const char *out, int linear16,
                            char *truth_path, size_t n, lam_error *err);

#endif
