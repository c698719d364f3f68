/* analyze_oxide.c - the joint fit of one image and the searches that
 * check its oxide (lam__fit_searched, analyze_internal.h): the nominal
 * fit, a fit started at the substrate colour's oxide when the nominal one
 * is doubtful, and the wide search over one interference order each side.
 * Not public. */
#include "analyze_internal.h"

#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>

/* The chip may not be the oxide the setup says (a 90 nm chip under a
 * 285 nm profile), and within one interference order (lambda / 2n is
 * ~190 nm at 550 nm) the colours of N layers at one oxide can mimic those
 * of about 3N at another once the response and the camera's gain are free:
 * a 90 nm chip analysed without a setup fitted 279 nm with its 1L read as
 * 3L at p = 1.000, and nothing in that fit looked wrong (the regions fit;
 * the search had not run to its edge). So with the microscope not fully
 * given (the setup's camera, NA or lamp defaulted), and with any setup
 * when the nominal fit is doubtful, the oxide is checked by a second fit
 * over one order each side with a wide prior, kept when its regions fit
 * markedly better (by LAM__WIDE_MARGIN in log-likelihood: e^10 to one). When
 * the second fit lands as far away and is not markedly worse either, the
 * image is warned: either oxide may be the chip's. With the microscope
 * given the check changed no count in the robust harness, and it costs a
 * second fit over a wider grid (1.3 to 3 times the nominal fit's time on
 * the bench images, 2026-12-03), so it is left to the doubt trigger there
 * (lam__microscope_defaulted). Where the wide fit runs whatever the
 * nominal one gives, it is made beside it (wide_fit_start, below). */
#define DOUBT_UNMODELLED_SHARE 0.3

static int oxide_fitted(const lam_analysis *a)
{
    const lam_est_image *im = &a->estimate->image[0];
    return im->oxide.fitted && im->regions_used;
}

/* The nominal fit is doubtful: much of what informs it fits no layer
 * count, or its oxide ran to the edge of its search. Then a fit started at
 * the substrate colour's oxide (a calibration's) is tried first. */
static int nominal_doubtful(const lam_analysis *a)
{
    const lam_est_image *im = &a->estimate->image[0];
    const lam_estimate_options *o = &a->estimate->opt;
    double off = fabs(im->oxide.value - im->oxide.prior_mean);
    return im->unmodelled_share > DOUBT_UNMODELLED_SHARE ||
           off >= o->search_half_nm - 2 * o->search_step_nm;
}

/* A second fit of the image's regions with the oxide prior centred on
 * centre_nm (NAN: nominal), sd prior_sd, searched +-half_nm, with 'model'
 * and the channels' floor priors 'floor'; *out is NULL on error. */
static lam_status refit(lam__run *r, lam_model *model, const double *floor, double centre_nm,
                        double half_nm, double prior_sd, lam_estimate **out, lam_error *err)
{
    lam_analysis *a = r->a;
    *out = NULL;
    lam_status st = lam__new_estimate(r, centre_nm, half_nm, prior_sd, out, err);
    if (!st) {
        lam_est_image *im = &(*out)->image[0];
        im->oxide.lo = fmax(0, im->oxide.prior_mean - half_nm);
        im->oxide.hi = im->oxide.prior_mean + half_nm;
        for (size_t c = 0; c < a->channels; c++)
            lam_estimate_set_floor_prior(*out, c, floor[c]);
        st = lam_estimate_set_regions(*out, 0, a->measured, a->count, err);
    }
    if (!st) {
        (*out)->opt.ladders = r->ladders;
        st = lam_estimate_fit(*out, model, model, err);
    }
    if (st) {
        lam_estimate_free(*out);
        *out = NULL;
    }
    return st;
}

/* The wide search's fit (below) made beside the nominal fit, on a thread
 * of its own with a copy of the model, when it will run whatever the
 * nominal fit gives (the microscope not fully given) and the analysis has
 * two or more threads. It depends on nothing the nominal fit changes (the
 * regions, the floor priors, the setup), so it is the fit the search
 * would make after it: the same numbers, sooner. The two fits' threads
 * share the cores; the nominal fit left a third of them idle (its serial
 * steps). */
