/* Output tables written atomically (see include/jeansgrow/table.h). */
#define _GNU_SOURCE /* F_OFD_SETLK: locks held by an open file, not by a process */
#include "jeansgrow/table.h"

#include <ctype.h>
#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <math.h>
#include <sys/random.h>
#include <sys/stat.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "jeansgrow/version.h"
#include "file_lock.h"
#include "alloc.h" /* last: test builds route allocations through it */

struct jg_output {
  FILE *stream;
  char *final_path; /* NULL for stdout */
  char *temp_path;
};

int jg__file_try_lock(int fd) {
  /* Open-file-description locks: unlike classic POSIX record locks, they
   * are not dropped when this process closes some other descriptor of the
   * same file, and two opens in one process exclude each other. */
  struct flock fl;
  memset(&fl, 0, sizeof fl);
  fl.l_type = F_WRLCK;
  fl.l_whence = SEEK_SET;
  if (fcntl(fd, F_OFD_SETLK, &fl) == 0) return 0;
  return errno == EAGAIN || errno == EACCES ? 1 : -1;
}

/* The hidden temporary name of an output is ".NAME.XXXXXXXXXXXX" (12
 * random hex digits). NAME is cut short when the whole would pass the
 * longest name the system allows, so that every name a user may give can be
 * written; the random part keeps cut names apart. */
#define TEMP_SUFFIX_DIGITS 12
#define TEMP_EXTRA (1 + 1 + TEMP_SUFFIX_DIGITS)

static size_t temp_name_stem(const char *name) {
  size_t n = strlen(name);
  return n + TEMP_EXTRA > NAME_MAX ? NAME_MAX - TEMP_EXTRA : n;
}

/* Is `entry` (a name in the output's folder) a temporary file of the output
 * called `name`? */
static int is_temp_name_of(const char *entry, const char *name) {
  size_t stem = temp_name_stem(name);
  if (strlen(entry) != stem + TEMP_EXTRA || entry[0] != '.' ||
      strncmp(entry + 1, name, stem) != 0 || entry[1 + stem] != '.')
    return 0;
  for (const char *h = entry + 2 + stem; *h; h++)
    if (!((*h >= '0' && *h <= '9') || (*h >= 'a' && *h <= 'f'))) return 0;
  return 1;
}

/* A temporary file younger than this is never taken for a stale one: its
 * writer locks it right after creating it, and this leaves that moment a
 * wide margin. */
#define STALE_TEMP_AGE_SECONDS 5

/* Remove the temporary files of this output that a killed run left behind
 * (SIGKILL, a crash, a lost node: no handler could remove them). A live
 * writer holds a lock on its temporary file for as long as it writes, so a
 * file of our own name pattern, owned by this user, that nobody holds is
 * stale. Best effort: whatever cannot be checked is left alone. */
static void remove_stale_temporaries(const char *path, size_t dir_len) {
  char dir[PATH_MAX];
  if (dir_len >= sizeof dir) return;
  if (dir_len) memcpy(dir, path, dir_len), dir[dir_len] = '\0';
  else strcpy(dir, ".");
  const char *name = path + dir_len;
  DIR *d = opendir(dir);
  if (!d) return;
  int dfd = dirfd(d);
  const time_t now = time(NULL);
  struct dirent *e;
  while ((e = readdir(d)) != NULL) {
    if (!is_temp_name_of(e->d_name, name)) continue;
    int fd = openat(dfd, e->d_name, O_WRONLY | O_NOFOLLOW | O_NONBLOCK | O_NOCTTY | O_CLOEXEC);
    if (fd < 0) continue;
    struct stat sb;
    if (fstat(fd, &sb) == 0 && S_ISREG(sb.st_mode) && sb.st_uid == geteuid() &&
        now - sb.st_mtime >= STALE_TEMP_AGE_SECONDS && jg__file_try_lock(fd) == 0)
      unlinkat(dfd, e->d_name, 0);
    close(fd);
  }
  closedir(d);
}

/* Create the temporary file with a random unused name, and lock it for as
 * long as it is written (see remove_stale_temporaries). Unlike mkstemp,
 * open(O_CREAT | O_EXCL, 0666) lets the process umask set the permissions,
 * so the final table gets the same mode as any file the user writes; and
 * getrandom keeps the library free of shared state between threads. */
