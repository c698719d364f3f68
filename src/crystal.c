/* crystal.c - the flake materials: kind, layer thickness, the n,k source
 * of each layer count, and the spread of the published sources. */
#include "lamina/crystal.h"
#include "lamina/material.h"

#include <math.h>
#include <stdio.h>
#include <string.h>
#include <strings.h>

/* Layer thicknesses: graphite 0.335 nm; hBN 0.333 nm; MoS2 0.615 nm, WS2
 * 0.616 nm, WSe2 0.649 nm (the interlayer spacings of the bulk crystals,
 * the film thicknesses the TMD n,k tables were derived with, from memory;
 * issue 14 states the same values).
 * log_gain_sd and floor_rel of the TMDs: the published sources differ by up
 * to ~20 % in monolayer contrast (Hsu vs Song MoS2 on 285 nm oxide at
 * 600 nm: 0.46 and 0.36), about 0.25 in ln of a channel's contrast gain;
 * where only the 1L table exists (WS2, WSe2) a 2L or 3L film has the 1L
 * n,k, which the larger floor covers. */
static const lam_crystal crystals[] = {
    {"graphene", "graphene", LAM_CRYSTAL_SHEETS, 0.335, {NULL, NULL, NULL}, NULL,
     {NULL, NULL, NULL}, 0, 0.03, 0, "N conducting sheets (lamina/conductivity.h)"},
    {"hBN", "hBN", LAM_CRYSTAL_CONTINUOUS, 0.333, {NULL, NULL, NULL}, "hBN",
     {"hBN-Lee", "hBN-Rah", NULL}, 0.05, 0.03, 300,
     "transparent film, in-plane index of Grudinin et al. 2023; index scale marginalised "
     "over Lee 2019 and Rah 2019"},
    {"hBN/Lee", "hBN", LAM_CRYSTAL_CONTINUOUS, 0.333, {NULL, NULL, NULL}, "hBN-Lee",
     {"hBN", "hBN-Rah", NULL}, 0.05, 0.03, 300, "transparent film, index of Lee et al. 2019"},
    {"hBN/Rah", "hBN", LAM_CRYSTAL_CONTINUOUS, 0.333, {NULL, NULL, NULL}, "hBN-Rah",
     {"hBN", "hBN-Lee", NULL}, 0.05, 0.03, 300, "transparent film, index of Rah et al. 2019"},
    {"MoS2", "MoS2", LAM_CRYSTAL_LAYERED, 0.615, {"MoS2-1L", "MoS2-2L", "MoS2-3L"},
     "MoS2-bulk", {"MoS2/Song", NULL, NULL}, 0.25, 0.06, 0,
     "1L, 2L, 3L n,k of Hsu et al. 2019, thicker flakes the bulk n,k of Song et al. 2019"},
    {"MoS2/Song", "MoS2", LAM_CRYSTAL_LAYERED, 0.615, {"MoS2-1L-Song", NULL, NULL},
     "MoS2-bulk", {"MoS2", NULL, NULL}, 0.25, 0.06, 0,
     "1L and bulk n,k of Song et al. 2019"},
    {"WS2", "WS2", LAM_CRYSTAL_LAYERED, 0.616, {"WS2-1L", NULL, NULL}, "WS2-1L",
     {NULL, NULL, NULL}, 0.25, 0.08, 0,
     "1L n,k of Hsu et al. 2019 for every layer count (no 2L, 3L or bulk table built in)"},
    {"WSe2", "WSe2", LAM_CRYSTAL_LAYERED, 0.649, {"WSe2-1L", NULL, NULL}, "WSe2-1L",
     {"WSe2/Gu", NULL, NULL}, 0.25, 0.08, 0,
     "1L n,k of Hsu et al. 2019 for every layer count (no 2L, 3L or bulk table built in)"},
    {"WSe2/Gu", "WSe2", LAM_CRYSTAL_LAYERED, 0.649, {"WSe2-1L-Gu", NULL, NULL}, "WSe2-1L-Gu",
     {"WSe2", NULL, NULL}, 0.25, 0.08, 0,
     "1L n,k of Gu et al. 2019 for every layer count"},
};
#define N_CRYSTALS (sizeof crystals / sizeof crystals[0])

size_t lam_crystal_count(void)
{
    return N_CRYSTALS;
}

const lam_crystal *lam_crystal_at(size_t i)
{
    return i < N_CRYSTALS ? &crystals[i] : NULL;
}

const lam_crystal *lam_crystal_find(const char *name)
{
    for (size_t i = 0; name && i < N_CRYSTALS; i++)
        if (!strcasecmp(crystals[i].name, name))
            return &crystals[i];
    return NULL;
}

lam_status lam_crystal_lookup(const char *name, const lam_crystal **out, lam_error *err)
{
    if ((*out = lam_crystal_find(name)))
        return LAM_OK;
    char list[256] = "";
    for (size_t i = 0, len = 0; i < N_CRYSTALS && len + 1 < sizeof list; i++)
        len += (size_t)snprintf(list + len, sizeof list - len, "%s%s", i ? ", " : "",
                                crystals[i].name);
    return lam_error_set(err, LAM_EINVAL, "'%.64s' is not a modelled flake material (%s)", name,
                         list);
}

const char *lam_crystal_layer_index(const lam_crystal *c, size_t layers)
{
    if (layers >= 1 && layers <= LAM_CRYSTAL_LAYER_TABLES && c->layer_index[layers - 1])
        return c->layer_index[layers - 1];
    if (c->bulk)
        return c->bulk;
    for (size_t j = LAM_CRYSTAL_LAYER_TABLES; j-- > 0;)
        if (c->layer_index[j])
            return c->layer_index[j];
    return NULL;
}

/* Mean over 450-650 nm of (n_alt - 1) / (n_ref - 1). */
static lam_status scale_of(const char *alt, const lam_material *ref, double *out, lam_error *err)
{
    lam_material m;
    lam_status st = lam_material_builtin(alt, &m, err);
    double sum = 0;
    int count = 0;
    for (double nm = 450; !st && nm <= 650; nm += 10) {
        double complex a, b;
        if (!(st = lam_material_index(&m, nm, &a, err)) &&
            !(st = lam_material_index(ref, nm, &b, err)))
            sum += (creal(a) - 1) / (creal(b) - 1), count++;
    }
    *out = count ? sum / count : 1;
    return st;
}

lam_status lam_crystal_index_scale_prior(const lam_crystal *c, double *mean, double *sd,
                                         lam_error *err)
{
    *mean = 1, *sd = 0.03;
    if (c->kind != LAM_CRYSTAL_CONTINUOUS || !c->bulk || !c->alternates[0])
        return LAM_OK;
    lam_material ref;
    lam_status st = lam_material_builtin(c->bulk, &ref, err);
    double s[LAM_CRYSTAL_ALTERNATES + 1] = {1}, m = 1;
    size_t n = 1;
    for (size_t j = 0; !st && j < LAM_CRYSTAL_ALTERNATES && c->alternates[j]; j++) {
        st = scale_of(c->alternates[j], &ref, &s[n], err);
        m += s[n++];
    }
    if (st)
        return st;
    m /= (double)n;
    double v = 0;
    for (size_t j = 0; j < n; j++)
        v += (s[j] - m) * (s[j] - m);
    *mean = m;
    *sd = 1.25 * fmax(0.02, sqrt(v / (double)(n - 1)));
    return LAM_OK;
}
