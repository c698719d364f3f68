/*
 * lamina/material.h - optical constants of bulk materials.
 *
 * Convention: time dependence exp(-i omega t), complex index N = n + i k with
 * k >= 0 for absorbers. Wavelengths are vacuum wavelengths in nm (tables
 * published in air wavelengths differ by < 3e-4 relative: ignored).
 *
 * Built-in materials (lam_material_builtin):
 *   "air"/"vacuum"  n = 1
 *   "SiO2"          Malitson (1965) 3-term Sellmeier, 210-6700 nm
 *   "Si"            crystalline Si, a compact model fitted here to Green
 *                   (2008): n^2 = a + b/(E1^2 - E^2) + c/(E2^2 - E^2),
 *                   ln k = cubic in photon energy E; 380-820 nm; within
 *                   |dn| <= 0.0073 and |dk| <= 0.82 * max(0.004, 5 % of k)
 *                   of the published table over 400-800 nm (tests/test_material.c)
 *   "hBN"           hexagonal BN in-plane, single-oscillator Sellmeier fitted
 *                   here to Grudinin et al. (2023), 380-820 nm
 *   "PMMA"          Sultanova et al. (2009) Sellmeier, 380-1052 nm (the
 *                   published range starts at 437 nm; the transparent formula
 *                   is used below it), for polymer residue
 *   "water"         n = 1.333 (for immersion objectives; dispersion ignored)
 * User materials: CSV "wavelength_nm,n,k" (lam_material_load_csv), interpolated
 * by a monotone cubic (Steffen) in photon energy, never extrapolated.
 *
 * Asking for a wavelength outside a model's range is LAM_ERANGE.
 * Ownership: lam_material_builtin fills caller storage that owns nothing;
 * lam_material_load_csv allocates tables released by lam_material_clear.
 */
#ifndef LAMINA_MATERIAL_H
#define LAMINA_MATERIAL_H

#include <complex.h>
#include <stddef.h>
#include "lamina/error.h"

typedef enum lam_material_kind {
    LAM_MATERIAL_CONSTANT,
    LAM_MATERIAL_SELLMEIER, /* n^2 = 1 + A + sum B_i l^2 / (l^2 - C_i^2), l in um */
    LAM_MATERIAL_LORENTZ,   /* eps = eps_inf + sum A_j / (E_j^2 - E^2 - i g_j E), eV */
    LAM_MATERIAL_SI_EDGE,   /* the compact Si model described above */
    LAM_MATERIAL_TABLE      /* tabulated n, k */
} lam_material_kind;

#define LAM_MATERIAL_MAX_TERMS 6
#define LAM_MATERIAL_NAME_MAX 64

typedef struct lam_material {
    char name[LAM_MATERIAL_NAME_MAX];
    lam_material_kind kind;
    double min_nm, max_nm;          /* validity range */
    double complex constant;        /* CONSTANT */
    double a0;                      /* SELLMEIER A, LORENTZ eps_inf */
    size_t terms;
    double b[LAM_MATERIAL_MAX_TERMS], c[LAM_MATERIAL_MAX_TERMS],
        g[LAM_MATERIAL_MAX_TERMS];  /* coefficients per term */
    /* TABLE: rows sorted by photon energy, with spline state */
    size_t rows;
    double *energy_ev, *n, *k;
    void *spline_n, *spline_k;      /* gsl_spline*, owned */
    const char *source;             /* citation for reports */
    char file[512];                 /* the CSV it was read from, or "" */
} lam_material;

/* Fill *out with a built-in material by (case-insensitive) name: air,
 * vacuum, water, SiO2, Si, hBN, PMMA. LAM_EINVAL for any other name, with
 * a message that lists them. No allocation (built-ins are formulas). */
lam_status lam_material_builtin(const char *name, lam_material *out, lam_error *err);

/* Load "wavelength_nm,n,k" rows (header line required, '#' comments
 * allowed). At least 4 rows, strictly monotone wavelengths, finite values,
 * n > 0, k >= 0. The error names the file and line. */
lam_status lam_material_load_csv(const char *path, lam_material *out, lam_error *err);

/* Build a table material from arrays (copied; the same checks as
 * lam_material_load_csv); release with lam_material_clear. */
lam_status lam_material_from_table(const char *name, const double *wavelength_nm,
                                   const double *n, const double *k, size_t rows,
                                   lam_material *out, lam_error *err);

/* Release the tables of a TABLE material; safe on any kind. */
void lam_material_clear(lam_material *m);

/* Complex index at a vacuum wavelength. LAM_ERANGE outside the range. */
lam_status lam_material_index(const lam_material *m, double wavelength_nm,
                              double complex *out, lam_error *err);

/* Unchecked evaluation for inner loops after the range has been checked. */
double complex lam_material_index_eval(const lam_material *m, double wavelength_nm);

#endif
