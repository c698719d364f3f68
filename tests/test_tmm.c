/* test_tmm.c - transfer matrices with conducting sheets against closed
 * forms: Nair et al. (2008), the sheet on a half-space (Stauber, Peres,
 * Geim 2008), the Airy formula, energy conservation and passivity. */
#include "check.h"
#include "lamina/tmm.h"
#include "lamina/conductivity.h"

#include <complex.h>
#include <math.h>

static void test_free_sheet(void)
{
    /* Nair et al., Science 320, 1308 (2008): T = (1 + pi a/2)^-2,
     * R = (1/4) pi^2 a^2 T for a universal sheet in vacuum */
    double pa = lam_z0_sigma0();
    lam_tmm_layer sheet = {LAM_TMM_SHEET, 0, 0, pa};
    lam_tmm_result r = lam_tmm_solve(1.0, &sheet, 1, 1.0, 550, 0.0, LAM_POL_S);
    check_abs(r.T, 1.0 / ((1 + pa / 2) * (1 + pa / 2)), 1e-12, "free sheet T (Nair 2008)");
    check_abs(r.R, 0.25 * pa * pa * r.T, 1e-12, "free sheet R (Nair 2008)");
    check_abs(r.T, 0.977463, 1e-6, "free sheet T = 0.977463 (CHECKS.md)");
    check_abs(r.A, 0.022409, 1e-6, "free sheet A = 1 - T - R = 0.022409");
    /* N stacked sheets without interlayer phase: T = (1 + N pi a / 2)^-2 */
    const double expect[4] = {0.95568, 0.93462, 0.91424, 0.89453};
    for (int N = 2; N <= 5; N++) {
        lam_tmm_layer L[5];
        for (int i = 0; i < N; i++)
            L[i] = sheet;
        lam_tmm_result rn = lam_tmm_solve(1.0, L, (size_t)N, 1.0, 550, 0.0, LAM_POL_P);
        check_abs(rn.T, 1.0 / pow(1 + N * pa / 2, 2), 1e-12, "%d stacked sheets T formula", N);
        check_abs(rn.T, expect[N - 2], 1e-5, "%d stacked sheets T (CHECKS.md)", N);
    }
}

static void test_sheet_on_halfspace(void)
{
    /* r = (1 - n_s - y)/(1 + n_s + y), normal incidence (Fresnel with the
     * sheet boundary condition; Stauber, Peres, Geim, PRB 78, 085432 (2008)) */
    double pa = lam_z0_sigma0();
    for (int N = 1; N <= 3; N++) {
        double complex y = N * pa * (1.1 + 0.05 * I);
        lam_tmm_layer s = {LAM_TMM_SHEET, 0, 0, y};
        double ns = 1.52;
        lam_tmm_result r = lam_tmm_solve(1.0, &s, 1, ns, 600, 0.0, LAM_POL_S);
        double complex expect = (1 - ns - y) / (1 + ns + y);
        check_abs(cabs(r.r - expect), 0, 1e-12, "sheet y=%d x 1.1 pi a on n=1.52: r closed form", N);
    }
    /* graphene on glass looks brighter: C ~ -7 %% per layer [F] */
    lam_tmm_layer s = {LAM_TMM_SHEET, 0, 0, pa};
    double R0 = lam_tmm_solve(1.0, NULL, 0, 1.52, 550, 0, LAM_POL_S).R;
    double R1 = lam_tmm_solve(1.0, &s, 1, 1.52, 550, 0, LAM_POL_S).R;
    double c = (R0 - R1) / R0;
    check_true(c < -0.05 && c > -0.09, "monolayer on glass: contrast %.4f near -7 %% (CHECKS.md)", c);
    /* a sheet breaks r_ba = -r_ab: reflection from the two sides differs */
    lam_tmm_result up = lam_tmm_solve(1.0, &s, 1, 1.52, 550, 0, LAM_POL_S);
    lam_tmm_result down = lam_tmm_solve(1.52, &s, 1, 1.0, 550, 0, LAM_POL_S);
    check_true(cabs(up.r + down.r) > 1e-3, "with a sheet r_ba != -r_ab (|sum| = %.4f)",
               cabs(up.r + down.r));
}

static void test_airy(void)
{
    /* one film, oblique, both polarisations: Airy formula r = (r01 + r12 e^{2i b})/
     * (1 + r01 r12 e^{2i b}), b = k0 q1 d */
    double n0 = 1.0, s0 = sin(0.5);
    double complex n1 = 1.46, n2 = 4.08 + 0.028 * I;
    double d = 285, wl = 550;
    for (int pol = 0; pol < 2; pol++) {
        double complex q0 = lam_tmm_q(n0, n0 * s0), q1 = lam_tmm_q(n1, n0 * s0),
                       q2 = lam_tmm_q(n2, n0 * s0);
        double complex e0 = lam_tmm_eta(n0, q0, (lam_pol)pol), e1 = lam_tmm_eta(n1, q1, (lam_pol)pol),
                       e2 = lam_tmm_eta(n2, q2, (lam_pol)pol);
        double complex r01 = (e0 - e1) / (e0 + e1), r12 = (e1 - e2) / (e1 + e2);
        double complex ph = cexp(2 * I * (2 * M_PI / wl) * q1 * d);
        double complex airy = (r01 + r12 * ph) / (1 + r01 * r12 * ph);
        lam_tmm_layer L = {LAM_TMM_FILM, n1, d, 0};
        lam_tmm_result r = lam_tmm_solve(n0, &L, 1, n2, wl, s0, (lam_pol)pol);
        check_abs(cabs(r.r - airy), 0, 1e-12, "single film vs Airy formula (%s)", pol ? "p" : "s");
    }
}

