/* calibrate.c - fitting camera channels, illumination NA and oxide to
 * regions of known (or best-fitting) layer count with GSL's
 * Levenberg-Marquardt. */
#include "lamina/calibrate.h"
#include "lamina/analyze.h"
#include "lamina/labels.h"
#include "lamina/model.h"
#include "lamina/segment.h"
#include "lamina/substrate.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <gsl/gsl_blas.h>
#include <gsl/gsl_multifit_nlinear.h>

#define CALIB_FLOOR 0.003
#define CALIB_K 12

void lam_calib_set_init(lam_calib_set *s)
{
    memset(s, 0, sizeof *s);
}

void lam_calib_set_clear(lam_calib_set *s)
{
    free(s->samples);
    memset(s, 0, sizeof *s);
}

static lam_status push(lam_calib_set *set, const lam_calib_sample *x, lam_error *err)
{
    if (set->count == set->cap) {
        size_t nc = set->cap ? 2 * set->cap : 64;
        lam_calib_sample *n = realloc(set->samples, nc * sizeof *n);
        if (!n)
            return lam_error_set(err, LAM_ENOMEM, "cannot grow the calibration samples");
        set->samples = n;
        set->cap = nc;
    }
    set->samples[set->count++] = *x;
    return LAM_OK;
}

lam_status lam_calib_measure_labels(lam_calib_set *set, const char *path, const uint8_t *labels,
                                    size_t w, size_t h, const lam_load_options *load,
                                    lam_error *err)
{
    if (set->images >= LAM_CALIB_MAX_IMAGES)
        return lam_error_set(err, LAM_ETOOBIG, "at most %d calibration images", LAM_CALIB_MAX_IMAGES);
    lam_image *img = NULL;
    lam_status st = lam_image_load(path, load, &img, err);
    if (st)
        return st;
    lam_segmentation *seg = NULL;
    lam_substrate sub;
    if (img->width != w || img->height != h) {
        st = lam_error_set(err, LAM_ESIZE, "labels are %zux%zu, the image %zux%zu", w, h,
                           img->width, img->height);
        goto done;
    }
    lam_substrate_options so = lam_substrate_options_default();
    if ((st = lam_substrate_estimate(img, &so, &sub, err)))
        goto done;
    lam_contrast_in_place(img, &sub, 1);
    if ((st = lam_segmentation_alloc(w, h, &seg, err)))
        goto done;
    for (size_t k = 0; k < w * h; k++)
        seg->cls[k] = labels[k] >= 1 && labels[k] <= 40 ? labels[k] : (labels[k] ? LAM_CLASS_NONE : 0);
    lam_segment_options sgo = lam_segment_options_default();
    if ((st = lam_segment_regions(img, &sgo, seg, err)))
        goto done;
    size_t added = 0;
    for (size_t i = 0; i < seg->count && !st; i++) {
        const lam_region_stats *r = &seg->regions[i];
        if (r->interior < 50)
            continue;
        lam_calib_sample x;
        x.image = set->images;
        x.layers = r->cls;
        x.n = (double)r->interior;
        x.kappa = sub.kappa;
        for (int c = 0; c < 3; c++) {
            x.mean[c] = r->sum[c] / x.n;
            x.noise[c] = sub.noise[c];
        }
        st = push(set, &x, err);
        added++;
    }
    if (!st && !added)
        st = lam_error_set(err, LAM_ERANGE, "no labelled region of 50 interior pixels or more");
    if (!st)
        set->images++;
done:
    lam_segmentation_free(seg);
    lam_image_free(img);
    if (st)
        lam_error_set_file(err, path);
    return st;
}

lam_status lam_calib_measure_self(lam_calib_set *set, const char *path, const lam_setup *setup,
                                  lam_error *err)
{
    if (set->images >= LAM_CALIB_MAX_IMAGES)
        return lam_error_set(err, LAM_ETOOBIG, "at most %d calibration images", LAM_CALIB_MAX_IMAGES);
    lam_analysis_options opt = lam_analysis_options_default();
    opt.max_layers = 8;
    opt.fit_fermi = 0;
    lam_analysis *a = NULL;
    lam_status st = lam_analyze(path, setup, &opt, &a, err);
    if (st)
        return st;
    size_t added = 0;
    for (size_t i = 0; i < a->count && !st; i++) {
        const lam_region_stats *r = &a->seg->regions[i];
        const lam_region_result *res = &a->results[i];
        if (r->interior < 200 || (res->flags & LAM_FLAG_SATURATED) || res->substrate_like)
            continue;
        lam_calib_sample x;
        x.image = set->images;
        x.layers = 0;
        x.n = (double)r->interior;
        x.kappa = a->substrate.kappa;
        for (int c = 0; c < 3; c++) {
            x.mean[c] = r->sum[c] / x.n;
            x.noise[c] = a->substrate.noise[c];
        }
        st = push(set, &x, err);
        added++;
    }
    lam_analysis_free(a);
    if (!st && !added)
        st = lam_error_set(err, LAM_ERANGE, "no region large enough for self-calibration");
    if (!st)
        set->images++;
    if (st)
        lam_error_set_file(err, path);
    return st;
}

