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

#ifdef __cplusplus
}
#endif
#endif
