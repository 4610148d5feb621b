/*
 * Range checks and combined rules, from the key table: shared by the loader
 * and jg_params_validate().
 */
#include "jeansgrow/params.h"

#include <math.h>
#include <stddef.h>
#include <stdio.h>
#include <string.h>

#include "params_internal.h"

/* The allowed text of a list reads "COUNT, each RANGE" ("1 to 512 values,
 * each 0 <= z <= ..."): a message about the length quotes COUNT, one about
 * an element quotes RANGE, so neither carries the other's half. */
static const char *list_element_range(const jg__param_spec *s) {
  const char *each = strstr(s->doc.allowed, ", each ");
  return each ? each + strlen(", each ") : s->doc.allowed;
}
int jg__list_count_length(const jg__param_spec *s) {
  const char *each = strstr(s->doc.allowed, ", each ");
  return each ? (int)(each - s->doc.allowed) : (int)strlen(s->doc.allowed);
}

/* The range a check applies: the file's, or for a stage the wider domain
 * the table grants it. */
typedef struct applied_range {
  double lo, hi;
  int lo_open, hi_open;
  const char *allowed;
} applied_range;

static applied_range range_of(const jg__param_spec *s, int for_stage) {
  applied_range r = {s->lo, s->hi, s->lo_open, s->hi_open,
                     s->kind == JG__KIND_NUMBER_LIST ? list_element_range(s) : s->doc.allowed};
  for (int i = 0; for_stage && i < jg__n_stage_domains; i++) {
    const jg__stage_domain *d = &jg__stage_domains[i];
    if (strcmp(d->key, s->doc.key) == 0)
      r = (applied_range){d->lo, d->hi, d->lo_open, d->hi_open, d->allowed};
  }
  return r;
}

static jg_status check_range(const jg__locator *loc, const jg__param_spec *s, const char *name,
                             double v, int for_stage, jg_error *err) {
  char where[512];
  if (!isfinite(v)) {
    jg__locate(loc, name, where, sizeof where);
    return JG_FAIL(err, JG_ECONFIG, "%s%s must be a finite number (got %g)", where, name, v);
  }
  applied_range r = range_of(s, for_stage);
  int below = r.lo_open ? !(v > r.lo) : !(v >= r.lo);
  int above = r.hi_open ? !(v < r.hi) : !(v <= r.hi);
  if (below || above) {
    jg__locate(loc, name, where, sizeof where);
    return JG_FAIL(err, JG_ECONFIG, "%s%s must satisfy %s (got %.10g)", where, name, r.allowed,
                   v);
  }
  return JG_OK;
}

/* ---- combined rules (listed in jg__param_rules) ---- */

/* Every output redshift below `limit` (or equal to it, if `equal_allowed`),
 * else a message naming the first one that is not: "NAME = Z RELATION
 * LIMIT_KEY = LIMIT ADVICE". */
static jg_status redshifts_below(const jg__locator *loc, const jg_params *p, double limit,
                                 int equal_allowed, const char *relation, const char *limit_key,
                                 const char *advice, jg_error *err) {
  for (int i = 0; i < p->output.n_redshifts; i++) {
    double z = p->output.redshifts[i];
    if (equal_allowed ? z <= limit : z < limit) continue;
    char where[512], name[64];
    snprintf(name, sizeof name, "output.redshifts[%d]", i);
    jg__locate(loc, name, where, sizeof where);
    return JG_FAIL(err, JG_ECONFIG, "%s%s = %g %s %s = %g%s", where, name, z, relation, limit_key,
                   limit, advice);
  }
  return JG_OK;
}

jg_status jg__rule_redshifts_in_history(const jg__locator *loc, const jg_params *p,
                                        jg_error *err) {
  return redshifts_below(loc, p, p->thermal.start_redshift, 1, "lies above",
                         "thermal.start_redshift",
                         "; raise thermal.start_redshift or drop that redshift", err);
}

jg_status jg__rule_dark_energy_fades(const jg__locator *loc, const jg_params *p,
                                     jg_error *err) {
  const jg_cosmology *c = &p->cosmology;
  if (c->de_w0 + c->de_wa < 1.0 / 3.0) return JG_OK;
  char where[512];
  jg__locate(loc, "cosmology.de_wa", where, sizeof where);
  return JG_FAIL(err, JG_ECONFIG,
                 "%scosmology.de_w0 + cosmology.de_wa must be below 1/3 (got %g): such dark "
                 "energy would not fade before radiation at early times",
                 where, c->de_w0 + c->de_wa);
}

