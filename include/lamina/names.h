/*
 * lamina/names.h - the names files and reports give to enum values (one
 * table per enum), and the nearest-name suggestions of every "unknown key"
 * and "unknown value" message.
 *
 * A table is an array of lam_name ending with {0, NULL, 0}; the module
 * that owns an enum defines its table beside it (lam_camera_kind_names in
 * colour.h, lam_transfer_kind_names in transfer.h, lam_pupil_weight_names
 * in setup.h, ...), and parse, save and report code all spell a value
 * through it, so a new kind is one line of its table.
 *
 * Matching is exact: names are case-sensitive, and a text that differs
 * from a name only in case is refused with a message that says so.
 * No allocation; messages go to the caller's lam_error.
 */
#ifndef LAMINA_NAMES_H
#define LAMINA_NAMES_H

#include <stddef.h>
#include "lamina/error.h"

typedef struct lam_name {
    int value;
    const char *name;
    int internal; /* 1: a name for reports only, never accepted from a file */
} lam_name;

/* The name of 'value', or NULL when the table has none. */
const char *lam_name_of(const lam_name *table, int value);

/* The value named 'text' (internal names excepted). On failure LAM_EFORMAT
 * with "key KEY: 'text' is not a, b or c", followed by "; did you mean b?"
 * when one name is close (and a note when only the case differs). */
lam_status lam_name_parse(const lam_name *table, const char *key, const char *text, int *value,
                          lam_error *err);

/* Write the accepted names as "a, b or c" into buf (n bytes, always
 * terminated); returns buf. */
char *lam_name_list(const lam_name *table, char *buf, size_t n);

/* Levenshtein distance between a and b, ignoring case (insertions,
 * deletions and substitutions each count 1). Strings longer than 63
 * characters are compared on their first 63. */
size_t lam_edit_distance(const char *a, const char *b);

/* The candidate nearest to 'text' by lam_edit_distance, or NULL when none
 * is near enough to be a likely slip (distance at most 1 for texts of up
 * to 3 characters, 2 up to 8, a third of the length beyond; a name that
 * only adds or drops a suffix after '_', such as a unit, counts as 1:
 * "fwhm" -> "fwhm_nm"). *case_only
 * (may be NULL) is set to 1 when the two differ only in case. */
const char *lam_nearest_name(const char *text, const char *const *candidates, size_t count,
                             int *case_only);

#endif
