/* lamina/jpeg.h - writing 8-bit RGB JPEG files atomically (libjpeg-turbo). */
#ifndef LAMINA_JPEG_H
#define LAMINA_JPEG_H

#include <stddef.h>
#include <stdint.h>
#include "lamina/error.h"

/* rgb: width*height*3 bytes, interleaved; quality 1..100; libjpeg's
 * default chroma subsampling (4:2:0), as a camera writes. */
lam_status lam_jpeg_save_rgb8(const char *path, const uint8_t *rgb, size_t width,
                              size_t height, int quality, lam_error *err);

/* px: width*height words 0x00RRGGBB (cairo's RGB24 pixels), without
 * chroma subsampling (4:4:4), so that 1-pixel coloured lines and small
 * text keep their colour; quality 1..100. */
lam_status lam_jpeg_save_xrgb32(const char *path, const uint32_t *px, size_t width,
                                size_t height, int quality, lam_error *err);

#endif
