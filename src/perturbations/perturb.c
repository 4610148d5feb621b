/*
 * Linear CDM and gas perturbations per comoving wavenumber (see
 * include/jeansgrow/perturb.h for the equations and conventions).
 *
 * Methods and sources:
 *   - equations: src/PHYSICS.md §7; gas-temperature fluctuation equation of
 *     Naoz & Barkana (2005, MNRAS 362, 1047) without photon perturbations;
 *   - initial conditions: growing mode of the Meszaros (1974, A&A 37, 225)
 *     equation with non-clustering baryons, a Gauss hypergeometric function
 *     (GSL gsl_sf_hyperg_2F1 after a Pfaff transformation);
 *   - filtering scale: Gnedin & Hui (1998, MNRAS 296, 44) integral, written
 *     as an ODE, and the k^2 coefficient of the solved perturbations
 *     (forward sensitivity of the k = 0 solution with respect to k^2);
 *   - integration: GSL msbdf (variable-order BDF) with the analytic Jacobian
 *     while the system is stiff, then (by default) GSL rk8pd, the explicit
 *     Dormand-Prince 8(7) pair. The stiffness comes from the drag and Compton
 *     rates d and r, which exceed the expansion rate by up to 1e4 and 1e7
 *     at z = 1e4 and fall below it after recombination; from the point
 *     where both stay under PT_EXPLICIT_RATE the explicit pair is stable at
 *     steps the accuracy asks for anyway, and needs no linear algebra
 *     (msbdf's Newton solves and norms are most of the cost of a step). The
 *     systems are linear, y' = A(x) y, so dfdy = A(x). GSL's contract also
 *     asks for dfdt = A'(x) y; it is a central difference in x here because
 *     msbdf builds its Newton matrix from dfdy alone (GSL 2.7 msbdf.c) and
 *     the coefficients are splines, smooth in x.
 *
 * Speed: the real-history coefficients are needed at every right-hand-side
 * call. They are tabulated once per model on a uniform grid in ln a (500
 * nodes per e-fold) as natural cubic splines of ln p, ln d, ln r, e and g
 * (GSL cspline, stored as per-interval polynomials so that an evaluation is
 * one index computation, five Horner sums and three exponentials, those
 * of the rates' node values stored and the rest a short series;
 * medium_table.c). The model is read-only afterwards; all mutable state
 * (GSL drivers, the Rosenbrock arrays, the current k) lives in the
 * per-thread workspace.
 *
 * perturbations.stepper = "rosenbrock" takes the other path,
 * perturb_rosenbrock.c: the library's own integrator (rosenbrock.c), which
 * also solves batches of wavenumbers in lockstep.
 */
#include "jeansgrow/perturb.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_sf_hyperg.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "jeansgrow/background.h"
#include "jeansgrow/constants.h"
#include "perturb_internal.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* First trial step in ln a; msbdf adapts it at once. */
#define PT_HSTART 1.0e-6
/* Step for the central difference of the coefficients in ln a (dfdt). */
#define PT_DFDT_STEP 1.0e-6
/* Stiff part: msbdf; on the real history it was 1.35 times faster than
 * bsimp and 6 times faster than rk4imp at the default tolerances
 * (bench_perturb). */
#define PT_STIFF_STEPPER gsl_odeiv2_step_msbdf
#define PT_EXPLICIT_STEPPER gsl_odeiv2_step_rk8pd
/* Drag and Compton rates per Hubble time below which the explicit stepper
 * takes over (msbdf+rk8pd). rk8pd is stable for h |lambda| up to about 6,
 * so steps of ~0.1 in ln a are allowed at once, no shorter than the
 * accuracy needs there. Measured on the reference cosmology (bench_perturb,
 * rel_tol 1e-8): switching at rates of 20, 50, 100 and 300 gave 0.52, 0.51,
 * 0.51 and 0.50-0.76 ms per mode (the last when the explicit stepper meets the
 * tail of recombination), against 0.59 with msbdf throughout. */
#define PT_EXPLICIT_RATE 50.0
/* The switch point is searched on a grid of this spacing in ln a. */
#define PT_SWITCH_SEARCH_STEP (1.0 / PT_NODES_PER_EFOLD)

/* ------------------------------------------------------------------------ */
/* Model.                                                                     */


/* Growing mode of y (1 + y) D'' + (1 + 3y/2) D' - (3/2) f_c D = 0 (the
 * Meszaros equation with a smooth share f_b = 1 - f_c of the matter):
 * D = 2F1(alpha, beta; 1; -y), alpha,beta = (1/2 +- s)/2, s = sqrt(1/4 + 6 f_c),
 * regular at y = 0 (the other solution has a logarithm). For -y < -1 the
 * series does not converge; the Pfaff transformation
 * 2F1(beta, alpha; 1; -y) = (1 + y)^(-beta) 2F1(beta, 1 - alpha; 1; y/(1+y))
 * has a convergent series (c - a - b = alpha - beta > 0) for every y >= 0.
 * dD/dy = -alpha beta 2F1(alpha+1, beta+1; 2; -y), transformed the same way. */
static int meszaros_growing_mode(double f_c, double y, double *D, double *dlnD_dlny) {
  double s = sqrt(0.25 + 6.0 * f_c);
  double alpha = 0.5 * (0.5 + s), beta = 0.5 * (0.5 - s);
  double w = y / (1.0 + y);
  gsl_sf_result r0, r1;
  int st = gsl_sf_hyperg_2F1_e(beta, 1.0 - alpha, 1.0, w, &r0);
  if (st == GSL_SUCCESS) st = gsl_sf_hyperg_2F1_e(beta + 1.0, 1.0 - alpha, 2.0, w, &r1);
  if (st != GSL_SUCCESS) return st;
  double d0 = pow(1.0 + y, -beta) * r0.val;
  double d1 = -alpha * beta * pow(1.0 + y, -beta - 1.0) * r1.val;
  *D = d0;
  *dlnD_dlny = y * d1 / d0;
  return GSL_SUCCESS;
}

