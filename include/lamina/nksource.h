/*
 * lamina/nksource.h - which published n,k describe an image's flakes.
 *
 * The n,k of a transition-metal dichalcogenide differ between sources by
 * more than a contrast gain can absorb (WSe2 on 90 nm oxide in the blue:
 * monolayer contrast 0.15 with the n,k of Hsu et al. 2019, 0.40 with Gu et
 * al. 2019; their 3L contrasts have opposite signs). A layered crystal
 * (lamina/crystal.h) lists its other sources as alternates; after the joint
 * fit of an image (lamina/estimate.h) each alternate's model is fitted to
 * the same regions with the same priors, and the source whose fit has the
 * higher log posterior (the image's share plus the shared parameters'
 * priors) is kept. Both fits carry the Gaussian normalisation with their
 * own model floor, so a source that explains the regions only with a
 * large floor loses.
 *
 * Ownership: the chosen estimate and model replace the caller's (the
 * others are freed). Errors: those of the fits.
 */
#ifndef LAMINA_NKSOURCE_H
#define LAMINA_NKSOURCE_H

#include "lamina/error.h"
#include "lamina/estimate.h"
#include "lamina/model.h"
#include "lamina/setup.h"

struct lam_shared_prior;

/* The score the sources are compared by: image 0's log posterior share plus
 * the log priors of the fitted shared parameters. */
double lam_nksource_score(const lam_estimate *e);

/* Fit every alternate source of the setup's crystal to the regions of
 * *estimate (image 0: nominal oxide, its prior sd, whether it is fitted,
 * the floor priors and regions are copied) and keep the best: *estimate
 * and *model (a fast model of LAM_MODEL_MAX_LAYERS layers) may be
 * replaced; 'description' (may be NULL, n bytes) receives the flake model
 * kept, in words ("MoS2/Song, 0.615 nm per layer: ..."). A setup whose
 * crystal has no alternates returns at once and leaves it alone. */
lam_status lam_nksource_select(const lam_setup *s, const struct lam_shared_prior *prior,
                               lam_estimate **estimate, lam_model **model, char *description,
                               size_t n, lam_error *err);

#endif
