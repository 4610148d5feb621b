/*
 * The expansion history (Friedmann equation) and the quantities derived from it.
 *
 *   H(a)^2 = H0^2 [ Omega_r a^-4 + Omega_m a^-3 + Omega_k a^-2 + Omega_de f_de(a) ]
 *
 * Omega_gamma from T_cmb (black body), massless neutrinos
 * Omega_nu = N_eff (7/8) (4/11)^(4/3) Omega_gamma, Omega_de by closure and the
 * Chevallier-Polarski-Linder form f_de(a) = a^(-3(1+w0+wa)) exp(-3 wa (1 - a)).
 *
 * A jg_background is built once and then only read, so any number of threads
 * may share one. Its fields are public for speed in the right-hand sides of
 * the later stages; treat them as read-only.
 */
#ifndef JEANSGROW_BACKGROUND_H
#define JEANSGROW_BACKGROUND_H

#include "jeansgrow/error.h"
#include "jeansgrow/params.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct jg_background {
  jg_cosmology cosmology;   /* copy of the input */
  double H0;                /* s^-1 */
  double rho_crit0;         /* critical density today, kg m^-3 */
  double omega_gamma;       /* Omega_gamma (not times h^2) */
  double omega_nu;          /* Omega_nu, massless */
  double omega_r;           /* Omega_gamma + Omega_nu */
  double omega_b, omega_c, omega_m; /* density parameters today */
  double omega_k, omega_de;
  double baryon_fraction;   /* f_b = omega_b / omega_m */
  double n_H0;              /* hydrogen nuclei per m^3 today */
  double helium_to_hydrogen;/* f_He = n_He / n_H = Y m_H / ((1 - Y) m_He4), exact
                               (not the shortcut Y / (4 (1 - Y)), 0.7 % lower) */
  double R_coefficient;     /* R(a) = 3 rho_b / (4 rho_gamma) = R_coefficient * a */
} jg_background;

/* Build the background. Fails (JG_EINVAL) if the parameters are invalid or
 * if H^2 <= 0 somewhere between a = 1e-10 and today (e.g. strong curvature). */
/* Invalid means: a non-finite value; h, omega_b h^2, omega_c h^2 or T_cmb
 * <= 0; Y_P outside [0, 1); N_eff < 0; or w0 + wa >= 1/3 (dark energy that
 * would not fade before radiation at early times). The message names the
 * key as `cosmology.<field>`; for H^2 <= 0 it gives the redshift. */
jg_background *jg_background_new(const jg_cosmology *c, jg_error *err);
void jg_background_free(jg_background *bg);

/* E(a) = H(a)/H0 and H(a) in s^-1. */
double jg_background_E(const jg_background *bg, double a);
double jg_background_hubble(const jg_background *bg, double a);
/* d ln H / d ln a, analytic. */
double jg_background_dlnH_dlna(const jg_background *bg, double a);

/* Mean densities at scale factor a, kg m^-3. */
double jg_background_rho_matter(const jg_background *bg, double a);
double jg_background_rho_baryon(const jg_background *bg, double a);
/* Omega_m(a): the matter share of the total density. */
double jg_background_omega_m_of_a(const jg_background *bg, double a);
/* Hydrogen-nucleus number density, m^-3, and radiation temperature, K. */
double jg_background_n_hydrogen(const jg_background *bg, double a);
double jg_background_T_radiation(const jg_background *bg, double a);
/* Mean molecular weight of the gas, the mass per free particle in units of
 * the hydrogen-atom mass m_H, at x_e free electrons per hydrogen nucleus:
 * mu = 1 / [(1 - Y)(1 + f_He + x_e)], with the true f_He of this background
 * (the one definition every stage uses: thermal states, sound speeds, the
 * perturbations' pressure). */
double jg_background_mean_molecular_weight(const jg_background *bg, double x_e);
/* Redshift of matter-radiation equality: 1 + z_eq = Omega_m / Omega_r. */
double jg_background_z_equality(const jg_background *bg);

/* Integrals (GSL adaptive quadrature). Each returns JG_OK or JG_ENUMERIC. */
/* Relative accuracy 1e-8. Arguments: 0 < a <= 1, or finite z >= 0; anything
 * else (and a NULL pointer) gives JG_EINVAL. On failure the result is left
 * untouched. */
/* Cosmic time since the big bang at scale factor a, in seconds. */
jg_status jg_background_cosmic_time(const jg_background *bg, double a, double *t, jg_error *err);
/* Conformal time, c * integral dt/a, in Mpc. */
jg_status jg_background_conformal_time(const jg_background *bg, double a, double *eta_mpc,
                                       jg_error *err);
/* Line-of-sight comoving distance to redshift z, Mpc. */
jg_status jg_background_comoving_distance(const jg_background *bg, double z, double *d_mpc,
                                          jg_error *err);
/* Transverse comoving distance (equal to the line-of-sight one when flat), Mpc. */
jg_status jg_background_transverse_distance(const jg_background *bg, double z, double *d_mpc,
                                            jg_error *err);
/* Comoving sound horizon of the photon-baryon fluid at redshift z,
 * r_s = int_z^inf c / sqrt(3 (1 + R)) dz / H, Mpc. */
jg_status jg_background_sound_horizon(const jg_background *bg, double z, double *r_mpc,
                                      jg_error *err);
/* Scale-independent linear growth D(a) from the Heath (1977) integral,
 * D = (5 Omega_m / 2) E(a) int_0^a da' / (a' E(a'))^3, normalised so D -> a
 * early; radiation is left out of E here, as in the integral's derivation. */
/* JG_EINVAL unless w0 = -1 and wa = 0 (the integral solves the growth
 * equation for a cosmological constant only), or if H^2 without radiation
 * is <= 0 before a. */
jg_status jg_background_growth_heath(const jg_background *bg, double a, double *D,
                                     jg_error *err);

/* Scale-independent linear growth for any dark energy, from the growth
 * equation D'' + (2 + dlnE/dlna) D' = (3/2) Omega_m a^-3 / E^2 D in ln a,
 * with E as in the Heath integral (radiation left out), started on D = a in
 * matter domination: equal to jg_background_growth_heath for w = -1. Also
 * the growth rate f = dln D / dln a (f may be NULL). */
jg_status jg_background_growth_factor(const jg_background *bg, double a, double *D, double *f,
                                      jg_error *err);

/* 1 when the reference universe of the two growth functions above (matter,
 * curvature and dark energy, radiation left out) has H^2 > 0 from the start
 * of the growth equation to a; 0 otherwise, e.g. when radiation dominates
 * today (Omega_r >~ 1: T_cmb = 30 K with h < 0.78, or h < 0.0065 at
 * T_cmb = 2.7255 K), where that reference does not exist. */
int jg_background_reference_growth_defined(const jg_background *bg, double a);

#ifdef __cplusplus
}
#endif
#endif
