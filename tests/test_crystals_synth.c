/* test_crystals_synth.c - issue 14's figures, quick version, on images of
 * the independent generator (tests/synth: physics lamina is not told):
 * hBN films of 1-100 nm with the index of Grudinin 2023, Lee 2019 or Rah
 * 2019, thickness within 10 % or order-ambiguous; 1-3L MoS2 (n,k of Hsu
 * 2019 or Song 2019) and WSe2 (Hsu 2019 or Gu 2019) counted right. Informed
 * setups, 8-bit PNG. The full matrix (more scenes, JPEG, every source and
 * oxide) is `make accuracy-crystals` (build/tests/robust/crystals). */
#include "check.h"
#include "robust/crystals.h"
#include "lamina/error.h"

#include <math.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

static robust_case make_case(synth_crystal x, int source, double oxide)
{
    robust_case c;
    robust_case_init(&c);
    c.cfg.crystal = x;
    c.cfg.nk_source = source;
    c.cfg.nominal_oxide_nm = oxide;
    c.fmt = SYNTH_FMT_PNG;
    c.quality = 0;
    c.informed = 1;
    c.pooled_setup = NULL;
    return c;
}

/* The same in JPEG of quality 90 (4:2:0), as `make accuracy-crystals`. */
static robust_case jpeg_case(synth_crystal x, int source, double oxide)
{
    robust_case c = make_case(x, source, oxide);
    c.fmt = SYNTH_FMT_JPEG;
    c.quality = 90;
    return c;
}

/* Render and analyse one hBN scene, added to 'total'. */
static void hbn_scene(const robust_case *c, unsigned long long seed, const char *dir,
                      hbn_tally *total)
{
    hbn_tally t;
    memset(&t, 0, sizeof t);
    check_int(crystals_run_hbn(c, seed, dir, &t, stdout), 0, "hBN scene %llu rendered and analysed",
              seed);
    crystals_add(total, &t);
}

/* Scenes first..first+n-1 of one case, tallied together and printed. */
static hbn_tally hbn_scenes(const robust_case *c, unsigned long long first, size_t n,
                            const char *dir, const char *label)
{
    hbn_tally total;
    memset(&total, 0, sizeof total);
    for (size_t k = 0; k < n; k++)
        hbn_scene(c, first + k, dir, &total);
    crystals_print(stdout, label, &total);
    return total;
}

static void test_hbn(const char *dir)
{
    static const struct { int source; double oxide; } cases[] = {
        {0, 285}, {1, 90}, {2, 285}, {1, 285}};
    hbn_tally total;
    memset(&total, 0, sizeof total);
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        robust_case c = make_case(SYNTH_XTAL_HBN, cases[i].source, cases[i].oxide);
        hbn_scene(&c, 7100 + i, dir, &total);
    }
    crystals_print(stdout, "quick hBN (4 png scenes)", &total);
    check_true(total.flakes >= 30, "enough hBN flakes scored (%zu)", total.flakes);
    check_true(total.right >= 0.9 * (double)total.flakes,
               "hBN thickness within 10 %% or order-ambiguous for >= 90 %% of flakes "
               "(%zu / %zu; issue 14 asks 95 %% over the full matrix)",
               total.right, total.flakes);
    check_true(total.covered >= 0.9 * (double)total.flakes,
               "the truth inside a reported 95 %% interval for >= 90 %% (%zu / %zu)",
               total.covered, total.flakes);
}

/* A 90 nm chip under a 285 nm setup whose order the layer ladder's search
 * does not name (Lee's index, underexposed: the substrate at 18 % of full
 * scale): read at 278 nm with 29 % of the flakes' area unmodelled, warned
 * only "poor-fit" and "underexposed". The profile now searches the wide
 * range itself when a quarter of the area is unmodelled (wide_scan): here
 * 93 nm fits nearly as well (its evidence 3.5 against 7.4), so the reading
 * stays and the image is warned "oxide-ambiguous", naming 93 nm. */
