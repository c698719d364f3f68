/* substrate_modes.c - which uniform tiles are the bare substrate.
 *
 * Each uniform tile is a point (r, u, v): u = ln R/G and v = ln B/G (the
 * colour, which vignetting and lamp gradients leave alone) and r its
 * brightness relative to a smooth surface fitted over all uniform tiles,
 * with an offset per brightness level (the flat field, roughly removed;
 * see brightness_residuals). Graphene layers move these points by
 * their contrast: mostly the colour on 285 nm oxide, mostly the
 * brightness on 90 nm. The dense clusters ("modes") are found by counting
 * neighbours; the substrate is the mode against which the others look
 * like graphene, judged on spatially adjacent tiles (one tile apart the
 * flat field cancels) in every channel: the contrast of mode j against
 * candidate i must lie near a ladder entry up to a scale of 0.6-1.6 (the
 * response is not known yet). From a flake's point of view the substrate
 * looks like negative graphene, which no entry matches. Two modes whose
 * mutual contrast is well below a monolayer's (JPEG blocks, a flat-field
 * residual or a slight colour cast splitting the substrate in two) give no
 * evidence about each other, and a candidate whose neighbours fit the
 * ladder poorly (relative distance above EVIDENCE_MAX) is not chosen over
 * the largest mode. Without a ladder, or when no mode has such evidence,
 * the largest mode wins.
 *
 * A JPEG splits a flat substrate itself: its blocks round their colour to
 * whole DC quantisation steps, so where the flat field's slow colour
 * change crosses a step the substrate becomes two clusters a step apart in
 * colour (ln R/G, ln B/G ~0.01-0.02) at the same brightness, spread over
 * the whole picture side by side. Taking one of them biases every contrast
 * by up to a step (hBN on 285 nm read 20-30 % too thick). Such a mode
 * joins the chosen one (same_surface): nearly the same brightness, a
 * colour within two steps' worth, and spread over the picture like the
 * substrate itself. A flake is confined to a few places, and graphene
 * moves the brightness too, so neither joins. */
#include "substrate_internal.h"
#include "robust_fit.h"
#include "vector_clones.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define MAX_MODES 6
#define DENSITY_SAMPLE 2000   /* tiles used to find modes */
#define BOX_R 0.015           /* neighbourhood half widths: brightness ... */
#define BOX_UV 0.008          /* ... and colour */
#define ADJ_MIN_PAIRS 3
#define SCALE_LO 0.6
#define SCALE_HI 1.6
#define SAME_FRACTION 0.5     /* modes closer than this x the scaled monolayer are alike */
#define EVIDENCE_MAX 0.2      /* a mode whose neighbours fit the ladder worse is not chosen */
#define SPLIT_R 0.0075        /* a JPEG split: brightness within this ... */
#define SPLIT_UV 0.03         /* ... colour within this (about two DC steps) ... */
#define SPLIT_CELLS 0.6       /* ... found in this share of the chosen mode's cells ... */
#define SPLIT_MIN_CELLS 6     /* ... and in at least this many of the 4 x 4 */
#define SPLIT_COUNT 0.2       /* ... with this share of its tiles */

typedef struct mode {
    double r, u, v;
    size_t count;
} mode;

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y;
}

/* Brightness of each uniform tile against a smooth surface: the flat
 * field, roughly. A robust fit over all uniform tiles is the start; where
 * flakes of very different brightness cover much of the picture (a TMD
 * bilayer is 0.8 darker than the oxide) it bends between them and leaves
 * the vignetting in every cluster, which then splits into several modes.
 * So the fit is repeated with each brightness level found in the
 * residuals given its own offset: vignetting multiplies every surface
 * alike, so one shape serves them all. */
#define LEVELS_MAX 4
#define LEVEL_HALF 0.1        /* a level's tiles: residuals within this (ln) of its centre */
#define LEVEL_MIN_SHARE 0.08  /* a level holds at least this share of the sampled tiles */
#define LEVEL_PASSES 3
#define ROBUST_MAXITER 100    /* GSL's default, which this fit has always had */

typedef struct bright_sample {
    size_t used;
    double (*basis)[LAM_SUBSTRATE_TERMS];
    double *y;  /* ln of the sum of channels */
    int *level; /* -1: in no level */
} bright_sample;

