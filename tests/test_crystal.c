/* test_crystal.c - other crystals and substrates (issue 14): the built-in
 * n,k of hBN, TMDs, Si3N4, PDMS and graphite against the published files in
 * tests/data/nk; the crystal records and the setup's material key; the
 * issue's transfer-matrix check values computed here by an independent 2x2
 * characteristic-matrix product (Born and Wolf, Principles of Optics,
 * sec. 1.6) from the published tables, and lamina's predictions against
 * them within 2e-3 + 2 %. */
#include "check.h"
#include "refdata.h"
#include "lamina/crystal.h"
#include "lamina/material.h"
#include "lamina/model.h"
#include "lamina/setup.h"

#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static refdata_nk tab, tab2; /* large: static */

static double complex idx(const lam_material *m, double nm)
{
    double complex n = NAN;
    lam_material_index(m, nm, &n, NULL);
    return n;
}

/* A formula material against its published file over 450-800 nm. */
static void formula_vs_file(const char *name, const char *file, const char *source)
{
    lam_material m;
    refdata_formula f;
    if (!check_int(lam_material_builtin(name, &m, NULL), LAM_OK, "%s built in", name) ||
        !check_true(refdata_load_formula(file, &f) == 0, "read %s", file))
        return;
    double worst = 0;
    for (double nm = 450; nm <= 800; nm += 5)
        worst = fmax(worst, fabs(creal(idx(&m, nm)) - refdata_formula_n(&f, nm)));
    check_abs(worst, 0, 1e-9, "%s equals %s, 450-800 nm", name, source);
    check_abs(cimag(idx(&m, 550)), 0, 0, "%s is lossless", name);
}

static void test_formulas(void)
{
    formula_vs_file("hBN-Lee", "hBN-o-Lee2018.yml", "Lee et al., PSS B 256, 1800417 (2019)");
    formula_vs_file("hBN-Rah", "hBN-o-Rah2019.yml", "Rah et al., Opt. Lett. 44, 3797 (2019)");
    formula_vs_file("Si3N4", "Si3N4-Luke2015.yml", "Luke et al., Opt. Lett. 40, 4823 (2015)");
    formula_vs_file("Si3N4-Philipp", "Si3N4-Philipp1973.yml",
                    "Philipp, J. Electrochem. Soc. 120, 295 (1973)");
    lam_material m;
    /* tests/data/nk/README.md reader check values */
    lam_material_builtin("hBN-Lee", &m, NULL);
    check_abs(creal(idx(&m, 550)), 2.14083, 2e-5, "hBN Lee n(550) = 2.14083 (nk README)");
    double at400 = creal(idx(&m, 400));
    check_true(isfinite(at400) && at400 > creal(idx(&m, 450)),
               "Lee's transparent formula extends to 400 nm with normal dispersion");
    lam_material_builtin("hBN-Rah", &m, NULL);
    check_abs(creal(idx(&m, 550)), 2.15733, 2e-5, "hBN Rah n(550) = 2.15733 (nk README)");
    lam_material_builtin("Si3N4", &m, NULL);
    check_abs(creal(idx(&m, 550)), 2.05230, 2e-5, "Si3N4 Luke n(550) = 2.05230 (nk README)");
    check_abs(creal(idx(&m, 633)), 2.03944, 2e-5, "Si3N4 Luke n(633) = 2.03944 (nk README)");
}

/* A compiled table against its published file: worst |dn|, |dk| over a range. */
static void table_vs_file(const char *name, const char *file, double lo, double hi, double tol,
                          const char *what)
{
    lam_material m;
    if (!check_int(lam_material_builtin(name, &m, NULL), LAM_OK, "%s built in", name) ||
        !check_true(refdata_load_nk(file, &tab) == 0, "read %s", file))
        return;
    double wn = 0, wk = 0;
    for (double nm = lo; nm <= hi; nm += 0.5) {
        double n, k;
        refdata_interp(&tab, nm, &n, &k);
        double complex N = idx(&m, nm);
        wn = fmax(wn, fabs(creal(N) - n));
        wk = fmax(wk, fabs(cimag(N) - k));
    }
    check_abs(fmax(wn, wk), 0, tol, "%s vs %s (%s), %.0f-%.0f nm: worst |dn|, |dk|", name, file,
              what, lo, hi);
}

