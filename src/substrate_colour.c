/* substrate_colour.c - the substrate's colour as an oxide gauge
 * (lamina/substrate_colour.h). */
#include "lamina/substrate_colour.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define GRID_STEP_NM 0.5
#define AMBIGUOUS_DCHI2 4.0
#define AMBIGUOUS_SD 3.0
#define NC LAM_MAX_CHANNELS

/* The model parameter of each colour parameter. */
static int model_param(int k)
{
    if (k == LAM_COLOUR_NA)
        return LAM_MP_NA;
    if (k < LAM_COLOUR_WIDTH)
        return LAM_MP_SHIFT + (k - LAM_COLOUR_SHIFT);
    return LAM_MP_WIDTH + (k - LAM_COLOUR_WIDTH);
}

/* ln R_c of the bare substrate at oxide d (the other parameters of p). */
static lam_status log_reflectance(lam_model *m, const lam_model_point *p, double d, size_t nc,
                                  double *out, lam_error *err)
{
    lam_model_point q = *p;
    q.v[LAM_MP_OXIDE] = d;
    lam_prediction P;
    lam_status st = lam_model_eval_point(m, &q, 1, &P, err);
    for (size_t c = 0; c < nc && !st; c++) {
        if (!(P.substrate[c] > 0))
            return lam_error_set(err, LAM_ERANGE, "the substrate reflects no light in channel %zu",
                                 c + 1);
        out[c] = log(P.substrate[c]);
    }
    return st;
}

static lam_status check_levels(const double *level, size_t channels, lam_error *err)
{
    if (channels != NC)
        return lam_error_set(err, LAM_EINVAL, "the substrate's colour needs three channels");
    for (size_t c = 0; c < channels; c++)
        if (!(level[c] > 0))
            return lam_error_set(err, LAM_ERANGE, "the substrate is black in channel %zu", c + 1);
    return LAM_OK;
}

/* A recorded colour, and levels it can be compared with. */
static lam_status check_reading(const lam_substrate_colour *ref, const double *level,
                                size_t channels, lam_error *err)
{
    if (!isfinite(ref->oxide_nm))
        return lam_error_set(err, LAM_EINVAL, "the setup records no substrate colour");
    return check_levels(level, channels, err);
}

lam_status lam_substrate_colour_record(const double *level, size_t channels, double *ln_level,
                                       lam_error *err)
{
    lam_status st = check_levels(level, channels, err);
    if (st)
        return st;
    double mean = 0;
    for (size_t c = 0; c < channels; c++)
        mean += log(level[c]) / (double)channels;
    for (size_t c = 0; c < channels; c++)
        ln_level[c] = log(level[c]) - mean;
    return LAM_OK;
}

/* J[c][k]: d(ln R_c(d) - ln R_c(d0)) / d param k, central differences, for
 * the parameters with a variance. */
static lam_status jacobian_at(lam_model *m, const lam_colour_point *p, double d, double d0,
                              double J[NC][LAM_COLOUR_PARAMS], lam_error *err)
{
    memset(J, 0, sizeof(double) * NC * LAM_COLOUR_PARAMS);
    lam_status st = LAM_OK;
    for (int k = 0; k < LAM_COLOUR_PARAMS && !st; k++) {
        if (!(p->cov[k][k] > 0))
            continue;
        int mp = model_param(k);
        double h = lam_model_step((lam_model_param)mp), a[NC], b[NC], a0[NC], b0[NC];
        lam_model_point up = p->point, dn = p->point;
        up.v[mp] += h;
        dn.v[mp] -= h;
        if ((st = log_reflectance(m, &up, d, NC, a, err)) ||
            (st = log_reflectance(m, &dn, d, NC, b, err)) ||
            (st = log_reflectance(m, &up, d0, NC, a0, err)) ||
            (st = log_reflectance(m, &dn, d0, NC, b0, err)))
            break;
        for (int c = 0; c < NC; c++)
            J[c][k] = ((a[c] - a0[c]) - (b[c] - b0[c])) / (2 * h);
    }
    return st;
}

/* The share of the way from the first chip to the second at oxide d
 * (0 without a second chip): the measured correction's weight. */
static double second_weight(const lam_substrate_colour *ref, double d)
{
    return isfinite(ref->second_oxide_nm) ? (d - ref->oxide_nm) / (ref->second_oxide_nm - ref->oxide_nm)
                                          : 0;
}

