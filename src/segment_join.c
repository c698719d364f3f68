/* segment_join.c - one region per flake of one layer count.
 *
 * Uniform-contrast segmentation (segment_grow.c) splits a flake wherever
 * the image's artefacts cut it: JPEG block and chroma steps, demosaicing
 * zippers, dust. Its parts then get the same layer count, each with a
 * small usable area, and a person sees a dozen monolayers where there is
 * one. Once the layer counts are known, parts with the same confident
 * count that touch, or face each other across a thin band of transition
 * pixels, are joined here; the band pixels whose contrast is close to the
 * joined region's (artefacts) join too, those far from it (a crack, a fold,
 * the substrate between two flakes) do not. */
#include "lamina/segment.h"
#include "segment_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define JOIN_BAND 10 /* widest band of transition pixels crossed: an edge marks 2-3 px
                       * either side of a step, dilated by 1, so a thin line of
                       * artefact becomes a band of up to ~9 px */
#define JOIN_RUNS 4 /* straight runs across the band needed to join two regions */

typedef struct join_ctx {
    const lam_image *img;
    lam_segmentation *seg;
    const int *key;     /* per region (index id-1): joinable when >= 0 and equal */
    uint32_t *parent;   /* union-find over region ids 0..count */
} join_ctx;

static int joinable(const join_ctx *j, uint32_t a, uint32_t b)
{
    return a && b && a != b && j->key[a - 1] >= 0 && j->key[a - 1] == j->key[b - 1];
}

static void unite(uint32_t *parent, uint32_t a, uint32_t b)
{
    a = lam__label_root(parent, a), b = lam__label_root(parent, b);
    if (a < b)
        parent[b] = a;
    else if (b < a)
        parent[a] = b;
}

/* Walk one line (a row: step 1, a column: step w): neighbours of two
 * joinable regions unite at once; a band of 1..JOIN_BAND transition pixels
 * between them counts as one run for the pair (a, b). */
typedef struct run_pair {
    uint32_t a, b;
} run_pair;

typedef struct pair_list {
    run_pair *v;
    size_t n, cap;
} pair_list;

static int push_pair(pair_list *L, uint32_t a, uint32_t b)
{
    if (L->n == L->cap) {
        size_t nc = L->cap ? 2 * L->cap : 1024;
        run_pair *nv = realloc(L->v, nc * sizeof *nv);
        if (!nv)
            return -1;
        L->v = nv, L->cap = nc;
    }
    L->v[L->n++] = (run_pair){a < b ? a : b, a < b ? b : a};
    return 0;
}

static int scan_line(join_ctx *j, size_t first, size_t count, size_t step, pair_list *L)
{
    const uint32_t *lab = j->seg->label;
    const uint8_t *cls = j->seg->cls;
    size_t i = 1;
    while (i < count) {
        size_t k = first + i * step, prev = k - step;
        if (lab[k]) {
            if (joinable(j, lab[prev], lab[k]))
                unite(j->parent, lab[prev], lab[k]);
            i++;
            continue;
        }
        size_t e = i; /* the band: transition pixels only (not substrate) */
        while (e < count && !lab[first + e * step] && cls[first + e * step] == LAM_CLASS_NONE)
            e++;
        if (e < count && e > i && e - i <= JOIN_BAND && lab[first + e * step] &&
            joinable(j, lab[prev], lab[first + e * step]) &&
            push_pair(L, lab[prev], lab[first + e * step]))
            return -1;
        i = e > i ? e : i + 1;
    }
    return 0;
}

static int by_pair(const void *x, const void *y)
{
    const run_pair *p = x, *q = y;
    if (p->a != q->a)
        return p->a < q->a ? -1 : 1;
    return (p->b > q->b) - (p->b < q->b);
}

/* Pairs crossed by at least JOIN_RUNS runs unite. */
static void unite_bridged(join_ctx *j, pair_list *L)
{
    if (L->n)
        qsort(L->v, L->n, sizeof *L->v, by_pair);
    for (size_t i = 0, e; i < L->n; i = e) {
        for (e = i; e < L->n && L->v[e].a == L->v[i].a && L->v[e].b == L->v[i].b; e++)
            ;
        if (e - i >= JOIN_RUNS)
            unite(j->parent, L->v[i].a, L->v[i].b);
    }
}

