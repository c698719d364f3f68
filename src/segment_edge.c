/* segment_edge.c - the share of the transition pixels each region owns
 * (lam_segment_edge_areas, segment.h).
 *
 * Transition pixels, where blur mixes a flake with its surroundings, belong
 * to no region, and their band is a fixed number of pixels wide whatever
 * the magnification: a region's pixel count alone undercounts a small
 * flake more at low magnification than at high. A flake's edge is where
 * the contrast crosses half-way between the two sides (for a symmetric
 * blur), so each transition pixel is given to the neighbour - a region, or
 * the bare substrate at zero contrast - whose mean contrast it is nearest. */
#include "lamina/segment.h"
#include "lamina/parallel.h"

#include <math.h>
#include <stdlib.h>

/* How far a transition pixel looks for the sides it lies between: the band
 * is 2-3 px wide at ordinary blur, about 5 px when an image is enlarged. */
#define EDGE_RADIUS 4
#define EDGE_MAX_SIDES 8

typedef struct side {
    uint32_t label; /* 0: the substrate */
} side;

/* The mean interior contrast of region l (1-based), or 0 for the
 * substrate. 0 is returned for a region without interior (no mean) and for
 * a ribbon (LAM_RIBBON_DEPTH): a blurred transition itself, whose middling
 * contrast would otherwise win the band around it. */
static int side_mean(const lam_segmentation *seg, uint32_t l, size_t channels, double m[3])
{
    for (size_t c = 0; c < channels; c++)
        m[c] = 0;
    if (!l)
        return 1;
    const lam_region_stats *r = &seg->regions[l - 1];
    if (!r->interior || r->depth_max < LAM_RIBBON_DEPTH)
        return 0;
    for (size_t c = 0; c < channels; c++)
        m[c] = r->sum[c] / (double)r->interior;
    return 1;
}

/* The side among s[0..n-1] whose mean pixel k is nearest (the first of
 * equals), 0 for the substrate or none. */
static uint32_t owner_of(const lam_contrast_map *contrast, size_t channels,
                         const lam_segmentation *seg, size_t k, const side *s, size_t n)
{
    double best = INFINITY;
    uint32_t owner = 0;
    for (size_t i = 0; i < n; i++) {
        double m[3], d = 0;
        if (!side_mean(seg, s[i].label, channels, m))
            continue;
        for (size_t c = 0; c < channels; c++) {
            double v = lam_contrast_value(contrast, c, k);
            d += (v - m[c]) * (v - m[c]);
        }
        if (d < best)
            best = d, owner = s[i].label;
    }
    return owner;
}

/* ---- the sides from runs ----
 * Reading the 81 pixels around every transition pixel was most of this
 * pass's time, and its branches as good as random. Along a row, the sides
 * change only where a run of one label (or of substrate, or of transition
 * pixels) ends, so each row of the window is walked run by run: the sides
 * come in the same order (rows top to bottom, runs left to right, each
 * side where it is first met), so the owner is the same. The rows' runs
 * are kept for the 9 rows of the window, in a ring that moves down with
 * the rows of a slice. */
#define NOT_A_SIDE UINT32_MAX  /* a transition pixel or a dropped speck */
#define WINDOW_ROWS (2 * EDGE_RADIUS + 1)

typedef struct side_rows {
    uint32_t *code; /* per ring row: each pixel's side (its label, 0 for the
                     * substrate) or NOT_A_SIDE */
    uint32_t *next; /* per ring row: the first pixel to the right with another
                     * code (the width at the row's end) */
    size_t w;
} side_rows;

static void side_row_fill(const lam_segmentation *seg, side_rows *r, size_t y)
{
    size_t w = seg->width;
    uint32_t *code = r->code + y % WINDOW_ROWS * w, *next = r->next + y % WINDOW_ROWS * w;
    const uint32_t *label = seg->label + y * w;
    const uint8_t *cls = seg->cls + y * w;
    for (size_t x = 0; x < w; x++)
        code[x] = label[x] || cls[x] == LAM_CLASS_SUBSTRATE ? label[x] : NOT_A_SIDE;
    next[w - 1] = (uint32_t)w;
    for (size_t x = w - 1; x-- > 0;)
        next[x] = code[x + 1] != code[x] ? (uint32_t)(x + 1) : next[x + 1];
}

