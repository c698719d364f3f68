/* test_model.c - the contrast model against an independent closed form,
 * published statements about graphene contrast on SiO2/Si, the pitfalls
 * listed in shared/CHECKS.md. (The setup reader is tested in test_setup.c.) */
#include "check.h"
#include "refdata.h"
#include "lamina/model.h"
#include "lamina/tmm.h"
#include "model_internal.h"

#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <gsl/gsl_errno.h>

static lam_prediction P, Q;

static double green_contrast(lam_setup *s, double ox, size_t N, double na)
{
    lam_model *m;
    s->illumination_na = na;
    if (lam_model_alloc(s, 20, 0, &m, NULL))
        return NAN;
    lam_model_eval(m, ox, s->sheet.fermi_ev, &P, NULL);
    lam_model_free(m);
    return P.contrast[N][1];
}

/* Independent: Airy sum with sheet-modified Fresnel coefficients at the
 * top interface (not the matrix code), monolayer, normal incidence. */
static double independent_contrast(const lam_setup *s, double ox, double wl)
{
    double complex n1, n2, sig;
    lam_material_index(&s->layer_material[0], wl, &n1, NULL);
    lam_material_index(&s->base, wl, &n2, NULL);
    lam_sheet_conductivity(&s->sheet, 1239.841984 / wl, &sig, NULL);
    double complex y = lam_z0_sigma0() * sig;
    double complex ph = cexp(2 * I * 2 * M_PI * n1 * ox / wl);
    double complex r12 = (n1 - n2) / (n1 + n2);
    double complex r01 = (1 - n1) / (1 + n1);
    double complex rsub = (r01 + r12 * ph) / (1 + r01 * r12 * ph);
    double complex a01 = (1 - n1 - y) / (1 + n1 + y), a10 = (n1 - 1 - y) / (1 + n1 + y);
    double complex t01 = 2 / (1 + n1 + y), t10 = 2 * n1 / (1 + n1 + y);
    double complex rfl = a01 + t01 * t10 * r12 * ph / (1 - a10 * r12 * ph);
    double R0 = cabs(rsub) * cabs(rsub), R1 = cabs(rfl) * cabs(rfl);
    return (R0 - R1) / R0;
}

static void test_independent(void)
{
    lam_setup s;
    lam_setup_default(&s);
    s.illumination_na = 0;
    lam_model *m;
    const double ox[3] = {90, 285, 300}, wl[3] = {550, 550, 633};
    for (int i = 0; i < 3; i++) {
        check_int(lam_model_alloc(&s, 3, wl[i], &m, NULL), LAM_OK, "monochromatic model");
        lam_model_eval(m, ox[i], s.sheet.fermi_ev, &P, NULL);
        check_abs(P.contrast[1][0], independent_contrast(&s, ox[i], wl[i]), 1e-9,
                  "1L contrast %.0f nm oxide, %.0f nm, NA 0 vs sheet-Airy closed form", ox[i], wl[i]);
        lam_model_free(m);
    }
}

