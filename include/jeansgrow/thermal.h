/*
 * The ionisation and gas-temperature history after recombination.
 *
 * Hydrogen: the effective three-level atom of Peebles (1968) in the form of
 * Seager, Sasselov & Scott (1999, ApJ 523, L1; 2000, ApJS 128, 407), with the
 * case-B coefficient of Pequignot, Petitjean & Boisson (1991) times the fudge
 * factor F, and Saha equilibrium while x_p > thermal.saha_limit.
 * Helium: Saha equilibrium for He II <-> He I and He III <-> He II.
 * Gas temperature: Compton heating by the CMB against adiabatic cooling,
 *   dT_gas/dt = -2 H T_gas + Gamma_C (T_rad - T_gas),
 * with the quasi-static solution T_rad (1 - H/Gamma_C) while H/Gamma_C is below
 * thermal.quasi_static_limit. All stiff pieces use GSL's msbdf stepper with an
 * analytic Jacobian (recombination.c, gas_temperature.c); thermal.c drives
 * them with the stepper's own steps and stores the history on a grid in ln a
 * (uniform, graded towards the phase switches and the ends), with cubic
 * splines.
 *
 * Above thermal.start_redshift the history is Saha equilibrium and the
 * quasi-static temperature, evaluated directly.
 *
 * Reionisation (thermal.reionisation, off by default): the tanh model of
 * hydrogen with He I and of He II, added to the recombination history's
 * ionisation below its onset; with "tanh+heating" the gas is heated by the
 * ionisation front and photo-heated in ionisation equilibrium
 * (src/PHYSICS.md §12).
 *
 * Read-only after jg_thermal_new(): share one between threads freely.
 */
#ifndef JEANSGROW_THERMAL_H
#define JEANSGROW_THERMAL_H

#include "jeansgrow/background.h"
#include "jeansgrow/error.h"
#include "jeansgrow/params.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct jg_thermal jg_thermal;

/* The state of the gas at one redshift. */
typedef struct jg_thermal_state {
  double z;
  double x_e;        /* free electrons per hydrogen nucleus, n_e / n_H */
  double x_p;        /* ionised hydrogen fraction, n_HII / n_H */
  double x_HeII;     /* n_HeII / n_H */
  double x_HeIII;    /* n_HeIII / n_H */
  double T_gas;      /* K */
  double T_rad;      /* K */
  double compton_rate; /* Gamma_C, s^-1 (the coefficient of T_rad - T_gas) */
  double mu;         /* mean molecular weight in units of m_H */
  /* Effective adiabatic index of the uniform sound speed of large Boltzmann
   * codes, c_s^2 = (k_B T_gas / (mu m_H)) (1 - (1/3) d ln T_gas / d ln a):
   * 4/3 while the gas is locked to the radiation, 5/3 once it cools
   * adiabatically (src/PHYSICS.md §7.2). */
  double gamma_effective;
} jg_thermal_state;

/* Integrate the history for this background. Fails with JG_EINVAL for bad
 * settings and JG_ENUMERIC (naming the stage and the redshift) if the stiff
 * integration fails. */
jg_thermal *jg_thermal_new(const jg_background *bg, const jg_thermal_settings *settings,
                           jg_error *err);
void jg_thermal_free(jg_thermal *th);

/* The background the history was built on. */
const jg_background *jg_thermal_background(const jg_thermal *th);

/* The state at redshift z >= 0 (interpolated on the stored grid, or the
 * equilibrium solution above the start redshift). */
void jg_thermal_state_at(const jg_thermal *th, double z, jg_thermal_state *s);
/* Fast accessors for the perturbation right-hand sides, in ln a. */
double jg_thermal_x_e(const jg_thermal *th, double ln_a);
double jg_thermal_T_gas(const jg_thermal *th, double ln_a);

/* d ln x_e / d ln a and d ln T_gas / d ln a at ln a (either pointer may be
 * NULL): the derivatives of the stored splines, or a central difference of
 * the equilibrium above the start redshift. */
