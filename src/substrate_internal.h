/* substrate_internal.h - shared by substrate.c (tile statistics, flat
 * field) and substrate_modes.c (which tiles are the bare substrate). */
#ifndef LAMINA_SUBSTRATE_INTERNAL_H
#define LAMINA_SUBSTRATE_INTERNAL_H

#include "lamina/substrate.h"

typedef struct tile_stat {
    double mean[3], rsd[3]; /* relative standard deviation */
    double cx, cy, u, v;
    int uniform, clipped, candidate;
} tile_stat;

/* The flat-field basis at a pixel: 1, u, v, u^2, uv, v^2, r^4 over the
 * image normalised to -1..1. */
void lam__substrate_basis(const lam_substrate *s, double x, double y, double *b);

/* Mark the uniform tiles that are the bare substrate (tile_stat.candidate)
 * and return how many: the user's region when given, else the colour and
 * brightness mode against which the others look like graphene. */
size_t lam__substrate_candidates(tile_stat *ts, size_t nx, size_t ny, const lam_substrate *s,
                                 const lam_substrate_options *opt);

#endif
