/* cli/catalog.c - `lamina catalog merge DIR...`: one catalogue and run
 * report from the results of several runs (shards of a scan, or separate
 * sessions). */
#include "cli.h"
#include "options.h"
#include "lamina/catalog.h"

#include <string.h>

typedef struct catalog_args {
    const char *out_dir, *positions;
    lam_stage stage;
} catalog_args;

#define CATALOG_OPTIONS(A)                                                                      \
    {                                                                                           \
        {"positions", 0, CLI_TEXT, &(A)->positions, 0, 0, NULL, "FILE.csv",                     \
         "file,x_um,y_um[,rotation_deg] (or x_mm,y_mm)"},                                       \
        {"out", 0, CLI_TEXT, &(A)->out_dir, 0, 0, NULL, "DIR",                                  \
         "output folder (default lamina-out)"},                                                 \
        {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, "no closing line"},                \
        CLI_END                                                                                 \
    }

static void catalog_help(FILE *out)
{
    catalog_args A;
    cli_option t[] = CATALOG_OPTIONS(&A);
    fputs("Usage: lamina catalog merge [--positions FILE.csv] [--out DIR] DIR...\n"
          "Read every STEM.json (lamina-analysis/1) in the given result folders and\n"
          "write one catalog.json, catalog.csv (schema: docs/catalog.md), goto.csv\n"
          "(with positions), crops/, contact-sheet.png and report.html into --out\n"
          "(default lamina-out): candidates first, duplicates across overlapping tiles\n"
          "merged when positions are given.\n\n", out);
    cli_options_help(out, t);
    fputs(CLI_STAGE_HELP, out);
}

static int run_catalog(int argc, char **argv)
{
    if (argc < 2 || strcmp(argv[1], "merge"))
        return cli_usage_error("catalog", "expected 'lamina catalog merge DIR...'");
    catalog_args A = {.out_dir = "lamina-out", .stage = lam_stage_default()};
    cli_option t[] = CATALOG_OPTIONS(&A);
    cli_command_options co = {.command = "catalog", .own = t, .stage = &A.stage, .min_args = 1,
                              .max_args = -1, .args_error = "no result folder given"};
    int rc = cli_options_parse(&co, argc, argv, 2);
    if (rc)
        return rc;
    lam_error err;
    lam_error_clear(&err);
    lam_positions pos = {0};
    if (A.positions && lam_positions_load(A.positions, &pos, &err))
        return cli_report(&err, A.positions);
    const lam_positions *p = A.positions ? &pos : NULL;
    lam_catalog cat;
    lam_catalog_init(&cat);
    lam_catalog_set_stage(&cat, p, &A.stage);
    size_t images = 0;
    for (int i = optind; i < argc && rc == CLI_OK; i++)
        if (lam_catalog_add_folder(&cat, argv[i], p, &images, &err))
            rc = cli_report(&err, argv[i]);
    if (rc == CLI_OK && cli_make_dir(A.out_dir))
        rc = CLI_EFILE;
    if (rc == CLI_OK && (rc = cli_run_outputs(&cat, A.out_dir)) == CLI_OK && !cli_quiet)
        fprintf(stderr, "lamina: merged %zu regions from %zu analyses into %s\n", cat.count,
                images, A.out_dir);
    lam_catalog_clear(&cat);
    lam_positions_clear(&pos);
    return rc;
}

const cli_command cli_catalog = {"catalog", "merge the results of several runs into one catalogue",
                                 run_catalog, catalog_help};
