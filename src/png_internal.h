/* png_internal.h - shared between the PNG reader and writers (not public). */
#ifndef LAMINA_PNG_INTERNAL_H
#define LAMINA_PNG_INTERNAL_H

#include <png.h>
#include <setjmp.h>
#include <stddef.h>
#include <stdint.h>
#include "lamina/error.h"

/* 8-bit grey (1), RGB (3) or RGBA (4), compressed in fixed bands on all
 * cores (png_deflate.c): every 8-bit PNG lamina writes. */
lam_status lam__png_save_parallel(const char *path, const uint8_t *pixels, size_t width,
                                  size_t height, int channels, lam_error *err);

/* libpng's error pointer for reading and writing: the callbacks below keep
 * libpng's message here (libpng would print it otherwise) and jump back to
 * the caller's setjmp (png_jmpbuf), or to *inner while it is set (a
 * decoding callback that must return, rowpipe.h). Warnings (unknown
 * chunks, benign profile issues) are not failures and are dropped. */
typedef struct lam__png_errctx {
    char msg[200];
    jmp_buf *inner;
} lam__png_errctx;

void lam__png_on_error(png_structp png, png_const_charp msg);
void lam__png_on_warning(png_structp png, png_const_charp msg);

#endif