/* The derivatives of the change the model must supply: with a second
 * chip, its measured change replaces the model's linear part, and only
 * the rest, (ln R(d) - ln R(d0)) - w (ln R(d1) - ln R(d0)), depends on
 * the parameters. */
static lam_status jacobian(lam_model *m, const lam_colour_point *p,
                           const lam_substrate_colour *ref, double d,
                           double J[NC][LAM_COLOUR_PARAMS], lam_error *err)
{
    lam_status st = jacobian_at(m, p, d, ref->oxide_nm, J, err);
    double w = second_weight(ref, d), J1[NC][LAM_COLOUR_PARAMS];
    if (st || w == 0)
        return st;
    if ((st = jacobian_at(m, p, ref->second_oxide_nm, ref->oxide_nm, J1, err)))
        return st;
    for (int c = 0; c < NC; c++)
        for (int k = 0; k < LAM_COLOUR_PARAMS; k++)
            J[c][k] -= w * J1[c][k];
    return LAM_OK;
}

/* A lamp's colour temperature changes ln L_c by b / lambda_c (Wien:
 * ln B = const - hc / (lambda k T)); at the usual centroids of a colour
 * camera's R, G and B channels. */
static const double channel_nm[NC] = {600, 530, 460};

/* The inverse covariance of the differences to the last channel,
 * u_a = r_a - r_2: the header's Cov(u) inverted; -1 when it is not
 * positive definite. w is the second chip's weight at the oxide read:
 * each session's own drift is half the variance of a difference of two,
 * and the reading r = e - w e1 - (1 - w) e0 has three sessions in it. */
static int precision(const double J[NC][LAM_COLOUR_PARAMS], const lam_colour_point *p,
                     const lam_substrate_colour *ref, const double *change, double w,
                     double prec[2][2], double *det_out)
{
    double sessions = sqrt(0.5 * (1 + w * w + (1 - w) * (1 - w)));
    double S[NC][NC], s = ref->stability * sessions;
    /* the tilt's sd per unit 1/lambda, from its sd between the B and R channels */
    double tilt = sessions * ref->lamp_tilt / (1 / channel_nm[2] - 1 / channel_nm[0]);
    for (int c = 0; c < NC; c++)
        for (int e = 0; e < NC; e++) {
            double ch = p->change_share * change[c];
            double v = (c == e ? s * s + ch * ch : 0) +
                       tilt * tilt / (channel_nm[c] * channel_nm[e]);
            for (int k = 0; k < LAM_COLOUR_PARAMS; k++)
                for (int l = 0; l < LAM_COLOUR_PARAMS; l++)
                    v += J[c][k] * p->cov[k][l] * J[e][l];
            S[c][e] = v;
        }
    double U[2][2];
    for (int a = 0; a < 2; a++)
        for (int b = 0; b < 2; b++)
            U[a][b] = S[a][b] - S[a][2] - S[2][b] + S[2][2];
    double det = U[0][0] * U[1][1] - U[0][1] * U[1][0];
    if (!(det > 0))
        return -1;
    if (det_out)
        *det_out = det;
    prec[0][0] = U[1][1] / det, prec[1][1] = U[0][0] / det;
    prec[0][1] = prec[1][0] = -U[0][1] / det;
    return 0;
}

/* The reference's curve: the model's ln R at the first chip, and with a
 * second chip the measured change's excess over the model's there,
 * spread linearly in the oxide. */
typedef struct reference_curve {
    double lnR0[NC];
    double lnR1[NC];   /* the model's ln R at the second chip (= lnR0 without one) */
    double excess[NC]; /* (ln L1 - ln L0) - (ln R(d1) - ln R(d0)); zeros without */
} reference_curve;

static double chi2_at(const double *delta, const double *lnR, const reference_curve *rc, double w,
                      const double prec[2][2])
{
    double r[NC], u[2];
    for (int c = 0; c < NC; c++)
        r[c] = delta[c] - (lnR[c] - rc->lnR0[c]) - w * rc->excess[c];
    u[0] = r[0] - r[2], u[1] = r[1] - r[2];
    return u[0] * (prec[0][0] * u[0] + prec[0][1] * u[1]) +
           u[1] * (prec[1][0] * u[0] + prec[1][1] * u[1]);
}

