/* nksource.c - the published n,k source of a layered crystal that best
 * explains an image's regions (lamina/nksource.h). */
#include "lamina/nksource.h"
#include "lamina/analyze.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

double lam_nksource_score(const lam_estimate *e)
{
    double s = e->images ? e->image[0].log_posterior : 0;
    for (int k = 0; k < LAM_NU_COUNT; k++) {
        const lam_nuisance *n = &e->shared[k];
        if (n->fitted && n->prior_sd > 0) {
            double z = (n->value - n->prior_mean) / n->prior_sd;
            s -= 0.5 * z * z;
        }
    }
    return s;
}

/* An estimate for setup s set up like 'like' (image 0's oxide prior and
 * whether it is fitted, floor priors, regions), fitted with 'model'. */
static lam_status fit_like(const lam_setup *s, const struct lam_shared_prior *prior,
                           const lam_estimate *like, lam_model *model, lam_estimate **out,
                           lam_error *err)
{
    const lam_est_image *im = &like->image[0];
    lam_estimate *e = NULL;
    lam_status st = lam_estimate_alloc(s, like->channels, &like->opt, &e, err);
    if (!st) {
        lam_shared_prior_apply(prior, e);
        st = lam_estimate_add_image(e, im->regions, im->count, im->oxide.prior_mean,
                                    im->oxide.prior_sd, NULL, err);
    }
    if (!st) {
        e->image[0].oxide.fitted = im->oxide.fitted;
        for (size_t c = 0; c < like->channels; c++)
            lam_estimate_set_floor_prior(e, c, like->floor_abs_prior[c]);
        st = lam_estimate_fit(e, model, model, err);
    }
    if (st) {
        lam_estimate_free(e);
        return st;
    }
    *out = e;
    return LAM_OK;
}

/* One alternate: its setup (a shallow copy: crystals' n,k are built in),
 * model and fit; kept when it scores higher. */
static lam_status try_source(const lam_setup *s, const char *name,
                             const struct lam_shared_prior *prior, lam_estimate **estimate,
                             lam_model **model, int *kept, lam_error *err)
{
    lam_setup alt = *s;
    alt.flake_layer_films = 0; /* the copy must not clear the original's films */
    lam_status st = lam_setup_set_material(&alt, name, err);
    lam_model *m = NULL;
    lam_estimate *e = NULL;
    if (!st)
        st = lam_model_alloc_fast(&alt, LAM_MODEL_MAX_LAYERS, &m, err);
    if (!st)
        st = fit_like(&alt, prior, *estimate, m, &e, err);
    *kept = 0;
    if (!st && lam_nksource_score(e) > lam_nksource_score(*estimate)) {
        lam_estimate_free(*estimate);
        lam_model_free(*model);
        *estimate = e, *model = m;
        e = NULL, m = NULL;
        *kept = 1;
    }
    lam_estimate_free(e);
    lam_model_free(m);
    return st;
}

lam_status lam_nksource_select(const lam_setup *s, const struct lam_shared_prior *prior,
                               lam_estimate **estimate, lam_model **model, char *description,
                               size_t n, lam_error *err)
{
    const lam_crystal *c = s->crystal, *best = c;
    if (!c || c->kind != LAM_CRYSTAL_LAYERED || !c->alternates[0] || !(*estimate)->images)
        return LAM_OK;
    lam_status st = LAM_OK;
    for (size_t j = 0; j < LAM_CRYSTAL_ALTERNATES && c->alternates[j] && !st; j++) {
        int kept;
        st = try_source(s, c->alternates[j], prior, estimate, model, &kept, err);
        if (!st && kept)
            best = lam_crystal_find(c->alternates[j]);
    }
    if (!st && description && n && best)
        snprintf(description, n, "%s, %.3f nm per layer: %s (n,k source kept by the fit of "
                                 "the image's regions)",
                 best->name, best->layer_nm, best->note);
    return st;
}
