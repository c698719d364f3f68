/* bench_model.c - time of one full contrast ladder: K = 20 layers,
 * 3 channels, 201 wavelengths, 24 cone angles, s and p. Goal: <= 20 ms on
 * one core. Prints the median of 25 evaluations (oxide varied so nothing
 * is cached but the conductivity, as in an oxide fit). */
#include "lamina/model.h"

#include <stdio.h>
#include <stdlib.h>
#include <time.h>

static double now(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

static int cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y;
}

int main(void)
{
    lam_error_init_gsl();
    lam_setup s;
    lam_setup_default(&s);
    s.cone_nodes = 24;
    lam_model *m;
    lam_error err;
    if (lam_model_alloc(&s, 20, 0, &m, &err)) {
        fprintf(stderr, "bench_model: %s\n", err.message);
        return 1;
    }
    lam_prediction p;
    lam_model_eval(m, 285, 0.2, &p, &err); /* conductivity computed once */
    double t[25];
    for (int i = 0; i < 25; i++) {
        double t0 = now();
        lam_model_eval(m, 270 + i, 0.2, &p, &err);
        t[i] = now() - t0;
    }
    qsort(t, 25, sizeof t[0], cmp);
    printf("bench_model: K=20, 3 channels, 201 wavelengths, 24 angles x 2 pol: "
           "median %.2f ms (min %.2f, max %.2f); goal <= 20 ms\n",
           1e3 * t[12], 1e3 * t[0], 1e3 * t[24]);
    lam_model_free(m);
    return 0;
}
