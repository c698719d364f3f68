/* test_contrast_map.c - the fixed-point contrast map (lam_contrast_compact,
 * lamina/contrast.h): every value within half a step of the float
 * contrast it replaces, the clamp beyond the range, the same map for any
 * thread count, and the image's clip mask and file facts carried over.
 * The contrasts are a sweep chosen for the test (no optics): from the
 * deepest a camera can show (1, no light) through the substrate (0) to
 * flakes far brighter than it (hBN on 90 nm of oxide reaches -4 in one
 * channel; the map must hold that, a symmetric +-4 range did not). */
#include "check.h"
#include "lamina/contrast.h"

#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#ifdef __GLIBC__
#include <malloc.h>
#endif

#define STEP (1.0 / LAM_CONTRAST_UNIT)
#define LOWEST (1.0 - 65535.0 * STEP) /* the map's floor, ~ -15 */

/* Pixel k's contrast in channel c: a sweep over [-17, 1.25) that
 * includes exact steps, halves between steps and values past both ends
 * (above 1 cannot come from light, but the map must not wrap). */
static float sweep(size_t k, int c)
{
    double t = (double)((k * 7919 + (size_t)c * 104729) % 182000) / 182000.0;
    if (k % 5 == 0) /* an exact half step: rounding, not truncation */
        return (float)(1.0 - (floor(t * 60000) + 0.5) * STEP);
    return (float)(-17.0 + 18.25 * t);
}

/* A w x h image holding the sweep, with a few clipped pixels. */
static lam_image *sweep_image(size_t w, size_t h)
{
    lam_image *img = NULL;
    lam_error err;
    if (lam_image_alloc(w, h, &img, &err))
        return NULL;
    for (size_t k = 0; k < w * h; k++)
        for (int c = 0; c < 3; c++)
            img->plane[c][k] = sweep(k, c);
    memset(img->clip_bits, 0, h * img->clip_stride);
    img->clip_bits[0] = 0x05; /* pixels (0, 0) and (2, 0) */
    img->clip_bits[(h - 1) * img->clip_stride] = 0x80; /* (7, h - 1) */
    img->clipped_count = 3;
    img->jpeg_dc_step[0] = 1.5; /* as a JPEG's */
    return img;
}

/* Every value against the float it replaced: within half a step (plus
 * the float product's rounding, a few units in the last place), or at the
 * floor or ceiling beyond them. */
static void values(size_t w, size_t h, size_t threads)
{
    lam_image *img = sweep_image(w, h);
    if (!check_true(img != NULL, "%zux%zu sweep allocated", w, h))
        return;
    lam_contrast_map m;
    lam_contrast_compact(img, &m, threads);
    size_t bad = 0, clamped = 0, n = w * h;
    double worst = 0;
    for (size_t k = 0; k < n; k++)
        for (int c = 0; c < 3; c++) {
            double want = sweep(k, c), got = lam_contrast_value(&m, (size_t)c, k);
            if (want < LOWEST || want > 1) {
                clamped++;
                bad += got != (want < LOWEST ? LOWEST : 1.0);
                continue;
            }
            worst = fmax(worst, fabs(got - want));
            /* the rounding's half step, and the float product's own rounding */
            bad += fabs(got - want) > 0.5 * STEP + 4 * FLT_EPSILON * (1 + fabs(want));
        }
    check_true(bad == 0 && clamped > 0,
               "%zux%zu, %zu threads: every value within half a step (%.3g) of its contrast, "
               "worst %.3g; %zu beyond the range at its ends", w, h, threads, 0.5 * STEP, worst,
               clamped);
    check_true(img->plane[0] == NULL && img->clip_bits == NULL && m.width == w && m.height == h,
               "the image gives its planes and clip mask to the map");
    check_true(m.clipped_count == 3 && lam_contrast_clipped(&m, 0, 0) &&
                   !lam_contrast_clipped(&m, 1, 0) && lam_contrast_clipped(&m, 2, 0) &&
                   lam_contrast_clipped(&m, 7, h - 1) && m.block_coded,
               "clipped pixels and the JPEG's block coding carried over");
#ifdef __GLIBC__
    check_true(malloc_usable_size(m.plane[0]) < 3 * n * sizeof(float) * 3 / 4,
               "the planes' memory shrank (%zu bytes for %zu floats' worth)",
               malloc_usable_size(m.plane[0]), 3 * n);
#endif
    lam_contrast_map_free(&m);
    lam_image_free(img);
}

/* The same map for 1, 2 and 3 threads, on an image of many blocks whose
 * size is not a multiple of one. */
static void threads_agree(void)
{
    const size_t w = 613, h = 411, n = w * h;
    lam_contrast_map m[3];
    int ok = 1;
    for (size_t t = 0; t < 3; t++) {
        lam_image *img = sweep_image(w, h);
        ok = ok && img;
        if (img)
            lam_contrast_compact(img, &m[t], t + 1);
        else
            memset(&m[t], 0, sizeof m[t]);
        lam_image_free(img);
    }
    if (check_true(ok, "three sweeps allocated"))
        check_true(!memcmp(m[0].plane[0], m[1].plane[0], 3 * n * sizeof *m[0].plane[0]) &&
                       !memcmp(m[0].plane[0], m[2].plane[0], 3 * n * sizeof *m[0].plane[0]),
                   "the same map with 1, 2 and 3 threads (%zu values)", 3 * n);
    for (size_t t = 0; t < 3; t++)
        lam_contrast_map_free(&m[t]);
}

int main(void)
{
    check_begin("test_contrast_map");
    values(8, 2, 1);
    values(37, 5, 2);
    values(640, 480, 2); /* 56 blocks: six rounds side by side */
    threads_agree();
    check_true(lam_contrast_of(0) == 1.0f && lam_contrast_of(LAM_CONTRAST_UNIT) == 0.0f,
               "no light is contrast 1, the substrate's light contrast 0");
    lam_contrast_map_free(NULL);
    return check_summary();
}
