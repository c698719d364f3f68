/* segment.c - segmentations: allocation, connected-component labelling
 * (union-find) and region statistics; the uniform-contrast pixel classes
 * are made in segment_grow.c, the joining of flakes in segment_join.c. */
#include "lamina/segment.h"
#include "lamina/bigalloc.h"
#include "lamina/parallel.h"
#include "segment_internal.h"
#include "vector_clones.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

lam_segment_options lam_segment_options_default(void)
{
    lam_segment_options o = {12, 1, {0, 0, 0}, 0, 0, 0};
    return o;
}

lam_status lam_segmentation_alloc(size_t width, size_t height, lam_segmentation **out,
                                  lam_error *err)
{
    lam_segmentation *s = calloc(1, sizeof *s);
    size_t n = width * height;
    if (s) {
        s->cls = lam_big_malloc(n);
        s->label = lam_big_calloc(n, sizeof *s->label);
    }
    if (!s || !s->cls || !s->label) {
        lam_segmentation_free(s);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a %zux%zu segmentation", width,
                             height);
    }
    s->width = width;
    s->height = height;
    *out = s;
    return LAM_OK;
}

void lam_segmentation_free(lam_segmentation *s)
{
    if (!s)
        return;
    free(s->cls);
    free(s->label);
    free(s->regions);
    free(s);
}

uint32_t lam__label_root(uint32_t *parent, uint32_t a)
{
    while (parent[a] != a) {
        parent[a] = parent[parent[a]];
        a = parent[a];
    }
    return a;
}

/* The end of the run of label row[x] that starts at x. */
static size_t run_end(const uint32_t *row, size_t x, size_t w)
{
    uint32_t l = row[x];
    while (++x < w && row[x] == l)
        ;
    return x;
}

/* City-block distance of each labelled pixel to the nearest pixel of
 * another label (or none) or outside the image, counted to
 * LAM_DEPTH_CAP: 1 on a region's boundary, 0 off regions. The L1 distance
 * separates: it is the least, over the rows y + dy, of |dy| plus the
 * distance along that row to a pixel not of the centre's label (0 when
 * the pixel below or above is not of it). Rows LAM_DEPTH_CAP or more away
 * cannot give less than the cap, and along a row the distance counted to
 * the cap needs only the pixel's DEPTH_REACH neighbours each side. So each
 * row of depths comes from 2 DEPTH_REACH + 1 rows of labels and of their
 * along-row distances, which a slice keeps in a ring: vector loops over
 * rows, where the exact transform took a pass along every row's runs and
 * two down and up every column (6 % of a 12 MP image's time). */
#define DEPTH_REACH (LAM_DEPTH_CAP - 1)
#define DEPTH_RING (2 * DEPTH_REACH + 1)
#if DEPTH_REACH != 3
#error "along_row and depth_row are written out for three rows and pixels each side"
#endif

typedef struct depth_ctx {
    const uint32_t *lab;
    uint8_t *d;
    uint8_t *ring; /* per slice: DEPTH_RING rows of along-row distances, then a row of 0 */
    size_t w, h;
} depth_ctx;

/* The along-row distance of pixel x counted to the cap: 1 + how many of
 * its neighbours on the nearer-ending side, up to DEPTH_REACH, are of its
 * label without a break (the row's ends count as other labels). */
static uint8_t along_one(const uint32_t *row, size_t w, size_t x)
{
    unsigned left = 1, right = 1, on_l = 1, on_r = 1;
    for (size_t j = 1; j <= DEPTH_REACH; j++) {
        on_l &= x >= j && row[x - j] == row[x];
        on_r &= x + j < w && row[x + j] == row[x];
        left += on_l, right += on_r;
    }
    return (uint8_t)(left < right ? left : right);
}

/* The same for a whole row; the pixels DEPTH_REACH or more from its ends
 * without a bound test (a vector loop). */
