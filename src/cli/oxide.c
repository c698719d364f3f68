/* cli/oxide.c - `lamina oxide IMAGE...`: is this chip (or batch) the oxide
 * thickness the vendor claims? A joint profile likelihood over all images. */
#include "cli.h"
#include "setup_opts.h"
#include "lamina/analyze.h"
#include "lamina/outfile.h"
#include "lamina/plot.h"

#include <getopt.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

static void oxide_help(FILE *out)
{
    fputs("Usage: lamina oxide [OPTIONS] IMAGE...\n"
          "Oxide-thickness audit from the flakes' colours: each image is analysed, the\n"
          "chi2 profiles of its confident regions over oxide thickness are summed, and\n"
          "the joint minimum is compared with the nominal value. A second minimum one\n"
          "interference order away (nominal +- 200 nm searched) is reported.\n\n"
          "  --setup FILE          setup profile (nominal oxide, camera, NA)\n"
          "  --oxide NM            nominal SiO2 thickness\n"
          "  --tolerance T         pass/fail: nanometres, or a percentage such as 3%\n"
          "                        (default 10 nm)\n"
          "  --out DIR             oxide.json and oxide.svg go here (default lamina-out)\n"
          "  --reference IMG       a bare-Si image taken with the same lamp, objective and\n"
          "                        exposure: adds the absolute method (substrate colour),\n"
          "                        which needs no flakes\n"
          "  --stability X         relative lamp/exposure repeatability for it (0.01)\n"
          "  --max-layers K, --threads N, --quiet\n\n"
          "Writes the per-image estimates and the combined one with its 1-sigma\n"
          "(model-limited: the model floor dominates large regions).\n",
          out);
}

typedef struct minimum {
    double d, chi2;
} minimum;

/* Parabola through the three points around index i: vertex and curvature. */
static void refine(const double *g, const double *c, size_t n, size_t i, double *d, double *sigma)
{
    if (i == 0 || i + 1 >= n) {
        *d = g[i];
        *sigma = NAN;
        return;
    }
    double h = g[i + 1] - g[i], a = c[i - 1], b = c[i], e = c[i + 1];
    double curv = (a - 2 * b + e) / (h * h);
    *d = curv > 0 ? g[i] + 0.5 * h * (a - e) / (a - 2 * b + e) : g[i];
    *sigma = curv > 0 ? sqrt(2.0 / curv) : NAN;
}