typedef struct fit_ctx {
    const lam_setup *start;
    const lam_calib_set *set;
    int self;
    size_t K;
    lam_status st;
    lam_error *err;
    const double *known;             /* known oxide per image, NAN = fitted */
    double known_na;                 /* NAN = fitted */
    size_t slot[LAM_CALIB_MAX_IMAGES]; /* parameter index of a fitted oxide */
} fit_ctx;

static double oxide_of(const fit_ctx *f, const gsl_vector *x, size_t im)
{
    if (f->known && isfinite(f->known[im]))
        return f->known[im];
    return gsl_vector_get(x, f->slot[im]);
}

static double clampd(double v, double lo, double hi)
{
    return v < lo ? lo : (v > hi ? hi : v);
}

/* Parameters live in unbounded coordinates so that the fit never sticks
 * at a bound: FWHM = 10 + q^2 nm, NA = 0.95 sin^2 q; centres as they are. */
static double fwhm_of(double q) { return 10 + q * q; }
static double na_of(double q) { return 0.95 * sin(q) * sin(q); }

static void apply(const fit_ctx *f, const gsl_vector *x, lam_setup *s)
{
    *s = *f->start;
    s->camera.kind = LAM_CAMERA_GAUSSIAN;
    s->camera.channels = 3;
    for (int c = 0; c < 3; c++) {
        s->camera.centre_nm[c] = clampd(gsl_vector_get(x, (size_t)c), 380, 780);
        s->camera.fwhm_nm[c] = fwhm_of(gsl_vector_get(x, 3 + (size_t)c));
    }
    s->illumination_na = isfinite(f->known_na) ? f->known_na : na_of(gsl_vector_get(x, 6));
}

static int residuals(const gsl_vector *x, void *vp, gsl_vector *out)
{
    fit_ctx *f = vp;
    lam_setup s;
    apply(f, x, &s);
    lam_model *m = NULL;
    lam_prediction *P = malloc(f->set->images * sizeof *P);
    lam_status st = P ? lam_model_alloc_fast(&s, f->K, &m, f->err)
                      : lam_error_set(f->err, LAM_ENOMEM, "cannot allocate predictions");
    for (size_t im = 0; im < f->set->images && !st; im++)
        st = lam_model_eval(m, clampd(oxide_of(f, x, im), 0, 2000), s.sheet.fermi_ev, &P[im],
                            f->err);
    if (st) {
        f->st = st;
        lam_model_free(m);
        free(P);
        return GSL_EBADFUNC;
    }
    for (size_t i = 0; i < f->set->count; i++) {
        const lam_calib_sample *sm = &f->set->samples[i];
        double sig[3];
        for (int c = 0; c < 3; c++)
            sig[c] = sqrt(sm->kappa * sm->noise[c] * sm->noise[c] / sm->n + CALIB_FLOOR * CALIB_FLOOR);
        size_t N = (size_t)sm->layers;
        if (f->self || N == 0 || N > f->K) {
            /* the layer count that fits best under the current parameters */
            double best = INFINITY;
            for (size_t k = 1; k <= f->K; k++) {
                double q = 0;
                for (int c = 0; c < 3; c++) {
                    double d = (sm->mean[c] - P[sm->image].contrast[k][c]) / sig[c];
                    q += d * d;
                }
                if (q < best)
                    best = q, N = k;
            }
        }
        for (int c = 0; c < 3; c++)
            gsl_vector_set(out, i * 3 + (size_t)c,
                           (sm->mean[c] - P[sm->image].contrast[N][c]) / sig[c]);
    }
    lam_model_free(m);
    free(P);
    return GSL_SUCCESS;
}

