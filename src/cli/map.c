/* cli/map.c - `lamina map RESULTS_DIR`: the chip map of a results folder
 * (tiles at their stage positions, candidates marked). */
#include "cli.h"
#include "lamina/jsonfile.h"
#include "run_opts.h"
#include "lamina/chipmap.h"
#include "lamina/draw.h"

#include <getopt.h>
#include <string.h>
#include <cjson/cJSON.h>

static void map_help(FILE *out)
{
    fputs("Usage: lamina map RESULTS_DIR [-o chip.svg|chip.pdf|chip.png] [--positions FILE.csv]\n"
          "Draw the chip map of an analysed scan: every tile outlined at its stage\n"
          "position, the candidates marked in their layer colour and numbered by\n"
          "catalogue rank. The positions and stage convention are those recorded in\n"
          "RESULTS_DIR/catalog.json unless given here. Default output chip.svg.\n"
          "(The planning plot of contrast over wavelength and oxide is 'lamina plan'.)\n\n"
          "  -o, --out FILE        .svg, .pdf or .png\n"
          "  --positions FILE.csv  file,x_um,y_um[,rotation_deg] (or x_mm,y_mm)\n"
          CLI_STAGE_HELP
          "  --quiet\n",
          out);
}

/* The positions file and stage convention a run recorded in catalog.json. */
static int recorded_stage(const char *dir, char *positions, size_t n, lam_stage *st)
{
    char p[4096];
    snprintf(p, sizeof p, "%s/catalog.json", dir);
    cJSON *root = NULL;
    lam_json_load(p, 64u << 20, "catalogue", NULL, &root, NULL);
    const cJSON *o = cJSON_GetObjectItemCaseSensitive(root, "stage");
    const cJSON *pos = cJSON_GetObjectItemCaseSensitive(o, "positions");
    int found = cJSON_IsString(pos);
    if (found) {
        snprintf(positions, n, "%s", pos->valuestring);
        static const char *const keys[] = {"axes", "units", "origin"};
        for (int k = 0; k < 3; k++) {
            const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, keys[k]);
            if (cJSON_IsString(v))
                lam_stage_set(st, keys[k], v->valuestring, NULL);
        }
        const cJSON *r = cJSON_GetObjectItemCaseSensitive(o, "rotation_deg");
        if (cJSON_IsNumber(r))
            st->rotation_deg = r->valuedouble;
    }
    cJSON_Delete(root);
    return found;
}

static int run_map(int argc, char **argv)
{
    static const struct option longopts[] = {{"out", required_argument, 0, 'o'},
                                             {"positions", required_argument, 0, 'P'},
                                             {"quiet", no_argument, 0, 'q'},
                                             CLI_STAGE_LONGOPTS,
                                             {0, 0, 0, 0}};
    const char *out = "chip.svg", *positions = NULL;
    lam_stage stage = lam_stage_default();
    int c, r, stage_given = 0;
    optind = 1;
    opterr = 0;
    while ((c = getopt_long(argc, argv, "o:", longopts, NULL)) != -1) {
        if (c == 'o')
            out = optarg;
        else if (c == 'P')
            positions = optarg;
        else if (c == 'q')
            cli_quiet = 1;
        else if ((r = cli_stage_option(&stage, "map", c, optarg)) < 0)
            return CLI_EUSAGE;
        else if (!r)
            return cli_usage_error("map", "unknown or incomplete option '%s'", argv[optind - 1]);
        else
            stage_given = 1;
    }
    if (optind + 1 != argc)
        return cli_usage_error("map", "expected one results folder (lamina map RESULTS_DIR)");
    if (lam_canvas_kind_of(out) < 0)
        return cli_usage_error("map", "-o: the map must end in .svg, .pdf or .png");
    const char *dir = argv[optind];
    char recorded[1024];
    lam_stage rec = lam_stage_default();
    if (!positions && recorded_stage(dir, recorded, sizeof recorded, &rec)) {
        positions = recorded;
        if (!stage_given)
            stage = rec;
    }
    if (!positions)
        return cli_usage_error("map", "%s records no stage positions: give --positions FILE.csv",
                               dir);
    lam_error err;
    lam_error_clear(&err);
    lam_positions pos;
    memset(&pos, 0, sizeof pos);
    if (lam_positions_load(positions, &pos, &err))
        return cli_report(&err, positions);
    lam_catalog cat;
    lam_catalog_init(&cat);
    lam_catalog_set_stage(&cat, &pos, &stage);
    int rc = lam_catalog_add_folder(&cat, dir, &pos, NULL, &err) ? cli_report(&err, dir) : CLI_OK;
    if (rc == CLI_OK && lam_catalog_finish(&cat, &err))
        rc = cli_report(&err, NULL);
    else if (rc == CLI_OK && lam_chipmap_write(&cat, out, &err))
        rc = cli_report(&err, out);
    else if (rc == CLI_OK && !cli_quiet)
        fprintf(stderr, "lamina: wrote %s\n", out);
    lam_catalog_clear(&cat);
    lam_positions_clear(&pos);
    return rc;
}

const cli_command cli_map = {"map", "chip map of a results folder", run_map, map_help};
