/*
 * lamina/pool.h - the shared parameters learned from many images at once.
 *
 * Graphene's visible response, the camera's channels, the illumination NA
 * and the flake/substrate contrast offsets are the same for every image of
 * one microscope and one kind of flake. One image's few flakes pin them
 * down poorly; a chip's worth pins them well. A pool keeps the measured
 * regions of analysed images (each image with its own oxide, free about the
 * nominal) and fits them jointly; the posterior of the shared parameters is
 * then the prior of each image's own analysis
 * (lam_analysis_options.shared_prior), which still fits its own oxide and
 * decides its own regions.
 *
 * A batch: analyse up to LAM_POOL_SAMPLE images spread over the run, add
 * each, fit, then analyse every image with the pooled prior. At the
 * microscope: add each new image and fit again; the next image uses the
 * result. Every image added must come from the setup the pool was made
 * with (the caller groups images by setup).
 *
 * Ownership: lam_pool_alloc / lam_pool_free; lam_pool_add copies what it
 * keeps. Errors: LAM_ENOMEM and the model's (lamina/model.h).
 */
#ifndef LAMINA_POOL_H
#define LAMINA_POOL_H

#include <stddef.h>
#include "lamina/analyze.h"
#include "lamina/error.h"
#include "lamina/setup.h"

/* Images a batch samples for the pooled fit, and the most a pool keeps
 * (beyond it the oldest image is dropped: at the microscope the pool
 * follows the session). */
#define LAM_POOL_SAMPLE 12
#define LAM_POOL_MAX 24

typedef struct lam_pool lam_pool;

/* A pool for images analysed with this setup and these options (the
 * estimate options and max_layers are used; both are copied). */
lam_status lam_pool_alloc(const lam_setup *setup, const lam_analysis_options *opt,
                          lam_pool **out, lam_error *err);

/* Release; p may be NULL. */
void lam_pool_free(lam_pool *p);

/* Keep an analysed image's regions, nominal oxide and substrate scatter.
 * An image with no region that informs the fit is counted but adds
 * nothing. */
lam_status lam_pool_add(lam_pool *p, const lam_analysis *a, lam_error *err);

/* Images kept, and of them those with regions that inform the fit. */
size_t lam_pool_images(const lam_pool *p);
size_t lam_pool_informative(const lam_pool *p);

/* Will the kept images be analysed again with the pooled prior (a
 * batch's sample)? Then lam_pool_fit leaves each one's share out. Off by
 * default (at the microscope the next image is a new one). */
void lam_pool_analyse_again(lam_pool *p, int on);

/* Fit the kept images jointly and return the shared parameters' posterior
 * as a prior (out->set = 0 when no image informs the fit: then analyse with
 * the setup's own priors). With lam_pool_analyse_again on, its standard
 * deviations are widened by sqrt(n / (n - 1)) for n informing images, so
 * that an image analysed again does not count its own regions twice, and
 * fewer than two informing images give no prior. */
lam_status lam_pool_fit(lam_pool *p, lam_shared_prior *out, lam_error *err);

/* Indices of n evenly spread samples of 'total' items (the first, the last
 * and equal steps between; all of them when total <= n): the images a
 * batch pools. Returns how many were written to idx (<= n). */
size_t lam_pool_sample(size_t total, size_t n, size_t *idx);

#endif
