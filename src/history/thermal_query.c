/*
 * The stored ionisation and gas-temperature history read back: states at
 * any redshift (the splines on the grid, equilibrium values above its
 * start), log slopes and the linearised ionisation response the
 * perturbations tabulate, optical and drag depths, visibility. The history
 * is built in thermal.c.
 */
#include "jeansgrow/thermal.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_spline.h>
#include <math.h>
#include <stdbool.h>
#include <stdlib.h>
#include <string.h>

#include "gas_temperature.h"
#include "jeansgrow/constants.h"
#include "recombination.h"
#include "reionisation.h"
#include "thermal_internal.h"
#include "thermal_nodes.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

const jg_background *jg_thermal_background(const jg_thermal *th) { return th->bg; }

double jg_thermal_start_redshift(const jg_thermal *th) { return th->settings.start_redshift; }

double jg_thermal_reionisation_depth(const jg_thermal *th) { return th->tau_reion; }

double jg_thermal_heating_rate(const jg_thermal *th, double z) {
  const double ln_a = -log1p(z);
  if (!jg__reionisation_acts(&th->reion, ln_a)) return 0.0;
  const double a = exp(ln_a);
  jg__reionised r;
  jg__reionisation_at(&th->reion, ln_a, &r);
  return jg__heating_gain_dlna(&th->reion, &r, ln_a, jg_thermal_x_e(th, ln_a),
                                jg_thermal_T_gas(th, ln_a), jg_background_n_hydrogen(th->bg, a),
                                jg_background_hubble(th->bg, a));
}

double jg_thermal_recombination_optical_depth(const jg_thermal *th, double z) {
  return fmax(jg_thermal_optical_depth(th, z) - th->tau_reion, 0.0);
}

double jg_thermal_recombination_drag_depth(const jg_thermal *th, double z) {
  return fmax(jg_thermal_drag_depth(th, z) - th->drag_reion, 0.0);
}

double jg_thermal_reionisation_onset(const jg_thermal *th) { return th->z_onset; }

/* Below z ~ 20 the first stars heat and ionise the gas (common practice, no
 * source: the usual start of cosmic dawn); a history without their heating
 * stops holding there. */
#define LOWEST_REDSHIFT_WITHOUT_HEATING 20.0

double jg_thermal_lowest_valid_redshift(const jg_thermal *th) {
  const int heated = th->settings.reionisation == JG_REIONISATION_TANH_HEATED ||
                     th->heating.n > 0 || (th->ionisation.n > 0 && th->ionisation.columns == 2);
  return heated ? 0.0 : LOWEST_REDSHIFT_WITHOUT_HEATING;
}

/* Above the stored grid: equilibrium values, evaluated directly. */
static void early_state(const jg_thermal *th, double a, double *x_e, double *x_p,
                        double *T_gas) {
  const jg_background *bg = th->bg;
  double T_rad = jg_background_T_radiation(bg, a);
  double n_H = jg_background_n_hydrogen(bg, a);
  jg__saha_equilibrium(bg, T_rad, n_H, x_e, x_p);
  double compton = jg__compton_rate(bg, T_rad, *x_e);
  *T_gas = jg__gas_temperature_quasi_static(T_rad, jg_background_hubble(bg, a), compton);
}

static double clamp_ln_a(double x) { return x > 0.0 ? 0.0 : x; }

/* x_e (want_T = 0) or T_gas (want_T = 1) at ln a: the stored spline, or the
 * equilibrium above the start redshift. */
static double stored_or_early(const jg_thermal *th, double ln_a, int want_T) {
  if (ln_a < th->ln_a_start) {
    double x_e, x_p, T;
    early_state(th, exp(ln_a), &x_e, &x_p, &T);
    return want_T ? T : x_e;
  }
  return exp(gsl_spline_eval(want_T ? th->ln_Tgas : th->ln_xe, clamp_ln_a(ln_a), NULL));
}

double jg_thermal_x_e(const jg_thermal *th, double ln_a) { return stored_or_early(th, ln_a, 0); }

double jg_thermal_T_gas(const jg_thermal *th, double ln_a) { return stored_or_early(th, ln_a, 1); }

/* Step of the central difference of the equilibrium above the stored grid:
 * its error, ~ h^2/6 times the third derivative of ln T_gas or ln x_e (order
 * one there), is ~ 2e-9. */
#define THERMAL_EARLY_SLOPE_STEP 1.0e-4

