/* cli/catalog.c - `lamina catalog merge DIR...`: one catalogue from the
 * results of several runs (shards of a scan, or separate sessions). */
#include "cli.h"
#include "inputs.h"
#include "lamina/catalog.h"

#include <dirent.h>
#include <getopt.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

static void catalog_help(FILE *out)
{
    fputs("Usage: lamina catalog merge [--positions FILE.csv] [--out DIR] DIR...\n"
          "Read every STEM.json (lamina-analysis/1) in the given result folders and\n"
          "write one catalog.json, catalog.csv and contact-sheet.png into --out\n"
          "(default lamina-out): candidates first, duplicates across overlapping tiles\n"
          "merged when positions are given.\n",
          out);
}

static int run_catalog(int argc, char **argv)
{
    if (argc < 2 || strcmp(argv[1], "merge"))
        return cli_usage_error("catalog", "expected 'lamina catalog merge DIR...'");
    static const struct option longopts[] = {{"out", required_argument, 0, 'O'},
                                             {"positions", required_argument, 0, 'P'},
                                             {"quiet", no_argument, 0, 'q'},
                                             {0, 0, 0, 0}};
    const char *out_dir = "lamina-out", *positions = NULL;
    int c;
    optind = 2;
    opterr = 0;
    while ((c = getopt_long(argc, argv, "", longopts, NULL)) != -1) {
        if (c == 'O')
            out_dir = optarg;
        else if (c == 'P')
            positions = optarg;
        else if (c == 'q')
            cli_quiet = 1;
        else
            return cli_usage_error("catalog", "unknown or incomplete option '%s'", argv[optind - 1]);
    }
    if (optind >= argc)
        return cli_usage_error("catalog", "no result folder given");
    lam_error err;
    lam_error_clear(&err);
    lam_positions pos = {0, NULL};
    if (positions && lam_positions_load(positions, &pos, &err))
        return cli_report(&err, positions);
    lam_catalog cat;
    lam_catalog_init(&cat);
    int rc = CLI_OK;
    size_t images = 0;
    for (int i = optind; i < argc && rc == CLI_OK; i++) {
        DIR *d = opendir(argv[i]);
        if (!d) {
            fprintf(stderr, "lamina: %s: cannot read the folder\n", argv[i]);
            rc = CLI_EFILE;
            break;
        }
        /* sorted names: the merged catalogue does not depend on readdir order */
        cli_inputs names = {0, 0, NULL};
        struct dirent *e;
        while ((e = readdir(d))) {
            size_t n = strlen(e->d_name);
            if (n > 5 && !strcmp(e->d_name + n - 5, ".json") && strncmp(e->d_name, "catalog", 7) &&
                strcmp(e->d_name, "oxide.json")) {
                char p[4096];
                snprintf(p, sizeof p, "%s/%s", argv[i], e->d_name);
                if (names.count == names.cap) {
                    size_t nc = names.cap ? 2 * names.cap : 64;
                    char **np = realloc(names.paths, nc * sizeof *np);
                    if (!np)
                        break;
                    names.paths = np;
                    names.cap = nc;
                }
                if ((names.paths[names.count] = strdup(p)))
                    names.count++;
            }
        }
        closedir(d);
        for (size_t a = 1; a < names.count; a++)
            for (size_t b = a; b > 0 && strcmp(names.paths[b - 1], names.paths[b]) > 0; b--) {
                char *t = names.paths[b];
                names.paths[b] = names.paths[b - 1];
                names.paths[b - 1] = t;
            }
        for (size_t k = 0; k < names.count && rc == CLI_OK; k++) {
            cJSON *root = cli_read_json(names.paths[k]);
            const cJSON *schema = root ? cJSON_GetObjectItemCaseSensitive(root, "schema") : NULL;
            if (cJSON_IsString(schema) && !strcmp(schema->valuestring, "lamina-analysis/1")) {
                const cJSON *img = cJSON_GetObjectItemCaseSensitive(root, "image");
                const cJSON *path = cJSON_GetObjectItemCaseSensitive(img, "path");
                const char *ip = cJSON_IsString(path) ? path->valuestring : names.paths[k];
                if (lam_catalog_add(&cat, root, ip, positions ? lam_positions_find(&pos, ip) : NULL, &err))
                    rc = cli_report(&err, names.paths[k]);
                images++;
            }
            cJSON_Delete(root);
        }
        cli_inputs_free(&names);
    }
    if (rc == CLI_OK) {
        lam_catalog_finish(&cat);
        char sheet[4096];
        snprintf(sheet, sizeof sheet, "%s/contact-sheet.png", out_dir);
        if (cli_make_dir(out_dir))
            rc = CLI_EFILE;
        else if (lam_catalog_write(&cat, out_dir, &err) ||
                 lam_catalog_contact_sheet(&cat, sheet, 16, &err))
            rc = cli_report(&err, out_dir);
        else if (!cli_quiet)
            fprintf(stderr, "lamina: merged %zu regions from %zu analyses into %s\n", cat.count,
                    images, out_dir);
    }
    lam_catalog_clear(&cat);
    lam_positions_clear(&pos);
    return rc;
}

const cli_command cli_catalog = {"catalog", "merge the results of several runs into one catalogue",
                                 run_catalog, catalog_help};
