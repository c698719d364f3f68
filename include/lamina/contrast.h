/*
 * lamina/contrast.h - the image as contrast against the bare substrate.
 *
 * C_c = (B_c - I_c) / B_c per channel, in linear light, B the flat field of
 * the substrate fitted by lamina/substrate.h: positive where a flake is
 * darker than the substrate around it. Then a 3 x 3 box filter lowers the
 * pixel noise threefold before regions are cut (blur and the filter mix
 * two classes within ~2 px of an edge, which is why region statistics use
 * interior pixels only, lamina/segment.h).
 *
 * Both work in place on a lam_image's planes, in row slices on up to
 * 'threads' threads; results do not depend on the thread count.
 *
 * The segmentation then reads the contrast as a lam_contrast_map: 16-bit
 * fixed point, made in the planes' own memory (lam_contrast_compact), so
 * that the half it frees holds the segmentation's label and class maps.
 * Float planes were 144 of the 235 MB the analysis of a 12 MP image held
 * while segmenting (docs/performance.md). What is stored is the pixel's
 * light relative to the substrate's, I / B = 1 - C, in steps of 1/4096
 * (2.4e-4 of contrast), from 0 to 16: contrast never exceeds 1, while a
 * thick hBN flake on 90 nm of oxide outshines the substrate several times
 * over in one channel (a symmetric range of +-4 clipped such flakes and
 * lost a tenth of the 30-100 nm ones in the crystals harness). The step is
 * far below what a camera resolves: one 8-bit code is ~1e-2 of contrast at
 * a typical substrate level, and region means average thousands of pixels
 * whose noise dithers the rounding.
 */
#ifndef LAMINA_CONTRAST_H
#define LAMINA_CONTRAST_H

#include <stddef.h>
#include <stdint.h>
#include "lamina/error.h"
#include "lamina/image.h"
#include "lamina/substrate.h"

/* Replace the image planes by contrast (B - I) / B, the flat field sampled
 * every 16 pixels and interpolated bilinearly (it is smooth). Without
 * memory for the samples it evaluates B at every pixel instead: never
 * fails. */
void lam_contrast_in_place(lam_image *img, const lam_substrate *s, size_t threads);

/* 3 x 3 box filter of each contrast plane, in place (edges replicate).
 * LAM_ENOMEM only. */
lam_status lam_contrast_denoise(lam_image *contrast, size_t threads, lam_error *err);

/* Fixed-point steps per unit of relative light: q = I / B x
 * LAM_CONTRAST_UNIT, rounded, q in 0..65535, contrast 1 - q /
 * LAM_CONTRAST_UNIT. A pixel more than 16 times as bright as the substrate
 * (glare on dust) is clamped there. */
#define LAM_CONTRAST_UNIT 4096

typedef struct lam_contrast_map {
    size_t width, height;
    uint16_t *plane[3];    /* R, G, B, plane[c][y * width + x]: relative light q
                            * (lam_contrast_of); one allocation, plane[0] owns it. A
                            * grey image's three are equal */
    uint8_t *clip_bits;    /* the image's clip mask, taken over (lam_image.clip_bits) */
    size_t clip_stride, clipped_count;
    int block_coded;       /* lam_image_block_coded of the image: a JPEG */
} lam_contrast_map;

/* A fixed-point value as contrast: exactly 1 - q / LAM_CONTRAST_UNIT (a
 * power of two, and at most 16 significant bits), so float arithmetic on
 * it is that of float planes holding the rounded values. */
static inline float lam_contrast_of(uint16_t q)
{
    return 1.0f - (float)q * (1.0f / LAM_CONTRAST_UNIT);
}

/* The contrast of channel c at pixel k (= y * width + x). */
static inline float lam_contrast_value(const lam_contrast_map *m, size_t c, size_t k)
{
    return lam_contrast_of(m->plane[c][k]);
}

/* 1 when pixel (x, y) was saturated in the file (lam_image_clipped). */
static inline int lam_contrast_clipped(const lam_contrast_map *m, size_t x, size_t y)
{
    return m->clipped_count && lam_clip_bit(m->clip_bits, m->clip_stride, x, y);
}

/* The contrast planes of img (after lam_contrast_in_place and
 * lam_contrast_denoise) as a fixed-point map, each value rounded to the
 * nearest step, in place: the planes' memory is reused and its upper half
 * given back to the allocator. img keeps its size and file facts
 * (clipped_count too) but no planes or clip mask afterwards (plane[] and
 * clip_bits NULL). Runs on up to 'threads' threads; never fails. Release
 * with lam_contrast_map_free. */
void lam_contrast_compact(lam_image *img, lam_contrast_map *out, size_t threads);

/* Release the map's planes and clip mask; m may be NULL or empty. */
void lam_contrast_map_free(lam_contrast_map *m);

#endif
