/*
 * The user's tables against redshift (redshift_table.h). Lines starting
 * with # and blank lines are skipped; the rows are checked whole before the
 * history starts, and every complaint names the file and the line.
 *
 * The heating table is interpolated linearly in ln(1+z) (a rate may be 0,
 * and a straight line never turns negative between rows); the ionisation
 * table by GSL's Steffen method in ln x_e and ln T_gas against ln(1+z)
 * (monotone between rows, no overshoot, third-order accurate where the
 * history is smooth), with a NULL accelerator so that threads share it.
 */
#include "redshift_table.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "jeansgrow/constants.h"
#include "../base/number_rows.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* The highest redshift of a heating table: heating before recombination
 * (when Compton coupling holds T_gas at T_rad anyway) is not modelled. */
static const double HEATING_Z_MAX = 1000.0;

typedef struct reading {
  jg__z_table *t;
  int capacity;
  double z_prev, z_max;
  int min_columns, max_columns;
  const char *row_needs;  /* for the message of a row with too few or too many values */
  double x_e_max;         /* ionisation table; 0 for the heating table */
} reading;

static jg_status check_values(const reading *r, const char *path, int line_no, const double *v,
                              int n, jg_error *err) {
  if (r->x_e_max == 0.0) {
    if (!(v[1] >= 0.0))
      return JG_FAIL(err, JG_ECONFIG, "%s:%d: heating rate %g eV/s must be >= 0", path, line_no,
                     v[1]);
    return JG_OK;
  }
  if (!(v[1] > 0.0 && v[1] <= r->x_e_max))
    return JG_FAIL(err, JG_ECONFIG,
                   "%s:%d: x_e = %g must satisfy 0 < x_e <= %.6g (hydrogen and helium fully "
                   "ionised)",
                   path, line_no, v[1], r->x_e_max);
  if (n > 2 && !(v[2] > 0.0))
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: T_gas = %g K must be > 0", path, line_no, v[2]);
  return JG_OK;
}

static jg_status take_row(void *user, const char *path, int line_no, const double *v, int n,
                          jg_error *err) {
  reading *r = user;
  jg__z_table *t = r->t;
  if (n - 1 < r->min_columns || n - 1 > r->max_columns)
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: %d value(s) on a row; each row needs %s", path,
                   line_no, n, r->row_needs);
  if (t->n == 0) t->columns = n - 1;
  if (n - 1 != t->columns)
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: %d values on this row, %d on the first", path,
                   line_no, n, t->columns + 1);
  const double z = v[0];
  if (!(z >= 0.0 && z <= r->z_max))
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: z = %g must satisfy 0 <= z <= %g", path, line_no,
                   z, r->z_max);
  if (t->n > 0 && !(z > r->z_prev))
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: z = %g does not increase (the row before has %g)",
                   path, line_no, z, r->z_prev);
  if (t->n > 0 && !(log1p(z) > t->ln_1pz[t->n - 1]))
    return JG_FAIL(err, JG_ECONFIG,
                   "%s:%d: z = %.17g is too close to the row before (%.17g): their ln(1+z), in "
                   "which the table is interpolated, are equal",
                   path, line_no, z, r->z_prev);
  jg_status st = check_values(r, path, line_no, v, n, err);
  if (st != JG_OK) return st;
  if (t->n == r->capacity) {
    const int cap = r->capacity ? 2 * r->capacity : 64;
    double *grown[3] = {NULL, NULL, NULL};
    double **arrays[3] = {&t->ln_1pz, &t->col[0], &t->col[1]};
    for (int k = 0; k < 3; k++) {
      grown[k] = realloc(*arrays[k], sizeof(double) * (size_t)cap);
      if (!grown[k]) return JG_FAIL(err, JG_ENOMEM, "%s: out of memory for the table", path);
      *arrays[k] = grown[k];
    }
    r->capacity = cap;
  }
  t->ln_1pz[t->n] = log1p(z);
  if (r->x_e_max == 0.0) {
    t->col[0][t->n] = v[1] * JG_ELECTRON_VOLT;
  } else {
    t->col[0][t->n] = log(v[1]);
    t->col[1][t->n] = n > 2 ? log(v[2]) : 0.0;
  }
  t->n++;
  r->z_prev = z;
  return JG_OK;
}

static jg_status read_table(const char *path, reading *r, jg_error *err) {
  memset(r->t, 0, sizeof *r->t);
  jg_status st = jg__read_number_rows(path, take_row, r, &r->t->checksum, err);
  if (st == JG_OK && r->t->n < 2)
    st = JG_FAIL(err, JG_ECONFIG,
                 "%s: %d data row(s); at least two are needed (the table is interpolated in z)",
                 path, r->t->n);
  return st;
}

jg_status jg__heating_table_read(const char *path, jg__z_table *t, jg_error *err) {
  reading r = {t, 0, 0.0, HEATING_Z_MAX, 1, 1, "z and the heating rate [eV/s per baryon]", 0.0};
  jg_status st = read_table(path, &r, err);
  if (st != JG_OK) jg__z_table_free(t);
  return st;
}

jg_status jg__ionisation_table_read(const char *path, double z_max, double x_e_max,
                                    jg__z_table *t, jg_error *err) {
  reading r = {t, 0, 0.0, z_max, 1, 2, "z, x_e and optionally T_gas [K]", x_e_max};
  jg_status st = read_table(path, &r, err);
  for (int c = 0; st == JG_OK && c < t->columns; c++) {
    t->interp[c] = gsl_interp_alloc(gsl_interp_steffen, (size_t)t->n);
    if (!t->interp[c])
      st = JG_FAIL(err, JG_ENOMEM, "%s: out of memory for the table", path);
    else if (gsl_interp_init(t->interp[c], t->ln_1pz, t->col[c], (size_t)t->n) != 0)
      st = JG_FAIL(err, JG_ECONFIG, "%s: cannot interpolate the table", path);
  }
  if (st != JG_OK) jg__z_table_free(t);
  return st;
}

void jg__z_table_free(jg__z_table *t) {
  for (int c = 0; c < 2; c++) {
    if (t->interp[c]) gsl_interp_free(t->interp[c]);
    free(t->col[c]);
  }
  free(t->ln_1pz);
  memset(t, 0, sizeof *t);
}

double jg__heating_table_rate(const jg__z_table *t, double ln_1pz) {
  if (!jg__z_table_covers(t, ln_1pz)) return 0.0;
  int lo = 0, hi = t->n - 1;
  while (hi - lo > 1) {
    const int mid = (lo + hi) / 2;
    if (t->ln_1pz[mid] <= ln_1pz) lo = mid;
    else hi = mid;
  }
  const double w = (ln_1pz - t->ln_1pz[lo]) / (t->ln_1pz[hi] - t->ln_1pz[lo]);
  return (1.0 - w) * t->col[0][lo] + w * t->col[0][hi];
}

double jg__ionisation_table_value(const jg__z_table *t, int c, double ln_1pz) {
  return exp(gsl_interp_eval(t->interp[c], t->ln_1pz, t->col[c], ln_1pz, NULL));
}