static void test_hbn_unnamed_order(const char *dir)
{
    robust_case c = make_case(SYNTH_XTAL_HBN, 1, 285);
    c.cfg.oxide_nm = 90;
    hbn_tally total = hbn_scenes(&c, 7304, 1, dir, "hBN on 90 nm sold as 285, seed 7304");
    check_true(total.images == 1 && total.oxide_warned == 1,
               "a 90 nm chip read at another order is warned of its oxide (%zu of %zu)",
               total.oxide_warned, total.images);
}

/* Chips of the nominal oxide (+-12 nm) must not be warned that it is off:
 * the layer ladder's fit, which cannot draw a thick film, found hBN chips
 * of 281-288 nm at ~90 nm "nearly as well" or better (three of these four
 * Rah-index scenes were warned, one "off nominal: 92.7 nm"). The films'
 * profile weighs that order and owns the oxide's warnings. */
static void test_hbn_no_false_oxide_warning(const char *dir)
{
    robust_case c = make_case(SYNTH_XTAL_HBN, 2, 285);
    hbn_tally total = hbn_scenes(&c, 5305, 4, dir, "hBN Rah 285 nm (4 png)");
    check_true(total.oxide_warned == 0, "chips of the nominal oxide: no oxide warning (%zu of %zu "
               "images warned)", total.oxide_warned, total.images);
    check_true(total.right >= 0.9 * (double)total.flakes,
               "chips of the nominal oxide: thickness right for >= 90 %% (%zu / %zu)",
               total.right, total.flakes);
}

/* hBN on 285 nm in JPEG (quality 90, 4:2:0): the flat substrate's blocks
 * round their colour to whole DC quantisation steps (ITU-T T.81), so the
 * substrate is two colour clusters a step apart, both spread over the
 * picture. Taking one of them for the substrate biased every contrast by
 * up to a step, and these scenes read 20-30 % too thick (22 of 30 flakes
 * right); the substrate is now both (substrate_modes.c, same_surface).
 * The same scenes as `make accuracy-crystals`' "hBN Grudinin2023 285 nm
 * jpeg90". */
static void test_hbn_jpeg(const char *dir)
{
    robust_case c = jpeg_case(SYNTH_XTAL_HBN, 0, 285);
    hbn_tally total = hbn_scenes(&c, 3300, 4, dir, "hBN 285 nm JPEG q90 (4 scenes)");
    check_true(total.flakes >= 25, "enough hBN flakes scored in JPEG (%zu)", total.flakes);
    check_true(total.right >= 0.9 * (double)total.flakes,
               "hBN in JPEG on 285 nm: thickness within 10 %% for >= 90 %% (%zu / %zu)",
               total.right, total.flakes);
}

/* Two JPEG scenes of `make accuracy-crystals` that defeated the
 * segmentation: h3101 (Grudinin index, 90 nm): a 4.8 nm flake of 1030 px
 * whose colour rings throughout (JPEG codes colour at half resolution),
 * every pixel a transition pixel, so no region; h4100 (Rah index, 285 nm,
 * strong vignetting): patches of bare substrate in the corners sat 1.7 DC
 * steps off in blue and were read as 0.4 nm flakes, which pulled the
 * oxide from 290 to 244 nm and made three real flakes unmodelled. Every
 * flake must now have an estimate and the oxides be right. */
static void test_hbn_jpeg_segmentation(const char *dir)
{
    static const struct { int source; double oxide; unsigned long long seed; } cases[] = {
        {0, 90, 3101}, {2, 285, 4100}};
    hbn_tally total;
    memset(&total, 0, sizeof total);
    for (size_t i = 0; i < 2; i++) {
        robust_case c = jpeg_case(SYNTH_XTAL_HBN, cases[i].source, cases[i].oxide);
        hbn_scene(&c, cases[i].seed, dir, &total);
    }
    crystals_print(stdout, "hBN JPEG scenes 3101 and 4100", &total);
    double oxide = total.oxide_n ? total.oxide_abs_sum / (double)total.oxide_n : INFINITY;
    check_true(total.flakes >= 15 && total.found == total.flakes,
               "every flake has an estimate (%zu of %zu)", total.found, total.flakes);
    check_true(oxide < 3, "the oxide within 3 nm on average (%.1f nm)", oxide);
}

