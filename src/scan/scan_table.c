/*
 * The table of a scan, written from its checkpoint in grid order, and the
 * merge of the slices of a job array into the table a single run writes.
 */
#include "scan_internal.h"

#include <ctype.h>
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "jeansgrow/table.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

#define PART_PREFIX "scan part: "
#define FAILED_COUNT_PREFIX "# failed points: "
#define FAILED_LINE_PREFIX "# failed point "

/* The header lines that describe the scan (as "conventions" of the
 * preamble). Slices differ from the whole only by the part line. */
static char **scan_header_lines(const jg_scan *s, int *n_out) {
  const jg_scan_evaluator *ev = s->ev;
  int n_conv = 0;
  while (ev->conventions && ev->conventions[n_conv]) n_conv++;
  int cap = 8 + 2 * s->grid.n_axes + n_conv;
  char **lines = calloc((size_t)cap + 1, sizeof *lines);
  if (!lines) return NULL;
  int n = 0;
  char *text = NULL;
  size_t size = 0;
  FILE *f;
#define LINE_BEGIN() (text = NULL, size = 0, f = open_memstream(&text, &size))
#define LINE_END() (f && fclose(f) == 0 ? (lines[n++] = text) : (free(text), (char *)NULL))
  if (LINE_BEGIN()) fprintf(f, "scan fingerprint: %s", s->fingerprint);
  if (!LINE_END()) goto fail;
  if (LINE_BEGIN()) {
    fprintf(f, "scan grid: %lld points (", s->total);
    for (int a = 0; a < s->grid.n_axes; a++) fprintf(f, "%s%d", a ? " x " : "", s->grid.axes[a].count);
    if (ev->rows == JG_SCAN_ROWS_POINT) fputs(", first key slowest), one row per point", f);
    else if (ev->rows == JG_SCAN_ROWS_WAVENUMBER)
      fprintf(f, ", first key slowest), %d redshifts x %d wavenumbers per point", s->n_z, s->n_k);
    else fprintf(f, ", first key slowest), %d redshifts per point", s->n_z);
  }
  if (!LINE_END()) goto fail;
  for (int a = 0; a < s->grid.n_axes; a++) {
    if (LINE_BEGIN()) {
      fputs("scan vary: ", f);
      jg__scan_write_axis(f, &s->grid.axes[a]);
    }
    if (!LINE_END()) goto fail;
    /* A table holds numbers: a word-valued key's column holds its word's number. */
    const char *const *words = jg_params_key_words(s->grid.axes[a].key);
    if (!words) continue;
    if (LINE_BEGIN()) {
      fprintf(f, "scan words: the column %s holds", s->grid.axes[a].key);
      for (int w = 0; words[w]; w++) fprintf(f, "%s %d = %s", w ? "," : "", w, words[w]);
    }
    if (!LINE_END()) goto fail;
  }
  if (s->part_count > 1) {
    if (LINE_BEGIN())
      fprintf(f, PART_PREFIX "%d/%d, points %lld to %lld of %lld", s->part_index, s->part_count,
              s->first + 1, s->first + s->count, s->total);
    if (!LINE_END()) goto fail;
  }
  if (LINE_BEGIN()) {
    fprintf(f, "scan evaluator: %s; columns: the varied keys, %sthen per point:", ev->name,
            ev->rows == JG_SCAN_ROWS_POINT ? "" : "z, ");
    for (int i = 0; i < ev->n_point_columns; i++) fprintf(f, " %s", ev->point_columns[i]);
    if (ev->rows != JG_SCAN_ROWS_POINT)
      fputs(ev->rows == JG_SCAN_ROWS_WAVENUMBER ? "; per redshift and wavenumber:"
                                                : "; per redshift:", f);
    for (int i = 0; i < ev->n_redshift_columns; i++) fprintf(f, " %s", ev->redshift_columns[i]);
  }
  if (!LINE_END()) goto fail;
  for (int i = 0; i < n_conv; i++) {
    if (LINE_BEGIN()) fputs(ev->conventions[i], f);
    if (!LINE_END()) goto fail;
  }
  if (LINE_BEGIN())
    fputs("the parameters below are the base values; on each row the varied keys take the "
          "values of its first columns", f);
  if (!LINE_END()) goto fail;
#undef LINE_BEGIN
#undef LINE_END
  *n_out = n;
  return lines;
fail:
  for (int i = 0; i < n; i++) free(lines[i]);
  free(lines);
  return NULL;
}

