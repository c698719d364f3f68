/* cli/oxide.c - `lamina oxide IMAGE...`: is this chip (or batch) the oxide
 * thickness the vendor claims? Parses the options, analyses the images and
 * prints the audit of lamina/oxide.h. */
#include "cli.h"
#include "options.h"
#include "lamina/analyze.h"
#include "lamina/oxide.h"
#include "lamina/summary.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

typedef struct oxide_args {
    lam_setup_overrides so;
    const char *out_dir;
    lam_oxide_audit_options ao;
    double tol_pct;
    long K, threads;
} oxide_args;

/* nanometres, or a percentage of the nominal value ("3%") */
static int parse_tolerance(const char *command, const char *arg, void *target)
{
    oxide_args *A = target;
    size_t len = strlen(arg);
    if (len > 1 && arg[len - 1] == '%') {
        char buf[64];
        snprintf(buf, sizeof buf, "%.*s", (int)(len - 1), arg);
        return cli_parse_double(command, "--tolerance", buf, 0, 100, &A->tol_pct);
    }
    return cli_parse_double(command, "--tolerance", arg, 0, 1000, &A->ao.tolerance_nm);
}

#define OXIDE_OPTIONS(A)                                                                        \
    {                                                                                           \
        {"tolerance", 0, CLI_CALL, (A), 0, 0, parse_tolerance, "T",                             \
         "nanometres, or a percentage such as 3% (default 10 nm)"},                             \
        {"out", 0, CLI_TEXT, &(A)->out_dir, 0, 0, NULL, "DIR",                                  \
         "oxide.json and oxide.svg go here (default lamina-out)"},                              \
        {"reference", 0, CLI_TEXT, &(A)->ao.reference, 0, 0, NULL, "IMG",                       \
         "a bare-Si image taken with the same lamp, objective and\nexposure: adds the "        \
         "absolute method (substrate colour),\nwhich needs no flakes"},                         \
        {"stability", 0, CLI_NUMBER, &(A)->ao.stability, 1e-4, 0.5, NULL, "X",                  \
         "relative lamp/exposure repeatability for it (0.01)"},                                 \
        {"max-layers", 0, CLI_INTEGER, &(A)->K, 1, 20, NULL, "K", "layer counts modelled (6)"}, \
        {"threads", 0, CLI_INTEGER, &(A)->threads, 1, 256, NULL, "N", "worker threads"},        \
        {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, "no printed summary"},             \
        CLI_END                                                                                 \
    }

static void oxide_help(FILE *out)
{
    oxide_args A;
    cli_option t[] = OXIDE_OPTIONS(&A);
    fputs("Usage: lamina oxide [OPTIONS] IMAGE...\n"
          "Oxide-thickness audit from the flakes' colours: each image is analysed, the\n"
          "images' own estimates (whose sigmas include the shared uncertainty of the\n"
          "graphene response, NA and camera) are combined by generalised least squares,\n"
          "and the 95 % interval is judged against nominal +- tolerance: pass, fail or\n"
          "undecided (with what would decide it). A chi2 test says whether the images\n"
          "agree with one thickness; a profile over nominal +- 200 nm finds other\n"
          "interference orders.\n\n" CLI_SETUP_HELP, out);
    cli_options_help(out, t);
}

/* Analyse every image; the ones that fail are reported and left out. */
static int analyse_all(char **paths, size_t n, const lam_setup *s,
                       const lam_analysis_options *opt, lam_analysis **an, size_t *n_ok)
{
    int rc = CLI_OK;
    *n_ok = 0;
    for (size_t i = 0; i < n; i++) {
        lam_error err;
        lam_error_clear(&err);
        lam_analysis *a = NULL;
        if (lam_analyze(paths[i], s, opt, &a, &err))
            rc = cli_report(&err, paths[i]);
        else
            an[(*n_ok)++] = a;
    }
    return rc;
}

static int run_oxide(int argc, char **argv)
{
    oxide_args A = {.out_dir = "lamina-out", .ao = lam_oxide_audit_options_default(),
                    .tol_pct = -1, .K = 6, .threads = 0};
    lam_setup_overrides_init(&A.so);
    cli_option t[] = OXIDE_OPTIONS(&A);
    cli_command_options co = {.command = "oxide", .own = t, .setup = &A.so, .min_args = 1,
                              .max_args = -1, .args_error = "no image given"};
    int rc = cli_options_parse(&co, argc, argv, 1);
    lam_setup s;
    if (rc || (rc = cli_setup_build("oxide", &A.so, &s)))
        return rc;
    A.ao.nominal_nm = lam_setup_oxide(&s);
    if (A.ao.nominal_nm <= 0) {
        lam_setup_clear(&s);
        return cli_usage_error("oxide", "the setup has no SiO2 layer: give --oxide NM");
    }
    if (A.tol_pct >= 0)
        A.ao.tolerance_nm = A.ao.nominal_nm * A.tol_pct / 100;
    lam_analysis_options opt = lam_analysis_options_default();
    opt.max_layers = (size_t)A.K;
    opt.oxide_tolerance_nm = A.ao.tolerance_nm;
    if (A.threads > 0)
        opt.threads = (size_t)A.threads;
    size_t n_img = (size_t)(argc - optind), n_ok = 0;
    lam_analysis **an = calloc(n_img, sizeof *an);
    if (!an) {
        lam_setup_clear(&s);
        fprintf(stderr, "lamina: out of memory\n");
        return CLI_EFILE;
    }
    rc = analyse_all(argv + optind, n_img, &s, &opt, an, &n_ok);
    lam_oxide_audit audit;
    lam_error err;
    lam_error_clear(&err);
    if (n_ok && lam_oxide_audit_run((const lam_analysis *const *)an, n_ok, &s, &A.ao, &audit,
                                    &err)) {
        rc = cli_report(&err, A.ao.reference);
    } else if (n_ok) {
        if (cli_make_dir(A.out_dir))
            rc = CLI_EFILE;
        else if (lam_oxide_audit_write(&audit, A.out_dir, &err))
            rc = cli_report(&err, A.out_dir);
        char *text = NULL;
        if (!cli_quiet && !lam_summary_oxide(&audit, &text, &err))
            fputs(text, stdout);
        free(text);
        lam_oxide_audit_clear(&audit);
    }
    for (size_t i = 0; i < n_ok; i++)
        lam_analysis_free(an[i]);
    free(an);
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_oxide = {"oxide", "oxide-thickness audit for a chip or batch", run_oxide,
                               oxide_help};