/* At the published rows kept (every even nm), the table is the row. */
static void rows_exact(const char *name, const char *file)
{
    lam_material m;
    if (lam_material_builtin(name, &m, NULL) || refdata_load_nk(file, &tab))
        return;
    double w = 0;
    for (size_t i = 0; i < tab.rows; i++) {
        double nm = tab.wl_nm[i];
        if (nm < 380 || nm > 900 || fabs(nm - 2 * round(nm / 2)) > 1e-6)
            continue;
        double complex N = idx(&m, nm);
        w = fmax(w, fmax(fabs(creal(N) - tab.n[i]), fabs(cimag(N) - tab.k[i])));
    }
    check_abs(w, 0, 1e-9, "%s equals the rows of %s it keeps", name, file);
}

static void test_tables(void)
{
    /* Hsu et al. rows every 0.22 nm carry point noise; the compiled table
     * averages them over 2 nm, so single rows differ by their noise */
    table_vs_file("MoS2-1L", "MoS2-1L-Hsu2019.yml", 400, 800, 0.08, "2 nm means");
    table_vs_file("MoS2-2L", "MoS2-2L-Hsu2019.yml", 400, 845, 0.02, "every row");
    table_vs_file("MoS2-3L", "MoS2-3L-Hsu2019.yml", 400, 845, 0.02, "every row");
    table_vs_file("WS2-1L", "WS2-1L-Hsu2019.yml", 400, 800, 0.12, "2 nm means");
    table_vs_file("WSe2-1L", "WSe2-1L-Hsu2019.yml", 400, 800, 0.12, "2 nm means");
    /* every other row of 1 nm tables: the rows exactly, and the cubic within
     * 0.03 of the linear interpolation of the dropped rows */
    table_vs_file("MoS2-1L-Song", "MoS2-1L-Song2019.yml", 382, 898, 0.03, "every 2 nm row");
    table_vs_file("MoS2-bulk", "MoS2-bulk-Song2019.yml", 382, 898, 0.03, "every 2 nm row");
    table_vs_file("WSe2-1L-Gu", "WSe2-1L-Gu2019.yml", 382, 898, 0.03, "every 2 nm row");
    rows_exact("MoS2-bulk", "MoS2-bulk-Song2019.yml");
    rows_exact("WSe2-1L-Gu", "WSe2-1L-Gu2019.yml");
    table_vs_file("graphite", "graphite-o-Djurisic1999.yml", 345, 910, 0.003, "every row");
    table_vs_file("PDMS", "PDMS-Sylgard184-Gupta2019.yml", 350, 900, 2e-4, "every 10 nm row");
    lam_material m;
    lam_material_builtin("MoS2-1L", &m, NULL);
    check_abs(cabs(idx(&m, 385) - idx(&m, 398)), 0, 0,
              "MoS2-1L (Hsu, from 397 nm) is held at its first row down to 380 nm");
    lam_error err;
    lam_error_clear(&err);
    double complex out;
    check_int(lam_material_index(&m, 379, &out, &err), LAM_ERANGE,
              "MoS2-1L at 379 nm is a range error");
    /* the Hsu 1L spot value the issue's check values rest on, 2 nm mean vs
     * the published row: MoS2 n(600 nm) ~ 4.60-4.67 (rows 0.60011-0.60194) */
    check_abs(creal(idx(&m, 600.1)), 4.63, 0.05, "MoS2-1L n(600 nm), Hsu 2019 rows");
}

static void test_records(void)
{
    const lam_crystal *c = lam_crystal_find("mos2/song");
    check_true(c && !strcmp(c->name, "MoS2/Song") && c->kind == LAM_CRYSTAL_LAYERED,
               "MoS2/Song found case-insensitively, layered");
    check_abs(c ? c->layer_nm : 0, 0.615, 0, "MoS2 layer 0.615 nm");
    check_abs(lam_crystal_find("WS2")->layer_nm, 0.616, 0, "WS2 layer 0.616 nm");
    check_abs(lam_crystal_find("WSe2")->layer_nm, 0.649, 0, "WSe2 layer 0.649 nm");
    check_abs(lam_crystal_find("hBN")->layer_nm, 0.333, 0, "hBN layer 0.333 nm");
    check_str(lam_crystal_layer_index(lam_crystal_find("MoS2"), 1), "MoS2-1L", "MoS2 1L: Hsu");
    check_str(lam_crystal_layer_index(lam_crystal_find("MoS2"), 5), "MoS2-bulk", "MoS2 5L: bulk");
    const lam_crystal *x;
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_crystal_lookup("MoTe2", &x, &err), LAM_EINVAL, "unknown crystal refused");
    check_true(strstr(err.message, "hBN") && strstr(err.message, "WSe2"),
               "the message lists the materials (%s)", err.message);
    for (size_t i = 0; i < lam_crystal_count(); i++) {
        const lam_crystal *k = lam_crystal_at(i);
        lam_material m;
        for (size_t N = 1; N <= 4 && k->kind != LAM_CRYSTAL_SHEETS; N++)
            check_int(lam_material_builtin(lam_crystal_layer_index(k, N), &m, NULL), LAM_OK,
                      "%s %zuL has a built-in n,k", k->name, N);
    }
}

