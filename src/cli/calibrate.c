/* cli/calibrate.c - `lamina calibrate`: fit a setup profile from labelled
 * images (or, with --self, from the images alone). */
#include "cli.h"
#include "setup_opts.h"
#include "lamina/calibrate.h"
#include "lamina/labels.h"

#include <getopt.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

#define MAX_LABELS 32

static void calibrate_help(FILE *out)
{
    fputs("Usage: lamina calibrate --labels LABELS.png ... [OPTIONS] IMAGE...\n"
          "       lamina calibrate --self [OPTIONS] IMAGE...\n"
          "Fit the camera channel centres and widths, the illumination NA and each\n"
          "image's oxide thickness so that the model reproduces the measured contrast\n"
          "of regions of known layer count. LABELS.png uses the layer-map coding (0\n"
          "substrate, N layers, 254/255 ignored), one per image, in the same order;\n"
          "or LABELS.json (lamina-labels/1): polygons or points with layer counts, a\n"
          "point taking the whole segmented region around it.\n"
          "--self fits without labels, each region taking the layer count that fits\n"
          "best: use several images with several layer counts and oxides.\n\n"
          "  --setup FILE     start values (default: calib/default-setup.json)\n"
          "  --oxide NM       starting oxide\n"
          "  --known-oxide D1,D2,...  oxides measured elsewhere, in image order ('-' = fit);\n"
          "                   fix at least one when the camera is unknown: channel centres\n"
          "                   and oxide are nearly degenerate\n"
          "  --known-na X     the illumination NA, when known (it correlates with the centres)\n"
          "  -o FILE          write the fitted lamina-setup/1 profile (default calibrated.json)\n"
          "  --quiet\n",
          out);
}

/* The label codes of one image: a lamina-labels/1 JSON file (its polygons
 * and points drawn on a map of the image's size) or a label map image.
 * Prints any error; returns the exit code. */
static int read_labels(const char *label, const char *img, const lam_setup *s, uint8_t **codes,
                       size_t *w, size_t *h)
{
    lam_error err;
    lam_error_clear(&err);
    size_t len = strlen(label);
    if (!(len > 5 && !strcmp(label + len - 5, ".json")))
        return lam_labels_load_map(label, codes, w, h, &err) ? cli_report(&err, label) : CLI_OK;
    lam_image *im = NULL;
    if (lam_image_load(img, NULL, &im, &err))
        return cli_report(&err, img);
    *w = im->width, *h = im->height;
    lam_image_free(im);
    *codes = malloc(*w * *h);
    if (!*codes) {
        fprintf(stderr, "lamina: out of memory\n");
        return CLI_EFILE;
    }
    if (lam_calib_labels_from_json(label, img, s, *w, *h, *codes, &err)) {
        free(*codes);
        *codes = NULL;
        return cli_report(&err, label);
    }
    return CLI_OK;
}

