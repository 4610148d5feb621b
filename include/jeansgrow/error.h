/*
 * Status codes and the error record.
 *
 * The library never prints and never exits. Every function that can fail
 * returns a jg_status and, when it fails, fills a jg_error with one line
 * that a user can act on: what was wrong, where (file:line or stage, k, z),
 * which value it got and what is allowed. The program decides what to print
 * and which exit status to use (2 for bad input, 1 for a failed run).
 */
#ifndef JEANSGROW_ERROR_H
#define JEANSGROW_ERROR_H

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

/* X-macro table: one place defines the enum, the names and the texts. */
#define JG_STATUS_TABLE(X)                                                       \
  X(JG_OK, 0, "success")                                                         \
  X(JG_EINVAL, 1, "invalid input")                                               \
  X(JG_ECONFIG, 2, "invalid parameter file")                                     \
  X(JG_EIO, 3, "input/output error")                                             \
  X(JG_ENOMEM, 4, "out of memory")                                               \
  X(JG_ENUMERIC, 5, "numerical failure")                                         \
  X(JG_EINTERRUPT, 6, "interrupted")

typedef enum {
#define JG_STATUS_ENUM(name, value, text) name = value,
  JG_STATUS_TABLE(JG_STATUS_ENUM)
#undef JG_STATUS_ENUM
} jg_status;

#define JG_ERROR_MESSAGE_SIZE 1024

typedef struct jg_error {
  jg_status status;                      /* JG_OK until something fails */
  char message[JG_ERROR_MESSAGE_SIZE];   /* one line, no trailing newline */
  const char *source_file;               /* where in the library it was raised */
  int source_line;
} jg_error;

/* Short description of a status code ("invalid input"). */
const char *jg_strerror(jg_status status);
/* The enum name of a status code ("JG_EINVAL"). */
const char *jg_status_name(jg_status status);

/* Reset a record to JG_OK with an empty message. Accepts NULL. */
void jg_error_clear(jg_error *err);

/* Record a failure (printf-style message) and return the status, so that
 * library code can write `return JG_FAIL(err, JG_EINVAL, "...", ...);`.
 * A NULL record is allowed: the status is still returned. */
jg_status jg_error_set(jg_error *err, jg_status status, const char *file, int line,
                       const char *fmt, ...) __attribute__((format(printf, 5, 6)));

#define JG_FAIL(err, status, ...) jg_error_set((err), (status), __FILE__, __LINE__, __VA_ARGS__)

/*
 * Error records: every `jg_error *err` argument of the library may be NULL.
 * The function then fails exactly as it would with a record (same status,
 * same NULL result, nothing leaked); only the message is not kept.
 *
 * GSL's error handler. GSL reports a failure by calling one process-wide
 * handler, whose default prints a line and calls abort(). The handler
 * belongs to the host, so the library never sets it; it does not rely on
 * it either: every input that could make a GSL routine raise an error is
 * checked first and refused with a jg_error, and the statuses GSL returns
 * become jg_status values. A host that keeps GSL's default handler is
 * therefore not aborted by bad input; only a failure inside GSL that no
 * check foresaw could still abort it. A host that wants GSL never to abort
 * calls jg_gsl_handler_off() once at start-up, before threads use GSL: it
 * turns GSL's handler off for the whole process (gsl_set_error_handler_off),
 * so every GSL failure comes back as a status and then as a jg_error. The
 * jeansgrow program, its tests and the Python package do so.
 */
void jg_gsl_handler_off(void);

#ifdef __cplusplus
}
#endif
#endif
