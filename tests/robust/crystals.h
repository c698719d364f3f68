/*
 * tests/robust/crystals.h - scoring lamina's hBN thickness on micrographs
 * of the independent generator (tests/synth, crystal hBN: films of 1-100
 * nm with the index of Grudinin 2023, Lee 2019 or Rah 2019). TMD layer
 * counts are scored by robust_run (robust.h) like graphene's.
 *
 * An hBN flake counts as right when the analysis region covering most of
 * its pixels (at least 30 %) has a thickness within 10 % of the truth, or
 * is flagged order-ambiguous (issue 14's criterion); "covered" when the
 * truth lies in the 95 % interval of one of the reported modes.
 */
#ifndef LAMINA_TESTS_CRYSTALS_H
#define LAMINA_TESTS_CRYSTALS_H

#include <stdio.h>
#include "robust.h"

#define CRYSTALS_BINS 4 /* 1-3, 3-10, 10-30, 30-100 nm */

typedef struct hbn_tally {
    size_t images, flakes, found, within10, ambiguous, right, covered;
    size_t bin_flakes[CRYSTALS_BINS], bin_right[CRYSTALS_BINS];
    double abs_rel_err_sum;  /* |est / true - 1| over flakes with an estimate */
    size_t oxide_n;
    double oxide_abs_sum;
    size_t oxide_warned;     /* images warned "oxide-off-nominal" or "oxide-ambiguous" */
    double seconds;
} hbn_tally;

/* Render scene 'seed' of a case (cfg.crystal hBN), analyse it, add to the
 * tally; log (may be NULL) gets one line per wrong flake. 0, or -1 when the
 * scene could not be made or analysed (the message is printed). */
int crystals_run_hbn(const robust_case *c, unsigned long long seed, const char *dir,
                     hbn_tally *t, FILE *log);

/* Write every scored hBN flake to f as CSV (a header first; NULL: none):
 * its image, the scene's physics (n,k source, true and found oxide, pupil,
 * NA, Si and SiO2 models), the truth and the estimate with its interval. */
void crystals_flake_table(FILE *f);

void crystals_add(hbn_tally *into, const hbn_tally *t);
void crystals_print(FILE *f, const char *label, const hbn_tally *t);

#endif
