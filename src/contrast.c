/* contrast.c - the image as contrast: C = 1 - I / B against the fitted
 * flat field B, then a light 3 x 3 box filter (lamina/contrast.h). */
#include "lamina/contrast.h"
#include "lamina/parallel.h"
#include "vector_clones.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

typedef struct contrast_ctx {
    lam_image *img;
    const float *grid;
    size_t gx, step;
    const size_t *ix; /* per column: the grid cell */
    const float *tx;  /* per column: the weight of the cell's right side */
    float *scratch;   /* per slice: 6 rows (h0, h1 of 3 channels) */
} contrast_ctx;

/* Bilinear interpolation of 1/B on the grid, then C = 1 - I/B, row by
 * row: the horizontal weights are the same for every row and the two
 * horizontally interpolated grid rows (h0, h1) the same for the 'step'
 * rows of one cell, so a pixel costs two multiply-adds per channel on
 * vector units. The float expression per pixel is the one of a direct
 * evaluation, term by term. */
LAM_VECTOR_CLONES
static void contrast_rows(size_t begin, size_t end, size_t slice, void *vctx)
{
    contrast_ctx *cc = vctx;
    lam_image *img = cc->img;
    size_t w = img->width, gx = cc->gx, step = cc->step, cell = (size_t)-1;
    float *h = cc->scratch + slice * 6 * w;
    for (size_t y = begin; y < end; y++) {
        double fy = ((double)y + 0.5) / (double)step;
        size_t j = (size_t)fy;
        float ty = (float)(fy - (double)j);
        if (j != cell) {
            cell = j;
            for (int c = 0; c < 3; c++)
                for (size_t x = 0; x < w; x++) {
                    const float *g00 = &cc->grid[(j * gx + cc->ix[x]) * 3 + (size_t)c];
                    const float *g01 = g00 + gx * 3;
                    float tx = cc->tx[x];
                    h[(2 * (size_t)c) * w + x] = (1 - tx) * g00[0] + tx * g00[3];
                    h[(2 * (size_t)c + 1) * w + x] = (1 - tx) * g01[0] + tx * g01[3];
                }
        }
        for (int c = 0; c < 3; c++) {
            float *restrict p = &img->plane[c][y * w];
            const float *restrict h0 = h + 2 * (size_t)c * w, *restrict h1 = h0 + w;
            for (size_t x = 0; x < w; x++)
                p[x] = 1.0f - p[x] * ((1 - ty) * h0[x] + ty * h1[x]);
        }
    }
}

/* Without memory for the grid: direct evaluation (slow but correct). */
static void contrast_direct(lam_image *img, const lam_substrate *s)
{
    size_t w = img->width, h = img->height;
    for (size_t y = 0; y < h; y++)
        for (size_t x = 0; x < w; x++) {
            double b[3];
            lam_substrate_eval(s, (double)x + 0.5, (double)y + 0.5, b);
            for (int c = 0; c < 3; c++) {
                float *p = &img->plane[c][y * w + x];
                *p = (float)(1.0 - *p / b[c]);
            }
        }
}

void lam_contrast_in_place(lam_image *img, const lam_substrate *s, size_t threads)
{
    const size_t step = 16;
    size_t w = img->width, h = img->height;
    size_t gx = w / step + 2, gy = h / step + 2;
    float *grid = malloc(gx * gy * 3 * sizeof *grid);
    if (!grid) {
        contrast_direct(img, s);
        return;
    }
    for (size_t j = 0; j < gy; j++)
        for (size_t i = 0; i < gx; i++) {
            double b[3];
            lam_substrate_eval(s, (double)(i * step), (double)(j * step), b);
            for (int c = 0; c < 3; c++)
                grid[(j * gx + i) * 3 + (size_t)c] = (float)(1.0 / b[c]);
        }
    size_t slices = threads < 1 ? 1 : (threads > LAM_MAX_THREADS ? LAM_MAX_THREADS : threads);
    size_t *ix = malloc(w * sizeof *ix);
    float *tx = malloc(w * sizeof *tx), *scratch = malloc(slices * 6 * w * sizeof *scratch);
    for (size_t x = 0; ix && tx && x < w; x++) {
        double fx = ((double)x + 0.5) / (double)step;
        ix[x] = (size_t)fx;
        tx[x] = (float)(fx - (double)ix[x]);
    }
    contrast_ctx cc = {img, grid, gx, step, ix, tx, scratch};
    if (ix && tx && scratch)
        lam_parallel_for(h, slices, contrast_rows, &cc);
    else /* out of memory for a few rows of scratch: the direct way */
        contrast_direct(img, s);
    free(grid);
    free(ix);
    free(tx);
    free(scratch);
}

