/*
 * lamina/calibrun.h - a calibration from files (`lamina calibrate`): each
 * image measured against its label file (a layer-map PNG or
 * lamina-labels/1, lam_labels_map_for_image), its other regions joining
 * with latent layer counts unless labelled_only (lam_calib_add_unlabelled),
 * or, for self calibration,
 * with its layer counts left latent (lam_calib_measure_self); the joint
 * fit of lamina/calibrate.h; the fitted profile written with a
 * "calibration" record of how it was obtained.
 *
 * Ownership: the options are borrowed for the call; lam_calibrun_fit
 * fills a caller-owned lam_calib_result (lam_calib_result_clear).
 * Errors: the first image or label file that cannot be measured stops the
 * run with its error and that file in err->file; then lam_calibrate's.
 * lam_calibrun_save's errors name the output file.
 */
#ifndef LAMINA_CALIBRUN_H
#define LAMINA_CALIBRUN_H

#include <stddef.h>
#include "lamina/calibrate.h"
#include "lamina/error.h"
#include "lamina/setup.h"

typedef struct lam_calibrun_options {
    const char *const *images;    /* the micrographs, at most LAM_CALIB_MAX_IMAGES */
    size_t count;
    const char *const *labels;    /* one label file per image; NULL: self calibration */
    const double *known_oxide_nm; /* per image, NAN: fitted; NULL: every oxide fitted */
    double known_na;              /* NAN: fitted */
    int labelled_only;            /* labelled images: leave their other regions out */
    const char *second_chip;      /* NULL, or an image of a second chip for the colour
                                   * (lam_calib_add_second_chip) ... */
    double second_oxide_nm;       /* ... and its measured oxide */
} lam_calibrun_options;

/* Measure every image and fit (lam_calibrate) from the setup 'start'.
 * LAM_EINVAL for no images or more than LAM_CALIB_MAX_IMAGES. */
lam_status lam_calibrun_fit(const lam_setup *start, const lam_calibrun_options *o,
                            lam_calib_result *res, lam_error *err);

/* The fitted profile (res->setup, lam_setup_save) written atomically to
 * path, with "calibration": the method (labelled regions, with or without
 * the other regions latent, or latent layer counts), labelled_regions,
 * latent_regions, chi2, values, model_floor_relative, the
 * shared values not_constrained by the data, and per image its file,
 * oxide_nm, oxide_sigma_nm and oxide_known. */
lam_status lam_calibrun_save(const lam_calib_result *res, const lam_calibrun_options *o,
                             const char *path, lam_error *err);

#endif
