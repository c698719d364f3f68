/* png_internal.h - shared between the PNG writers (not public). */
#ifndef LAMINA_PNG_INTERNAL_H
#define LAMINA_PNG_INTERNAL_H

#include <stddef.h>
#include <stdint.h>
#include "lamina/error.h"

/* 8-bit grey (1), RGB (3) or RGBA (4), compressed in fixed bands on all cores. */
lam_status lam__png_save_parallel(const char *path, const uint8_t *pixels, size_t width,
                                  size_t height, int channels, lam_error *err);

#endif
