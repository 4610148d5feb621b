/*
 * The ionisation and gas-temperature history: drives the atomic physics of
 * recombination.c and the Compton balance of gas_temperature.c from
 * thermal.start_redshift to z = 0, and stores the result on a grid in ln a
 * (cubic splines of ln x_e, ln x_p and ln T_gas).
 *
 * Three phases, switched where their criteria cross (located by regula
 * falsi, not at a grid node):
 *   1. hydrogen and helium in Saha equilibrium, T_gas quasi-static
 *      (while the Saha x_p exceeds thermal.saha_limit);
 *   2. x_p from the Peebles equation (msbdf, analytic Jacobian), helium in
 *      Saha equilibrium, T_gas quasi-static (while H/Gamma_C is below
 *      thermal.quasi_static_limit);
 *   3. x_p and T_gas integrated together (msbdf, analytic Jacobian).
 * The stepper takes its own steps (about 950 at the defaults); every step is
 * kept and the grid is filled afterwards from their cubic Hermite
 * interpolants. The grid is thermal.grid_points nodes uniform in ln a plus
 * nodes graded towards the two switches and the two ends. The stored x_e
 * always includes the helium electrons.
 *
 * Optical depth and drag depth are integrated from the splines
 * (gsl_spline_eval_integ), from today backwards. Reading the stored history
 * back (states, slopes, depths, visibility) is thermal_query.c. Reionisation
 * (reionisation.c) adds its ionisation to the stored x_e and x_p and, with
 * heating, its heating to the T_gas equation, below its onset redshift only;
 * switched off it is never evaluated.
 */
#include "jeansgrow/thermal.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_odeiv2.h>
#include <gsl/gsl_spline.h>
#include <math.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "gas_temperature.h"
#include "jeansgrow/constants.h"
#include "recombination.h"
#include "reionisation.h"
#include "thermal_internal.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* ------------------------------------------------------------------------ */
/* The stiff systems in x = ln a.                                             */

typedef struct history_system {
  const jg_background *bg;
  double fudge;
  double T_gas_quasi_static; /* phase 2: filled by the right-hand side */
  jg__reionisation reion;
} history_system;

/* x_e and dxe_dxp are the recombination history's (the Peebles rate takes
 * them); the Compton rate and the heating see every free electron,
 * reionised ones included (x_e_all, x_p_all: set only while reionising). */
typedef struct local_state {
  double a, H, T_rad, n_H;
  double x_e, dxe_dxp, compton, dcompton_dxe;
  bool reionising;
  jg__reionised reion;
  double x_e_all, x_p_all;
  double x_e_base; /* the recombination history's x_e, or the ionisation table's */
} local_state;

/* Below the onset of reionisation (or of a table): every free electron in
 * the Compton rate (d x_e_all / d x_e = 1 - s_h folded into its
 * derivative; 0 where the ionisation table, which x_p does not move, gives
 * x_e). */
static void add_reionisation(const history_system *sys, double x, double x_p, local_state *s) {
  const jg__z_table *table = &sys->reion.ionisation;
  const bool tabulated = table->n > 0 && jg__z_table_covers(table, -x);
  s->x_e_base = tabulated ? jg__ionisation_table_value(table, 0, -x) : s->x_e;
  const double x_p_base = tabulated ? fmin(s->x_e_base, 1.0) : x_p;
  jg__reionisation_at(&sys->reion, x, &s->reion);
  s->x_e_all = jg__reionised_electrons(&sys->reion, &s->reion, s->x_e_base);
  s->x_p_all = jg__reionised_hydrogen(&s->reion, x_p_base);
  s->compton = jg__compton_rate(sys->bg, s->T_rad, s->x_e_all);
  s->dcompton_dxe = tabulated ? 0.0
                              : jg__compton_rate_dxe(sys->bg, s->T_rad, s->x_e_all) *
                                    (1.0 - s->reion.s_h);
}

static int local_state_at(const history_system *sys, double x, double x_p, local_state *s) {
  if (!isfinite(x_p)) return GSL_EBADFUNC;
  /* A trial step that overshoots below zero, or above full ionisation:
   * make the stepper retry with a smaller step (any status other than
   * GSL_EBADFUNC does that). Above 1 the neutral fraction 1 - x_p is
   * negative, the Peebles factor C can change sign, and a loose tolerance
   * let x_p run away to 50 when the equations started in Saha equilibrium. */
  if (!(x_p > 0 && x_p <= 1.0)) return GSL_EDOM;
  s->a = exp(x);
  s->H = jg_background_hubble(sys->bg, s->a);
  s->T_rad = jg_background_T_radiation(sys->bg, s->a);
  s->n_H = jg_background_n_hydrogen(sys->bg, s->a);
  if (jg__electrons_given_hydrogen(sys->bg, s->T_rad, s->n_H, x_p, &s->x_e, &s->dxe_dxp) !=
      GSL_SUCCESS)
    return GSL_EBADFUNC;
  s->compton = jg__compton_rate(sys->bg, s->T_rad, s->x_e);
  s->dcompton_dxe = jg__compton_rate_dxe(sys->bg, s->T_rad, s->x_e);
  s->reionising = false;
  return GSL_SUCCESS;
}

