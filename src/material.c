/* material.c - dispersion models (constant, Sellmeier, Lorentz, compact Si,
 * tables) and the built-in materials with their sources. */
#include "lamina/material.h"
#include "material_internal.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <gsl/gsl_spline.h>

#define HC_EV_NM 1239.841984 /* h c in eV nm (exact SI constants) */

/* Compact Si model, fitted by least squares to M. A. Green, Sol. Energy
 * Mater. Sol. Cells 92, 1305 (2008): n over 375-815 nm, ln k over
 * 385-815 nm (weights 1/max(0.004, 5 % k)). Poles at 3.48 and 4.02 eV sit
 * near the E1 and E2 critical points; they are fit parameters, not claims. */
static const double si_a = 2.5740530863457796, si_b = 32.96403368285421,
                    si_c = 103.78829375613063, si_e1 = 3.48, si_e2 = 4.02;
static const double si_lnk[4] = {0.9142036208954436, -5.85459328590334,
                                 14.379978264258266, -16.725978815246535};

/* The Sellmeier materials of other crystals and substrates, with their
 * published coefficients (refractiveindex.info formula 1: n^2 - 1 = A +
 * sum B l^2 / (l^2 - C^2), l in um; formula 2 lists C^2, converted here). */
static int formula_builtin(const char *name, lam_material *m)
{
    m->kind = LAM_MATERIAL_SELLMEIER;
    if (!strcasecmp(name, "hBN-Lee")) {
        /* S. Y. Lee et al., Phys. Status Solidi B 256, 1800417 (2019), in-plane,
         * published 450-1200 nm; transparent, so the formula is used to 380 nm */
        m->terms = 1;
        m->b[0] = 3.263, m->c[0] = 0.1644;
        m->min_nm = 380, m->max_nm = 1200;
        m->source = "Lee et al., Phys. Status Solidi B 256, 1800417 (2019), extended to 380 nm";
    } else if (!strcasecmp(name, "hBN-Rah")) {
        /* Y. Rah et al., Opt. Lett. 44, 3797 (2019), in-plane, 400-1600 nm:
         * n^2 - 1 = 3.3361 l^2 / (l^2 - 0.026322 um^2) */
        m->terms = 1;
        m->b[0] = 3.3361, m->c[0] = sqrt(0.026322);
        m->min_nm = 380, m->max_nm = 1600;
        m->source = "Rah et al., Opt. Lett. 44, 3797 (2019), extended to 380 nm";
    } else if (!strcasecmp(name, "Si3N4")) {
        /* K. Luke et al., Opt. Lett. 40, 4823 (2015), 310-5504 nm */
        m->terms = 2;
        m->b[0] = 3.0249, m->c[0] = 0.1353406;
        m->b[1] = 40314, m->c[1] = 1239.842;
        m->min_nm = 310, m->max_nm = 5504;
        m->source = "Luke et al., Opt. Lett. 40, 4823 (2015) Sellmeier";
    } else if (!strcasecmp(name, "Si3N4-Philipp")) {
        /* H. R. Philipp, J. Electrochem. Soc. 120, 295 (1973), in the form of
         * T. Baak, Appl. Opt. 21, 1069 (1982), 207-1240 nm */
        m->terms = 1;
        m->b[0] = 2.8939, m->c[0] = 0.13967;
        m->min_nm = 207, m->max_nm = 1240;
        m->source = "Philipp, J. Electrochem. Soc. 120, 295 (1973) (Baak 1982 Sellmeier)";
    } else {
        return 0;
    }
    return 1;
}

/* A compiled table (src/material_tables.c), referenced, not copied. */
static int static_builtin(const char *name, lam_material *m)
{
    const lam__nk_table *t = lam__nk_table_find(name);
    if (!t)
        return 0;
    snprintf(m->name, sizeof m->name, "%s", t->name);
    m->kind = LAM_MATERIAL_STATIC;
    m->rows = t->rows;
    m->nk = t->nk;
    m->min_nm = t->min_nm;
    m->max_nm = t->max_nm;
    m->source = t->source;
    return 1;
}

