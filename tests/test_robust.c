/* test_robust.c - layer counts, their probabilities and the oxide on
 * micrographs the analysis did not draw (the quick part of `make
 * accuracy`; tests/robust/robust.h).
 *
 * The images come from the independent generator in tests/synth/, which
 * shares no code with lamina: graphene drawn with published optical
 * responses the analysis is not told (the universal sheet sigma0 = e^2/4hbar;
 * the n,k of Weber et al., APL 97, 091904 (2010); Song et al., Appl. Surf.
 * Sci. 439, 1079 (2018); El-Sayed et al., Nanomaterials 11, 1230 (2021),
 * each as a 0.335 nm film per layer; and lamina's own default family),
 * Si and SiO2 from other published tables (Green 2008, Schinke 2015,
 * Aspnes-Studna 1983; Malitson 1965, Gao 2013), random camera curves
 * (Gaussian or dye filters with a colour matrix), lamps (blackbody, white
 * LED, CIE A), pupil fillings and NA, a true oxide up to 12 nm off the
 * nominal, and 8-bit sRGB PNG, JPEG q85, Bayer-demosaiced PNG or 16-bit
 * linear PNG files.
 *
 * Seeds 500000 and up are used only here: the analysis was never tuned on
 * these images. The thresholds guard the figures measured when the test
 * was written (docs/method.md, "Accuracy"), with a margin. */
#include "check.h"
#include "robust/robust.h"
#include "lamina/error.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

static const synth_response responses[] = {SYNTH_RESP_SIGMA0, SYNTH_RESP_WEBER, SYNTH_RESP_SONG,
                                           SYNTH_RESP_ELSAYED, SYNTH_RESP_LAMINA_DEFAULT};
static const struct { synth_format fmt; int q; } formats[] = {
    {SYNTH_FMT_PNG, 0}, {SYNTH_FMT_JPEG, 85}, {SYNTH_FMT_BAYER_PNG, 0}, {SYNTH_FMT_PNG16, 0}};
static const double oxides[] = {285, 90, 300, 285, 90};

static double share(size_t a, size_t b)
{
    return b ? (double)a / (double)b : 0;
}

/* Labels given with p >= 0.95 that are wrong and sit in an image with no
 * warning that doubts them: what a user would act on unwarned. */
static size_t silent_wrong(const robust_tally *t)
{
    return (t->confident - t->warned) - (t->confident_right - t->warned_right);
}

/* A case of lamina's default response drawn by the generator, a camera
 * the analysis is told only with 'informed'; quality for JPEG files. */
static robust_case default_response(double nominal_nm, synth_format fmt, int quality,
                                    int informed)
{
    robust_case c;
    robust_case_init(&c);
    c.cfg.response = SYNTH_RESP_LAMINA_DEFAULT;
    c.cfg.nominal_oxide_nm = nominal_nm;
    c.fmt = fmt;
    c.quality = quality;
    c.informed = informed;
    return c;
}

static void matrix(int informed, const char *dir, robust_tally *t)
{
    memset(t, 0, sizeof *t);
    for (int r = 0; r < 5; r++)
        for (int f = 0; f < 4; f++) {
            robust_case c;
            robust_case_init(&c);
            c.cfg.response = responses[r];
            c.cfg.nominal_oxide_nm = oxides[r];
            c.fmt = formats[f].fmt;
            c.quality = formats[f].q;
            c.informed = informed;
            c.pooled_setup = NULL;
        c.oxide_known_nm = 0;
            unsigned long long seed = 500000ULL + (unsigned long long)(r * 4 + f);
            check_int(robust_run(&c, seed, dir, t, stdout), 0, "scene %llu renders and analyses",
                      seed);
        }
}

