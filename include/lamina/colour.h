/*
 * lamina/colour.h - spectra: the wavelength grid, illuminants, the CIE 1931
 * observer and camera channel sensitivities.
 *
 * A camera channel reading of a surface of reflectance R(lambda) is
 *   R_c = sum_l S_c(l) L(l) R(l) w_l / sum_l S_c(l) L(l) w_l
 * with S_c the channel sensitivity, L the illuminant and w_l trapezoid
 * weights; lam_spectrum_weights returns the normalised products.
 * White balance is a per-channel gain and cancels in R_c ratios.
 *
 * Wavelengths in nm (vacuum). No allocation except in lam_spectra_alloc /
 * the CSV readers (released by lam_spectra_free).
 */
#ifndef LAMINA_COLOUR_H
#define LAMINA_COLOUR_H

#include <stddef.h>
#include "lamina/error.h"
#include "lamina/names.h"

#define LAM_MAX_CHANNELS 3
#define LAM_MAX_GRID 2001

typedef struct lam_grid {
    size_t count;
    double nm[LAM_MAX_GRID];
    double weight[LAM_MAX_GRID]; /* trapezoid weights in nm */
} lam_grid;

/* Evenly spaced grid from lo to hi (inclusive) with the given step. */
lam_status lam_grid_init(lam_grid *g, double lo_nm, double hi_nm, double step_nm,
                         lam_error *err);

/* A single wavelength (a monochromatic filter). */
void lam_grid_single(lam_grid *g, double nm);

typedef enum lam_illuminant_kind {
    LAM_ILLUM_BLACKBODY = 0, /* Planck at kelvin */
    LAM_ILLUM_CIE_A,         /* CIE 015 formula (Planck at 2856 K, c2 = 1.435e-2 m K) */
    LAM_ILLUM_LED_WHITE,     /* blue pump + phosphor model, see colour.c */
    LAM_ILLUM_FLAT,          /* equal energy */
    LAM_ILLUM_TABLE          /* CSV wavelength_nm,relative */
} lam_illuminant_kind;

typedef enum lam_camera_kind {
    LAM_CAMERA_SRGB_OBSERVER = 0, /* CIE 1931 observer mapped to linear sRGB */
    LAM_CAMERA_GAUSSIAN,          /* channels given by centre and FWHM */
    LAM_CAMERA_TABLE,             /* CSV wavelength_nm,r,g,b */
    LAM_CAMERA_MONO               /* one flat channel (monochromatic grids) */
} lam_camera_kind;

/* Names of the kinds as setup files and reports spell them ("blackbody",
 * "cie-a", "led-white", "flat", "table"; "srgb-observer", "gaussian",
 * "table", and "mono", internal); lam_*_kind_name returns NULL for a value
 * not in the table. */
extern const lam_name lam_illuminant_kind_names[];
extern const lam_name lam_camera_kind_names[];
const char *lam_illuminant_kind_name(lam_illuminant_kind kind);
const char *lam_camera_kind_name(lam_camera_kind kind);

/* A table spectrum read from CSV: rows of wavelength and 1 or 3 values. */
typedef struct lam_table_spectrum {
    size_t rows, columns;
    double *nm, *value; /* value[row * columns + col] */
    char file[512];     /* where it was read from */
} lam_table_spectrum;

typedef struct lam_illuminant {
    lam_illuminant_kind kind;
    double kelvin;
    lam_table_spectrum table; /* TABLE, owned */
} lam_illuminant;

typedef struct lam_camera {
    lam_camera_kind kind;
    size_t channels;                              /* 1 to 3 (1: a monochrome camera) */
    double centre_nm[LAM_MAX_CHANNELS], fwhm_nm[LAM_MAX_CHANNELS]; /* GAUSSIAN */
    lam_table_spectrum table;                     /* TABLE, owned */
} lam_camera;

/* Relative spectral power at a wavelength (arbitrary scale). */
double lam_illuminant_eval(const lam_illuminant *il, double nm);

/* Channel sensitivity S_c at a wavelength (may be negative for the
 * sRGB-observer mapping, whose primaries are not physical sensors). */
double lam_camera_eval(const lam_camera *cam, size_t channel, double nm);

/* CIE 1931 2-degree observer by the multi-lobe Gaussian fit of C. Wyman,
 * P.-P. Sloan, P. Shirley, JCGT 2(2), 1 (2013). xyz[3] out. */
void lam_cie1931_eval(double nm, double xyz[3]);

/* IEC 61966-2-1 XYZ (D65) -> linear sRGB matrix. */
void lam_xyz_to_linear_srgb(const double xyz[3], double rgb[3]);

/* Planck's law, relative: lambda^-5 / (exp(c2 / (lambda T)) - 1). */
double lam_planck(double nm, double kelvin, double c2_m_k);

/* Normalised weights w[c][l] = S_c L w_l / sum; fails when a channel's
 * normalisation is not positive. */
lam_status lam_spectrum_weights(const lam_grid *g, const lam_illuminant *il,
                                const lam_camera *cam, double (*w)[LAM_MAX_GRID],
                                lam_error *err);

/* Read a CSV spectrum with a header whose first field is wavelength_nm and
 * 'columns' value columns (0: as many as the header names, 1 to 3). The
 * error names the file and line. */
lam_status lam_table_spectrum_load(const char *path, size_t columns,
                                   lam_table_spectrum *out, lam_error *err);
/* The same, allowing negative values when allow_negative (the effective
 * sensitivities of a colour camera after its colour matrix dip below 0). */
lam_status lam_table_spectrum_load_ex(const char *path, size_t columns, int allow_negative,
                                      lam_table_spectrum *out, lam_error *err);
void lam_table_spectrum_clear(lam_table_spectrum *t);

/* Linear interpolation of a table column (0 outside the table). */
double lam_table_spectrum_eval(const lam_table_spectrum *t, size_t column, double nm);

#endif
