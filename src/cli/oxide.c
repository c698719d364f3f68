/* cli/oxide.c - `lamina oxide IMAGE...`: is this chip (or batch) the oxide
 * thickness the vendor claims? Parses the options, analyses the images and
 * prints the audit of lamina/oxide.h. */
#include "cli.h"
#include "setup_opts.h"
#include "lamina/analyze.h"
#include "lamina/oxide.h"
#include "lamina/summary.h"

#include <getopt.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

static void oxide_help(FILE *out)
{
    fputs("Usage: lamina oxide [OPTIONS] IMAGE...\n"
          "Oxide-thickness audit from the flakes' colours: each image is analysed, the\n"
          "images' own estimates (whose sigmas include the shared uncertainty of the\n"
          "graphene response, NA and camera) are combined by generalised least squares,\n"
          "and the 95 % interval is judged against nominal +- tolerance: pass, fail or\n"
          "undecided (with what would decide it). A chi2 test says whether the images\n"
          "agree with one thickness; a profile over nominal +- 200 nm finds other\n"
          "interference orders.\n\n"
          "  --setup FILE          setup profile (nominal oxide, camera, NA)\n"
          "  --oxide NM            nominal SiO2 thickness\n"
          "  --tolerance T         nanometres, or a percentage such as 3% (default 10 nm)\n"
          "  --out DIR             oxide.json and oxide.svg go here (default lamina-out)\n"
          "  --reference IMG       a bare-Si image taken with the same lamp, objective and\n"
          "                        exposure: adds the absolute method (substrate colour),\n"
          "                        which needs no flakes\n"
          "  --stability X         relative lamp/exposure repeatability for it (0.01)\n"
          "  --max-layers K, --threads N, --quiet\n",
          out);
}

typedef struct oxide_args {
    cli_setup_opts so;
    const char *out_dir;
    lam_oxide_audit_options ao;
    double tol_pct;
    long K, threads;
} oxide_args;

static int parse_tolerance(oxide_args *A, const char *arg)
{
    size_t len = strlen(arg);
    if (len > 1 && arg[len - 1] == '%') {
        char buf[64];
        snprintf(buf, sizeof buf, "%.*s", (int)(len - 1), arg);
        return cli_parse_double("oxide", "--tolerance", buf, 0, 100, &A->tol_pct);
    }
    return cli_parse_double("oxide", "--tolerance", arg, 0, 1000, &A->ao.tolerance_nm);
}

static int parse_oxide_options(int argc, char **argv, oxide_args *A)
{
    static const struct option longopts[] = {
        CLI_SETUP_LONGOPTS,
        {"tolerance", required_argument, 0, 't'}, {"out", required_argument, 0, 'O'},
        {"max-layers", required_argument, 0, 'K'}, {"threads", required_argument, 0, 'j'},
        {"quiet", no_argument, 0, 'q'},           {"reference", required_argument, 0, 'r'},
        {"stability", required_argument, 0, 'y'}, {0, 0, 0, 0}};
    int c, r;
    optind = 1;
    opterr = 0;
    while ((c = getopt_long(argc, argv, "", longopts, NULL)) != -1) {
        r = 0;
        switch (c) {
        case 't': r = parse_tolerance(A, optarg); break;
        case 'O': A->out_dir = optarg; break;
        case 'K': r = cli_parse_long("oxide", "--max-layers", optarg, 1, 20, &A->K); break;
        case 'j': r = cli_parse_long("oxide", "--threads", optarg, 1, 256, &A->threads); break;
        case 'q': cli_quiet = 1; break;
        case 'r': A->ao.reference = optarg; break;
        case 'y':
            r = cli_parse_double("oxide", "--stability", optarg, 1e-4, 0.5, &A->ao.stability);
            break;
        default:
            r = cli_setup_option(&A->so, "oxide", c, optarg);
            if (r == 0)
                return cli_usage_error("oxide", "unknown or incomplete option '%s'",
                                       argv[optind - 1]);
            r = r < 0 ? -1 : 0;
        }
        if (r)
            return CLI_EUSAGE;
    }
    if (optind >= argc)
        return cli_usage_error("oxide", "no image given");
    return CLI_OK;
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
    cli_setup_opts_init(&A.so);
    int rc = parse_oxide_options(argc, argv, &A);
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
