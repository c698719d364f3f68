/* cli/catalog.c - `lamina catalog merge DIR...`: one catalogue and run
 * report from the results of several runs (shards of a scan, or separate
 * sessions). */
#include "cli.h"
#include "lamina/catalog.h"
#include "lamina/runreport.h"

#include <math.h>
#include <string.h>

static struct {
    const char *out_dir, *positions;
    lam_stage stage;
    double target[2]; /* --target-thickness A-B, nm (NAN: none) */
} A = {.out_dir = "lamina-out"};

static const cli_option catalog_options[] = {
    {"positions", 0, CLI_TEXT, &A.positions, 0, 0, NULL, "FILE.csv",
     "file,x_um,y_um[,rotation_deg] (or x_mm,y_mm)"},
    {"target-thickness", 0, CLI_RANGE, A.target, 0.1, 1000, NULL, "A-B",
     "rank hBN regions by closeness to A-B nm (e.g. 10-30)"},
    {"out", 0, CLI_TEXT, &A.out_dir, 0, 0, NULL, "DIR", "output folder (default lamina-out)"},
    {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, "no closing line"},
    CLI_END};

/* Every result in the folders into one catalogue, and its outputs. */
static int merge(char **dirs, int n, const lam_positions *pos)
{
    lam_catalog cat;
    lam_error err;
    lam_error_clear(&err);
    lam_catalog_init(&cat);
    lam_catalog_set_stage(&cat, pos, &A.stage);
    lam_catalog_set_target(&cat, A.target[0], A.target[1]);
    size_t images = 0;
    lam_status st = LAM_OK;
    for (int i = 0; i < n && !st; i++)
        if ((st = lam_catalog_add_folder(&cat, dirs[i], pos, &images, &err)))
            lam_error_set_file(&err, dirs[i]);
    if (!st)
        st = lam_run_outputs_write(&cat, A.out_dir, NULL, &err);
    size_t regions = cat.count;
    int rc = cli_catalog_done(&cat, st, &err);
    if (rc == CLI_OK && !cli_quiet)
        fprintf(stderr, "lamina: merged %zu regions from %zu analyses into %s\n", regions, images,
                A.out_dir);
    return rc;
}

static int run_catalog(int argc, char **argv)
{
    if (argc < 2 || strcmp(argv[1], "merge"))
        return cli_usage_error("catalog", "expected 'lamina catalog merge DIR...'");
    A.stage = lam_stage_default();
    A.target[0] = A.target[1] = NAN;
    if (cli_options_parse(&cli_catalog, argc - 1, argv + 1)) /* after "merge" */
        return CLI_EUSAGE;
    lam_error err;
    lam_error_clear(&err);
    lam_positions pos = {0};
    if (A.positions && lam_positions_load(A.positions, &pos, &err))
        return cli_report(&err, A.positions);
    int rc = merge(argv + 1 + optind, argc - 1 - optind, A.positions ? &pos : NULL);
    lam_positions_clear(&pos);
    return rc;
}

const cli_command cli_catalog = {
    .name = "catalog", .summary = "merge the results of several runs into one catalogue",
    .run = run_catalog,
    .usage = "Usage: lamina catalog merge [--positions FILE.csv] [--out DIR] DIR...\n"
             "Read every STEM.json (lamina-analysis/1) in the given result folders and\n"
             "write one catalog.json, catalog.csv (schema: docs/catalog.md), goto.csv\n"
             "(with positions), crops/, contact-sheet.png and report.html into --out\n"
             "(default lamina-out): candidates first, duplicates across overlapping tiles\n"
             "merged when positions are given.\n\n",
    .options = catalog_options, .stage = &A.stage, .min_args = 1, .max_args = -1,
    .args_error = "no result folder given"};