static int sample_tiles(const tile_stat *ts, size_t n, const lam_substrate *s, bright_sample *bs)
{
    size_t m = 0, k = 0;
    for (size_t i = 0; i < n; i++)
        m += ts[i].uniform != 0;
    size_t every = m > 1500 ? (m + 1499) / 1500 : 1;
    bs->used = 0;
    bs->basis = malloc((m / every + 1) * sizeof *bs->basis);
    bs->y = malloc((m / every + 1) * sizeof *bs->y);
    bs->level = calloc(m / every + 1, sizeof *bs->level); /* all in level 0: the first fit */
    if (!bs->basis || !bs->y || !bs->level)
        return 0;
    for (size_t i = 0; i < n; i++) {
        if (!ts[i].uniform || k++ % every)
            continue;
        lam__substrate_basis(s, ts[i].cx, ts[i].cy, bs->basis[bs->used]);
        bs->y[bs->used++] = log(ts[i].mean[0] + ts[i].mean[1] + ts[i].mean[2]);
    }
    return bs->used > 2 * LAM_SUBSTRATE_TERMS;
}

static double surface_at(const double *coef, const double *b)
{
    double f = 0;
    for (int t = 0; t < LAM_SUBSTRATE_TERMS; t++)
        f += coef[t] * b[t];
    return f;
}

/* Robust fit of the surface (coef) with an offset per level beyond the
 * first; tiles in no level are left out. 0 when the fit fails. */
static int fit_surface(const bright_sample *bs, size_t levels, double *coef)
{
    size_t p = LAM_SUBSTRATE_TERMS + (levels ? levels - 1 : 0), rows = 0;
    for (size_t j = 0; j < bs->used; j++)
        rows += bs->level[j] >= 0;
    if (rows <= 2 * p)
        return 0;
    double *X = calloc(rows * p, sizeof *X), *y = malloc(rows * sizeof *y);
    double c[LAM__ROBUST_MAX_TERMS];
    int ok = X && y;
    for (size_t j = 0, r = 0; ok && j < bs->used; j++) {
        if (bs->level[j] < 0)
            continue;
        memcpy(X + r * p, bs->basis[j], LAM_SUBSTRATE_TERMS * sizeof *X);
        if (bs->level[j] > 0)
            X[r * p + LAM_SUBSTRATE_TERMS + (size_t)bs->level[j] - 1] = 1.0;
        y[r++] = bs->y[j];
    }
    /* the iteration limit leaves the bisquare weights' last estimate, as
     * good a surface as this rough use needs (as in the flat-field fit);
     * treating it as a failure dropped the surface, and the raw
     * brightness split a 48 MP field's substrate into several modes */
    ok = ok && lam__robust_bisquare(X, y, rows, p, ROBUST_MAXITER, c) >= 0;
    if (ok)
        memcpy(coef, c, LAM_SUBSTRATE_TERMS * sizeof *coef);
    free(X);
    free(y);
    return ok;
}

/* The brightness levels of the residuals from the surface 'coef': the
 * densest residual (most others within LEVEL_HALF), then the densest
 * beyond twice LEVEL_HALF of those taken, while a level holds
 * LEVEL_MIN_SHARE of the tiles. Each tile joins the nearest level within
 * LEVEL_HALF. 'e' holds 2 x used scratch values. Returns the count. */
static size_t find_levels(bright_sample *bs, const double *coef, double *e)
{
    double centre[LEVELS_MAX], *sorted = e + bs->used;
    size_t levels = 0, need = (size_t)ceil(LEVEL_MIN_SHARE * (double)bs->used);
    for (size_t j = 0; j < bs->used; j++)
        sorted[j] = e[j] = bs->y[j] - surface_at(coef, bs->basis[j]);
    qsort(sorted, bs->used, sizeof *sorted, cmp_double);
    while (levels < LEVELS_MAX) {
        size_t best = 0, bj = 0, lo = 0, hi = 0;
        for (size_t j = 0; j < bs->used; j++) {
            while (sorted[lo] < sorted[j] - LEVEL_HALF)
                lo++;
            while (hi < bs->used && sorted[hi] <= sorted[j] + LEVEL_HALF)
                hi++;
            int taken = 0;
            for (size_t k = 0; k < levels; k++)
                taken |= fabs(sorted[j] - centre[k]) <= 2 * LEVEL_HALF;
            if (!taken && hi - lo > best)
                best = hi - lo, bj = j;
        }
        if (best < need || best == 0)
            break;
        centre[levels++] = sorted[bj];
    }
    for (size_t j = 0; j < bs->used; j++) {
        bs->level[j] = -1;
        double bd = LEVEL_HALF;
        for (size_t k = 0; k < levels; k++)
            if (fabs(e[j] - centre[k]) <= bd)
                bd = fabs(e[j] - centre[k]), bs->level[j] = (int)k;
    }
    return levels;
}