/* Growing exponent of D ~ a^n when there is no radiation:
 * n^2 + n/2 - 3 f_c / 2 = 0 in a matter-dominated (EdS) background. It is
 * also the large-y limit of the Meszaros mode. */
static double matter_growing_exponent(double f_c) { return 0.5 * (sqrt(0.25 + 6.0 * f_c) - 0.5); }

static jg_status check_settings(const jg_perturb_settings *s, jg_error *err) {
  /* The key table's ranges (params.h); z_initial below is bounded by the
   * medium instead, which may be an analytic one. */
  const struct {
    const char *key;
    double value;
  } keys[] = {{"perturbations.rel_tol", s->rel_tol},
              {"perturbations.abs_tol", s->abs_tol},
              {"perturbations.sound_speed", (double)(int)s->sound_speed},
              {"perturbations.stepper", (double)(int)s->stepper},
              {"perturbations.ionisation_perturbation", (double)s->ionisation_perturbation}};
  for (size_t i = 0; i < sizeof keys / sizeof keys[0]; i++) {
    jg_status st = jg_params_check_value(keys[i].key, keys[i].value, err);
    if (st != JG_OK) return st;
  }
  if (!(s->z_initial > 0.0) || !isfinite(s->z_initial))
    return JG_FAIL(err, JG_EINVAL, "perturbations.z_initial must be finite and > 0 (got %g)",
                   s->z_initial);
  return JG_OK;
}

/* Where the explicit stepper takes over: just after the last point of the
 * medium where the drag or the Compton rate is at least PT_EXPLICIT_RATE
 * (the rates need not fall monotonically in a custom medium). Never, with
 * the msbdf-only stepper. */
static double explicit_start(const jg_perturb_model *m) {
  const jg_medium *md = &m->medium;
  if (m->settings.stepper != JG_PERTURB_STEPPER_MSBDF_RK8PD) return INFINITY;
  double start = m->x_init;
  const int n = (int)ceil((md->ln_a_max - m->x_init) / PT_SWITCH_SEARCH_STEP);
  for (int i = 0; i <= n; i++) {
    double x = fmin(m->x_init + i * PT_SWITCH_SEARCH_STEP, md->ln_a_max);
    jg_medium_coefficients c;
    if (md->eval(md->ctx, x, &c) != 0) return INFINITY; /* undefined: stay implicit */
    if (!(c.drag < PT_EXPLICIT_RATE && c.relaxation < PT_EXPLICIT_RATE) ||
        (m->ionisation && !(c.ionisation_relaxation < PT_EXPLICIT_RATE)))
      start = fmin(x + PT_SWITCH_SEARCH_STEP, md->ln_a_max);
  }
  return start;
}

/* Everything but the tables; shared by both constructors. */
static jg_perturb_model *model_finish(jg_perturb_model *m, jg_error *err) {
  const jg_medium *md = &m->medium;
  m->x_init = -log1p(m->settings.z_initial);
  if (m->x_init < md->ln_a_min || m->x_init > md->ln_a_max) {
    JG_FAIL(err, JG_EINVAL,
            "perturbations.z_initial = %g is outside the medium (ln a from %g to %g)",
            m->settings.z_initial, md->ln_a_min, md->ln_a_max);
    jg_perturb_model_free(m);
    return NULL;
  }
  m->fluctuating = m->settings.sound_speed == JG_SOUND_SPEED_FLUCTUATING;
  m->gamma = m->settings.sound_speed == JG_SOUND_SPEED_ADIABATIC ? 5.0 / 3.0 : 1.0;
  m->dim_mode = m->fluctuating ? (m->ionisation ? 6 : 5) : 4;
  m->dim_limit = m->dim_mode + 6;

  jg_medium_coefficients c;
  if (md->eval(md->ctx, m->x_init, &c) != 0) {
    JG_FAIL(err, JG_ENUMERIC, "perturbations: the medium cannot be evaluated at z_initial = %g",
            m->settings.z_initial);
    jg_perturb_model_free(m);
    return NULL;
  }
  /* A custom medium is a caller's input: out of its physical domain GSL's
   * hypergeometric function below would raise an error (an abort under
   * GSL's default handler), so it is refused here. */
  if (!(c.baryon_fraction >= 0.0 && c.baryon_fraction < 1.0) || !(c.gravity >= 0.0) ||
      !isfinite(c.gravity) || !(c.pressure >= 0.0) || !isfinite(c.pressure) ||
      !(c.drag >= 0.0) || !isfinite(c.drag) || !(c.relaxation >= 0.0) ||
      !isfinite(c.relaxation) || !isfinite(c.dlnH_dlna)) {
    JG_FAIL(err, JG_EINVAL,
            "perturbations: the medium at z_initial = %g is unphysical (baryon fraction %g "
            "must lie in [0, 1); gravity %g, pressure %g, drag %g, relaxation %g must be "
            "finite and >= 0; d ln H/d ln a %g finite)",
            m->settings.z_initial, c.baryon_fraction, c.gravity, c.pressure, c.drag,
            c.relaxation, c.dlnH_dlna);
    jg_perturb_model_free(m);
    return NULL;
  }
  const double f_c = 1.0 - c.baryon_fraction;
  if (md->a_equality > 0.0) {
    double y = exp(m->x_init) / md->a_equality;
    if (meszaros_growing_mode(f_c, y, &m->growth_init, &m->growth_rate_init) != GSL_SUCCESS ||
        !isfinite(m->growth_init) || !isfinite(m->growth_rate_init)) {
      JG_FAIL(err, JG_ENUMERIC,
              "perturbations (initial conditions): the Meszaros growing mode failed at "
              "z_initial = %g (y = a/a_eq = %g)",
              m->settings.z_initial, y);
      jg_perturb_model_free(m);
      return NULL;
    }
  } else {
    m->growth_rate_init = matter_growing_exponent(f_c);
    m->growth_init = exp(m->growth_rate_init * m->x_init);
  }
  /* The k^2-derivative and Gnedin-Hui components are ~ delta / k_J^2: measured
   * in units of the Jeans wavenumber at the start they are of the order of
   * the contrasts, so one absolute tolerance serves every component. */
  double kj2 = c.pressure > 0.0 ? c.gravity / c.pressure : 0.0;
  m->k_ref2 = (kj2 > 0.0 && isfinite(kj2)) ? kj2 : 1.0;
  m->x_explicit = explicit_start(m);
  if (m->settings.initial_table[0] && jg__pt_attach_start_table(m, err) != JG_OK) {
    jg_perturb_model_free(m);
    return NULL;
  }
  return m;
}

