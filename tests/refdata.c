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
