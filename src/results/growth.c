/* Growth by wavenumber on a grid (see include/jeansgrow/growth.h). */
#include "jeansgrow/growth.h"

#include <stdlib.h>
#include <string.h>

#include "jeansgrow/background.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

void jg_growth_grid_free(jg_growth_grid *g) {
  if (!g) return;
  free(g->k);
  free(g->z);
  free(g->points);
  free(g->limit);
  free(g->D_ref);
  free(g->f_ref);
  free(g->stream);
  free(g);
}

const jg_perturb_point *jg_growth_grid_at(const jg_growth_grid *g, int ik, int iz) {
  return &g->points[(size_t)ik * (size_t)g->n_z + (size_t)iz];
}

jg_status jg_growth_grid_compute(const jg_perturb_model *m, jg_perturb_workspace *w,
                                 const double *k, int n_k, const double *z, int n_z,
                                 jg_growth_grid **out, jg_error *err) {
  *out = NULL;
  if (n_k < 1 || n_z < 1)
    return JG_FAIL(err, JG_EINVAL, "growth grid: need at least one wavenumber and one redshift");
  jg_growth_grid *g = calloc(1, sizeof *g);
  if (!g) return JG_FAIL(err, JG_ENOMEM, "out of memory for the growth grid");
  g->n_k = n_k;
  g->n_z = n_z;
  g->k = malloc(sizeof(double) * (size_t)n_k);
  g->z = malloc(sizeof(double) * (size_t)n_z);
  g->points = malloc(sizeof(jg_perturb_point) * (size_t)n_k * (size_t)n_z);
  g->limit = malloc(sizeof(jg_perturb_limit) * (size_t)n_z);
  g->D_ref = malloc(sizeof(double) * (size_t)n_z);
  g->f_ref = malloc(sizeof(double) * (size_t)n_z);
  if (!g->k || !g->z || !g->points || !g->limit || !g->D_ref || !g->f_ref) {
    jg_growth_grid_free(g);
    return JG_FAIL(err, JG_ENOMEM, "out of memory for the growth grid");
  }
  memcpy(g->k, k, sizeof(double) * (size_t)n_k);
  memcpy(g->z, z, sizeof(double) * (size_t)n_z);
  jg_perturb_model_describe_start(m, g->start, sizeof g->start);
  jg_status st = jg_perturb_solve_limit(m, w, z, n_z, g->limit, err);
  const jg_thermal *th = jg_perturb_model_thermal(m);
  /* The reference growth exists only while matter and dark energy alone
   * keep H^2 > 0 (not in a universe that radiation dominates today): left
   * out of the whole table otherwise. */
  g->has_reference = th != NULL;
  for (int iz = 0; g->has_reference && iz < n_z; iz++)
    g->has_reference =
        jg_background_reference_growth_defined(jg_thermal_background(th), 1.0 / (1.0 + z[iz]));
  for (int iz = 0; st == JG_OK && g->has_reference && iz < n_z; iz++)
    st = jg_background_growth_factor(jg_thermal_background(th), 1.0 / (1.0 + z[iz]),
                                     &g->D_ref[iz], &g->f_ref[iz], err);
  if (st == JG_OK) st = jg_perturb_solve_many(m, w, k, n_k, z, n_z, g->points, err);
  if (st != JG_OK) {
    jg_growth_grid_free(g);
    return st;
  }
  *out = g;
  return JG_OK;
}
