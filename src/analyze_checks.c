/* analyze_checks.c - the checks that turn a doubtful analysis into named
 * warnings (lamina/warnings.h) and an impossible one into an error: what
 * the file, the exposure, the setup and the fit say about how far the
 * answers can be trusted. Called by the pipeline in analyze.c. */
#include "analyze_internal.h"
#include "lamina/warnings.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define SATURATED_SHARE 0.005   /* of all pixels at full scale: worth saying */
#define DARK_LEVEL 0.03         /* substrate below 3 % of full scale (linear) */
#define CODE_STEP_FRACTION 0.25 /* one 8-bit code above 1/4 of a monolayer step */
#define SEPARATION_MIN 6.0      /* 1L-2L step in standard errors of a typical region */
#define OFF_NOMINAL_NM 15.0     /* oxide farther than this (and 3 sigma) from nominal */
#define POOR_FIT_SHARE 0.25     /* of the flakes' area that fits no layer count */
#define RIVAL_WORTH_SAYING 0.05 /* a second reading this probable can move a label */
#define AR_REFLECTANCE 0.03     /* substrate reflectance below this in a channel (issue 14) */
#define SCALE_DOUBT M_SQRT2     /* monolayer contrast nearer half or twice the calibration's */

/* ---- the image against the setup's camera ---- */

/* Does every pixel of a 3-plane image have R = G = B (a monochrome
 * camera's picture saved as RGB)? A sample of rows is enough to say no. */
static int planes_equal(const lam_image *img)
{
    size_t w = img->width, h = img->height, step = h > 64 ? h / 64 : 1;
    for (size_t y = 0; y < h; y += step)
        for (size_t x = 0; x < w; x++) {
            size_t k = y * w + x;
            if (img->plane[0][k] != img->plane[1][k] || img->plane[0][k] != img->plane[2][k])
                return 0;
        }
    return 1;
}

lam_status lam__check_channels(const lam_image *img, const lam_setup *s, lam_error *err)
{
    size_t cam = s->camera.channels;
    int grey = img->channels == 1 || planes_equal(img);
    if (grey && cam > 1)
        return lam_error_set(err, LAM_EINVAL,
                             "the image is grey (%s) but the setup's camera has %zu channels: "
                             "give the monochrome camera as one channel (its filter's centre "
                             "and width; docs/setup.md)",
                             img->channels == 1 ? "one channel" : "R = G = B in every pixel",
                             cam);
    if (!grey && cam == 1)
        return lam_error_set(err, LAM_EINVAL,
                             "the image has colour but the setup's camera has one channel: "
                             "give the colour camera's three channels, or a grey image");
    return LAM_OK;
}

/* ---- warnings ---- */

static void check_saturation(lam_analysis *a, const lam_image *img)
{
    double share = (double)img->clipped_count / (double)(img->width * img->height);
    if (share <= SATURATED_SHARE)
        return;
    size_t hit = 0;
    for (size_t i = 0; i < a->count; i++)
        hit += (a->results[i].flags & LAM_FLAG_SATURATED) != 0;
    lam_warnings_add(&a->warnings, "saturated",
                     "%.1f %% of the pixels are at full scale: they carry no contrast, %zu "
                     "region(s) are flagged 'saturated' and get no layer count; lower the "
                     "exposure or the lamp",
                     100 * share, hit);
}

/* The relative size of one 8-bit code at the substrate's level. */
static double code_step(const lam_image *img, double level)
{
    if (img->bit_depth != 8 || !(level > 0))
        return 0;
    double v = lam_transfer_encode(&img->transfer, fmin(level, 1.0));
    return (lam_transfer_decode(&img->transfer, fmin(v + 1 / 255.0, 1.0)) - level) / level;
}

/* How many standard errors apart 1L and 2L are for the median region that
 * informs the fit, in the channel that separates them best. */
