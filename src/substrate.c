/* substrate.c - substrate detection by chromaticity, robust flat-field fit
 * (bisquare regression, robust_fit.h), noise estimate and the contrast map. */
#include "lamina/substrate.h"
#include "lamina/parallel.h"
#include "substrate_internal.h"
#include "robust_fit.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

lam_status lam_substrate_roi_parse(lam_substrate_options *o, const char *name, const char *text,
                                   lam_error *err)
{
    double v[4];
    size_t n = 0;
    int ok = !lam_parse_numbers(err, name, text, ',', 0, 1e9, v, 4, &n) && n == 4 &&
             v[2] >= 1 && v[3] >= 1;
    for (size_t i = 0; ok && i < 4; i++)
        ok = v[i] == floor(v[i]);
    if (!ok)
        return lam_error_set(err, LAM_ERANGE, "%s: expected X,Y,W,H in pixels", name);
    for (size_t i = 0; i < 4; i++)
        o->roi[i] = (size_t)v[i];
    o->has_roi = 1;
    return LAM_OK;
}

lam_substrate_options lam_substrate_options_default(void)
{
    lam_substrate_options o;
    memset(&o, 0, sizeof o);
    o.tile = 32;
    o.threads = 1;
    return o;
}

void lam__substrate_basis(const lam_substrate *s, double x, double y, double *b)
{
    double u = 2 * x / (double)s->width - 1, v = 2 * y / (double)s->height - 1;
    double r2 = u * u + v * v;
    b[0] = 1, b[1] = u, b[2] = v, b[3] = u * u, b[4] = u * v, b[5] = v * v, b[6] = r2 * r2;
}

void lam_substrate_eval(const lam_substrate *s, double x, double y, double out[3])
{
    double b[LAM_SUBSTRATE_TERMS];
    lam__substrate_basis(s, x, y, b);
    for (int c = 0; c < 3; c++) {
        double a = 0;
        for (int k = 0; k < LAM_SUBSTRATE_TERMS; k++)
            a += s->coef[c][k] * b[k];
        out[c] = exp(a);
    }
}



static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y;
}