jg_status jg_scan_write_table(const jg_scan *s, jg_scan_checkpoint *c, FILE *f, jg_error *err) {
  if (!s || !c || c->s != s || !f)
    return JG_FAIL(err, JG_EINVAL, "jg_scan_write_table: scan and checkpoint do not match");
  if (c->done < s->count)
    return JG_FAIL(err, JG_EINVAL, "the scan is not finished: %lld of the %lld points of the "
                   "slice are missing", s->count - c->done, s->count);
  const jg_scan_evaluator *ev = s->ev;
  int n_lines = 0;
  char **lines = scan_header_lines(s, &n_lines);
  double *values = malloc(sizeof(double) * (size_t)(s->n_values > 0 ? s->n_values : 1));
  double *row = malloc(sizeof(double) * (size_t)s->n_columns);
  if (!lines || !values || !row) {
    free(values);
    free(row);
    if (lines) for (int i = 0; i < n_lines; i++) free(lines[i]);
    free(lines);
    return JG_FAIL(err, JG_ENOMEM, "out of memory writing the scan table");
  }
  pthread_mutex_lock(&c->lock);
  jg_table_write_preamble(f,
                          ev->rows == JG_SCAN_ROWS_POINT ? "parameter scan, one row per grid point"
                          : ev->rows == JG_SCAN_ROWS_WAVENUMBER
                              ? "parameter scan, one row per grid point, output redshift and "
                                "wavenumber"
                              : "parameter scan, one row per grid point and output redshift",
                          &s->base, (const char *const *)lines);
  fprintf(f, FAILED_COUNT_PREFIX "%lld\n", c->failed);
  jg_status st = JG_OK;
  jg__scan_record r;
  for (long long i = s->first; st == JG_OK && c->failed > 0 && i < s->first + s->count; i++) {
    st = jg__scan_fetch_record(c, i, &r, NULL, err);
    if (st == JG_OK && r.failed) {
      char desc[1024];
      jg_scan_describe_point(s, i, desc, sizeof desc);
      fprintf(f, FAILED_LINE_PREFIX "%lld of %lld (%s): %s: %s\n", i + 1, s->total, desc,
              jg_status_name(r.status), r.message);
    }
  }
  if (st == JG_OK) jg_table_write_columns(f, (const char *const *)s->columns, s->n_columns);
  const int n_axes = s->grid.n_axes;
  const int has_z = ev->rows != JG_SCAN_ROWS_POINT;
  for (long long i = s->first; st == JG_OK && i < s->first + s->count; i++) {
    st = jg__scan_fetch_record(c, i, &r, values, err);
    if (st != JG_OK || r.failed) continue;
    jg_scan_grid_values(&s->grid, i, row);
    memcpy(row + n_axes + has_z, values, sizeof(double) * (size_t)ev->n_point_columns);
    /* Row j of the point: redshift j / n_k (n_k = 1 unless a row per wavenumber). */
    for (int j = 0; st == JG_OK && j < s->rows_per_point; j++) {
      if (has_z) row[n_axes] = s->base.output.redshifts[j / s->n_k];
      memcpy(row + n_axes + has_z + ev->n_point_columns,
             values + ev->n_point_columns + (size_t)j * (size_t)ev->n_redshift_columns,
             sizeof(double) * (size_t)ev->n_redshift_columns);
      st = jg_table_write_row(f, row, s->n_columns, (const char *const *)s->columns, err);
    }
  }
  pthread_mutex_unlock(&c->lock);
  /* Reading records back resets errno, so a write that failed before is
   * known only by the error flag: ask the stream again for the reason. */
  errno = 0;
  if (st == JG_OK && (fflush(f) != 0 || ferror(f)))
    st = JG_FAIL(err, JG_EIO, "cannot write the scan table (%s)", strerror(errno ? errno : EIO));
  for (int i = 0; i < n_lines; i++) free(lines[i]);
  free(lines);
  free(values);
  free(row);
  return st;
}

