/*
 * lamina/analyze.h - the whole analysis of one micrograph: load in linear
 * light, substrate flat field and noise, contrast map, segmentation against
 * the model ladder, oxide fit, per-region posteriors, Fermi level and
 * usable rectangles. Reports are written by lamina/report.h.
 *
 * Ownership: lam_analyze allocates a lam_analysis released with
 * lam_analysis_free. The setup is borrowed for the call only.
 */
#ifndef LAMINA_ANALYZE_H
#define LAMINA_ANALYZE_H

#include <stddef.h>
#include <stdint.h>
#include "lamina/error.h"
#include "lamina/image.h"
#include "lamina/infer.h"
#include "lamina/model.h"
#include "lamina/segment.h"
#include "lamina/setup.h"
#include "lamina/substrate.h"

typedef struct lam_analysis_options {
    lam_load_options load;
    lam_substrate_options substrate;
    lam_segment_options segment;
    lam_infer_options infer;
    size_t max_layers;          /* K (default 6) */
    double min_area_um2;        /* "small" below this when the pixel size is known (4) */
    double min_area_px;         /* ... otherwise (200) */
    double oxide_half_range_nm; /* search nominal +- this (25) */
    double oxide_tolerance_nm;  /* pass/fail of the oxide audit (10) */
    int fit_oxide, fit_fermi;   /* both on by default */
    size_t threads;             /* for the pixel passes (default: all cores) */
} lam_analysis_options;

typedef struct lam_oxide_result {
    double nominal, estimate, sigma; /* estimate = nominal when not fitted */
    int fitted, pass;
    size_t regions_used;
    char method[96];
} lam_oxide_result;

/* Cumulative seconds at the end of each stage (for --verbose and benchmarks). */
enum { LAM_T_LOAD, LAM_T_DISPLAY, LAM_T_SUBSTRATE, LAM_T_CONTRAST, LAM_T_MODEL, LAM_T_SEGMENT,
       LAM_T_OXIDE, LAM_T_REGIONS, LAM_T_COUNT };

typedef struct lam_analysis {
    double seconds[LAM_T_COUNT];
    char file[1024];
    size_t width, height;
    lam_transfer transfer;
    int bit_depth;
    double um_per_px;               /* 0 unknown */
    size_t clipped_pixels;
    lam_substrate substrate;
    lam_segmentation *seg;
    size_t count;
    lam_region_result *results;     /* count entries, region i has id i+1 */
    lam_oxide_result oxide;
    lam_prediction ladder;          /* at the fitted oxide and nominal Fermi level */
    size_t max_layers, thick_to;
    uint8_t *display;               /* the input as 8-bit sRGB, interleaved */
    char conductivity[200];
    double illumination_na, fermi_ev;
    const char *pupil, *camera;
    size_t defaulted_count;
    const char *defaulted[LAM_SETUP_MAX_DEFAULTED];
    lam_infer_options infer;        /* as used (floors, K, small-area threshold) */
    char content_hash[32];          /* of the input file, set by the caller ("" if unset) */
    char setup_hash[32];            /* of the setup and options, set by the caller */
    double fermi_signed;            /* the ladder's Fermi level as given */
} lam_analysis;

lam_analysis_options lam_analysis_options_default(void);

lam_status lam_analyze(const char *path, const lam_setup *setup,
                       const lam_analysis_options *opt, lam_analysis **out, lam_error *err);
void lam_analysis_free(lam_analysis *a);

/* Is region i usable for the oxide fit (assigned, not saturated or
 * unmodelled, interior >= 100 px)? */
int lam_analysis_region_fits_oxide(const lam_analysis *a, size_t i);

/* The oxide audit's profile: chi2_total(d) on a grid, summed over images
 * (joint) and per image (per_image[j * n + g], may be NULL), with the coarse
 * model the fits use and the usable regions of each analysis. */
lam_status lam_oxide_joint_profile(const lam_analysis *const *analyses, size_t images,
                                   const lam_setup *setup, const double *grid, size_t n,
                                   double *joint, double *per_image, lam_error *err);

/* Absolute oxide from the substrate's colour: each image's fitted substrate
 * level at its centre over a bare-Si reference image's level (same lamp,
 * objective and exposure), against the model's R_c(SiO2 d on Si) / R_c(Si).
 * 'stability' is the assumed relative repeatability of lamp and exposure
 * between the two images (e.g. 0.01). chi2 over the grid, summed over images. */
lam_status lam_reference_level(const char *path, const lam_load_options *load, double level[3],
                               lam_error *err);
lam_status lam_oxide_absolute_profile(const lam_analysis *const *analyses, size_t images,
                                      const double reference_level[3], const lam_setup *setup,
                                      double stability, const double *grid, size_t n,
                                      double *chi2, lam_error *err);

#endif