jg_perturb_model *jg_perturb_model_new_medium(const jg_medium *medium,
                                              const jg_perturb_settings *s,
                                              const jg_perturb_start *start, jg_error *err) {
  if (!medium || !medium->eval || !s) {
    JG_FAIL(err, JG_EINVAL, "jg_perturb_model_new_medium: medium and settings must be given");
    return NULL;
  }
  if (check_settings(s, err) != JG_OK) return NULL;
  if (!(medium->k_min >= 0.0 && medium->k_max >= medium->k_min) ||
      !(medium->ln_a_max > medium->ln_a_min) || !(medium->a_equality >= 0.0)) {
    JG_FAIL(err, JG_EINVAL,
            "jg_perturb_model_new_medium: inconsistent medium (k from %g to %g, ln a from %g "
            "to %g, a_eq = %g)",
            medium->k_min, medium->k_max, medium->ln_a_min, medium->ln_a_max,
            medium->a_equality);
    return NULL;
  }
  if (s->sound_speed == JG_SOUND_SPEED_EFFECTIVE_GAMMA) {
    JG_FAIL(err, JG_EINVAL,
            "perturbations.sound_speed = \"effective_gamma\" takes gamma_eff from a thermal "
            "history; a custom medium has none");
    return NULL;
  }
  jg_perturb_model *m = calloc(1, sizeof *m);
  if (!m) {
    JG_FAIL(err, JG_ENOMEM, "perturbations: out of memory for the model");
    return NULL;
  }
  /* A custom medium has no ionisation coefficients: delta_xe is a property
   * of the real history. */
  m->medium = *medium;
  m->settings = *s;
  if (start) m->start = *start;
  m->start_given = start != NULL;
  m->k_lo = medium->k_min;
  m->k_hi = medium->k_max;
  return model_finish(m, err);
}

jg_perturb_model *jg_perturb_model_new(const jg_thermal *th, const jg_perturb_settings *s,
                                       const jg_perturb_start *start, jg_error *err) {
  return jg_perturb_model_new_until(th, s, start, 0.0, err);
}

jg_perturb_model *jg_perturb_model_new_until(const jg_thermal *th, const jg_perturb_settings *s,
                                             const jg_perturb_start *start, double z_end,
                                             jg_error *err) {
  if (!th || !s) {
    JG_FAIL(err, JG_EINVAL, "jg_perturb_model_new: thermal history and settings must be given");
    return NULL;
  }
  if (check_settings(s, err) != JG_OK) return NULL;
  if (!(z_end >= 0.0 && z_end < s->z_initial)) {
    JG_FAIL(err, JG_EINVAL,
            "jg_perturb_model_new_until: the tables must end at a redshift from 0 to below "
            "z_initial = %g (got %g)",
            s->z_initial, z_end);
    return NULL;
  }
  const jg_background *bg = jg_thermal_background(th);
  jg_perturb_model *m = calloc(1, sizeof *m);
  if (!m) {
    JG_FAIL(err, JG_ENOMEM, "perturbations: out of memory for the model");
    return NULL;
  }
  m->settings = *s;
  if (start) m->start = *start;
  m->start_given = start != NULL;
  m->th = th;
  m->effective_gamma = s->sound_speed == JG_SOUND_SPEED_EFFECTIVE_GAMMA;
  m->ionisation = s->sound_speed == JG_SOUND_SPEED_FLUCTUATING && s->ionisation_perturbation;
  const double x_init = -log1p(s->z_initial);
  const double x_end = -log1p(z_end);
  m->owned =
      jg__pt_thermal_medium_new(th, x_init, x_end, m->effective_gamma, m->ionisation, err);
  if (!m->owned) {
    free(m);
    return NULL;
  }
  jg_medium *md = &m->medium;
  md->eval = jg__pt_thermal_medium_eval;
  md->ctx = m->owned;
  md->a_equality = bg->omega_r / bg->omega_m;
  md->ln_a_min = m->owned->x0;
  md->ln_a_max = x_end;
  md->k_min = JG_PERTURB_K_MIN;
  md->k_max = JG_PERTURB_K_MAX;
  md->rho_m0 = bg->omega_m * bg->rho_crit0 * JG_MPC * JG_MPC * JG_MPC / JG_M_SUN;
  /* Sub-horizon at the start: k >= factor * a H / c (comoving, 1/Mpc). */
  double a_i = exp(x_init);
  double k_horizon = a_i * jg_background_hubble(bg, a_i) * JG_MPC / JG_C_LIGHT;
  m->k_lo = fmax(md->k_min, JG_PERTURB_HORIZON_FACTOR * k_horizon);
  m->k_hi = md->k_max;
  return model_finish(m, err);
}