/* The state with reionisation where it acts (the last leg of phase 3 and
 * the nodes below the onset). */
static int local_state_reionised(const history_system *sys, double x, double x_p,
                                 local_state *s) {
  int st = local_state_at(sys, x, x_p, s);
  s->reionising = st == GSL_SUCCESS && jg__reionisation_acts(&sys->reion, x);
  if (s->reionising) add_reionisation(sys, x, x_p, s);
  return st;
}

/* The heating, d T_gas / d ln a at ln a = x and T_gas. */
static double heating_dlna(const history_system *sys, const local_state *s, double x,
                           double T_gas) {
  return jg__photo_heating_dlna(&sys->reion, &s->reion, x, s->x_e_all, T_gas, s->n_H, s->H);
}

/* dx_p/d ln a (and dT_gas/d ln a when the gas temperature is integrated:
 * dim 2, y = {x_p, T_gas}; dim 1, y = {x_p}, T_gas quasi-static). Inlined
 * with constant arguments: the systems without reionisation carry none of
 * its code. */
static inline int rhs_history(int dim, bool reionised, double x, const double y[], double f[],
                              history_system *sys) {
  local_state s;
  int st = reionised ? local_state_reionised(sys, x, y[0], &s) : local_state_at(sys, x, y[0], &s);
  if (st != GSL_SUCCESS) return st;
  if (dim == 2 && !isfinite(y[1])) return GSL_EBADFUNC;
  if (dim == 2 && !(y[1] > 0)) return GSL_EDOM;
  const double T_gas = dim == 2 ? y[1] : jg__gas_temperature_quasi_static(s.T_rad, s.H, s.compton);
  jg__peebles_rate r;
  jg__peebles_rate_at(y[0], s.x_e, s.dxe_dxp, T_gas, s.T_rad, s.n_H, s.H, sys->fudge, &r);
  f[0] = r.dxp_dt / s.H;
  if (dim == 2) {
    f[1] = jg__gas_temperature_dlna(y[1], s.T_rad, s.H, s.compton);
    if (s.reionising) f[1] += heating_dlna(sys, &s, x, y[1]);
  }
  return GSL_SUCCESS;
}

/* Phase 2: y = {x_p}, T_gas quasi-static. */
static int rhs_hydrogen(double x, const double y[], double f[], void *params) {
  return rhs_history(1, false, x, y, f, params);
}

/* Phase 3: y = {x_p, T_gas}. */
static int rhs_hydrogen_temperature(double x, const double y[], double f[], void *params) {
  return rhs_history(2, false, x, y, f, params);
}

/* Phase 3 below the onset of reionisation. */
static int rhs_reionised(double x, const double y[], double f[], void *params) {
  return rhs_history(2, true, x, y, f, params);
}

/* The explicit x-dependence (dfdt) by a central difference of the
 * right-hand side: msbdf's Newton iteration uses only dfdy, but GSL's
 * contract asks for both. */
static int explicit_derivative(gsl_odeiv2_system *self, double x, const double y[],
                               double dfdt[]) {
  const double h = 1e-6;
  double fp[2], fm[2];
  int st = self->function(x + h, y, fp, self->params);
  if (st == GSL_SUCCESS) st = self->function(x - h, y, fm, self->params);
  if (st != GSL_SUCCESS) return st;
  for (size_t i = 0; i < self->dimension; i++) dfdt[i] = (fp[i] - fm[i]) / (2.0 * h);
  return GSL_SUCCESS;
}

static int jac_hydrogen(double x, const double y[], double *dfdy, double dfdt[], void *params) {
  history_system *sys = params;
  local_state s;
  int st = local_state_at(sys, x, y[0], &s);
  if (st != GSL_SUCCESS) return st;
  /* The quasi-static T_gas depends on x_p through Gamma_C. */
  double denom = s.compton + s.H;
  double T_gas = s.T_rad * s.compton / denom;
  double dT_dxp = s.T_rad * s.H / (denom * denom) * s.dcompton_dxe * s.dxe_dxp;
  jg__peebles_rate r;
  jg__peebles_rate_at(y[0], s.x_e, s.dxe_dxp, T_gas, s.T_rad, s.n_H, s.H, sys->fudge, &r);
  dfdy[0] = (r.d_dxp + r.d_dTgas * dT_dxp) / s.H;
  gsl_odeiv2_system self = {rhs_hydrogen, NULL, 1, params};
  return explicit_derivative(&self, x, y, dfdt);
}

