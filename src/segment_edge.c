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

/* The distinct sides within EDGE_RADIUS of pixel (x, y); their count. */
static size_t sides_near(const lam_segmentation *seg, size_t x, size_t y, side *out)
{
    size_t w = seg->width, h = seg->height, n = 0;
    size_t x0 = x > EDGE_RADIUS ? x - EDGE_RADIUS : 0, x1 = x + EDGE_RADIUS < w ? x + EDGE_RADIUS : w - 1;
    size_t y0 = y > EDGE_RADIUS ? y - EDGE_RADIUS : 0, y1 = y + EDGE_RADIUS < h ? y + EDGE_RADIUS : h - 1;
    for (size_t v = y0; v <= y1; v++)
        for (size_t u = x0; u <= x1; u++) {
            size_t k = v * w + u;
            uint32_t l = seg->label[k];
            if (!l && seg->cls[k] != LAM_CLASS_SUBSTRATE)
                continue; /* another transition pixel, or a dropped speck */
            size_t i = 0;
            while (i < n && out[i].label != l)
                i++;
            if (i == n && n < EDGE_MAX_SIDES)
                out[n++].label = l;
        }
    return n;
}

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

/* The side whose mean pixel k is nearest (the first of equals), 0 for
 * the substrate or none. */
static uint32_t owner_of(const lam_contrast_map *contrast, size_t channels,
                         const lam_segmentation *seg, size_t x, size_t y)
{
    size_t k = y * seg->width + x;
    side s[EDGE_MAX_SIDES];
    size_t n = sides_near(seg, x, y, s);
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

/* Rows are counted side by side, each slice into counts of its own
 * (whole numbers: their sum is the same in any order). */
typedef struct edge_job {
    const lam_contrast_map *contrast;
    size_t channels;
    lam_segmentation *seg;
    size_t *count; /* per slice, seg->count each; NULL: one slice, into the regions */
} edge_job;

static void edge_rows(size_t y0, size_t y1, size_t slice, void *vjob)
{
    const edge_job *job = vjob;
    const lam_segmentation *seg = job->seg;
    size_t w = seg->width, *count = job->count ? job->count + slice * seg->count : NULL;
    for (size_t y = y0; y < y1; y++)
        for (size_t x = 0; x < w; x++) {
            size_t k = y * w + x;
            if (seg->label[k] || seg->cls[k] == LAM_CLASS_SUBSTRATE)
                continue;
            uint32_t owner = owner_of(job->contrast, job->channels, seg, x, y);
            if (owner && count)
                count[owner - 1]++;
            else if (owner)
                job->seg->regions[owner - 1].edge++;
        }
}

void lam_segment_edge_areas(const lam_contrast_map *contrast, size_t channels, size_t threads,
                            lam_segmentation *seg)
{
    size_t n = seg->count, slices = lam_parallel_slices(seg->height, threads);
    edge_job job = {contrast, channels, seg, calloc(slices * n + 1, sizeof(size_t))};
    for (size_t i = 0; i < n; i++)
        seg->regions[i].edge = 0;
    lam_parallel_for(seg->height, job.count ? slices : 1, edge_rows, &job);
    for (size_t t = 0; job.count && t < slices; t++)
        for (size_t i = 0; i < n; i++)
            seg->regions[i].edge += job.count[t * n + i];
    free(job.count);
}

double lam_region_area(const lam_region_stats *r)
{
    return (double)(r->area + r->edge);
}
