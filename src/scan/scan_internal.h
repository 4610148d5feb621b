/*
 * Private to src/scan/: the scan and checkpoint objects that its pieces
 * share (grid.c, evaluators.c, scan.c, checkpoint.c, runner.c,
 * scan_table.c; see include/jeansgrow/scan.h for the design).
 */
#ifndef JEANSGROW_SCAN_INTERNAL_H
#define JEANSGROW_SCAN_INTERNAL_H

#include <pthread.h>
#include <stdint.h>
#include <stdio.h>

#include "jeansgrow/scan.h"
#include "../base/hash.h" /* jg__fnv1a */

/* A scan: read-only after jg_scan_new. */
struct jg_scan {
  jg_params base;
  jg_scan_grid grid;
  const jg_scan_evaluator *ev;
  int part_index, part_count;
  long long total, first, count;
  int n_z, n_values;
  int n_k;            /* wavenumbers per redshift (JG_SCAN_ROWS_WAVENUMBER), else 1 */
  int rows_per_point; /* table rows per point */
  char fingerprint[17];
  int n_columns;
  char **columns; /* the table's column names */
};

/* A checkpoint; its mutex serialises writers and readers. */
struct jg_scan_checkpoint {
  const jg_scan *s;
  char *path;            /* NULL: anonymous */
  FILE *f;
  /* Per point of the slice: 1 + where its record starts, 0 if none. Zero
   * means "none" so that the index is a fresh anonymous mapping, never
   * written before use: the system gives its pages memory only as points
   * finish, and a grid of 10^8 points starts at once (see index_new). */
  long long *offset;
  size_t offset_bytes;
  long long end;         /* where the next record goes */
  long long done, failed, resumed;
  char *buf;             /* one record's text, under the lock */
  size_t buf_size;
  double last_sync;
  pthread_mutex_t lock;
};

/* A record read back from a checkpoint; `message` points into its buffer. */
typedef struct jg__scan_record {
  long long index;
  int failed;
  jg_status status;
  const char *message;
} jg__scan_record;

/* Read back the record of point `index` (which must be recorded), its
 * values into `values` if not NULL. Call with the checkpoint's lock held. */
jg_status jg__scan_fetch_record(jg_scan_checkpoint *c, long long index, jg__scan_record *r,
                                double *values, jg_error *err);
/* The axis as a user would write it: "KEY = FROM:TO:N:log" or "KEY = [..]". */
void jg__scan_write_axis(FILE *f, const jg_scan_axis *ax);
/* strdup through the allocation hook (NULL when out of memory). */
char *jg__scan_strdup(const char *s);


#endif