static void test_single(const char *dir)
{
    robust_tally t;
    matrix(1, dir, &t);
    robust_print(stdout, "test_robust: informed", &t);
    check_true(share(t.right, t.flakes) >= 0.97,
               "microscope given: >= 97 %% of %zu 1-3L flakes counted right (%.1f %%)", t.flakes,
               100 * share(t.right, t.flakes));
    check_true(share(t.confident_right, t.confident) >= 0.97,
               "microscope given: >= 97 %% of the %zu labels with p >= 0.95 right (%.1f %%)",
               t.confident, 100 * share(t.confident_right, t.confident));
    check_true(t.oxide_n && t.oxide_abs_sum / (double)t.oxide_n <= 3.5,
               "microscope given: oxide within 3.5 nm on average (%.2f nm over %zu images)",
               t.oxide_n ? t.oxide_abs_sum / (double)t.oxide_n : 0, t.oxide_n);
    check_true(share(t.oxide_covered, t.oxide_n) >= 0.85,
               "microscope given: the oxide's 2-sigma interval holds the truth in >= 85 %% "
               "(%.0f %%)",
               100 * share(t.oxide_covered, t.oxide_n));
    matrix(0, dir, &t);
    robust_print(stdout, "test_robust: uninformed", &t);
    check_true(share(t.right, t.flakes) >= 0.90,
               "microscope unknown: >= 90 %% of %zu 1-3L flakes counted right (%.1f %%)", t.flakes,
               100 * share(t.right, t.flakes));
    check_true(share(t.confident_right, t.confident) >= 0.93,
               "microscope unknown: >= 93 %% of the %zu labels with p >= 0.95 right (%.1f %%)",
               t.confident, 100 * share(t.confident_right, t.confident));
}

/* A chip scan of 5 tiles with the microscope unknown: the prior pooled
 * over the scan must not make the answers worse. */
static void test_pooled(const char *dir)
{
    robust_case c;
    robust_case_init(&c);
    c.cfg.response = SYNTH_RESP_SONG;
    c.cfg.nominal_oxide_nm = 285;
    c.fmt = SYNTH_FMT_PNG;
    c.quality = 0;
    c.informed = 0;
    c.pooled_setup = NULL;
        c.oxide_known_nm = 0;
    robust_tally alone, pooled;
    memset(&alone, 0, sizeof alone);
    memset(&pooled, 0, sizeof pooled);
    check_int(robust_run_batch(&c, 500100, 5, dir, &alone, &pooled, stdout), 0,
              "a 5-tile scan renders and analyses alone and pooled");
    robust_print(stdout, "test_robust: scan alone", &alone);
    robust_print(stdout, "test_robust: scan pooled", &pooled);
    check_true(pooled.right >= alone.right && share(pooled.right, pooled.flakes) >= 0.9,
               "pooling over the scan keeps or improves the counts (%zu -> %zu of %zu)",
               alone.right, pooled.right, pooled.flakes);
    double ea = alone.oxide_n ? alone.oxide_abs_sum / (double)alone.oxide_n : 99;
    double ep = pooled.oxide_n ? pooled.oxide_abs_sum / (double)pooled.oxide_n : 99;
    check_true(ep <= 3 && ep <= ea,
               "pooling puts the oxide within 3 nm and no farther off than alone (%.2f -> %.2f nm)",
               ea, ep);
    check_true(pooled.oxide_covered == pooled.oxide_n,
               "pooled: every tile's oxide 2-sigma interval holds the truth (%zu of %zu)",
               pooled.oxide_covered, pooled.oxide_n);
}

/* A ten-tile pooled scan (robust --batch 10) the pool misreads: scan 6703,
 * lamina's default response drawn by the generator, a camera the analysis
 * is not told, 300 nm nominal, JPEG q85. Alone every tile reads right
 * (80 of 80); pooled, 66 of 80 (the model floor at the regions' measured
 * contrast, 2026-12-05; before it, 69 of 80 with every confident label
 * warned). The scan this test first used (3300: Weber's response, a dye
 * camera, 16-bit PNG; pooled 29 of 82 at p = 1) is read right since, alone
 * and pooled. Whatever the pool chooses, no label given with p >= 0.95 may
 * be wrong without a warning that doubts it (pooled-readings). */
