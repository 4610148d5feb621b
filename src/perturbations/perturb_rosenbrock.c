/*
 * The Rosenbrock path of the perturbations (perturbations.stepper =
 * "rosenbrock"): each system as a const table for the integrator of
 * rosenbrock.c, and wavenumbers solved in lockstep batches.
 */
#include <math.h>
#include <string.h>

#include "perturb_internal.h"
/* ------------------------------------------------------------------------ */
/* The Rosenbrock path: systems as types, wavenumbers in batches.            */

/* A perturbation system as the integrator sees it: its matrix A(x; k^2)
 * from the medium coefficients, a bound on its fastest rate, its start and
 * its read-out. One const table per system; the integrator knows none of
 * them (a new system is a new table). */
typedef struct pt_system_type {
  const char *stage; /* for messages */
  int (*dimension)(const jg_perturb_model *m);
  /* A (dim x dim, row-major); A is affine in the coefficients, which the
   * slope dA/dx relies on (see ros_matrices). It writes the same entries at
   * every call, whatever the coefficients and k^2, and leaves the others as
   * they were: only the pattern's entries are ever read, so the matrices
   * need no clearing per call (system_structure checks that every entry of
   * the pattern is written). */
  void (*matrix)(const jg_perturb_model *m, const jg_medium_coefficients *c, double k2,
                 double *A);
  void (*start)(const jg_perturb_model *m, double k, double *y, jg_error *err, jg_status *st);
  emit_fn read_out;
  /* The entries of A with a k^2 term alone, the same numbers as matrix
   * writes there (A depends on k through k^2, affinely); NULL where A does
   * not depend on k (the limit system). */
  void (*k2_terms)(const jg_perturb_model *m, const jg_medium_coefficients *c, double k2,
                   double *A);
  const unsigned char *group_scaled; /* see pt_ros_problem */
  /* Error-scale groups of the components (see rosenbrock.h), indexed by
   * component; room for the largest system. */
  int group[PT_ROS_MAX_DIM];
} pt_system_type;

static int dim_mode(const jg_perturb_model *m) { return m->dim_mode; }
static int dim_limit(const jg_perturb_model *m) { return m->dim_limit; }

static void matrix_mode(const jg_perturb_model *m, const jg_medium_coefficients *c, double k2,
                        double *A) {
  jg__pt_jac_mode(m, c, k2, A, m->dim_mode, 0);
}

static void k2_terms_mode(const jg_perturb_model *m, const jg_medium_coefficients *c,
                          double k2, double *A) {
  jg__pt_jac_mode_k2_terms(m, c, k2, A, m->dim_mode, 0);
}

static void matrix_limit(const jg_perturb_model *m, const jg_medium_coefficients *c, double k2,
                         double *A) {
  (void)k2;
  jg__pt_jac_limit(m, c, A);
}

static void start_mode(const jg_perturb_model *m, double k, double *y, jg_error *err,
                       jg_status *st) {
  jg_perturb_start start = m->start;
  if (m->start_table && k > 0.0) *st = jg_perturb_start_table_at(m->start_table, k, &start, err);
  jg__pt_initial_mode(m, &start, y);
}

static void start_limit(const jg_perturb_model *m, double k, double *y, jg_error *err,
                        jg_status *st) {
  (void)k, (void)err, (void)st;
  memset(y, 0, sizeof(double) * (size_t)m->dim_limit);
  jg__pt_initial_mode(m, &m->start, y);
}

/* Error-scale groups (rosenbrock.h): CDM {delta_c, delta_c'}, gas
 * {delta_b, delta_b', delta_T, delta_xe}; in the limit system (the mode
 * layout first; the uniform models have no delta_T) the k^2 derivatives of
 * CDM and gas join the CDM and gas groups, and the Gnedin-Hui pair the CDM
 * group: scaled by the Jeans wavenumber at the start they are of the order
 * of the contrasts once grown (perturb.c), and they start at zero, where a
 * group of their own would ask relative accuracy of the first 1e-26 (some
 * 150 steps of 1e-5 e-folds at the start, measured).
 *
 * delta_T and delta_xe are measured against their group's size, not their
 * own (`group_scaled`): the gas sees them only through the pressure and
 * the heating, as a fraction of delta_b, so the same relative error of that
 * fraction as of delta_b is all delta_b/delta_c needs. Tight to their own
 * size, the slaved delta_xe of recombination (1 % of delta_b) set the
 * step there (measured: 25 % fewer steps without, the largest
 * delta_b/delta_c error of tests/test_integrator.c unchanged). */