void jg_thermal_log_slopes(const jg_thermal *th, double ln_a, double *dlnxe_dlna,
                           double *dlnT_dlna);

/* How the free-electron fraction of a fluid element responds to its own
 * density, temperature and expansion, linearised about the history at ln a
 * (the Peebles / SSS rate of the recombination module; helium's electrons
 * unperturbed), per Hubble time, for delta_xe = delta x_e / x_e:
 *   delta_xe' = -relaxation delta_xe + density delta_b + temperature delta_T
 *               + expansion delta_b'
 * (' = d/d ln a; the local expansion rate is H (1 - delta_b'/3)), and what
 * delta_xe does to the gas: the Compton term of delta_T' gains
 * heating delta_xe, the pressure perturbation delta_b + delta_T gains
 * pressure delta_xe (src/PHYSICS.md §7.1). */
typedef struct jg_ionisation_response {
  double relaxation;  /* -(1/H) d(dx_e/dt)/dx_e + d ln x_e / d ln a */
  double density;     /* (1/(H x_e)) d(dx_e/dt)/d ln n_H */
  double temperature; /* (1/(H x_e)) d(dx_e/dt)/d ln T_gas */
  double expansion;   /* -(1/(3 H x_e)) d(dx_e/dt)/d ln H */
  double heating;     /* (Gamma_C/H)(T_rad/T_gas - 1) d ln Gamma_C / d ln x_e */
  double pressure;    /* -d ln mu / d ln x_e = x_e / (1 + f_He + x_e) */
} jg_ionisation_response;
void jg_thermal_ionisation_response(const jg_thermal *th, double ln_a,
                                    jg_ionisation_response *out);

/* Thomson optical depth from today back to z (reionisation included). */
double jg_thermal_optical_depth(const jg_thermal *th, double z);
/* Visibility per unit redshift, g = (dtau/dz) exp(-tau). */
double jg_thermal_visibility(const jg_thermal *th, double z);
/* Baryon drag depth: the optical-depth integrand divided by
 * R = 3 rho_b / (4 rho_gamma), integrated from today back to z. */
double jg_thermal_drag_depth(const jg_thermal *th, double z);

/* Highest redshift of the stored grid (thermal.start_redshift). */
double jg_thermal_start_redshift(const jg_thermal *th);

/* tau_reion: the Thomson optical depth of the electrons the reionisation
 * model adds, from today to its onset (the residual ionisation left by
 * recombination is not in it); 0 without reionisation. */
double jg_thermal_reionisation_depth(const jg_thermal *th);
/* The redshift above which the history is that of a universe without
 * reionisation (the tanh models are below 2e-9 of their full value there);
 * 0 without reionisation. */
double jg_thermal_reionisation_onset(const jg_thermal *th);
/* The astrophysical heating gains of the gas at z, d T_gas / d ln a in K
 * (0 without heating; >= 0): the heating table, the ionisation front and
 * the photo-ionisation heating, without the recombination cooling that the
 * T_gas equation subtracts. The perturbations relax delta_T at this rate
 * over T_gas. */
double jg_thermal_heating_rate(const jg_thermal *th, double z);
/* The lowest redshift the history's own assumptions hold down to: 0 when
 * it includes the heating of the first sources (thermal.reionisation =
 * "tanh+heating", a heating table, or an ionisation table with a
 * temperature column), else 20, where the first stars start to heat and
 * ionise the gas (common practice, no source). */
double jg_thermal_lowest_valid_redshift(const jg_thermal *th);
/* The optical and drag depths without the reionised electrons, from which
 * z_star and z_drag are defined (as in the Planck analyses): exact above the
 * onset of reionisation, the depths less tau_reion (at least 0) below it. */
double jg_thermal_recombination_optical_depth(const jg_thermal *th, double z);
double jg_thermal_recombination_drag_depth(const jg_thermal *th, double z);

#ifdef __cplusplus
}
#endif
#endif
