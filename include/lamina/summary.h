/*
 * lamina/summary.h - the text the command line shows: tables and lines
 * built here, printed by src/cli/ (the only part that prints). Each
 * function returns a malloc'd, NUL-terminated text the caller frees.
 *
 * Errors: LAM_ENOMEM; lam_summary_prediction also LAM_EINVAL for an
 * unknown format.
 */
#ifndef LAMINA_SUMMARY_H
#define LAMINA_SUMMARY_H

#include <stddef.h>
#include "lamina/batch.h"
#include "lamina/calibrate.h"
#include "lamina/error.h"
#include "lamina/image.h"
#include "lamina/model.h"
#include "lamina/oxide.h"
#include "lamina/stage.h"
#include "lamina/watch.h"

struct cJSON;

/* A batch's table: per image the fitted oxide and the regions by layer
 * count (small ones left out), then the monolayer candidates (p >= 0.95,
 * not small, not ambiguous) with area, usable rectangle and where they are
 * (the stage reading that centres them when positions are known, else the
 * centroid in pixels), and the reminder to confirm layer counts. */
lam_status lam_summary_batch(const lam_batch *b, const lam_positions *pos,
                             const lam_stage *stage, char **text, lam_error *err);

/* The same with hBN's thicknesses (issue 14): after the counts, every
 * region with a thickness_nm, its 95 % interval and probability, marked
 * "order-ambiguous" and "in target" (target: A-B nm, NULL or NAN for none);
 * an hBN-only batch lists no monolayer candidates. */
lam_status lam_summary_batch_target(const lam_batch *b, const lam_positions *pos,
                                    const lam_stage *stage, const double target[2], char **text,
                                    lam_error *err);

/* One line (no newline) for an analysed image from its lamina-analysis/1
 * JSON: file name, oxide, 1L/2L/3L/4L+ counts, "(results kept)" when kept,
 * the largest monolayer. */
lam_status lam_summary_image_line(const char *path, const struct cJSON *result, int kept,
                                  char **text, lam_error *err);

/* A watch session's event as one line (no newline): for an image
 * analysed or kept, the local time (HH:MM:SS), two spaces and
 * lam_summary_image_line; for the pooled prior, that it was first set
 * or how far it moved (the parameter and its sigmas). *text is NULL for
 * a failed image (its error is the event's). */
lam_status lam_summary_watch_event(const lam_watch_event *ev, char **text, lam_error *err);

/* An analysis' stage end times in seconds, one line (no newline):
 * "load T display T substrate T contrast T model T segment T oxide T
 * regions T". */
lam_status lam_summary_timings(const lam_analysis *a, char **text, lam_error *err);

/* The contrast ladder of layers lo..hi: format "table", "csv" or "json"
 * (lamina-predict/1); mono_nm > 0 for a monochromatic channel. */
lam_status lam_summary_prediction(const lam_prediction *p, size_t lo, size_t hi, double mono_nm,
                                  const lam_setup *setup, const char *format, char **text,
                                  lam_error *err);

/* The same for films of the given thicknesses (a crystal of continuous
 * thickness, hBN; issue 14): rows 1..count of p hold them. Both add the
 * material and observation to the JSON and, on a nearly anti-reflecting
 * substrate (lam_summary_prediction_near_ar), columns dR = R_sub - R_flake
 * and the shot-noise SNR per pixel (10000 e- full well at bare Si) to the
 * table and CSV. */
lam_status lam_summary_prediction_films(const lam_prediction *p, const double *thickness_nm,
                                        size_t count, double mono_nm, const lam_setup *setup,
                                        const char *format, char **text, lam_error *err);

/* 1 when the substrate reflects less than 3 % in some channel; then
 * LAM_SUMMARY_NEAR_AR says what that means (a warning for stderr). */
int lam_summary_prediction_near_ar(const lam_prediction *p);
#define LAM_SUMMARY_NEAR_AR                                                                   \
    "the substrate is nearly anti-reflecting (R < 0.03 in a channel): relative contrast is " \
    "ill-conditioned; dR = R_sub - R_flake and the shot-noise SNR per pixel (10000 e- full " \
    "well at bare Si) are given"

/* The same for a setup: its model (lam_model_alloc for layers up to hi,
 * mono_nm > 0 for one monochromatic channel) at the setup's oxide (0
 * without SiO2) and Fermi level, formatted as above; with thickness_nm
 * (count values) the films of a crystal of continuous thickness instead
 * (LAM_EINVAL for another material). *near_ar (may be NULL) is set as
 * lam_summary_prediction_near_ar says. The model's errors name the setup's
 * file (setup->source). */
lam_status lam_summary_predict(const lam_setup *setup, size_t lo, size_t hi, double mono_nm,
                               const double *thickness_nm, size_t count, const char *format,
                               char **text, int *near_ar, lam_error *err);

/* A calibration: the fit's chi2, each fitted (or given) value with its
 * sigma or "not constrained", each image's oxide and each label's residual.
 * images[j] names image j. */
lam_status lam_summary_calibration(const lam_calib_result *r, const char *const *images,
                                   char **text, lam_error *err);

/* An oxide audit: each image's estimate and verdict, the combination, the
 * consistency note, the verdict with its reason and advice, the absolute
 * method and other interference orders. */
lam_status lam_summary_oxide(const lam_oxide_audit *a, char **text, lam_error *err);

/* How an image loaded, one line (no newline): "PATH: WxH KIND D-bit
 * RGB|grey, transfer T, saturated P %, linear mean R G B" (the mean level
 * of each linear plane over the whole image). */
lam_status lam_summary_image(const char *path, const lam_image *img, char **text,
                             lam_error *err);

#endif