static inline int jac_history_temperature(bool reionised, double x, const double y[],
                                          double *dfdy, double dfdt[], void *params) {
  history_system *sys = params;
  local_state s;
  int st = reionised ? local_state_reionised(sys, x, y[0], &s) : local_state_at(sys, x, y[0], &s);
  if (st != GSL_SUCCESS) return st;
  jg__peebles_rate r;
  jg__peebles_rate_at(y[0], s.x_e, s.dxe_dxp, y[1], s.T_rad, s.n_H, s.H, sys->fudge, &r);
  dfdy[0 * 2 + 0] = r.d_dxp / s.H;
  dfdy[0 * 2 + 1] = r.d_dTgas / s.H;
  dfdy[1 * 2 + 0] = s.dcompton_dxe * s.dxe_dxp / s.H * (s.T_rad - y[1]);
  dfdy[1 * 2 + 1] = -2.0 - s.compton / s.H;
  if (s.reionising) { /* msbdf's Newton iteration needs only a fair slope */
    const double dT = 1e-6 * y[1];
    dfdy[1 * 2 + 1] += (heating_dlna(sys, &s, x, y[1] + dT) - heating_dlna(sys, &s, x, y[1] - dT)) /
                       (2.0 * dT);
  }
  gsl_odeiv2_system self = {reionised ? rhs_reionised : rhs_hydrogen_temperature, NULL, 2,
                            params};
  return explicit_derivative(&self, x, y, dfdt);
}

static int jac_hydrogen_temperature(double x, const double y[], double *dfdy, double dfdt[],
                                    void *params) {
  return jac_history_temperature(false, x, y, dfdy, dfdt, params);
}

static int jac_reionised(double x, const double y[], double *dfdy, double dfdt[],
                         void *params) {
  return jac_history_temperature(true, x, y, dfdy, dfdt, params);
}

/* ------------------------------------------------------------------------ */

static double z_of_ln_a(double x) { return exp(-x) - 1.0; }

void jg_thermal_free(jg_thermal *th) {
  if (!th) return;
  gsl_spline_free(th->ln_xe);
  gsl_spline_free(th->ln_xp);
  gsl_spline_free(th->ln_Tgas);
  gsl_spline_free(th->tau);
  gsl_spline_free(th->tau_drag);
  jg__z_table_free(&th->heating);
  jg__z_table_free(&th->ionisation);
  free(th->ln_a);
  free(th);
}

/* The key table's ranges (params.h), for programs that fill the settings
 * by hand. */
static jg_status check_settings(const jg_thermal_settings *s, jg_error *err) {
  return jg_params_check_thermal(s, err);
}

static jg_status build_spline(gsl_spline **out, const double *x, const double *y, int n,
                              jg_error *err) {
  *out = gsl_spline_alloc(gsl_interp_cspline, (size_t)n);
  if (!*out) return JG_FAIL(err, JG_ENOMEM, "out of memory for the thermal history splines");
  if (gsl_spline_init(*out, x, y, (size_t)n) != GSL_SUCCESS)
    return JG_FAIL(err, JG_ENUMERIC, "thermal history: cannot build splines");
  return JG_OK;
}

/* Optical depth and drag depth from today back to each node. */
static jg_status integrate_depths(jg_thermal *th, const double *x_e, jg_error *err) {
  const jg_background *bg = th->bg;
  const int n = th->n;
  double *dtau = malloc(sizeof(double) * (size_t)n * 4);
  if (!dtau) return JG_FAIL(err, JG_ENOMEM, "out of memory for the optical depth");
  double *ddrag = dtau + n, *tau = dtau + 2 * n, *drag = dtau + 3 * n;
  for (int i = 0; i < n; i++) {
    double a = exp(th->ln_a[i]);
    double n_e = x_e[i] * jg_background_n_hydrogen(bg, a);
    dtau[i] = n_e * JG_SIGMA_THOMSON * JG_C_LIGHT / jg_background_hubble(bg, a);
    ddrag[i] = dtau[i] / (bg->R_coefficient * a);
  }
  gsl_spline *s_tau = NULL, *s_drag = NULL;
  jg_status st = build_spline(&s_tau, th->ln_a, dtau, n, err);
  if (st == JG_OK) st = build_spline(&s_drag, th->ln_a, ddrag, n, err);
  if (st == JG_OK) {
    tau[n - 1] = drag[n - 1] = 0.0;
    for (int i = n - 2; i >= 0; i--) {
      tau[i] = tau[i + 1] + gsl_spline_eval_integ(s_tau, th->ln_a[i], th->ln_a[i + 1], NULL);
      drag[i] = drag[i + 1] + gsl_spline_eval_integ(s_drag, th->ln_a[i], th->ln_a[i + 1], NULL);
    }
    st = build_spline(&th->tau, th->ln_a, tau, n, err);
    if (st == JG_OK) st = build_spline(&th->tau_drag, th->ln_a, drag, n, err);
  }
  gsl_spline_free(s_tau);
  gsl_spline_free(s_drag);
  free(dtau);
  return st;
}

/* tau_reion: the optical depth of the electrons reionisation adds, from
 * today to its onset (the recombination history's own electrons are not in
 * it: the number CMB analyses quote). */
