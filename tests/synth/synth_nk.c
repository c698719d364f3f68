/* synth_nk.c - optical constants from the published files in tests/data/nk:
 * tables interpolated by a monotone cubic (Fritsch-Carlson) in photon
 * energy, or the file's dispersion formula (refractiveindex.info formulas
 * 1-3: Sellmeier, Sellmeier-2, polynomial) evaluated from its coefficients. */
#include "synth_internal.h"
#include "../check.h"
#include "../refdata.h"

#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>

/* check_refdata_dir() fills a static buffer: one loader at a time, so
 * scenes can be made on several threads. */
static pthread_mutex_t load_lock = PTHREAD_MUTEX_INITIALIZER;

/* Fritsch-Carlson slopes for y over increasing x. */
static void monotone_slopes(const double *x, const double *y, size_t n, double *m)
{
    for (size_t i = 0; i < n; i++) {
        double dl = i > 0 ? (y[i] - y[i - 1]) / (x[i] - x[i - 1]) : NAN;
        double dr = i + 1 < n ? (y[i + 1] - y[i]) / (x[i + 1] - x[i]) : NAN;
        if (i == 0)
            m[i] = dr;
        else if (i + 1 == n)
            m[i] = dl;
        else
            m[i] = dl * dr <= 0 ? 0.0 : 0.5 * (dl + dr);
    }
    for (size_t i = 0; i + 1 < n; i++) {
        double d = (y[i + 1] - y[i]) / (x[i + 1] - x[i]);
        if (d == 0) {
            m[i] = m[i + 1] = 0;
            continue;
        }
        double a = m[i] / d, b = m[i + 1] / d, s = a * a + b * b;
        if (s > 9) {
            double t = 3.0 / sqrt(s);
            m[i] = t * a * d;
            m[i + 1] = t * b * d;
        }
    }
}

static int load_table(const char *file, synth_material *m)
{
    refdata_nk *t = malloc(sizeof *t);
    if (!t)
        return synth_fail("out of memory");
    if (refdata_load_nk(file, t) != 0) {
        free(t);
        return synth_fail("tests/data/nk/%s: cannot read the table", file);
    }
    size_t n = t->rows;
    double *buf = malloc(5 * n * sizeof *buf);
    if (!buf) {
        free(t);
        return synth_fail("out of memory");
    }
    m->rows = n;
    m->ev = buf, m->n = buf + n, m->k = buf + 2 * n, m->dn = buf + 3 * n, m->dk = buf + 4 * n;
    for (size_t i = 0; i < n; i++) {   /* increasing wavelength -> increasing energy */
        size_t j = n - 1 - i;
        m->ev[i] = SYNTH_HC_EVNM / t->wl_nm[j];
        m->n[i] = t->n[j];
        m->k[i] = t->k[j];
    }
    free(t);
    monotone_slopes(m->ev, m->n, n, m->dn);
    monotone_slopes(m->ev, m->k, n, m->dk);
    return 0;
}

/* The "type: formula N" and "coefficients:" lines of a formula file. */
static int load_formula(const char *path, const char *file, synth_material *m)
{
    FILE *fp = fopen(path, "r");
    if (!fp)
        return synth_fail("%s: cannot open", path);
    char line[1024];
    while (fgets(line, sizeof line, fp)) {
        char *p = line + strspn(line, " -");
        if (!strncmp(p, "type: formula ", 14))
            m->formula = atoi(p + 14);
        else if (!strncmp(p, "coefficients:", 13)) {
            char *s = p + 13, *end;
            while (m->ncoef < 24) {
                double v = strtod(s, &end);
                if (end == s)
                    break;
                m->coef[m->ncoef++] = v;
                s = end;
            }
        }
    }
    fclose(fp);
    if (m->formula < 1 || m->formula > 3 || m->ncoef < 1)
        return synth_fail("tests/data/nk/%s: no formula 1-3 with coefficients", file);
    return 0;
}

static int load_locked(const char *file, synth_material *m)
{
    memset(m, 0, sizeof *m);
    snprintf(m->file, sizeof m->file, "%s", file);
    const char *dir = check_refdata_dir();
    if (!dir)
        return synth_fail("tests/data: not found (run from the repository root "
                          "or set LAMINA_REFDATA)");
    char path[1200];
    snprintf(path, sizeof path, "%s/nk/%s", dir, file);
    FILE *fp = fopen(path, "r");
    if (!fp)
        return synth_fail("%s: cannot open", path);
    char line[1024];
    int formula = 0;
    while (fgets(line, sizeof line, fp))
        if (strstr(line, "type: formula"))
            formula = 1;
    fclose(fp);
    return formula ? load_formula(path, file, m) : load_table(file, m);
}

int synth_material_load(const char *file, synth_material *m)
{
    pthread_mutex_lock(&load_lock);
    int st = load_locked(file, m);
    pthread_mutex_unlock(&load_lock);
    return st;
}

void synth_material_free(synth_material *m)
{
    if (!m)
        return;
    free(m->ev);
    m->ev = NULL;
}

static double formula_index(const synth_material *m, double wl_nm)
{
    double l = wl_nm / 1000.0, l2 = l * l, s = m->coef[0];
    for (int i = 1; i + 1 < m->ncoef; i += 2) {
        double b = m->coef[i], c = m->coef[i + 1];
        if (m->formula == 1)
            s += b * l2 / (l2 - c * c);
        else if (m->formula == 2)
            s += b * l2 / (l2 - c);
        else
            s += b * pow(l, c);
    }
    return m->formula == 3 ? sqrt(s) : sqrt(1.0 + s);
}

static double hermite(double x0, double x1, double y0, double y1, double m0, double m1,
                      double x)
{
    double h = x1 - x0, t = (x - x0) / h, t2 = t * t, t3 = t2 * t;
    return (2 * t3 - 3 * t2 + 1) * y0 + (t3 - 2 * t2 + t) * h * m0 + (-2 * t3 + 3 * t2) * y1 +
           (t3 - t2) * h * m1;
}

double complex synth_material_index(const synth_material *m, double wl_nm)
{
    if (m->formula)
        return formula_index(m, wl_nm);
    double e = SYNTH_HC_EVNM / wl_nm;
    size_t n = m->rows;
    if (e <= m->ev[0])
        return m->n[0] + I * m->k[0];
    if (e >= m->ev[n - 1])
        return m->n[n - 1] + I * m->k[n - 1];
    size_t lo = 0, hi = n - 1;
    while (hi - lo > 1) {
        size_t mid = (lo + hi) / 2;
        if (m->ev[mid] <= e)
            lo = mid;
        else
            hi = mid;
    }
    double nn = hermite(m->ev[lo], m->ev[hi], m->n[lo], m->n[hi], m->dn[lo], m->dn[hi], e);
    double kk = hermite(m->ev[lo], m->ev[hi], m->k[lo], m->k[hi], m->dk[lo], m->dk[hi], e);
    return nn + I * (kk < 0 ? 0.0 : kk);
}
