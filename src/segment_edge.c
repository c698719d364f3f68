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
#include <string.h>

/* How far a transition pixel looks for the sides it lies between: the band
 * is 2-3 px wide at ordinary blur, about 5 px when an image is enlarged. */
#define EDGE_RADIUS 4
#define EDGE_MAX_SIDES 8

typedef struct side {
    uint32_t label; /* 0: the substrate */
} side;

/* A side's mean interior contrast: 0 for the substrate (side 0). A region
 * without interior (no mean) or a ribbon (LAM_RIBBON_DEPTH: a blurred
 * transition itself, whose middling contrast would otherwise win the band
 * around it) owns no pixel. Found once per side, before the rows. */
typedef struct side_mean {
    double m[3];
    int owns;
} side_mean;

static void side_means(const lam_segmentation *seg, size_t channels, side_mean *out)
{
    memset(out, 0, (seg->count + 1) * sizeof *out);
    out[0].owns = 1;
    for (size_t l = 1; l <= seg->count; l++) {
        const lam_region_stats *r = &seg->regions[l - 1];
        out[l].owns = r->interior && r->depth_max >= LAM_RIBBON_DEPTH;
        for (size_t c = 0; c < channels && out[l].owns; c++)
            out[l].m[c] = r->sum[c] / (double)r->interior;
    }
}

/* The side among s[0..n-1] whose mean pixel k is nearest (the first of
 * equals), 0 for the substrate or none. */
static uint32_t owner_of(const lam_contrast_map *contrast, size_t channels,
                         const side_mean *means, size_t k, const side *s, size_t n)
{
    double best = INFINITY;
    uint32_t owner = 0;
    for (size_t i = 0; i < n; i++) {
        const side_mean *sm = &means[s[i].label];
        double d = 0;
        if (!sm->owns)
            continue;
        for (size_t c = 0; c < channels; c++) {
            double v = lam_contrast_value(contrast, c, k);
            d += (v - sm->m[c]) * (v - sm->m[c]);
        }
        if (d < best)
            best = d, owner = s[i].label;
    }
    return owner;
}

/* ---- the sides from runs ----
 * Reading the 81 pixels around every transition pixel was most of this
 * pass's time, and its branches as good as random. Along a row the side
 * changes only where a run of one label (or of substrate, or of
 * transition pixels) ends, so each row of the window is walked run by
 * run: the sides come in the same order (rows top to bottom, runs left to
 * right, each side where it is first met), so the owner is the same. Each
 * row's runs are listed once, in a ring of the window's 9 rows that moves
 * down with the rows of a slice; a row's transition pixels are its runs
 * of NOT_A_SIDE, taken left to right, so each window row keeps a cursor
 * at the run its window starts in, which only moves right. */
#define NOT_A_SIDE UINT32_MAX  /* a transition pixel or a dropped speck */
#define WINDOW_ROWS (2 * EDGE_RADIUS + 1)

typedef struct side_run {
    uint32_t start; /* its first pixel; the list ends with start = width */
    uint32_t label; /* the side (0: the substrate) or NOT_A_SIDE */
} side_run;

typedef struct side_rows {
    side_run *run;                 /* per ring row, width + 1 entries */
    size_t w;
    /* the window's rows for the current row y: y - EDGE_RADIUS.. clipped
     * to the image, their runs and the run each window starts in */
    size_t rows;
    const side_run *row[WINDOW_ROWS];
    size_t cursor[WINDOW_ROWS];
} side_rows;

static side_run *ring_row(const side_rows *r, size_t y)
{
    return r->run + y % WINDOW_ROWS * (r->w + 1);
}

/* Pixel k's side: its label, 0 on the substrate, else NOT_A_SIDE (by a
 * mask: no branch per pixel). */
static uint32_t side_code(const lam_segmentation *seg, size_t k)
{
    uint32_t l = seg->label[k];
    return l | (0u - (uint32_t)((l == 0) & (seg->cls[k] != LAM_CLASS_SUBSTRATE)));
}

/* Row y's runs into the ring. */
static void side_row_fill(const lam_segmentation *seg, side_rows *r, size_t y)
{
    size_t w = seg->width, n = 0;
    side_run *run = ring_row(r, y);
    uint32_t prev = side_code(seg, y * w);
    run[n++] = (side_run){0, prev};
    for (size_t x = 1; x < w; x++) {
        uint32_t c = side_code(seg, y * w + x);
        if (c != prev)
            run[n++] = (side_run){(uint32_t)x, c}, prev = c;
    }
    run[n] = (side_run){(uint32_t)w, NOT_A_SIDE};
}