lam_status lam_material_builtin(const char *name, lam_material *out, lam_error *err)
{
    lam_material m;
    memset(&m, 0, sizeof m);
    snprintf(m.name, sizeof m.name, "%s", name);
    if (!strcasecmp(name, "air") || !strcasecmp(name, "vacuum")) {
        m.kind = LAM_MATERIAL_CONSTANT;
        m.constant = 1.0;
        m.min_nm = 1;
        m.max_nm = 1e9;
        m.source = "n = 1";
    } else if (!strcasecmp(name, "water")) {
        m.kind = LAM_MATERIAL_CONSTANT;
        m.constant = 1.333;
        m.min_nm = 300;
        m.max_nm = 1000;
        m.source = "n = 1.333 (dispersion neglected)";
    } else if (!strcasecmp(name, "SiO2")) {
        /* I. H. Malitson, J. Opt. Soc. Am. 55, 1205 (1965), fused silica */
        m.kind = LAM_MATERIAL_SELLMEIER;
        m.terms = 3;
        m.b[0] = 0.6961663, m.c[0] = 0.0684043;
        m.b[1] = 0.4079426, m.c[1] = 0.1162414;
        m.b[2] = 0.8974794, m.c[2] = 9.896161;
        m.min_nm = 210;
        m.max_nm = 6700;
        m.source = "Malitson, JOSA 55, 1205 (1965) Sellmeier";
    } else if (!strcasecmp(name, "Si")) {
        m.kind = LAM_MATERIAL_SI_EDGE;
        m.min_nm = 380;
        m.max_nm = 820;
        m.source = "compact model fitted to Green, SOLMAT 92, 1305 (2008)";
    } else if (!strcasecmp(name, "hBN")) {
        /* single-oscillator Sellmeier fitted here to D. V. Grudinin et al.,
         * Mater. Horiz. 10, 2427 (2023), in-plane, 380-820 nm */
        m.kind = LAM_MATERIAL_SELLMEIER;
        m.terms = 1;
        m.b[0] = 3.7282427040031396, m.c[0] = 0.136;
        m.min_nm = 380;
        m.max_nm = 820;
        m.source = "single-oscillator fit to Grudinin et al., Mater. Horiz. 10, 2427 (2023)";
    } else if (!strcasecmp(name, "PMMA")) {
        /* N. Sultanova, S. Kasarova, I. Nikolov, Acta Phys. Pol. A 116, 585
         * (2009): n^2 - 1 = 1.1819 l^2 / (l^2 - 0.011313 um^2), published for
         * 437-1052 nm; the transparent formula is used down to 380 nm */
        m.kind = LAM_MATERIAL_SELLMEIER;
        m.terms = 1;
        m.b[0] = 1.1819, m.c[0] = 0.10636258;
        m.min_nm = 380;
        m.max_nm = 1052;
        m.source = "Sultanova et al., Acta Phys. Pol. A 116, 585 (2009), extended to 380 nm";
    } else if (!formula_builtin(name, &m) && !static_builtin(name, &m)) {
        return lam_error_set(err, LAM_EINVAL,
                             "unknown material '%s' (built in: air, SiO2, Si, hBN, hBN-Lee, "
                             "hBN-Rah, PMMA, Si3N4, Si3N4-Philipp, water, MoS2-1L, MoS2-2L, MoS2-3L, MoS2-1L-Song, "
                             "MoS2-bulk, WS2-1L, WSe2-1L, WSe2-1L-Gu, graphite, PDMS; or give a "
                             "CSV file wavelength_nm,n,k)",
                             name);
    }
    *out = m;
    return LAM_OK;
}

void lam_material_clear(lam_material *m)
{
    if (!m || m->kind != LAM_MATERIAL_TABLE)
        return;
    gsl_spline_free(m->spline_n);
    gsl_spline_free(m->spline_k);
    free(m->energy_ev);
    m->spline_n = m->spline_k = NULL;
    m->energy_ev = m->n = m->k = NULL;
    m->rows = 0;
}

lam_status lam_material_from_table(const char *name, const double *wl, const double *n,
                                   const double *k, size_t rows, lam_material *out,
                                   lam_error *err)
{
    if (rows < 4)
        return lam_error_set(err, LAM_EFORMAT, "a table needs at least 4 rows, not %zu", rows);
    int increasing = wl[1] > wl[0];
    for (size_t i = 0; i < rows; i++) {
        if (!isfinite(wl[i]) || !isfinite(n[i]) || !isfinite(k[i]) || wl[i] <= 0 ||
            n[i] <= 0 || k[i] < 0)
            return lam_error_set(err, LAM_ERANGE,
                                 "row %zu: need finite wavelength > 0, n > 0, k >= 0", i + 1);
        if (i && (increasing ? wl[i] <= wl[i - 1] : wl[i] >= wl[i - 1]))
            return lam_error_set(err, LAM_EFORMAT,
                                 "row %zu: wavelengths must be strictly monotone", i + 1);
    }
    lam_material m;
    memset(&m, 0, sizeof m);
    snprintf(m.name, sizeof m.name, "%s", name);
    m.kind = LAM_MATERIAL_TABLE;
    m.rows = rows;
    m.energy_ev = malloc(3 * rows * sizeof(double));
    if (!m.energy_ev)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a material table");
    m.n = m.energy_ev + rows;
    m.k = m.energy_ev + 2 * rows;
    /* sort by increasing photon energy: reverse an increasing-wavelength table */
    for (size_t i = 0; i < rows; i++) {
        size_t j = increasing ? rows - 1 - i : i;
        m.energy_ev[i] = HC_EV_NM / wl[j];
        m.n[i] = n[j];
        m.k[i] = k[j];
    }
    m.min_nm = HC_EV_NM / m.energy_ev[rows - 1];
    m.max_nm = HC_EV_NM / m.energy_ev[0];
    /* Steffen's monotone cubic: smooth, no overshoot between rows */
    m.spline_n = gsl_spline_alloc(gsl_interp_steffen, rows);
    m.spline_k = gsl_spline_alloc(gsl_interp_steffen, rows);
    if (!m.spline_n || !m.spline_k) {
        lam_material_clear(&m);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a material spline");
    }
    int s1 = gsl_spline_init(m.spline_n, m.energy_ev, m.n, rows);
    int s2 = gsl_spline_init(m.spline_k, m.energy_ev, m.k, rows);
    if (s1 || s2) {
        lam_material_clear(&m);
        return lam_error_gsl(err, s1 ? s1 : s2, "material table interpolation");
    }
    m.source = "user table";
    *out = m;
    return LAM_OK;
}