jg_status jg__rule_wavenumbers_ordered(const jg__locator *loc, const jg_params *p,
                                       jg_error *err) {
  const jg_perturb_settings *pt = &p->perturbations;
  if (pt->n_k_values > 0 || !(pt->k_max < pt->k_min)) return JG_OK;
  char where[512];
  jg__locate(loc, "perturbations.k_max", where, sizeof where);
  return JG_FAIL(err, JG_ECONFIG,
                 "%sperturbations.k_max = %g is below perturbations.k_min = %g (reversed "
                 "wavenumber range)",
                 where, pt->k_max, pt->k_min);
}

jg_status jg__rule_single_wavenumber(const jg__locator *loc, const jg_params *p,
                                     jg_error *err) {
  const jg_perturb_settings *pt = &p->perturbations;
  if (pt->n_k_values > 0 || pt->k_count != 1 || pt->k_max == pt->k_min) return JG_OK;
  char where[512];
  jg__locate(loc, "perturbations.k_count", where, sizeof where);
  return JG_FAIL(err, JG_ECONFIG,
                 "%sperturbations.k_count = 1 needs k_min = k_max (got %g and %g)", where,
                 pt->k_min, pt->k_max);
}

jg_status jg__rule_redshifts_after_start(const jg__locator *loc, const jg_params *p,
                                         jg_error *err) {
  return redshifts_below(loc, p, p->perturbations.z_initial, 0, "is not below",
                         "perturbations.z_initial", " (reversed redshift range)", err);
}

jg_status jg__rule_history_range_ordered(const jg__locator *loc, const jg_params *p,
                                         jg_error *err) {
  if (p->output.history_z_min < p->thermal.start_redshift) return JG_OK;
  char where[512];
  jg__locate(loc, "output.history_z_min", where, sizeof where);
  return JG_FAIL(err, JG_ECONFIG,
                 "%soutput.history_z_min = %g must lie below thermal.start_redshift = %g "
                 "(reversed redshift range)",
                 where, p->output.history_z_min, p->thermal.start_redshift);
}

jg_status jg__rule_start_columns(const jg__locator *loc, const jg_params *p, jg_error *err) {
  const jg_perturb_settings *pt = &p->perturbations;
  if (!pt->initial_columns[0]) return JG_OK;
  jg_column_map map;
  char why[256], where[512];
  if (jg_column_map_parse(pt->initial_columns, &map, why, sizeof why) == JG_OK &&
      jg_column_map_check_start(&map, (jg_table_gauge)pt->initial_gauge,
                                pt->initial_second_table[0] != '\0', why, sizeof why) == JG_OK)
    return JG_OK;
  jg__locate(loc, "perturbations.initial_columns", where, sizeof where);
  return JG_FAIL(err, JG_ECONFIG,
                 "%sperturbations.initial_columns = \"%.80s\" (perturbations.initial_gauge = "
                 "\"%s\"): %s",
                 where, pt->initial_columns,
                 pt->initial_gauge == JG_TABLE_SYNCHRONOUS ? "synchronous" : "newtonian", why);
}

jg_status jg__rule_second_snapshot_near(const jg__locator *loc, const jg_params *p,
                                       jg_error *err) {
  const jg_perturb_settings *pt = &p->perturbations;
  if (!pt->initial_second_table[0]) return JG_OK;
  const double step = log1p(pt->initial_second_redshift) - log1p(pt->z_initial);
  if (step != 0.0 && fabs(step) <= JG_PARAMS_SNAPSHOT_STEP_MAX && pt->initial_table[0] &&
      pt->initial_columns[0])
    return JG_OK;
  char where[512];
  jg__locate(loc, "perturbations.initial_second_redshift", where, sizeof where);
  return JG_FAIL(err, JG_ECONFIG,
                 "%sperturbations.initial_second_table needs perturbations.initial_table with "
                 "its perturbations.initial_columns, and perturbations.initial_second_redshift "
                 "= %g must differ from perturbations.z_initial = %g by at most %g in ln(1+z)",
                 where, pt->initial_second_redshift, pt->z_initial, JG_PARAMS_SNAPSHOT_STEP_MAX);
}

