/*
 * tests/synth/synth_internal.h - pieces shared between the files of the
 * synthetic-micrograph generator (see synth.h for units and conventions).
 * Nothing here may include a lamina header.
 */
#ifndef LAMINA_TESTS_SYNTH_INTERNAL_H
#define LAMINA_TESTS_SYNTH_INTERNAL_H

#include "synth.h"

#include <complex.h>
#include <stdio.h>

/* CODATA 2018 fine-structure constant; Z0 sigma0 = pi alpha. */
#define SYNTH_ALPHA 7.2973525693e-3
/* h c in eV nm (CODATA 2018: 1239.84198...) and Boltzmann's constant in eV/K. */
#define SYNTH_HC_EVNM 1239.841984
#define SYNTH_KB_EVK 8.617333262e-5
#define SYNTH_LAYER_NM 0.335 /* graphite interlayer spacing per layer */
/* Layer thicknesses of the other crystals (bulk interlayer spacings; the
 * film thicknesses the TMD n,k were derived with, from memory):
 * hBN 0.333, MoS2 0.615, WSe2 0.649, WS2 0.616 nm. */
double synth_crystal_layer_nm(synth_crystal c);
#define SYNTH_TAU_EV 0.01    /* hbar / tau of the intraband term */
#define SYNTH_PI 3.14159265358979323846

static inline double synth_wl(int i) { return SYNTH_NM0 + SYNTH_DNM * i; }

/* ---- errors (synth_error.c) and atomic files (synth_file.c) ---- */
int synth_fail(const char *fmt, ...) __attribute__((format(printf, 1, 2)));
typedef struct synth_outfile {
    FILE *fp;
    char tmp[1100], path[1024];
} synth_outfile;
int synth_outfile_open(synth_outfile *of, const char *path);
int synth_outfile_commit(synth_outfile *of);   /* closes, renames; -1 on a write error */
void synth_outfile_abort(synth_outfile *of);   /* closes and removes the temporary */

/* ---- random numbers (synth_rng.c): xoshiro256** seeded by splitmix64 ---- */
typedef struct synth_rng {
    uint64_t s[4];
} synth_rng;
void synth_rng_seed(synth_rng *r, uint64_t seed);
uint64_t synth_rng_next(synth_rng *r);
double synth_rng_uniform(synth_rng *r, double lo, double hi); /* [lo, hi) */
int synth_rng_int(synth_rng *r, int lo, int hi);               /* lo..hi inclusive */
double synth_rng_normal(synth_rng *r);                         /* mean 0, sd 1 */

/* ---- materials (synth_nk.c): tables of tests/data/nk, or their formulas ---- */
typedef struct synth_material {
    char file[64];
    int formula;               /* 0: table; 1..3: refractiveindex.info formula number */
    int ncoef;
    double coef[24];
    size_t rows;               /* table: increasing photon energy */
    double *ev, *n, *k, *dn, *dk; /* monotone cubic Hermite in photon energy */
} synth_material;
int synth_material_load(const char *file, synth_material *m);
void synth_material_free(synth_material *m);
/* n + ik at wl_nm; a table is held at its end values outside its range. */
double complex synth_material_index(const synth_material *m, double wl_nm);

/* ---- planar stacks (synth_optics.c): characteristic matrices ---- */
typedef enum { SYNTH_S = 0, SYNTH_P = 1 } synth_pol;
typedef struct synth_layer {
    int sheet;                 /* 1: conducting sheet of admittance y = Z0 sigma */
    double complex n;          /* film index */
    double d_nm;               /* film thickness */
    double complex y;          /* sheet: pi alpha sigma / sigma0 */
} synth_layer;
/* Tangential fields (E, H) at the top of the part built so far, for a unit
 * transmitted field; kx = n0 sin(t0) is conserved through the stack. */
typedef struct synth_bc {
    double complex b, c, eta_sub;
} synth_bc;
void synth_bc_substrate(synth_bc *bc, double complex n_sub, double kx, synth_pol pol);
void synth_bc_add(synth_bc *bc, const synth_layer *l, double wl_nm, double kx, synth_pol pol);
/* The same with a film's matrix elements computed once and reused. */
void synth_film_matrix(double complex n, double d_nm, double wl_nm, double kx, synth_pol pol,
                       double complex *cd, double complex *sd, double complex *eta);
void synth_bc_add_matrix(synth_bc *bc, double complex cd, double complex sd, double complex eta);
typedef struct synth_rt {
    double complex r, t;
    double R, T;
} synth_rt;
synth_rt synth_bc_finish(const synth_bc *bc, double n0, double kx, synth_pol pol);
/* Layers from the top down on a semi-infinite substrate, incidence from n0. */
synth_rt synth_stack_solve(double n0, const synth_layer *layers, int count,
                           double complex n_sub, double wl_nm, double sin_t0, synth_pol pol);

