/* segment_internal.h - pieces shared by segment.c (class regions) and
 * segment_grow.c (uniform regions). Not public. */
#ifndef LAMINA_SEGMENT_INTERNAL_H
#define LAMINA_SEGMENT_INTERNAL_H

#include "lamina/segment.h"

#include <math.h>

/* City-block distance to the region boundary per pixel (1 on it, 0 off
 * regions, counted to LAM_DEPTH_CAP), on the given threads (the same
 * values for any count); malloc'd, NULL when out of memory. */
uint8_t *lam__boundary_depth(const uint32_t *label, size_t width, size_t height,
                             size_t threads);

/* Statistics of regions 1..m of a label map (R has m entries), on up to
 * two of 'threads' (the same values for any count). */
void lam__region_statistics(const lam_contrast_map *img, const uint8_t *cls, const uint32_t *label,
                            const uint8_t *depth, lam_region_stats *R, uint32_t m,
                            size_t threads);

/* The same for region l alone, all of whose pixels lie within box (x0,
 * y0, x1, y1 inclusive): lam__region_depth writes the depth of its pixels
 * only (the values lam__boundary_depth gives them; -1 when out of memory,
 * else 0), and lam__region_statistics_in reads only those into r (cleared
 * first). */
int lam__region_depth(const uint32_t *label, size_t width, uint32_t l, const size_t box[4],
                      uint8_t *depth);
void lam__region_statistics_in(const lam_contrast_map *img, const uint8_t *cls,
                               const uint32_t *label, const uint8_t *depth, uint32_t l,
                               const size_t box[4], lam_region_stats *r);

/* What the segmentation's thresholds are measured from (segment_noise.c),
 * on the bare substrate: pixels whose contrast lies within zero[c] of 0 in
 * every channel 0..channels-1. Per lag (index 0: across 2 pixels, 1:
 * across 4) and channel, of the differences across every 7th pixel (and
 * its neighbour, for lag 2) whose ends both lie on it: the robust sigma
 * (1.4826 x median |d|) and the 95th percentile of |d|; the percentile
 * sees what the sigma does not, JPEG block steps and demosaicing
 * artefacts, rare but they must not split a region (1e-3 each with 20
 * samples or fewer, 1e-5 at least). cells: the 90th percentile of the
 * differences between adjacent 8 x 8 cells' means, both on it (0 with 20
 * or fewer): the image's low-frequency texture, flat-field residuals and,
 * above all, JPEG block steps, which two parts of one flake may differ
 * by. Measured, so no model of the noise. On 'threads' threads, the same
 * values for any count; out of memory, the defaults. */
typedef struct lam__texture {
    double sigma[2][3], p95[2][3];
    double cells[3];
} lam__texture;

void lam__substrate_texture(const lam_contrast_map *img, size_t channels, const double zero[3],
                            size_t threads, lam__texture *out);

/* The root of a in a union-find forest of labels (parent[root] == root),
 * halving the path on the way. */
uint32_t lam__label_root(uint32_t *parent, uint32_t a);

/* Keep the regions worth reporting (renumbered 1..kept): substrate regions
 * become class SUBSTRATE without a label, specks and slivers class NONE;
 * the label map is relabelled in slices of rows on 'threads'. Takes R over
 * (stores it in seg). 0 when out of memory (R freed). */
int lam__keep_regions(lam_segmentation *seg, lam_region_stats *R, uint32_t m, size_t min_px,
                      size_t threads);

/* Pixels of class 'none' (transition) deeper than a transition band inside
 * an area of such pixels (chessboard distance >= 6 from every pixel of
 * another class) become class 'joinable' again (segment_cores.c: small
 * flakes a JPEG's colour ringing turns into transition throughout), on
 * 'threads' threads. -1 when out of memory (cls unchanged), else 0. */
int lam__rescue_cores(uint8_t *cls, size_t width, size_t height, uint8_t none,
                      uint8_t joinable, size_t threads);

/* One channel of the merging's test (segment_grow.c means_agree): the
 * means sa / na and sb / nb of two regions agree when their difference
 * d = |sa / na - sb / nb| (in double) is at most delta, or at most
 * delta + noise * sqrt(1 / na + 1 / nb); 1 when they agree. ia and ib
 * are 1 / na and 1 / nb; *se caches the square root (start it at -1).
 *
 * A division has a long latency, and six per pair were a large part of
 * the merging's time. So d is first taken with the reciprocals: each mean
 * is then within three roundings of the quotient (3 u, u = 2^-53) and
 * their difference within another two. Where that d is clear of both
 * thresholds by LAM__RECIPROCAL_SLACK of the means (90 u, ample), the
 * quotients would decide the same; only near a threshold are they taken.
 * The decisions, so the regions, are exactly the division's
 * (tests/test_segment.c checks this on pairs placed at the thresholds).
 * The means are zero or normal numbers: a float sum over at most 2^32
 * pixels cannot give a subnormal quotient. */
#define LAM__RECIPROCAL_SLACK 1e-14

static inline int lam__channel_agrees(double sa, double sb, double na, double nb, double ia,
                                      double ib, double delta, double noise, double *se)
{
    double qa = sa * ia, qb = sb * ib;
    double d = fabs(qa - qb), slack = LAM__RECIPROCAL_SLACK * (fabs(qa) + fabs(qb));
    if (d + slack <= delta)
        return 1;
    if (*se < 0)
        *se = sqrt(ia + ib); /* 1 / na is ia: the same rounding */
    double limit = delta + noise * *se;
    if (d - slack > limit)
        return 0;
    d = fabs(sa / na - sb / nb); /* near a threshold: the quotients */
    return d <= delta || d <= limit;
}

#endif