/* The parabola through the grid minimum k and its neighbours: the
 * minimum's place, value and sd (chi2 rises by 1 at 1 sd). */
static void refine(const double *c, size_t k, double lo, lam_colour_gauge *g)
{
    double h = GRID_STEP_NM, cm = c[k - 1], c0 = c[k], cp = c[k + 1];
    double curv = cm - 2 * c0 + cp;
    double off = curv > 0 ? 0.5 * (cm - cp) / curv : 0;
    g->oxide_nm = lo + ((double)k + off) * h;
    g->chi2 = curv > 0 ? c0 - 0.125 * (cm - cp) * (cm - cp) / curv : c0;
    g->sigma_nm = curv > 0 ? sqrt(2.0 / (curv / (h * h))) : INFINITY;
}

/* Another local minimum nearly as good and well apart. */
static int other_minimum(const double *c, size_t n, size_t best, double lo,
                         const lam_colour_gauge *g)
{
    for (size_t k = 1; k + 1 < n; k++) {
        if (k == best || c[k] > c[k - 1] || c[k] > c[k + 1])
            continue;
        double d = lo + (double)k * GRID_STEP_NM;
        if (c[k] < g->chi2 + AMBIGUOUS_DCHI2 && fabs(d - g->oxide_nm) > AMBIGUOUS_SD * g->sigma_nm)
            return 1;
    }
    return 0;
}

/* chi2 over the grid from lo with one precision; the index of its
 * minimum. */
static size_t scan(const double *delta, const double (*lnR)[NC], const reference_curve *rc,
                   const lam_substrate_colour *ref, double lo, size_t n, const double prec[2][2],
                   double *chi2)
{
    size_t best = 0;
    for (size_t k = 0; k < n; k++) {
        double w = second_weight(ref, lo + (double)k * GRID_STEP_NM);
        chi2[k] = chi2_at(delta, lnR[k], rc, w, prec);
        if (chi2[k] < chi2[best])
            best = k;
    }
    return best;
}

/* The precision of the colour residual at oxide d (ln R there: lnR_d)
 * with the model's uncertainties: the Jacobian and the share of the
 * change the model supplies, the whole change from d0 or, with a second
 * chip, its departure from the straight line through the two chips.
 * *definite is 0 when the covariance is not positive definite; errors are
 * the model's. */
static lam_status precision_at(lam_model *m, const lam_colour_point *p,
                               const lam_substrate_colour *ref, const reference_curve *rc,
                               double d, const double *lnR_d, double prec[2][2], double *det,
                               int *definite, lam_error *err)
{
    double J[NC][LAM_COLOUR_PARAMS], change[NC], w = second_weight(ref, d);
    lam_status st = jacobian(m, p, ref, d, J, err);
    *definite = 0;
    if (st)
        return st;
    for (int c = 0; c < NC; c++)
        change[c] = lnR_d[c] - rc->lnR0[c] - w * (rc->lnR1[c] - rc->lnR0[c]);
    *definite = !precision(J, p, ref, change, w, prec, det);
    return LAM_OK;
}

/* The gauge from the tabulated ln R over the grid: a first scan with the
 * sessions' drift alone, then one with the model's uncertainties where
 * the first found its minimum (precision_at). */
static lam_status gauge_from_grid(lam_model *m, const lam_colour_point *p,
                                  const lam_substrate_colour *ref, const double *delta,
                                  const double (*lnR)[NC], const reference_curve *rc, size_t n,
                                  double lo, double *chi2, lam_colour_gauge *g, lam_error *err)
{
    double J[NC][LAM_COLOUR_PARAMS] = {{0}}, prec[2][2], change[NC] = {0, 0, 0};
    if (precision(J, p, ref, change, 0, prec, NULL))
        return lam_error_set(err, LAM_EINVAL, "substrate colour stability must be positive");
    size_t best = scan(delta, lnR, rc, ref, lo, n, prec, chi2);
    int definite;
    lam_status st = precision_at(m, p, ref, rc, lo + (double)best * GRID_STEP_NM, lnR[best],
                                 prec, NULL, &definite, err);
    if (st)
        return st;
    if (definite)
        best = scan(delta, lnR, rc, ref, lo, n, prec, chi2);
    if (best == 0 || best + 1 >= n)
        return LAM_OK;
    refine(chi2, best, lo, g);
    g->found = isfinite(g->sigma_nm);
    g->ambiguous = other_minimum(chi2, n, best, lo, g);
    /* the chips' own oxides: the first's shifts the reading, the second's
     * tilts the measured line by its share */
    double w_read = second_weight(ref, g->oxide_nm);
    double second = isfinite(ref->second_oxide_nm) ? w_read * ref->second_oxide_sd_nm : 0;
    g->sigma_nm = sqrt(g->sigma_nm * g->sigma_nm + ref->oxide_sd_nm * ref->oxide_sd_nm +
                       second * second);
    g->fits = g->chi2 <= LAM_COLOUR_CHI2_LIMIT;
    return LAM_OK;
}