static void early_log_slopes(const jg_thermal *th, double ln_a, double *dlnxe_dlna,
                             double *dlnT_dlna) {
  double xe[2], xp, T[2];
  for (int i = 0; i < 2; i++)
    early_state(th, exp(ln_a + (i ? 1.0 : -1.0) * THERMAL_EARLY_SLOPE_STEP), &xe[i], &xp, &T[i]);
  const double s = 0.5 / THERMAL_EARLY_SLOPE_STEP;
  if (dlnxe_dlna) *dlnxe_dlna = (log(xe[1]) - log(xe[0])) * s;
  if (dlnT_dlna) *dlnT_dlna = (log(T[1]) - log(T[0])) * s;
}

void jg_thermal_log_slopes(const jg_thermal *th, double ln_a, double *dlnxe_dlna,
                           double *dlnT_dlna) {
  if (ln_a < th->ln_a_start) {
    early_log_slopes(th, ln_a, dlnxe_dlna, dlnT_dlna);
    return;
  }
  ln_a = clamp_ln_a(ln_a);
  if (dlnxe_dlna) *dlnxe_dlna = gsl_spline_eval_deriv(th->ln_xe, ln_a, NULL);
  if (dlnT_dlna) *dlnT_dlna = gsl_spline_eval_deriv(th->ln_Tgas, ln_a, NULL);
}

/* The state at z, ln_a = -ln(1 + z) (the caller passes whichever of the two
 * it holds exactly), and d ln x_e / d ln a if asked, with the splines looked
 * up through cursor (may be NULL); helium's ionisation fractions only if
 * asked (0 otherwise). */
static void state_at(const jg_thermal *th, double z, double ln_a, gsl_interp_accel *cursor,
                     bool helium, jg_thermal_state *s, double *dlnxe_dlna) {
  const jg_background *bg = th->bg;
  const double a = exp(ln_a);
  memset(s, 0, sizeof *s);
  s->z = z;
  s->T_rad = jg_background_T_radiation(bg, a);
  double dlnT_dlna;
  if (ln_a < th->ln_a_start) {
    early_state(th, a, &s->x_e, &s->x_p, &s->T_gas);
    early_log_slopes(th, ln_a, dlnxe_dlna, &dlnT_dlna);
  } else {
    ln_a = clamp_ln_a(ln_a);
    s->x_e = exp(gsl_spline_eval(th->ln_xe, ln_a, cursor));
    s->x_p = exp(gsl_spline_eval(th->ln_xp, ln_a, cursor));
    s->T_gas = exp(gsl_spline_eval(th->ln_Tgas, ln_a, cursor));
    dlnT_dlna = gsl_spline_eval_deriv(th->ln_Tgas, ln_a, cursor);
    if (dlnxe_dlna) *dlnxe_dlna = gsl_spline_eval_deriv(th->ln_xe, ln_a, cursor);
  }
  if (helium) {
    jg__helium_saha he;
    jg__helium_saha_at(bg, s->T_rad, jg_background_n_hydrogen(bg, a), s->x_e, &he);
    s->x_HeII = he.x_HeII;
    s->x_HeIII = he.x_HeIII;
  }
  if (helium && jg__reionisation_acts(&th->reion, ln_a)) {
    /* The model ionises the helium left neutral once (with hydrogen) and
     * then a second time; the Saha fractions at these temperatures are
     * nil. */
    jg__reionised r;
    jg__reionisation_at(&th->reion, ln_a, &r);
    const double f_he = th->reion.f_he;
    s->x_HeIII += (f_he - s->x_HeIII) * r.s_he;
    s->x_HeII = fmax(f_he - s->x_HeIII - (f_he - s->x_HeII - s->x_HeIII) * (1.0 - r.s_h), 0.0);
  }
  s->compton_rate = jg__compton_rate(bg, s->T_rad, s->x_e);
  s->mu = jg_background_mean_molecular_weight(bg, s->x_e);
  /* Where heating raises T_gas (d ln T/d ln a > 0, only with a heating or
   * reionisation model) the formula falls below 1 and, past d ln T/d ln a = 3,
   * gives a negative pressure: an instability no gas has. It is held at 1,
   * the isothermal response of gas whose temperature the heating fixes. */
  s->gamma_effective = fmax(1.0 - dlnT_dlna / 3.0, 1.0);
}

void jg_thermal_state_at(const jg_thermal *th, double z, jg_thermal_state *s) {
  state_at(th, z, -log1p(z), NULL, true, s, NULL);
}