static void test_published(void)
{
    lam_setup s;
    lam_setup_default(&s);
    s.camera.kind = LAM_CAMERA_SRGB_OBSERVER;
    s.illuminant.kind = LAM_ILLUM_CIE_A;
    /* Blake et al., APL 91, 063124 (2007) [M]: ~10-12 %% peak monolayer
     * contrast on ~300 nm oxide in green-yellow light; ~200 nm nearly invisible */
    double best = 0;
    for (double ox = 260; ox <= 300; ox += 5)
        best = fmax(best, green_contrast(&s, ox, 1, 0.3));
    check_true(best > 0.08 && best < 0.16, "peak 1L green contrast near 285 nm oxide %.3f in "
               "0.08-0.16 (Blake 2007, plausibility)", best);
    double c200 = fabs(green_contrast(&s, 200, 1, 0.3));
    check_true(c200 < 0.3 * best, "1L nearly invisible on 200 nm oxide in green (|C| %.3f)", c200);
    /* Blake 2007 [C]: a 5 %% thicker oxide lowers the contrast markedly */
    double c300 = green_contrast(&s, 300, 1, 0.3), c315 = green_contrast(&s, 315, 1, 0.3);
    check_true(c315 < 0.7 * c300, "315 nm oxide lowers green contrast vs 300 nm (%.3f vs %.3f)",
               c315, c300);
    /* Abergel, Russell, Fal'ko, APL 91, 063125 (2007) [C]: bilayer ~2x monolayer */
    double c1 = green_contrast(&s, 285, 1, 0.3), c2 = P.contrast[2][1];
    check_true(c2 / c1 > 1.7 && c2 / c1 < 2.1, "2L/1L contrast ratio %.3f near 2 (Abergel 2007)",
               c2 / c1);
    /* Casiraghi et al., Nano Lett. 7, 2711 (2007) [C]: ~linear below ~6 layers, then saturates */
    double step1 = P.contrast[1][1], step5 = P.contrast[5][1] - P.contrast[4][1];
    double step15 = P.contrast[15][1] - P.contrast[14][1];
    int rising = 1;
    for (size_t N = 2; N <= 5; N++)
        rising &= P.contrast[N][1] > P.contrast[N - 1][1];
    check_true(rising && step5 > 0.3 * step1 && fabs(step15) < 0.5 * step1,
               "contrast rises to 5L (1L %.3f, 4->5 %.3f) and saturates (14->15 %.3f)", step1,
               step5, step15);
    /* Roddaro et al., Nano Lett. 7, 2707 (2007) [C] and TMM physics [F]:
     * illumination NA moves the ~300 nm contrast far more than the ~90 nm one */
    double a90 = green_contrast(&s, 90, 1, 0.0), b90 = green_contrast(&s, 90, 1, 0.9);
    double a300 = green_contrast(&s, 300, 1, 0.0), b300 = green_contrast(&s, 300, 1, 0.9);
    check_true(fabs(b300 / a300 - 1) > 5 * fabs(b90 / a90 - 1),
               "NA 0 -> 0.9 changes 300 nm contrast (x%.2f) far more than 90 nm (x%.3f)",
               b300 / a300, b90 / a90);
    /* Ni et al., Nano Lett. 7, 2758 (2007) [C]: peak contrast near 550 nm on 285 nm */
    lam_setup mono;
    lam_setup_default(&mono);
    mono.illumination_na = 0;
    double peak_nm = 0, peak = -1;
    for (double wl = 450; wl <= 700; wl += 5) {
        lam_model *m;
        lam_model_alloc(&mono, 1, wl, &m, NULL);
        lam_model_eval(m, 285, 0.2, &Q, NULL);
        if (Q.contrast[1][0] > peak) {
            peak = Q.contrast[1][0];
            peak_nm = wl;
        }
        lam_model_free(m);
    }
    check_abs(peak_nm, 560, 30, "1L contrast spectrum on 285 nm peaks near 550 nm (Ni 2007)");
}

