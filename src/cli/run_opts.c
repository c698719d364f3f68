/* cli/run_opts.c - stage options, results folders and the run outputs
 * shared by analyze, catalog merge, watch and map. */
#include "run_opts.h"
#include "cli.h"
#include "inputs.h"
#include "lamina/runreport.h"

#include <dirent.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

int cli_stage_option(lam_stage *s, const char *command, int code, const char *arg)
{
    static const char *const keys[] = {"axes", "units", "rotation", "origin"};
    if (code < CLI_OPT_STAGE_AXES || code > CLI_OPT_STAGE_ORIGIN)
        return 0;
    lam_error err;
    lam_error_clear(&err);
    if (lam_stage_set(s, keys[code - CLI_OPT_STAGE_AXES], arg, &err)) {
        cli_usage_error(command, "--stage-%s: %s", keys[code - CLI_OPT_STAGE_AXES], err.message);
        return -1;
    }
    return 1;
}

static int is_result_name(const char *name)
{
    size_t n = strlen(name);
    return n > 5 && !strcmp(name + n - 5, ".json") && strncmp(name, "catalog", 7) &&
           strcmp(name, "oxide.json") && name[0] != '.';
}

static int cmp_str(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

int cli_results_load(lam_catalog *cat, const char *dir, const lam_positions *pos, size_t *images)
{
    DIR *d = opendir(dir);
    if (!d) {
        fprintf(stderr, "lamina: %s: cannot read the folder\n", dir);
        return CLI_EFILE;
    }
    /* sorted names: the catalogue does not depend on readdir order */
    cli_inputs names = {0, 0, NULL};
    struct dirent *e;
    int rc = CLI_OK;
    while ((e = readdir(d)) && rc == CLI_OK) {
        if (!is_result_name(e->d_name))
            continue;
        if (names.count == names.cap) {
            size_t nc = names.cap ? 2 * names.cap : 64;
            char **np = realloc(names.paths, nc * sizeof *np);
            if (!np) {
                rc = CLI_EFILE;
                break;
            }
            names.paths = np;
            names.cap = nc;
        }
        char p[4096];
        snprintf(p, sizeof p, "%s/%s", dir, e->d_name);
        if ((names.paths[names.count] = strdup(p)))
            names.count++;
    }
    closedir(d);
    if (names.count) /* qsort must not see a NULL array, even empty */
        qsort(names.paths, names.count, sizeof *names.paths, cmp_str);
    snprintf(cat->results, sizeof cat->results, "%s", dir);
    lam_error err;
    lam_error_clear(&err);
    for (size_t k = 0; k < names.count && rc == CLI_OK; k++) {
        cJSON *root = cli_read_json(names.paths[k]);
        const cJSON *schema = root ? cJSON_GetObjectItemCaseSensitive(root, "schema") : NULL;
        if (cJSON_IsString(schema) && !strcmp(schema->valuestring, "lamina-analysis/1")) {
            const cJSON *img = cJSON_GetObjectItemCaseSensitive(root, "image");
            const cJSON *path = cJSON_GetObjectItemCaseSensitive(img, "path");
            const char *ip = cJSON_IsString(path) ? path->valuestring : names.paths[k];
            if (lam_catalog_add(cat, root, ip, pos ? lam_positions_find(pos, ip) : NULL, &err))
                rc = cli_report(&err, names.paths[k]);
            if (images)
                (*images)++;
        }
        cJSON_Delete(root);
    }
    cli_inputs_free(&names);
    return rc;
}

int cli_run_outputs(lam_catalog *cat, const char *out_dir, double refresh_s)
{
    lam_error err;
    lam_error_clear(&err);
    if (lam_catalog_finish(cat, &err))
        return cli_report(&err, NULL);
    for (size_t k = 0; k < cat->n_images && !cli_quiet; k++)
        if (cat->images[k].warnings[0])
            fprintf(stderr, "lamina: warning: %s: %s\n", cat->images[k].path,
                    cat->images[k].warnings);
    lam_run_report_options ro = {NULL, 0, refresh_s};
    if (lam_catalog_write(cat, out_dir, &err) || lam_run_report_write(cat, out_dir, &ro, &err))
        return cli_report(&err, out_dir);
    return CLI_OK;
}

int cli_parse_target(const char *command, const char *arg, double out[2])
{
    double a, b;
    char tail;
    if (sscanf(arg, "%lf-%lf%c", &a, &b, &tail) != 2 || !(a > 0) || !(b >= a) || !(b <= 1000))
        return cli_usage_error(command, "--target-thickness: expected A-B in nm with "
                                        "0 < A <= B <= 1000, e.g. 10-30");
    out[0] = a, out[1] = b;
    return 0;
}
