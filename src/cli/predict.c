/* cli/predict.c - `lamina predict`: the contrast ladder of N = A..B layers. */
#include "cli.h"
#include "lamina/model.h"
#include "lamina/summary.h"

#include <stdlib.h>
#include <string.h>

static int parse_layers(const char *command, const char *arg, void *target)
{
    long *r = target;
    char a[32], b[32];
    const char *dash = strchr(arg, '-');
    if (!dash || dash - arg >= 31 || strlen(dash + 1) >= 31)
        return cli_usage_error(command, "--layers: expected A-B, e.g. 1-5"), -1;
    snprintf(a, sizeof a, "%.*s", (int)(dash - arg), arg);
    snprintf(b, sizeof b, "%s", dash + 1);
    if (cli_parse_long(command, "--layers", a, 1, LAM_MODEL_MAX_LAYERS, &r[0]) ||
        cli_parse_long(command, "--layers", b, r[0], LAM_MODEL_MAX_LAYERS, &r[1]))
        return -1;
    return 0;
}

static int parse_format(const char *command, const char *arg, void *target)
{
    if (strcmp(arg, "table") && strcmp(arg, "csv") && strcmp(arg, "json"))
        return cli_usage_error(command, "--format: expected table, csv or json"), -1;
    *(const char **)target = arg;
    return 0;
}

static struct {
    lam_setup_overrides so;
    double mono;
    long range[2]; /* --layers A-B */
    const char *format;
} A = {.range = {1, 5}, .format = "table"};

static const cli_option predict_options[] = {
    {"wavelength", 0, CLI_NUMBER, &A.mono, 300, 1000, NULL, "NM",
     "one monochromatic channel instead of the camera"},
    {"layers", 0, CLI_CALL, A.range, 0, 0, parse_layers, "A-B", "layer range (default 1-5)"},
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
    lam_error err;
    lam_error_clear(&err);
    char *text = NULL;
    if (lam_summary_predict(&s, (size_t)A.range[0], (size_t)A.range[1], A.mono, A.format, &text,
                            &err))
        rc = cli_report(&err, NULL);
    else
        fputs(text, stdout);
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
             "for N-layer graphene on the setup's substrate.\n\n",
    .options = predict_options, .setup = &A.so};