void jg_perturb_model_free(jg_perturb_model *m) {
  if (!m) return;
  jg_perturb_start_table_free(m->start_table);
  jg__pt_thermal_medium_free(m->owned);
  free(m);
}

const jg_medium *jg_perturb_model_medium(const jg_perturb_model *m) { return &m->medium; }
const jg_thermal *jg_perturb_model_thermal(const jg_perturb_model *m) { return m->th; }
const jg_perturb_settings *jg_perturb_model_settings(const jg_perturb_model *m) {
  return &m->settings;
}
double jg_perturb_model_initial_growth(const jg_perturb_model *m) { return m->growth_init; }
void jg_perturb_model_k_range(const jg_perturb_model *m, double *k_min, double *k_max) {
  if (k_min) *k_min = m->k_lo;
  if (k_max) *k_max = m->k_hi;
  if (m->start_table) {
    double t_lo, t_hi;
    jg_perturb_start_table_range(m->start_table, &t_lo, &t_hi);
    if (k_min) *k_min = fmax(m->k_lo, t_lo);
    if (k_max) *k_max = fmin(m->k_hi, t_hi);
  }
}

jg_status jg_perturb_check_wavenumber(const jg_perturb_model *m, double k, jg_error *err) {
  if (k == 0.0) return JG_OK;
  if (!isfinite(k) || !(k > 0.0))
    return JG_FAIL(err, JG_EINVAL, "perturbations: wavenumber k = %g must be finite and > 0", k);
  if (k < m->k_lo) {
    if (m->th && m->k_lo > m->medium.k_min)
      return JG_FAIL(err, JG_EINVAL,
                     "perturbations: k = %g /Mpc is not well inside the horizon at z_initial = "
                     "%g: it must be >= %g /Mpc (%g x aH/c there)",
                     k, m->settings.z_initial, m->k_lo, JG_PERTURB_HORIZON_FACTOR);
    return JG_FAIL(err, JG_EINVAL,
                   "perturbations: k = %g /Mpc is below the lower limit %g /Mpc of the "
                   "equations (photon pressure and Silk damping are neglected)",
                   k, m->k_lo);
  }
  if (k > m->k_hi)
    return JG_FAIL(err, JG_EINVAL,
                   "perturbations: k = %g /Mpc is above the upper limit %g /Mpc of the fluid "
                   "description",
                   k, m->k_hi);
  if (m->start_table) {
    double t_lo, t_hi;
    jg_perturb_start_table_range(m->start_table, &t_lo, &t_hi);
    jg_perturb_start unused;
    if (jg_perturb_start_table_at(m->start_table, k, &unused, err) == JG_OK) return JG_OK;
    /* Name the key that decides: the grid's end, not the table. */
    return JG_FAIL(err, JG_EINVAL,
                   "perturbations: k = %.10g /Mpc lies %s the start table %s (%.10g to %.10g "
                   "/Mpc): %s perturbations.%s (or the perturbations.k_values beyond it), or "
                   "extend the table",
                   k, k > t_hi ? "above" : "below", jg_perturb_start_table_path(m->start_table),
                   t_lo, t_hi, k > t_hi ? "lower" : "raise", k > t_hi ? "k_max" : "k_min");
  }
  return JG_OK;
}

int jg_perturb_dimension(const jg_perturb_model *m, jg_perturb_system which) {
  return which == JG_PERTURB_SYSTEM_LIMIT ? m->dim_limit : m->dim_mode;
}

/* ------------------------------------------------------------------------ */
/* Right-hand sides and Jacobians.                                           */

/* One wavenumber: the equations of the header, term by term. */
static void rhs_mode(const jg_perturb_model *m, const jg_medium_coefficients *c, double k2,
                     const double *y, double *f) {
  const double fb = c->baryon_fraction, fc = 1.0 - fb;
  const double gravity = c->gravity * (fc * y[M_C] + fb * y[M_B]);
  const double hubble_drag = 2.0 + c->dlnH_dlna;
  f[M_C] = y[M_CP];
  f[M_CP] = -hubble_drag * y[M_CP] + gravity;
  f[M_B] = y[M_BP];
  if (m->effective_gamma) {
    f[M_BP] = -(hubble_drag + c->drag) * y[M_BP] + gravity - c->pressure_effective * k2 * y[M_B];
    return;
  }
  double pressure_source = m->fluctuating ? y[M_B] + y[M_T] : m->gamma * y[M_B];
  f[M_BP] = -(hubble_drag + c->drag) * y[M_BP] + gravity - c->pressure * k2 * pressure_source;
  if (m->fluctuating) f[M_T] = (2.0 / 3.0) * y[M_BP] - c->relaxation * y[M_T];
  if (m->ionisation) {
    f[M_BP] -= c->pressure_ionisation * k2 * y[M_X];
    f[M_T] += c->heating_ionisation * y[M_X];
    f[M_X] = -c->ionisation_relaxation * y[M_X] + c->ionisation_density * y[M_B] +
             c->ionisation_temperature * y[M_T] + c->ionisation_expansion * y[M_BP];
  }
}

/* Rows/columns off .. off + dim_mode - 1 of J (leading dimension ld). */
#define JA(i, j) J[(size_t)(off + (i)) * ld + off + (j)]

/* The block's entries with a k^2 term (the pressure's): one definition for
 * the whole block and for a batch's k^2 part alone, so that both give the
 * same bits. Inlined into jg__pt_jac_mode, which runs at every step (a call
 * there cost more than these entries). */