static void test_pooled_choice(const char *dir)
{
    robust_case c = default_response(300, SYNTH_FMT_JPEG, 85, 0);
    robust_tally alone, pooled;
    memset(&alone, 0, sizeof alone);
    memset(&pooled, 0, sizeof pooled);
    check_int(robust_run_batch(&c, 6703, 10, dir, &alone, &pooled, NULL), 0,
              "scan 6703, ten tiles, alone and pooled");
    robust_print(stdout, "test_robust: scan 6703 pooled", &pooled);
    check_true(pooled.right < pooled.flakes,
               "the scan is one the pool misreads (%zu of %zu right): the check below bites",
               pooled.right, pooled.flakes);
    check_int((long long)silent_wrong(&pooled), 0,
              "no confident wrong label without a doubting warning");
}

/* Isolated monolayers Pauli-blocked at 0, 0.3, 0.9 and 1.05 eV (the
 * generator blocks the interband part of its response below 2|E_F|; at
 * 0.9 eV and above this removes absorption in the red), microscope given:
 * the reported 95 % interval (or upper limit when blocking is not seen)
 * holds the true |E_F| for >= 90 %, and the intervals of the blocked ones
 * are at most 0.4 eV wide on average. */
static void test_doping(const char *dir)
{
    static const double doped[4] = {0, 0.3, 0.9, 1.05};
    robust_tally t;
    memset(&t, 0, sizeof t);
    for (int r = 0; r < 4; r++) {
        robust_case c;
        robust_case_init(&c);
        c.cfg.response = responses[r];
        c.cfg.nominal_oxide_nm = r % 2 ? 90 : 285;
        c.cfg.n_doped = 4;
        memcpy(c.cfg.doped_eV, doped, sizeof doped);
        c.fmt = SYNTH_FMT_PNG16;
        c.quality = 0;
        c.informed = 1;
        c.pooled_setup = NULL;
        c.oxide_known_nm = 0;
        check_int(robust_run(&c, 500200ULL + (unsigned long long)r, dir, &t, stdout), 0,
                  "doped scene %d renders and analyses", r);
    }
    printf("test_robust: doping: %zu evaluated, %zu covered, %zu blocked seen, mean width %.2f eV\n",
           t.fermi_n, t.fermi_covered, t.fermi_seen,
           t.fermi_seen ? t.fermi_width_sum / (double)t.fermi_seen : 0);
    check_true(t.fermi_n >= 8 && share(t.fermi_covered, t.fermi_n) >= 0.9,
               "doped monolayers: the Fermi interval or limit holds the truth for >= 90 %% "
               "(%zu of %zu)", t.fermi_covered, t.fermi_n);
    check_true(t.fermi_seen >= 1 && t.fermi_width_sum / (double)t.fermi_seen <= 0.4,
               "blocking seen in %zu monolayers, 95 %% intervals %.2f eV wide on average (<= 0.4)",
               t.fermi_seen, t.fermi_seen ? t.fermi_width_sum / (double)t.fermi_seen : 0);
}

/* A monochrome camera behind a green filter (the generator draws its
 * centre from 520-565 nm and its FWHM from 10-40 nm), grey 8-bit PNG and
 * 16-bit linear TIFF, microscope given. One channel cannot separate the
 * oxide from the layer count: N layers on one oxide look like 2N on
 * another (20 nm away at 285 nm). With the oxide measured (to 2 nm here)
 * the counts are right; without, the analysis must say that it cannot
 * tell. */