static jg_status integrate_reionisation_depth(jg_thermal *th, const double *added,
                                              jg_error *err) {
  const int n = th->n;
  double *dtau = malloc(sizeof(double) * (size_t)n * 2);
  if (!dtau) return JG_FAIL(err, JG_ENOMEM, "out of memory for the reionisation optical depth");
  double *ddrag = dtau + n;
  for (int i = 0; i < n; i++) {
    const double a = exp(th->ln_a[i]);
    dtau[i] = added[i] * jg_background_n_hydrogen(th->bg, a) * JG_SIGMA_THOMSON * JG_C_LIGHT /
              jg_background_hubble(th->bg, a);
    ddrag[i] = dtau[i] / (th->bg->R_coefficient * a);
  }
  gsl_spline *s = NULL, *s_drag = NULL;
  jg_status st = build_spline(&s, th->ln_a, dtau, n, err);
  if (st == JG_OK) st = build_spline(&s_drag, th->ln_a, ddrag, n, err);
  if (st == JG_OK) {
    th->tau_reion = gsl_spline_eval_integ(s, th->ln_a[0], 0.0, NULL);
    th->drag_reion = gsl_spline_eval_integ(s_drag, th->ln_a[0], 0.0, NULL);
  }
  gsl_spline_free(s);
  gsl_spline_free(s_drag);
  free(dtau);
  return st;
}

/* ------------------------------------------------------------------------ */
/* The driver. msbdf takes its own steps from the hand-over to today and
 * every accepted step is kept (both ends, values and d/d ln a): a cubic
 * Hermite interpolant over each step is the dense output from which the
 * stored nodes are filled afterwards. So the grid does not limit the steps,
 * the phases switch where their criteria cross (not at a node), and the
 * grid can be refined where the history has a kink. */

/* First trial step in ln a after a (re)start; msbdf adapts it at once. */
static const double HISTORY_FIRST_STEP = 1e-4;
/* Longest step in ln a. It bounds the interpolant's error (~ h^4 y''''/384,
 * about 2e-6 for x_p varying on ln a scales of 0.3) at loose
 * thermal.rel_tol; at the default tolerances no step reaches it (measured:
 * about 950 steps, the same with the cap at 0.2 or 1). */
static const double HISTORY_MAX_STEP = 0.05;
/* The phase switches are located to this in ln a. */
static const double CROSSING_TOL = 1e-12;

/* One accepted step: both ends, for the interpolant. */
typedef struct step_span {
  double x0, x1;
  double y0[2], y1[2], f0[2], f1[2];
} step_span;

/* x_p or T_gas (k = 0, 1) between the ends of a step. Both move one way
 * within a step, but at loose tolerances a step is long and its end slopes
 * stiff, and the cubic through them can leave the range the step spans
 * (seen: x_p = -0.18, x_p above full ionisation, T_gas < 0 at
 * thermal.rel_tol = 1e-3), states the equations cannot take; the value is
 * held inside the step's range, and x_p at most 1. At the default
 * tolerances the cubic stays inside and this changes nothing. */
static double hermite_at(const step_span *s, int k, double x);
static double value_in_step(const step_span *s, int k, double x) {
  const double lo = fmin(s->y0[k], s->y1[k]), hi = fmax(s->y0[k], s->y1[k]);
  const double v = fmin(fmax(hermite_at(s, k, x), lo), hi);
  return k == 0 ? fmin(v, 1.0) : v;
}

static double hermite_at(const step_span *s, int k, double x) {
  const double h = s->x1 - s->x0, t = (x - s->x0) / h, t2 = t * t, t3 = t2 * t;
  return (2.0 * t3 - 3.0 * t2 + 1.0) * s->y0[k] + (t3 - 2.0 * t2 + t) * h * s->f0[k] +
         (3.0 * t2 - 2.0 * t3) * s->y1[k] + (t3 - t2) * h * s->f1[k];
}

typedef struct history_run {
  const jg_background *bg;
  const jg_thermal_settings *settings;
  history_system sys;
  double x_handover; /* Saha -> Peebles (x_p = thermal.saha_limit) */
  double x_weak;     /* quasi-static -> integrated T_gas (H/Gamma_C = thermal.quasi_static_limit) */
  step_span *spans;  /* phase 2 spans, then phase 3 spans from first_integrated_T */
  size_t n_spans, capacity, first_integrated_T;
} history_run;

static jg_status keep_span(history_run *r, const step_span *s, jg_error *err) {
  if (r->n_spans == r->capacity) {
    size_t capacity = r->capacity ? 2 * r->capacity : 1024;
    step_span *grown = realloc(r->spans, capacity * sizeof *grown);
    if (!grown) return JG_FAIL(err, JG_ENOMEM, "out of memory for the thermal history steps");
    r->spans = grown;
    r->capacity = capacity;
  }
  r->spans[r->n_spans++] = *s;
  return JG_OK;
}

/* ---- phase 1: Saha equilibrium, evaluated directly ---- */

static double saha_hydrogen_at(const jg_background *bg, double x, double *x_e) {
  double a = exp(x), x_p = NAN;
  if (jg__saha_equilibrium(bg, jg_background_T_radiation(bg, a), jg_background_n_hydrogen(bg, a),
                           x_e, &x_p) != GSL_SUCCESS)
    return NAN;
  return x_p;
}

static double saha_excess(double x, void *p) {
  const history_run *r = p;
  double x_e;
  return saha_hydrogen_at(r->bg, x, &x_e) - r->settings->saha_limit;
}

/* H / Gamma_C minus thermal.quasi_static_limit at hydrogen fraction x_p:
 * positive once T_gas must be integrated. */
static double weak_coupling_excess(const history_run *r, double x, double x_p) {
  local_state ls;
  if (local_state_at(&r->sys, x, x_p, &ls) != GSL_SUCCESS) return NAN;
  return ls.H / ls.compton - r->settings->quasi_static_limit;
}

