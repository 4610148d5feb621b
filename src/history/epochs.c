/*
 * Derived epochs: photon decoupling (tau = 1, the Planck definition of z_star),
 * the visibility peak, the end of baryon drag (tau_drag = 1), the sound
 * horizons there, equality, the age, the gas decoupling redshift where
 * T_gas / T_rad falls to 0.9, and with reionisation its optical depth and
 * the redshift where half the hydrogen is ionised again.
 */
#include "jeansgrow/epochs.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_min.h>
#include <gsl/gsl_roots.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>

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

/* Marks an entry absent: value 0 (never NaN, so no caller can print one) and
 * a one-line reason; a NULL format keeps the reason a search already wrote. */
static void set_absent(jg_epochs *e, int entry, double *value, const char *fmt, ...) {
  if (fmt) {
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(e->reason[entry], sizeof e->reason[entry], fmt, ap);
    va_end(ap);
  }
  e->absent |= 1u << entry;
  *value = 0.0;
}

/* The redshift in [lo, hi] where f(z) = level, by Brent's method. Without a
 * sign change the epoch does not exist in this universe: *found = 0 and
 * `reason` says on which side of the level `quantity` stays. Only a search
 * that cannot be carried out (non-finite ends, no convergence) fails. */
static jg_status find_crossing(const jg_thermal *th, z_function f, double level, double lo,
                               double hi, const char *what, const char *quantity, double *z,
                               int *found, char reason[JG_EPOCH_REASON_SIZE], jg_error *err) {
  level_crossing c = {th, f, level};
  gsl_function F = {crossing_gsl, &c};
  double flo = crossing_gsl(lo, &c), fhi = crossing_gsl(hi, &c);
  *found = 0;
  if (!isfinite(flo) || !isfinite(fhi))
    return JG_FAIL(err, JG_ENUMERIC, "%s: %s is not finite at z = %g or z = %g", what, quantity,
                   lo, hi);
  if (!(flo * fhi < 0)) {
    if (lo > 0)
      snprintf(reason, JG_EPOCH_REASON_SIZE, "%s stays %s %g from z = %g down to z = %g",
               quantity, flo + fhi < 0 ? "below" : "above", level, hi, lo);
    else
      snprintf(reason, JG_EPOCH_REASON_SIZE, "%s stays %s %g from z = %g until today", quantity,
               flo + fhi < 0 ? "below" : "above", level, hi);
    return JG_OK;
  }
  *found = 1;
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

static double ionised_hydrogen(const jg_thermal *th, double z) {
  jg_thermal_state s;
  jg_thermal_state_at(th, z, &s);
  return s.x_p;
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
static jg_status visibility_peak(const jg_thermal *th, double z_low, double z_top, double *z,
                                 int *found, char reason[JG_EPOCH_REASON_SIZE], jg_error *err) {
  history_ref ref = {th};
  gsl_function F = {minus_visibility, &ref};
  const double base = log1p(z_low), span = log1p(z_top) - base;
  int best = 0;
  double best_g = -1.0;
  for (int i = 0; i < VISIBILITY_SAMPLES; i++) {
    double g = jg_thermal_visibility(th, expm1(base + span * i / (VISIBILITY_SAMPLES - 1)));
    if (g > best_g) best_g = g, best = i;
  }
  *found = 0;
  if (!isfinite(best_g))
    return JG_FAIL(err, JG_ENUMERIC, "visibility peak: the visibility is not finite");
  if (best == 0 || best == VISIBILITY_SAMPLES - 1) {
    snprintf(reason, JG_EPOCH_REASON_SIZE,
             "the visibility has no maximum between z = %g and z = %g; it is largest at z = %g",
             z_low, z_top, best == 0 ? z_low : z_top);
    return JG_OK;
  }
  *found = 1;
  double lo = expm1(base + span * (best - 1) / (VISIBILITY_SAMPLES - 1));
  double hi = expm1(base + span * (best + 1) / (VISIBILITY_SAMPLES - 1));
  double guess = expm1(base + span * best / (VISIBILITY_SAMPLES - 1));
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
  e->absent = 0;
  for (int i = 0; i < JG_EPOCH_COUNT; i++) e->reason[i][0] = '\0';
  int star = 0, drag = 0, peak = 0, gas = 0, reion = 0;
  /* Below the onset of reionisation the gas may be heated above T_rad
   * again and the visibility has a second peak: the decoupling and the
   * recombination peak are searched above it. */
  const double z_onset = jg_thermal_reionisation_onset(th);
  jg_status st = find_crossing(th, jg_thermal_recombination_optical_depth, 1.0, 1.0, z_top,
                               "z_star", "the Thomson optical depth", &e->z_star, &star,
                               e->reason[JG_EPOCH_Z_STAR], err);
  if (st == JG_OK)
    st = find_crossing(th, jg_thermal_recombination_drag_depth, 1.0, 1.0, z_top, "z_drag",
                       "the drag depth", &e->z_drag, &drag, e->reason[JG_EPOCH_Z_DRAG], err);
  if (st == JG_OK)
    st = visibility_peak(th, z_onset, z_top, &e->z_visibility_peak, &peak,
                         e->reason[JG_EPOCH_Z_VISIBILITY_PEAK], err);
  if (st == JG_OK)
    st = find_crossing(th, temperature_ratio, 0.9, z_onset, z_top, "z_gas_decoupling",
                       "T_gas / T_rad", &e->z_gas_decoupling, &gas,
                       e->reason[JG_EPOCH_Z_GAS_DECOUPLING], err);
  const int reionised = jg_thermal_reionisation_depth(th) > 0.0; /* not a heating table alone */
  if (st == JG_OK && reionised)
    st = find_crossing(th, ionised_hydrogen, 0.5, 0.0, z_onset, "z_reion",
                       "the ionised hydrogen fraction", &e->z_reion, &reion,
                       e->reason[JG_EPOCH_Z_REION], err);
  if (st != JG_OK) return st;
  if (reionised) {
    e->tau_reion = jg_thermal_reionisation_depth(th);
    if (!reion) set_absent(e, JG_EPOCH_Z_REION, &e->z_reion, NULL);
  } else {
    const char *why = "no reionisation model: thermal.reionisation is none";
    set_absent(e, JG_EPOCH_TAU_REION, &e->tau_reion, "%s", why);
    set_absent(e, JG_EPOCH_Z_REION, &e->z_reion, "%s", why);
  }
  /* The searches wrote their own reasons. */
  if (!star) set_absent(e, JG_EPOCH_Z_STAR, &e->z_star, NULL);
  if (!drag) set_absent(e, JG_EPOCH_Z_DRAG, &e->z_drag, NULL);
  if (!peak) set_absent(e, JG_EPOCH_Z_VISIBILITY_PEAK, &e->z_visibility_peak, NULL);
  if (!gas) set_absent(e, JG_EPOCH_Z_GAS_DECOUPLING, &e->z_gas_decoupling, NULL);

  if (star) {
    double d_m = 0.0;
    st = jg_background_sound_horizon(bg, e->z_star, &e->r_star, err);
    if (st == JG_OK) st = jg_background_transverse_distance(bg, e->z_star, &d_m, err);
    if (st == JG_OK) e->theta_star_100 = 100.0 * e->r_star / d_m;
  } else {
    set_absent(e, JG_EPOCH_R_STAR, &e->r_star, "no z_star");
    set_absent(e, JG_EPOCH_THETA_STAR, &e->theta_star_100, "no z_star");
  }
  if (st == JG_OK && drag) st = jg_background_sound_horizon(bg, e->z_drag, &e->r_drag, err);
  if (!drag) set_absent(e, JG_EPOCH_R_DRAG, &e->r_drag, "no z_drag");
  double t0 = 0.0;
  if (st == JG_OK) st = jg_background_cosmic_time(bg, 1.0, &t0, err);
  e->age_Gyr = t0 / JG_GYR;
  /* Equality exists where matter outweighs radiation today: 1 + z_eq =
   * Omega_m / Omega_r > 1 (and finite: some radiation). */
  const double one_plus_z_eq = 1.0 + jg_background_z_equality(bg);
  if (isfinite(one_plus_z_eq) && one_plus_z_eq > 1.0) {
    e->z_eq = one_plus_z_eq - 1.0;
    double a_eq = 1.0 / one_plus_z_eq;
    e->k_eq = a_eq * jg_background_hubble(bg, a_eq) / JG_C_LIGHT * JG_MPC;
    if (st == JG_OK && !isfinite(e->k_eq))
      st = JG_FAIL(err, JG_ENUMERIC, "k_eq: H is not finite at equality, z = %g", e->z_eq);
  } else {
    const char *why = isfinite(one_plus_z_eq)
                          ? "radiation outweighs matter still today: Omega_m / Omega_r = %g"
                          : "no radiation to equal: Omega_m / Omega_r = %g";
    set_absent(e, JG_EPOCH_Z_EQ, &e->z_eq, why, one_plus_z_eq);
    set_absent(e, JG_EPOCH_K_EQ, &e->k_eq, "no z_eq");
  }
  jg_thermal_state s;
  jg_thermal_state_at(th, 100.0, &s);
  e->x_e_z100 = s.x_e;
  e->T_gas_z100 = s.T_gas;
  return st;
}

int jg_epochs_count(void) { return JG_EPOCH_COUNT; }

jg_epoch_entry jg_epochs_entry(const jg_epochs *e, int i) {
  /* Indexed by the JG_EPOCH_ constants, so that the order and the bits agree;
   * existence and reason are filled in below. */
#define EPOCH(entry, name, unit, meaning, value)                                            \
  [JG_EPOCH_##entry] = {name, unit, meaning, value, 1, ""}
  const jg_epoch_entry table[] = {
      EPOCH(Z_STAR, "z_star", "", "photon decoupling, Thomson optical depth tau = 1", e->z_star),
      EPOCH(Z_VISIBILITY_PEAK, "z_visibility_peak", "", "maximum of the visibility function",
            e->z_visibility_peak),
      EPOCH(Z_DRAG, "z_drag", "", "end of baryon drag, drag depth = 1", e->z_drag),
      EPOCH(R_STAR, "r_star", "Mpc", "comoving sound horizon at z_star", e->r_star),
      EPOCH(R_DRAG, "r_drag", "Mpc", "comoving sound horizon at z_drag", e->r_drag),
      EPOCH(THETA_STAR, "theta_star_100", "", "100 r_star / D_M(z_star)", e->theta_star_100),
      EPOCH(Z_EQ, "z_eq", "", "matter-radiation equality", e->z_eq),
      EPOCH(K_EQ, "k_eq", "1/Mpc", "a H / c at equality (comoving)", e->k_eq),
      EPOCH(AGE, "age", "Gyr", "age of the universe today", e->age_Gyr),
      EPOCH(Z_GAS_DECOUPLING, "z_gas_decoupling", "", "T_gas / T_rad = 0.9",
            e->z_gas_decoupling),
      EPOCH(X_E_Z100, "x_e_z100", "", "free electrons per hydrogen nucleus at z = 100",
            e->x_e_z100),
      EPOCH(T_GAS_Z100, "T_gas_z100", "K", "gas temperature at z = 100", e->T_gas_z100),
      EPOCH(TAU_REION, "tau_reion", "",
            "Thomson optical depth of the electrons reionisation adds, today to its onset",
            e->tau_reion),
      EPOCH(Z_REION, "z_reion", "", "ionised hydrogen fraction = 1/2 (reionisation)",
            e->z_reion),
  };
#undef EPOCH
  _Static_assert(sizeof table / sizeof table[0] == JG_EPOCH_COUNT, "one entry per JG_EPOCH_");
  if (i < 0 || i >= JG_EPOCH_COUNT) {
    jg_epoch_entry none = {NULL, NULL, NULL, 0.0, 0, ""};
    return none;
  }
  jg_epoch_entry en = table[i];
  en.exists = !(e->absent & (1u << i));
  en.reason = e->reason[i];
  return en;
}
