/*
 * lamina/image.h - images in linear light, and loading them from PNG/JPEG.
 *
 * A lam_image holds three planes (R, G, B) of float, linear light, 0..1 of
 * full scale, row-major, origin top-left: pixel (x, y) of channel c is
 * plane[c][y * width + x]. Grey files are replicated into all three planes.
 * A per-pixel clip mask marks pixels where any channel reached the top code
 * value of the file (saturated: their contrast is not trustworthy).
 *
 * Ownership: lam_image_alloc / lam_image_load return an image the caller
 * releases with lam_image_free (NULL is safe). On failure nothing is
 * allocated and *out is left untouched.
 *
 * Files are treated as hostile: dimensions and the pixel count are checked
 * against lam_load_options.max_pixels before any pixel buffer is allocated;
 * truncated or corrupt data gives LAM_EFORMAT with a message, never a crash.
 */
#ifndef LAMINA_IMAGE_H
#define LAMINA_IMAGE_H

#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include "lamina/error.h"
#include "lamina/transfer.h"

#define LAM_IMAGE_DEFAULT_MAX_PIXELS ((size_t)100000000) /* 100 megapixels */

typedef enum lam_file_kind {
    LAM_FILE_UNKNOWN = 0,
    LAM_FILE_PNG,
    LAM_FILE_JPEG
} lam_file_kind;

typedef struct lam_image {
    size_t width, height;
    float *plane[3];       /* R, G, B; one allocation, plane[0] owns it */
    uint8_t *clipped;      /* width*height flags, 1 = saturated */
    size_t clipped_count;
    int bit_depth;         /* of the source file: 8 or 16 */
    int source_channels;   /* 1 grey or 3 colour in the file */
    lam_file_kind kind;
    lam_transfer transfer; /* the curve actually used to linearise */
    uint8_t *display8;     /* the file's 8-bit RGB codes, interleaved, when asked for
                            * (lam_load_options.keep_display8) and the file is 8-bit;
                            * owned (a caller may take it and set it to NULL) */
} lam_image;

typedef struct lam_load_options {
    lam_transfer transfer; /* LAM_TRANSFER_AUTO: sRGB for 8 bit, linear for 16 bit */
    size_t max_pixels;     /* 0 means LAM_IMAGE_DEFAULT_MAX_PIXELS */
    int keep_display8;     /* also keep the 8-bit codes (for drawing reports) */
} lam_load_options;

/* Default options: automatic transfer curve, default pixel limit. */
lam_load_options lam_load_options_default(void);

/* Allocate a zeroed width x height image (both >= 1) with its clip mask. */
lam_status lam_image_alloc(size_t width, size_t height, lam_image **out, lam_error *err);

void lam_image_free(lam_image *img);

/* Guess a file's kind from its first bytes (magic numbers, not the name). */
lam_file_kind lam_file_sniff(const unsigned char *head, size_t n);

/* Load a PNG or JPEG file into linear light. The error record names the
 * file. LAM_EIO when it cannot be read, LAM_EFORMAT when it is not a
 * supported image or is damaged, LAM_ETOOBIG above the pixel limit. */
lam_status lam_image_load(const char *path, const lam_load_options *opt,
                          lam_image **out, lam_error *err);

/* The same from an open stream (read from its current position); 'name'
 * is used in messages. The stream is not closed. */
lam_status lam_image_load_stream(FILE *fp, const char *name, const lam_load_options *opt,
                                 lam_image **out, lam_error *err);

/* Check width*height against a limit with overflow-safe arithmetic. */
lam_status lam_image_check_size(size_t width, size_t height, size_t max_pixels,
                                const char *what, lam_error *err);

#endif
