/* synth_camera.c - camera channels and white balance.
 * (a) "gauss": three Gaussian channels with random centres and widths;
 * (b) "dye": our own asymmetric dye curves (products of two logistic edges
 *     of different widths) times a broad sensor QE and an IR-cut edge, the
 *     raw channels then mixed by a 3 x 3 colour-correction matrix whose
 *     rows sum to 1 (real cameras output mixed channels);
 * (c) "mono": one channel, the broad sensor QE times a band-pass filter
 *     (Gaussian or flat-top).
 * White balance scales the raw channels so that a perfect white reflector
 * under the scene's lamp gives equal values before the colour matrix, as a
 * camera does; the matrix then keeps white white. */
#include "synth_internal.h"

#include <math.h>
#include <string.h>

static const char *cam_names[] = {"random", "gauss", "dye", "mono"};

const char *synth_camera_name(synth_camera_kind k)
{
    return cam_names[k];
}

static double logistic(double x)
{
    return 1.0 / (1.0 + exp(-x));
}

/* A broad silicon-sensor quantum efficiency of our own shape. */
static double sensor_qe(double wl)
{
    double d = (wl - 560.0) / 170.0;
    return 0.35 + 0.65 * exp(-0.5 * d * d);
}

static void draw_dye(synth_rng *r, synth_camera *c)
{
    static const double rise[3][2] = {{565, 590}, {470, 495}, {395, 415}};
    static const double fall[3][2] = {{700, 740}, {580, 605}, {490, 515}};
    for (int k = 0; k < 3; k++) {
        c->rise_nm[k] = synth_rng_uniform(r, rise[k][0], rise[k][1]);
        c->rise_w[k] = synth_rng_uniform(r, 6, 14);
        c->fall_nm[k] = synth_rng_uniform(r, fall[k][0], fall[k][1]);
        c->fall_w[k] = synth_rng_uniform(r, 10, 22);
    }
    c->ircut_nm = synth_rng_uniform(r, 640, 690);
    c->ircut_w = synth_rng_uniform(r, 4, 9);
    for (int k = 0; k < 3; k++) {
        double sum = 0;
        for (int j = 0; j < 3; j++)
            if (j != k)
                sum += c->ccm[k][j] = synth_rng_uniform(r, -0.3, 0.3);
        c->ccm[k][k] = 1.0 - sum;
    }
}

void synth_camera_draw(synth_rng *r, synth_camera_kind kind, synth_camera *out)
{
    static const double centre[3][2] = {{585, 630}, {515, 560}, {445, 485}};
    if (kind == SYNTH_CAM_RANDOM)
        kind = (synth_camera_kind)synth_rng_int(r, SYNTH_CAM_GAUSS, SYNTH_CAM_DYE);
    synth_camera c;
    memset(&c, 0, sizeof c);
    c.kind = kind;
    c.nc = kind == SYNTH_CAM_MONO ? 1 : 3;
    for (int k = 0; k < 3; k++)
        c.ccm[k][k] = 1.0;
    if (kind == SYNTH_CAM_GAUSS)
        for (int k = 0; k < 3; k++) {
            c.centre_nm[k] = synth_rng_uniform(r, centre[k][0], centre[k][1]);
            c.fwhm_nm[k] = synth_rng_uniform(r, 50, 110);
        }
    else if (kind == SYNTH_CAM_DYE)
        draw_dye(r, &c);
    else {
        c.filter_nm = synth_rng_uniform(r, 520, 565);
        c.filter_fwhm_nm = synth_rng_uniform(r, 10, 40);
        c.filter_flat = synth_rng_int(r, 0, 1);
    }
    *out = c;
}

static double band_pass(const synth_camera *c, double wl)
{
    if (c->filter_flat) {
        double h = 0.5 * c->filter_fwhm_nm, e = 1.2;   /* 1.2 nm logistic edges */
        return logistic((wl - (c->filter_nm - h)) / e) * logistic(((c->filter_nm + h) - wl) / e);
    }
    double s = c->filter_fwhm_nm / (2 * sqrt(2 * log(2.0)));
    double d = (wl - c->filter_nm) / s;
    return exp(-0.5 * d * d);
}

void synth_camera_raw(const synth_camera *c, double wl, double out[3])
{
    out[0] = out[1] = out[2] = 0;
    if (c->kind == SYNTH_CAM_MONO) {
        out[0] = sensor_qe(wl) * band_pass(c, wl);
        return;
    }
    for (int k = 0; k < 3; k++) {
        if (c->kind == SYNTH_CAM_GAUSS) {
            double s = c->fwhm_nm[k] / (2 * sqrt(2 * log(2.0)));
            double d = (wl - c->centre_nm[k]) / s;
            out[k] = exp(-0.5 * d * d);
        } else {
            out[k] = sensor_qe(wl) * logistic((wl - c->rise_nm[k]) / c->rise_w[k]) *
                     logistic((c->fall_nm[k] - wl) / c->fall_w[k]) *
                     logistic((c->ircut_nm - wl) / c->ircut_w);
        }
    }
}

static void scale_to_unit(double *v, int n)
{
    double m = 0;
    for (int i = 0; i < n; i++)
        m = fmax(m, fabs(v[i]));
    for (int i = 0; m > 0 && i < n; i++)
        v[i] /= m;
}

void synth_camera_balance(synth_physics *p)
{
    synth_camera *c = &p->cam;
    double raw[SYNTH_NL][3], white[3] = {0, 0, 0};
    for (int i = 0; i < SYNTH_NL; i++) {
        p->lamp_spd[i] = synth_lamp_spd(&p->lamp, synth_wl(i));
        synth_camera_raw(c, synth_wl(i), raw[i]);
        for (int j = 0; j < c->nc; j++)
            white[j] += p->lamp_spd[i] * raw[i][j];
    }
    scale_to_unit(p->lamp_spd, SYNTH_NL);
    for (int j = 0; j < 3; j++)   /* green (or the one channel) keeps gain 1 */
        c->gain[j] = j < c->nc ? white[c->nc == 3 ? 1 : 0] / white[j] : 0;
    for (int k = 0; k < c->nc; k++) {
        double sum = 0;
        for (int i = 0; i < SYNTH_NL; i++) {
            double s = 0;
            for (int j = 0; j < c->nc; j++)
                s += c->ccm[k][j] * c->gain[j] * raw[i][j];
            p->sens[k][i] = s;
            p->weight[k][i] = synth_lamp_spd(&p->lamp, synth_wl(i)) * s;
            sum += p->weight[k][i];
        }
        for (int i = 0; i < SYNTH_NL; i++)
            p->weight[k][i] /= sum;
        scale_to_unit(p->sens[k], SYNTH_NL);
    }
}