static const unsigned char temperature_scaled[PT_ROS_MAX_DIM] = {0, 0, 0, 0, 1};
static const unsigned char gas_scaled[PT_ROS_MAX_DIM] = {0, 0, 0, 0, 1, 1};
static const pt_system_type system_mode = {"mode", dim_mode, matrix_mode, start_mode, jg__pt_emit_mode,
                                           k2_terms_mode, temperature_scaled, {0, 0, 1, 1, 1}};
static const pt_system_type system_mode_uniform = {"mode", dim_mode, matrix_mode, start_mode,
                                                   jg__pt_emit_mode, k2_terms_mode, NULL,
                                                   {0, 0, 1, 1}};
static const pt_system_type system_limit = {"large-scale limit", dim_limit, matrix_limit,
                                            start_limit, jg__pt_emit_limit, NULL, temperature_scaled,
                                            {0, 0, 1, 1, 1, 0, 0, 1, 1, 0, 0}};
static const pt_system_type system_limit_uniform = {"large-scale limit", dim_limit, matrix_limit,
                                                    start_limit, jg__pt_emit_limit, NULL, NULL,
                                                    {0, 0, 1, 1, 0, 0, 1, 1, 0, 0}};
static const pt_system_type system_mode_ionisation = {"mode", dim_mode, matrix_mode, start_mode,
                                                      jg__pt_emit_mode, k2_terms_mode, gas_scaled,
                                                      {0, 0, 1, 1, 1, 1}};
static const pt_system_type system_limit_ionisation = {"large-scale limit", dim_limit,
                                                       matrix_limit, start_limit,
                                                       jg__pt_emit_limit, NULL, gas_scaled,
                                                       {0, 0, 1, 1, 1, 1, 0, 0, 1, 1, 0, 0}};

static const pt_system_type *mode_type(const jg_perturb_model *m) {
  if (m->ionisation) return &system_mode_ionisation;
  return m->fluctuating ? &system_mode : &system_mode_uniform;
}
static const pt_system_type *limit_type(const jg_perturb_model *m) {
  if (m->ionisation) return &system_limit_ionisation;
  return m->fluctuating ? &system_limit : &system_limit_uniform;
}

/* Fastest rate of the mode equations (per unit ln a): the drag on the gas
 * velocity, the Compton relaxation of delta_T, the sound frequency
 * sqrt(gamma p k^2) and gravity; an upper estimate of |eigenvalue| that
 * decides between dense output and a step cut to the output. The k^2
 * derivative and Gnedin-Hui blocks of the limit system add no new rate
 * (block triangular), so k2 = 0 serves it. */
static double fastest_rate(const jg_perturb_model *m, const jg_medium_coefficients *c,
                           double k2) {
  double damping = fabs(2.0 + c->dlnH_dlna) + c->drag;
  double sound = sqrt(c->pressure * k2 *
                      (m->fluctuating || m->effective_gamma ? 5.0 / 3.0 : m->gamma));
  const double relaxation = m->fluctuating ? c->relaxation : 0.0;
  double relaxing = damping > relaxation ? damping : relaxation;
  if (m->ionisation && c->ionisation_relaxation > relaxing) relaxing = c->ionisation_relaxation;
  return relaxing > sound + c->gravity ? relaxing : sound + c->gravity;
}

/* Step cap in ln a: at most 0.05, so that the tabulated coefficients' sharpest
 * feature (hydrogen recombination, Delta ln a ~ 0.1) cannot be stepped over
 * unseen by the error estimate. */
#define PT_ROS_MAX_STEP 0.05
#define PT_ROS_FIRST_STEP 1.0e-4
/* The tolerances' scale: perturbations.rel_tol and abs_tol are given on the
 * GSL steppers' scale (their defaults were set for those), and this
 * integrator's error test is held to PT_ROS_TOLERANCE_SCALE times them. Its
 * test is an RMS of the embedded 3rd-order estimate while the 4th-order
 * solution is kept, filtered along stiff directions (rosenbrock.h), so it
 * overstates the error carried into delta_b/delta_c far more than GSL's
 * largest-component test does: on the tolerance ladder of
 * tests/bench/bench_perturb.c the same delta_b/delta_c error needs a ~300
 * times larger rel_tol here at every rung from 1e-5 to 1e-7. 100 rather
 * than 300 so that the defaults (1e-8, 1e-10) give delta_b/delta_c to 1e-6
 * with a margin over the whole parameter box, not only at the reference
 * cosmology: measured largest error 4.8e-7 over 15 cosmologies at the
 * box's extremes, the three sound-speed models, 11 wavenumbers from 1 to
 * 1e5 /Mpc and 8 redshifts from 3000 to 0 (1.7e-6 with 300, at the most
 * matter, z = 1100); 8.1e-7 with delta_xe and the sparse batched kernel on
 * the wavenumbers of tests/test_integrator.c, which checks it. */