/* The levels as fit_surface reads them (no level counts as one, tiles
 * all in level 0): the design of the fit. */
static size_t design_levels(size_t levels)
{
    return levels ? levels : 1;
}

static void brightness_residuals(const tile_stat *ts, size_t n, const lam_substrate *s,
                                 double *r)
{
    bright_sample bs = {0};
    double coef[LAM_SUBSTRATE_TERMS] = {0};
    int ok = sample_tiles(ts, n, s, &bs) && fit_surface(&bs, 0, coef);
    double *e = ok ? malloc(2 * bs.used * sizeof *e) : NULL;
    /* the levels of coef's fit (without memory: no shortcut, the same result) */
    int *fitted = ok ? malloc(bs.used * sizeof *fitted) : NULL;
    size_t fitted_levels = 1;
    for (int pass = 0; e && pass < LEVEL_PASSES; pass++) {
        double next[LAM_SUBSTRATE_TERMS];
        if (fitted)
            memcpy(fitted, bs.level, bs.used * sizeof *fitted);
        size_t levels = find_levels(&bs, coef, e);
        /* the same levels again: the fit would return coef itself (it
         * depends on nothing else), and so would every pass after it */
        if (fitted && levels && design_levels(levels) == fitted_levels &&
            !memcmp(fitted, bs.level, bs.used * sizeof *fitted))
            break;
        if (!levels || !fit_surface(&bs, levels, next))
            break; /* the surface would not change again */
        memcpy(coef, next, sizeof coef);
        fitted_levels = design_levels(levels);
    }
    free(fitted);
    for (size_t i = 0; i < n; i++) {
        if (!ts[i].uniform)
            continue;
        double b[LAM_SUBSTRATE_TERMS];
        lam__substrate_basis(s, ts[i].cx, ts[i].cy, b);
        r[i] = log(ts[i].mean[0] + ts[i].mean[1] + ts[i].mean[2]) - (ok ? surface_at(coef, b) : 0);
    }
    free(e);
    free(bs.basis);
    free(bs.y);
    free(bs.level);
}

static int in_box(const tile_stat *a, double ra, const tile_stat *b, double rb, double scale)
{
    return fabs(ra - rb) <= BOX_R * scale && fabs(a->u - b->u) <= BOX_UV * scale &&
           fabs(a->v - b->v) <= BOX_UV * scale;
}

/* Tiles b of the sample within the box of tile a (points r, u, v; in_box
 * at scale 1), for one a: a loop over packed coordinates that vectorises. */
LAM_VECTOR_CLONES
static size_t box_count(const double *restrict r, const double *restrict u,
                        const double *restrict v, size_t ns, size_t a)
{
    size_t count = 0;
    for (size_t b = 0; b < ns; b++)
        count += (size_t)((fabs(r[a] - r[b]) <= BOX_R) & (fabs(u[a] - u[b]) <= BOX_UV) &
                          (fabs(v[a] - v[b]) <= BOX_UV));
    return count;
}

/* Each sampled tile's neighbour count (itself included), from its
 * coordinates packed side by side in p (3 x ns: the tiles' records are
 * far apart), by the same tests as in_box, so the same counts. */
static void count_neighbours(const tile_stat *ts, const double *r, const size_t *idx, size_t ns,
                             double *p, size_t *dens)
{
    double *pr = p, *pu = p + ns, *pv = p + 2 * ns;
    for (size_t a = 0; a < ns; a++)
        pr[a] = r[idx[a]], pu[a] = ts[idx[a]].u, pv[a] = ts[idx[a]].v;
    for (size_t a = 0; a < ns; a++)
        dens[a] = box_count(pr, pu, pv, ns, a);
}

/* Modes: the sampled tiles in order of decreasing neighbour count, each a
 * new mode unless an earlier one lies within twice the box. */
