/* catalog_load.c - a catalogue from a folder of results (lamina/catalog.h). */
#include "lamina/catalog.h"
#include "lamina/inputs.h"
#include "lamina/jsonfile.h"

#include <stdio.h>
#include <string.h>
#include <cjson/cJSON.h>

static int is_result_name(const char *name)
{
    size_t n = strlen(name);
    return n > 5 && !strcmp(name + n - 5, ".json") && strncmp(name, "catalog", 7) &&
           strcmp(name, "oxide.json") && strcmp(name, "pool.json");
}

lam_status lam_catalog_add_folder(lam_catalog *c, const char *dir, const lam_positions *pos,
                                  size_t *images, lam_error *err)
{
    lam_inputs names; /* sorted: the catalogue does not depend on readdir order */
    lam_status st = lam_inputs_folder_names(dir, is_result_name, &names, err);
    if (st)
        return st;
    snprintf(c->results, sizeof c->results, "%s", dir);
    for (size_t k = 0; k < names.count && !st; k++) {
        char p[4096];
        snprintf(p, sizeof p, "%s/%s", dir, names.paths[k]);
        cJSON *root = NULL;
        if (lam_json_load(p, 64u << 20, "result", NULL, &root, NULL))
            continue; /* not JSON, or not ours */
        const cJSON *schema = cJSON_GetObjectItemCaseSensitive(root, "schema");
        if (cJSON_IsString(schema) && !strcmp(schema->valuestring, "lamina-analysis/1")) {
            const cJSON *img = cJSON_GetObjectItemCaseSensitive(root, "image");
            const cJSON *path = cJSON_GetObjectItemCaseSensitive(img, "path");
            const char *ip = cJSON_IsString(path) ? path->valuestring : p;
            if ((st = lam_catalog_add(c, root, ip, lam_positions_find(pos, ip), err)))
                lam_error_set_file(err, p);
            if (images)
                (*images)++;
        }
        cJSON_Delete(root);
    }
    lam_inputs_free(&names);
    return st;
}

int lam_catalog_recorded_stage(const char *dir, char *positions, size_t n, lam_stage *st)
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
        *st = lam_stage_default();
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
