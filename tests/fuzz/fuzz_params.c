/*
 * Fuzz target: the parameter-file loader with --set overrides.
 *
 * Input layout (so that seeds stay readable text files):
 *
 *     <parameter file, any bytes>
 *     --set
 *     key=value
 *     key=value
 *
 * Everything before the first line that is exactly "--set" is written to an
 * in-memory file (memfd; a temporary file where memfd is missing), because
 * jg_params_load() takes a path. Each later line is one override, as one
 * command-line argument would be. Without a "--set" line the whole input is
 * the file.
 *
 * Besides "no crash, no leak, no undefined behaviour" (the sanitizers) the
 * target checks the loader's promises, and aborts with a message if one is
 * broken:
 *   - a failure returns a known status with a one-line, non-empty message
 *     and leaves the output struct untouched;
 *   - a success gives a struct that jg_params_validate() accepts;
 *   - the effective-parameter header of a loaded set, fed back as --set
 *     overrides, loads to the very same header (what an output table records
 *     is enough to reproduce the run);
 *   - the background built from accepted parameters either fails with a
 *     message or has a finite, positive expansion rate.
 *
 * Built as a libFuzzer target with -DJG_FUZZ=ON (clang), and linked into
 * tests/fuzz/test_fuzz_replay.c, which replays the seed corpus and every
 * saved crash in all builds.
 */
#define _GNU_SOURCE
#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <unistd.h>

#include <gsl/gsl_errno.h>

#include "jeansgrow/jeansgrow.h"

/* Above the loader's own limit (256), so that its refusal is reachable. */
#define FUZZ_MAX_OVERRIDES 300

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static void broken_promise(const char *fmt, ...) __attribute__((format(printf, 1, 2), noreturn));
static void broken_promise(const char *fmt, ...) {
  va_list ap;
  va_start(ap, fmt);
  fputs("fuzz_params: broken promise: ", stderr);
  vfprintf(stderr, fmt, ap);
  fputc('\n', stderr);
  va_end(ap);
  abort();
}
#define PROMISE(cond, ...)                                                                     \
  do {                                                                                         \
    if (!(cond)) broken_promise(__VA_ARGS__);                                                  \
  } while (0)

/* One scratch file for the whole process, rewritten for every input. */
static int scratch_fd = -1;
static char scratch_path[64];

static void open_scratch(void) {
  if (scratch_fd >= 0) return;
#ifdef MFD_CLOEXEC
  scratch_fd = memfd_create("jg_fuzz_params", MFD_CLOEXEC);
#endif
  if (scratch_fd >= 0) {
    snprintf(scratch_path, sizeof scratch_path, "/proc/self/fd/%d", scratch_fd);
    return;
  }
  const char *dir = getenv("TMPDIR");
  snprintf(scratch_path, sizeof scratch_path, "%.40s/jg_fuzz_XXXXXX", dir ? dir : "/tmp");
  scratch_fd = mkstemp(scratch_path);
  PROMISE(scratch_fd >= 0, "cannot create a scratch file in %s", scratch_path);
}

static void write_scratch(const void *bytes, size_t n) {
  open_scratch();
  PROMISE(ftruncate(scratch_fd, 0) == 0, "cannot truncate the scratch file");
  const char *p = bytes;
  off_t at = 0;
  while (n > 0) {
    ssize_t w = pwrite(scratch_fd, p, n, at);
    PROMISE(w > 0, "cannot write the scratch file");
    p += w, at += w, n -= (size_t)w;
  }
}

/* The message is what the program prints: one line, never empty. */
static void check_message(const jg_error *err) {
  size_t n = strnlen(err->message, sizeof err->message);
  PROMISE(n > 0, "failure (%s) with an empty message", jg_status_name(err->status));
  PROMISE(n < sizeof err->message, "message not terminated");
  for (size_t i = 0; i < n; i++) {
    unsigned char c = (unsigned char)err->message[i];
    PROMISE(c >= 0x20 && c != 0x7f, "message holds control character 0x%02x: %s", c,
            err->message);
  }
}

static char *header_text(const jg_params *p, size_t *len) {
  char *text = NULL;
  FILE *f = open_memstream(&text, len);
  PROMISE(f != NULL, "open_memstream failed");
  jg_params_write_header(f, p);
  PROMISE(fclose(f) == 0, "writing the header failed");
  return text;
}

