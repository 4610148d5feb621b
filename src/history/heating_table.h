/*
 * Private: the user's heating table (thermal.heating_table): a heating
 * rate per baryon against redshift, added to the gas-temperature equation
 * (heating_table.c; src/PHYSICS.md §11).
 */
#ifndef JEANSGROW_SRC_HEATING_TABLE_H
#define JEANSGROW_SRC_HEATING_TABLE_H

#include <stdint.h>

#include "jeansgrow/error.h"

typedef struct jg__heating_table {
  int n;
  double *ln_1pz; /* ln(1+z), increasing */
  double *rate;   /* heating per baryon (per hydrogen-atom mass of gas), J/s */
  uint64_t checksum;
} jg__heating_table;

/* Reads and checks the whole table; JG_ECONFIG naming the file and the
 * line for anything wrong in it (JG_ENOMEM for memory). */
jg_status jg__heating_table_read(const char *path, jg__heating_table *t, jg_error *err);
void jg__heating_table_free(jg__heating_table *t);

/* The rate at ln(1+z): linear in ln(1+z) between rows, 0 outside the table. */
double jg__heating_table_rate(const jg__heating_table *t, double ln_1pz);

#endif
