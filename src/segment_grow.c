/* segment_grow.c - regions of uniform contrast, independent of the model:
 * transition pixels are cut out, the rest joined to 4-neighbours of the
 * same contrast (union-find over pixels), the regions at zero contrast
 * become the substrate. */
#include "lamina/segment.h"
#include "lamina/bigalloc.h"
#include "segment_internal.h"
#include "lamina/parallel.h"
#include "vector_clones.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define PROVISIONAL 1      /* class of a pixel that may join a region */
#define SUBSTRATE_FRACTION 0.3 /* of the prior's monolayer contrast */
#define SUBSTRATE_MIN 0.003    /* ... but at least this contrast */
#define EDGE_STEP_FRACTION 0.3 /* a change across two pixels that marks an edge */
#define JOIN_STEP_FRACTION 0.15 /* neighbours never join across more than this */
#define FILE_STEP_MERGE 1.0     /* regions one JPEG DC step apart are one */
#define FILE_STEP_SUBSTRATE 1.5 /* substrate patches up to 1.5 steps off zero ... */
#define FILE_STEP_SUBSTRATE_JPEG 2.0 /* ... 2 in a JPEG, whose blocks lose the dither */

typedef struct edge_ctx {
    const lam_contrast_map *img;
    size_t channels;
    float t2[3], t4[3]; /* per channel: change across 2 and across 4 pixels */
    int32_t s2[3], s4[3]; /* the same in fixed-point steps, rounded down (fixed_threshold) */
    uint8_t *cls;
    int failed;
    int bright;         /* scale the thresholds with the brightness (bright_scaling) */
} edge_ctx;

/* The noise scale of a pixel brighter than the substrate: sqrt(1 - C)
 * (shot noise relative to the substrate's), 1 for darker pixels. */
static float bright_factor(float contrast)
{
    return contrast < 0 ? sqrtf(1 - contrast) : 1.0f;
}

/* A contrast threshold t >= 0 in the map's steps, rounded down: a change
 * of n steps (a whole number) exceeds t exactly when n exceeds this, since
 * n / LAM_CONTRAST_UNIT > t means n > t LAM_CONTRAST_UNIT, and for a whole
 * n that is n > floor(t LAM_CONTRAST_UNIT). Beyond the map's range: never. */
static int32_t fixed_threshold(float t)
{
    double s = floor((double)t * LAM_CONTRAST_UNIT);
    return s < 65535 ? (int32_t)s : 65535;
}

/* One inner row's test for one channel, branch-free so that it runs on
 * vector units: acc[x] becomes non-zero where a change exceeds t2 across
 * two pixels or t4 across four, along the row or the column, in whole
 * steps of the map (s2, s4: fixed_threshold; the same decisions as in
 * contrast units, at integer cost). */
LAM_VECTOR_CLONES
static void edge_test(const uint16_t *restrict q, size_t w, int32_t s2, int32_t s4,
                      int32_t *restrict acc)
{
    for (size_t x = 2; x + 2 < w; x++) {
        int32_t h1 = (int32_t)q[x + 1] - q[x - 1], v1 = (int32_t)q[x + w] - q[x - w];
        int32_t h2 = (int32_t)q[x + 2] - q[x - 2], v2 = (int32_t)q[x + 2 * w] - q[x - 2 * w];
        acc[x] |= (abs(h1) > s2) | (abs(v1) > s2) | (abs(h2) > s4) | (abs(v2) > s4);
    }
}

/* The same with bright_scaling (crystals whose flakes outshine the
 * substrate): both thresholds grow by the pixel's bright_factor. */
static void edge_test_bright(const uint16_t *restrict q, size_t w, float t2, float t4,
                             int32_t *restrict acc)
{
    for (size_t x = 2; x + 2 < w; x++) {
        float b = bright_factor(lam_contrast_of(q[x]));
        float l1 = lam_contrast_of(q[x - 1]), r1 = lam_contrast_of(q[x + 1]);
        float u1 = lam_contrast_of(q[x - w]), d1 = lam_contrast_of(q[x + w]);
        float l2 = lam_contrast_of(q[x - 2]), r2 = lam_contrast_of(q[x + 2]);
        float u2 = lam_contrast_of(q[x - 2 * w]), d2 = lam_contrast_of(q[x + 2 * w]);
        acc[x] |= (fabsf(r1 - l1) > t2 * b) | (fabsf(d1 - u1) > t2 * b) |
                  (fabsf(r2 - l2) > t4 * b) | (fabsf(d2 - u2) > t4 * b);
    }
}

/* Transition pixels: the contrast changes by more than a channel's
 * threshold across two pixels (or, for slow blurred edges, across four) in
 * some channel: the pixel mixes two classes. The frame of 2 pixels, where
 * the test does not fit, counts as transition. Row y into out (1 on
 * transition pixels); acc: w integers of scratch. */
static void edge_row(const edge_ctx *e, size_t y, int32_t *acc, uint8_t *out)
{
    size_t w = e->img->width, h = e->img->height;
    if (y < 2 || y + 2 >= h || w < 5) {
        memset(out, 1, w);
        return;
    }
    memset(acc, 0, w * sizeof *acc);
    for (size_t c = 0; c < e->channels; c++)
        if (e->bright)
            edge_test_bright(e->img->plane[c] + y * w, w, e->t2[c], e->t4[c], acc);
        else
            edge_test(e->img->plane[c] + y * w, w, e->s2[c], e->s4[c], acc);
    for (size_t x = 0; x < w; x++)
        out[x] = x < 2 || x + 2 >= w || acc[x] != 0;
}

/* Close gaps in the transition lines: a pixel next to (8-neighbour) a
 * transition pixel is one too, so no one-pixel path joins two regions.
 * The rows' transition flags are made as the rows are reached, in a ring
 * of three (each slice of rows makes the two beside it again): no
 * whole-image mask (12 MB of fresh memory at 12 MP). Writes the classes. */
static void mark_rows(size_t begin, size_t end, size_t slice, void *vctx)
{
    (void)slice;
    edge_ctx *e = vctx;
    size_t w = e->img->width, h = e->img->height;
    int32_t *acc = malloc(w * sizeof *acc);
    uint8_t *ring = malloc(3 * w), *col = malloc(w);
    if (!acc || !ring || !col) {
        e->failed = 1;
        begin = end;
    }
    if (begin < end) {
        if (begin > 0)
            edge_row(e, begin - 1, acc, ring + (begin - 1) % 3 * w);
        edge_row(e, begin, acc, ring + begin % 3 * w);
    }
    for (size_t y = begin; y < end; y++) {
        if (y + 1 < h)
            edge_row(e, y + 1, acc, ring + (y + 1) % 3 * w);
        const uint8_t *r = ring + y % 3 * w;
        const uint8_t *u = y ? ring + (y - 1) % 3 * w : r;
        const uint8_t *d = y + 1 < h ? ring + (y + 1) % 3 * w : r;
        for (size_t x = 0; x < w; x++)
            col[x] = (uint8_t)(u[x] | r[x] | d[x]);
        uint8_t *out = e->cls + y * w;
        for (size_t x = 0; x < w; x++) {
            int any = col[x] | (x ? col[x - 1] : 0) | (x + 1 < w ? col[x + 1] : 0);
            out[x] = any ? LAM_CLASS_NONE : PROVISIONAL;
        }
    }
    free(acc);
    free(ring);
    free(col);
}

