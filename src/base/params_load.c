/*
 * The parameter file: a libconfig file read into a plain jg_params, its
 * values written back as a table header, one number set by key.
 */
#include "jeansgrow/params.h"

#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "number_rows.h"
#include "params_internal.h"
#include "alloc.h" /* last: test builds route allocations through it */

#define MAX_OVERRIDES 256

static void format_exact(char *buf, size_t size, double v);

/* ------------------------------------------------------------------------ */
/* Reading values out of libconfig, with the type errors a user can act on. */

/* What a setting holds, with its value, for "(got ...)": the user sees what
 * libconfig made of the text ("the string \"0.7\"" tells them to drop the
 * quotes, "the number 4000.0" to drop the decimal point). */
const char *jg__describe_value(const config_setting_t *s, char *buf, size_t size) {
  char num[64];
  switch (config_setting_type(s)) {
  case CONFIG_TYPE_INT:
    snprintf(buf, size, "the integer %d", config_setting_get_int(s));
    break;
  case CONFIG_TYPE_INT64:
    snprintf(buf, size, "the integer %lld", (long long)config_setting_get_int64(s));
    break;
  case CONFIG_TYPE_FLOAT:
    format_exact(num, sizeof num, config_setting_get_float(s));
    snprintf(buf, size, "the number %s", num);
    break;
  case CONFIG_TYPE_STRING:
    snprintf(buf, size, "the string \"%.40s%s\"", config_setting_get_string(s),
             strlen(config_setting_get_string(s)) > 40 ? "..." : "");
    break;
  case CONFIG_TYPE_BOOL:
    snprintf(buf, size, "the boolean %s", config_setting_get_bool(s) ? "true" : "false");
    break;
  case CONFIG_TYPE_ARRAY:
  case CONFIG_TYPE_LIST:
    snprintf(buf, size, "a list of %d value%s", config_setting_length(s),
             config_setting_length(s) == 1 ? "" : "s");
    break;
  case CONFIG_TYPE_GROUP:
    snprintf(buf, size, "a group");
    break;
  default:
    snprintf(buf, size, "a setting of unknown type");
    break;
  }
  return buf;
}

static int is_numeric(const config_setting_t *s) {
  int t = config_setting_type(s);
  return t == CONFIG_TYPE_INT || t == CONFIG_TYPE_INT64 || t == CONFIG_TYPE_FLOAT;
}

static double numeric_value(const config_setting_t *s) {
  switch (config_setting_type(s)) {
  case CONFIG_TYPE_INT:
    return (double)config_setting_get_int(s);
  case CONFIG_TYPE_INT64:
    return (double)config_setting_get_int64(s);
  default:
    return config_setting_get_float(s);
  }
}

