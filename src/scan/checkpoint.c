/*
 * The checkpoint of a scan: an append-only file of finished points (format
 * in include/jeansgrow/scan.h), locked while a run writes it, read back on
 * --resume, and the source of the table.
 */
#include "scan_internal.h"

#include <errno.h>
#include <fcntl.h>
#include <inttypes.h>
#include <limits.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <sys/stat.h>
#include <unistd.h>

#include "jeansgrow/version.h"
#include "../base/clock.h"
#include "../base/file_lock.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* A checkpoint is synced to the disk at least this often (seconds): often
 * enough that a crashed node loses at most this much work, rarely enough
 * that the sync costs nothing next to points of a few milliseconds. */
#define CHECKPOINT_SYNC_INTERVAL 1.0

#define CHECKPOINT_MAGIC "# jeansgrow scan checkpoint 1"

/* ------------------------------------------------------------------------ */
/* The checkpoint.                                                           */


/* A zeroed array of n offsets, mapped directly rather than taken from the
 * allocator, which may write into large blocks (an allocator that
 * checks memory, for one, marks the whole block at once). NULL when out of
 * memory. */
static long long *index_new(size_t n, size_t *bytes) {
  *bytes = (n > 0 ? n : 1) * sizeof(long long);
  void *p = mmap(NULL, *bytes, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS, -1, 0);
  return p == MAP_FAILED ? NULL : p;
}

/* Append "content *HASH\n" at the end of the file. */
static jg_status append_line(jg_scan_checkpoint *c, const char *content, long long *where,
                             jg_error *err) {
  uint64_t h = jg__fnv1a(JG__FNV_OFFSET, content, strlen(content));
  if (fseeko(c->f, (off_t)c->end, SEEK_SET) != 0) goto fail;
  int n = fprintf(c->f, "%s *%016" PRIx64 "\n", content, h);
  if (n < 0 || fflush(c->f) != 0) goto fail;
  if (where) *where = c->end;
  c->end += n;
  return JG_OK;
fail:
  return JG_FAIL(err, JG_EIO, "%s: cannot write the scan checkpoint (%s)",
                 c->path ? c->path : "(temporary file)", strerror(errno));
}

/* Check a line's hash; on success cut it to its content (NUL at " *"). */
static int line_intact(char *line, size_t len) {
  if (len < 19 || line[len - 1] != '\n') return 0;
  char *star = line + len - 19;
  if (star[0] != ' ' || star[1] != '*') return 0;
  char *end;
  uint64_t want = strtoull(star + 2, &end, 16);
  if (end != line + len - 1) return 0;
  if (jg__fnv1a(JG__FNV_OFFSET, line, (size_t)(star - line)) != want) return 0;
  *star = '\0';
  return 1;
}

static void header_text(const jg_scan *s, char *buf, size_t size) {
  snprintf(buf, size, "%s fingerprint %s part %d/%d points %lld+%lld of %lld values %d",
           CHECKPOINT_MAGIC, s->fingerprint, s->part_index, s->part_count, s->first, s->count,
           s->total, s->n_values);
}


/* Parse record content (hash already checked and cut). Values go to `values`. */
static int parse_record(const jg_scan_checkpoint *c, char *text, jg__scan_record *r, double *values) {
  const jg_scan *s = c->s;
  char *p = text, *end;
  if ((p[0] != 'P' && p[0] != 'F') || p[1] != ' ') return 0;
  r->failed = p[0] == 'F';
  errno = 0;
  r->index = strtoll(p + 2, &end, 10);
  if (errno || end == p + 2 || r->index < s->first || r->index >= s->first + s->count) return 0;
  p = end;
  if (r->failed) {
    long code = strtol(p, &end, 10);
    if (end == p || code <= 0 || code > JG_EINTERRUPT || *end != ' ') return 0;
    r->status = (jg_status)code;
    r->message = end + 1;
    return 1;
  }
  r->status = JG_OK;
  r->message = "";
  for (int i = 0; i < s->n_values; i++) {
    if (*p != ' ') return 0;
    double v = strtod(p + 1, &end);
    if (end == p + 1 || !isfinite(v)) return 0;
    if (values) values[i] = v;
    p = end;
  }
  return *p == '\0';
}

/* Read one line at `offset` into the checkpoint buffer (grown as needed). */
static ssize_t read_line_at(jg_scan_checkpoint *c, long long offset) {
  if (fseeko(c->f, (off_t)offset, SEEK_SET) != 0) return -1;
  return getline(&c->buf, &c->buf_size, c->f);
}

