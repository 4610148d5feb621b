/*
 * Output tables and files.
 *
 * Every table is plain text: `#` header lines (program version, the full
 * effective parameter set, the conventions used), a last header line with the
 * column names as `name[unit]`, then tab-separated rows. A file is written to
 * a temporary name in its own folder and renamed into place only when
 * complete, so an interrupted run leaves either the old file or the new one,
 * never a truncated table.
 */
#ifndef JEANSGROW_TABLE_H
#define JEANSGROW_TABLE_H

#include <stdio.h>
#include <sys/types.h>

#include "jeansgrow/error.h"
#include "jeansgrow/params.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct jg_output jg_output;

/* Open an output place: a path (written atomically) or NULL / "-" for
 * stdout. Fails with JG_EIO, naming the path, if the folder cannot be
 * written or the path is a folder; nothing is created in that case. A
 * symbolic link is followed (the link stays); a device, FIFO or socket
 * (/dev/null, a named pipe) is written in place, not atomically. */
jg_status jg_output_open(const char *path, jg_output **out, jg_error *err);
/* The stream to write to. */
FILE *jg_output_stream(jg_output *o);
/* Flush, sync and rename into place; frees o. On failure the temporary file
 * is removed and the previous file (if any) is left as it was. */
jg_status jg_output_commit(jg_output *o, jg_error *err);
/* Give up: remove the temporary file; frees o. Accepts NULL. */
void jg_output_discard(jg_output *o);
/* Path of the temporary file being written (NULL for stdout); for signal
 * handlers that must remove it. */
const char *jg_output_temp_path(const jg_output *o);

/* Write the standard header: title line, version, parameters, conventions
 * (NULL-terminated list of lines, may be NULL). */
void jg_table_write_preamble(FILE *f, const char *title, const jg_params *p,
                             const char *const *conventions);
/* Write the column-name line (the last header line). */
void jg_table_write_columns(FILE *f, const char *const *names, int n);
/* Write one row in %.10e. Refuses (JG_ENUMERIC, naming the column and the
 * row's first value) if any value is NaN or infinite: nothing is written. */
jg_status jg_table_write_row(FILE *f, const double *values, int n, const char *const *names,
                             jg_error *err);

/* Reading a table back (the scan's merge does). The header: every `#` line
 * from the current position as written, without its newline (the last one
 * is the column-name line), into a new array; the stream is left at the
 * first data row. JG_ENOMEM, JG_EIO naming `path`. */
jg_status jg_table_read_header(FILE *f, const char *path, char ***lines, int *n_lines,
                               jg_error *err);
void jg_table_free_header(char **lines, int n_lines);
/* A data row (`n` bytes, as getline read it) must be what
 * jg_table_write_row writes: `columns` finite numbers separated by tabs,
 * ending in a newline. JG_EINVAL naming path:line_number and the column
 * otherwise (a row cut by a kill or a full disk, a value edited to nan). */
jg_status jg_table_check_row(const char *line, ssize_t n, int columns, const char *path,
                             long long line_number, jg_error *err);

/* Reading a table another program wrote, through a column map (params.h):
 * lines starting with '#' and blank lines are skipped; every other line
 * holds cells separated as `sep` says, the same number on every row and
 * at least `min_cells` (the map's length when 0); cells past the map are
 * not read. Each data row is handed to `row` with values[kind] for every
 * quantity of the map (NAN for one of a short row, 0..min_cells allowing)
 * and its line number. Refused, naming path:line, the cell and the value
 * (JG_ECONFIG): a cell that is not a number, NaN or infinite, or beyond
 * double precision; a ragged or short row; a zero byte (binary file); a
 * line longer than 4096 bytes. Numbers below the smallest normal double
 * are read as they are (subnormal, or 0). `checksum` (may be NULL)
 * receives the FNV-1a hash of the file's bytes. */
typedef jg_status (*jg_table_row_fn)(void *user, const char *path, int line_no,
                                     const double *values, jg_error *err);
jg_status jg_table_read_mapped(const char *path, const jg_column_map *map,
                               jg_table_separator sep, int min_cells, jg_table_row_fn row,
                               void *user, unsigned long long *checksum, jg_error *err);

#ifdef __cplusplus
}
#endif
#endif