jg_status jg__read_setting(const char *where, const char *name, const jg__param_spec *s,
                           const config_setting_t *set, void *base, jg_error *err) {
  char got[128];
  char *at = (char *)base + s->offset;
  int type = config_setting_type(set);
  switch (s->kind) {
  case JG__KIND_NUMBER:
    if (!is_numeric(set))
      return JG_FAIL(err, JG_ECONFIG, "%s%s must be a number (got %s)", where, name,
                     jg__describe_value(set, got, sizeof got));
    *(double *)at = numeric_value(set);
    return JG_OK;
  case JG__KIND_INTEGER: {
    if (type != CONFIG_TYPE_INT && type != CONFIG_TYPE_INT64)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must be an integer (got %s)", where, name,
                     jg__describe_value(set, got, sizeof got));
    long long v = type == CONFIG_TYPE_INT ? config_setting_get_int(set)
                                          : config_setting_get_int64(set);
    if (v < (long long)s->lo || v > (long long)s->hi)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must satisfy %s (got %lld)", where, name,
                     s->doc.allowed, v);
    *(int *)at = (int)v;
    return JG_OK;
  }
  case JG__KIND_CHOICE: {
    if (type != CONFIG_TYPE_STRING)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must be a quoted word, one of %s (got %s)", where,
                     name, s->doc.allowed, jg__describe_value(set, got, sizeof got));
    const char *word = config_setting_get_string(set);
    for (int j = 0; s->choices[j]; j++) {
      if (strcmp(word, s->choices[j]) == 0) {
        *(int *)at = j;
        return JG_OK;
      }
    }
    return JG_FAIL(err, JG_ECONFIG, "%s%s must be one of %s (got \"%s\")", where, name,
                   s->doc.allowed, word);
  }
  case JG__KIND_BOOLEAN:
    if (type != CONFIG_TYPE_BOOL)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must be true or false, unquoted (got %s)", where,
                     name, jg__describe_value(set, got, sizeof got));
    *(int *)at = config_setting_get_bool(set) ? 1 : 0;
    return JG_OK;
  case JG__KIND_TEXT:
  case JG__KIND_FILE: {
    if (type != CONFIG_TYPE_STRING)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must be quoted text such as \"file.txt\" (got %s)",
                     where, name, jg__describe_value(set, got, sizeof got));
    const char *text = config_setting_get_string(set);
    size_t n = strlen(text);
    if (n >= s->capacity)
      return JG_FAIL(err, JG_ECONFIG, "%s%s is too long (%zu bytes; at most %zu)", where,
                     name, n, s->capacity - 1);
    /* Written back into table headers as one line of libconfig text. */
    for (size_t j = 0; j < n; j++)
      if ((unsigned char)text[j] < 0x20 || text[j] == 0x7f)
        return JG_FAIL(err, JG_ECONFIG, "%s%s holds a control character (byte %zu)", where,
                       name, j + 1);
    memcpy(at, text, n + 1);
    return JG_OK;
  }
  case JG__KIND_NUMBER_LIST: {
    if (type != CONFIG_TYPE_ARRAY && type != CONFIG_TYPE_LIST)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must be a list of numbers such as [20.0, 10.0] (got %s)",
                     where, name, jg__describe_value(set, got, sizeof got));
    int n = config_setting_length(set);
    /* min_count 0 allows the empty list, which is also how the header
     * records such a list, so a header line reads back as it was written. */
    if (n < s->min_count || n > s->max_count)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must hold %.*s (got %s)", where, name,
                     jg__list_count_length(s), s->doc.allowed,
                     n == 0 ? "an empty list" : jg__describe_value(set, got, sizeof got));
    double *out = (double *)at;
    for (int j = 0; j < n; j++) {
      const config_setting_t *e = config_setting_get_elem(set, (unsigned)j);
      if (!is_numeric(e))
        return JG_FAIL(err, JG_ECONFIG, "%s%s[%d] must be a number (got %s)", where, name,
                       j, jg__describe_value(e, got, sizeof got));
      out[j] = numeric_value(e);
    }
    *(int *)((char *)base + s->count_offset) = n;
    return JG_OK;
  }
  }
  return JG_OK;
}

/* ------------------------------------------------------------------------ */
/* The file.                                                                 */

/* libconfig's own words for a parse error, with a hint where its words
 * alone would leave a user guessing. */
static const char *parse_error_hint(const char *text) {
  if (text && strcmp(text, "mismatched element type in array") == 0)
    return " (write every element alike: [1100.0, 10.0], not [1100.0, 10])";
  return "";
}

jg_status jg__read_file(config_t *cfg, const char *path, jg_error *err) {
  struct stat sb;
  if (stat(path, &sb) != 0)
    return JG_FAIL(err, JG_EIO, "%s: cannot read parameter file (%s)", path, strerror(errno));
  if (S_ISDIR(sb.st_mode))
    return JG_FAIL(err, JG_EIO, "%s: cannot read parameter file (it is a directory)", path);
  FILE *f = fopen(path, "r");
  if (!f)
    return JG_FAIL(err, JG_EIO, "%s: cannot read parameter file (%s)", path, strerror(errno));
  /* Read the whole text first: the literal check below needs it, and a zero
   * byte (a binary file given by mistake, or /dev/zero) stops the read at
   * once instead of reaching libconfig, which reports it as a syntax error. */
  size_t cap = 4096, len = 0;
  char *text = malloc(cap);
  jg_status st = text ? JG_OK : JG_FAIL(err, JG_ENOMEM, "%s: out of memory reading it", path);
  while (st == JG_OK) {
    if (cap - len < 2) {
      char *bigger = realloc(text, cap * 2);
      if (!bigger) {
        st = JG_FAIL(err, JG_ENOMEM, "%s: out of memory reading it", path);
        break;
      }
      text = bigger, cap *= 2;
    }
    size_t got = fread(text + len, 1, cap - len - 1, f);
    const char *zero = memchr(text + len, '\0', got);
    if (zero) {
      st = JG_FAIL(err, JG_ECONFIG, "%s: not a text parameter file (zero byte at offset %zu)",
                   path, (size_t)(zero - text));
      break;
    }
    len += got;
    if (got == 0) {
      if (ferror(f))
        st = JG_FAIL(err, JG_EIO, "%s: cannot read parameter file (%s)", path, strerror(errno));
      break;
    }
  }
  fclose(f);
  if (st != JG_OK) {
    free(text);
    return st;
  }
  text[len] = '\0';
  /* Editors on some systems start UTF-8 files with a byte-order mark, which
   * libconfig 1.5 takes for a syntax error on line 1. */
  const char *body = strncmp(text, "\xEF\xBB\xBF", 3) == 0 ? text + 3 : text;
  jg__literal_origin origin = {path, NULL};
  st = jg__check_comments(body, &origin, err);
  if (st == JG_OK && !config_read_string(cfg, body)) {
    const char *why = config_error_text(cfg);
    st = JG_FAIL(err, JG_ECONFIG, "%s:%d: %s%s", path, config_error_line(cfg),
                 why ? why : "syntax error", parse_error_hint(why));
  } else if (st == JG_OK) {
    st = jg__check_literals(body, &origin, "", err);
  }
  free(text);
  return st;
}