static size_t find_modes(const tile_stat *ts, size_t n, const double *r, mode *md)
{
    size_t *idx = malloc(DENSITY_SAMPLE * sizeof *idx), ns = 0, m = 0, every = 1, u = 0;
    size_t *dens = calloc(DENSITY_SAMPLE, sizeof *dens);
    double *packed = malloc(3 * DENSITY_SAMPLE * sizeof *packed);
    for (size_t i = 0; i < n; i++)
        u += ts[i].uniform != 0;
    every = u > DENSITY_SAMPLE ? (u + DENSITY_SAMPLE - 1) / DENSITY_SAMPLE : 1;
    for (size_t i = 0, k = 0; idx && dens && packed && i < n && ns < DENSITY_SAMPLE; i++)
        if (ts[i].uniform && k++ % every == 0)
            idx[ns++] = i;
    count_neighbours(ts, r, idx, ns, packed, dens);
    size_t top = 0;
    for (size_t a = 0; a < ns; a++)
        top = dens[a] > top ? dens[a] : top;
    while (m < MAX_MODES) {
        size_t best = ns;
        for (size_t a = 0; a < ns; a++) {
            int taken = 0;
            for (size_t k = 0; k < m && !taken; k++) {
                tile_stat t = {0};
                t.u = md[k].u, t.v = md[k].v;
                taken = in_box(&ts[idx[a]], r[idx[a]], &t, md[k].r, 2.0);
            }
            if (!taken && dens[a] * 10 >= top && (best == ns || dens[a] > dens[best]))
                best = a;
        }
        if (best == ns)
            break;
        md[m++] = (mode){r[idx[best]], ts[idx[best]].u, ts[idx[best]].v, dens[best]};
    }
    free(idx);
    free(dens);
    free(packed);
    return m;
}

/* Each uniform tile's mode (the nearest within twice the box), or -1. */
static void assign(const tile_stat *ts, size_t n, const double *r, const mode *md, size_t m,
                   int *of)
{
    for (size_t i = 0; i < n; i++) {
        of[i] = -1;
        double bd = INFINITY;
        for (size_t k = 0; k < m && ts[i].uniform; k++) {
            tile_stat t = {0};
            t.u = md[k].u, t.v = md[k].v;
            if (!in_box(&ts[i], r[i], &t, md[k].r, 2.0))
                continue;
            double d = fabs(r[i] - md[k].r) / BOX_R + hypot(ts[i].u - md[k].u, ts[i].v - md[k].v) / BOX_UV;
            if (d < bd)
                bd = d, of[i] = (int)k;
        }
    }
}

/* The cells of a 4 x 4 grid over the picture that hold tiles of each
 * mode, as bit masks. */
static void mode_cells(const tile_stat *ts, size_t n, const int *of, const lam_substrate *s,
                       unsigned *cells)
{
    memset(cells, 0, MAX_MODES * sizeof *cells);
    for (size_t i = 0; i < n; i++) {
        if (of[i] < 0)
            continue;
        unsigned gx = (unsigned)fmin(3, fmax(0, 4 * ts[i].cx / (double)s->width));
        unsigned gy = (unsigned)fmin(3, fmax(0, 4 * ts[i].cy / (double)s->height));
        cells[of[i]] |= 1u << (gy * 4 + gx);
    }
}

static int bit_count(unsigned x)
{
    int k = 0;
    for (; x; x &= x - 1)
        k++;
    return k;
}

/* Is mode k the chosen mode b's own surface, split by a JPEG's colour
 * steps (see the top of this file)? */
static int same_surface(const mode *md, size_t k, size_t b, const unsigned *cells)
{
    int ck = bit_count(cells[k]), cb = bit_count(cells[b]);
    return k != b && fabs(md[k].r - md[b].r) <= SPLIT_R && fabs(md[k].u - md[b].u) <= SPLIT_UV &&
           fabs(md[k].v - md[b].v) <= SPLIT_UV && ck >= SPLIT_MIN_CELLS &&
           ck >= SPLIT_CELLS * cb && md[k].count >= SPLIT_COUNT * md[b].count;
}

/* Summed log ratios of adjacent tiles of different modes. */
typedef struct mode_pairs {
    double logratio[MAX_MODES][MAX_MODES][3];
    size_t count[MAX_MODES][MAX_MODES];
} mode_pairs;

