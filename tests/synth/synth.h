/*
 * tests/synth/synth.h - an independent synthetic-micrograph generator for
 * lamina's tests: graphene flakes on SiO2/Si drawn with physics the
 * analysis is NOT told about (other published graphene responses, random
 * cameras, lamps, illumination cones, pupils, true oxide off nominal,
 * Bayer mosaics, JPEG 4:2:0, monochrome cameras behind filters, 16-bit
 * linear files).
 *
 * Independence: nothing here includes a lamina header or calls a lamina
 * function; the optics are written from textbook formulas. Only libc, libm,
 * libpng, libjpeg, libtiff and tests/refdata.c (the n,k tables in
 * tests/data/nk, found through check_refdata_dir()) are used.
 *
 * Units: wavelengths in nm, photon energies and Fermi levels in eV,
 * thicknesses in nm, conductivities in units of sigma0 = e^2/(4 hbar),
 * pixel sizes in um, pixel values linear in [0, 1] (1 = full scale).
 * Conventions: complex index n + ik, k >= 0 absorbs, time factor
 * exp(-i w t); contrast C = (substrate - flake) / substrate.
 *
 * Use:
 *     synth_config cfg;
 *     synth_config_init(&cfg);            (every choice random)
 *     cfg.response = SYNTH_RESP_WEBER;    (fix what the test needs)
 *     synth_scene sc;
 *     if (synth_scene_make(&cfg, seed, &sc)) ... synth_error() says why
 *     synth_image im;
 *     synth_render(&sc, &im);
 *     synth_save(&im, SYNTH_FMT_JPEG, 85, "dir/x.jpg");
 *     synth_write_setup(&sc, SYNTH_FMT_JPEG, 1, "dir/x.setup.json");
 *     synth_write_truth(&sc, "dir/x");
 *     synth_image_free(&im); synth_scene_free(&sc);
 *
 * Errors: functions returning int give 0 on success and -1 on failure;
 * synth_error() then returns a message naming the file or value. A failed
 * call leaves nothing allocated and no partial file (outputs are written
 * to a temporary name and renamed). The same seed and config give the same
 * scene and the same pixels on every machine with IEEE doubles.
 * Threads: every function may run on several threads at once (each on its
 * own scene and image); the n,k tables are read under a lock.
 */
#ifndef LAMINA_TESTS_SYNTH_H
#define LAMINA_TESTS_SYNTH_H

#include <stddef.h>
#include <stdint.h>

/* The spectral grid of every integral: 380..780 nm in 2 nm steps. */
#define SYNTH_NL 201
#define SYNTH_NM0 380.0
#define SYNTH_DNM 2.0
#define SYNTH_MAX_OBJECTS 64
#define SYNTH_MAX_VERTS 16

/* Graphene's optical response, one per scene (see synth_sigma.c). */
typedef enum {
    SYNTH_RESP_RANDOM = 0,
    SYNTH_RESP_SIGMA0,         /* N sheets of the universal real sigma0 */
    SYNTH_RESP_WEBER,          /* Weber et al., APL 97, 091904 (2010), film */
    SYNTH_RESP_SONG,           /* Song et al., Appl. Surf. Sci. 439, 1079 (2018), film */
    SYNTH_RESP_ELSAYED,        /* El-Sayed et al., Nanomaterials 11, 1230 (2021), film */
    SYNTH_RESP_LAMINA_DEFAULT, /* Kubo + saddle-point + background sheets (issue 9's default) */
    SYNTH_RESP_COUNT
} synth_response;

/* The flake crystal of a scene (issue 14). Graphene (the default) uses the
 * response above; the others are films of published n,k (synth_classes.c):
 *   hBN   a transparent film of any thickness, in-plane index of Grudinin
 *         et al. 2023 (source 0), Lee et al. 2019 (1) or Rah et al. 2019 (2);
 *   MoS2  N x 0.615 nm: Hsu et al. 2019 1L, 2L and 3L n,k and the bulk
 *         n,k of Song et al. 2019 above (source 0), or Song's 1L for one
 *         layer and Song's bulk for more (source 1);
 *   WSe2  N x 0.649 nm: the 1L n,k of Hsu et al. 2019 (0) or Gu et al. 2019
 *         (1) for every layer count;
 *   WS2   N x 0.616 nm: Hsu et al. 2019 1L n,k for every layer count.
 * In scenes of these crystals the exposure is lowered when needed so that
 * the brightest flake stays below 92 % of full scale. */
