/* segment_noise.c - what the segmentation's thresholds are measured from:
 * the neighbour differences and the 8 x 8 cells' texture of the bare
 * substrate (lam__substrate_texture, segment_internal.h).
 *
 * Both come from one pass over the map, in bands of CELL rows on the
 * threads: each row's pixels near zero contrast are marked once (in every
 * channel, a vector loop), then the row gives its difference samples and
 * adds into its band's column sums, from which the cells' means come. The
 * two statistics were two passes over the whole map, the samples read
 * pixel by pixel with a test per end; the numbers are the same (counts
 * and whole-number sums, in any order). */
#include "segment_internal.h"
#include "lamina/parallel.h"
#include "vector_clones.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define SAMPLE_STRIDE 7 /* every 7th pixel estimates the neighbour noise */
#define CELL 8
#define STEP_BINS 65536 /* every difference of two map values, in steps */
#define DIFF_BINS (2 * 3 * STEP_BINS) /* [lag][channel][difference] */

/* ---- order statistics ----
 * Of non-negative floats by their bit patterns, which order like the
 * values: the k-th smallest (0-based), as a full sort would place it, is
 * found exactly in linear time from two 16-bit histograms, of the high
 * halves and then of the low halves within the chosen high bin. */
#define HALF_BINS 65536

/* The bin of hist holding the k-th value (k below the total count: the
 * float halves' HALF_BINS or the step differences' STEP_BINS), given
 * *below values before the first bin; *below becomes those before it. */
static uint32_t bin_of(const uint32_t *hist, size_t k, size_t *below)
{
    uint32_t bin = 0;
    while (*below + hist[bin] <= k)
        *below += hist[bin++];
    return bin;
}

static float from_halves(uint32_t hi, uint32_t lo)
{
    uint32_t bits = hi << 16 | lo;
    float out;
    memcpy(&out, &bits, sizeof out);
    return out;
}

static uint32_t bits_of(float v)
{
    uint32_t b;
    memcpy(&b, &v, sizeof b);
    return b;
}

/* The k-th smallest of m non-negative floats; 'hist' holds HALF_BINS counts. */
static float select_nonneg(const float *v, size_t m, size_t k, uint32_t *hist)
{
    size_t below = 0;
    memset(hist, 0, HALF_BINS * sizeof *hist);
    for (size_t i = 0; i < m; i++)
        hist[bits_of(v[i]) >> 16]++;
    uint32_t hi = bin_of(hist, k, &below);
    memset(hist, 0, HALF_BINS * sizeof *hist);
    for (size_t i = 0; i < m; i++)
        if (bits_of(v[i]) >> 16 == hi)
            hist[bits_of(v[i]) & 0xffff]++;
    return from_halves(hi, bin_of(hist, k, &below));
}

/* ---- the substrate's pixels ----
 * The map values near zero contrast, per channel: steps lo..hi (empty when
 * lo > hi). |contrast| grows both ways from step LAM_CONTRAST_UNIT (zero
 * contrast), so the steps that pass the test |contrast| <= zero[c] form
 * one interval; it is found with that same test. */
typedef struct zero_band {
    uint32_t lo[3], hi[3];
} zero_band;

static zero_band near_band(const double *zero)
{
    zero_band z;
    for (size_t c = 0; c < 3; c++) {
        z.lo[c] = 1, z.hi[c] = 0;
        for (uint32_t q = 0; q < STEP_BINS; q++)
            if (!(fabsf(lam_contrast_of((uint16_t)q)) > zero[c])) {
                if (z.lo[c] > z.hi[c])
                    z.lo[c] = q;
                z.hi[c] = q;
            }
    }
    return z;
}

/* near[x] &= 1 where channel row q lies within lo..hi (a non-empty band).
 * One unsigned comparison: q - lo wraps above hi - lo when q < lo. */
LAM_VECTOR_CLONES
static void near_channel(const uint16_t *restrict q, size_t w, uint32_t lo, uint32_t hi,
                         uint8_t *restrict near)
{
    for (size_t x = 0; x < w; x++)
        near[x] &= (uint32_t)q[x] - lo <= hi - lo;
}

/* ---- the pass ---- */
typedef struct texture_job {
    const lam_contrast_map *img;
    size_t channels, cw, ch; /* cells across and down */
    zero_band z;
    uint32_t *hist;          /* per slice: DIFF_BINS counts (slice 0's are the result's) */
    size_t (*m)[2];          /* per slice: samples per lag */
    uint8_t *near;           /* per slice: a row's marks, then its band's columns' (2 x w) */
    uint32_t *sums;          /* per slice: its band's column sums per channel (3 x w) */
    float *mean;             /* every cell's mean per channel, NaN off the substrate */
} texture_job;

