/*
 * The `scan` group of a parameter file: the grid of `jeansgrow scan`.
 *
 * Read with the machinery of every other key: members found in the scan key
 * table (params_keys.c), their types read by jg__read_setting, unknown names
 * answered with the nearest known one. What makes a good grid (counts,
 * ranges, how many points) is the scan module's to check, because it knows
 * the varied key; this file hands it each axis as written.
 */
#include "jeansgrow/params.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "params_internal.h"
#include "alloc.h" /* last: test builds route allocations through it */

static int setting_line(const config_setting_t *s, const config_setting_t *fallback) {
  int line = s ? (int)config_setting_source_line(s) : 0;
  if (line <= 0 && fallback) line = (int)config_setting_source_line(fallback);
  return line;
}

/* The scan group holds one key, scan.vary: is `key` close to it? */
static const char *nearest_group_key(const char *key) {
  const jg__param_spec vary = {.doc = jg__scan_vary_doc};
  return jg__nearest_in(key, &vary, 1);
}

static const jg__param_spec *vary_member(const char *name) {
  for (int i = 0; i < jg__n_vary_specs; i++)
    if (strcmp(strrchr(jg__vary_specs[i].doc.key, '.') + 1, name) == 0) return &jg__vary_specs[i];
  return NULL;
}

/* One group element of scan.vary. `element` is "scan.vary[I]"; `where`
 * is "FILE:LINE: scan.vary[I]". */
static jg_status read_vary_group(const char *path, const config_setting_t *e, const char *element,
                                 const char *where, jg__vary_fields *f, jg_param_axis_fn add,
                                 void *user, jg_error *err) {
  memset(f, 0, offsetof(jg__vary_fields, values));
  int seen[16] = {0};
  int n = config_setting_length(e);
  for (int i = 0; i < n; i++) {
    const config_setting_t *m = config_setting_get_elem(e, (unsigned)i);
    const char *name = config_setting_name(m);
    char key[256], at[1024];
    snprintf(key, sizeof key, "%s.%s", element, name ? name : "?");
    snprintf(at, sizeof at, "%s:%d: ", path, setting_line(m, e));
    const jg__param_spec *s = name ? vary_member(name) : NULL;
    if (!s) {
      /* Suggest with this element's index: "scan.vary[2].from". */
      const char *near = jg__nearest_in(key, jg__vary_specs, jg__n_vary_specs);
      char suggestion[256];
      if (near) snprintf(suggestion, sizeof suggestion, "%s%s", element, strrchr(near, '.'));
      return jg__unknown_key(at, key, near ? suggestion : NULL, err);
    }
    jg_status st = jg__read_setting(at, key, s, m, f, err);
    if (st != JG_OK) return st;
    seen[s - jg__vary_specs] = 1;
  }
  enum { KEY, FROM, TO, COUNT, SPACING, VALUES }; /* the order of jg__vary_specs */
  if (!seen[KEY])
    return JG_FAIL(err, JG_ECONFIG, "%s: needs key = \"group.name\"; (a quoted parameter key)",
                   where);
  jg_param_axis axis = {where, NULL, f->key, NULL, 0, 0.0, 0.0, 0, 0};
  if (seen[VALUES]) {
    if (seen[FROM] || seen[TO] || seen[COUNT] || seen[SPACING])
      return JG_FAIL(err, JG_ECONFIG, "%s: give either values or from, to, count (and spacing), "
                     "not both", where);
    axis.values = f->values;
    axis.n_values = f->n_values;
  } else {
    if (!seen[FROM] || !seen[TO] || !seen[COUNT])
      return JG_FAIL(err, JG_ECONFIG, "%s: needs from, to and count (or a list of values)",
                     where);
    axis.from = f->from;
    axis.to = f->to;
    axis.count = f->count;
    axis.log_spacing = f->spacing == 1;
  }
  return add ? add(user, &axis, err) : JG_OK;
}

