/*
 * One cosmology, built once and asked many questions: the embedding
 * interface (stable, like jg_config) behind the Python package.
 *
 *   jg_config *c;  jg_universe *u;  char *text;  size_t size;
 *   jg_config_load("params/reference.cfg", NULL, 0, &c, &err);
 *   jg_universe_new(c, &u, &err);                        background + history
 *   double z[] = {50.0, 20.0};
 *   jg_universe_table(u, JG_TABLE_SCALES, z, 2, NULL, 0, &text, &size, &err);
 *   ... the text of `jeansgrow scales` at z = 50 and 20 ...
 *   jg_free(text);  jg_universe_free(u);  jg_config_free(c);
 *
 * The background and the thermal history are built by jg_universe_new; the
 * perturbation model the first time a table needs it. Other redshifts and
 * wavenumbers reuse both. Tables are the program's, character for
 * character: the same header (with the effective parameters, among them
 * the redshifts and wavenumbers asked for), the same columns and digits.
 *
 * Several threads may ask one universe for tables at once.
 */
#ifndef JEANSGROW_UNIVERSE_H
#define JEANSGROW_UNIVERSE_H

#include <stddef.h>
#include <stdio.h>

#include "jeansgrow/config.h"
#include "jeansgrow/error.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct jg_universe jg_universe;

/* The tables of the program's commands of the same names. */
typedef enum {
  JG_TABLE_HISTORY = 0,
  JG_TABLE_EPOCHS = 1,
  JG_TABLE_SCALES = 2,
  JG_TABLE_GROWTH = 3
} jg_table_kind;

/* Check the parameters (jg_config_validate) and build the background and
 * the thermal history. `c` is copied: change or free it afterwards freely. */
jg_status jg_universe_new(const jg_config *c, jg_universe **out, jg_error *err);
void jg_universe_free(jg_universe *u); /* accepts NULL */

/*
 * Write table `kind` to `f`. z (n_z values) replaces output.redshifts and k
 * (n_k values, 1/Mpc) perturbations.k_values for this table only; NULL (or
 * n = 0) keeps the parameters'. Replaced values are checked as the keys
 * are (JG_EINVAL with the key's message, e.g. a redshift above
 * perturbations.z_initial). Only the growth table uses k, but every
 * table's header records both, as the program's does with --set.
 */
jg_status jg_universe_write(jg_universe *u, jg_table_kind kind, const double *z, int n_z,
                            const double *k, int n_k, FILE *f, jg_error *err);
/* The same table as text in memory: *text (zero-terminated, *size bytes)
 * is the caller's, to release with jg_free. size may be NULL. */
jg_status jg_universe_table(jg_universe *u, jg_table_kind kind, const double *z, int n_z,
                            const double *k, int n_k, char **text, size_t *size, jg_error *err);

/* Release memory the library handed out (jg_universe_table's text). */
void jg_free(void *p);

#ifdef __cplusplus
}
#endif
#endif