/* Is the file's start no more than a torn first write of `header`'s line
 * (a run killed before its header was on the disk)? Only then may an
 * existing checkpoint be started afresh; anything else in it (another
 * program's file, a damaged header) is refused rather than overwritten. */
static int only_a_torn_header(FILE *f, const char *header) {
  char line[600];
  uint64_t h = jg__fnv1a(JG__FNV_OFFSET, header, strlen(header));
  int want = snprintf(line, sizeof line, "%s *%016" PRIx64 "\n", header, h);
  char got[sizeof line];
  if (want <= 0 || fseeko(f, 0, SEEK_SET) != 0) return 0;
  size_t n = fread(got, 1, (size_t)want, f);
  return n < (size_t)want && memcmp(got, line, n) == 0;
}

static jg_status load_existing(jg_scan_checkpoint *c, int *fresh, jg_error *err) {
  const jg_scan *s = c->s;
  char want[512];
  header_text(s, want, sizeof want);
  *fresh = 0;
  if (only_a_torn_header(c->f, want)) {
    /* Killed before its first line was complete: nothing was recorded. */
    *fresh = 1;
    return JG_OK;
  }
  ssize_t n = read_line_at(c, 0);
  if (n <= 0 || !line_intact(c->buf, (size_t)n) || strncmp(c->buf, CHECKPOINT_MAGIC " ", strlen(CHECKPOINT_MAGIC) + 1) != 0)
    return JG_FAIL(err, JG_EINVAL, "%s:1: not a jeansgrow scan checkpoint, or its first line is "
                   "damaged; it is left as it is: remove it (or name another output) to start "
                   "this scan afresh", c->path);
  if (strcmp(c->buf, want) != 0)
    return JG_FAIL(err, JG_EINVAL, "%s belongs to a different scan or slice (its first line: "
                   "'%.300s'; this scan: fingerprint %s part %d/%d); finish that scan, or "
                   "remove the file to start this one afresh", c->path, c->buf, s->fingerprint,
                   s->part_index, s->part_count);
  long long pos = n, line_number = 1;
  for (;;) {
    n = getline(&c->buf, &c->buf_size, c->f);
    if (n <= 0) break;
    line_number++;
    jg__scan_record r;
    const int intact = line_intact(c->buf, (size_t)n);
    if (!intact || !parse_record(c, c->buf, &r, NULL) || c->offset[r.index - s->first] > 0) {
      /* A kill tears only the last line, which is cut off below and
       * recomputed. A bad line with more after it is damage from outside:
       * cutting there would silently throw away the points after it. */
      const char *why = !intact ? "the record's checksum does not match"
                        : (c->buf[0] == 'P' || c->buf[0] == 'F') && c->buf[1] == ' '
                            ? "a record of a point outside this slice, recorded twice, or with "
                              "an unreadable value"
                            : "not a record of a scan point";
      const int last = getline(&c->buf, &c->buf_size, c->f) <= 0;
      if (last && !intact) break;
      return JG_FAIL(err, JG_EINVAL, "%s:%lld: %s; the checkpoint is damaged and is left as it "
                     "is: remove it to start the scan afresh", c->path, line_number, why);
    }
    c->offset[r.index - s->first] = pos + 1;
    c->done++;
    c->failed += r.failed;
    pos += n;
  }
  c->end = pos;
  c->resumed = c->done;
  if (ftruncate(fileno(c->f), (off_t)pos) != 0)
    return JG_FAIL(err, JG_EIO, "%s: cannot cut the damaged end of the checkpoint (%s)",
                   c->path, strerror(errno));
  return JG_OK;
}

/* Open (creating it if missing) the checkpoint file at `path` and take its
 * lock. The lock is what tells a running scan from an interrupted one: a
 * run holds it until it ends, however it ends, so a second run of the same
 * output (a plain one, or --resume) refuses instead of writing into the
 * same file. *created says whether this call made the file. */