/* Transition pixels and their neighbours out; every other pixel may join a
 * region (class PROVISIONAL). */
static lam_status mark_edges(edge_ctx *e, size_t threads, lam_error *err)
{
    lam_parallel_for(e->img->height, threads, mark_rows, e);
    return e->failed ? lam_error_set(err, LAM_ENOMEM, "cannot allocate the edge rows") : LAM_OK;
}

/* ---- statistical region merging ----
 *
 * Single-linkage growing (join any two neighbours that look alike) leaks
 * through one weak spot of an edge. Instead, neighbouring pixel pairs are
 * taken in order of increasing difference, and two regions merge only when
 * their MEANS agree: within 'delta' (what the image's own artefacts and a
 * sixth of a monolayer step allow) plus three standard errors of the two
 * means (after R. Nock, F. Nielsen, IEEE TPAMI 26, 1452 (2004), with a
 * Gaussian noise bound). A blurred ramp then splits off either side
 * instead of chaining a flake to the substrate. */
#define MERGE_SIGMAS 3.0
#define PAIR_BUCKETS 1024
#define PAIR_RANGE 6.0      /* pairs differing by more than 6 deltas never merge */
#define ROOT 0x80000000u    /* a root's word: this bit | its slot */

#define SINGLE 0x7fffffffu /* a root's slot when it is one pixel (its sums: the pixel's values) */

/* Union-find over pixels. Each pixel's word is its parent's index (always
 * smaller: the smaller index stays the root), or for a root ROOT | its
 * slot. A region of two or more pixels keeps its pixel count and sums per
 * channel in a slot; a one-pixel region has none and reads the image. Most
 * pixels never need a slot, so the memory the merging touches is 4 bytes
 * a pixel plus 16 a merged region, not 16 a pixel (page faults are a large
 * part of this stage's time). A band merges with slots of its thread's
 * own, reused band after band; at the band's end its surviving regions'
 * slots move to the band's range of the image's slot array (see
 * merge_band), and the borders take theirs after those ranges. */
typedef struct slot {
    uint32_t count;
    float sum[3];
} slot;

typedef struct merge_state {
    uint32_t *node;
    slot *slots;
    const uint16_t *plane[3];
    size_t channels;
    size_t band_slots;  /* slots reserved per band */
    double delta[3], sigma[3];
    int bright;         /* bright_scaling: delta x b, sigma x sqrt(b), b = 1 - C */
    int blocks;         /* flat blocks merged first (premerge_blocks); 0: pixel order only */
} merge_state;

/* The root of a region two or more steps above pixel a: path halving. */
static uint32_t root_far(uint32_t *node, uint32_t a)
{
    for (;;) {
        uint32_t p = node[a];
        if (p & ROOT)
            return a;
        uint32_t g = node[p];
        if (g & ROOT)
            return p;
        node[a] = g; /* path halving */
        a = g;
    }
}

/* if_root when a node word has ROOT, else if_not: by masks, not a branch. */
static uint32_t pick(uint32_t word, uint32_t if_root, uint32_t if_not)
{
    uint32_t root = 0u - (word >> 31); /* all ones when word has ROOT */
    return (if_root & root) | (if_not & ~root);
}

/* The root of pixel a's region. Most pixels are a root or one or two
 * steps below it, and which of these is as good as random, so those steps
 * are taken by selection rather than by branches (a mispredicted branch
 * per step was a third of the merging's cost); a longer chain is walked
 * by root_far. a is then pointed at its root. The roots, so every merge,
 * are the same whatever the path compression. */
static uint32_t root_of(uint32_t *node, uint32_t a)
{
    uint32_t p = node[a];
    uint32_t r = pick(p, a, p);
    uint32_t q = node[r];
    r = pick(q, r, q);
    if (!(node[r] & ROOT))
        r = root_far(node, r);
    node[a] = pick(p, p, r);
    return r;
}

/* Pixel count and sums of the region whose root is r. Both the pixel's
 * own values and slot (its slot, or slot 0 for a one-pixel region, which
 * every slot array has) are read and one is chosen by a mask: whether a
 * region has one pixel is as good as random in the merging order, and a
 * branch on it was mispredicted a third of the time. */
static uint32_t region_sums(const merge_state *m, uint32_t r, float sum[3])
{
    uint32_t s = m->node[r] & ~ROOT;
    uintptr_t single = 0u - (uintptr_t)(s == SINGLE); /* all ones for one pixel */
    const slot *z = &m->slots[s & ~(uint32_t)single];
    float own[3];
    for (size_t c = 0; c < 3; c++) /* all three: a fixed count the compiler unrolls */
        own[c] = lam_contrast_of(m->plane[c][r]);
    const float *src = (const float *)(((uintptr_t)own & single) | ((uintptr_t)z->sum & ~single));
    for (size_t c = 0; c < 3; c++)
        sum[c] = src[c];
    return (uint32_t)((1u & (uint32_t)single) | (z->count & ~(uint32_t)single));
}

/* The means of regions a and b (na, nb pixels) agree in every channel
 * (lam__channel_agrees; with bright_scaling, at the thresholds of the
 * darker of the two). */
static int means_agree_bright(const merge_state *m, const float *sa, const float *sb,
                              double na, double nb)
{
    for (size_t c = 0; c < m->channels; c++) {
        double ma = sa[c] / na, mb = sb[c] / nb, f = bright_factor((float)fmin(ma, mb));
        if (fabs(ma - mb) >
            m->delta[c] * f * f + MERGE_SIGMAS * m->sigma[c] * f * sqrt(1 / na + 1 / nb))
            return 0;
    }
    return 1;
}

static int means_agree(const merge_state *m, const float *sa, const float *sb, uint32_t ca,
                       uint32_t cb)
{
    double na = ca, nb = cb;
    if (m->bright)
        return means_agree_bright(m, sa, sb, na, nb);
    double ia = 1 / na, ib = 1 / nb, se = -1;
    for (size_t c = 0; c < m->channels; c++)
        if (!lam__channel_agrees(sa[c], sb[c], na, nb, ia, ib, m->delta[c],
                                 MERGE_SIGMAS * m->sigma[c], &se))
            return 0;
    return 1;
}

/* Where a band (or the borders) takes its slots: those freed by merges
 * of two slotted regions first (a list through their count), then new
 * ones from its range, so the slots in use stay few and warm. */
typedef struct slot_pool {
    uint32_t next, freed; /* freed: SINGLE when none */
} slot_pool;

static uint32_t take_slot(merge_state *m, slot_pool *p)
{
    if (p->freed == SINGLE)
        return p->next++;
    uint32_t s = p->freed;
    p->freed = m->slots[s].count;
    return s;
}

