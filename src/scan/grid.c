/*
 * The grid of a scan: axes from --vary texts, from values, or from the
 * `scan` group of a parameter file (read by the parameter module); point
 * values computed from their index, never stored.
 */
#include "jeansgrow/scan.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "../base/alloc.h" /* last: test builds route allocations through it */

static const char *prefix_of(const char *origin, char *buf, size_t size) {
  if (origin && origin[0]) snprintf(buf, size, "%s: ", origin);
  else buf[0] = '\0';
  return buf;
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
  const jg_param_doc *d = jg_param_doc_find(key);
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
  const int words = jg_params_key_words(key) != NULL;
  if (words && ax->spacing != JG_SCAN_LIST) {
    st = JG_FAIL(err, JG_EINVAL, "%s%s is word-valued: vary it over a list of its words, "
                 "%s=[WORD1, WORD2, ...] (allowed: %s)", pre, key, key,
                 jg_param_doc_find(key)->allowed);
  } else if (!words && !jg_params_key_is_numeric(key)) {
    jg_params_set_number(scratch, key, 0.0, &why);
    if (jg_param_doc_find(key))
      st = JG_FAIL(err, JG_EINVAL, "%s%s; only number, integer and word-valued keys can be "
                   "varied (jeansgrow keys lists them)", pre, why.message);
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

/* The number of the word filling `text` (blanks and double quotes around
 * it allowed) among `words`, or -1. */
static int parse_word(const char *text, size_t n, const char *const *words) {
  const char *s = text, *e = text + n;
  while (s < e && isspace((unsigned char)*s)) s++;
  while (e > s && isspace((unsigned char)e[-1])) e--;
  if (e - s >= 2 && *s == '"' && e[-1] == '"') s++, e--;
  for (int i = 0; words[i]; i++)
    if (strlen(words[i]) == (size_t)(e - s) && strncmp(words[i], s, (size_t)(e - s)) == 0)
      return i;
  return -1;
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
        const char *const *words = jg_params_key_words(key);
        const int word = words ? parse_word(p, (size_t)(comma - p), words) : -1;
        if (words && word < 0) {
          const char *e0 = skip_space(p), *e1 = comma;
          while (e1 > e0 && isspace((unsigned char)e1[-1])) e1--;
          if (e1 < e0) e1 = e0;
          st = JG_FAIL(err, JG_EINVAL, "%s: element %ld of the list ('%.*s') is not a word %s "
                       "takes (%s)", where, n + 1, (int)(e1 - e0), e0, key,
                       jg_param_doc_find(key)->allowed);
          break;
        }
        if (words) {
          x = word;
        } else if (!parse_number(p, (size_t)(comma - p), &x)) {
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

const char *jg_scan_axis_word(const jg_scan_axis *ax, long long i) {
  const char *const *words = jg_params_key_words(ax->key);
  if (!words) return NULL;
  const double v = jg_scan_axis_value(ax, i);
  int n = 0;
  while (words[n]) n++;
  return v >= 0 && v < n && v == floor(v) ? words[(int)v] : NULL;
}