typedef struct wide_fit {
    lam__run *r;
    lam_model *model;
    double floor[LAM_MAX_CHANNELS];
    lam_estimate *fit; /* the result, or NULL */
    lam_status st;
    lam_error err;
    pthread_t thread;
    int started;
} wide_fit;

static void *wide_fit_thread(void *arg)
{
    wide_fit *w = arg;
    w->st = refit(w->r, w->model, w->floor, NAN, LAM__WIDE_HALF_NM, LAM__WIDE_PRIOR_SD_NM,
                  &w->fit, &w->err);
    return NULL;
}

static void wide_fit_start(lam__run *r, wide_fit *w)
{
    memset(w, 0, sizeof *w);
    w->r = r;
    for (size_t c = 0; c < LAM_MAX_CHANNELS; c++)
        w->floor[c] = r->a->estimate->floor_abs_prior[c];
    if (r->threads < 2 || !lam__microscope_defaulted(r->setup) ||
        lam_model_clone(r->model, &w->model, NULL))
        return;
    w->started = pthread_create(&w->thread, NULL, wide_fit_thread, w) == 0;
    if (!w->started) {
        lam_model_free(w->model);
        w->model = NULL;
    }
}

/* The wide fit made beside, waited for (*fit; NULL when there is none:
 * the search then makes it); its error, if any, as the search's. */
static lam_status wide_fit_take(wide_fit *w, lam_estimate **fit, lam_error *err)
{
    *fit = NULL;
    if (!w->started)
        return LAM_OK;
    pthread_join(w->thread, NULL);
    w->started = 0;
    lam_model_free(w->model);
    w->model = NULL;
    if (w->st && err)
        *err = w->err;
    *fit = w->fit;
    w->fit = NULL;
    return w->st;
}

/* A fit's evidence: its regions' log-likelihood, and with a recorded
 * substrate colour the colour's at its oxide, so that fits at different
 * oxides compete on all the image says. */
static lam_status evidence(lam__run *r, const lam_estimate *e, double *out, lam_error *err)
{
    double colour;
    lam_status st = lam__colour_loglik(r->a, e, r->setup, r->model, &colour, err);
    *out = e->image[0].data_loglik + colour;
    return st;
}

/* Keep candidate c instead of the analysis' estimate when its evidence
 * beats it by 'margin' (*taken). *gap: the candidate's evidence minus the
 * estimate's (may be NULL). */
static lam_status keep_if_better(lam__run *r, lam_estimate *c, double margin, int *taken,
                                 double *gap, lam_error *err)
{
    lam_analysis *a = r->a;
    double ec = 0, ea = 0;
    lam_status st = evidence(r, c, &ec, err);
    if (!st)
        st = evidence(r, a->estimate, &ea, err);
    *taken = !st && ec > ea + margin;
    if (gap)
        *gap = ec - ea;
    if (*taken) {
        lam_estimate_free(a->estimate);
        a->estimate = c;
    } else {
        lam_estimate_free(c);
    }
    return st;
}

/* The calibration's substrate colour, when this image's fits one oxide
 * near the calibration's, says where the chip is: a fit started there
 * (prior sd COLOUR_PRIOR_SD of the colour's sd, at least
 * COLOUR_PRIOR_MIN_NM) replaces the nominal one when its evidence (the
 * regions' and the colour's) is better. It then stands against
 * the wide search like the nominal fit does. */
#define COLOUR_PRIOR_SD 3.0
#define COLOUR_PRIOR_MIN_NM 3.0

static lam_status colour_start(lam__run *r, int *taken, lam_error *err)
{
    lam_analysis *a = r->a;
    int found = 0;
    double d, sd;
    lam_estimate *c = NULL;
    lam_status st = lam__colour_centre(a, r->setup, r->model, &found, &d, &sd, err);
    *taken = 0;
    if (st || !found)
        return st;
    double prior = fmax(COLOUR_PRIOR_SD * sd, COLOUR_PRIOR_MIN_NM);
    st = refit(r, r->model, a->estimate->floor_abs_prior, d, a->estimate->opt.search_half_nm,
               prior, &c, err);
    return st ? st : keep_if_better(r, c, 0, taken, NULL, err);
}