/* Band pixels between two parts of one joined region, close to its mean in
 * every channel, join it (rows, then columns). */
static void fill_bands(join_ctx *j, const double (*mean)[3], size_t channels, const double fill[3])
{
    size_t w = j->seg->width, h = j->seg->height;
    uint32_t *lab = j->seg->label;
    for (int vertical = 0; vertical < 2; vertical++) {
        size_t lines = vertical ? w : h, count = vertical ? h : w, step = vertical ? w : 1;
        for (size_t l = 0; l < lines; l++) {
            size_t first = vertical ? l : l * w;
            for (size_t i = 1; i < count; i++) {
                size_t k = first + i * step, e = i;
                uint32_t left = lab[k - step];
                if (lab[k] || !left)
                    continue;
                while (e < count && !lab[first + e * step] &&
                       j->seg->cls[first + e * step] == LAM_CLASS_NONE)
                    e++;
                if (e == count || e - i > JOIN_BAND || !lab[first + e * step] ||
                    lam__label_root(j->parent, left) !=
                        lam__label_root(j->parent, lab[first + e * step]))
                    continue;
                uint32_t r = lam__label_root(j->parent, left);
                for (size_t t = i; t < e; t++) {
                    size_t q = first + t * step;
                    int close = 1;
                    for (size_t c = 0; c < channels && close; c++)
                        close = fabs(j->img->plane[c][q] - mean[r - 1][c]) <= fill[c];
                    if (close)
                        lab[q] = left, j->seg->cls[q] = j->seg->regions[left - 1].cls;
                }
                i = e;
            }
        }
    }
}

/* Interior-weighted mean contrast of each joined region, at its root. */
static void joined_means(join_ctx *j, double (*mean)[3])
{
    size_t n = j->seg->count;
    double *weight = calloc(n + 1, sizeof *weight);
    memset(mean, 0, n * sizeof *mean);
    if (!weight)
        return;
    for (uint32_t id = 1; id <= n; id++) {
        const lam_region_stats *s = &j->seg->regions[id - 1];
        uint32_t r = lam__label_root(j->parent, id);
        weight[r] += (double)s->interior;
        for (int c = 0; c < 3; c++)
            mean[r - 1][c] += s->sum[c];
    }
    for (uint32_t id = 1; id <= n; id++)
        for (int c = 0; c < 3 && weight[id] > 0; c++)
            mean[id - 1][c] /= weight[id];
    free(weight);
}

/* New ids in row-major order of first pixel; map[old id - 1] = new id. */
static uint32_t renumber(join_ctx *j, uint32_t *map)
{
    size_t n = j->seg->width * j->seg->height, count = j->seg->count;
    uint32_t *new_of_root = calloc(count + 1, sizeof *new_of_root), m = 0;
    if (!new_of_root)
        return 0;
    for (size_t k = 0; k < n; k++) {
        uint32_t l = j->seg->label[k];
        if (!l)
            continue;
        uint32_t r = lam__label_root(j->parent, l);
        if (!new_of_root[r])
            new_of_root[r] = ++m;
        j->seg->label[k] = new_of_root[r];
    }
    for (uint32_t id = 1; id <= count; id++)
        map[id - 1] = new_of_root[lam__label_root(j->parent, id)];
    free(new_of_root);
    return m;
}

static lam_status restat(const lam_image *img, lam_segmentation *seg, uint32_t m, lam_error *err)
{
    lam_region_stats *R = calloc(m ? m : 1, sizeof *R);
    uint8_t *depth = lam__boundary_depth(seg->label, seg->width, seg->height);
    if (!R || !depth) {
        free(R);
        free(depth);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate %u regions", m);
    }
    lam__region_statistics(img, seg->cls, seg->label, depth, R, m);
    free(depth);
    free(seg->regions);
    seg->regions = R;
    seg->count = m;
    return LAM_OK;
}