/* The index-scale prior against the published hBN indices computed here:
 * (n - 1) ratios of Lee 2019 and Rah 2019 to Grudinin 2023, 450-650 nm. */
static void test_index_scale(void)
{
    refdata_formula lee, rah;
    if (!check_true(refdata_load_formula("hBN-o-Lee2018.yml", &lee) == 0 &&
                        refdata_load_formula("hBN-o-Rah2019.yml", &rah) == 0 &&
                        refdata_load_nk("hBN-o-Grudinin2023.yml", &tab) == 0,
                    "read the three hBN files"))
        return;
    double sl = 0, sr = 0;
    int n = 0;
    for (double nm = 450; nm <= 650; nm += 10, n++) {
        double g, k;
        refdata_interp(&tab, nm, &g, &k);
        sl += (refdata_formula_n(&lee, nm) - 1) / (g - 1);
        sr += (refdata_formula_n(&rah, nm) - 1) / (g - 1);
    }
    double mean = (1 + sl / n + sr / n) / 3;
    double mu, sd;
    check_int(lam_crystal_index_scale_prior(lam_crystal_find("hBN"), &mu, &sd, NULL), LAM_OK,
              "hBN index-scale prior");
    check_abs(mu, mean, 0.01, "prior mean = mean (n-1) ratio of Grudinin, Lee, Rah");
    check_true(fabs(1 - mu) < 1.6 * sd && fabs(sl / n - mu) < 1.6 * sd &&
                   fabs(sr / n - mu) < 1.6 * sd,
               "every published hBN index within 1.6 sd of the prior (sd %.3f)", sd);
    check_true(sd < 0.08, "the prior is not wider than needed (sd %.3f)", sd);
}

static void test_setup(void)
{
    lam_setup s;
    lam_setup_default(&s);
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_setup_set_material(&s, "hbn", &err), LAM_OK, "material hBN (any case)");
    check_true(s.flake_as_film && s.flake_layer_films == 0 && !strcmp(s.flake, "hBN") &&
                   s.interlayer_nm == 0.333 &&
                   lam_setup_crystal_kind(&s) == LAM_CRYSTAL_CONTINUOUS,
               "hBN: a continuous film of 0.333 nm per layer");
    check_int(lam_setup_set_material(&s, "MoS2", &err), LAM_OK, "material MoS2");
    check_true(s.flake_layer_films == 3 && !strcmp(s.flake_film.name, "MoS2-bulk") &&
                   !strcmp(s.flake_layer_film[0].name, "MoS2-1L") &&
                   !strcmp(s.flake_layer_film[2].name, "MoS2-3L"),
               "MoS2: 1L, 2L, 3L tables and the bulk film");
    check_int(lam_setup_set_material(&s, "graphene", &err), LAM_OK, "back to graphene");
    check_true(!s.flake_as_film && s.interlayer_nm == 0.335, "graphene: sheets again");
    check_int(lam_setup_set_material(&s, "MoTe2", &err), LAM_ERANGE, "MoTe2 refused");
    check_true(strstr(err.message, "key material") != NULL, "message names the key (%s)",
               err.message);
    lam_setup_clear(&s);
    /* a file: a crystal with a graphene conductivity model is refused */
    lam_setup_default(&s);
    check_int(lam_setup_parse("{\"schema\":\"lamina-setup/1\",\"material\":\"hBN\","
                              "\"conductivity\":{\"model\":\"kubo\"}}",
                              ".", &s, &err),
              LAM_EFORMAT, "conductivity.model with hBN refused");
    lam_setup_clear(&s);
    /* round trip */
    lam_setup_default(&s);
    lam_setup_set_material(&s, "WSe2/Gu", &err);
    char path[512];
    check_path(path, sizeof path, check_tmpdir(), "wse2.setup.json");
    check_int(lam_setup_save(&s, path, NULL, &err), LAM_OK, "save a WSe2/Gu setup");
    lam_setup t;
    lam_setup_default(&t);
    check_int(lam_setup_load(path, &t, &err), LAM_OK, "read it back (%s)", err.message);
    check_str(t.flake, "WSe2/Gu", "material survives the round trip");
    lam_setup_clear(&t);
    lam_setup_clear(&s);
}

