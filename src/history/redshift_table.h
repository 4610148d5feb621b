/*
 * Private: the user's tables against redshift (redshift_table.c;
 * src/PHYSICS.md §12): thermal.heating_table, a heating rate per baryon
 * added to the gas-temperature equation, and thermal.ionisation_table, an
 * ionisation history (and optionally a temperature history) replacing the
 * computed one below the table's top.
 */
#ifndef JEANSGROW_SRC_REDSHIFT_TABLE_H
#define JEANSGROW_SRC_REDSHIFT_TABLE_H

#include <gsl/gsl_interp.h>
#include <stdint.h>

#include "jeansgrow/error.h"

typedef struct jg__z_table {
  int n, columns;   /* rows; values per row after z (1 or 2) */
  double *ln_1pz;   /* ln(1+z), increasing */
  double *col[2];   /* heating: the rate in J/s; ionisation: ln x_e, ln T_gas */
  gsl_interp *interp[2]; /* ionisation: Steffen in ln(1+z); NULL for the heating table */
  uint64_t checksum;
} jg__z_table;

/* Read and check a whole table; JG_ECONFIG naming the file and the line
 * for anything wrong in it (JG_ENOMEM for memory). The heating table: z
 * from 0 to 1000, a rate >= 0 in eV/s. The ionisation table: z from 0 to
 * z_max, x_e in (0, x_e_max], optionally T_gas > 0 in K. */
jg_status jg__heating_table_read(const char *path, jg__z_table *t, jg_error *err);
jg_status jg__ionisation_table_read(const char *path, double z_max, double x_e_max,
                                    jg__z_table *t, jg_error *err);
void jg__z_table_free(jg__z_table *t);

/* Does the table reach down to ln(1+z) and up to it? */
static inline int jg__z_table_covers(const jg__z_table *t, double ln_1pz) {
  return t->n > 1 && ln_1pz >= t->ln_1pz[0] && ln_1pz <= t->ln_1pz[t->n - 1];
}
/* The heating rate at ln(1+z) (J/s): linear in ln(1+z), 0 outside the table. */
double jg__heating_table_rate(const jg__z_table *t, double ln_1pz);
/* Column c (0: x_e, 1: T_gas) of the ionisation table at ln(1+z) inside it. */
double jg__ionisation_table_value(const jg__z_table *t, int c, double ln_1pz);

#endif
