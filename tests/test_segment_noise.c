/* test_segment_noise.c - the statistics the segmentation's thresholds are
 * measured from (lam__substrate_texture, segment_noise.c) against their
 * definition, written out here the plain way: every 7th pixel's
 * differences across 2 and 4 pixels on the substrate, sorted; the 8 x 8
 * cells' means and their neighbours' differences, sorted. The pass that
 * computes them fuses both into one walk over bands of rows on the
 * threads; the numbers must be the same to the bit, for any thread count.
 * Maps of invented contrasts: a noisy substrate, flakes, JPEG-like block
 * steps, sizes that are not multiples of 7 or 8. */
#include "check.h"
#include "segment_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static unsigned long next(unsigned long *s)
{
    *s = *s * 6364136223846793005ul + 1442695040888963407ul;
    return *s >> 33;
}

static int near_all(const lam_contrast_map *m, size_t channels, const double *zero, size_t k)
{
    for (size_t c = 0; c < channels; c++)
        if (fabsf(lam_contrast_value(m, c, k)) > zero[c])
            return 0;
    return 1;
}

static int by_value(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* One lag's sigma and 95th percentile per channel, as defined. */
static void brute_lag(const lam_contrast_map *m, size_t channels, const double *zero, size_t l,
                      double *d, double sigma[3], double p95[3])
{
    size_t w = m->width, n = w * m->height, lag = l + 1;
    for (size_t c = 0; c < 3; c++) {
        size_t count = 0;
        for (size_t k0 = 1; n >= 3 && k0 <= n - 2; k0 += 7) {
            size_t k = k0 + l, x = k % w; /* lag 2: the pixel after the sample */
            if (k >= n || x < lag || x + lag >= w || !near_all(m, channels, zero, k - lag) ||
                !near_all(m, channels, zero, k + lag))
                continue;
            d[count++] = fabs((double)m->plane[c][k + lag] - m->plane[c][k - lag]);
        }
        sigma[c] = p95[c] = 1e-3;
        if (c >= channels || count <= 20)
            continue;
        qsort(d, count, sizeof *d, by_value);
        float median = (float)d[count / 2] * (1.0f / LAM_CONTRAST_UNIT);
        float top = (float)d[count * 95 / 100] * (1.0f / LAM_CONTRAST_UNIT);
        sigma[c] = fmax(1.4826 * median, 1e-5);
        p95[c] = fmax(top, 1e-5);
    }
}

/* A cell's mean in channel c, NaN unless all its pixels are near zero. */
static float brute_cell(const lam_contrast_map *m, size_t channels, const double *zero, size_t cx,
                        size_t cy, size_t c)
{
    double sum = 0;
    for (size_t y = cy * 8; y < cy * 8 + 8; y++)
        for (size_t x = cx * 8; x < cx * 8 + 8; x++) {
            if (!near_all(m, channels, zero, y * m->width + x))
                return NAN;
            sum += lam_contrast_value(m, c, y * m->width + x);
        }
    return (float)(sum / 64);
}

static double brute_cells(const lam_contrast_map *m, size_t channels, const double *zero, size_t c,
                          double *d)
{
    size_t cw = m->width / 8, ch = m->height / 8, count = 0;
    for (size_t cy = 0; cy < ch; cy++)
        for (size_t cx = 0; cx < cw; cx++) {
            float a = brute_cell(m, channels, zero, cx, cy, c);
            float r = cx + 1 < cw ? brute_cell(m, channels, zero, cx + 1, cy, c) : NAN;
            float b = cy + 1 < ch ? brute_cell(m, channels, zero, cx, cy + 1, c) : NAN;
            if (!isnan(a) && !isnan(r))
                d[count++] = fabsf(a - r);
            if (!isnan(a) && !isnan(b))
                d[count++] = fabsf(a - b);
        }
    if (count <= 20)
        return 0;
    qsort(d, count, sizeof *d, by_value);
    return d[count * 9 / 10];
}

/* A substrate at zero with noise of 'noise' steps, flakes (rectangles of
 * a few hundred steps) and, with blocks, 8 x 8 blocks shifted by whole
 * steps as a JPEG's DC quantisation does. */
static void draw(lam_contrast_map *m, unsigned long *s, unsigned noise, int blocks)
{
    size_t w = m->width, h = m->height;
    for (size_t c = 0; c < 3; c++)
        for (size_t y = 0; y < h; y++)
            for (size_t x = 0; x < w; x++) {
                long v = LAM_CONTRAST_UNIT + (long)(next(s) % (2 * noise + 1)) - (long)noise;
                if (blocks)
                    v += 3 * ((long)((x / 8 * 7 + y / 8 * 13 + c) % 5) - 2);
                m->plane[c][y * w + x] = (uint16_t)v;
            }
    for (int f = 0; f < 6; f++) {
        size_t x0 = next(s) % w, y0 = next(s) % h, fw = 5 + next(s) % 40, fh = 5 + next(s) % 30;
        long step = 150 + (long)(next(s) % 300);
        for (size_t c = 0; c < 3; c++)
            for (size_t y = y0; y < y0 + fh && y < h; y++)
                for (size_t x = x0; x < x0 + fw && x < w; x++)
                    m->plane[c][y * w + x] = (uint16_t)(m->plane[c][y * w + x] - step);
    }
}

static void one_map(size_t w, size_t h, size_t channels, unsigned noise, int blocks,
                    unsigned long seed, size_t *wrong)
{
    lam_contrast_map m;
    memset(&m, 0, sizeof m);
    m.width = w, m.height = h;
    m.plane[0] = malloc(3 * w * h * sizeof *m.plane[0]);
    double *d = malloc((2 * w * h + 1) * sizeof *d);
    if (!check_true(m.plane[0] && d, "map allocated")) {
        free(m.plane[0]);
        free(d);
        return;
    }
    m.plane[1] = m.plane[0] + w * h, m.plane[2] = m.plane[1] + w * h;
    unsigned long s = seed;
    draw(&m, &s, noise, blocks);
    const double zero[3] = {0.02, 0.025, 0.015};
    double sigma[2][3], p95[2][3], cells[3] = {0, 0, 0};
    for (size_t l = 0; l < 2; l++)
        brute_lag(&m, channels, zero, l, d, sigma[l], p95[l]);
    for (size_t c = 0; c < channels; c++)
        cells[c] = brute_cells(&m, channels, zero, c, d);
    for (size_t threads = 1; threads <= 3; threads++) {
        lam__texture t;
        lam__substrate_texture(&m, channels, zero, threads, &t);
        for (size_t c = 0; c < 3; c++) {
            for (size_t l = 0; l < 2; l++)
                *wrong += (t.sigma[l][c] != sigma[l][c]) + (t.p95[l][c] != p95[l][c]);
            *wrong += t.cells[c] != cells[c];
        }
    }
    free(m.plane[0]);
    free(d);
}

static void texture_matches_definition(void)
{
    size_t wrong = 0;
    one_map(203, 157, 3, 30, 1, 11, &wrong);  /* JPEG-like blocks */
    one_map(203, 157, 3, 60, 0, 12, &wrong);  /* noisier, some pixels off the band */
    one_map(64, 41, 1, 20, 1, 13, &wrong);    /* grey */
    one_map(13, 9, 3, 10, 0, 14, &wrong);     /* one cell row, few samples */
    one_map(6, 5, 3, 10, 0, 15, &wrong);      /* no cell; the defaults */
    check_int((long)wrong, 0, "sigma, 95th percentile and cell texture as defined, 1-3 threads");
}

/* The statistics follow the map: more pixel noise, a larger sigma; JPEG
 * block steps, a larger cell texture (the checks above would also pass
 * for statistics that ignored the map, were both sides wrong alike). */
static void texture_follows_the_map(void)
{
    lam_contrast_map m;
    memset(&m, 0, sizeof m);
    m.width = 160, m.height = 120;
    m.plane[0] = malloc(3 * 160 * 120 * sizeof *m.plane[0]);
    if (!check_true(m.plane[0] != NULL, "map allocated"))
        return;
    m.plane[1] = m.plane[0] + 160 * 120, m.plane[2] = m.plane[1] + 160 * 120;
    const double zero[3] = {0.05, 0.05, 0.05};
    lam__texture quiet, noisy, blocky;
    unsigned long s = 21;
    draw(&m, &s, 10, 0);
    lam__substrate_texture(&m, 3, zero, 2, &quiet);
    draw(&m, &s, 40, 0);
    lam__substrate_texture(&m, 3, zero, 2, &noisy);
    draw(&m, &s, 10, 1);
    lam__substrate_texture(&m, 3, zero, 2, &blocky);
    check_true(noisy.sigma[0][0] > 3 * quiet.sigma[0][0], "4x the noise: sigma %.2e against %.2e",
               noisy.sigma[0][0], quiet.sigma[0][0]);
    check_true(blocky.cells[0] > 2 * quiet.cells[0] && quiet.cells[0] > 0,
               "block steps raise the cell texture: %.2e against %.2e", blocky.cells[0],
               quiet.cells[0]);
    free(m.plane[0]);
}

int main(void)
{
    check_begin("test_segment_noise");
    texture_matches_definition();
    texture_follows_the_map();
    return check_summary();
}