/* ---- holes ----
 * A hole of a joined region: pixels inside its bounding box that are not
 * in it and cannot reach the box's border without crossing it. Transition
 * pixels and small regions of no other confident count (JPEG rings around
 * an 8 x 8 block, a speck) make such holes; they join the region when the
 * hole holds no substrate pixel, no region of another confident count, is
 * no larger than a twentieth of the region (or HOLE_MIN px), and 80 % of
 * its pixels lie within 'fill' of the region's contrast. A bubble, fold or
 * an island of another layer count differs in contrast and stays. */
#define HOLE_MIN 64
#define HOLE_CLOSE_FRACTION 0.8

enum { H_FREE = 0, H_REGION = 1, H_OUTSIDE = 2, H_DONE = 3 };

typedef struct hole_ctx {
    join_ctx *j;
    const double (*mean)[3];  /* by root id - 1 */
    const double *fill;
    size_t channels;
    uint8_t *mark;            /* per pixel, within the current box */
    size_t *stack, *members;
    size_t box[4];
} hole_ctx;

static int in_box(const hole_ctx *h, size_t x, size_t y)
{
    return x >= h->box[0] && x <= h->box[2] && y >= h->box[1] && y <= h->box[3];
}

/* Flood the pixels marked 'from' connected to k, marking them 'to'; the
 * members are listed (when 'list') and counted. */
static size_t flood(hole_ctx *h, size_t k, uint8_t from, uint8_t to, int list)
{
    size_t w = h->j->seg->width, top = 0, n = 0;
    h->stack[top++] = k;
    h->mark[k] = to;
    while (top) {
        size_t q = h->stack[--top], x = q % w, y = q / w;
        if (list)
            h->members[n] = q;
        n++;
        const long dx[4] = {-1, 1, 0, 0}, dy[4] = {0, 0, -1, 1};
        for (int d = 0; d < 4; d++) {
            size_t nx = x + (size_t)dx[d], ny = y + (size_t)dy[d];
            if (!in_box(h, nx, ny) || h->mark[ny * w + nx] != from)
                continue;
            h->mark[ny * w + nx] = to;
            h->stack[top++] = ny * w + nx;
        }
    }
    return n;
}

static int hole_joins(hole_ctx *h, uint32_t r, size_t n, size_t area)
{
    const lam_segmentation *seg = h->j->seg;
    size_t close = 0;
    if (n > (area / 20 > HOLE_MIN ? area / 20 : HOLE_MIN))
        return 0;
    for (size_t i = 0; i < n; i++) {
        size_t q = h->members[i];
        uint32_t l = seg->label[q];
        if ((!l && seg->cls[q] != LAM_CLASS_NONE) ||
            (l && h->j->key[l - 1] >= 0 && h->j->key[l - 1] != h->j->key[r - 1]))
            return 0; /* substrate, or a region of another confident count */
        int ok = 1;
        for (size_t c = 0; c < h->channels && ok; c++)
            ok = fabs(h->j->img->plane[c][q] - h->mean[r - 1][c]) <= h->fill[c];
        close += (size_t)ok;
    }
    return (double)close >= HOLE_CLOSE_FRACTION * (double)n;
}

/* The holes of joined region r (root id) with box and area; returns the
 * number of holes joined. */
static size_t region_holes(hole_ctx *h, uint32_t r, size_t area)
{
    lam_segmentation *seg = h->j->seg;
    size_t w = seg->width, joined = 0;
    for (size_t y = h->box[1]; y <= h->box[3]; y++)
        for (size_t x = h->box[0]; x <= h->box[2]; x++) {
            uint32_t l = seg->label[y * w + x];
            h->mark[y * w + x] = l && lam__label_root(h->j->parent, l) == r ? H_REGION : H_FREE;
        }
    for (size_t y = h->box[1]; y <= h->box[3]; y++)
        for (size_t x = h->box[0]; x <= h->box[2]; x++) {
            int edge = x == h->box[0] || x == h->box[2] || y == h->box[1] || y == h->box[3];
            if (edge && h->mark[y * w + x] == H_FREE)
                flood(h, y * w + x, H_FREE, H_OUTSIDE, 0);
        }
    for (size_t y = h->box[1]; y <= h->box[3]; y++)
        for (size_t x = h->box[0]; x <= h->box[2]; x++) {
            if (h->mark[y * w + x] != H_FREE)
                continue;
            size_t n = flood(h, y * w + x, H_FREE, H_DONE, 1);
            if (!hole_joins(h, r, n, area))
                continue;
            for (size_t i = 0; i < n; i++) {
                size_t q = h->members[i];
                if (seg->label[q])
                    h->j->parent[lam__label_root(h->j->parent, seg->label[q])] = r;
                seg->label[q] = r, seg->cls[q] = seg->regions[r - 1].cls;
            }
            joined++;
        }
    return joined;
}