LAM_VECTOR_CLONES
static void along_row(const uint32_t *restrict row, size_t w, uint8_t *restrict out)
{
    size_t inner = w > 2 * DEPTH_REACH ? w - 2 * DEPTH_REACH : 0; /* pixels clear of both ends */
    const uint32_t *restrict c = row + DEPTH_REACH;
    uint8_t *restrict o = out + DEPTH_REACH;
    for (size_t i = 0; i < inner; i++) { /* DEPTH_REACH 3, written out */
        const uint32_t *p = c + i;
        uint32_t l = p[0];
        unsigned l1 = p[-1] == l, l2 = l1 & (p[-2] == l), l3 = l2 & (p[-3] == l);
        unsigned r1 = p[1] == l, r2 = r1 & (p[2] == l), r3 = r2 & (p[3] == l);
        unsigned left = 1 + l1 + l2 + l3, right = 1 + r1 + r2 + r3;
        o[i] = (uint8_t)(left < right ? left : right);
    }
    for (size_t x = 0; x < w && x < DEPTH_REACH; x++)
        out[x] = along_one(row, w, x);
    for (size_t x = DEPTH_REACH + inner; x < w; x++)
        out[x] = along_one(row, w, x);
}

/* One term of a pixel's depth: the row dy away (its labels lab, its
 * along-row distances al) gives dy plus its along-row distance when it is
 * of label l there, else dy. */
static inline unsigned depth_term(unsigned dy, uint32_t lab, uint8_t al, uint32_t l)
{
    return dy + (lab == l ? al : 0u);
}

/* Row y's depths from the rows around it: lab[i] and al[i] are row y + i
 * - DEPTH_REACH's labels and along-row distances (a row beyond the image:
 * any labels, distances 0, so its term is dy alone). */
LAM_VECTOR_CLONES
static void depth_row(const uint32_t *const lab[DEPTH_RING], const uint8_t *const al[DEPTH_RING],
                      size_t w, uint8_t *restrict out)
{
    const uint32_t *restrict c = lab[DEPTH_REACH];
    const uint32_t *restrict u1 = lab[2], *restrict u2 = lab[1], *restrict u3 = lab[0];
    const uint32_t *restrict d1 = lab[4], *restrict d2 = lab[5], *restrict d3 = lab[6];
    const uint8_t *restrict ac = al[DEPTH_REACH];
    const uint8_t *restrict au1 = al[2], *restrict au2 = al[1], *restrict au3 = al[0];
    const uint8_t *restrict ad1 = al[4], *restrict ad2 = al[5], *restrict ad3 = al[6];
    for (size_t x = 0; x < w; x++) {
        uint32_t l = c[x];
        unsigned d = ac[x], t;
        t = depth_term(1, u1[x], au1[x], l), d = t < d ? t : d;
        t = depth_term(1, d1[x], ad1[x], l), d = t < d ? t : d;
        t = depth_term(2, u2[x], au2[x], l), d = t < d ? t : d;
        t = depth_term(2, d2[x], ad2[x], l), d = t < d ? t : d;
        t = depth_term(3, u3[x], au3[x], l), d = t < d ? t : d;
        t = depth_term(3, d3[x], ad3[x], l), d = t < d ? t : d;
        out[x] = (uint8_t)(l ? d : 0u);
    }
}

/* The rows of a view of the label map (w x h pixels from lab, rows
 * 'stride' apart; its outside counts as other labels) one after the
 * other: a ring of DEPTH_RING rows of along-row distances (w each), then
 * a row of zeros (the along-row distances of rows beyond the view). */
typedef struct depth_view {
    const uint32_t *lab;
    size_t stride, w, h;
    uint8_t *ring;
} depth_view;

/* Start at row y0: the along-row distances of the rows above it and of
 * those below it but the last of its window. */
static void view_start(const depth_view *v, size_t y0)
{
    memset(v->ring + DEPTH_RING * v->w, 0, v->w);
    for (size_t y = y0 > DEPTH_REACH ? y0 - DEPTH_REACH : 0; y < y0 + DEPTH_REACH && y < v->h; y++)
        along_row(v->lab + y * v->stride, v->w, v->ring + (y % DEPTH_RING) * v->w);
}

/* Row y's depths into out (w): the row entering the window first. Rows
 * are taken in order from the row view_start began at. */