static void add_side(uint32_t l, side *out, size_t *n)
{
    size_t i = 0;
    while (i < *n && out[i].label != l)
        i++;
    if (i == *n && *n < EDGE_MAX_SIDES)
        out[(*n)++].label = l;
}

/* The window's rows for row y (the ring holds them), cursors at their
 * first run. */
static void window_rows(side_rows *r, size_t h, size_t y)
{
    size_t y0 = y > EDGE_RADIUS ? y - EDGE_RADIUS : 0, y1 = y + EDGE_RADIUS < h ? y + EDGE_RADIUS : h - 1;
    r->rows = y1 - y0 + 1;
    for (size_t i = 0; i < r->rows; i++) {
        r->row[i] = ring_row(r, y0 + i);
        r->cursor[i] = 0;
    }
}

/* The distinct sides within EDGE_RADIUS of pixel x of the window's row
 * (Chebyshev, the window clipped to the image), in order of first
 * appearance, at most EDGE_MAX_SIDES. x grows from call to call within a
 * row (the cursors). */
static size_t sides_from_runs(side_rows *r, size_t x, side *out)
{
    size_t w = r->w, n = 0;
    size_t x0 = x > EDGE_RADIUS ? x - EDGE_RADIUS : 0, x1 = x + EDGE_RADIUS < w ? x + EDGE_RADIUS : w - 1;
    for (size_t v = 0; v < r->rows; v++) {
        const side_run *run = r->row[v];
        size_t at = r->cursor[v];
        while (run[at + 1].start <= x0)
            at++;
        r->cursor[v] = at;
        for (size_t i = at; run[i].start <= x1; i++)
            if (run[i].label != NOT_A_SIDE)
                add_side(run[i].label, out, &n);
    }
    return n;
}

/* Rows are counted side by side, each slice into counts of its own
 * (whole numbers: their sum is the same in any order). */
typedef struct edge_job {
    const lam_contrast_map *contrast;
    size_t channels;
    lam_segmentation *seg;
    const side_mean *means; /* by side, 0..seg->count */
    size_t *count; /* per slice, seg->count each */
    int failed;    /* a slice could not allocate its ring */
} edge_job;

/* Transition pixel k's owner among sides s[0..n-1], counted. */
static void count_owner(const edge_job *job, size_t *count, size_t k, const side *s, size_t n)
{
    uint32_t owner = owner_of(job->contrast, job->channels, job->means, k, s, n);
    if (owner)
        count[owner - 1]++;
}

static void edge_rows(size_t y0, size_t y1, size_t slice, void *vjob)
{
    edge_job *job = vjob;
    const lam_segmentation *seg = job->seg;
    size_t w = seg->width, h = seg->height, *count = job->count + slice * seg->count;
    side_rows r = {malloc(WINDOW_ROWS * (w + 1) * sizeof *r.run), w, 0, {NULL}, {0}};
    if (!r.run)
        job->failed = 1, y1 = y0;
    size_t filled = y0 > EDGE_RADIUS ? y0 - EDGE_RADIUS : 0; /* the next row to list */
    for (size_t y = y0; y < y1; y++) {
        for (; filled < h && filled <= y + EDGE_RADIUS; filled++)
            side_row_fill(seg, &r, filled);
        window_rows(&r, h, y);
        const side_run *run = ring_row(&r, y);
        for (size_t i = 0; run[i].start < w; i++) {
            if (run[i].label != NOT_A_SIDE)
                continue; /* the row's transition pixels are its runs of no side */
            for (size_t x = run[i].start; x < run[i + 1].start; x++) {
                side s[EDGE_MAX_SIDES];
                count_owner(job, count, y * w + x, s, sides_from_runs(&r, x, s));
            }
        }
    }
    free(r.run);
}

lam_status lam_segment_edge_areas(const lam_contrast_map *contrast, size_t channels, size_t threads,
                                  lam_segmentation *seg, lam_error *err)
{
    size_t n = seg->count, slices = lam_parallel_slices(seg->height, threads);
    side_mean *means = malloc((n + 1) * sizeof *means);
    edge_job job = {contrast, channels, seg, means, calloc(slices * n + 1, sizeof(size_t)), 0};
    if (means && job.count) {
        side_means(seg, channels, means);
        lam_parallel_for(seg->height, slices, edge_rows, &job);
    }
    int ok = means && job.count && !job.failed;
    free(means);
    if (!ok) {
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
