/* Shared by the command-line tests: tables as the program writes them,
 * parsed as numpy.loadtxt would read them, and the check that a table
 * written with output.units = "Mpc/h" is the default one converted. */
#ifndef JEANSGROW_TESTS_TABLES_H
#define JEANSGROW_TESTS_TABLES_H

#include <criterion/criterion.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct table {
  char *header;    /* all '#' lines */
  char **columns;  /* from the last header line */
  int n_columns;
  double *cells;   /* row-major */
  int n_rows;
} table;

static inline int column_index(const table *t, const char *name) {
  for (int i = 0; i < t->n_columns; i++)
    if (strcmp(t->columns[i], name) == 0) return i;
  return -1;
}

static inline double cell(const table *t, int row, int col) { return t->cells[row * t->n_columns + col]; }

/* Parse a table as numpy.loadtxt would: '#' lines are the header, the last
 * one names the columns; every other line is tab-separated finite numbers,
 * as many as there are columns. Each defect is reported. */
static inline void parse_table(const char *text, table *t) {
  memset(t, 0, sizeof *t);
  size_t n = strlen(text);
  t->header = calloc(n + 1, 1);
  cr_assert_not_null(t->header);
  char *copy = strdup(text);
  cr_assert_not_null(copy);
  char *last_header = NULL;
  int cap_rows = 0;
  for (char *line = copy; line && *line;) {
    char *end = strchr(line, '\n');
    cr_assert_not_null(end, "the table does not end with a newline");
    *end = '\0';
    if (line[0] == '#') {
      cr_assert_eq(t->n_rows, 0, "a header line after the data: %s", line);
      strcat(t->header, line);
      strcat(t->header, "\n");
      last_header = line;
    } else {
      if (!t->columns) {
        cr_assert_not_null(last_header, "data before any header line");
        cr_assert(strncmp(last_header, "# ", 2) == 0, "column line: %s", last_header);
        char *save = NULL;
        for (char *tok = strtok_r(last_header + 2, "\t", &save); tok;
             tok = strtok_r(NULL, "\t", &save)) {
          t->columns = realloc(t->columns, sizeof(char *) * (size_t)(t->n_columns + 1));
          t->columns[t->n_columns++] = strdup(tok);
        }
      }
      if (t->n_rows == cap_rows) {
        cap_rows = cap_rows ? 2 * cap_rows : 256;
        t->cells = realloc(t->cells, sizeof(double) * (size_t)cap_rows * (size_t)t->n_columns);
        cr_assert_not_null(t->cells);
      }
      int col = 0;
      char *p = line;
      for (;;) {
        char *stop;
        double v = strtod(p, &stop);
        cr_assert(stop != p && (*stop == '\t' || *stop == '\0'),
                  "row %d, column %d is not a number: %.60s", t->n_rows + 1, col + 1, p);
        cr_assert(isfinite(v), "row %d, column %d is not finite: %.60s", t->n_rows + 1, col + 1,
                  p);
        cr_assert_lt(col, t->n_columns, "row %d has more than %d columns", t->n_rows + 1,
                     t->n_columns);
        t->cells[t->n_rows * t->n_columns + col++] = v;
        if (*stop == '\0') break;
        p = stop + 1;
      }
      cr_assert_eq(col, t->n_columns, "row %d has %d columns, the header names %d",
                   t->n_rows + 1, col, t->n_columns);
      t->n_rows++;
    }
    line = end + 1;
  }
  free(copy);
}

static inline void table_free(table *t) {
  for (int i = 0; i < t->n_columns; i++) free(t->columns[i]);
  free(t->columns);
  free(t->cells);
  free(t->header);
}

/* ---- h units ------------------------------------------------------------- */

/* What output.units = "Mpc/h" means (the definition of h units, common
 * practice, no source): k[h/Mpc] = k[1/Mpc] / h, M[Msun/h] = M[Msun] h,
 * L[Mpc/h] = L[Mpc] h. Returns the power of h that takes a value in `unit`
 * (a default unit) to h units, and sets *h_unit to the unit's name there;
 * 0 and the same name for any other unit. */
static inline int h_units_unit(const char *unit, const char **h_unit) {
  static const struct {
    const char *mpc, *mpc_h;
    int power;
  } rules[] = {{"1/Mpc", "h/Mpc", -1}, {"Msun", "Msun/h", 1}, {"Mpc", "Mpc/h", 1}};
  for (size_t i = 0; i < sizeof rules / sizeof rules[0]; i++) {
    if (strcmp(unit, rules[i].mpc) == 0) {
      *h_unit = rules[i].mpc_h;
      return rules[i].power;
    }
  }
  *h_unit = unit;
  return 0;
}

/* The same for a column `name[unit]`: its name in h units goes to h_name. */
static inline int h_units_column(const char *name, char *h_name, size_t size) {
  const char *open = strrchr(name, '[');
  size_t n = strlen(name);
  if (!open || name[n - 1] != ']') {
    snprintf(h_name, size, "%s", name);
    return 0;
  }
  char unit[64];
  snprintf(unit, sizeof unit, "%.*s", (int)(n - 1 - (size_t)(open + 1 - name)), open + 1);
  const char *h_unit;
  int power = h_units_unit(unit, &h_unit);
  snprintf(h_name, size, "%.*s[%s]", (int)(open - name), name, h_unit);
  return power;
}

/* `in_h` (written with output.units = "Mpc/h") must be `in_mpc` (the
 * default) converted: the same rows and columns in the same order, each
 * column renamed by h_units_column, its values times h^power to `rtol`
 * relative, and every column without a unit of length or mass identical.
 * h is the value in column `h_column` of each row, or `h` when h_column < 0. */
static inline void assert_h_units_table(const table *in_mpc, const table *in_h, double h,
                                        int h_column, double rtol, const char *what) {
  cr_assert_eq(in_h->n_columns, in_mpc->n_columns, "%s: %d columns in h units, %d in 1/Mpc",
               what, in_h->n_columns, in_mpc->n_columns);
  cr_assert_eq(in_h->n_rows, in_mpc->n_rows, "%s: %d rows in h units, %d in 1/Mpc", what,
               in_h->n_rows, in_mpc->n_rows);
  cr_assert_gt(in_mpc->n_rows, 0, "%s: no rows", what);
  cr_expect(strstr(in_h->header, "# output.units = \"Mpc/h\";\n") != NULL,
            "%s: the header does not record output.units", what);
  int converted = 0;
  for (int c = 0; c < in_mpc->n_columns; c++) {
    char h_name[256];
    int power = h_units_column(in_mpc->columns[c], h_name, sizeof h_name);
    cr_expect_str_eq(in_h->columns[c], h_name, "%s: column %d", what, c + 1);
    converted += power != 0;
    for (int r = 0; r < in_mpc->n_rows; r++) {
      double hr = h_column >= 0 ? cell(in_mpc, r, h_column) : h;
      double expected = cell(in_mpc, r, c) * pow(hr, power);
      double got = cell(in_h, r, c);
      if (power == 0)
        cr_expect(got == expected, "%s: %s, row %d: %.12g in h units, %.12g in 1/Mpc", what,
                  in_mpc->columns[c], r + 1, got, expected);
      else
        cr_expect(fabs(got - expected) <= rtol * fabs(expected),
                  "%s: %s, row %d: %.12g, expected %.12g (h = %g, rel. diff %.3g > %.3g)", what,
                  h_name, r + 1, got, expected, hr, fabs(got - expected) / fabs(expected), rtol);
    }
  }
  cr_expect_gt(converted, 0, "%s: no column has a unit that h units convert", what);
}

#endif