/* One data row "wavelength_nm,n,k" into v. */
static lam_status nk_row(char *p, size_t lineno, double v[3], lam_error *err)
{
    char *end = p;
    for (int i = 0; i < 3; i++) {
        errno = 0;
        v[i] = strtod(end, &end);
        if (errno || !isfinite(v[i]))
            return lam_error_set(err, LAM_EFORMAT, "line %zu: not a finite number", lineno);
        while (*end == ' ' || *end == '\t')
            end++;
        if (i < 2 && *end++ != ',')
            return lam_error_set(err, LAM_EFORMAT, "line %zu: expected 3 comma-separated values",
                                 lineno);
    }
    return LAM_OK;
}

/* The interleaved rows (wavelength, n, k) as a material named after the
 * file's base name. */
static lam_status nk_material(const char *path, const double *buf, size_t rows,
                              lam_material *out, lam_error *err)
{
    double *wl = malloc(rows * 3 * sizeof *wl);
    if (!wl)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a table");
    for (size_t i = 0; i < rows; i++) {
        wl[i] = buf[3 * i];
        wl[rows + i] = buf[3 * i + 1];
        wl[2 * rows + i] = buf[3 * i + 2];
    }
    const char *base = strrchr(path, '/');
    lam_status st = lam_material_from_table(base ? base + 1 : path, wl, wl + rows, wl + 2 * rows,
                                            rows, out, err);
    if (!st)
        snprintf(out->file, sizeof out->file, "%s", path);
    free(wl);
    return st;
}

lam_status lam_material_load_csv(const char *path, lam_material *out, lam_error *err)
{
    FILE *fp = fopen(path, "r");
    if (!fp) {
        lam_error_set(err, LAM_EIO, "cannot open material table: %s", strerror(errno));
        lam_error_set_file(err, path);
        return LAM_EIO;
    }
    size_t cap = 256, rows = 0, lineno = 0;
    double *buf = malloc(cap * 3 * sizeof *buf);
    char line[512];
    lam_status st = LAM_OK;
    int header_seen = 0;
    while (!st && buf && fgets(line, sizeof line, fp)) {
        lineno++;
        char *p = line;
        while (*p == ' ' || *p == '\t')
            p++;
        if (*p == '#' || *p == '\n' || *p == '\r' || *p == '\0')
            continue;
        if (!header_seen) {
            header_seen = 1;
            if (strncasecmp(p, "wavelength_nm", 13) != 0)
                st = lam_error_set(err, LAM_EFORMAT,
                                   "line %zu: expected the header wavelength_nm,n,k", lineno);
            continue;
        }
        double v[3];
        if ((st = nk_row(p, lineno, v, err)))
            break;
        if (rows == 100000) {
            st = lam_error_set(err, LAM_ETOOBIG, "more than 100000 rows");
            break;
        }
        if (rows == cap) {
            double *nb = realloc(buf, 2 * cap * 3 * sizeof *buf);
            if (!nb) {
                st = lam_error_set(err, LAM_ENOMEM, "cannot grow the table");
                break;
            }
            buf = nb, cap *= 2;
        }
        memcpy(&buf[3 * rows++], v, sizeof v);
    }
    fclose(fp);
    if (!buf)
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate a table");
    if (!st && !header_seen)
        st = lam_error_set(err, LAM_EFORMAT, "empty material table");
    if (!st)
        st = nk_material(path, buf, rows, out, err);
    free(buf);
    if (st)
        lam_error_set_file(err, path);
    return st;
}

/* Steffen's monotone cubic (J. Astron. Astrophys. 239, 443 (1990), as in
 * GSL's user tables) in photon energy through the compiled rows, column col;
 * held at the end rows outside them. */