static void view_row(const depth_view *v, size_t y, uint8_t *out)
{
    size_t w = v->w;
    if (y + DEPTH_REACH < v->h)
        along_row(v->lab + (y + DEPTH_REACH) * v->stride, w,
                  v->ring + ((y + DEPTH_REACH) % DEPTH_RING) * w);
    const uint32_t *lab[DEPTH_RING];
    const uint8_t *al[DEPTH_RING];
    for (size_t i = 0; i < DEPTH_RING; i++) {
        size_t r = y + i; /* row r - DEPTH_REACH */
        int inside = r >= DEPTH_REACH && r - DEPTH_REACH < v->h;
        lab[i] = inside ? v->lab + (r - DEPTH_REACH) * v->stride : v->lab + y * v->stride;
        al[i] = inside ? v->ring + ((r - DEPTH_REACH) % DEPTH_RING) * w : v->ring + DEPTH_RING * w;
    }
    depth_row(lab, al, w, out);
}

static void depth_rows(size_t y0, size_t y1, size_t slice, void *vctx)
{
    const depth_ctx *c = vctx;
    depth_view v = {c->lab, c->w, c->w, c->h, c->ring + slice * (DEPTH_RING + 1) * c->w};
    view_start(&v, y0);
    for (size_t y = y0; y < y1; y++)
        view_row(&v, y, c->d + y * c->w);
}

uint8_t *lam__boundary_depth(const uint32_t *lab, size_t w, size_t h, size_t threads)
{
    size_t slices = lam_parallel_slices(h, threads);
    uint8_t *d = lam_big_malloc(w * h), *ring = malloc(slices * (DEPTH_RING + 1) * w);
    if (!d || !ring) {
        free(d);
        free(ring);
        return NULL;
    }
    depth_ctx c = {lab, d, ring, w, h};
    lam_parallel_for(h, threads, depth_rows, &c);
    free(ring);
    return d;
}

/* ---- one region alone ----
 * The same depth and statistics for the pixels of one label l, all of
 * which lie within box (x0, y0, x1, y1 inclusive): only its pixels are
 * read and written, so regions can be measured side by side into one
 * depth map. A pixel's depth depends on its own region's pixels alone
 * (the distance to the nearest pixel not in it), so the whole map's rows
 * taken over the box alone (a view whose outside holds no pixel of l)
 * give it the same value. */
int lam__region_depth(const uint32_t *lab, size_t w, uint32_t l, const size_t box[4],
                      uint8_t *depth)
{
    size_t bw = box[2] - box[0] + 1, bh = box[3] - box[1] + 1;
    uint8_t *ring = malloc((DEPTH_RING + 2) * bw), *out = ring + (DEPTH_RING + 1) * bw;
    if (!ring)
        return -1;
    depth_view v = {lab + box[1] * w + box[0], w, bw, bh, ring};
    view_start(&v, 0);
    for (size_t y = 0; y < bh; y++) {
        view_row(&v, y, out);
        const uint32_t *row = v.lab + y * w;
        uint8_t *dr = depth + (box[1] + y) * w + box[0];
        for (size_t x = 0; x < bw; x++)
            if (row[x] == l)
                dr[x] = out[x];
    }
    free(ring);
    return 0;
}

/* The interior sums of run_channel over n pixels without a saturated
 * one: no branch, a vector loop (|v| < 2^16, so v * v fits 32 bits
 * unsigned, though not signed: the square is taken unsigned). */
LAM_VECTOR_CLONES
static void interior_sums(const uint16_t *restrict q, const uint8_t *restrict depth, size_t n,
                          int64_t *sum, uint64_t *sumsq)
{
    int64_t a = 0;
    uint64_t b = 0;
    for (size_t i = 0; i < n; i++) {
        int32_t in = -(int32_t)(depth[i] >= LAM_INTERIOR_DEPTH); /* all ones inside */
        int32_t v = ((int32_t)LAM_CONTRAST_UNIT - q[i]) & in;
        a += v;
        b += (uint32_t)v * (uint32_t)v;
    }
    *sum = a;
    *sumsq = b;
}

