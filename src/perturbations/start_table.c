/*
 * The start per wavenumber, read from a table (see
 * include/jeansgrow/perturb.h, "initial conditions from a table").
 *
 * Why: a user who runs another code (a Boltzmann code) to some redshift can
 * start the gas, and the dark matter, where that code has them, instead of
 * our own start, and so compare the later evolution line by line. Such codes
 * write their state in many layouts; the column map (params.h) says which
 * column holds what, and each velocity convention is turned here into the
 * state of src/PHYSICS.md §7.3 (derivations in its §7.6).
 *
 * Interpolation: each converted quantity in ln k with GSL's Steffen method
 * (a monotone cubic Hermite interpolant: no overshoot between rows, and
 * exact for data linear in ln k), or linearly when the table has only two
 * rows. Evaluated with a NULL accelerator, so one table serves every thread.
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_interp.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "jeansgrow/perturb.h"
#include "jeansgrow/table.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* Most rows accepted: far more than any wavenumber grid needs. */
#define ST_ROWS_MAX 100000
/* A wavenumber this close (relative) to an end of the table is that end: an
 * h/Mpc value written with ten digits and converted back is off by ~1e-10. */
#define ST_K_SNAP 1e-9

/* The converted quantities per row: delta_b/delta_c, (d delta_b/d ln a) /
 * delta_c, delta_T/delta_c, d ln delta_c/d ln a. */
enum { Q_DENSITY = 0, Q_BARYON_RATE = 1, Q_TEMPERATURE = 2, Q_CDM_RATE = 3, N_Q = 4 };

/* The plain layout: rows of three cells, or four with the temperature. */
static const char plain_columns[] = "k b_over_c velocity_ratio T_over_c";
#define PLAIN_MIN_CELLS 3

struct jg_perturb_start_table {
  char path[JG_MAX_PATH];
  int n, capacity;
  int has_temperature, has_cdm_rate;
  unsigned long long checksum;
  jg_column_map map;
  jg_table_gauge gauge;
  double k_factor; /* table unit -> 1/Mpc */
  double k_prev;   /* the last row's k as written */
  const char *second_path; /* the settings' initial_second_table while reading */
  jg_perturb_table_frame frame;
  /* The second snapshot, read first: k (1/Mpc), delta_c, delta_b per row. */
  double *second;     /* 3 per row */
  int n_second;
  double snapshot_step; /* ln a_2 - ln a_1 */
  double *ln_k;       /* n, 1/Mpc */
  double *value[N_Q]; /* n each */
  gsl_interp *interp[N_Q];
};

void jg_perturb_start_table_free(jg_perturb_start_table *t) {
  if (!t) return;
  for (int c = 0; c < N_Q; c++) {
    if (t->interp[c]) gsl_interp_free(t->interp[c]);
    free(t->value[c]);
  }
  free(t->ln_k);
  free(t->second);
  free(t);
}

static jg_status grow(jg_perturb_start_table *t) {
  int cap = t->capacity ? 2 * t->capacity : 64;
  double *k = realloc(t->ln_k, sizeof(double) * (size_t)cap);
  if (!k) return JG_ENOMEM;
  t->ln_k = k;
  for (int c = 0; c < N_Q; c++) {
    double *v = realloc(t->value[c], sizeof(double) * (size_t)cap);
    if (!v) return JG_ENOMEM;
    t->value[c] = v;
  }
  t->capacity = cap;
  return JG_OK;
}

