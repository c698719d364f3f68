/* pixconv.h - decoded samples to linear planes (internal to the image
 * loaders): per-channel lookup tables, row conversion, the clip mask and
 * the kept 8-bit copy. The loaders decode; this file only converts, so no
 * loader depends on another. */
#ifndef LAMINA_PIXCONV_H
#define LAMINA_PIXCONV_H

#include <stddef.h>
#include "lamina/image.h"

typedef struct lam__pixconv {
    int depth;          /* 8 or 16 bits per sample */
    int chans;          /* colour samples per pixel: 1 grey or 3 RGB */
    size_t levels;      /* 2^depth table entries */
    unsigned clip_code; /* a sample at or above this is saturated (default levels-1) */
    float *lut[3];      /* per channel: code -> linear light; lut[c] may alias lut[0] */
    float *table;       /* the allocation behind lut[] (3 * levels floats) */
} lam__pixconv;

/* Allocate the tables (filled with nothing yet) for 8- or 16-bit samples
 * of 1 or 3 channels. */
lam_status lam__pixconv_init(lam__pixconv *pc, int depth, int chans, lam_error *err);

/* Fill every channel's table from a named curve (AUTO counts as sRGB). */
void lam__pixconv_fill(lam__pixconv *pc, const lam_transfer *t);

/* Convert image row y from 'row': width pixels of 'stride' samples each
 * (stride >= chans; samples past chans, such as alpha, are skipped),
 * uint8_t for 8-bit or host-order uint16_t for 16-bit. Writes the planes
 * (grey replicated), the clip mask and count, and img->display8 when it is
 * allocated and the samples are 8-bit. */
void lam__pixconv_row(const lam__pixconv *pc, lam_image *img, size_t y, const void *row,
                      size_t stride);

/* The same, returning the row's clipped pixels instead of adding them to
 * img->clipped_count: for rows converted on several threads at once
 * (rowpipe.h), which add them up themselves. */
size_t lam__pixconv_row_counted(const lam__pixconv *pc, lam_image *img, size_t y, const void *row,
                                size_t stride);

/* Rows y0 .. y0+rows-1 by lam__pixconv_row_counted, row i at codes + i *
 * row_bytes; returns their clipped pixels. */
size_t lam__pixconv_rows(const lam__pixconv *pc, lam_image *img, size_t y0, size_t rows,
                         const void *codes, size_t row_bytes, size_t stride);

/* Row y of 8-bit samples (chans 1 or 3) into img->display8 alone: the
 * codes copied, grey replicated into R, G and B (display8_only loads). */
void lam__pixconv_codes_row(lam_image *img, size_t y, const uint8_t *row, int chans);

/* Image rows y0 .. y0+rows-1 of the planes and clip mask from 'codes'
 * (those rows' 8-bit RGB samples, interleaved: img->display8 + y0*width*3,
 * or a strip buffer); returns their clipped pixels (img->clipped_count
 * untouched: rowpipe.h adds them up). */
size_t lam__pixconv_rgb8_strip(const lam__pixconv *pc, lam_image *img, size_t y0, size_t rows,
                               const uint8_t *codes);

void lam__pixconv_clear(lam__pixconv *pc);

#endif