static void test_pitfalls(void)
{
    lam_setup s;
    lam_setup_default(&s);
    s.illumination_na = 0;
    lam_model *m;
    lam_model_alloc(&s, 2, 0, &m, NULL);
    lam_model_eval(m, 285, 0.2, &P, NULL);
    lam_model_free(m);
    /* 1. ratio of channel integrals != integral of monochromatic contrasts */
    static double w[LAM_MAX_CHANNELS][LAM_MAX_GRID];
    lam_grid g;
    lam_grid_init(&g, 380, 780, 2, NULL);
    lam_spectrum_weights(&g, &s.illuminant, &s.camera, w, NULL);
    double mean_c = 0;
    for (size_t l = 0; l < g.count; l++) {
        lam_model_alloc(&s, 1, g.nm[l], &m, NULL);
        lam_model_eval(m, 285, 0.2, &Q, NULL);
        mean_c += w[0][l] * Q.contrast[1][0];
        lam_model_free(m);
    }
    check_true(fabs(mean_c - P.contrast[1][0]) > 1e-3,
               "pitfall 1: weighted mean of monochromatic contrasts %.4f != channel contrast %.4f",
               mean_c, P.contrast[1][0]);
    /* 3. contrast vs E_F is not monotonic just below the blocking edge (one
     * channel can give two answers) */
    lam_setup one;
    lam_setup_default(&one);
    one.illumination_na = 0;
    lam_model_alloc(&one, 1, 550, &m, NULL);
    double prev = NAN, prev_d = NAN;
    int turns = 0;
    for (double mu = 0.8; mu <= 1.5; mu += 0.01) {
        lam_model_eval(m, 285, mu, &Q, NULL);
        double c = Q.contrast[1][0];
        if (!isnan(prev)) {
            double d = c - prev;
            if (!isnan(prev_d) && d * prev_d < 0)
                turns++;
            prev_d = d;
        }
        prev = c;
    }
    lam_model_free(m);
    check_true(turns >= 1, "pitfall 3: C(E_F) at 550 nm turns %d time(s) between 0.8 and 1.5 eV",
               turns);
    /* 4. pupil weight sin vs sin cos changes contrast at NA 0.9 (document the choice) */
    lam_setup a, b;
    lam_setup_default(&a);
    lam_setup_default(&b);
    a.illumination_na = b.illumination_na = 0.9;
    b.pupil = LAM_PUPIL_SIN;
    lam_model_alloc(&a, 1, 0, &m, NULL);
    lam_model_eval(m, 300, 0.2, &P, NULL);
    lam_model_free(m);
    lam_model_alloc(&b, 1, 0, &m, NULL);
    lam_model_eval(m, 300, 0.2, &Q, NULL);
    lam_model_free(m);
    /* CHECKS pitfall 4: "up to ~30 %" at NA >= 0.9; the size depends on the
     * channel (at 300 nm: green ~1 %, red and blue 10-30 %) */
    double worst = 0;
    for (int c = 0; c < 3; c++)
        worst = fmax(worst, fabs(Q.contrast[1][c] / P.contrast[1][c] - 1));
    check_true(worst > 0.05 && worst < 0.5,
               "pitfall 4: sin vs sin-cos weight at NA 0.9 change some channel's contrast by "
               "%.1f %% (5-50 %%)", 100 * worst);
    /* 5. gamma does not cancel in contrast; a white-balance gain does */
    double sub = 0.30, flake = 0.27;
    lam_transfer t = {LAM_TRANSFER_SRGB, 0};
    double c_lin = (sub - flake) / sub;
    double c_enc = (lam_transfer_encode(&t, sub) - lam_transfer_encode(&t, flake)) /
                   lam_transfer_encode(&t, sub);
    check_true(fabs(c_enc / c_lin - 1) > 0.3, "pitfall 5: sRGB-encoded contrast %.4f != linear %.4f",
               c_enc, c_lin);
    double gain = 1.7;
    check_abs((gain * sub - gain * flake) / (gain * sub), c_lin, 1e-15,
              "pitfall 5: a white-balance gain cancels");
    /* passivity of every prediction */
    int ok = 1;
    for (size_t N = 0; N <= 1; N++)
        for (size_t c = 0; c < 3; c++)
            ok &= P.reflectance[N][c] > 0 && P.reflectance[N][c] < 1;
    check_true(ok, "predicted reflectances lie in (0, 1)");
}

static void test_derivative(void)
{
    lam_setup s;
    lam_setup_default(&s);
    lam_model *m;
    lam_model_alloc(&s, 3, 0, &m, NULL);
    double dc[LAM_MODEL_MAX_LAYERS + 1][LAM_MAX_CHANNELS];
    check_int(lam_model_doxide(m, 285, 0.2, dc, NULL), LAM_OK, "oxide derivative");
    lam_model_eval(m, 286, 0.2, &P, NULL);
    lam_model_eval(m, 284, 0.2, &Q, NULL);
    check_abs(dc[1][1], (P.contrast[1][1] - Q.contrast[1][1]) / 2, 1e-5, "derivative consistent");
    lam_model_free(m);
}

/* The ladder's gradient (lam_model_gradient: the oxide and the response
 * terms come from one pass of derivative fields, not differences) against
 * Richardson-extrapolated central differences of the model itself, on a
 * separate model (errors O(h^4), ~1e-10 here). It checks the derivative
 * code, not the physics (the model's own checks are above). */
static double gradient_error(lam_model *m, lam_model *ref, const lam_model_point *p, int j,
                             double h)
{
    lam_ladder_grad g;
    int which[1] = {j};
    if (lam_model_gradient(m, p, 6, which, 1, &g, NULL))
        return INFINITY;
    static lam_prediction f[4];
    const double at[4] = {-2, -1, 1, 2};
    for (int i = 0; i < 4; i++) {
        lam_model_point q = *p;
        q.v[j] += at[i] * h;
        if (lam_model_eval_point(ref, &q, 6, &f[i], NULL))
            return INFINITY;
    }
    double worst = 0, scale = 0;
    for (size_t N = 0; N <= 6; N++)
        for (size_t c = 0; c < 3; c++) {
            double d = (8 * (f[2].contrast[N][c] - f[1].contrast[N][c]) -
                        (f[3].contrast[N][c] - f[0].contrast[N][c])) / (12 * h);
            worst = fmax(worst, fabs(g[N][c] - d));
            scale = fmax(scale, fabs(d));
        }
    return scale > 0 ? worst / scale : worst;
}

