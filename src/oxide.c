/* oxide.c - the oxide audit's profiles over many images: the joint
 * likelihood of every image's regions against the oxide thickness (each
 * image's shared parameters held at its own fit), and the absolute method
 * (substrate colour against a bare-Si reference). */
#include "lamina/analyze.h"
#include "estimate_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* -2 ln L of image a's usable regions with its oxide set to d. */
static lam_status image_profile(const lam_analysis *a, lam_model *m, double d, lam_prediction *P,
                                double *out, lam_error *err)
{
    const lam_estimate *e = a->estimate;
    lam_model_point p = lam_estimate_point(e, 0);
    p.v[LAM_MP_OXIDE] = d;
    lam_status st = lam_model_eval_point(m, &p, 0, P, err);
    if (st)
        return st;
    lam_estimate_observe(e, P);
    size_t H = e->max_layers + 3;
    double lt[LAM_MODEL_MAX_LAYERS + 3], total = 0;
    for (size_t i = 0; i < a->count; i++) {
        if (!lam_analysis_region_fits_oxide(a, i))
            continue;
        lam__region_logterms(e, &a->measured[i], P, lt);
        total += lam__logsumexp(lt, H);
    }
    *out = -2 * total;
    return LAM_OK;
}

lam_status lam_oxide_joint_profile(const lam_analysis *const *an, size_t images,
                                   const lam_setup *setup, const double *grid, size_t n,
                                   double *joint, double *per_image, lam_error *err)
{
    lam_model *m = NULL;
    lam_prediction *P = malloc(sizeof *P);
    lam_status st = P ? lam_model_alloc_fast(setup, 16, &m, err)
                      : lam_error_set(err, LAM_ENOMEM, "cannot allocate a prediction");
    for (size_t g = 0; g < n && !st; g++) {
        joint[g] = 0;
        for (size_t j = 0; j < images && !st; j++) {
            double v = 0;
            if (!(st = image_profile(an[j], m, grid[g], P, &v, err))) {
                if (per_image)
                    per_image[j * n + g] = v;
                joint[g] += v;
            }
        }
    }
    lam_model_free(m);
    free(P);
    return st;
}

lam_status lam_reference_level(const char *path, const lam_load_options *load, double level[3],
                               lam_error *err)
{
    lam_image *img = NULL;
    lam_status st = lam_image_load(path, load, &img, err);
    if (st)
        return st;
    lam_substrate sub;
    lam_substrate_options so = lam_substrate_options_default();
    st = lam_substrate_estimate(img, &so, &sub, err);
    if (!st)
        lam_substrate_eval(&sub, (double)img->width / 2, (double)img->height / 2, level);
    lam_image_free(img);
    if (st)
        lam_error_set_file(err, path);
    return st;
}

lam_status lam_oxide_absolute_profile(const lam_analysis *const *an, size_t images,
                                      const double ref[3], const lam_setup *setup,
                                      double stability, const double *grid, size_t n,
                                      double *chi2, lam_error *err)
{
    lam_model *m = NULL;
    lam_prediction *P = malloc(sizeof *P);
    lam_status st = P ? lam_model_alloc_fast(setup, 1, &m, err)
                      : lam_error_set(err, LAM_ENOMEM, "cannot allocate a prediction");
    double bare[3] = {0, 0, 0};
    if (!st && !(st = lam_model_eval(m, 0.0, setup->sheet.fermi_ev, P, err)))
        for (size_t c = 0; c < P->channels; c++)
            bare[c] = P->substrate[c];
    double (*q)[3] = malloc((images ? images : 1) * sizeof *q);
    if (!st && !q)
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate");
    size_t nc = st ? 0 : P->channels;
    for (size_t j = 0; !st && j < images; j++) {
        double b[3];
        lam_substrate_eval(&an[j]->substrate, (double)an[j]->width / 2,
                           (double)an[j]->height / 2, b);
        for (size_t c = 0; c < nc; c++)
            q[j][c] = b[c] / ref[c];
    }
    for (size_t g = 0; g < n && !st; g++) {
        if ((st = lam_model_eval(m, grid[g], setup->sheet.fermi_ev, P, err)))
            break;
        chi2[g] = 0;
        for (size_t j = 0; j < images; j++)
            for (size_t c = 0; c < nc; c++) {
                double r = P->substrate[c] / bare[c], d = (q[j][c] - r) / (stability * q[j][c]);
                chi2[g] += d * d;
            }
    }
    free(q);
    free(P);
    lam_model_free(m);
    return st;
}
