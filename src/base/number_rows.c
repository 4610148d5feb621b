/*
 * A user's text table of numbers, read row by row (number_rows.h). Lines
 * are read byte by byte, so that a device or a binary file cannot make a
 * line grow without bound, and every byte read goes into a checksum that
 * the output headers record beside the file's name.
 */
#include "number_rows.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "hash.h"
#include "alloc.h" /* last: test builds route allocations through it */

int jg__read_table_line(FILE *f, char *buf, uint64_t *h) {
  int n = 0, c;
  while ((c = getc(f)) != EOF) {
    const unsigned char byte = (unsigned char)c;
    *h = jg__fnv1a(*h, &byte, 1);
    if (c == '\n') break;
    if (c == '\0') return -3;
    if (n == JG__TABLE_LINE_MAX) return -2;
    buf[n++] = (char)c;
  }
  if (c == EOF && n == 0) return -1;
  buf[n] = '\0';
  return n;
}

jg_status jg__table_line_check(const char *path, int line_no, int len, jg_error *err) {
  if (len == -2)
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: line longer than %d bytes", path, line_no,
                   JG__TABLE_LINE_MAX);
  if (len == -3)
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: a zero byte (not a text table)", path, line_no);
  return JG_OK;
}

static jg_status parse_numbers(const char *path, int line_no, char *line, double *v, int *n,
                               jg_error *err) {
  char *save = NULL;
  *n = 0;
  for (char *tok = strtok_r(line, " \t\r", &save); tok; tok = strtok_r(NULL, " \t\r", &save)) {
    if (*n == JG__ROW_VALUES_MAX)
      return JG_FAIL(err, JG_ECONFIG, "%s:%d: more than %d values on a row", path, line_no,
                     JG__ROW_VALUES_MAX);
    char *end = NULL;
    errno = 0;
    const double x = strtod(tok, &end);
    if (end == tok || *end != '\0')
      return JG_FAIL(err, JG_ECONFIG, "%s:%d: '%.40s' is not a number", path, line_no, tok);
    if (!isfinite(x) || errno == ERANGE)
      return JG_FAIL(err, JG_ECONFIG, "%s:%d: value %d ('%.40s') is %s", path, line_no, *n + 1,
                     tok,
                     isfinite(x) ? "beyond the range of double precision" : "not a finite number");
    v[(*n)++] = x;
  }
  return JG_OK;
}

jg_status jg__read_number_rows(const char *path, jg__row_fn take, void *user, uint64_t *checksum,
                               jg_error *err) {
  FILE *f = fopen(path, "r");
  if (!f) return JG_FAIL(err, JG_ECONFIG, "cannot read %s: %s", path, strerror(errno));
  char line[JG__TABLE_LINE_MAX + 1];
  uint64_t h = JG__FNV_OFFSET;
  int line_no = 0, len;
  jg_status st = JG_OK;
  while (st == JG_OK && (len = jg__read_table_line(f, line, &h)) != -1) {
    line_no++;
    st = jg__table_line_check(path, line_no, len, err);
    if (st == JG_OK) {
      char *first = line + strspn(line, " \t\r");
      if (*first == '\0' || *first == '#') continue;
      double v[JG__ROW_VALUES_MAX];
      int n = 0;
      st = parse_numbers(path, line_no, first, v, &n, err);
      if (st == JG_OK) st = take(user, path, line_no, v, n, err);
    }
  }
  if (st == JG_OK && ferror(f)) st = JG_FAIL(err, JG_ECONFIG, "%s: read error", path);
  fclose(f);
  if (checksum) *checksum = h;
  return st;
}

int jg__file_checksum(const char *path, uint64_t *checksum, long *bytes) {
  FILE *f = fopen(path, "rb");
  if (!f) return 0;
  unsigned char buf[4096];
  uint64_t h = JG__FNV_OFFSET;
  long total = 0;
  size_t got;
  while ((got = fread(buf, 1, sizeof buf, f)) > 0) {
    h = jg__fnv1a(h, buf, got);
    total += (long)got;
  }
  const int ok = !ferror(f);
  fclose(f);
  *checksum = h;
  *bytes = total;
  return ok;
}