/* ---- graphene responses (synth_sigma.c) ---- */
double synth_photon_ev(double wl_nm);
double synth_pauli_b(double e, double mu, double kT);
double complex synth_sigma_intraband(double e, double mu, double kT);
double complex synth_sigma_falkovsky_inter(double e, double mu, double kT);
double complex synth_sigma_lamina_default(double e, double mu, double kT);
/* The sheet equivalent of a film of index N and thickness d (thin-film limit). */
double complex synth_sigma_of_film(double complex N, double d_nm, double wl_nm);

/* The undoped response of one layer as a sheet conductivity (sigma0 units). */
typedef struct synth_graphene {
    synth_response kind;
    synth_material film;       /* film responses */
} synth_graphene;
int synth_graphene_load(synth_graphene *g, synth_response kind);
void synth_graphene_free(synth_graphene *g);
/* Film responses: Re sigma is held at the table's lowest-energy value
 * below the table (the interband conductivity is flat in the near IR). */
double complex synth_graphene_sigma(const synth_graphene *g, double e);

/* ---- Kramers-Kronig and Pauli blocking (synth_kk.c) ---- */
/* KK[X](E) = -(2E/pi) PV int_0^L X(E')/(E'^2 - E^2) dE' for X tabulated at
 * the midpoints of n equal steps over [0, L]; xe = X(E) (0 above L). */
double synth_kk_transform(const double *x, int n, double L, double e, double xe);
/* sigma_mu of one layer at each grid wavelength: Re blocked by b(E; mu), Im
 * corrected by the KK transform of the removed part, plus intraband. */
int synth_block_response(const synth_graphene *g, double mu, double kT,
                         double complex out[SYNTH_NL]);

/* ---- lamps, cameras, cone (synth_lamp.c, synth_camera.c, synth_cone.c) ---- */
void synth_lamp_draw(synth_rng *r, synth_lamp_kind kind, synth_lamp *out);
double synth_lamp_spd(const synth_lamp *l, double wl_nm);
const char *synth_lamp_name(synth_lamp_kind k);
void synth_camera_draw(synth_rng *r, synth_camera_kind kind, synth_camera *out);
void synth_camera_raw(const synth_camera *c, double wl_nm, double out[3]);
/* Fills lamp_spd, cam.gain, sens and weight of a physics record. */
void synth_camera_balance(synth_physics *p);
const char *synth_pupil_name(synth_pupil p);
/* Angles (sin t) and normalised weights of the cone; returns the count. */
int synth_cone_nodes(const synth_physics *p, double *sin_t, double *w, int max);

/* ---- scenes (synth_scene.c, synth_layout.c, synth_polygon.c, synth_classes.c) ---- */
void synth_physics_draw(const synth_config *cfg, synth_rng *r, synth_physics *p);
int synth_layout(const synth_config *cfg, synth_rng *r, synth_scene *sc);
void synth_polygon_make(synth_rng *r, double cx, double cy, double radius, int nv,
                        double *x, double *y);
double synth_polygon_area(const double *x, const double *y, int nv);
int synth_polygon_inside(const double *x, const double *y, int nv, double px, double py);
void synth_polygon_bounds(const double *x, const double *y, int nv, double box[4]);
int synth_rasterise(synth_scene *sc);
int synth_classes(synth_scene *sc);
/* The tests/data/nk file of each material choice. */
const char *synth_si_file(synth_si s);
const char *synth_sio2_file(synth_sio2 s);
const char *synth_pmma_file(int which);

/* ---- image pieces (synth_degrade.c, synth_bayer.c, synth_srgb.c) ---- */
int synth_blur(float *px, int w, int h, int nc, double sigma);
void synth_add_noise(float *px, size_t n, double full_well_e, double read_e, synth_rng *r);
double synth_gamma_encode(double v, double gamma);
void synth_bayer_mosaic(const float *rgb, int w, int h, float *mosaic);
void synth_bayer_demosaic(const float *mosaic, int w, int h, float *rgb);

/* ---- writers (synth_png.c, synth_jpeg.c, synth_tiff.c) ---- */
int synth_png_write(const char *path, const void *px, int w, int h, int nc, int bits,
                    int tag, int srgb_tag, double gamma_tag, double um_per_px);
int synth_jpeg_write(const char *path, const uint8_t *px, int w, int h, int nc, int quality);
int synth_tiff_write(const char *path, const uint16_t *px, int w, int h, int nc,
                     double um_per_px);

#endif