/* A chip mislabelled by more than the oxide profile's reach (+-40 nm about
 * the nominal): hBN on 90, 200 and 330 nm of SiO2 analysed with a 285 nm
 * setup, drawn with Lee's and Rah's indices (the analysis' default is
 * Grudinin's). The layer ladder's wide search found the 200 nm chip at 202
 * nm, but the films' profile searched only 245-325 nm: it reported 329 +-
 * 100 nm and thicknesses of 93-297 nm for flakes of 8-55 nm, beside a
 * warning that the counts used 202 nm. The profile now also searches about
 * the oxides that search found, and weighs a rival order as the search
 * weighs its own fit (thickness_stage.c, coarse_scan); the oxide's warnings
 * are the profile's. Each image must be warned that its oxide is not the
 * nominal. These five scenes: 37 of 42 flakes right, the oxide 0.7 nm off
 * on average, five images warned; before (c24fb92) 18 of 42, 70 nm, one.
 * A 90 nm chip whose rival order the ladder's search does not name:
 * test_hbn_unnamed_order. */
static void test_hbn_mislabelled(const char *dir)
{
    static const struct { int source; double oxide; unsigned long long seed; } cases[] = {
        {1, 200, 7300}, {1, 200, 7301}, {2, 330, 7302}, {2, 330, 7303},
        {2, 90, 7305}};
    hbn_tally total;
    memset(&total, 0, sizeof total);
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        robust_case c = make_case(SYNTH_XTAL_HBN, cases[i].source, 285);
        c.cfg.oxide_nm = cases[i].oxide;
        hbn_scene(&c, cases[i].seed, dir, &total);
    }
    crystals_print(stdout, "hBN on 90, 200, 330 nm sold as 285 (5 png)", &total);
    double oxide = total.oxide_n ? total.oxide_abs_sum / (double)total.oxide_n : INFINITY;
    check_true(total.flakes >= 35, "enough hBN flakes scored on mislabelled chips (%zu)",
               total.flakes);
    check_true(total.right >= 0.8 * (double)total.flakes,
               "mislabelled chips: hBN thickness within 10 %% or order-ambiguous for >= 80 %% "
               "(%zu / %zu)", total.right, total.flakes);
    check_true(oxide < 5, "mislabelled chips: the oxide found within 5 nm on average (%.1f nm)",
               oxide);
    check_true(total.oxide_warned == total.images,
               "mislabelled chips: every image warned of its oxide (%zu of %zu)",
               total.oxide_warned, total.images);
}

static void test_tmd(const char *dir)
{
    static const struct { synth_crystal x; int source; double oxide; } cases[] = {
        {SYNTH_XTAL_MOS2, 1, 90}, {SYNTH_XTAL_MOS2, 0, 285}, {SYNTH_XTAL_WSE2, 1, 285},
        {SYNTH_XTAL_WSE2, 0, 90}};
    robust_tally total;
    memset(&total, 0, sizeof total);
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        robust_case c = make_case(cases[i].x, cases[i].source, cases[i].oxide);
        check_int(robust_run(&c, 7200 + i, dir, &total, stdout), 0,
                  "TMD scene %zu rendered and analysed", i);
    }
    robust_print(stdout, "quick TMD (4 png scenes)", &total);
    check_true(total.flakes >= 25, "enough 1-3L TMD flakes scored (%zu)", total.flakes);
    check_true(total.right >= 0.9 * (double)total.flakes,
               "1-3L MoS2 and WSe2 counted right for >= 90 %% (%zu / %zu; issue 14 asks 95 %% "
               "over the full matrix)",
               total.right, total.flakes);
}

/* Render and analyse one TMD scene into a fresh tally; 0 if that failed. */
static int tmd_scene(const robust_case *c, unsigned long long seed, const char *dir,
                     robust_tally *t)
{
    memset(t, 0, sizeof *t);
    return check_int(robust_run(c, seed, dir, t, stdout), 0, "TMD scene %llu analysed", seed);
}