/* A relative file name written in the parameter file names a file beside
 * it, wherever the program is started from. */
static jg_status take_from_file_folder(const char *where, const jg__param_spec *s,
                                       const char *param_path, char *name, jg_error *err) {
  const char *slash = strrchr(param_path, '/');
  if (name[0] == '\0' || name[0] == '/' || !slash) return JG_OK;
  size_t folder = (size_t)(slash - param_path) + 1, n = strlen(name);
  if (folder + n >= s->capacity)
    return JG_FAIL(err, JG_ECONFIG,
                   "%s%s is too long once joined to the parameter file's folder (%zu bytes; at "
                   "most %zu)", where, s->doc.key, folder + n, s->capacity - 1);
  memmove(name + folder, name, n + 1);
  memcpy(name, param_path, folder);
  return JG_OK;
}

/* A wavenumber within this (relative) of a bound of the fluid equations
 * is that bound: 1 /Mpc written in h/Mpc and converted back with ten
 * digits is 0.9999999999. */
#define K_BOUND_SNAP 1e-9

static double snap_to_bounds(double k) {
  const double bounds[] = {JG_PARAMS_K_LOWEST, JG_PARAMS_K_HIGHEST};
  for (int i = 0; i < 2; i++)
    if (fabs(k / bounds[i] - 1.0) <= K_BOUND_SNAP) return bounds[i];
  return k;
}

static void snap_wavenumbers(jg_perturb_settings *pt) {
  pt->k_min = snap_to_bounds(pt->k_min);
  pt->k_max = snap_to_bounds(pt->k_max);
  for (int i = 0; i < pt->n_k_values && i < JG_MAX_WAVENUMBERS; i++)
    pt->k_values[i] = snap_to_bounds(pt->k_values[i]);
}

jg_status jg_params_load(const char *path, const char *const *overrides, int n_overrides,
                         jg_params *out, jg_error *err) {
  if (!path || !out)
    return JG_FAIL(err, JG_EINVAL, "jg_params_load: path and output must not be NULL");
  if (n_overrides < 0 || n_overrides > MAX_OVERRIDES)
    return JG_FAIL(err, JG_EINVAL, "too many --set overrides (%d; at most %d)", n_overrides,
                   MAX_OVERRIDES);
  config_t cfg;
  config_init(&cfg);
  jg_status st = jg__read_file(&cfg, path, err);
  for (int i = 0; st == JG_OK && i < n_overrides; i++) st = jg__apply_override(&cfg, overrides[i], err);

  jg__locator loc = {path, &cfg, overrides, n_overrides};
  if (st == JG_OK) st = jg__check_known_keys(&loc, config_root_setting(&cfg), "", err);

  jg_params p;
  jg_params_set_defaults(&p);
  for (int i = 0; st == JG_OK && i < jg__n_param_specs; i++) {
    const jg__param_spec *s = &jg__param_specs[i];
    const config_setting_t *set = config_lookup(&cfg, s->doc.key);
    if (!set) {
      if (s->required)
        st = JG_FAIL(err, JG_ECONFIG, "%s: missing required key %s (%s)", path, s->doc.key,
                     s->doc.meaning);
      continue;
    }
    char where[512];
    jg__locate(&loc, s->doc.key, where, sizeof where);
    st = jg__read_setting(where, s->doc.key, s, set, &p, err);
    if (st == JG_OK && s->kind == JG__KIND_FILE && config_setting_source_line(set) > 0)
      st = take_from_file_folder(where, s, path, (char *)&p + s->offset, err);
  }
  if (st == JG_OK) snap_wavenumbers(&p.perturbations);
  if (st == JG_OK) st = jg__validate(&loc, &p, err);
  config_destroy(&cfg);
  if (st == JG_OK) *out = p;
  return st;
}

/* ------------------------------------------------------------------------ */

/* Shortest decimal text that reads back to the same double. */
static void format_exact(char *buf, size_t size, double v) {
  for (int digits = 6; digits <= 17; digits++) {
    snprintf(buf, size, "%.*g", digits, v);
    if (strtod(buf, NULL) == v) break;
  }
  /* libconfig needs a decimal point or exponent to read a float back. */
  if (!strpbrk(buf, ".eEn")) strncat(buf, ".0", size - strlen(buf) - 1);
}