static int run_oxide(int argc, char **argv)
{
    static const struct option longopts[] = {
        CLI_SETUP_LONGOPTS,
        {"tolerance", required_argument, 0, 't'}, {"out", required_argument, 0, 'O'},
        {"max-layers", required_argument, 0, 'K'}, {"threads", required_argument, 0, 'j'},
        {"quiet", no_argument, 0, 'q'},           {"reference", required_argument, 0, 'r'},
        {"stability", required_argument, 0, 'y'}, {0, 0, 0, 0}};
    cli_setup_opts so;
    cli_setup_opts_init(&so);
    const char *out_dir = "lamina-out", *reference = NULL;
    double stability = 0.01;
    double tol_nm = 10, tol_pct = -1;
    long K = 6, threads = 0;
    int c, r;
    optind = 1;
    opterr = 0;
    while ((c = getopt_long(argc, argv, "", longopts, NULL)) != -1) {
        switch (c) {
        case 't': {
            size_t len = strlen(optarg);
            if (len > 1 && optarg[len - 1] == '%') {
                char buf[64];
                snprintf(buf, sizeof buf, "%.*s", (int)(len - 1), optarg);
                if (cli_parse_double("oxide", "--tolerance", buf, 0, 100, &tol_pct)) return CLI_EUSAGE;
            } else if (cli_parse_double("oxide", "--tolerance", optarg, 0, 1000, &tol_nm)) {
                return CLI_EUSAGE;
            }
            break;
        }
        case 'O': out_dir = optarg; break;
        case 'K': if (cli_parse_long("oxide", "--max-layers", optarg, 1, 20, &K)) return CLI_EUSAGE; break;
        case 'j': if (cli_parse_long("oxide", "--threads", optarg, 1, 256, &threads)) return CLI_EUSAGE; break;
        case 'q': cli_quiet = 1; break;
        case 'r': reference = optarg; break;
        case 'y': if (cli_parse_double("oxide", "--stability", optarg, 1e-4, 0.5, &stability)) return CLI_EUSAGE; break;
        default:
            if ((r = cli_setup_option(&so, "oxide", c, optarg)) > 0)
                break;
            if (r < 0)
                return CLI_EUSAGE;
            return cli_usage_error("oxide", "unknown or incomplete option '%s'", argv[optind - 1]);
        }
    }
    if (optind >= argc)
        return cli_usage_error("oxide", "no image given");
    lam_setup s;
    int rc = cli_setup_build("oxide", &so, &s);
    if (rc)
        return rc;
    double nominal = lam_setup_oxide(&s);
    if (nominal <= 0) {
        lam_setup_clear(&s);
        return cli_usage_error("oxide", "the setup has no SiO2 layer: give --oxide NM");
    }
    if (tol_pct >= 0)
        tol_nm = nominal * tol_pct / 100;
    size_t n_img = (size_t)(argc - optind);
    lam_analysis **an = calloc(n_img, sizeof *an);
    const lam_analysis **ok = calloc(n_img, sizeof *ok);
    lam_analysis_options opt = lam_analysis_options_default();
    opt.max_layers = (size_t)K;
    opt.oxide_tolerance_nm = tol_nm;
    if (threads > 0)
        opt.threads = (size_t)threads;
    size_t n_ok = 0;
    /* grid: nominal +- 200 nm: one interference order (lambda/2n ~ 190 nm) each side */
    const double span = 200, step = 1;
    size_t n = (size_t)(2 * span / step) + 1;
    double *grid = malloc(n * sizeof *grid), *joint = malloc(n * sizeof *joint);
    double *per = malloc(n * n_img * sizeof *per);
    if (!an || !ok || !grid || !joint || !per) {
        fprintf(stderr, "lamina: out of memory\n");
        rc = CLI_EFILE;
        goto done;
    }
    for (size_t i = 0; i < n_img; i++) {
        lam_error err;
        lam_error_clear(&err);
        const char *path = argv[optind + (int)i];
        if (lam_analyze(path, &s, &opt, &an[i], &err)) {
            rc = cli_report(&err, path);
            continue;
        }
        ok[n_ok++] = an[i];
    }
    if (!n_ok)
        goto done;
    size_t g0 = 0;
    for (size_t g = 0; g < n; g++)
        grid[g] = nominal - span + step * (double)g;
    while (g0 < n && grid[g0] < 0)
        g0++;
    lam_error err;
    lam_error_clear(&err);
    if (lam_oxide_joint_profile(ok, n_ok, &s, grid + g0, n - g0, joint, per, &err)) {
        rc = cli_report(&err, NULL);
        goto done;
    }
    double *gr = grid + g0;
    size_t m = n - g0;
    /* the global minimum within nominal +- 25 nm decides; other local minima
     * within chi2 + 4 farther than 40 nm away are other interference orders */
    size_t best = 0;
    for (size_t g = 0; g < m; g++)
        if (fabs(gr[g] - nominal) <= 25 && (joint[g] < joint[best] || fabs(gr[best] - nominal) > 25))
            best = g;
    double est, sigma;
    refine(gr, joint, m, best, &est, &sigma);
    minimum alt[8];
    size_t nalt = 0;
    for (size_t g = 1; g + 1 < m && nalt < 8; g++)
        if (joint[g] <= joint[g - 1] && joint[g] <= joint[g + 1] && fabs(gr[g] - est) > 40 &&
            joint[g] <= joint[best] + 4)
            alt[nalt++] = (minimum){gr[g], joint[g]};
    size_t used_regions = 0;
    for (size_t j = 0; j < n_ok; j++)
        for (size_t i = 0; i < ok[j]->count; i++)
            used_regions += (size_t)lam_analysis_region_fits_oxide(ok[j], i);
    int pass = used_regions > 0 && fabs(est - nominal) <= tol_nm;
    /* do the images agree with one thickness? spread of the per-image fits */
    double sum = 0, sum2 = 0;
    size_t nf = 0;
    for (size_t j = 0; j < n_ok; j++)
        if (ok[j]->oxide.fitted) {
            sum += ok[j]->oxide.estimate;
            sum2 += ok[j]->oxide.estimate * ok[j]->oxide.estimate;
            nf++;
        }
    double spread = nf > 1 ? sqrt(fmax(0, (sum2 - sum * sum / (double)nf) / (double)(nf - 1))) : NAN;
    /* absolute method: the substrate's colour against bare Si, 0-1000 nm */
    cJSON *absolute = NULL;
    double abs_est = NAN;
    size_t abs_alt_n = 0;
    double abs_alt[8];
    if (reference) {
        double ref[3];
        lam_load_options lo = lam_load_options_default();
        const size_t na = 1001;
        double *ag = malloc(na * sizeof *ag), *ac = malloc(na * sizeof *ac);
        lam_error_clear(&err);
        if (!ag || !ac) {
            rc = CLI_EFILE;
        } else if (lam_reference_level(reference, &lo, ref, &err)) {
            rc = cli_report(&err, reference);
        } else {
            for (size_t g = 0; g < na; g++)
                ag[g] = (double)g;
            if (lam_oxide_absolute_profile(ok, n_ok, ref, &s, stability, ag, na, ac, &err)) {
                rc = cli_report(&err, NULL);
            } else {
                size_t bi = 0;
                for (size_t g = 0; g < na; g++)
                    if (ac[g] < ac[bi])
                        bi = g;
                /* every local minimum within chi2 + 4 of the best is a candidate order */
                double best_near = INFINITY;
                for (size_t g = 1; g + 1 < na; g++)
                    if (ac[g] <= ac[g - 1] && ac[g] <= ac[g + 1] && ac[g] <= ac[bi] + 4) {
                        if (abs_alt_n < 8)
                            abs_alt[abs_alt_n++] = ag[g];
                        if (fabs(ag[g] - nominal) < fabs(best_near - nominal))
                            best_near = ag[g];
                    }
                double sig;
                size_t gi = isfinite(best_near) ? (size_t)best_near : bi;
                refine(ag, ac, na, gi, &abs_est, &sig);
                absolute = cJSON_CreateObject();
                cJSON_AddStringToObject(absolute, "reference", reference);
                cJSON_AddNumberToObject(absolute, "stability", stability);
                cJSON_AddNumberToObject(absolute, "estimate_nm", abs_est);
                cJSON_AddItemToObject(absolute, "sigma_nm", isfinite(sig) ? cJSON_CreateNumber(sig) : cJSON_CreateNull());
                cJSON_AddNumberToObject(absolute, "chi2_min", ac[gi]);
                cJSON *ca = cJSON_AddArrayToObject(absolute, "candidates_nm");
                for (size_t k = 0; k < abs_alt_n; k++)
                    cJSON_AddItemToArray(ca, cJSON_CreateNumber(abs_alt[k]));
                cJSON_AddStringToObject(absolute, "statement",
                                        abs_alt_n > 1 ? "the substrate colour fits several thicknesses "
                                                        "(interference orders): the one nearest the "
                                                        "nominal value is reported"
                                                      : "one thickness fits the substrate colour");
                cJSON_AddStringToObject(absolute, "note", "bare-Si reference taken as oxide-free "
                                                          "(native oxide of ~1-2 nm neglected)");
            }
        }
        free(ag);
        free(ac);
    }
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "schema", "lamina-oxide/1");
    cJSON_AddNumberToObject(root, "nominal_nm", nominal);
    cJSON_AddNumberToObject(root, "tolerance_nm", tol_nm);
    cJSON *imgs = cJSON_AddArrayToObject(root, "images");
    for (size_t j = 0; j < n_ok; j++) {
        cJSON *o = cJSON_CreateObject();
        const char *b = strrchr(ok[j]->file, '/');
        cJSON_AddStringToObject(o, "file", b ? b + 1 : ok[j]->file);
        cJSON_AddItemToObject(o, "estimate_nm", ok[j]->oxide.fitted ? cJSON_CreateNumber(ok[j]->oxide.estimate) : cJSON_CreateNull());
        cJSON_AddItemToObject(o, "sigma_nm", ok[j]->oxide.fitted && isfinite(ok[j]->oxide.sigma) ? cJSON_CreateNumber(ok[j]->oxide.sigma) : cJSON_CreateNull());
        cJSON_AddNumberToObject(o, "regions_used", (double)ok[j]->oxide.regions_used);
        cJSON_AddItemToArray(imgs, o);
    }
    cJSON *comb = cJSON_AddObjectToObject(root, "combined");
    cJSON_AddItemToObject(comb, "estimate_nm", used_regions ? cJSON_CreateNumber(est) : cJSON_CreateNull());
    cJSON_AddItemToObject(comb, "sigma_nm", used_regions && isfinite(sigma) ? cJSON_CreateNumber(sigma) : cJSON_CreateNull());
    cJSON_AddNumberToObject(comb, "regions_used", (double)used_regions);
    cJSON_AddNumberToObject(comb, "chi2_min", joint[best]);
    cJSON_AddItemToObject(comb, "per_image_spread_nm", isfinite(spread) ? cJSON_CreateNumber(spread) : cJSON_CreateNull());
    cJSON_AddBoolToObject(comb, "images_consistent", !(isfinite(spread) && isfinite(sigma) && spread > 3 * sigma * sqrt((double)nf)));
    cJSON_AddStringToObject(comb, "method", "joint profile likelihood over all images, 1 nm grid, parabolic vertex");
    cJSON_AddItemToObject(root, "pass", used_regions ? cJSON_CreateBool(pass) : cJSON_CreateNull());
    cJSON *orders = cJSON_AddObjectToObject(root, "interference_orders");
    cJSON_AddBoolToObject(orders, "ambiguous", nalt > 0);
    cJSON *al = cJSON_AddArrayToObject(orders, "alternatives_nm");
    for (size_t k = 0; k < nalt; k++)
        cJSON_AddItemToArray(al, cJSON_CreateNumber(alt[k].d));
    cJSON_AddStringToObject(orders, "statement",
                            nalt ? "another thickness one interference order away fits as well: "
                                   "the colours alone cannot tell them apart; the nominal value "
                                   "chose the reported one"
                                 : "no other thickness within nominal +- 200 nm fits as well");
    if (absolute)
        cJSON_AddItemToObject(root, "absolute", absolute);
    cJSON *prof = cJSON_AddArrayToObject(root, "profile");
    for (size_t g = 0; g < m; g++) {
        double pt[2] = {gr[g], joint[g]};
        cJSON_AddItemToArray(prof, cJSON_CreateDoubleArray(pt, 2));
    }
    char *text = cJSON_Print(root);
    cJSON_Delete(root);
    char path[4096];
    if (cli_make_dir(out_dir) == 0 && text) {
        snprintf(path, sizeof path, "%s/oxide.json", out_dir);
        if (lam_outfile_write_buffer(path, text, strlen(text), &err))
            rc = cli_report(&err, path);
        snprintf(path, sizeof path, "%s/oxide.svg", out_dir);
        lam_oxide_plot_image *pi = calloc(n_ok ? n_ok : 1, sizeof *pi);
        for (size_t j = 0; pi && j < n_ok; j++)
            pi[j] = (lam_oxide_plot_image){strrchr(ok[j]->file, '/') ? strrchr(ok[j]->file, '/') + 1 : ok[j]->file,
                                           ok[j]->oxide.estimate, ok[j]->oxide.sigma, ok[j]->oxide.fitted,
                                           ok[j]->oxide.regions_used};
        double alt_nm[8];
        for (size_t k = 0; k < nalt; k++)
            alt_nm[k] = alt[k].d;
        lam_oxide_plot op = {gr, joint, m, nominal, tol_nm, used_regions ? est : NAN, sigma,
                             used_regions ? pass : -1, alt_nm, nalt, abs_est, pi, pi ? n_ok : 0};
        if (lam_plot_oxide(&op, path, &err))
            rc = cli_report(&err, path);
        free(pi);
    } else {
        rc = CLI_EFILE;
    }
    free(text);
    if (!cli_quiet) {
        for (size_t j = 0; j < n_ok; j++)
            if (!ok[j]->oxide.fitted)
                printf("  %-38s no usable region (not in the fit)\n", ok[j]->file);
        for (size_t j = 0; j < n_ok; j++)
            if (ok[j]->oxide.fitted)
                printf("  %-38s %.1f +- %.1f nm (%zu regions)\n", ok[j]->file, ok[j]->oxide.estimate,
                       ok[j]->oxide.sigma, ok[j]->oxide.regions_used);
        if (used_regions)
            printf("combined: %.1f +- %.1f nm from %zu regions; nominal %.1f nm, tolerance %.1f nm: %s\n",
                   est, sigma, used_regions, nominal, tol_nm, pass ? "PASS" : "FAIL");
        else
            printf("combined: no region usable for an oxide fit\n");
        if (isfinite(spread) && isfinite(sigma) && spread > 3 * sigma * sqrt((double)nf))
            printf("note: the images disagree (spread %.1f nm): the oxide varies across the batch\n",
                   spread);
        if (reference && isfinite(abs_est))
            printf("absolute (substrate colour vs %s): %.1f nm%s\n", reference, abs_est,
                   abs_alt_n > 1 ? " (other interference orders fit as well)" : "");
        if (nalt)
            printf("note: %zu other thickness(es) one interference order away fit as well (e.g. %.0f nm)\n",
                   nalt, alt[0].d);
    }
done:
    for (size_t i = 0; an && i < n_img; i++)
        lam_analysis_free(an[i]);
    free(an);
    free(ok);
    free(grid);
    free(joint);
    free(per);
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_oxide = {"oxide", "oxide-thickness audit for a chip or batch", run_oxide,
                               oxide_help};
