/* The opaque parameter object (include/jeansgrow/config.h): a jg_params
 * behind a pointer, so that its size never reaches a caller's binary. */
#include "jeansgrow/config.h"

#include <stdlib.h>

#include "alloc.h" /* last: test builds route allocations through it */

struct jg_config {
  jg_params params;
};

static jg_status config_alloc(jg_config **out, const char *what, jg_error *err) {
  if (!out) return JG_FAIL(err, JG_EINVAL, "%s: NULL output pointer", what);
  *out = malloc(sizeof **out);
  if (!*out) return JG_FAIL(err, JG_ENOMEM, "out of memory for the parameters (%s)", what);
  return JG_OK;
}

jg_status jg_config_new(jg_config **out, jg_error *err) {
  jg_status st = config_alloc(out, "jg_config_new", err);
  if (st == JG_OK) jg_params_set_defaults(&(*out)->params);
  return st;
}

jg_status jg_config_load(const char *path, const char *const *overrides, int n_overrides,
                         jg_config **out, jg_error *err) {
  jg_config *c = NULL;
  jg_status st = config_alloc(&c, "jg_config_load", err);
  if (st == JG_OK && !out) st = JG_FAIL(err, JG_EINVAL, "jg_config_load: NULL output pointer");
  if (st == JG_OK) st = jg_params_load(path, overrides, n_overrides, &c->params, err);
  if (st != JG_OK) {
    free(c);
    return st;
  }
  *out = c;
  return JG_OK;
}

jg_status jg_config_copy(const jg_config *c, jg_config **out, jg_error *err) {
  if (!c) return JG_FAIL(err, JG_EINVAL, "jg_config_copy: NULL config");
  jg_status st = config_alloc(out, "jg_config_copy", err);
  if (st == JG_OK) (*out)->params = c->params;
  return st;
}

void jg_config_free(jg_config *c) { free(c); }

jg_status jg_config_set_value(jg_config *c, const char *key, const char *value, jg_error *err) {
  return jg_params_set_value(c ? &c->params : NULL, key, value, err);
}

jg_status jg_config_set_number(jg_config *c, const char *key, double value, jg_error *err) {
  return jg_params_set_number(c ? &c->params : NULL, key, value, err);
}

jg_status jg_config_set_text(jg_config *c, const char *key, const char *text, jg_error *err) {
  return jg_params_set_text(c ? &c->params : NULL, key, text, err);
}

jg_status jg_config_set_list(jg_config *c, const char *key, const double *values, int n,
                             jg_error *err) {
  return jg_params_set_list(c ? &c->params : NULL, key, values, n, err);
}

jg_status jg_config_set_boolean(jg_config *c, const char *key, int value, jg_error *err) {
  return jg_params_set_boolean(c ? &c->params : NULL, key, value, err);
}

jg_status jg_config_validate(const jg_config *c, jg_error *err) {
  if (!c) return JG_FAIL(err, JG_EINVAL, "jg_config_validate: NULL config");
  return jg_params_validate(&c->params, err);
}

const jg_params *jg_config_params(const jg_config *c) { return c ? &c->params : NULL; }
