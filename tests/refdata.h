/* tests/refdata.h - read the refractiveindex.info YAML files in
 * tests/data/nk (tabulated rows, and the dispersion formulas 1-3 of the
 * data set: refdata_load_formula), for test comparisons. */
#ifndef LAMINA_TESTS_REFDATA_H
#define LAMINA_TESTS_REFDATA_H

#include <stddef.h>

typedef struct refdata_nk {
    size_t rows;
    double wl_nm[4096], n[4096], k[4096];
} refdata_nk;

/* Returns 0 on success; columns 2 (n only, k = 0) or 3. */
int refdata_load_nk(const char *file_name, refdata_nk *out);

/* Linear interpolation; NAN outside the table. */
void refdata_interp(const refdata_nk *t, double wl_nm, double *n, double *k);

/* A formula file (refractiveindex.info formulas 1, 2, 3; n only):
 * formula 1: n^2 - 1 = C1 + sum C(2i) l^2 / (l^2 - C(2i+1)^2)
 * formula 2: n^2 - 1 = C1 + sum C(2i) l^2 / (l^2 - C(2i+1))
 * formula 3: n^2 = C1 + sum C(2i) l^C(2i+1), l in um (tests/data/nk/README.md). */
typedef struct refdata_formula {
    int formula;
    int count;
    double coef[24];
    double lo_nm, hi_nm; /* wavelength_range */
} refdata_formula;

/* Returns 0 on success (a file whose item is formula 1, 2 or 3). */
int refdata_load_formula(const char *file_name, refdata_formula *out);

/* n at a vacuum wavelength; NAN outside the file's range. */
double refdata_formula_n(const refdata_formula *f, double wl_nm);

#endif
