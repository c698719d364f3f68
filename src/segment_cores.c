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
#include "lamina/parallel.h"

#include <stdlib.h>
#include <string.h>

#define CORE_DEPTH 6 /* chessboard distance, in pixels */
#define CORE_REACH (CORE_DEPTH - 1)

/* A pixel lies at least CORE_DEPTH from every other-class pixel exactly
 * when the (2 CORE_REACH + 1)-square around it, cut to the image, holds
 * 'none' pixels only: a separable test, row windows then column windows,
 * each a sliding count (the two-pass distance transform it replaces gave
 * the same pixels, one thread, at 2-3x the time). */
typedef struct core_job {
    uint8_t *cls;
    uint8_t *row_ok; /* per pixel: its row window is all 'none' */
    uint8_t *bad;    /* w per slice of the column pass */
    size_t w, h;
    uint8_t none, joinable;
} core_job;

static void row_windows(size_t y0, size_t y1, size_t slice, void *vjob)
{
    (void)slice;
    const core_job *j = vjob;
    size_t w = j->w;
    for (size_t y = y0; y < y1; y++) {
        const uint8_t *row = j->cls + y * w;
        uint8_t *ok = j->row_ok + y * w;
        size_t other = 0; /* other-class pixels in [x - REACH, x + REACH] */
        for (size_t x = 0; x <= CORE_REACH && x < w; x++)
            other += row[x] != j->none;
        for (size_t x = 0; x < w; x++) {
            ok[x] = other == 0;
            if (x + CORE_REACH + 1 < w)
                other += row[x + CORE_REACH + 1] != j->none;
            if (x >= CORE_REACH)
                other -= row[x - CORE_REACH] != j->none;
        }
    }
}

/* Rows y0..y1 - 1: a pixel whose column window of row_ok is all set is a
 * core pixel. bad[x] counts the rows of the window where row_ok is 0. */
static void column_windows(size_t y0, size_t y1, size_t slice, void *vjob)
{
    const core_job *j = vjob;
    size_t w = j->w, h = j->h;
    uint8_t *bad = j->bad + slice * w;
    size_t top = y0 > CORE_REACH ? y0 - CORE_REACH : 0;
    for (size_t y = top; y <= y0 + CORE_REACH && y < h; y++)
        for (size_t x = 0; x < w; x++)
            bad[x] += !j->row_ok[y * w + x];
    for (size_t y = y0; y < y1; y++) {
        uint8_t *row = j->cls + y * w;
        for (size_t x = 0; x < w; x++)
            if (!bad[x])
                row[x] = j->joinable;
        const uint8_t *enter = y + CORE_REACH + 1 < h ? j->row_ok + (y + CORE_REACH + 1) * w : NULL;
        const uint8_t *leave = y >= CORE_REACH ? j->row_ok + (y - CORE_REACH) * w : NULL;
        for (size_t x = 0; enter && x < w; x++)
            bad[x] += !enter[x];
        for (size_t x = 0; leave && x < w; x++)
            bad[x] -= !leave[x];
    }
}

int lam__rescue_cores(uint8_t *cls, size_t w, size_t h, uint8_t none, uint8_t joinable,
                      size_t threads)
{
    core_job j = {cls, lam_big_malloc(w * h), calloc(lam_parallel_slices(h, threads), w), w, h,
                  none, joinable};
    if (j.row_ok && j.bad) {
        lam_parallel_for(h, threads, row_windows, &j);
        lam_parallel_for(h, threads, column_windows, &j);
    }
    int ok = j.row_ok && j.bad;
    free(j.row_ok);
    free(j.bad);
    return ok ? 0 : -1;
}
