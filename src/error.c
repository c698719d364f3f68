/* error.c - status phrases and the caller-supplied error record. */
#include "lamina/error.h"

#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <gsl/gsl_errno.h>

const char *lam_strerror(lam_status status)
{
    switch (status) {
    case LAM_OK: return "success";
    case LAM_EINVAL: return "invalid argument";
    case LAM_ENOMEM: return "out of memory";
    case LAM_EIO: return "input/output error";
    case LAM_EFORMAT: return "corrupt or unsupported file";
    case LAM_ETOOBIG: return "exceeds a size limit";
    case LAM_ESIZE: return "size mismatch";
    case LAM_ERANGE: return "value out of range";
    case LAM_ENOCONV: return "did not converge";
    case LAM_EGSL: return "numerical failure";
    case LAM_EINTERNAL: return "internal error";
    }
    return "unknown status";
}

void lam_error_clear(lam_error *err)
{
    if (!err)
        return;
    err->status = LAM_OK;
    err->sys_errno = 0;
    err->file[0] = '\0';
    err->message[0] = '\0';
}

lam_status lam_error_set(lam_error *err, lam_status status, const char *fmt, ...)
{
    if (!err)
        return status;
    err->status = status;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(err->message, sizeof err->message, fmt, ap);
    va_end(ap);
    return status;
}

lam_status lam_error_prefix(lam_error *err, lam_status status, const char *fmt, ...)
{
    if (!err)
        return status;
    char old[sizeof err->message];
    memcpy(old, err->message, sizeof old);
    old[sizeof old - 1] = '\0';
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(err->message, sizeof err->message, fmt, ap);
    va_end(ap);
    size_t cap = sizeof err->message - 1;
    size_t used = n < 0 ? 0 : ((size_t)n < cap ? (size_t)n : cap);
    err->message[used] = '\0';
    snprintf(err->message + used, sizeof err->message - used, "%s", old);
    err->status = status;
    return status;
}

lam_status lam_check_finite(lam_error *err, const char *name, double v)
{
    if (isfinite(v))
        return LAM_OK;
    return lam_error_set(err, LAM_ERANGE, "%s: expected a finite number", name);
}

lam_status lam_check_positive(lam_error *err, const char *name, double v)
{
    if (v > 0 && isfinite(v))
        return LAM_OK;
    return lam_error_set(err, LAM_ERANGE, "%s: %g is not a positive number", name, v);
}

lam_status lam_check_range(lam_error *err, const char *name, double v, double lo, double hi)
{
    if (v >= lo && v <= hi)
        return LAM_OK;
    return lam_error_set(err, LAM_ERANGE, "%s: %g is outside %g to %g", name, v, lo, hi);
}

lam_status lam_parse_number(lam_error *err, const char *name, const char *text, double lo,
                            double hi, double *out)
{
    char *end = NULL;
    errno = 0;
    double v = strtod(text, &end);
    if (end == text || *end != '\0' || errno == ERANGE || !isfinite(v))
        return lam_error_set(err, LAM_ERANGE, "%s: '%s' is not a number", name, text);
    lam_status st = lam_check_range(err, name, v, lo, hi);
    if (!st)
        *out = v;
    return st;
}

lam_status lam_parse_integer(lam_error *err, const char *name, const char *text, long lo,
                             long hi, long *out)
{
    char *end = NULL;
    errno = 0;
    long v = strtol(text, &end, 10);
    if (end == text || *end != '\0' || errno == ERANGE)
        return lam_error_set(err, LAM_ERANGE, "%s: '%s' is not a whole number", name, text);
    if (v < lo || v > hi)
        return lam_error_set(err, LAM_ERANGE, "%s: %ld is outside %ld to %ld", name, v, lo, hi);
    *out = v;
    return LAM_OK;
}

lam_status lam_parse_numbers(lam_error *err, const char *name, const char *text, char sep,
                             double lo, double hi, double *out, size_t max, size_t *count)
{
    char field[64];
    size_t n = 0;
    for (const char *p = text;; p++) {
        const char *end = strchr(p, sep);
        size_t len = end ? (size_t)(end - p) : strlen(p);
        if (n == max)
            return lam_error_set(err, LAM_ERANGE, "%s: at most %zu values", name, max);
        if (len >= sizeof field)
            return lam_error_set(err, LAM_ERANGE, "%s: '%.20s...' is not a number", name, p);
        snprintf(field, sizeof field, "%.*s", (int)len, p);
        lam_status st = lam_parse_number(err, name, field, lo, hi, &out[n]);
        if (st)
            return st;
        n++;
        if (!end)
            break;
        p = end;
    }
    *count = n;
    return LAM_OK;
}

lam_status lam_parse_range(lam_error *err, const char *name, const char *text, double lo,
                           double hi, double out[2])
{
    double v[2];
    size_t n = 0;
    if (lam_parse_numbers(err, name, text, '-', lo, hi, v, 2, &n) || n != 2 || v[1] < v[0])
        return lam_error_set(err, LAM_ERANGE, "%s: expected A-B with %g <= A <= B <= %g", name,
                             lo, hi);
    out[0] = v[0], out[1] = v[1];
    return LAM_OK;
}

void lam_error_set_file(lam_error *err, const char *file)
{
    if (!err || !file || err->file[0])
        return;
    snprintf(err->file, sizeof err->file, "%s", file);
}

lam_status lam_error_first(const lam_status *st, const lam_error *errs, size_t n,
                           lam_error *err)
{
    for (size_t i = 0; i < n; i++)
        if (st[i]) {
            if (err)
                *err = errs[i];
            return st[i];
        }
    return LAM_OK;
}

void lam_error_init_gsl(void)
{
    gsl_set_error_handler_off();
}

lam_status lam_error_gsl(lam_error *err, int gsl_status, const char *context)
{
    return lam_error_set(err, LAM_EGSL, "%s: %s", context, gsl_strerror(gsl_status));
}