/* The row's quantities in the state's terms (src/PHYSICS.md §7.6). */
static jg_status convert_row(const jg_perturb_start_table *t, const char *path, int line_no,
                             const double *v, double q[N_Q], jg_error *err) {
  const int *col = t->map.column;
  const double theta_factor = t->k_factor / t->frame.conformal_hubble; /* theta -> per ln a */
  const double dc = v[JG_COLUMN_DELTA_C];
  if (col[JG_COLUMN_DELTA_C] >= 0 && dc == 0.0)
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: delta_c is 0 (every value is taken relative to it)",
                   path, line_no);
  q[Q_DENSITY] = col[JG_COLUMN_B_OVER_C] >= 0 ? v[JG_COLUMN_B_OVER_C] : v[JG_COLUMN_DELTA_B] / dc;
  /* Two snapshots: d ln delta / d ln a as the difference of the logarithms
   * (the rate at the middle of the step, to first order at the start). */
  double snapshot_rate[2] = {NAN, NAN};
  if (t->second) {
    const double *w = &t->second[3 * t->n];
    const double k = v[JG_COLUMN_K] * t->k_factor;
    if (t->n >= t->n_second || fabs(w[0] / k - 1.0) > ST_K_SNAP)
      return JG_FAIL(err, JG_ECONFIG,
                     "%s:%d: k = %g has no twin on row %d of the second snapshot %s (the two "
                     "must hold the same wavenumbers in the same order)",
                     path, line_no, v[JG_COLUMN_K], t->n + 1, t->second_path);
    const double ratio[2] = {w[1] / dc, w[2] / v[JG_COLUMN_DELTA_B]};
    for (int i = 0; i < 2; i++) {
      if (!(ratio[i] > 0.0) || !isfinite(ratio[i]))
        return JG_FAIL(err, JG_ECONFIG,
                       "%s:%d: delta_%c changes sign or vanishes between the two snapshots "
                       "(no growth rate)",
                       path, line_no, i ? 'b' : 'c');
      snapshot_rate[i] = log(ratio[i]) / t->snapshot_step;
    }
  }
  if (col[JG_COLUMN_RATE_C] >= 0)
    q[Q_CDM_RATE] = v[JG_COLUMN_RATE_C];
  else if (col[JG_COLUMN_THETA_C] >= 0) /* Newtonian: the map check refuses it otherwise */
    q[Q_CDM_RATE] = -v[JG_COLUMN_THETA_C] * theta_factor / dc;
  else if (t->second)
    q[Q_CDM_RATE] = snapshot_rate[0];
  else
    q[Q_CDM_RATE] = t->frame.growing_rate;
  if (!(q[Q_CDM_RATE] != 0.0))
    return JG_FAIL(err, JG_ECONFIG,
                   "%s:%d: the dark matter's rate d ln delta_c/d ln a is 0 (a start needs a "
                   "growing dark matter)",
                   path, line_no);
  if (col[JG_COLUMN_VELOCITY_RATIO] >= 0)
    q[Q_BARYON_RATE] = v[JG_COLUMN_VELOCITY_RATIO] * q[Q_CDM_RATE];
  else if (col[JG_COLUMN_RATE_B] >= 0)
    q[Q_BARYON_RATE] = v[JG_COLUMN_RATE_B] * q[Q_DENSITY];
  else if (col[JG_COLUMN_THETA_B] < 0) /* two snapshots */
    q[Q_BARYON_RATE] = snapshot_rate[1] * q[Q_DENSITY];
  else if (t->gauge == JG_TABLE_SYNCHRONOUS)
    q[Q_BARYON_RATE] = q[Q_CDM_RATE] - v[JG_COLUMN_THETA_B] * theta_factor / dc;
  else
    q[Q_BARYON_RATE] = -v[JG_COLUMN_THETA_B] * theta_factor / dc;
  if (col[JG_COLUMN_DELTA_T] >= 0)
    q[Q_TEMPERATURE] = v[JG_COLUMN_DELTA_T] / dc;
  else if (col[JG_COLUMN_T_OVER_C] >= 0 && !isnan(v[JG_COLUMN_T_OVER_C]))
    q[Q_TEMPERATURE] = v[JG_COLUMN_T_OVER_C];
  else
    q[Q_TEMPERATURE] = 0.0;
  for (int c = 0; c < N_Q; c++)
    if (!isfinite(q[c]))
      return JG_FAIL(err, JG_ECONFIG, "%s:%d: the row gives a non-finite start", path, line_no);
  return JG_OK;
}

/* One data row, checked, converted and appended (a jg_table_row_fn). */
static jg_status store_row(void *user, const char *path, int line_no, const double *v,
                           jg_error *err) {
  jg_perturb_start_table *t = user;
  const double k = v[JG_COLUMN_K] * t->k_factor;
  if (t->n == 0) t->has_temperature = !isnan(v[JG_COLUMN_DELTA_T]) || !isnan(v[JG_COLUMN_T_OVER_C]);
  if (!(k > 0.0))
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: k = %g must be > 0", path, line_no,
                   v[JG_COLUMN_K]);
  /* The interpolation runs in ln k, which must increase: two k a few ulps
   * apart can share a logarithm, and GSL would then refuse the table with
   * no line to name. */
  if (t->n > 0 && !(v[JG_COLUMN_K] > t->k_prev))
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: k = %.17g does not increase (the row before has %.17g)",
                   path, line_no, v[JG_COLUMN_K], t->k_prev);
  if (t->n > 0 && !(log(k) > t->ln_k[t->n - 1]))
    return JG_FAIL(err, JG_ECONFIG,
                   "%s:%d: k = %.17g is too close to the row before (%.17g): their logarithms, "
                   "in which the table is interpolated, are equal",
                   path, line_no, v[JG_COLUMN_K], t->k_prev);
  if (t->n == ST_ROWS_MAX)
    return JG_FAIL(err, JG_ECONFIG, "%s: more than %d rows", path, ST_ROWS_MAX);
  double q[N_Q];
  jg_status st = convert_row(t, path, line_no, v, q, err);
  if (st != JG_OK) return st;
  if (t->n == t->capacity && grow(t) != JG_OK)
    return JG_FAIL(err, JG_ENOMEM, "%s: out of memory for the table", path);
  t->ln_k[t->n] = log(k);
  t->k_prev = v[JG_COLUMN_K];
  for (int c = 0; c < N_Q; c++) t->value[c][t->n] = q[c];
  t->n++;
  return JG_OK;
}