lam_status lam_calibrate(const lam_setup *start, const lam_calib_set *set, int self,
                         const double *known_oxide, double known_na, lam_calib_result *out,
                         lam_error *err)
{
    fit_ctx f = {start, set, self, CALIB_K, LAM_OK, err, known_oxide, known_na, {0}};
    size_t p = 7;
    for (size_t im = 0; im < set->images; im++)
        if (!(known_oxide && isfinite(known_oxide[im])))
            f.slot[im] = p++;
    size_t n = 3 * set->count;
    if (set->images == 0 || n <= p)
        return lam_error_set(err, LAM_ERANGE,
                             "%zu samples give %zu residuals for %zu parameters: add labelled "
                             "regions or images (several layer counts and oxides)",
                             set->count, n, p);
    lam_setup s0 = *start;
    if (s0.camera.kind != LAM_CAMERA_GAUSSIAN) {
        /* start from the generic colour camera */
        lam_setup d;
        lam_setup_default(&d);
        s0.camera = d.camera;
    }
    gsl_vector *x = gsl_vector_alloc(p), *f0 = gsl_vector_alloc(n);
    gsl_matrix *cov = gsl_matrix_alloc(p, p);
    if (!x || !f0 || !cov) {
        gsl_vector_free(x);
        gsl_vector_free(f0);
        gsl_matrix_free(cov);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the fit");
    }
    for (int c = 0; c < 3; c++) {
        gsl_vector_set(x, (size_t)c, s0.camera.centre_nm[c]);
        gsl_vector_set(x, 3 + (size_t)c, sqrt(fmax(1, s0.camera.fwhm_nm[c] - 10)));
    }
    gsl_vector_set(x, 6, asin(sqrt(fmin(0.94, fmax(0.01, s0.illumination_na)) / 0.95)));
    f.start = &s0;
    lam_status st = LAM_OK;
    /* starting oxide of each image: the best of a 5 nm scan over 20-400 nm
     * with the starting camera (the nominal value may be for another chip) */
    {
        lam_model *m = NULL;
        lam_prediction *P = malloc(sizeof *P);
        double best[LAM_CALIB_MAX_IMAGES], bd[LAM_CALIB_MAX_IMAGES];
        for (size_t im = 0; im < set->images; im++)
            best[im] = INFINITY, bd[im] = lam_setup_oxide(&s0) > 0 ? lam_setup_oxide(&s0) : 285;
        st = P ? lam_model_alloc_fast(&s0, CALIB_K, &m, err)
               : lam_error_set(err, LAM_ENOMEM, "cannot allocate a prediction");
        for (double d = 20; d <= 400 && !st; d += 5) {
            if ((st = lam_model_eval(m, d, s0.sheet.fermi_ev, P, err)))
                break;
            double tot[LAM_CALIB_MAX_IMAGES] = {0};
            for (size_t i = 0; i < set->count; i++) {
                const lam_calib_sample *sm = &set->samples[i];
                double q = INFINITY;
                for (size_t k = 1; k <= CALIB_K; k++) {
                    if (!self && sm->layers > 0 && k != (size_t)sm->layers)
                        continue;
                    double a = 0;
                    for (int c = 0; c < 3; c++) {
                        double t = sm->mean[c] - P->contrast[k][c];
                        a += t * t;
                    }
                    q = fmin(q, a);
                }
                tot[sm->image] += q;
            }
            for (size_t im = 0; im < set->images; im++)
                if (tot[im] < best[im])
                    best[im] = tot[im], bd[im] = d;
        }
        lam_model_free(m);
        free(P);
        for (size_t im = 0; im < set->images; im++)
            if (!(known_oxide && isfinite(known_oxide[im])))
                gsl_vector_set(x, f.slot[im], bd[im]);
    }
    double chi0 = 0;
    if (residuals(x, &f, f0) != GSL_SUCCESS)
        st = f.st ? f.st : lam_error_set(err, LAM_EINTERNAL, "model evaluation failed");
    if (!st)
        gsl_blas_ddot(f0, f0, &chi0);
    gsl_multifit_nlinear_fdf fdf;
    memset(&fdf, 0, sizeof fdf);
    fdf.f = residuals;
    fdf.n = n;
    fdf.p = p;
    fdf.params = &f;
    gsl_multifit_nlinear_parameters prm = gsl_multifit_nlinear_default_parameters();
    prm.h_df = 1e-4;
    gsl_multifit_nlinear_workspace *w =
        st ? NULL : gsl_multifit_nlinear_alloc(gsl_multifit_nlinear_trust, &prm, n, p);
    int info = 0;
    if (!st && !w)
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate the fit workspace");
    if (!st) {
        gsl_multifit_nlinear_init(x, &fdf, w);
        int gs = gsl_multifit_nlinear_driver(60, 1e-7, 1e-7, 1e-8, NULL, NULL, &info, w);
        if (f.st)
            st = f.st;
        else if (gs && gs != GSL_EMAXITER && gs != GSL_ENOPROG)
            st = lam_error_gsl(err, gs, "calibration fit");
    }
    if (!st) {
        const gsl_vector *xf = gsl_multifit_nlinear_position(w);
        const gsl_vector *rf = gsl_multifit_nlinear_residual(w);
        double chi1;
        gsl_blas_ddot(rf, rf, &chi1);
        gsl_matrix *J = gsl_multifit_nlinear_jac(w);
        gsl_multifit_nlinear_covar(J, 1e-10, cov);
        double dof = (double)(n - p), scale = chi1 / dof > 1 ? chi1 / dof : 1;
        memset(out, 0, sizeof *out);
        apply(&f, xf, &out->setup);
        for (int c = 0; c < 3; c++) {
            out->centre[c] = out->setup.camera.centre_nm[c];
            out->fwhm[c] = out->setup.camera.fwhm_nm[c];
            out->centre_sigma[c] = sqrt(scale * gsl_matrix_get(cov, (size_t)c, (size_t)c));
            /* through the coordinate change: d FWHM / dq = 2q */
            double q = gsl_vector_get(xf, 3 + (size_t)c);
            out->fwhm_sigma[c] = fabs(2 * q) * sqrt(scale * gsl_matrix_get(cov, 3 + (size_t)c, 3 + (size_t)c));
        }
        out->na = out->setup.illumination_na;
        double qn = gsl_vector_get(xf, 6);
        out->na_sigma = isfinite(known_na) ? 0
                        : fabs(0.95 * 2 * sin(qn) * cos(qn)) * sqrt(scale * gsl_matrix_get(cov, 6, 6));
        for (size_t im = 0; im < set->images; im++) {
            int fixed = known_oxide && isfinite(known_oxide[im]);
            out->oxide[im] = oxide_of(&f, xf, im);
            out->oxide_sigma[im] = fixed ? 0 : sqrt(scale * gsl_matrix_get(cov, f.slot[im], f.slot[im]));
            out->oxide_known[im] = fixed;
        }
        if (set->images >= 1)
            lam_setup_set_oxide(&out->setup, out->oxide[0], NULL);
        out->chi2_before = chi0;
        out->chi2_after = chi1;
        out->rms_before = sqrt(chi0 / (double)n);
        out->rms_after = sqrt(chi1 / (double)n);
        out->samples = set->count;
        out->images = set->images;
        out->iterations = gsl_multifit_nlinear_niter(w);
        double cmax = 0, cmin = INFINITY;
        for (size_t k = 0; k < p; k++) {
            double v = gsl_matrix_get(cov, k, k);
            cmax = fmax(cmax, v), cmin = fmin(cmin, v);
        }
        out->condition = cmin > 0 ? sqrt(cmax / cmin) : INFINITY;
    }
    gsl_multifit_nlinear_free(w);
    gsl_vector_free(x);
    gsl_vector_free(f0);
    gsl_matrix_free(cov);
    return st;
}

