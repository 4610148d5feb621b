/*
 * Parameter scans (see include/jeansgrow/scan.h for the design and the
 * checkpoint format).
 *
 * Determinism is the organising idea: whatever the order in which points
 * finish (threads, MPI ranks, resumed runs, slices), every finished point is
 * first written to the checkpoint with its values in hexadecimal floating
 * point, which reads back to the same bits, and the table is then written
 * from the checkpoint in grid order. The bytes of the table depend only on
 * the scan, never on how it was run.
 *
 * Thread safety: a jg_scan is read-only after jg_scan_new; each thread uses
 * its own workspace; a checkpoint serialises its writers with its own mutex.
 * No global mutable state.
 */
#include "jeansgrow/scan.h"

#include <ctype.h>
#include <errno.h>
#include <fcntl.h>
#include <inttypes.h>
#include <limits.h>
#include <math.h>
#include <pthread.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "jeansgrow/background.h"
#include "jeansgrow/epochs.h"
#include "jeansgrow/jeans.h"
#include "jeansgrow/table.h"
#include "jeansgrow/version.h"
#include "jeansgrow/perturb.h"
#include "jeansgrow/report.h"
#include "jeansgrow/scales.h"
#include "../results/report_tables.h"
#include "../base/file_lock.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* A checkpoint is synced to the disk at least this often (seconds): often
 * enough that a crashed node loses at most this much work, rarely enough
 * that the sync costs nothing next to points of a few milliseconds. */
#define CHECKPOINT_SYNC_INTERVAL 1.0

#define CHECKPOINT_MAGIC "# jeansgrow scan checkpoint 1"

/* ------------------------------------------------------------------------ */
/* Hashing: FNV-1a, 64 bits. It guards against torn lines and tells scans
 * apart; it is not meant to resist deliberate forgery.                     */

#define FNV_OFFSET 0xcbf29ce484222325ULL
#define FNV_PRIME 0x100000001b3ULL

static uint64_t fnv1a(uint64_t h, const void *data, size_t n) {
  const unsigned char *p = data;
  for (size_t i = 0; i < n; i++) {
    h ^= p[i];
    h *= FNV_PRIME;
  }
  return h;
}

