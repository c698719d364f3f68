/* cli/predict.c - `lamina predict`: the contrast ladder of N = A..B layers. */
#include "cli.h"
#include "options.h"
#include "lamina/model.h"
#include "lamina/summary.h"

#include <stdlib.h>
#include <string.h>


typedef struct predict_args {
    double mono;
    long range[2]; /* --layers A-B */
    const char *format;
} predict_args;

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

#define PREDICT_OPTIONS(A)                                                                      \
    {                                                                                           \
        {"wavelength", 0, CLI_NUMBER, &(A)->mono, 300, 1000, NULL, "NM",                        \
         "one monochromatic channel instead of the camera"},                                    \
        {"layers", 0, CLI_CALL, (A)->range, 0, 0, parse_layers, "A-B",                          \
         "layer range (default 1-5)"},                                                          \
        {"format", 0, CLI_CALL, &(A)->format, 0, 0, parse_format, "F",                          \
         "table (default), csv or json"},                                                       \
        {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, NULL},                             \
        CLI_END                                                                                 \
    }

static void predict_help(FILE *out)
{
    predict_args A;
    cli_option t[] = PREDICT_OPTIONS(&A);
    fputs("Usage: lamina predict [OPTIONS]\n"
          "Predicted contrast C = (substrate - flake) / substrate per camera channel\n"
          "for N-layer graphene on the setup's substrate.\n\n" CLI_SETUP_HELP, out);
    cli_options_help(out, t);
}

static int run_predict(int argc, char **argv)
{
    predict_args A = {0, {1, 5}, "table"};
    lam_setup_overrides so;
    lam_setup_overrides_init(&so);
    cli_option t[] = PREDICT_OPTIONS(&A);
    cli_command_options co = {.command = "predict", .own = t, .setup = &so};
    if (cli_options_parse(&co, argc, argv, 1))
        return CLI_EUSAGE;
    double mono = A.mono;
    long lo = A.range[0], hi = A.range[1];
    const char *format = A.format;
    lam_setup s;
    int rc = cli_setup_build("predict", &so, &s);
    if (rc)
        return rc;
    lam_error err;
    lam_error_clear(&err);
    lam_model *m = NULL;
    lam_prediction *p = malloc(sizeof *p);
    double ox = lam_setup_oxide(&s);
    if (!p || lam_model_alloc(&s, (size_t)hi, mono, &m, &err) ||
        lam_model_eval(m, ox < 0 ? 0 : ox, s.sheet.fermi_ev, p, &err)) {
        if (!p)
            lam_error_set(&err, LAM_ENOMEM, "out of memory");
        rc = cli_report(&err, so.setup_file);
        goto done;
    }
    char *text = NULL;
    if (lam_summary_prediction(p, (size_t)lo, (size_t)hi, mono, &s, format, &text, &err))
        rc = cli_report(&err, NULL);
    else
        fputs(text, stdout);
    free(text);
    if (fflush(stdout) || ferror(stdout)) {
        fprintf(stderr, "lamina: cannot write the output\n");
        rc = CLI_EFILE;
    }
done:
    free(p);
    lam_model_free(m);
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_predict = {"predict", "predicted contrast per channel for N layers",
                                 run_predict, predict_help};