/* Denoising runs in place, slice by slice; each slice first saves the
 * original rows just outside it (its halo), since a neighbouring slice may
 * overwrite them before they are read. */
typedef struct denoise_ctx {
    lam_image *img;
    float *halo;  /* per slice: 3 channels x 2 rows x width */
    size_t slices;
    int failed;
} denoise_ctx;

static void save_halo(size_t begin, size_t end, size_t slice, void *vctx)
{
    denoise_ctx *d = vctx;
    size_t w = d->img->width, h = d->img->height;
    for (int c = 0; c < 3; c++) {
        const float *p = d->img->plane[c];
        float *dst = d->halo + ((slice * 3 + (size_t)c) * 2) * w;
        memcpy(dst, p + (begin ? begin - 1 : 0) * w, w * sizeof *p);
        memcpy(dst + w, p + (end < h ? end : h - 1) * w, w * sizeof *p);
    }
}

/* The sums of each pixel and its two neighbours along a row (edges
 * replicate), each as (left + centre) + right; the ends apart, so that the
 * inner loop runs on vector units. */
LAM_VECTOR_CLONES
static void hsum(const float *restrict r, float *restrict dst, size_t w)
{
    if (w == 1) {
        dst[0] = r[0] + r[0] + r[0];
        return;
    }
    dst[0] = r[0] + r[0] + r[1];
    for (size_t x = 1; x + 1 < w; x++)
        dst[x] = r[x - 1] + r[x] + r[x + 1];
    dst[w - 1] = r[w - 2] + r[w - 1] + r[w - 1];
}

LAM_VECTOR_CLONES
static void denoise_rows(size_t begin, size_t end, size_t slice, void *vctx)
{
    denoise_ctx *d = vctx;
    size_t w = d->img->width;
    float *rows = malloc(3 * w * sizeof *rows);
    if (!rows) {
        d->failed = 1;
        return;
    }
    for (int c = 0; c < 3; c++) {
        float *p = d->img->plane[c];
        const float *above = d->halo + ((slice * 3 + (size_t)c) * 2) * w, *below = above + w;
        float *prev = rows, *cur = rows + w, *next = rows + 2 * w;
        hsum(above, prev, w);
        hsum(p + begin * w, cur, w);
        for (size_t y = begin; y < end; y++) {
            hsum(y + 1 < end ? p + (y + 1) * w : below, next, w);
            float *out = p + y * w;
            for (size_t x = 0; x < w; x++)
                out[x] = (prev[x] + cur[x] + next[x]) * (1.0f / 9.0f);
            float *t = prev;
            prev = cur;
            cur = next;
            next = t;
        }
    }
    free(rows);
}

lam_status lam_contrast_denoise(lam_image *img, size_t threads, lam_error *err)
{
    size_t h = img->height, slices = threads < 1 ? 1 : (threads > h ? h : threads);
    if (slices > LAM_MAX_THREADS)
        slices = LAM_MAX_THREADS;
    denoise_ctx d = {img, malloc(slices * 6 * img->width * sizeof(float)), slices, 0};
    if (!d.halo)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate denoising rows");
    lam_parallel_for(h, slices, save_halo, &d);
    lam_parallel_for(h, slices, denoise_rows, &d);
    free(d.halo);
    if (d.failed)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate denoising rows");
    return LAM_OK;
}