typedef enum {
    SYNTH_XTAL_GRAPHENE = 0,
    SYNTH_XTAL_HBN,
    SYNTH_XTAL_MOS2,
    SYNTH_XTAL_WSE2,
    SYNTH_XTAL_WS2,
    SYNTH_XTAL_COUNT
} synth_crystal;

typedef enum { SYNTH_SI_RANDOM = 0, SYNTH_SI_GREEN, SYNTH_SI_SCHINKE, SYNTH_SI_ASPNES } synth_si;
typedef enum { SYNTH_SIO2_RANDOM = 0, SYNTH_SIO2_MALITSON, SYNTH_SIO2_GAO } synth_sio2;

/* Pupil weighting of the illumination cone (angle t in air). */
typedef enum {
    SYNTH_PUPIL_RANDOM = 0,
    SYNTH_PUPIL_SINCOS,  /* sin t cos t */
    SYNTH_PUPIL_SIN,     /* sin t */
    SYNTH_PUPIL_ANNULAR, /* sin t cos t for t above asin(f NA) only */
    SYNTH_PUPIL_FILLED   /* sin t cos t x exp(-(sin t / (f NA))^2 / 2): a partly filled pupil */
} synth_pupil;

typedef enum { SYNTH_LAMP_RANDOM = 0, SYNTH_LAMP_BLACKBODY, SYNTH_LAMP_LED, SYNTH_LAMP_CIE_A }
    synth_lamp_kind;

typedef enum { SYNTH_CAM_RANDOM = 0, SYNTH_CAM_GAUSS, SYNTH_CAM_DYE, SYNTH_CAM_MONO }
    synth_camera_kind;

/* What the caller fixes; everything left at its synth_config_init value is
 * drawn at random from the scene's seed. NAN means "random" for doubles. */
typedef struct synth_config {
    int width, height;          /* 0: 640 x 480 */
    double um_per_px;           /* NAN: uniform 0.1..0.25 */
    synth_response response;
    synth_si si;                /* random: Green 2008 (1/2), Schinke, Aspnes-Studna */
    synth_sio2 sio2;            /* random: Malitson 1965 (3/4), Gao 2013 film */
    double nominal_oxide_nm;    /* NAN: one of 90, 285, 300 */
    double oxide_nm;            /* true oxide; NAN: nominal + uniform(-12, 12) */
    double na;                  /* illumination NA; NAN: uniform 0.2..0.8 (0 = normal) */
    synth_pupil pupil;
    int cone_steps;             /* midpoint steps over the cone; 0: 24..48 */
    synth_lamp_kind lamp;
    double lamp_kelvin;         /* blackbody temperature; NAN: 2800..3400 K */
    synth_camera_kind camera;   /* random: gauss or dye (mono only when asked) */
    double gauss_centre_nm[3];  /* gauss camera R, G, B; NAN: random */
    double gauss_fwhm_nm[3];    /* NAN: 50..110 nm */
    /* Fermi level of every flake. NAN: each flake uses the response as
     * published (lamina-default with a per-flake mu drawn uniformly in
     * fermi_lo..fermi_hi); a number: every flake is Pauli-blocked at it. */
    double fermi_eV;
    double fermi_lo_eV, fermi_hi_eV; /* NAN: 0.1 and 0.3 */
    /* Doping test: also place isolated monolayers Pauli-blocked at each of
     * these levels (the first n_doped entries). */
    int n_doped;
    double doped_eV[8];
    int n_flakes;               /* 0: 6..14 (not counting doped monolayers) */
    double exposure;            /* NAN: 0.35..0.8 of full scale */
    double wb_drift[3];         /* white balance drifted from the lamp's: each channel's
                                 * values times this (0: 1, no drift) */
    int noiseless;              /* 1: no shot or read noise */
    int no_flat_field;          /* 1: no vignetting or gradient */
    double blur_px;             /* NAN: Gaussian sigma 0.5..1.5 px; 0: none */
    synth_crystal crystal;      /* graphene unless set */
    int nk_source;              /* the crystal's n,k source (see synth_crystal); -1 random */
    double hbn_min_nm, hbn_max_nm; /* hBN film thickness range, log-uniform; NAN: 1..100 */
} synth_config;