static int open_temporary(char *buf, size_t size, const char *path, size_t dir_len) {
  static const char hex[] = "0123456789abcdef";
  const size_t stem = temp_name_stem(path + dir_len);
  for (int attempt = 0; attempt < 100; attempt++) {
    unsigned char r[TEMP_SUFFIX_DIGITS / 2];
    if (getrandom(r, sizeof r, 0) != (ssize_t)sizeof r) return -1;
    char suffix[TEMP_SUFFIX_DIGITS + 1];
    for (size_t i = 0; i < sizeof r; i++) {
      suffix[2 * i] = hex[r[i] >> 4];
      suffix[2 * i + 1] = hex[r[i] & 15];
    }
    suffix[TEMP_SUFFIX_DIGITS] = '\0';
    snprintf(buf, size, "%.*s.%.*s.%s", (int)dir_len, path, (int)stem, path + dir_len, suffix);
    int fd = open(buf, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0666);
    if (fd >= 0 && jg__file_try_lock(fd) < 0 && errno != EINVAL && errno != ENOLCK) {
      /* A file system without locks (EINVAL, ENOLCK) still gets its table;
       * only its stale temporaries are never recognised. */
      int e = errno;
      close(fd);
      unlink(buf);
      errno = e;
      return -1;
    }
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
  } else if (lstat(path, &lsb) == 0 && S_ISLNK(lsb.st_mode)) {
    /* A link to nothing: the rename would replace the link by the table,
     * and creating its target instead could write anywhere the link was
     * pointed, so neither happens silently. */
    char target[PATH_MAX];
    ssize_t tn = readlink(path, target, sizeof target - 1);
    target[tn > 0 ? tn : 0] = '\0';
    jg_output_discard(o);
    return JG_FAIL(err, JG_EIO, "%s: cannot write output (it is a symbolic link to '%s', which "
                   "does not exist; remove the link or create its target)", path, target);
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
  remove_stale_temporaries(target, dir_len);
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
  /* A write that failed earlier leaves only the stream's error flag; errno
   * may have been reset since, and "(Success)" would explain nothing. */
  errno = 0;
  int bad = fflush(o->stream) != 0 || ferror(o->stream) ||
            (!in_place && fsync(fileno(o->stream)) != 0);
  int e = errno ? errno : EIO;
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

/* ---- reading tables back ------------------------------------------------- */

jg_status jg_table_read_header(FILE *f, const char *path, char ***lines, int *n_lines,
                               jg_error *err) {
  *lines = NULL;
  *n_lines = 0;
  char *line = NULL;
  size_t cap = 0;
  ssize_t n;
  jg_status st = JG_OK;
  off_t body = ftello(f);
  while (st == JG_OK && (n = getline(&line, &cap, f)) > 0 && line[0] == '#') {
    body = ftello(f);
    if (line[n - 1] == '\n') line[n - 1] = '\0';
    char **bigger = realloc(*lines, sizeof **lines * (size_t)(*n_lines + 1));
    char *copy = bigger ? strdup(line) : NULL;
    if (bigger) *lines = bigger;
    if (!copy) {
      st = JG_FAIL(err, JG_ENOMEM, "%s: out of memory reading the table header", path);
      break;
    }
    (*lines)[(*n_lines)++] = copy;
  }
  free(line);
  if (st == JG_OK && (ferror(f) || fseeko(f, body, SEEK_SET) != 0))
    st = JG_FAIL(err, JG_EIO, "%s: cannot read (%s)", path, strerror(errno ? errno : EIO));
  if (st != JG_OK) {
    jg_table_free_header(*lines, *n_lines);
    *lines = NULL;
    *n_lines = 0;
  }
  return st;
}

void jg_table_free_header(char **lines, int n_lines) {
  for (int i = 0; lines && i < n_lines; i++) free(lines[i]);
  free(lines);
}

jg_status jg_table_check_row(const char *line, ssize_t n, int columns, const char *path,
                             long long line_number, jg_error *err) {
  if (n <= 0 || line[n - 1] != '\n')
    return JG_FAIL(err, JG_EINVAL, "%s:%lld: the last row is cut short (no end of line); the "
                   "table is incomplete: compute it again", path, line_number);
  const char *s = line;
  for (int c = 0; c < columns; c++) {
    char *end;
    double v = strtod(s, &end);
    const char sep = c + 1 < columns ? '\t' : '\n';
    if (end == s || *end != sep || isspace((unsigned char)*s))
      return JG_FAIL(err, JG_EINVAL, "%s:%lld: column %d is not a number followed by %s; a "
                     "row holds %d tab-separated numbers: the table is damaged or was edited",
                     path, line_number, c + 1, c + 1 < columns ? "a tab" : "the end of line",
                     columns);
    if (!isfinite(v))
      return JG_FAIL(err, JG_EINVAL, "%s:%lld: column %d holds '%.*s', not a finite number; "
                     "no NaN or Inf may enter a table: the table was edited", path,
                     line_number, c + 1, (int)(end - s), s);
    s = end + 1;
  }
  return JG_OK;
}