static inline void mode_k2_terms(const jg_perturb_model *m, const jg_medium_coefficients *c,
                                 double k2, double *J, int ld, int off) {
  const double fb = c->baryon_fraction, pk2 = c->pressure * k2;
  JA(M_BP, M_B) = m->effective_gamma ? c->gravity * fb - c->pressure_effective * k2
                                     : c->gravity * fb - pk2 * (m->fluctuating ? 1.0 : m->gamma);
  if (m->fluctuating) JA(M_BP, M_T) = -pk2;
  if (m->ionisation) JA(M_BP, M_X) = -c->pressure_ionisation * k2;
}

void jg__pt_jac_mode_k2_terms(const jg_perturb_model *m, const jg_medium_coefficients *c,
                              double k2, double *J, int ld, int off) {
  mode_k2_terms(m, c, k2, J, ld, off);
}

void jg__pt_jac_mode(const jg_perturb_model *m, const jg_medium_coefficients *c, double k2,
                     double *J, int ld, int off) {
  const double fb = c->baryon_fraction, fc = 1.0 - fb;
  const double hd = 2.0 + c->dlnH_dlna;
  JA(M_C, M_CP) = 1.0;
  JA(M_CP, M_C) = c->gravity * fc;
  JA(M_CP, M_CP) = -hd;
  JA(M_CP, M_B) = c->gravity * fb;
  JA(M_B, M_BP) = 1.0;
  JA(M_BP, M_C) = c->gravity * fc;
  mode_k2_terms(m, c, k2, J, ld, off);
  JA(M_BP, M_BP) = -(hd + c->drag);
  if (m->fluctuating) {
    JA(M_T, M_BP) = 2.0 / 3.0;
    JA(M_T, M_T) = -c->relaxation;
  }
  if (m->ionisation) {
    JA(M_T, M_X) = c->heating_ionisation;
    JA(M_X, M_B) = c->ionisation_density;
    JA(M_X, M_BP) = c->ionisation_expansion;
    JA(M_X, M_T) = c->ionisation_temperature;
    JA(M_X, M_X) = -c->ionisation_relaxation;
  }
}
#undef JA

/* Limit system: [k = 0 mode | K^2 d/dk^2 of delta_c, delta_c', delta_b, delta_b'
 * | K^2 J, K^2 J']. The k^2 derivative obeys the k = 0 equations plus the
 * source -p (delta_b + delta_T [+ w_x delta_xe]) of the k = 0 solution (with
 * the model's gamma p for the uniform ones); the derivatives of delta_T and
 * delta_xe are not needed at first order. */
static void rhs_limit(const jg_perturb_model *m, const jg_medium_coefficients *c,
                      const double *y, double *f) {
  const int u = m->dim_mode, j = u + 4;
  rhs_mode(m, c, 0.0, y, f);
  const double fb = c->baryon_fraction, fc = 1.0 - fb;
  const double hd = 2.0 + c->dlnH_dlna, pK2 = c->pressure * m->k_ref2;
  const double gravity1 = c->gravity * (fc * y[u + 0] + fb * y[u + 2]);
  const double pressure_source0 = m->fluctuating ? y[M_B] + y[M_T] : m->gamma * y[M_B];
  f[u + 0] = y[u + 1];
  f[u + 1] = -hd * y[u + 1] + gravity1;
  f[u + 2] = y[u + 3];
  const double pressure0 = m->effective_gamma ? c->pressure_effective * m->k_ref2 * y[M_B]
                                               : pK2 * pressure_source0;
  f[u + 3] = -(hd + c->drag) * y[u + 3] + gravity1 - pressure0;
  if (m->ionisation) f[u + 3] -= c->pressure_ionisation * m->k_ref2 * y[M_X];
  /* Gnedin-Hui: J'' + (2 + e) J' = p D with D the total-matter contrast and
   * the isothermal sound speed. */
  const double D = fc * y[M_C] + fb * y[M_B];
  f[j + 0] = y[j + 1];
  f[j + 1] = -hd * y[j + 1] + pK2 * D;
}

void jg__pt_jac_limit(const jg_perturb_model *m, const jg_medium_coefficients *c, double *J) {
  const int n = m->dim_limit, u = m->dim_mode, j = u + 4;
  memset(J, 0, sizeof(double) * (size_t)n * n);
  jg__pt_jac_mode(m, c, 0.0, J, n, 0);
  const double fb = c->baryon_fraction, fc = 1.0 - fb;
  const double hd = 2.0 + c->dlnH_dlna, pK2 = c->pressure * m->k_ref2;
#define JA(r, s) J[(size_t)(r) * n + (s)]
  JA(u + 0, u + 1) = 1.0;
  JA(u + 1, u + 0) = c->gravity * fc;
  JA(u + 1, u + 1) = -hd;
  JA(u + 1, u + 2) = c->gravity * fb;
  JA(u + 2, u + 3) = 1.0;
  JA(u + 3, u + 0) = c->gravity * fc;
  JA(u + 3, u + 2) = c->gravity * fb;
  JA(u + 3, u + 3) = -(hd + c->drag);
  JA(u + 3, M_B) = m->effective_gamma ? -c->pressure_effective * m->k_ref2
                                      : -pK2 * (m->fluctuating ? 1.0 : m->gamma);
  if (m->fluctuating) JA(u + 3, M_T) = -pK2;
  if (m->ionisation) JA(u + 3, M_X) = -c->pressure_ionisation * m->k_ref2;
  JA(j + 0, j + 1) = 1.0;
  JA(j + 1, j + 1) = -hd;
  JA(j + 1, M_C) = pK2 * fc;
  JA(j + 1, M_B) = pK2 * fb;
#undef JA
}

/* ------------------------------------------------------------------------ */
/* GSL glue.                                                                  */


