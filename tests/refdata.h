/* tests/refdata.h - read the refractiveindex.info YAML files in
 * tests/data/nk (tabulated nk rows only), for test comparisons. */
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

#endif