/* The interior sums of channel c over pixels k0..k1 - 1 of row y (those
 * at least LAM_INTERIOR_DEPTH deep and not clipped) into *sum and *sumsq.
 * A pixel's contrast is (UNIT - q) / UNIT exactly (lam_contrast_of), so
 * the run's sums are taken in whole steps, in integers - exact, in any
 * order, and without a floating-point addition's latency per pixel - and
 * then scaled by a power of two. They are the same numbers as adding the
 * contrasts pixel by pixel in double whenever that addition never rounds:
 * sums of contrasts have 12 bits below the point, of their squares 24,
 * so it is exact until a region's sum of squares passes 2^29 (2^29 pixels
 * at |contrast| 1; only glare of contrast -15 over 2.4 million pixels
 * would get there, and there the integers are the more exact). */
static void run_channel(const lam_contrast_map *img, const uint8_t *depth, size_t c, size_t y,
                        size_t k0, size_t k1, double *sum, double *sumsq)
{
    const uint16_t *plane = img->plane[c];
    size_t row = y * img->width;
    int64_t a = 0;
    uint64_t b = 0;
    if (!img->clipped_count)
        interior_sums(plane + k0, depth + k0, k1 - k0, &a, &b);
    for (size_t k = k0; img->clipped_count && k < k1; k++) {
        int in = depth[k] >= LAM_INTERIOR_DEPTH && !lam_contrast_clipped(img, k - row, y);
        int64_t v = in ? (int64_t)LAM_CONTRAST_UNIT - plane[k] : 0;
        a += v;
        b += (uint64_t)(v * v);
    }
    *sum += (double)a * (1.0 / LAM_CONTRAST_UNIT);
    *sumsq += (double)b * (1.0 / ((double)LAM_CONTRAST_UNIT * LAM_CONTRAST_UNIT));
}

/* The deepest of n depths (at least *deepest) and how many are interior,
 * without a branch (a run without a saturated pixel). */
LAM_VECTOR_CLONES
static void run_depth(const uint8_t *restrict depth, size_t n, unsigned *deepest, size_t *deep)
{
    uint8_t most = (uint8_t)*deepest;
    uint32_t count = 0;
    for (size_t i = 0; i < n; i++) {
        most = depth[i] > most ? depth[i] : most;
        count += depth[i] >= LAM_INTERIOR_DEPTH;
    }
    *deepest = most;
    *deep = count;
}

/* One run of pixels x0..x1-1 of row y with label l: area, box, centroid
 * sums (whole numbers, exact in any grouping), depth, the interior's and
 * clipped pixel counts and the interior's contrast sums of channels
 * 0..channels-1 (run_channel). */
static void run_statistics(const lam_contrast_map *img, const uint8_t *cls, const uint8_t *depth,
                           lam_region_stats *r, size_t y, size_t x0, size_t x1, int channels)
{
    size_t w = img->width, h = img->height, k0 = y * w, len = x1 - x0;
    r->cls = cls[k0 + x1 - 1]; /* the class of the region's last pixel, as pixel by pixel */
    r->area += len;
    r->sx += (double)(x0 + x1 - 1) * (double)len / 2;
    r->sy += (double)y * (double)len;
    if (x0 < r->bbox[0]) r->bbox[0] = x0;
    if (y < r->bbox[1]) r->bbox[1] = y;
    if (x1 - 1 > r->bbox[2]) r->bbox[2] = x1 - 1;
    if (y > r->bbox[3]) r->bbox[3] = y;
    if (x0 == 0 || y == 0 || x1 == w || y + 1 == h)
        r->touches_border = 1;
    unsigned deepest = r->depth_max;
    size_t deep = 0, clipped = 0;
    if (!img->clipped_count)
        run_depth(depth + k0 + x0, len, &deepest, &deep);
    for (size_t k = k0 + x0; img->clipped_count && k < k0 + x1; k++) {
        deepest = depth[k] > deepest ? depth[k] : deepest;
        if (depth[k] >= LAM_INTERIOR_DEPTH) {
            deep++;
            clipped += (size_t)lam_contrast_clipped(img, k - k0, y);
        }
    }
    r->depth_max = deepest;
    r->clipped += clipped;
    r->interior += deep - clipped;
    for (int c = 0; c < channels; c++)
        run_channel(img, depth, (size_t)c, y, k0 + x0, k0 + x1, &r->sum[c], &r->sumsq[c]);
}

