/* segment_grow.c - regions of uniform contrast, independent of the model:
 * transition pixels are cut out, the rest joined to 4-neighbours of the
 * same contrast (union-find over pixels), the regions at zero contrast
 * become the substrate. */
#include "lamina/segment.h"
#include "segment_internal.h"
#include "lamina/parallel.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define PROVISIONAL 1      /* class of a pixel that may join a region */
#define SAMPLE_STRIDE 7    /* every 7th pixel estimates the neighbour noise */
#define SUBSTRATE_FRACTION 0.3 /* of the prior's monolayer contrast */
#define SUBSTRATE_MIN 0.003    /* ... but at least this contrast */
#define EDGE_STEP_FRACTION 0.3 /* a change across two pixels that marks an edge */
#define JOIN_STEP_FRACTION 0.15 /* neighbours never join across more than this */
#define FILE_STEP_MERGE 1.0     /* regions one JPEG DC step apart are one */
#define FILE_STEP_SUBSTRATE 1.5 /* substrate patches up to 1.5 steps off zero */

typedef struct edge_ctx {
    const lam_image *img;
    size_t channels;
    float t2[3], t4[3]; /* per channel: change across 2 and across 4 pixels */
    uint8_t *cls;
    int bright;         /* scale the thresholds with the brightness (bright_scaling) */
} edge_ctx;

/* The noise scale of a pixel brighter than the substrate: sqrt(1 - C)
 * (shot noise relative to the substrate's), 1 for darker pixels. */
static float bright_factor(float contrast)
{
    return contrast < 0 ? sqrtf(1 - contrast) : 1.0f;
}

/* Transition pixels: the contrast changes by more than a channel's
 * threshold across two pixels (or, for slow blurred edges, across four) in
 * some channel: the pixel mixes two classes. */
static void edge_rows(size_t begin, size_t end, size_t slice, void *vctx)
{
    (void)slice;
    const edge_ctx *e = vctx;
    size_t w = e->img->width, h = e->img->height;
    for (size_t y = begin; y < end; y++)
        for (size_t x = 0; x < w; x++) {
            size_t k = y * w + x;
            uint8_t cls = PROVISIONAL;
            int inner = x > 1 && y > 1 && x + 2 < w && y + 2 < h;
            for (size_t c = 0; c < e->channels && inner; c++) {
                const float *p = e->img->plane[c];
                float b = e->bright ? bright_factor(p[k]) : 1.0f;
                float t2 = e->t2[c] * b, t4 = e->t4[c] * b;
                if (fabsf(p[k + 1] - p[k - 1]) > t2 || fabsf(p[k + w] - p[k - w]) > t2 ||
                    fabsf(p[k + 2] - p[k - 2]) > t4 || fabsf(p[k + 2 * w] - p[k - 2 * w]) > t4) {
                    cls = LAM_CLASS_NONE;
                    break;
                }
            }
            e->cls[k] = inner ? cls : LAM_CLASS_NONE;
        }
}

/* Close gaps in the transition lines: a pixel next to (8-neighbour) a
 * transition pixel is one too, so no one-pixel path joins two regions. */
static lam_status dilate_edges(uint8_t *cls, size_t w, size_t h, lam_error *err)
{
    uint8_t *orig = malloc(w * h);
    if (!orig)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the edge mask");
    memcpy(orig, cls, w * h);
    for (size_t y = 1; y + 1 < h; y++)
        for (size_t x = 1; x + 1 < w; x++) {
            size_t k = y * w + x;
            if (orig[k] != LAM_CLASS_NONE &&
                (orig[k - 1] == LAM_CLASS_NONE || orig[k + 1] == LAM_CLASS_NONE ||
                 orig[k - w] == LAM_CLASS_NONE || orig[k + w] == LAM_CLASS_NONE ||
                 orig[k - w - 1] == LAM_CLASS_NONE || orig[k - w + 1] == LAM_CLASS_NONE ||
                 orig[k + w - 1] == LAM_CLASS_NONE || orig[k + w + 1] == LAM_CLASS_NONE))
                cls[k] = LAM_CLASS_NONE;
        }
    free(orig);
    return LAM_OK;
}

static int cmp_float(const void *a, const void *b)
{
    float x = *(const float *)a, y = *(const float *)b;
    return x < y ? -1 : x > y;
}

/* Statistics of horizontal pixel differences at a lag, per channel, over
 * pairs of pixels near zero contrast (the bare substrate: no flake edges
 * there), from every SAMPLE_STRIDE-th pixel: the robust sigma (1.4826 x
 * median |d|) and the 95th percentile of |d|. The percentile sees what the
 * sigma does not: JPEG block steps and demosaicing artefacts, rare but
 * they must not split a region. Measured, so no model of the noise. */
typedef struct diff_stats {
    double sigma[3], p95[3];
} diff_stats;