static void test_mono(const char *dir)
{
    robust_tally t;
    memset(&t, 0, sizeof t);
    for (int k = 0; k < 6; k++) {
        robust_case c;
        robust_case_init(&c);
        c.cfg.camera = SYNTH_CAM_MONO;
        c.cfg.response = responses[1 + k % 4];
        c.cfg.nominal_oxide_nm = k % 3 == 0 ? 90 : 285;
        c.fmt = k % 2 ? SYNTH_FMT_TIFF16 : SYNTH_FMT_PNG;
        c.quality = 0;
        c.informed = 1;
        c.pooled_setup = NULL;
        c.oxide_known_nm = 2;
        check_int(robust_run(&c, 500300ULL + (unsigned long long)k, dir, &t, stdout), 0,
                  "monochrome scene %d renders and analyses", k);
    }
    robust_print(stdout, "test_robust: monochrome, oxide measured", &t);
    check_true(share(t.right, t.flakes) >= 0.95,
               "monochrome camera, oxide measured: >= 95 %% of %zu 1-3L flakes right (%.1f %%)",
               t.flakes, 100 * share(t.right, t.flakes));
    check_true(share(t.confident_right, t.confident) >= 0.97,
               "monochrome camera, oxide measured: >= 97 %% of the %zu labels with p >= 0.95 "
               "right (%.1f %%)",
               t.confident, 100 * share(t.confident_right, t.confident));
    check_true(t.oxide_n > 0 && t.oxide_abs_max <= 4,
               "monochrome camera, oxide measured: every image's oxide within 4 nm (issue 10; "
               "worst %.2f nm)", t.oxide_abs_max);
}

/* The remedy the warnings give for an unknown camera: calibrate on one
 * flake of known thickness. A dye-filter camera on 300 nm oxide that the
 * analysis is not told about, on a chip where that makes it read every N
 * as 2N (seed 510009 was picked for this from a scan of 12: it is the one
 * failure there): the largest monolayer of one tile is labelled, and the
 * other tiles of the same microscope and chip are analysed with the
 * calibrated profile. */
static void test_calibrated(const char *dir)
{
    robust_case c;
    robust_case_init(&c);
    c.cfg.response = SYNTH_RESP_LAMINA_DEFAULT;
    c.cfg.nominal_oxide_nm = 300;
    c.cfg.camera = SYNTH_CAM_DYE;
    c.fmt = SYNTH_FMT_PNG;
    c.quality = 0;
    c.informed = 0;
    c.pooled_setup = NULL;
    c.oxide_known_nm = 0;
    robust_tally alone, cal;
    memset(&alone, 0, sizeof alone);
    memset(&cal, 0, sizeof cal);
    check_int(robust_run_calibrated(&c, 510009, 4, 0, dir, &alone, &cal, NULL), 0,
              "a 4-tile scan, one flake labelled, calibrated and analysed");
    robust_print(stdout, "test_robust: unknown camera", &alone);
    robust_print(stdout, "test_robust: calibrated on one flake", &cal);
    check_true(share(cal.right, cal.flakes) >= 0.95 && cal.right >= alone.right,
               "calibrated on one monolayer: >= 95 %% of %zu 1-3L flakes right (%.1f %%, "
               "%.1f %% before)",
               cal.flakes, 100 * share(cal.right, cal.flakes), 100 * share(alone.right, alone.flakes));
}

/* A calibration on a chip of known oxide also records the substrate's
 * colour (lamina/substrate_colour.h): later tiles, from other days and
 * every other one from a chip 3-12 nm thicker or thinner, read their oxide
 * from it. With the camera's curves given (a data sheet) the goal
 * is the oxide within 1.5 nm; the renders' white balance drifts by up to
 * 0.8 % per channel and their exposure changes, the analysis allows for
 * 1 % and for a lamp's colour temperature (substrate_colour.lamp_tilt),
 * so one tile in nine may miss 1.5 nm. Three scans, 9 tiles. */
