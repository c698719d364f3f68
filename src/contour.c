/* contour.c - region outlines by marching squares over a label map, chained
 * into closed loops (see lamina/contour.h). */
#include "lamina/contour.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

typedef struct seg {
    uint64_t from, to; /* keys of edge midpoints on the doubled grid */
} seg;

typedef struct grid {
    const uint32_t *label;
    size_t stride, x0, y0, w, h, regions;
    uint64_t row; /* keys per doubled-grid row */
} grid;

/* Doubled coordinates (offset by 2 so the cells left of and above the
 * window stay non-negative) to a key. */
static uint64_t key(const grid *g, long X, long Y)
{
    return (uint64_t)(Y + 2) * g->row + (uint64_t)(X + 2);
}

/* The segments of region l in cell (i, j) (corners (i, j) .. (i+1, j+1));
 * returns how many (0, 1 or 2), oriented with the region on the right. */
static int cell_segments(const grid *g, uint32_t l, const uint32_t c[4], long i, long j, seg out[2])
{
    /* corners TL, TR, BR, BL at doubled offsets; edge midpoints T, R, B, L */
    static const int cx[4] = {0, 2, 2, 0}, cy[4] = {0, 0, 2, 2};
    static const int ex[4] = {1, 2, 1, 0}, ey[4] = {0, 1, 2, 1};
    int in[4];
    for (int k = 0; k < 4; k++)
        in[k] = c[k] == l;
    int pairs[2][2], n = 0, refs[2][4] = {{0}};
    if (in[0] == in[2] && in[1] == in[3] && in[0] != in[1]) {
        /* saddle: diagonal corners are separate (4-connected regions) */
        for (int k = 0; k < 4; k++)
            if (in[k]) {
                pairs[n][0] = (k + 3) % 4; /* the edges beside corner k */
                pairs[n][1] = k;
                refs[n][k] = 1;
                n++;
            }
    } else {
        int e[2], m = 0;
        for (int k = 0; k < 4; k++) /* edge k joins corners k and k+1 */
            if (in[k] != in[(k + 1) % 4] && m < 2)
                e[m++] = k;
        if (m != 2)
            return 0;
        pairs[0][0] = e[0];
        pairs[0][1] = e[1];
        for (int k = 0; k < 4; k++)
            refs[0][k] = in[k];
        n = 1;
    }
    for (int s = 0; s < n; s++) {
        long px = ex[pairs[s][0]], py = ey[pairs[s][0]], qx = ex[pairs[s][1]], qy = ey[pairs[s][1]];
        double rx = 0, ry = 0, cnt = 0;
        for (int k = 0; k < 4; k++)
            if (refs[s][k])
                rx += cx[k], ry += cy[k], cnt++;
        rx /= cnt, ry /= cnt;
        double cross = (double)(qx - px) * (ry - (double)py) -
                       (double)(qy - py) * (rx - (double)px);
        if (cross < 0) {
            long tx = px, ty = py;
            px = qx, py = qy, qx = tx, qy = ty;
        }
        out[s].from = key(g, 2 * i + px, 2 * j + py);
        out[s].to = key(g, 2 * i + qx, 2 * j + qy);
    }
    return n;
}

/* One row of pixels of the window (ids beyond 'regions' read as 0), or
 * zeros above and below it. */
static void load_row(const grid *g, long y, uint32_t *row)
{
    row[0] = row[g->w + 1] = 0;
    if (y < 0 || (size_t)y >= g->h) {
        memset(row, 0, (g->w + 2) * sizeof *row);
        return;
    }
    const uint32_t *src = g->label + ((size_t)y + g->y0) * g->stride + g->x0;
    for (size_t x = 0; x < g->w; x++)
        row[x + 1] = src[x] <= g->regions ? src[x] : 0;
}

/* Are the eight cells starting at column 0 of rows a (above) and b all of
 * one label? Branch-free, so most of a label map is skipped eight cells at
 * a time. */
static int uniform8(const uint32_t *restrict a, const uint32_t *restrict b)
{
    uint32_t acc = 0;
    for (int q = 0; q < 8; q++)
        acc |= (a[q] ^ a[q + 1]) | (b[q] ^ b[q + 1]) | (a[q] ^ b[q]);
    return acc == 0;
}

/* The segments of the whole window in the order of the cells, each with
 * its region, gathered in one walk over the labels (a walk to count them
 * and a second to place them cost twice the reading). */
typedef struct region_seg {
    uint32_t l;
    seg s;
} region_seg;

typedef struct seg_list {
    region_seg *v;
    size_t n, cap;
    int failed; /* out of memory: the rest are not kept */
} seg_list;

static void push_seg(seg_list *L, uint32_t l, seg s)
{
    if (L->n == L->cap) {
        size_t cap = L->cap ? 2 * L->cap : 4096;
        region_seg *v = L->failed ? NULL : realloc(L->v, cap * sizeof *v);
        if (!v) {
            L->failed = 1;
            return;
        }
        L->v = v, L->cap = cap;
    }
    L->v[L->n].l = l;
    L->v[L->n++].s = s;
}

