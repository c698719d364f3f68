/* warnings.c - the list of an analysis' warnings (lamina/warnings.h). The
 * checks themselves live with what they check (analyze_checks.c). */
#include "lamina/warnings.h"

#include <stdarg.h>
#include <stdio.h>
#include <string.h>

const lam_warning *lam_warnings_find(const lam_warnings *w, const char *code)
{
    for (size_t i = 0; i < w->count; i++)
        if (!strcmp(w->item[i].code, code))
            return &w->item[i];
    return NULL;
}

void lam_warnings_add(lam_warnings *w, const char *code, const char *fmt, ...)
{
    if (lam_warnings_find(w, code))
        return;
    if (w->count >= LAM_MAX_WARNINGS)
        return;
    lam_warning *x = &w->item[w->count++];
    snprintf(x->code, sizeof x->code, "%s", code);
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(x->message, sizeof x->message, fmt, ap);
    va_end(ap);
}