static void test_colour(const char *dir)
{
    robust_tally alone, cal;
    memset(&alone, 0, sizeof alone);
    memset(&cal, 0, sizeof cal);
    static const double nominal[3] = {90, 285, 300};
    for (int k = 0; k < 3; k++) {
        robust_case c;
        robust_case_init(&c);
        c.cfg.nominal_oxide_nm = nominal[k];
        c.fmt = SYNTH_FMT_PNG;
        c.informed = 1;
        check_int(robust_run_calibrated(&c, 520100 + (unsigned long long)k, 4,
                                        ROBUST_CAL_OXIDE | ROBUST_CAL_SESSIONS, dir, &alone,
                                        &cal, NULL),
                  0, "a 4-tile scan over days and chips, calibrated at a known oxide");
    }
    robust_print(stdout, "test_robust: camera given, other days", &alone);
    robust_print(stdout, "test_robust: ... calibrated, substrate colour", &cal);
    check_true(cal.oxide_n == 9 && cal.oxide_within_1_5 + 1 >= cal.oxide_n &&
                   cal.oxide_abs_sum <= 1.0 * (double)cal.oxide_n && cal.colour_used >= 8,
               "calibrated with the substrate's colour: all but one oxide of %zu within 1.5 nm "
               "(%zu), mean error <= 1 nm (%.2f nm), colour used in %zu",
               cal.oxide_n, cal.oxide_within_1_5, cal.oxide_abs_sum / (double)cal.oxide_n,
               cal.colour_used);
    check_true(cal.oxide_covered == cal.oxide_n && share(cal.right, cal.flakes) >= 0.97,
               "... every oxide within 2 sigma (%zu of %zu), 1-3L right %.1f %%",
               cal.oxide_covered, cal.oxide_n, 100 * share(cal.right, cal.flakes));
}

/* Scan 6700 of `make accuracy`: lamina's default response drawn by the
 * generator, a camera the analysis is not told, 300 nm nominal, JPEG
 * q85; the setup gives the camera with 'informed'. */
static robust_case scan_6700(int informed)
{
    return default_response(300, SYNTH_FMT_JPEG, 85, informed);
}

/* One labelled monolayer pins only its own three contrasts; the other
 * regions of the calibration tile, with their layer counts latent, show
 * the whole ladder. Scan 6700 of `make accuracy` (lamina's default response
 * drawn by the generator, a camera the analysis is not told, 300 nm
 * nominal, JPEG q85, other days and chips) is a hard one: tile 1 (another
 * chip, true oxide 315.1 nm) reads its flakes best about an interference
 * order lower (near 114 nm), and at its true oxide doubled. Calibrated on
 * the flake alone, every tile reads in the right order. With the other
 * regions as well, tile 1 is read an order off (its counts right), and
 * the substrate colour, which says 317 nm, is refused with a warning; tile
 * 2 reads its 2L and 3L flakes one or two too high at p ~0.95, in an image
 * warned of a second oxide. (Until the model floor was taken at the
 * regions' measured contrast, 2026-12-05, it was the other way round: the
 * flake alone read tile 1 an order off, the other regions put it right.
 * Over scans 6700-6723 the floor at the measured contrast reads as many
 * flakes right with the flake alone and more with the latent regions;
 * docs/performance.md, sixteenth stop.) What must hold either way: no
 * oxide beyond 3 sigma and no confident wrong label without a warning
 * that doubts it. */
static void test_calibrated_latent(const char *dir)
{
    robust_case c = scan_6700(0);
    robust_tally alone, only, latent;
    memset(&alone, 0, sizeof alone);
    memset(&only, 0, sizeof only);
    memset(&latent, 0, sizeof latent);
    int flags = ROBUST_CAL_OXIDE | ROBUST_CAL_SESSIONS;
    check_int(robust_run_calibrated(&c, 6700, 4, flags | ROBUST_CAL_LABELLED_ONLY, dir, &alone,
                                    &only, NULL),
              0, "scan 6700 calibrated on one flake alone");
    memset(&alone, 0, sizeof alone);
    check_int(robust_run_calibrated(&c, 6700, 4, flags, dir, &alone, &latent, NULL), 0,
              "scan 6700 calibrated on one flake and the tile's other regions");
    robust_print(stdout, "test_robust: calibrated on the flake alone", &only);
    robust_print(stdout, "test_robust: ... and on the other regions", &latent);
    check_true(only.oxide_n == 3 && only.oxide_abs_max < 10 &&
                   only.oxide_covered == only.oxide_n && only.confident_right == only.confident,
               "the flake alone: every oxide within 10 nm and 2 sigma (max %.1f nm, %zu of %zu "
               "in 2 sigma), every label with p >= 0.95 right (%zu of %zu)",
               only.oxide_abs_max, only.oxide_covered, only.oxide_n, only.confident_right,
               only.confident);
    check_true(latent.oxide_n == 3 && latent.oxide_silent == 0 && silent_wrong(&latent) == 0,
               "with the other regions: no oxide beyond 3 sigma without a warning (%zu of %zu; "
               "max error %.1f nm, the colour refused in %zu), no confident wrong label "
               "unwarned (%zu)",
               latent.oxide_silent, latent.oxide_n, latent.oxide_abs_max, latent.colour_warned,
               silent_wrong(&latent));
}