static int coefficients_at(sys_params *sp, double x, jg_medium_coefficients *c) {
  if (x != sp->x_cached) {
    if (sp->m->medium.eval(sp->m->medium.ctx, x, &sp->c_cached) != 0) {
      sp->x_cached = NAN;
      return GSL_EBADFUNC;
    }
    sp->x_cached = x;
  }
  *c = sp->c_cached;
  return GSL_SUCCESS;
}

static int gsl_rhs_mode(double x, const double y[], double f[], void *params) {
  sys_params *sp = params;
  sp->work->rhs_evals++;
  jg_medium_coefficients c;
  if (coefficients_at(sp, x, &c) != GSL_SUCCESS) return GSL_EBADFUNC;
  rhs_mode(sp->m, &c, sp->k2, y, f);
  return GSL_SUCCESS;
}

static int gsl_rhs_limit(double x, const double y[], double f[], void *params) {
  sys_params *sp = params;
  sp->work->rhs_evals++;
  jg_medium_coefficients c;
  if (coefficients_at(sp, x, &c) != GSL_SUCCESS) return GSL_EBADFUNC;
  rhs_limit(sp->m, &c, y, f);
  return GSL_SUCCESS;
}

/* dfdt = (A(x+h) - A(x-h)) y / 2h via the right-hand side (see the file
 * comment). */
static int dfdt_central(int (*rhs)(double, const double *, double *, void *), double x,
                        const double y[], double dfdt[], int n, void *params) {
  double fp[16] = {0}, fm[16] = {0};
  int st = rhs(x + PT_DFDT_STEP, y, fp, params);
  if (st == GSL_SUCCESS) st = rhs(x - PT_DFDT_STEP, y, fm, params);
  if (st != GSL_SUCCESS) return st;
  for (int i = 0; i < n; i++) dfdt[i] = (fp[i] - fm[i]) / (2.0 * PT_DFDT_STEP);
  return GSL_SUCCESS;
}

static int gsl_jac_mode(double x, const double y[], double *dfdy, double dfdt[], void *params) {
  sys_params *sp = params;
  sp->work->jacobian_evals++;
  const int n = sp->m->dim_mode;
  jg_medium_coefficients c;
  if (coefficients_at(sp, x, &c) != GSL_SUCCESS) return GSL_EBADFUNC;
  memset(dfdy, 0, sizeof(double) * (size_t)n * n);
  jg__pt_jac_mode(sp->m, &c, sp->k2, dfdy, n, 0);
  return dfdt_central(gsl_rhs_mode, x, y, dfdt, n, params);
}

static int gsl_jac_limit(double x, const double y[], double *dfdy, double dfdt[], void *params) {
  sys_params *sp = params;
  sp->work->jacobian_evals++;
  jg_medium_coefficients c;
  if (coefficients_at(sp, x, &c) != GSL_SUCCESS) return GSL_EBADFUNC;
  jg__pt_jac_limit(sp->m, &c, dfdy);
  return dfdt_central(gsl_rhs_limit, x, y, dfdt, sp->m->dim_limit, params);
}

/* ------------------------------------------------------------------------ */
/* Workspace and solves.                                                      */


jg_perturb_work jg_perturb_workspace_work(const jg_perturb_workspace *w) {
  jg_perturb_work none = {0, 0};
  return w ? w->work : none;
}

void jg_perturb_workspace_free(jg_perturb_workspace *w) {
  if (!w) return;
  for (int i = 0; i < 2; i++) {
    if (w->drv_mode[i]) gsl_odeiv2_driver_free(w->drv_mode[i]);
    if (w->drv_limit[i]) gsl_odeiv2_driver_free(w->drv_limit[i]);
  }
  free(w->ros);
  free(w);
}

jg_perturb_workspace *jg_perturb_workspace_new(const jg_perturb_model *m, jg_error *err) {
  if (!m) {
    JG_FAIL(err, JG_EINVAL, "jg_perturb_workspace_new: no model given (NULL)");
    return NULL;
  }
  jg_perturb_workspace *w = calloc(1, sizeof *w);
  if (!w) {
    JG_FAIL(err, JG_ENOMEM, "perturbations: out of memory for a workspace");
    return NULL;
  }
  w->m = m;
  w->prm_mode.m = w->prm_limit.m = m;
  w->prm_mode.x_cached = w->prm_limit.x_cached = NAN;
  w->prm_mode.work = w->prm_limit.work = &w->work;
  w->sys_mode = (gsl_odeiv2_system){gsl_rhs_mode, gsl_jac_mode, (size_t)m->dim_mode, &w->prm_mode};
  w->sys_limit =
      (gsl_odeiv2_system){gsl_rhs_limit, gsl_jac_limit, (size_t)m->dim_limit, &w->prm_limit};
  w->ros = malloc(sizeof *w->ros);
  if (!w->ros) {
    jg_perturb_workspace_free(w);
    JG_FAIL(err, JG_ENOMEM, "perturbations: out of memory for a workspace");
    return NULL;
  }
  memset(&w->ros->stats, 0, sizeof w->ros->stats);
  const double ea = m->settings.abs_tol, er = m->settings.rel_tol;
  const gsl_odeiv2_step_type *types[2] = {PT_STIFF_STEPPER, PT_EXPLICIT_STEPPER};
  for (int i = 0; i < 2; i++) {
    w->drv_mode[i] = gsl_odeiv2_driver_alloc_y_new(&w->sys_mode, types[i], PT_HSTART, ea, er);
    w->drv_limit[i] = gsl_odeiv2_driver_alloc_y_new(&w->sys_limit, types[i], PT_HSTART, ea, er);
    if (!w->drv_mode[i] || !w->drv_limit[i]) {
      jg_perturb_workspace_free(w);
      JG_FAIL(err, JG_ENOMEM, "perturbations: out of memory for the ODE drivers");
      return NULL;
    }
    gsl_odeiv2_driver_set_nmax(w->drv_mode[i], PT_MAX_STEPS);
    gsl_odeiv2_driver_set_nmax(w->drv_limit[i], PT_MAX_STEPS);
  }
  return w;
}

