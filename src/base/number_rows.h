/*
 * Private: reading a user's text table of numbers, row by row, with every
 * complaint naming the file and the line (number_rows.c).
 */
#ifndef JEANSGROW_SRC_NUMBER_ROWS_H
#define JEANSGROW_SRC_NUMBER_ROWS_H

#include <stdint.h>

#include "jeansgrow/error.h"

/* Most values on a row. */
#define JG__ROW_VALUES_MAX 8

/* Called for each data row (finite numbers only) with its line number. */
typedef jg_status (*jg__row_fn)(void *user, const char *path, int line_no, const double *values,
                                int n_values, jg_error *err);

/* Reads `path`: lines starting with # and blank lines are skipped, every
 * other line is numbers separated by blanks. Refused with JG_ECONFIG and
 * "PATH:LINE: ...": a word that is not a number, NaN, infinities, values
 * beyond double precision, more than JG__ROW_VALUES_MAX values, a line
 * longer than 4096 bytes, a zero byte (a binary file). *checksum gets the
 * 64-bit FNV-1a hash (hash.h) of every byte read, as jg__file_checksum. */
jg_status jg__read_number_rows(const char *path, jg__row_fn take, void *user, uint64_t *checksum,
                               jg_error *err);

/* The 64-bit FNV-1a hash of a file's bytes and their count; 0 if unreadable. */
int jg__file_checksum(const char *path, uint64_t *checksum, long *bytes);


#endif