/* The interior sums of channels 1 and 2 of one run (the second half of
 * run_statistics' work, for a second thread): sum and sum of squares of
 * channel 1, then of channel 2. */
static void run_sums_12(const lam_contrast_map *img, const uint8_t *depth, double s[4], size_t y,
                        size_t x0, size_t x1)
{
    size_t k0 = y * img->width;
    for (size_t c = 1; c < 3; c++)
        run_channel(img, depth, c, y, k0 + x0, k0 + x1, &s[2 * c - 2], &s[2 * c - 1]);
}

/* Area, box, centroid, depth, and the contrast sums over the interior:
 * pixels at least LAM_INTERIOR_DEPTH from the boundary (blur and the
 * denoising filter mix two classes within ~2 px of an edge). Taken run by
 * run of one label along each row. With two threads, one walk takes the
 * geometry and channel 0, the other channels 1 and 2 into sums of its own
 * (each region's sums are added in the same order: the same values). */
typedef struct stats_job {
    const lam_contrast_map *img;
    const uint8_t *cls, *depth;
    const uint32_t *lab;
    lam_region_stats *R;
    double (*sums_12)[4]; /* NULL: one walk takes every channel */
} stats_job;

static void stats_walk(size_t begin, size_t end, size_t slice, void *vjob)
{
    (void)slice;
    const stats_job *j = vjob;
    size_t w = j->img->width, h = j->img->height;
    for (size_t part = begin; part < end; part++)
        for (size_t y = 0; y < h; y++) {
            const uint32_t *row = j->lab + y * w;
            for (size_t x = 0, x1; x < w; x = x1) {
                uint32_t l = row[x];
                x1 = run_end(row, x, w);
                if (l && part == 0)
                    run_statistics(j->img, j->cls, j->depth, &j->R[l - 1], y, x, x1,
                                   j->sums_12 ? 1 : 3);
                else if (l)
                    run_sums_12(j->img, j->depth, j->sums_12[l - 1], y, x, x1);
            }
        }
}

void lam__region_statistics(const lam_contrast_map *img, const uint8_t *cls, const uint32_t *lab,
                            const uint8_t *depth, lam_region_stats *R, uint32_t m,
                            size_t threads)
{
    size_t w = img->width, h = img->height;
    for (uint32_t i = 0; i < m; i++) {
        R[i].id = i + 1;
        R[i].bbox[0] = w, R[i].bbox[1] = h;
    }
    stats_job job = {img, cls, depth, lab, R, NULL};
    if (threads > 1 && m)
        job.sums_12 = calloc(m, sizeof *job.sums_12); /* out of memory: one walk */
    lam_parallel_for(job.sums_12 ? 2 : 1, threads, stats_walk, &job);
    for (uint32_t i = 0; job.sums_12 && i < m; i++)
        for (int c = 1; c < 3; c++) {
            R[i].sum[c] = job.sums_12[i][2 * c - 2];
            R[i].sumsq[c] = job.sums_12[i][2 * c - 1];
        }
    free(job.sums_12);
}

void lam__region_statistics_in(const lam_contrast_map *img, const uint8_t *cls, const uint32_t *lab,
                               const uint8_t *depth, uint32_t l, const size_t box[4],
                               lam_region_stats *r)
{
    size_t w = img->width;
    memset(r, 0, sizeof *r);
    r->id = l;
    r->bbox[0] = w, r->bbox[1] = img->height;
    for (size_t y = box[1]; y <= box[3]; y++) {
        const uint32_t *row = lab + y * w;
        for (size_t x = box[0], x1; x <= box[2]; x = x1) {
            x1 = row[x] == l ? run_end(row, x, w) : x + 1;
            if (row[x] == l)
                run_statistics(img, cls, depth, r, y, x, x1, 3);
        }
    }
}

