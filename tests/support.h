/* Shared by the Criterion tests (tests/support.c, linked into every test
 * program): GSL's error handler off (each test runs in its own process, so it
 * is set in every suite's .init), the one relative float assertion, which
 * Criterion does not have, and the one way to run a program as a child. */
#ifndef JEANSGROW_TESTS_SUPPORT_H
#define JEANSGROW_TESTS_SUPPORT_H

#include <criterion/criterion.h>
#include <gsl/gsl_errno.h>
#include <math.h>
#include <sys/types.h>

static inline void quiet_gsl(void) { gsl_set_error_handler_off(); }

/* |actual - expected| <= rtol |expected|, NaN failing; fmt and its arguments
 * describe the case. A macro, so that a failure names the caller's line. */
#define ASSERT_REL(actual, expected, rtol, fmt, ...)                                       \
  do {                                                                                     \
    double a_ = (actual), e_ = (expected);                                                 \
    cr_assert(isfinite(a_) && fabs(a_ - e_) <= (rtol)*fabs(e_),                            \
              "%s = %.12g, expected %.12g (rel. diff %.3g > %.3g): " fmt, #actual, a_, e_, \
              fabs(a_ - e_) / fabs(e_), (double)(rtol), ##__VA_ARGS__);                    \
  } while (0)

/* The same check described by a plain string. */
#define assert_rel(actual, expected, rtol, what) ASSERT_REL(actual, expected, rtol, "%s", what)

/* Exit status of a child that could not start the program at all. */
#define CHILD_EXEC_FAILED 127

/* Start `program` with the arguments `args` (NULL-terminated, argv[0] left
 * out: it is `program`), standard input from /dev/null, standard output to
 * out_path (NULL: /dev/null) and standard error to err_path, in files rather
 * than pipes so that a chatty child cannot block. The child starts with the
 * signal state of a shell prompt (nothing blocked, SIGINT and SIGTERM at
 * their defaults); with as_nobody it first gives up root for user nobody.
 * Does not wait. */
pid_t child_start(const char *program, const char *const *args, const char *out_path,
                  const char *err_path, int as_nobody);

/* Waits for the child (through EINTR) and returns its waitpid status. */
int child_wait(pid_t pid);

/* The whole file as a NUL-terminated string (malloc'd), NULL if unreadable. */
char *read_text(const char *path);

#endif
