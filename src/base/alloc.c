/* The fault counter behind src/base/alloc.h. Built into the test copy of the
 * library only (JG_ALLOC_FAULTS): the release library has no allocation hook
 * and no mutable global state. */
#ifdef JG_ALLOC_FAULTS
#define JG__ALLOC_WRAPPERS
#include "alloc.h"

#include <pthread.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static atomic_long allocations;
static long refuse_at; /* 0: refuse none */
static pthread_once_t configured = PTHREAD_ONCE_INIT;

/* JG_ALLOC_TALLY names a file that receives, at exit, the number of
 * allocations made: the walk's first run learns from it how far to go. */
static void write_tally(void) {
  const char *path = getenv("JG_ALLOC_TALLY");
  FILE *f = path ? fopen(path, "w") : NULL;
  if (!f) return;
  fprintf(f, "%ld\n", atomic_load(&allocations));
  fclose(f);
}

static void configure(void) {
  const char *at = getenv("JG_ALLOC_FAIL_AT");
  refuse_at = at ? strtol(at, NULL, 10) : 0;
  atexit(write_tally);
}

int jg__alloc_refused(void) {
  pthread_once(&configured, configure);
  return atomic_fetch_add(&allocations, 1) + 1 == refuse_at;
}

void *jg__malloc(size_t size) { return jg__alloc_refused() ? NULL : malloc(size); }
void *jg__calloc(size_t count, size_t size) {
  return jg__alloc_refused() ? NULL : calloc(count, size);
}
void *jg__realloc(void *old, size_t size) {
  return jg__alloc_refused() ? NULL : realloc(old, size);
}
char *jg__strdup(const char *text) { return jg__alloc_refused() ? NULL : strdup(text); }
gsl_spline *jg__gsl_spline_alloc(const gsl_interp_type *type, size_t n) {
  return jg__alloc_refused() ? NULL : gsl_spline_alloc(type, n);
}
gsl_interp *jg__gsl_interp_alloc(const gsl_interp_type *type, size_t n) {
  return jg__alloc_refused() ? NULL : gsl_interp_alloc(type, n);
}
gsl_root_fsolver *jg__gsl_root_fsolver_alloc(const gsl_root_fsolver_type *type) {
  return jg__alloc_refused() ? NULL : gsl_root_fsolver_alloc(type);
}
gsl_min_fminimizer *jg__gsl_min_fminimizer_alloc(const gsl_min_fminimizer_type *type) {
  return jg__alloc_refused() ? NULL : gsl_min_fminimizer_alloc(type);
}
gsl_integration_workspace *jg__gsl_integration_workspace_alloc(size_t n) {
  return jg__alloc_refused() ? NULL : gsl_integration_workspace_alloc(n);
}
gsl_odeiv2_driver *jg__gsl_odeiv2_driver_alloc_y_new(const gsl_odeiv2_system *sys,
                                                      const gsl_odeiv2_step_type *type,
                                                      double hstart, double epsabs,
                                                      double epsrel) {
  return jg__alloc_refused() ? NULL
                             : gsl_odeiv2_driver_alloc_y_new(sys, type, hstart, epsabs, epsrel);
}
#else
/* ISO C wants at least one declaration in a translation unit. */
typedef int jg__alloc_faults_not_built;
#endif