/* Regions a and b (roots, sums sa and sb) become one under the smaller
 * index, in the lower of their slots (SINGLE, a one-pixel region's, is
 * the highest), or one from the pool when both are one pixel; a second
 * slot is freed. Which slot holds a region changes no sum, and choosing
 * by minimum and maximum leaves one rare branch where choosing by whose
 * slot it was took two unpredictable ones. */
static void merge(merge_state *m, uint32_t a, uint32_t b, const float *sa, const float *sb,
                  uint32_t count, slot_pool *pool)
{
    uint32_t s = m->node[a] & ~ROOT, t = m->node[b] & ~ROOT;
    uint32_t keep = s < t ? s : t, other = s < t ? t : s;
    if (keep == SINGLE)
        keep = take_slot(m, pool);
    else if (other != SINGLE) {
        m->slots[other].count = pool->freed;
        pool->freed = other;
    }
    slot *z = &m->slots[keep];
    z->count = count;
    for (size_t c = 0; c < 3; c++)
        z->sum[c] = sa[c] + sb[c];
    uint32_t root = a < b ? a : b, child = a < b ? b : a;
    m->node[child] = root; /* the smaller index stays the root */
    m->node[root] = ROOT | keep;
}

/* Neighbour pairs (encoded 2k for (k, k+1), 2k+1 for (k, k+w)) of two
 * provisional pixels in order of bucket (the largest channel difference in
 * deltas), then pixel. Built per strip of a few rows, by the thread that
 * merges the strip's band, just before it does: a strip's buckets are
 * computed once into a small buffer and its pairs placed by a counting
 * sort that stays in cache, and only one band's lists per thread exist at
 * a time (lists for the whole image were 4 bytes a pixel of fresh memory,
 * which this machine pays for in page faults). Taking bucket b of every
 * strip in turn, then bucket b + 1, gives the order of one sequential sort
 * of the band, whatever the thread count. */
#define STRIP_ROWS 16 /* at most; fewer when wide, so a strip's codes fit 16 bits, */
#define STRIP_ROWS_MIN SQUARE_MAX /* but never fewer than a square's (then 32-bit codes) */
#define NO_BUCKET PAIR_BUCKETS /* no pair: counted apart */

typedef struct pair_lists {
    size_t strips, rows, cap; /* of the image; cap: slots per strip (2 pairs per pixel) */
    size_t first;         /* the first strip held (strip s is held at s - first) */
    uint16_t *code;       /* strip s at code + (s - first) * cap: 2i + dir for its pixel i, or */
    uint32_t *pairs;      /* (images wider than 32768 px) 2k + dir for pixel k */
    uint32_t *start;      /* strip s: PAIR_BUCKETS + 1 offsets from
                           * start + (s - first) * (PAIR_BUCKETS + 1) */
} pair_lists;

typedef struct pair_ctx {
    const lam_contrast_map *img;
    const uint8_t *cls;
    const merge_state *m;
} pair_ctx;

/* Buckets of the pairs (x, x + off) of one row, n of them, into out:
 * NO_BUCKET where either pixel is not provisional or they differ by
 * PAIR_RANGE deltas or more. Branch-free per channel (vectorised); the
 * arithmetic is that of one pair at a time. f: n doubles of scratch. */
LAM_VECTOR_CLONES
static void row_buckets(const pair_ctx *p, size_t k0, size_t off, size_t n, double *restrict f,
                        int32_t *restrict b, uint16_t *restrict out)
{
    const uint8_t *restrict ca = p->cls + k0, *restrict cb = ca + off;
    for (size_t c = 0; c < p->m->channels; c++) {
        const uint16_t *restrict pa = p->img->plane[c] + k0, *restrict pb = pa + off;
        double d = p->m->delta[c];
        if (c == 0)
            for (size_t x = 0; x < n; x++) {
                double q = fabs((double)(lam_contrast_of(pa[x]) - lam_contrast_of(pb[x]))) / d;
                f[x] = q > 0.0 ? q : 0.0;
            }
        else
            for (size_t x = 0; x < n; x++) {
                double q = fabs((double)(lam_contrast_of(pa[x]) - lam_contrast_of(pb[x]))) / d;
                f[x] = q > f[x] ? q : f[x];
            }
    }
    /* f < PAIR_RANGE exactly when f / PAIR_RANGE * PAIR_BUCKETS < PAIR_BUCKETS (a
     * quotient below 1 does not round up to 1), so this is the test of one pair */
    for (size_t x = 0; x < n; x++) {
        double v = f[x] / PAIR_RANGE * PAIR_BUCKETS;
        b[x] = v < PAIR_BUCKETS ? (int32_t)v : NO_BUCKET;
    }
    for (size_t x = 0; x < n; x++)
        out[x] = ((ca[x] == PROVISIONAL) & (cb[x] == PROVISIONAL)) ? (uint16_t)b[x] : NO_BUCKET;
}

/* Buckets of the pairs of rows y0..y1 into bk: the pairs (k, k + 1) of
 * the strip's pixels first, then (k, k + w); NO_BUCKET when there is no
 * pair. f, b: width doubles and integers of scratch. */
static void strip_buckets(const pair_ctx *p, size_t y0, size_t y1, uint16_t *bk, double *f,
                          int32_t *b)
{
    size_t w = p->img->width, h = p->img->height, npx = (y1 - y0) * w;
    for (size_t y = y0; y < y1; y++) {
        uint16_t *right = bk + (y - y0) * w, *down = right + npx;
        row_buckets(p, y * w, 1, w - 1, f, b, right);
        right[w - 1] = NO_BUCKET;
        if (y + 1 < h)
            row_buckets(p, y * w, w, w, f, b, down);
        else
            for (size_t x = 0; x < w; x++)
                down[x] = NO_BUCKET;
    }
}

/* Scratch for building a strip's lists: its buckets, and a row of
 * differences and of bucket numbers. */
typedef struct strip_scratch {
    uint16_t *bk;
    double *f;
    int32_t *b;
} strip_scratch;