lam_status lam_segment_regions(const lam_contrast_map *img, const lam_segment_options *opt,
                               lam_segmentation *seg, lam_error *err)
{
    size_t w = seg->width, h = seg->height;
    uint8_t *cls = seg->cls;
    uint32_t *lab = seg->label;
    size_t cap = 1024, next = 1;
    uint32_t *parent = malloc(cap * sizeof *parent);
    if (!parent)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate labels");
    parent[0] = 0;
    /* pass 1: provisional labels, union with the left and upper neighbours */
    for (size_t y = 0; y < h; y++)
        for (size_t x = 0; x < w; x++) {
            size_t k = y * w + x;
            uint8_t c = cls[k];
            if (c == LAM_CLASS_SUBSTRATE || c == LAM_CLASS_NONE) {
                lab[k] = 0;
                continue;
            }
            uint32_t l = x && cls[k - 1] == c ? lab[k - 1] : 0;
            uint32_t u = y && cls[k - w] == c ? lab[k - w] : 0;
            if (!l && !u) {
                if (next == cap) {
                    if (cap > (size_t)UINT32_MAX / 2) {
                        free(parent);
                        return lam_error_set(err, LAM_ETOOBIG, "too many provisional regions");
                    }
                    uint32_t *np = realloc(parent, 2 * cap * sizeof *np);
                    if (!np) {
                        free(parent);
                        return lam_error_set(err, LAM_ENOMEM, "cannot grow labels");
                    }
                    parent = np;
                    cap *= 2;
                }
                parent[next] = (uint32_t)next;
                lab[k] = (uint32_t)next++;
            } else if (l && u && l != u) {
                uint32_t rl = lam__label_root(parent, l), ru = lam__label_root(parent, u);
                if (rl < ru)
                    parent[ru] = rl;
                else
                    parent[rl] = ru;
                lab[k] = rl < ru ? rl : ru;
            } else {
                lab[k] = l ? l : u;
            }
        }
    /* compact roots to 1..m in order of first appearance (row-major) */
    uint32_t *final = calloc(next, sizeof *final);
    if (!final) {
        free(parent);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate labels");
    }
    uint32_t m = 0;
    for (size_t k = 0; k < w * h; k++) {
        if (!lab[k])
            continue;
        uint32_t r = lam__label_root(parent, lab[k]);
        if (!final[r])
            final[r] = ++m;
        lab[k] = final[r];
    }
    free(parent);
    free(final);
    lam_region_stats *R = calloc(m ? m : 1, sizeof *R);
    uint8_t *depth = lam__boundary_depth(lab, w, h, opt->threads ? opt->threads : 1);
    if (!R || !depth) {
        free(R);
        free(depth);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate %u regions", m);
    }
    lam__region_statistics(img, cls, lab, depth, R, m, opt->threads ? opt->threads : 1);
    free(depth);
    if (!lam__keep_regions(seg, R, m, opt->min_region_px, opt->threads ? opt->threads : 1))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate labels");
    return LAM_OK;
}

/* The label map renumbered (remap by old id), dropped regions' pixels
 * given their class (cls_of by old id): rows begin..end. */
typedef struct relabel_job {
    lam_segmentation *seg;
    const uint32_t *remap;
    const uint8_t *cls_of;
} relabel_job;

/* remap[0] is 0, so a pixel of no region keeps label 0 and its class;
 * without branches (a region's edge made them unpredictable). */
LAM_VECTOR_CLONES
static void relabel_span(uint32_t *restrict label, uint8_t *restrict cls,
                         const uint32_t *restrict remap, const uint8_t *restrict cls_of, size_t n)
{
    for (size_t k = 0; k < n; k++) {
        uint32_t l = label[k], kept = remap[l];
        label[k] = kept;
        cls[k] = l && !kept ? cls_of[l] : cls[k];
    }
}

static void relabel_rows(size_t begin, size_t end, size_t slice, void *vjob)
{
    (void)slice;
    const relabel_job *j = vjob;
    lam_segmentation *seg = j->seg;
    size_t k0 = begin * seg->width;
    relabel_span(seg->label + k0, seg->cls + k0, j->remap, j->cls_of, (end - begin) * seg->width);
}

