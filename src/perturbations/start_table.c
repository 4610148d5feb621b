/*
 * Baryon start per wavenumber, read from a table (see
 * include/jeansgrow/perturb.h, "initial conditions from a table").
 *
 * Why: a user who runs a Boltzmann code to z_initial can start the gas
 * where that code has it, instead of empty and at rest, and so compare the
 * later evolution line by line. The table holds ratios to the CDM at
 * z_initial; the CDM itself keeps its Meszaros growing mode.
 *
 * Interpolation: each ratio in ln k with GSL's Steffen method (a monotone
 * cubic Hermite interpolant: no overshoot between rows, and exact for data
 * linear in ln k), or linearly when the table has only two rows. Evaluated
 * with a NULL accelerator, so one table serves every thread.
 */
#include <errno.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_interp.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "jeansgrow/perturb.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* Longest line read; a longer one is an error, never silently cut. */
#define ST_LINE_MAX 4096
/* Most rows accepted: far more than any wavenumber grid needs. */
#define ST_ROWS_MAX 100000

enum { COL_K = 0, COL_DENSITY = 1, COL_VELOCITY = 2, COL_TEMPERATURE = 3, COLS_MAX = 4 };

struct jg_perturb_start_table {
  char path[JG_MAX_PATH];
  int n, columns;       /* rows; 3 or 4 columns */
  double *ln_k;         /* n */
  double *value[3];     /* density, velocity, temperature ratio; n each (temperature 0 if absent) */
  gsl_interp *interp[3];
};

void jg_perturb_start_table_free(jg_perturb_start_table *t) {
  if (!t) return;
  for (int c = 0; c < 3; c++) {
    if (t->interp[c]) gsl_interp_free(t->interp[c]);
    free(t->value[c]);
  }
  free(t->ln_k);
  free(t);
}

/* One data line into `v`; returns the number of values, or -1 with the
 * reason in err. */
static int parse_row(const char *path, int line_no, char *line, double v[COLS_MAX],
                     jg_error *err) {
  int n = 0;
  char *save = NULL;
  for (char *tok = strtok_r(line, " \t\r\n", &save); tok; tok = strtok_r(NULL, " \t\r\n", &save)) {
    if (n == COLS_MAX) {
      JG_FAIL(err, JG_ECONFIG,
              "%s:%d: more than %d values on a row (k[1/Mpc], delta_b/delta_c, velocity ratio, "
              "optional delta_T/delta_c)",
              path, line_no, COLS_MAX);
      return -1;
    }
    char *end = NULL;
    errno = 0;
    double x = strtod(tok, &end);
    if (end == tok || *end != '\0') {
      JG_FAIL(err, JG_ECONFIG, "%s:%d: '%.40s' is not a number", path, line_no, tok);
      return -1;
    }
    if (!isfinite(x) || errno == ERANGE) {
      JG_FAIL(err, JG_ECONFIG, "%s:%d: value %d ('%.40s') is %s", path, line_no, n + 1, tok,
              isfinite(x) ? "beyond the range of double precision" : "not a finite number");
      return -1;
    }
    v[n++] = x;
  }
  return n;
}

static jg_status grow(jg_perturb_start_table *t, int *capacity) {
  int cap = *capacity ? 2 * *capacity : 64;
  double *k = realloc(t->ln_k, sizeof(double) * (size_t)cap);
  if (!k) return JG_ENOMEM;
  t->ln_k = k;
  for (int c = 0; c < 3; c++) {
    double *v = realloc(t->value[c], sizeof(double) * (size_t)cap);
    if (!v) return JG_ENOMEM;
    t->value[c] = v;
  }
  *capacity = cap;
  return JG_OK;
}

/* One data row, checked and appended. */
static jg_status store_row(jg_perturb_start_table *t, const char *path, int line_no, char *text,
                           int *capacity, double *k_prev, jg_error *err) {
  double v[COLS_MAX];
  int n = parse_row(path, line_no, text, v, err);
  if (n < 0) return err->status;
  if (n < 3)
    return JG_FAIL(err, JG_ECONFIG,
                   "%s:%d: %d value(s) on a row; each row needs k[1/Mpc], delta_b/delta_c and "
                   "the velocity ratio, and optionally delta_T/delta_c",
                   path, line_no, n);
  if (t->n == 0) t->columns = n;
  if (n != t->columns)
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: %d values on this row, %d on the first", path,
                   line_no, n, t->columns);
  if (!(v[COL_K] > 0.0))
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: k = %g /Mpc must be > 0", path, line_no, v[COL_K]);
  if (t->n > 0 && !(v[COL_K] > *k_prev))
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: k = %g /Mpc does not increase (the row before has %g)",
                   path, line_no, v[COL_K], *k_prev);
  /* The interpolation runs in ln k, which must increase too: two k a few
   * ulps apart can share a logarithm, and GSL would then refuse the table
   * with no line to name. */
  if (t->n > 0 && !(log(v[COL_K]) > t->ln_k[t->n - 1]))
    return JG_FAIL(err, JG_ECONFIG,
                   "%s:%d: k = %.17g /Mpc is too close to the row before (%.17g): their "
                   "logarithms, in which the table is interpolated, are equal",
                   path, line_no, v[COL_K], *k_prev);
  if (t->n == ST_ROWS_MAX) return JG_FAIL(err, JG_ECONFIG, "%s: more than %d rows", path, ST_ROWS_MAX);
  if (t->n == *capacity && grow(t, capacity) != JG_OK)
    return JG_FAIL(err, JG_ENOMEM, "%s: out of memory for the table", path);
  t->ln_k[t->n] = log(v[COL_K]);
  t->value[0][t->n] = v[COL_DENSITY];
  t->value[1][t->n] = v[COL_VELOCITY];
  t->value[2][t->n] = n > COL_TEMPERATURE ? v[COL_TEMPERATURE] : 0.0;
  *k_prev = v[COL_K];
  t->n++;
  return JG_OK;
}

