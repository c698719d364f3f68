/* nk_dump.c - print lamina's built-in n, k for a material on a wavelength
 * list, for the outside-reference comparison (make check-reference). */
#include "lamina/material.h"

#include <complex.h>
#include <stdio.h>
#include <stdlib.h>

int main(int argc, char **argv)
{
    if (argc < 3) {
        fprintf(stderr, "usage: nk_dump MATERIAL NM...\n");
        return 2;
    }
    lam_material m;
    lam_error err;
    if (lam_material_builtin(argv[1], &m, &err)) {
        fprintf(stderr, "nk_dump: %s\n", err.message);
        return 1;
    }
    for (int i = 2; i < argc; i++) {
        double complex n;
        if (lam_material_index(&m, strtod(argv[i], NULL), &n, &err)) {
            fprintf(stderr, "nk_dump: %s\n", err.message);
            return 1;
        }
        printf("%s %.6f %.6f\n", argv[i], creal(n), cimag(n));
    }
    return 0;
}