/* Check the requested redshifts and order them from the highest (first
 * reached) down; stable insertion sort, n_z <= JG_MAX_REDSHIFTS. */
jg_status jg__pt_order_redshifts(const jg_perturb_model *m, jg_perturb_workspace *w,
                                 const double *z, int n_z, jg_error *err) {
  if (n_z < 1 || n_z > JG_MAX_REDSHIFTS || !z)
    return JG_FAIL(err, JG_EINVAL, "perturbations: between 1 and %d redshifts must be given (got %d)",
                   JG_MAX_REDSHIFTS, n_z);
  for (int i = 0; i < n_z; i++) {
    double zi = z[i];
    if (!isfinite(zi) || !(zi > -1.0) || !(zi < m->settings.z_initial))
      return JG_FAIL(err, JG_EINVAL,
                     "perturbations: redshift z = %g must be finite and below z_initial = %g", zi,
                     m->settings.z_initial);
    if (-log1p(zi) > m->medium.ln_a_max)
      return JG_FAIL(err, JG_EINVAL,
                     "perturbations: redshift z = %g is beyond the end of the medium (z >= %g)",
                     zi, exp(-m->medium.ln_a_max) - 1.0);
    int j = i;
    while (j > 0 && z[w->order[j - 1]] < zi) {
      w->order[j] = w->order[j - 1];
      j--;
    }
    w->order[j] = i;
  }
  return JG_OK;
}

static double safe_ratio(double num, double den) { return den != 0.0 ? num / den : 0.0; }

/* The adiabatic index of a uniform model at z; 0 for the fluctuating one. */
static double uniform_gamma(const jg_perturb_model *m, double z) {
  if (m->fluctuating) return 0.0;
  if (!m->effective_gamma) return m->gamma;
  jg_thermal_state s;
  jg_thermal_state_at(m->th, z, &s);
  return s.gamma_effective;
}

static void fill_point(const jg_perturb_model *m, double z, double k, double fb, const double *y,
                       jg_perturb_point *p) {
  const double fc = 1.0 - fb;
  p->z = z;
  p->k = k;
  p->delta_c = y[M_C];
  p->delta_b = y[M_B];
  p->delta_m = fc * y[M_C] + fb * y[M_B];
  p->delta_T = m->fluctuating ? y[M_T] : (uniform_gamma(m, z) - 1.0) * y[M_B];
  p->delta_xe = m->ionisation ? y[M_X] : 0.0;
  p->b_over_c = safe_ratio(y[M_B], y[M_C]);
  p->growth_c = safe_ratio(y[M_CP], y[M_C]);
  p->growth_b = safe_ratio(y[M_BP], y[M_B]);
  p->growth_m = safe_ratio(fc * y[M_CP] + fb * y[M_BP], p->delta_m);
}

/* Advance from *x to x_target: msbdf up to the start of the explicit part,
 * the explicit stepper after it. */
static int advance(const jg_perturb_model *m, gsl_odeiv2_driver *const d[2], double *x,
                   double x_target, double *y) {
  int st = GSL_SUCCESS;
  if (*x < m->x_explicit) {
    st = gsl_odeiv2_driver_apply(d[0], x, fmin(x_target, m->x_explicit), y);
    /* The explicit stepper starts from msbdf's last step rather than from
     * PT_HSTART, which it would take several rejected steps to grow from. */
    if (st == GSL_SUCCESS && *x == m->x_explicit && d[0]->h > 0.0)
      gsl_odeiv2_driver_reset_hstart(d[1], d[0]->h);
  }
  if (st == GSL_SUCCESS && x_target > *x) st = gsl_odeiv2_driver_apply(d[1], x, x_target, y);
  return st;
}

static jg_status drive(const jg_perturb_model *m, gsl_odeiv2_driver *const d[2], double k,
                       const char *stage, double *y, int dim, const double *z, int n_z,
                       const int *order, emit_fn emit, void *out, jg_error *err) {
  gsl_odeiv2_driver_reset_hstart(d[0], PT_HSTART);
  gsl_odeiv2_driver_reset_hstart(d[1], PT_HSTART);
  double x = m->x_init;
  for (int n = 0; n < n_z; n++) {
    const int i = order[n];
    const double x_target = -log1p(z[i]);
    if (x_target > x) {
      const double x_from = x;
      int st = advance(m, d, &x, x_target, y);
      int finite = 1;
      for (int c = 0; c < dim; c++) finite = finite && isfinite(y[c]);
      if (st != GSL_SUCCESS || !finite)
        return JG_FAIL(err, JG_ENUMERIC,
                       "perturbations (%s, k = %g /Mpc): stiff integration failed between z = "
                       "%.6g and z = %.6g (reached z = %.6g: %s)",
                       stage, k, exp(-x_from) - 1.0, z[i], exp(-x) - 1.0,
                       st != GSL_SUCCESS ? gsl_strerror(st) : "non-finite state");
    }
    jg_medium_coefficients c;
    if (m->medium.eval(m->medium.ctx, x, &c) != 0)
      return JG_FAIL(err, JG_ENUMERIC, "perturbations (%s, k = %g /Mpc): medium undefined at z = %g",
                     stage, k, z[i]);
    emit(m, z[i], k, c.baryon_fraction, y, out, i);
  }
  return JG_OK;
}

void jg__pt_emit_mode(const jg_perturb_model *m, double z, double k, double fb, const double *y,
                      void *out, int index) {
  fill_point(m, z, k, fb, y, (jg_perturb_point *)out + index);
}

