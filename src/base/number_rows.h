/*
 * Private: reading a user's text table of numbers, row by row, with every
 * complaint naming the file and the line (number_rows.c).
 */
#ifndef JEANSGROW_SRC_NUMBER_ROWS_H
#define JEANSGROW_SRC_NUMBER_ROWS_H

#include <stdint.h>
#include <stdio.h>

#include "jeansgrow/error.h"

/* Longest line of a text table; a longer one is an error, never cut. */
#define JG__TABLE_LINE_MAX 4096

/* One line of a text table into buf (JG__TABLE_LINE_MAX + 1 bytes), without
 * its newline, read byte by byte so that a device or a binary file cannot
 * make it grow without bound; every byte goes into the FNV-1a hash *h
 * (hash.h). Returns the length, -1 at the end of the file, -2 for a line
 * longer than JG__TABLE_LINE_MAX, -3 for a zero byte. */
int jg__read_table_line(FILE *f, char *buf, uint64_t *h);

/* JG_OK for a line jg__read_table_line returned (len >= 0), else the
 * complaint about line `line_no` of `path` (too long, or a binary file). */
jg_status jg__table_line_check(const char *path, int line_no, int len, jg_error *err);

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