/* A row of the second snapshot (a jg_table_row_fn). */
static jg_status store_second_row(void *user, const char *path, int line_no, const double *v,
                                  jg_error *err) {
  jg_perturb_start_table *t = user;
  if (t->n_second == ST_ROWS_MAX)
    return JG_FAIL(err, JG_ECONFIG, "%s: more than %d rows", path, ST_ROWS_MAX);
  if (t->n_second % 64 == 0) {
    double *bigger = realloc(t->second, sizeof(double) * 3 * (size_t)(t->n_second + 64));
    if (!bigger) return JG_FAIL(err, JG_ENOMEM, "%s: out of memory for the table", path);
    t->second = bigger;
  }
  (void)line_no;
  double *w = &t->second[3 * t->n_second++];
  w[0] = v[JG_COLUMN_K] * t->k_factor;
  w[1] = v[JG_COLUMN_DELTA_C];
  w[2] = v[JG_COLUMN_DELTA_B];
  return JG_OK;
}

jg_perturb_start_table *jg_perturb_start_table_read_layout(const char *path,
                                                           const jg_perturb_settings *s,
                                                           const jg_perturb_table_frame *frame,
                                                           jg_error *err) {
  jg_error local; /* the helpers read the status back from the record */
  if (!err) err = &local;
  if (!path || !path[0] || !s || !frame) {
    JG_FAIL(err, JG_EINVAL, "jg_perturb_start_table_read: no file name, settings or frame");
    return NULL;
  }
  if (strlen(path) >= JG_MAX_PATH) {
    JG_FAIL(err, JG_EINVAL, "start table: file name longer than %d bytes", JG_MAX_PATH - 1);
    return NULL;
  }
  /* A program may have filled the layout by hand: the words as the loader
   * would check them. */
  const struct {
    const char *key;
    int value;
  } words[] = {{"perturbations.initial_k_unit", s->initial_k_unit},
               {"perturbations.initial_separator", s->initial_separator},
               {"perturbations.initial_gauge", s->initial_gauge}};
  for (size_t i = 0; i < sizeof words / sizeof words[0]; i++)
    if (jg_params_check_value(words[i].key, words[i].value, err) != JG_OK) return NULL;
  const int plain = s->initial_columns[0] == '\0';
  jg_perturb_start_table *t = calloc(1, sizeof *t);
  if (!t) {
    JG_FAIL(err, JG_ENOMEM, "out of memory for the start table");
    return NULL;
  }
  snprintf(t->path, sizeof t->path, "%s", path);
  t->gauge = (jg_table_gauge)s->initial_gauge;
  t->frame = *frame;
  t->k_factor = s->initial_k_unit == JG_TABLE_K_H_PER_MPC ? frame->hubble_h : 1.0;
  char why[256];
  jg_status st = jg_column_map_parse(plain ? plain_columns : s->initial_columns, &t->map, why,
                                     sizeof why);
  const int second = !plain && s->initial_second_table[0] != '\0';
  if (st == JG_OK)
    st = jg_column_map_check_start(&t->map, t->gauge, second, why, sizeof why);
  if (st != JG_OK) {
    JG_FAIL(err, JG_ECONFIG, "perturbations.initial_columns: %s", why);
  } else {
    t->has_cdm_rate = second || t->map.column[JG_COLUMN_RATE_C] >= 0 ||
                      (t->map.column[JG_COLUMN_THETA_C] >= 0 && t->gauge == JG_TABLE_NEWTONIAN);
    t->snapshot_step = log1p(s->z_initial) - log1p(s->initial_second_redshift);
    t->second_path = s->initial_second_table;
    if (second) {
      st = jg_table_read_mapped(s->initial_second_table, &t->map,
                                (jg_table_separator)s->initial_separator, 0, store_second_row, t,
                                NULL, err);
      if (st == JG_OK && !(t->snapshot_step != 0.0))
        st = JG_FAIL(err, JG_ECONFIG,
                     "perturbations.initial_second_redshift must differ from z_initial");
    }
  }
  if (st == JG_OK) {
    st = jg_table_read_mapped(path, &t->map, (jg_table_separator)s->initial_separator,
                              plain ? PLAIN_MIN_CELLS : 0, store_row, t, &t->checksum, err);
    if (st == JG_OK && second && t->n != t->n_second)
      st = JG_FAIL(err, JG_ECONFIG, "%s has %d rows, the second snapshot %s has %d", path, t->n,
                   s->initial_second_table, t->n_second);
  }
  t->second_path = NULL;
  if (st == JG_OK && t->n < 2)
    st = JG_FAIL(err, JG_ECONFIG,
                 "%s: %d data row(s); at least two are needed (the start is interpolated in k)",
                 path, t->n);
  const gsl_interp_type *type = t->n >= 3 ? gsl_interp_steffen : gsl_interp_linear;
  for (int c = 0; st == JG_OK && c < N_Q; c++) {
    t->interp[c] = gsl_interp_alloc(type, (size_t)t->n);
    if (!t->interp[c] ||
        gsl_interp_init(t->interp[c], t->ln_k, t->value[c], (size_t)t->n) != GSL_SUCCESS)
      st = JG_FAIL(err, JG_ENOMEM, "%s: cannot build the interpolation", path);
  }
  if (st != JG_OK) {
    jg_perturb_start_table_free(t);
    return NULL;
  }
  return t;
}

