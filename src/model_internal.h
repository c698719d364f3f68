/* model_internal.h - the contrast model's state and the pieces of an
 * evaluation that its two files share: model.c evaluates the ladder at a
 * point (with its caches), model_gradient.c its derivatives. Not part of
 * the public interface (lamina/model.h). */
#ifndef LAMINA_MODEL_INTERNAL_H
#define LAMINA_MODEL_INTERNAL_H

#include "lamina/model.h"

#include <complex.h>
#include <stddef.h>

#define MAX_NODES 96
#define SUBSTRATE_SLOTS 6 /* a fit's base point and its oxide / NA neighbours */

/* The illumination cone for one NA: sin(theta) of each node and its weight
 * (quadrature weight times pupil weight, normalised; s and p get half each). */
typedef struct cone {
    double na;
    size_t nodes;
    double sin_t[MAX_NODES], w_t[MAX_NODES];
} cone;

/* The substrate seen from the ambient, per wavelength and cone node, for one
 * oxide thickness and NA: admittance Y for s and p and the ambient terms the
 * sheet stacking needs. Index (l * nodes + t) * 2 + pol. */
typedef struct substrate_slot {
    int valid;
    unsigned long used, filled; /* last use; when it was (re)filled */
    double oxide_nm, na;
    double complex *y, *eta0, *gap_cos, *gap_sin;
    double *tnorm;    /* transmission only: 4 Re(eta_base) / |B_top|^2 (unit field at the base) */
    double *res_rbar; /* with a residue film: nwl x LAM_RESIDUE_FILMS cone-averaged R */
    unsigned long res_filled; /* the 'filled' res_rbar was computed for, 0: not yet */
} substrate_slot;

/* What a reflection slot needs that does not depend on the oxide, per
 * wavelength and cone node (k = l * nodes + t) of one cone: the ambient
 * gap's phase terms, the ambient's and the base's admittances and, per
 * substrate film j (kj = k * films + j), k0 q, its admittances and (every
 * film but the oxide) its phase terms. A fit moves the oxide far more
 * often than the NA, and these were most of a new slot's cost (a complex
 * square root per film and node). They are the values fill_slot computed
 * itself, by the same operations: the same slots. A gradient steps the NA
 * away and back, so a few cones are kept (the least recently used is
 * replaced). */
#define WAVE_SETS 3

typedef struct cone_waves {
    double na; /* NAN: not filled */
    unsigned long used;
    double complex *gap_cos, *gap_sin; /* k */
    double complex *eta0, *eta_base;   /* 2k + pol */
    double complex *k0q, *cph, *sph;   /* kj */
    double complex *eta;               /* 2kj + pol */
} cone_waves;

/* The phases of a table of film thicknesses (lam_model_eval_films,
 * reflection) at every wavelength and cone node for one index scale:
 * cos, sin and the decay factor of each thickness, at (l * nodes + t) *
 * count + j. They do not depend on the oxide, and the thickness stage's
 * oxide profile evaluates the same table at a few index scales at each of
 * ~30 oxides. Kept only for tables of at most FILM_TABLE_MAX entries
 * (wavelengths x nodes x thicknesses: the coarse profile's 41 x 4 x 455,
 * 1.8 MB each; the fine tables are evaluated a few times only). */
#define FILM_TABLES 3
#define FILM_TABLE_MAX 100000

typedef struct film_table {
    double scale, na;     /* the key: index scale, the cone's NA ... */
    size_t count, nodes;  /* ... the thicknesses' count and the nodes */
    double *d;            /* ... and the thicknesses themselves; NULL: empty */
    double *cs, *sn, *rho;
    unsigned long used;
    size_t cap;           /* doubles allocated at d (kept for the next table) */
} film_table;

