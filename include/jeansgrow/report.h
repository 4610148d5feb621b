/*
 * Reports: the tables jeansgrow writes, one function per table, so that a C
 * program gets exactly what the command line writes. Each writes the header
 * (version, conventions, effective parameters, column names) and the rows;
 * none writes NaN or infinity (JG_ENUMERIC instead, naming the column).
 *
 * The stages hand over wavenumbers in 1/Mpc, masses in M_sun and comoving
 * lengths in Mpc. The reports write them in the units of p->output.units:
 * unchanged, or (JG_UNITS_MPC_H) k[h/Mpc] = k[1/Mpc] / h,
 * M[Msun/h] = M[Msun] h and L[Mpc/h] = L[Mpc] h with h =
 * cosmology.hubble_h, the unit in each column name following suit.
 */
#ifndef JEANSGROW_REPORT_H
#define JEANSGROW_REPORT_H

#include <stdio.h>

#include "jeansgrow/epochs.h"
#include "jeansgrow/growth.h"
#include "jeansgrow/params.h"
#include "jeansgrow/scales.h"
#include "jeansgrow/thermal.h"

#ifdef __cplusplus
extern "C" {
#endif

/* The unit name a quantity the library holds in `unit` is written in, and
 * (when factor is not NULL) the factor that converts a value to it: "1/Mpc",
 * "Mpc" and "Msun" become "h/Mpc", "Mpc/h" and "Msun/h" under
 * JG_UNITS_MPC_H; every other unit (and every unit under JG_UNITS_MPC) is
 * returned as it is, with factor 1. */
const char *jg_report_unit(const char *unit, jg_output_units units, double hubble_h,
                           double *factor);

/* The ionisation and gas-temperature history: output.history_rows rows
 * uniform in ln(1+z) from thermal.start_redshift to output.history_z_min,
 * plus every output.redshifts value in that range, in decreasing z. */
jg_status jg_report_history(FILE *f, const jg_params *p, const jg_thermal *th, jg_error *err);

/* Derived epochs, one `name<TAB>value<TAB>unit` line each. */
jg_status jg_report_epochs(FILE *f, const jg_params *p, const jg_epochs *e, jg_error *err);

/* Scales at every requested redshift (s[0..n), as from jg_scales_compute on
 * output.redshifts). */
jg_status jg_report_scales(FILE *f, const jg_params *p, const jg_thermal *th,
                           const jg_scales_point *s, int n, jg_error *err);

/* The columns of the scales table in `units`, and one row of it (row must
 * hold jg_report_scales_column_count() values, converted to `units` with the
 * h of th's cosmology). Scans reuse these. */
int jg_report_scales_column_count(void);
const char *jg_report_scales_column_name(jg_output_units units, int i);
/* All of them as one array (the first is "z"), and the header lines that
 * state their conventions (NULL-terminated). */
const char *const *jg_report_scales_columns(jg_output_units units);
const char *const *jg_report_scales_conventions(jg_output_units units);
void jg_report_scales_row(const jg_thermal *th, const jg_scales_point *s, jg_output_units units,
                          double *row);

/* Growth by wavenumber: one row per (z, k), redshifts in the requested
 * order, wavenumbers increasing; th is the history g was solved on (for
 * the validity flags, include/jeansgrow/validity.h). */
jg_status jg_report_growth(FILE *f, const jg_params *p, const jg_thermal *th,
                           const jg_growth_grid *g, jg_error *err);

/* The same table in parts, for a program that formats it on several
 * threads: everything before the first row, then rows [first, end) of the
 * g->n_z * g->n_k in the table's order (row i is redshift i / n_k,
 * wavenumber i % n_k). The header followed by rows 0 to n_z * n_k in
 * consecutive pieces is exactly what jg_report_growth writes. */
void jg_report_growth_header(FILE *f, const jg_params *p, const jg_thermal *th,
                             const jg_growth_grid *g);
jg_status jg_report_growth_rows(FILE *f, const jg_params *p, const jg_thermal *th,
                                const jg_growth_grid *g, int first, int end, jg_error *err);

#ifdef __cplusplus
}
#endif
#endif