/* ---- blocks before pixels ----
 *
 * Most of a micrograph is flat, and most of the merging's pairs join two
 * pixels of one flat area: at 12 MP 23.4 M pairs, each a dependent walk of
 * the union-find. So before a strip's pairs are sorted, each aligned 2 x 2
 * block of provisional pixels whose four inner pairs differ by less than
 * 3/8 of a delta in every channel (a bucket below BLOCK_BUCKETS) becomes
 * one region, and those pairs leave the lists; four such blocks of an
 * aligned 4 x 4 square whose eight pairs between them pass the same test
 * become one region of 16, and four such squares of an aligned 8 x 8
 * square (a JPEG's block) with their sixteen pairs one region of 64. In
 * the sorted order such pixels nearly always join one another first, with
 * means well within delta; where a block's pixels would have gone to
 * different neighbours first, the block meets them as one region, with its
 * mean and its count. The regions then differ from the pixel order's by a
 * few pixels at edges and in specks (tests/test_segment.c compares the two
 * on drawn maps; so.pixel_order gives the pixel order alone).
 *
 * Where that can matter is next to an edge, where the order decides which
 * side a pixel joins. Inside a uniform area it matters little: nearly
 * every pixel there ends in the area's region whatever the order (the
 * noise is well within the merging's test). So a square whose pixels
 * and the ring around them are all provisional (no transition pixel, not
 * at the border) passes at 3/4 of a delta (INTERIOR_BUCKETS), any other at
 * 3/8. Pairs left at 12 MP: 13.4 M with blocks and 4 x 4 squares at 3/8,
 * 4.2 M with this. The same 3/4 everywhere (4.1 M pairs) left test_robust's
 * pooled scan 6703 with three confident wrong counts and no doubting
 * warning (the pool's reading of one tile, unwarned only by chance: the
 * segmentation near its edges moved a marginal oxide check); half a delta
 * everywhere split a 25-layer flake's blurred edge into a region of its
 * own (test_analyze); a whole delta everywhere fails test_segment's field
 * of faint flakes. On the accuracy harness such changes move JPEG tiles
 * whose fit is on a knife's edge, both ways (docs/performance.md). */
#define BLOCK_BUCKETS 64     /* of the 1024 over 6 deltas: below 3/8 of a delta, */
#define INTERIOR_BUCKETS 128 /* and 3/4 of one inside a uniform area */
#define SQUARE_MAX 8         /* the largest square, in pixels */

/* A strip's buckets by row: right(y) the pairs (k, k + 1) of row y, down(y)
 * the pairs (k, k + w). */
typedef struct strip_rows {
    uint16_t *bk;
    size_t y0, w, npx;
    const uint8_t *cls; /* the image's classes */
    size_t h;
} strip_rows;

static uint16_t *right_of(const strip_rows *r, size_t y)
{
    return r->bk + (y - r->y0) * r->w;
}

static uint16_t *down_of(const strip_rows *r, size_t y)
{
    return r->bk + r->npx + (y - r->y0) * r->w;
}

/* The largest bucket of the four inner pairs of the 2 x 2 block at (x, y). */
static uint16_t block_max(const strip_rows *r, size_t x, size_t y)
{
    const uint16_t *r0 = right_of(r, y), *r1 = right_of(r, y + 1), *d0 = down_of(r, y);
    uint16_t a = r0[x] > r1[x] ? r0[x] : r1[x], b = d0[x] > d0[x + 1] ? d0[x] : d0[x + 1];
    return a > b ? a : b;
}

/* The largest bucket of each part of one square, computed once from the
 * blocks up (the recursive test of each part alone looked at every block
 * up to three times): at[l] holds the parts of size 2 << l, level 0 the
 * 2 x 2 blocks up to the square itself at its top level, row-major over
 * the square's grid of such parts. A part passes when its largest bucket
 * is below the limit: then all its inner pairs are. */
#define SQUARE_LEVELS 3 /* blocks of 2, squares of 4 and 8 pixels */
_Static_assert(SQUARE_MAX == 2 << (SQUARE_LEVELS - 1), "one level per square size");

typedef struct square_maxima {
    uint16_t at[SQUARE_LEVELS][(SQUARE_MAX / 2) * (SQUARE_MAX / 2)];
} square_maxima;

/* The largest bucket of the pairs between the quarters of the size x size
 * square at (x, y): the column and the row where they meet. */
static uint16_t between_max(const strip_rows *r, size_t x, size_t y, size_t size)
{
    size_t half = size / 2;
    const uint16_t *across = down_of(r, y + half - 1);
    uint16_t mx = 0;
    for (size_t i = 0; i < size; i++) {
        uint16_t v = right_of(r, y + i)[x + half - 1], u = across[x + i];
        mx = v > mx ? v : mx;
        mx = u > mx ? u : mx;
    }
    return mx;
}

/* The maxima of the square at (x, y) of size 2 << top and of its parts. */
static void square_maxima_of(const strip_rows *r, size_t x, size_t y, size_t top,
                             square_maxima *q)
{
    size_t n = (size_t)1 << top; /* blocks per side */
    for (size_t i = 0; i < n; i++)
        for (size_t j = 0; j < n; j++)
            q->at[0][i * n + j] = block_max(r, x + 2 * j, y + 2 * i);
    for (size_t l = 1; l <= top; l++) {
        size_t side = n >> l, size = (size_t)2 << l, below = side * 2;
        for (size_t i = 0; i < side; i++)
            for (size_t j = 0; j < side; j++) {
                const uint16_t *b = q->at[l - 1];
                uint16_t mx = between_max(r, x + j * size, y + i * size, size);
                uint16_t c[4] = {b[2 * i * below + 2 * j], b[2 * i * below + 2 * j + 1],
                                 b[(2 * i + 1) * below + 2 * j],
                                 b[(2 * i + 1) * below + 2 * j + 1]};
                for (size_t k = 0; k < 4; k++)
                    mx = c[k] > mx ? c[k] : mx;
                q->at[l][i * side + j] = mx;
            }
    }
}

/* Is every pixel of the size x size square at (x, y) and of the ring
 * around it provisional (the square lies inside a uniform area, away from
 * every transition and the image's border)? */
static int square_inside(const strip_rows *r, size_t x, size_t y, size_t size)
{
    if (x == 0 || y == 0 || x + size >= r->w || y + size >= r->h)
        return 0;
    int all = 1;
    for (size_t j = y - 1; j <= y + size; j++) {
        const uint8_t *row = r->cls + j * r->w;
        for (size_t i = x - 1; i <= x + size; i++)
            all &= row[i] == PROVISIONAL;
    }
    return all;
}

/* The pairs inside the size x size square at (x, y) leave the lists. */
static void drop_inner_pairs(const strip_rows *r, size_t x, size_t y, size_t size)
{
    for (size_t i = 0; i < size; i++)
        for (size_t j = 0; j + 1 < size; j++) {
            right_of(r, y + i)[x + j] = NO_BUCKET;
            down_of(r, y + j)[x + i] = NO_BUCKET;
        }
}

/* The sums of the 2 x 2 block whose first pixel is k, added in the order
 * k, k + 1, k + w, k + w + 1, to sum. */
static void add_block(const merge_state *m, size_t k, size_t w, float sum[3])
{
    size_t px[4] = {k, k + 1, k + w, k + w + 1};
    for (size_t c = 0; c < 3; c++) {
        float v = lam_contrast_of(m->plane[c][k]);
        for (size_t i = 1; i < 4; i++)
            v += lam_contrast_of(m->plane[c][px[i]]);
        sum[c] += v;
    }
}

/* The size x size square (2, 4 or 8) at (x, y), all one-pixel regions,
 * becomes one region under its first pixel, and its inner pairs leave the
 * lists; a larger square's sums are those of its 2 x 2 blocks, added left
 * to right, top to bottom (whole multiples of the map's step, so exact in
 * any order). */