/* A camera term's derivative (a channel's shift or log width) is still a
 * central difference with lam_model_step, now of that channel's weights
 * alone: it must equal the difference of two whole evaluations. */
static double camera_gradient_error(lam_model *m, lam_model *ref, const lam_model_point *p,
                                    int j)
{
    lam_ladder_grad g;
    int which[1] = {j};
    if (lam_model_gradient(m, p, 6, which, 1, &g, NULL))
        return INFINITY;
    double h = lam_model_step((lam_model_param)j), worst = 0;
    lam_model_point hi = *p, lo = *p;
    hi.v[j] += h, lo.v[j] -= h;
    if (lam_model_eval_point(ref, &hi, 6, &P, NULL) || lam_model_eval_point(ref, &lo, 6, &Q, NULL))
        return INFINITY;
    for (size_t N = 0; N <= 6; N++)
        for (size_t c = 0; c < 3; c++)
            worst = fmax(worst, fabs(g[N][c] - (P.contrast[N][c] - Q.contrast[N][c]) /
                                                   (hi.v[j] - lo.v[j])));
    return worst;
}

/* Parameters asked together give what each gives alone: a difference of
 * whole evaluations (the Fermi level) moves the model's ladder away from
 * p, and the camera's differences, which read that ladder, must not see
 * it whatever the order they are asked in. */
static int gradient_together(lam_model *m, const lam_model_point *p)
{
    static lam_ladder_grad both[2], alone;
    int pair[2] = {LAM_MP_FERMI, LAM_MP_SHIFT + 1}, one[1] = {LAM_MP_SHIFT + 1};
    if (lam_model_gradient(m, p, 6, pair, 2, both, NULL) ||
        lam_model_gradient(m, p, 6, one, 1, &alone, NULL))
        return 0;
    return !memcmp(both[1], alone, sizeof alone);
}

static void test_ladder_gradient(void)
{
    /* the default 285 nm chip; 90 nm under a wide cone with shifted
     * channels; an absorbing film above the oxide; a film below it */
    const char *what[6] = {"285 nm, NA default", "90 nm, NA 0.8, shifted channels",
                           "8 nm Si on 90 nm oxide", "285 nm oxide on 40 nm water",
                           "MoS2 films on 90 nm, NA 0.8", "hBN films on 8 nm Si on 285 nm"};
    const int params[5] = {LAM_MP_OXIDE, LAM_MP_CONTINUUM, LAM_MP_RESONANCE, LAM_MP_BACKGROUND,
                           LAM_MP_NA};
    const double step[5] = {0.05, 0.005, 0.02, 0.2, 0.002};
    const char *name[5] = {"oxide", "continuum", "resonance", "background", "NA"};
    for (int k = 0; k < 6; k++) {
        lam_setup s;
        lam_setup_default(&s);
        if (k == 1 || k == 2 || k == 4)
            lam_setup_set_oxide(&s, 90, NULL);
        if (k >= 4 && !check_true(!lam_setup_set_material(&s, k == 4 ? "MoS2" : "hBN", NULL),
                                  "a crystal's setup (%s)", what[k]))
            continue;
        if (k == 2 || k == 5) { /* the oxide becomes the second film */
            s.layer_material[1] = s.layer_material[0], s.layer_nm[1] = s.layer_nm[0];
            lam_material_builtin("Si", &s.layer_material[0], NULL);
            s.layer_nm[0] = 8, s.layers = 2;
        }
        if (k == 3) {
            lam_material_builtin("water", &s.layer_material[1], NULL);
            s.layer_nm[1] = 40, s.layers = 2;
        }
        lam_model *m = NULL, *ref = NULL;
        if (!check_true(!lam_model_alloc(&s, 6, 0, &m, NULL) &&
                            !lam_model_alloc(&s, 6, 0, &ref, NULL),
                        "models for the gradient (%s)", what[k])) {
            lam_model_free(m);
            lam_model_free(ref);
            continue;
        }
        lam_model_point p = lam_model_point_default(m);
        if (k == 1 || k == 4) {
            p.v[LAM_MP_NA] = 0.8;
            p.v[LAM_MP_SHIFT] = 12, p.v[LAM_MP_SHIFT + 2] = -9, p.v[LAM_MP_WIDTH + 1] = 0.2;
        }
        p.v[LAM_MP_CONTINUUM] = 0.1;
        for (int j = 0; j < 5; j++)
            if (k < 4 || params[j] == LAM_MP_OXIDE || params[j] == LAM_MP_NA)
                check_true(gradient_error(m, ref, &p, params[j], step[j]) < 1e-7,
                           "d contrast / d %s as the model's differences (%s): relative error "
                           "%.2g",
                           name[j], what[k], gradient_error(m, ref, &p, params[j], step[j]));
        if (k == 0)
            check_true(gradient_together(m, &p),
                       "a camera term asked after the Fermi level is the one asked alone");
        for (int j = LAM_MP_SHIFT; j <= LAM_MP_WIDTH_LAST && (k < 2 || k == 4); j++)
            check_true(camera_gradient_error(m, ref, &p, j) == 0,
                       "d contrast / d camera term %d as whole evaluations' differences (%s)",
                       j - LAM_MP_SHIFT, what[k]);
        lam_model_free(m);
        lam_model_free(ref);
    }
}