static double separation(const lam_analysis *a, size_t ref, size_t *median_px)
{
    size_t n = 0, px[512];
    for (size_t i = 0; i < a->count && n < 512; i++)
        if (a->measured[i].use)
            px[n++] = a->seg->regions[i].interior;
    *median_px = 0;
    if (!n)
        return INFINITY;
    for (size_t i = 1; i < n; i++) /* insertion sort: a few hundred at most */
        for (size_t j = i; j > 0 && px[j - 1] > px[j]; j--) {
            size_t t = px[j];
            px[j] = px[j - 1], px[j - 1] = t;
        }
    *median_px = px[n / 2];
    double best = 0;
    for (size_t c = 0; c < a->channels; c++) {
        double se = a->substrate.noise[c] * sqrt(a->substrate.kappa / (double)*median_px);
        double step = fabs(a->ladder.contrast[2 * ref][c] - a->ladder.contrast[ref][c]);
        best = fmax(best, step / fmax(se, 1e-12));
    }
    return best;
}

/* The contrast the exposure must resolve: a monolayer's, or for a crystal
 * of continuous thickness (hBN, searched by the nanometre) that of 3
 * layers, about 1 nm (issue 14). */
static size_t reference_layers(const lam_setup *s)
{
    return lam_setup_crystal_kind(s) == LAM_CRYSTAL_CONTINUOUS ? 3 : 1;
}

static void check_exposure(lam_analysis *a, const lam_image *img, const lam_setup *s)
{
    double level = 0, step1 = 0;
    size_t ref = reference_layers(s);
    for (size_t c = 0; c < a->channels; c++) {
        level = fmax(level, a->substrate.level[c]);
        step1 = fmax(step1, fabs(a->ladder.contrast[ref][c]));
    }
    double code = code_step(img, level);
    size_t px;
    double sep = separation(a, ref, &px);
    if (level < DARK_LEVEL || code > CODE_STEP_FRACTION * step1)
        lam_warnings_add(&a->warnings, "underexposed",
                         "the substrate is at %.1f %% of full scale: one %d-bit code is %.1f %% "
                         "of its brightness against a %s contrast of %.1f %%; expose "
                         "longer or save 16-bit files",
                         100 * level, img->bit_depth, 100 * code,
                         ref == 1 ? "monolayer" : "1 nm film's", 100 * step1);
    else if (sep < SEPARATION_MIN)
        lam_warnings_add(&a->warnings, "underexposed",
                         "the pixel noise is high: for a region of %zu px, %s differ by "
                         "only %.1f standard errors; average frames or expose longer",
                         px, ref == 1 ? "1L and 2L" : "1 and 2 nm", sep);
}

static void check_oxide(lam_analysis *a)
{
    const lam_oxide_result *o = &a->oxide;
    if (!o->fitted || o->nominal < 0)
        return;
    double d = o->estimate - o->nominal;
    if (fabs(d) > OFF_NOMINAL_NM && fabs(d) > 3 * o->sigma)
        lam_warnings_add(&a->warnings, "oxide-off-nominal",
                         "the flakes fit %.1f +- %.1f nm of SiO2, not the nominal %.1f nm: check "
                         "the chip and the setup; the layer counts use the fitted value",
                         o->estimate, o->sigma, o->nominal);
}

static void check_encoding(lam_analysis *a, const lam_image *img, const lam_setup *s)
{
    if (lam_setup_is_default(s, "encoding"))
        return;
    if (lam_image_transfer_conflict(img, &s->encoding))
        lam_warnings_add(&a->warnings, "encoding-mismatch",
                         "the file says its encoding is %s (%s) but the setup says %s; the "
                         "setup's was used: if the file is right, remove \"encoding\" from the "
                         "setup",
                         lam_transfer_name(&img->file_transfer), img->file_colour,
                         lam_transfer_name(&s->encoding));
}

/* The parts of the microscope a setup may leave to typical values (setup
 * keys), and how the setup-defaults warning names them. */
static const struct {
    const char *key, *name;
} MICROSCOPE_PARTS[] = {
    {"camera", "the camera's channels"},
    {"objective.illumination_na", "the illumination NA"},
    {"illuminant", "the lamp"},
};

#define MICROSCOPE_PART_COUNT (sizeof MICROSCOPE_PARTS / sizeof MICROSCOPE_PARTS[0])