jg_status jg__rule_own_start_early(const jg__locator *loc, const jg_params *p, jg_error *err) {
  const jg_perturb_settings *pt = &p->perturbations;
  if (pt->z_initial >= JG_PARAMS_OWN_START_Z_MIN || jg_params_start_gives_cdm_velocity(pt))
    return JG_OK;
  char where[512];
  jg__locate(loc, "perturbations.z_initial", where, sizeof where);
  return JG_FAIL(err, JG_ECONFIG,
                 "%sperturbations.z_initial = %g is below %g, where the dark matter's own "
                 "start (Meszaros growing mode, smooth baryons) holds; below it the start "
                 "table (perturbations.initial_table) must give the dark matter's velocity "
                 "too (perturbations.initial_columns with rate_c, or theta_c in the Newtonian "
                 "gauge)",
                 where, pt->z_initial, JG_PARAMS_OWN_START_Z_MIN);
}

/* Whole-number keys (integers, and the index of a word) hold an int. */
static jg_status check_whole(const jg__locator *loc, const jg__param_spec *s, const char *name,
                             double v, jg_error *err) {
  if (v >= s->lo && v <= s->hi && v == floor(v)) return JG_OK;
  char where[512];
  jg__locate(loc, name, where, sizeof where);
  if (s->kind == JG__KIND_CHOICE)
    return JG_FAIL(err, JG_ECONFIG, "%s%s must be one of %s (got choice number %.10g)", where,
                   name, s->doc.allowed, v);
  if (s->kind == JG__KIND_BOOLEAN)
    return JG_FAIL(err, JG_ECONFIG, "%s%s must be %s, stored as 0 or 1 (got %.10g)", where,
                   name, s->doc.allowed, v);
  return JG_FAIL(err, JG_ECONFIG, "%s%s must satisfy %s (got %.10g)", where, name,
                 s->doc.allowed, v);
}

static jg_status check_spec(const jg__locator *loc, const jg__param_spec *s, const jg_params *p,
                            int for_stage, jg_error *err) {
  char where[512];
  switch (s->kind) {
  case JG__KIND_NUMBER:
    return check_range(loc, s, s->doc.key, *jg__cnumber_at(p, s), for_stage, err);
  case JG__KIND_INTEGER:
  case JG__KIND_CHOICE:
  case JG__KIND_BOOLEAN:
    return check_whole(loc, s, s->doc.key, *jg__cint_at(p, s->offset), err);
  case JG__KIND_TEXT:
  case JG__KIND_FILE: {
    const char *text = (const char *)p + s->offset;
    if (memchr(text, '\0', s->capacity)) return JG_OK;
    jg__locate(loc, s->doc.key, where, sizeof where);
    return JG_FAIL(err, JG_ECONFIG, "%s%s is not terminated within %zu bytes", where, s->doc.key,
                   s->capacity);
  }
  case JG__KIND_NUMBER_LIST: {
    int n = *jg__cint_at(p, s->count_offset);
    if (n < s->min_count || n > s->max_count) {
      jg__locate(loc, s->doc.key, where, sizeof where);
      return JG_FAIL(err, JG_ECONFIG, "%s%s must hold %.*s (got %d values)", where, s->doc.key,
                     jg__list_count_length(s), s->doc.allowed, n);
    }
    const double *v = jg__cnumber_at(p, s);
    for (int j = 0; j < n; j++) {
      char name[128];
      snprintf(name, sizeof name, "%s[%d]", s->doc.key, j);
      jg_status st = check_range(loc, s, name, v[j], for_stage, err);
      if (st != JG_OK) return st;
    }
    return JG_OK;
  }
  }
  return JG_OK;
}

/* The range of every key that starts with `key_prefix`, then the combined
 * rules of `rule_group` (NULL: all keys, all rules): the loader's check, or
 * (`for_stage`) a stage's. */