typedef struct synth_lamp {
    synth_lamp_kind kind;
    double kelvin;                       /* blackbody; CIE A: 2856 */
    double blue_nm, blue_fwhm_nm;        /* LED blue die */
    double phos_nm, phos_lo_nm, phos_hi_nm; /* LED phosphor peak, half widths below/above */
    double blue_share;                   /* LED: blue peak height / phosphor peak height */
} synth_lamp;

typedef struct synth_camera {
    synth_camera_kind kind;
    int nc;                              /* 3, or 1 for mono */
    double centre_nm[3], fwhm_nm[3];     /* gauss (R, G, B) */
    double rise_nm[3], rise_w[3], fall_nm[3], fall_w[3]; /* dye: logistic edges */
    double ircut_nm, ircut_w;            /* dye: IR-cut edge */
    double ccm[3][3];                    /* dye: colour matrix (rows sum to 1); else I */
    double filter_nm, filter_fwhm_nm;    /* mono: band-pass */
    int filter_flat;                     /* mono: 1 flat-top, 0 Gaussian */
    double gain[3];                      /* white balance applied to the raw channels */
} synth_camera;

/* The resolved physics of one scene (the truth). */
typedef struct synth_physics {
    synth_crystal crystal;
    int nk_source;
    synth_response response;
    synth_si si;
    synth_sio2 sio2;
    int pmma;                            /* residue: 0 Sultanova 2009, 1 Beadie 2015 */
    double nominal_oxide_nm, oxide_nm;
    double na;
    synth_pupil pupil;
    double pupil_f;                      /* annular / filled parameter */
    int cone_steps;
    synth_lamp lamp;
    synth_camera cam;
    double kT_eV;                        /* 295 K */
    double lamp_spd[SYNTH_NL];           /* relative lamp spectrum, max 1 */
    double sens[3][SYNTH_NL];            /* effective channel sensitivities incl. colour
                                          * matrix and white balance, each max |.| 1 */
    double weight[3][SYNTH_NL];          /* lamp x sens, normalised: white -> 1 */
    double sub_value[3];                 /* substrate channel values (white = 1) */
    double exposure;                     /* substrate's brightest channel, of full scale */
    double vignette, gradient, gradient_deg; /* flat field: corner fall-off, peak-to-peak */
    double blur_px, full_well_e, read_noise_e;
    double um_per_px;
} synth_physics;

typedef enum { SYNTH_OBJ_FLAKE, SYNTH_OBJ_FOLD, SYNTH_OBJ_RESIDUE, SYNTH_OBJ_DUST }
    synth_object_kind;

typedef struct synth_object {
    synth_object_kind kind;
    int layers;             /* flake or fold: 1..60; else 0 */
    int doped;              /* 1: Pauli-blocked at fermi_eV */
    double fermi_eV;        /* NAN where the response is used as published */
    double residue_nm;      /* residue: PMMA thickness */
    double transmission;    /* dust: grey transmission */
    int parent;             /* fold: index of its flake; else -1 */
    int nv;
    double x[SYNTH_MAX_VERTS], y[SYNTH_MAX_VERTS]; /* polygon, pixel units (0,0 = corner) */
    long area_px;           /* pixels whose centres fall inside (folds excluded) */
    double cx, cy;          /* centroid of those pixels */
    double rel[3];          /* channel value / substrate value, noise-free */
    double thickness_nm;    /* hBN flake: the film's thickness (layers 0); else 0 */
    int label;              /* value in the truth map: layers, 250 residue, 251 dust, 252 hBN */
} synth_object;

