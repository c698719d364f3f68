/* cli/oxide.c - `lamina oxide IMAGE...`: is this chip (or batch) the oxide
 * thickness the vendor claims? Parses the options, audits the images
 * (lam_oxide_audit_files) and prints the audit of lamina/oxide.h. */
#include "cli.h"
#include "lamina/analyze.h"
#include "lamina/oxide.h"
#include "lamina/summary.h"

#include <stdlib.h>
#include <string.h>

static struct {
    lam_setup_overrides so;
    const char *out_dir;
    lam_analysis_options opt;
    lam_oxide_audit_options ao;
    double tol_pct;
} A = {.out_dir = "lamina-out", .tol_pct = -1};

/* nanometres, or a percentage of the nominal value ("3%") */
static int parse_tolerance(const char *command, const char *arg, void *target)
{
    (void)target;
    size_t len = strlen(arg);
    if (len > 1 && arg[len - 1] == '%') {
        char buf[64];
        snprintf(buf, sizeof buf, "%.*s", (int)(len - 1), arg);
        return cli_parse_double(command, "--tolerance", buf, 0, 100, &A.tol_pct);
    }
    return cli_parse_double(command, "--tolerance", arg, 0, 1000, &A.ao.tolerance_nm);
}

static const cli_option oxide_options[] = {
    {"tolerance", 0, CLI_CALL, NULL, 0, 0, parse_tolerance, "T",
     "nanometres, or a percentage such as 3% (default 10 nm)"},
    {"out", 0, CLI_TEXT, &A.out_dir, 0, 0, NULL, "DIR",
     "oxide.json and oxide.svg go here (default lamina-out)"},
    {"reference", 0, CLI_TEXT, &A.ao.reference, 0, 0, NULL, "IMG",
     "a bare-Si image taken with the same lamp, objective and\nexposure: adds the absolute "
     "method (substrate colour),\nwhich needs no flakes"},
    {"stability", 0, CLI_NUMBER, &A.ao.stability, 1e-4, 0.5, NULL, "X",
     "relative lamp/exposure repeatability for it (0.01)"},
    {"max-layers", 0, CLI_SIZE, &A.opt.max_layers, 1, 20, NULL, "K", "layer counts modelled (6)"},
    {"threads", 0, CLI_SIZE, &A.opt.threads, 1, 256, NULL, "N", "worker threads"},
    {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, "no printed summary"},
    CLI_END};

/* An image that could not be analysed: reported, the exit code kept. */
static void on_failed(const char *path, const lam_error *err, void *user)
{
    *(int *)user = cli_report(err, path);
}

/* Audit the images, write oxide.json and the plot, print the summary. */
static int audit_images(const lam_setup *s, char **paths, size_t n)
{
    A.ao.nominal_nm = lam_setup_oxide(s);
    if (A.ao.nominal_nm <= 0)
        return cli_usage_error("oxide", "the setup has no SiO2 layer: give --oxide NM");
    if (A.tol_pct >= 0)
        A.ao.tolerance_nm = A.ao.nominal_nm * A.tol_pct / 100;
    A.opt.oxide_tolerance_nm = A.ao.tolerance_nm;
    lam_oxide_audit audit;
    size_t n_ok = 0;
    char *text = NULL;
    lam_error err;
    lam_error_clear(&err);
    int rc = CLI_OK;
    if (lam_oxide_audit_files((const char *const *)paths, n, s, &A.opt, &A.ao, on_failed, &rc,
                              &audit, &n_ok, &err))
        return cli_report(&err, NULL);
    if (n_ok && lam_oxide_audit_write(&audit, A.out_dir, &err))
        rc = cli_report(&err, A.out_dir);
    if (n_ok && !cli_quiet && !lam_summary_oxide(&audit, &text, &err))
        fputs(text, stdout);
    free(text);
    lam_oxide_audit_clear(&audit);
    return rc;
}

static int run_oxide(int argc, char **argv)
{
    A.opt = lam_analysis_options_default();
    A.ao = lam_oxide_audit_options_default();
    lam_setup s;
    int rc;
    if (cli_options_parse(&cli_oxide, argc, argv))
        return CLI_EUSAGE;
    if ((rc = cli_setup_build("oxide", &A.so, &s)))
        return rc;
    rc = audit_images(&s, argv + optind, (size_t)(argc - optind));
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_oxide = {
    .name = "oxide", .summary = "oxide-thickness audit for a chip or batch", .run = run_oxide,
    .usage = "Usage: lamina oxide [OPTIONS] IMAGE...\n"
             "Oxide-thickness audit from the flakes' colours: each image is analysed, the\n"
             "images' own estimates (whose sigmas include the shared uncertainty of the\n"
             "graphene response, NA and camera) are combined by generalised least squares,\n"
             "and the 95 % interval is judged against nominal +- tolerance: pass, fail or\n"
             "undecided (with what would decide it). A chi2 test says whether the images\n"
             "agree with one thickness; a profile over nominal +- 200 nm finds other\n"
             "interference orders.\n\n",
    .options = oxide_options, .setup = &A.so, .min_args = 1, .max_args = -1,
    .args_error = "no image given"};
