/* cli/predict.c - `lamina predict`: the contrast ladder of N = A..B layers. */
#include "cli.h"
#include "options.h"
#include "setup_opts.h"
#include "lamina/model.h"
#include "lamina/summary.h"

#include <stdlib.h>
#include <string.h>


/* --thickness: film thicknesses, nm */
typedef struct thicknesses {
    size_t count;
    double nm[LAM_MODEL_MAX_LAYERS];
} thicknesses;

typedef struct predict_args {
    double mono;
    long range[2]; /* --layers A-B */
    const char *format;
    thicknesses th; /* --thickness T1,T2,... */
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

static int parse_thickness(const char *command, const char *arg, void *target)
{
    thicknesses *th = target;
    char buf[1024];
    snprintf(buf, sizeof buf, "%s", arg);
    th->count = 0;
    for (char *save = NULL, *t = strtok_r(buf, ",", &save); t; t = strtok_r(NULL, ",", &save)) {
        if (th->count == LAM_MODEL_MAX_LAYERS)
            return cli_usage_error(command, "--thickness: at most %d values",
                                   LAM_MODEL_MAX_LAYERS), -1;
        if (cli_parse_double(command, "--thickness", t, 0.1, 2000, &th->nm[th->count++]))
            return -1;
    }
    return th->count ? 0 : (cli_usage_error(command, "--thickness: expected T1,T2,... in nm"), -1);
}

#define PREDICT_OPTIONS(A)                                                                      \
    {                                                                                           \
        {"wavelength", 0, CLI_NUMBER, &(A)->mono, 300, 1000, NULL, "NM",                        \
         "one monochromatic channel instead of the camera"},                                    \
        {"layers", 0, CLI_CALL, (A)->range, 0, 0, parse_layers, "A-B",                          \
         "layer range (default 1-5)"},                                                          \
        {"thickness", 0, CLI_CALL, &(A)->th, 0, 0, parse_thickness, "T1,T2",                    \
         "film thicknesses in nm (a continuous crystal: --material hBN)"},                      \
        {"format", 0, CLI_CALL, &(A)->format, 0, 0, parse_format, "F",                          \
         "table (default), csv or json"},                                                       \
        {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, NULL},                             \
        {NULL, 0, 0, NULL, 0, 0, NULL, NULL, NULL}                                              \
    }

static void predict_help(FILE *out)
{
    predict_args A;
    cli_option t[] = PREDICT_OPTIONS(&A);
    fputs("Usage: lamina predict [OPTIONS]\n"
          "Predicted contrast C = (substrate - flake) / substrate per camera channel\n"
          "for N-layer flakes (graphene, MoS2, WS2, WSe2, hBN: --material) on the\n"
          "setup's substrate, or for hBN films of given thicknesses.\n\n" CLI_SETUP_HELP, out);
    cli_options_help(out, t);
}

/* The ladder, or with --thickness the films (rows 1..count). */
static lam_status predict_rows(const lam_setup *s, double mono, size_t hi, const thicknesses *th,
                               lam_prediction *p, lam_error *err)
{
    lam_model *m = NULL;
    double ox = lam_setup_oxide(s);
    lam_status st = lam_model_alloc(s, th ? 1 : hi, mono, &m, err);
    if (!st)
        st = lam_model_eval(m, ox < 0 ? 0 : ox, s->sheet.fermi_ev, p, err);
    if (!st && th) {
        lam_model_point pt = lam_model_point_default(m);
        pt.v[LAM_MP_OXIDE] = ox < 0 ? 0 : ox;
        double (*c)[LAM_MAX_CHANNELS] = (double (*)[LAM_MAX_CHANNELS])p->contrast[1];
        st = lam_model_eval_films(m, &pt, 1.0, th->nm, th->count, c, err);
        p->max_layers = th->count;
        for (size_t j = 1; !st && j <= th->count; j++)
            for (size_t k = 0; k < p->channels; k++)
                p->reflectance[j][k] = p->substrate[k] * (1 - p->contrast[j][k]);
    }
    lam_model_free(m);
    return st;
}

static int run_predict(int argc, char **argv)
{
    predict_args A = {0, {1, 5}, "table", {0, {0}}};
    cli_setup_opts so;
    cli_setup_opts_init(&so);
    cli_option t[] = PREDICT_OPTIONS(&A);
    cli_command_options co = {"predict", t, &so, NULL, NULL};
    if (cli_options_parse(&co, argc, argv, 1))
        return CLI_EUSAGE;
    if (optind < argc)
        return cli_usage_error("predict", "unexpected argument '%s'", argv[optind]);
    double mono = A.mono;
    long lo = A.range[0], hi = A.range[1];
    const char *format = A.format;
    lam_setup s;
    int rc = cli_setup_build("predict", &so, &s);
    if (rc)
        return rc;
    const thicknesses *th = A.th.count ? &A.th : NULL;
    if (th && lam_setup_crystal_kind(&s) != LAM_CRYSTAL_CONTINUOUS) {
        rc = cli_usage_error("predict", "--thickness needs a crystal of continuous thickness "
                                        "(--material hBN), not %s", s.flake);
        lam_setup_clear(&s);
        return rc;
    }
    if (th)
        lo = 1, hi = (long)th->count;
    lam_error err;
    lam_error_clear(&err);
    lam_prediction *p = malloc(sizeof *p);
    if (!p || predict_rows(&s, mono, (size_t)hi, th, p, &err)) {
        if (!p)
            lam_error_set(&err, LAM_ENOMEM, "out of memory");
        rc = cli_report(&err, so.setup_file);
        goto done;
    }
    if (lam_summary_prediction_near_ar(p))
        fprintf(stderr, "lamina: warning: the substrate is nearly anti-reflecting (R < 0.03 in a "
                        "channel): relative contrast is ill-conditioned; dR = R_sub - R_flake and "
                        "the shot-noise SNR per pixel (10000 e- full well at bare Si) are given\n");
    char *text = NULL;
    lam_status st = th ? lam_summary_prediction_films(p, th->nm, th->count, mono, &s, format,
                                                      &text, &err)
                       : lam_summary_prediction(p, (size_t)lo, (size_t)hi, mono, &s, format,
                                                &text, &err);
    if (st)
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
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_predict = {"predict", "predicted contrast per channel for N layers",
                                 run_predict, predict_help};