/* The wide search (see the top of this file). After a doubtful nominal fit
 * (nominal_doubtful) its result is kept wherever it lies when it is
 * markedly better: the nominal fit may have stopped in a poor optimum
 * (the crystals harness' WSe2 JPEGs). After a sound one it only looks for
 * the chip at another interference order: a result within the nominal
 * fit's own search is dropped, since that ground was searched with the
 * setup's prior, which may be a measured oxide. *off: the fit kept lies
 * beyond that search; *rival_nm: a result beyond it that was not kept but
 * is not markedly worse either (NAN when there is none). */
static lam_status wide_search(lam__run *r, wide_fit *beside, int doubtful, int *off,
                              double *rival_nm, lam_error *err)
{
    lam_analysis *a = r->a;
    lam_estimate *w = NULL;
    double before = a->estimate->image[0].oxide.value, half = a->estimate->opt.search_half_nm;
    double gap = 0;
    int taken = 0;
    *off = 0;
    *rival_nm = NAN;
    lam_status st = wide_fit_take(beside, &w, err);
    if (!st && !w) /* none made beside */
        st = refit(r, r->model, a->estimate->floor_abs_prior, NAN, LAM__WIDE_HALF_NM,
                   LAM__WIDE_PRIOR_SD_NM, &w, err);
    if (st)
        return st;
    double found = w->image[0].oxide.value;
    int far = fabs(found - before) > half;
    if (!doubtful && !far) {
        lam_estimate_free(w);
        return LAM_OK;
    }
    double nominal = w->image[0].oxide.prior_mean;
    if ((st = keep_if_better(r, w, LAM__WIDE_MARGIN, &taken, &gap, err)))
        return st;
    *off = taken && fabs(found - nominal) > half;
    if (!taken && far && gap > -LAM__WIDE_MARGIN)
        *rival_nm = found;
    return LAM_OK;
}

/* The ladders of the wide search's grid, made before its fit and the
 * nominal one when the wide search will run whatever the nominal fit
 * gives (the microscope not fully given): the nominal grid's +-60 nm are
 * a part of them. The fits take them where their grids' oxides and
 * starting points match to the bit, so the results are the same; the
 * nominal fit does not make its own, and the fit beside starts at its
 * scoring. */
static lam_status lend_ladders(lam__run *r, lam_error *err)
{
    lam_estimate *e = r->a->estimate;
    r->ladders = NULL;
    if (!lam__microscope_defaulted(r->setup) || !e->image[0].oxide.fitted)
        return LAM_OK;
    lam_status st = lam_grid_ladders_make(e, 0, r->model, LAM__WIDE_HALF_NM, &r->ladders, err);
    e->opt.ladders = r->ladders;
    return st;
}

/* The lent ladders taken back from the estimate the analysis keeps (and
 * its rival), and freed: no estimate holds them after the searches. */
static void take_back_ladders(lam__run *r)
{
    for (lam_estimate *e = r->a->estimate; e; e = e->rival)
        e->opt.ladders = NULL;
    lam_grid_ladders_free(r->ladders);
    r->ladders = NULL;
}

lam_status lam__fit_searched(lam__run *r, lam__oxide_search *out, lam_error *err)
{
    lam_analysis *a = r->a;
    out->off_nominal = out->colour_start = 0;
    out->rival_nm = NAN;
    lam_status st = lend_ladders(r, err);
    wide_fit beside;
    memset(&beside, 0, sizeof beside);
    if (!st) {
        wide_fit_start(r, &beside);
        st = lam_estimate_fit(a->estimate, r->model, r->model, err);
    }
    if (!st && oxide_fitted(a)) {
        int doubtful = nominal_doubtful(a);
        if (doubtful)
            st = colour_start(r, &out->colour_start, err);
        if (!st && (doubtful || lam__microscope_defaulted(r->setup)))
            st = wide_search(r, &beside, doubtful, &out->off_nominal, &out->rival_nm, err);
    }
    /* a fit made beside and not used (the nominal fit failed or found no
     * oxide, as the search would not have run then) */
    lam_estimate *unused = NULL;
    wide_fit_take(&beside, &unused, NULL);
    lam_estimate_free(unused);
    take_back_ladders(r);
    return st;
}
