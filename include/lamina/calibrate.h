/*
 * lamina/calibrate.h - a setup profile fitted to regions of known layer
 * count (labels: a Raman-confirmed flake is enough to start), or, with
 * "self" calibration, to regions whose layer counts are left latent.
 *
 * The fit is the analysis' own joint estimate (lamina/estimate.h) with the
 * labelled regions' layer counts fixed (and, with lam_calib_add_unlabelled,
 * the image's other regions' counts latent): graphene's visible response, the
 * illumination NA, each channel's wavelength shift and contrast gain, and
 * each image's oxide (fixed where --known-oxide gives it). Every value
 * comes with its posterior standard deviation; a value the labels barely
 * inform (posterior sd above half its prior sd) is reported as "not
 * constrained" and the profile keeps the prior's value and spread for it.
 * A labelled region that the fitted model still cannot reproduce (its
 * chi-square p-value below 1e-3) makes the calibration fail with a message
 * naming it: a wrong label, oxide or encoding would otherwise be baked into
 * every later analysis.
 *
 * The written profile carries the fitted values in the ordinary keys
 * (conductivity.resonance ..., objective.illumination_na, camera.shift_nm,
 * camera.contrast_gain) and their spreads under "uncertainty", so the
 * analyses that use it start from a tight prior. With three channels it
 * also records the bare substrate's colour at the oxide of the image whose
 * oxide is best known (given, else fitted; "substrate_colour",
 * lamina/substrate_colour.h): later analyses under the same lamp and white
 * balance read the oxide from it. With a camera whose curves are not
 * given, the model cannot tell how that colour changes with the oxide;
 * a second chip of measured oxide, 2-30 nm from the first, measures it
 * (lam_calib_add_second_chip, or among the calibration's images the one
 * of given oxide farthest from the first within that range).
 *
 * Ownership: lam_calib_set_init / lam_calib_set_clear; lam_calib_result
 * borrows the start setup's materials (do not clear both).
 */
#ifndef LAMINA_CALIBRATE_H
#define LAMINA_CALIBRATE_H

#include <stddef.h>
#include <stdint.h>
#include "lamina/error.h"
#include "lamina/estimate.h"
#include "lamina/image.h"
#include "lamina/setup.h"

#define LAM_CALIB_MAX_IMAGES 64
/* The sd of an oxide given as measured (--known-oxide): ellipsometry of
 * thermal SiO2 is good to a few tenths of a nm (common practice). */
#define LAM_KNOWN_OXIDE_SD_NM 0.3

typedef struct lam_calib_image {
    char path[1024];
    size_t count;
    lam_est_region *regions;  /* owned */
    double known_oxide;       /* NAN: fitted */
    double substrate_level[LAM_MAX_CHANNELS]; /* the bare substrate's linear level */
} lam_calib_image;

/* A second chip of measured oxide, photographed under the same lamp and
 * white balance: only its bare substrate's colour is used (it measures
 * how the colour changes with the oxide; lamina/substrate_colour.h). */
typedef struct lam_calib_colour_chip {
    char path[1024];
    int present;
    double oxide_nm;
    double substrate_level[LAM_MAX_CHANNELS];
} lam_calib_colour_chip;

typedef struct lam_calib_set {
    size_t images;
    lam_calib_image image[LAM_CALIB_MAX_IMAGES];
    lam_calib_colour_chip second_chip;
} lam_calib_set;

/* A fitted value, or the reason there is none. */
typedef struct lam_calib_value {
    const char *name;
    double value, sigma, prior_sd;
    int fitted;       /* free in the fit */
    int constrained;  /* sigma < 0.5 prior_sd */
} lam_calib_value;

typedef struct lam_calib_residual {
    size_t image, region;
    int layers;
    double measured[LAM_MAX_CHANNELS], model[LAM_MAX_CHANNELS], sigma[LAM_MAX_CHANNELS];
    double chi2, pvalue;
} lam_calib_residual;