static void merge_square(merge_state *m, slot_pool *pool, const strip_rows *r, size_t x,
                         size_t y, size_t size)
{
    size_t w = r->w, k = y * w + x;
    uint32_t s = take_slot(m, pool);
    slot *z = &m->slots[s];
    z->count = (uint32_t)(size * size);
    for (size_t c = 0; c < 3; c++)
        z->sum[c] = 0;
    for (size_t by = 0; by < size; by += 2)
        for (size_t bx = 0; bx < size; bx += 2)
            add_block(m, k + by * w + bx, w, z->sum);
    for (size_t i = 0; i < size; i++)
        for (size_t j = 0; j < size; j++)
            m->node[k + i * w + j] = (uint32_t)k;
    m->node[k] = ROOT | s;
    drop_inner_pairs(r, x, y, size);
}

/* One square being premerged: its top-left pixel, its top level and the
 * largest buckets of its parts. */
typedef struct square_job {
    const strip_rows *r;
    size_t x, y, top;
    square_maxima q;
} square_job;

/* The part of level l at (i, j) of the square's grid of such parts (size
 * 2 << l) as one region when it passes, else each of its quarters the
 * same way, down to 2 x 2 blocks. inside: the part is known to lie inside
 * a uniform area (then so do its quarters); otherwise its ring is looked
 * at only when its maximum lies between the two limits, where that
 * decides. */
static void premerge_part(merge_state *m, slot_pool *pool, const square_job *s, size_t l,
                          size_t i, size_t j, int inside)
{
    size_t size = (size_t)2 << l, side = (size_t)1 << (s->top - l);
    size_t x = s->x + j * size, y = s->y + i * size;
    uint16_t mx = s->q.at[l][i * side + j];
    if (mx >= BLOCK_BUCKETS && mx < INTERIOR_BUCKETS && !inside)
        inside = square_inside(s->r, x, y, size);
    if (mx < (inside ? INTERIOR_BUCKETS : BLOCK_BUCKETS)) {
        merge_square(m, pool, s->r, x, y, size);
        return;
    }
    if (l == 0)
        return;
    for (size_t k = 0; k < 4; k++)
        premerge_part(m, pool, s, l - 1, 2 * i + k / 2, 2 * j + k % 2, inside);
}

/* The size x size square at (x, y) as one region when it passes, else
 * each of its quarters the same way, down to 2 x 2 blocks. */
static void premerge_square(merge_state *m, slot_pool *pool, const strip_rows *r, size_t x,
                            size_t y, size_t size)
{
    square_job s = {r, x, y, 0, {{{0}}}};
    while (((size_t)2 << s.top) < size)
        s.top++;
    square_maxima_of(r, x, y, s.top, &s.q);
    premerge_part(m, pool, &s, s.top, 0, 0, 0);
}

/* The squares of rows y..y + size - 1 on the image's grid of size x size
 * squares, then the columns left over (narrower than size) in smaller
 * squares. */
static void premerge_square_row(merge_state *m, slot_pool *pool, const strip_rows *r, size_t y,
                                size_t size)
{
    size_t x = 0;
    for (; x + size <= r->w; x += size)
        premerge_square(m, pool, r, x, y, size);
    for (size_t part = size / 2; part >= 2; part /= 2)
        for (; x + part <= r->w; x += part)
            for (size_t dy = 0; dy < size; dy += part)
                premerge_square(m, pool, r, x, y + dy, part);
}

/* The squares and blocks of rows y0..y1 - 1 (bk: their buckets, as
 * strip_buckets leaves them), on the image's grid of SQUARE_MAX x
 * SQUARE_MAX squares, their quarters and so on down to 2 x 2 blocks (so
 * that none straddles a JPEG's 8 x 8 blocks, whatever the strip's
 * height); their inner pairs leave bk. */
static void premerge_blocks(merge_state *m, slot_pool *pool, const pair_ctx *p, size_t y0,
                            size_t y1, uint16_t *bk)
{
    size_t w = p->img->width;
    strip_rows r = {bk, y0, w, (y1 - y0) * w, p->cls, p->img->height};
    for (size_t y = y0; y + 1 < y1;) {
        size_t size = SQUARE_MAX;
        while (size > 2 && (y % size || y + size > y1))
            size /= 2;
        if (y % size) {
            y++;
            continue;
        }
        premerge_square_row(m, pool, &r, y, size);
        y += size;
    }
}

/* How many of the n buckets bk hold each bucket number (0..NO_BUCKET),
 * into cnt. Four tallies side by side: in runs of one bucket (the pairs
 * of no bucket come in runs) each increment would otherwise wait for the
 * store of the one before. */
#define TALLIES 4
static void count_buckets(const uint16_t *bk, size_t n, uint32_t cnt[PAIR_BUCKETS + 1])
{
    uint32_t tally[TALLIES][PAIR_BUCKETS + 1];
    memset(tally, 0, sizeof tally);
    size_t i = 0;
    for (; i + TALLIES <= n; i += TALLIES)
        for (size_t l = 0; l < TALLIES; l++)
            tally[l][bk[i + l]]++;
    for (; i < n; i++)
        tally[0][bk[i]]++;
    for (size_t b = 0; b <= PAIR_BUCKETS; b++) {
        cnt[b] = 0;
        for (size_t l = 0; l < TALLIES; l++)
            cnt[b] += tally[l][b];
    }
}

/* The sorted pair list of strip s into L (which holds it), its blocks
 * merged first (m, pool: the band's). */
static void strip_pairs(const pair_ctx *p, pair_lists *L, size_t s, const strip_scratch *t,
                        merge_state *m, slot_pool *pool)
{
    size_t w = p->img->width, h = p->img->height;
    size_t y0 = s * L->rows, y1 = y0 + L->rows < h ? y0 + L->rows : h;
    size_t npx = (y1 - y0) * w, at = (s - L->first) * L->cap;
    uint32_t cnt[PAIR_BUCKETS + 1];
    strip_buckets(p, y0, y1, t->bk, t->f, t->b);
    if (m->blocks)
        premerge_blocks(m, pool, p, y0, y1, t->bk);
    count_buckets(t->bk, 2 * npx, cnt);
    uint32_t *start = L->start + (s - L->first) * (PAIR_BUCKETS + 1);
    start[0] = 0;
    for (size_t b = 0; b < PAIR_BUCKETS; b++)
        start[b + 1] = start[b] + cnt[b], cnt[b] = start[b]; /* cnt: write positions */
    /* pixel order, the right pair first; most pairs have no bucket (the
     * squares' inner pairs), in runs that the branch predicts */
    for (size_t i = 0; i < npx; i++)
        for (size_t dir = 0; dir < 2; dir++) {
            uint16_t b = t->bk[i + dir * npx];
            if (b == NO_BUCKET)
                continue;
            if (L->code)
                L->code[at + cnt[b]++] = (uint16_t)(2 * i + dir);
            else
                L->pairs[at + cnt[b]++] = (uint32_t)(2 * (y0 * w + i) + dir);
        }
}

