/* test_conductivity.c - graphene sheet conductivity against closed forms
 * (Falkovsky 2008), CODATA/GSL constants and published optical data. */
#include "check.h"
#include "refdata.h"
#include "lamina/conductivity.h"

#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <gsl/gsl_const_num.h>
#include <gsl/gsl_errno.h>

#define KB 8.617333262e-5
#define HC 1239.841984

static void test_constants(void)
{
    /* CODATA 2018 exact: e = 1.602176634e-19 C, hbar = 1.054571817e-34 J s;
     * GSL 2.7 uses CODATA 2006 values, hence the 1e-7 tolerance (CHECKS.md) */
    check_rel(lam_sigma0_siemens(), 6.0853370e-5, 1e-7, "sigma0 = e^2/4hbar (CODATA 2018)");
    check_rel(lam_z0_sigma0(), M_PI * GSL_CONST_NUM_FINE_STRUCTURE, 1e-7,
              "Z0 sigma0 = pi alpha (GSL's fine-structure constant)");
    check_rel(lam_z0_sigma0(), 0.0229253, 1e-5, "pi alpha = 0.0229253 (CHECKS.md)");
}

static void test_zero_temperature(void)
{
    /* Falkovsky, J. Phys. Conf. Ser. 129, 012004 (2008), T -> 0 forms */
    double complex s;
    double mu = 0.4, e = 1.5;
    lam_kubo_interband(e, mu, 0.0, &s, NULL);
    check_abs(creal(s), 1.0, 1e-12, "T=0 interband Re above 2|mu| is 1");
    check_abs(cimag(s), -log((e + 2 * mu) / (e - 2 * mu)) / M_PI, 1e-12,
              "T=0 interband Im = -(1/pi) ln|(E+2mu)/(E-2mu)|");
    /* finite but tiny T (1 K) through the principal-value integral */
    lam_kubo_interband(e, mu, KB * 1.0, &s, NULL);
    check_abs(cimag(s), -log((e + 2 * mu) / (e - 2 * mu)) / M_PI, 2e-5,
              "1 K QAWC principal value matches the T=0 closed form (E > 2mu)");
    lam_kubo_interband(0.6, mu, KB * 1.0, &s, NULL);
    check_abs(creal(s), 0.0, 1e-12, "Pauli blocking: Re = 0 below 2|mu| at 1 K");
    check_abs(cimag(s), -log((0.6 + 0.8) / (0.8 - 0.6)) / M_PI, 2e-5,
              "1 K principal value below the edge matches the T=0 closed form");
    /* intraband: finite-T form reduces to i(4|mu|/pi)/(E + i gamma) */
    double complex a = lam_kubo_intraband(1.0, 0.3, KB * 1.0, 0.01);
    double complex b = I * (4 * 0.3 / M_PI) / (1.0 + 0.01 * I);
    check_abs(cabs(a - b), 0.0, 1e-12, "intraband at 1 K equals the T=0 Drude form");
    check_true(creal(a) > 0, "Drude term absorbs (Re > 0) with exp(-i w t)");
}

/* An independent quadrature of Im sigma_inter at T > 0: Falkovsky's
 * integral with the singularity subtracted, midpoint rule on a fine grid. */
static double im_inter_reference(double e, double mu, double kt)
{
    double sum = 0, h = 1e-5;
    double g_half = sinh(e / 2 / kt) / (cosh(mu / kt) + cosh(e / 2 / kt));
    for (double x = h / 2; x < 4.0; x += h) {
        double g = sinh(x / kt) / (cosh(mu / kt) + cosh(x / kt));
        double d = e * e - 4 * x * x;
        if (fabs(d) > 1e-9)
            sum += (g - g_half) / d * h;
    }
    /* beyond x = 4 eV, G = 1: the tail integral in closed form */
    sum += (1 - g_half) * (-log((8.0 + e) / (8.0 - e)) / (4 * e));
    return 4 * e / M_PI * sum;
}

