/*
 * lamina/crystal.h - the flake materials lamina models, and how.
 *
 * Three kinds of crystal:
 *   sheets      graphene: N conducting sheets 0.335 nm apart with the sheet
 *               conductivity of lamina/conductivity.h;
 *   layered     transition-metal dichalcogenides (MoS2, WS2, WSe2): an
 *               N-layer flake is one film of N x layer_nm with the n,k of
 *               the N-layer crystal where published (1L, 2L, 3L), else the
 *               bulk n,k (or, where no bulk table is built in, the thickest
 *               layer table given);
 *   continuous  hBN: a transparent film of any thickness (0.333 nm per
 *               layer up to 300 nm) with the in-plane (ordinary) index; its
 *               thickness is inferred per region (lamina/thickness.h), and
 *               the spread of the published indices is a nuisance
 *               (an index scale, 1 + s (n - 1), see index_scale_prior).
 * A material name may carry its n,k source after a slash: "MoS2/Song"
 * (Song et al. 2019 instead of the default Hsu et al. 2019), "hBN/Lee",
 * "WSe2/Gu". Names are case-insensitive. Built-in n,k are listed in
 * lamina/material.h with their papers.
 *
 * The estimation (lamina/estimate.h) treats the published spread between
 * sources (up to ~20 % in contrast for TMDs) as a wider per-channel
 * contrast-gain prior and a larger model floor: log_gain_sd and floor_rel
 * below.
 *
 * No allocation; the records are static.
 */
#ifndef LAMINA_CRYSTAL_H
#define LAMINA_CRYSTAL_H

#include <stddef.h>
#include "lamina/error.h"

typedef enum lam_crystal_kind {
    LAM_CRYSTAL_SHEETS = 0, /* graphene */
    LAM_CRYSTAL_LAYERED,    /* N-layer films with per-N n,k (TMDs) */
    LAM_CRYSTAL_CONTINUOUS  /* a film of continuous thickness (hBN) */
} lam_crystal_kind;

#define LAM_CRYSTAL_LAYER_TABLES 3 /* 1L, 2L, 3L */
#define LAM_CRYSTAL_ALTERNATES 3

typedef struct lam_crystal {
    const char *name;        /* "MoS2", "MoS2/Song", "hBN", ... */
    const char *formula;     /* the crystal without its source: "MoS2" */
    lam_crystal_kind kind;
    double layer_nm;         /* thickness of one layer */
    /* built-in materials (lamina/material.h) of the 1L..3L films; NULL
     * entries use 'bulk' */
    const char *layer_index[LAM_CRYSTAL_LAYER_TABLES];
    const char *bulk;        /* thicker flakes; the film of a continuous crystal */
    /* continuous: other published indices (built-in materials) of the same
     * crystal, whose spread sets the index-scale prior
     * (lam_crystal_index_scale_prior); layered: the other n,k sources
     * (crystal names) an analysis tries (lamina/nksource.h) */
    const char *alternates[LAM_CRYSTAL_ALTERNATES];
    double log_gain_sd;      /* per-channel contrast-gain prior (ln), source spread */
    double floor_rel;        /* relative model floor the estimate starts from */
    double max_nm;           /* continuous: thickest film modelled */
    const char *note;        /* what the model approximates, for reports */
} lam_crystal;

/* The record of a material name (with an optional "/source"), or NULL. */
const lam_crystal *lam_crystal_find(const char *name);

/* The record of a name, or LAM_EINVAL with a message that lists the names. */
lam_status lam_crystal_lookup(const char *name, const lam_crystal **out, lam_error *err);

/* All records, in a fixed order (for help texts and tests). */
size_t lam_crystal_count(void);
const lam_crystal *lam_crystal_at(size_t i);

/* The built-in material of an N-layer film (N >= 1) of a layered or
 * continuous crystal: the layer table when there is one, else the bulk. */
const char *lam_crystal_layer_index(const lam_crystal *c, size_t layers);

/* Prior of the index scale s of a continuous crystal (N = 1 + s (n - 1)):
 * mean and sd of the ratio (n_alt - 1) / (n - 1) over 450-650 nm across
 * the default index and its alternates, the sd at least 0.02 and widened
 * by a quarter, so every published index lies within about 1.5 sd. A
 * crystal without alternates gets mean 1, sd 0.03. LAM_ERANGE if a table
 * cannot be evaluated there. */
lam_status lam_crystal_index_scale_prior(const lam_crystal *c, double *mean, double *sd,
                                         lam_error *err);

#endif