struct lam_model {
    size_t channels, max_layers, nwl, layers, oxide_layer, cone_nodes_max;
    double n_ambient, interlayer_nm;
    int transmission; /* T through the stack into the base instead of R (stamps) */
    lam_pupil_weight pupil;
    lam_sheet_params sheet;
    lam_camera camera; /* borrowed table pointers: the setup must outlive only alloc */
    lam_table_spectrum camera_table_copy;
    double *wl, *trapezoid, *lamp;           /* nwl */
    double *weight;                          /* channels x nwl, for 'weight_cam' */
    double weight_cam[2 * LAM_MAX_CHANNELS]; /* the shifts and log widths it was made for */
    double centroid[LAM_MAX_CHANNELS];       /* of each channel's S L, nm */
    int have_weight;
    double complex *n_layer;      /* layers x nwl */
    double complex *n_base;       /* nwl */
    double complex *n_film;       /* nwl: flake index when flakes are films, else NULL */
    size_t film_layers;           /* N <= film_layers have their own index (crystals) ... */
    double complex *n_film_layer; /* ... film_layers x nwl, else NULL */
    double complex *basis;        /* nwl x 4: sheet conductivity basis at basis_fermi */
    double basis_fermi;
    int have_basis;
    double complex *y_sheet; /* nwl: Z0 sigma at the point being evaluated */
    double layer_nm[LAM_SETUP_MAX_LAYERS];
    cone cone_cache;
    cone_waves waves[WAVE_SETS]; /* reflection only (allocated with the slots) */
    substrate_slot slot[SUBSTRATE_SLOTS];
    unsigned long clock;
    lam_model_point defaults;
    double *rbar;                 /* nwl x (max_layers + 1): cone-averaged R */
    double complex *n_residue;    /* nwl: a residue film's index, or NULL */
    unsigned long weight_version; /* counts the channel weights' recomputations */
    /* the last residue contrasts and what they were integrated for (a fit
     * changes gains far more often than the slot or the camera) */
    double res_contrast[LAM_RESIDUE_FILMS][LAM_MAX_CHANNELS];
    const substrate_slot *res_slot;
    unsigned long res_slot_filled, res_weight_version;
    /* what rbar was computed for: a channel shift alone needs no new stacking */
    int have_rbar;
    const substrate_slot *rbar_slot;
    unsigned long rbar_slot_used;
    size_t rbar_layers;
    double rbar_fermi, rbar_response[3];
    /* film flakes: the film phases of every wavelength and node of one cone
     * (lam__film_phases), (l * nodes + t) * (fph_layers + 1) + N, three
     * arrays (q, cos, sin) of fph_size each; NULL until the first */
    double complex *fph;
    size_t fph_size, fph_layers, fph_nodes;
    double fph_na; /* NAN: not filled */
    film_table ftab[FILM_TABLES];
};

/* The reflection stack of one wavelength for all cone nodes and
 * polarisations at once ("items"), in real arithmetic on arrays, so that
 * the compiler runs the items side by side on vector units: the fit
 * evaluates this ladder ~20 times per iteration. Item i's fields (b, c)
 * and constants: cos of the gap cg, i sin/eta0 (g1), i sin eta0 (g2),
 * eta0 and the weight. */
#define MAX_ITEMS (2 * MAX_NODES)

typedef struct stack_items {
    size_t n;
    double br[MAX_ITEMS], bi[MAX_ITEMS], cr[MAX_ITEMS], ci[MAX_ITEMS];
    double gcr[MAX_ITEMS], gci[MAX_ITEMS], g1r[MAX_ITEMS], g1i[MAX_ITEMS];
    double g2r[MAX_ITEMS], g2i[MAX_ITEMS], er[MAX_ITEMS], ei[MAX_ITEMS];
    double wt[MAX_ITEMS], r2[MAX_ITEMS];
} stack_items;

/* The phase terms of every N-layer film at one wavelength and cone node:
 * its wave vector q[N], cos and sin of its phase (the same for both
 * polarisations: computed once). */
typedef struct film_phases {
    double complex q[LAM_MODEL_MAX_LAYERS + 1], cp[LAM_MODEL_MAX_LAYERS + 1],
        sp[LAM_MODEL_MAX_LAYERS + 1];
} film_phases;

/* ---- the pieces of an evaluation (model.c) ---- */

/* The substrate films counted in the waves' arrays (at least 1). */
size_t lam__films_of(const lam_model *m);

/* cos and sin of a phase; a real phase takes the real functions. */
void lam__phase_cos_sin(double complex ph, double complex *c, double complex *s);

/* ccos(ph) and csin(ph) at about half their cost (the real functions of
 * the phase's two parts made once); within a few units in the last place
 * of the library's (test_model). */
void lam__complex_cos_sin(double complex ph, double complex *c, double complex *s);

/* The waves of the current cone (reflection only): kept, or filled. */
cone_waves *lam__waves_for(lam_model *m);

/* The slot for (oxide, the current cone's NA), filled when absent. */
substrate_slot *lam__substrate_for(lam_model *m, double oxide_nm);

/* The items of wavelength l (b = 1, c = Y, r2 = the bare substrate's R);
 * returns the weighted R. */
double lam__load_items(const lam_model *m, const substrate_slot *s, size_t l, stack_items *it);

/* One ambient gap on every item's fields. */
void lam__items_gap(stack_items *restrict it);

/* One sheet (C += y B) and every item's R into it->r2; returns their
 * weighted sum. */
double lam__items_sheet(stack_items *restrict it, double yr, double yi);

/* The wave vectors and phase terms of every N-layer film (film flakes) at
 * node t of wavelength l of the current cone, N = 0..layers: from the
 * model's cache, filled for the whole cone when the cone or the depth
 * changes (they do not depend on the oxide). 0 when out of memory. */
int lam__film_phases(lam_model *m, size_t l, size_t t, size_t layers, film_phases *f);

/* Channel c's weights for a shift and a log width scale into w (nwl);
 * LAM_ERANGE when the channel sees no light. */
lam_status lam__channel_weights(const lam_model *m, size_t c, double shift, double log_width,
                                double *w, lam_error *err);

/* Channel c's reflectances and contrasts from rbar with weights w. */
void lam__integrate_channel(const lam_model *m, const double *w, size_t c, size_t layers,
                            lam_prediction *out);

#endif