static int run_calibrate(int argc, char **argv)
{
    static const struct option longopts[] = {CLI_SETUP_LONGOPTS,
                                             {"labels", required_argument, 0, 'l'},
                                             {"self", no_argument, 0, 'S'},
                                             {"output", required_argument, 0, 'o'},
                                             {"quiet", no_argument, 0, 'q'},
                                             {"known-oxide", required_argument, 0, 'k'},
                                             {"known-na", required_argument, 0, 'N'},
                                             {0, 0, 0, 0}};
    cli_setup_opts so;
    cli_setup_opts_init(&so);
    const char *labels[MAX_LABELS], *out = "calibrated.json";
    size_t nl = 0;
    int self = 0, c, r;
    double known[LAM_CALIB_MAX_IMAGES];
    size_t nk = 0;
    double known_na = NAN;
    for (size_t i = 0; i < LAM_CALIB_MAX_IMAGES; i++)
        known[i] = NAN;
    optind = 1;
    opterr = 0;
    while ((c = getopt_long(argc, argv, "o:", longopts, NULL)) != -1) {
        switch (c) {
        case 'l':
            if (nl == MAX_LABELS)
                return cli_usage_error("calibrate", "at most %d label files", MAX_LABELS);
            labels[nl++] = optarg;
            break;
        case 'S': self = 1; break;
        case 'o': out = optarg; break;
        case 'q': cli_quiet = 1; break;
        case 'N':
            if (cli_parse_double("calibrate", "--known-na", optarg, 0, 0.95, &known_na))
                return CLI_EUSAGE;
            break;
        case 'k': {
            /* comma-separated, in image order; '-' leaves one free */
            char *save = NULL, *tok, buf[1024];
            snprintf(buf, sizeof buf, "%s", optarg);
            for (tok = strtok_r(buf, ",", &save); tok; tok = strtok_r(NULL, ",", &save)) {
                if (nk == LAM_CALIB_MAX_IMAGES)
                    return cli_usage_error("calibrate", "--known-oxide: too many values");
                if (!strcmp(tok, "-")) {
                    known[nk++] = NAN;
                    continue;
                }
                if (cli_parse_double("calibrate", "--known-oxide", tok, 1, 5000, &known[nk]))
                    return CLI_EUSAGE;
                nk++;
            }
            break;
        }
        default:
            if ((r = cli_setup_option(&so, "calibrate", c, optarg)) > 0)
                break;
            if (r < 0)
                return CLI_EUSAGE;
            return cli_usage_error("calibrate", "unknown or incomplete option '%s'", argv[optind - 1]);
        }
    }
    size_t ni = (size_t)(argc - optind);
    if (!ni)
        return cli_usage_error("calibrate", "no image given");
    if (!self && nl != ni)
        return cli_usage_error("calibrate", "give one --labels file per image (%zu labels, %zu images), or --self", nl, ni);
    if (self && nl)
        return cli_usage_error("calibrate", "--self and --labels exclude each other");
    if (ni > LAM_CALIB_MAX_IMAGES)
        return cli_usage_error("calibrate", "at most %d images", LAM_CALIB_MAX_IMAGES);
    lam_setup s;
    int rc = cli_setup_build("calibrate", &so, &s);
    if (rc)
        return rc;
    lam_calib_set set;
    lam_calib_set_init(&set);
    lam_error err;
    for (size_t i = 0; i < ni && !rc; i++) {
        const char *img = argv[optind + (int)i];
        lam_error_clear(&err);
        if (self) {
            if (lam_calib_measure_self(&set, img, &s, &err))
                rc = cli_report(&err, img);
            continue;
        }
        size_t lw = 0, lh = 0;
        uint8_t *codes = NULL;
        if ((rc = read_labels(labels[i], img, &s, &codes, &lw, &lh)))
            break;
        lam_load_options il = lam_load_options_default();
        if (!lam_setup_is_default(&s, "encoding"))
            il.transfer = s.encoding;
        if (lam_calib_measure_labels(&set, img, codes, lw, lh, &il, &err))
            rc = cli_report(&err, img);
        free(codes);
    }
    lam_calib_result res;
    if (!rc) {
        lam_error_clear(&err);
        if (nk > ni) {
            lam_calib_set_clear(&set);
            lam_setup_clear(&s);
            return cli_usage_error("calibrate", "--known-oxide has %zu values for %zu images", nk, ni);
        }
        if (!nk && !cli_quiet)
            fprintf(stderr, "lamina: note: no --known-oxide: channel centres and oxide are nearly "
                            "degenerate (both can scale together); the fit may drift along that "
                            "valley\n");
        if (lam_calibrate(&s, &set, self, nk ? known : NULL, known_na, &res, &err))
            rc = cli_report(&err, NULL);
    }
    if (!rc) {
        cJSON *cal = cJSON_CreateObject();
        cJSON_AddStringToObject(cal, "method", self ? "self-calibration (best-fitting layer counts)"
                                                    : "labelled regions");
        cJSON_AddNumberToObject(cal, "samples", (double)res.samples);
        cJSON_AddNumberToObject(cal, "rms_residual_before", res.rms_before);
        cJSON_AddNumberToObject(cal, "rms_residual_after", res.rms_after);
        cJSON_AddNumberToObject(cal, "condition", isfinite(res.condition) ? res.condition : -1);
        cJSON *sg = cJSON_AddObjectToObject(cal, "sigma");
        cJSON_AddItemToObject(sg, "centre_nm", cJSON_CreateDoubleArray(res.centre_sigma, 3));
        cJSON_AddItemToObject(sg, "fwhm_nm", cJSON_CreateDoubleArray(res.fwhm_sigma, 3));
        cJSON_AddNumberToObject(sg, "illumination_na", res.na_sigma);
        cJSON *ims = cJSON_AddArrayToObject(cal, "images");
        for (size_t i = 0; i < res.images; i++) {
            cJSON *o = cJSON_CreateObject();
            cJSON_AddStringToObject(o, "file", argv[optind + (int)i]);
            cJSON_AddNumberToObject(o, "oxide_nm", res.oxide[i]);
            cJSON_AddNumberToObject(o, "oxide_sigma_nm", res.oxide_sigma[i]);
            cJSON_AddBoolToObject(o, "oxide_known", res.oxide_known[i]);
            cJSON_AddItemToArray(ims, o);
        }
        lam_error_clear(&err);
        if (lam_setup_save(&res.setup, out, cal, &err))
            rc = cli_report(&err, out);
        cJSON_Delete(cal);
        if (!rc && !cli_quiet) {
            static const char *ch[3] = {"R", "G", "B"};
            printf("%zu regions from %zu images; RMS normalised residual %.2f -> %.2f\n", res.samples,
                   res.images, res.rms_before, res.rms_after);
            for (int k = 0; k < 3; k++)
                printf("channel %s: centre %.1f +- %.1f nm, FWHM %.1f +- %.1f nm\n", ch[k], res.centre[k],
                       res.centre_sigma[k], res.fwhm[k], res.fwhm_sigma[k]);
            printf("illumination NA %.3f +- %.3f\n", res.na, res.na_sigma);
            for (size_t i = 0; i < res.images; i++)
                printf("oxide of %s: %.1f +- %.1f nm%s\n", argv[optind + (int)i], res.oxide[i],
                       res.oxide_sigma[i], res.oxide_known[i] ? " (known)" : "");
            printf("wrote %s\n", out);
        }
    }
    lam_calib_set_clear(&set);
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_calibrate = {"calibrate", "fit a setup profile from labelled images",
                                   run_calibrate, calibrate_help};
