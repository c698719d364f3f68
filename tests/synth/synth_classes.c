/* synth_classes.c - the noise-free channel value of the substrate and of
 * every object, tabulated once per scene (pixels only scale these).
 *
 * Stack, top down: ambient air; the object (graphene as sheets or a film,
 * graphite film, PMMA film, a film of another crystal: synth_crystal);
 * SiO2 of the TRUE thickness; Si. Reflectance
 * is averaged over s and p and over the illumination cone, then weighted
 * by lamp x channel sensitivity (white balanced: a perfect white reflector
 * gives 1 in every channel). */
#include "synth_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define MAX_NODES 64

typedef struct ctx {
    const synth_physics *p;
    int nn;
    double sin_t[MAX_NODES], w[MAX_NODES];
    synth_bc *sub;                  /* [i][node][pol]: Si + oxide */
    double complex *gap_c, *gap_s;  /* [i][node]: a 0.335 nm air gap */
    double complex n_pmma[SYNTH_NL], n_graphite[SYNTH_NL], n_film[SYNTH_NL];
    /* other crystals: the film of 1, 2, 3 and more layers
     * (synth_crystal_file), or hBN's film in xtal[0] */
    double complex xtal[4][SYNTH_NL];
    synth_graphene g;
} ctx;

const char *synth_si_file(synth_si s)
{
    return s == SYNTH_SI_SCHINKE ? "Si-Schinke2015.yml"
           : s == SYNTH_SI_ASPNES ? "Si-AspnesStudna1983.yml" : "Si-Green2008.yml";
}

const char *synth_sio2_file(synth_sio2 s)
{
    return s == SYNTH_SIO2_GAO ? "SiO2-film-Gao2013.yml" : "SiO2-fused-Malitson1965.yml";
}

const char *synth_pmma_file(int which)
{
    return which ? "PMMA-Beadie2015.yml" : "PMMA-Sultanova2009.yml";
}

static size_t at(const ctx *c, int i, int a)
{
    return (size_t)i * c->nn + a;
}

static void substrate_fields(ctx *c, const synth_material *si, const synth_material *ox)
{
    for (int i = 0; i < SYNTH_NL; i++) {
        double wl = synth_wl(i);
        synth_layer oxide = {0, synth_material_index(ox, wl), c->p->oxide_nm, 0};
        double complex nsi = synth_material_index(si, wl);
        for (int a = 0; a < c->nn; a++) {
            double complex eta;
            synth_film_matrix(1.0, SYNTH_LAYER_NM, wl, c->sin_t[a], SYNTH_S,
                              &c->gap_c[at(c, i, a)], &c->gap_s[at(c, i, a)], &eta);
            for (int pol = 0; pol < 2; pol++) {
                synth_bc *bc = &c->sub[2 * at(c, i, a) + pol];
                synth_bc_substrate(bc, nsi, c->sin_t[a], (synth_pol)pol);
                synth_bc_add(bc, &oxide, wl, c->sin_t[a], (synth_pol)pol);
            }
        }
    }
}

static int load_all(ctx *c, synth_material *si, synth_material *ox, synth_material *pm,
                    synth_material *gr)
{
    const synth_physics *p = c->p;
    if (synth_material_load(synth_si_file(p->si), si) ||
        synth_material_load(synth_sio2_file(p->sio2), ox) ||
        synth_material_load(synth_pmma_file(p->pmma), pm) ||
        synth_material_load("graphite-o-Djurisic1999.yml", gr) ||
        synth_graphene_load(&c->g, p->response))
        return -1;
    for (int i = 0; i < SYNTH_NL; i++) {
        c->n_pmma[i] = synth_material_index(pm, synth_wl(i));
        c->n_graphite[i] = synth_material_index(gr, synth_wl(i));
        c->n_film[i] = c->g.film.rows ? synth_material_index(&c->g.film, synth_wl(i)) : 1.0;
    }
    return 0;
}

/* The crystal's n,k for 1, 2, 3 and 4+ layers. */
static int load_crystal(ctx *c)
{
    static const int layers[4] = {1, 2, 3, 4};
    for (int j = 0; j < 4 && c->p->crystal != SYNTH_XTAL_GRAPHENE; j++) {
        synth_material m;
        if (synth_material_load(synth_crystal_file(c->p->crystal, c->p->nk_source, layers[j]),
                                &m))
            return -1;
        for (int i = 0; i < SYNTH_NL; i++)
            c->xtal[j][i] = synth_material_index(&m, synth_wl(i));
        synth_material_free(&m);
    }
    return 0;
}

static void ctx_close(ctx *c)
{
    free(c->sub);
    free(c->gap_c);
    free(c->gap_s);
    synth_graphene_free(&c->g);
}

static int ctx_open(ctx *c, const synth_physics *p)
{
    memset(c, 0, sizeof *c);
    c->p = p;
    c->nn = synth_cone_nodes(p, c->sin_t, c->w, MAX_NODES);
    size_t n = (size_t)SYNTH_NL * c->nn;
    c->sub = malloc(2 * n * sizeof *c->sub);
    c->gap_c = malloc(n * sizeof *c->gap_c);
    c->gap_s = malloc(n * sizeof *c->gap_s);
    synth_material si, ox, pm, gr;
    memset(&si, 0, sizeof si), memset(&ox, 0, sizeof ox), memset(&pm, 0, sizeof pm);
    memset(&gr, 0, sizeof gr);
    int st = !c->sub || !c->gap_c || !c->gap_s ? synth_fail("out of memory")
                                               : load_all(c, &si, &ox, &pm, &gr);
    if (!st)
        st = load_crystal(c);
    if (!st)
        substrate_fields(c, &si, &ox);
    synth_material_free(&si), synth_material_free(&ox), synth_material_free(&pm);
    synth_material_free(&gr);
    if (st)
        ctx_close(c);
    return st;
}