#define PT_ROS_TOLERANCE_SCALE 100.0
/* Step for the central difference of a custom medium's coefficients. */
#define PT_SLOPE_STEP 1.0e-5

/* One batch on its way through the integrator. */
typedef struct ros_run {
  const jg_perturb_model *m;
  const pt_system_type *type;
  int dim;
  int n_modes, n_lanes; /* the modes asked for; the integrator's lanes, the ones beyond
                           n_modes copies of the last mode (jg__ros_lanes) */
  double k[PT_ROS_MAX_MODES], k2[PT_ROS_MAX_MODES], k2_max;
  const double *z;     /* requested redshifts, in the caller's order */
  const int *order;    /* the n-th output is z[order[n]] */
  void *out[PT_ROS_MAX_MODES]; /* each mode's results, indexed like z */
  int undefined_output; /* the medium could not be read at an output */
  /* The system's pattern and its entries' positions (integrator layout). */
  unsigned char pattern[PT_ROS_MAX_ENTRIES];
  int n_entries, position[PT_ROS_MAX_ENTRIES];
  /* The k^2 part A(1) - A(0) of the batch's matrices, dense: only the
   * positions k2_position[0..n_k2_entries) of the entries that depend on
   * k^2 (the pressure terms) are written per call; every other entry of
   * the pattern is built alike at k^2 = 0 and 1, so its difference is
   * exactly 0 and stays the 0 it was set to once per solve. */
  int n_k2_entries, k2_position[PT_ROS_MAX_ENTRIES];
  double k2_part[PT_ROS_MAX_ENTRIES];
  /* A at zero coefficients (the constant part of the affine A), for the
   * baryon fraction zero_fb (NaN: not yet built), and the positions of its
   * entries of the pattern that are not +0 (subtracting +0 changes no
   * number, not even a zero's sign; -0 would turn -0 into +0, so those
   * are kept). */
  double zero_fb;
  double A_zero[PT_ROS_MAX_ENTRIES];
  int n_constant_entries, constant_position[PT_ROS_MAX_ENTRIES];
} ros_run;

/* Coefficients with every field non-zero and no two alike, so that an
 * entry of a system's matrix built from them is non-zero wherever the
 * system can make it non-zero (its sparsity pattern). */
void jg__pt_structural_coefficients(jg_medium_coefficients *c) {
  const jg_medium_coefficients distinct = {
      .dlnH_dlna = 1.1, .gravity = 1.3, .baryon_fraction = 0.17, .pressure = 1.7, .drag = 1.9,
      .relaxation = 2.3, .pressure_effective = 2.9, .ionisation_relaxation = 3.1,
      .ionisation_density = 3.7, .ionisation_temperature = 4.1, .ionisation_expansion = 4.3,
      .heating_ionisation = 4.7, .pressure_ionisation = 5.3};
  *c = distinct;
}

/* The structure of the run's system, found once per solve: which entries
 * of its matrix can be non-zero (at k^2 = 1, where every pressure term is
 * present), their positions, and which of them change with k^2. The
 * matrices of the steps are built without clearing (pt_system_type), so an
 * entry of the pattern that some call did not write would keep a value
 * from an earlier x: the matrix is built once more, at zero coefficients
 * and k^2 = 0 (where a write that depended on a value would be skipped),
 * into entries marked NaN; and a batch's k^2 part comes from k2_terms, which
 * must write every entry that changes with k^2 as the matrix does. The
 * position of an entry where either fails is returned (-1: none). */
