/* segment.c - denoising, ladder classification through a lookup table,
 * connected-component labelling (union-find) and region statistics. */
#include "lamina/segment.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define LUT_BINS 128
#define LUT_UNSET 252 /* no class uses this value */

lam_segment_options lam_segment_options_default(void)
{
    lam_segment_options o = {0.005, 0.05, 25.0, 12};
    return o;
}

lam_status lam_segmentation_alloc(size_t width, size_t height, lam_segmentation **out,
                                  lam_error *err)
{
    lam_segmentation *s = calloc(1, sizeof *s);
    size_t n = width * height;
    if (s) {
        s->cls = malloc(n);
        s->label = calloc(n, sizeof *s->label);
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

lam_status lam_contrast_denoise(lam_image *img, lam_error *err)
{
    size_t w = img->width, h = img->height;
    float *rows = malloc(3 * w * sizeof *rows); /* horizontal sums of y-1, y, y+1 */
    if (!rows)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate denoising rows");
    for (int c = 0; c < 3; c++) {
        float *p = img->plane[c];
        float *prev = rows, *cur = rows + w, *next = rows + 2 * w;
        /* horizontal 3-sums with edge replication */
#define HSUM(dst, y)                                                                      \
    do {                                                                                  \
        const float *r_ = p + (size_t)(y) * w;                                            \
        for (size_t x_ = 0; x_ < w; x_++) {                                               \
            float a_ = r_[x_ ? x_ - 1 : 0], b_ = r_[x_], c_ = r_[x_ + 1 < w ? x_ + 1 : x_]; \
            (dst)[x_] = a_ + b_ + c_;                                                     \
        }                                                                                 \
    } while (0)
        HSUM(cur, 0);
        memcpy(prev, cur, w * sizeof *cur);
        for (size_t y = 0; y < h; y++) {
            HSUM(next, y + 1 < h ? y + 1 : y);
            float *out = p + y * w;
            for (size_t x = 0; x < w; x++)
                out[x] = (prev[x] + cur[x] + next[x]) * (1.0f / 9.0f);
            float *t = prev;
            prev = cur;
            cur = next;
            next = t;
        }
#undef HSUM
    }
    free(rows);
    return LAM_OK;
}

lam_status lam_segment_classify(const lam_image *img, const lam_ladder *L, const double noise[3],
                                const lam_segment_options *opt, lam_segmentation *seg,
                                lam_error *err)
{
    if (L->entries < 2 || L->entries > LAM_LADDER_MAX)
        return lam_error_set(err, LAM_EINTERNAL, "ladder of %zu entries", L->entries);
    double lo[3], step[3];
    for (int c = 0; c < 3; c++) {
        double mn = 0, mx = 0;
        for (size_t e = 0; e < L->entries; e++)
            mn = fmin(mn, L->c[e][c]), mx = fmax(mx, L->c[e][c]);
        lo[c] = mn - 0.15;
        step[c] = (mx - mn + 0.3) / LUT_BINS;
    }
    uint8_t *lut = malloc((size_t)LUT_BINS * LUT_BINS * LUT_BINS);
    if (!lut)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the class table");
    double inv_var[LAM_LADDER_MAX][3];
    for (size_t e = 0; e < L->entries; e++)
        for (int c = 0; c < 3; c++) {
            double f = opt->floor_abs + opt->floor_rel * fabs(L->c[e][c]), s = noise[c] / 2;
            inv_var[e][c] = 1.0 / (f * f + s * s);
        }
    /* The table is filled lazily: only cells that pixels visit are
     * classified (a micrograph visits a few thousand of the 2 million). */
    memset(lut, LUT_UNSET, (size_t)LUT_BINS * LUT_BINS * LUT_BINS);
    size_t n = img->width * img->height;
    float inv[3], off[3];
    for (int c = 0; c < 3; c++)
        inv[c] = (float)(1.0 / step[c]), off[c] = (float)lo[c];
    for (size_t p = 0; p < n; p++) {
        int q[3];
        for (int c = 0; c < 3; c++) {
            float f = (img->plane[c][p] - off[c]) * inv[c];
            q[c] = f < 0 ? 0 : (f >= LUT_BINS ? LUT_BINS - 1 : (int)f);
        }
        uint8_t *cell = &lut[((size_t)q[0] * LUT_BINS + (size_t)q[1]) * LUT_BINS + (size_t)q[2]];
        if (*cell == LUT_UNSET) {
            double v[3];
            for (int c = 0; c < 3; c++)
                v[c] = lo[c] + step[c] * ((double)q[c] + 0.5);
            double best = INFINITY;
            size_t be = 0;
            for (size_t e = 0; e < L->entries; e++) {
                double d = 0;
                for (int c = 0; c < 3; c++) {
                    double t = v[c] - L->c[e][c];
                    d += t * t * inv_var[e][c];
                }
                if (d < best)
                    best = d, be = e;
            }
            *cell = best > opt->reject_chi2 ? LAM_CLASS_UNMODELLED
                    : be == 0               ? LAM_CLASS_SUBSTRATE
                    : be <= L->max_layers   ? (uint8_t)be
                                            : LAM_CLASS_THICK;
        }
        seg->cls[p] = *cell;
    }
    free(lut);
    /* transition pixels: where the contrast changes by more than half a
     * monolayer step across two pixels (or 4 sigma of the denoised noise),
     * the pixel mixes two classes; it belongs to no region */
    double step1 = 0, nmax = 0;
    for (int c = 0; c < 3; c++) {
        step1 = fmax(step1, fabs(L->c[1][c]));
        nmax = fmax(nmax, noise[c]);
    }
    float thr = (float)fmax(0.5 * step1, 4.0 * nmax / 3.0);
    size_t w = img->width, h = img->height;
    for (size_t y = 1; y + 1 < h; y++)
        for (size_t x = 1; x + 1 < w; x++) {
            size_t k = y * w + x;
            for (int c = 0; c < 3; c++) {
                const float *pl = img->plane[c];
                if (fabsf(pl[k + 1] - pl[k - 1]) > thr || fabsf(pl[k + w] - pl[k - w]) > thr) {
                    seg->cls[k] = LAM_CLASS_NONE;
                    break;
                }
            }
        }
    return LAM_OK;
}

static uint32_t find_root(uint32_t *parent, uint32_t a)
{
    while (parent[a] != a) {
        parent[a] = parent[parent[a]];
        a = parent[a];
    }
    return a;
}

lam_status lam_segment_regions(const lam_image *img, const lam_segment_options *opt,
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
                uint32_t rl = find_root(parent, l), ru = find_root(parent, u);
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
        uint32_t r = find_root(parent, lab[k]);
        if (!final[r])
            final[r] = ++m;
        lab[k] = final[r];
    }
    free(parent);
    free(final);
    lam_region_stats *R = calloc(m ? m : 1, sizeof *R);
    if (!R)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate %u regions", m);
    for (uint32_t i = 0; i < m; i++) {
        R[i].id = i + 1;
        R[i].bbox[0] = w, R[i].bbox[1] = h;
    }
    for (size_t y = 0; y < h; y++)
        for (size_t x = 0; x < w; x++) {
            size_t k = y * w + x;
            uint32_t l = lab[k];
            if (!l)
                continue;
            lam_region_stats *r = &R[l - 1];
            r->cls = cls[k];
            r->area++;
            r->sx += (double)x;
            r->sy += (double)y;
            if (x < r->bbox[0]) r->bbox[0] = x;
            if (y < r->bbox[1]) r->bbox[1] = y;
            if (x > r->bbox[2]) r->bbox[2] = x;
            if (y > r->bbox[3]) r->bbox[3] = y;
            if (x == 0 || y == 0 || x + 1 == w || y + 1 == h) {
                r->touches_border = 1;
                continue;
            }
            if (img->clipped[k]) {
                r->clipped++;
                continue;
            }
            if (lab[k - 1] != l || lab[k + 1] != l || lab[k - w] != l || lab[k + w] != l)
                continue;
            r->interior++;
            for (int c = 0; c < 3; c++) {
                double v = img->plane[c][k];
                r->sum[c] += v;
                r->sumsq[c] += v * v;
            }
        }
    /* drop specks and slivers (no interior): class NONE, no label */
    uint32_t *remap = calloc((size_t)m + 1, sizeof *remap);
    if (!remap) {
        free(R);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate labels");
    }
    size_t kept = 0;
    for (uint32_t i = 0; i < m; i++) {
        /* slivers along edges have almost no interior */
        if (R[i].area >= opt->min_region_px && R[i].interior >= 4 &&
            R[i].interior * 10 >= R[i].area) {
            R[kept] = R[i];
            R[kept].id = (uint32_t)(kept + 1);
            remap[i + 1] = (uint32_t)++kept;
        }
    }
    for (size_t k = 0; k < w * h; k++) {
        if (lab[k] && !(lab[k] = remap[lab[k]]))
            cls[k] = LAM_CLASS_NONE;
    }
    free(remap);
    free(seg->regions);
    seg->regions = R;
    seg->count = kept;
    return LAM_OK;
}
