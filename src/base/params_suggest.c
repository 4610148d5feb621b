/*
 * Unknown keys and groups, with the nearest known key as a suggestion.
 */
#include "jeansgrow/params.h"

#include <stdio.h>
#include <string.h>

#include "params_internal.h"

static size_t edit_distance(const char *a, const char *b) {
  size_t la = strlen(a), lb = strlen(b);
  if (la > 128 || lb > 128) return (size_t)-1;
  size_t row[129];
  for (size_t j = 0; j <= lb; j++) row[j] = j;
  for (size_t i = 1; i <= la; i++) {
    size_t diag = row[0];
    row[0] = i;
    for (size_t j = 1; j <= lb; j++) {
      size_t up = row[j];
      size_t cost = a[i - 1] == b[j - 1] ? 0 : 1;
      size_t best = diag + cost;
      if (row[j] + 1 < best) best = row[j] + 1;
      if (row[j - 1] + 1 < best) best = row[j - 1] + 1;
      row[j] = best;
      diag = up;
    }
  }
  return row[lb];
}

static const char *last_component(const char *key) {
  const char *dot = strrchr(key, '.');
  return dot ? dot + 1 : key;
}

/* How far `typed` is from the known name `known`; a clear abbreviation
 * ("curvature" for "curvature_omega") counts as one edit. */
static size_t name_distance(const char *typed, const char *known) {
  size_t d = edit_distance(typed, known);
  size_t lt = strlen(typed), lk = strlen(known);
  size_t shorter = lt < lk ? lt : lk;
  if (shorter >= 4 && d > 1 && strncmp(typed, known, shorter) == 0) d = 1;
  return d;
}

/* Close enough to suggest: a few typos, not a different word. */
static int worth_suggesting(size_t d, const char *typed) {
  size_t n = strlen(typed);
  return d <= (n / 3 > 2 ? n / 3 : 2);
}

/* The key of `table` nearest to `key`, or NULL if none is close. The group
 * part and the last part are compared separately too, so that a key written
 * without its group ("hubble_h") or in the wrong group ("thermal.hubble_h")
 * finds its home. */
const char *jg__nearest_in(const char *key, const jg__param_spec *table, int n) {
  const char *best = NULL;
  size_t best_d = (size_t)-1;
  const char *typed_last = last_component(key);
  for (int i = 0; i < n; i++) {
    const char *known_last = last_component(table[i].doc.key);
    size_t d = name_distance(key, table[i].doc.key);
    size_t d2 = name_distance(typed_last, known_last);
    if (d2 < d) d = d2;
    if (d < best_d) best_d = d, best = table[i].doc.key;
  }
  return best && worth_suggesting(best_d, typed_last) ? best : NULL;
}

const char *jg__nearest_key(const char *key) {
  return jg__nearest_in(key, jg__param_specs, jg__n_param_specs);
}

static int is_known_group(const char *name) {
  for (int i = 0; i < jg__n_param_groups; i++)
    if (strcmp(jg__param_groups[i], name) == 0) return 1;
  return 0;
}

jg_status jg__unknown_key(const char *where, const char *key, const char *near, jg_error *err) {
  if (near)
    return JG_FAIL(err, JG_ECONFIG, "%sunknown key '%s' (did you mean '%s'?)", where, key, near);
  return JG_FAIL(err, JG_ECONFIG,
                 "%sunknown key '%s' (no known key is similar; jeansgrow keys lists them all)",
                 where, key);
}

static jg_status unknown_key(const jg__locator *loc, const char *key, jg_error *err) {
  char where[512];
  jg__locate(loc, key, where, sizeof where);
  return jg__unknown_key(where, key, jg__nearest_key(key), err);
}

static jg_status unknown_group(const jg__locator *loc, const char *name, jg_error *err) {
  char where[512], groups[256] = "";
  jg__locate(loc, name, where, sizeof where);
  const char *near = NULL;
  size_t best_d = (size_t)-1;
  /* The groups of jg_params, then the scan group. */
  for (int i = 0; i <= jg__n_param_groups; i++) {
    const char *group = i < jg__n_param_groups ? jg__param_groups[i] : "scan";
    size_t d = name_distance(name, group);
    if (d < best_d) best_d = d, near = group;
    snprintf(groups + strlen(groups), sizeof groups - strlen(groups), "%s%s", i ? ", " : "",
             group);
  }
  if (near && worth_suggesting(best_d, name))
    return JG_FAIL(err, JG_ECONFIG, "%sunknown group '%s' (did you mean '%s'? the groups are %s)",
                   where, name, near, groups);
  return JG_FAIL(err, JG_ECONFIG, "%sunknown group '%s' (the groups are %s)", where, name,
                 groups);
}

jg_status jg__check_known_keys(const jg__locator *loc, const config_setting_t *group,
                               const char *prefix, jg_error *err) {
  int n = config_setting_length(group);
  for (int i = 0; i < n; i++) {
    const config_setting_t *s = config_setting_get_elem(group, (unsigned)i);
    const char *name = config_setting_name(s);
    char key[512];
    if (prefix[0]) snprintf(key, sizeof key, "%s.%s", prefix, name ? name : "?");
    else snprintf(key, sizeof key, "%s", name ? name : "?");
    if (jg__find_spec(key)) continue; /* its type is checked when it is read */
    int is_group = config_setting_type(s) == CONFIG_TYPE_GROUP;
    /* The grid of `jeansgrow scan`: checked here against its own table, so
     * that a typo in it is caught by any command; a single run of the same
     * file uses the base values. */
    if (!prefix[0] && strcmp(key, "scan") == 0) {
      jg_status st = jg__read_scan_group(loc->path, s, NULL, NULL, err);
      if (st != JG_OK) return st;
      continue;
    }
    if (!prefix[0] && is_known_group(key)) {
      if (!is_group) {
        char where[512], got[128];
        jg__locate(loc, key, where, sizeof where);
        return JG_FAIL(err, JG_ECONFIG, "%s%s must be a group such as %s: { ... }; (got %s)",
                       where, key, key, jg__describe_value(s, got, sizeof got));
      }
      jg_status st = jg__check_known_keys(loc, s, key, err);
      if (st != JG_OK) return st;
      continue;
    }
    /* A misspelt group would otherwise be reported by its first key. */
    if (!prefix[0] && is_group) return unknown_group(loc, key, err);
    return unknown_key(loc, key, err);
  }
  return JG_OK;
}