/* ------------------------------------------------------------------------ */
/* Joining slices.                                                           */

typedef struct part_file {
  const char *path;
  FILE *f;
  char **header;   /* header lines without the part line and the failure section */
  int n_header;
  char **failures; /* the "# failed point" lines */
  int n_failures;
  char *columns;   /* the column-name line */
  char fingerprint[17];
  int index, count;
  long long first, last, total;
  long long data_lines;
} part_file;

static void part_free(part_file *p) {
  for (int i = 0; i < p->n_header; i++) free(p->header[i]);
  for (int i = 0; i < p->n_failures; i++) free(p->failures[i]);
  free(p->header);
  free(p->failures);
  free(p->columns);
  if (p->f) fclose(p->f);
  memset(p, 0, sizeof *p);
}

static int push_line(char ***v, int *n, const char *line) {
  char **bigger = realloc(*v, sizeof **v * (size_t)(*n + 1));
  if (!bigger) return 0;
  *v = bigger;
  if (!((*v)[*n] = jg__scan_strdup(line))) return 0;
  (*n)++;
  return 1;
}

/* Open a slice for reading. Only a regular file can be a slice: a device
 * such as /dev/zero would be read forever, and a named pipe would block at
 * the open (hence O_NONBLOCK, cleared once the file is known to be regular).
 * A slice that cannot be opened is bad input, like any missing input. */
static jg_status open_part(part_file *p, const char *path, jg_error *err) {
  int fd = open(path, O_RDONLY | O_NONBLOCK | O_CLOEXEC | O_NOCTTY);
  if (fd < 0)
    return JG_FAIL(err, errno == ENOMEM ? JG_ENOMEM : JG_EINVAL, "%s: cannot read the slice (%s)",
                   path, strerror(errno));
  struct stat sb;
  if (fstat(fd, &sb) != 0) {
    int e = errno;
    close(fd);
    return JG_FAIL(err, JG_EIO, "%s: cannot read the slice (%s)", path, strerror(e));
  }
  if (!S_ISREG(sb.st_mode)) {
    close(fd);
    return JG_FAIL(err, JG_EINVAL, "%s: not a slice of a jeansgrow scan (it is %s, not a "
                   "regular file)", path,
                   S_ISDIR(sb.st_mode) ? "a folder" : "a device, pipe or socket");
  }
  int flags = fcntl(fd, F_GETFL);
  if (flags < 0 || fcntl(fd, F_SETFL, flags & ~O_NONBLOCK) != 0 || !(p->f = fdopen(fd, "r"))) {
    int e = errno;
    close(fd);
    return JG_FAIL(err, JG_EIO, "%s: cannot read the slice (%s)", path, strerror(e));
  }
  return JG_OK;
}

/* A slice: its header read with the table module and sorted into the
 * common lines, the part line, the failure section and the column line,
 * then every row checked as the table module wrote it. */
