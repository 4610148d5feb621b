/*
 * Reading a table another program wrote, through a column map (see
 * include/jeansgrow/table.h). Both the start table of the perturbations and
 * `jeansgrow compare` read through here, so a table is refused for the
 * same reasons, with its file and line, wherever it is read.
 */
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "jeansgrow/table.h"

#include "hash.h"
#include "number_rows.h"

/* The next cell of `*s`, cut in place; NULL at the end of the row. With
 * commas, blanks around a cell are dropped and an empty cell is returned
 * as "" (refused by the caller). */
static char *next_cell(char **s, jg_table_separator sep) {
  char *p = *s;
  if (sep == JG_TABLE_BLANKS) {
    p += strspn(p, " \t\r");
    if (!*p) return NULL;
    char *end = p + strcspn(p, " \t\r");
    *s = *end ? end + 1 : end;
    *end = '\0';
    return p;
  }
  if (!p) return NULL;
  char *comma = strchr(p, ',');
  *s = comma ? comma + 1 : NULL;
  if (comma) *comma = '\0';
  p += strspn(p, " \t\r");
  char *end = p + strlen(p);
  while (end > p && strchr(" \t\r", end[-1])) *--end = '\0';
  return p;
}

static jg_status parse_cell(const char *path, int line_no, int column, const char *cell,
                            double *out, jg_error *err) {
  if (!*cell) return JG_FAIL(err, JG_ECONFIG, "%s:%d: cell %d is empty", path, line_no, column);
  char *end = NULL;
  errno = 0;
  const double x = strtod(cell, &end);
  if (end == cell || *end != '\0')
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: cell %d ('%.40s') is not a number", path, line_no,
                   column, cell);
  if (!isfinite(x))
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: cell %d ('%.40s') is %s", path, line_no, column,
                   cell,
                   errno == ERANGE ? "beyond the range of double precision"
                                   : "not a finite number");
  /* errno = ERANGE with a finite x is an underflow: the number is below the
   * smallest normal double and is kept as strtod rounded it. */
  *out = x;
  return JG_OK;
}

/* One data line: cells into values[kind]; the number of cells in *cells. */
static jg_status parse_row(const char *path, int line_no, char *text, const jg_column_map *map,
                           jg_table_separator sep, double *values, int *cells, jg_error *err) {
  for (int q = 0; q < JG_N_COLUMN_KINDS; q++) values[q] = NAN;
  int n = 0;
  char *rest = text, *cell;
  while ((cell = next_cell(&rest, sep)) != NULL) {
    n++;
    if (n > map->n) {
      if (!*cell) return JG_FAIL(err, JG_ECONFIG, "%s:%d: cell %d is empty", path, line_no, n);
      continue; /* past the map: not read */
    }
    const jg_column_kind kind = map->kind[n - 1];
    if (kind == JG_COLUMN_SKIP) continue;
    jg_status st = parse_cell(path, line_no, n, cell, &values[kind], err);
    if (st != JG_OK) return st;
  }
  *cells = n;
  return JG_OK;
}

static jg_status read_rows(FILE *f, const char *path, const jg_column_map *map,
                           jg_table_separator sep, int min_cells, jg_table_row_fn row, void *user,
                           uint64_t *hash, jg_error *err) {
  char line[JG__TABLE_LINE_MAX + 1];
  int line_no = 0, len, first_cells = -1;
  double values[JG_N_COLUMN_KINDS];
  while ((len = jg__read_table_line(f, line, hash)) != -1) {
    line_no++;
    jg_status line_ok = jg__table_line_check(path, line_no, len, err);
    if (line_ok != JG_OK) return line_ok;
    char *first = line + strspn(line, " \t\r");
    if (*first == '\0' || *first == '#') continue;
    int cells = 0;
    jg_status st = parse_row(path, line_no, first, map, sep, values, &cells, err);
    if (st != JG_OK) return st;
    if (cells < min_cells)
      return JG_FAIL(err, JG_ECONFIG,
                     "%s:%d: %d cell(s) on this row; the columns named need at least %d", path,
                     line_no, cells, min_cells);
    if (first_cells < 0) first_cells = cells;
    if (cells != first_cells)
      return JG_FAIL(err, JG_ECONFIG, "%s:%d: %d cells on this row, %d on the first", path,
                     line_no, cells, first_cells);
    st = row(user, path, line_no, values, err);
    if (st != JG_OK) return st;
  }
  if (ferror(f)) return JG_FAIL(err, JG_ECONFIG, "%s: read error", path);
  return JG_OK;
}

jg_status jg_table_read_mapped(const char *path, const jg_column_map *map,
                               jg_table_separator sep, int min_cells, jg_table_row_fn row,
                               void *user, unsigned long long *checksum, jg_error *err) {
  if (!path || !map || !row)
    return JG_FAIL(err, JG_EINVAL, "jg_table_read_mapped: path, map and row function needed");
  FILE *f = fopen(path, "r");
  if (!f) return JG_FAIL(err, JG_ECONFIG, "cannot read %s: %s", path, strerror(errno));
  struct stat info;
  jg_status st = JG_OK;
  uint64_t hash = JG__FNV_OFFSET;
  if (fstat(fileno(f), &info) == 0 && S_ISDIR(info.st_mode))
    st = JG_FAIL(err, JG_ECONFIG, "%s is a folder, not a table", path);
  if (st == JG_OK)
    st = read_rows(f, path, map, sep, min_cells > 0 ? min_cells : map->n, row, user, &hash, err);
  fclose(f);
  if (st == JG_OK && checksum) *checksum = hash;
  return st;
}
