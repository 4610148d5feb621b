/*
 * Setting one key of a jg_params by name, for every kind of value: the
 * value goes through the loader's own reader (jg__read_setting), so a C
 * caller gets the same type checks and the same messages as a parameter
 * file. Ranges and the rules between keys are left to jg_params_validate,
 * as for jg_params_set_number: a caller may pass through an invalid state
 * while changing several keys.
 */
#include "jeansgrow/params.h"

#include <libconfig.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "params_internal.h"
#include "alloc.h" /* last: test builds route allocations through it */

/* Fills the scratch setting `value` with what the caller gave. */
typedef int (*setting_filler)(config_setting_t *value, const void *given);

static jg_status set_through_reader(jg_params *p, const char *key, int type, setting_filler fill,
                                    const void *given, jg_error *err) {
  if (!p || !key) return JG_FAIL(err, JG_EINVAL, "setting a parameter by key: NULL argument");
  const jg__param_spec *spec = jg__find_spec(key);
  if (!spec) return jg__unknown_key("", key, jg__nearest_key(key), err);
  config_t cfg;
  config_init(&cfg);
  config_setting_t *value = config_setting_add(config_root_setting(&cfg), "value", type);
  jg_params *copy = malloc(sizeof *copy);
  jg_status st = JG_OK;
  if (!value || !copy || !fill(value, given)) {
    st = JG_FAIL(err, JG_ENOMEM, "out of memory setting %s", key);
  } else {
    /* The reader may have stored part of a list when it fails. */
    *copy = *p;
    st = jg__read_setting("", key, spec, value, copy, err);
    if (st == JG_OK) *p = *copy;
  }
  free(copy);
  config_destroy(&cfg);
  return st;
}

static int fill_text(config_setting_t *value, const void *given) {
  return config_setting_set_string(value, (const char *)given) == CONFIG_TRUE;
}

static int fill_boolean(config_setting_t *value, const void *given) {
  return config_setting_set_bool(value, *(const int *)given) == CONFIG_TRUE;
}

typedef struct number_list {
  const double *values;
  int n;
} number_list;

static int fill_list(config_setting_t *value, const void *given) {
  const number_list *l = given;
  for (int i = 0; i < l->n; i++)
    if (!config_setting_set_float_elem(value, -1, l->values[i])) return 0;
  return 1;
}

jg_status jg_params_set_text(jg_params *p, const char *key, const char *text, jg_error *err) {
  if (!text) return JG_FAIL(err, JG_EINVAL, "jg_params_set_text: NULL text for %s", key ? key : "(null)");
  return set_through_reader(p, key, CONFIG_TYPE_STRING, fill_text, text, err);
}

jg_status jg_params_set_boolean(jg_params *p, const char *key, int value, jg_error *err) {
  int v = value != 0;
  return set_through_reader(p, key, CONFIG_TYPE_BOOL, fill_boolean, &v, err);
}

jg_status jg_params_set_list(jg_params *p, const char *key, const double *values, int n,
                             jg_error *err) {
  if (n < 0 || (n > 0 && !values))
    return JG_FAIL(err, JG_EINVAL, "jg_params_set_list: %d values at %p for %s", n,
                   (const void *)values, key ? key : "(null)");
  number_list l = {values, n};
  return set_through_reader(p, key, CONFIG_TYPE_ARRAY, fill_list, &l, err);
}

jg_status jg_params_set_value(jg_params *p, const char *key, const char *value, jg_error *err) {
  if (!p || !key || !value) return JG_FAIL(err, JG_EINVAL, "jg_params_set_value: NULL argument");
  /* Exactly what --set KEY=VALUE does, so the messages are the program's. */
  size_t n = strlen(key) + strlen(value) + 2;
  char *text = malloc(n);
  if (!text) return JG_FAIL(err, JG_ENOMEM, "out of memory setting %s", key);
  snprintf(text, n, "%s=%s", key, value);
  char where[512];
  snprintf(where, sizeof where, "--set %s: ", text);
  config_t cfg;
  config_init(&cfg);
  jg_status st = jg__apply_override(&cfg, text, err);
  const jg__param_spec *spec = st == JG_OK ? jg__find_spec(key) : NULL;
  if (st == JG_OK && !spec) st = jg__unknown_key(where, key, jg__nearest_key(key), err);
  jg_params *copy = st == JG_OK ? malloc(sizeof *copy) : NULL;
  if (st == JG_OK && !copy) st = JG_FAIL(err, JG_ENOMEM, "out of memory setting %s", key);
  if (st == JG_OK) {
    *copy = *p;
    st = jg__read_setting(where, key, spec, config_lookup(&cfg, key), copy, err);
    if (st == JG_OK) *p = *copy;
  }
  free(copy);
  config_destroy(&cfg);
  free(text);
  return st;
}