static void adjacent_pairs(const tile_stat *ts, size_t nx, size_t ny, const int *of,
                           mode_pairs *mp)
{
    memset(mp, 0, sizeof *mp);
    for (size_t y = 0; y < ny; y++)
        for (size_t x = 0; x < nx; x++)
            for (int d = 0; d < 2; d++) {
                size_t xx = x + (size_t)(d == 0), yy = y + (size_t)(d == 1);
                if (xx >= nx || yy >= ny)
                    continue;
                int a = of[y * nx + x], b = of[yy * nx + xx];
                if (a < 0 || b < 0 || a == b)
                    continue;
                const tile_stat *ta = &ts[y * nx + x], *tb = &ts[yy * nx + xx];
                for (int c = 0; c < 3; c++) {
                    double q = log(tb->mean[c] / ta->mean[c]);
                    mp->logratio[a][b][c] += q;
                    mp->logratio[b][a][c] -= q;
                }
                mp->count[a][b]++;
                mp->count[b][a]++;
            }
}

/* Entry N of the ladder over three channels (a channel beyond the
 * ladder's own repeats its last). */
static void ladder_entry(const lam_prediction *P, size_t N, double L[3])
{
    for (size_t k = 0; k < 3; k++)
        L[k] = P->contrast[N][k < P->channels ? k : P->channels - 1];
}

/* Relative distance of a contrast vector to the ladder, scale free within
 * SCALE_LO..SCALE_HI, capped at 1. */
static double ladder_distance(const double c[3], const lam_substrate_options *opt)
{
    double best = 1;
    for (size_t e = 1; e <= opt->ladder->max_layers; e++) {
        double L[3];
        ladder_entry(opt->ladder, e, L);
        double cl = 0, ll = 0;
        for (int k = 0; k < 3; k++)
            cl += c[k] * L[k], ll += L[k] * L[k];
        if (!(ll > 0))
            continue;
        double sc = fmin(SCALE_HI, fmax(SCALE_LO, cl / ll)), q = 0;
        for (int k = 0; k < 3; k++)
            q += (c[k] - sc * L[k]) * (c[k] - sc * L[k]);
        best = fmin(best, q / ll);
    }
    return best;
}

static size_t choose(const mode *md, size_t m, const mode_pairs *mp,
                     const lam_substrate_options *opt)
{
    size_t bi = 0;
    for (size_t k = 1; k < m; k++)
        bi = md[k].count > md[bi].count ? k : bi;
    if (m <= 1 || !opt->ladder || opt->ladder->max_layers == 0)
        return bi;
    double best = INFINITY, l1 = 0, L1[3];
    ladder_entry(opt->ladder, 1, L1);
    for (int k = 0; k < 3; k++)
        l1 += L1[k] * L1[k];
    double same = SAME_FRACTION * SCALE_LO * sqrt(l1);
    for (size_t i = 0; i < m; i++) {
        double score = 0, weight = 0;
        for (size_t j = 0; j < m; j++) {
            if (j == i || mp->count[i][j] < ADJ_MIN_PAIRS)
                continue;
            double c[3], cc = 0;
            for (int k = 0; k < 3; k++) {
                c[k] = 1 - exp(mp->logratio[i][j][k] / (double)mp->count[i][j]);
                cc += c[k] * c[k];
            }
            if (cc < same * same)
                continue;
            score += (double)md[j].count * ladder_distance(c, opt);
            weight += (double)md[j].count;
        }
        if (!(weight > 0))
            continue; /* touches no other mode: no evidence either way */
        score /= weight;
        if (score > EVIDENCE_MAX)
            continue;
        /* within 0.05 of each other the larger mode wins */
        if (score < best - 0.05 || (fabs(score - best) <= 0.05 && md[i].count > md[bi].count))
            best = fmin(best, score), bi = i;
    }
    return bi;
}

/* The user's region: the modes of its tiles' mean brightness and colour. */
static void roi_mode(const tile_stat *ts, size_t n, const double *r,
                     const lam_substrate_options *opt, mode *md)
{
    memset(md, 0, sizeof *md);
    for (size_t i = 0; i < n; i++)
        if (ts[i].uniform && ts[i].cx >= (double)opt->roi[0] &&
            ts[i].cx <= (double)(opt->roi[0] + opt->roi[2]) && ts[i].cy >= (double)opt->roi[1] &&
            ts[i].cy <= (double)(opt->roi[1] + opt->roi[3]))
            md->r += r[i], md->u += ts[i].u, md->v += ts[i].v, md->count++;
    if (md->count)
        md->r /= (double)md->count, md->u /= (double)md->count, md->v /= (double)md->count;
}