static jg_status check_keys_and_rules(const jg__locator *loc, const jg_params *p,
                                      const char *key_prefix, const char *rule_group,
                                      int for_stage, jg_error *err) {
  for (int i = 0; i < jg__n_param_specs; i++) {
    const char *key = jg__param_specs[i].doc.key;
    if (key_prefix && strncmp(key, key_prefix, strlen(key_prefix)) != 0) continue;
    jg_status st = check_spec(loc, &jg__param_specs[i], p, for_stage, err);
    if (st != JG_OK) return st;
  }
  for (int i = 0; i < jg__n_param_rules; i++) {
    const jg__param_rule *r = &jg__param_rules[i];
    if (rule_group && !(r->group && strcmp(r->group, rule_group) == 0)) continue;
    jg_status st = r->check(loc, p, err);
    if (st != JG_OK) return st;
  }
  return JG_OK;
}

jg_status jg__validate(const jg__locator *loc, const jg_params *p, jg_error *err) {
  return check_keys_and_rules(loc, p, NULL, NULL, 0, err);
}

jg_status jg_params_validate(const jg_params *p, jg_error *err) {
  return jg__validate(NULL, p, err);
}

/* ---- the same limits for a stage that defends its own inputs ---- */

/* A stage is called by programs, not by parameter files: its callers see
 * invalid input, with the loader's words. */
static jg_status as_invalid_input(jg_status st, jg_error *err) {
  if (st == JG_OK) return JG_OK;
  if (err) err->status = JG_EINVAL;
  return JG_EINVAL;
}

/* Check one part of a jg_params (at `offset`, `size` bytes) as a stage
 * holds it: the keys starting with `key_prefix`, the rules of `rule_group`. */
static jg_status check_part(const void *part, size_t offset, size_t size, const char *key_prefix,
                            const char *rule_group, jg_error *err) {
  if (!part) return JG_FAIL(err, JG_EINVAL, "%s: no settings given (NULL)", rule_group);
  jg_params p;
  jg_params_set_defaults(&p);
  memcpy((char *)&p + offset, part, size);
  return as_invalid_input(check_keys_and_rules(NULL, &p, key_prefix, rule_group, 1, err), err);
}

jg_status jg_params_check_cosmology(const jg_cosmology *c, jg_error *err) {
  return check_part(c, offsetof(jg_params, cosmology), sizeof *c, "cosmology.", "cosmology",
                    err);
}

jg_status jg_params_check_thermal(const jg_thermal_settings *s, jg_error *err) {
  return check_part(s, offsetof(jg_params, thermal), sizeof *s, "thermal.", "thermal", err);
}

/* k_min, k_max, k_count, k_values, and the rules between them. */
jg_status jg_params_check_wavenumbers(const jg_perturb_settings *s, jg_error *err) {
  return check_part(s, offsetof(jg_params, perturbations), sizeof *s, "perturbations.k_",
                    "perturbations", err);
}

/* The spec of `key`, or of the list `key` names an element of ("k_values[3]"). */
static const jg__param_spec *spec_of_value(const char *key) {
  char base[256];
  snprintf(base, sizeof base, "%s", key);
  char *bracket = strchr(base, '[');
  if (bracket) *bracket = '\0';
  const jg__param_spec *s = jg__find_spec(base);
  if (!s || s->kind == JG__KIND_TEXT || s->kind == JG__KIND_FILE || (bracket != NULL) != (s->kind == JG__KIND_NUMBER_LIST))
    return NULL;
  return s;
}

jg_status jg_params_check_value(const char *key, double value, jg_error *err) {
  const jg__param_spec *s = key ? spec_of_value(key) : NULL;
  if (!s) return JG_FAIL(err, JG_EINVAL, "jg_params_check_value: '%s' has no numeric range", key);
  jg_status st = s->kind == JG__KIND_NUMBER || s->kind == JG__KIND_NUMBER_LIST
                     ? check_range(NULL, s, key, value, 1, err)
                     : check_whole(NULL, s, key, value, err);
  return as_invalid_input(st, err);
}

int jg_params_key_range(const char *key, int for_stage, jg_param_range *range) {
  const jg__param_spec *s = key ? spec_of_value(key) : NULL;
  if (!s) return 0;
  applied_range r = range_of(s, for_stage);
  if (range) *range = (jg_param_range){r.lo, r.hi, r.lo_open, r.hi_open};
  return 1;
}
