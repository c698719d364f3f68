/* segment_cores.c - the cores of areas that are transition pixels
 * throughout (lam__rescue_cores, segment_internal.h).
 *
 * A JPEG codes colour at half resolution in 16 x 16 blocks and rounds its
 * frequencies: where a flake's colour differs strongly from the
 * substrate's, the colour rings for a block or so inside the flake. In a
 * flake a few tens of pixels across the ringing exceeds the edge test
 * everywhere, so the whole flake becomes transition pixels and a plainly
 * visible flake gets no region (hBN of 4-25 nm, 1000-1300 px, in JPEG
 * q90: `make accuracy-crystals`). A transition band between two regions is
 * a few pixels wide (the 2- and 4-pixel tests, widened by one pixel on
 * each side and by the blur), so a transition pixel farther than
 * CORE_DEPTH from every pixel that may join a region lies inside such an
 * area, not in a band: it may join a region again. Its ring stays
 * transition, and lam_segment_edge_areas later hands the ring to the
 * nearest side as for any flake. */
#include "segment_internal.h"
#include "lamina/bigalloc.h"

#include <stdlib.h>
#include <string.h>

#define CORE_DEPTH 6 /* chessboard distance, in pixels */

static uint8_t min4(uint8_t a, uint8_t b, uint8_t c, uint8_t d)
{
    uint8_t m = a < b ? a : b;
    m = m < c ? m : c;
    return m < d ? m : d;
}

/* Chessboard distance of each 'none' pixel to the nearest other pixel
 * (0 on those), capped at 255: the two-pass transform. */
static void distance(const uint8_t *cls, size_t w, size_t h, uint8_t none, uint8_t *d)
{
    for (size_t y = 0; y < h; y++)
        for (size_t x = 0; x < w; x++) {
            size_t i = y * w + x;
            if (cls[i] != none) {
                d[i] = 0;
                continue;
            }
            uint8_t l = x ? d[i - 1] : 255, u = y ? d[i - w] : 255;
            uint8_t ul = x && y ? d[i - w - 1] : 255, ur = y && x + 1 < w ? d[i - w + 1] : 255;
            uint8_t m = min4(l, u, ul, ur);
            d[i] = m < 255 ? (uint8_t)(m + 1) : 255;
        }
    for (size_t y = h; y-- > 0;)
        for (size_t x = w; x-- > 0;) {
            size_t i = y * w + x;
            if (!d[i])
                continue;
            uint8_t r = x + 1 < w ? d[i + 1] : 255, dn = y + 1 < h ? d[i + w] : 255;
            uint8_t dr = x + 1 < w && y + 1 < h ? d[i + w + 1] : 255;
            uint8_t dl = x && y + 1 < h ? d[i + w - 1] : 255;
            uint8_t m = min4(r, dn, dr, dl);
            if (m < 255 && (uint8_t)(m + 1) < d[i])
                d[i] = (uint8_t)(m + 1);
        }
}

int lam__rescue_cores(uint8_t *cls, size_t w, size_t h, uint8_t none, uint8_t joinable)
{
    uint8_t *d = lam_big_malloc(w * h);
    if (!d)
        return -1;
    distance(cls, w, h, none, d);
    for (size_t i = 0; i < w * h; i++)
        if (d[i] >= CORE_DEPTH)
            cls[i] = joinable;
    free(d);
    return 0;
}
