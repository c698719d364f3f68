/* synth_layout.c - where the objects go: 6-14 flakes (at least one each of
 * 1L, 2L and 3L; then mostly 1-3L, some 4-6L, some graphite of 15-60
 * layers), optional Pauli-blocked monolayers for the doping tests, 2L folds
 * on some monolayers, PMMA residue patches and dust, none overlapping. */
#include "synth_internal.h"

#include <math.h>
#include <string.h>

#define GAP_PX 6.0   /* space between objects, so blur does not merge them */

typedef struct placed {
    int n;
    double x[SYNTH_MAX_OBJECTS], y[SYNTH_MAX_OBJECTS], r[SYNTH_MAX_OBJECTS];
} placed;

static double reach(const synth_object *o, double cx, double cy)
{
    double m = 0;
    for (int i = 0; i < o->nv; i++)
        m = fmax(m, hypot(o->x[i] - cx, o->y[i] - cy));
    return m;
}

static int fits(const placed *pl, const synth_scene *sc, double cx, double cy, double r)
{
    if (cx - r < 2 || cy - r < 2 || cx + r > sc->width - 2 || cy + r > sc->height - 2)
        return 0;
    for (int i = 0; i < pl->n; i++)
        if (hypot(cx - pl->x[i], cy - pl->y[i]) < r + pl->r[i] + GAP_PX)
            return 0;
    return 1;
}

/* Draws an outline of equivalent radius near `radius` somewhere free; the
 * radius shrinks after repeated failures. Returns 0 when placed. */
static int place(synth_rng *rng, synth_scene *sc, placed *pl, synth_object *o, double radius,
                 double min_radius)
{
    for (int attempt = 0; attempt < 400; attempt++) {
        if (attempt && attempt % 80 == 0)
            radius = fmax(min_radius, radius * 0.8);
        double cx = synth_rng_uniform(rng, 0, sc->width);
        double cy = synth_rng_uniform(rng, 0, sc->height);
        o->nv = synth_rng_int(rng, 8, 16);
        synth_polygon_make(rng, cx, cy, radius, o->nv, o->x, o->y);
        double r = reach(o, cx, cy);
        if (fits(pl, sc, cx, cy, r)) {
            pl->x[pl->n] = cx, pl->y[pl->n] = cy, pl->r[pl->n] = r;
            pl->n++;
            return 0;
        }
    }
    return -1;
}

static synth_object *new_object(synth_scene *sc, synth_object_kind kind)
{
    if (sc->nobj >= SYNTH_MAX_OBJECTS)
        return NULL;
    synth_object *o = &sc->obj[sc->nobj];
    memset(o, 0, sizeof *o);
    o->kind = kind;
    o->parent = -1;
    o->fermi_eV = NAN;
    return o;
}

static int draw_layers(synth_rng *r, int index)
{
    if (index < 3)
        return index + 1;
    double u = synth_rng_uniform(r, 0, 1);
    return u < 0.26 ? 1 : u < 0.48 ? 2 : u < 0.66 ? 3 : u < 0.84 ? synth_rng_int(r, 4, 6)
                                                               : synth_rng_int(r, 15, 60);
}

/* An hBN flake: a film of log-uniform thickness (default 1..100 nm). */
static void set_hbn(const synth_config *cfg, synth_rng *r, synth_object *o)
{
    double lo = isnan(cfg->hbn_min_nm) ? 1 : cfg->hbn_min_nm;
    double hi = isnan(cfg->hbn_max_nm) ? 100 : cfg->hbn_max_nm;
    o->layers = 0;
    o->label = 252;
    o->thickness_nm = lo * exp(synth_rng_uniform(r, 0, 1) * log(hi / lo));
}

static void set_fermi(const synth_config *cfg, synth_rng *r, const synth_scene *sc,
                      synth_object *o)
{
    double lo = isnan(cfg->fermi_lo_eV) ? 0.1 : cfg->fermi_lo_eV;
    double hi = isnan(cfg->fermi_hi_eV) ? 0.3 : cfg->fermi_hi_eV;
    double mu = synth_rng_uniform(r, lo, hi);
    if (o->layers >= 15 || sc->phys.crystal != SYNTH_XTAL_GRAPHENE)
        return;   /* graphite (the Djurisic table) and other crystals: n,k as published */
    if (!isnan(cfg->fermi_eV)) {
        o->doped = 1;
        o->fermi_eV = cfg->fermi_eV;
    } else if (sc->phys.response == SYNTH_RESP_LAMINA_DEFAULT) {
        o->fermi_eV = mu;
    }
}

