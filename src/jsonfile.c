/* jsonfile.c - reading JSON inputs: parse, schema, strict keys, numbers. */
#include "lamina/jsonfile.h"
#include "lamina/names.h"
#include "lamina/textfile.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

#define KNOWN_MAX 64 /* keys of one object */

lam_status lam_json_check_schema(const cJSON *obj, const char *schema, lam_error *err)
{
    const cJSON *s = cJSON_GetObjectItemCaseSensitive(obj, "schema");
    if (!cJSON_IsObject(obj))
        return lam_error_set(err, LAM_EFORMAT, "expected a JSON object");
    if (!cJSON_IsString(s))
        return lam_error_set(err, LAM_EFORMAT, "key schema: expected \"%s\"", schema);
    if (strcmp(s->valuestring, schema))
        return lam_error_set(err, LAM_EFORMAT, "key schema: expected \"%s\", not \"%.64s\"",
                             schema, s->valuestring);
    return LAM_OK;
}

lam_status lam_json_parse(const char *text, const char *schema, cJSON **root, lam_error *err)
{
    *root = NULL;
    const char *end = NULL;
    cJSON *r = cJSON_ParseWithOpts(text, &end, 0);
    if (!r) {
        long at = end ? (long)(end - text) : -1;
        return lam_error_set(err, LAM_EFORMAT, "not valid JSON (near byte %ld)", at);
    }
    lam_status st = schema ? lam_json_check_schema(r, schema, err) : LAM_OK;
    if (st) {
        cJSON_Delete(r);
        return st;
    }
    *root = r;
    return LAM_OK;
}

lam_status lam_json_load(const char *path, size_t max_bytes, const char *what,
                         const char *schema, cJSON **root, lam_error *err)
{
    *root = NULL;
    char *text = NULL;
    lam_status st = lam_text_load(path, max_bytes, what, &text, err);
    if (st)
        return st;
    st = lam_json_parse(text, schema, root, err);
    free(text);
    if (st)
        lam_error_set_file(err, path);
    return st;
}

lam_status lam_json_read_text(const char *text, const char *schema, const char *dir,
                              lam_json_reader fn, void *ctx, lam_error *err)
{
    cJSON *root = NULL;
    lam_status st = lam_json_parse(text, schema, &root, err);
    if (!st)
        st = fn(root, dir, ctx, err);
    cJSON_Delete(root);
    return st;
}

lam_status lam_json_read_file(const char *path, size_t max_bytes, const char *what,
                              const char *schema, lam_json_reader fn, void *ctx, lam_error *err)
{
    cJSON *root = NULL;
    lam_status st = lam_json_load(path, max_bytes, what, schema, &root, err);
    if (st)
        return st;
    char dir[1024];
    lam_path_dir(path, dir, sizeof dir);
    st = fn(root, dir, ctx, err);
    cJSON_Delete(root);
    if (st)
        lam_error_set_file(err, path);
    return st;
}

lam_status lam_json_number(const cJSON *obj, const char *name, const char *path, double lo,
                           double hi, double *out, int *found, lam_error *err)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, name);
    int present = v && !cJSON_IsNull(v);
    if (found)
        *found = present;
    if (!present)
        return LAM_OK;
    if (!path)
        path = name;
    if (!cJSON_IsNumber(v) || !isfinite(v->valuedouble))
        return lam_error_set(err, LAM_EFORMAT, "key %s: expected a number", path);
    char label[192];
    snprintf(label, sizeof label, "key %s", path);
    lam_status st = lam_check_range(err, label, v->valuedouble, lo, hi);
    if (!st)
        *out = v->valuedouble;
    return st;
}

double lam_json_number_or(const cJSON *obj, const char *name, double dflt)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, name);
    return cJSON_IsNumber(v) ? v->valuedouble : dflt;
}

/* "a, b, c" of the known keys, cut to fit. */
static void key_list(const char *const known[], char *buf, size_t n)
{
    size_t used = 0;
    buf[0] = '\0';
    for (size_t i = 0; known[i] && used + 1 < n; i++) {
        int k = snprintf(buf + used, n - used, "%s%s", i ? ", " : "", known[i]);
        used += k > 0 ? (size_t)k : 0;
    }
}

static lam_status unknown_key(const char *path, const char *key, const char *const known[],
                              lam_error *err)
{
    size_t count = 0;
    while (known[count] && count < KNOWN_MAX)
        count++;
    const char *dot = path[0] ? "." : "";
    int case_only = 0;
    const char *near = lam_nearest_name(key, known, count, &case_only);
    if (near)
        return lam_error_set(err, LAM_EFORMAT, "unknown key %s%s%.64s; did you mean %s%s%s?%s",
                             path, dot, key, path, dot, near,
                             case_only ? " (keys are case-sensitive)" : "");
    char list[320];
    key_list(known, list, sizeof list);
    return lam_error_set(err, LAM_EFORMAT, "unknown key %s%s%.64s (known %s%s: %s)", path, dot,
                         key, path[0] ? "in " : "at the top level", path, list);
}

lam_status lam_json_check_keys(const cJSON *obj, const char *path, const char *const known[],
                               lam_error *err)
{
    if (!cJSON_IsObject(obj))
        return LAM_OK;
    unsigned char seen[KNOWN_MAX] = {0};
    const cJSON *item;
    cJSON_ArrayForEach(item, obj) {
        const char *key = item->string ? item->string : "";
        if (key[0] == '_')
            continue; /* a comment */
        size_t i = 0;
        while (i < KNOWN_MAX && known[i] && strcmp(known[i], key))
            i++;
        if (i == KNOWN_MAX || !known[i])
            return unknown_key(path, key, known, err);
        if (seen[i]++) /* cJSON would keep the first silently */
            return lam_error_set(err, LAM_EFORMAT, "key %s%s%s: given twice", path,
                                 path[0] ? "." : "", key);
    }
    return LAM_OK;
}