int lam__microscope_defaulted(const lam_setup *s)
{
    for (size_t i = 0; i < MICROSCOPE_PART_COUNT; i++)
        if (lam_setup_is_default(s, MICROSCOPE_PARTS[i].key))
            return 1;
    return 0;
}

/* A setup whose microscope priors were narrowed by a calibration (its
 * uncertainty block: camera shifts or NA). */
static int setup_calibrated(const lam_setup *s)
{
    return isfinite(s->sigma.shift_nm) || isfinite(s->sigma.na);
}

static void check_defaults(lam_analysis *a, const lam_setup *s)
{
    char what[160] = "";
    for (size_t i = 0; i < MICROSCOPE_PART_COUNT; i++)
        if (lam_setup_is_default(s, MICROSCOPE_PARTS[i].key)) {
            strcat(what, MICROSCOPE_PARTS[i].name);
            strcat(what, ", ");
        }
    if (!what[0])
        return;
    what[strlen(what) - 2] = 0;
    char oxide[64] = "";
    if (a->oxide.fitted)
        snprintf(oxide, sizeof oxide, " and the oxide is uncertain by %.1f nm", a->oxide.sigma);
    int calibrated = setup_calibrated(s);
    const char *narrow = !calibrated ? "give them in the setup, or calibrate on flakes of known "
                                       "thickness (lamina calibrate)"
                         : isfinite(s->substrate_colour.second_oxide_nm)
                             ? "the camera's measured curves narrow them"
                             : "the camera's measured curves, or a second calibration chip of "
                               "known oxide (calibrate --second-chip), narrow them";
    lam_warnings_add(&a->warnings, "setup-defaults",
                     "%s %s from the flakes with wide priors, so layer counts are less "
                     "certain (see each region's probability)%s; %s",
                     what,
                     calibrated ? "not measured: the profile's values are typical ones adjusted "
                                  "by its calibration, fitted again"
                                : "not given: typical values were assumed and fitted",
                     oxide, narrow);
}

/* A TMD's counts without the camera's curves. Its excitonic n,k make the
 * contrast of each count move with the channels' wavelengths, and the
 * published sources differ by ~20 %: with the camera left to typical
 * values, the fit finds a ladder that fits and reports it too confidently.
 * Measured on `make accuracy-crystals`' renders analysed with an unknown
 * camera (crystals --only tmd --scenes 6 --uninformed, 96 images): 84 % of
 * 1-3L regions right, and 11 % of the counts at p >= 0.95 wrong, against
 * 99 % and 0 % with the camera given. */
static void check_layered_camera(lam_analysis *a, const lam_setup *s)
{
    int calibrated = isfinite(s->sigma.shift_nm);
    if (lam_setup_crystal_kind(s) != LAM_CRYSTAL_LAYERED || !lam_setup_is_default(s, "camera") ||
        calibrated)
        return;
    lam_warnings_add(&a->warnings, "crystal-camera-unknown",
                     "%s layer counts need the camera's channel curves: with typical ones "
                     "assumed, their probabilities are too confident (on independent renders "
                     "with an unknown camera 84 %% of 1-3L regions were counted right, and 11 %% "
                     "of the counts given at p >= 0.95 were wrong); give the camera in the "
                     "setup before trusting a count",
                     s->flake[0] ? s->flake : "these");
}

static void check_fit(lam_analysis *a, const lam_setup *s)
{
    double area = 0, bad = 0;
    for (size_t i = 0; i < a->count; i++) {
        const lam_region_result *r = &a->results[i];
        if (r->flags & (LAM_FLAG_SMALL | LAM_FLAG_SATURATED))
            continue;
        area += (double)a->seg->regions[i].area;
        if (r->flags & LAM_FLAG_UNMODELLED)
            bad += (double)a->seg->regions[i].area;
    }
    if (area > 0 && bad > POOR_FIT_SHARE * area)
        lam_warnings_add(&a->warnings, "poor-fit",
                         "%.0f %% of the flakes' area fits no %s of %s on this "
                         "substrate: residue, another material, or a substrate other than the "
                         "setup's; those regions are 'unmodelled'",
                         100 * bad / area,
                         lam_setup_crystal_kind(s) == LAM_CRYSTAL_CONTINUOUS ? "thickness"
                                                                             : "layer count",
                         s->flake[0] ? s->flake : "graphene");
}