static jg_status open_locked(const char *path, int *fd_out, int *created, jg_error *err) {
  for (int attempt = 0; attempt < 8; attempt++) {
    int fd = open(path, O_RDWR | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
    *created = fd >= 0;
    if (fd < 0 && errno == EEXIST) fd = open(path, O_RDWR | O_CLOEXEC | O_NOCTTY);
    if (fd < 0)
      return JG_FAIL(err, JG_EIO, "%s: cannot %s the scan checkpoint (%s)", path,
                     errno == ENOENT ? "create" : "open", strerror(errno));
    int held = jg__file_try_lock(fd);
    if (held == 1) {
      close(fd);
      return JG_FAIL(err, JG_EINVAL, "%s is locked by another jeansgrow scan that is still "
                     "writing this output; wait for it to finish (or stop it, then --resume)",
                     path);
    }
    if (held < 0 && errno != EINVAL && errno != ENOLCK) {
      int e = errno;
      close(fd);
      return JG_FAIL(err, JG_EIO, "%s: cannot lock the scan checkpoint (%s)", path, strerror(e));
    }
    /* The run that held the lock may have finished and removed the file
     * between our open and our lock: then start over on the path. */
    struct stat by_fd, by_path;
    if (fstat(fd, &by_fd) == 0 && stat(path, &by_path) == 0 && by_fd.st_dev == by_path.st_dev &&
        by_fd.st_ino == by_path.st_ino) {
      *fd_out = fd;
      return JG_OK;
    }
    close(fd);
  }
  return JG_FAIL(err, JG_EIO, "%s: the scan checkpoint keeps being replaced by another run",
                 path);
}

jg_status jg_scan_checkpoint_open(const jg_scan *s, const char *path, int resume,
                                  jg_scan_checkpoint **out, jg_error *err) {
  *out = NULL;
  jg_scan_checkpoint *c = calloc(1, sizeof *c);
  if (!c) return JG_FAIL(err, JG_ENOMEM, "out of memory");
  c->s = s;
  pthread_mutex_init(&c->lock, NULL);
  c->offset = index_new((size_t)s->count, &c->offset_bytes);
  c->buf_size = 64 + (size_t)s->n_values * 32 + JG_ERROR_MESSAGE_SIZE;
  c->buf = malloc(c->buf_size);
  if (path) c->path = jg__scan_strdup(path);
  if (!c->offset || !c->buf || (path && !c->path)) {
    jg_scan_checkpoint_close(c, 0);
    return JG_FAIL(err, JG_ENOMEM, "out of memory for the scan checkpoint");
  }

  jg_status st = JG_OK;
  int fresh = 1, created = 0;
  if (!path) {
    c->f = tmpfile();
    if (!c->f) st = JG_FAIL(err, JG_EIO, "cannot create a temporary scan checkpoint (%s)",
                            strerror(errno));
  } else {
    int fd = -1;
    st = open_locked(path, &fd, &created, err);
    if (st == JG_OK && !created && !resume) {
      close(fd);
      st = JG_FAIL(err, JG_EINVAL, "%s exists: a run of this output was interrupted; resume it "
                   "(jeansgrow scan --resume) or remove the file", path);
    }
    fresh = created;
    if (st == JG_OK && !(c->f = fdopen(fd, "r+"))) {
      close(fd);
      st = JG_FAIL(err, JG_EIO, "%s: cannot open the scan checkpoint (%s)", path, strerror(errno));
    }
    if (st == JG_OK && !fresh) st = load_existing(c, &fresh, err);
  }
  if (st == JG_OK && fresh) {
    char header[512];
    header_text(s, header, sizeof header);
    c->end = 0;
    if (ftruncate(fileno(c->f), 0) != 0)
      st = JG_FAIL(err, JG_EIO, "%s: cannot write the scan checkpoint (%s)", path, strerror(errno));
    if (st == JG_OK) st = append_line(c, header, NULL, err);
    if (st == JG_OK && fsync(fileno(c->f)) != 0)
      st = JG_FAIL(err, JG_EIO, "%s: cannot sync the scan checkpoint (%s)",
                   path ? path : "(temporary file)", strerror(errno));
  }
  if (st != JG_OK) {
    /* Remove only a file this call created; never an existing checkpoint. */
    jg_scan_checkpoint_close(c, created && c->f);
    return st;
  }
  c->last_sync = jg__monotonic_seconds();
  *out = c;
  return JG_OK;
}

char *jg_scan_checkpoint_path_for(const char *output) {
  static const char suffix[] = ".checkpoint";
  const char *slash = strrchr(output, '/');
  const size_t dir_len = slash ? (size_t)(slash - output) + 1 : 0;
  const size_t name_len = strlen(output + dir_len);
  const size_t size = dir_len + name_len + sizeof suffix + 32;
  char *path = malloc(size);
  if (!path) return NULL;
  if (name_len + sizeof suffix - 1 <= NAME_MAX) {
    snprintf(path, size, "%s%s", output, suffix);
    return path;
  }
  /* The hash keeps apart outputs whose names share the cut part. */
  const uint64_t h = jg__fnv1a(JG__FNV_OFFSET, output, strlen(output));
  const size_t cut = NAME_MAX - (sizeof suffix - 1) - 17;
  snprintf(path, size, "%.*s~%016" PRIx64 "%s", (int)(dir_len + cut), output, h, suffix);
  return path;
}

jg_status jg_scan_checkpoint_add(jg_scan_checkpoint *c, long long index, jg_status status,
                                 const double *values, const char *message, jg_error *err) {
  const jg_scan *s = c->s;
  if (index < s->first || index >= s->first + s->count)
    return JG_FAIL(err, JG_EINVAL, "scan point %lld is not in this slice", index);
  pthread_mutex_lock(&c->lock);
  jg_status st = JG_OK;
  long long k = index - s->first;
  if (c->offset[k] > 0) {
    st = JG_FAIL(err, JG_EINVAL, "scan point %lld is recorded twice", index);
  } else if (status == JG_OK) {
    size_t used = (size_t)snprintf(c->buf, c->buf_size, "P %lld", index);
    for (int i = 0; i < s->n_values && used < c->buf_size; i++)
      used += (size_t)snprintf(c->buf + used, c->buf_size - used, " %a", values[i]);
  } else {
    int w = snprintf(c->buf, c->buf_size, "F %lld %d ", index, (int)status);
    /* One line per record: control characters in a message become blanks. */
    const char *m = message && message[0] ? message : jg_strerror(status);
    size_t used = w > 0 ? (size_t)w : 0;
    for (; *m && used + 1 < c->buf_size && used < (size_t)w + JG_ERROR_MESSAGE_SIZE; m++)
      c->buf[used++] = (unsigned char)*m < 0x20 ? ' ' : *m;
    c->buf[used] = '\0';
  }
  long long where = -1;
  if (st == JG_OK) st = append_line(c, c->buf, &where, err);
  if (st == JG_OK) {
    c->offset[k] = where + 1;
    c->done++;
    c->failed += status != JG_OK;
    double now = jg__monotonic_seconds();
    if (now - c->last_sync >= CHECKPOINT_SYNC_INTERVAL) {
      if (fdatasync(fileno(c->f)) != 0)
        st = JG_FAIL(err, JG_EIO, "%s: cannot sync the scan checkpoint (%s)",
                     c->path ? c->path : "(temporary file)", strerror(errno));
      c->last_sync = now;
    }
  }
  pthread_mutex_unlock(&c->lock);
  return st;
}

int jg_scan_checkpoint_has(const jg_scan_checkpoint *c, long long index) {
  long long k = index - c->s->first;
  return k >= 0 && k < c->s->count && c->offset[k] > 0;
}
long long jg_scan_checkpoint_done(const jg_scan_checkpoint *c) { return c->done; }
long long jg_scan_checkpoint_failed(const jg_scan_checkpoint *c) { return c->failed; }
long long jg_scan_checkpoint_resumed(const jg_scan_checkpoint *c) { return c->resumed; }
const char *jg_scan_checkpoint_path(const jg_scan_checkpoint *c) { return c->path; }

void jg_scan_checkpoint_close(jg_scan_checkpoint *c, int remove_file) {
  if (!c) return;
  /* Removed while still locked: a run that waits for the lock must not
   * find the finished checkpoint still there the moment it is released. */
  if (remove_file && c->path) unlink(c->path);
  if (c->f) {
    fflush(c->f);
    if (!remove_file) fsync(fileno(c->f));
    fclose(c->f);
  }
  pthread_mutex_destroy(&c->lock);
  free(c->path);
  if (c->offset) munmap(c->offset, c->offset_bytes);
  free(c->buf);
  free(c);
}

/* Read back the record of point `index` (which must be recorded). */
jg_status jg__scan_fetch_record(jg_scan_checkpoint *c, long long index, jg__scan_record *r, double *values,
                              jg_error *err) {
  ssize_t n = read_line_at(c, c->offset[index - c->s->first] - 1);
  if (n <= 0 || !line_intact(c->buf, (size_t)n) || !parse_record(c, c->buf, r, values) ||
      r->index != index)
    return JG_FAIL(err, JG_EIO, "%s: the record of scan point %lld no longer reads back; the "
                   "file was changed during the run", c->path ? c->path : "scan checkpoint",
                   index + 1);
  return JG_OK;
}
