/* Growth by wavenumber on a grid (see include/jeansgrow/growth.h). */
#include "jeansgrow/growth.h"

#include <pthread.h>
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

/* ---- the modes on several threads ---------------------------------------- */

/* The batches of the k list (JG_PERTURB_BATCH consecutive entries from the
 * first, as jg_perturb_solve_many forms them) handed out in order to the
 * threads, each solving with a workspace of its own into the shared points
 * (each batch its own rows). A failed batch stops the handing out of later
 * ones; every earlier one was handed out before it and is finished, so the
 * lowest failed batch, the one told, is the one a single thread would have
 * stopped at. */
typedef struct batch_share {
  const jg_perturb_model *m;
  const double *k, *z;
  int n_k, n_z, n_batches;
  jg_perturb_point *points;
  pthread_mutex_t lock;
  int next;         /* the lowest batch not yet handed out */
  int first_failed; /* the lowest failed batch (n_batches: none) */
  jg_status status; /* its failure */
  jg_error err;
} batch_share;

static void solve_shared_batches(batch_share *s, jg_perturb_workspace *w) {
  for (;;) {
    pthread_mutex_lock(&s->lock);
    const int b = s->next < s->first_failed ? s->next++ : -1;
    pthread_mutex_unlock(&s->lock);
    if (b < 0) return;
    const int first = b * JG_PERTURB_BATCH;
    const int n = s->n_k - first < JG_PERTURB_BATCH ? s->n_k - first : JG_PERTURB_BATCH;
    jg_error e;
    jg_error_clear(&e);
    const jg_status st = jg_perturb_solve_many(s->m, w, s->k + first, n, s->z, s->n_z,
                                               s->points + (size_t)first * s->n_z, &e);
    if (st == JG_OK) continue;
    pthread_mutex_lock(&s->lock);
    if (b < s->first_failed) s->first_failed = b, s->status = st, s->err = e;
    pthread_mutex_unlock(&s->lock);
  }
}

/* A helper thread: a workspace of its own (without one it leaves the
 * batches to the others, which do them all). */
static void *batch_thread(void *arg) {
  batch_share *s = arg;
  jg_error e;
  jg_error_clear(&e);
  jg_perturb_workspace *w = jg_perturb_workspace_new(s->m, &e);
  if (w) solve_shared_batches(s, w);
  jg_perturb_workspace_free(w);
  return NULL;
}

static jg_status solve_on_threads(const jg_perturb_model *m, jg_perturb_workspace *w,
                                  const double *k, int n_k, const double *z, int n_z,
                                  int threads, jg_perturb_point *points, jg_error *err) {
  const int n_batches = (n_k + JG_PERTURB_BATCH - 1) / JG_PERTURB_BATCH;
  if (threads > n_batches) threads = n_batches;
  if (threads <= 1) return jg_perturb_solve_many(m, w, k, n_k, z, n_z, points, err);
  batch_share s = {.m = m, .k = k, .z = z, .n_k = n_k, .n_z = n_z, .n_batches = n_batches,
                   .points = points, .next = 0, .first_failed = n_batches, .status = JG_OK};
  jg_error_clear(&s.err);
  if (pthread_mutex_init(&s.lock, NULL) != 0)
    return jg_perturb_solve_many(m, w, k, n_k, z, n_z, points, err);
  pthread_t helper[JG_GROWTH_MAX_THREADS];
  int started = 0;
  while (started < threads - 1 && started < JG_GROWTH_MAX_THREADS &&
         pthread_create(&helper[started], NULL, batch_thread, &s) == 0)
    started++;
  solve_shared_batches(&s, w); /* the caller's thread takes its share */
  for (int i = 0; i < started; i++) pthread_join(helper[i], NULL);
  pthread_mutex_destroy(&s.lock);
  if (s.status != JG_OK && err) *err = s.err;
  return s.status;
}

jg_status jg_growth_grid_compute(const jg_perturb_model *m, jg_perturb_workspace *w,
                                 const double *k, int n_k, const double *z, int n_z,
                                 jg_growth_grid **out, jg_error *err) {
  return jg_growth_grid_compute_threads(m, w, k, n_k, z, n_z, 1, out, err);
}

jg_status jg_growth_grid_compute_threads(const jg_perturb_model *m, jg_perturb_workspace *w,
                                         const double *k, int n_k, const double *z, int n_z,
                                         int threads, jg_growth_grid **out, jg_error *err) {
  *out = NULL;
  if (threads < 1 || threads > JG_GROWTH_MAX_THREADS)
    return JG_FAIL(err, JG_EINVAL, "growth grid: threads must be 1 to %d (got %d)",
                   JG_GROWTH_MAX_THREADS, threads);
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
  if (st == JG_OK) st = solve_on_threads(m, w, k, n_k, z, n_z, threads, g->points, err);
  if (st != JG_OK) {
    jg_growth_grid_free(g);
    return st;
  }
  *out = g;
  return JG_OK;
}