/* ---- the fixed-point map (lam_contrast_compact) ----
 * The three planes are one array of 3 n floats; fixed-point element i
 * takes bytes 2i, 2i + 1 of it, which lie in float element i / 2. The
 * array is converted in blocks of COMPACT_BLOCK elements: block j >= 1
 * writes over the floats of blocks j / 2 and below only, never its own,
 * so once blocks 0..d-1 are done, blocks d..2d-1 may run side by side on
 * all threads (each round doubles d). Block 0 overlaps itself and goes
 * through a buffer. */
#define COMPACT_BLOCK 16384

typedef struct compact_ctx {
    float *from;
    size_t count;   /* elements: 3 n */
    size_t first;   /* the round's first block */
} compact_ctx;

static uint16_t to_fixed(float contrast)
{
    float s = (1.0f - contrast) * (float)LAM_CONTRAST_UNIT;
    s = s > 0.0f ? s : 0.0f; /* NaN too: no undefined conversion */
    s = s < 65535.0f ? s : 65535.0f;
    return (uint16_t)(int)(s + 0.5f); /* the nearest step */
}

/* A vector loop: the clamps become selects (with -fno-trapping-math,
 * Makefile). In scalar code, with a branch per clamp, this conversion of
 * every sample took half the contrast stage of a 12 MP image. */
LAM_VECTOR_CLONES
static void to_fixed_run(const float *restrict from, uint16_t *restrict to, size_t m)
{
    for (size_t i = 0; i < m; i++)
        to[i] = to_fixed(from[i]);
}

static void compact_block(const compact_ctx *cc, size_t b)
{
    size_t i0 = b * COMPACT_BLOCK, m = cc->count - i0;
    if (m > COMPACT_BLOCK)
        m = COMPACT_BLOCK;
    const float *from = cc->from + i0;
    uint16_t *to = (uint16_t *)(void *)cc->from + i0;
    if (b > 0) {
        to_fixed_run(from, to, m);
        return;
    }
    uint16_t buffer[COMPACT_BLOCK];
    to_fixed_run(from, buffer, m);
    memcpy(to, buffer, m * sizeof *buffer);
}

static void compact_blocks(size_t begin, size_t end, size_t slice, void *vctx)
{
    (void)slice;
    const compact_ctx *cc = vctx;
    for (size_t b = cc->first + begin; b < cc->first + end; b++)
        compact_block(cc, b);
}

void lam_contrast_compact(lam_image *img, lam_contrast_map *out, size_t threads)
{
    size_t n = img->width * img->height;
    compact_ctx cc = {img->plane[0], 3 * n, 0};
    size_t blocks = (cc.count + COMPACT_BLOCK - 1) / COMPACT_BLOCK;
    compact_block(&cc, 0);
    for (size_t d = 1; d < blocks; d *= 2) {
        cc.first = d;
        lam_parallel_for((2 * d < blocks ? 2 * d : blocks) - d, threads, compact_blocks, &cc);
    }
    uint16_t *q = realloc(img->plane[0], 3 * n * sizeof *q); /* shrinks: gives the rest back */
    if (!q)
        q = (uint16_t *)(void *)img->plane[0];
    memset(out, 0, sizeof *out);
    out->width = img->width;
    out->height = img->height;
    for (int c = 0; c < 3; c++)
        out->plane[c] = q + (size_t)c * n;
    out->clip_bits = img->clip_bits;
    out->clip_stride = img->clip_stride;
    out->clipped_count = img->clipped_count;
    out->block_coded = lam_image_block_coded(img);
    img->plane[0] = img->plane[1] = img->plane[2] = NULL;
    img->clip_bits = NULL;
}

void lam_contrast_map_free(lam_contrast_map *m)
{
    if (!m)
        return;
    free(m->plane[0]);
    free(m->clip_bits);
    memset(m, 0, sizeof *m);
}