/* 1.4826 x the median absolute distance of tiles near a mode in one
 * coordinate (0 brightness, 1 u, 2 v): the mode's own spread. */
static double spread(const tile_stat *ts, size_t n, const double *r, const mode *md, int coord,
                     double *scratch)
{
    size_t k = 0;
    for (size_t i = 0; i < n; i++) {
        tile_stat t = {0};
        t.u = md->u, t.v = md->v;
        if (!ts[i].uniform || !in_box(&ts[i], r[i], &t, md->r, 3.0))
            continue;
        scratch[k++] = fabs(coord == 0 ? r[i] - md->r : coord == 1 ? ts[i].u - md->u : ts[i].v - md->v);
    }
    if (k < 5)
        return NAN;
    qsort(scratch, k, sizeof *scratch, cmp_double);
    return 1.4826 * scratch[k / 2];
}

/* The chosen mode's tiles: within 4.5 of its own spreads (JPEG colour
 * quantisation and noise widen it), at least the box, at most 0.04 in
 * brightness and 0.02 in colour (a monolayer moves ~0.1). */
static size_t mark_candidates(tile_stat *ts, size_t n, const double *r, const mode *md,
                              int add)
{
    double *scratch = malloc(n * sizeof *scratch), tol[3];
    const double lo[3] = {BOX_R, BOX_UV, BOX_UV}, hi[3] = {0.04, 0.02, 0.02};
    for (int k = 0; k < 3; k++) {
        double sp = scratch ? spread(ts, n, r, md, k, scratch) : NAN;
        tol[k] = isfinite(sp) ? fmin(hi[k], fmax(lo[k], 4.5 * sp)) : 2 * lo[k];
    }
    free(scratch);
    size_t cand = 0;
    for (size_t i = 0; i < n; i++) {
        int near = ts[i].uniform && fabs(r[i] - md->r) <= tol[0] &&
                   fabs(ts[i].u - md->u) <= tol[1] && fabs(ts[i].v - md->v) <= tol[2];
        ts[i].candidate = near || (add && ts[i].candidate);
        cand += (size_t)ts[i].candidate;
    }
    return cand;
}

/* The chosen mode's tiles and those of the modes that are its own
 * surface split by a JPEG. */
static size_t substrate_tiles(tile_stat *ts, size_t n, const double *r, const mode *md,
                              size_t m, size_t b, const int *of, const lam_substrate *s)
{
    unsigned cells[MAX_MODES];
    mode_cells(ts, n, of, s, cells);
    size_t cand = mark_candidates(ts, n, r, &md[b], 0);
    for (size_t k = 0; k < m; k++)
        if (same_surface(md, k, b, cells))
            cand = mark_candidates(ts, n, r, &md[k], 1);
    return cand;
}

size_t lam__substrate_candidates(tile_stat *ts, size_t nx, size_t ny, const lam_substrate *s,
                                 const lam_substrate_options *opt)
{
    size_t n = nx * ny, m = 0, cand = 0;
    double *r = calloc(n, sizeof *r);
    int *of = malloc(n * sizeof *of);
    mode_pairs *mp = malloc(sizeof *mp);
    mode md[MAX_MODES];
    if (!r || !of || !mp) {
        free(r);
        free(of);
        free(mp);
        return 0;
    }
    brightness_residuals(ts, n, s, r);
    if (opt->has_roi) {
        roi_mode(ts, n, r, opt, &md[0]);
        m = md[0].count ? 1 : 0;
    } else {
        m = find_modes(ts, n, r, md);
    }
    assign(ts, n, r, md, m, of);
    adjacent_pairs(ts, nx, ny, of, mp);
    if (m)
        cand = opt->has_roi ? mark_candidates(ts, n, r, &md[0], 0)
                            : substrate_tiles(ts, n, r, md, m, choose(md, m, mp, opt), of, s);
    free(r);
    free(of);
    free(mp);
    return cand;
}