/* A point whose last channel sees no light is refused; the channels before
 * it must not keep that point's weights as the last good point's (the
 * cache once kept its key with half the weights overwritten). */
static void test_dark_channel_refused(void)
{
    lam_setup s;
    lam_setup_default(&s);
    lam_model *m = NULL;
    if (!check_true(!lam_model_alloc(&s, 3, 0, &m, NULL), "a model for the dark channel"))
        return;
    lam_model_point a = lam_model_point_default(m), b = a;
    b.v[LAM_MP_SHIFT] = 30;            /* channel 1 moves ... */
    b.v[LAM_MP_SHIFT + 2] = 5000;      /* ... and channel 3 sees no light */
    int first = lam_model_eval_point(m, &a, 3, &P, NULL);
    int dark = lam_model_eval_point(m, &b, 3, &Q, NULL);
    int again = lam_model_eval_point(m, &a, 3, &Q, NULL);
    check_true(!first && dark == LAM_ERANGE && !again, "a dark channel is refused, with a message");
    check_true(!memcmp(P.contrast, Q.contrast, sizeof P.contrast),
               "after a refused point the last good point predicts as before");
    lam_model_free(m);
}

static void test_film_comparison(void)
{
    /* graphene as a 0.335 nm film of Weber et al. (2010) n,k against the
     * default sheet model: the two descriptions agree on the monolayer
     * contrast within 2 % (they share Re sigma within ~2 %) */
    static refdata_nk t;
    if (!check_true(refdata_load_nk("graphene-Weber2010.yml", &t) == 0, "read Weber 2010"))
        return;
    char csv[512], json[2048];
    check_path(csv, sizeof csv, check_tmpdir(), "weber-film.csv");
    FILE *fp = fopen(csv, "w");
    fprintf(fp, "wavelength_nm,n,k\n");
    for (size_t i = 0; i < t.rows; i++)
        fprintf(fp, "%.4f,%.6f,%.6f\n", t.wl_nm[i], t.n[i], t.k[i]);
    fclose(fp);
    snprintf(json, sizeof json, "{\"schema\":\"lamina-setup/1\",\"conductivity\":{\"model\":"
             "\"film\",\"film\":{\"file\":\"%s\"}}}", csv);
    lam_setup f, d;
    lam_setup_default(&d);
    lam_setup_default(&f);
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_setup_parse(json, ".", &f, &err), LAM_OK, "film setup parses (%s)", err.message);
    lam_model *m;
    lam_model_alloc(&f, 2, 0, &m, NULL);
    lam_model_eval(m, 285, 0.2, &P, NULL);
    lam_model_free(m);
    lam_model_alloc(&d, 2, 0, &m, NULL);
    lam_model_eval(m, 285, 0.2, &Q, NULL);
    lam_model_free(m);
    check_rel(P.contrast[1][1], Q.contrast[1][1], 0.02,
              "1L green contrast: Weber film %.4f vs sheet model %.4f", P.contrast[1][1],
              Q.contrast[1][1]);
    lam_setup_clear(&f);
}

