/* cli/map.c - `lamina map RESULTS_DIR`: the chip map of a results folder
 * (tiles at their stage positions, candidates marked). */
#include "cli.h"
#include "lamina/chipmap.h"
#include "lamina/draw.h"

static struct {
    const char *out, *positions;
    lam_stage stage;
    int stage_given;
} A = {.out = "chip.svg"};

static const cli_option map_options[] = {
    {"out", 'o', CLI_TEXT, &A.out, 0, 0, NULL, "FILE", ".svg, .pdf or .png"},
    {"positions", 0, CLI_TEXT, &A.positions, 0, 0, NULL, "FILE.csv",
     "file,x_um,y_um[,rotation_deg] (or x_mm,y_mm)"},
    {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, "no closing line"},
    CLI_END};

static int run_map(int argc, char **argv)
{
    A.stage = lam_stage_default();
    if (cli_options_parse(&cli_map, argc, argv))
        return CLI_EUSAGE;
    if (lam_canvas_kind_of(A.out) < 0)
        return cli_usage_error("map", "-o: the map must end in .svg, .pdf or .png");
    const char *dir = argv[optind];
    char recorded[1024];
    lam_stage rec;
    if (!A.positions && lam_catalog_recorded_stage(dir, recorded, sizeof recorded, &rec)) {
        A.positions = recorded;
        if (!A.stage_given)
            A.stage = rec;
    }
    if (!A.positions)
        return cli_usage_error("map", "%s records no stage positions: give --positions FILE.csv",
                               dir);
    int rc = CLI_OK;
    lam_error err;
    lam_error_clear(&err);
    lam_positions pos = {0};
    if (lam_positions_load(A.positions, &pos, &err))
        rc = cli_report(&err, A.positions);
    else if (lam_chipmap_write_results(dir, &pos, &A.stage, A.out, &err))
        rc = cli_report(&err, NULL);
    else if (!cli_quiet)
        fprintf(stderr, "lamina: wrote %s\n", A.out);
    lam_positions_clear(&pos);
    return rc;
}

const cli_command cli_map = {
    .name = "map", .summary = "chip map of a results folder", .run = run_map,
    .usage = "Usage: lamina map RESULTS_DIR [-o chip.svg|chip.pdf|chip.png] "
             "[--positions FILE.csv]\n"
             "Draw the chip map of an analysed scan: every tile outlined at its stage\n"
             "position, the candidates marked in their layer colour and numbered by\n"
             "catalogue rank. The positions and stage convention are those recorded in\n"
             "RESULTS_DIR/catalog.json unless given here. Default output chip.svg.\n"
             "(The planning plot of contrast over wavelength and oxide is 'lamina plan'.)\n\n",
    .options = map_options, .stage = &A.stage, .stage_given = &A.stage_given, .min_args = 1,
    .max_args = 1, .args_error = "expected one results folder (lamina map RESULTS_DIR)"};