void jg__pt_emit_limit(const jg_perturb_model *m, double z, double k, double fb, const double *y,
                       void *out, int index) {
  jg_perturb_limit *l = (jg_perturb_limit *)out + index;
  const int u = m->dim_mode, j = u + 4;
  fill_point(m, z, 0.0, fb, y, &l->k0);
  l->dlnb_dk2 = safe_ratio(y[u + 2] / m->k_ref2, y[M_B]);
  l->dlnc_dk2 = safe_ratio(y[u + 0] / m->k_ref2, y[M_C]);
  l->gh_inverse_kf2 = safe_ratio(y[j + 0] / m->k_ref2, l->k0.delta_m);
  l->gamma_uniform = uniform_gamma(m, z);
}

jg_status jg_perturb_solve(const jg_perturb_model *m, jg_perturb_workspace *w, double k,
                           const double *z, int n_z, jg_perturb_point *out, jg_error *err) {
  if (!m || !w || !out || w->m != m)
    return JG_FAIL(err, JG_EINVAL, "jg_perturb_solve: model, its own workspace and output needed");
  jg_status st = jg_perturb_check_wavenumber(m, k, err);
  if (st == JG_OK) st = jg__pt_order_redshifts(m, w, z, n_z, err);
  if (st != JG_OK) return st;
  if (m->settings.stepper == JG_PERTURB_STEPPER_ROSENBROCK) {
    void *outs[1] = {out};
    return jg__pt_ros_solve_modes(m, w, &k, 1, z, n_z, outs, err);
  }
  w->prm_mode.k2 = k * k;
  jg_perturb_start start = m->start;
  if (m->start_table && k > 0.0) {
    st = jg_perturb_start_table_at(m->start_table, k, &start, err);
    if (st != JG_OK) return st;
  }
  double y[PT_MAX_MODE_DIM];
  jg__pt_initial_mode(m, &start, y);
  return drive(m, w->drv_mode, k, "mode", y, m->dim_mode, z, n_z, w->order, jg__pt_emit_mode, out, err);
}

jg_status jg_perturb_solve_limit(const jg_perturb_model *m, jg_perturb_workspace *w,
                                 const double *z, int n_z, jg_perturb_limit *out, jg_error *err) {
  if (!m || !w || !out || w->m != m)
    return JG_FAIL(err, JG_EINVAL,
                   "jg_perturb_solve_limit: model, its own workspace and output needed");
  jg_status st = jg__pt_order_redshifts(m, w, z, n_z, err);
  if (st != JG_OK) return st;
  if (m->settings.stepper == JG_PERTURB_STEPPER_ROSENBROCK) {
    return jg__pt_ros_solve_limit(m, w, z, n_z, out, err);
  }
  double y[16] = {0};
  jg__pt_initial_mode(m, &m->start, y);
  return drive(m, w->drv_limit, 0.0, "large-scale limit", y, m->dim_limit, z, n_z, w->order,
               jg__pt_emit_limit, out, err);
}

jg_status jg_perturb_wavenumbers(const jg_perturb_settings *s, double *k, int *n_k,
                                 jg_error *err) {
  if (!s || !k || !n_k) return JG_FAIL(err, JG_EINVAL, "jg_perturb_wavenumbers: NULL argument");
  jg_status st = jg_params_check_wavenumbers(s, err);
  if (st != JG_OK) return st;
  if (s->n_k_values > 0) {
    memcpy(k, s->k_values, sizeof(double) * (size_t)s->n_k_values);
    *n_k = s->n_k_values;
    return JG_OK;
  }
  const int n = s->k_count;
  if (n == 1) {
    k[0] = s->k_min;
  } else {
    const double step = log(s->k_max / s->k_min) / (n - 1);
    for (int i = 0; i < n; i++) k[i] = s->k_min * exp(step * i);
    k[n - 1] = s->k_max; /* exact end points */
  }
  *n_k = n;
  return JG_OK;
}

/* ------------------------------------------------------------------------ */
/* Diagnostics.                                                               */

static jg_status diag_coefficients(const jg_perturb_model *m, double ln_a,
                                   jg_medium_coefficients *c, jg_error *err) {
  if (!m) return JG_FAIL(err, JG_EINVAL, "perturbations: no model given (NULL)");
  if (m->medium.eval(m->medium.ctx, ln_a, c) != 0)
    return JG_FAIL(err, JG_ENUMERIC, "perturbations: medium undefined at ln a = %g", ln_a);
  return JG_OK;
}

jg_status jg_perturb_rhs(const jg_perturb_model *m, jg_perturb_system which, double k,
                         double ln_a, const double *y, double *f, jg_error *err) {
  jg_medium_coefficients c;
  jg_status st = diag_coefficients(m, ln_a, &c, err);
  if (st != JG_OK) return st;
  if (which == JG_PERTURB_SYSTEM_LIMIT)
    rhs_limit(m, &c, y, f);
  else
    rhs_mode(m, &c, k * k, y, f);
  return JG_OK;
}

jg_status jg_perturb_jacobian(const jg_perturb_model *m, jg_perturb_system which, double k,
                              double ln_a, const double *y, double *dfdy, jg_error *err) {
  (void)y; /* linear systems: the Jacobian does not depend on the state */
  jg_medium_coefficients c;
  jg_status st = diag_coefficients(m, ln_a, &c, err);
  if (st != JG_OK) return st;
  if (which == JG_PERTURB_SYSTEM_LIMIT) {
    jg__pt_jac_limit(m, &c, dfdy);
  } else {
    const int n = m->dim_mode;
    memset(dfdy, 0, sizeof(double) * (size_t)n * n);
    jg__pt_jac_mode(m, &c, k * k, dfdy, n, 0);
  }
  return JG_OK;
}
