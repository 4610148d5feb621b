/*
 * The parameter object for programs that embed the library: opaque, so that
 * keys can be added without changing the binary interface.
 *
 * Two ways to hold parameters exist side by side:
 *   jg_config (this header)  the STABLE interface. Its layout is private;
 *                            every key is reached by name, with the same
 *                            checks and messages as a parameter file. A
 *                            program built against one version keeps
 *                            working with a later library of the same
 *                            major version however many keys were added.
 *   jg_params (params.h)     the in-tree, UNSTABLE interface: a plain struct
 *                            that the stages read directly. Its size and
 *                            layout change whenever a key is added, so code
 *                            that declares one must be rebuilt with the
 *                            library; the program and the tests use it.
 * jg_config_params() bridges the two for code that is rebuilt anyway.
 *
 * Every function follows one shape: it returns a jg_status, hands a new
 * object back through its last-but-one argument, and fills `err` (which may
 * be NULL) on failure, leaving the object untouched.
 */
#ifndef JEANSGROW_CONFIG_H
#define JEANSGROW_CONFIG_H

#include "jeansgrow/error.h"
#include "jeansgrow/params.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct jg_config jg_config;

/* Every key at its documented default (the Planck 2018 values for the keys
 * a parameter file must give). */
jg_status jg_config_new(jg_config **out, jg_error *err);
/* A parameter file with "key=value" overrides, as the program reads it
 * (jg_params_load): every message names the file and line or the --set. */
jg_status jg_config_load(const char *path, const char *const *overrides, int n_overrides,
                         jg_config **out, jg_error *err);
jg_status jg_config_copy(const jg_config *c, jg_config **out, jg_error *err);
void jg_config_free(jg_config *c); /* accepts NULL */

/* Set one key by name (see jg_params_set_number and the setters after it
 * in params.h for what each takes and checks). */
jg_status jg_config_set_value(jg_config *c, const char *key, const char *value, jg_error *err);
jg_status jg_config_set_number(jg_config *c, const char *key, double value, jg_error *err);
jg_status jg_config_set_text(jg_config *c, const char *key, const char *text, jg_error *err);
jg_status jg_config_set_list(jg_config *c, const char *key, const double *values, int n,
                             jg_error *err);
jg_status jg_config_set_boolean(jg_config *c, const char *key, int value, jg_error *err);

/* Every range and every rule between keys (jg_params_validate). */
jg_status jg_config_validate(const jg_config *c, jg_error *err);

/* The plain struct inside, for in-tree code (unstable; see above). NULL for
 * a NULL config. */
const jg_params *jg_config_params(const jg_config *c);

#ifdef __cplusplus
}
#endif
#endif
