/* cli/predict.c - `lamina predict`: the contrast ladder of N = A..B layers. */
#include "cli.h"
#include "lamina/model.h"
#include "lamina/summary.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static int parse_layers(const char *command, const char *arg, void *target)
{
    double *r = target;
    lam_error err;
    if (lam_parse_range(&err, "--layers", arg, 1, LAM_MODEL_MAX_LAYERS, r))
        return cli_usage_error(command, "%s", err.message), -1;
    if (r[0] != floor(r[0]) || r[1] != floor(r[1]))
        return cli_usage_error(command, "--layers: expected whole numbers A-B, e.g. 1-5"), -1;
    return 0;
}

static int parse_format(const char *command, const char *arg, void *target)
{
    if (strcmp(arg, "table") && strcmp(arg, "csv") && strcmp(arg, "json"))
        return cli_usage_error(command, "--format: expected table, csv or json"), -1;
    *(const char **)target = arg;
    return 0;
}

/* --thickness: film thicknesses, nm */
typedef struct thicknesses {
    size_t count;
    double nm[LAM_MODEL_MAX_LAYERS];
} thicknesses;

static int parse_thickness(const char *command, const char *arg, void *target)
{
    thicknesses *th = target;
    lam_error err;
    if (lam_parse_numbers(&err, "--thickness", arg, ',', 0.1, 2000, th->nm, LAM_MODEL_MAX_LAYERS,
                          &th->count))
        return cli_usage_error(command, "%s", err.message), -1;
    return 0;
}

static struct {
    lam_setup_overrides so;
    double mono;
    double range[2]; /* --layers A-B */
    const char *format;
    thicknesses th; /* --thickness T1,T2,... */
} A = {.range = {1, 5}, .format = "table"};

static const cli_option predict_options[] = {
    {"wavelength", 0, CLI_NUMBER, &A.mono, 300, 1000, NULL, "NM",
     "one monochromatic channel instead of the camera"},
    {"layers", 0, CLI_CALL, A.range, 0, 0, parse_layers, "A-B", "layer range (default 1-5)"},
    {"thickness", 0, CLI_CALL, &A.th, 0, 0, parse_thickness, "T1,T2",
     "film thicknesses in nm (a continuous crystal: --material hBN)"},
    {"format", 0, CLI_CALL, &A.format, 0, 0, parse_format, "F", "table (default), csv or json"},
    {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, NULL},
    CLI_END};

static int run_predict(int argc, char **argv)
{
    if (cli_options_parse(&cli_predict, argc, argv))
        return CLI_EUSAGE;
    lam_setup s;
    int rc = cli_setup_build("predict", &A.so, &s);
    if (rc)
        return rc;
    const double *th = A.th.count ? A.th.nm : NULL; /* another material: LAM_EINVAL, exit 2 */
    lam_error err;
    lam_error_clear(&err);
    char *text = NULL;
    int near_ar = 0;
    if (lam_summary_predict(&s, (size_t)A.range[0], (size_t)A.range[1], A.mono, th, A.th.count,
                            A.format, &text, &near_ar, &err))
        rc = cli_report(&err, NULL);
    else {
        if (near_ar)
            fprintf(stderr, "lamina: warning: %s\n", LAM_SUMMARY_NEAR_AR);
        fputs(text, stdout);
    }
    free(text);
    if (fflush(stdout) || ferror(stdout)) {
        fprintf(stderr, "lamina: cannot write the output\n");
        rc = CLI_EFILE;
    }
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_predict = {
    .name = "predict", .summary = "predicted contrast per channel for N layers",
    .run = run_predict,
    .usage = "Usage: lamina predict [OPTIONS]\n"
             "Predicted contrast C = (substrate - flake) / substrate per camera channel\n"
             "for N-layer flakes (graphene, MoS2, WS2, WSe2, hBN: --material) on the\n"
             "setup's substrate, or for hBN films of given thicknesses.\n\n",
    .options = predict_options, .setup = &A.so};
