/* substrate.c - substrate detection by chromaticity, robust flat-field fit
 * (GSL bisquare regression), noise estimate and the contrast map. */
#include "lamina/substrate.h"
#include "lamina/parallel.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <gsl/gsl_multifit.h>

lam_substrate_options lam_substrate_options_default(void)
{
    lam_substrate_options o;
    memset(&o, 0, sizeof o);
    o.tile = 32;
    o.threads = 1;
    return o;
}

static void basis(const lam_substrate *s, double x, double y, double *b)
{
    double u = 2 * x / (double)s->width - 1, v = 2 * y / (double)s->height - 1;
    double r2 = u * u + v * v;
    b[0] = 1, b[1] = u, b[2] = v, b[3] = u * u, b[4] = u * v, b[5] = v * v, b[6] = r2 * r2;
}

void lam_substrate_eval(const lam_substrate *s, double x, double y, double out[3])
{
    double b[LAM_SUBSTRATE_TERMS];
    basis(s, x, y, b);
    for (int c = 0; c < 3; c++) {
        double a = 0;
        for (int k = 0; k < LAM_SUBSTRATE_TERMS; k++)
            a += s->coef[c][k] * b[k];
        out[c] = exp(a);
    }
}

typedef struct tile_stat {
    double mean[3], rsd[3]; /* relative standard deviation */
    double cx, cy, u, v;
    int uniform, clipped, candidate;
} tile_stat;

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
} tile_ctx;

static void tile_rows(size_t begin, size_t end, size_t slice, void *vctx)
{
    (void)slice;
    const tile_ctx *tc = vctx;
    const lam_image *img = tc->img;
    size_t T = tc->T, nx = tc->nx, w = img->width;
    tile_stat *ts = tc->ts;
    for (size_t ty = begin; ty < end; ty++)
        for (size_t tx = 0; tx < nx; tx++) {
            tile_stat *t = &ts[ty * nx + tx];
            size_t x0 = tx * T, y0 = ty * T, x1 = x0 + T, y1 = y0 + T;
            if (x1 > w)
                x1 = w;
            if (y1 > img->height)
                y1 = img->height;
            double s[3] = {0, 0, 0}, q[3] = {0, 0, 0};
            size_t n = 0, clip = 0;
            for (size_t y = y0; y < y1; y++)
                for (size_t x = x0; x < x1; x++) {
                    size_t k = y * w + x;
                    clip += img->clipped[k];
                    for (int c = 0; c < 3; c++) {
                        double v = img->plane[c][k];
                        s[c] += v;
                        q[c] += v * v;
                    }
                    n++;
                }
            t->cx = 0.5 * (double)(x0 + x1);
            t->cy = 0.5 * (double)(y0 + y1);
            t->clipped = clip > 0;
            int ok = 1;
            for (int c = 0; c < 3; c++) {
                t->mean[c] = s[c] / (double)n;
                double var = q[c] / (double)n - t->mean[c] * t->mean[c];
                t->rsd[c] = t->mean[c] > 0 ? sqrt(var > 0 ? var : 0) / t->mean[c] : INFINITY;
                ok &= t->mean[c] > 1e-4;
            }
            t->uniform = ok;
            t->u = ok ? log(t->mean[0] / t->mean[1]) : 0;
            t->v = ok ? log(t->mean[2] / t->mean[1]) : 0;
        }
}

static void tile_stats(const lam_image *img, size_t T, tile_stat *ts, size_t nx, size_t ny,
                       size_t threads)
{
    tile_ctx tc = {img, T, nx, ts};
    lam_parallel_for(ny, threads, tile_rows, &tc);
}

/* Chromaticity peaks among uniform tiles: a 2-D histogram, 3x3 smoothed;
 * local maxima holding at least a tenth of the highest, strongest first,
 * each refined to the mean chromaticity of the tiles in its 3x3 cell. */
#define MAX_MODES 4
typedef struct chroma_mode {
    double u, v;
    unsigned count;
} chroma_mode;