static jg_status read_part(part_file *p, const char *path, jg_error *err) {
  memset(p, 0, sizeof *p);
  p->path = path;
  p->index = -1;
  jg_status st = open_part(p, path, err);
  if (st != JG_OK) return st;
  char **lines = NULL;
  int n_lines = 0;
  st = jg_table_read_header(p->f, path, &lines, &n_lines, err);
  if (st != JG_OK) return st;
  long long expected_failures = -1;
  int in_failures = 0, rows = 0;
  for (int k = 0; st == JG_OK && k + 1 < n_lines; k++) { /* the last is the column line */
    const char *line = lines[k];
    if (strncmp(line, "# " PART_PREFIX, strlen("# " PART_PREFIX)) == 0) {
      if (sscanf(line + strlen("# " PART_PREFIX), "%d/%d, points %lld to %lld of %lld", &p->index,
                 &p->count, &p->first, &p->last, &p->total) != 5)
        st = JG_FAIL(err, JG_EINVAL, "%s: cannot read its scan part line", path);
      continue; /* not part of the common header */
    }
    if (strncmp(line, "# scan fingerprint: ", 20) == 0)
      snprintf(p->fingerprint, sizeof p->fingerprint, "%.16s", line + 20);
    if (strncmp(line, "# scan grid: ", 13) == 0) {
      /* Rows per point, as the grid line states them (scan_header_lines). */
      const char *per = strstr(line, "), ");
      int n_z = 0, n_k = 0;
      if (per && strncmp(per + 3, "one row per point", 17) == 0) rows = 1;
      else if (per && sscanf(per + 3, "%d redshifts x %d wavenumbers", &n_z, &n_k) == 2)
        rows = n_z * n_k;
      else if (per) rows = atoi(per + 3);
    }
    if (strncmp(line, FAILED_COUNT_PREFIX, strlen(FAILED_COUNT_PREFIX)) == 0) {
      expected_failures = atoll(line + strlen(FAILED_COUNT_PREFIX));
      in_failures = 1;
      continue;
    }
    if (!push_line(in_failures ? &p->failures : &p->header,
                   in_failures ? &p->n_failures : &p->n_header, line))
      st = JG_FAIL(err, JG_ENOMEM, "out of memory");
  }
  if (st == JG_OK && n_lines > 0 && !(p->columns = jg__scan_strdup(lines[n_lines - 1])))
    st = JG_FAIL(err, JG_ENOMEM, "out of memory");
  jg_table_free_header(lines, n_lines);
  if (st != JG_OK) return st;
  const int is_slice = p->fingerprint[0] && p->index >= 0 && expected_failures >= 0 && p->columns;
  if (!is_slice)
    return JG_FAIL(err, JG_EINVAL, "%s: not a slice of a jeansgrow scan (no fingerprint, part "
                   "or failure lines; write slices with jeansgrow scan --part I/N)", path);
  const off_t body = ftello(p->f);
  int columns = 1;
  for (const char *t = p->columns; *t; t++) columns += *t == '\t';
  char *line = NULL;
  size_t cap = 0;
  ssize_t n;
  long long line_number = n_lines;
  while (st == JG_OK && (n = getline(&line, &cap, p->f)) > 0) {
    st = jg_table_check_row(line, n, columns, path, ++line_number, err);
    p->data_lines++;
  }
  free(line);
  if (st != JG_OK) return st;
  if (p->n_failures != expected_failures)
    return JG_FAIL(err, JG_EINVAL, "%s: lists %d failed points where its header announces %lld",
                   path, p->n_failures, expected_failures);
  long long points = p->last - p->first + 1;
  if (rows > 0 && p->data_lines != (points - p->n_failures) * rows)
    return JG_FAIL(err, JG_EINVAL, "%s: holds %lld rows where its %lld points (%d failed) with "
                   "%d %s each make %lld; the file is incomplete or was edited", path,
                   p->data_lines, points, p->n_failures, rows, rows == 1 ? "row" : "rows",
                   (points - p->n_failures) * rows);
  if (fseeko(p->f, body, SEEK_SET) != 0)
    return JG_FAIL(err, JG_EIO, "%s: cannot read (%s)", path, strerror(errno));
  return JG_OK;
}

