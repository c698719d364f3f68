/* synth_error.c - the message of the last failure (one per thread). */
#include "synth_internal.h"

#include <stdarg.h>

static _Thread_local char message[512];

int synth_fail(const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(message, sizeof message, fmt, ap);
    va_end(ap);
    return -1;
}

const char *synth_error(void)
{
    return message[0] ? message : "no error";
}