/* Visit every cell's segments into L. Rows are padded with a zero on each
 * side, so cell i of a row pair reads padded columns i, i+1. */
static void scan(const grid *g, uint32_t *rows, seg_list *L)
{
    uint32_t *ra = rows, *rb = rows + g->w + 2;
    load_row(g, -1, ra);
    for (long j = -1; j < (long)g->h; j++) {
        load_row(g, j + 1, rb);
        for (size_t p = 0; p <= g->w; p++) {
            if (p + 8 <= g->w + 1 && uniform8(ra + p, rb + p)) {
                p += 7; /* eight cells of one label: no segment */
                continue;
            }
            uint32_t c[4] = {ra[p], ra[p + 1], rb[p + 1], rb[p]};
            if (c[0] == c[1] && c[2] == c[3] && c[0] == c[2])
                continue;
            long i = (long)p - 1;
            for (int k = 0; k < 4; k++) {
                uint32_t l = c[k];
                if (!l || (k > 0 && (l == c[0] || (k > 1 && l == c[1]) || (k > 2 && l == c[2]))))
                    continue;
                seg s[2];
                int n = cell_segments(g, l, c, i, j, s);
                for (int q = 0; q < n; q++)
                    push_seg(L, l, s[q]);
            }
        }
        uint32_t *t = ra;
        ra = rb, rb = t;
    }
}

static int cmp_from(const void *a, const void *b)
{
    const seg *x = a, *y = b;
    return x->from < y->from ? -1 : x->from > y->from;
}

static size_t find_from(const seg *s, size_t n, uint64_t k)
{
    size_t lo = 0, hi = n;
    while (lo < hi) {
        size_t mid = (lo + hi) / 2;
        if (s[mid].from < k)
            lo = mid + 1;
        else
            hi = mid;
    }
    return lo;
}

static void point_of(const grid *g, uint64_t k, float *x, float *y)
{
    long X = (long)(k % g->row) - 2, Y = (long)(k / g->row) - 2;
    *x = (float)((double)X / 2 + (double)g->x0 + 0.5);
    *y = (float)((double)Y / 2 + (double)g->y0 + 0.5);
}

/* Append a point, replacing the last one when the three are collinear. */
static void push_point(lam_contours *c, size_t loop_first, float x, float y)
{
    size_t n = c->points - loop_first;
    if (n >= 2) {
        float *p = c->xy + 2 * (c->points - 2);
        double ax = p[2] - p[0], ay = p[3] - p[1], bx = x - p[2], by = y - p[3];
        if (ax * by - ay * bx == 0 && ax * bx + ay * by > 0) {
            p[2] = x, p[3] = y;
            return;
        }
    }
    c->xy[2 * c->points] = x;
    c->xy[2 * c->points + 1] = y;
    c->points++;
}

/* Chain one region's segments (sorted by 'from') into loops. */
static void chain(const grid *g, seg *s, size_t n, unsigned char *used, lam_contours *c)
{
    memset(used, 0, n);
    for (size_t a = 0; a < n; a++) {
        if (used[a])
            continue;
        size_t first = c->points, cur = a;
        c->point_start[c->loops] = first;
        for (;;) {
            used[cur] = 1;
            float x, y;
            point_of(g, s[cur].from, &x, &y);
            push_point(c, first, x, y);
            size_t nx = find_from(s, n, s[cur].to);
            if (nx >= n || s[nx].from != s[cur].to || used[nx])
                break;
            cur = nx;
        }
        c->loops++;
    }
}

void lam_contours_free(lam_contours *c)
{
    if (!c)
        return;
    free(c->loop_start);
    free(c->point_start);
    free(c->xy);
    free(c);
}