void jg__thermal_state_and_response(const jg_thermal *th, double ln_a, gsl_interp_accel *cursor,
                                    jg_thermal_state *s, jg_ionisation_response *out) {
  double dlnxe_dlna;
  state_at(th, expm1(-ln_a), ln_a, cursor, false, s, out ? &dlnxe_dlna : NULL);
  if (!out) return;
  const jg_background *bg = th->bg;
  const double a = exp(ln_a);
  const double n_H = jg_background_n_hydrogen(bg, a), H = jg_background_hubble(bg, a);
  /* dxe_dxp = 1: a change of x_p moves x_e by as much (helium unperturbed). */
  jg__peebles_rate rate;
  jg__peebles_rate_at(s->x_p, s->x_e, 1.0, s->T_gas, s->T_rad, n_H, H,
                      th->settings.recombination_fudge, &rate);
  const double per_x = 1.0 / (H * s->x_e);
  out->relaxation = -rate.d_dxp / H + dlnxe_dlna;
  out->density = rate.d_dlnnH * per_x;
  out->temperature = s->T_gas * rate.d_dTgas * per_x;
  out->expansion = -rate.d_dlnH * per_x / 3.0;
  out->heating = jg__compton_rate_dxe(bg, s->T_rad, s->x_e) * s->x_e / H *
                 (s->T_rad - s->T_gas) / s->T_gas;
  out->pressure = (1.0 - bg->cosmology.helium_mass_fraction) * s->mu * s->x_e;
}

void jg_thermal_ionisation_response(const jg_thermal *th, double ln_a,
                                    jg_ionisation_response *out) {
  jg_thermal_state s; /* the response does not read helium's fractions */
  jg__thermal_state_and_response(th, ln_a, NULL, &s, out);
}

/* d tau / d ln a (per unit ln a, positive). */
static double dtau_dlna(const jg_thermal *th, double ln_a) {
  double a = exp(ln_a);
  double n_e = jg_thermal_x_e(th, ln_a) * jg_background_n_hydrogen(th->bg, a);
  return n_e * JG_SIGMA_THOMSON * JG_C_LIGHT / jg_background_hubble(th->bg, a);
}

/* GSL passes a non-const void *; this wrapper keeps the history const. */
typedef struct history_ref {
  const jg_thermal *th;
} history_ref;

static double dtau_dlna_gsl(double ln_a, void *p) {
  return dtau_dlna(((const history_ref *)p)->th, ln_a);
}
static double ddrag_dlna_gsl(double ln_a, void *p) {
  const jg_thermal *th = ((const history_ref *)p)->th;
  return dtau_dlna(th, ln_a) / (th->bg->R_coefficient * exp(ln_a));
}

/* Beyond the grid: the stored value at the start plus the equilibrium part,
 * by the 5-point Gauss-Legendre rule (exact to degree 9; nodes and weights
 * from Abramowitz & Stegun 25.4.30) on pieces of at most 0.25 in ln a. Not
 * GSL's adaptive rules: they raise an error when they miss their
 * tolerance, which under GSL's default handler aborts the host (they did,
 * for z ~ 1e14 and beyond), and this accessor has no error to return. */
static double depth_beyond_start(const jg_thermal *th, double ln_a, gsl_spline *stored,
                                 double (*integrand)(double, void *)) {
  static const double node[5] = {0.0, 0.5384693101056831, -0.5384693101056831,
                                 0.9061798459386640, -0.9061798459386640};
  static const double weight[5] = {0.5688888888888889, 0.4786286704993665, 0.4786286704993665,
                                   0.2369268850561891, 0.2369268850561891};
  double base = gsl_spline_eval(stored, th->ln_a_start, NULL);
  history_ref ref = {th};
  double span = th->ln_a_start - ln_a;
  if (!(span > 0.0) || !isfinite(span)) return span > 0.0 ? INFINITY : base;
  double pieces = ceil(span / 0.25);
  double h = span / pieces, extra = 0.0;
  for (double i = 0.0; i < pieces; i += 1.0) {
    double mid = ln_a + (i + 0.5) * h;
    for (int j = 0; j < 5; j++) extra += weight[j] * integrand(mid + 0.5 * h * node[j], &ref);
  }
  return base + 0.5 * h * extra;
}

double jg_thermal_optical_depth(const jg_thermal *th, double z) {
  double ln_a = -log1p(z);
  if (ln_a < th->ln_a_start) return depth_beyond_start(th, ln_a, th->tau, dtau_dlna_gsl);
  return gsl_spline_eval(th->tau, clamp_ln_a(ln_a), NULL);
}

double jg_thermal_drag_depth(const jg_thermal *th, double z) {
  double ln_a = -log1p(z);
  if (ln_a < th->ln_a_start) return depth_beyond_start(th, ln_a, th->tau_drag, ddrag_dlna_gsl);
  return gsl_spline_eval(th->tau_drag, clamp_ln_a(ln_a), NULL);
}

double jg_thermal_visibility(const jg_thermal *th, double z) {
  double ln_a = -log1p(z);
  /* d tau / dz = (d tau / d ln a) / (1 + z). */
  return dtau_dlna(th, ln_a) / (1.0 + z) * exp(-jg_thermal_optical_depth(th, z));
}