static size_t chromaticity_modes(const tile_stat *ts, size_t n, double bin, chroma_mode *out)
{
    double umin = INFINITY, vmin = INFINITY, umax = -INFINITY, vmax = -INFINITY;
    for (size_t i = 0; i < n; i++)
        if (ts[i].uniform) {
            umin = fmin(umin, ts[i].u), umax = fmax(umax, ts[i].u);
            vmin = fmin(vmin, ts[i].v), vmax = fmax(vmax, ts[i].v);
        }
    if (!isfinite(umin))
        return 0;
    size_t nu = (size_t)((umax - umin) / bin) + 3, nv = (size_t)((vmax - vmin) / bin) + 3;
    if (nu > 400)
        nu = 400;
    if (nv > 400)
        nv = 400;
    double bu = (umax - umin) / (double)(nu - 2) + 1e-12, bv = (vmax - vmin) / (double)(nv - 2) + 1e-12;
    unsigned *h = calloc(nu * nv, sizeof *h), *sm = calloc(nu * nv, sizeof *sm);
    if (!h || !sm) {
        free(h);
        free(sm);
        return 0;
    }
    for (size_t i = 0; i < n; i++)
        if (ts[i].uniform) {
            size_t a = (size_t)((ts[i].u - umin) / bu) + 1, b = (size_t)((ts[i].v - vmin) / bv) + 1;
            if (a < nu && b < nv)
                h[a * nv + b]++;
        }
    unsigned top = 0;
    for (size_t a = 1; a + 1 < nu; a++)
        for (size_t b = 1; b + 1 < nv; b++) {
            unsigned t = 0;
            for (int da = -1; da <= 1; da++)
                for (int db = -1; db <= 1; db++)
                    t += h[(a + (size_t)da) * nv + b + (size_t)db];
            sm[a * nv + b] = t;
            top = t > top ? t : top;
        }
    size_t m = 0;
    size_t cells[MAX_MODES][2];
    for (size_t a = 1; a + 1 < nu; a++)
        for (size_t b = 1; b + 1 < nv; b++) {
            unsigned t = sm[a * nv + b];
            if (t == 0 || t * 10 < top)
                continue;
            int peak = 1;
            for (int da = -1; da <= 1 && peak; da++)
                for (int db = -1; db <= 1 && peak; db++) {
                    if (!da && !db)
                        continue;
                    size_t aa = a + (size_t)da, bb = b + (size_t)db;
                    if (aa < 1 || bb < 1 || aa + 1 >= nu || bb + 1 >= nv)
                        continue;
                    unsigned o = sm[aa * nv + bb];
                    /* ties: the first cell in scan order is the peak */
                    if (o > t || (o == t && (da < 0 || (da == 0 && db < 0))))
                        peak = 0;
                }
            if (!peak)
                continue;
            /* keep the strongest MAX_MODES */
            size_t k;
            if (m < MAX_MODES) {
                k = m++;
            } else {
                if (out[MAX_MODES - 1].count >= t)
                    continue;
                k = MAX_MODES - 1;
            }
            out[k].count = t;
            cells[k][0] = a, cells[k][1] = b;
            for (size_t z = k; z > 0 && out[z].count > out[z - 1].count; z--) {
                chroma_mode tm = out[z];
                out[z] = out[z - 1];
                out[z - 1] = tm;
                size_t c0 = cells[z][0], c1 = cells[z][1];
                cells[z][0] = cells[z - 1][0], cells[z][1] = cells[z - 1][1];
                cells[z - 1][0] = c0, cells[z - 1][1] = c1;
            }
        }
    for (size_t k = 0; k < m; k++) {
        double su = 0, sv = 0;
        size_t cnt = 0;
        for (size_t i = 0; i < n; i++)
            if (ts[i].uniform) {
                size_t a = (size_t)((ts[i].u - umin) / bu) + 1, b = (size_t)((ts[i].v - vmin) / bv) + 1;
                if (a + 1 >= cells[k][0] && a <= cells[k][0] + 1 && b + 1 >= cells[k][1] &&
                    b <= cells[k][1] + 1)
                    su += ts[i].u, sv += ts[i].v, cnt++;
            }
        out[k].u = cnt ? su / (double)cnt : umin;
        out[k].v = cnt ? sv / (double)cnt : vmin;
    }
    free(h);
    free(sm);
    return m;
}

