/*
 * lamina/png.h - writing PNG files (8-bit RGB/RGBA, 8/16-bit grey).
 *
 * Pixels are interleaved, row-major, top-left origin, already encoded (the
 * caller applies any transfer curve). Files are written atomically
 * (lamina/outfile.h). Compression favours speed: result images are large.
 * 8-bit files are compressed in bands of rows on all cores, each band as
 * literals and runs of one byte with Huffman codes of its own (a standard
 * deflate stream any PNG reader takes; src/deflate_runs.h); the bytes are
 * the same for any thread count. 16-bit files go through libpng.
 */
#ifndef LAMINA_PNG_H
#define LAMINA_PNG_H

#include <stddef.h>
#include <stdint.h>
#include "lamina/error.h"

/* channels: 3 (RGB) or 4 (RGBA); rgb holds width*height*channels bytes. */
lam_status lam_png_save_rgb8(const char *path, const uint8_t *rgb, size_t width,
                             size_t height, int channels, lam_error *err);

/* 8-bit grey; grey holds width*height bytes. */
lam_status lam_png_save_grey8(const char *path, const uint8_t *grey, size_t width,
                              size_t height, lam_error *err);

/* 16-bit grey (host-order uint16_t samples) or RGB when channels == 3. */
lam_status lam_png_save_16(const char *path, const uint16_t *px, size_t width,
                           size_t height, int channels, lam_error *err);

#endif