/* The colour is only a gauge while the lamp and white balance stay as
 * they were. A white balance made 20 % warmer (red up, blue down: a lamp
 * turned down without a new white balance) is far outside what the
 * calibration assumes; the analysis must then either say so or keep the
 * oxide within 3 sigma: no confident wrong oxide. */
static void test_colour_changed(const char *dir)
{
    robust_case c;
    robust_case_init(&c);
    c.cfg.nominal_oxide_nm = 285;
    c.fmt = SYNTH_FMT_PNG;
    c.informed = 1;
    c.session_wb[0] = 1.2, c.session_wb[1] = 1, c.session_wb[2] = 1 / 1.2;
    robust_tally alone, cal;
    memset(&alone, 0, sizeof alone);
    memset(&cal, 0, sizeof cal);
    check_int(robust_run_calibrated(&c, 520200, 4, ROBUST_CAL_OXIDE | ROBUST_CAL_SESSIONS, dir,
                                    &alone, &cal, getenv("ROBUST_LOG") ? stderr : NULL),
              0, "a 4-tile scan with the white balance changed");
    robust_print(stdout, "test_robust: white balance changed", &cal);
    check_true(cal.images == 3 && cal.oxide_silent == 0,
               "white balance 20 %% warmer: no oxide beyond 3 sigma without a warning (%zu of "
               "%zu; 'substrate-colour' in %zu)",
               cal.oxide_silent, cal.images, cal.colour_warned);
}

/* Scan 6700 of `make accuracy` with the camera given (lamina's default
 * response drawn by the generator, 300 nm nominal, JPEG q85, other days
 * and chips): tile 1 sits at 315.1 nm, beyond the nominal fit's search,
 * and its flakes alone fit better one interference order down (117 nm),
 * with the counts right. Its substrate colour says 315.3 +- 0.9 nm: a fit
 * started there competes with the wide search on the flakes' and the
 * colour's evidence together, and wins. */
static void test_colour_order(const char *dir)
{
    robust_case c = scan_6700(1);
    robust_tally alone, cal;
    memset(&alone, 0, sizeof alone);
    memset(&cal, 0, sizeof cal);
    check_int(robust_run_calibrated(&c, 6700, 4, ROBUST_CAL_OXIDE | ROBUST_CAL_SESSIONS, dir,
                                    &alone, &cal, NULL),
              0, "scan 6700, camera given, calibrated");
    robust_print(stdout, "test_robust: scan 6700 calibrated, camera given", &cal);
    check_true(cal.oxide_n == 3 && cal.oxide_abs_max <= 3,
               "every tile's oxide within 3 nm (worst %.2f nm; 117 nm read an order off before "
               "the colour's start)", cal.oxide_abs_max);
    check_true(cal.right == cal.flakes, "... its 1-3L counts right (%zu of %zu)", cal.right,
               cal.flakes);
}

/* With the camera's curves unknown, one calibration chip cannot tell how
 * the substrate's colour changes with the oxide (the harness' dye cameras
 * change it by up to three times what lamina's default curves say), so
 * other chips' oxides lean on their flakes. A second chip of measured
 * oxide measures the change (`calibrate --second-chip`). Three scans of 6
 * tiles, the camera not given: tiles 2-5 (two on the calibration chip,
 * two on chips 3-12 nm away) read with the second chip's colour. `make
 * accuracy`'s matrix of this (robust --calibrate 6 --two-chips, 60 scans):
 * within 1.5 nm 75 -> 92 % of tiles. */