/* A point label takes the whole region of the image's segmentation that
 * contains it; the analysis is made once, for the first point. */
static lam_status label_point(const lam_label *L, size_t idx, const char *image_path,
                              const lam_setup *setup, size_t w, size_t h, lam_analysis **a,
                              uint8_t *map, lam_error *err)
{
    double x = L->x[0], y = L->y[0];
    if (!(x >= 0 && y >= 0 && x < (double)w && y < (double)h))
        return lam_error_set(err, LAM_ERANGE, "labels[%zu].point lies outside the image", idx);
    if (!*a) {
        lam_analysis_options opt = lam_analysis_options_default();
        opt.fit_fermi = 0;
        lam_status st = lam_analyze(image_path, setup, &opt, a, err);
        if (st)
            return st;
    }
    uint32_t id = (*a)->seg->label[(size_t)y * w + (size_t)x];
    if (!id)
        return lam_error_set(err, LAM_ERANGE,
                             "labels[%zu].point (%g, %g) is on no region "
                             "(an edge or the substrate)",
                             idx, x, y);
    for (size_t k = 0; k < w * h; k++)
        if ((*a)->seg->label[k] == id)
            map[k] = (uint8_t)L->layers;
    return LAM_OK;
}

lam_status lam_calib_labels_from_json(const char *json_path, const char *image_path,
                                      const lam_setup *setup, size_t w, size_t h, uint8_t *map,
                                      lam_error *err)
{
    lam_labels labels;
    lam_status st = lam_labels_load(json_path, &labels, err);
    if (st)
        return st;
    memset(map, 0, w * h);
    lam_analysis *a = NULL;
    for (size_t i = 0; i < labels.count && !st; i++) {
        const lam_label *L = &labels.items[i];
        if (L->kind == LAM_LABEL_POLYGON)
            lam_label_fill(L, map, w, h);
        else
            st = label_point(L, i, image_path, setup, w, h, &a, map, err);
    }
    lam_analysis_free(a);
    lam_labels_clear(&labels);
    if (st)
        lam_error_set_file(err, json_path);
    return st;
}