/* The distinct sides within EDGE_RADIUS of pixel (x, y) (Chebyshev, the
 * window clipped to the image), in order of first appearance, at most
 * EDGE_MAX_SIDES, from the ring (which holds the window's rows). */
static size_t sides_from_runs(const side_rows *r, size_t h, size_t x, size_t y, side *out)
{
    size_t w = r->w, n = 0;
    size_t x0 = x > EDGE_RADIUS ? x - EDGE_RADIUS : 0, x1 = x + EDGE_RADIUS < w ? x + EDGE_RADIUS : w - 1;
    size_t y0 = y > EDGE_RADIUS ? y - EDGE_RADIUS : 0, y1 = y + EDGE_RADIUS < h ? y + EDGE_RADIUS : h - 1;
    for (size_t v = y0; v <= y1; v++) {
        const uint32_t *code = r->code + v % WINDOW_ROWS * w, *next = r->next + v % WINDOW_ROWS * w;
        for (size_t u = x0; u <= x1; u = next[u]) {
            uint32_t l = code[u];
            if (l == NOT_A_SIDE)
                continue;
            size_t i = 0;
            while (i < n && out[i].label != l)
                i++;
            if (i == n && n < EDGE_MAX_SIDES)
                out[n++].label = l;
        }
    }
    return n;
}

/* Rows are counted side by side, each slice into counts of its own
 * (whole numbers: their sum is the same in any order). */
typedef struct edge_job {
    const lam_contrast_map *contrast;
    size_t channels;
    lam_segmentation *seg;
    size_t *count; /* per slice, seg->count each */
    int failed;    /* a slice could not allocate its ring */
} edge_job;

static int is_transition(const lam_segmentation *seg, size_t k)
{
    return !seg->label[k] && seg->cls[k] != LAM_CLASS_SUBSTRATE;
}

/* Transition pixel k's owner among sides s[0..n-1], counted. */
static void count_owner(const edge_job *job, size_t *count, size_t k, const side *s, size_t n)
{
    uint32_t owner = owner_of(job->contrast, job->channels, job->seg, k, s, n);
    if (owner)
        count[owner - 1]++;
}

static void edge_rows(size_t y0, size_t y1, size_t slice, void *vjob)
{
    edge_job *job = vjob;
    const lam_segmentation *seg = job->seg;
    size_t w = seg->width, h = seg->height, *count = job->count + slice * seg->count;
    side_rows r = {malloc(WINDOW_ROWS * w * sizeof *r.code),
                   malloc(WINDOW_ROWS * w * sizeof *r.next), w};
    if (!r.code || !r.next)
        job->failed = 1, y1 = y0;
    size_t filled = y0 > EDGE_RADIUS ? y0 - EDGE_RADIUS : 0; /* the next row to fill */
    for (size_t y = y0; y < y1; y++) {
        for (; filled < h && filled <= y + EDGE_RADIUS; filled++)
            side_row_fill(seg, &r, filled);
        for (size_t x = 0; x < w; x++) {
            side s[EDGE_MAX_SIDES];
            if (is_transition(seg, y * w + x))
                count_owner(job, count, y * w + x, s, sides_from_runs(&r, h, x, y, s));
        }
    }
    free(r.code);
    free(r.next);
}

lam_status lam_segment_edge_areas(const lam_contrast_map *contrast, size_t channels, size_t threads,
                                  lam_segmentation *seg, lam_error *err)
{
    size_t n = seg->count, slices = lam_parallel_slices(seg->height, threads);
    edge_job job = {contrast, channels, seg, calloc(slices * n + 1, sizeof(size_t)), 0};
    if (job.count)
        lam_parallel_for(seg->height, slices, edge_rows, &job);
    if (!job.count || job.failed) {
        free(job.count);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the edge areas' rows");
    }
    for (size_t i = 0; i < n; i++)
        seg->regions[i].edge = 0;
    for (size_t t = 0; t < slices; t++)
        for (size_t i = 0; i < n; i++)
            seg->regions[i].edge += job.count[t * n + i];
    free(job.count);
    return LAM_OK;
}

double lam_region_area(const lam_region_stats *r)
{
    return (double)(r->area + r->edge);
}