/* With a ladder, the substrate is the peak relative to which the other
 * peaks look most like graphene: the chromaticity shift of N layers,
 * (ln((1-C_R)/(1-C_G)), ln((1-C_B)/(1-C_G))), is what vignetting and lamp
 * gradients leave unchanged. Without a ladder, the largest peak. A flake
 * covering most of the field then does not pass for the substrate. */
static size_t choose_substrate_mode(const chroma_mode *md, size_t m,
                                    const lam_substrate_options *opt)
{
    if (m <= 1 || !opt->ladder || opt->ladder_count == 0)
        return 0;
    double best = INFINITY;
    size_t bi = 0;
    for (size_t i = 0; i < m; i++) {
        double score = 0;
        for (size_t j = 0; j < m; j++) {
            if (j == i)
                continue;
            double du = md[j].u - md[i].u, dv = md[j].v - md[i].v, dmin = INFINITY;
            for (size_t e = 0; e < opt->ladder_count; e++) {
                const double *c = opt->ladder[e];
                double lu = log((1 - c[0]) / (1 - c[1])), lv = log((1 - c[2]) / (1 - c[1]));
                dmin = fmin(dmin, (du - lu) * (du - lu) + (dv - lv) * (dv - lv));
            }
            score += (double)md[j].count * dmin;
        }
        if (score < best)
            best = score, bi = i;
    }
    return bi;
}

