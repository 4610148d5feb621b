/* A monotonic clock in seconds, for sync intervals, progress and the MPI
 * naps and timeouts: never for results. Private to the project (jg__). */
#ifndef JEANSGROW_BASE_CLOCK_H
#define JEANSGROW_BASE_CLOCK_H

#include <time.h>

static inline double jg__monotonic_seconds(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

#endif