/* The reference's curve and this image's colour change from the first
 * chip, delta_c = ln L_c - ln L0_c. */
static lam_status reference(lam_model *m, const lam_colour_point *p,
                            const lam_substrate_colour *ref, const double *level,
                            reference_curve *rc, double *delta, lam_error *err)
{
    memset(rc, 0, sizeof *rc);
    for (int c = 0; c < NC; c++)
        delta[c] = log(level[c]) - ref->ln_level[c];
    lam_status st = log_reflectance(m, &p->point, ref->oxide_nm, NC, rc->lnR0, err);
    memcpy(rc->lnR1, rc->lnR0, sizeof rc->lnR0);
    if (!st && isfinite(ref->second_oxide_nm) &&
        !(st = log_reflectance(m, &p->point, ref->second_oxide_nm, NC, rc->lnR1, err)))
        for (int c = 0; c < NC; c++)
            rc->excess[c] =
                (ref->second_ln_level[c] - ref->ln_level[c]) - (rc->lnR1[c] - rc->lnR0[c]);
    return st;
}

lam_status lam_substrate_colour_loglik_at(lam_model *m, const lam_colour_point *p,
                                          const lam_substrate_colour *ref, const double *level,
                                          size_t channels, double d, double *loglik,
                                          lam_error *err)
{
    *loglik = NAN;
    lam_status st = check_reading(ref, level, channels, err);
    double delta[NC], lnR[NC], prec[2][2], det;
    int definite = 0;
    reference_curve rc;
    if (!st)
        st = reference(m, p, ref, level, &rc, delta, err);
    if (!st)
        st = log_reflectance(m, &p->point, d, NC, lnR, err);
    if (!st)
        st = precision_at(m, p, ref, &rc, d, lnR, prec, &det, &definite, err);
    if (st)
        return st;
    if (!definite)
        return lam_error_set(err, LAM_EINVAL, "substrate colour stability must be positive");
    /* the two differences' Gaussian density: its normalisation counts,
     * since the covariance grows with the modelled change from d0 */
    *loglik = -0.5 * chi2_at(delta, lnR, &rc, second_weight(ref, d), prec) - 0.5 * log(det) -
              log(2 * M_PI);
    return LAM_OK;
}

lam_status lam_substrate_colour_gauge(lam_model *m, const lam_colour_point *p,
                                      const lam_substrate_colour *ref, const double *level,
                                      size_t channels, double lo_nm, double hi_nm,
                                      lam_colour_gauge *g, lam_error *err)
{
    *g = (lam_colour_gauge){0, 0, NAN, NAN, NAN, 0};
    lam_status st = check_reading(ref, level, channels, err);
    if (st)
        return st;
    lo_nm = fmax(0, lo_nm);
    size_t n = hi_nm > lo_nm ? (size_t)((hi_nm - lo_nm) / GRID_STEP_NM) + 1 : 0;
    if (n < 3)
        return lam_error_set(err, LAM_EINVAL, "oxide range %g-%g nm is too short", lo_nm, hi_nm);
    double (*lnR)[NC] = malloc(n * sizeof *lnR), *chi2 = malloc(n * sizeof *chi2);
    double delta[NC];
    reference_curve rc;
    if (!lnR || !chi2)
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate the colour profile");
    if (!st)
        st = reference(m, p, ref, level, &rc, delta, err);
    for (size_t k = 0; k < n && !st; k++)
        st = log_reflectance(m, &p->point, lo_nm + (double)k * GRID_STEP_NM, NC, lnR[k], err);
    if (!st)
        st = gauge_from_grid(m, p, ref, delta, (const double(*)[NC])lnR, &rc, n, lo_nm, chi2, g,
                             err);
    free(lnR);
    free(chi2);
    return st;
}
