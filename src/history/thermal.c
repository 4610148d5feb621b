/*
 * The ionisation and gas-temperature history: drives the atomic physics of
 * recombination.c and the Compton balance of gas_temperature.c from
 * thermal.start_redshift to z = 0, and stores the result on a grid uniform
 * in ln a (cubic splines of ln x_e, ln x_p and ln T_gas).
 *
 * Three phases, switched at grid nodes:
 *   1. hydrogen and helium in Saha equilibrium, T_gas quasi-static
 *      (while the Saha x_p exceeds thermal.saha_limit);
 *   2. x_p from the Peebles equation (msbdf, analytic Jacobian), helium in
 *      Saha equilibrium, T_gas quasi-static (while H/Gamma_C is below
 *      thermal.quasi_static_limit);
 *   3. x_p and T_gas integrated together (msbdf, analytic Jacobian).
 * The stored x_e always includes the helium electrons.
 *
 * Optical depth and drag depth are integrated from the splines
 * (gsl_spline_eval_integ), from today backwards; there is no reionisation.
 */
#include "jeansgrow/thermal.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_integration.h>
#include <gsl/gsl_odeiv2.h>
#include <gsl/gsl_spline.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "gas_temperature.h"
#include "jeansgrow/constants.h"
#include "recombination.h"

struct jg_thermal {
  const jg_background *bg;
  jg_thermal_settings settings;
  int n;                /* grid nodes */
  double ln_a_start;    /* first node; the last is ln a = 0 */
  double *ln_a;         /* node positions */
  gsl_spline *ln_xe, *ln_xp, *ln_Tgas;
  gsl_spline *tau;      /* optical depth from today back to the node */
  gsl_spline *tau_drag; /* drag depth, same */
};

/* ------------------------------------------------------------------------ */
/* The stiff systems in x = ln a.                                             */

typedef struct history_system {
  const jg_background *bg;
  double fudge;
  double T_gas_quasi_static; /* phase 2: filled by the right-hand side */
} history_system;

typedef struct local_state {
  double a, H, T_rad, n_H;
  double x_e, dxe_dxp, compton, dcompton_dxe;
} local_state;

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
  return GSL_SUCCESS;
}

/* Phase 2: y = {x_p}, T_gas quasi-static. */
static int rhs_hydrogen(double x, const double y[], double f[], void *params) {
  history_system *sys = params;
  local_state s;
  int st = local_state_at(sys, x, y[0], &s);
  if (st != GSL_SUCCESS) return st;
  double T_gas = jg__gas_temperature_quasi_static(s.T_rad, s.H, s.compton);
  jg__peebles_rate r;
  jg__peebles_rate_at(y[0], s.x_e, s.dxe_dxp, T_gas, s.T_rad, s.n_H, s.H, sys->fudge, &r);
  f[0] = r.dxp_dt / s.H;
  return GSL_SUCCESS;
}