static int near_zero(const lam_image *img, size_t channels, const double *zero, size_t k)
{
    for (size_t c = 0; c < channels; c++)
        if (fabsf(img->plane[c][k]) > zero[c])
            return 0;
    return 1;
}

static void difference_stats(const lam_image *img, size_t channels, const double *zero,
                             size_t lag, diff_stats *out)
{
    size_t w = img->width, n = img->width * img->height, m = 0;
    float *d = malloc((n / SAMPLE_STRIDE + 1) * sizeof *d);
    for (size_t c = 0; c < 3; c++)
        out->sigma[c] = out->p95[c] = 1e-3;
    if (!d)
        return;
    for (size_t c = 0; c < channels; c++) {
        m = 0;
        for (size_t k = lag; k + lag < n; k += SAMPLE_STRIDE)
            if (k % w >= lag && k % w + lag < w && near_zero(img, channels, zero, k - lag) &&
                near_zero(img, channels, zero, k + lag))
                d[m++] = fabsf(img->plane[c][k + lag] - img->plane[c][k - lag]);
        if (m > 20) {
            qsort(d, m, sizeof *d, cmp_float);
            out->sigma[c] = fmax(1.4826 * d[m / 2], 1e-5);
            out->p95[c] = fmax(d[m * 95 / 100], 1e-5);
        }
    }
    free(d);
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

typedef struct merge_state {
    uint32_t *parent;   /* = the label array */
    uint32_t *count;    /* per root */
    float *sum;         /* per root, channels values */
    size_t channels;
    double delta[3], sigma[3];
    int bright;         /* bright_scaling: delta x b, sigma x sqrt(b), b = 1 - C */
} merge_state;

static uint32_t root_of(uint32_t *parent, uint32_t a)
{
    while (parent[a] != a) {
        parent[a] = parent[parent[a]];
        a = parent[a];
    }
    return a;
}

static int means_agree(const merge_state *m, uint32_t a, uint32_t b)
{
    double na = m->count[a], nb = m->count[b], se = sqrt(1 / na + 1 / nb);
    for (size_t c = 0; c < m->channels; c++) {
        double ma = m->sum[a * m->channels + c] / na, mb = m->sum[b * m->channels + c] / nb;
        double d = ma - mb, f = 1;
        if (m->bright)
            f = bright_factor((float)fmin(ma, mb));
        if (fabs(d) > m->delta[c] * f * f + MERGE_SIGMAS * m->sigma[c] * f * se)
            return 0;
    }
    return 1;
}

static void merge(merge_state *m, uint32_t a, uint32_t b)
{
    if (b < a) {
        uint32_t t = a;
        a = b, b = t;
    }
    m->parent[b] = a; /* the smaller index stays the root */
    m->count[a] += m->count[b];
    for (size_t c = 0; c < m->channels; c++)
        m->sum[a * m->channels + c] += m->sum[b * m->channels + c];
}

/* Bucket of a neighbour pair: the largest channel difference in deltas. */
static int pair_bucket(const lam_image *img, const merge_state *m, size_t a, size_t b)
{
    double f = 0;
    for (size_t c = 0; c < m->channels; c++)
        f = fmax(f, fabs(img->plane[c][a] - img->plane[c][b]) / m->delta[c]);
    return f >= PAIR_RANGE ? -1 : (int)(f / PAIR_RANGE * PAIR_BUCKETS);
}

/* Pairs (encoded 2k for (k, k+1), 2k+1 for (k, k+w)) sorted by bucket. */
static uint32_t *sorted_pairs(const lam_image *img, const uint8_t *cls, const merge_state *m,
                              size_t *count)
{
    size_t w = img->width, n = img->width * img->height, total = 0;
    size_t *start = calloc(PAIR_BUCKETS + 1, sizeof *start);
    uint16_t *bucket = malloc(2 * n * sizeof *bucket);
    if (!start || !bucket) {
        free(start);
        free(bucket);
        return NULL;
    }
    for (size_t k = 0; k < n; k++)
        for (int dir = 0; dir < 2; dir++) {
            size_t q = dir ? k + w : k + 1;
            int ok = cls[k] == PROVISIONAL && (dir ? q < n : (k + 1) % w != 0) &&
                     cls[q] == PROVISIONAL;
            int b = ok ? pair_bucket(img, m, k, q) : -1;
            bucket[2 * k + (size_t)dir] = b < 0 ? UINT16_MAX : (uint16_t)b;
            if (b >= 0)
                start[b + 1]++, total++;
        }
    for (int b = 0; b < PAIR_BUCKETS; b++)
        start[b + 1] += start[b];
    uint32_t *pairs = malloc((total ? total : 1) * sizeof *pairs);
    for (size_t i = 0; pairs && i < 2 * n; i++)
        if (bucket[i] != UINT16_MAX)
            pairs[start[bucket[i]]++] = (uint32_t)i;
    free(start);
    free(bucket);
    *count = total;
    return pairs;
}

static lam_status init_merge(const lam_image *img, size_t channels, const uint8_t *cls,
                             uint32_t *lab, merge_state *m, lam_error *err)
{
    size_t n = img->width * img->height;
    m->parent = lab;
    m->channels = channels;
    m->count = malloc(n * sizeof *m->count);
    m->sum = malloc(n * channels * sizeof *m->sum);
    if (!m->count || !m->sum) {
        free(m->count);
        free(m->sum);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate region merging");
    }
    for (size_t k = 0; k < n; k++) {
        lab[k] = (uint32_t)k;
        m->count[k] = cls[k] == PROVISIONAL;
        for (size_t c = 0; c < channels; c++)
            m->sum[k * channels + c] = img->plane[c][k];
    }
    return LAM_OK;
}

/* Every pixel to its root, roots numbered 1..m in row-major order (label 0:
 * no region). Parents point to smaller indices, so one forward pass
 * compresses every path. */
static uint32_t number_regions(const uint8_t *cls, uint32_t *lab, size_t n)
{
    for (size_t k = 0; k < n; k++)
        if (cls[k] == PROVISIONAL)
            lab[k] = lab[lab[k]];
    uint32_t m = 0;
    for (size_t k = 0; k < n; k++) {
        if (cls[k] != PROVISIONAL)
            lab[k] = UINT32_MAX;
        else if (lab[k] == k)
            lab[k] = (uint32_t)n + ++m; /* ids offset by n while roots are mixed in */
        else
            lab[k] = lab[lab[k]];
    }
    for (size_t k = 0; k < n; k++)
        lab[k] = lab[k] == UINT32_MAX ? 0 : lab[k] - (uint32_t)n;
    return m;
}

static lam_status grow(const lam_image *img, size_t channels, const double *delta,
                       const double *sigma, int bright, const uint8_t *cls, uint32_t *lab,
                       uint32_t *regions, lam_error *err)
{
    size_t w = img->width, n = img->width * img->height, np = 0;
    merge_state m;
    m.bright = bright;
    memcpy(m.delta, delta, sizeof m.delta);
    memcpy(m.sigma, sigma, sizeof m.sigma);
    lam_status st = init_merge(img, channels, cls, lab, &m, err);
    if (st)
        return st;
    uint32_t *pairs = sorted_pairs(img, cls, &m, &np);
    if (!pairs)
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate region merging");
    for (size_t i = 0; i < np; i++) {
        size_t k = pairs[i] / 2, q = pairs[i] % 2 ? k + w : k + 1;
        uint32_t a = root_of(lab, (uint32_t)k), b = root_of(lab, (uint32_t)q);
        if (a != b && means_agree(&m, a, b))
            merge(&m, a, b);
    }
    free(pairs);
    free(m.count);
    free(m.sum);
    if (!st)
        *regions = number_regions(cls, lab, n);
    return st;
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

/* The 90th percentile of differences between the means of adjacent 8 x 8
 * cells near zero contrast (the substrate), per channel: the image's own
 * low-frequency texture - flat-field residuals and, above all, JPEG block
 * steps - which two parts of one flake may differ by. */
#define CELL 8
static void cell_texture(const lam_image *img, size_t channels, const double *zero, double *out)
{
    size_t w = img->width, cw = w / CELL, ch = img->height / CELL, m = 0;
    size_t cells = cw * ch > 0 ? cw * ch : 1;
    float *mean = malloc(cells * 3 * sizeof *mean);
    float *d = malloc((2 * cw * ch + 1) * sizeof *d);
    for (size_t c = 0; c < 3; c++)
        out[c] = 0;
    if (!mean || !d) {
        free(mean);
        free(d);
        return;
    }
    for (size_t cy = 0; cy < ch; cy++)
        for (size_t cx = 0; cx < cw; cx++)
            for (size_t c = 0; c < 3; c++) {
                double sum = 0;
                int ok = 1;
                for (size_t y = cy * CELL; y < (cy + 1) * CELL; y++)
                    for (size_t x = cx * CELL; x < (cx + 1) * CELL; x++) {
                        size_t k = y * w + x;
                        ok &= near_zero(img, channels, zero, k);
                        sum += c < channels ? img->plane[c][k] : 0;
                    }
                mean[(cy * cw + cx) * 3 + c] = ok ? (float)(sum / (CELL * CELL)) : NAN;
            }
    for (size_t c = 0; c < channels; c++) {
        m = 0;
        for (size_t i = 0; i < cw * ch; i++) {
            float a = mean[i * 3 + c], r = (i + 1) % cw ? mean[(i + 1) * 3 + c] : NAN;
            float b = i + cw < cw * ch ? mean[(i + cw) * 3 + c] : NAN;
            if (!isnan(a) && !isnan(r))
                d[m++] = fabsf(a - r);
            if (!isnan(a) && !isnan(b))
                d[m++] = fabsf(a - b);
        }
        if (m > 20) {
            qsort(d, m, sizeof *d, cmp_float);
            out[c] = d[m * 9 / 10];
        }
    }
    free(mean);
    free(d);
}

/* Per channel: an edge changes a channel by more than a third of a
 * monolayer step and by more than the channel's own artefacts (3 x the
 * 95th percentile of 2- and 4-pixel differences on the substrate); regions
 * merge when their means differ by less than delta - a sixth of a monolayer
 * step, or the artefacts (JPEG block steps) when they are larger - plus
 * three standard errors of the pixel noise 'sigma'. */
static void thresholds(const lam_image *img, size_t channels, const double *c1,
                       const double noise[3], edge_ctx *ec, double delta[3], double sigma[3])
{
    double step1 = 0, zero[3];
    for (size_t c = 0; c < channels; c++)
        step1 = fmax(step1, fabs(c1[c]));
    for (size_t c = 0; c < 3; c++)
        zero[c] = fmax(SUBSTRATE_FRACTION * step1, noise[c]); /* ~3 sigma after denoising */
    diff_stats d1, d2;
    double cells[3];
    difference_stats(img, channels, zero, 1, &d1);
    difference_stats(img, channels, zero, 2, &d2);
    cell_texture(img, channels, zero, cells);
    for (size_t c = 0; c < 3; c++) {
        double step = c < channels ? fabs(c1[c]) : 0;
        ec->t2[c] = (float)fmax(EDGE_STEP_FRACTION * step, 3 * d1.p95[c]);
        ec->t4[c] = (float)fmax(1.5 * EDGE_STEP_FRACTION * step, 3 * d2.p95[c]);
        sigma[c] = d1.sigma[c] / 1.4142; /* a difference has twice the variance */
        delta[c] = fmax(fmax(JOIN_STEP_FRACTION * step, 0.75 * d1.p95[c]), 1e-4);
        delta[c] = fmax(delta[c], 1.5 * cells[c]);
    }
}

lam_status lam_segment_uniform(const lam_image *img, size_t channels, const double *c1,
                               const double noise[3], const double scatter[3],
                               const lam_segment_options *opt, lam_segmentation *seg,
                               lam_error *err)
{
    size_t w = img->width, h = img->height, n = w * h;
    if (n >= UINT32_MAX / 2)
        return lam_error_set(err, LAM_ETOOBIG, "image too large to label");
    edge_ctx ec;
    ec.img = img;
    ec.channels = channels;
    ec.cls = seg->cls;
    ec.bright = opt->bright_scaling;
    double delta[3], sigma[3];
    thresholds(img, channels, c1, noise, &ec, delta, sigma);
    /* substrate patches differ by its low-frequency errors, and flat areas
     * of a JPEG by whole DC steps: let them merge */
    for (size_t c = 0; c < 3; c++)
        delta[c] = fmax(fmax(delta[c], 2 * scatter[c]), FILE_STEP_MERGE * opt->file_step[c]);
    lam_parallel_for(h, opt->threads ? opt->threads : 1, edge_rows, &ec);
    lam_status st = dilate_edges(seg->cls, w, h, err);
    if (st)
        return st;
    uint32_t m = 0;
    if ((st = grow(img, channels, delta, sigma, opt->bright_scaling, seg->cls, seg->label, &m,
                   err)))
        return st;
    lam_region_stats *R = calloc(m ? m : 1, sizeof *R);
    uint8_t *depth = lam__boundary_depth(seg->label, w, h);
    if (!R || !depth) {
        free(R);
        free(depth);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate %u regions", m);
    }
    lam__region_statistics(img, seg->cls, seg->label, depth, R, m);
    free(depth);
    /* the tolerance follows the channel where a monolayer shows most: a
     * channel it barely changes (blue near 300 nm) must not turn patches of
     * substrate with a JPEG chroma step into regions */
    double tol[3], step1 = 0;
    for (size_t c = 0; c < channels; c++)
        step1 = fmax(step1, fabs(c1[c]));
    for (size_t c = 0; c < 3; c++)
        tol[c] = fmax(fmax(fmax(SUBSTRATE_FRACTION * step1, SUBSTRATE_MIN), 4 * scatter[c]),
                      FILE_STEP_SUBSTRATE * opt->file_step[c]);
    for (uint32_t i = 0; i < m; i++)
        R[i].cls = at_zero(&R[i], channels, tol) ? LAM_CLASS_SUBSTRATE : PROVISIONAL;
    lam__keep_regions(seg, R, m, opt->min_region_px);
    return LAM_OK;
}