void jg_params_write_header(FILE *f, const jg_params *p) {
  char buf[64];
  for (int i = 0; i < jg__n_param_specs; i++) {
    const jg__param_spec *s = &jg__param_specs[i];
    fprintf(f, "# %s = ", s->doc.key);
    switch (s->kind) {
    case JG__KIND_NUMBER:
      format_exact(buf, sizeof buf, *jg__cnumber_at(p, s));
      fprintf(f, "%s;\n", buf);
      break;
    case JG__KIND_INTEGER:
      fprintf(f, "%d;\n", *jg__cint_at(p, s->offset));
      break;
    case JG__KIND_CHOICE:
      fprintf(f, "\"%s\";\n", s->choices[*jg__cint_at(p, s->offset)]);
      break;
    case JG__KIND_BOOLEAN:
      fprintf(f, "%s;\n", *jg__cint_at(p, s->offset) ? "true" : "false");
      break;
    case JG__KIND_TEXT:
    case JG__KIND_FILE: {
      /* libconfig's escapes, so that the line reads back as it was. */
      fputc('"', f);
      for (const char *c = (const char *)p + s->offset; *c; c++) {
        if (*c == '"' || *c == '\\') fputc('\\', f);
        fputc(*c, f);
      }
      fputs("\";", f);
      /* Which table was read, not only its name: a checksum of its bytes,
       * as a comment that reads back as one. */
      const char *path = (const char *)p + s->offset;
      uint64_t sum;
      long bytes;
      if (s->kind == JG__KIND_FILE && *path && jg__file_checksum(path, &sum, &bytes))
        fprintf(f, " // %ld bytes, FNV-1a 64 %016llx", bytes, (unsigned long long)sum);
      fputc('\n', f);
      break;
    }
    case JG__KIND_NUMBER_LIST: {
      int n = *jg__cint_at(p, s->count_offset);
      const double *v = jg__cnumber_at(p, s);
      fputc('[', f);
      for (int j = 0; j < n; j++) {
        format_exact(buf, sizeof buf, v[j]);
        fprintf(f, "%s%s", j ? ", " : "", buf);
      }
      fputs("];\n", f);
      break;
    }
    }
  }
}

/* ------------------------------------------------------------------------ */
/* Setting one number by key: what a parameter scan does at each grid point. */

int jg_params_key_is_numeric(const char *key) {
  const jg__param_spec *s = key ? jg__find_spec(key) : NULL;
  return s && (s->kind == JG__KIND_NUMBER || s->kind == JG__KIND_INTEGER);
}

const char *const *jg_params_key_words(const char *key) {
  const jg__param_spec *s = key ? jg__find_spec(key) : NULL;
  return s && s->kind == JG__KIND_CHOICE ? s->choices : NULL;
}

jg_status jg_params_set_number(jg_params *p, const char *key, double value, jg_error *err) {
  if (!p || !key) return JG_FAIL(err, JG_EINVAL, "jg_params_set_number: NULL argument");
  const jg__param_spec *s = jg__find_spec(key);
  if (!s) {
    const char *near = jg__nearest_key(key);
    if (near)
      return JG_FAIL(err, JG_EINVAL, "unknown key '%s' (did you mean '%s'?)", key, near);
    return JG_FAIL(err, JG_EINVAL,
                   "unknown key '%s' (no known key is similar; jeansgrow keys lists them all)",
                   key);
  }
  switch (s->kind) {
  case JG__KIND_NUMBER:
    *jg__number_at(p, s) = value;
    return JG_OK;
  case JG__KIND_INTEGER:
    /* Rounding would silently move the point; the range itself is left to
     * jg_params_validate, like every other value. */
    if (!(value == floor(value)) || value < INT_MIN || value > INT_MAX)
      return JG_FAIL(err, JG_EINVAL, "%s takes whole numbers only (got %.17g)", key, value);
    *(int *)((char *)p + s->offset) = (int)value;
    return JG_OK;
  case JG__KIND_CHOICE: {
    int n = 0;
    while (s->choices[n]) n++;
    if (!(value == floor(value)) || value < 0 || value >= n)
      return JG_FAIL(err, JG_EINVAL, "%s takes the numbers 0 to %d of its words %s (got %.17g)",
                     key, n - 1, s->doc.allowed, value);
    *(int *)((char *)p + s->offset) = (int)value;
    return JG_OK;
  }
  default:
    return JG_FAIL(err, JG_EINVAL, "%s is not a single number (its type: %s)", key, s->doc.type);
  }
}
