/*
 * lamina/analyze.h - the whole analysis of one micrograph: load in linear
 * light, substrate flat field and noise, contrast map, segmentation, the
 * joint estimate of what the image shares with its run (graphene response,
 * NA, camera channels, contrast gains) and its oxide (lamina/estimate.h),
 * per-region posteriors (lamina/infer.h), Fermi level, usable rectangles.
 * Reports are written by lamina/report.h.
 *
 * Stages: the substrate (its choice among colour modes uses the ladder at
 * the prior's centre), the contrast map, regions of uniform contrast (no
 * model involved: a flake is one region however far the model is off), the
 * joint fit of the shared parameters and the oxide with the layer counts
 * latent, and every region's posterior with the parameters' uncertainty.
 *
 * A run of images from one microscope shares its optics: give
 * lam_analysis_options.shared_prior (a pooled posterior, see
 * lamina/batch.h) and the image's fit starts from it instead of the wide
 * default prior.
 *
 * Ownership: lam_analyze allocates a lam_analysis released with
 * lam_analysis_free. The setup and options are borrowed for the call only.
 * Errors: the status of the failing stage, with the file named.
 */
#ifndef LAMINA_ANALYZE_H
#define LAMINA_ANALYZE_H

#include <stddef.h>
#include <stdint.h>
#include "lamina/error.h"
#include "lamina/warnings.h"
#include "lamina/estimate.h"
#include "lamina/image.h"
#include "lamina/infer.h"
#include "lamina/model.h"
#include "lamina/segment.h"
#include "lamina/setup.h"
#include "lamina/substrate.h"
#include "lamina/thickness.h"

/* A posterior over the shared parameters, to be used as the prior of later
 * images (pooled over a run, or carried from image to image). */
typedef struct lam_shared_prior {
    int set;
    double mean[LAM_NU_COUNT], sd[LAM_NU_COUNT]; /* sd 0: fixed */
    double floor_rel;
    size_t images, regions;     /* what it was estimated from */
    size_t two_readings;        /* of its images, those that alone fit two readings
                                 * (warning "two-readings"; lamina/pool.h) */
} lam_shared_prior;

/* The annotated picture's file format (lam_batch_analyse_one): AUTO takes
 * the input's own when that is a JPEG (about a quarter of the PNG's size,
 * and faster to write: docs/performance.md) and PNG for every lossless
 * input. */
typedef enum lam_annotated_format {
    LAM_ANNOTATED_AUTO,
    LAM_ANNOTATED_PNG,
    LAM_ANNOTATED_JPEG
} lam_annotated_format;

typedef struct lam_analysis_options {
    lam_load_options load;
    lam_substrate_options substrate;
    lam_segment_options segment;
    lam_infer_options infer;
    lam_estimate_options estimate;
    size_t max_layers;          /* K (default 6) */
    double min_area_um2;        /* "small" below this when the pixel size is known (4) */
    double min_area_px;         /* ... otherwise (200) */
    double oxide_tolerance_nm;  /* pass/fail of the oxide audit (10) */
    int fit_oxide, fit_fermi;   /* both on by default */
    size_t threads;             /* for the pixel passes (default: all cores) */
    const lam_shared_prior *shared_prior; /* NULL: the setup's priors */
    lam_annotated_format annotated; /* the annotated picture's format (AUTO) */
} lam_analysis_options;

/* What the bare substrate's colour says about the oxide, when the setup
 * records its colour at a known oxide (lamina/substrate_colour.h). */
typedef struct lam_colour_oxide {
    int checked;                     /* the gauge was read */
    int used;                        /* it agreed with the flakes and was combined */
    double estimate, sigma, chi2;    /* the gauge's oxide, its sd, its colour chi2 */
    double reference_nm, reference_sd; /* the oxide the colour was recorded at, its sd
                                      * (an error every image of the setup shares) */
    char note[160];                  /* why it was not used, "" when used */
} lam_colour_oxide;

typedef struct lam_oxide_result {
    double nominal, estimate, sigma; /* estimate = nominal when not fitted */
    double sigma_given_shared;       /* sigma were the shared parameters exact (see
                                      * lam_est_image): the part independent per image */
    int fitted, pass;
    size_t regions_used;
    char method[224];
    lam_colour_oxide colour;
    double rival_nm; /* an oxide about one interference order away that fits the
                      * regions nearly as well (the warning "oxide-ambiguous"), or NAN */
} lam_oxide_result;

/* Cumulative seconds at the end of each stage (for --verbose and benchmarks). */
enum { LAM_T_LOAD, LAM_T_DISPLAY, LAM_T_SUBSTRATE, LAM_T_CONTRAST, LAM_T_MODEL, LAM_T_SEGMENT,
       LAM_T_OXIDE, LAM_T_REGIONS, LAM_T_COUNT };