jg_perturb_start_table *jg_perturb_start_table_read(const char *path, jg_error *err) {
  jg_params d;
  jg_params_set_defaults(&d);
  /* The plain layout in 1/Mpc: h and aH/c play no part, and the growing
   * rate cancels from the velocity ratio it returns. */
  const jg_perturb_table_frame frame = {1.0, 1.0, 1.0};
  return jg_perturb_start_table_read_layout(path, &d.perturbations, &frame, err);
}

const char *jg_perturb_start_table_path(const jg_perturb_start_table *t) { return t->path; }

void jg_perturb_start_table_range(const jg_perturb_start_table *t, double *k_min,
                                  double *k_max) {
  if (k_min) *k_min = exp(t->ln_k[0]);
  if (k_max) *k_max = exp(t->ln_k[t->n - 1]);
}

int jg_perturb_start_table_has_temperature(const jg_perturb_start_table *t) {
  return t->has_temperature;
}

int jg_perturb_start_table_has_cdm_rate(const jg_perturb_start_table *t) {
  return t->has_cdm_rate;
}

unsigned long long jg_perturb_start_table_checksum(const jg_perturb_start_table *t) {
  return t->checksum;
}

jg_status jg_perturb_start_table_at(const jg_perturb_start_table *t, double k,
                                    jg_perturb_start *out, jg_error *err) {
  if (!t || !out) return JG_FAIL(err, JG_EINVAL, "jg_perturb_start_table_at: NULL argument");
  const double x = log(k);
  /* The end points exactly, for k within ST_K_SNAP of them. */
  const double lo = t->ln_k[0], hi = t->ln_k[t->n - 1];
  const double xc = (x < lo && x >= lo - ST_K_SNAP) ? lo : (x > hi && x <= hi + ST_K_SNAP) ? hi : x;
  if (!(k > 0.0) || !(xc >= lo && xc <= hi))
    return JG_FAIL(err, JG_EINVAL,
                   "k = %.10g /Mpc is outside the start table %s (it covers %.10g to %.10g "
                   "/Mpc)",
                   k, t->path, exp(lo), exp(hi));
  double v[N_Q];
  for (int c = 0; c < N_Q; c++) v[c] = gsl_interp_eval(t->interp[c], t->ln_k, t->value[c], xc, NULL);
  out->density_ratio = v[Q_DENSITY];
  out->velocity_ratio = v[Q_BARYON_RATE] / v[Q_CDM_RATE];
  out->temperature_ratio = v[Q_TEMPERATURE];
  out->has_cdm_rate = t->has_cdm_rate;
  out->cdm_rate = t->has_cdm_rate ? v[Q_CDM_RATE] : 0.0;
  return JG_OK;
}