static jg_status unusable_state(double x, double x_p, jg_error *err) {
  return JG_FAIL(err, JG_ENUMERIC, "thermal history: x_p = %g unusable at z = %.3f", x_p,
                 z_of_ln_a(x));
}

/* Where the Saha x_p falls to thermal.saha_limit (the start if it already
 * has; today if it never does). The Saha x_p falls monotonically with time. */
static jg_status locate_handover(history_run *r, double x_start, jg_error *err) {
  const double at_start = saha_excess(x_start, r), today = saha_excess(0.0, r);
  if (!isfinite(at_start) || !isfinite(today))
    return JG_FAIL(err, JG_ENUMERIC, "thermal history (Saha equilibrium): no solution at z = %.3f",
                   z_of_ln_a(isfinite(at_start) ? 0.0 : x_start));
  if (at_start <= 0.0 || today > 0.0) {
    r->x_handover = at_start <= 0.0 ? x_start : 0.0;
  } else {
    if (jg__bracketed_root(saha_excess, r, x_start, 0.0, CROSSING_TOL, &r->x_handover) !=
        GSL_SUCCESS)
      return JG_FAIL(err, JG_ENUMERIC,
                     "thermal history (Saha equilibrium): cannot locate x_p = %g below z = %.3f",
                     r->settings->saha_limit, z_of_ln_a(x_start));
  }
  /* While hydrogen is in Saha equilibrium the gas temperature stays
   * quasi-static even if the coupling is already weak (a small
   * thermal.quasi_static_limit, a fast expansion): the joint equations then
   * start at the hand-over, not in equilibrium, where the Peebles rate is
   * stiff beyond use and x_p sits against 1. H/Gamma_C only grows with
   * time, so the end of the Saha phase tells. */
  double x_e, x_p = saha_hydrogen_at(r->bg, r->x_handover, &x_e);
  const double excess = weak_coupling_excess(r, r->x_handover, x_p);
  if (!isfinite(excess)) return unusable_state(r->x_handover, x_p, err);
  if (excess >= 0.0) r->x_weak = r->x_handover;
  return JG_OK;
}

/* ---- phases 2 and 3: the stepper's own steps ---- */

typedef struct coupling_crossing {
  const history_run *r;
  const step_span *s;
} coupling_crossing;

static double weak_coupling_in_step(double x, void *p) {
  const coupling_crossing *c = p;
  return weak_coupling_excess(c->r, x, value_in_step(c->s, 0, x));
}

/* Integrate one phase from (*x, y) to x_end, keeping every step. Phase 2
 * (dimension 1) stops where the Compton coupling becomes weak, or at x_end
 * (where reionisation may start to heat the gas: the temperature is
 * integrated from there), and leaves *x and y[0] there. */
static jg_status run_phase(history_run *r, gsl_odeiv2_driver *d, const char *stage,
                           double x_end, double *x, double y[2], jg_error *err) {
  const gsl_odeiv2_system *sys = d->sys;
  const size_t dim = sys->dimension;
  step_span s;
  s.x0 = *x;
  memcpy(s.y0, y, dim * sizeof *y);
  if (sys->function(s.x0, s.y0, s.f0, sys->params) != GSL_SUCCESS)
    return unusable_state(s.x0, y[0], err);
  gsl_odeiv2_driver_reset_hstart(d, HISTORY_FIRST_STEP);
  while (*x < x_end) {
    if (d->h > HISTORY_MAX_STEP) d->h = HISTORY_MAX_STEP;
    const double x_from = *x, h_tried = d->h;
    int st = gsl_odeiv2_evolve_apply(d->e, d->c, d->s, sys, x, x_end, &d->h, y);
    if (st != GSL_SUCCESS)
      return JG_FAIL(err, JG_ENUMERIC,
                     "thermal history (%s): stiff integration failed between z = %.3f and "
                     "z = %.3f (%s)",
                     stage, z_of_ln_a(x_from), z_of_ln_a(fmin(x_from + h_tried, x_end)),
                     gsl_strerror(st));
    s.x1 = *x;
    memcpy(s.y1, y, dim * sizeof *y);
    if (sys->function(s.x1, s.y1, s.f1, sys->params) != GSL_SUCCESS)
      return unusable_state(s.x1, y[0], err);
    jg_status ks = keep_span(r, &s, err);
    if (ks != JG_OK) return ks;
    if (dim == 1 && weak_coupling_excess(r, s.x1, s.y1[0]) >= 0.0) {
      coupling_crossing c = {r, &s};
      if (jg__bracketed_root(weak_coupling_in_step, &c, s.x0, s.x1, CROSSING_TOL, &r->x_weak) !=
          GSL_SUCCESS)
        return JG_FAIL(err, JG_ENUMERIC,
                       "thermal history (%s): cannot locate H/Gamma_C = %g between z = %.3f and "
                       "z = %.3f",
                       stage, r->settings->quasi_static_limit, z_of_ln_a(s.x0), z_of_ln_a(s.x1));
      *x = r->x_weak;
      y[0] = value_in_step(&s, 0, r->x_weak);
      return JG_OK;
    }
    s.x0 = s.x1;
    memcpy(s.y0, s.y1, sizeof s.y0);
    memcpy(s.f0, s.f1, sizeof s.f0);
  }
  if (dim == 1 && x_end < 0.0) r->x_weak = x_end;
  return JG_OK;
}