typedef struct synth_scene {
    uint64_t seed;
    int width, height;
    synth_physics phys;
    int nobj;
    synth_object obj[SYNTH_MAX_OBJECTS];
    int16_t *owner;         /* width x height: object index, -1 substrate */
    uint8_t *truth;         /* width x height: 0 substrate, 1..60 layers, 250, 251 */
} synth_scene;

typedef struct synth_image {
    int width, height, nc;  /* nc = 3 (R, G, B) or 1 */
    float *px;              /* linear, interleaved, in [0, 1], with noise */
    float *clean;           /* the same before noise (used by the Bayer path) */
    double full_well_e, read_noise_e;
    uint64_t noise_seed;
    double um_per_px;
} synth_image;

typedef enum {
    SYNTH_FMT_PNG,          /* 8-bit sRGB (grey when nc = 1) */
    SYNTH_FMT_PNG_GAMMA22,  /* 8-bit, v^(1/2.2) instead of the sRGB curve */
    SYNTH_FMT_JPEG,         /* 8-bit sRGB, quality q, 4:2:0 chroma (grey when nc = 1) */
    SYNTH_FMT_BAYER_PNG,    /* RGGB mosaic, bilinear demosaic, 8-bit sRGB PNG */
    SYNTH_FMT_BAYER_JPEG,   /* the same as JPEG quality q */
    SYNTH_FMT_PNG16,        /* 16-bit linear */
    SYNTH_FMT_TIFF16        /* 16-bit linear, deflate */
} synth_format;

/* Flags for synth_save_ex. */
#define SYNTH_SAVE_TAG 1    /* write colour metadata (PNG sRGB/gAMA, pHYs; TIFF resolution) */

void synth_config_init(synth_config *cfg);
int synth_scene_make(const synth_config *cfg, uint64_t seed, synth_scene *out);
/* The same with the physics (microscope, response, oxide, exposure) and the
 * layout (flakes) drawn from separate seeds: the tiles of one chip scan
 * share a physics seed. synth_scene_make(cfg, s, out) is
 * synth_scene_make2(cfg, s, s, out). */
int synth_scene_make2(const synth_config *cfg, uint64_t physics_seed, uint64_t layout_seed,
                      synth_scene *out);
void synth_scene_free(synth_scene *sc);
int synth_render(const synth_scene *sc, synth_image *out);
void synth_image_free(synth_image *im);
int synth_save(const synth_image *im, synth_format fmt, int quality, const char *path);
int synth_save_ex(const synth_image *im, synth_format fmt, int quality, int flags,
                  const char *path);
/* Setup profile (lamina-setup/1) for a file written in fmt: informed = 1 adds
 * what a lab knows (camera and lamp tables written beside it as
 * STEM.camera.csv and STEM.lamp.csv, illumination NA, encoding); informed =
 * 0 gives only the nominal oxide and the pixel size. STEM is path without
 * ".setup.json" (or ".json"). */
int synth_write_setup(const synth_scene *sc, synth_format fmt, int informed, const char *path);
/* STEM.truth.png and STEM.truth.json. */
int synth_write_truth(const synth_scene *sc, const char *stem);

/* The message of the last failure in this thread. */
const char *synth_error(void);

/* Names used in files and on the command line. */
const char *synth_response_name(synth_response r);
int synth_response_parse(const char *name, synth_response *out);
const char *synth_camera_name(synth_camera_kind k);
const char *synth_crystal_name(synth_crystal c); /* "graphene", "hBN", "MoS2", ... */
int synth_crystal_parse(const char *name, synth_crystal *out);
/* The n,k file(s) of a crystal's source: the film of N layers (hBN: any). */
const char *synth_crystal_file(synth_crystal c, int source, int layers);
const char *synth_format_ext(synth_format fmt);
/* "png", "jpeg85", "bayer", "bayer-jpeg90", "png16", "gamma22", "grey8",
 * "grey16", "tiff16" -> format, quality, and whether one channel is
 * required (1), three (3) or either (0). */
int synth_format_parse(const char *name, synth_format *fmt, int *quality, int *channels);

/* The physics, exposed for the tests (see synth_internal.h for more). */
/* sRGB (IEC 61966-2-1) encoding of a linear value in [0, 1]. */
double synth_srgb_encode(double v);

#endif