/* ---- the check values, by an independent transfer-matrix product ---- */

typedef struct film {
    double complex n;
    double d;
} film;

/* Normal-incidence reflectance of films (top down) on a substrate, from
 * air: [B; C] = prod M_j [1; n_sub], M = [[cos x, -i sin x / n], [-i n
 * sin x, cos x]], x = 2 pi n d / lambda; r = (B - C) / (B + C). */
static double reflectance(const film *f, int count, double complex nsub, double wl)
{
    double complex B = 1, C = nsub;
    for (int j = count - 1; j >= 0; j--) {
        double complex x = 2 * M_PI * f[j].n * f[j].d / wl;
        double complex b = ccos(x) * B - I * csin(x) / f[j].n * C;
        double complex c = -I * f[j].n * csin(x) * B + ccos(x) * C;
        B = b, C = c;
    }
    double complex r = (B - C) / (B + C);
    return creal(r * conj(r));
}

/* Contrast of a film of n,k on SiO2 (Malitson) of thickness ox on Si
 * (Green 2008), all read from tests/data/nk. */
static double ref_contrast(double complex nf, double d, double ox, double wl)
{
    refdata_formula sio2;
    double nsi, ksi;
    refdata_load_formula("SiO2-fused-Malitson1965.yml", &sio2);
    refdata_interp(&tab2, wl, &nsi, &ksi);
    film f[2] = {{nf, d}, {refdata_formula_n(&sio2, wl), ox}};
    double rs = reflectance(f + 1, 1, nsi + I * ksi, wl), rf = reflectance(f, 2, nsi + I * ksi, wl);
    return (rs - rf) / rs;
}

static double tab_index(const char *file, double wl, double complex *n)
{
    double nn, kk;
    if (refdata_load_nk(file, &tab))
        return -1;
    refdata_interp(&tab, wl, &nn, &kk);
    *n = nn + I * kk;
    return 0;
}

/* lamina's monochromatic contrast at normal incidence (what `predict
 * --material M --oxide OX --na 0 --wavelength WL` prints). */
static double lamina_contrast(const char *material, double d, double ox, double wl)
{
    lam_setup s;
    lam_setup_default(&s);
    lam_model *m = NULL;
    lam_prediction *p = calloc(1, sizeof *p);
    double out = NAN;
    if (!p || lam_setup_set_material(&s, material, NULL) || lam_setup_set_oxide(&s, ox, NULL) ||
        lam_setup_set_na(&s, 0, NULL) || lam_model_alloc(&s, 3, wl, &m, NULL))
        goto done;
    lam_model_point pt = lam_model_point_default(m);
    double c[1][LAM_MAX_CHANNELS];
    if (lam_setup_crystal_kind(&s) == LAM_CRYSTAL_CONTINUOUS) {
        if (!lam_model_eval_films(m, &pt, 1.0, &d, 1, c, NULL))
            out = c[0][0];
    } else if (!lam_model_eval_point(m, &pt, 3, p, NULL)) {
        out = p->contrast[(size_t)lround(d / s.interlayer_nm)][0];
    }
done:
    lam_model_free(m);
    free(p);
    lam_setup_clear(&s);
    return out;
}

typedef struct check_value {
    const char *material, *file; /* lamina's material; the published table */
    double d, ox, wl, issue;     /* film, oxide, wavelength nm; issue 14's value */
} check_value;

