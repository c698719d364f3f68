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
 *   "hBN-Lee"       Lee et al., Phys. Status Solidi B 256, 1800417 (2019),
 *                   in-plane single oscillator (published 450-1200 nm; the
 *                   transparent formula is used down to 380 nm)
 *   "hBN-Rah"       Rah et al., Opt. Lett. 44, 3797 (2019), in-plane
 *                   (published 400-1600 nm; used down to 380 nm)
 *   "Si3N4"         Luke et al., Opt. Lett. 40, 4823 (2015) Sellmeier, 310-5504 nm
 *   "Si3N4-Philipp" Philipp, J. Electrochem. Soc. 120, 295 (1973), Sellmeier
 *                   form of Baak, Appl. Opt. 21, 1069 (1982), 207-1240 nm
 *   compiled tables (src/material_tables.c, each with its source and
 *                   resampling; interpolated like user tables):
 *     "MoS2-1L"       Hsu et al., Adv. Opt. Mater. 7, 1900239 (2019), 380-856 nm
 *     "MoS2-2L", "MoS2-3L"  Hsu et al. (2019), bilayer and trilayer, 380-850 nm
 *     "MoS2-1L-Song"  Song et al., Adv. Opt. Mater. 7, 1801250 (2019), 380-900 nm
 *     "MoS2-bulk"     Song et al. (2019), bulk, 380-900 nm
 *     "WS2-1L"        Hsu et al. (2019), 380-848 nm
 *     "WSe2-1L"       Hsu et al. (2019), 380-848 nm
 *     "WSe2-1L-Gu"    Gu et al., Nanoscale 11, 22762 (2019), 380-900 nm
 *     "graphite"      Djurisic and Li, J. Appl. Phys. 85, 7404 (1999),
 *                     ordinary ray, 341-913 nm
 *     "PDMS"          Sylgard 184, Gupta et al., ACS Appl. Mater. Interfaces
 *                     11, 28189 (2019), 350-900 nm
 *                   The Hsu tables start at 397 nm: their first row is held
 *                   down to 380 nm (under 1 % of a blue channel's weight).
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
    LAM_MATERIAL_TABLE,     /* tabulated n, k (allocated spline) */
    LAM_MATERIAL_STATIC     /* a compiled table (nk rows), monotone cubic in energy */
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
    const double (*nk)[3];          /* STATIC: rows nm, n, k (increasing nm), not owned */
    const char *source;             /* citation for reports */
    char file[512];                 /* the CSV it was read from, or "" */
} lam_material;

/* Fill *out with a built-in material by (case-insensitive) name: air,
 * vacuum, water, SiO2, Si, hBN, hBN-Lee, hBN-Rah, PMMA, Si3N4,
 * Si3N4-Philipp and the compiled tables above. LAM_EINVAL for any other
 * name, with a message that lists them. No allocation (compiled tables are
 * referenced, not copied). */
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