static int system_structure(ros_run *r) {
  const int n = r->dim * r->dim;
  jg_medium_coefficients c;
  jg__pt_structural_coefficients(&c);
  double A[PT_ROS_MAX_ENTRIES], A_no_k2[PT_ROS_MAX_ENTRIES];
  for (int i = 0; i < n; i++) A[i] = A_no_k2[i] = NAN;
  r->type->matrix(r->m, &c, 1.0, A);
  r->type->matrix(r->m, &c, 0.0, A_no_k2);
  for (int i = 0; i < n; i++) r->pattern[i] = !isnan(A[i]) && A[i] != 0.0;
  r->n_entries = jg__ros_entry_positions(r->dim, r->pattern, r->position);
  /* (The coefficients are distinct and non-zero: an entry with a k^2 term
   * differs here.) */
  r->n_k2_entries = 0;
  for (int e = 0; e < r->n_entries; e++)
    if (A[r->position[e]] != A_no_k2[r->position[e]])
      r->k2_position[r->n_k2_entries++] = r->position[e];
  for (int i = 0; i < n; i++) r->k2_part[i] = 0.0;
  if (r->type->k2_terms) {
    double terms[PT_ROS_MAX_ENTRIES];
    for (int i = 0; i < n; i++) terms[i] = NAN;
    r->type->k2_terms(r->m, &c, 1.0, terms);
    for (int e = 0; e < r->n_k2_entries; e++)
      if (memcmp(&terms[r->k2_position[e]], &A[r->k2_position[e]], sizeof A[0]) != 0)
        return r->k2_position[e];
  }
  const jg_medium_coefficients zero = {0};
  for (int i = 0; i < n; i++) A[i] = NAN;
  r->type->matrix(r->m, &zero, 0.0, A);
  for (int i = 0; i < n; i++)
    if (r->pattern[i] && isnan(A[i])) return i;
  return -1;
}

/* Coefficients at x and, if dc, their slope: exact for the tabulated
 * history, a central difference for a custom medium. */
static int coefficients_and_slope(const jg_perturb_model *m, double x, jg_medium_coefficients *c,
                                  jg_medium_coefficients *dc) {
  const jg_medium *md = &m->medium;
  /* (The tables give both from one look-up.) */
  if (dc && m->owned) return jg__pt_thermal_medium_eval_and_slope(m->owned, x, c, dc);
  if (md->eval(md->ctx, x, c) != 0) return 1;
  if (!dc) return 0;
  jg_medium_coefficients cp, cm;
  if (md->eval(md->ctx, x + PT_SLOPE_STEP, &cp) != 0 || md->eval(md->ctx, x - PT_SLOPE_STEP, &cm))
    return 1;
  const double s = 0.5 / PT_SLOPE_STEP;
  dc->dlnH_dlna = (cp.dlnH_dlna - cm.dlnH_dlna) * s;
  dc->gravity = (cp.gravity - cm.gravity) * s;
  dc->pressure = (cp.pressure - cm.pressure) * s;
  dc->drag = (cp.drag - cm.drag) * s;
  dc->relaxation = (cp.relaxation - cm.relaxation) * s;
  dc->baryon_fraction = c->baryon_fraction;
  return 0;
}

/* The matrices of the batch: A is affine in k^2 (the pressure terms), so
 * A(k^2) = A(0) + k^2 (A(1) - A(0)), two matrices per x for the whole
 * batch (one, built at its k^2, for a lone mode): B0 = A(0) and, for a
 * batch, r->k2_part = A(1) - A(0). A is affine in the coefficients too, so
 * dA/dx = A(c') - A(c = 0). */
static void matrix_parts(ros_run *r, const jg_medium_coefficients *c, int by_parts, double *B0) {
  r->type->matrix(r->m, c, by_parts ? 0.0 : r->k2[0], B0);
  if (!by_parts) return;
  double B1[PT_ROS_MAX_ENTRIES];
  r->type->k2_terms(r->m, c, 1.0, B1);
  for (int e = 0; e < r->n_k2_entries; e++) {
    const int at = r->k2_position[e];
    r->k2_part[at] = B1[at] - B0[at];
  }
}