/* The object's layers on top of the substrate fields, bottom up. sig is
 * the per-layer sheet conductivity, or NULL for a film response. */
static void add_top(const ctx *c, const synth_object *o, const double complex *sig, int i,
                    int a, synth_pol pol, synth_bc *bc)
{
    double wl = synth_wl(i), kx = c->sin_t[a];
    synth_layer film = {0, 1.0, 0, 0};
    synth_crystal x = c->p->crystal;
    if (o->kind == SYNTH_OBJ_RESIDUE)
        film.n = c->n_pmma[i], film.d_nm = o->residue_nm;
    else if (x == SYNTH_XTAL_HBN)
        film.n = c->xtal[0][i], film.d_nm = o->thickness_nm;
    else if (x != SYNTH_XTAL_GRAPHENE)
        film.n = c->xtal[o->layers < 4 ? o->layers - 1 : 3][i],
        film.d_nm = o->layers * synth_crystal_layer_nm(x);
    else if (o->layers >= 15)
        film.n = c->n_graphite[i], film.d_nm = o->layers * SYNTH_LAYER_NM;
    else if (!sig)
        film.n = c->n_film[i], film.d_nm = o->layers * SYNTH_LAYER_NM;
    if (film.d_nm > 0) {
        synth_bc_add(bc, &film, wl, kx, pol);
        return;
    }
    double complex y = SYNTH_PI * SYNTH_ALPHA * sig[i];
    double complex eta = pol == SYNTH_S ? sqrt(1 - kx * kx) : 1 / sqrt(1 - kx * kx);
    for (int l = 0; l < o->layers; l++) {
        if (l > 0)
            synth_bc_add_matrix(bc, c->gap_c[at(c, i, a)], c->gap_s[at(c, i, a)], eta);
        bc->c += y * bc->b;
    }
}

/* Cone- and polarisation-averaged reflectance per wavelength (o = NULL:
 * the bare substrate). */
static void spectrum(const ctx *c, const synth_object *o, const double complex *sig,
                     double R[SYNTH_NL])
{
    for (int i = 0; i < SYNTH_NL; i++) {
        double sum = 0;
        for (int a = 0; a < c->nn; a++)
            for (int pol = 0; pol < 2; pol++) {
                synth_bc bc = c->sub[2 * at(c, i, a) + pol];
                if (o)
                    add_top(c, o, sig, i, a, (synth_pol)pol, &bc);
                sum += 0.5 * c->w[a] * synth_bc_finish(&bc, 1.0, c->sin_t[a], (synth_pol)pol).R;
            }
        R[i] = sum;
    }
}

static void channels(const synth_physics *p, const double R[SYNTH_NL], double out[3])
{
    for (int k = 0; k < 3; k++) {
        out[k] = 0;
        for (int i = 0; k < p->cam.nc && i < SYNTH_NL; i++)
            out[k] += p->weight[k][i] * R[i];
    }
}

/* Per-layer conductivity of a graphene object, or NULL for a film. */
static const double complex *layer_sigma(const ctx *c, const synth_object *o,
                                         double complex sig[SYNTH_NL], int *st)
{
    *st = 0;
    if (o->kind == SYNTH_OBJ_RESIDUE || o->layers >= 15 || c->p->crystal != SYNTH_XTAL_GRAPHENE)
        return NULL;
    if (o->doped)
        *st = synth_block_response(&c->g, o->fermi_eV, c->p->kT_eV, sig);
    else if (c->p->response == SYNTH_RESP_SIGMA0)
        for (int i = 0; i < SYNTH_NL; i++)
            sig[i] = 1.0;
    else if (c->p->response == SYNTH_RESP_LAMINA_DEFAULT)
        for (int i = 0; i < SYNTH_NL; i++)
            sig[i] = synth_sigma_lamina_default(synth_photon_ev(synth_wl(i)), o->fermi_eV,
                                                c->p->kT_eV);
    else
        return NULL;
    return sig;
}

static int object_values(const ctx *c, synth_object *o)
{
    double R[SYNTH_NL], v[3];
    double complex sig[SYNTH_NL];
    for (int k = 0; k < 3; k++)
        o->rel[k] = k < c->p->cam.nc ? o->transmission : 0;
    if (o->kind == SYNTH_OBJ_DUST)
        return 0;
    int st;
    const double complex *s = layer_sigma(c, o, sig, &st);
    if (st)
        return -1;
    spectrum(c, o, s, R);
    channels(c->p, R, v);
    for (int k = 0; k < c->p->cam.nc; k++)
        o->rel[k] = v[k] / c->p->sub_value[k];
    return 0;
}

int synth_classes(synth_scene *sc)
{
    ctx c;
    if (ctx_open(&c, &sc->phys))
        return -1;
    double R[SYNTH_NL];
    spectrum(&c, NULL, NULL, R);
    channels(&sc->phys, R, sc->phys.sub_value);
    int st = 0;
    for (int i = 0; i < sc->nobj && !st; i++)
        st = object_values(&c, &sc->obj[i]);
    ctx_close(&c);
    return st;
}
