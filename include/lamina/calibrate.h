/*
 * lamina/calibrate.h - fit a setup profile (camera channel centres and
 * widths, illumination NA, the oxide of each image) to regions of known
 * layer count, or, with "self" calibration, to regions whose layer count is
 * whatever fits best.
 *
 * Samples are region means of contrast with their noise; the fit minimises
 * sum (m_c - C_c(N; theta))^2 / sigma^2 with sigma^2 = kappa noise^2 / n +
 * floor^2 (calibration floor 0.003) by GSL's Levenberg-Marquardt
 * (multifit_nlinear, finite-difference Jacobian) on the coarse model.
 * Uncertainties are from the covariance (J^T J)^-1, scaled by chi2/dof when
 * that exceeds 1. Self-calibration is honest only with several layer counts
 * and oxides in the data: its result reports the condition number.
 */
#ifndef LAMINA_CALIBRATE_H
#define LAMINA_CALIBRATE_H

#include <stddef.h>
#include <stdint.h>
#include "lamina/error.h"
#include "lamina/image.h"
#include "lamina/setup.h"

#define LAM_CALIB_MAX_IMAGES 32

typedef struct lam_calib_sample {
    size_t image;      /* index of the image (each has its own oxide) */
    int layers;        /* known N, or 0 for self-calibration */
    double mean[3], noise[3], kappa, n;
} lam_calib_sample;

typedef struct lam_calib_set {
    size_t count, cap, images;
    lam_calib_sample *samples;
} lam_calib_set;

typedef struct lam_calib_result {
    lam_setup setup;   /* the start setup with the fitted values (borrowed materials) */
    double centre[3], fwhm[3], na, oxide[LAM_CALIB_MAX_IMAGES];
    double centre_sigma[3], fwhm_sigma[3], na_sigma, oxide_sigma[LAM_CALIB_MAX_IMAGES];
    int oxide_known[LAM_CALIB_MAX_IMAGES];
    double rms_before, rms_after; /* RMS normalised residual */
    double chi2_before, chi2_after, condition;
    size_t samples, images, iterations;
} lam_calib_result;

void lam_calib_set_init(lam_calib_set *s);
void lam_calib_set_clear(lam_calib_set *s);

/* Measure the labelled regions of one image: labels is a layer-map coded
 * 8-bit map of the image's size (0 substrate, N layers, 254/255 ignored);
 * each connected labelled area with at least 50 interior pixels is one
 * sample. */
lam_status lam_calib_measure_labels(lam_calib_set *set, const char *image_path,
                                    const uint8_t *labels, size_t width, size_t height,
                                    const lam_load_options *load, lam_error *err);

/* Turn a label file ("lamina-labels/1" JSON: {"labels": [{"layers": N,
 * "polygon": [[x, y], ...]} or {"layers": N, "point": [x, y]}]}) into a
 * layer-map coded label map for an image. Points take the whole region of
 * the image's segmentation (with 'setup') that contains them. 'map' holds
 * width*height bytes and is filled (0 = unlabelled background). */
lam_status lam_calib_labels_from_json(const char *json_path, const char *image_path,
                                      const lam_setup *setup, size_t width, size_t height,
                                      uint8_t *map, lam_error *err);

/* Add the confident regions of an analysis-like measurement without labels
 * (for self-calibration): every region of the image's segmentation with at
 * least 200 interior pixels that is not unmodelled. */
lam_status lam_calib_measure_self(lam_calib_set *set, const char *image_path,
                                  const lam_setup *setup, lam_error *err);

/* Fit; start values from 'start' (a gaussian camera, or the generic one).
 * known_oxide[image] (may be NULL; NAN entries are fitted) fixes oxides
 * measured elsewhere (ellipsometry). Channel centres and oxide thickness
 * are nearly degenerate: scaling both by one factor leaves the contrast
 * almost unchanged (only dispersion tells them apart), so fix at least one
 * image's oxide when the camera is unknown. A fitted oxide starts at the
 * best value of a 20-400 nm scan. known_na (NAN = fitted) fixes the
 * illumination NA, which is correlated with the centres in the same way
 * (oblique rays shorten the optical path). */
lam_status lam_calibrate(const lam_setup *start, const lam_calib_set *set, int self,
                         const double *known_oxide, double known_na, lam_calib_result *out,
                         lam_error *err);

#endif
