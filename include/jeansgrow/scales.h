/*
 * Characteristic scales of the gas at each requested redshift: which comoving
 * scales the gas can follow into collapse, and how much pressure held back
 * their growth.
 *
 * Conventions (every mass uses the comoving mean matter density rho_m0):
 *   Jeans:      k_J = a sqrt(4 pi G rho_m) / c_s (comoving),
 *               c_s^2 = gamma k_B T_gas / (mu m_H), gamma = 1 (isothermal, the
 *               headline, as in Barkana & Loeb 2001) and gamma = 5/3;
 *               M_J = (4 pi/3) rho_m0 (pi/k_J)^3 (half-wavelength radius).
 *   Filtering:  (a) the Gnedin & Hui (1998, MNRAS 296, 44) integral over the
 *               history of k_J, from z_initial, with D the k = 0 total-matter
 *               contrast of the solver, for gamma = 1 and gamma = 5/3;
 *               (b) measured on the solved perturbations, the k^2 coefficient
 *               of delta_b(k)/delta_b(k->0) = 1 - k^2/k_F^2 (exact k -> 0
 *               limit, see perturb.h), with the model's sound speed.
 *               The integral assumes baryons that followed the dark matter
 *               from the start, and counts pressure smoothing before the
 *               baryons are released from the photons near z_drag; the
 *               solved value does not, so on the real history the two differ.
 *               M_F = (4 pi/3) rho_m0 (2 pi/k_F)^3 (Gnedin 2000, ApJ 542, 535;
 *               full-wavelength radius), and the half-wavelength (pi/k_F)^3
 *               value, 8 times smaller, beside it.
 *   Half suppression: k_1/2 where delta_b/delta_c has fallen to half of its
 *               k -> 0 value (first crossing above k_F/4; a ladder of k
 *               shared by all redshifts and a cubic in ln k refined by
 *               fresh solves, Brent's method in ln k as the fallback);
 *               M_1/2 = (4 pi/3) rho_m0 (pi/k_1/2)^3
 *               (half-wavelength, like M_J).
 *   Growth:     D(z) of the Heath (1977) integral (matter + Lambda, D -> a
 *               early) for reference; only for w = -1 on the real history.
 */
#ifndef JEANSGROW_SCALES_H
#define JEANSGROW_SCALES_H

#include "jeansgrow/error.h"
#include "jeansgrow/perturb.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct jg_scales_point {
  double z;
  /* Jeans scale (comoving 1/Mpc; M_sun) */
  double k_jeans_isothermal;
  double k_jeans_adiabatic;
  double m_jeans_isothermal;       /* (4 pi/3) rho_m0 (pi/k_J)^3 */
  double m_jeans_adiabatic;
  /* Filtering scale */
  double k_filter_integral_isothermal; /* Gnedin-Hui integral, gamma = 1 */
  double k_filter_integral_adiabatic;  /* gamma = 5/3: sqrt(3/5) times the above */
  double k_filter_solved;          /* from delta_b(k)/delta_b(0), the model's sound speed */
  double k_filter_solved_cdm;      /* same from (delta_b/delta_c)(k) / (delta_b/delta_c)(0) */
  double m_filter_integral_isothermal; /* (4 pi/3) rho_m0 (2 pi/k_F)^3, Gnedin 2000 */
  double m_filter_integral_adiabatic;
  double m_filter_solved;
  double m_filter_integral_isothermal_half; /* (4 pi/3) rho_m0 (pi/k_F)^3 */
  double m_filter_solved_half;
  /* Half suppression */
  int half_found;                  /* 0: no crossing inside the accepted k range */
  double k_half;                   /* 1/Mpc (0 when not found) */
  double m_half;                   /* (4 pi/3) rho_m0 (pi/k_half)^3 (0 when not found) */
  /* Large-scale (k -> 0) reference */
  double b_over_c_large;           /* delta_b/delta_c at k = 0 */
  double delta_m_large;            /* per unit initial CDM contrast */
  double growth_rate_large;        /* d ln delta_m / d ln a at k = 0 */
  int has_heath;                   /* 1 when growth_heath is set (real history, w = -1) */
  double growth_heath;             /* Heath (1977) D(z), D -> a early */
  /* With the streaming velocity (stream_results.h); the values above
   * without it. */
  double k_filter_stream;          /* of the averaged baryon power */
  double m_filter_stream;          /* (4 pi/3) rho_m0 (2 pi/k)^3 */
  int half_stream_found;
  double k_half_stream;            /* sqrt(<P_b>/<P_c>) at half its k -> 0 value */
  double m_half_stream;            /* (4 pi/3) rho_m0 (pi/k)^3 */
} jg_scales_point;

/* All scales at every redshift of z[0..n_z) (any order). Uses the workspace
 * for the large-scale solve and the solves of the half-suppression search
 * (about 16 ladder wavenumbers for all redshifts together, then three
 * refinement solves per redshift). Fails with JG_EINVAL (bad redshift) or
 * JG_ENUMERIC (naming the stage, k and z). */
jg_status jg_scales_compute(const jg_perturb_model *m, jg_perturb_workspace *w, const double *z,
                            int n_z, jg_scales_point *out, jg_error *err);
/* The same with the large-scale solve given: limit[i] as
 * jg_perturb_solve_limit gives it at z[i] with this model (a program that
 * also needs it for the growth grid solves it once; the same numbers). */
jg_status jg_scales_compute_from_limit(const jg_perturb_model *m, jg_perturb_workspace *w,
                                       const double *z, int n_z, const jg_perturb_limit *limit,
                                       jg_scales_point *out, jg_error *err);

/* The half-suppression wavenumber at one redshift: the first k (searched
 * upwards from k_start on its own ladder, then Brent's method) where
 * (delta_b/delta_c)(k) = ratio_large / 2; jg_scales_compute's fallback.
 * *found = 0 (and *k_half = 0) when the ratio does not cross inside the
 * accepted k range. */
jg_status jg_scales_half_suppression(const jg_perturb_model *m, jg_perturb_workspace *w, double z,
                                     double ratio_large, double k_start, double *k_half,
                                     int *found, jg_error *err);

/* (4 pi/3) rho_m0 (f pi / k)^3: f = 1 half-wavelength radius (Jeans mass,
 * M_1/2), f = 2 full wavelength (Gnedin 2000 filtering mass). M_sun for the
 * real history; 0 when the medium has no rho_m0. */
double jg_scales_mass(const jg_perturb_model *m, double k, double f);

#ifdef __cplusplus
}
#endif
#endif
