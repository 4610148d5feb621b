/* Shared by the perturbation and scales tests: the whole chain on a real
 * history (background, thermal history, perturbation model, workspace) for
 * one parameter set, built with every step asserted. */
#ifndef JEANSGROW_TESTS_REAL_CASE_H
#define JEANSGROW_TESTS_REAL_CASE_H

#include <criterion/criterion.h>

#include "jeansgrow/jeansgrow.h"
#include "jeansgrow/perturb.h"

typedef struct real_case {
  jg_params p;
  jg_background *bg;
  jg_thermal *th;
  jg_perturb_model *m;
  jg_perturb_workspace *w;
} real_case;

/* p: the parameters (NULL: the defaults, i.e. the reference cosmology). */
static inline void real_case_open(real_case *r, const jg_params *p) {
  jg_error err;
  jg_error_clear(&err);
  if (p)
    r->p = *p;
  else
    jg_params_set_defaults(&r->p);
  r->bg = jg_background_new(&r->p.cosmology, &err);
  cr_assert_not_null(r->bg, "%s", err.message);
  r->th = jg_thermal_new(r->bg, &r->p.thermal, &err);
  cr_assert_not_null(r->th, "%s", err.message);
  r->m = jg_perturb_model_new(r->th, &r->p.perturbations, NULL, &err);
  cr_assert_not_null(r->m, "%s", err.message);
  r->w = jg_perturb_workspace_new(r->m, &err);
  cr_assert_not_null(r->w, "%s", err.message);
}

/* Another model and its workspace on r's history: settings s, uniform
 * start `start` (NULL: baryons empty and at rest). Free both yourself. */
static inline void real_case_model(const real_case *r, const jg_perturb_settings *s,
                                   const jg_perturb_start *start, jg_perturb_model **m,
                                   jg_perturb_workspace **w) {
  jg_error err;
  jg_error_clear(&err);
  *m = jg_perturb_model_new(r->th, s, start, &err);
  cr_assert_not_null(*m, "%s", err.message);
  *w = jg_perturb_workspace_new(*m, &err);
  cr_assert_not_null(*w, "%s", err.message);
}

static inline void real_case_close(real_case *r) {
  jg_perturb_workspace_free(r->w);
  jg_perturb_model_free(r->m);
  jg_thermal_free(r->th);
  jg_background_free(r->bg);
}

#endif