/* A clone evaluates as its original does, to the bit, whatever either's
 * caches hold (the fit's multistart runs one clone per thread). */
static void test_clone(void)
{
    lam_setup s;
    lam_setup_default(&s);
    lam_model *m = NULL, *c = NULL;
    if (!check_int(lam_model_alloc_fast(&s, 16, &m, NULL), LAM_OK, "model") ||
        !check_int(lam_model_clone(m, &c, NULL), LAM_OK, "clone")) {
        lam_model_free(m);
        return;
    }
    lam_model_point p = lam_model_point_default(m);
    int same = 1;
    for (int k = 0; k < 4; k++) {
        p.v[LAM_MP_OXIDE] = 280 + 3 * k;
        p.v[LAM_MP_NA] = 0.3 + 0.1 * k;
        p.v[LAM_MP_CONTINUUM] = 0.05 * k;
        p.v[LAM_MP_SHIFT + 1] = k;
        /* the original warm from the previous point, the clone cold at k = 0 */
        same = same && !lam_model_eval_point(m, &p, 0, &P, NULL) &&
               !lam_model_eval_point(c, &p, 0, &Q, NULL) && !memcmp(&P, &Q, sizeof P);
    }
    check_true(same, "a model's clone predicts the same ladders, to the bit");
    lam_model_free(c);
    lam_model_free(m);
}

/* A warm model at a point equals a cold one there, to the bit, when the
 * points before it moved the oxide and the NA back and forth (more oxides
 * than the model keeps substrates for, and an NA's oxide-free part reused
 * only for that NA). */
static void test_warm_equals_cold(void)
{
    static const double oxide[8] = {280, 286, 280, 301, 290, 294, 298, 283};
    static const double na[8] = {0.2, 0.2, 0.5, 0.5, 0.2, 0.35, 0.2, 0.5};
    lam_setup s;
    lam_setup_default(&s);
    lam_model *warm = NULL;
    if (!check_int(lam_model_alloc_fast(&s, 4, &warm, NULL), LAM_OK, "model"))
        return;
    lam_model_point p = lam_model_point_default(warm);
    int same = 1;
    for (int k = 0; k < 8 && same; k++) {
        lam_model *cold = NULL;
        p.v[LAM_MP_OXIDE] = oxide[k];
        p.v[LAM_MP_NA] = na[k];
        same = !lam_model_alloc_fast(&s, 4, &cold, NULL) &&
               !lam_model_eval_point(warm, &p, 4, &P, NULL) &&
               !lam_model_eval_point(cold, &p, 4, &Q, NULL) && !memcmp(&P, &Q, sizeof P);
        lam_model_free(cold);
    }
    check_true(same, "a warm model predicts as a cold one after 8 oxide and NA moves");
    lam_model_free(warm);
}

/* The fits' coarse model (lam_model_alloc_fast) against the full one
 * (2 nm, 24 cone nodes; the full model is the one checked against the
 * FDTD reference and the published contrasts above): graphene's 1-5L
 * contrasts at its 10 nm and 6 nodes within 6e-5 up to 500 nm of SiO2 and
 * 1.5e-4 up to 1000 nm, over illumination NA 0.3-0.9 and E_F 0.2-0.9 eV
 * (the bound lamina/model.h states; a picture's contrast floor is 1e-3
 * and more). A TMD keeps 5 nm, with 6 nodes: its excitons are 15-20 nm
 * wide (at 10 nm WSe2's contrasts moved by 1.5e-3), within 2e-4 there,
 * except WS2, whose sharper A exciton costs up to 1.7e-3 (bound 2e-3). */
/* The larger of a and b, NaN if either is (fmax would drop a NaN). */
static double worse(double a, double b)
{
    return isnan(a) ? a : (isnan(b) || b > a ? b : a);
}

static double fast_vs_full(const lam_setup *s, double oxide, double na, double fermi)
{
    lam_setup full = *s;
    full.grid_step_nm = 2;
    full.cone_nodes = 24;
    lam_model *f = NULL, *r = NULL;
    double worst = INFINITY;
    if (!lam_model_alloc_fast(s, 5, &f, NULL) && !lam_model_alloc(&full, 5, 0, &r, NULL)) {
        lam_model_point p = lam_model_point_default(f), q = lam_model_point_default(r);
        p.v[LAM_MP_OXIDE] = q.v[LAM_MP_OXIDE] = oxide;
        p.v[LAM_MP_NA] = q.v[LAM_MP_NA] = na;
        p.v[LAM_MP_FERMI] = q.v[LAM_MP_FERMI] = fermi;
        if (!lam_model_eval_point(f, &p, 5, &P, NULL) &&
            !lam_model_eval_point(r, &q, 5, &Q, NULL)) {
            worst = 0;
            for (size_t N = 1; N <= 5; N++)
                for (size_t c = 0; c < P.channels; c++)
                    worst = worse(worst, fabs(P.contrast[N][c] - Q.contrast[N][c]));
        }
    }
    lam_model_free(f);
    lam_model_free(r);
    return worst;
}