jg_status jg__read_scan_group(const char *path, const config_setting_t *scan,
                              jg_param_axis_fn add, void *user, jg_error *err) {
  char got[128];
  if (config_setting_type(scan) != CONFIG_TYPE_GROUP)
    return JG_FAIL(err, JG_ECONFIG,
                   "%s:%d: scan must be a group such as scan: { vary = ( ... ); }; (got %s)",
                   path, setting_line(scan, NULL), jg__describe_value(scan, got, sizeof got));
  const config_setting_t *vary = NULL;
  int n = config_setting_length(scan);
  for (int i = 0; i < n; i++) {
    const config_setting_t *m = config_setting_get_elem(scan, (unsigned)i);
    const char *name = config_setting_name(m);
    if (name && strcmp(name, "vary") == 0) {
      vary = m;
      continue;
    }
    char key[256], at[1024];
    snprintf(key, sizeof key, "scan.%s", name ? name : "?");
    snprintf(at, sizeof at, "%s:%d: ", path, setting_line(m, scan));
    return jg__unknown_key(at, key, nearest_group_key(key), err);
  }
  if (!vary) return JG_OK;
  int type = config_setting_type(vary);
  if (type != CONFIG_TYPE_LIST && type != CONFIG_TYPE_ARRAY)
    return JG_FAIL(err, JG_ECONFIG,
                   "%s:%d: scan.vary must be a list such as vary = ( { key = ...; from = ...; "
                   "to = ...; count = ...; } ); (got %s)",
                   path, setting_line(vary, scan), jg__describe_value(vary, got, sizeof got));
  int n_axes = config_setting_length(vary);
  if (n_axes == 0)
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: scan.vary is empty (nothing to vary)", path,
                   setting_line(vary, scan));
  jg__vary_fields *fields = NULL;
  jg_status st = JG_OK;
  for (int i = 0; st == JG_OK && i < n_axes; i++) {
    const config_setting_t *e = config_setting_get_elem(vary, (unsigned)i);
    char element[64], where[1024];
    snprintf(element, sizeof element, "scan.vary[%d]", i);
    snprintf(where, sizeof where, "%s:%d: %s", path, setting_line(e, vary), element);
    if (config_setting_type(e) == CONFIG_TYPE_STRING) {
      jg_param_axis axis = {where, config_setting_get_string(e), NULL, NULL, 0, 0.0, 0.0, 0, 0};
      st = add ? add(user, &axis, err) : JG_OK;
    } else if (config_setting_type(e) == CONFIG_TYPE_GROUP) {
      if (!fields && !(fields = malloc(sizeof *fields)))
        st = JG_FAIL(err, JG_ENOMEM, "%s: out of memory", where);
      else
        st = read_vary_group(path, e, element, where, fields, add, user, err);
    } else {
      st = JG_FAIL(err, JG_ECONFIG, "%s: each element is a group { key = \"...\"; from = ...; "
                   "to = ...; count = ...; } or a text \"KEY=FROM:TO:N\" (got %s)", where,
                   jg__describe_value(e, got, sizeof got));
    }
  }
  free(fields);
  return st;
}

jg_status jg_params_read_scan(const char *path, jg_param_axis_fn add, void *user, jg_error *err) {
  if (!path || !add) return JG_FAIL(err, JG_EINVAL, "jg_params_read_scan: NULL argument");
  config_t cfg;
  config_init(&cfg);
  jg_status st = jg__read_file(&cfg, path, err);
  const config_setting_t *scan = st == JG_OK ? config_lookup(&cfg, "scan") : NULL;
  if (scan) st = jg__read_scan_group(path, scan, add, user, err);
  config_destroy(&cfg);
  return st;
}

jg_status jg__scan_override_refused(const char *text, const char *key, jg_error *err) {
  if (strcmp(key, "scan") == 0 || strncmp(key, "scan.vary", 9) == 0)
    return JG_FAIL(err, JG_ECONFIG,
                   "--set %s: the scan group is read from the parameter file only (give the "
                   "axes on the command line with jeansgrow scan --vary KEY=FROM:TO:N)",
                   text);
  char where[1024];
  snprintf(where, sizeof where, "--set %s: ", text);
  return jg__unknown_key(where, key, nearest_group_key(key), err);
}