static double monotonic_seconds(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* ------------------------------------------------------------------------ */
/* The grid.                                                                 */

static const char *prefix_of(const char *origin, char *buf, size_t size) {
  if (origin && origin[0]) snprintf(buf, size, "%s: ", origin);
  else buf[0] = '\0';
  return buf;
}

static const jg_param_doc *doc_of(const char *key) {
  const jg_param_doc *d;
  for (int i = 0; (d = jg_param_doc_at(i)) != NULL; i++)
    if (strcmp(d->key, key) == 0) return d;
  return NULL;
}

long long jg_scan_grid_points(const jg_scan_grid *g) {
  if (!g || g->n_axes == 0) return 0;
  long long n = 1;
  for (int a = 0; a < g->n_axes; a++) n *= g->axes[a].count;
  return n;
}

/* The value i of a range (not its ends, which are FROM and TO exactly):
 * rounded to 15 significant digits, and a linear value lost in the rounding
 * noise of the range set to zero: 0.6:0.7:3 then holds 0.65, not
 * 0.6499999999999999, and `--set key=0.65` repeats the point exactly. */
static double range_value(const jg_scan_axis *ax, long long i) {
  const double t = (double)i / (double)(ax->count - 1);
  const double from = ax->from, to = ax->to;
  double x = ax->spacing == JG_SCAN_LOG ? exp(log(from) + (log(to) - log(from)) * t)
                                        : from + (to - from) * t;
  if (ax->spacing == JG_SCAN_LINEAR && fabs(x) < 1e-12 * fmax(fabs(from), fabs(to))) x = 0.0;
  char text[32];
  snprintf(text, sizeof text, "%.15g", x);
  return strtod(text, NULL);
}

double jg_scan_axis_value(const jg_scan_axis *ax, long long i) {
  if (ax->values) return ax->values[i];
  if (i <= 0) return ax->from;
  if (i >= ax->count - 1) return ax->to;
  return range_value(ax, i);
}

static int key_is_integer(const char *key) {
  const jg_param_doc *d = doc_of(key);
  return d && strcmp(d->type, "integer") == 0;
}

/* The checks every axis passes, whatever its spacing: a numeric key, not yet
 * varied, room for one more axis, a grid of bounded size, and values the key
 * can take (whole numbers for integer keys). A range is monotonic, so its
 * ends bound it; its inner values are only checked for being whole, which
 * keeps a range of 10^8 values cheap to check. */
static jg_status check_axis(const jg_scan_grid *g, const jg_scan_axis *ax, const char *pre,
                            jg_error *err) {
  const char *key = ax->key;
  if (g->n_axes >= JG_SCAN_MAX_AXES)
    return JG_FAIL(err, JG_EINVAL, "%stoo many varied keys (at most %d)", pre, JG_SCAN_MAX_AXES);
  if (key[0] == '\0') return JG_FAIL(err, JG_EINVAL, "%s'%s' is not a parameter key", pre, key);
  jg_params *scratch = malloc(sizeof *scratch);
  if (!scratch) return JG_FAIL(err, JG_ENOMEM, "%sout of memory", pre);
  jg_params_set_defaults(scratch);
  jg_error why;
  jg_error_clear(&why);
  jg_status st = JG_OK;
  if (!jg_params_key_is_numeric(key)) {
    jg_params_set_number(scratch, key, 0.0, &why);
    if (doc_of(key))
      st = JG_FAIL(err, JG_EINVAL, "%s%s; only number and integer keys can be varied "
                   "(jeansgrow keys lists them)", pre, why.message);
    else
      st = JG_FAIL(err, JG_EINVAL, "%s%s", pre, why.message);
  }
  const long count = ax->count;
  const int integer = key_is_integer(key);
  for (long i = 0; st == JG_OK && i < count; i++) {
    const int inner = ax->spacing != JG_SCAN_LIST && i > 0 && i < count - 1;
    if (inner && !integer) continue;
    const double v = jg_scan_axis_value(ax, i);
    if (inner && v == floor(v)) continue;
    if (jg_params_set_number(scratch, key, v, &why) != JG_OK)
      st = JG_FAIL(err, JG_EINVAL, "%s%s (value %ld of %ld)", pre, why.message, i + 1, count);
  }
  free(scratch);
  if (st != JG_OK) return st;
  for (int a = 0; a < g->n_axes; a++)
    if (strcmp(g->axes[a].key, key) == 0)
      return JG_FAIL(err, JG_EINVAL, "%s%s is varied twice (once per key; list the values "
                     "instead)", pre, key);
  long long n = g->n_axes ? jg_scan_grid_points(g) : 1;
  if ((double)n * (double)count > (double)JG_SCAN_MAX_POINTS)
    return JG_FAIL(err, JG_EINVAL, "%sthe grid would hold %.0f points (at most %lld)", pre,
                   (double)n * (double)count, JG_SCAN_MAX_POINTS);
  return JG_OK;
}

/* Check the axis and, if it passes, append it (taking `values`, which is
 * NULL for a range). */
static jg_status push_axis(jg_scan_grid *g, const char *key, jg_scan_spacing spacing,
                           double from, double to, double *values, long count, const char *pre,
                           jg_error *err) {
  jg_scan_axis ax;
  memset(&ax, 0, sizeof ax);
  if (strlen(key) >= JG_SCAN_KEY_SIZE) {
    free(values);
    return JG_FAIL(err, JG_EINVAL, "%s'%s' is not a parameter key", pre, key);
  }
  snprintf(ax.key, sizeof ax.key, "%s", key);
  ax.spacing = spacing;
  ax.from = from;
  ax.to = to;
  ax.count = (int)count;
  ax.values = values;
  jg_status st = check_axis(g, &ax, pre, err);
  if (st != JG_OK) {
    free(values);
    return st;
  }
  g->axes[g->n_axes++] = ax;
  return JG_OK;
}

jg_status jg_scan_grid_add_range(jg_scan_grid *g, const char *key, double from, double to,
                                 long count, jg_scan_spacing spacing, const char *origin,
                                 jg_error *err) {
  char pre[1024];
  prefix_of(origin, pre, sizeof pre);
  if (!g || !key) return JG_FAIL(err, JG_EINVAL, "%sno grid or key given (NULL)", pre);
  if (spacing != JG_SCAN_LINEAR && spacing != JG_SCAN_LOG)
    return JG_FAIL(err, JG_EINVAL, "%sa range needs linear or log spacing", pre);
  if (count < 1)
    return JG_FAIL(err, JG_EINVAL, "%sthe number of values N must be at least 1 (got %ld)", pre,
                   count);
  if (count > JG_SCAN_MAX_POINTS)
    return JG_FAIL(err, JG_EINVAL, "%sN = %ld values is more than a grid may hold (%lld)", pre,
                   count, JG_SCAN_MAX_POINTS);
  if (!isfinite(from) || !isfinite(to))
    return JG_FAIL(err, JG_EINVAL, "%sFROM and TO must be finite numbers (got %g and %g)", pre,
                   from, to);
  if (from > to)
    return JG_FAIL(err, JG_EINVAL, "%sFROM = %.10g is above TO = %.10g (reversed range; give "
                   "the values as a list [...] for a descending order)", pre, from, to);
  if (spacing == JG_SCAN_LOG && !(from > 0))
    return JG_FAIL(err, JG_EINVAL, "%slog spacing needs 0 < FROM <= TO (got FROM = %.10g)", pre,
                   from);
  if (count == 1 && from != to)
    return JG_FAIL(err, JG_EINVAL, "%sN = 1 needs FROM = TO (got %.10g and %.10g)", pre, from,
                   to);
  /* The values are computed from their index when needed (range_value):
   * a grid of 10^8 points holds no list of them. */
  return push_axis(g, key, spacing, from, to, NULL, count, pre, err);
}

jg_status jg_scan_grid_add_list(jg_scan_grid *g, const char *key, const double *values,
                                long count, const char *origin, jg_error *err) {
  char pre[1024];
  prefix_of(origin, pre, sizeof pre);
  if (!g || !key || (!values && count > 0))
    return JG_FAIL(err, JG_EINVAL, "%sno grid, key or values given (NULL)", pre);
  if (count < 1) return JG_FAIL(err, JG_EINVAL, "%sthe list of values is empty", pre);
  if (count > JG_SCAN_MAX_POINTS)
    return JG_FAIL(err, JG_EINVAL, "%s%ld values is more than a grid may hold (%lld)", pre,
                   count, JG_SCAN_MAX_POINTS);
  for (long i = 0; i < count; i++)
    if (!isfinite(values[i]))
      return JG_FAIL(err, JG_EINVAL, "%svalue %ld of the list is not a finite number (got %g)",
                     pre, i + 1, values[i]);
  double *v = malloc(sizeof(double) * (size_t)count);
  if (!v) return JG_FAIL(err, JG_ENOMEM, "%sout of memory for %ld values", pre, count);
  memcpy(v, values, sizeof(double) * (size_t)count);
  return push_axis(g, key, JG_SCAN_LIST, v[0], v[count - 1], v, count, pre, err);
}

static const char *skip_space(const char *s) {
  while (isspace((unsigned char)*s)) s++;
  return s;
}

/* A number filling `text` exactly (surrounding blanks allowed). */
static int parse_number(const char *text, size_t n, double *out) {
  char buf[128];
  if (n == 0 || n >= sizeof buf) return 0;
  memcpy(buf, text, n);
  buf[n] = '\0';
  const char *s = skip_space(buf);
  if (!*s) return 0;
  char *end;
  errno = 0;
  *out = strtod(s, &end);
  return *skip_space(end) == '\0';
}

jg_status jg_scan_grid_parse(jg_scan_grid *g, const char *text, const char *origin,
                             jg_error *err) {
  char where[1280];
  if (!text) return JG_FAIL(err, JG_EINVAL, "%s: no grid text given (NULL)", origin ? origin : "");
  snprintf(where, sizeof where, "%s%s%s", origin ? origin : "", origin ? " " : "", text);
  static const char *const syntax = "expected KEY=FROM:TO:N, KEY=FROM:TO:N:log or KEY=[V1, V2, ...]";
  const char *eq = strchr(text, '=');
  if (!eq) return JG_FAIL(err, JG_EINVAL, "%s: %s", where, syntax);
  char key[JG_SCAN_KEY_SIZE + 1];
  const char *k0 = skip_space(text), *k1 = eq;
  while (k1 > k0 && isspace((unsigned char)k1[-1])) k1--;
  if (k1 == k0) return JG_FAIL(err, JG_EINVAL, "%s: no key before '=' (%s)", where, syntax);
  if ((size_t)(k1 - k0) >= sizeof key - 1)
    return JG_FAIL(err, JG_EINVAL, "%s: '%.*s' is not a parameter key", where, (int)(k1 - k0), k0);
  memcpy(key, k0, (size_t)(k1 - k0));
  key[k1 - k0] = '\0';
  const char *v = skip_space(eq + 1);

  if (*v == '[') {
    const char *close = strchr(v, ']');
    if (!close || *skip_space(close + 1) != '\0')
      return JG_FAIL(err, JG_EINVAL, "%s: a list is written [V1, V2, ...] with nothing after ']'",
                     where);
    long n = 0, cap = 16;
    double *vals = malloc(sizeof(double) * (size_t)cap);
    if (!vals) return JG_FAIL(err, JG_ENOMEM, "%s: out of memory", where);
    const char *p = v + 1;
    jg_status st = JG_OK;
    if (*skip_space(p) != ']') {
      for (;;) {
        const char *comma = p;
        while (comma < close && *comma != ',') comma++;
        double x;
        if (!parse_number(p, (size_t)(comma - p), &x)) {
          const char *e0 = skip_space(p), *e1 = comma;
          while (e1 > e0 && isspace((unsigned char)e1[-1])) e1--;
          if (e1 < e0) e1 = e0;
          st = JG_FAIL(err, JG_EINVAL, "%s: element %ld of the list is not a number ('%.*s')",
                       where, n + 1, (int)(e1 - e0), e0);
          break;
        }
        if (n == cap) {
          double *bigger = realloc(vals, sizeof(double) * (size_t)(cap *= 2));
          if (!bigger) {
            st = JG_FAIL(err, JG_ENOMEM, "%s: out of memory", where);
            break;
          }
          vals = bigger;
        }
        vals[n++] = x;
        if (comma == close) break;
        p = comma + 1;
      }
    }
    if (st == JG_OK) st = jg_scan_grid_add_list(g, key, vals, n, where, err);
    free(vals);
    return st;
  }

  /* FROM:TO:N[:spacing] */
  const char *field[5];
  size_t len[5];
  int nf = 0;
  const char *p = v;
  for (;;) {
    const char *colon = strchr(p, ':');
    if (nf == 5) break;
    field[nf] = p;
    len[nf] = colon ? (size_t)(colon - p) : strlen(p);
    nf++;
    if (!colon) break;
    p = colon + 1;
  }
  if (nf < 3 || nf > 4) return JG_FAIL(err, JG_EINVAL, "%s: %s", where, syntax);
  double from, to, count_d;
  if (!parse_number(field[0], len[0], &from))
    return JG_FAIL(err, JG_EINVAL, "%s: FROM is not a number ('%.*s')", where, (int)len[0],
                   field[0]);
  if (!parse_number(field[1], len[1], &to))
    return JG_FAIL(err, JG_EINVAL, "%s: TO is not a number ('%.*s')", where, (int)len[1],
                   field[1]);
  if (!parse_number(field[2], len[2], &count_d) || count_d != floor(count_d) ||
      fabs(count_d) > 1e15)
    return JG_FAIL(err, JG_EINVAL, "%s: N must be a whole number of values (got '%.*s')", where,
                   (int)len[2], field[2]);
  jg_scan_spacing spacing = JG_SCAN_LINEAR;
  if (nf == 4) {
    char word[16] = "";
    const char *w = skip_space(field[3]);
    size_t wl = len[3] - (size_t)(w - field[3]);
    while (wl > 0 && isspace((unsigned char)w[wl - 1])) wl--;
    if (wl < sizeof word) memcpy(word, w, wl), word[wl] = '\0';
    if (strcmp(word, "log") == 0) spacing = JG_SCAN_LOG;
    else if (strcmp(word, "linear") == 0 || strcmp(word, "lin") == 0) spacing = JG_SCAN_LINEAR;
    else
      return JG_FAIL(err, JG_EINVAL, "%s: the spacing must be 'log' or 'linear' (got '%.*s')",
                     where, (int)len[3], field[3]);
  }
  return jg_scan_grid_add_range(g, key, from, to, (long)count_d, spacing, where, err);
}

void jg_scan_grid_values(const jg_scan_grid *g, long long index, double *values) {
  for (int a = g->n_axes - 1; a >= 0; a--) {
    const jg_scan_axis *ax = &g->axes[a];
    values[a] = jg_scan_axis_value(ax, index % ax->count);
    index /= ax->count;
  }
}

jg_status jg_scan_grid_apply(const jg_scan_grid *g, long long index, jg_params *p,
                             jg_error *err) {
  double v[JG_SCAN_MAX_AXES];
  jg_scan_grid_values(g, index, v);
  for (int a = 0; a < g->n_axes; a++) {
    jg_status st = jg_params_set_number(p, g->axes[a].key, v[a], err);
    if (st != JG_OK) return st;
  }
  return JG_OK;
}

void jg_scan_grid_clear(jg_scan_grid *g) {
  if (!g) return;
  for (int a = 0; a < g->n_axes; a++) free(g->axes[a].values);
  memset(g, 0, sizeof *g);
}

static void grid_truncate(jg_scan_grid *g, int n_axes) {
  while (g->n_axes > n_axes) {
    g->n_axes--;
    free(g->axes[g->n_axes].values);
    memset(&g->axes[g->n_axes], 0, sizeof g->axes[g->n_axes]);
  }
}

/* ---- the scan group of a parameter file ---------------------------------- */

/* One axis of the file's scan.vary, read by the parameter module. */
static jg_status add_file_axis(void *grid, const jg_param_axis *a, jg_error *err) {
  jg_scan_grid *g = grid;
  if (a->text) return jg_scan_grid_parse(g, a->text, a->where, err);
  if (a->values) return jg_scan_grid_add_list(g, a->key, a->values, a->n_values, a->where, err);
  return jg_scan_grid_add_range(g, a->key, a->from, a->to, a->count,
                                a->log_spacing ? JG_SCAN_LOG : JG_SCAN_LINEAR, a->where, err);
}

jg_status jg_scan_grid_read_file(jg_scan_grid *g, const char *path, jg_error *err) {
  if (!g || !path) return JG_FAIL(err, JG_EINVAL, "jg_scan_grid_read_file: NULL argument");
  const int n_before = g->n_axes;
  jg_status st = jg_params_read_scan(path, add_file_axis, g, err);
  if (st != JG_OK) grid_truncate(g, n_before);
  return st;
}

/* ------------------------------------------------------------------------ */
/* The built-in evaluator: epochs and the isothermal Jeans scale.            */

static const char *const thermal_point_columns[JG_SCAN_THERMAL_POINT_COLUMNS] = {
    "z_star", "z_drag", "z_gas_decoupling"};
static const char *const thermal_redshift_columns[JG_SCAN_THERMAL_REDSHIFT_COLUMNS] = {
    "T_gas[K]", "x_e", "k_J[1/Mpc]", "M_J[Msun]"};
static const char *const thermal_conventions[] = {
    "z_star: Thomson optical depth tau = 1; z_drag: baryon drag depth = 1; "
    "z_gas_decoupling: T_gas / T_rad = 0.9",
    "x_e = n_e / n_H; k_J: comoving Jeans wavenumber of the isothermal gas, "
    "c_s^2 = k_B T_gas / (mu m_H) (gamma = 1), total matter density as the source",
    "M_J: mass inside the sphere of comoving radius pi / k_J at the mean matter density",
    NULL};

jg_status jg_scan_thermal_columns(const jg_thermal *th, const jg_params *p,
                                  double *point_values, double *redshift_values, int stride,
                                  jg_error *err) {
  jg_epochs e;
  jg_status st = jg_epochs_compute(th, &e, err);
  if (st != JG_OK) return st;
  point_values[0] = e.z_star;
  point_values[1] = e.z_drag;
  point_values[2] = e.z_gas_decoupling;
  const jg_background *bg = jg_thermal_background(th);
  for (int j = 0; j < p->output.n_redshifts; j++) {
    double z = p->output.redshifts[j];
    jg_thermal_state s;
    jg_thermal_state_at(th, z, &s);
    double cs2 = jg_sound_speed_squared(s.T_gas, s.mu, 1.0);
    double k_J = jg_jeans_wavenumber(bg, 1.0 / (1.0 + z), cs2);
    double *row = redshift_values + (size_t)j * (size_t)stride;
    row[0] = s.T_gas;
    row[1] = s.x_e;
    row[2] = k_J;
    row[3] = jg_mass_half_wavelength(bg, k_J);
  }
  return JG_OK;
}

static jg_status thermal_evaluate(const jg_params *p, double *point_values,
                                  double *redshift_values, void *workspace, jg_error *err) {
  (void)workspace;
  jg_background *bg = jg_background_new(&p->cosmology, err);
  if (!bg) return err ? err->status : JG_EINVAL;
  jg_thermal *th = jg_thermal_new(bg, &p->thermal, err);
  jg_status st = th ? JG_OK : (err ? err->status : JG_ENUMERIC);
  if (st == JG_OK)
    st = jg_scan_thermal_columns(th, p, point_values, redshift_values,
                                 JG_SCAN_THERMAL_REDSHIFT_COLUMNS, err);
  jg_thermal_free(th);
  jg_background_free(bg);
  return st;
}

static const jg_scan_evaluator thermal_evaluator = {
    "thermal (epochs, T_gas, x_e, isothermal Jeans scale)",
    JG_SCAN_THERMAL_POINT_COLUMNS,
    thermal_point_columns,
    JG_SCAN_THERMAL_REDSHIFT_COLUMNS,
    thermal_redshift_columns,
    thermal_conventions,
    NULL,
    NULL,
    thermal_evaluate};

const jg_scan_evaluator *jg_scan_evaluator_thermal(void) { return &thermal_evaluator; }

/* ---- the scales evaluator: what `jeansgrow scales` reports, per point ---- */

/* The `scales` table's columns without its leading `z` (the scan writes z). */
#define SCALES_REDSHIFT_COLUMNS (JG__REPORT_SCALES_COLUMNS - 1)

/* The evaluator carries its units itself rather than reading
 * p->output.units, so that its values always match its column names. */
static jg_status scales_evaluate(const jg_params *p, jg_output_units units, double *point_values,
                                 double *redshift_values, jg_error *err) {
  const int n_z = p->output.n_redshifts;
  jg_scales_point *s = malloc(sizeof *s * (size_t)n_z);
  if (!s) return JG_FAIL(err, JG_ENOMEM, "out of memory for the scales of a scan point");
  jg_background *bg = jg_background_new(&p->cosmology, err);
  jg_thermal *th = bg ? jg_thermal_new(bg, &p->thermal, err) : NULL;
  jg_perturb_model *m = th ? jg_perturb_model_new(th, &p->perturbations, NULL, err) : NULL;
  jg_perturb_workspace *w = m ? jg_perturb_workspace_new(m, err) : NULL;
  jg_status st = w ? JG_OK : (err && err->status != JG_OK ? err->status : JG_ENUMERIC);
  if (st == JG_OK) {
    jg_epochs e;
    st = jg_epochs_compute(th, &e, err);
    point_values[0] = e.z_star;
    point_values[1] = e.z_drag;
    point_values[2] = e.z_gas_decoupling;
  }
  if (st == JG_OK) st = jg_scales_compute(m, w, p->output.redshifts, n_z, s, err);
  double row[SCALES_REDSHIFT_COLUMNS + 1];
  for (int j = 0; st == JG_OK && j < n_z; j++) {
    jg_report_scales_row(th, &s[j], units, row);
    memcpy(redshift_values + (size_t)j * SCALES_REDSHIFT_COLUMNS, row + 1,
           sizeof(double) * SCALES_REDSHIFT_COLUMNS);
  }
  jg_perturb_workspace_free(w);
  jg_perturb_model_free(m);
  jg_thermal_free(th);
  jg_background_free(bg);
  free(s);
  return st;
}

static jg_status scales_evaluate_mpc(const jg_params *p, double *point_values,
                                     double *redshift_values, void *workspace, jg_error *err) {
  (void)workspace;
  return scales_evaluate(p, JG_UNITS_MPC, point_values, redshift_values, err);
}

static jg_status scales_evaluate_mpc_h(const jg_params *p, double *point_values,
                                       double *redshift_values, void *workspace, jg_error *err) {
  (void)workspace;
  return scales_evaluate(p, JG_UNITS_MPC_H, point_values, redshift_values, err);
}

/* The report module owns the names and conventions. */
static const jg_scan_evaluator scales_evaluators[] = {
    [JG_UNITS_MPC] = {"scales (epochs; Jeans, filtering and half-suppression scales as jeansgrow "
                      "scales)",
                      JG_SCAN_THERMAL_POINT_COLUMNS, thermal_point_columns,
                      SCALES_REDSHIFT_COLUMNS, jg__report_scales_columns[JG_UNITS_MPC] + 1,
                      jg__report_scales_conventions[JG_UNITS_MPC], NULL, NULL,
                      scales_evaluate_mpc},
    [JG_UNITS_MPC_H] = {"scales (epochs; Jeans, filtering and half-suppression scales as "
                        "jeansgrow scales), in h units",
                        JG_SCAN_THERMAL_POINT_COLUMNS, thermal_point_columns,
                        SCALES_REDSHIFT_COLUMNS, jg__report_scales_columns[JG_UNITS_MPC_H] + 1,
                        jg__report_scales_conventions[JG_UNITS_MPC_H], NULL, NULL,
                        scales_evaluate_mpc_h}};

const jg_scan_evaluator *jg_scan_evaluator_scales(jg_output_units units) {
  return &scales_evaluators[units == JG_UNITS_MPC_H ? JG_UNITS_MPC_H : JG_UNITS_MPC];
}

/* ------------------------------------------------------------------------ */
/* The scan.                                                                 */

struct jg_scan {
  jg_params base;
  jg_scan_grid grid;
  const jg_scan_evaluator *ev;
  int part_index, part_count;
  long long total, first, count;
  int n_z, n_values;
  char fingerprint[17];
  int n_columns;
  char **columns; /* the table's column names */
};

static int column_name_ok(const char *name) {
  return name && name[0] && !strpbrk(name, "\t\n\r");
}

static jg_status check_evaluator(const jg_scan_evaluator *ev, jg_error *err) {
  if (!ev || !ev->evaluate || ev->n_point_columns < 0 || ev->n_redshift_columns < 0 ||
      ev->n_point_columns + ev->n_redshift_columns == 0 ||
      (ev->n_point_columns && !ev->point_columns) ||
      (ev->n_redshift_columns && !ev->redshift_columns) ||
      (!ev->workspace_new) != (!ev->workspace_free))
    return JG_FAIL(err, JG_EINVAL, "scan evaluator: incomplete (needs evaluate, columns, and "
                   "both workspace functions or neither)");
  for (int i = 0; i < ev->n_point_columns; i++)
    if (!column_name_ok(ev->point_columns[i]))
      return JG_FAIL(err, JG_EINVAL, "scan evaluator: point column %d has no usable name", i);
  for (int i = 0; i < ev->n_redshift_columns; i++)
    if (!column_name_ok(ev->redshift_columns[i]))
      return JG_FAIL(err, JG_EINVAL, "scan evaluator: redshift column %d has no usable name", i);
  return JG_OK;
}

static jg_status copy_grid(jg_scan_grid *dst, const jg_scan_grid *src, jg_error *err) {
  memset(dst, 0, sizeof *dst);
  for (int a = 0; a < src->n_axes; a++) {
    const jg_scan_axis *ax = &src->axes[a];
    double *v = NULL;
    if (ax->values && !(v = malloc(sizeof(double) * (size_t)ax->count))) {
      jg_scan_grid_clear(dst);
      return JG_FAIL(err, JG_ENOMEM, "out of memory copying the scan grid");
    }
    if (v) memcpy(v, ax->values, sizeof(double) * (size_t)ax->count);
    dst->axes[a] = *ax;
    dst->axes[a].values = v;
    dst->n_axes = a + 1;
  }
  return JG_OK;
}

static char *dup_string(const char *s) {
  size_t n = strlen(s) + 1;
  char *d = malloc(n);
  if (d) memcpy(d, s, n);
  return d;
}

static jg_status build_columns(jg_scan *s, jg_error *err) {
  const jg_scan_evaluator *ev = s->ev;
  s->n_columns = s->grid.n_axes + 1 + ev->n_point_columns + ev->n_redshift_columns;
  s->columns = calloc((size_t)s->n_columns, sizeof *s->columns);
  if (!s->columns) return JG_FAIL(err, JG_ENOMEM, "out of memory");
  int c = 0;
  for (int a = 0; a < s->grid.n_axes; a++) {
    const jg_param_doc *d = doc_of(s->grid.axes[a].key);
    char name[JG_SCAN_KEY_SIZE + 64];
    if (d && d->unit[0]) snprintf(name, sizeof name, "%s[%s]", s->grid.axes[a].key, d->unit);
    else snprintf(name, sizeof name, "%s", s->grid.axes[a].key);
    s->columns[c++] = dup_string(name);
  }
  s->columns[c++] = dup_string("z");
  for (int i = 0; i < ev->n_point_columns; i++) s->columns[c++] = dup_string(ev->point_columns[i]);
  for (int i = 0; i < ev->n_redshift_columns; i++)
    s->columns[c++] = dup_string(ev->redshift_columns[i]);
  for (int i = 0; i < s->n_columns; i++)
    if (!s->columns[i]) return JG_FAIL(err, JG_ENOMEM, "out of memory");
  return JG_OK;
}

/* Exact text of a double that reads back to the same bits. */
static void format_exact(char *buf, size_t size, double v) {
  for (int digits = 6; digits <= 17; digits++) {
    snprintf(buf, size, "%.*g", digits, v);
    if (strtod(buf, NULL) == v) return;
  }
}

/* The axis as a user would write it: "KEY = FROM:TO:N:log" or "KEY = [..]". */
static void write_axis(FILE *f, const jg_scan_axis *ax) {
  char a[64], b[64];
  fprintf(f, "%s = ", ax->key);
  if (ax->spacing == JG_SCAN_LIST) {
    fputc('[', f);
    for (int i = 0; i < ax->count; i++) {
      format_exact(a, sizeof a, jg_scan_axis_value(ax, i));
      fprintf(f, "%s%s", i ? ", " : "", a);
    }
    fputc(']', f);
  } else {
    format_exact(a, sizeof a, ax->from);
    format_exact(b, sizeof b, ax->to);
    fprintf(f, "%s:%s:%d:%s", a, b, ax->count, ax->spacing == JG_SCAN_LOG ? "log" : "linear");
  }
}

static jg_status compute_fingerprint(jg_scan *s, jg_error *err) {
  char *text = NULL;
  size_t size = 0;
  FILE *f = open_memstream(&text, &size);
  if (!f) return JG_FAIL(err, JG_ENOMEM, "out of memory");
  fprintf(f, "jeansgrow scan 1\nversion %s\nevaluator %s\n", JG_VERSION_STRING, s->ev->name);
  for (int i = 0; i < s->n_columns; i++) fprintf(f, "column %s\n", s->columns[i]);
  jg_params_write_header(f, &s->base);
  if (fclose(f) != 0 || !text) {
    free(text);
    return JG_FAIL(err, JG_ENOMEM, "out of memory");
  }
  uint64_t h = fnv1a(FNV_OFFSET, text, size);
  free(text);
  /* A range is identified by its exact ends, count and spacing (the
   * program version, hashed above, fixes how its values follow), a list by
   * its exact values, hashed as they are formatted: a grid of 10^8 values
   * is neither held as text nor formatted value by value. FNV-1a runs over
   * the pieces as over their concatenation. */
  char piece[JG_SCAN_KEY_SIZE + 96];
  for (int a = 0; a < s->grid.n_axes; a++) {
    const jg_scan_axis *ax = &s->grid.axes[a];
    int n = snprintf(piece, sizeof piece, "axis %s %d %d", ax->key, (int)ax->spacing, ax->count);
    h = fnv1a(h, piece, (size_t)n);
    if (!ax->values) {
      n = snprintf(piece, sizeof piece, " from %a to %a", ax->from, ax->to);
      h = fnv1a(h, piece, (size_t)n);
    }
    for (long long i = 0; ax->values && i < ax->count; i++) {
      n = snprintf(piece, sizeof piece, " %a", ax->values[i]);
      h = fnv1a(h, piece, (size_t)n);
    }
    h = fnv1a(h, "\n", 1);
  }
  snprintf(s->fingerprint, sizeof s->fingerprint, "%016" PRIx64, h);
  return JG_OK;
}

void jg_scan_describe_point(const jg_scan *s, long long index, char *buf, size_t size) {
  double v[JG_SCAN_MAX_AXES];
  jg_scan_grid_values(&s->grid, index, v);
  size_t used = 0;
  buf[0] = '\0';
  for (int a = 0; a < s->grid.n_axes && used < size; a++) {
    char num[64];
    format_exact(num, sizeof num, v[a]);
    int w = snprintf(buf + used, size - used, "%s%s = %s", a ? ", " : "", s->grid.axes[a].key, num);
    if (w < 0) break;
    used += (size_t)w;
  }
}

/* Grids up to this size are checked point by point before any work; a
 * larger one at its corners and this many points spread over it. A point's
 * background costs 40-150 microseconds: a few seconds for the whole. */
#define SCAN_CHECKED_POINTS 20000LL

/* Point `index` as a model: its parameters and its background. `last`
 * remembers the last cosmology built, which consecutive points often share
 * (when only later axes vary). */
static jg_status check_point(const jg_scan *s, long long index, jg_params *p, jg_cosmology *last,
                             int *have_last, jg_error *why) {
  jg_error_clear(why);
  *p = s->base;
  jg_status st = jg_scan_grid_apply(&s->grid, index, p, why);
  if (st == JG_OK) st = jg_params_validate(p, why);
  if (st != JG_OK || (*have_last && memcmp(last, &p->cosmology, sizeof *last) == 0)) return st;
  jg_background *bg = jg_background_new(&p->cosmology, why);
  if (!bg) return why->status != JG_OK ? why->status : JG_EINVAL;
  *last = p->cosmology;
  *have_last = 1;
  jg_background_free(bg);
  return JG_OK;
}

/* The k-th of the points checked before any work, k < points_checked(s):
 * every point of a grid up to SCAN_CHECKED_POINTS; in a larger grid, its
 * 2^axes corners, then SCAN_CHECKED_POINTS points spread evenly over it. */
static long long points_checked(const jg_scan *s) {
  return s->total <= SCAN_CHECKED_POINTS ? s->total
                                         : (1LL << s->grid.n_axes) + SCAN_CHECKED_POINTS;
}

static long long checked_point(const jg_scan *s, long long k) {
  if (s->total <= SCAN_CHECKED_POINTS) return k;
  const long long corners = 1LL << s->grid.n_axes;
  if (k >= corners) {
    k -= corners;
    return (long long)((double)k / (double)(SCAN_CHECKED_POINTS - 1) * (double)(s->total - 1));
  }
  long long index = 0;
  for (int a = 0; a < s->grid.n_axes; a++) {
    const int end = (int)(k >> a & 1) ? s->grid.axes[a].count - 1 : 0;
    index = index * s->grid.axes[a].count + end;
  }
  return index;
}

/* Every grid point must make a valid parameter set and background before
 * any work starts: a bad corner found after hours of computing is the
 * failure this prevents. A grid too large to check in seconds is checked
 * at its corners and at SCAN_CHECKED_POINTS points spread over it; any
 * other bad point is found when its turn comes (jg_scan_evaluate checks it
 * again) and is listed as failed with the reason, without stopping the
 * others. */
static jg_status validate_points(const jg_scan *s, jg_error *err) {
  /* The table is the same file at every point (a scan varies numbers only). */
  jg_status table_st = jg_perturb_check_start_table(&s->base.perturbations, err);
  if (table_st != JG_OK) return table_st;
  jg_params *p = malloc(sizeof *p);
  jg_cosmology *last = malloc(sizeof *last);
  if (!p || !last) {
    free(p);
    free(last);
    return JG_FAIL(err, JG_ENOMEM, "out of memory");
  }
  int have_last = 0;
  jg_status st = JG_OK;
  jg_error why;
  const long long n = points_checked(s);
  for (long long k = 0; st == JG_OK && k < n; k++) {
    const long long i = checked_point(s, k);
    jg_status pst = check_point(s, i, p, last, &have_last, &why);
    if (pst == JG_ENOMEM) {
      st = JG_FAIL(err, JG_ENOMEM, "out of memory checking the scan grid");
    } else if (pst != JG_OK) {
      char desc[1024];
      jg_scan_describe_point(s, i, desc, sizeof desc);
      st = JG_FAIL(err, JG_EINVAL, "scan point %lld of %lld (%s) is not a valid model: %s", i + 1,
                   s->total, desc, why.message);
    }
  }
  free(p);
  free(last);
  return st;
}

jg_status jg_scan_new(const jg_params *base, const jg_scan_grid *grid,
                      const jg_scan_evaluator *ev, int part_index, int part_count,
                      jg_scan **out, jg_error *err) {
  if (!out) return JG_FAIL(err, JG_EINVAL, "jg_scan_new: no place for the result (NULL)");
  *out = NULL;
  if (!base || !grid) return JG_FAIL(err, JG_EINVAL, "jg_scan_new: NULL argument");
  jg_status st = check_evaluator(ev, err);
  if (st != JG_OK) return st;
  long long total = jg_scan_grid_points(grid);
  if (total < 1)
    return JG_FAIL(err, JG_EINVAL, "nothing to vary: the scan grid has no axes (give "
                   "--vary KEY=FROM:TO:N or a scan.vary list in the parameter file)");
  if (part_count < 1 || part_index < 1 || part_index > part_count)
    return JG_FAIL(err, JG_EINVAL, "part %d/%d: write I/N with 1 <= I <= N", part_index,
                   part_count);
  if (part_count > total)
    return JG_FAIL(err, JG_EINVAL, "part %d/%d: the grid has only %lld points, so at most %lld "
                   "parts", part_index, part_count, total, total);
  jg_scan *s = calloc(1, sizeof *s);
  if (!s) return JG_FAIL(err, JG_ENOMEM, "out of memory");
  s->base = *base;
  s->ev = ev;
  s->part_index = part_index;
  s->part_count = part_count;
  s->total = total;
  /* Contiguous near-equal blocks: the first total % N slices get one more. */
  long long q = total / part_count, r = total % part_count, i0 = part_index - 1;
  s->count = q + (i0 < r);
  s->first = i0 * q + (i0 < r ? i0 : r);
  s->n_z = base->output.n_redshifts;
  s->n_values = ev->n_point_columns + s->n_z * ev->n_redshift_columns;
  st = copy_grid(&s->grid, grid, err);
  if (st == JG_OK) st = build_columns(s, err);
  if (st == JG_OK) st = compute_fingerprint(s, err);
  if (st == JG_OK) st = validate_points(s, err);
  if (st != JG_OK) {
    jg_scan_free(s);
    return st;
  }
  *out = s;
  return JG_OK;
}

void jg_scan_free(jg_scan *s) {
  if (!s) return;
  if (s->columns)
    for (int i = 0; i < s->n_columns; i++) free(s->columns[i]);
  free(s->columns);
  jg_scan_grid_clear(&s->grid);
  free(s);
}

long long jg_scan_total_points(const jg_scan *s) { return s->total; }
long long jg_scan_first_point(const jg_scan *s) { return s->first; }
long long jg_scan_slice_points(const jg_scan *s) { return s->count; }
int jg_scan_redshifts(const jg_scan *s) { return s->n_z; }
int jg_scan_values_per_point(const jg_scan *s) { return s->n_values; }
const jg_scan_grid *jg_scan_grid_of(const jg_scan *s) { return &s->grid; }
const char *jg_scan_fingerprint(const jg_scan *s) { return s->fingerprint; }

/* ---- evaluation ---------------------------------------------------------- */

typedef struct scan_workspace {
  jg_params p; /* the point's parameters: too large for a thread's stack to spare lightly */
  void *user;
} scan_workspace;

void *jg_scan_workspace_new(const jg_scan *s, jg_error *err) {
  scan_workspace *w = calloc(1, sizeof *w);
  if (!w) {
    JG_FAIL(err, JG_ENOMEM, "out of memory for a scan workspace");
    return NULL;
  }
  if (s->ev->workspace_new && !(w->user = s->ev->workspace_new(&s->base))) {
    free(w);
    JG_FAIL(err, JG_ENOMEM, "out of memory for the evaluator's workspace");
    return NULL;
  }
  return w;
}

void jg_scan_workspace_free(const jg_scan *s, void *workspace) {
  scan_workspace *w = workspace;
  if (!w) return;
  if (s->ev->workspace_free && w->user) s->ev->workspace_free(w->user);
  free(w);
}

jg_status jg_scan_evaluate(const jg_scan *s, long long index, void *workspace, double *values,
                           jg_error *err) {
  scan_workspace *w = workspace;
  if (index < 0 || index >= s->total)
    return JG_FAIL(err, JG_EINVAL, "scan point %lld is outside the grid (0 to %lld)", index,
                   s->total - 1);
  w->p = s->base;
  jg_status st = jg_scan_grid_apply(&s->grid, index, &w->p, err);
  /* Points of a large grid not checked by validate_points are checked
   * here, at the cost of a parameter check next to a whole evaluation. */
  if (st == JG_OK) st = jg_params_validate(&w->p, err);
  if (st != JG_OK) return st;
  const jg_scan_evaluator *ev = s->ev;
  st = ev->evaluate(&w->p, values, values + ev->n_point_columns, w->user, err);
  if (st != JG_OK) {
    if (err && !err->message[0]) JG_FAIL(err, st, "%s", jg_strerror(st));
    return st;
  }
  for (int i = 0; i < s->n_values; i++) {
    if (isfinite(values[i])) continue;
    if (i < ev->n_point_columns)
      return JG_FAIL(err, JG_ENUMERIC, "%s is not finite (%g)", ev->point_columns[i], values[i]);
    int j = (i - ev->n_point_columns) / ev->n_redshift_columns;
    int c = (i - ev->n_point_columns) % ev->n_redshift_columns;
    return JG_FAIL(err, JG_ENUMERIC, "%s is not finite (%g) at z = %g", ev->redshift_columns[c],
                   values[i], s->base.output.redshifts[j]);
  }
  return JG_OK;
}

/* ------------------------------------------------------------------------ */
/* The checkpoint.                                                           */

struct jg_scan_checkpoint {
  const jg_scan *s;
  char *path;            /* NULL: anonymous */
  FILE *f;
  /* Per point of the slice: 1 + where its record starts, 0 if none. Zero
   * means "none" so that the index is a fresh anonymous mapping, never
   * written before use: the system gives its pages memory only as points
   * finish, and a grid of 10^8 points starts at once (see index_new). */
  long long *offset;
  size_t offset_bytes;
  long long end;         /* where the next record goes */
  long long done, failed, resumed;
  char *buf;             /* one record's text, under the lock */
  size_t buf_size;
  double last_sync;
  pthread_mutex_t lock;
};

/* A zeroed array of n offsets, mapped directly rather than taken from the
 * allocator, which may write into large blocks (an allocator that
 * checks memory, for one, marks the whole block at once). NULL when out of
 * memory. */
static long long *index_new(size_t n, size_t *bytes) {
  *bytes = (n > 0 ? n : 1) * sizeof(long long);
  void *p = mmap(NULL, *bytes, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS, -1, 0);
  return p == MAP_FAILED ? NULL : p;
}

/* Append "content *HASH\n" at the end of the file. */
static jg_status append_line(jg_scan_checkpoint *c, const char *content, long long *where,
                             jg_error *err) {
  uint64_t h = fnv1a(FNV_OFFSET, content, strlen(content));
  if (fseeko(c->f, (off_t)c->end, SEEK_SET) != 0) goto fail;
  int n = fprintf(c->f, "%s *%016" PRIx64 "\n", content, h);
  if (n < 0 || fflush(c->f) != 0) goto fail;
  if (where) *where = c->end;
  c->end += n;
  return JG_OK;
fail:
  return JG_FAIL(err, JG_EIO, "%s: cannot write the scan checkpoint (%s)",
                 c->path ? c->path : "(temporary file)", strerror(errno));
}

/* Check a line's hash; on success cut it to its content (NUL at " *"). */
static int line_intact(char *line, size_t len) {
  if (len < 19 || line[len - 1] != '\n') return 0;
  char *star = line + len - 19;
  if (star[0] != ' ' || star[1] != '*') return 0;
  char *end;
  uint64_t want = strtoull(star + 2, &end, 16);
  if (end != line + len - 1) return 0;
  if (fnv1a(FNV_OFFSET, line, (size_t)(star - line)) != want) return 0;
  *star = '\0';
  return 1;
}

static void header_text(const jg_scan *s, char *buf, size_t size) {
  snprintf(buf, size, "%s fingerprint %s part %d/%d points %lld+%lld of %lld values %d",
           CHECKPOINT_MAGIC, s->fingerprint, s->part_index, s->part_count, s->first, s->count,
           s->total, s->n_values);
}

/* A parsed record. values points into the checkpoint's buffer. */
typedef struct record {
  long long index;
  int failed;
  jg_status status;
  const char *message;
} record;

/* Parse record content (hash already checked and cut). Values go to `values`. */
static int parse_record(const jg_scan_checkpoint *c, char *text, record *r, double *values) {
  const jg_scan *s = c->s;
  char *p = text, *end;
  if ((p[0] != 'P' && p[0] != 'F') || p[1] != ' ') return 0;
  r->failed = p[0] == 'F';
  errno = 0;
  r->index = strtoll(p + 2, &end, 10);
  if (errno || end == p + 2 || r->index < s->first || r->index >= s->first + s->count) return 0;
  p = end;
  if (r->failed) {
    long code = strtol(p, &end, 10);
    if (end == p || code <= 0 || code > JG_EINTERRUPT || *end != ' ') return 0;
    r->status = (jg_status)code;
    r->message = end + 1;
    return 1;
  }
  r->status = JG_OK;
  r->message = "";
  for (int i = 0; i < s->n_values; i++) {
    if (*p != ' ') return 0;
    double v = strtod(p + 1, &end);
    if (end == p + 1 || !isfinite(v)) return 0;
    if (values) values[i] = v;
    p = end;
  }
  return *p == '\0';
}

/* Read one line at `offset` into the checkpoint buffer (grown as needed). */
static ssize_t read_line_at(jg_scan_checkpoint *c, long long offset) {
  if (fseeko(c->f, (off_t)offset, SEEK_SET) != 0) return -1;
  return getline(&c->buf, &c->buf_size, c->f);
}

/* Is the file's start no more than a torn first write of `header`'s line
 * (a run killed before its header was on the disk)? Only then may an
 * existing checkpoint be started afresh; anything else in it (another
 * program's file, a damaged header) is refused rather than overwritten. */
static int only_a_torn_header(FILE *f, const char *header) {
  char line[600];
  uint64_t h = fnv1a(FNV_OFFSET, header, strlen(header));
  int want = snprintf(line, sizeof line, "%s *%016" PRIx64 "\n", header, h);
  char got[sizeof line];
  if (want <= 0 || fseeko(f, 0, SEEK_SET) != 0) return 0;
  size_t n = fread(got, 1, (size_t)want, f);
  return n < (size_t)want && memcmp(got, line, n) == 0;
}

static jg_status load_existing(jg_scan_checkpoint *c, int *fresh, jg_error *err) {
  const jg_scan *s = c->s;
  char want[512];
  header_text(s, want, sizeof want);
  *fresh = 0;
  if (only_a_torn_header(c->f, want)) {
    /* Killed before its first line was complete: nothing was recorded. */
    *fresh = 1;
    return JG_OK;
  }
  ssize_t n = read_line_at(c, 0);
  if (n <= 0 || !line_intact(c->buf, (size_t)n) || strncmp(c->buf, CHECKPOINT_MAGIC " ", strlen(CHECKPOINT_MAGIC) + 1) != 0)
    return JG_FAIL(err, JG_EINVAL, "%s:1: not a jeansgrow scan checkpoint, or its first line is "
                   "damaged; it is left as it is: remove it (or name another output) to start "
                   "this scan afresh", c->path);
  if (strcmp(c->buf, want) != 0)
    return JG_FAIL(err, JG_EINVAL, "%s belongs to a different scan or slice (its first line: "
                   "'%.300s'; this scan: fingerprint %s part %d/%d); finish that scan, or "
                   "remove the file to start this one afresh", c->path, c->buf, s->fingerprint,
                   s->part_index, s->part_count);
  long long pos = n, line_number = 1;
  for (;;) {
    n = getline(&c->buf, &c->buf_size, c->f);
    if (n <= 0) break;
    line_number++;
    record r;
    const int intact = line_intact(c->buf, (size_t)n);
    if (!intact || !parse_record(c, c->buf, &r, NULL) || c->offset[r.index - s->first] > 0) {
      /* A kill tears only the last line, which is cut off below and
       * recomputed. A bad line with more after it is damage from outside:
       * cutting there would silently throw away the points after it. */
      const char *why = !intact ? "the record's checksum does not match"
                        : (c->buf[0] == 'P' || c->buf[0] == 'F') && c->buf[1] == ' '
                            ? "a record of a point outside this slice, recorded twice, or with "
                              "an unreadable value"
                            : "not a record of a scan point";
      const int last = getline(&c->buf, &c->buf_size, c->f) <= 0;
      if (last && !intact) break;
      return JG_FAIL(err, JG_EINVAL, "%s:%lld: %s; the checkpoint is damaged and is left as it "
                     "is: remove it to start the scan afresh", c->path, line_number, why);
    }
    c->offset[r.index - s->first] = pos + 1;
    c->done++;
    c->failed += r.failed;
    pos += n;
  }
  c->end = pos;
  c->resumed = c->done;
  if (ftruncate(fileno(c->f), (off_t)pos) != 0)
    return JG_FAIL(err, JG_EIO, "%s: cannot cut the damaged end of the checkpoint (%s)",
                   c->path, strerror(errno));
  return JG_OK;
}

/* Open (creating it if missing) the checkpoint file at `path` and take its
 * lock. The lock is what tells a running scan from an interrupted one: a
 * run holds it until it ends, however it ends, so a second run of the same
 * output (a plain one, or --resume) refuses instead of writing into the
 * same file. *created says whether this call made the file. */
static jg_status open_locked(const char *path, int *fd_out, int *created, jg_error *err) {
  for (int attempt = 0; attempt < 8; attempt++) {
    int fd = open(path, O_RDWR | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
    *created = fd >= 0;
    if (fd < 0 && errno == EEXIST) fd = open(path, O_RDWR | O_CLOEXEC | O_NOCTTY);
    if (fd < 0)
      return JG_FAIL(err, JG_EIO, "%s: cannot %s the scan checkpoint (%s)", path,
                     errno == ENOENT ? "create" : "open", strerror(errno));
    int held = jg__file_try_lock(fd);
    if (held == 1) {
      close(fd);
      return JG_FAIL(err, JG_EINVAL, "%s is locked by another jeansgrow scan that is still "
                     "writing this output; wait for it to finish (or stop it, then --resume)",
                     path);
    }
    if (held < 0 && errno != EINVAL && errno != ENOLCK) {
      int e = errno;
      close(fd);
      return JG_FAIL(err, JG_EIO, "%s: cannot lock the scan checkpoint (%s)", path, strerror(e));
    }
    /* The run that held the lock may have finished and removed the file
     * between our open and our lock: then start over on the path. */
    struct stat by_fd, by_path;
    if (fstat(fd, &by_fd) == 0 && stat(path, &by_path) == 0 && by_fd.st_dev == by_path.st_dev &&
        by_fd.st_ino == by_path.st_ino) {
      *fd_out = fd;
      return JG_OK;
    }
    close(fd);
  }
  return JG_FAIL(err, JG_EIO, "%s: the scan checkpoint keeps being replaced by another run",
                 path);
}

jg_status jg_scan_checkpoint_open(const jg_scan *s, const char *path, int resume,
                                  jg_scan_checkpoint **out, jg_error *err) {
  *out = NULL;
  jg_scan_checkpoint *c = calloc(1, sizeof *c);
  if (!c) return JG_FAIL(err, JG_ENOMEM, "out of memory");
  c->s = s;
  pthread_mutex_init(&c->lock, NULL);
  c->offset = index_new((size_t)s->count, &c->offset_bytes);
  c->buf_size = 64 + (size_t)s->n_values * 32 + JG_ERROR_MESSAGE_SIZE;
  c->buf = malloc(c->buf_size);
  if (path) c->path = dup_string(path);
  if (!c->offset || !c->buf || (path && !c->path)) {
    jg_scan_checkpoint_close(c, 0);
    return JG_FAIL(err, JG_ENOMEM, "out of memory for the scan checkpoint");
  }

  jg_status st = JG_OK;
  int fresh = 1, created = 0;
  if (!path) {
    c->f = tmpfile();
    if (!c->f) st = JG_FAIL(err, JG_EIO, "cannot create a temporary scan checkpoint (%s)",
                            strerror(errno));
  } else {
    int fd = -1;
    st = open_locked(path, &fd, &created, err);
    if (st == JG_OK && !created && !resume) {
      close(fd);
      st = JG_FAIL(err, JG_EINVAL, "%s exists: a run of this output was interrupted; resume it "
                   "(jeansgrow scan --resume) or remove the file", path);
    }
    fresh = created;
    if (st == JG_OK && !(c->f = fdopen(fd, "r+"))) {
      close(fd);
      st = JG_FAIL(err, JG_EIO, "%s: cannot open the scan checkpoint (%s)", path, strerror(errno));
    }
    if (st == JG_OK && !fresh) st = load_existing(c, &fresh, err);
  }
  if (st == JG_OK && fresh) {
    char header[512];
    header_text(s, header, sizeof header);
    c->end = 0;
    if (ftruncate(fileno(c->f), 0) != 0)
      st = JG_FAIL(err, JG_EIO, "%s: cannot write the scan checkpoint (%s)", path, strerror(errno));
    if (st == JG_OK) st = append_line(c, header, NULL, err);
    if (st == JG_OK && fsync(fileno(c->f)) != 0)
      st = JG_FAIL(err, JG_EIO, "%s: cannot sync the scan checkpoint (%s)",
                   path ? path : "(temporary file)", strerror(errno));
  }
  if (st != JG_OK) {
    /* Remove only a file this call created; never an existing checkpoint. */
    jg_scan_checkpoint_close(c, created && c->f);
    return st;
  }
  c->last_sync = monotonic_seconds();
  *out = c;
  return JG_OK;
}

char *jg_scan_checkpoint_path_for(const char *output) {
  static const char suffix[] = ".checkpoint";
  const char *slash = strrchr(output, '/');
  const size_t dir_len = slash ? (size_t)(slash - output) + 1 : 0;
  const size_t name_len = strlen(output + dir_len);
  const size_t size = dir_len + name_len + sizeof suffix + 32;
  char *path = malloc(size);
  if (!path) return NULL;
  if (name_len + sizeof suffix - 1 <= NAME_MAX) {
    snprintf(path, size, "%s%s", output, suffix);
    return path;
  }
  /* The hash keeps apart outputs whose names share the cut part. */
  const uint64_t h = fnv1a(FNV_OFFSET, output, strlen(output));
  const size_t cut = NAME_MAX - (sizeof suffix - 1) - 17;
  snprintf(path, size, "%.*s~%016" PRIx64 "%s", (int)(dir_len + cut), output, h, suffix);
  return path;
}

jg_status jg_scan_checkpoint_add(jg_scan_checkpoint *c, long long index, jg_status status,
                                 const double *values, const char *message, jg_error *err) {
  const jg_scan *s = c->s;
  if (index < s->first || index >= s->first + s->count)
    return JG_FAIL(err, JG_EINVAL, "scan point %lld is not in this slice", index);
  pthread_mutex_lock(&c->lock);
  jg_status st = JG_OK;
  long long k = index - s->first;
  if (c->offset[k] > 0) {
    st = JG_FAIL(err, JG_EINVAL, "scan point %lld is recorded twice", index);
  } else if (status == JG_OK) {
    size_t used = (size_t)snprintf(c->buf, c->buf_size, "P %lld", index);
    for (int i = 0; i < s->n_values && used < c->buf_size; i++)
      used += (size_t)snprintf(c->buf + used, c->buf_size - used, " %a", values[i]);
  } else {
    int w = snprintf(c->buf, c->buf_size, "F %lld %d ", index, (int)status);
    /* One line per record: control characters in a message become blanks. */
    const char *m = message && message[0] ? message : jg_strerror(status);
    size_t used = w > 0 ? (size_t)w : 0;
    for (; *m && used + 1 < c->buf_size && used < (size_t)w + JG_ERROR_MESSAGE_SIZE; m++)
      c->buf[used++] = (unsigned char)*m < 0x20 ? ' ' : *m;
    c->buf[used] = '\0';
  }
  long long where = -1;
  if (st == JG_OK) st = append_line(c, c->buf, &where, err);
  if (st == JG_OK) {
    c->offset[k] = where + 1;
    c->done++;
    c->failed += status != JG_OK;
    double now = monotonic_seconds();
    if (now - c->last_sync >= CHECKPOINT_SYNC_INTERVAL) {
      if (fdatasync(fileno(c->f)) != 0)
        st = JG_FAIL(err, JG_EIO, "%s: cannot sync the scan checkpoint (%s)",
                     c->path ? c->path : "(temporary file)", strerror(errno));
      c->last_sync = now;
    }
  }
  pthread_mutex_unlock(&c->lock);
  return st;
}

int jg_scan_checkpoint_has(const jg_scan_checkpoint *c, long long index) {
  long long k = index - c->s->first;
  return k >= 0 && k < c->s->count && c->offset[k] > 0;
}
long long jg_scan_checkpoint_done(const jg_scan_checkpoint *c) { return c->done; }
long long jg_scan_checkpoint_failed(const jg_scan_checkpoint *c) { return c->failed; }
long long jg_scan_checkpoint_resumed(const jg_scan_checkpoint *c) { return c->resumed; }
const char *jg_scan_checkpoint_path(const jg_scan_checkpoint *c) { return c->path; }

void jg_scan_checkpoint_close(jg_scan_checkpoint *c, int remove_file) {
  if (!c) return;
  /* Removed while still locked: a run that waits for the lock must not
   * find the finished checkpoint still there the moment it is released. */
  if (remove_file && c->path) unlink(c->path);
  if (c->f) {
    fflush(c->f);
    if (!remove_file) fsync(fileno(c->f));
    fclose(c->f);
  }
  pthread_mutex_destroy(&c->lock);
  free(c->path);
  if (c->offset) munmap(c->offset, c->offset_bytes);
  free(c->buf);
  free(c);
}

/* Read back the record of point `index` (which must be recorded). */
static jg_status fetch_record(jg_scan_checkpoint *c, long long index, record *r, double *values,
                              jg_error *err) {
  ssize_t n = read_line_at(c, c->offset[index - c->s->first] - 1);
  if (n <= 0 || !line_intact(c->buf, (size_t)n) || !parse_record(c, c->buf, r, values) ||
      r->index != index)
    return JG_FAIL(err, JG_EIO, "%s: the record of scan point %lld no longer reads back; the "
                   "file was changed during the run", c->path ? c->path : "scan checkpoint",
                   index + 1);
  return JG_OK;
}

/* ------------------------------------------------------------------------ */
/* Running on threads.                                                       */

typedef struct run_state {
  const jg_scan *s;
  jg_scan_checkpoint *c;
  jg_scan_listener listener;
  void *context;
  pthread_mutex_t lock;
  long long next;      /* lowest index not yet handed out */
  int stop;
  jg_status fatal;
  jg_error fatal_err;
} run_state;

static long long take_point(run_state *r) {
  pthread_mutex_lock(&r->lock);
  const long long end = r->s->first + r->s->count;
  while (r->next < end && jg_scan_checkpoint_has(r->c, r->next)) r->next++;
  long long i = (!r->stop && r->next < end) ? r->next++ : -1;
  pthread_mutex_unlock(&r->lock);
  return i;
}

static void run_fail(run_state *r, const jg_error *e) {
  pthread_mutex_lock(&r->lock);
  if (r->fatal == JG_OK) {
    r->fatal = e->status != JG_OK ? e->status : JG_EIO;
    r->fatal_err = *e;
  }
  r->stop = 1;
  pthread_mutex_unlock(&r->lock);
}

static void *run_worker(void *arg) {
  run_state *r = arg;
  jg_error e;
  jg_error_clear(&e);
  void *ws = jg_scan_workspace_new(r->s, &e);
  double *values = malloc(sizeof(double) * (size_t)(r->s->n_values > 0 ? r->s->n_values : 1));
  if (!ws || !values) {
    if (!values) JG_FAIL(&e, JG_ENOMEM, "out of memory for a scan thread");
    run_fail(r, &e);
    jg_scan_workspace_free(r->s, ws);
    free(values);
    return NULL;
  }
  long long i;
  while ((i = take_point(r)) >= 0) {
    jg_error_clear(&e);
    jg_status st = jg_scan_evaluate(r->s, i, ws, values, &e);
    if (st == JG_ENOMEM) {
      run_fail(r, &e);
      break;
    }
    pthread_mutex_lock(&r->lock);
    jg_error werr;
    jg_error_clear(&werr);
    jg_status wst = jg_scan_checkpoint_add(r->c, i, st, values, e.message, &werr);
    if (wst == JG_OK && r->listener) {
      jg_scan_event ev = {i, st, st == JG_OK ? "" : e.message, r->c->done, r->c->failed,
                          r->s->count};
      r->listener(r->context, &ev);
    }
    pthread_mutex_unlock(&r->lock);
    if (wst != JG_OK) {
      run_fail(r, &werr);
      break;
    }
  }
  jg_scan_workspace_free(r->s, ws);
  free(values);
  return NULL;
}

jg_status jg_scan_run(const jg_scan *s, jg_scan_checkpoint *c, int threads,
                      jg_scan_listener listener, void *context, jg_error *err) {
  if (!s || !c || c->s != s) return JG_FAIL(err, JG_EINVAL, "jg_scan_run: scan and checkpoint do not match");
  if (threads < 1) return JG_FAIL(err, JG_EINVAL, "jg_scan_run: threads must be >= 1 (got %d)", threads);
  long long missing = s->count - c->done;
  if (missing <= 0) return JG_OK;
  if (threads > missing) threads = (int)missing;
  run_state r;
  memset(&r, 0, sizeof r);
  r.s = s;
  r.c = c;
  r.listener = listener;
  r.context = context;
  r.next = s->first;
  r.fatal = JG_OK;
  pthread_mutex_init(&r.lock, NULL);
  pthread_t *tid = malloc(sizeof *tid * (size_t)threads);
  if (!tid) {
    pthread_mutex_destroy(&r.lock);
    return JG_FAIL(err, JG_ENOMEM, "out of memory for %d threads", threads);
  }
  int started = 0;
  for (; started < threads; started++)
    if (pthread_create(&tid[started], NULL, run_worker, &r) != 0) break;
  if (started == 0) run_worker(&r); /* no thread could start: do the work here */
  for (int i = 0; i < started; i++) pthread_join(tid[i], NULL);
  free(tid);
  pthread_mutex_destroy(&r.lock);
  if (r.fatal != JG_OK) {
    if (err) *err = r.fatal_err;
    return r.fatal;
  }
  return JG_OK;
}

/* ------------------------------------------------------------------------ */
/* The table.                                                                */

#define PART_PREFIX "scan part: "
#define FAILED_COUNT_PREFIX "# failed points: "
#define FAILED_LINE_PREFIX "# failed point "

/* The header lines that describe the scan (as "conventions" of the
 * preamble). Slices differ from the whole only by the part line. */
static char **scan_header_lines(const jg_scan *s, int *n_out) {
  const jg_scan_evaluator *ev = s->ev;
  int n_conv = 0;
  while (ev->conventions && ev->conventions[n_conv]) n_conv++;
  int cap = 8 + s->grid.n_axes + n_conv;
  char **lines = calloc((size_t)cap + 1, sizeof *lines);
  if (!lines) return NULL;
  int n = 0;
  char *text = NULL;
  size_t size = 0;
  FILE *f;
#define LINE_BEGIN() (text = NULL, size = 0, f = open_memstream(&text, &size))
#define LINE_END() (f && fclose(f) == 0 ? (lines[n++] = text) : (free(text), (char *)NULL))
  if (LINE_BEGIN()) fprintf(f, "scan fingerprint: %s", s->fingerprint);
  if (!LINE_END()) goto fail;
  if (LINE_BEGIN()) {
    fprintf(f, "scan grid: %lld points (", s->total);
    for (int a = 0; a < s->grid.n_axes; a++) fprintf(f, "%s%d", a ? " x " : "", s->grid.axes[a].count);
    fprintf(f, ", first key slowest), %d redshifts per point", s->n_z);
  }
  if (!LINE_END()) goto fail;
  for (int a = 0; a < s->grid.n_axes; a++) {
    if (LINE_BEGIN()) {
      fputs("scan vary: ", f);
      write_axis(f, &s->grid.axes[a]);
    }
    if (!LINE_END()) goto fail;
  }
  if (s->part_count > 1) {
    if (LINE_BEGIN())
      fprintf(f, PART_PREFIX "%d/%d, points %lld to %lld of %lld", s->part_index, s->part_count,
              s->first + 1, s->first + s->count, s->total);
    if (!LINE_END()) goto fail;
  }
  if (LINE_BEGIN()) {
    fprintf(f, "scan evaluator: %s; columns: the varied keys, z, then per point:", ev->name);
    for (int i = 0; i < ev->n_point_columns; i++) fprintf(f, " %s", ev->point_columns[i]);
    fputs("; per redshift:", f);
    for (int i = 0; i < ev->n_redshift_columns; i++) fprintf(f, " %s", ev->redshift_columns[i]);
  }
  if (!LINE_END()) goto fail;
  for (int i = 0; i < n_conv; i++) {
    if (LINE_BEGIN()) fputs(ev->conventions[i], f);
    if (!LINE_END()) goto fail;
  }
  if (LINE_BEGIN())
    fputs("the parameters below are the base values; on each row the varied keys take the "
          "values of its first columns", f);
  if (!LINE_END()) goto fail;
#undef LINE_BEGIN
#undef LINE_END
  *n_out = n;
  return lines;
fail:
  for (int i = 0; i < n; i++) free(lines[i]);
  free(lines);
  return NULL;
}

jg_status jg_scan_write_table(const jg_scan *s, jg_scan_checkpoint *c, FILE *f, jg_error *err) {
  if (!s || !c || c->s != s || !f)
    return JG_FAIL(err, JG_EINVAL, "jg_scan_write_table: scan and checkpoint do not match");
  if (c->done < s->count)
    return JG_FAIL(err, JG_EINVAL, "the scan is not finished: %lld of the %lld points of the "
                   "slice are missing", s->count - c->done, s->count);
  int n_lines = 0;
  char **lines = scan_header_lines(s, &n_lines);
  double *values = malloc(sizeof(double) * (size_t)(s->n_values > 0 ? s->n_values : 1));
  double *row = malloc(sizeof(double) * (size_t)s->n_columns);
  if (!lines || !values || !row) {
    free(values);
    free(row);
    if (lines) for (int i = 0; i < n_lines; i++) free(lines[i]);
    free(lines);
    return JG_FAIL(err, JG_ENOMEM, "out of memory writing the scan table");
  }
  pthread_mutex_lock(&c->lock);
  jg_table_write_preamble(f, "parameter scan, one row per grid point and output redshift",
                          &s->base, (const char *const *)lines);
  fprintf(f, FAILED_COUNT_PREFIX "%lld\n", c->failed);
  jg_status st = JG_OK;
  record r;
  for (long long i = s->first; st == JG_OK && c->failed > 0 && i < s->first + s->count; i++) {
    st = fetch_record(c, i, &r, NULL, err);
    if (st == JG_OK && r.failed) {
      char desc[1024];
      jg_scan_describe_point(s, i, desc, sizeof desc);
      fprintf(f, FAILED_LINE_PREFIX "%lld of %lld (%s): %s: %s\n", i + 1, s->total, desc,
              jg_status_name(r.status), r.message);
    }
  }
  if (st == JG_OK) jg_table_write_columns(f, (const char *const *)s->columns, s->n_columns);
  const jg_scan_evaluator *ev = s->ev;
  const int n_axes = s->grid.n_axes;
  for (long long i = s->first; st == JG_OK && i < s->first + s->count; i++) {
    st = fetch_record(c, i, &r, values, err);
    if (st != JG_OK || r.failed) continue;
    jg_scan_grid_values(&s->grid, i, row);
    memcpy(row + n_axes + 1, values, sizeof(double) * (size_t)ev->n_point_columns);
    for (int j = 0; st == JG_OK && j < s->n_z; j++) {
      row[n_axes] = s->base.output.redshifts[j];
      memcpy(row + n_axes + 1 + ev->n_point_columns,
             values + ev->n_point_columns + (size_t)j * (size_t)ev->n_redshift_columns,
             sizeof(double) * (size_t)ev->n_redshift_columns);
      st = jg_table_write_row(f, row, s->n_columns, (const char *const *)s->columns, err);
    }
  }
  pthread_mutex_unlock(&c->lock);
  /* Reading records back resets errno, so a write that failed before is
   * known only by the error flag: ask the stream again for the reason. */
  errno = 0;
  if (st == JG_OK && (fflush(f) != 0 || ferror(f)))
    st = JG_FAIL(err, JG_EIO, "cannot write the scan table (%s)", strerror(errno ? errno : EIO));
  for (int i = 0; i < n_lines; i++) free(lines[i]);
  free(lines);
  free(values);
  free(row);
  return st;
}

/* ------------------------------------------------------------------------ */
/* Joining slices.                                                           */

typedef struct part_file {
  const char *path;
  FILE *f;
  char **header;   /* header lines without the part line and the failure section */
  int n_header;
  char **failures; /* the "# failed point" lines */
  int n_failures;
  char *columns;   /* the column-name line */
  char fingerprint[17];
  int index, count;
  long long first, last, total;
  long long data_lines;
} part_file;

static void part_free(part_file *p) {
  for (int i = 0; i < p->n_header; i++) free(p->header[i]);
  for (int i = 0; i < p->n_failures; i++) free(p->failures[i]);
  free(p->header);
  free(p->failures);
  free(p->columns);
  if (p->f) fclose(p->f);
  memset(p, 0, sizeof *p);
}

static int push_line(char ***v, int *n, const char *line) {
  char **bigger = realloc(*v, sizeof **v * (size_t)(*n + 1));
  if (!bigger) return 0;
  *v = bigger;
  if (!((*v)[*n] = dup_string(line))) return 0;
  (*n)++;
  return 1;
}

/* Open a slice for reading. Only a regular file can be a slice: a device
 * such as /dev/zero would be read forever, and a named pipe would block at
 * the open (hence O_NONBLOCK, cleared once the file is known to be regular).
 * A slice that cannot be opened is bad input, like any missing input. */
static jg_status open_part(part_file *p, const char *path, jg_error *err) {
  int fd = open(path, O_RDONLY | O_NONBLOCK | O_CLOEXEC | O_NOCTTY);
  if (fd < 0)
    return JG_FAIL(err, errno == ENOMEM ? JG_ENOMEM : JG_EINVAL, "%s: cannot read the slice (%s)",
                   path, strerror(errno));
  struct stat sb;
  if (fstat(fd, &sb) != 0) {
    int e = errno;
    close(fd);
    return JG_FAIL(err, JG_EIO, "%s: cannot read the slice (%s)", path, strerror(e));
  }
  if (!S_ISREG(sb.st_mode)) {
    close(fd);
    return JG_FAIL(err, JG_EINVAL, "%s: not a slice of a jeansgrow scan (it is %s, not a "
                   "regular file)", path,
                   S_ISDIR(sb.st_mode) ? "a folder" : "a device, pipe or socket");
  }
  int flags = fcntl(fd, F_GETFL);
  if (flags < 0 || fcntl(fd, F_SETFL, flags & ~O_NONBLOCK) != 0 || !(p->f = fdopen(fd, "r"))) {
    int e = errno;
    close(fd);
    return JG_FAIL(err, JG_EIO, "%s: cannot read the slice (%s)", path, strerror(e));
  }
  return JG_OK;
}

/* A data row of a slice must be what jg_table_write_row writes: `columns`
 * finite numbers separated by tabs, ending in a newline. A row cut by a
 * kill or a full disk, or a value edited to nan, would otherwise pass into
 * the merged table. */
static jg_status check_part_row(const part_file *p, const char *line, ssize_t n, int columns,
                                long long line_number, jg_error *err) {
  if (n <= 0 || line[n - 1] != '\n')
    return JG_FAIL(err, JG_EINVAL, "%s:%lld: the last row is cut short (no end of line); the "
                   "slice is incomplete: compute it again", p->path, line_number);
  const char *s = line;
  for (int c = 0; c < columns; c++) {
    char *end;
    double v = strtod(s, &end);
    const char sep = c + 1 < columns ? '\t' : '\n';
    if (end == s || *end != sep || isspace((unsigned char)*s))
      return JG_FAIL(err, JG_EINVAL, "%s:%lld: column %d is not a number followed by %s; a "
                     "row holds %d tab-separated numbers: the slice is damaged or was edited",
                     p->path, line_number, c + 1, c + 1 < columns ? "a tab" : "the end of line",
                     columns);
    if (!isfinite(v))
      return JG_FAIL(err, JG_EINVAL, "%s:%lld: column %d holds '%.*s', not a finite number; "
                     "no NaN or Inf may enter a table: the slice was edited", p->path,
                     line_number, c + 1, (int)(end - s), s);
    s = end + 1;
  }
  return JG_OK;
}

static jg_status read_part(part_file *p, const char *path, jg_error *err) {
  memset(p, 0, sizeof *p);
  p->path = path;
  p->index = -1;
  jg_status opened = open_part(p, path, err);
  if (opened != JG_OK) return opened;
  char *line = NULL;
  size_t cap = 0;
  ssize_t n;
  long long expected_failures = -1;
  int in_failures = 0, redshifts = 0;
  off_t body = 0;
  jg_status st = JG_OK;
  char *pending = NULL; /* the previous header line: the last one is the column line */
  long long header_lines = 0;
  while ((n = getline(&line, &cap, p->f)) > 0) {
    if (line[0] != '#') break;
    header_lines++;
    body = ftello(p->f);
    if (line[n - 1] == '\n') line[n - 1] = '\0';
    if (pending) {
      if (!push_line(in_failures ? &p->failures : &p->header,
                     in_failures ? &p->n_failures : &p->n_header, pending)) {
        st = JG_FAIL(err, JG_ENOMEM, "out of memory");
        break;
      }
      free(pending);
      pending = NULL;
    }
    if (strncmp(line, "# " PART_PREFIX, strlen("# " PART_PREFIX)) == 0) {
      if (sscanf(line + strlen("# " PART_PREFIX), "%d/%d, points %lld to %lld of %lld", &p->index,
                 &p->count, &p->first, &p->last, &p->total) != 5) {
        st = JG_FAIL(err, JG_EINVAL, "%s: cannot read its scan part line", path);
        break;
      }
      continue; /* not part of the common header */
    }
    if (strncmp(line, "# scan fingerprint: ", 20) == 0)
      snprintf(p->fingerprint, sizeof p->fingerprint, "%.16s", line + 20);
    if (strncmp(line, "# scan grid: ", 13) == 0) {
      const char *per = strstr(line, "), ");
      if (per) redshifts = atoi(per + 3);
    }
    if (strncmp(line, FAILED_COUNT_PREFIX, strlen(FAILED_COUNT_PREFIX)) == 0) {
      expected_failures = atoll(line + strlen(FAILED_COUNT_PREFIX));
      in_failures = 1;
      continue;
    }
    if (!(pending = dup_string(line))) {
      st = JG_FAIL(err, JG_ENOMEM, "out of memory");
      break;
    }
  }
  if (st == JG_OK) {
    p->columns = pending;
    pending = NULL;
  }
  const int is_slice = p->fingerprint[0] && p->index >= 0 && expected_failures >= 0 && p->columns;
  if (st == JG_OK && is_slice && n > 0) {
    int columns = 1;
    for (const char *t = p->columns; *t; t++) columns += *t == '\t';
    long long line_number = header_lines + 1;
    st = check_part_row(p, line, n, columns, line_number, err);
    for (p->data_lines = 1; st == JG_OK && (n = getline(&line, &cap, p->f)) > 0; p->data_lines++)
      st = check_part_row(p, line, n, columns, ++line_number, err);
  }
  free(line);
  free(pending);
  if (st != JG_OK) return st;
  if (!is_slice)
    return JG_FAIL(err, JG_EINVAL, "%s: not a slice of a jeansgrow scan (no fingerprint, part "
                   "or failure lines; write slices with jeansgrow scan --part I/N)", path);
  if (p->n_failures != expected_failures)
    return JG_FAIL(err, JG_EINVAL, "%s: lists %d failed points where its header announces %lld",
                   path, p->n_failures, expected_failures);
  long long points = p->last - p->first + 1;
  if (redshifts > 0 && p->data_lines != (points - p->n_failures) * redshifts)
    return JG_FAIL(err, JG_EINVAL, "%s: holds %lld rows where its %lld points (%d failed) with "
                   "%d redshifts each make %lld; the file is incomplete or was edited", path,
                   p->data_lines, points, p->n_failures, redshifts,
                   (points - p->n_failures) * redshifts);
  if (fseeko(p->f, body, SEEK_SET) != 0)
    return JG_FAIL(err, JG_EIO, "%s: cannot read (%s)", path, strerror(errno));
  return JG_OK;
}

jg_status jg_scan_merge(const char *const *paths, int n_paths, FILE *out, jg_error *err) {
  if (!paths || n_paths < 1 || !out)
    return JG_FAIL(err, JG_EINVAL, "merge: no slice files given");
  part_file *parts = calloc((size_t)n_paths, sizeof *parts);
  if (!parts) return JG_FAIL(err, JG_ENOMEM, "out of memory");
  jg_status st = JG_OK;
  for (int i = 0; st == JG_OK && i < n_paths; i++) st = read_part(&parts[i], paths[i], err);
  const part_file **by_index = NULL;
  if (st == JG_OK) {
    const part_file *a = &parts[0];
    if (a->count != n_paths) {
      /* Name the missing slices: that is what the user has to go and find. */
      char missing[256] = "";
      for (int k = 1; k <= a->count && strlen(missing) < sizeof missing - 16; k++) {
        int have = 0;
        for (int i = 0; i < n_paths; i++) have |= parts[i].index == k;
        if (!have)
          snprintf(missing + strlen(missing), sizeof missing - strlen(missing), "%s%d",
                   missing[0] ? ", " : "", k);
      }
      st = JG_FAIL(err, JG_EINVAL, "%s is slice %d of %d, but %d file%s given (missing: %s); a "
                   "merge takes all %d slices", a->path, a->index, a->count, n_paths,
                   n_paths == 1 ? " is" : "s are", missing[0] ? missing : "none", a->count);
    }
    by_index = calloc((size_t)n_paths + 1, sizeof *by_index);
    if (st == JG_OK && !by_index) st = JG_FAIL(err, JG_ENOMEM, "out of memory");
    for (int i = 0; st == JG_OK && i < n_paths; i++) {
      const part_file *b = &parts[i];
      if (strcmp(a->fingerprint, b->fingerprint) != 0)
        st = JG_FAIL(err, JG_EINVAL, "%s and %s belong to different scans (fingerprints %s and "
                     "%s)", a->path, b->path, a->fingerprint, b->fingerprint);
      else if (b->count != a->count || b->total != a->total)
        st = JG_FAIL(err, JG_EINVAL, "%s is a slice of %d but %s a slice of %d", a->path,
                     a->count, b->path, b->count);
      else if (b->n_header != a->n_header || strcmp(a->columns, b->columns) != 0)
        st = JG_FAIL(err, JG_EINVAL, "%s and %s have different headers (same scan, different "
                     "program versions?)", a->path, b->path);
      for (int k = 0; st == JG_OK && k < a->n_header; k++)
        if (strcmp(a->header[k], b->header[k]) != 0)
          st = JG_FAIL(err, JG_EINVAL, "%s and %s have different headers at '%.200s'", a->path,
                       b->path, b->header[k]);
      if (st == JG_OK && (b->index < 1 || b->index > n_paths))
        st = JG_FAIL(err, JG_EINVAL, "%s: slice %d of %d is not a valid slice number", b->path,
                     b->index, b->count);
      if (st == JG_OK && by_index[b->index])
        st = JG_FAIL(err, JG_EINVAL, "%s and %s are both slice %d of %d", by_index[b->index]->path,
                     b->path, b->index, b->count);
      if (st == JG_OK) by_index[b->index] = b;
    }
    /* With n files, n distinct indices in 1..n: none is missing. Check the
     * blocks tile the grid all the same, in case a file was edited. */
    long long next = 1;
    for (int i = 1; st == JG_OK && i <= n_paths; i++) {
      if (by_index[i]->first != next)
        st = JG_FAIL(err, JG_EINVAL, "%s: slice %d starts at point %lld, expected %lld",
                     by_index[i]->path, i, by_index[i]->first, next);
      next = by_index[i]->last + 1;
    }
    if (st == JG_OK && next != a->total + 1)
      st = JG_FAIL(err, JG_EINVAL, "the slices end at point %lld of %lld", next - 1, a->total);
  }
  if (st == JG_OK) {
    const part_file *a = by_index[1];
    long long failed = 0;
    for (int i = 1; i <= n_paths; i++) failed += by_index[i]->n_failures;
    for (int k = 0; k < a->n_header; k++) fprintf(out, "%s\n", a->header[k]);
    fprintf(out, FAILED_COUNT_PREFIX "%lld\n", failed);
    for (int i = 1; i <= n_paths; i++)
      for (int k = 0; k < by_index[i]->n_failures; k++) fprintf(out, "%s\n", by_index[i]->failures[k]);
    fprintf(out, "%s\n", a->columns);
    char buf[65536];
    for (int i = 1; st == JG_OK && i <= n_paths; i++) {
      size_t got;
      while ((got = fread(buf, 1, sizeof buf, by_index[i]->f)) > 0)
        if (fwrite(buf, 1, got, out) != got) break;
      if (ferror(by_index[i]->f))
        st = JG_FAIL(err, JG_EIO, "%s: cannot read (%s)", by_index[i]->path, strerror(errno));
    }
    if (st == JG_OK && ferror(out))
      st = JG_FAIL(err, JG_EIO, "cannot write the merged table (%s)", strerror(errno));
  }
  for (int i = 0; i < n_paths; i++) part_free(&parts[i]);
  free(parts);
  free(by_index);
  return st;
}