/* Row y's pixels near zero contrast in every channel. */
static void mark_row(const texture_job *j, size_t y, uint8_t *near)
{
    size_t w = j->img->width;
    memset(near, 1, w);
    for (size_t c = 0; c < j->channels; c++) {
        if (j->z.lo[c] > j->z.hi[c]) {
            memset(near, 0, w);
            return;
        }
        near_channel(j->img->plane[c] + y * w, w, j->z.lo[c], j->z.hi[c], near);
    }
}

/* Row y's samples at one lag (lag index l: lag l + 1). Sample j of the
 * image lies at pixel 1 + SAMPLE_STRIDE j (row-major index k), and its
 * lag-2 companion one pixel after it; each counts the differences across
 * it in every channel when both ends lie in its row and near zero. */
static void sample_row(const texture_job *j, size_t y, size_t l, const uint8_t *near,
                       uint32_t *hist, size_t *m)
{
    size_t w = j->img->width, lag = l + 1, k0 = y * w;
    size_t x = (SAMPLE_STRIDE - k0 % SAMPLE_STRIDE + lag) % SAMPLE_STRIDE; /* k0 + x = lag mod 7 */
    if (x < lag)
        x += SAMPLE_STRIDE;
    for (; x + lag < w; x += SAMPLE_STRIDE) {
        if (!(near[x - lag] & near[x + lag]))
            continue;
        for (size_t c = 0; c < j->channels; c++) {
            const uint16_t *q = j->img->plane[c] + k0;
            int32_t d = (int32_t)q[x + lag] - q[x - lag];
            hist[(l * 3 + c) * STEP_BINS + (uint32_t)abs(d)]++;
        }
        m[l]++;
    }
}

/* Row y's pixels into its band's column sums per channel (whole steps:
 * exact) and column marks: vector loops over the row. */
LAM_VECTOR_CLONES
static void column_add(const uint16_t *restrict q, size_t w, uint32_t *restrict sum)
{
    for (size_t x = 0; x < w; x++)
        sum[x] += q[x];
}

LAM_VECTOR_CLONES
static void column_and(const uint8_t *restrict near, size_t w, uint8_t *restrict all)
{
    for (size_t x = 0; x < w; x++)
        all[x] &= near[x];
}

/* A band's cells' means from its column sums: a sum of the pixels'
 * contrasts (1 - q / UNIT) in double is exact, so this is that mean; NaN
 * unless every pixel of the cell is near zero. */
static void cell_means(const texture_job *j, const uint8_t *all, const uint32_t *sums,
                       float *mean)
{
    size_t w = j->img->width;
    for (size_t cx = 0; cx < j->cw; cx++) {
        uint8_t near = 1;
        for (size_t x = cx * CELL; x < (cx + 1) * CELL; x++)
            near &= all[x];
        for (size_t c = 0; c < 3; c++) {
            uint32_t sum = 0;
            for (size_t x = cx * CELL; c < j->channels && x < (cx + 1) * CELL; x++)
                sum += sums[c * w + x];
            float v = c < j->channels
                          ? (float)((CELL * CELL - sum / (double)LAM_CONTRAST_UNIT) / (CELL * CELL))
                          : 0;
            mean[cx * 3 + c] = near ? v : NAN;
        }
    }
}

/* Bands b0..b1 - 1 of CELL rows (the last may be shorter and hold no
 * cells: it is sampled only). */
static void texture_bands(size_t b0, size_t b1, size_t slice, void *vjob)
{
    const texture_job *j = vjob;
    size_t w = j->img->width, h = j->img->height;
    uint8_t *near = j->near + slice * 2 * w, *all = near + w;
    uint32_t *hist = j->hist + slice * DIFF_BINS, *sums = j->sums + slice * 3 * w;
    for (size_t b = b0; b < b1; b++) {
        int cells = b < j->ch;
        memset(all, 1, w);
        memset(sums, 0, 3 * w * sizeof *sums);
        for (size_t y = b * CELL; y < (b + 1) * CELL && y < h; y++) {
            mark_row(j, y, near);
            sample_row(j, y, 0, near, hist, j->m[slice]);
            sample_row(j, y, 1, near, hist, j->m[slice]);
            for (size_t c = 0; cells && c < j->channels; c++)
                column_add(j->img->plane[c] + y * w, w, sums + c * w);
            if (cells)
                column_and(near, w, all);
        }
        if (cells)
            cell_means(j, all, sums, j->mean + b * j->cw * 3);
    }
}

