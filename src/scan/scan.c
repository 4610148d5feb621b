/*
 * A scan: grid + base parameters + evaluator (+ the slice of a job array),
 * its fingerprint, the check of its points before any work, and the
 * evaluation of one point.
 *
 * Determinism is the organising idea of the whole scan engine: whatever the
 * order in which points finish (threads, MPI ranks, resumed runs, slices),
 * every finished point is first written to the checkpoint with its values
 * in hexadecimal floating point, which reads back to the same bits, and the
 * table is then written from the checkpoint in grid order. The bytes of the
 * table depend only on the scan, never on how it was run.
 *
 * Thread safety: a jg_scan is read-only after jg_scan_new; each thread uses
 * its own workspace; a checkpoint serialises its writers with its own mutex.
 * No global mutable state.
 */
#include "scan_internal.h"

#include <errno.h>
#include <inttypes.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "jeansgrow/background.h"
#include "jeansgrow/perturb.h"
#include "jeansgrow/version.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */


static int column_name_ok(const char *name) {
  return name && name[0] && !strpbrk(name, "\t\n\r");
}

static jg_status check_evaluator(const jg_scan_evaluator *ev, jg_error *err) {
  if (!ev || !ev->evaluate || ev->n_point_columns < 0 || ev->n_redshift_columns < 0 ||
      ev->n_point_columns + ev->n_redshift_columns == 0 ||
      (ev->rows == JG_SCAN_ROWS_POINT && ev->n_redshift_columns > 0) ||
      (ev->rows == JG_SCAN_ROWS_WAVENUMBER && ev->n_redshift_columns < 1) ||
      (ev->n_point_columns && !ev->point_columns) ||
      (ev->n_redshift_columns && !ev->redshift_columns) ||
      (!ev->workspace_new) != (!ev->workspace_free))
    return JG_FAIL(err, JG_EINVAL, "scan evaluator: incomplete (needs evaluate, columns, and "
                   "both workspace functions or neither; per-redshift columns unless one row "
                   "per point, k first with one row per wavenumber)");
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

char *jg__scan_strdup(const char *s) {
  size_t n = strlen(s) + 1;
  char *d = malloc(n);
  if (d) memcpy(d, s, n);
  return d;
}

static jg_status build_columns(jg_scan *s, jg_error *err) {
  const jg_scan_evaluator *ev = s->ev;
  const int has_z = ev->rows != JG_SCAN_ROWS_POINT;
  s->n_columns = s->grid.n_axes + has_z + ev->n_point_columns + ev->n_redshift_columns;
  s->columns = calloc((size_t)s->n_columns, sizeof *s->columns);
  if (!s->columns) return JG_FAIL(err, JG_ENOMEM, "out of memory");
  int c = 0;
  for (int a = 0; a < s->grid.n_axes; a++) {
    const jg_param_doc *d = jg_param_doc_find(s->grid.axes[a].key);
    char name[JG_SCAN_KEY_SIZE + 64];
    if (d && d->unit[0]) snprintf(name, sizeof name, "%s[%s]", s->grid.axes[a].key, d->unit);
    else snprintf(name, sizeof name, "%s", s->grid.axes[a].key);
    s->columns[c++] = jg__scan_strdup(name);
  }
  if (has_z) s->columns[c++] = jg__scan_strdup("z");
  for (int i = 0; i < ev->n_point_columns; i++) s->columns[c++] = jg__scan_strdup(ev->point_columns[i]);
  for (int i = 0; i < ev->n_redshift_columns; i++)
    s->columns[c++] = jg__scan_strdup(ev->redshift_columns[i]);
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
void jg__scan_write_axis(FILE *f, const jg_scan_axis *ax) {
  char a[64], b[64];
  fprintf(f, "%s = ", ax->key);
  if (ax->spacing == JG_SCAN_LIST) {
    fputc('[', f);
    for (int i = 0; i < ax->count; i++) {
      const char *word = jg_scan_axis_word(ax, i);
      format_exact(a, sizeof a, jg_scan_axis_value(ax, i));
      fprintf(f, "%s%s", i ? ", " : "", word ? word : a);
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
  uint64_t h = jg__fnv1a(JG__FNV_OFFSET, text, size);
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
    h = jg__fnv1a(h, piece, (size_t)n);
    if (!ax->values) {
      n = snprintf(piece, sizeof piece, " from %a to %a", ax->from, ax->to);
      h = jg__fnv1a(h, piece, (size_t)n);
    }
    for (long long i = 0; ax->values && i < ax->count; i++) {
      n = snprintf(piece, sizeof piece, " %a", ax->values[i]);
      h = jg__fnv1a(h, piece, (size_t)n);
    }
    h = jg__fnv1a(h, "\n", 1);
  }
  /* The start table by its content, not its name: a table edited between
   * an interrupted run and --resume would otherwise mix two starts. */
  const char *table = s->base.perturbations.initial_table;
  if (table[0]) {
    FILE *t = fopen(table, "rb");
    if (!t)
      return JG_FAIL(err, JG_EINVAL, "perturbations.initial_table: cannot read %s (%s)", table,
                     strerror(errno));
    char buf[4096];
    size_t got;
    h = jg__fnv1a(h, "table\n", 6);
    while ((got = fread(buf, 1, sizeof buf, t)) > 0) h = jg__fnv1a(h, buf, got);
    const int failed = ferror(t);
    fclose(t);
    if (failed)
      return JG_FAIL(err, JG_EIO, "perturbations.initial_table: cannot read %s", table);
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
    const char *const *words = jg_params_key_words(s->grid.axes[a].key);
    const char *word = words ? words[(int)v[a]] : num;
    int w = snprintf(buf + used, size - used, "%s%s = %s", a ? ", " : "", s->grid.axes[a].key,
                     word);
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

/* The wavenumbers per redshift of a scan writing one row per wavenumber:
 * those of the base parameters, whose number no axis may change. */
static jg_status wavenumber_rows(jg_scan *s, const jg_scan_grid *grid, jg_error *err) {
  for (int a = 0; a < grid->n_axes; a++)
    if (strcmp(grid->axes[a].key, "perturbations.k_count") == 0)
      return JG_FAIL(err, JG_EINVAL, "perturbations.k_count cannot be varied in a scan with a "
                     "row per wavenumber (every point must have the same rows); vary k_min or "
                     "k_max instead");
  double *k = malloc(sizeof(double) * JG_MAX_WAVENUMBERS);
  if (!k) return JG_FAIL(err, JG_ENOMEM, "out of memory for the wavenumbers");
  jg_status st = jg_perturb_wavenumbers(&s->base.perturbations, k, &s->n_k, err);
  free(k);
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
  s->n_k = 1;
  if (ev->rows == JG_SCAN_ROWS_WAVENUMBER) {
    st = wavenumber_rows(s, grid, err);
    if (st != JG_OK) {
      jg_scan_free(s);
      return st;
    }
  }
  s->rows_per_point = ev->rows == JG_SCAN_ROWS_POINT ? 1 : s->n_z * s->n_k;
  s->n_values = ev->n_point_columns + (ev->rows == JG_SCAN_ROWS_POINT ? 0 : s->rows_per_point) *
                                          ev->n_redshift_columns;
  st = copy_grid(&s->grid, grid, err);
  if (st == JG_OK) st = build_columns(s, err);
  if (st == JG_OK) st = validate_points(s, err); /* first: it names a bad start table */
  if (st == JG_OK) st = compute_fingerprint(s, err);
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
int jg_scan_rows_per_point(const jg_scan *s) { return s->rows_per_point; }
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
  st = ev->evaluate(&w->p, values, values + ev->n_point_columns, w->user, ev->user, err);
  if (st != JG_OK) {
    if (err && !err->message[0]) JG_FAIL(err, st, "%s", jg_strerror(st));
    return st;
  }
  for (int i = 0; i < s->n_values; i++) {
    if (isfinite(values[i])) continue;
    if (i < ev->n_point_columns)
      return JG_FAIL(err, JG_ENUMERIC, "%s is not finite (%g)", ev->point_columns[i], values[i]);
    int j = (i - ev->n_point_columns) / ev->n_redshift_columns / s->n_k;
    int c = (i - ev->n_point_columns) % ev->n_redshift_columns;
    return JG_FAIL(err, JG_ENUMERIC, "%s is not finite (%g) at z = %g", ev->redshift_columns[c],
                   values[i], s->base.output.redshifts[j]);
  }
  return JG_OK;
}