lam_status lam_substrate_estimate(const lam_image *img, const lam_substrate_options *opt,
                                  lam_substrate *out, lam_error *err)
{
    lam_substrate_options defaults = lam_substrate_options_default();
    if (!opt)
        opt = &defaults;
    size_t T = opt->tile ? opt->tile : 32;
    while (T > 4 && (img->width / T < 6 || img->height / T < 6))
        T /= 2;
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
    tile_stats(img, T, ts, nx, ny, opt->threads ? opt->threads : 1);
    /* uniform: relative spread below 2.5x the typical (median) spread */
    size_t m = 0;
    for (size_t i = 0; i < n; i++)
        if (ts[i].uniform)
            scratch[m++] = fmax(ts[i].rsd[0], fmax(ts[i].rsd[1], ts[i].rsd[2]));
    double typical = median_of(scratch, m);
    for (size_t i = 0; i < n; i++)
        ts[i].uniform = ts[i].uniform && !ts[i].clipped &&
                        fmax(ts[i].rsd[0], fmax(ts[i].rsd[1], ts[i].rsd[2])) <= 2.5 * typical + 1e-6;
    double u0, v0;
    if (opt->has_roi) {
        double su = 0, sv = 0;
        size_t cnt = 0;
        for (size_t i = 0; i < n; i++)
            if (ts[i].uniform && ts[i].cx >= (double)opt->roi[0] &&
                ts[i].cx <= (double)(opt->roi[0] + opt->roi[2]) && ts[i].cy >= (double)opt->roi[1] &&
                ts[i].cy <= (double)(opt->roi[1] + opt->roi[3]))
                su += ts[i].u, sv += ts[i].v, cnt++;
        if (!cnt) {
            free(ts);
            free(scratch);
            return lam_error_set(err, LAM_ERANGE,
                                 "the substrate region holds no uniform tile of %zu px", T);
        }
        u0 = su / (double)cnt, v0 = sv / (double)cnt;
    } else {
        chroma_mode md[MAX_MODES];
        size_t nmodes = chromaticity_modes(ts, n, 0.004, md);
        size_t pick = choose_substrate_mode(md, nmodes, opt);
        u0 = nmodes ? md[pick].u : 0;
        v0 = nmodes ? md[pick].v : 0;
    }
    /* candidates: chromaticity within 4.5 robust sigmas of the mode, the
     * sigma measured on tiles near the mode (JPEG chroma quantisation and
     * colour noise widen it), kept within 0.004..0.02 (a monolayer on 285 nm
     * oxide moves (ln R/G, ln B/G) by ~0.1) */
    size_t near = 0;
    for (size_t i = 0; i < n; i++)
        if (ts[i].uniform && hypot(ts[i].u - u0, ts[i].v - v0) <= 0.02)
            scratch[near++] = hypot(ts[i].u - u0, ts[i].v - v0);
    double spread = near ? 1.4826 * median_of(scratch, near) : 0.004;
    double tol = fmin(0.02, fmax(0.004, 4.5 * spread));
    size_t cand = 0;
    for (size_t i = 0; i < n; i++) {
        ts[i].candidate = ts[i].uniform && hypot(ts[i].u - u0, ts[i].v - v0) <= tol;
        cand += (size_t)ts[i].candidate;
    }
    /* a few thousand tiles fix 7 coefficients well: thin out the rest */
    if (cand > 1500) {
        size_t keep_every = (cand + 1499) / 1500, seen = 0;
        cand = 0;
        for (size_t i = 0; i < n; i++)
            if (ts[i].candidate) {
                ts[i].candidate = seen++ % keep_every == 0;
                cand += (size_t)ts[i].candidate;
            }
    }
    lam_status st = LAM_OK;
    if (cand < 15) {
        st = lam_error_set(err, LAM_ERANGE,
                           "no bare substrate found (%zu uniform substrate-coloured tiles); "
                           "give one with --substrate-roi X,Y,W,H",
                           cand);
        goto done;
    }
    gsl_matrix *X = gsl_matrix_alloc(cand, LAM_SUBSTRATE_TERMS);
    gsl_vector *y = gsl_vector_alloc(cand), *coef = gsl_vector_alloc(LAM_SUBSTRATE_TERMS);
    gsl_matrix *cov = gsl_matrix_alloc(LAM_SUBSTRATE_TERMS, LAM_SUBSTRATE_TERMS);
    gsl_multifit_robust_workspace *ws =
        gsl_multifit_robust_alloc(gsl_multifit_robust_bisquare, cand, LAM_SUBSTRATE_TERMS);
    if (!X || !y || !coef || !cov || !ws) {
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate the flat-field fit");
    } else {
        size_t r = 0;
        for (size_t i = 0; i < n; i++) {
            if (!ts[i].candidate)
                continue;
            double b[LAM_SUBSTRATE_TERMS];
            basis(&s, ts[i].cx, ts[i].cy, b);
            for (int k = 0; k < LAM_SUBSTRATE_TERMS; k++)
                gsl_matrix_set(X, r, (size_t)k, b[k]);
            r++;
        }
        gsl_multifit_robust_maxiter(30, ws);
        for (int c = 0; c < 3 && !st; c++) {
            r = 0;
            for (size_t i = 0; i < n; i++)
                if (ts[i].candidate)
                    gsl_vector_set(y, r++, log(ts[i].mean[c]));
            int gs = gsl_multifit_robust(X, y, coef, cov, ws);
            if (gs && gs != GSL_EMAXITER)
                st = lam_error_gsl(err, gs, "flat-field fit");
            for (int k = 0; k < LAM_SUBSTRATE_TERMS; k++)
                s.coef[c][k] = gsl_vector_get(coef, (size_t)k);
        }
    }
    gsl_matrix_free(X);
    gsl_vector_free(y);
    gsl_vector_free(coef);
    gsl_matrix_free(cov);
    gsl_multifit_robust_free(ws);
    if (st)
        goto done;
    /* noise, correlation factor, level and fall-off over the substrate tiles */
    {
        double lev[3] = {0, 0, 0};
        size_t used = 0;
        for (int c = 0; c < 3; c++) {
            size_t k = 0;
            for (size_t i = 0; i < n; i++)
                if (ts[i].candidate)
                    scratch[k++] = ts[i].rsd[c];
            s.noise[c] = median_of(scratch, k);
        }
        double resid2 = 0, expect2 = 0;
        for (size_t i = 0; i < n; i++) {
            if (!ts[i].candidate)
                continue;
            double b[3];
            lam_substrate_eval(&s, ts[i].cx, ts[i].cy, b);
            double worst = 0;
            for (int c = 0; c < 3; c++)
                worst = fmax(worst, fabs(ts[i].mean[c] / b[c] - 1) / (s.noise[c] + 1e-9));
            if (worst > 6.0 * T) /* a flake of substrate colour: not substrate */
                continue;
            for (int c = 0; c < 3; c++) {
                lev[c] += b[c];
                double d = ts[i].mean[c] / b[c] - 1;
                resid2 += d * d;
                expect2 += s.noise[c] * s.noise[c] / (double)(T * T);
            }
            used++;
        }
        for (int c = 0; c < 3; c++)
            s.level[c] = used ? lev[c] / (double)used : NAN;
        s.kappa = expect2 > 0 ? resid2 / expect2 : 1.0;
        if (s.kappa < 1)
            s.kappa = 1;
        s.tiles_used = used;
        s.tiles_total = n;
        s.fraction = (double)used / (double)n;
        double gmin = INFINITY, gmax = 0;
        for (size_t yy = 0; yy <= 8; yy++)
            for (size_t xx = 0; xx <= 8; xx++) {
                double b[3];
                lam_substrate_eval(&s, (double)img->width * (double)xx / 8,
                                   (double)img->height * (double)yy / 8, b);
                gmin = fmin(gmin, b[1]);
                gmax = fmax(gmax, b[1]);
            }
        s.falloff = 1 - gmin / gmax;
    }
    *out = s;
done:
    free(ts);
    free(scratch);
    return st;
}