static void add_flakes(const synth_config *cfg, synth_rng *r, synth_scene *sc, placed *pl)
{
    for (int i = 0; i < cfg->n_doped; i++) {
        synth_object *o = new_object(sc, SYNTH_OBJ_FLAKE);
        if (!o)
            return;
        o->layers = o->label = 1;
        o->doped = 1;
        o->fermi_eV = cfg->doped_eV[i];
        if (place(r, sc, pl, o, synth_rng_uniform(r, 30, 60), 22) == 0)
            sc->nobj++;
    }
    int n = cfg->n_flakes ? cfg->n_flakes : synth_rng_int(r, 6, 14);
    for (int i = 0; i < n; i++) {
        synth_object *o = new_object(sc, SYNTH_OBJ_FLAKE);
        if (!o)
            return;
        o->layers = o->label = draw_layers(r, i);
        set_fermi(cfg, r, sc, o);
        if (sc->phys.crystal == SYNTH_XTAL_HBN)
            set_hbn(cfg, r, o);
        double u = synth_rng_uniform(r, 0, 1);
        if (place(r, sc, pl, o, 18 + 92 * pow(u, 1.6), 18) == 0)
            sc->nobj++;
    }
}

/* A 2L patch on about a third of the monolayers that are not doping probes. */
static void add_folds(synth_rng *r, synth_scene *sc, const placed *pl)
{
    int n = sc->nobj;
    for (int i = 0; i < n && i < pl->n; i++) {
        synth_object *p = &sc->obj[i];
        double u = synth_rng_uniform(r, 0, 1);
        double eq = sqrt(synth_polygon_area(p->x, p->y, p->nv) / SYNTH_PI);
        if (p->kind != SYNTH_OBJ_FLAKE || p->layers != 1 || p->doped || eq < 35 || u > 0.35)
            continue;
        synth_object *o = new_object(sc, SYNTH_OBJ_FOLD);
        if (!o)
            return;
        *o = *p;
        o->kind = SYNTH_OBJ_FOLD;
        o->layers = o->label = 2;
        o->parent = i;
        double a = synth_rng_uniform(r, 0, 2 * SYNTH_PI);
        o->nv = synth_rng_int(r, 8, 12);
        synth_polygon_make(r, pl->x[i] + 0.4 * eq * cos(a), pl->y[i] + 0.4 * eq * sin(a),
                           synth_rng_uniform(r, 0.3, 0.45) * eq, o->nv, o->x, o->y);
        sc->nobj++;
    }
}

static void add_specks(synth_rng *r, synth_scene *sc, placed *pl)
{
    int nres = synth_rng_int(r, 1, 3), ndust = synth_rng_int(r, 2, 6);
    for (int i = 0; i < nres + ndust; i++) {
        int dust = i >= nres;
        synth_object *o = new_object(sc, dust ? SYNTH_OBJ_DUST : SYNTH_OBJ_RESIDUE);
        if (!o)
            return;
        o->label = dust ? 251 : 250;
        o->residue_nm = dust ? 0 : synth_rng_uniform(r, 2, 15);
        o->transmission = dust ? synth_rng_uniform(r, 0.15, 0.6) : 0;
        double rad = dust ? synth_rng_uniform(r, 2.5, 7) : synth_rng_uniform(r, 12, 40);
        if (place(r, sc, pl, o, rad, dust ? 2.5 : 10) == 0)
            sc->nobj++;
    }
}

int synth_layout(const synth_config *cfg, synth_rng *r, synth_scene *sc)
{
    placed pl;
    pl.n = 0;
    sc->nobj = 0;
    add_flakes(cfg, r, sc, &pl);
    add_folds(r, sc, &pl);
    add_specks(r, sc, &pl);
    int flakes = 0;
    for (int i = 0; i < sc->nobj; i++)
        flakes += sc->obj[i].kind == SYNTH_OBJ_FLAKE;
    if (flakes == 0)
        return synth_fail("no flake fits in a %d x %d image", sc->width, sc->height);
    return 0;
}
