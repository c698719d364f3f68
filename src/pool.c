/* pool.c - a joint fit of the shared parameters over many images (see
 * lamina/pool.h). */
#include "lamina/pool.h"
#include "lamina/estimate.h"
#include "lamina/model.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

typedef struct pooled_image {
    lam_est_region *regions;
    size_t count, informing;
    int two_readings;               /* its own analysis fit two readings */
    double nominal_oxide;
    double scatter[LAM_MAX_CHANNELS];
} pooled_image;

struct lam_pool {
    lam_setup setup;                /* shallow copy: the caller's setup outlives the pool */
    lam_estimate_options eopt;
    size_t channels, kept, first;   /* ring buffer of LAM_POOL_MAX images */
    pooled_image image[LAM_POOL_MAX];
    lam_model *model;               /* LAM_MODEL_MAX_LAYERS, made on the first fit */
    int again;                      /* the kept images will be analysed again */
};

void lam_pool_analyse_again(lam_pool *p, int on)
{
    p->again = on;
}

lam_status lam_pool_alloc(const lam_setup *setup, const lam_analysis_options *opt,
                          lam_pool **out, lam_error *err)
{
    lam_pool *p = calloc(1, sizeof *p);
    if (!p)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a pool");
    p->setup = *setup;
    p->eopt = opt->estimate;
    p->eopt.max_layers = opt->max_layers;
    /* the analysis hands its threads to its own fit; the pool's fit gets
     * them here (the result does not depend on the count) */
    p->eopt.threads = opt->threads ? opt->threads : 1;
    p->channels = setup->camera.channels;
    *out = p;
    return LAM_OK;
}

void lam_pool_free(lam_pool *p)
{
    if (!p)
        return;
    for (size_t i = 0; i < LAM_POOL_MAX; i++)
        free(p->image[i].regions);
    lam_model_free(p->model);
    free(p);
}

lam_status lam_pool_add(lam_pool *p, const lam_analysis *a, lam_error *err)
{
    size_t slot = (p->first + p->kept) % LAM_POOL_MAX;
    if (p->kept == LAM_POOL_MAX) { /* drop the oldest */
        slot = p->first;
        p->first = (p->first + 1) % LAM_POOL_MAX;
        p->kept--;
    }
    pooled_image *im = &p->image[slot];
    free(im->regions);
    memset(im, 0, sizeof *im);
    size_t n = a->count ? a->count : 1;
    if (!(im->regions = malloc(n * sizeof *im->regions)))
        return lam_error_set(err, LAM_ENOMEM, "cannot keep %zu regions for the pool", a->count);
    memcpy(im->regions, a->measured, a->count * sizeof *im->regions);
    im->count = a->count;
    for (size_t i = 0; i < a->count; i++)
        im->informing += (size_t)(a->measured[i].use != 0);
    im->nominal_oxide = a->oxide.nominal >= 0 ? a->oxide.nominal : 0;
    im->two_readings = lam_warnings_find(&a->warnings, "two-readings") != NULL;
    for (size_t c = 0; c < p->channels && c < LAM_MAX_CHANNELS; c++)
        im->scatter[c] = a->substrate.tile_scatter[c];
    p->kept++;
    return LAM_OK;
}

size_t lam_pool_images(const lam_pool *p)
{
    return p->kept;
}

size_t lam_pool_informative(const lam_pool *p)
{
    size_t n = 0;
    for (size_t i = 0; i < p->kept; i++)
        n += p->image[(p->first + i) % LAM_POOL_MAX].informing > 0;
    return n;
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* The substrate's low-frequency scatter sets the absolute floor's prior:
 * the median over the images, so one flat-field failure does not widen
 * every image's floor. */
static void floor_priors(const lam_pool *p, lam_estimate *e)
{
    double v[LAM_POOL_MAX];
    for (size_t c = 0; c < p->channels; c++) {
        size_t n = 0;
        for (size_t i = 0; i < p->kept; i++) {
            const pooled_image *im = &p->image[(p->first + i) % LAM_POOL_MAX];
            if (im->informing)
                v[n++] = im->scatter[c];
        }
        qsort(v, n, sizeof *v, cmp_double);
        if (n)
            lam_estimate_set_floor_prior(e, c, n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]));
    }
}

/* Each image analysed again with the pooled posterior as its prior would
 * count its own regions twice. With n images informing the fit about
 * equally, the posterior without one of them has (n - 1) / n of the data's
 * precision: the standard deviations widen by sqrt(n / (n - 1)). (A batch's
 * images outside the sample get the same, slightly cautious, prior.) */
static void leave_one_out(lam_shared_prior *out, size_t n)
{
    double f = sqrt((double)n / (double)(n - 1));
    for (int k = 0; k < LAM_NU_COUNT; k++)
        out->sd[k] *= f;
}

lam_status lam_pool_fit(lam_pool *p, lam_shared_prior *out, lam_error *err)
{
    memset(out, 0, sizeof *out);
    if (lam_pool_informative(p) < (p->again ? 2u : 1u))
        return LAM_OK; /* one image's own posterior is no prior for it */
    lam_status st = LAM_OK;
    if (!p->model)
        st = lam_model_alloc_fast(&p->setup, LAM_MODEL_MAX_LAYERS, &p->model, err);
    lam_estimate *e = NULL;
    if (!st)
        st = lam_estimate_alloc(&p->setup, lam_model_channels(p->model), &p->eopt, &e, err);
    for (size_t i = 0; i < p->kept && !st; i++) {
        const pooled_image *im = &p->image[(p->first + i) % LAM_POOL_MAX];
        if (im->informing)
            st = lam_estimate_add_image(e, im->regions, im->count, im->nominal_oxide,
                                        p->setup.sigma.oxide_nm, NULL, err);
    }
    if (!st) {
        floor_priors(p, e);
        st = lam_estimate_fit(e, p->model, p->model, err);
    }
    if (!st)
        lam_shared_prior_from(e, out);
    for (size_t i = 0; i < p->kept && !st; i++) {
        const pooled_image *im = &p->image[(p->first + i) % LAM_POOL_MAX];
        out->two_readings += (size_t)(im->informing && im->two_readings);
    }
    lam_estimate_free(e);
    if (!st && p->again)
        leave_one_out(out, lam_pool_informative(p));
    return st;
}

size_t lam_pool_sample(size_t total, size_t n, size_t *idx)
{
    if (total <= n) {
        for (size_t i = 0; i < total; i++)
            idx[i] = i;
        return total;
    }
    if (n == 1) {
        idx[0] = total / 2;
        return 1;
    }
    for (size_t i = 0; i < n; i++) /* exact integer spacing, first and last included */
        idx[i] = i * (total - 1) / (n - 1);
    return n;
}