/* A pooled prior chose between two readings its images could not tell
 * apart alone: the pool's choice is evidence, not proof (on the harness a
 * ten-tile scan at 300 nm with an unknown camera was read N -> N+1 in
 * every tile, pooled, with p = 1 and no other warning). */
static void check_pooled_choice(lam_analysis *a)
{
    if (!a->prior_pooled || !a->prior_two_readings)
        return;
    lam_warnings_add(&a->warnings, "pooled-readings",
                     "%zu of the %zu images pooled for the shared parameters fit two readings "
                     "alone (layer counts about N or 2N); the pooled fit chose one and these "
                     "layer counts rest on that choice; give the camera and NA, or calibrate on "
                     "a flake of known thickness",
                     a->prior_two_readings, a->prior_images);
}

static void check_modes(lam_analysis *a, const lam_setup *s)
{
    const lam_estimate *e = a->estimate, *r = e->rival;
    lam_crystal_kind kind = lam_setup_crystal_kind(s);
    if (kind == LAM_CRYSTAL_CONTINUOUS) /* hBN: thicknesses from their own oxide profile */
        return;
    if (!r || e->rival_weight < RIVAL_WORTH_SAYING || e->rival_weight > 1 - RIVAL_WORTH_SAYING) {
        check_pooled_choice(a);
        return;
    }
    double w = e->rival_weight, d1 = e->image[0].oxide.value, d2 = r->image[0].oxide.value;
    const char *remedy =
        fabs(d1 - d2) > 5 ? "the oxide is what tells them apart: measure it (ellipsometry) and "
                            "give it with \"uncertainty\": {\"oxide_nm\": ...}, calibrate on "
                            "a flake of known thickness, or analyse more images of the chip "
                            "together"
                          : "give the camera and NA, calibrate on a flake of known thickness, "
                            "or analyse more images of the chip together";
    if (kind != LAM_CRYSTAL_SHEETS) { /* a crystal's n,k is given: the readings are oxides */
        lam_warnings_add(&a->warnings, "two-readings",
                         "the flakes fit two readings almost equally well (%.0f %% : %.0f %%): "
                         "oxide %.1f nm or %.1f nm, which count the %s layers differently; the "
                         "probabilities include both; %s",
                         100 * (1 - w), 100 * w, d1, d2, s->flake, remedy);
        return;
    }
    lam_warnings_add(&a->warnings, "two-readings",
                     "the flakes fit two readings almost equally well (%.0f %% : %.0f %%): "
                     "oxide %.1f nm with graphene's response scaled %.2f, or %.1f nm scaled "
                     "%.2f, which count the layers differently; the probabilities include both; "
                     "%s",
                     100 * (1 - w), 100 * w, d1, 1 + e->shared[LAM_NU_CONTINUUM].value, d2,
                     1 + r->shared[LAM_NU_CONTINUUM].value, remedy);
}

/* A nearly anti-reflecting substrate (Si3N4 near 67 nm, issue 14): the
 * relative contrast divides by a small substrate reflectance, so stray
 * light and the substrate model's errors dominate it; the JSON then gives
 * each region dR and its signal-to-noise as well (report_json.c). */
static void check_antireflection(lam_analysis *a)
{
    static const char *rgb[3] = {"red", "green", "blue"};
    for (size_t c = 0; c < a->channels; c++)
        if (a->ladder.substrate[c] < AR_REFLECTANCE) {
            lam_warnings_add(&a->warnings, "anti-reflection",
                             "the substrate is nearly anti-reflecting (model reflectance %.3f in "
                             "the %s channel, below %.2f): the relative contrast divides by it, "
                             "so stray light and errors of the substrate model dominate; each "
                             "region also carries delta_reflectance and snr; prefer another "
                             "film thickness (lamina plan) for counting layers",
                             a->ladder.substrate[c], a->channels == 3 ? rgb[c] : "camera's",
                             AR_REFLECTANCE);
            return;
        }
}