typedef struct lam_calib_result {
    lam_setup setup;                      /* the profile to write (borrows materials) */
    size_t channels, images, labelled;
    size_t latent;                        /* regions with latent counts (self, or the
                                           * unlabelled regions of labelled images) */
    lam_calib_value shared[LAM_NU_COUNT];
    lam_calib_value oxide[LAM_CALIB_MAX_IMAGES];
    size_t residuals;
    lam_calib_residual *residual;         /* one per labelled region, owned */
    double floor_rel, chi2, dof;
} lam_calib_result;

/* An empty set of measured images; release with lam_calib_set_clear. */
void lam_calib_set_init(lam_calib_set *s);
/* Release the set's regions; s may be NULL. */
void lam_calib_set_clear(lam_calib_set *s);
/* Release a result's residuals (not the start setup's materials it
 * borrows); r may be NULL. */
void lam_calib_result_clear(lam_calib_result *r);

/* Measure the labelled regions of one image: labels is a layer-map coded
 * 8-bit map of the image's size (0 substrate, N layers, 254/255 ignored);
 * each connected labelled area with at least 50 interior pixels is one
 * region of known layer count. The image is read in the setup's encoding
 * and channels. */
lam_status lam_calib_measure_labels(lam_calib_set *set, const char *image_path,
                                    const uint8_t *labels, size_t width, size_t height,
                                    const lam_setup *setup, lam_error *err);

/* Add the other regions of an already measured labelled image (its
 * index in the set) with latent layer counts: the analysis' regions (with
 * 'setup') that touch no labelled flake. The labelled regions fix the
 * ladder; these add every layer count the image shows, which constrains
 * the response, NA and channel curves far better than one flake does.
 * Regions touching a label are left out (they are the labelled flake's
 * own edges or parts). */
lam_status lam_calib_add_unlabelled(lam_calib_set *set, size_t image, const uint8_t *labels,
                                    size_t width, size_t height, const lam_setup *setup,
                                    lam_error *err);

/* Turn a label file ("lamina-labels/1" JSON: {"labels": [{"layers": N,
 * "polygon": [[x, y], ...]} or {"layers": N, "point": [x, y]}]}) into a
 * layer-map coded label map for an image. Points take the whole region of
 * the image's segmentation (with 'setup') that contains them. 'map' holds
 * width*height bytes and is filled (0 = unlabelled background). */
lam_status lam_calib_labels_from_json(const char *json_path, const char *image_path,
                                      const lam_setup *setup, size_t width, size_t height,
                                      uint8_t *map, lam_error *err);

/* A second chip of measured oxide (ellipsometry) for the substrate's
 * colour: the image's bare substrate level only; its flakes, if any, are
 * not used. Its oxide must lie LAM_COLOUR_SECOND_MIN_NM to
 * LAM_COLOUR_SECOND_MAX_NM from the first chip's (checked by
 * lam_calibrate: LAM_ERANGE); the image is read as for the labels. */
lam_status lam_calib_add_second_chip(lam_calib_set *set, const char *image_path, double oxide_nm,
                                     const lam_setup *setup, lam_error *err);

/* Add an image's segmented regions with latent layer counts (self
 * calibration): the analysis' own regions that may inform a fit. */
lam_status lam_calib_measure_self(lam_calib_set *set, const char *image_path,
                                  const lam_setup *setup, lam_error *err);

/* Fit. known_oxide[image] (may be NULL; NAN entries are fitted) fixes
 * oxides measured elsewhere (ellipsometry); known_na (NAN = fitted) fixes
 * the illumination NA. LAM_ERANGE with the worst region named when a
 * labelled region cannot be reproduced. */
lam_status lam_calibrate(const lam_setup *start, const lam_calib_set *set,
                         const double *known_oxide, double known_na, lam_calib_result *out,
                         lam_error *err);

#endif
