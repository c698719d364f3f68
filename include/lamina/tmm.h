/*
 * lamina/tmm.h - transfer (characteristic) matrices of planar stacks with
 * conducting sheets, for s and p polarisation at any angle.
 *
 * Fields: tangential E and H; admittances in units of the free-space
 * admittance Y0. Time dependence exp(-i omega t), N = n + i k (k >= 0
 * absorbs). A film of index N and thickness d has the characteristic matrix
 *   [[cos d, -i sin d / eta], [-i eta sin d, cos d]],  d = 2 pi q d / lambda,
 * with q = N cos(theta) = sqrt(N^2 - (n0 sin theta0)^2), Im q >= 0, and the
 * tilted admittance eta = q (s) or N^2 / q (p). A conducting sheet of 2D
 * conductivity sigma is the interface matrix [[1, 0], [y, 1]], y = Z0 sigma
 * (same for s and p: the sheet current follows the tangential field).
 * A sheet breaks r_ba = -r_ab, so the two-interface Airy formula must not be
 * used with sheets; everything here goes through the matrices.
 *
 * Layers are listed from the ambient side down to the substrate. The
 * ambient must be lossless (real index) for R, T, A to be defined.
 * No allocation; pure functions.
 */
#ifndef LAMINA_TMM_H
#define LAMINA_TMM_H

#include <complex.h>
#include <stddef.h>

typedef enum lam_pol { LAM_POL_S = 0, LAM_POL_P = 1 } lam_pol;

typedef enum lam_tmm_layer_kind { LAM_TMM_FILM = 0, LAM_TMM_SHEET = 1 } lam_tmm_layer_kind;

typedef struct lam_tmm_layer {
    lam_tmm_layer_kind kind;
    double complex index;   /* FILM */
    double thickness_nm;    /* FILM */
    double complex y;       /* SHEET: Z0 sigma (dimensionless) */
} lam_tmm_layer;

typedef struct lam_tmm_result {
    double complex r, t; /* amplitude reflection and transmission (tangential E) */
    double R, T, A;      /* reflectance, transmittance into the substrate, absorptance */
} lam_tmm_result;

/* q = N cos(theta) for the in-plane invariant kx = n0 sin(theta0). */
double complex lam_tmm_q(double complex index, double kx);

/* Tilted admittance for a polarisation. */
double complex lam_tmm_eta(double complex index, double complex q, lam_pol pol);

/* Input admittance Y = C/B seen on top of a film whose lower side sees Y_below. */
double complex lam_tmm_through_film(double complex y_below, double complex eta,
                                    double complex cos_d, double complex sin_d);

/* Solve a stack at one wavelength, angle (sin_theta0 in the ambient) and
 * polarisation; layers[0] is the top (ambient side). A pure function: no
 * allocation, no errors (a lossless stack gives R + T = 1). */
lam_tmm_result lam_tmm_solve(double n_ambient, const lam_tmm_layer *layers, size_t count,
                             double complex n_substrate, double wavelength_nm,
                             double sin_theta0, lam_pol pol);

#endif
