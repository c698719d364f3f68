/* refdata.c - line-based reader of tabulated refractiveindex.info YAML. */
#include "refdata.h"
#include "check.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int refdata_load_nk(const char *file_name, refdata_nk *out)
{
    const char *dir = check_refdata_dir();
    if (!dir)
        return -1;
    char path[1024];
    snprintf(path, sizeof path, "%s/nk/%s", dir, file_name);
    FILE *fp = fopen(path, "r");
    if (!fp)
        return -1;
    char line[512];
    int in_data = 0;
    out->rows = 0;
    while (fgets(line, sizeof line, fp)) {
        size_t indent = strspn(line, " ");
        if (strstr(line, "data: |")) {
            in_data = 1;
            continue;
        }
        if (in_data) {
            if (line[indent] == '\n' || line[indent] == '\0')
                continue;
            if (indent <= 4) {
                in_data = 0;
                continue;
            }
            double a, b, c = 0;
            int got = sscanf(line, "%lf %lf %lf", &a, &b, &c);
            if (got >= 2 && out->rows < 4096) {
                out->wl_nm[out->rows] = a * 1000.0;
                out->n[out->rows] = b;
                out->k[out->rows] = got == 3 ? c : 0.0;
                out->rows++;
            }
        }
    }
    fclose(fp);
    return out->rows >= 2 ? 0 : -1;
}

void refdata_interp(const refdata_nk *t, double wl, double *n, double *k)
{
    *n = *k = NAN;
    for (size_t i = 0; i + 1 < t->rows; i++) {
        if (wl >= t->wl_nm[i] && wl <= t->wl_nm[i + 1]) {
            double f = (wl - t->wl_nm[i]) / (t->wl_nm[i + 1] - t->wl_nm[i]);
            *n = t->n[i] + f * (t->n[i + 1] - t->n[i]);
            *k = t->k[i] + f * (t->k[i + 1] - t->k[i]);
            return;
        }
    }
}

int refdata_load_formula(const char *file_name, refdata_formula *out)
{
    const char *dir = check_refdata_dir();
    if (!dir)
        return -1;
    char path[1024], line[512];
    snprintf(path, sizeof path, "%s/nk/%s", dir, file_name);
    FILE *fp = fopen(path, "r");
    if (!fp)
        return -1;
    memset(out, 0, sizeof *out);
    while (fgets(line, sizeof line, fp)) {
        const char *p;
        if ((p = strstr(line, "- type: formula ")))
            out->formula = atoi(p + 16);
        else if ((p = strstr(line, "wavelength_range:")) &&
                 sscanf(p + 17, "%lf %lf", &out->lo_nm, &out->hi_nm) == 2)
            out->lo_nm *= 1000, out->hi_nm *= 1000;
        else if ((p = strstr(line, "coefficients:"))) {
            char *end;
            p += 13;
            while (out->count < 24) {
                double v = strtod(p, &end);
                if (end == p)
                    break;
                out->coef[out->count++] = v;
                p = end;
            }
        }
    }
    fclose(fp);
    return out->formula >= 1 && out->formula <= 3 && out->count >= 1 ? 0 : -1;
}

double refdata_formula_n(const refdata_formula *f, double wl)
{
    if (wl < f->lo_nm || wl > f->hi_nm)
        return NAN;
    double l = wl / 1000, l2 = l * l, s = f->coef[0];
    for (int i = 1; i + 1 < f->count; i += 2) {
        const double b = f->coef[i], c = f->coef[i + 1];
        if (f->formula == 1)
            s += b * l2 / (l2 - c * c);
        else if (f->formula == 2)
            s += b * l2 / (l2 - c);
        else
            s += b * pow(l, c);
    }
    return f->formula == 3 ? sqrt(s) : sqrt(1 + s);
}
