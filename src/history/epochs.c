/*
 * Derived epochs: photon decoupling (tau = 1, the Planck definition of z_star),
 * the visibility peak, the end of baryon drag (tau_drag = 1), the sound
 * horizons there, equality, the age, and the gas decoupling redshift where
 * T_gas / T_rad falls to 0.9.
 */
#include "jeansgrow/epochs.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_min.h>
#include <gsl/gsl_roots.h>
#include <math.h>

#include "jeansgrow/constants.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

typedef double (*z_function)(const jg_thermal *th, double z);

typedef struct level_crossing {
  const jg_thermal *th;
  z_function f;
  double level;
} level_crossing;

static double crossing_gsl(double z, void *p) {
  const level_crossing *c = p;
  return c->f(c->th, z) - c->level;
}

/* The redshift in [lo, hi] where f(z) = level, by Brent's method. */
static jg_status find_crossing(const jg_thermal *th, z_function f, double level, double lo,
                               double hi, const char *what, double *z, jg_error *err) {
  level_crossing c = {th, f, level};
  gsl_function F = {crossing_gsl, &c};
  double flo = crossing_gsl(lo, &c), fhi = crossing_gsl(hi, &c);
  if (!(flo * fhi < 0))
    return JG_FAIL(err, JG_ENUMERIC, "%s: no crossing between z = %g and z = %g", what, lo, hi);
  gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
  if (!s) return JG_FAIL(err, JG_ENOMEM, "out of memory");
  int status = gsl_root_fsolver_set(s, &F, lo, hi);
  for (int iter = 0; status == GSL_SUCCESS && iter < 200; iter++) {
    if ((status = gsl_root_fsolver_iterate(s)) != GSL_SUCCESS) break;
    status = gsl_root_test_interval(gsl_root_fsolver_x_lower(s), gsl_root_fsolver_x_upper(s),
                                    0.0, 1e-10);
    if (status == GSL_SUCCESS) break;
    if (status == GSL_CONTINUE) status = GSL_SUCCESS;
  }
  *z = gsl_root_fsolver_root(s);
  gsl_root_fsolver_free(s);
  if (status != GSL_SUCCESS)
    return JG_FAIL(err, JG_ENUMERIC, "%s: root search between z = %g and z = %g failed (%s)",
                   what, lo, hi, gsl_strerror(status));
  return JG_OK;
}

static double temperature_ratio(const jg_thermal *th, double z) {
  jg_thermal_state s;
  jg_thermal_state_at(th, z, &s);
  return s.T_gas / s.T_rad;
}

typedef struct history_ref {
  const jg_thermal *th;
} history_ref;

static double minus_visibility(double z, void *p) {
  return -jg_thermal_visibility(((const history_ref *)p)->th, z);
}

/* Samples of g(z), uniform in ln(1+z) between today and the start of the
 * history, that bracket the visibility peak before Brent's method refines it. */
#define VISIBILITY_SAMPLES 400

/* The peak is bracketed by sampling, not by a window around z_star: where
 * baryons are scarce, tau climbs slowly and reaches 1 well above the peak
 * (omega_b h^2 = 0.001 with T_cmb = 5 K puts z_star ~20 % above it), and a
 * bracket that does not enclose the minimum is refused by GSL. */
static jg_status visibility_peak(const jg_thermal *th, double z_top, double *z, jg_error *err) {
  history_ref ref = {th};
  gsl_function F = {minus_visibility, &ref};
  const double span = log1p(z_top);
  int best = 0;
  double best_g = -1.0;
  for (int i = 0; i < VISIBILITY_SAMPLES; i++) {
    double g = jg_thermal_visibility(th, expm1(span * i / (VISIBILITY_SAMPLES - 1)));
    if (g > best_g) best_g = g, best = i;
  }
  if (best == 0 || best == VISIBILITY_SAMPLES - 1)
    return JG_FAIL(err, JG_ENUMERIC,
                   "visibility peak: the visibility has no maximum between z = 0 and z = %g",
                   z_top);
  double lo = expm1(span * (best - 1) / (VISIBILITY_SAMPLES - 1));
  double hi = expm1(span * (best + 1) / (VISIBILITY_SAMPLES - 1));
  double guess = expm1(span * best / (VISIBILITY_SAMPLES - 1));
  gsl_min_fminimizer *m = gsl_min_fminimizer_alloc(gsl_min_fminimizer_brent);
  if (!m) return JG_FAIL(err, JG_ENOMEM, "out of memory");
  int status = gsl_min_fminimizer_set(m, &F, guess, lo, hi);
  for (int iter = 0; status == GSL_SUCCESS && iter < 200; iter++) {
    if ((status = gsl_min_fminimizer_iterate(m)) != GSL_SUCCESS) break;
    status = gsl_min_test_interval(gsl_min_fminimizer_x_lower(m), gsl_min_fminimizer_x_upper(m),
                                   0.0, 1e-9);
    if (status == GSL_SUCCESS) break;
    if (status == GSL_CONTINUE) status = GSL_SUCCESS;
  }
  *z = gsl_min_fminimizer_x_minimum(m);
  gsl_min_fminimizer_free(m);
  if (status != GSL_SUCCESS)
    return JG_FAIL(err, JG_ENUMERIC, "visibility peak: search between z = %g and z = %g failed (%s)",
                   lo, hi, gsl_strerror(status));
  return JG_OK;
}

