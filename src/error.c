/* error.c - status phrases and the caller-supplied error record. */
#include "lamina/error.h"

#include <stdarg.h>
#include <stdio.h>
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

void lam_error_set_file(lam_error *err, const char *file)
{
    if (!err || !file || err->file[0])
        return;
    snprintf(err->file, sizeof err->file, "%s", file);
}

void lam_error_init_gsl(void)
{
    gsl_set_error_handler_off();
}

lam_status lam_error_gsl(lam_error *err, int gsl_status, const char *context)
{
    return lam_error_set(err, LAM_EGSL, "%s: %s", context, gsl_strerror(gsl_status));
}
