/*
 * lamina/conductivity.h - optical sheet conductivity of graphene.
 *
 * Values are returned in units of the universal conductivity
 * sigma0 = e^2 / (4 hbar) (= 6.0853e-5 S; Z0 sigma0 = pi alpha), complex,
 * for time dependence exp(-i omega t): Re sigma > 0 absorbs. Photon
 * energies E in eV.
 *
 * Models (lam_sheet_model):
 *   UNIVERSAL  sigma = sigma0, real and flat (the interband plateau).
 *   KUBO       the local Kubo formula at Fermi level mu, temperature T and
 *              intraband scattering rate hbar/tau (L. A. Falkovsky, J. Phys.
 *              Conf. Ser. 129, 012004 (2008)): intraband Drude term
 *              i (8 kT / pi) ln[2 cosh(mu / 2kT)] / (E + i hbar/tau);
 *              interband Re = b(E; mu) = (1/2)[tanh((E + 2mu)/4kT) +
 *              tanh((E - 2mu)/4kT)] (Pauli blocking below E = 2|mu|), Im by
 *              a principal-value integral (src/pv_quad.h: Gauss-Legendre
 *              panels graded towards the Fermi edge, the pole subtracted;
 *              within 1e-13 of GSL's QAWC). Optional Gaussian
 *              spread of mu (charge puddles) smooths the edge.
 *
 * The visible response (lam_sheet_params.exciton on, the default) adds to
 * KUBO what ellipsometry of real graphene shows in the visible: Re and Im
 * of sigma both above the Kubo values (Re 1.1-1.5 sigma0, Im -0.6 to -1.0
 * sigma0 at 450-650 nm in Weber et al., APL 97, 091904 (2010), Song et al.,
 * Appl. Surf. Sci. 439, 1079 (2018), El-Sayed et al., Nanomaterials 11,
 * 1230 (2021)). It is a three-parameter family, each term causal and
 * passive:
 *   sigma = sigma_intra + (1 + continuum) S(E; mu)
 *         + resonance  * L(E; 4.62 eV, 2.5 eV) * [Pauli-blocked with S]
 *         + background * L(E; 14 eV, 3 eV)
 * with L(E; Er, G) = -i E / (Er^2 - E^2 - i E G), the conductivity of a
 * bound oscillator. The first L is the red tail of the saddle-point
 * resonance (peak position 4.62 eV from K. F. Mak, J. Shan, T. F. Heinz,
 * PRL 106, 046401 (2011)); it multiplies the interband continuum, so it is
 * blocked with it: its real part is multiplied by b(E; mu) and the
 * imaginary part of the removed piece follows by a numerical
 * Kramers-Kronig transform. The second is the low-energy side of the far-UV
 * (sigma-band) transitions: nearly pure -Im in the visible, what a film
 * model calls a background permittivity. 'continuum' scales the interband
 * plateau. Defaults (lam_sheet_params_default): resonance 3.442, background
 * 31.23, continuum -0.038, fitted here to Weber's Re AND Im over 400-750 nm
 * (a 0.335 nm film converted to a sheet), within 0.01 sigma0 in Re and 0.03
 * in Im. The family spans the published responses: the universal sheet is
 * (0, 0, 0), and Song's and El-Sayed's films fit within 0.04 sigma0 over
 * 450-650 nm (docs/method.md). It is a visible-range model: the broad
 * Lorentz stands for the long red tail of the asymmetric resonance, and
 * its implied UV peak (about 2.4 sigma0 at 4.62 eV) is lower than the
 * measured one (5.1 sigma0 at 4.35 eV in Weber's data).
 *
 * N-layer graphene is modelled as N such sheets (lamina/tmm.h).
 */
#ifndef LAMINA_CONDUCTIVITY_H
#define LAMINA_CONDUCTIVITY_H

#include <complex.h>
#include "lamina/error.h"

typedef enum lam_sheet_model {
    LAM_SHEET_UNIVERSAL = 0,
    LAM_SHEET_KUBO
} lam_sheet_model;

/* The resonance positions and widths of the family (eV). */
#define LAM_SADDLE_EV 4.62
#define LAM_SADDLE_WIDTH_EV 2.5
#define LAM_UV_EV 14.0
#define LAM_UV_WIDTH_EV 3.0

typedef struct lam_sheet_params {
    lam_sheet_model model;
    double fermi_ev;      /* mu; the sign does not matter (electron-hole symmetry) */
    double temperature_k; /* > 0; below 1e-3 K the T = 0 closed forms are used */
    double scattering_ev; /* hbar / tau of the intraband term, >= 0 */
    double puddle_ev;     /* standard deviation of mu over the spot, >= 0 */
    int exciton;          /* add the visible-response terms below (KUBO only) */
    double resonance;     /* amplitude of the saddle-point term, >= 0 */
    double background;    /* amplitude of the far-UV term, >= 0 */
    double continuum;     /* relative change of the interband plateau, > -1 */
} lam_sheet_params;

/* Default: Kubo, |mu| = 0.2 eV, 295 K, hbar/tau = 10 meV, no puddles, the
 * visible-response terms with the values fitted to Weber et al. (2010). */
lam_sheet_params lam_sheet_params_default(void);

/* sigma / sigma0 at photon energy energy_ev (> 0). LAM_ERANGE for
 * parameters outside their ranges (the message names the parameter). */
lam_status lam_sheet_conductivity(const lam_sheet_params *p, double energy_ev,
                                  double complex *out, lam_error *err);

/* The same as a linear combination: sigma = basis[0] + continuum basis[1]
 * + resonance basis[2] + background basis[3] (basis[1..3] are 0 when the
 * visible terms are off), so a model can vary the three family parameters
 * without recomputing the Kubo integrals. lam_sheet_combine applies p's
 * values to a basis. */
lam_status lam_sheet_basis(const lam_sheet_params *p, double energy_ev, double complex basis[4],
                           lam_error *err);
double complex lam_sheet_combine(const lam_sheet_params *p, const double complex basis[4]);

/* Pieces, for tests and plots (units of sigma0; energy in eV). */
double complex lam_kubo_intraband(double energy_ev, double mu_ev, double kt_ev,
                                  double scattering_ev);
lam_status lam_kubo_interband(double energy_ev, double mu_ev, double kt_ev,
                              double complex *out, lam_error *err);
/* Pauli-blocking factor b(E; mu) of the interband transitions (0..1). */
double lam_pauli_factor(double energy_ev, double mu_ev, double kt_ev);
/* Bound-oscillator conductivity L(E; Er, G) = -i E / (Er^2 - E^2 - i E G). */
double complex lam_oscillator(double energy_ev, double centre_ev, double width_ev);
/* The part of the saddle-point term that Pauli blocking removes, per unit
 * resonance amplitude: Re = Re L(E) (1 - b(E; mu)), Im by Kramers-Kronig. */
lam_status lam_resonance_blocked(double energy_ev, double mu_ev, double kt_ev,
                                 double complex *out, lam_error *err);

/* sigma0 = e^2 / (4 hbar) in siemens, from GSL's constants. */
double lam_sigma0_siemens(void);

/* Z0 sigma0 (dimensionless, = pi alpha), from GSL's e, hbar, c, eps0. */
double lam_z0_sigma0(void);

/* Short description of the model for reports, e.g.
 * "kubo(mu=0.2 eV, T=295 K, ...)+visible(resonance=3.44, background=31.2, continuum=-0.038)". */
void lam_sheet_describe(const lam_sheet_params *p, char *buf, unsigned long n);

#endif