static void test_finite_temperature(void)
{
    double kt = KB * 300;
    double e = 2.0, mu = 0.6;
    double complex s;
    check_int(lam_kubo_interband(e, mu, kt, &s, NULL), LAM_OK, "interband at 300 K");
    double re = 0.5 * (tanh((e + 2 * mu) / (4 * kt)) + tanh((e - 2 * mu) / (4 * kt)));
    check_abs(creal(s), re, 1e-14, "Re interband = tanh identity (Falkovsky 2008)");
    check_abs(cimag(s), im_inter_reference(e, mu, kt), 5e-4,
              "Im interband at 300 K vs an independent quadrature");
    lam_kubo_interband(1.0, mu, kt, &s, NULL);
    check_abs(cimag(s), im_inter_reference(1.0, mu, kt), 5e-4,
              "Im interband near the edge (E = 1.0, 2mu = 1.2) vs independent quadrature");
    /* Pauli-blocking edge at lambda = hc/(2|E_F|): 1.0 eV -> 619.9 nm [F] */
    lam_kubo_interband(HC / 619.92, 1.0, kt, &s, NULL);
    check_abs(creal(s), 0.5, 1e-3, "Re sigma/sigma0 = 1/2 at lambda = hc/2E_F (619.9 nm for 1 eV)");
    /* passivity over random parameters (fixed seed) */
    unsigned seed = 2385;
    int passive = 1;
    for (int i = 0; i < 200; i++) {
        seed = seed * 1103515245u + 12345u;
        double ee = 0.2 + 3.0 * ((seed >> 8) % 1000) / 1000.0;
        seed = seed * 1103515245u + 12345u;
        double mm = -1.5 + 3.0 * ((seed >> 8) % 1000) / 1000.0;
        lam_sheet_params p = lam_sheet_params_default();
        p.fermi_ev = mm;
        p.temperature_k = 50 + (double)(i % 7) * 80;
        p.puddle_ev = (i % 3) * 0.05;
        p.exciton = i % 2;
        lam_sheet_conductivity(&p, ee, &s, NULL);
        passive &= creal(s) > 0;
    }
    check_true(passive, "Re sigma > 0 for 200 random (E, mu, T, puddles)");
    /* electron-hole symmetry */
    lam_sheet_params p = lam_sheet_params_default();
    double complex s1, s2;
    p.fermi_ev = 0.7;
    lam_sheet_conductivity(&p, 1.3, &s1, NULL);
    p.fermi_ev = -0.7;
    lam_sheet_conductivity(&p, 1.3, &s2, NULL);
    check_abs(cabs(s1 - s2), 0, 1e-12, "sigma(mu) = sigma(-mu)");
    /* puddles smooth the edge: at 2|mu| the value stays 1/2, far below it rises */
    p.fermi_ev = 1.0;
    p.exciton = 0;
    p.puddle_ev = 0.1;
    lam_sheet_conductivity(&p, 1.6, &s1, NULL);
    p.puddle_ev = 0.0;
    lam_sheet_conductivity(&p, 1.6, &s2, NULL);
    check_true(creal(s1) > creal(s2), "puddle spread raises Re sigma below the edge (%.3f > %.3f)",
               creal(s1), creal(s2));
}

static void test_against_weber(void)
{
    /* Re sigma/sigma0 implied by Weber et al., APL 97, 091904 (2010) n,k for a
     * 3.4 A slab: Re sigma Z0 = (2 pi / lambda) 2 n k d; CHECKS.md gives
     * 1.08 (650 nm) ... 1.28 (450 nm). The default model (Kubo + exciton
     * tail) must agree within 5 %. */
    static refdata_nk t;
    if (!check_true(refdata_load_nk("graphene-Weber2010.yml", &t) == 0, "read Weber 2010"))
        return;
    lam_sheet_params p = lam_sheet_params_default();
    const double wl[3] = {450, 550, 650};
    for (int i = 0; i < 3; i++) {
        double n, k;
        refdata_interp(&t, wl[i], &n, &k);
        double implied = 2 * M_PI / wl[i] * 2 * n * k * 0.34 / lam_z0_sigma0();
        double complex s;
        lam_sheet_conductivity(&p, HC / wl[i], &s, NULL);
        check_rel(creal(s), implied, 0.05, "Re sigma/sigma0 at %.0f nm vs Weber 2010 (5 %%)", wl[i]);
    }
    check_abs(1.28, 2 * M_PI / 450 * 2 * 2.75 * 1.43 * 0.34 / 0.0229253, 0.5,
              "sanity of the implied-conductivity formula");
    /* universal model: exactly 1, real */
    p.model = LAM_SHEET_UNIVERSAL;
    p.exciton = 0;
    double complex s;
    lam_sheet_conductivity(&p, 2.0, &s, NULL);
    check_abs(cabs(s - 1.0), 0, 0, "universal model is sigma0");
    /* Mak et al., PRL 101, 196405 (2008): flat (2.3 +- 0.2) % over 0.5-1.2 eV
     * at low doping: Kubo without exciton, mu = 0.2 eV gives 1 within 10 % */
    p = lam_sheet_params_default();
    p.exciton = 0;
    lam_sheet_conductivity(&p, 0.9, &s, NULL);
    check_rel(creal(s), 1.0, 0.1, "Re sigma/sigma0 flat near 0.9 eV (Mak et al. 2008)");
}

int main(void)
{
    check_begin("test_conductivity");
    gsl_set_error_handler_off();
    if (!check_refdata_dir())
        check_skip("tests/data not found");
    test_constants();
    test_zero_temperature();
    test_finite_temperature();
    test_against_weber();
    return check_summary();
}
