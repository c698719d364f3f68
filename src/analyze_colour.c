/* analyze_colour.c - the oxide from the bare substrate's colour, combined
 * with the flakes' fit when the two agree (lamina/substrate_colour.h). */
#include "analyze_internal.h"
#include "lamina/substrate_colour.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

/* The colour is searched over the flakes' oxide +- RANGE_SD of its sd, at
 * least RANGE_MIN_NM each side; it must agree with it within AGREE_SD of
 * the two sds combined. */
#define RANGE_SD 4.0
#define RANGE_MIN_NM 15.0
#define AGREE_SD 3.0
/* The colour's change is modelled only this far from the calibration's
 * oxide (the harness measured its error over 3-12 nm); beyond, a match
 * is a coincidence of a colour loop that repeats every ~190 nm. */
#define VALID_NM 30.0

/* The fit's point and its covariance of the parameters the substrate's
 * reflectance depends on. */
static lam_colour_point colour_point(const lam_estimate *e, const lam_setup *s)
{
    lam_colour_point p;
    memset(&p, 0, sizeof p);
    p.point = lam_estimate_point(e, 0);
    p.change_share = lam_setup_is_default(s, "camera") ? LAM_COLOUR_CHANGE_UNKNOWN
                                                       : LAM_COLOUR_CHANGE_GIVEN;
    int at[LAM_NU_COUNT];
    for (int k = 0; k < LAM_NU_COUNT; k++)
        at[k] = -1;
    at[LAM_NU_NA] = LAM_COLOUR_NA;
    for (int c = 0; c < LAM_MAX_CHANNELS; c++) {
        at[LAM_NU_SHIFT + c] = LAM_COLOUR_SHIFT + c;
        at[LAM_NU_WIDTH + c] = LAM_COLOUR_WIDTH + c;
    }
    for (size_t a = 0; a < e->nfree; a++)
        for (size_t b = 0; b < e->nfree; b++) {
            int ka = at[e->free_index[a]], kb = at[e->free_index[b]];
            if (ka >= 0 && kb >= 0)
                p.cov[ka][kb] = e->cov[a][b];
        }
    return p;
}

/* Read the gauge over centre +- half. */
static lam_status read_gauge(const lam_analysis *a, const lam_setup *s, lam_model *model,
                             double centre, double half, lam_colour_gauge *g, lam_error *err)
{
    lam_colour_point p = colour_point(a->estimate, s);
    return lam_substrate_colour_gauge(model, &p, &s->substrate_colour, a->substrate.level,
                                      a->channels, centre - half, centre + half, g, err);
}

/* Whether the gauge may join the fit; if not, why (c->note). Returns 1
 * when it agrees, 0 when it says nothing (no single minimum), -1 when it
 * contradicts the flakes or the calibration. */
static int gauge_agrees(lam_analysis *a, const lam_colour_gauge *g, double d_f, double s_f,
                        double half)
{
    lam_colour_oxide *c = &a->oxide.colour;
    if (!g->found || g->ambiguous) {
        snprintf(c->note, sizeof c->note, "the substrate's colour fits %s in %.0f-%.0f nm",
                 g->found ? "more than one oxide" : "no single oxide", d_f - half, d_f + half);
        return 0;
    }
    double ref = a->oxide.colour.reference_nm;
    if (fabs(g->oxide_nm - ref) > VALID_NM) {
        snprintf(c->note, sizeof c->note,
                 "the flakes' oxide is %.0f nm from the calibration's %.1f nm, too far for the "
                 "substrate's colour", fabs(d_f - ref), ref);
        return 0;
    }
    double z = fabs(g->oxide_nm - d_f) / sqrt(s_f * s_f + g->sigma_nm * g->sigma_nm);
    if (g->fits && z <= AGREE_SD)
        return 1;
    if (!g->fits)
        snprintf(c->note, sizeof c->note,
                 "the substrate's colour fits no oxide (chi2 %.0f): lamp, white balance or camera "
                 "changed since the calibration", g->chi2);
    else
        snprintf(c->note, sizeof c->note,
                 "the substrate's colour says %.1f +- %.1f nm, the flakes %.1f +- %.1f nm",
                 g->oxide_nm, g->sigma_nm, d_f, s_f);
    return -1;
}

