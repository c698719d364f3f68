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
#include "lamina/bigalloc.h"
#include "segment_internal.h"
#include "lamina/parallel.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define JOIN_BAND 10 /* widest band of transition pixels crossed: an edge marks 2-3 px
                       * either side of a step, dilated by 1, so a thin line of
                       * artefact becomes a band of up to ~9 px */
#define JOIN_RUNS 4 /* straight runs across the band needed to join two regions */

typedef struct join_ctx {
    const lam_contrast_map *img;
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

/* ---- the pairs ----
 * Along each line (row or column), a labelled pixel next to another
 * joinable region unites with it at once; a run of 1..JOIN_BAND transition
 * pixels between two joinable regions counts as one run for the pair
 * (a, b). Rows and columns are walked together, row by row (the columns'
 * states side by side: a column walked down the image would touch a new
 * cache line at every pixel), in slices of rows on the caller's threads.
 * Each slice unites in a forest of its own and lists its runs; the forests
 * and lists are merged after, which gives what one walk would: the sets
 * a union makes do not depend on its order, nor a count of runs. */
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

/* Advance a line's walk over a pixel of label l and class c, 'prev' the
 * label of the pixel before it on the line: 1 when l closes a run. The
 * walk's state is the current run of transition pixels (in no region, not
 * substrate), *len long (0: none; JOIN_BAND + 1: longer than a band), and
 * *before the label of the pixel before it. */
static inline int line_step(uint32_t *before, uint8_t *len, uint32_t prev, uint32_t l, uint8_t c)
{
    if (l) {
        int closes = *len > 0;
        *len = 0;
        return closes;
    }
    if (c != LAM_CLASS_NONE) {
        *len = 0;
    } else {
        if (!*len)
            *before = prev;
        *len += *len <= JOIN_BAND;
    }
    return 0;
}

/* Lines are walked in blocks of LINE_BLOCK pixels; most blocks lie inside
 * one region or the substrate and change nothing. */
#define LINE_BLOCK 16

/* Whether the n pixels from lab (labels; 'prev' the labels before them on
 * their lines, cls their classes, len their lines' runs) leave every walk
 * as it is: no run under way, and each pixel of the label before it and
 * not a transition pixel. Branch-free, for the vector units. */
static int quiet_block(const uint32_t *lab, const uint32_t *prev, const uint8_t *cls,
                       const uint8_t *len, size_t n)
{
    unsigned acc = 0;
    for (size_t i = 0; i < n; i++)
        acc |= (lab[i] ^ prev[i]) | len[i] | (unsigned)((lab[i] == 0) & (cls[i] == LAM_CLASS_NONE));
    return acc == 0;
}

static const uint8_t no_runs[LINE_BLOCK];

typedef struct scan_slice {
    uint32_t *parent; /* this slice's forest over ids 0..count */
    pair_list L;
    uint32_t *before; /* per column */
    uint8_t *len;     /* per column */
    int failed;
} scan_slice;

typedef struct scan_job {
    const join_ctx *j;
    scan_slice *slice;
} scan_job;

/* One pixel of a line walk, recording in slice s (NULL: the walk only). */
static inline void scan_pixel(const join_ctx *j, scan_slice *s, uint32_t *before, uint8_t *len,
                              uint32_t prev, uint32_t l, uint8_t c)
{
    uint32_t b = *before;
    size_t n = *len;
    if (!line_step(before, len, prev, l, c)) {
        if (l && s && joinable(j, prev, l))
            unite(s->parent, prev, l);
    } else if (s && n <= JOIN_BAND && joinable(j, b, l)) {
        s->failed |= push_pair(&s->L, b, l);
    }
}

/* Row y: its own walk, then the columns' steps into it (y > 0). */
static void scan_row(const join_ctx *j, scan_slice *s, size_t y)
{
    size_t w = j->seg->width;
    const uint32_t *lab = j->seg->label + y * w;
    const uint8_t *cls = j->seg->cls + y * w;
    uint32_t before = 0;
    uint8_t len = 0;
    for (size_t x = 1, n; x < w; x += n) {
        n = w - x < LINE_BLOCK ? w - x : LINE_BLOCK;
        if (len || !quiet_block(lab + x, lab + x - 1, cls + x, no_runs, n))
            for (size_t i = x; i < x + n; i++)
                scan_pixel(j, s, &before, &len, lab[i - 1], lab[i], cls[i]);
    }
    for (size_t x = 0, n; y && x < w; x += n) {
        n = w - x < LINE_BLOCK ? w - x : LINE_BLOCK;
        if (!quiet_block(lab + x, lab + x - w, cls + x, s->len + x, n))
            for (size_t i = x; i < x + n; i++)
                scan_pixel(j, s, &s->before[i], &s->len[i], lab[i - w], lab[i], cls[i]);
    }
}

/* Rows y0..y1-1 and the columns' steps into them. The columns' walks at
 * y0 are replayed from JOIN_BAND + 2 rows above: a run that began before
 * that is longer than a band whatever came before it. */
static void scan_rows(size_t y0, size_t y1, size_t slice, void *vjob)
{
    const scan_job *job = vjob;
    const join_ctx *j = job->j;
    scan_slice *s = &job->slice[slice];
    size_t w = j->seg->width;
    const uint32_t *lab = j->seg->label;
    const uint8_t *cls = j->seg->cls;
    memset(s->len, 0, w);
    for (size_t y = y0 > JOIN_BAND + 2 ? y0 - JOIN_BAND - 2 : 1; y < y0; y++)
        for (size_t x = 0, k = y * w; x < w; x++, k++)
            scan_pixel(j, NULL, &s->before[x], &s->len[x], lab[k - w], lab[k], cls[k]);
    for (size_t y = y0; y < y1 && !s->failed; y++)
        scan_row(j, s, y);
}

/* The slices' forests into j->parent, their runs into one list L. */
static int merge_slices(join_ctx *j, scan_slice *S, size_t slices, pair_list *L)
{
    for (size_t t = 0; t < slices; t++) {
        for (uint32_t id = 1; id <= j->seg->count; id++) {
            uint32_t r = lam__label_root(S[t].parent, id);
            if (r != id)
                unite(j->parent, id, r);
        }
        for (size_t i = 0; i < S[t].L.n; i++)
            if (push_pair(L, S[t].L.v[i].a, S[t].L.v[i].b))
                return -1;
    }
    return 0;
}

/* Every row and column walked (unions in j->parent, runs in L). */
static int scan_lines(join_ctx *j, size_t threads, pair_list *L)
{
    size_t w = j->seg->width, n = j->seg->count;
    size_t slices = lam_parallel_slices(j->seg->height, threads);
    scan_slice *S = calloc(slices, sizeof *S);
    int bad = !S;
    for (size_t t = 0; !bad && t < slices; t++) {
        S[t].parent = malloc((n + 1) * sizeof(uint32_t));
        S[t].before = malloc(w * sizeof *S[t].before);
        S[t].len = malloc(w);
        bad = !S[t].parent || !S[t].before || !S[t].len;
        for (uint32_t id = 0; !bad && id <= n; id++)
            S[t].parent[id] = id;
    }
    if (!bad) {
        scan_job job = {j, S};
        lam_parallel_for(j->seg->height, slices, scan_rows, &job);
        for (size_t t = 0; t < slices; t++)
            bad |= S[t].failed;
    }
    bad = bad || merge_slices(j, S, slices, L);
    for (size_t t = 0; S && t < slices; t++) {
        free(S[t].parent);
        free(S[t].before);
        free(S[t].len);
        free(S[t].L.v);
    }
    free(S);
    return bad ? -1 : 0;
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

/* ---- band pixels ----
 * Band pixels between two parts of one joined region, close to its mean in
 * every channel, join it: every row, then every column, each walked as in
 * the pairs' scan. A line reads and writes only its own pixels, so rows
 * (then columns) run side by side on the caller's threads; the roots are
 * looked up in a table (the forest does not change meanwhile). */
typedef struct fill_job {
    join_ctx *j;
    const uint32_t *root;    /* per id */
    const double (*mean)[3]; /* by root id - 1 */
    size_t channels;
    const double *fill;
    uint32_t *before; /* per column */
    uint8_t *len;     /* per column */
} fill_job;

/* The run of len pixels from 'first' (every 'step') between two parts of
 * left's joined region: those close to its mean join left. */
static void fill_run(const fill_job *f, uint32_t left, size_t first, size_t step, size_t len)
{
    lam_segmentation *seg = f->j->seg;
    const double *mean = f->mean[f->root[left] - 1];
    for (size_t t = 0; t < len; t++) {
        size_t q = first + t * step;
        int close = 1;
        for (size_t c = 0; c < f->channels && close; c++)
            close = fabs(lam_contrast_value(f->j->img, c, q) - mean[c]) <= f->fill[c];
        if (close)
            seg->label[q] = left, seg->cls[q] = seg->regions[left - 1].cls;
    }
}

/* Pixels k..k+n-1 of lines 'step' apart from the pixels before them, the
 * lines' walks at before[i], len[i] (i = 0..n-1, or all at *before, *len
 * with 'one'). */
static void fill_pixels(const fill_job *f, size_t k, size_t n, size_t step, uint32_t *before,
                        uint8_t *len, int one)
{
    const lam_segmentation *seg = f->j->seg;
    for (size_t i = 0; i < n; i++, k++) {
        uint32_t *b = one ? before : before + i, l = seg->label[k], left = *b;
        uint8_t *e = one ? len : len + i, run = *e;
        if (line_step(b, e, seg->label[k - step], l, seg->cls[k]) && run <= JOIN_BAND && left &&
            f->root[left] == f->root[l])
            fill_run(f, left, k - run * step, step, run);
    }
}

static void fill_rows(size_t y0, size_t y1, size_t slice, void *vjob)
{
    (void)slice;
    const fill_job *f = vjob;
    size_t w = f->j->seg->width;
    const uint32_t *lab = f->j->seg->label;
    const uint8_t *cls = f->j->seg->cls;
    for (size_t y = y0; y < y1; y++) {
        uint32_t before = 0;
        uint8_t len = 0;
        for (size_t k = y * w + 1, end = (y + 1) * w, n; k < end; k += n) {
            n = end - k < LINE_BLOCK ? end - k : LINE_BLOCK;
            if (len || !quiet_block(lab + k, lab + k - 1, cls + k, no_runs, n))
                fill_pixels(f, k, n, 1, &before, &len, 1);
        }
    }
}

/* Columns x0..x1-1, walked down together row by row. */
static void fill_columns(size_t x0, size_t x1, size_t slice, void *vjob)
{
    (void)slice;
    const fill_job *f = vjob;
    size_t w = f->j->seg->width, h = f->j->seg->height;
    const uint32_t *lab = f->j->seg->label;
    const uint8_t *cls = f->j->seg->cls;
    memset(f->len + x0, 0, x1 - x0);
    for (size_t y = 1; y < h; y++)
        for (size_t x = x0, n; x < x1; x += n) {
            size_t k = y * w + x;
            n = x1 - x < LINE_BLOCK ? x1 - x : LINE_BLOCK;
            if (!quiet_block(lab + k, lab + k - w, cls + k, f->len + x, n))
                fill_pixels(f, k, n, w, f->before + x, f->len + x, 0);
        }
}

static int fill_bands(join_ctx *j, const double (*mean)[3], size_t channels, const double fill[3],
                      size_t threads)
{
    size_t n = j->seg->count, w = j->seg->width;
    uint32_t *root = malloc((n + 1) * sizeof *root), *before = malloc(w * sizeof *before);
    uint8_t *len = malloc(w);
    int bad = !root || !before || !len;
    for (uint32_t id = 0; !bad && id <= n; id++)
        root[id] = lam__label_root(j->parent, id);
    if (!bad) {
        fill_job f = {j, root, mean, channels, fill, before, len};
        lam_parallel_for(j->seg->height, threads, fill_rows, &f);
        lam_parallel_for(w, threads, fill_columns, &f);
    }
    free(root);
    free(before);
    free(len);
    return bad ? -1 : 0;
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

/* ---- renumbering and statistics ----
 * What renumbering learns of each joined region (by new id - 1): its
 * pixels, box, and parts (old regions; 'part' one of them). */
typedef struct new_region {
    size_t area, box[4];
    uint32_t parts, part;
} new_region;

static void add_run(new_region *r, size_t y, size_t x0, size_t x1)
{
    if (!r->area)
        r->box[0] = x0, r->box[1] = y, r->box[2] = x1 - 1, r->box[3] = y;
    r->area += x1 - x0;
    r->box[0] = x0 < r->box[0] ? x0 : r->box[0];
    r->box[2] = x1 - 1 > r->box[2] ? x1 - 1 : r->box[2];
    r->box[3] = y;
}

/* New ids in row-major order of first pixel, run by run of one old label;
 * map[old id - 1] = new id, nr[new id - 1] what is known of it. */
static uint32_t renumber(join_ctx *j, uint32_t *map, new_region *nr)
{
    size_t w = j->seg->width, h = j->seg->height, count = j->seg->count;
    uint32_t *new_of_root = calloc(count + 1, sizeof *new_of_root), m = 0;
    if (!new_of_root)
        return 0;
    memset(nr, 0, count * sizeof *nr);
    for (size_t y = 0; y < h; y++) {
        uint32_t *row = j->seg->label + y * w;
        for (size_t x = 0, e; x < w; x = e) {
            uint32_t l = row[x], r;
            for (e = x + 1; e < w && row[e] == l;)
                e++;
            if (!l)
                continue;
            if (!new_of_root[r = lam__label_root(j->parent, l)])
                new_of_root[r] = ++m;
            for (size_t t = x; t < e; t++)
                row[t] = new_of_root[r];
            add_run(&nr[new_of_root[r] - 1], y, x, e);
        }
    }
    for (uint32_t id = 1; id <= count; id++) {
        map[id - 1] = new_of_root[lam__label_root(j->parent, id)];
        nr[map[id - 1] - 1].parts++, nr[map[id - 1] - 1].part = id;
    }
    free(new_of_root);
    return m;
}

/* A joined region of one part and no new pixel is the old region: its
 * statistics depend on its own pixels alone (lam__region_depth) and are
 * kept. The others are measured again within their boxes, each on its
 * own, on the caller's threads. */
typedef struct restat_job {
    const lam_contrast_map *img;
    const lam_segmentation *seg; /* renumbered */
    const new_region *nr;
    const uint32_t *redo; /* new ids - 1 to measure */
    uint8_t *depth;       /* written for their pixels only */
    lam_region_stats *R;
    int failed;           /* out of memory (set by any item) */
} restat_job;

static void restat_one(size_t i, void *vjob)
{
    restat_job *job = vjob;
    uint32_t k = job->redo[i];
    const lam_segmentation *seg = job->seg;
    if (lam__region_depth(seg->label, seg->width, k + 1, job->nr[k].box, job->depth)) {
        job->failed = 1;
        return;
    }
    lam__region_statistics_in(job->img, seg->cls, seg->label, job->depth, k + 1, job->nr[k].box,
                              &job->R[k]);
}

static lam_status restat(const lam_contrast_map *img, lam_segmentation *seg, uint32_t m,
                         const new_region *nr, size_t threads, lam_error *err)
{
    lam_region_stats *R = calloc(m ? m : 1, sizeof *R);
    uint32_t *redo = malloc((m ? m : 1) * sizeof *redo), n = 0;
    for (uint32_t i = 0; R && redo && i < m; i++) {
        const lam_region_stats *old = &seg->regions[nr[i].part - 1];
        if (nr[i].parts > 1 || nr[i].area != old->area) {
            redo[n++] = i;
            continue;
        }
        R[i] = *old;
        R[i].id = i + 1;
        R[i].edge = 0;
    }
    uint8_t *depth = n ? lam_big_malloc(seg->width * seg->height) : NULL;
    if (!R || !redo || (n && !depth)) {
        free(R);
        free(redo);
        free(depth);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate %u regions", m);
    }
    restat_job job = {img, seg, nr, redo, depth, R, 0};
    lam_parallel_each(n, threads, restat_one, &job);
    free(redo);
    free(depth);
    if (job.failed) {
        free(R);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the depth of %u regions", m);
    }
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

/* Push onto the stack the start of each run of pixels marked 'from' in
 * columns a..b of the row that begins at pixel 'row' (the rows above and
 * below a span just filled). */
static void push_runs(hole_ctx *h, size_t row, size_t a, size_t b, uint8_t from, size_t *top)
{
    const uint8_t *m = h->mark + row;
    for (size_t x = a; x <= b; x++)
        if (m[x] == from && (x == a || m[x - 1] != from))
            h->stack[(*top)++] = row + x;
}

/* Flood the pixels marked 'from' connected (4-neighbours, within the box)
 * to k, marking them 'to', a span of a row at a time (scanline fill: no
 * division per pixel, one stack entry per run); the members are listed
 * (when 'list') and counted. The stack holds at most two entries per
 * pixel of the box: a run of a row is pushed at most once from each span
 * beside it. */
static size_t flood(hole_ctx *h, size_t k, uint8_t from, uint8_t to, int list)
{
    size_t w = h->j->seg->width, x0 = h->box[0], x1 = h->box[2], y0 = h->box[1], y1 = h->box[3];
    uint8_t *mark = h->mark;
    size_t top = 0, n = 0;
    h->stack[top++] = k;
    while (top) {
        size_t q = h->stack[--top];
        if (mark[q] != from)
            continue; /* filled since it was pushed */
        size_t y = q / w, row = y * w, a = q - row, b = a;
        while (a > x0 && mark[row + a - 1] == from)
            a--;
        while (b < x1 && mark[row + b + 1] == from)
            b++;
        memset(mark + row + a, to, b - a + 1);
        for (size_t x = a; list && x <= b; x++)
            h->members[n + x - a] = row + x;
        n += b - a + 1;
        if (y > y0)
            push_runs(h, row - w, a, b, from, &top);
        if (y < y1)
            push_runs(h, row + w, a, b, from, &top);
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
            ok = fabs(lam_contrast_value(h->j->img, c, q) - h->mean[r - 1][c]) <= h->fill[c];
        close += (size_t)ok;
    }
    return (double)close >= HOLE_CLOSE_FRACTION * (double)n;
}

/* The box's pixels marked H_REGION where they belong to region r (root
 * id), else H_FREE. Labels come in runs, so a label's root is looked up
 * once per run. */
static void mark_region(hole_ctx *h, uint32_t r)
{
    const lam_segmentation *seg = h->j->seg;
    size_t w = seg->width;
    for (size_t y = h->box[1]; y <= h->box[3]; y++) {
        uint32_t last = 0;
        uint8_t in = H_FREE; /* label 0 is no region */
        for (size_t x = h->box[0]; x <= h->box[2]; x++) {
            uint32_t l = seg->label[y * w + x];
            if (l != last) {
                last = l;
                in = l && lam__label_root(h->j->parent, l) == r ? H_REGION : H_FREE;
            }
            h->mark[y * w + x] = in;
        }
    }
}

/* Flood from every free pixel on the box's border, in the order of a
 * raster scan of the box: what is free and reaches the border is outside. */
static void mark_outside(hole_ctx *h)
{
    size_t w = h->j->seg->width, x0 = h->box[0], x1 = h->box[2], y0 = h->box[1], y1 = h->box[3];
    for (size_t y = y0; y <= y1; y++) {
        int whole = y == y0 || y == y1; /* the top and bottom rows; else both ends */
        for (size_t x = x0; x <= x1; x = whole || x == x1 ? x + 1 : x1)
            if (h->mark[y * w + x] == H_FREE)
                flood(h, y * w + x, H_FREE, H_OUTSIDE, 0);
    }
}

/* The holes of joined region r (root id) with box and area; returns the
 * number of holes joined. */
static size_t region_holes(hole_ctx *h, uint32_t r, size_t area)
{
    lam_segmentation *seg = h->j->seg;
    size_t w = seg->width, joined = 0;
    mark_region(h, r);
    mark_outside(h);
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

/* The joined regions' boxes (by root id - 1) and areas (by root id, n + 1
 * entries) from their parts'. */
static void joined_boxes(const join_ctx *j, size_t (*box)[4], size_t *area)
{
    const lam_segmentation *seg = j->seg;
    for (uint32_t id = 1; id <= seg->count; id++) {
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
}

/* Does joined region id (a root) have its holes filled: a confident count? */
static int fills_holes(const join_ctx *j, uint32_t id)
{
    return lam__label_root(j->parent, id) == id && j->key[id - 1] >= 0;
}

/* Holes of every joined region of a confident count. The flood's stack
 * and member list are sized by the largest such box (two entries and one
 * per pixel), not by the image. */
static lam_status fill_holes(join_ctx *j, const double (*mean)[3], size_t channels,
                             const double fill[3], lam_error *err)
{
    lam_segmentation *seg = j->seg;
    size_t n = seg->count, largest = 0;
    size_t (*box)[4] = malloc((n ? n : 1) * sizeof *box), *area = calloc(n + 1, sizeof *area);
    hole_ctx h = {j, mean, fill, channels, NULL, NULL, NULL, {0, 0, 0, 0}};
    if (box && area) {
        joined_boxes(j, box, area);
        for (uint32_t id = 1; id <= n; id++)
            if (fills_holes(j, id)) {
                size_t px = (box[id - 1][2] - box[id - 1][0] + 1) *
                            (box[id - 1][3] - box[id - 1][1] + 1);
                largest = px > largest ? px : largest;
            }
        h.mark = malloc(seg->width * seg->height);
        h.stack = malloc((2 * largest + 1) * sizeof *h.stack);
        h.members = malloc((largest + 1) * sizeof *h.members);
    }
    lam_status st = LAM_OK;
    if (!box || !area || !h.mark || !h.stack || !h.members)
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate hole filling");
    for (uint32_t id = 1; !st && id <= n; id++)
        if (fills_holes(j, id)) {
            memcpy(h.box, box[id - 1], sizeof h.box);
            region_holes(&h, id, area[id]);
        }
    free(box);
    free(area);
    free(h.mark);
    free(h.stack);
    free(h.members);
    return st;
}

lam_status lam_segment_join(const lam_contrast_map *contrast, size_t channels, const int *key,
                            const double fill[3], size_t threads, lam_segmentation *seg,
                            uint32_t *map, size_t *joined, lam_error *err)
{
    size_t n = seg->count;
    *joined = 0;
    join_ctx j = {contrast, seg, key, malloc((n + 1) * sizeof(uint32_t))};
    double (*mean)[3] = malloc((n ? n : 1) * sizeof *mean);
    pair_list L = {0};
    int bad = !j.parent || !mean;
    for (uint32_t id = 0; !bad && id <= n; id++)
        j.parent[id] = id;
    if (!bad) {
        bad = scan_lines(&j, threads, &L);
        if (!bad) {
            unite_bridged(&j, &L);
            joined_means(&j, mean);
            bad = fill_bands(&j, (const double (*)[3])mean, channels, fill, threads);
        }
    }
    lam_status st = bad ? lam_error_set(err, LAM_ENOMEM, "cannot allocate region joining")
                        : fill_holes(&j, (const double (*)[3])mean, channels, fill, err);
    uint32_t m = 0;
    new_region *nr = st ? NULL : malloc((n ? n : 1) * sizeof *nr);
    if (!st && !nr)
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate region joining");
    if (!st) {
        for (uint32_t id = 1; id <= n; id++)
            *joined += lam__label_root(j.parent, id) != id;
        m = renumber(&j, map, nr);
        if (n && !m)
            st = lam_error_set(err, LAM_ENOMEM, "cannot allocate region joining");
    }
    if (!st)
        st = restat(contrast, seg, m, nr, threads, err);
    free(nr);
    free(L.v);
    free(mean);
    free(j.parent);
    return st;
}