static void test_check_values(void)
{
    static const check_value v[] = {
        {"hBN", "hBN-o-Grudinin2023.yml", 0.333, 285, 450, -0.0105},
        {"hBN", "hBN-o-Grudinin2023.yml", 0.333, 285, 550, -0.0076},
        {"hBN", "hBN-o-Grudinin2023.yml", 0.333, 285, 650, +0.020},
        {"hBN", "hBN-o-Grudinin2023.yml", 10, 285, 450, -0.239},
        {"hBN", "hBN-o-Grudinin2023.yml", 10, 285, 550, -0.988},
        {"hBN", "hBN-o-Grudinin2023.yml", 10, 285, 650, +0.566},
        {"hBN", "hBN-o-Grudinin2023.yml", 30, 285, 450, -0.29},
        {"hBN", "hBN-o-Grudinin2023.yml", 30, 285, 550, -4.05},
        {"hBN", "hBN-o-Grudinin2023.yml", 30, 285, 650, +0.68},
        {"hBN", "hBN-o-Grudinin2023.yml", 0.333, 80, 550, +0.026},
        {"MoS2", "MoS2-1L-Hsu2019.yml", 0.615, 285, 450, -0.107},
        {"MoS2", "MoS2-1L-Hsu2019.yml", 0.615, 285, 550, +0.142},
        {"MoS2", "MoS2-1L-Hsu2019.yml", 0.615, 285, 600, +0.461},
        {"MoS2", "MoS2-1L-Hsu2019.yml", 0.615, 285, 650, +0.300},
        {"MoS2", "MoS2-1L-Hsu2019.yml", 0.615, 90, 450, +0.122},
        {"MoS2", "MoS2-1L-Hsu2019.yml", 0.615, 90, 550, +0.304},
        {"MoS2", "MoS2-1L-Hsu2019.yml", 0.615, 90, 600, +0.497},
        {"MoS2", "MoS2-1L-Hsu2019.yml", 0.615, 90, 650, +0.508},
        {"WSe2", "WSe2-1L-Hsu2019.yml", 0.649, 285, 550, +0.434},
        {"WSe2", "WSe2-1L-Hsu2019.yml", 0.649, 285, 600, +0.534},
    };
    if (!check_true(refdata_load_nk("Si-Green2008.yml", &tab2) == 0, "read Si Green 2008"))
        return;
    for (size_t i = 0; i < sizeof v / sizeof v[0]; i++) {
        double complex n = NAN;
        if (!check_true(tab_index(v[i].file, v[i].wl, &n) == 0, "read %s", v[i].file))
            continue;
        double ref = ref_contrast(n, v[i].d, v[i].ox, v[i].wl);
        double tol = 2e-3 + 0.02 * fabs(ref);
        /* the independent product reproduces the issue's (rounded) values */
        check_abs(ref, v[i].issue, 2e-3 + 0.02 * fabs(v[i].issue),
                  "%s %.3g nm on %.0f nm SiO2 at %.0f nm: 2x2 product vs issue 14", v[i].file,
                  v[i].d, v[i].ox, v[i].wl);
        check_abs(lamina_contrast(v[i].material, v[i].d, v[i].ox, v[i].wl), ref, tol,
                  "lamina %s %.3g nm on %.0f nm at %.0f nm vs the 2x2 product", v[i].material,
                  v[i].d, v[i].ox, v[i].wl);
    }
    /* Gorbachev et al., Small 7, 465 (2011): monolayer hBN is most visible
     * near 80 nm oxide, about 2.5 % at 550 nm (from memory) */
    double c80 = lamina_contrast("hBN", 0.333, 80, 550);
    check_abs(c80, 0.025, 0.004, "hBN 1L on 80 nm SiO2 at 550 nm ~ +2.5 %% (Gorbachev 2011)");
    /* Golla et al., APL 102, 161906 (2013): the monolayer's contrast changes
     * sign with wavelength on thick oxide */
    check_true(lamina_contrast("hBN", 0.333, 285, 550) < 0 &&
                   lamina_contrast("hBN", 0.333, 285, 650) > 0,
               "hBN 1L on 285 nm changes sign between 550 and 650 nm (Golla 2013)");
}

/* ---- transmission through a stamp ---- */

/* lamina's monochromatic normal-incidence contrast 1 - T_N / T_0 of N
 * graphene sheets (conductivity model 'model') on a base, in transmission. */
static double lamina_transmission(const char *base, const char *model, size_t N, double wl)
{
    lam_setup s;
    lam_setup_default(&s);
    char json[256];
    snprintf(json, sizeof json,
             "{\"schema\":\"lamina-setup/1\",\"observation\":\"transmission\","
             "\"substrate\":{\"stack\":[],\"base\":\"%s\"},"
             "\"conductivity\":{\"model\":\"%s\"}}",
             base, model);
    lam_model *m = NULL;
    lam_prediction *p = calloc(1, sizeof *p);
    double out = NAN;
    if (p && !lam_setup_parse(json, ".", &s, NULL) && !lam_setup_set_na(&s, 0, NULL) &&
        !lam_model_alloc(&s, 3, wl, &m, NULL) && !lam_model_eval(m, 0, 0, p, NULL))
        out = p->contrast[N][0];
    lam_model_free(m);
    free(p);
    lam_setup_clear(&s);
    return out;
}

