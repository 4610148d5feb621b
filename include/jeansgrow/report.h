/*
 * Reports: the tables jeansgrow writes, one function per table, so that a C
 * program gets exactly what the command line writes. Each writes the header
 * (version, conventions, effective parameters, column names) and the rows;
 * none writes NaN or infinity (JG_ENUMERIC instead, naming the column).
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

/* The columns of the scales table, and one row of it (row must hold
 * jg_report_scales_column_count() values). Scans reuse these. */
int jg_report_scales_column_count(void);
const char *jg_report_scales_column_name(int i);
/* All of them as one array (the first is "z"), and the header lines that
 * state their conventions (NULL-terminated). */
const char *const *jg_report_scales_columns(void);
const char *const *jg_report_scales_conventions(void);
void jg_report_scales_row(const jg_thermal *th, const jg_scales_point *s, double *row);

/* Growth by wavenumber: one row per (z, k), redshifts in the requested
 * order, wavenumbers increasing. */
jg_status jg_report_growth(FILE *f, const jg_params *p, const jg_growth_grid *g, jg_error *err);

#ifdef __cplusplus
}
#endif
#endif