static double steffen_slope(double h0, double h1, double d0, double d1)
{
    double p = (d0 * h1 + d1 * h0) / (h0 + h1);
    return (copysign(1.0, d0) + copysign(1.0, d1)) * fmin(fmin(fabs(d0), fabs(d1)), 0.5 * fabs(p));
}

static double static_eval(const double (*t)[3], size_t rows, double nm, int col)
{
    if (nm <= t[0][0])
        return t[0][col];
    if (nm >= t[rows - 1][0])
        return t[rows - 1][col];
    size_t lo = 0, hi = rows - 1;
    while (hi - lo > 1) {
        size_t mid = (lo + hi) / 2;
        if (t[mid][0] <= nm)
            lo = mid;
        else
            hi = mid;
    }
    /* energies x of rows lo-1 .. hi+1 (decreasing with the row) */
    double x0 = HC_EV_NM / t[lo][0], x1 = HC_EV_NM / t[hi][0], e = HC_EV_NM / nm;
    double h = x0 - x1, d = (t[lo][col] - t[hi][col]) / h, m0 = d, m1 = d;
    if (lo > 0) {
        double xa = HC_EV_NM / t[lo - 1][0];
        m0 = steffen_slope(xa - x0, h, (t[lo - 1][col] - t[lo][col]) / (xa - x0), d);
    }
    if (hi + 1 < rows) {
        double xb = HC_EV_NM / t[hi + 1][0];
        m1 = steffen_slope(h, x1 - xb, d, (t[hi][col] - t[hi + 1][col]) / (x1 - xb));
    }
    /* Hermite cubic on [x1, x0] in u = (e - x1) / h, slopes in energy */
    double u = (e - x1) / h, u2 = u * u, u3 = u2 * u;
    return (2 * u3 - 3 * u2 + 1) * t[hi][col] + (u3 - 2 * u2 + u) * h * m1 +
           (-2 * u3 + 3 * u2) * t[lo][col] + (u3 - u2) * h * m0;
}

double complex lam_material_index_eval(const lam_material *m, double wavelength_nm)
{
    switch (m->kind) {
    case LAM_MATERIAL_CONSTANT:
        return m->constant;
    case LAM_MATERIAL_SELLMEIER: {
        double l2 = (wavelength_nm * 1e-3) * (wavelength_nm * 1e-3);
        double n2 = 1.0 + m->a0;
        for (size_t i = 0; i < m->terms; i++)
            n2 += m->b[i] * l2 / (l2 - m->c[i] * m->c[i]);
        return sqrt(n2);
    }
    case LAM_MATERIAL_LORENTZ: {
        double e = HC_EV_NM / wavelength_nm;
        double complex eps = m->a0;
        for (size_t i = 0; i < m->terms; i++)
            eps += m->b[i] / (m->c[i] * m->c[i] - e * e - I * m->g[i] * e);
        double complex nn = csqrt(eps);
        return cimag(nn) < 0 ? -nn : nn;
    }
    case LAM_MATERIAL_SI_EDGE: {
        double e = HC_EV_NM / wavelength_nm, e2 = e * e;
        double n = sqrt(si_a + si_b / (si_e1 * si_e1 - e2) + si_c / (si_e2 * si_e2 - e2));
        double lnk = ((si_lnk[0] * e + si_lnk[1]) * e + si_lnk[2]) * e + si_lnk[3];
        return n + I * exp(lnk);
    }
    case LAM_MATERIAL_TABLE: {
        double e = HC_EV_NM / wavelength_nm;
        double n = gsl_spline_eval(m->spline_n, e, NULL);
        double k = gsl_spline_eval(m->spline_k, e, NULL);
        return n + I * (k > 0 ? k : 0.0);
    }
    case LAM_MATERIAL_STATIC: {
        double k = static_eval(m->nk, m->rows, wavelength_nm, 2);
        return static_eval(m->nk, m->rows, wavelength_nm, 1) + I * (k > 0 ? k : 0.0);
    }
    }
    return 1.0;
}

lam_status lam_material_index(const lam_material *m, double wavelength_nm,
                              double complex *out, lam_error *err)
{
    if (!(wavelength_nm >= m->min_nm * (1 - 1e-12) && wavelength_nm <= m->max_nm * (1 + 1e-12)))
        return lam_error_set(err, LAM_ERANGE,
                             "material %s is modelled for %.0f-%.0f nm, not %.1f nm", m->name,
                             m->min_nm, m->max_nm, wavelength_nm);
    double nm = wavelength_nm;
    if (nm < m->min_nm)
        nm = m->min_nm;
    if (nm > m->max_nm)
        nm = m->max_nm;
    *out = lam_material_index_eval(m, nm);
    return LAM_OK;
}
