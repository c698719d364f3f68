/* names.c - enum name tables and nearest-name suggestions. */
#include "lamina/names.h"

#include <ctype.h>
#include <stdio.h>
#include <string.h>
#include <strings.h>

#define NAMES_MAX 64 /* names gathered from one table for a suggestion */
#define WORD_MAX 63  /* characters compared by lam_edit_distance */

const char *lam_name_of(const lam_name *table, int value)
{
    for (const lam_name *t = table; t->name; t++)
        if (t->value == value)
            return t->name;
    return NULL;
}

char *lam_name_list(const lam_name *table, char *buf, size_t n)
{
    size_t count = 0, used = 0, total = 0;
    for (const lam_name *t = table; t->name; t++)
        total += !t->internal;
    buf[0] = '\0';
    for (const lam_name *t = table; t->name && used < n; t++) {
        if (t->internal)
            continue;
        const char *sep = count == 0 ? "" : (count + 1 == total ? " or " : ", ");
        int k = snprintf(buf + used, n - used, "%s%s", sep, t->name);
        used += k > 0 ? (size_t)k : 0;
        count++;
    }
    return buf;
}

lam_status lam_name_parse(const lam_name *table, const char *key, const char *text, int *value,
                          lam_error *err)
{
    const char *names[NAMES_MAX];
    size_t count = 0;
    for (const lam_name *t = table; t->name; t++) {
        if (t->internal)
            continue;
        if (!strcmp(t->name, text)) {
            *value = t->value;
            return LAM_OK;
        }
        if (count < NAMES_MAX)
            names[count++] = t->name;
    }
    char list[256];
    lam_name_list(table, list, sizeof list);
    int case_only = 0;
    const char *near = lam_nearest_name(text, names, count, &case_only);
    if (!near)
        return lam_error_set(err, LAM_EFORMAT, "key %s: '%s' is not %s", key, text, list);
    return lam_error_set(err, LAM_EFORMAT, "key %s: '%s' is not %s; did you mean %s?%s", key, text,
                         list, near, case_only ? " (names are case-sensitive)" : "");
}

size_t lam_edit_distance(const char *a, const char *b)
{
    size_t na = strlen(a), nb = strlen(b);
    na = na > WORD_MAX ? WORD_MAX : na;
    nb = nb > WORD_MAX ? WORD_MAX : nb;
    size_t row[WORD_MAX + 1];
    for (size_t j = 0; j <= nb; j++)
        row[j] = j;
    /* one row of the Wagner-Fischer table at a time */
    for (size_t i = 1; i <= na; i++) {
        size_t diag = row[0];
        row[0] = i;
        for (size_t j = 1; j <= nb; j++) {
            size_t up = row[j];
            int differ = tolower((unsigned char)a[i - 1]) != tolower((unsigned char)b[j - 1]);
            size_t sub = diag + (size_t)differ;
            size_t best = up + 1 < row[j - 1] + 1 ? up + 1 : row[j - 1] + 1;
            row[j] = sub < best ? sub : best;
            diag = up;
        }
    }
    return row[nb];
}

/* a is b plus a suffix after '_' ("fwhm" and "fwhm_nm"): a dropped unit */
static int unit_dropped(const char *a, const char *b)
{
    size_t nb = strlen(b);
    return nb > 0 && !strncasecmp(a, b, nb) && a[nb] == '_';
}

const char *lam_nearest_name(const char *text, const char *const *candidates, size_t count,
                             int *case_only)
{
    size_t len = strlen(text);
    size_t limit = len <= 3 ? 1 : (len <= 8 ? 2 : len / 3);
    const char *best = NULL;
    size_t best_d = limit + 1;
    for (size_t i = 0; i < count; i++) {
        size_t d = lam_edit_distance(text, candidates[i]);
        if (d > 1 && (unit_dropped(candidates[i], text) || unit_dropped(text, candidates[i])))
            d = 1;
        if (d < best_d) {
            best_d = d;
            best = candidates[i];
        }
    }
    if (case_only)
        *case_only = best && !strcasecmp(best, text);
    return best;
}