static void test_two_chips(const char *dir)
{
    robust_tally one, two;
    memset(&one, 0, sizeof one);
    memset(&two, 0, sizeof two);
    static const double nominal[3] = {90, 285, 300};
    for (int k = 0; k < 3; k++) {
        robust_case c;
        robust_case_init(&c);
        c.cfg.nominal_oxide_nm = nominal[k];
        c.fmt = SYNTH_FMT_PNG;
        c.informed = 0;
        check_int(robust_run_two_chips(&c, 520300 + (unsigned long long)k, 6, dir, &one, &two,
                                       NULL),
                  0, "a 6-tile scan, calibrated with one chip and with two");
    }
    robust_print(stdout, "test_robust: camera unknown, one calibration chip", &one);
    robust_print(stdout, "test_robust: ... and a second chip", &two);
    double mean_one = one.oxide_abs_sum / (double)one.oxide_n;
    double mean_two = two.oxide_abs_sum / (double)two.oxide_n;
    check_true(two.oxide_n == 12 && two.oxide_within_1_5 + 2 >= two.oxide_n && mean_two <= 1.0,
               "two chips: at least 10 of %zu oxides within 1.5 nm (%zu), mean error <= 1 nm "
               "(%.2f nm)",
               two.oxide_n, two.oxide_within_1_5, mean_two);
    check_true(mean_two < mean_one, "... better than one chip (%.2f nm, %zu within 1.5 nm)",
               mean_one, one.oxide_within_1_5);
    check_true(two.oxide_covered + 1 >= two.oxide_n && share(two.right, two.flakes) >= 0.97,
               "... all but one oxide within 2 sigma (%zu of %zu), 1-3L right %.1f %%",
               two.oxide_covered, two.oxide_n, 100 * share(two.right, two.flakes));
}

/* Scan 6400 of `make accuracy`'s two-chip runs: lamina's default response
 * drawn by the generator, a camera the analysis is not told, 285 nm, bayer
 * PNG. Calibrated on tile 0's monolayer, tile 5 settles on every count
 * doubled at p 0.99 (the right reading has the higher posterior, but the
 * fit's starts do not reach it: docs/performance.md, sixteenth stop). Its
 * fitted monolayer contrast is 0.52 of the calibrated profile's at its
 * oxide: the calibration-scale warning must say so, so that no confident
 * wrong label goes unwarned. */
static void test_calibration_scale(const char *dir)
{
    robust_case c = default_response(285, SYNTH_FMT_BAYER_PNG, 0, 0);
    robust_tally one, two;
    memset(&one, 0, sizeof one);
    memset(&two, 0, sizeof two);
    check_int(robust_run_two_chips(&c, 6400, 6, dir, &one, &two, NULL), 0,
              "scan 6400, six tiles, calibrated with one chip and with two");
    robust_print(stdout, "test_robust: scan 6400, one calibration chip", &one);
    check_true(one.right < one.flakes,
               "the scan is one the calibrated fit misreads (%zu of %zu right): the check "
               "below bites",
               one.right, one.flakes);
    check_true(silent_wrong(&one) == 0 && silent_wrong(&two) == 0,
               "no confident wrong label without a doubting warning (one chip %zu, two %zu)",
               silent_wrong(&one), silent_wrong(&two));
}

int main(void)
{
    check_begin("test_robust");
    lam_error_init_gsl();
    char dir[512];
    snprintf(dir, sizeof dir, "%s/robust", check_tmpdir());
    mkdir(dir, 0755);
    test_single(dir);
    test_pooled(dir);
    test_pooled_choice(dir);
    test_doping(dir);
    test_mono(dir);
    test_calibrated(dir);
    test_calibrated_latent(dir);
    test_calibration_scale(dir);
    test_colour(dir);
    test_colour_changed(dir);
    test_colour_order(dir);
    test_two_chips(dir);
    return check_summary();
}
