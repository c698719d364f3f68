/*
 * tests/robust/robust.h - scoring lamina's analysis on micrographs drawn by
 * the independent generator (tests/synth): physics the analysis is not
 * told (graphene response, camera curves with colour matrices, lamp, pupil,
 * true oxide, Bayer mosaics, JPEG). Used by tests/test_robust.c (a quick
 * matrix in `make test`) and build/tests/robust (the full matrix: `make
 * accuracy`).
 *
 * A truth flake (or fold) of 1-3 layers counts as "right" when the analysis
 * region covering most of its pixels is labelled with its layer count; a
 * flake no region covers for at least 30 % of its area is wrong.
 * "Confident" regions are those labelled with p_label >= 0.95: their
 * accuracy checks the posterior's calibration.
 */
#ifndef LAMINA_TESTS_ROBUST_H
#define LAMINA_TESTS_ROBUST_H

#include <stddef.h>
#include <stdio.h>
#include "../synth/synth.h"
#include "lamina/analyze.h"

typedef struct robust_tally {
    size_t flakes, right;               /* 1-3L flakes */
    size_t by_n[4], right_n[4];         /* per layer count */
    size_t confident, confident_right;  /* p_label >= 0.95, any 1..K label */
    size_t warned, warned_right;        /* ... of those, in images with a warning that
                                         * doubts the answer (poor-fit, two-readings,
                                         * oxide-off-nominal, monochrome) */
    size_t images, oxide_n, oxide_within_3, oxide_covered; /* covered: |err| <= 2 sigma */
    double oxide_abs_sum, oxide_abs_max;
    size_t oxide_within_1_5;            /* |err| <= 1.5 nm */
    size_t colour_used, colour_warned;  /* the substrate colour joined the oxide / was
                                         * refused with a "substrate-colour" warning */
    size_t oxide_silent;                /* |err| > 3 sigma with no warning about the oxide */
    size_t fermi_n, fermi_covered, fermi_seen; /* doped monolayers */
    double fermi_width_sum;
    double seconds;
} robust_tally;

typedef struct robust_case {
    synth_config cfg;
    synth_format fmt;
    int quality;
    int informed;       /* 1: the setup gives camera, lamp, NA, encoding */
    const char *pooled_setup; /* not NULL: analyse with this setup instead */
    double oxide_known_nm;    /* > 0: the setup gives the true oxide with this sd (measured) */
    double session_wb[3];     /* other sessions of a calibrated scan: the white balance
                               * changed by these factors (0: a drift up to 0.8 %) */
} robust_case;

/* Every field zero (no pooled setup, oxide not given, uninformed) and the
 * generator's configuration at its defaults. */
void robust_case_init(robust_case *c);

/* Render scene 'seed' of a case into dir, analyse it, add to the tally.
 * log (may be NULL) gets one line per wrong flake. Returns 0, or -1 when
 * the scene could not be made or analysed (the message is printed). */
int robust_run(const robust_case *c, unsigned long long seed, const char *dir, robust_tally *t,
               FILE *log);

/* A chip scan: 'tiles' scenes sharing the physics of 'seed' (microscope,
 * response, oxide) with their own flakes, one setup for all; each tile is
 * analysed alone (tallied in 'alone') and again with the prior pooled from
 * all of them (lamina/pool.h; tallied in 'pooled'). tiles <= LAM_POOL_MAX. */
int robust_run_batch(const robust_case *c, unsigned long long seed, int tiles, const char *dir,
                     robust_tally *alone, robust_tally *pooled, FILE *log);

/* One flake confirmed (Raman, AFM): the first of 'tiles' scenes sharing the
 * physics of 'seed' has its largest monolayer labelled, the setup is
 * calibrated on it and on that tile's other regions with latent counts, as
 * `calibrate --labels` does (ROBUST_CAL_LABELLED_ONLY: on the flake alone)
 * (lamina/calibrate.h; with oxide_given, that tile's true
 * oxide fixed as if measured by ellipsometry: `calibrate --known-oxide`),
 * and the other tiles (with ROBUST_CAL_SESSIONS taken on other days and
 * every other one on another chip: robust.c, other_session) are analysed
 * with the setup as it was (tallied in 'alone') and as calibrated
 * ('calibrated': the profile written to dir/profiles/ and read back, as a
 * user of `lamina calibrate` gets it); with
 * ROBUST_CAL_NO_COLOUR the calibration's substrate colour is dropped
 * (lamina/substrate_colour.h), to see what it adds.
 * 2 <= tiles <= LAM_POOL_MAX. */
#define ROBUST_CAL_OXIDE 1
#define ROBUST_CAL_NO_COLOUR 2
#define ROBUST_CAL_SESSIONS 4  /* the other tiles from other days and chips */
#define ROBUST_CAL_LABELLED_ONLY 8 /* calibrate on the labelled flake alone */
int robust_run_calibrated(const robust_case *c, unsigned long long seed, int tiles, int flags,
                          const char *dir, robust_tally *alone, robust_tally *calibrated,
                          FILE *log);

/* Two chips of measured oxide: as robust_run_calibrated with
 * ROBUST_CAL_OXIDE | ROBUST_CAL_SESSIONS, and tile 1 (another chip, its
 * oxide given) adds its bare substrate's colour, as `calibrate
 * --second-chip` does, so the profile records how the colour changes
 * between the chips (lamina/substrate_colour.h). Tiles 2.. are analysed
 * with the profile of tile 0 alone ('one') and with the second chip's
 * colour ('two'). 3 <= tiles <= LAM_POOL_MAX. */
int robust_run_two_chips(const robust_case *c, unsigned long long seed, int tiles,
                         const char *dir, robust_tally *one, robust_tally *two, FILE *log);

/* The analysis region covering most of object o's pixels (0: none), and
 * how many of them it covers. */
uint32_t robust_covering_region(const synth_scene *sc, int o, const lam_analysis *a,
                                size_t *covered);

/* The region that stands for object o (0: none): the one covering most of
 * its pixels, when it covers at least 30 % of them, or when at least 80 %
 * of the region's own pixels lie on the object and its area to the
 * half-contrast edge (lam_region_area, the area the analysis reports)
 * reaches 30 % of the object's. The second case is a small flake whose
 * strong colour edges a lossy file smears over many pixels: its region's
 * core is small, its reported extent is not. */
uint32_t robust_flake_region(const synth_scene *sc, int o, const lam_analysis *a);

void robust_add(robust_tally *into, const robust_tally *t);
void robust_print(FILE *f, const char *label, const robust_tally *t);

/* Claim 'dir' (made if missing) for this process until it exits: the
 * harness programs write their tiles, setups and calibration profiles
 * under fixed names, so two runs in one directory (two builds compared
 * from one checkout) overwrite each other's files and both read wrong.
 * 0, or -1 with a message on stderr when another run holds it. */
int robust_claim_dir(const char *dir);

#endif