static int ros_matrices(void *ctx, double x, double *A, double *dA, double *rate) {
  ros_run *r = ctx;
  const jg_perturb_model *m = r->m;
  jg_medium_coefficients c, dc;
  /* (The slope's fields the medium does not give stay 0.) */
  if (dA) dc = (jg_medium_coefficients){0};
  if (coefficients_and_slope(m, x, &c, dA ? &dc : NULL) != 0) return 1;
  const int by_parts = r->type->k2_terms && r->n_lanes > 1;
  double B0[PT_ROS_MAX_ENTRIES];
  matrix_parts(r, &c, by_parts, B0);
  jg__ros_gather(r->n_entries, r->position, r->n_lanes, B0, by_parts ? r->k2_part : NULL, r->k2,
                 NULL, NULL, A);
  /* The rates grow with k^2: the batch's largest k bounds them all. */
  if (rate) *rate = fastest_rate(m, &c, r->k2_max);
  if (dA) {
    /* A(c = 0) depends on the baryon fraction alone (not on k^2: every
     * pressure is zero): built once per solve. */
    if (!(c.baryon_fraction == r->zero_fb)) {
      jg_medium_coefficients zero = {0};
      zero.baryon_fraction = c.baryon_fraction;
      r->type->matrix(m, &zero, 0.0, r->A_zero);
      r->zero_fb = c.baryon_fraction;
      r->n_constant_entries = 0;
      for (int e = 0; e < r->n_entries; e++) {
        const int at = r->position[e];
        if (r->A_zero[at] != 0.0 || signbit(r->A_zero[at]))
          r->constant_position[r->n_constant_entries++] = at;
      }
    }
    matrix_parts(r, &dc, by_parts, B0);
    for (int e = 0; e < r->n_constant_entries; e++)
      B0[r->constant_position[e]] -= r->A_zero[r->constant_position[e]];
    jg__ros_gather(r->n_entries, r->position, r->n_lanes, B0, by_parts ? r->k2_part : NULL,
                   r->k2, NULL, NULL, dA);
  }
  return 0;
}

static void ros_emit(void *ctx, int n, const double *y) {
  ros_run *r = ctx;
  const int i = r->order[n];
  jg_medium_coefficients c;
  if (r->m->medium.eval(r->m->medium.ctx, -log1p(r->z[i]), &c) != 0) {
    r->undefined_output = 1;
    return;
  }
  for (int b = 0; b < r->n_modes; b++)
    r->type->read_out(r->m, r->z[i], r->k[b], c.baryon_fraction, y + b * r->dim, r->out[b], i);
}

static const char *ros_failure(int code) {
  switch (code) {
    case PT_ROS_UNDEFINED: return "medium undefined";
    case PT_ROS_TOO_MANY: return "too many steps";
    case PT_ROS_TOO_SMALL:
      return "step size underflow (non-finite state, or no step matrix that factorises)";
    default: return "bad integrator input";
  }
}

/* Solve a batch of wavenumbers k[0..n) of one system in lockstep; the
 * redshifts are already checked and ordered in w->order. */
static jg_status ros_solve(const jg_perturb_model *m, jg_perturb_workspace *w,
                           const pt_system_type *type, const double *k, int n, const double *z,
                           int n_z, void *const *out, jg_error *err) {
  ros_run r;
  memset(&r, 0, sizeof r);
  r.m = m;
  r.type = type;
  r.dim = type->dimension(m);
  r.n_modes = n;
  r.n_lanes = jg__ros_lanes(n);
  r.z = z;
  r.order = w->order;
  r.zero_fb = NAN;
  const int inconsistent = system_structure(&r);
  if (inconsistent >= 0)
    return JG_FAIL(err, JG_ENUMERIC,
                   "perturbations (%s, k = %g /Mpc): internal error: the system's matrix is not "
                   "written the same way at every call at entry (%d, %d)",
                   type->stage, k[0], inconsistent / r.dim, inconsistent % r.dim);
  double y[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM];
  for (int b = 0; b < r.n_lanes; b++) {
    jg_status st = JG_OK;
    const int mode = b < n ? b : n - 1;
    r.k[b] = k[mode];
    r.k2[b] = k[mode] * k[mode];
    if (r.k2[b] > r.k2_max) r.k2_max = r.k2[b];
    if (b < n) {
      r.out[b] = out[b];
      type->start(m, k[b], y + b * r.dim, err, &st);
    } else {
      memcpy(y + b * r.dim, y + mode * r.dim, sizeof(double) * (size_t)r.dim);
    }
    if (st != JG_OK) return st;
  }
  for (int i = 0; i < n_z; i++) w->x_out[i] = -log1p(z[w->order[i]]);
  const pt_ros_problem p = {r.dim, r.n_lanes, ros_matrices, ros_emit, &r, type->group,
                            PT_ROS_TOLERANCE_SCALE * m->settings.rel_tol,
                            PT_ROS_TOLERANCE_SCALE * m->settings.abs_tol, PT_ROS_FIRST_STEP, PT_ROS_MAX_STEP,
                            PT_MAX_STEPS, r.pattern, type->group_scaled};
  const pt_ros_stats before = w->ros->stats;
  double x_fail;
  int code = jg__ros_integrate(&p, w->ros, m->x_init, y, w->x_out, n_z, &x_fail);
  /* Work counters as for the GSL path: six stage right-hand sides per
   * attempted step and one Jacobian per matrix evaluation, per mode. */
  const pt_ros_stats *after = &w->ros->stats;
  w->work.rhs_evals += 6L * n * (after->steps + after->rejected - before.steps - before.rejected);
  w->work.jacobian_evals += (long)n * (after->matrix_evals - before.matrix_evals);
  if (code == PT_ROS_OK && r.undefined_output) code = PT_ROS_UNDEFINED;
  if (code != PT_ROS_OK) {
    if (n == 1)
      return JG_FAIL(err, JG_ENUMERIC,
                     "perturbations (%s, k = %g /Mpc): integration failed between z = %.6g and "
                     "z = %.6g (reached z = %.6g: %s)",
                     type->stage, k[0], m->settings.z_initial, z[w->order[n_z - 1]],
                     exp(-x_fail) - 1.0, ros_failure(code));
    return JG_FAIL(err, JG_ENUMERIC, "perturbations (%s, batch of %d from k = %g /Mpc): %s at z = %.6g",
                   type->stage, n, k[0], ros_failure(code), exp(-x_fail) - 1.0);
  }
  return JG_OK;
}