/* One line into buf (without its newline), read byte by byte so that a
 * device or a binary file cannot make it grow without bound: returns the
 * length, -1 at the end of the file, -2 for a line longer than ST_LINE_MAX,
 * -3 for a zero byte. */
static int read_line(FILE *f, char buf[ST_LINE_MAX + 1]) {
  int n = 0, c;
  while ((c = getc(f)) != EOF && c != '\n') {
    if (c == '\0') return -3;
    if (n == ST_LINE_MAX) return -2;
    buf[n++] = (char)c;
  }
  if (c == EOF && n == 0) return -1;
  buf[n] = '\0';
  return n;
}

/* Reads the rows; on error returns a status with err filled. */
static jg_status read_rows(FILE *f, jg_perturb_start_table *t, jg_error *err) {
  const char *path = t->path;
  char line[ST_LINE_MAX + 1];
  int line_no = 0, capacity = 0, len;
  double k_prev = 0.0;
  while ((len = read_line(f, line)) != -1) {
    line_no++;
    if (len == -2)
      return JG_FAIL(err, JG_ECONFIG, "%s:%d: line longer than %d bytes", path, line_no,
                     ST_LINE_MAX);
    if (len == -3)
      return JG_FAIL(err, JG_ECONFIG, "%s:%d: a zero byte (not a text table)", path, line_no);
    char *first = line + strspn(line, " \t\r");
    if (*first == '\0' || *first == '#') continue;
    jg_status st = store_row(t, path, line_no, first, &capacity, &k_prev, err);
    if (st != JG_OK) return st;
  }
  if (ferror(f)) return JG_FAIL(err, JG_ECONFIG, "%s: read error", path);
  if (t->n < 2)
    return JG_FAIL(err, JG_ECONFIG,
                   "%s: %d data row(s); at least two are needed (the start is interpolated in k)",
                   path, t->n);
  return JG_OK;
}

jg_perturb_start_table *jg_perturb_start_table_read(const char *path, jg_error *err) {
  jg_error local; /* the helpers read the status back from the record */
  if (!err) err = &local;
  if (!path || !path[0]) {
    JG_FAIL(err, JG_EINVAL, "jg_perturb_start_table_read: no file name given");
    return NULL;
  }
  if (strlen(path) >= JG_MAX_PATH) {
    JG_FAIL(err, JG_EINVAL, "initial-condition table: file name longer than %d bytes",
            JG_MAX_PATH - 1);
    return NULL;
  }
  jg_perturb_start_table *t = calloc(1, sizeof *t);
  if (!t) {
    JG_FAIL(err, JG_ENOMEM, "out of memory for the initial-condition table");
    return NULL;
  }
  snprintf(t->path, sizeof t->path, "%s", path);
  FILE *f = fopen(path, "r");
  if (!f) {
    JG_FAIL(err, JG_ECONFIG, "cannot read the initial-condition table %s: %s", path,
            strerror(errno));
    jg_perturb_start_table_free(t);
    return NULL;
  }
  struct stat info;
  jg_status st = JG_OK;
  if (fstat(fileno(f), &info) == 0 && S_ISDIR(info.st_mode))
    st = JG_FAIL(err, JG_ECONFIG, "%s is a folder, not an initial-condition table", path);
  if (st == JG_OK) st = read_rows(f, t, err);
  fclose(f);
  const gsl_interp_type *type = t->n >= 3 ? gsl_interp_steffen : gsl_interp_linear;
  for (int c = 0; st == JG_OK && c < 3; c++) {
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

const char *jg_perturb_start_table_path(const jg_perturb_start_table *t) { return t->path; }

void jg_perturb_start_table_range(const jg_perturb_start_table *t, double *k_min,
                                  double *k_max) {
  if (k_min) *k_min = exp(t->ln_k[0]);
  if (k_max) *k_max = exp(t->ln_k[t->n - 1]);
}

int jg_perturb_start_table_has_temperature(const jg_perturb_start_table *t) {
  return t->columns > COL_TEMPERATURE;
}

jg_status jg_perturb_start_table_at(const jg_perturb_start_table *t, double k,
                                    jg_perturb_start *out, jg_error *err) {
  if (!t || !out) return JG_FAIL(err, JG_EINVAL, "jg_perturb_start_table_at: NULL argument");
  const double x = log(k);
  /* The end points exactly, whatever exp/log rounding did to them. */
  const double lo = t->ln_k[0], hi = t->ln_k[t->n - 1];
  const double xc = (x < lo && x > lo - 1e-12) ? lo : (x > hi && x < hi + 1e-12) ? hi : x;
  if (!(k > 0.0) || !(xc >= lo && xc <= hi))
    return JG_FAIL(err, JG_EINVAL,
                   "k = %g /Mpc is outside the initial-condition table %s (it covers %g to %g "
                   "/Mpc)",
                   k, t->path, exp(lo), exp(hi));
  double v[3];
  for (int c = 0; c < 3; c++) v[c] = gsl_interp_eval(t->interp[c], t->ln_k, t->value[c], xc, NULL);
  out->density_ratio = v[0];
  out->velocity_ratio = v[1];
  out->temperature_ratio = v[2];
  return JG_OK;
}
