/*
 * lamina/jsonfile.h - the JSON inputs (setup profiles, stacks, scenes,
 * label files, analysis results): read a file whole, parse it, check its
 * "schema", refuse keys nobody reads, and read numbers with their range.
 *
 * Strict keys: every object read from a file is checked against the list
 * of keys its reader knows, so a misspelt key is an error that names it
 * with its path and suggests the nearest known key, instead of a value
 * silently left at its default. Keys starting with '_' are comments and
 * are never checked ("_comment": "..."). A key given twice is an error.
 *
 * Messages name the key by its path in the file ("objective.na",
 * "flakes[2].layers"); lam_json_load also records the file in the error.
 * Trees are cJSON's (Debian libcjson): the caller deletes what
 * lam_json_parse / lam_json_load return with cJSON_Delete.
 */
#ifndef LAMINA_JSONFILE_H
#define LAMINA_JSONFILE_H

#include <stddef.h>
#include "lamina/error.h"

struct cJSON;

/* Parse JSON text. With a schema (may be NULL) the root must be an object
 * whose "schema" is that string. LAM_EFORMAT: "not valid JSON (near byte
 * N)", "expected a JSON object", "key schema: expected \"S\"". */
lam_status lam_json_parse(const char *text, const char *schema, struct cJSON **root,
                          lam_error *err);

/* Check that obj is an object whose "schema" is 'schema' (the check of
 * lam_json_parse, for trees read some other way, such as a setup inside a
 * scene). */
lam_status lam_json_check_schema(const struct cJSON *obj, const char *schema, lam_error *err);

/* lam_text_load (at most max_bytes; 'what' names the kind of file) and
 * lam_json_parse; every failure names the file. */
lam_status lam_json_load(const char *path, size_t max_bytes, const char *what,
                         const char *schema, struct cJSON **root, lam_error *err);

/* A reader of a parsed document (a setup, a scene, a label file): 'dir'
 * is the folder that relative paths inside it resolve against. */
typedef lam_status (*lam_json_reader)(const struct cJSON *root, const char *dir, void *ctx,
                                      lam_error *err);

/* Parse text (lam_json_parse with 'schema', may be NULL), give the tree to
 * fn with 'dir', delete it; returns the first failure. */
lam_status lam_json_read_text(const char *text, const char *schema, const char *dir,
                              lam_json_reader fn, void *ctx, lam_error *err);

/* Load a file (lam_json_load), give the tree and the file's folder to fn,
 * delete it; any failure names the file. The one way lamina reads a JSON
 * input file. */
lam_status lam_json_read_file(const char *path, size_t max_bytes, const char *what,
                              const char *schema, lam_json_reader fn, void *ctx,
                              lam_error *err);

/* Read number 'name' of obj into *out when present and not null (else
 * leave *out alone); *found (may be NULL) says which. LAM_EFORMAT "key
 * PATH: expected a number" or LAM_ERANGE "key PATH: V is outside LO to HI"
 * (lam_check_range); PATH is 'path', or 'name' when path is NULL. */
lam_status lam_json_number(const struct cJSON *obj, const char *name, const char *path,
                           double lo, double hi, double *out, int *found, lam_error *err);

/* Lenient read of our own outputs: the number 'name' of obj, or dflt when
 * it is absent or not a number. */
double lam_json_number_or(const struct cJSON *obj, const char *name, double dflt);

/* Check every key of obj against 'known' (a NULL-terminated list of the
 * key names a reader of this object uses). 'path' is the object's path for
 * messages ("" at the root). LAM_EFORMAT for the first unknown key:
 *   "unknown key objective.illumination_NA; did you mean
 *    objective.illumination_na? (keys are case-sensitive)"
 * or, with nothing near, the list of keys known there; and for a key given
 * twice. A non-object obj passes (its reader reports the type). */
lam_status lam_json_check_keys(const struct cJSON *obj, const char *path,
                               const char *const known[], lam_error *err);

#endif