static void test_transmission(void)
{
    /* independent: N sheets of y = pi alpha (sigma0; CODATA 2018 alpha)
     * 0.335 nm apart on PDMS (Gupta et al. 2019), from air, normal
     * incidence: [B; C] = prod M [1; n], T = 4 n / |B + C|^2 */
    const double alpha = 7.2973525693e-3, y = M_PI * alpha, wl = 550;
    double n, k;
    if (!check_true(refdata_load_nk("PDMS-Sylgard184-Gupta2019.yml", &tab) == 0, "read PDMS"))
        return;
    refdata_interp(&tab, wl, &n, &k);
    double t0 = 4 * n / ((1 + n) * (1 + n));
    for (int N = 1; N <= 3; N++) {
        double complex B = 1, C = n, x = 2 * M_PI * 0.335 / wl;
        for (int j = 0; j < N; j++) {
            if (j) { /* the air gap between sheets */
                double complex b = ccos(x) * B - I * csin(x) * C;
                C = -I * csin(x) * B + ccos(x) * C;
                B = b;
            }
            C += y * B;
        }
        double complex d = B + C;
        double ref = 1 - 4 * n / creal(d * conj(d)) / t0;
        check_abs(lamina_transmission("PDMS", "universal", (size_t)N, wl), ref, 2e-4,
                  "%dL sigma0 sheets on PDMS in transmission at 550 nm vs the 2x2 product (%.4f)",
                  N, ref);
    }
    /* Nair et al., Science 320, 1308 (2008): suspended graphene removes
     * 2.3 +- 0.1 % of the transmitted white light per layer (pi alpha),
     * linearly in the layer count; the universal sheet gives it */
    check_abs(lamina_transmission("air", "universal", 1, 550), 0.023, 0.001,
              "suspended 1L sigma0 sheet: 1 - T = 2.3 %% (Nair 2008)");
    check_abs(lamina_transmission("air", "universal", 2, 550), 0.046, 0.002,
              "suspended 2L: 4.6 %% (Nair 2008: linear in the layer count)");
    /* the default response (issue 9, fitted to ellipsometry) is ~10 % above
     * sigma0 at 550 nm; on a PDMS stamp about 2 % per layer (issue 14) */
    double c1 = lamina_transmission("PDMS", "kubo", 1, 550);
    check_true(c1 > 0.017 && c1 < 0.025, "1L on PDMS in transmission ~2 %% (%.4f)", c1);
    lam_setup s;
    lam_setup_default(&s);
    lam_error err;
    lam_error_clear(&err);
    lam_model *m = NULL;
    check_int(lam_setup_parse("{\"schema\":\"lamina-setup/1\",\"observation\":\"transmission\"}",
                              ".", &s, &err), LAM_ERANGE, "a setup seen in transmission into Si is refused");
    check_true(strstr(err.message, "transparent base") != NULL, "the message says why (%s)",
               err.message);
    lam_setup_clear(&s);
    lam_setup_default(&s);
    check_int(lam_setup_parse("{\"schema\":\"lamina-setup/1\",\"observation\":\"transmission\","
                              "\"substrate\":{\"stack\":[],\"base\":\"PDMS\"}}",
                              ".", &s, &err), LAM_OK, "observation key read");
    check_true(s.transmission == 1, "transmission set");
    lam_setup_clear(&s);
    lam_setup_default(&s);
    s.transmission = 1; /* e.g. a --stack replacing the stamp: the model refuses it */
    check_int(lam_model_alloc(&s, 2, 0, &m, &err), LAM_EINVAL,
              "transmission into Si is refused (%s)", err.message);
    lam_model_free(m);
    lam_setup_clear(&s);
    lam_setup_default(&s);
    check_int(lam_setup_parse("{\"schema\":\"lamina-setup/1\",\"observation\":\"sideways\"}",
                              ".", &s, &err), LAM_EFORMAT, "an unknown observation refused");
    lam_setup_clear(&s);
}

int main(void)
{
    lam_error_init_gsl();
    check_begin("test_crystal");
    if (!check_refdata_dir())
        check_skip("tests/data/nk not found");
    test_formulas();
    test_tables();
    test_records();
    test_index_scale();
    test_setup();
    test_check_values();
    test_transmission();
    return check_summary();
}