/* Holes of every joined region of a confident count. */
static lam_status fill_holes(join_ctx *j, const double (*mean)[3], size_t channels,
                             const double fill[3], lam_error *err)
{
    lam_segmentation *seg = j->seg;
    size_t n = seg->count, total = seg->width * seg->height;
    size_t (*box)[4] = malloc((n ? n : 1) * sizeof *box), *area = calloc(n + 1, sizeof *area);
    hole_ctx h = {j, mean, fill, channels, malloc(total), malloc(total * sizeof(size_t)),
                  malloc(total * sizeof(size_t)), {0, 0, 0, 0}};
    lam_status st = LAM_OK;
    if (!box || !area || !h.mark || !h.stack || !h.members) {
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate hole filling");
    } else {
        for (uint32_t id = 1; id <= n; id++) {
            uint32_t r = lam__label_root(j->parent, id);
            const lam_region_stats *s = &seg->regions[id - 1];
            if (area[r] == 0)
                memcpy(box[r - 1], s->bbox, sizeof box[0]);
            for (int k = 0; k < 2; k++) {
                box[r - 1][k] = s->bbox[k] < box[r - 1][k] ? s->bbox[k] : box[r - 1][k];
                box[r - 1][k + 2] = s->bbox[k + 2] > box[r - 1][k + 2] ? s->bbox[k + 2]
                                                                        : box[r - 1][k + 2];
            }
            area[r] += s->area;
        }
        for (uint32_t id = 1; id <= n; id++)
            if (lam__label_root(j->parent, id) == id && j->key[id - 1] >= 0) {
                memcpy(h.box, box[id - 1], sizeof h.box);
                region_holes(&h, id, area[id]);
            }
    }
    free(box);
    free(area);
    free(h.mark);
    free(h.stack);
    free(h.members);
    return st;
}

lam_status lam_segment_join(const lam_image *contrast, size_t channels, const int *key,
                            const double fill[3], lam_segmentation *seg, uint32_t *map,
                            size_t *joined, lam_error *err)
{
    size_t w = seg->width, h = seg->height, n = seg->count;
    *joined = 0;
    join_ctx j = {contrast, seg, key, malloc((n + 1) * sizeof(uint32_t))};
    double (*mean)[3] = malloc((n ? n : 1) * sizeof *mean);
    pair_list L = {0};
    int bad = !j.parent || !mean;
    for (uint32_t id = 0; !bad && id <= n; id++)
        j.parent[id] = id;
    for (size_t y = 0; y < h && !bad; y++)
        bad = scan_line(&j, y * w, w, 1, &L);
    for (size_t x = 0; x < w && !bad; x++)
        bad = scan_line(&j, x, h, w, &L);
    lam_status st = bad ? lam_error_set(err, LAM_ENOMEM, "cannot allocate region joining")
                        : LAM_OK;
    if (!st) {
        unite_bridged(&j, &L);
        joined_means(&j, mean);
        fill_bands(&j, (const double (*)[3])mean, channels, fill);
        st = fill_holes(&j, (const double (*)[3])mean, channels, fill, err);
    }
    uint32_t m = 0;
    if (!st) {
        for (uint32_t id = 1; id <= n; id++)
            *joined += lam__label_root(j.parent, id) != id;
        m = renumber(&j, map);
        if (n && !m)
            st = lam_error_set(err, LAM_ENOMEM, "cannot allocate region joining");
    }
    if (!st)
        st = restat(contrast, seg, m, err);
    free(L.v);
    free(mean);
    free(j.parent);
    return st;
}