jg_status jg__pt_ros_solve_modes(const jg_perturb_model *m, jg_perturb_workspace *w,
                                 const double *k, int n, const double *z, int n_z,
                                 void *const *outs, jg_error *err) {
  return ros_solve(m, w, mode_type(m), k, n, z, n_z, outs, err);
}

jg_status jg__pt_ros_solve_limit(const jg_perturb_model *m, jg_perturb_workspace *w,
                                 const double *z, int n_z, jg_perturb_limit *out, jg_error *err) {
  const double k0 = 0.0;
  void *outs[1] = {out};
  return ros_solve(m, w, limit_type(m), &k0, 1, z, n_z, outs, err);
}

jg_status jg_perturb_solve_many(const jg_perturb_model *m, jg_perturb_workspace *w,
                                const double *k, int n_k, const double *z, int n_z,
                                jg_perturb_point *out, jg_error *err) {
  if (!m || !w || !out || !k || w->m != m || n_k < 0)
    return JG_FAIL(err, JG_EINVAL,
                   "jg_perturb_solve_many: model, its own workspace, wavenumbers and output needed");
  const int lockstep = m->settings.stepper == JG_PERTURB_STEPPER_ROSENBROCK;
  for (int first = 0; first < n_k; first += JG_PERTURB_BATCH) {
    const int n = n_k - first < JG_PERTURB_BATCH ? n_k - first : JG_PERTURB_BATCH;
    jg_perturb_point *batch_out = out + (size_t)first * (size_t)n_z;
    if (lockstep && n > 1) {
      jg_status st = jg__pt_order_redshifts(m, w, z, n_z, err);
      for (int b = 0; st == JG_OK && b < n; b++) st = jg_perturb_check_wavenumber(m, k[first + b], err);
      if (st != JG_OK) return st;
      void *outs[JG_PERTURB_BATCH];
      for (int b = 0; b < n; b++) outs[b] = batch_out + (size_t)b * (size_t)n_z;
      if (ros_solve(m, w, mode_type(m), k + first, n, z, n_z, outs, err) == JG_OK) continue;
    }
    /* One at a time: the GSL steppers, a lone k, or a batch that failed. */
    for (int b = 0; b < n; b++) {
      jg_status st = jg_perturb_solve(m, w, k[first + b], z, n_z, batch_out + (size_t)b * n_z, err);
      if (st != JG_OK) return st;
    }
  }
  return JG_OK;
}

/* For the streaming systems (streaming.c), which drive the same integrator
 * with matrices of their own. */
int jg__pt_coefficients_and_slope(const jg_perturb_model *m, double x, jg_medium_coefficients *c,
                                  jg_medium_coefficients *dc) {
  return coefficients_and_slope(m, x, c, dc);
}
double jg__pt_fastest_rate(const jg_perturb_model *m, const jg_medium_coefficients *c, double k2) {
  return fastest_rate(m, c, k2);
}