/* A TMD's contrast is not monotonic in N and moves fast with the oxide:
 * scene 8804 (WSe2, n,k of Hsu 2019, chip of 101.2 nm sold as 90) has
 * three 3L flakes at contrast (0.05, 0.13, 0.05), a third of the 1L's at
 * the nominal oxide, which the segmentation took for substrate (they were
 * not reported at all). Its 1L and 2L are nearly the same colour there
 * ((0.35, 0.27, 0.17) against (0.35, 0.29, 0.17), the generator's own
 * contrasts): they may be called ambiguous, never confidently wrong. */
static void test_tmd_faint_count(const char *dir)
{
    robust_case c = make_case(SYNTH_XTAL_WSE2, 0, 90);
    robust_tally t;
    if (!tmd_scene(&c, 8804, dir, &t))
        return;
    check_true(t.by_n[3] == 3 && t.right_n[3] == 3, "its three 3L flakes found and counted (%zu of %zu)",
               t.right_n[3], t.by_n[3]);
    check_true(t.confident_right == t.confident,
               "no confident wrong count (%zu right of %zu with p >= 0.95)", t.confident_right,
               t.confident);
}

/* Scene 9308 (WSe2, n,k of Gu 2019, JPEG, a chip of 78.5 nm sold as 90):
 * monolayers and bilayers, the bilayers 0.8 darker than the oxide, cover
 * a third of the picture. The robust brightness surface fitted over all
 * uniform tiles bent between the three brightnesses, so the oxide's tiles
 * lay 0.4 apart in brightness and split into three modes; the bilayer's
 * mode was the largest and the analysis refused the image ("no bare
 * substrate found"). Now the surface is fitted with an offset per
 * brightness level (substrate_modes.c). */
static void test_tmd_dense_flakes(const char *dir)
{
    robust_case c = jpeg_case(SYNTH_XTAL_WSE2, 1, 90);
    robust_tally t;
    if (!tmd_scene(&c, 9308, dir, &t))
        return;
    check_true(t.flakes >= 10 && t.right == t.flakes, "its 1-3L flakes counted right (%zu of %zu)",
               t.right, t.flakes);
}

/* Scene 9300 (WSe2, n,k of Gu 2019, JPEG, a chip of 101.9 nm sold as 90)
 * carries two polymer residue patches (~10 nm PMMA, contrast about
 * (-0.14, -0.26, -0.32)). Its 1L and 2L are nearly one colour at that
 * oxide. With residue only as a broad "unmodelled" box, the reading at
 * 97.7 nm that calls the residue 6L WSe2 beat the right one (104.4 nm)
 * by 5.8 in log posterior, and every flake was read one or two layers
 * high at p 0.97-0.998 with no warning that doubts the counts. Residue
 * films are now an explanation in every reading (estimate.c,
 * unmodelled_logpdf): the two readings are reported together
 * ("two-readings") and no count is confident. */
static void test_tmd_residue(const char *dir)
{
    robust_case c = jpeg_case(SYNTH_XTAL_WSE2, 1, 90);
    robust_tally t;
    if (!tmd_scene(&c, 9300, dir, &t))
        return;
    check_true(t.flakes >= 8, "its 1-3L flakes found (%zu)", t.flakes);
    check_true(t.confident_right == t.confident,
               "no confident wrong count (%zu right of %zu with p >= 0.95)", t.confident_right,
               t.confident);
}

int main(void)
{
    lam_error_init_gsl();
    check_begin("test_crystals_synth");
    if (!check_refdata_dir())
        check_skip("tests/data/nk not found");
    char dir[512];
    check_path(dir, sizeof dir, check_tmpdir(), "crystals");
    mkdir(dir, 0755);
    test_hbn(dir);
    test_hbn_jpeg(dir);
    test_hbn_jpeg_segmentation(dir);
    test_hbn_mislabelled(dir);
    test_hbn_unnamed_order(dir);
    test_hbn_no_false_oxide_warning(dir);
    test_tmd(dir);
    test_tmd_faint_count(dir);
    test_tmd_dense_flakes(dir);
    test_tmd_residue(dir);
    return check_summary();
}
