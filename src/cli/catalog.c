/* cli/catalog.c - `lamina catalog merge DIR...`: one catalogue and run
 * report from the results of several runs (shards of a scan, or separate
 * sessions). */
#include "cli.h"
#include "run_opts.h"
#include "lamina/catalog.h"

#include <getopt.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

static void catalog_help(FILE *out)
{
    fputs("Usage: lamina catalog merge [--positions FILE.csv] [--out DIR] DIR...\n"
          "Read every STEM.json (lamina-analysis/1) in the given result folders and\n"
          "write one catalog.json, catalog.csv (schema: docs/catalog.md), goto.csv\n"
          "(with positions), crops/, contact-sheet.png and report.html into --out\n"
          "(default lamina-out): candidates first, duplicates across overlapping tiles\n"
          "merged when positions are given.\n\n"
          "  --positions FILE.csv  file,x_um,y_um[,rotation_deg] (or x_mm,y_mm)\n"
          "  --target-thickness A-B  rank hBN regions by closeness to A-B nm (e.g. 10-30)\n"
          CLI_STAGE_HELP
          "  --quiet\n",
          out);
}

static int run_catalog(int argc, char **argv)
{
    if (argc < 2 || strcmp(argv[1], "merge"))
        return cli_usage_error("catalog", "expected 'lamina catalog merge DIR...'");
    static const struct option longopts[] = {{"out", required_argument, 0, 'O'},
                                             {"positions", required_argument, 0, 'P'},
                                             {"quiet", no_argument, 0, 'q'},
                                             {"target-thickness", required_argument, 0, 'T'},
                                             CLI_STAGE_LONGOPTS,
                                             {0, 0, 0, 0}};
    const char *out_dir = "lamina-out", *positions = NULL;
    double target[2] = {NAN, NAN};
    lam_stage stage = lam_stage_default();
    int c, r;
    optind = 2;
    opterr = 0;
    while ((c = getopt_long(argc, argv, "", longopts, NULL)) != -1) {
        if (c == 'O')
            out_dir = optarg;
        else if (c == 'P')
            positions = optarg;
        else if (c == 'q')
            cli_quiet = 1;
        else if (c == 'T') {
            if ((r = cli_parse_target("catalog", optarg, target)))
                return r;
        } else if ((r = cli_stage_option(&stage, "catalog", c, optarg)) < 0)
            return CLI_EUSAGE;
        else if (!r)
            return cli_usage_error("catalog", "unknown or incomplete option '%s'",
                                   argv[optind - 1]);
    }
    if (optind >= argc)
        return cli_usage_error("catalog", "no result folder given");
    lam_error err;
    lam_error_clear(&err);
    lam_positions pos;
    memset(&pos, 0, sizeof pos);
    if (positions && lam_positions_load(positions, &pos, &err))
        return cli_report(&err, positions);
    lam_catalog cat;
    lam_catalog_init(&cat);
    lam_catalog_set_stage(&cat, positions ? &pos : NULL, &stage);
    lam_catalog_set_target(&cat, target[0], target[1]);
    int rc = CLI_OK;
    size_t images = 0;
    for (int i = optind; i < argc && rc == CLI_OK; i++)
        if (lam_catalog_add_folder(&cat, argv[i], positions ? &pos : NULL, &images, &err))
            rc = cli_report(&err, argv[i]);
    if (rc == CLI_OK && cli_make_dir(out_dir))
        rc = CLI_EFILE;
    if (rc == CLI_OK && (rc = cli_run_outputs(&cat, out_dir, 0)) == CLI_OK && !cli_quiet)
        fprintf(stderr, "lamina: merged %zu regions from %zu analyses into %s\n", cat.count,
                images, out_dir);
    lam_catalog_clear(&cat);
    lam_positions_clear(&pos);
    return rc;
}

const cli_command cli_catalog = {"catalog", "merge the results of several runs into one catalogue",
                                 run_catalog, catalog_help};