typedef struct lam_analysis {
    double seconds[LAM_T_COUNT];
    char file[1024];
    size_t width, height, channels;
    lam_transfer transfer;
    int transfer_from_file;         /* the curve came from the file's colour metadata */
    int bit_depth;
    int jpeg_input;                 /* the input was a JPEG (lam_image_block_coded) */
    double um_per_px;               /* 0 unknown: the setup's, else the file's (TIFF
                                     * resolution tags) */
    int um_per_px_from_file;        /* the pixel size came from the file */
    size_t clipped_pixels;
    lam_substrate substrate;
    lam_segmentation *seg;
    size_t count;
    lam_region_result *results;     /* count entries, region i has id i+1 */
    lam_thickness_result *thickness; /* count entries for a continuous crystal (hBN), else NULL */
    lam_est_region *measured;       /* count entries: the regions' measurements */
    lam_oxide_result oxide;
    double file_step[3];            /* a lossy file's colour step per channel, contrast
                                     * units (one JPEG DC quantisation step); 0 lossless */
    lam_estimate *estimate;         /* the fit (owned); its image 0 is this one */
    lam_prediction ladder;          /* observed-scale ladder at the estimate, N = 0..40 */
    size_t max_layers;
    uint8_t *display;               /* the input as 8-bit sRGB, interleaved; NULL until
                                     * lam_analysis_display when 'source' is kept */
    uint8_t *source;                /* a JPEG input's file bytes (source_size of them),
                                     * decoded again for the picture; else NULL */
    size_t source_size;
    char conductivity[256];
    double illumination_na, fermi_ev;
    const char *pupil, *camera;
    size_t defaulted_count;
    const char *defaulted[LAM_SETUP_MAX_DEFAULTED];
    lam_infer_options infer;        /* as used (K, small-area threshold) */
    char content_hash[32];          /* of the input file, set by the caller ("" if unset) */
    char setup_hash[32];            /* of the setup and options, set by the caller */
    int prior_pooled;               /* the shared prior came from a pooled run */
    size_t prior_images;
    size_t prior_two_readings;  /* of them, those that alone fit two readings */
    lam_warnings warnings;          /* what makes the answers doubtful (lamina/warnings.h) */
} lam_analysis;

/* K = 6, "small" below 4 um2 (200 px without a pixel size), oxide and
 * Fermi level fitted, all cores, the setup's own priors. */
lam_analysis_options lam_analysis_options_default(void);

/* The annotated picture's file extension for analysis a under format f:
 * "jpg" or "png". */
const char *lam_annotated_extension(const lam_analysis *a, lam_annotated_format f);

/* Set an option from text by its command-line name: "min-area" (um^2, or
 * px without a pixel size: both limits), "max-megapixels", "encoding"
 * (srgb, linear or a gamma value), "substrate-roi" (X,Y,W,H) or
 * "annotated-format" (auto, png or jpeg). LAM_ERANGE
 * with a message naming the option for a bad value, LAM_EINVAL for an
 * unknown name; o is unchanged on failure. */
lam_status lam_analysis_options_set(lam_analysis_options *o, const char *name, const char *text,
                                    lam_error *err);

/* Analyse one image with a setup (docs/method.md): on success *out is a
 * new analysis the caller frees with lam_analysis_free, its warnings in
 * (*out)->warnings. Errors name the file (err->file) and the problem: an
 * unreadable or refused file, an image whose channels do not match the
 * setup's camera (LAM_EINVAL), no substrate found or a saturated image
 * (LAM_ERANGE), out of memory. Nothing is written. opt may be NULL. */
lam_status lam_analyze(const char *path, const lam_setup *setup,
                       const lam_analysis_options *opt, lam_analysis **out, lam_error *err);
/* Release an analysis; a may be NULL. */
void lam_analysis_free(lam_analysis *a);

/* Make sure a->display holds the input's 8-bit codes: a JPEG is decoded
 * again from a->source (the bytes analysed, not the file as it is now).
 * LAM_EINVAL when neither is left (lam_analysis_drop_pictures, or a
 * picture drawn over it already), LAM_ENOMEM. */
lam_status lam_analysis_display(lam_analysis *a, lam_error *err);

/* Free the display copy and the kept input bytes (an analysis kept only
 * for its results); a may be NULL. */
void lam_analysis_drop_pictures(lam_analysis *a);

/* Did region i inform the shared parameters and the oxide? */
int lam_analysis_region_fits_oxide(const lam_analysis *a, size_t i);

/* The posterior over the shared parameters of a fitted estimate, as a
 * prior for later images. */
void lam_shared_prior_from(const lam_estimate *e, lam_shared_prior *out);
/* ... and applied to a new estimate. */
void lam_shared_prior_apply(const lam_shared_prior *p, lam_estimate *e);

/* The oxide audit over analyses (profiles, combination, verdict) is in
 * lamina/oxide.h. */

#endif
