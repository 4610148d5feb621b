/* Shared by the Criterion tests: GSL's error handler off (each test runs in
 * its own process, so it is set in every suite's .init) and a relative
 * float comparison, which Criterion does not have. */
#ifndef JEANSGROW_TESTS_SUPPORT_H
#define JEANSGROW_TESTS_SUPPORT_H

#include <criterion/criterion.h>
#include <gsl/gsl_errno.h>
#include <math.h>

static inline void quiet_gsl(void) { gsl_set_error_handler_off(); }

/* |actual - expected| <= rtol |expected|, NaN failing; fmt and its arguments
 * describe the case. */
#define ASSERT_REL(actual, expected, rtol, fmt, ...)                                       \
  do {                                                                                     \
    double a_ = (actual), e_ = (expected);                                                 \
    cr_assert(isfinite(a_) && fabs(a_ - e_) <= (rtol)*fabs(e_),                            \
              "%s = %.12g, expected %.12g (rel. diff %.3g > %.3g): " fmt, #actual, a_, e_, \
              fabs(a_ - e_) / fabs(e_), (double)(rtol), ##__VA_ARGS__);                    \
  } while (0)

#endif
