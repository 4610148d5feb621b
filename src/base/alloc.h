/* Allocation-failure injection (DEVELOPERS.md, Tests): every library source
 * that allocates includes this header after its other headers. Only in the
 * test copy of the library, built with JG_ALLOC_FAULTS, does it send malloc,
 * calloc, realloc, strdup and the GSL constructors the library calls through
 * jg__alloc_refused(), which refuses the N-th allocation of the process
 * (N from the environment variable JG_ALLOC_FAIL_AT): that is how the tests
 * reach every out-of-memory path. In every other build it defines nothing. */
#ifndef JEANSGROW_BASE_ALLOC_H
#define JEANSGROW_BASE_ALLOC_H

#ifdef JG_ALLOC_FAULTS
#include <gsl/gsl_integration.h>
#include <gsl/gsl_interp.h>
#include <gsl/gsl_min.h>
#include <gsl/gsl_odeiv2.h>
#include <gsl/gsl_roots.h>
#include <gsl/gsl_spline.h>
#include <stddef.h>

/* Counts one allocation; 1 when it is the one to refuse. */
int jg__alloc_refused(void);

void *jg__malloc(size_t size);
void *jg__calloc(size_t count, size_t size);
void *jg__realloc(void *old, size_t size);
char *jg__strdup(const char *text);
gsl_spline *jg__gsl_spline_alloc(const gsl_interp_type *type, size_t n);
gsl_interp *jg__gsl_interp_alloc(const gsl_interp_type *type, size_t n);
gsl_root_fsolver *jg__gsl_root_fsolver_alloc(const gsl_root_fsolver_type *type);
gsl_min_fminimizer *jg__gsl_min_fminimizer_alloc(const gsl_min_fminimizer_type *type);
gsl_integration_workspace *jg__gsl_integration_workspace_alloc(size_t n);
gsl_odeiv2_driver *jg__gsl_odeiv2_driver_alloc_y_new(const gsl_odeiv2_system *sys,
                                                      const gsl_odeiv2_step_type *type,
                                                      double hstart, double epsabs,
                                                      double epsrel);

/* Object-like, so that a system header read after this one only redeclares
 * the wrapper. */
#ifndef JG__ALLOC_WRAPPERS
#define malloc jg__malloc
#define calloc jg__calloc
#define realloc jg__realloc
#define strdup jg__strdup
#define gsl_spline_alloc jg__gsl_spline_alloc
#define gsl_interp_alloc jg__gsl_interp_alloc
#define gsl_root_fsolver_alloc jg__gsl_root_fsolver_alloc
#define gsl_min_fminimizer_alloc jg__gsl_min_fminimizer_alloc
#define gsl_integration_workspace_alloc jg__gsl_integration_workspace_alloc
#define gsl_odeiv2_driver_alloc_y_new jg__gsl_odeiv2_driver_alloc_y_new
#endif
#endif

#endif