static void test_fast_model(void)
{
    static const double oxide[5] = {90, 285, 400, 485, 1000}, na[2] = {0.3, 0.9};
    static const double fermi[2] = {0.2, 0.9};
    lam_setup s;
    lam_setup_default(&s);
    double thin = 0, thick = 0;
    for (int i = 0; i < 5; i++)
        for (int j = 0; j < 2; j++)
            for (int k = 0; k < 2; k++) {
                double d = fast_vs_full(&s, oxide[i], na[j], fermi[k]);
                thin = oxide[i] <= 500 ? worse(thin, d) : thin;
                thick = worse(thick, d);
            }
    check_true(thin <= 6e-5, "graphene's fit model within 6e-5 of the full one up to 500 nm "
                             "(worst %.1e)", thin);
    check_true(thick <= 1.5e-4, "... and within 1.5e-4 at 1000 nm (worst %.1e)", thick);
    static const char *tmd[3] = {"MoS2", "WSe2", "WS2"};
    static const double bound[3] = {2e-4, 2e-4, 2e-3};
    for (int m = 0; m < 3; m++) {
        double worst = 0;
        if (check_true(!lam_setup_set_material(&s, tmd[m], NULL), "%s set", tmd[m]))
            for (int i = 0; i < 3; i++)
                for (int j = 0; j < 2; j++)
                    worst = worse(worst, fast_vs_full(&s, oxide[i], na[j], 0));
        check_true(worst <= bound[m], "%s's fit model within %.0e of the full one (worst %.1e)",
                   tmd[m], bound[m], worst);
    }
    lam_setup_clear(&s);
}

/* The films' complex cos and sin (model.c) against glibc's ccos and csin
 * (the reference library), part by part relative to that part: a thin
 * absorbing film's loss is carried by the small imaginary parts
 * (sin x sinh y with y ~ 0.01 for a MoS2 monolayer), so those must keep
 * their relative accuracy too (sinh as (e^y - e^-y) / 2 would not). */
static double part_error(double got, double want)
{
    double d = fabs(got - want), scale = fabs(want);
    return scale > 1e-300 ? d / scale : d;
}

static void test_complex_cos_sin(void)
{
    static const double ys[] = {0,     1e-12, -1e-9, 3e-6,  -0.004, 0.0123, 0.3,
                                -1.7,  4.2,   -12.5, 37.0,  300.0,  -650.0, 720.0};
    double worst = 0;
    for (size_t i = 0; i < sizeof ys / sizeof *ys; i++)
        for (int k = -400; k <= 400; k++) {
            double complex ph = CMPLX(0.137 * k, ys[i]), c, s;
            lam__complex_cos_sin(ph, &c, &s);
            double complex wc = ccos(ph), ws = csin(ph);
            double e[4] = {part_error(creal(c), creal(wc)), part_error(cimag(c), cimag(wc)),
                           part_error(creal(s), creal(ws)), part_error(cimag(s), cimag(ws))};
            for (int j = 0; j < 4; j++)
                worst = e[j] > worst ? e[j] : worst;
        }
    printf("complex cos/sin: worst part error against ccos/csin %.2e\n", worst);
    check_true(worst < 2e-15, "the films' complex cos and sin within 2e-15 of ccos and csin, "
                              "each part relative to itself");
}

int main(void)
{
    check_begin("test_model");
    gsl_set_error_handler_off();
    test_independent();
    test_published();
    test_pitfalls();
    test_derivative();
    test_ladder_gradient();
    test_dark_channel_refused();
    test_clone();
    test_warm_equals_cold();
    test_fast_model();
    test_complex_cos_sin();
    if (check_refdata_dir())
        test_film_comparison();
    else
        check_true(0, "tests/data missing");
    return check_summary();
}