/* The strips' geometry (rows, count, list capacity) for a w x h image: a
 * whole number of the largest squares per strip, so that the squares
 * cover every strip alike. */
static pair_lists pair_geometry(size_t w, size_t h)
{
    pair_lists L;
    memset(&L, 0, sizeof L);
    L.rows = 32768 / w < STRIP_ROWS ? 32768 / w / SQUARE_MAX * SQUARE_MAX : STRIP_ROWS;
    if (L.rows < STRIP_ROWS_MIN)
        L.rows = STRIP_ROWS_MIN;
    L.strips = (h + L.rows - 1) / L.rows;
    L.cap = 2 * L.rows * w;
    return L;
}

typedef struct init_ctx {
    uint32_t *node;
    size_t w;
} init_ctx;

/* Every pixel a one-pixel region (ROOT | SINGLE: all bits set). */
static void init_rows(size_t begin, size_t end, size_t slice, void *vctx)
{
    (void)slice;
    init_ctx *ic = vctx;
    memset(ic->node + begin * ic->w, 0xff, (end - begin) * ic->w * sizeof *ic->node);
}

/* Every pixel to its region's id, ids 1..m in row-major order of the roots
 * (label 0: no region), written over the node array. Parents point to
 * smaller indices, so one forward pass resolves every pixel (ids are
 * flagged while indices are mixed in). */
static uint32_t number_regions(const uint8_t *cls, uint32_t *node, size_t n)
{
    uint32_t m = 0;
    for (size_t k = 0; k < n; k++) {
        uint32_t p = node[k];
        if (cls[k] != PROVISIONAL)
            node[k] = 0;
        else if (p & ROOT)
            node[k] = ROOT | ++m;
        else
            node[k] = node[p];
    }
    for (size_t k = 0; k < n; k++)
        node[k] &= ~ROOT;
    return m;
}

/* One pair: two regions merge when their means agree. */
static void merge_pair(merge_state *m, size_t k, size_t q, slot_pool *pool)
{
    uint32_t a = root_of(m->node, (uint32_t)k), b = root_of(m->node, (uint32_t)q);
    if (a == b)
        return;
    float sa[3], sb[3];
    uint32_t ca = region_sums(m, a, sa), cb = region_sums(m, b, sb);
    if (means_agree(m, sa, sb, ca, cb))
        merge(m, a, b, sa, sb, ca + cb, pool);
}

/* The merging runs band by band: a band is BAND_STRIPS strips (a fixed
 * number of rows, whatever the thread count), merged on its own in order
 * of increasing difference, the bands on all cores; then the pairs that
 * cross from a band's last row into the next band are merged, in the same
 * order. A region never spans two bands until that last step, so bands
 * touch disjoint nodes. A band takes slots from its thread's own array of
 * m->band_slots (a merge of two one-pixel regions takes one, so half a
 * band's pixels is enough); its surviving regions keep theirs in the
 * band's range of the image's array (from band * m->band_slots), the
 * borders take theirs from the range after them. Slots taken and freed
 * within a band (most of them: pairs of pixels merge first, then merge
 * on) so never touch fresh memory. The merging is memory-bound: a band's
 * nodes are a working set a core can keep near, where the whole image's
 * were not. */
#define BAND_STRIPS 8

/* Where the merging is in the pair lists: bucket b of strip s (within
 * s0..s1), i of e. */
typedef struct cursor {
    size_t b, s, s0, s1;
    uint32_t i, e;
} cursor;

#define BATCH 256
#define AHEAD 16

/* Pair i of strip s's list as (2k + dir) over the whole image. */
static uint32_t pair_at(const pair_lists *L, size_t s, size_t i)
{
    size_t at = (s - L->first) * L->cap + i;
    return L->code ? (uint32_t)(s * L->cap + L->code[at]) : L->pairs[at];
}

/* Pairs i..i + n - 1 of strip s's list as pair_at gives them, into out. */
static void copy_pairs(const pair_lists *L, size_t s, size_t i, size_t n, uint32_t *restrict out)
{
    size_t at = (s - L->first) * L->cap + i;
    if (!L->code) {
        memcpy(out, L->pairs + at, n * sizeof *out);
        return;
    }
    const uint16_t *restrict code = L->code + at;
    uint32_t base = (uint32_t)(s * L->cap);
    for (size_t j = 0; j < n; j++)
        out[j] = base + code[j];
}

/* Does pair p (2k + dir) cross from the last row of its band into the
 * next band? */
static int crosses(const pair_lists *L, size_t w, uint32_t p)
{
    size_t rows = L->rows * BAND_STRIPS, y = (p / 2) / w;
    return (p & 1) && y % rows == rows - 1;
}

/* The next (up to) BATCH pairs of strips s0..s1 in order: bucket by
 * bucket, each across the strips; pairs that cross into the next band are
 * left for later. 0 at the end. */
static size_t gather(const pair_lists *L, size_t w, cursor *c, uint32_t *batch)
{
    size_t nb = 0;
    while (nb < BATCH && c->b < PAIR_BUCKETS) {
        if (c->i < c->e && c->s + 1 < c->s1) {
            /* a strip before the band's last holds no pair that crosses
             * into the next band: its pairs are copied as they are */
            size_t n = c->e - c->i < BATCH - nb ? c->e - c->i : BATCH - nb;
            copy_pairs(L, c->s, c->i, n, batch + nb);
            c->i += (uint32_t)n, nb += n;
            continue;
        }
        if (c->i < c->e) { /* the band's last strip: its last row's down pairs cross */
            uint32_t p = pair_at(L, c->s, c->i++);
            if (!crosses(L, w, p))
                batch[nb++] = p;
            continue;
        }
        if (++c->s == c->s1) {
            c->s = c->s0;
            if (++c->b == PAIR_BUCKETS)
                break;
        }
        const uint32_t *st = L->start + (c->s - L->first) * (PAIR_BUCKETS + 1);
        c->i = st[c->b];
        c->e = st[c->b + 1];
    }
    return nb;
}

static size_t band_count(const pair_lists *L)
{
    return (L->strips + BAND_STRIPS - 1) / BAND_STRIPS;
}

/* Pairs in batches, so that the nodes of later pairs are fetched while
 * earlier ones merge: the loop waits for memory, not for arithmetic. */
static void merge_batch(merge_state *m, const uint32_t *batch, size_t nb, size_t w,
                        slot_pool *pool)
{
    for (size_t j = 0; j < nb; j++) {
#ifdef __GNUC__
        if (j + AHEAD < nb) {
            size_t k2 = batch[j + AHEAD] / 2;
            __builtin_prefetch(&m->node[k2]);
            __builtin_prefetch(&m->node[batch[j + AHEAD] % 2 ? k2 + w : k2 + 1]);
        }
#endif
        size_t k = batch[j] / 2;
        merge_pair(m, k, batch[j] % 2 ? k + w : k + 1, pool);
    }
}

