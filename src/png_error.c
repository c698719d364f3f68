/* png_error.c - libpng error and warning callbacks, one set for reading and
 * writing: the message goes into the caller's context, nothing is printed. */
#include "png_internal.h"

#include <stdio.h>

void lam__png_on_error(png_structp png, png_const_charp msg)
{
    lam__png_errctx *ctx = png_get_error_ptr(png);
    if (ctx)
        snprintf(ctx->msg, sizeof ctx->msg, "%s", msg);
    if (ctx && ctx->inner)
        longjmp(*ctx->inner, 1);
    png_longjmp(png, 1);
}

void lam__png_on_warning(png_structp png, png_const_charp msg)
{
    (void)png;
    (void)msg;
}
