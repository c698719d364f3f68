/* summary_internal.h - the text stream the summary functions write into
 * (not public). */
#ifndef LAMINA_SUMMARY_INTERNAL_H
#define LAMINA_SUMMARY_INTERNAL_H

#include <stdio.h>
#include "lamina/error.h"

typedef struct lam__text {
    FILE *f;
    char *buf;
    size_t len;
} lam__text;

/* A memory stream (open_memstream); LAM_ENOMEM. */
lam_status lam__text_open(lam__text *t, lam_error *err);

/* Close it and hand over the text (freed on failure); LAM_ENOMEM. */
lam_status lam__text_close(lam__text *t, char **out, lam_error *err);

#endif