/* The pairs that cross each band's border into the next, kept for the
 * last step: band b's in bucket order at pairs + b * width, with
 * PAIR_BUCKETS + 1 offsets at start + b * (PAIR_BUCKETS + 1). */
typedef struct border_lists {
    uint32_t *pairs, *start;
} border_lists;

/* One band's own lists and a strip's scratch, per worker, made at the
 * worker's first band. */
typedef struct band_work {
    pair_lists L;
    strip_scratch t;
    merge_state m; /* the image's, with the worker's own slots */
    int made, failed;
} band_work;

typedef struct band_ctx {
    merge_state *m;
    pair_ctx p;
    pair_lists geometry; /* the image's strips (no lists) */
    border_lists borders;
    band_work *work;     /* by worker */
    int failed;
} band_ctx;

static int band_work_alloc(const band_ctx *x, band_work *bw)
{
    size_t w = x->p.img->width, rows = x->geometry.rows, cap = x->geometry.cap;
    bw->L = x->geometry;
    if (cap <= 65536) /* 16-bit codes: half the memory of pixel indices */
        bw->L.code = malloc(BAND_STRIPS * cap * sizeof *bw->L.code);
    else
        bw->L.pairs = malloc(BAND_STRIPS * cap * sizeof *bw->L.pairs);
    bw->L.start = malloc(BAND_STRIPS * (PAIR_BUCKETS + 1) * sizeof *bw->L.start);
    bw->t.bk = malloc(2 * rows * w * sizeof *bw->t.bk);
    bw->t.f = malloc(w * sizeof *bw->t.f);
    bw->t.b = malloc(w * sizeof *bw->t.b);
    bw->m = *x->m;
    bw->m.slots = malloc(x->m->band_slots * sizeof *bw->m.slots);
    return (bw->L.code || bw->L.pairs) && bw->L.start && bw->t.bk && bw->t.f && bw->t.b &&
           bw->m.slots;
}

static void band_work_free(band_work *bw)
{
    free(bw->L.code);
    free(bw->L.pairs);
    free(bw->L.start);
    free(bw->t.bk);
    free(bw->t.f);
    free(bw->t.b);
    free(bw->m.slots);
}

/* The surviving regions of a band (its pixels first .. first + n - 1):
 * their slots from the thread's array into the band's range of the
 * image's, their roots' words to match. */
static void keep_slots(merge_state *m, const slot *own, size_t band, size_t first, size_t n)
{
    uint32_t next = (uint32_t)(band * m->band_slots);
    for (size_t k = first; k < first + n; k++) {
        uint32_t word = m->node[k];
        if ((word & ROOT) && (word & ~ROOT) != SINGLE) {
            m->slots[next] = own[word & ~ROOT];
            m->node[k] = ROOT | next++;
        }
    }
}

/* The pairs of strip s (a band's last) that cross into the next band,
 * in bucket order, into the band's border list. */
static void keep_border(const pair_lists *L, size_t w, size_t s, size_t band,
                        border_lists *B)
{
    uint32_t *out = B->pairs + band * w, *start = B->start + band * (PAIR_BUCKETS + 1);
    const uint32_t *st = L->start + (s - L->first) * (PAIR_BUCKETS + 1);
    uint32_t n = 0;
    for (size_t b = 0; b < PAIR_BUCKETS; b++) {
        start[b] = n;
        for (uint32_t i = st[b]; i < st[b + 1]; i++) {
            uint32_t p = pair_at(L, s, i);
            if (crosses(L, w, p))
                out[n++] = p;
        }
    }
    start[PAIR_BUCKETS] = n;
}

/* One band on its own, on worker 'worker': its strips' lists, its merging,
 * its border pairs. A band's result does not depend on which worker takes
 * it (its slots start from the worker's first, its lists are its own), so
 * the bands are handed out one at a time: equal slices of them left one
 * core idle while the other merged the bands with the most flakes. */
static void merge_band(size_t band, size_t worker, void *vctx)
{
    band_ctx *x = vctx;
    band_work *bw = &x->work[worker];
    if (!bw->made) {
        bw->made = 1;
        bw->failed = !band_work_alloc(x, bw);
    }
    if (bw->failed)
        return;
    size_t w = x->p.img->width;
    uint32_t batch[BATCH];
    pair_lists *L = &bw->L;
    size_t s0 = band * BAND_STRIPS;
    size_t s1 = s0 + BAND_STRIPS < L->strips ? s0 + BAND_STRIPS : L->strips;
    L->first = s0;
    slot_pool pool = {0, SINGLE};
    for (size_t s = s0; s < s1; s++)
        strip_pairs(&x->p, L, s, &bw->t, &bw->m, &pool);
    cursor c = {0, s0, s0, s1, L->start[0], L->start[1]};
    size_t nb, y0 = s0 * L->rows,
               y1 = s1 * L->rows < x->p.img->height ? s1 * L->rows : x->p.img->height;
    while ((nb = gather(L, w, &c, batch)) > 0)
        merge_batch(&bw->m, batch, nb, w, &pool);
    keep_slots(x->m, bw->m.slots, band, y0 * w, (y1 - y0) * w);
    keep_border(L, w, s1 - 1, band, &x->borders);
}

/* The pairs across band borders, bucket by bucket, border by border. */
static void merge_borders(merge_state *m, const border_lists *B, size_t w, size_t bands)
{
    uint32_t batch[BATCH];
    slot_pool pool = {(uint32_t)(bands * m->band_slots), SINGLE};
    size_t nb = 0;
    for (size_t b = 0; b < PAIR_BUCKETS; b++)
        for (size_t band = 0; band < bands; band++) {
            const uint32_t *st = B->start + band * (PAIR_BUCKETS + 1);
            for (uint32_t i = st[b]; i < st[b + 1]; i++) {
                batch[nb++] = B->pairs[band * w + i];
                if (nb == BATCH) {
                    merge_batch(m, batch, nb, w, &pool);
                    nb = 0;
                }
            }
        }
    merge_batch(m, batch, nb, w, &pool);
}

/* Neighbour pairs in order of increasing difference, band by band on the
 * given threads, then across the bands' borders. -1 when out of memory. */
static int merge_pairs(band_ctx *x, size_t threads)
{
    size_t w = x->p.img->width, bands = band_count(&x->geometry);
    x->borders.pairs = malloc(bands * w * sizeof *x->borders.pairs);
    x->borders.start = malloc(bands * (PAIR_BUCKETS + 1) * sizeof *x->borders.start);
    size_t workers = lam_parallel_slices(bands, threads);
    x->work = calloc(workers, sizeof *x->work);
    if (x->borders.pairs && x->borders.start && x->work)
        lam_parallel_each_worker(bands, threads, merge_band, x);
    else
        x->failed = 1;
    for (size_t k = 0; x->work && k < workers; k++) {
        x->failed |= x->work[k].failed;
        band_work_free(&x->work[k]);
    }
    free(x->work);
    if (!x->failed)
        merge_borders(x->m, &x->borders, w, bands);
    free(x->borders.pairs);
    free(x->borders.start);
    return x->failed ? -1 : 0;
}