/* The flakes' oxide far from the calibration's while the colour there
 * fits as recorded: the flakes are likely read in another interference
 * order (their contrasts repeat every ~190 nm of oxide). *found is 1 and
 * the note says so when the colour fits there. */
static lam_status other_order(lam_analysis *a, const lam_setup *s, lam_model *model,
                              double d_f, int *found, lam_error *err)
{
    lam_colour_gauge g;
    double ref = s->substrate_colour.oxide_nm;
    lam_status st = read_gauge(a, s, model, ref, RANGE_MIN_NM, &g, err);
    *found = !st && g.found && g.fits && !g.ambiguous;
    if (*found)
        snprintf(a->oxide.colour.note, sizeof a->oxide.colour.note,
                 "the substrate's colour says %.1f +- %.1f nm, as calibrated, the flakes %.1f nm: "
                 "they may be read in another interference order",
                 g.oxide_nm, g.sigma_nm, d_f);
    return st;
}

/* Whether the setup records a colour this image can be read against:
 * three channels and a fitted oxide in e. */
static int colour_applies(const lam_analysis *a, const lam_estimate *e, const lam_setup *s)
{
    return isfinite(s->substrate_colour.oxide_nm) && a->channels >= 3 &&
           e->image[0].oxide.fitted;
}

lam_status lam__colour_loglik(const lam_analysis *a, const lam_estimate *e, const lam_setup *s,
                              lam_model *model, double *loglik, lam_error *err)
{
    *loglik = 0;
    if (!colour_applies(a, e, s))
        return LAM_OK;
    lam_colour_point p = colour_point(e, s);
    return lam_substrate_colour_loglik_at(model, &p, &s->substrate_colour, a->substrate.level,
                                          a->channels, e->image[0].oxide.value, loglik, err);
}

lam_status lam__colour_centre(const lam_analysis *a, const lam_setup *s, lam_model *model,
                              int *found, double *oxide_nm, double *sigma_nm, lam_error *err)
{
    *found = 0;
    if (!colour_applies(a, a->estimate, s))
        return LAM_OK;
    lam_colour_gauge g;
    lam_status st = read_gauge(a, s, model, s->substrate_colour.oxide_nm, VALID_NM, &g, err);
    *found = !st && g.found && g.fits && !g.ambiguous;
    *oxide_nm = g.oxide_nm;
    *sigma_nm = g.sigma_nm;
    return st;
}

lam_status lam__colour_oxide(lam_analysis *a, const lam_setup *s, lam_model *model,
                             lam_error *err)
{
    lam_colour_oxide *c = &a->oxide.colour;
    *c = (lam_colour_oxide){0, 0, NAN, NAN, NAN, NAN, NAN, ""};
    const lam_estimate *e = a->estimate;
    const lam_nuisance *o = &e->image[0].oxide;
    if (!colour_applies(a, e, s) || !e->image[0].regions_used)
        return LAM_OK;
    lam_colour_gauge g;
    double d_f = o->value, s_f = o->sigma, half = fmax(RANGE_SD * s_f, RANGE_MIN_NM);
    lam_status st = read_gauge(a, s, model, d_f, half, &g, err);
    if (st)
        return st;
    *c = (lam_colour_oxide){1, 0, g.oxide_nm, g.sigma_nm, g.chi2, s->substrate_colour.oxide_nm,
                            s->substrate_colour.oxide_sd_nm, ""};
    int verdict = gauge_agrees(a, &g, d_f, s_f, half);
    c->used = verdict > 0;
    if (verdict > 0)
        return LAM_OK;
    /* a chip meant to be like the calibration's (its nominal oxide near
     * the reference) whose flakes read far from it */
    double ref = s->substrate_colour.oxide_nm, far = fabs(d_f - ref);
    int order = 0;
    if (fabs(a->oxide.nominal - ref) <= VALID_NM && far > half &&
        (far > VALID_NM || !(g.found && g.fits)) &&
        (st = other_order(a, s, model, d_f, &order, err)))
        return st;
    if (verdict < 0 || order)
        lam_warnings_add(&a->warnings, "substrate-colour", "%s; the oxide is the flakes' alone: %s",
                         c->note, order ? "check the chip and the layer counts"
                                        : "recalibrate (lamina calibrate) if the lamp or camera "
                                          "settings changed");
    return LAM_OK;
}
