/* analyze_internal.h - pieces of the per-image pipeline shared between
 * analyze.c (the stages), analyze_oxide.c (the fit and its oxide
 * searches), analyze_checks.c (the checks) and the other analyze_*.c.
 * Not public. */
#ifndef LAMINA_ANALYZE_INTERNAL_H
#define LAMINA_ANALYZE_INTERNAL_H

#include "lamina/analyze.h"
#include "lamina/contrast.h"
#include "lamina/estimate.h"
#include "lamina/image.h"
#include "lamina/model.h"
#include "lamina/setup.h"

/* One image's analysis while it runs: what its stages (analyze.c) share. */
typedef struct lam__run {
    lam_analysis *a;
    const lam_setup *setup;
    const lam_analysis_options *opt;
    lam_image *img;          /* no planes once the contrast is made */
    lam_contrast_map contrast;
    lam_model *model;        /* coarse, 40 layers: fits, ladders, posteriors */
    size_t threads;
    double t0;
    lam_grid_ladders *ladders; /* during lam__fit_searched: the wide search's grid
                                * ladders, lent to its fits (NULL: none) */
} lam__run;

/* An estimate for this image with the oxide prior centred on centre_nm
 * (NAN: the nominal oxide), the search half-width half_nm (NAN: the
 * options') and the prior's sd oxide_sd (NAN: the setup's), the pooled
 * prior applied. */
lam_status lam__new_estimate(lam__run *r, double centre_nm, double half_nm, double oxide_sd,
                             lam_estimate **out, lam_error *err);

/* How far the wide oxide search looks each side of the nominal oxide, with
 * what prior sd, and by how much (in log-likelihood: e^10 to one) its
 * result must beat the nominal one to replace it (analyze_oxide.c; hBN's
 * profile weighs a rival order the same way, thickness_stage.c). */
#define LAM__WIDE_HALF_NM 200.0
#define LAM__WIDE_PRIOR_SD_NM 100.0
#define LAM__WIDE_MARGIN 10.0

/* What the oxide's searches after the nominal fit did (analyze_oxide.c). */
typedef struct lam__oxide_search {
    int off_nominal;  /* the wide search's fit was kept, beyond the nominal search */
    int colour_start; /* the fit started at the substrate colour's oxide was kept */
    double rival_nm;  /* a fit beyond the nominal search, not kept but not markedly
                       * worse (the image's oxide is ambiguous); NAN when none */
} lam__oxide_search;

/* The joint fit of r->a->estimate with r->model, then the searches that
 * check its oxide (analyze_oxide.c: the colour's start when the fit is
 * doubtful, the wide search when it is doubtful or the microscope is not
 * given), which may replace r->a->estimate. The regions and their floor
 * prior must be set. */
lam_status lam__fit_searched(lam__run *r, lam__oxide_search *out, lam_error *err);

/* The image's channels against the setup's camera: a grey image (one
 * plane, or R = G = B everywhere) needs a one-channel camera and a colour
 * image a colour camera; LAM_EINVAL says which and what to do. */
lam_status lam__check_channels(const lam_image *img, const lam_setup *s, lam_error *err);

/* Load the image to analyse (lo as given; the 8-bit codes are kept for
 * the picture): a JPEG from its bytes read whole, returned in *bytes and
 * *size for lam_analysis_display (the 8-bit codes are not kept); any other
 * file as lam_image_load with keep_display8, *bytes NULL. Errors name the
 * file. */
lam_status lam__load_input(const char *path, const lam_load_options *lo, lam_image **img,
                           uint8_t **bytes, size_t *size, lam_error *err);

/* After the segmentation changed (made, or flakes joined): a->count from
 * it and every region's measurement in a->measured (room for that many).
 * The regions' shares of the transition pixels (the areas the size flags
 * use) are lam_segment_edge_areas', taken after a join. */
void lam__measure_regions(lam_analysis *a);

/* After the flakes' fit (a->estimate): when the setup records the
 * substrate's colour at a known oxide and the image has three channels,
 * read the oxide from the substrate's colour (a->substrate.level) into
 * a->oxide.colour, 'used' when it fits the recorded colour and agrees
 * with the flakes' (within 3 sd of the two combined); otherwise warn
 * "substrate-colour". The fit itself is left as it is: its oxide is the
 * one that describes the flakes with the rest of the model (with a camera
 * known only roughly, pressing it towards the colour's made layer counts
 * worse on the accuracy harness); the reported oxide combines the two
 * (oxide_summary in analyze.c). Only when the flakes leave the nominal
 * oxide's search does the colour choose where a fit starts (colour_start
 * in analyze_oxide.c). 'model' is the fit's model. */
lam_status lam__colour_oxide(lam_analysis *a, const lam_setup *s, lam_model *model,
                             lam_error *err);

/* The oxide the substrate's colour says within the gauge's range of the
 * calibration's (lamina/substrate_colour.h), at the fit's current point:
 * *found is 1 with *oxide_nm and *sigma_nm when the colour fits one
 * oxide there unambiguously; 0 without a recorded colour or three
 * channels. For the fit's choice of a start when the flakes leave the
 * nominal oxide (colour_start in analyze_oxide.c). */
lam_status lam__colour_centre(const lam_analysis *a, const lam_setup *s, lam_model *model,
                              int *found, double *oxide_nm, double *sigma_nm, lam_error *err);

/* The log-likelihood of this image's substrate colour at the oxide of
 * estimate e (its point; lam_substrate_colour_loglik_at), 0 without a
 * recorded colour or three channels: the colour's evidence when fits of
 * the flakes at different oxides compete. */
lam_status lam__colour_loglik(const lam_analysis *a, const lam_estimate *e, const lam_setup *s,
                              lam_model *model, double *loglik, lam_error *err);

/* The warnings of a finished analysis (calibration scale, readings,
 * saturation, exposure, oxide, encoding, setup defaults, fit), added to
 * a->warnings; 'model' evaluates the profile's own ladder for the
 * calibration-scale check. */
void lam__check_analysis(lam_analysis *a, const lam_image *img, const lam_setup *s,
                         lam_model *model);

/* 1 when the setup leaves the microscope to typical values: the camera's
 * curves, the illumination NA or the lamp defaulted (what the
 * setup-defaults warning names). */
int lam__microscope_defaulted(const lam_setup *s);

#endif