jg_status jg_scan_merge(const char *const *paths, int n_paths, FILE *out, jg_error *err) {
  if (!paths || n_paths < 1 || !out)
    return JG_FAIL(err, JG_EINVAL, "merge: no slice files given");
  part_file *parts = calloc((size_t)n_paths, sizeof *parts);
  if (!parts) return JG_FAIL(err, JG_ENOMEM, "out of memory");
  jg_status st = JG_OK;
  for (int i = 0; st == JG_OK && i < n_paths; i++) st = read_part(&parts[i], paths[i], err);
  const part_file **by_index = NULL;
  if (st == JG_OK) {
    const part_file *a = &parts[0];
    if (a->count != n_paths) {
      /* Name the missing slices: that is what the user has to go and find. */
      char missing[256] = "";
      for (int k = 1; k <= a->count && strlen(missing) < sizeof missing - 16; k++) {
        int have = 0;
        for (int i = 0; i < n_paths; i++) have |= parts[i].index == k;
        if (!have)
          snprintf(missing + strlen(missing), sizeof missing - strlen(missing), "%s%d",
                   missing[0] ? ", " : "", k);
      }
      st = JG_FAIL(err, JG_EINVAL, "%s is slice %d of %d, but %d file%s given (missing: %s); a "
                   "merge takes all %d slices", a->path, a->index, a->count, n_paths,
                   n_paths == 1 ? " is" : "s are", missing[0] ? missing : "none", a->count);
    }
    by_index = calloc((size_t)n_paths + 1, sizeof *by_index);
    if (st == JG_OK && !by_index) st = JG_FAIL(err, JG_ENOMEM, "out of memory");
    for (int i = 0; st == JG_OK && i < n_paths; i++) {
      const part_file *b = &parts[i];
      if (strcmp(a->fingerprint, b->fingerprint) != 0)
        st = JG_FAIL(err, JG_EINVAL, "%s and %s belong to different scans (fingerprints %s and "
                     "%s)", a->path, b->path, a->fingerprint, b->fingerprint);
      else if (b->count != a->count || b->total != a->total)
        st = JG_FAIL(err, JG_EINVAL, "%s is a slice of %d but %s a slice of %d", a->path,
                     a->count, b->path, b->count);
      else if (b->n_header != a->n_header || strcmp(a->columns, b->columns) != 0)
        st = JG_FAIL(err, JG_EINVAL, "%s and %s have different headers (same scan, different "
                     "program versions?)", a->path, b->path);
      for (int k = 0; st == JG_OK && k < a->n_header; k++)
        if (strcmp(a->header[k], b->header[k]) != 0)
          st = JG_FAIL(err, JG_EINVAL, "%s and %s have different headers at '%.200s'", a->path,
                       b->path, b->header[k]);
      if (st == JG_OK && (b->index < 1 || b->index > n_paths))
        st = JG_FAIL(err, JG_EINVAL, "%s: slice %d of %d is not a valid slice number", b->path,
                     b->index, b->count);
      if (st == JG_OK && by_index[b->index])
        st = JG_FAIL(err, JG_EINVAL, "%s and %s are both slice %d of %d", by_index[b->index]->path,
                     b->path, b->index, b->count);
      if (st == JG_OK) by_index[b->index] = b;
    }
    /* With n files, n distinct indices in 1..n: none is missing. Check the
     * blocks tile the grid all the same, in case a file was edited. */
    long long next = 1;
    for (int i = 1; st == JG_OK && i <= n_paths; i++) {
      if (by_index[i]->first != next)
        st = JG_FAIL(err, JG_EINVAL, "%s: slice %d starts at point %lld, expected %lld",
                     by_index[i]->path, i, by_index[i]->first, next);
      next = by_index[i]->last + 1;
    }
    if (st == JG_OK && next != a->total + 1)
      st = JG_FAIL(err, JG_EINVAL, "the slices end at point %lld of %lld", next - 1, a->total);
  }
  if (st == JG_OK) {
    const part_file *a = by_index[1];
    long long failed = 0;
    for (int i = 1; i <= n_paths; i++) failed += by_index[i]->n_failures;
    for (int k = 0; k < a->n_header; k++) fprintf(out, "%s\n", a->header[k]);
    fprintf(out, FAILED_COUNT_PREFIX "%lld\n", failed);
    for (int i = 1; i <= n_paths; i++)
      for (int k = 0; k < by_index[i]->n_failures; k++) fprintf(out, "%s\n", by_index[i]->failures[k]);
    fprintf(out, "%s\n", a->columns);
    char buf[65536];
    for (int i = 1; st == JG_OK && i <= n_paths; i++) {
      size_t got;
      while ((got = fread(buf, 1, sizeof buf, by_index[i]->f)) > 0)
        if (fwrite(buf, 1, got, out) != got) break;
      if (ferror(by_index[i]->f))
        st = JG_FAIL(err, JG_EIO, "%s: cannot read (%s)", by_index[i]->path, strerror(errno));
    }
    if (st == JG_OK && ferror(out))
      st = JG_FAIL(err, JG_EIO, "cannot write the merged table (%s)", strerror(errno));
  }
  for (int i = 0; i < n_paths; i++) part_free(&parts[i]);
  free(parts);
  free(by_index);
  return st;
}