/* The three phases from x_start to today; the steps are kept in r. */
static jg_status integrate_history(history_run *r, double x_start, jg_error *err) {
  r->x_weak = 0.0;
  jg_status st = locate_handover(r, x_start, err);
  if (st != JG_OK || r->x_handover >= 0.0) return st;
  gsl_odeiv2_system ode_h = {rhs_hydrogen, jac_hydrogen, 1, &r->sys};
  gsl_odeiv2_system ode_ht = {rhs_hydrogen_temperature, jac_hydrogen_temperature, 2, &r->sys};
  gsl_odeiv2_system ode_re = {rhs_reionised, jac_reionised, 2, &r->sys};
  const jg_thermal_settings *set = r->settings;
  gsl_odeiv2_driver *drv_h = gsl_odeiv2_driver_alloc_y_new(
      &ode_h, gsl_odeiv2_step_msbdf, HISTORY_FIRST_STEP, set->abs_tol, set->rel_tol);
  gsl_odeiv2_driver *drv_ht = gsl_odeiv2_driver_alloc_y_new(
      &ode_ht, gsl_odeiv2_step_msbdf, HISTORY_FIRST_STEP, set->abs_tol, set->rel_tol);
  const bool reionising = r->sys.reion.active;
  gsl_odeiv2_driver *drv_re =
      reionising ? gsl_odeiv2_driver_alloc_y_new(&ode_re, gsl_odeiv2_step_msbdf,
                                                 HISTORY_FIRST_STEP, set->abs_tol, set->rel_tol)
                 : NULL;
  if (!drv_h || !drv_ht || (reionising && !drv_re))
    st = JG_FAIL(err, JG_ENOMEM, "out of memory for the ODE drivers");

  double x = r->x_handover, x_e;
  double y[2] = {saha_hydrogen_at(r->bg, x, &x_e), 0.0};
  const bool weak_at_handover = r->x_weak == r->x_handover;
  /* Phase 3 is split at the onset of the models; phase 2 (quasi-static
   * T_gas) ends there when something heats the gas or sets x_e, and else
   * runs to its own end: a plain tanh model only adds electrons, and the
   * nodes take the quasi-static T_gas with all of them. */
  const jg__reionisation *m = &r->sys.reion;
  const double x_split = reionising ? fmax(m->ln_a_onset, x) : 0.0;
  const bool heated = m->model == JG_REIONISATION_TANH_HEATED || m->table.n > 0 ||
                      m->ionisation.n > 0;
  const double x_quasi_static_end = heated ? x_split : 0.0;
  if (st == JG_OK && !weak_at_handover)
    st = run_phase(r, drv_h, "hydrogen recombination", x_quasi_static_end, &x, y, err);
  r->first_integrated_T = r->n_spans;
  if (st == JG_OK && x < 0.0) {
    local_state ls;
    if (local_state_at(&r->sys, x, y[0], &ls) != GSL_SUCCESS) {
      st = unusable_state(x, y[0], err);
    } else {
      y[1] = jg__gas_temperature_quasi_static(ls.T_rad, ls.H, ls.compton);
      /* With reionisation a step ends at its onset, so that the steps above
       * it (and the nodes filled from them) are those without it; below,
       * the system with reionisation takes over. */
      if (x < x_split)
        st = run_phase(r, drv_ht, "hydrogen and gas temperature", x_split, &x, y, err);
      if (st == JG_OK && x < 0.0)
        st = run_phase(r, reionising ? drv_re : drv_ht,
                       reionising ? "reionisation and gas temperature"
                                  : "hydrogen and gas temperature",
                       0.0, &x, y, err);
    }
  }
  if (drv_h) gsl_odeiv2_driver_free(drv_h); /* GSL's free does not take NULL */
  if (drv_ht) gsl_odeiv2_driver_free(drv_ht);
  if (drv_re) gsl_odeiv2_driver_free(drv_re);
  return st;
}

/* ---- the stored grid ---- */

/* A cubic spline through a kink (the two phase switches) or next to a
 * natural end condition (the two ends) errs by ~ (slope jump or h^2 y'') x
 * the node spacing h, and that error decays only by a factor ~0.27 per node
 * away from it; right after the hand-over x_p also relaxes from Saha onto
 * the Peebles track within ~0.01 in ln a. So besides thermal.grid_points
 * nodes uniform in ln a the grid gets graded nodes on each side of those
 * four places, at distances GRADED_FINEST x GRADED_RATIO^k up to
 * GRADED_WIDTH: the local spacing is a third of the distance, the error
 * scales with the finest spacing and still dies away (ratio^2 x 0.27 < 1
 * per node), whatever the uniform spacing. */