/* ---- the statistics ---- */

/* The rank of quantile q among m samples: the median, the 95th percentile. */
static size_t rank_of(size_t q, size_t m)
{
    return q == 0 ? m / 2 : m * 95 / 100;
}

/* The k-th smallest difference (0-based) counted in hist, in contrast. */
static float kth_difference(const uint32_t *hist, size_t k)
{
    size_t below = 0;
    return (float)bin_of(hist, k, &below) * (1.0f / LAM_CONTRAST_UNIT);
}

static void difference_stats(const uint32_t *hist, const size_t m[2], size_t channels,
                             lam__texture *out)
{
    for (size_t l = 0; l < 2; l++)
        for (size_t c = 0; c < 3; c++)
            out->sigma[l][c] = out->p95[l][c] = 1e-3;
    for (size_t l = 0; l < 2; l++)
        for (size_t c = 0; c < channels && m[l] > 20; c++) {
            const uint32_t *h = hist + (l * 3 + c) * STEP_BINS;
            out->sigma[l][c] = fmax(1.4826 * kth_difference(h, rank_of(0, m[l])), 1e-5);
            out->p95[l][c] = fmax(kth_difference(h, rank_of(1, m[l])), 1e-5);
        }
}

/* The 90th percentile of |differences| of adjacent cells' means (right
 * and below), both on the substrate, per channel. */
static void cell_texture(const float *mean, size_t cw, size_t ch, size_t channels, double *out)
{
    size_t m = 0;
    float *d = malloc((2 * cw * ch + 1) * sizeof *d);
    uint32_t *hist = malloc(HALF_BINS * sizeof *hist);
    for (size_t c = 0; c < channels && d && hist; c++) {
        m = 0;
        for (size_t i = 0; i < cw * ch; i++) {
            float a = mean[i * 3 + c], r = (i + 1) % cw ? mean[(i + 1) * 3 + c] : NAN;
            float b = i + cw < cw * ch ? mean[(i + cw) * 3 + c] : NAN;
            if (!isnan(a) && !isnan(r))
                d[m++] = fabsf(a - r);
            if (!isnan(a) && !isnan(b))
                d[m++] = fabsf(a - b);
        }
        if (m > 20)
            out[c] = select_nonneg(d, m, m * 9 / 10, hist);
    }
    free(hist);
    free(d);
}

/* The pass's scratch: per slice a histogram (slice 0's zeroed, the others
 * too: counts are added), marks and sums; the cells' means. */
static int texture_alloc(texture_job *j, size_t slices)
{
    size_t w = j->img->width, cells = j->cw * j->ch;
    j->hist = calloc(slices * DIFF_BINS, sizeof *j->hist);
    j->m = calloc(slices, sizeof *j->m);
    j->near = malloc(slices * 2 * w);
    j->sums = malloc(slices * 3 * w * sizeof *j->sums);
    j->mean = malloc((cells ? cells : 1) * 3 * sizeof *j->mean);
    return j->hist && j->m && j->near && j->sums && j->mean;
}

static void texture_free(texture_job *j)
{
    free(j->hist);
    free(j->m);
    free(j->near);
    free(j->sums);
    free(j->mean);
}

void lam__substrate_texture(const lam_contrast_map *img, size_t channels, const double zero[3],
                            size_t threads, lam__texture *out)
{
    texture_job j = {img, channels, img->width / CELL, img->height / CELL, near_band(zero),
                     NULL, NULL, NULL, NULL, NULL};
    size_t bands = (img->height + CELL - 1) / CELL, slices = lam_parallel_slices(bands, threads);
    size_t m[2] = {0, 0};
    for (size_t c = 0; c < 3; c++)
        out->cells[c] = 0;
    if (!texture_alloc(&j, slices)) { /* the defaults: thresholds from the prior alone */
        texture_free(&j);
        difference_stats(NULL, m, 0, out);
        return;
    }
    lam_parallel_for(bands, threads, texture_bands, &j);
    for (size_t s = 1; s < slices; s++) /* counts add exactly: the same as one pass */
        for (size_t b = 0; b < DIFF_BINS; b++)
            j.hist[b] += j.hist[s * DIFF_BINS + b];
    for (size_t s = 0; s < slices; s++)
        m[0] += j.m[s][0], m[1] += j.m[s][1];
    difference_stats(j.hist, m, channels, out);
    cell_texture(j.mean, j.cw, j.ch, channels, out->cells);
    texture_free(&j);
}
