/*
 * Private: atomic physics of recombination (recombination.c).
 * Rates in SI units; x_e, x_p and the helium fractions are per hydrogen nucleus.
 */
#ifndef JEANSGROW_SRC_RECOMBINATION_H
#define JEANSGROW_SRC_RECOMBINATION_H

#include "jeansgrow/background.h"

/* Case-B recombination coefficient (m^3 s^-1) of Pequignot, Petitjean &
 * Boisson (1991), times the fudge factor; and its temperature derivative. */
double jg__case_b_coefficient(double T, double fudge);
double jg__case_b_coefficient_dT(double T, double fudge);

/* (2 pi m_e k T / h^2)^(3/2), m^-3: the electron quantum concentration. */
double jg__electron_quantum_density(double T);

/* Helium in Saha equilibrium at radiation temperature T_rad and hydrogen
 * density n_H for a given electron fraction x_e: electrons per hydrogen
 * nucleus contributed by helium, the He II and He III fractions (per H
 * nucleus) and d(helium electrons)/d(x_e). */
typedef struct jg__helium_saha {
  double electrons, x_HeII, x_HeIII, d_electrons_dxe;
} jg__helium_saha;
void jg__helium_saha_at(const jg_background *bg, double T_rad, double n_H, double x_e,
                        jg__helium_saha *out);

/* The root of f in [lo, hi], where f changes sign, to a bracket narrower
 * than tol (Illinois regula falsi; allocates nothing). GSL_EINVAL without a
 * sign change, GSL_EBADFUNC if f is not finite inside. */
int jg__bracketed_root(double (*f)(double, void *), void *params, double lo, double hi,
                       double tol, double *root);

/* Joint Saha equilibrium of hydrogen and helium: x_e and x_p at T_rad, n_H. */
int jg__saha_equilibrium(const jg_background *bg, double T_rad, double n_H, double *x_e,
                         double *x_p);
/* Electron fraction with hydrogen fixed at x_p and helium in Saha
 * equilibrium, and d x_e / d x_p. */
int jg__electrons_given_hydrogen(const jg_background *bg, double T_rad, double n_H, double x_p,
                                 double *x_e, double *dxe_dxp);

/* The Peebles / Seager-Sasselov-Scott rate d x_p / dt (s^-1) and its
 * partial derivatives with respect to x_p (with x_e following), T_gas, and
 * (for the perturbed recombination) ln n_H and ln H at fixed fractions: a
 * denser gas recombines faster, and a slower local expansion H traps more
 * Lyman-alpha photons (C depends on n_H (1 - x_p) / H). */
typedef struct jg__peebles_rate {
  double dxp_dt, d_dxp, d_dTgas, d_dlnnH, d_dlnH;
} jg__peebles_rate;
void jg__peebles_rate_at(double x_p, double x_e, double dxe_dxp, double T_gas, double T_rad,
                         double n_H, double hubble, double fudge, jg__peebles_rate *out);

#endif
