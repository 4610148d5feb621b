/* Output tables written atomically (see include/jeansgrow/table.h). */
#include "jeansgrow/table.h"

#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <sys/random.h>
#include <sys/stat.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "jeansgrow/version.h"
#include "alloc.h" /* last: test builds route allocations through it */

struct jg_output {
  FILE *stream;
  char *final_path; /* NULL for stdout */
  char *temp_path;
};

/* Create the temporary file with a random unused name. Unlike mkstemp,
 * open(O_CREAT | O_EXCL, 0666) lets the process umask set the permissions,
 * so the final table gets the same mode as any file the user writes; and
 * getrandom keeps the library free of shared state between threads. */
static int open_temporary(char *buf, size_t size, const char *path, size_t dir_len) {
  static const char hex[] = "0123456789abcdef";
  for (int attempt = 0; attempt < 100; attempt++) {
    unsigned char r[6];
    if (getrandom(r, sizeof r, 0) != (ssize_t)sizeof r) return -1;
    char suffix[13];
    for (int i = 0; i < 6; i++) {
      suffix[2 * i] = hex[r[i] >> 4];
      suffix[2 * i + 1] = hex[r[i] & 15];
    }
    suffix[12] = '\0';
    snprintf(buf, size, "%.*s.%s.%s", (int)dir_len, path, path + dir_len, suffix);
    int fd = open(buf, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0666);
    if (fd >= 0 || errno != EEXIST) return fd;
  }
  errno = EEXIST;
  return -1;
}

/* A special file, opened for writing as it is: no temporary file, so
 * temp_path stays NULL and commit neither syncs nor renames. */
static jg_status open_in_place(jg_output *o, const char *path, jg_output **out, jg_error *err) {
  o->final_path = strdup(path);
  int fd = o->final_path ? open(path, O_WRONLY | O_NOCTTY | O_CLOEXEC) : -1;
  int e = o->final_path ? errno : ENOMEM;
  if (fd >= 0 && !(o->stream = fdopen(fd, "w"))) e = errno, close(fd);
  if (!o->stream) {
    jg_output_discard(o);
    return JG_FAIL(err, e == ENOMEM ? JG_ENOMEM : JG_EIO, "%s: cannot write output (%s)", path,
                   strerror(e));
  }
  *out = o;
  return JG_OK;
}

jg_status jg_output_open(const char *path, jg_output **out, jg_error *err) {
  *out = NULL;
  jg_output *o = calloc(1, sizeof *o);
  if (!o) return JG_FAIL(err, JG_ENOMEM, "out of memory opening output");
  if (!path || strcmp(path, "-") == 0) {
    o->stream = stdout;
    *out = o;
    return JG_OK;
  }
  /* What the path names decides how it is written. A device, FIFO or
   * socket (/dev/null, /dev/stdout on a pipe, a named pipe) is written in
   * place: a temporary file renamed over it would replace the special file
   * itself (as root, /dev/null would become a regular file). A symbolic link
   * to a file is followed, so that the link survives the rename. */
  struct stat sb, lsb;
  char *resolved = NULL;
  if (stat(path, &sb) == 0) {
    if (S_ISDIR(sb.st_mode)) {
      jg_output_discard(o);
      return JG_FAIL(err, JG_EIO, "%s: cannot write output (it is a folder)", path);
    }
    if (!S_ISREG(sb.st_mode)) return open_in_place(o, path, out, err);
    if (lstat(path, &lsb) == 0 && S_ISLNK(lsb.st_mode)) resolved = realpath(path, NULL);
  }
  const char *target = resolved ? resolved : path;
  size_t n = strlen(target);
  o->final_path = malloc(n + 1);
  o->temp_path = malloc(n + 32);
  if (!o->final_path || !o->temp_path) {
    free(resolved);
    jg_output_discard(o);
    return JG_FAIL(err, JG_ENOMEM, "out of memory opening %s", path);
  }
  memcpy(o->final_path, target, n + 1);
  /* The temporary file sits beside the final one (same file system, so the
   * rename is atomic) and is hidden by a leading dot in its name. */
  const char *slash = strrchr(target, '/');
  size_t dir_len = slash ? (size_t)(slash - target) + 1 : 0;
  int fd = open_temporary(o->temp_path, n + 32, target, dir_len);
  free(resolved);
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
  /* A special file written in place has nothing to sync or rename (fsync
   * on a pipe or /dev/null fails with EINVAL). */
  int in_place = o->temp_path == NULL;
  int bad = fflush(o->stream) != 0 || ferror(o->stream) ||
            (!in_place && fsync(fileno(o->stream)) != 0);
  int e = errno;
  if (fclose(o->stream) != 0 && !bad) bad = 1, e = errno;
  o->stream = NULL;
  if (!bad && !in_place && rename(o->temp_path, o->final_path) != 0) bad = 1, e = errno;
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
