/*
 * lamina/warnings.h - what a person must know before trusting an image's
 * answers.
 *
 * An analysis that finishes can still be doubtful: the exposure clipped
 * the flakes, the file is darker than the contrast it must resolve, the
 * chip is not the oxide the setup says, the file's encoding disagrees with
 * the setup, the microscope was left to defaults, or the flakes fit no
 * layer count of the material at all. Each case is a warning with a stable
 * code (for scripts; the JSON's "warnings" array) and a message for people
 * that says what was found, what it does to the result and what to do
 * (docs/user-guide.md lists them). The command line prints each as
 * "lamina: FILE: warning: MESSAGE".
 *
 * Codes: saturated, underexposed, oxide-off-nominal, encoding-mismatch,
 * setup-defaults, poor-fit, two-readings (the flakes fit two layer
 * counts), monochrome (one channel without a measured oxide),
 * anti-reflection (a substrate below 3 % reflectance in a channel),
 * substrate-colour (the substrate's colour contradicts the calibration's:
 * lamina/substrate_colour.h), pooled-readings (a batch's pooled fit chose
 * between two readings some images allowed alone: lamina/pool.h),
 * calibration-scale (with a calibrated profile, the fitted monolayer
 * contrast is nearer half or twice the profile's than the profile's). The
 * annotated picture's legend names the codes in amber.
 *
 * Ownership: plain values inside lam_analysis; nothing to free.
 */
#ifndef LAMINA_WARNINGS_H
#define LAMINA_WARNINGS_H

#include <stddef.h>

#define LAM_MAX_WARNINGS 12

typedef struct lam_warning {
    char code[24];
    char message[384];
} lam_warning;

typedef struct lam_warnings {
    size_t count;
    lam_warning item[LAM_MAX_WARNINGS];
} lam_warnings;

/* Add a warning (printf-style message); a code already present is not
 * added twice (the first message stays). There are fewer codes than
 * slots. */
void lam_warnings_add(lam_warnings *w, const char *code, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

/* The warning with this code, or NULL. */
const lam_warning *lam_warnings_find(const lam_warnings *w, const char *code);

#endif
