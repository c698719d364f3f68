/*
 * lamina/substrate_colour.h - the bare substrate's colour as a gauge of the
 * oxide thickness, relative to a calibration.
 *
 * Thermal SiO2 on Si changes colour quickly with its thickness (near 90
 * and 300 nm ln(R/G) of the reflected light moves by 0.015-0.03 per nm),
 * which is how people read an oxide by eye. Absolute colour needs the lamp
 * and the camera's white balance, which a setup does not know; so a
 * calibration on a chip of known oxide d0 records the substrate's colour
 * there: ln L0_c, the log of its linear level per channel (lamina/
 * substrate.h), the mean over channels removed. Another image taken under
 * the same lamp and white balance (the exposure may change: only
 * differences between channels count) then has the colour residual
 *   r_c(d) = (ln L_c - ln L0_c) - (ln R_c(d) - ln R_c(d0))
 * with R the model's substrate reflectance at the analysis' fitted point.
 * Its differences to the last channel, u = D r, are Gaussian with
 *   Cov(u) = D (s^2 I + t^2 x x^T + J C J^T + diag(k (ln R_c(d) - ln R_c(d0)))^2) D^T
 * s the colour's session-to-session stability per channel (white balance,
 * camera: substrate_colour.stability), t x a lamp's change of colour
 * temperature, a tilt in 1/wavelength (x_c = 1 / centroid of channel c,
 * 600, 530 and 460 nm; t from substrate_colour.lamp_tilt, the sd of
 * ln(B/R): 0.05 is about 45 K at 3000 K, Planck's law),
 * C the fit's covariance of the parameters the reflectance depends on
 * besides the oxide (NA, channel shifts and widths), J the derivatives
 * of ln R_c(d) - ln R_c(d0) in them and k the share of the modelled change
 * that may be wrong (lam_colour_point), all taken where the colour fits
 * best with s alone. chi2(d) = u^T Cov^-1 u is scanned over a range of d; the
 * gauge is its minimum, its sd from the curvature with the reference
 * oxide's sd added in quadrature.
 *
 * A second chip of known oxide d1 under the same lamp and white balance
 * (ln L1) measures the change: the model's change is corrected by the
 * straight line through the two chips,
 *   r_c(d) = (ln L_c - ln L0_c) - (ln R_c(d) - ln R_c(d0)) - w(d) e_c,
 *   e_c = (ln L1_c - ln L0_c) - (ln R_c(d1) - ln R_c(d0)), w(d) = (d - d0)/(d1 - d0),
 * so the model supplies only the change's bend, to which k and J then
 * apply; the drift terms grow by the two more sessions in the reading
 * (s^2 (1 + w^2 + (1 - w)^2) / 2) and the second oxide's sd enters as
 * w sd1. With a camera of unknown curves this is what lets the colour
 * read chips other than the calibration's (docs/oxide.md).
 *
 * At the minimum chi2 has channels - 2
 * degrees of freedom; a large value means the colour fits no oxide: the
 * lamp, the white balance or the camera changed since the calibration.
 *
 * Needs three channels (a single channel's level is the exposure's).
 */
#ifndef LAMINA_SUBSTRATE_COLOUR_H
#define LAMINA_SUBSTRATE_COLOUR_H

#include <stddef.h>
#include "lamina/error.h"
#include "lamina/model.h"
#include "lamina/setup.h"

/* chi2 at the minimum above this (1 degree of freedom, p = 0.001): the
 * colour fits no oxide. */
#define LAM_COLOUR_CHI2_LIMIT 10.83

/* The parameters besides the oxide that the substrate's reflectance
 * depends on, in the order of lam_colour_point.cov. */
enum {
    LAM_COLOUR_NA = 0,
    LAM_COLOUR_SHIFT,
    LAM_COLOUR_WIDTH = LAM_COLOUR_SHIFT + LAM_MAX_CHANNELS,
    LAM_COLOUR_PARAMS = LAM_COLOUR_WIDTH + LAM_MAX_CHANNELS
};

/* Where the model is evaluated and how well it is known: the covariance
 * of its parameters, and the share of each channel's modelled change of
 * colour from d0 that may be wrong beyond them (the camera's spectral
 * shapes: LAM_COLOUR_CHANGE_GIVEN when the setup gives the camera's
 * curves, LAM_COLOUR_CHANGE_UNKNOWN when they are defaults). */
typedef struct lam_colour_point {
    lam_model_point point;
    double cov[LAM_COLOUR_PARAMS][LAM_COLOUR_PARAMS]; /* zeros: the point is exact */
    double change_share;
} lam_colour_point;

/* The shares. On the accuracy harness' renders (tests/robust: dye cameras
 * with colour matrices and Gaussian cameras, read with lamina's default
 * curves) the modelled change of colour over 3-12 nm of oxide was up to
 * three times the rendered one, so the oxide read from it up to three
 * times too close to d0: with unknown curves the change is taken as
 * uncertain by its own size, and the gauge speaks only near d0 (a chip
 * like the calibration's). With the camera's curves given the change was
 * right within a few per cent (docs/oxide.md has the figures). */
#define LAM_COLOUR_CHANGE_UNKNOWN 1.0
#define LAM_COLOUR_CHANGE_GIVEN 0.05

/* A second chip (substrate_colour.second in the setup) must lie this far
 * from the first: closer, a few sessions' drift (0.01 each) swamps the
 * change it measures (0.015-0.03 per nm); farther, the change is no
 * longer near a straight line (the colour loops every ~190 nm). A
 * calibration records it only when its oxide is known this well. */
#define LAM_COLOUR_SECOND_MIN_NM 2.0
#define LAM_COLOUR_SECOND_MAX_NM 30.0
#define LAM_COLOUR_SECOND_SD_NM 1.0

/* Record a substrate level as the reference colour: ln L0 with the mean
 * over channels removed. Needs 3 channels (LAM_EINVAL) and positive levels
 * (LAM_ERANGE). */
lam_status lam_substrate_colour_record(const double *level, size_t channels, double *ln_level,
                                       lam_error *err);

typedef struct lam_colour_gauge {
    int found;          /* one minimum inside the range (not at its edge) */
    int ambiguous;      /* another local minimum within chi2 + 4 and 3 sd away */
    double oxide_nm, sigma_nm; /* the minimum and its sd (see above) */
    double chi2;        /* at the minimum */
    int fits;           /* chi2 <= LAM_COLOUR_CHI2_LIMIT */
} lam_colour_gauge;

/* The oxide the substrate's colour says, searched over lo_nm..hi_nm on a
 * 0.5 nm grid at point p (its oxide ignored). LAM_EINVAL without a
 * recorded colour or with fewer than 3 channels; the model's errors. */
lam_status lam_substrate_colour_gauge(lam_model *m, const lam_colour_point *p,
                                      const lam_substrate_colour *ref, const double *level,
                                      size_t channels, double lo_nm, double hi_nm,
                                      lam_colour_gauge *out, lam_error *err);

/* The log-likelihood of this image's colour if the oxide were d: the
 * Gaussian density of the two differences u with the header's Cov(u)
 * taken at d, normalisation included (-chi2/2 - ln det(2 pi Cov)/2): the
 * covariance grows with the modelled change from d0, and without its
 * determinant a far oxide, where the model says little, would look as
 * likely as the calibration's. For fits of the flakes at different oxides
 * (another interference order) to compete on the colour too. */
lam_status lam_substrate_colour_loglik_at(lam_model *m, const lam_colour_point *p,
                                          const lam_substrate_colour *ref, const double *level,
                                          size_t channels, double d, double *loglik,
                                          lam_error *err);

#endif