/* One channel: the contrast of N layers on one oxide equals that of 2N on
 * another about 20 nm away (at 285 nm), so the counts rest on the oxide
 * prior unless the oxide was measured. */
static void check_monochrome(lam_analysis *a, const lam_setup *s)
{
    if (a->channels != 1 || (isfinite(s->sigma.oxide_nm) && s->sigma.oxide_nm <= 5))
        return;
    lam_warnings_add(&a->warnings, "monochrome",
                     "one camera channel cannot tell N layers on one oxide from 2N on an oxide "
                     "~20 nm away: the counts lean on the nominal oxide; measure it "
                     "(ellipsometry) and give it with \"uncertainty\": {\"oxide_nm\": ...} "
                     "(5 nm or better), or use a colour camera");
}

/* The monolayer contrast the fit reads at this image's oxide, over the one
 * the setup's own values give there (for a calibrated profile: the
 * calibration's, which matched its labelled flake), in the channel where
 * the latter is largest; NAN when it cannot be made. The estimate's shared
 * values are set to their priors' centres (the setup's values) for the
 * evaluation and put back. */
static double calibration_scale(lam_analysis *a, lam_model *model)
{
    lam_estimate *e = a->estimate;
    lam_prediction *P = malloc(sizeof *P);
    double fitted[LAM_NU_COUNT], ratio = NAN;
    lam_error err;
    if (!P) /* only a check: without memory it says nothing */
        return NAN;
    for (int k = 0; k < LAM_NU_COUNT; k++)
        fitted[k] = e->shared[k].value, e->shared[k].value = e->shared[k].prior_mean;
    if (!lam_estimate_ladder(e, 0, model, P, &err)) {
        size_t c = 0;
        for (size_t k = 1; k < P->channels; k++)
            if (fabs(P->contrast[1][k]) > fabs(P->contrast[1][c]))
                c = k;
        ratio = a->ladder.contrast[1][c] / P->contrast[1][c];
    }
    for (int k = 0; k < LAM_NU_COUNT; k++)
        e->shared[k].value = fitted[k];
    free(P);
    return ratio;
}

/* A calibrated profile fixes what a monolayer looks like, but not how the
 * camera and the response share that: its priors stay wide, and a fit can
 * settle on every count doubled with the response halved. On the harness'
 * calibrated runs (2026-12-05) a bayer tile was read so at p 0.99 with no
 * other warning; its fitted monolayer contrast was 0.52 of the
 * calibration's at its oxide, where right readings spread over 0.60-1.47
 * (1st-99th percentile 0.80-1.25). Half way (in ratio) between one and
 * two, the fit is nearer a doubled or halved reading than the calibration. */
static void check_calibration_scale(lam_analysis *a, const lam_setup *s, lam_model *model)
{
    if (!setup_calibrated(s) || lam_setup_crystal_kind(s) != LAM_CRYSTAL_SHEETS || !a->estimate)
        return;
    double q = calibration_scale(a, model);
    if (!(q < 1 / SCALE_DOUBT || q > SCALE_DOUBT))
        return;
    lam_warnings_add(&a->warnings, "calibration-scale",
                     "the flakes read a monolayer contrast %.2f times what the setup's "
                     "calibrated values give at this oxide: the layer counts may be %s; "
                     "confirm one flake's count (Raman) or calibrate again on this chip",
                     q, q < 1 ? "doubled (N read as 2N)" : "halved (2N read as N)");
}

void lam__check_analysis(lam_analysis *a, const lam_image *img, const lam_setup *s,
                         lam_model *model)
{
    check_calibration_scale(a, s, model);
    check_modes(a, s);
    check_monochrome(a, s);
    check_saturation(a, img);
    check_exposure(a, img, s);
    check_oxide(a);
    check_encoding(a, img, s);
    check_defaults(a, s);
    check_layered_camera(a, s);
    check_fit(a, s);
    check_antireflection(a);
}