static double rnd(unsigned *seed)
{
    *seed = *seed * 1103515245u + 12345u;
    return ((*seed >> 8) % 100000) / 100000.0;
}

static void test_conservation_and_passivity(void)
{
    /* lossless stack on a transparent substrate: R + T = 1 */
    lam_tmm_layer L[3] = {{LAM_TMM_FILM, 2.1, 83.7, 0}, {LAM_TMM_FILM, 1.46, 211.3, 0},
                          {LAM_TMM_FILM, 1.7, 45.1, 0}};
    for (int pol = 0; pol < 2; pol++) {
        lam_tmm_result r = lam_tmm_solve(1.0, L, 3, 1.52, 587, sin(0.7), (lam_pol)pol);
        check_abs(r.R + r.T, 1.0, 1e-12, "lossless stack R + T = 1 (%s, 40 deg)", pol ? "p" : "s");
    }
    /* random absorbing stacks with sheets: 0 <= R <= 1, T >= 0, A >= 0 */
    unsigned seed = 2385;
#define RND() rnd(&seed)
    int ok = 1, normal_equal = 1;
    for (int trial = 0; trial < 500; trial++) {
        lam_tmm_layer S[6];
        size_t n = 1 + (size_t)(RND() * 5);
        for (size_t i = 0; i < n; i++) {
            if (RND() < 0.3) {
                S[i].kind = LAM_TMM_SHEET;
                S[i].y = lam_z0_sigma0() * (RND() * 3 + I * (RND() - 0.5) * 4);
            } else {
                S[i].kind = LAM_TMM_FILM;
                S[i].index = 1 + 3 * RND() + I * RND() * 2;
                S[i].thickness_nm = 400 * RND();
            }
        }
        double complex sub = 1 + 4 * RND() + I * 3 * RND();
        double st = RND() * 0.95;
        for (int pol = 0; pol < 2; pol++) {
            lam_tmm_result r = lam_tmm_solve(1.0, S, n, sub, 400 + 400 * RND(), st, (lam_pol)pol);
            ok &= r.R >= 0 && r.R <= 1 + 1e-12 && r.T >= -1e-12 && r.A >= -1e-12;
        }
        lam_tmm_result rs = lam_tmm_solve(1.0, S, n, sub, 500, 0, LAM_POL_S);
        lam_tmm_result rp = lam_tmm_solve(1.0, S, n, sub, 500, 0, LAM_POL_P);
        normal_equal &= fabs(rs.R - rp.R) < 1e-12;
    }
    check_true(ok, "passivity over 500 random absorbing stacks with sheets (R<=1, T,A>=0)");
    check_true(normal_equal, "s and p reflectance equal at normal incidence");
}

static void test_thin_slab_limit(void)
{
    /* a film N, d -> 0 equals a sheet y = -i (2 pi / lambda)(N^2 - 1) d [F] */
    double complex N = 2.6 + 1.3 * I;
    double wl = 550;
    double prev = 1;
    for (int k = 0; k < 3; k++) {
        double d = 0.1 / pow(10, k);
        lam_tmm_layer L[2] = {{LAM_TMM_FILM, N, d, 0}, {LAM_TMM_FILM, 1.46, 285, 0}};
        /* same reference plane: the sheet under an air layer of the slab's thickness */
        lam_tmm_layer S[3] = {{LAM_TMM_FILM, 1.0, d, 0},
                              {LAM_TMM_SHEET, 0, 0, -I * (2 * M_PI / wl) * (N * N - 1) * d},
                              {LAM_TMM_FILM, 1.46, 285, 0}};
        double complex si = 4.08 + 0.028 * I;
        double diff = cabs(lam_tmm_solve(1, L, 2, si, wl, 0, LAM_POL_S).r -
                           lam_tmm_solve(1, S, 3, si, wl, 0, LAM_POL_S).r);
        check_true(diff < prev * 0.2 + 1e-15, "slab d=%.3g nm approaches the sheet (|dr| %.3g)", d, diff);
        prev = diff;
    }
    check_abs(prev, 0, 1e-7, "slab of 0.001 nm equals its sheet within 1e-7");
}

int main(void)
{
    check_begin("test_tmm");
    test_free_sheet();
    test_sheet_on_halfspace();
    test_airy();
    test_conservation_and_passivity();
    test_thin_slab_limit();
    return check_summary();
}