/* The regions of the provisional pixels into seg->label (the union-find
 * runs in it and leaves the region ids). */
static lam_status grow(const lam_contrast_map *img, size_t channels, const double *delta,
                       const double *sigma, const lam_segment_options *opt,
                       lam_segmentation *seg, size_t threads, uint32_t *regions, lam_error *err)
{
    size_t w = img->width, n = img->width * img->height;
    merge_state m;
    memset(&m, 0, sizeof m);
    m.bright = opt->bright_scaling;
    m.blocks = !opt->pixel_order;
    memcpy(m.delta, delta, sizeof m.delta);
    memcpy(m.sigma, sigma, sizeof m.sigma);
    m.channels = channels;
    for (size_t c = 0; c < 3; c++) /* a grey map's three planes are equal */
        m.plane[c] = img->plane[c];
    m.node = seg->label; /* the union-find becomes the label map */
    init_ctx ic = {m.node, w};
    lam_parallel_for(img->height, threads, init_rows, &ic);
    band_ctx x = {&m, {img, seg->cls, &m}, pair_geometry(w, img->height), {NULL, NULL}, NULL, 0};
    size_t bands = band_count(&x.geometry);
    m.band_slots = (BAND_STRIPS * x.geometry.rows * w + 1) / 2;
    /* small pages: untouched slots then cost no memory (only the pages
     * that merges take are faulted in) */
    m.slots = lam_sparse_malloc((bands * m.band_slots + bands * w) * sizeof *m.slots);
    int failed = !m.slots || merge_pairs(&x, threads);
    free(m.slots);
    if (failed)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate region merging");
    *regions = number_regions(seg->cls, m.node, n);
    return LAM_OK;
}

/* Is a region the bare substrate: every channel within tolerance of zero? */
static int at_zero(const lam_region_stats *r, size_t channels, const double *tol)
{
    if (!r->interior)
        return 0; /* no measurement: a speck inside an edge band, dropped later */
    for (size_t c = 0; c < channels; c++)
        if (fabs(r->sum[c] / (double)r->interior) > tol[c])
            return 0;
    return 1;
}

/* Per channel: an edge changes a channel by more than a third of a
 * monolayer step and by more than the channel's own artefacts (3 x the
 * 95th percentile of 2- and 4-pixel differences on the substrate); regions
 * merge when their means differ by less than delta - a sixth of a monolayer
 * step, or the artefacts (JPEG block steps) when they are larger - plus
 * three standard errors of the pixel noise 'sigma'. */
static void thresholds(const lam_contrast_map *img, size_t channels, const double *c1,
                       const double noise[3], size_t threads, edge_ctx *ec, double delta[3],
                       double sigma[3])
{
    double step1 = 0, zero[3];
    for (size_t c = 0; c < channels; c++)
        step1 = fmax(step1, fabs(c1[c]));
    for (size_t c = 0; c < 3; c++)
        zero[c] = fmax(SUBSTRATE_FRACTION * step1, noise[c]); /* ~3 sigma after denoising */
    lam__texture tx;
    lam__substrate_texture(img, channels, zero, threads, &tx);
    for (size_t c = 0; c < 3; c++) {
        double step = c < channels ? fabs(c1[c]) : 0;
        ec->t2[c] = (float)fmax(EDGE_STEP_FRACTION * step, 3 * tx.p95[0][c]);
        ec->t4[c] = (float)fmax(1.5 * EDGE_STEP_FRACTION * step, 3 * tx.p95[1][c]);
        ec->s2[c] = fixed_threshold(ec->t2[c]);
        ec->s4[c] = fixed_threshold(ec->t4[c]);
        sigma[c] = tx.sigma[0][c] / 1.4142; /* a difference has twice the variance */
        delta[c] = fmax(fmax(JOIN_STEP_FRACTION * step, 0.75 * tx.p95[0][c]), 1e-4);
        delta[c] = fmax(delta[c], 1.5 * tx.cells[c]);
    }
}

lam_status lam_segment_uniform(const lam_contrast_map *img, size_t channels, const double *c1,
                               const double noise[3], const double scatter[3],
                               const lam_segment_options *opt, lam_segmentation *seg,
                               lam_error *err)
{
    size_t w = img->width, h = img->height, n = w * h;
    if (n >= UINT32_MAX / 2)
        return lam_error_set(err, LAM_ETOOBIG, "image too large to label");
    edge_ctx ec;
    memset(&ec, 0, sizeof ec);
    ec.img = img;
    ec.channels = channels;
    ec.cls = seg->cls;
    ec.bright = opt->bright_scaling;
    double delta[3], sigma[3];
    size_t threads = opt->threads ? opt->threads : 1;
    thresholds(img, channels, c1, noise, threads, &ec, delta, sigma);
    /* substrate patches differ by its low-frequency errors, and flat areas
     * of a JPEG by whole DC steps: let them merge */
    for (size_t c = 0; c < 3; c++)
        delta[c] = fmax(fmax(delta[c], 2 * scatter[c]), FILE_STEP_MERGE * opt->file_step[c]);
    lam_status st = mark_edges(&ec, threads, err);
    if (st)
        return st;
    /* a JPEG's colour ringing can make a small flake transition throughout */
    if (img->block_coded && lam__rescue_cores(seg->cls, w, h, LAM_CLASS_NONE, PROVISIONAL,
                                               threads))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the transition depth");
    uint32_t m = 0;
    if ((st = grow(img, channels, delta, sigma, opt, seg, threads, &m, err)))
        return st;
    lam_region_stats *R = calloc(m ? m : 1, sizeof *R);
    uint8_t *depth = lam__boundary_depth(seg->label, w, h, threads);
    if (!R || !depth) {
        free(R);
        free(depth);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate %u regions", m);
    }
    lam__region_statistics(img, seg->cls, seg->label, depth, R, m, threads);
    free(depth);
    /* the tolerance follows the channel where a monolayer shows most: a
     * channel it barely changes (blue near 300 nm) must not turn patches of
     * substrate with a JPEG chroma step into regions */
    double tol[3], step1 = 0;
    for (size_t c = 0; c < channels; c++)
        step1 = fmax(step1, fabs(c1[c]));
    if (opt->faint_step > 0)
        step1 = fmin(step1, opt->faint_step);
    double steps = img->block_coded ? FILE_STEP_SUBSTRATE_JPEG : FILE_STEP_SUBSTRATE;
    for (size_t c = 0; c < 3; c++)
        tol[c] = fmax(fmax(fmax(SUBSTRATE_FRACTION * step1, SUBSTRATE_MIN), 4 * scatter[c]),
                      steps * opt->file_step[c]);
    for (uint32_t i = 0; i < m; i++)
        R[i].cls = at_zero(&R[i], channels, tol) ? LAM_CLASS_SUBSTRATE : PROVISIONAL;
    if (!lam__keep_regions(seg, R, m, opt->min_region_px, threads))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the kept regions' labels");
    return LAM_OK;
}
