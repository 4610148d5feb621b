/* Output tables written atomically (see include/jeansgrow/table.h). */
#include "jeansgrow/table.h"

#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "jeansgrow/version.h"

struct jg_output {
  FILE *stream;
  char *final_path; /* NULL for stdout */
  char *temp_path;
};

jg_status jg_output_open(const char *path, jg_output **out, jg_error *err) {
  *out = NULL;
  jg_output *o = calloc(1, sizeof *o);
  if (!o) return JG_FAIL(err, JG_ENOMEM, "out of memory opening output");
  if (!path || strcmp(path, "-") == 0) {
    o->stream = stdout;
    *out = o;
    return JG_OK;
  }
  size_t n = strlen(path);
  o->final_path = malloc(n + 1);
  o->temp_path = malloc(n + 32);
  if (!o->final_path || !o->temp_path) {
    jg_output_discard(o);
    return JG_FAIL(err, JG_ENOMEM, "out of memory opening %s", path);
  }
  memcpy(o->final_path, path, n + 1);
  /* The temporary file sits beside the final one (same file system, so the
   * rename is atomic) and is hidden by a leading dot in its name. */
  const char *slash = strrchr(path, '/');
  size_t dir_len = slash ? (size_t)(slash - path) + 1 : 0;
  snprintf(o->temp_path, n + 32, "%.*s.%s.XXXXXX", (int)dir_len, path, path + dir_len);
  int fd = mkstemp(o->temp_path);
  if (fd < 0) {
    int e = errno;
    free(o->temp_path);
    o->temp_path = NULL;
    jg_output_discard(o);
    return JG_FAIL(err, JG_EIO, "%s: cannot write output (%s)", path, strerror(e));
  }
  o->stream = fdopen(fd, "w");
  if (!o->stream) {
    int e = errno;
    close(fd);
    jg_output_discard(o);
    return JG_FAIL(err, JG_EIO, "%s: cannot write output (%s)", path, strerror(e));
  }
  *out = o;
  return JG_OK;
}

FILE *jg_output_stream(jg_output *o) { return o->stream; }

const char *jg_output_temp_path(const jg_output *o) { return o ? o->temp_path : NULL; }

static void output_free(jg_output *o) {
  free(o->final_path);
  free(o->temp_path);
  free(o);
}

void jg_output_discard(jg_output *o) {
  if (!o) return;
  if (o->stream && o->stream != stdout) fclose(o->stream);
  if (o->temp_path) unlink(o->temp_path);
  output_free(o);
}

jg_status jg_output_commit(jg_output *o, jg_error *err) {
  if (o->stream == stdout) {
    int bad = fflush(stdout) != 0 || ferror(stdout);
    output_free(o);
    if (bad) return JG_FAIL(err, JG_EIO, "cannot write to standard output (%s)", strerror(errno));
    return JG_OK;
  }
  int bad = fflush(o->stream) != 0 || ferror(o->stream) || fsync(fileno(o->stream)) != 0;
  int e = errno;
  if (fclose(o->stream) != 0 && !bad) bad = 1, e = errno;
  o->stream = NULL;
  if (!bad && rename(o->temp_path, o->final_path) != 0) bad = 1, e = errno;
  if (bad) {
    jg_status st = JG_FAIL(err, JG_EIO, "%s: cannot write output (%s)", o->final_path,
                           strerror(e));
    jg_output_discard(o);
    return st;
  }
  output_free(o);
  return JG_OK;
}

void jg_table_write_preamble(FILE *f, const char *title, const jg_params *p,
                             const char *const *conventions) {
  fprintf(f, "# jeansgrow %s: %s\n", JG_VERSION_STRING, title);
  if (conventions)
    for (int i = 0; conventions[i]; i++) fprintf(f, "# %s\n", conventions[i]);
  fprintf(f, "# effective parameters:\n");
  jg_params_write_header(f, p);
}

void jg_table_write_columns(FILE *f, const char *const *names, int n) {
  fputs("# ", f);
  for (int i = 0; i < n; i++) fprintf(f, "%s%s", i ? "\t" : "", names[i]);
  fputc('\n', f);
}

jg_status jg_table_write_row(FILE *f, const double *values, int n, const char *const *names,
                             jg_error *err) {
  for (int i = 0; i < n; i++)
    if (!isfinite(values[i]))
      return JG_FAIL(err, JG_ENUMERIC, "non-finite value in column %s (row starting %g)",
                     names ? names[i] : "?", values[0]);
  for (int i = 0; i < n; i++) fprintf(f, "%s%.10e", i ? "\t" : "", values[i]);
  fputc('\n', f);
  return JG_OK;
}