jg_status jg_epochs_compute(const jg_thermal *th, jg_epochs *e, jg_error *err) {
  const jg_background *bg = jg_thermal_background(th);
  const double z_top = jg_thermal_start_redshift(th);
  jg_status st = find_crossing(th, jg_thermal_optical_depth, 1.0, 1.0, z_top, "z_star", &e->z_star, err);
  if (st == JG_OK)
    st = find_crossing(th, jg_thermal_drag_depth, 1.0, 1.0, z_top, "z_drag", &e->z_drag, err);
  if (st == JG_OK) st = visibility_peak(th, z_top, &e->z_visibility_peak, err);
  if (st == JG_OK) st = jg_background_sound_horizon(bg, e->z_star, &e->r_star, err);
  if (st == JG_OK) st = jg_background_sound_horizon(bg, e->z_drag, &e->r_drag, err);
  double d_m = 0.0;
  if (st == JG_OK) st = jg_background_transverse_distance(bg, e->z_star, &d_m, err);
  if (st == JG_OK) e->theta_star_100 = 100.0 * e->r_star / d_m;
  double t0 = 0.0;
  if (st == JG_OK) st = jg_background_cosmic_time(bg, 1.0, &t0, err);
  e->age_Gyr = t0 / JG_GYR;
  e->z_eq = jg_background_z_equality(bg);
  double a_eq = 1.0 / (1.0 + e->z_eq);
  e->k_eq = a_eq * jg_background_hubble(bg, a_eq) / JG_C_LIGHT * JG_MPC;
  if (st == JG_OK)
    st = find_crossing(th, temperature_ratio, 0.9, 0.0, z_top, "z_gas_decoupling",
                       &e->z_gas_decoupling, err);
  jg_thermal_state s;
  jg_thermal_state_at(th, 100.0, &s);
  e->x_e_z100 = s.x_e;
  e->T_gas_z100 = s.T_gas;
  return st;
}

int jg_epochs_count(void) {
  jg_epochs none = {0};
  int n = 0;
  while (jg_epochs_entry(&none, n).name) n++;
  return n;
}

jg_epoch_entry jg_epochs_entry(const jg_epochs *e, int i) {
  const jg_epoch_entry table[] = {
      {"z_star", "", "photon decoupling, Thomson optical depth tau = 1", e->z_star},
      {"z_visibility_peak", "", "maximum of the visibility function", e->z_visibility_peak},
      {"z_drag", "", "end of baryon drag, drag depth = 1", e->z_drag},
      {"r_star", "Mpc", "comoving sound horizon at z_star", e->r_star},
      {"r_drag", "Mpc", "comoving sound horizon at z_drag", e->r_drag},
      {"theta_star_100", "", "100 r_star / D_M(z_star)", e->theta_star_100},
      {"z_eq", "", "matter-radiation equality", e->z_eq},
      {"k_eq", "1/Mpc", "a H / c at equality (comoving)", e->k_eq},
      {"age", "Gyr", "age of the universe today", e->age_Gyr},
      {"z_gas_decoupling", "", "T_gas / T_rad = 0.9", e->z_gas_decoupling},
      {"x_e_z100", "", "free electrons per hydrogen nucleus at z = 100", e->x_e_z100},
      {"T_gas_z100", "K", "gas temperature at z = 100", e->T_gas_z100},
  };
  if (i < 0 || i >= (int)(sizeof table / sizeof table[0])) {
    jg_epoch_entry none = {NULL, NULL, NULL, 0.0};
    return none;
  }
  return table[i];
}
