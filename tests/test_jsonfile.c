/* test_jsonfile.c - reading JSON inputs: syntax errors with their place,
 * schema checks, strict keys with suggestions, comments, repeated keys,
 * numbers with their ranges, and files that name themselves in errors. */
#include "check.h"
#include "lamina/jsonfile.h"

#include <math.h>
#include <stdio.h>
#include <string.h>
#include <cjson/cJSON.h>

static void test_parse(void)
{
    cJSON *r = NULL;
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_json_parse("{\"a\": 1,}", NULL, &r, &err), LAM_EFORMAT, "trailing comma");
    long at = -1;
    sscanf(err.message, "not valid JSON (near byte %ld)", &at);
    check_true(at >= 7 && at <= 9, "the place of the error, the '}' at byte 8: %s", err.message);
    check_true(r == NULL, "nothing returned on failure");
    check_int(lam_json_parse("[1, 2]", "x/1", &r, &err), LAM_EFORMAT, "a list is not a document");
    check_str(err.message, "expected a JSON object", "message for a list");
    check_int(lam_json_parse("{\"schema\": \"x/2\"}", "x/1", &r, &err), LAM_EFORMAT, "schema");
    check_str(err.message, "key schema: expected \"x/1\", not \"x/2\"", "schema message");
    check_int(lam_json_parse("{\"schema\": \"x/1\"}", "x/1", &r, &err), LAM_OK, "schema matches");
    cJSON_Delete(r);
}

static void test_keys(void)
{
    static const char *const known[] = {"width", "height", "flakes", NULL};
    cJSON *r = NULL;
    lam_error err;
    lam_error_clear(&err);
    lam_json_parse("{\"width\": 1, \"_comment\": \"x\", \"_\": 2, \"height\": 3}", NULL, &r, &err);
    check_int(lam_json_check_keys(r, "", known, &err), LAM_OK, "known keys and comments pass");
    cJSON_Delete(r);
    lam_json_parse("{\"width\": 1, \"Height\": 3}", NULL, &r, &err);
    check_int(lam_json_check_keys(r, "", known, &err), LAM_EFORMAT, "a key in the wrong case");
    check_str(err.message, "unknown key Height; did you mean height? (keys are case-sensitive)",
              "case message");
    cJSON_Delete(r);
    lam_json_parse("{\"flaks\": []}", NULL, &r, &err);
    lam_json_check_keys(r, "scene", known, &err);
    check_str(err.message, "unknown key scene.flaks; did you mean scene.flakes?",
              "a nested path and a suggestion");
    cJSON_Delete(r);
    lam_json_parse("{\"dust\": []}", NULL, &r, &err);
    lam_json_check_keys(r, "", known, &err);
    check_str(err.message, "unknown key dust (known at the top level: width, height, flakes)",
              "nothing near: the known keys");
    cJSON_Delete(r);
    lam_json_parse("{\"width\": 1, \"height\": 2, \"width\": 3}", NULL, &r, &err);
    check_int(lam_json_check_keys(r, "", known, &err), LAM_EFORMAT, "a repeated key");
    check_str(err.message, "key width: given twice", "repeat message");
    cJSON_Delete(r);
    check_int(lam_json_check_keys(NULL, "", known, &err), LAM_OK, "a missing object passes");
}

static void test_numbers(void)
{
    cJSON *r = NULL;
    lam_error err;
    lam_error_clear(&err);
    lam_json_parse("{\"a\": 2.5, \"b\": \"2\", \"c\": null, \"d\": 1e400}", NULL, &r, &err);
    double v = -1;
    int found = -1;
    check_int(lam_json_number(r, "a", "obj.a", 0, 3, &v, &found, &err), LAM_OK, "a number");
    check_true(v == 2.5 && found == 1, "value and found");
    check_int(lam_json_number(r, "a", "obj.a", 0, 2, &v, NULL, &err), LAM_ERANGE, "out of range");
    check_str(err.message, "key obj.a: 2.5 is outside 0 to 2", "range message names the path");
    check_int(lam_json_number(r, "b", NULL, 0, 3, &v, NULL, &err), LAM_EFORMAT, "a string");
    check_str(err.message, "key b: expected a number", "type message");
    v = 7;
    check_int(lam_json_number(r, "c", NULL, 0, 3, &v, &found, &err), LAM_OK, "null is absent");
    check_true(v == 7 && found == 0, "null leaves the value");
    check_int(lam_json_number(r, "e", NULL, 0, 3, &v, &found, &err), LAM_OK, "absent key");
    check_int(lam_json_number(r, "d", NULL, 0, 3, &v, NULL, &err), LAM_EFORMAT,
              "an overflowing number is not finite");
    check_abs(lam_json_number_or(r, "a", 0), 2.5, 0, "lenient read");
    check_true(isnan(lam_json_number_or(r, "b", NAN)), "lenient read of a string: the default");
    cJSON_Delete(r);
}

static void test_load(void)
{
    char path[512];
    snprintf(path, sizeof path, "%s/doc.json", check_tmpdir());
    FILE *fp = fopen(path, "w");
    fputs("{\"schema\": \"lamina-labels/1\", \"labels\": []", fp);
    fclose(fp);
    cJSON *r = NULL;
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_json_load(path, 1000, "label", "lamina-labels/1", &r, &err), LAM_EFORMAT,
              "an unterminated file");
    check_str(err.file, path, "the error names the file");
    lam_error_clear(&err);
    check_int(lam_json_load(path, 10, "label", NULL, &r, &err), LAM_ETOOBIG, "over the limit");
    lam_error_clear(&err);
    snprintf(path, sizeof path, "%s/none.json", check_tmpdir());
    check_int(lam_json_load(path, 1000, "label", NULL, &r, &err), LAM_EIO, "a missing file");
}

int main(void)
{
    check_begin("test_jsonfile");
    test_parse();
    test_keys();
    test_numbers();
    test_load();
    return check_summary();
}