/* "# key = value;" lines become "key = value" overrides on an empty file. */
static void check_header_round_trip(const jg_params *p) {
  size_t len = 0;
  char *header = header_text(p, &len);
  char *copy = strdup(header);
  PROMISE(copy != NULL, "out of memory");
  const char *overrides[FUZZ_MAX_OVERRIDES];
  int n = 0;
  for (char *save = NULL, *line = strtok_r(copy, "\n", &save); line;
       line = strtok_r(NULL, "\n", &save)) {
    PROMISE(strncmp(line, "# ", 2) == 0, "header line without '# ': %s", line);
    size_t l = strlen(line);
    PROMISE(l > 2 && line[l - 1] == ';', "header line without ';': %s", line);
    line[l - 1] = '\0';
    PROMISE(n < FUZZ_MAX_OVERRIDES, "header longer than %d lines", FUZZ_MAX_OVERRIDES);
    overrides[n++] = line + 2;
  }
  write_scratch("", 0);
  jg_params back;
  jg_error err;
  jg_error_clear(&err);
  jg_status st = jg_params_load(scratch_path, overrides, n, &back, &err);
  PROMISE(st == JG_OK, "the header of accepted parameters does not load back: %s\n%s",
          err.message, header);
  size_t len_back = 0;
  char *header_back = header_text(&back, &len_back);
  PROMISE(len == len_back && memcmp(header, header_back, len) == 0,
          "the header does not survive a round trip:\n%s---\n%s", header, header_back);
  free(header_back);
  free(copy);
  free(header);
}

static void check_background(const jg_params *p) {
  jg_error err;
  jg_error_clear(&err);
  jg_background *bg = jg_background_new(&p->cosmology, &err);
  if (!bg) {
    PROMISE(err.status == JG_EINVAL, "background refused accepted parameters with %s: %s",
            jg_status_name(err.status), err.message);
    check_message(&err);
    return;
  }
  static const double scale_factors[] = {1e-10, 1e-6, 1e-3, 0.1, 0.5, 1.0};
  for (size_t i = 0; i < sizeof scale_factors / sizeof scale_factors[0]; i++) {
    double E = jg_background_E(bg, scale_factors[i]);
    PROMISE(E > 0 && E < HUGE_VAL, "E(a = %g) = %g for an accepted background",
            scale_factors[i], E);
  }
  jg_background_free(bg);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
  gsl_set_error_handler_off();
  /* libconfig follows @include to any path: keep the run hermetic (a
   * device such as /dev/stdin would block). */
  if (memmem(data, size, "@include", 8)) return 0;

  /* Split at the first line that is exactly "--set". */
  size_t file_len = size, rest = size;
  static const char marker[] = "--set\n";
  for (size_t at = 0; at < size;) {
    const uint8_t *nl = memchr(data + at, '\n', size - at);
    size_t end = nl ? (size_t)(nl - data) : size;
    if (end - at == 5 && memcmp(data + at, marker, 5) == 0) {
      file_len = at;
      rest = nl ? end + 1 : size;
      break;
    }
    at = end + 1;
  }

  /* The overrides as NUL-terminated strings (an argument cannot hold NUL,
   * so an embedded one ends that override, as the shell would). */
  char *lines = malloc(size - rest + 1);
  if (!lines) return 0;
  memcpy(lines, data + rest, size - rest);
  lines[size - rest] = '\0';
  const char *overrides[FUZZ_MAX_OVERRIDES];
  int n_overrides = 0;
  if (rest < size) {
    for (char *p = lines; n_overrides < FUZZ_MAX_OVERRIDES;) {
      overrides[n_overrides++] = p;
      char *nl = strchr(p, '\n');
      if (!nl) break;
      *nl = '\0';
      p = nl + 1;
      if (*p == '\0') break; /* a final newline ends the list */
    }
  }

  write_scratch(data, file_len);

  jg_params p, before;
  memset(&p, 0xA5, sizeof p);
  memcpy(&before, &p, sizeof p);
  jg_error err;
  jg_error_clear(&err);
  jg_status st = jg_params_load(scratch_path, overrides, n_overrides, &p, &err);
  if (st != JG_OK) {
    PROMISE(st == JG_ECONFIG || st == JG_EINVAL || st == JG_EIO || st == JG_ENOMEM,
            "loader failed with an unexpected status %s: %s", jg_status_name(st), err.message);
    PROMISE(err.status == st, "status %s returned but %s recorded", jg_status_name(st),
            jg_status_name(err.status));
    check_message(&err);
    PROMISE(memcmp(&p, &before, sizeof p) == 0, "a failed load changed its output (%s)",
            err.message);
  } else {
    PROMISE(err.status == JG_OK, "success with an error recorded: %s", err.message);
    jg_error verr;
    jg_error_clear(&verr);
    PROMISE(jg_params_validate(&p, &verr) == JG_OK,
            "loaded parameters fail jg_params_validate: %s", verr.message);
    check_header_round_trip(&p);
    check_background(&p);
  }
  free(lines);
  return 0;
}