typedef struct contrast_ctx {
    lam_image *img;
    const float *grid;
    size_t gx, step;
} contrast_ctx;

static void contrast_rows(size_t begin, size_t end, size_t slice, void *vctx)
{
    (void)slice;
    const contrast_ctx *cc = vctx;
    lam_image *img = cc->img;
    size_t w = img->width, gx = cc->gx, step = cc->step;
    const float *grid = cc->grid;
    for (size_t y = begin; y < end; y++) {
        double fy = ((double)y + 0.5) / (double)step;
        size_t j = (size_t)fy;
        float ty = (float)(fy - (double)j);
        for (size_t x = 0; x < w; x++) {
            double fx = ((double)x + 0.5) / (double)step;
            size_t i = (size_t)fx;
            float tx = (float)(fx - (double)i);
            const float *g00 = &grid[(j * gx + i) * 3], *g10 = g00 + 3, *g01 = g00 + gx * 3,
                        *g11 = g01 + 3;
            for (int c = 0; c < 3; c++) {
                float inv = (1 - ty) * ((1 - tx) * g00[c] + tx * g10[c]) +
                            ty * ((1 - tx) * g01[c] + tx * g11[c]);
                float *p = &img->plane[c][y * w + x];
                *p = 1.0f - *p * inv;
            }
        }
    }
}

void lam_contrast_in_place(lam_image *img, const lam_substrate *s, size_t threads)
{
    const size_t step = 16;
    size_t w = img->width, h = img->height;
    size_t gx = w / step + 2, gy = h / step + 2;
    float *grid = malloc(gx * gy * 3 * sizeof *grid);
    if (!grid) {
        /* fall back to direct evaluation (slow but correct) */
        for (size_t y = 0; y < h; y++)
            for (size_t x = 0; x < w; x++) {
                double b[3];
                lam_substrate_eval(s, (double)x + 0.5, (double)y + 0.5, b);
                for (int c = 0; c < 3; c++) {
                    float *p = &img->plane[c][y * w + x];
                    *p = (float)(1.0 - *p / b[c]);
                }
            }
        return;
    }
    for (size_t j = 0; j < gy; j++)
        for (size_t i = 0; i < gx; i++) {
            double b[3];
            lam_substrate_eval(s, (double)(i * step), (double)(j * step), b);
            for (int c = 0; c < 3; c++)
                grid[(j * gx + i) * 3 + (size_t)c] = (float)(1.0 / b[c]);
        }
    contrast_ctx cc = {img, grid, gx, step};
    lam_parallel_for(h, threads, contrast_rows, &cc);
    free(grid);
}
