/*
 * Comparing our growth table with another code's table at the same
 * redshifts (`jeansgrow compare`): per reference row (z, k) the relative
 * difference of delta_b/delta_c, and optionally of delta_b and delta_c
 * normalised at a chosen wavenumber, with ours interpolated in ln k where
 * the grids differ; the largest difference (and where), and the rms.
 */
#ifndef JEANSGROW_COMPARE_H
#define JEANSGROW_COMPARE_H

#include "jeansgrow/error.h"
#include "jeansgrow/params.h"

#ifdef __cplusplus
extern "C" {
#endif

/* How the reference table is laid out: a column map with z, k and either
 * delta_c and delta_b or b_over_c (normalised differences need delta_c
 * and delta_b), its k unit and separator. */
typedef struct jg_compare_layout {
  char columns[JG_MAX_COLUMN_TEXT]; /* "" : "z k delta_c delta_b" */
  jg_table_k_unit k_unit;
  jg_table_separator separator;
  double k_norm; /* > 0: also compare delta_b, delta_c normalised at this k (reference unit) */
} jg_compare_layout;

/* The quantities compared. */
enum { JG_COMPARE_B_OVER_C = 0, JG_COMPARE_DELTA_B = 1, JG_COMPARE_DELTA_C = 2, JG_COMPARE_N = 3 };

typedef struct jg_compare_row {
  double z, k;           /* k in the reference's unit */
  double ours[JG_COMPARE_N], reference[JG_COMPARE_N];
  double diff[JG_COMPARE_N]; /* ours / reference - 1 */
} jg_compare_row;

typedef struct jg_compare_stat {
  double largest;      /* largest |diff| */
  double z, k;         /* where (k in the reference's unit) */
  double rms;          /* root mean square of diff over the rows */
} jg_compare_stat;

typedef struct jg_comparison {
  int n_rows;             /* compared (reference rows inside our k range) */
  int n_outside;          /* reference rows outside our k range, not compared */
  int n_quantities;       /* 1, or 3 with k_norm */
  jg_compare_row *rows;   /* by z as in the reference, k increasing */
  jg_compare_stat stat[JG_COMPARE_N];
  double hubble_h;        /* from our table's header */
  unsigned long long checksum_ours, checksum_reference; /* FNV-1a of the files */
} jg_comparison;

/* Compare `ours` (a growth table written by jeansgrow, in either
 * output.units) with `reference` laid out as `layout` says. JG_ECONFIG
 * naming file and line for a malformed table, a reference redshift our
 * table lacks, duplicate (z, k) rows, or a k_norm outside a table. */
jg_status jg_compare_tables(const char *ours, const char *reference,
                            const jg_compare_layout *layout, jg_comparison **out,
                            jg_error *err);
void jg_comparison_free(jg_comparison *c);

#ifdef __cplusplus
}
#endif
#endif
