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
    size_t K, threads;
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
        {"max-layers", 0, CLI_SIZE, &(A)->K, 1, 20, NULL, "K", "layer counts modelled (6)"},    \
        {"threads", 0, CLI_SIZE, &(A)->threads, 1, 256, NULL, "N", "worker threads"},           \
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

/* An image that could not be analysed: reported, the exit code kept. */
static void on_failed(const char *path, const lam_error *err, void *user)
{
    *(int *)user = cli_report(err, path);
}

/* The options of the analyses and of the audit, from the setup; an exit code. */
static int prepare(oxide_args *A, const lam_setup *s, lam_analysis_options *opt)
{
    A->ao.nominal_nm = lam_setup_oxide(s);
    if (A->ao.nominal_nm <= 0)
        return cli_usage_error("oxide", "the setup has no SiO2 layer: give --oxide NM");
    if (A->tol_pct >= 0)
        A->ao.tolerance_nm = A->ao.nominal_nm * A->tol_pct / 100;
    *opt = lam_analysis_options_default();
    opt->max_layers = A->K;
    opt->oxide_tolerance_nm = A->ao.tolerance_nm;
    if (A->threads > 0)
        opt->threads = A->threads;
    return CLI_OK;
}

/* Audit the images, write oxide.json and the plot, print the summary. */
static int audit_images(oxide_args *A, const lam_setup *s, char **paths, size_t n)
{
    lam_analysis_options opt;
    lam_oxide_audit audit;
    size_t n_ok = 0;
    char *text = NULL;
    lam_error err;
    lam_error_clear(&err);
    int rc = prepare(A, s, &opt);
    if (rc)
        return rc;
    if (lam_oxide_audit_files((const char *const *)paths, n, s, &opt, &A->ao, on_failed, &rc,
                              &audit, &n_ok, &err))
        return cli_report(&err, NULL);
    if (n_ok && cli_make_dir(A->out_dir))
        rc = CLI_EFILE;
    else if (n_ok && lam_oxide_audit_write(&audit, A->out_dir, &err))
        rc = cli_report(&err, A->out_dir);
    if (n_ok && !cli_quiet && !lam_summary_oxide(&audit, &text, &err))
        fputs(text, stdout);
    free(text);
    lam_oxide_audit_clear(&audit);
    return rc;
}

static int run_oxide(int argc, char **argv)
{
    oxide_args A = {.out_dir = "lamina-out", .ao = lam_oxide_audit_options_default(),
                    .tol_pct = -1, .K = 6};
    lam_setup_overrides_init(&A.so);
    cli_option t[] = OXIDE_OPTIONS(&A);
    cli_command_options co = {.command = "oxide", .own = t, .setup = &A.so, .min_args = 1,
                              .max_args = -1, .args_error = "no image given"};
    int rc = cli_options_parse(&co, argc, argv, 1);
    lam_setup s;
    if (rc || (rc = cli_setup_build("oxide", &A.so, &s)))
        return rc;
    rc = audit_images(&A, &s, argv + optind, (size_t)(argc - optind));
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_oxide = {"oxide", "oxide-thickness audit for a chip or batch", run_oxide,
                               oxide_help};