lam_status lam_contours_trace(const uint32_t *label, size_t stride, size_t x0, size_t y0,
                              size_t w, size_t h, size_t regions, lam_contours **out,
                              lam_error *err)
{
    grid g = {label, stride, x0, y0, w, h, regions, 2 * (uint64_t)w + 4};
    lam_contours *c = calloc(1, sizeof *c);
    size_t *count = calloc(regions + 1, sizeof *count), *fill = calloc(regions + 1, sizeof *fill);
    uint32_t *rows = malloc(2 * (w + 2) * sizeof *rows);
    seg_list L = {NULL, 0, 0, 0};
    if (!c || !count || !fill || !rows)
        goto nomem;
    scan(&g, rows, &L);
    if (L.failed)
        goto nomem;
    for (size_t i = 0; i < L.n; i++)
        count[L.v[i].l - 1]++;
    size_t total = 0;
    for (size_t r = 0; r < regions; r++)
        fill[r] = total, total += count[r];
    seg *segs = malloc((total ? total : 1) * sizeof *segs);
    unsigned char *used = malloc(total ? total : 1);
    c->regions = regions;
    c->loop_start = calloc(regions + 1, sizeof *c->loop_start);
    c->point_start = malloc((total + 1) * sizeof *c->point_start);
    c->xy = malloc((total + 1) * 2 * sizeof *c->xy);
    if (!segs || !used || !c->loop_start || !c->point_start || !c->xy) {
        free(segs);
        free(used);
        goto nomem;
    }
    for (size_t i = 0; i < L.n; i++) /* each region's in the order of the cells */
        segs[fill[L.v[i].l - 1]++] = L.v[i].s;
    free(L.v);
    L.v = NULL;
    for (size_t r = 0, off = 0; r < regions; off += count[r], r++) {
        c->loop_start[r] = c->loops;
        qsort(segs + off, count[r], sizeof *segs, cmp_from);
        chain(&g, segs + off, count[r], used, c);
    }
    c->loop_start[regions] = c->loops;
    c->point_start[c->loops] = c->points;
    free(segs);
    free(used);
    free(count);
    free(fill);
    free(rows);
    *out = c;
    return LAM_OK;
nomem:
    free(L.v);
    free(count);
    free(fill);
    free(rows);
    lam_contours_free(c);
    return lam_error_set(err, LAM_ENOMEM, "cannot allocate the region outlines");
}

static double seg_dist(const float *xy, size_t a, size_t b, size_t k)
{
    double ax = xy[2 * a], ay = xy[2 * a + 1], bx = xy[2 * b], by = xy[2 * b + 1];
    double px = xy[2 * k], py = xy[2 * k + 1], dx = bx - ax, dy = by - ay;
    double L2 = dx * dx + dy * dy;
    if (L2 == 0)
        return hypot(px - ax, py - ay);
    double t = ((px - ax) * dx + (py - ay) * dy) / L2;
    t = t < 0 ? 0 : t > 1 ? 1 : t;
    return hypot(px - ax - t * dx, py - ay - t * dy);
}

/* Douglas-Peucker over points first..last (indices into xy, 'last' may be
 * the loop's first point again via 'wrap'); marks kept points. */
static void dp(const float *xy, size_t base, size_t n, size_t i0, size_t i1, double tol,
               unsigned char *keep, size_t *stack)
{
    size_t top = 0;
    stack[top++] = i0, stack[top++] = i1;
    while (top) {
        size_t b = stack[--top], a = stack[--top];
        double best = -1;
        size_t bi = a;
        for (size_t k = a + 1; k < b; k++) {
            double d = seg_dist(xy, base + a, base + b % n, base + k);
            if (d > best)
                best = d, bi = k;
        }
        if (best > tol) {
            keep[bi] = 1;
            stack[top++] = a, stack[top++] = bi;
            stack[top++] = bi, stack[top++] = b;
        }
    }
}

lam_status lam_contours_simplify(lam_contours *c, double tol, lam_error *err)
{
    size_t maxn = 0;
    for (size_t l = 0; l < c->loops; l++)
        if (c->point_start[l + 1] - c->point_start[l] > maxn)
            maxn = c->point_start[l + 1] - c->point_start[l];
    unsigned char *keep = malloc(maxn + 1);
    size_t *stack = malloc((4 * maxn + 8) * sizeof *stack);
    if (!keep || !stack) {
        free(keep);
        free(stack);
        return lam_error_set(err, LAM_ENOMEM, "cannot simplify the region outlines");
    }
    size_t out = 0;
    for (size_t l = 0; l < c->loops; l++) {
        size_t base = c->point_start[l], n = c->point_start[l + 1] - base;
        c->point_start[l] = out;
        memset(keep, n <= 4, n);
        if (n > 4) {
            size_t far = 0; /* split the loop at point 0 and the point farthest from it */
            double best = -1;
            for (size_t k = 1; k < n; k++) {
                double d = hypot(c->xy[2 * (base + k)] - c->xy[2 * base],
                                 c->xy[2 * (base + k) + 1] - c->xy[2 * base + 1]);
                if (d > best)
                    best = d, far = k;
            }
            keep[0] = keep[far] = 1;
            dp(c->xy, base, n, 0, far, tol, keep, stack);
            dp(c->xy, base, n, far, n, tol, keep, stack);
            size_t kept = 0;
            for (size_t k = 0; k < n; k++)
                kept += keep[k];
            if (kept < 3)
                memset(keep, 1, n);
        }
        for (size_t k = 0; k < n; k++)
            if (keep[k]) {
                c->xy[2 * out] = c->xy[2 * (base + k)];
                c->xy[2 * out + 1] = c->xy[2 * (base + k) + 1];
                out++;
            }
    }
    c->point_start[c->loops] = out;
    c->points = out;
    free(keep);
    free(stack);
    return LAM_OK;
}
