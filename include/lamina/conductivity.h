/*
 * lamina/conductivity.h - optical sheet conductivity of graphene.
 *
 * Values are returned in units of the universal conductivity
 * sigma0 = e^2 / (4 hbar) (= 6.0853e-5 S; Z0 sigma0 = pi alpha), complex,
 * for time dependence exp(-i omega t): Re sigma > 0 absorbs.
 *
 * Models (lam_sheet_model):
 *   UNIVERSAL  sigma = sigma0, real and flat (the interband plateau)
 *   KUBO       local Kubo formula at Fermi level mu, temperature T and
 *              intraband scattering rate hbar/tau (L. A. Falkovsky, J. Phys.
 *              Conf. Ser. 129, 012004 (2008)): intraband Drude term
 *              i (8 kT / pi) ln[2 cosh(mu / 2kT)] / (E + i hbar/tau); interband
 *              Re = (1/2)[tanh((E + 2mu)/4kT) + tanh((E - 2mu)/4kT)] (Pauli
 *              blocking below E = 2|mu|), Im by a principal-value integral
 *              (GSL QAWC). Optional Gaussian spread of mu (charge puddles,
 *              puddle_ev = its standard deviation) smooths the edge.
 *   exciton    optional, added to either model: the visible tail of the
 *              saddle-point resonance (peak at 4.62 eV, K. F. Mak, J. Shan,
 *              T. F. Heinz, PRL 106, 046401 (2011)) as a causal, passive
 *              Lorentz term A E^2 G^2 / ((Er^2 - E^2)^2 + E^2 G^2) in Re sigma,
 *              with A and G fitted here to the Re sigma implied by Weber et al.,
 *              APL 97, 091904 (2010), over 400-750 nm. It is a visible-range
 *              model: its UV peak height is not physical.
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

typedef struct lam_sheet_params {
    lam_sheet_model model;
    double fermi_ev;      /* mu; the sign does not matter (electron-hole symmetry) */
    double temperature_k; /* > 0; below 1e-3 K the T = 0 closed forms are used */
    double scattering_ev; /* hbar / tau of the intraband term, >= 0 */
    double puddle_ev;     /* standard deviation of mu over the spot, >= 0 */
    int exciton;          /* add the saddle-point resonance tail */
} lam_sheet_params;

/* Default: Kubo, |mu| = 0.2 eV, 295 K, hbar/tau = 10 meV, no puddles,
 * exciton tail on (docs/method.md explains the choice). */
lam_sheet_params lam_sheet_params_default(void);

/* sigma / sigma0 at photon energy energy_ev (> 0). */
lam_status lam_sheet_conductivity(const lam_sheet_params *p, double energy_ev,
                                  double complex *out, lam_error *err);

/* Pieces, for tests and plots (units of sigma0; energy in eV). */
double complex lam_kubo_intraband(double energy_ev, double mu_ev, double kt_ev,
                                  double scattering_ev);
lam_status lam_kubo_interband(double energy_ev, double mu_ev, double kt_ev,
                              double complex *out, lam_error *err);
double complex lam_exciton_term(double energy_ev);

/* sigma0 = e^2 / (4 hbar) in siemens, from GSL's constants. */
double lam_sigma0_siemens(void);

/* Z0 sigma0 (dimensionless, = pi alpha), from GSL's e, hbar, c, eps0. */
double lam_z0_sigma0(void);

/* Short description of the model for reports, e.g. "kubo(mu=0.20 eV, T=295 K)+exciton". */
void lam_sheet_describe(const lam_sheet_params *p, char *buf, unsigned long n);

#endif
