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
#include "lamina/parallel.h"
#include "vector_clones.h"

#include <stdlib.h>
#include <string.h>

#define CORE_DEPTH 6 /* chessboard distance, in pixels */
#define CORE_REACH (CORE_DEPTH - 1)

/* A pixel lies at least CORE_DEPTH from every other-class pixel exactly
 * when the (2 CORE_REACH + 1)-square around it, cut to the image, holds
 * 'none' pixels only: a separable test, row windows then column windows
 * (the two-pass distance transform it replaced gave the same pixels, one
 * thread, at 2-3x the time). Each slice of rows keeps the row windows its
 * column windows span in a ring of its own, in cache, rather than a plane
 * of the image's size. A slice turns its own rows' cores joinable as it
 * goes, which changes what their row windows would read; its rows are
 * read (entering the window) before it writes them, but the rows of its
 * neighbour slices are not, so their windows are taken first, before any
 * slice writes (border_rows). */
#define RING_ROWS (2 * CORE_REACH + 2)    /* the window's rows and the one entering */
#define BORDER_ROWS (2 * CORE_REACH + 1)  /* above a slice, and below it with the one entering */
#define SCRATCH_ROWS (RING_ROWS + BORDER_ROWS + 1) /* ring, borders, bad */

typedef struct core_job {
    uint8_t *cls;
    uint8_t *scratch; /* per slice: SCRATCH_ROWS rows of w */
    size_t w, h;
    uint8_t none, joinable;
} core_job;

/* Row y's windows into ok: 1 where the row's pixels within CORE_REACH
 * (cut to the row) are all 'none'. Within a run [a, b) of 'none' pixels
 * that holds for x >= a + CORE_REACH (or any x when the run starts the
 * row) and x + CORE_REACH < b (or any x when it ends the row); elsewhere
 * 0. The runs are found with memchr: most of a row is other classes. */
static void row_windows(const core_job *j, size_t y, uint8_t *ok)
{
    size_t w = j->w;
    const uint8_t *row = j->cls + y * w;
    memset(ok, 0, w);
    for (size_t a = 0, b; a < w; a = b) {
        const uint8_t *hit = memchr(row + a, j->none, w - a);
        if (!hit)
            break;
        a = (size_t)(hit - row);
        for (b = a + 1; b < w && row[b] == j->none;)
            b++;
        size_t x0 = a ? a + CORE_REACH : 0, x1 = b < w ? b - CORE_REACH : w; /* [x0, x1) */
        if (b - a > CORE_REACH && x0 < x1) /* b > CORE_REACH: x1 did not wrap */
            memset(ok + x0, 1, x1 - x0);
    }
}

/* Where the row windows of row y lie for the slice of rows y0..y1 - 1:
 * its border rows (taken by border_rows) outside it, its ring inside. */
static uint8_t *window_of(const core_job *j, size_t slice, size_t y0, size_t y1, size_t y)
{
    uint8_t *ring = j->scratch + slice * SCRATCH_ROWS * j->w, *border = ring + RING_ROWS * j->w;
    if (y < y0)
        return border + (y0 - y - 1) * j->w;               /* rows 0..CORE_REACH - 1 */
    if (y >= y1)
        return border + (CORE_REACH + y - y1) * j->w;      /* rows CORE_REACH.. */
    return ring + (y % RING_ROWS) * j->w;
}

/* The row windows of the rows beside slice y0..y1 - 1 that its column
 * windows read: CORE_REACH above, CORE_REACH + 1 below. */
static void border_rows(size_t y0, size_t y1, size_t slice, void *vjob)
{
    const core_job *j = vjob;
    for (size_t y = y0 > CORE_REACH ? y0 - CORE_REACH : 0; y < y0; y++)
        row_windows(j, y, window_of(j, slice, y0, y1, y));
    for (size_t y = y1; y <= y1 + CORE_REACH && y < j->h; y++)
        row_windows(j, y, window_of(j, slice, y0, y1, y));
}

/* The column window's step at one row: the row's core pixels (bad 0)
 * become joinable, then the row entering the window is added to bad and
 * the one leaving it taken off (a NULL row is beyond the image). */
LAM_VECTOR_CLONES
static void column_step(uint8_t *restrict row, uint8_t *restrict bad, const uint8_t *enter,
                        const uint8_t *leave, size_t w, uint8_t joinable)
{
    for (size_t x = 0; x < w; x++)
        row[x] = bad[x] ? row[x] : joinable;
    for (size_t x = 0; enter && x < w; x++)
        bad[x] += !enter[x];
    for (size_t x = 0; leave && x < w; x++)
        bad[x] -= !leave[x];
}

/* The row windows of row y, a row of the slice (taken now: not yet
 * written) or beside it (taken by border_rows). */
static const uint8_t *slice_row(const core_job *j, size_t slice, size_t y0, size_t y1, size_t y)
{
    uint8_t *ok = window_of(j, slice, y0, y1, y);
    if (y >= y0 && y < y1)
        row_windows(j, y, ok);
    return ok;
}

/* Rows y0..y1 - 1: a pixel whose column window of row windows is all set
 * is a core pixel. bad[x] counts the rows of the window where it is not. */
static void core_rows(size_t y0, size_t y1, size_t slice, void *vjob)
{
    const core_job *j = vjob;
    size_t w = j->w, h = j->h;
    uint8_t *bad = j->scratch + (slice * SCRATCH_ROWS + SCRATCH_ROWS - 1) * w;
    memset(bad, 0, w);
    for (size_t y = y0 > CORE_REACH ? y0 - CORE_REACH : 0; y <= y0 + CORE_REACH && y < h; y++) {
        const uint8_t *ok = slice_row(j, slice, y0, y1, y);
        for (size_t x = 0; x < w; x++)
            bad[x] += !ok[x];
    }
    for (size_t y = y0; y < y1; y++) {
        const uint8_t *enter = y + CORE_REACH + 1 < h ? slice_row(j, slice, y0, y1,
                                                                  y + CORE_REACH + 1) : NULL;
        const uint8_t *leave = y >= CORE_REACH ? window_of(j, slice, y0, y1, y - CORE_REACH)
                                               : NULL;
        column_step(j->cls + y * w, bad, enter, leave, w, j->joinable);
    }
}

int lam__rescue_cores(uint8_t *cls, size_t w, size_t h, uint8_t none, uint8_t joinable,
                      size_t threads)
{
    size_t slices = lam_parallel_slices(h, threads);
    core_job j = {cls, malloc(slices * SCRATCH_ROWS * w), w, h, none, joinable};
    if (!j.scratch)
        return -1;
    /* the same count and threads: the same slices in both loops */
    lam_parallel_for(h, threads, border_rows, &j);
    lam_parallel_for(h, threads, core_rows, &j);
    free(j.scratch);
    return 0;
}
