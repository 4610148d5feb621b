/*
 * The user's heating table (thermal.heating_table): rows "z  rate", the
 * heating per baryon in eV/s (per hydrogen-atom mass of gas: an X-ray
 * heating history from another code, or any other model), z strictly
 * increasing from >= 0 to <= 1000. Lines starting with # and blank lines
 * are skipped. Everything is checked before the history starts, and every
 * complaint names the file and the line.
 *
 * Interpolation: linear in ln(1+z) (no overshoot, so a rate never turns
 * negative between rows); no heating outside the table's range.
 */
#include "heating_table.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "jeansgrow/constants.h"
#include "../base/number_rows.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* The highest redshift a row may have: heating before recombination (when
 * Compton coupling holds T_gas at T_rad anyway) is not modelled. */
static const double HEATING_Z_MAX = 1000.0;

typedef struct reading {
  jg__heating_table *t;
  int capacity;
  double z_prev;
} reading;

static jg_status take_row(void *user, const char *path, int line_no, const double *v, int n,
                          jg_error *err) {
  reading *r = user;
  jg__heating_table *t = r->t;
  if (n != 2)
    return JG_FAIL(err, JG_ECONFIG,
                   "%s:%d: %d value(s) on a row; each row needs z and the heating rate "
                   "[eV/s per baryon]",
                   path, line_no, n);
  const double z = v[0], rate = v[1];
  if (!(z >= 0.0 && z <= HEATING_Z_MAX))
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: z = %g must satisfy 0 <= z <= %g", path, line_no,
                   z, HEATING_Z_MAX);
  if (t->n > 0 && !(z > r->z_prev))
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: z = %g does not increase (the row before has %g)",
                   path, line_no, z, r->z_prev);
  if (t->n > 0 && !(log1p(z) > t->ln_1pz[t->n - 1]))
    return JG_FAIL(err, JG_ECONFIG,
                   "%s:%d: z = %.17g is too close to the row before (%.17g): their ln(1+z), in "
                   "which the table is interpolated, are equal",
                   path, line_no, z, r->z_prev);
  if (!(rate >= 0.0))
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: heating rate %g eV/s must be >= 0", path, line_no,
                   rate);
  if (t->n == r->capacity) {
    const int cap = r->capacity ? 2 * r->capacity : 64;
    double *a = realloc(t->ln_1pz, sizeof(double) * (size_t)cap);
    if (a) t->ln_1pz = a;
    double *b = a ? realloc(t->rate, sizeof(double) * (size_t)cap) : NULL;
    if (b) t->rate = b;
    if (!a || !b) return JG_FAIL(err, JG_ENOMEM, "%s: out of memory for the table", path);
    r->capacity = cap;
  }
  t->ln_1pz[t->n] = log1p(z);
  t->rate[t->n] = rate * JG_ELECTRON_VOLT;
  t->n++;
  r->z_prev = z;
  return JG_OK;
}

jg_status jg__heating_table_read(const char *path, jg__heating_table *t, jg_error *err) {
  memset(t, 0, sizeof *t);
  reading r = {t, 0, 0.0};
  jg_status st = jg__read_number_rows(path, take_row, &r, &t->checksum, err);
  if (st == JG_OK && t->n < 2)
    st = JG_FAIL(err, JG_ECONFIG,
                 "%s: %d data row(s); at least two are needed (the rate is interpolated in z)",
                 path, t->n);
  if (st != JG_OK) jg__heating_table_free(t);
  return st;
}

void jg__heating_table_free(jg__heating_table *t) {
  free(t->ln_1pz);
  free(t->rate);
  t->ln_1pz = t->rate = NULL;
  t->n = 0;
}

double jg__heating_table_rate(const jg__heating_table *t, double ln_1pz) {
  const int n = t->n;
  if (n < 2 || ln_1pz < t->ln_1pz[0] || ln_1pz > t->ln_1pz[n - 1]) return 0.0;
  int lo = 0, hi = n - 1;
  while (hi - lo > 1) {
    const int mid = (lo + hi) / 2;
    if (t->ln_1pz[mid] <= ln_1pz) lo = mid;
    else hi = mid;
  }
  const double w = (ln_1pz - t->ln_1pz[lo]) / (t->ln_1pz[hi] - t->ln_1pz[lo]);
  return (1.0 - w) * t->rate[lo] + w * t->rate[hi];
}