/* Phase 3: y = {x_p, T_gas}. */
static int rhs_hydrogen_temperature(double x, const double y[], double f[], void *params) {
  history_system *sys = params;
  local_state s;
  int st = local_state_at(sys, x, y[0], &s);
  if (st != GSL_SUCCESS) return st;
  if (!isfinite(y[1])) return GSL_EBADFUNC;
  if (!(y[1] > 0)) return GSL_EDOM;
  jg__peebles_rate r;
  jg__peebles_rate_at(y[0], s.x_e, s.dxe_dxp, y[1], s.T_rad, s.n_H, s.H, sys->fudge, &r);
  f[0] = r.dxp_dt / s.H;
  f[1] = jg__gas_temperature_dlna(y[1], s.T_rad, s.H, s.compton);
  return GSL_SUCCESS;
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

static int jac_hydrogen_temperature(double x, const double y[], double *dfdy, double dfdt[],
                                    void *params) {
  history_system *sys = params;
  local_state s;
  int st = local_state_at(sys, x, y[0], &s);
  if (st != GSL_SUCCESS) return st;
  jg__peebles_rate r;
  jg__peebles_rate_at(y[0], s.x_e, s.dxe_dxp, y[1], s.T_rad, s.n_H, s.H, sys->fudge, &r);
  dfdy[0 * 2 + 0] = r.d_dxp / s.H;
  dfdy[0 * 2 + 1] = r.d_dTgas / s.H;
  dfdy[1 * 2 + 0] = s.dcompton_dxe * s.dxe_dxp / s.H * (s.T_rad - y[1]);
  dfdy[1 * 2 + 1] = -2.0 - s.compton / s.H;
  gsl_odeiv2_system self = {rhs_hydrogen_temperature, NULL, 2, params};
  return explicit_derivative(&self, x, y, dfdt);
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
  free(th->ln_a);
  free(th);
}

static jg_status check_settings(const jg_thermal_settings *s, jg_error *err) {
  if (!(s->start_redshift >= 3000 && s->start_redshift <= 1e5))
    return JG_FAIL(err, JG_EINVAL, "thermal.start_redshift must be between 3000 and 100000 (got %g)",
                   s->start_redshift);
  if (!(s->recombination_fudge > 0) || !isfinite(s->recombination_fudge))
    return JG_FAIL(err, JG_EINVAL, "thermal.recombination_fudge must be positive (got %g)",
                   s->recombination_fudge);
  if (!(s->saha_limit > 0 && s->saha_limit < 1))
    return JG_FAIL(err, JG_EINVAL, "thermal.saha_limit must lie in (0, 1) (got %g)", s->saha_limit);
  if (!(s->quasi_static_limit > 0 && s->quasi_static_limit < 1))
    return JG_FAIL(err, JG_EINVAL, "thermal.quasi_static_limit must lie in (0, 1) (got %g)",
                   s->quasi_static_limit);
  /* One message per key, so that the user knows which of the two to change. */
  if (!(s->rel_tol > 0 && s->rel_tol < 1))
    return JG_FAIL(err, JG_EINVAL, "thermal.rel_tol must lie in (0, 1) (got %g)", s->rel_tol);
  if (!(s->abs_tol > 0 && s->abs_tol < 1))
    return JG_FAIL(err, JG_EINVAL, "thermal.abs_tol must lie in (0, 1) (got %g)", s->abs_tol);
  if (s->grid_points < 200)
    return JG_FAIL(err, JG_EINVAL, "thermal.grid_points must be at least 200 (got %d)",
                   s->grid_points);
  return JG_OK;
}

/* Integrate one ODE phase from x to x_next; name the stage on failure. */
static jg_status advance(gsl_odeiv2_driver *d, double *x, double x_next, double *y,
                         const char *stage, jg_error *err) {
  double x_from = *x;
  int st = gsl_odeiv2_driver_apply(d, x, x_next, y);
  if (st != GSL_SUCCESS)
    return JG_FAIL(err, JG_ENUMERIC,
                   "thermal history (%s): stiff integration failed between z = %.3f and "
                   "z = %.3f (%s)",
                   stage, z_of_ln_a(x_from), z_of_ln_a(x_next), gsl_strerror(st));
  return JG_OK;
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
  th->n = settings->grid_points;
  th->ln_a_start = -log1p(settings->start_redshift);
  const int n = th->n;
  th->ln_a = malloc(sizeof(double) * (size_t)n);
  double *work = malloc(sizeof(double) * (size_t)n * 3);
  if (!th->ln_a || !work) {
    free(work);
    jg_thermal_free(th);
    JG_FAIL(err, JG_ENOMEM, "out of memory for the thermal history");
    return NULL;
  }
  double *x_e = work, *x_p = work + n, *T_gas = work + 2 * n;
  for (int i = 0; i < n; i++) th->ln_a[i] = th->ln_a_start * (1.0 - (double)i / (n - 1));
  th->ln_a[n - 1] = 0.0;

  history_system sys = {bg, settings->recombination_fudge, 0.0};
  gsl_odeiv2_system ode_h = {rhs_hydrogen, jac_hydrogen, 1, &sys};
  gsl_odeiv2_system ode_ht = {rhs_hydrogen_temperature, jac_hydrogen_temperature, 2, &sys};
  const double h0 = 1e-4;
  gsl_odeiv2_driver *drv_h = gsl_odeiv2_driver_alloc_y_new(
      &ode_h, gsl_odeiv2_step_msbdf, h0, settings->abs_tol, settings->rel_tol);
  gsl_odeiv2_driver *drv_ht = gsl_odeiv2_driver_alloc_y_new(
      &ode_ht, gsl_odeiv2_step_msbdf, h0, settings->abs_tol, settings->rel_tol);
  jg_status st = (drv_h && drv_ht) ? JG_OK
                                   : JG_FAIL(err, JG_ENOMEM, "out of memory for the ODE drivers");

  int phase = 1;
  double y[2] = {0, 0};
  double x = th->ln_a[0];
  for (int i = 0; st == JG_OK && i < n; i++) {
    const double xi = th->ln_a[i], a = exp(xi), z = z_of_ln_a(xi);
    const double T_rad = jg_background_T_radiation(bg, a);
    const double n_H = jg_background_n_hydrogen(bg, a);
    const double H = jg_background_hubble(bg, a);
    if (phase == 1) {
      if (jg__saha_equilibrium(bg, T_rad, n_H, &x_e[i], &x_p[i]) != GSL_SUCCESS) {
        st = JG_FAIL(err, JG_ENUMERIC, "thermal history (Saha equilibrium): no solution at z = %.3f", z);
        break;
      }
      if (x_p[i] <= settings->saha_limit && i > 0) {
        /* Hand over at the previous node, where Saha still held. */
        phase = 2;
        x = th->ln_a[i - 1];
        y[0] = x_p[i - 1];
        gsl_odeiv2_driver_reset(drv_h);
      }
    }
    if (phase == 2) {
      st = advance(drv_h, &x, xi, y, "hydrogen recombination", err);
      if (st != JG_OK) break;
      double dummy;
      x_p[i] = y[0];
      jg__electrons_given_hydrogen(bg, T_rad, n_H, x_p[i], &x_e[i], &dummy);
    }
    double compton = jg__compton_rate(bg, T_rad, x_e[i]);
    /* While hydrogen is in Saha equilibrium the gas temperature stays
     * quasi-static even if the coupling is already weak (a small
     * thermal.quasi_static_limit, a fast expansion): the joint equations
     * start where hydrogen leaves Saha, not in equilibrium, where the
     * Peebles rate is stiff beyond use and x_p sits against 1. */
    if (phase == 1 || (phase == 2 && H / compton < settings->quasi_static_limit)) {
      T_gas[i] = jg__gas_temperature_quasi_static(T_rad, H, compton);
      continue;
    }
    if (phase < 3) {
      phase = 3;
      x = xi;
      y[0] = x_p[i];
      y[1] = jg__gas_temperature_quasi_static(T_rad, H, compton);
      gsl_odeiv2_driver_reset(drv_ht);
    }
    st = advance(drv_ht, &x, xi, y, "hydrogen and gas temperature", err);
    if (st != JG_OK) break;
    x_p[i] = y[0];
    T_gas[i] = y[1];
    double dummy;
    jg__electrons_given_hydrogen(bg, T_rad, n_H, x_p[i], &x_e[i], &dummy);
  }
  gsl_odeiv2_driver_free(drv_h);
  gsl_odeiv2_driver_free(drv_ht);

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
  free(work);
  if (st != JG_OK) {
    jg_thermal_free(th);
    return NULL;
  }
  return th;
}

const jg_background *jg_thermal_background(const jg_thermal *th) { return th->bg; }

double jg_thermal_start_redshift(const jg_thermal *th) { return th->settings.start_redshift; }

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

double jg_thermal_x_e(const jg_thermal *th, double ln_a) {
  if (ln_a < th->ln_a_start) {
    double x_e, x_p, T;
    early_state(th, exp(ln_a), &x_e, &x_p, &T);
    return x_e;
  }
  return exp(gsl_spline_eval(th->ln_xe, clamp_ln_a(ln_a), NULL));
}

double jg_thermal_T_gas(const jg_thermal *th, double ln_a) {
  if (ln_a < th->ln_a_start) {
    double x_e, x_p, T;
    early_state(th, exp(ln_a), &x_e, &x_p, &T);
    return T;
  }
  return exp(gsl_spline_eval(th->ln_Tgas, clamp_ln_a(ln_a), NULL));
}

void jg_thermal_state_at(const jg_thermal *th, double z, jg_thermal_state *s) {
  const jg_background *bg = th->bg;
  double ln_a = -log1p(z), a = exp(ln_a);
  memset(s, 0, sizeof *s);
  s->z = z;
  s->T_rad = jg_background_T_radiation(bg, a);
  if (ln_a < th->ln_a_start) {
    early_state(th, a, &s->x_e, &s->x_p, &s->T_gas);
  } else {
    ln_a = clamp_ln_a(ln_a);
    s->x_e = exp(gsl_spline_eval(th->ln_xe, ln_a, NULL));
    s->x_p = exp(gsl_spline_eval(th->ln_xp, ln_a, NULL));
    s->T_gas = exp(gsl_spline_eval(th->ln_Tgas, ln_a, NULL));
  }
  jg__helium_saha he;
  jg__helium_saha_at(bg, s->T_rad, jg_background_n_hydrogen(bg, a), s->x_e, &he);
  s->x_HeII = he.x_HeII;
  s->x_HeIII = he.x_HeIII;
  s->compton_rate = jg__compton_rate(bg, s->T_rad, s->x_e);
  s->mu = jg__mean_molecular_weight(bg->cosmology.helium_mass_fraction, s->x_e);
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

/* Beyond the grid: the stored value at the start plus the equilibrium part. */
static double depth_beyond_start(const jg_thermal *th, double ln_a, gsl_spline *stored,
                                 double (*integrand)(double, void *)) {
  double base = gsl_spline_eval(stored, th->ln_a_start, NULL);
  history_ref ref = {th};
  gsl_function F = {integrand, &ref};
  double extra = 0.0, abserr;
  size_t neval;
  if (gsl_integration_qng(&F, ln_a, th->ln_a_start, 0.0, 1e-8, &extra, &abserr, &neval) !=
      GSL_SUCCESS) {
    /* qng's fixed rules failed: fall back to the trapezoid of the end values,
     * exact enough for an equilibrium integrand that varies as a^-1.5. */
    extra = 0.5 * (integrand(ln_a, &ref) + integrand(th->ln_a_start, &ref)) *
            (th->ln_a_start - ln_a);
  }
  return base + extra;
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