int lam__keep_regions(lam_segmentation *seg, lam_region_stats *R, uint32_t m, size_t min_px,
                      size_t threads)
{
    uint32_t *remap = calloc((size_t)m + 1, sizeof *remap);
    uint8_t *cls_of = calloc((size_t)m + 1, 1);
    if (!remap || !cls_of) {
        free(remap);
        free(cls_of);
        free(R);
        return 0;
    }
    size_t kept = 0;
    for (uint32_t i = 0; i < m; i++) {
        cls_of[i + 1] = R[i].cls == LAM_CLASS_SUBSTRATE ? LAM_CLASS_SUBSTRATE : LAM_CLASS_NONE;
        /* specks, and slivers along edges (almost no interior), are dropped */
        if (R[i].cls != LAM_CLASS_SUBSTRATE && R[i].area >= min_px && R[i].interior >= 4 &&
            R[i].interior * 10 >= R[i].area) {
            R[kept] = R[i];
            R[kept].id = (uint32_t)(kept + 1);
            remap[i + 1] = (uint32_t)++kept;
        }
    }
    relabel_job job = {seg, remap, cls_of};
    lam_parallel_for(seg->height, threads, relabel_rows, &job);
    free(remap);
    free(cls_of);
    free(seg->regions);
    seg->regions = R;
    seg->count = kept;
    return 1;
}

/* ---- usable rectangle ---- */

/* One row of the histogram of lam_usable_rectangle: the run of pixels
 * down to row y, columns x0..x1, that are region l's with their four
 * neighbours (none on the image's edge). Branch-free for vector units. */
LAM_VECTOR_CLONES
static void interior_heights(const lam_segmentation *seg, uint32_t l, size_t y, size_t x0,
                             size_t x1, size_t *restrict height)
{
    size_t w = seg->width;
    if (y == 0 || y + 1 >= seg->height || w < 3) {
        memset(height, 0, (x1 - x0 + 1) * sizeof *height);
        return;
    }
    const uint32_t *row = seg->label + y * w;
    size_t a = x0 > 0 ? x0 : 1, b = x1 + 1 < w ? x1 : w - 2; /* columns with four neighbours */
    if (x0 == 0)
        height[0] = 0;
    if (x1 + 1 >= w)
        height[x1 - x0] = 0;
    for (size_t x = a; x <= b; x++) {
        size_t in = (row[x] == l) & (row[x - 1] == l) & (row[x + 1] == l) & (row[x - w] == l) &
                    (row[x + w] == l);
        height[x - x0] = (height[x - x0] + 1) & (0 - in);
    }
}

void lam_usable_rectangle(const lam_segmentation *seg, const lam_region_stats *r, size_t wh[2],
                          size_t xy[2])
{
    size_t x0 = r->bbox[0], x1 = r->bbox[2], y0 = r->bbox[1], y1 = r->bbox[3];
    size_t bw = x1 - x0 + 1;
    size_t *height = calloc(bw, sizeof *height), *stack = malloc((bw + 1) * sizeof *stack);
    wh[0] = wh[1] = 0;
    xy[0] = r->bbox[0], xy[1] = r->bbox[1];
    if (!height || !stack) {
        free(height);
        free(stack);
        return;
    }
    size_t best = 0;
    for (size_t y = y0; y <= y1; y++) {
        interior_heights(seg, r->id, y, x0, x1, height);
        /* largest rectangle in the histogram (monotone stack) */
        size_t top = 0;
        for (size_t i = 0; i <= bw; i++) {
            size_t hcur = i < bw ? height[i] : 0;
            while (top && height[stack[top - 1]] >= hcur) {
                size_t hh = height[stack[--top]];
                size_t left = top ? stack[top - 1] + 1 : 0;
                size_t width = i - left;
                if (hh * width > best) {
                    best = hh * width;
                    wh[0] = width;
                    wh[1] = hh;
                    xy[0] = x0 + left;
                    xy[1] = y + 1 - hh;
                }
            }
            stack[top++] = i;
        }
    }
    free(height);
    free(stack);
}