static double median_of(double *v, size_t n)
{
    if (n == 0)
        return NAN;
    qsort(v, n, sizeof *v, cmp_double);
    return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

typedef struct tile_ctx {
    const lam_image *img;
    size_t T, nx;
    tile_stat *ts;
    int failed; /* a slice could not allocate its sums */
} tile_ctx;

/* The running sums of one tile. */
typedef struct tile_sums {
    double s[3], q[3];
    size_t n, clip;
} tile_sums;

/* Row y's pixels x0..x1 - 1 into one tile's sums, pixel by pixel. The
 * sums are carried in local variables (the same additions in the same
 * order): kept in the struct, each addition went through memory, a store
 * and a load in every step of six chains of dependent additions. */
static void tile_add_row(const lam_image *img, size_t y, size_t x0, size_t x1, tile_sums *t)
{
    const float *r = img->plane[0] + y * img->width, *g = img->plane[1] + y * img->width,
                *b = img->plane[2] + y * img->width;
    double s0 = t->s[0], s1 = t->s[1], s2 = t->s[2], q0 = t->q[0], q1 = t->q[1], q2 = t->q[2];
    for (size_t x = x0; x < x1; x++) {
        double v0 = r[x], v1 = g[x], v2 = b[x];
        s0 += v0, s1 += v1, s2 += v2;
        q0 += v0 * v0, q1 += v1 * v1, q2 += v2 * v2;
    }
    t->s[0] = s0, t->s[1] = s1, t->s[2] = s2, t->q[0] = q0, t->q[1] = q1, t->q[2] = q2;
    t->n += x1 - x0;
    for (size_t x = x0; img->clipped_count && x < x1; x++)
        t->clip += (size_t)lam_image_clipped(img, x, y);
}

/* A tile's statistics from its sums. */
static void tile_finish(const tile_sums *u, size_t x0, size_t y0, size_t x1, size_t y1,
                        tile_stat *t)
{
    t->cx = 0.5 * (double)(x0 + x1);
    t->cy = 0.5 * (double)(y0 + y1);
    t->clipped = u->clip > 0;
    int ok = 1;
    for (int c = 0; c < 3; c++) {
        t->mean[c] = u->s[c] / (double)u->n;
        double var = u->q[c] / (double)u->n - t->mean[c] * t->mean[c];
        t->rsd[c] = t->mean[c] > 0 ? sqrt(var > 0 ? var : 0) / t->mean[c] : INFINITY;
        ok &= t->mean[c] > 1e-4;
    }
    t->uniform = ok;
    t->u = ok ? log(t->mean[0] / t->mean[1]) : 0;
    t->v = ok ? log(t->mean[2] / t->mean[1]) : 0;
}

/* Rows of tiles begin..end - 1. Each row of pixels is read once across
 * all the tiles it crosses, each tile's sums kept apart: every tile adds
 * its pixels in the same order as one tile at a time would (row by row,
 * left to right), so the sums are the same, but the planes are read as
 * long rows, which the processor fetches ahead; tile by tile they were 96
 * short pieces at once, and this pass waited on memory most of its time. */
static void tile_rows(size_t begin, size_t end, size_t slice, void *vctx)
{
    (void)slice;
    tile_ctx *tc = vctx;
    const lam_image *img = tc->img;
    size_t T = tc->T, nx = tc->nx, w = img->width, h = img->height;
    tile_sums *sums = malloc(nx * sizeof *sums);
    if (!sums) {
        tc->failed = 1;
        return;
    }
    for (size_t ty = begin; ty < end; ty++) {
        size_t y0 = ty * T, y1 = y0 + T < h ? y0 + T : h;
        memset(sums, 0, nx * sizeof *sums);
        for (size_t y = y0; y < y1; y++)
            for (size_t tx = 0; tx < nx; tx++)
                tile_add_row(img, y, tx * T, (tx + 1) * T < w ? (tx + 1) * T : w, &sums[tx]);
        for (size_t tx = 0; tx < nx; tx++)
            tile_finish(&sums[tx], tx * T, y0, (tx + 1) * T < w ? (tx + 1) * T : w, y1,
                        &tc->ts[ty * nx + tx]);
    }
    free(sums);
}

static int tile_stats(const lam_image *img, size_t T, tile_stat *ts, size_t nx, size_t ny,
                      size_t threads)
{
    tile_ctx tc = {img, T, nx, ts, 0};
    lam_parallel_for(ny, threads, tile_rows, &tc);
    return !tc.failed;
}

/* Uniform tiles: relative spread below 2.5x the typical (median) spread,
 * none clipped. */
static void mark_uniform(tile_stat *ts, size_t n, double *scratch)
{
    size_t m = 0;
    for (size_t i = 0; i < n; i++)
        if (ts[i].uniform)
            scratch[m++] = fmax(ts[i].rsd[0], fmax(ts[i].rsd[1], ts[i].rsd[2]));
    double typical = median_of(scratch, m);
    for (size_t i = 0; i < n; i++)
        ts[i].uniform = ts[i].uniform && !ts[i].clipped &&
                        fmax(ts[i].rsd[0], fmax(ts[i].rsd[1], ts[i].rsd[2])) <= 2.5 * typical + 1e-6;
}

/* A few thousand tiles fix 7 coefficients well: thin out the rest. */
static size_t thin_candidates(tile_stat *ts, size_t n, size_t cand)
{
    if (cand <= 1500)
        return cand;
    size_t keep_every = (cand + 1499) / 1500, seen = 0;
    cand = 0;
    for (size_t i = 0; i < n; i++)
        if (ts[i].candidate) {
            ts[i].candidate = seen++ % keep_every == 0;
            cand += (size_t)ts[i].candidate;
        }
    return cand;
}

/* Robust (bisquare, robust_fit.h) fit of ln(level) per channel over the
 * candidates, the three channels side by side on the threads (each with
 * its own scratch: the same fit as one after the other). */
typedef struct flat_fit {
    const tile_stat *ts;
    size_t n, cand;
    const double *X; /* cand rows of LAM_SUBSTRATE_TERMS */
    lam_substrate *s;
    lam__robust_status status[3];
} flat_fit;

static void fit_channel(size_t c, void *vctx)
{
    flat_fit *f = vctx;
    double *y = malloc(f->cand * sizeof *y);
    if (!y) {
        f->status[c] = LAM__ROBUST_NOMEM;
        return;
    }
    for (size_t i = 0, r = 0; i < f->n; i++)
        if (f->ts[i].candidate)
            y[r++] = log(f->ts[i].mean[c]);
    f->status[c] = lam__robust_bisquare(f->X, y, f->cand, LAM_SUBSTRATE_TERMS, 30,
                                        f->s->coef[c]);
    free(y);
}

static lam_status fit_flat_field(const tile_stat *ts, size_t n, size_t cand, lam_substrate *s,
                                 size_t threads, lam_error *err)
{
    double *X = malloc(cand * LAM_SUBSTRATE_TERMS * sizeof *X);
    if (!X)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the flat-field fit");
    for (size_t i = 0, r = 0; i < n; i++)
        if (ts[i].candidate)
            lam__substrate_basis(s, ts[i].cx, ts[i].cy, X + LAM_SUBSTRATE_TERMS * r++);
    flat_fit f = {ts, n, cand, X, s, {0, 0, 0}};
    lam_parallel_each(3, threads, fit_channel, &f);
    free(X);
    lam_status st = LAM_OK;
    /* the iteration limit leaves the bisquare weights' last estimate */
    for (int c = 0; c < 3 && !st; c++)
        if (f.status[c] == LAM__ROBUST_NOMEM)
            st = lam_error_set(err, LAM_ENOMEM, "cannot allocate the flat-field fit");
        else if (f.status[c] == LAM__ROBUST_FAILED)
            st = lam_error_set(err, LAM_EGSL, "flat-field fit: the robust fit failed");
    return st;
}

/* The largest relative deviation of a tile from the fitted flat field. */
static double tile_deviation(const tile_stat *t, const lam_substrate *s)
{
    double b[3], worst = 0;
    lam_substrate_eval(s, t->cx, t->cy, b);
    for (int c = 0; c < 3; c++)
        worst = fmax(worst, fabs(log(t->mean[c] / b[c])));
    return worst;
}

/* Second pass: the first fit was made from a colour-and-brightness mode
 * found against a rough brightness model; now every uniform tile close to
 * the fitted flat field (within 4.5 robust sigmas of the candidates' own
 * deviations, 0.004 to 0.03) is substrate - the corners that the rough
 * model had cut off come back. */
static size_t refine_candidates(tile_stat *ts, size_t n, const lam_substrate *s, double *scratch)
{
    size_t k = 0;
    for (size_t i = 0; i < n; i++)
        if (ts[i].candidate)
            scratch[k++] = tile_deviation(&ts[i], s);
    double tol = k ? fmin(0.03, fmax(0.004, 4.5 * 1.4826 * median_of(scratch, k))) : 0.01;
    size_t cand = 0;
    for (size_t i = 0; i < n; i++) {
        ts[i].candidate = ts[i].uniform && tile_deviation(&ts[i], s) <= tol;
        cand += (size_t)ts[i].candidate;
    }
    return cand;
}

/* Noise, correlation factor kappa, mean level and fall-off over the
 * substrate tiles. */
/* A tile's relative pixel noise: its spread less what the flat field's own
 * slope across the tile adds (a linear ramp over T pixels has variance
 * slope^2 T^2 / 12 in each direction; strong vignetting otherwise reads as
 * noise). */
static double tile_noise(const tile_stat *t, const lam_substrate *s, size_t T, int c)
{
    double b0[3], bx[3], by[3];
    lam_substrate_eval(s, t->cx, t->cy, b0);
    lam_substrate_eval(s, t->cx + 1, t->cy, bx);
    lam_substrate_eval(s, t->cx, t->cy + 1, by);
    double gx = bx[c] / b0[c] - 1, gy = by[c] / b0[c] - 1;
    double ramp = (gx * gx + gy * gy) * (double)(T * T) / 12.0;
    double v = t->rsd[c] * t->rsd[c] - ramp;
    return sqrt(v > 0 ? v : 0);
}

static void substrate_stats(const tile_stat *ts, size_t n, size_t T, const lam_image *img,
                            lam_substrate *s, double *scratch)
{
    double lev[3] = {0, 0, 0}, resid2 = 0, expect2 = 0;
    size_t used = 0;
    for (int c = 0; c < 3; c++) {
        size_t k = 0;
        for (size_t i = 0; i < n; i++)
            if (ts[i].candidate)
                scratch[k++] = tile_noise(&ts[i], s, T, c);
        s->noise[c] = median_of(scratch, k);
    }
    for (size_t i = 0; i < n; i++) {
        if (!ts[i].candidate)
            continue;
        double b[3];
        lam_substrate_eval(s, ts[i].cx, ts[i].cy, b);
        for (int c = 0; c < 3; c++) {
            lev[c] += b[c];
            double d = ts[i].mean[c] / b[c] - 1;
            resid2 += d * d;
            expect2 += s->noise[c] * s->noise[c] / (double)(T * T);
        }
        used++;
    }
    for (int c = 0; c < 3; c++) {
        s->level[c] = used ? lev[c] / (double)used : NAN;
        size_t k = 0;
        for (size_t i = 0; i < n; i++)
            if (ts[i].candidate) {
                double b[3];
                lam_substrate_eval(s, ts[i].cx, ts[i].cy, b);
                scratch[k++] = fabs(ts[i].mean[c] / b[c] - 1);
            }
        s->tile_scatter[c] = k ? 1.4826 * median_of(scratch, k) : 0;
    }
    s->kappa = expect2 > 0 && resid2 > expect2 ? resid2 / expect2 : 1.0;
    s->tiles_used = used;
    s->tiles_total = n;
    s->fraction = (double)used / (double)n;
    double gmin = INFINITY, gmax = 0;
    for (size_t yy = 0; yy <= 8; yy++)
        for (size_t xx = 0; xx <= 8; xx++) {
            double b[3];
            lam_substrate_eval(s, (double)img->width * (double)xx / 8,
                               (double)img->height * (double)yy / 8, b);
            gmin = fmin(gmin, b[1]);
            gmax = fmax(gmax, b[1]);
        }
    s->falloff = 1 - gmin / gmax;
}

static size_t tile_size(const lam_image *img, const lam_substrate_options *opt)
{
    size_t T = opt->tile ? opt->tile : 32;
    while (T > 4 && (img->width / T < 6 || img->height / T < 6))
        T /= 2;
    return T;
}

lam_status lam_substrate_estimate(const lam_image *img, const lam_substrate_options *opt,
                                  lam_substrate *out, lam_error *err)
{
    lam_substrate_options defaults = lam_substrate_options_default();
    if (!opt)
        opt = &defaults;
    size_t T = tile_size(img, opt);
    size_t nx = (img->width + T - 1) / T, ny = (img->height + T - 1) / T, n = nx * ny;
    tile_stat *ts = calloc(n, sizeof *ts);
    double *scratch = malloc(n * sizeof *scratch);
    if (!ts || !scratch) {
        free(ts);
        free(scratch);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate substrate tiles");
    }
    lam_substrate s;
    memset(&s, 0, sizeof s);
    s.width = img->width;
    s.height = img->height;
    if (!tile_stats(img, T, ts, nx, ny, opt->threads ? opt->threads : 1)) {
        free(ts);
        free(scratch);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate substrate tiles");
    }
    mark_uniform(ts, n, scratch);
    size_t cand = thin_candidates(ts, n, lam__substrate_candidates(ts, nx, ny, &s, opt));
    lam_status st = LAM_OK;
    if (opt->has_roi && cand == 0)
        st = lam_error_set(err, LAM_ERANGE, "the substrate region holds no uniform tile of %zu px", T);
    else if (cand < 15)
        st = lam_error_set(err, LAM_ERANGE,
                           "no bare substrate found (%zu uniform substrate-coloured tiles); "
                           "give one with --substrate-roi X,Y,W,H",
                           cand);
    size_t threads = opt->threads ? opt->threads : 1;
    if (!st && !(st = fit_flat_field(ts, n, cand, &s, threads, err))) {
        size_t again = thin_candidates(ts, n, refine_candidates(ts, n, &s, scratch));
        if (again >= 15)
            st = fit_flat_field(ts, n, again, &s, threads, err);
    }
    if (!st) {
        substrate_stats(ts, n, T, img, &s, scratch);
        *out = s;
    }
    free(ts);
    free(scratch);
    return st;
}
