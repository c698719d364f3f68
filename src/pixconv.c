/* pixconv.c - decoded samples to linear planes through per-channel tables. */
#include "pixconv.h"

#include <stdlib.h>
#include <string.h>

lam_status lam__pixconv_init(lam__pixconv *pc, int depth, int chans, lam_error *err)
{
    memset(pc, 0, sizeof *pc);
    if ((depth != 8 && depth != 16) || (chans != 1 && chans != 3))
        return lam_error_set(err, LAM_EINTERNAL, "no conversion for %d-bit %d-channel samples",
                             depth, chans);
    pc->depth = depth;
    pc->chans = chans;
    pc->levels = (size_t)1 << depth;
    pc->clip_code = (unsigned)(pc->levels - 1);
    pc->table = malloc(3 * pc->levels * sizeof *pc->table);
    if (!pc->table)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the %d-bit transfer tables",
                             depth);
    for (int c = 0; c < 3; c++)
        pc->lut[c] = pc->table + (size_t)c * pc->levels;
    return LAM_OK;
}

void lam__pixconv_fill(lam__pixconv *pc, const lam_transfer *t)
{
    double top = (double)(pc->levels - 1);
    for (size_t i = 0; i < pc->levels; i++)
        pc->lut[0][i] = (float)lam_transfer_decode(t, (double)i / top);
    pc->lut[1] = pc->lut[2] = pc->lut[0];
}

/* One loop per sample size, so that the inner loop has no branch on it;
 * the row's clip bits gathered a byte (8 pixels) at a time. */
#define CONVERT_ROW(TYPE)                                                                  \
    do {                                                                                   \
        const TYPE *r = row;                                                               \
        for (size_t x0 = 0; x0 < w; x0 += 8) {                                             \
            size_t n = w - x0 < 8 ? w - x0 : 8;                                            \
            unsigned byte = 0;                                                             \
            for (size_t b = 0, x = x0; b < n; b++, x++) {                                  \
                const TYPE *p = r + x * stride;                                            \
                unsigned v0 = p[0], v1 = p[o1], v2 = p[o2];                                \
                img->plane[0][base + x] = pc->lut[0][v0];                                  \
                img->plane[1][base + x] = pc->lut[1][v1];                                  \
                img->plane[2][base + x] = pc->lut[2][v2];                                  \
                unsigned clip = (v0 >= top) | (v1 >= top) | (v2 >= top);                   \
                byte |= clip << b;                                                         \
                clipped += clip;                                                           \
                if (d8) {                                                                  \
                    uint8_t *d = d8 + (base + x) * 3;                                      \
                    d[0] = (uint8_t)v0, d[1] = (uint8_t)v1, d[2] = (uint8_t)v2;            \
                }                                                                          \
            }                                                                              \
            cb[x0 / 8] = (uint8_t)byte;                                                    \
        }                                                                                  \
    } while (0)

size_t lam__pixconv_row_counted(const lam__pixconv *pc, lam_image *img, size_t y,
                                const void *row, size_t stride)
{
    size_t w = img->width, base = y * w, clipped = 0;
    size_t o1 = pc->chans == 3 ? 1 : 0, o2 = pc->chans == 3 ? 2 : 0; /* grey: replicated */
    unsigned top = pc->clip_code;
    uint8_t *d8 = pc->depth == 8 ? img->display8 : NULL;
    uint8_t *cb = img->clip_bits + y * img->clip_stride;
    if (pc->depth == 8)
        CONVERT_ROW(uint8_t);
    else
        CONVERT_ROW(uint16_t);
    return clipped;
}

void lam__pixconv_row(const lam__pixconv *pc, lam_image *img, size_t y, const void *row,
                      size_t stride)
{
    img->clipped_count += lam__pixconv_row_counted(pc, img, y, row, stride);
}

void lam__pixconv_codes_row(lam_image *img, size_t y, const uint8_t *row, int chans)
{
    uint8_t *d = img->display8 + y * img->width * 3;
    if (chans == 3)
        memcpy(d, row, img->width * 3);
    else
        for (size_t x = 0; x < img->width; x++)
            d[3 * x] = d[3 * x + 1] = d[3 * x + 2] = row[x];
}

#undef CONVERT_ROW

size_t lam__pixconv_rows(const lam__pixconv *pc, lam_image *img, size_t y0, size_t rows,
                         const void *codes, size_t row_bytes, size_t stride)
{
    size_t clipped = 0;
    for (size_t i = 0; i < rows; i++)
        clipped += lam__pixconv_row_counted(pc, img, y0 + i, (const uint8_t *)codes + i * row_bytes,
                                            stride);
    return clipped;
}

/* One row y from its 8-bit RGB codes p: planes from the LUTs, and the
 * row's clip bits a byte (8 pixels) at a time, so that no pixel waits on
 * the previous one's bit. */
static size_t rgb8_row(const lam__pixconv *pc, lam_image *img, size_t y, const uint8_t *p)
{
    const float *l0 = pc->lut[0], *l1 = pc->lut[1], *l2 = pc->lut[2];
    unsigned top = pc->clip_code;
    size_t w = img->width, clipped = 0;
    float *o0 = img->plane[0] + y * w, *o1 = img->plane[1] + y * w, *o2 = img->plane[2] + y * w;
    uint8_t *cb = img->clip_bits + y * img->clip_stride; /* the row's own bytes */
    for (size_t x0 = 0; x0 < w; x0 += 8) {
        size_t n = w - x0 < 8 ? w - x0 : 8;
        unsigned byte = 0;
        for (size_t b = 0; b < n; b++) {
            const uint8_t *q = p + (x0 + b) * 3;
            o0[x0 + b] = l0[q[0]];
            o1[x0 + b] = l1[q[1]];
            o2[x0 + b] = l2[q[2]];
            unsigned clip = (q[0] >= top) | (q[1] >= top) | (q[2] >= top);
            byte |= clip << b;
            clipped += clip;
        }
        cb[x0 / 8] = (uint8_t)byte;
    }
    return clipped;
}

size_t lam__pixconv_rgb8_strip(const lam__pixconv *pc, lam_image *img, size_t y0,
                               size_t rows, const uint8_t *codes)
{
    size_t clipped = 0, row_bytes = img->width * 3;
    for (size_t i = 0; i < rows; i++)
        clipped += rgb8_row(pc, img, y0 + i, codes + i * row_bytes);
    return clipped;
}

void lam__pixconv_clear(lam__pixconv *pc)
{
    free(pc->table);
    memset(pc, 0, sizeof *pc);
}
