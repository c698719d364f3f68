/* cli/calibrate.c - `lamina calibrate`: fit a setup profile from labelled
 * images (or, with --self, from the images alone; lamina/calibrun.h). */
#include "cli.h"
#include "lamina/calibrun.h"
#include "lamina/summary.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define MAX_LABELS 32

static struct {
    lam_setup_overrides so;
    const char *labels[MAX_LABELS], *out, *second_chip;
    size_t nl, nk;
    int self, labelled_only;
    double known[LAM_CALIB_MAX_IMAGES], known_na, second_oxide;
} A = {.out = "calibrated.json", .known_na = NAN, .second_oxide = NAN};

/* comma-separated, in image order; '-' leaves one free */
static int parse_known_oxide(const char *command, const char *arg, void *target)
{
    (void)target;
    char *save = NULL, *tok, buf[1024];
    snprintf(buf, sizeof buf, "%s", arg);
    for (tok = strtok_r(buf, ",", &save); tok; tok = strtok_r(NULL, ",", &save)) {
        if (A.nk == LAM_CALIB_MAX_IMAGES)
            return cli_usage_error(command, "--known-oxide: too many values"), -1;
        if (!strcmp(tok, "-"))
            A.known[A.nk] = NAN;
        else if (cli_parse_double(command, "--known-oxide", tok, 1, 5000, &A.known[A.nk]))
            return -1;
        A.nk++;
    }
    return 0;
}

static int add_labels(const char *command, const char *arg, void *target)
{
    (void)target;
    if (A.nl == MAX_LABELS)
        return cli_usage_error(command, "at most %d label files", MAX_LABELS), -1;
    A.labels[A.nl++] = arg;
    return 0;
}

static const cli_option calibrate_options[] = {
    {"labels", 0, CLI_CALL, NULL, 0, 0, add_labels, "FILE",
     "the image's labels (PNG layer map or lamina-labels/1 JSON),\none per image, in order"},
    {"self", 0, CLI_FLAG, &A.self, 0, 0, NULL, NULL, "no labels: the layer counts left latent"},
    {"labelled-only", 0, CLI_FLAG, &A.labelled_only, 0, 0, NULL, NULL,
     "fit the labelled regions alone (by default the images'\nother regions join with latent "
     "layer counts)"},
    {"known-oxide", 0, CLI_CALL, NULL, 0, 0, parse_known_oxide, "D1,D2,...",
     "oxides measured elsewhere, in image order ('-' = fit);\nfix at least one when the camera "
     "is unknown: channel centres\nand oxide are nearly degenerate"},
    {"second-chip", 0, CLI_TEXT, &A.second_chip, 0, 0, NULL, "IMAGE",
     "a second chip of measured oxide (--second-oxide), same\nlamp and white balance: its bare "
     "substrate measures how\nthe colour changes with oxide (needed to read other chips'\n"
     "oxide from their colour when the camera's curves are unknown)"},
    {"second-oxide", 0, CLI_NUMBER, &A.second_oxide, 1, 5000, NULL, "D",
     "the second chip's oxide in nm, 2-30 nm from the first's"},
    {"known-na", 0, CLI_NUMBER, &A.known_na, 0, 0.95, NULL, "X",
     "the illumination NA, when known (it correlates with the centres)"},
    {"output", 'o', CLI_TEXT, &A.out, 0, 0, NULL, "FILE",
     "write the fitted lamina-setup/1 profile (default calibrated.json)"},
    {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, "no printed summary"},
    CLI_END};

/* The options, and whether labels, images and oxides go together. */
static int parse_args(int argc, char **argv)
{
    for (size_t i = 0; i < LAM_CALIB_MAX_IMAGES; i++)
        A.known[i] = NAN;
    if (cli_options_parse(&cli_calibrate, argc, argv))
        return CLI_EUSAGE;
    size_t ni = (size_t)(argc - optind);
    if (!A.self && A.nl != ni)
        return cli_usage_error("calibrate", "give one --labels file per image (%zu labels, "
                                            "%zu images), or --self", A.nl, ni);
    if (A.self && A.nl)
        return cli_usage_error("calibrate", "--self and --labels exclude each other");
    if (A.self && A.labelled_only)
        return cli_usage_error("calibrate", "--labelled-only needs --labels");
    if (ni > LAM_CALIB_MAX_IMAGES)
        return cli_usage_error("calibrate", "at most %d images", LAM_CALIB_MAX_IMAGES);
    if (A.nk > ni)
        return cli_usage_error("calibrate", "--known-oxide has %zu values for %zu images", A.nk,
                               ni);
    if (!A.second_chip != !isfinite(A.second_oxide))
        return cli_usage_error("calibrate", "--second-chip and --second-oxide go together");
    return CLI_OK;
}

static int run_calibrate(int argc, char **argv)
{
    int rc = parse_args(argc, argv);
    lam_setup s;
    if (rc || (rc = cli_setup_build("calibrate", &A.so, &s)))
        return rc;
    const char *const *images = (const char *const *)argv + optind;
    lam_calibrun_options o = {images, (size_t)(argc - optind), A.self ? NULL : A.labels,
                              A.nk ? A.known : NULL, A.known_na, A.labelled_only,
                              A.second_chip, A.second_oxide};
    lam_calib_result res;
    memset(&res, 0, sizeof res);
    lam_error err;
    lam_error_clear(&err);
    char *text = NULL;
    if (lam_calibrun_fit(&s, &o, &res, &err) || lam_calibrun_save(&res, &o, A.out, &err))
        rc = cli_report(&err, NULL);
    else if (!cli_quiet && !lam_summary_calibration(&res, images, &text, &err))
        printf("%swrote %s\n", text, A.out);
    free(text);
    lam_calib_result_clear(&res);
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_calibrate = {
    .name = "calibrate", .summary = "fit a setup profile from labelled images",
    .run = run_calibrate,
    .usage = "Usage: lamina calibrate --labels LABELS.png ... [OPTIONS] IMAGE...\n"
             "       lamina calibrate --self [OPTIONS] IMAGE...\n"
             "Fit graphene's visible response, the illumination NA, each camera channel's\n"
             "wavelength shift and contrast gain, and each image's oxide so that the\n"
             "model reproduces the measured contrast of regions of known layer count (one\n"
             "Raman-confirmed flake is enough to start). Values the labels do not\n"
             "constrain are reported as such and keep their prior. The images' other,\n"
             "unlabelled regions join the fit with latent layer counts: the labels fix\n"
             "the ladder, the other layer counts pin the response and camera better\n"
             "(--labelled-only leaves them out). LABELS.png uses the layer-map coding\n"
             "(0 substrate, N layers, 254/255 ignored), one per image, in the same\n"
             "order; or LABELS.json (lamina-labels/1): polygons or points with layer\n"
             "counts, a point taking the whole segmented region around it.\n"
             "--self fits without labels, the layer counts left latent (marginalised):\n"
             "use several images with several layer counts.\n"
             "With three channels the profile records the bare substrate's colour at the\n"
             "best-known oxide, from which later analyses read their chips' oxide;\n"
             "--second-chip adds a second chip's, which measures the colour's change.\n\n",
    .options = calibrate_options, .setup = &A.so, .min_args = 1, .max_args = -1,
    .args_error = "no image given"};