static const double GRADED_FINEST = 1e-6, GRADED_RATIO = 1.5, GRADED_WIDTH = 0.05;
/* Node spacing in ln a across the reionisation fronts: the tanh tails grow
 * like exp(2 u), about e^36 per unit ln a for hydrogen at z_re = 7.67 and
 * Delta z = 0.5 (a tanh in (1+z)^1.5), e^18 for helium at 3.5 and 0.5 (a
 * tanh in z), and a cubic spline through an exponential of rate q errs by
 * ~ (q h)^4/384: 4e-6 with the default uniform spacing (0.006), 7e-8 at
 * 0.002 for hydrogen and 0.004 for helium. */
static const double FRONT_SPACING[2] = {0.002, 0.004};

static int compare_doubles(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

static jg_status build_grid(jg_thermal *th, const history_run *r, int uniform, jg_error *err) {
  const double start = th->ln_a_start;
  /* The onset of reionisation or heating is a kink where a heating table
   * starts with a rate above zero; without either it repeats the end. */
  const double places[] = {start, r->x_handover, r->x_weak, 0.0,
                           r->sys.reion.active ? r->sys.reion.ln_a_onset : 0.0};
  const int n_places = (int)(sizeof places / sizeof places[0]);
  int graded_per_side = 0;
  for (double offset = GRADED_FINEST; offset < GRADED_WIDTH; offset *= GRADED_RATIO)
    graded_per_side++;
  double fronts[2][2];
  jg__reionisation_fronts(&r->sys.reion, fronts);
  int front_nodes = 0;
  for (int f = 0; f < 2; f++)
    front_nodes += (int)ceil((fronts[f][1] - fronts[f][0]) / FRONT_SPACING[f]);
  const int capacity = uniform + n_places * (2 * graded_per_side + 1) + front_nodes;
  th->ln_a = malloc(sizeof(double) * (size_t)capacity);
  if (!th->ln_a) return JG_FAIL(err, JG_ENOMEM, "out of memory for the thermal history");
  int n = 0;
  for (int i = 0; i < uniform; i++) th->ln_a[n++] = start * (1.0 - (double)i / (uniform - 1));
  th->ln_a[uniform - 1] = 0.0;
  for (int p = 0; p < n_places; p++) {
    const double at = places[p];
    if (p == 4 && at == 0.0) continue;
    if (p == 1 || p == 2 || p == 4) {
      if (!(at > start && at < 0.0)) continue; /* no such switch inside the grid */
      th->ln_a[n++] = at;
    }
    for (double offset = GRADED_FINEST; offset < GRADED_WIDTH; offset *= GRADED_RATIO) {
      if (at - offset > start) th->ln_a[n++] = at - offset;
      if (at + offset < 0.0) th->ln_a[n++] = at + offset;
    }
  }
  for (int f = 0; f < 2; f++)
    for (double x = fronts[f][0]; x < fronts[f][1] && n < capacity; x += FRONT_SPACING[f])
      if (x > start) th->ln_a[n++] = x;
  /* The uniform nodes are in order already: sort the few graded ones and
   * merge, dropping nodes that (nearly) repeat one (the spline needs strictly
   * increasing abscissae). */
  double *merged = malloc(sizeof(double) * (size_t)n);
  if (!merged) return JG_FAIL(err, JG_ENOMEM, "out of memory for the thermal history");
  double *graded = th->ln_a + uniform;
  qsort(graded, (size_t)(n - uniform), sizeof *graded, compare_doubles);
  const double too_close = 1e-3 * GRADED_FINEST;
  int kept = 0;
  for (int i = 0, j = 0; i < uniform || j < n - uniform;) {
    const double next = j >= n - uniform || (i < uniform && th->ln_a[i] <= graded[j])
                            ? th->ln_a[i++]
                            : graded[j++];
    if (kept == 0 || next - merged[kept - 1] > too_close) merged[kept++] = next;
  }
  free(th->ln_a);
  th->ln_a = merged;
  th->ln_a[kept - 1] = 0.0;
  th->n = kept;
  return JG_OK;
}

/* Node values: Saha up to the hand-over, then the kept steps; `added` gets
 * the electrons reionisation adds (0 where it does not act). */
static jg_status fill_nodes(const history_run *r, const jg_thermal *th, double *x_e, double *x_p,
                            double *T_gas, double *added, jg_error *err) {
  const bool reionising = r->sys.reion.active;
  size_t j = 0;
  for (int i = 0; i < th->n; i++) {
    const double x = th->ln_a[i];
    local_state ls;
    added[i] = 0.0;
    if (x <= r->x_handover) {
      x_p[i] = saha_hydrogen_at(r->bg, x, &x_e[i]);
      if (!isfinite(x_p[i]))
        return JG_FAIL(err, JG_ENUMERIC,
                       "thermal history (Saha equilibrium): no solution at z = %.3f", z_of_ln_a(x));
      const double a = exp(x), T_rad = jg_background_T_radiation(r->bg, a);
      const double H = jg_background_hubble(r->bg, a);
      T_gas[i] = jg__gas_temperature_quasi_static(T_rad, H, jg__compton_rate(r->bg, T_rad, x_e[i]));
      continue;
    }
    const bool integrated_T = r->x_weak < 0.0 && x > r->x_weak;
    const size_t end = integrated_T ? r->n_spans : r->first_integrated_T;
    if (integrated_T && j < r->first_integrated_T) j = r->first_integrated_T;
    while (j + 1 < end && r->spans[j].x1 < x) j++;
    const step_span *s = &r->spans[j];
    x_p[i] = value_in_step(s, 0, x);
    const int st = reionising ? local_state_reionised(&r->sys, x, x_p[i], &ls)
                              : local_state_at(&r->sys, x, x_p[i], &ls);
    if (st != GSL_SUCCESS)
      return unusable_state(x, x_p[i], err);
    x_e[i] = ls.x_e;
    if (ls.reionising) {
      x_e[i] = ls.x_e_all;
      x_p[i] = ls.x_p_all;
      added[i] = ls.x_e_all - ls.x_e_base;
    }
    T_gas[i] = integrated_T ? value_in_step(s, 1, x)
                            : jg__gas_temperature_quasi_static(ls.T_rad, ls.H, ls.compton);
  }
  /* The ionisation table replaces x_e also in the Saha era it may reach
   * into, and its temperature column the computed T_gas. */
  const jg__z_table *table = &r->sys.reion.ionisation;
  for (int i = 0; table->n > 0 && i < th->n; i++) {
    const double x = th->ln_a[i];
    if (!jg__z_table_covers(table, -x)) continue;
    if (x <= r->x_handover) {
      x_e[i] = jg__ionisation_table_value(table, 0, -x);
      x_p[i] = fmin(x_e[i], 1.0);
    }
    if (table->columns > 1) T_gas[i] = jg__ionisation_table_value(table, 1, -x);
  }
  return JG_OK;
}

jg_thermal *jg_thermal_new(const jg_background *bg, const jg_thermal_settings *settings,
                           jg_error *err) {
  if (!bg || !settings) {
    JG_FAIL(err, JG_EINVAL, "jg_thermal_new: background and settings must not be NULL");
    return NULL;
  }
  if (check_settings(settings, err) != JG_OK) return NULL;
  jg_thermal *th = calloc(1, sizeof *th);
  if (!th) {
    JG_FAIL(err, JG_ENOMEM, "out of memory for the thermal history");
    return NULL;
  }
  th->bg = bg;
  th->settings = *settings;
  th->ln_a_start = -log1p(settings->start_redshift);
  history_run run = {bg, settings, {bg, settings->recombination_fudge, 0.0, {0}}, 0.0, 0.0,
                     NULL, 0, 0, 0};
  jg_status st = JG_OK;
  /* The tables' own messages name the file and line; the key is added, as
   * they do not say where the file name came from. */
  jg_error table_err;
  jg_error_clear(&table_err);
  const char *table_key = "thermal.heating_table";
  if (settings->heating_table[0])
    st = jg__heating_table_read(settings->heating_table, &th->heating, &table_err);
  if (st == JG_OK && settings->ionisation_table[0]) {
    table_key = "thermal.ionisation_table";
    st = jg__ionisation_table_read(settings->ionisation_table, settings->start_redshift,
                                   (1.0 + 2.0 * bg->helium_to_hydrogen) * (1.0 + 1e-9),
                                   &th->ionisation, &table_err);
  }
  if (st != JG_OK) {
    JG_FAIL(err, st, "%s: %s", table_key, table_err.message);
    jg_thermal_free(th);
    return NULL;
  }
  jg__reionisation_init(&run.sys.reion, settings, bg, &th->heating, &th->ionisation);
  th->reion = run.sys.reion;
  th->z_onset = run.sys.reion.active ? z_of_ln_a(run.sys.reion.ln_a_onset) : 0.0;
  st = integrate_history(&run, th->ln_a_start, err);
  if (st == JG_OK) st = build_grid(th, &run, settings->grid_points, err);
  const int n = st == JG_OK ? th->n : 0;
  double *work = NULL;
  if (st == JG_OK && !(work = malloc(sizeof(double) * (size_t)n * 4)))
    st = JG_FAIL(err, JG_ENOMEM, "out of memory for the thermal history");
  double *x_e = work, *x_p = work ? work + n : NULL, *T_gas = work ? work + 2 * n : NULL;
  double *added = work ? work + 3 * n : NULL;
  if (st == JG_OK) st = fill_nodes(&run, th, x_e, x_p, T_gas, added, err);
  free(run.spans);

  if (st == JG_OK) {
    double *tmp = malloc(sizeof(double) * (size_t)n);
    if (!tmp) st = JG_FAIL(err, JG_ENOMEM, "out of memory for the thermal history");
    double *fields[3] = {x_e, x_p, T_gas};
    gsl_spline **splines[3] = {&th->ln_xe, &th->ln_xp, &th->ln_Tgas};
    for (int k = 0; st == JG_OK && k < 3; k++) {
      for (int i = 0; i < n; i++) tmp[i] = log(fields[k][i]);
      st = build_spline(splines[k], th->ln_a, tmp, n, err);
    }
    free(tmp);
  }
  if (st == JG_OK) st = integrate_depths(th, x_e, err);
  if (st == JG_OK && settings->reionisation != JG_REIONISATION_NONE)
    st = integrate_reionisation_depth(th, added, err);
  free(work);
  if (st != JG_OK) {
    jg_thermal_free(th);
    return NULL;
  }
  return th;
}
