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

/* ---- the grid's jobs, on one thread or several ----------------------------- */

/* The large-scale (k -> 0) reference at every redshift (unless the caller
 * gave it: `limit_given`) and, on a real history, the scale-independent
 * growth D(z). */
static jg_status grid_reference(const jg_perturb_model *m, jg_perturb_workspace *w,
                                jg_growth_grid *g, int limit_given, jg_error *err) {
  jg_status st = limit_given ? JG_OK : jg_perturb_solve_limit(m, w, g->z, g->n_z, g->limit, err);
  const jg_thermal *th = jg_perturb_model_thermal(m);
  /* The reference growth exists only while matter and dark energy alone
   * keep H^2 > 0 (not in a universe that radiation dominates today): left
   * out of the whole table otherwise. */
  g->has_reference = th != NULL;
  for (int iz = 0; g->has_reference && iz < g->n_z; iz++)
    g->has_reference = jg_background_reference_growth_defined(jg_thermal_background(th),
                                                               1.0 / (1.0 + g->z[iz]));
  for (int iz = 0; st == JG_OK && g->has_reference && iz < g->n_z; iz++)
    st = jg_background_growth_factor(jg_thermal_background(th), 1.0 / (1.0 + g->z[iz]),
                                     &g->D_ref[iz], &g->f_ref[iz], err);
  return st;
}

/* The grid's jobs in order: the reference (job 0), then the batches of the
 * k list (JG_PERTURB_BATCH consecutive entries from the first, as
 * jg_perturb_solve_many forms them), each writing its own part of the grid. */
static int grid_jobs(const jg_growth_grid *g) {
  return 1 + (g->n_k + JG_PERTURB_BATCH - 1) / JG_PERTURB_BATCH;
}
static jg_status grid_job(const jg_perturb_model *m, jg_perturb_workspace *w, jg_growth_grid *g,
                          int job, int limit_given, jg_error *err) {
  if (job == 0) return grid_reference(m, w, g, limit_given, err);
  const int first = (job - 1) * JG_PERTURB_BATCH;
  const int n = g->n_k - first < JG_PERTURB_BATCH ? g->n_k - first : JG_PERTURB_BATCH;
  return jg_perturb_solve_many(m, w, g->k + first, n, g->z, g->n_z,
                               g->points + (size_t)first * g->n_z, err);
}

/* On several threads the jobs are handed out in order, each thread solving
 * with a workspace of its own. A failed job stops the handing out of later
 * ones; every earlier one was handed out before it and is finished, so the
 * lowest failed job, the one told, is the one a single thread would have
 * stopped at. Threads may join at any time (jg_growth_grid_job_work); the
 * result waits for the jobs handed out to be finished (`active`). */
struct jg_growth_grid_job {
  const jg_perturb_model *m;
  jg_growth_grid *g;
  pthread_mutex_t lock;
  pthread_cond_t idle; /* signalled when `active` falls to 0 */
  int n_jobs;
  int next;         /* the lowest job not yet handed out */
  int active;       /* jobs handed out and not finished */
  int first_failed; /* the lowest failed job (n_jobs: none) */
  jg_status status; /* its failure */
  jg_error err;
  int closed;       /* the result was asked for: nothing more is handed out */
  int limit_given;  /* the k -> 0 reference came with the job */
};

void jg_growth_grid_job_work(jg_growth_grid_job *s, jg_perturb_workspace *w) {
  for (;;) {
    pthread_mutex_lock(&s->lock);
    const int job = !s->closed && s->next < s->first_failed && s->next < s->n_jobs ? s->next++ : -1;
    if (job >= 0) s->active++;
    pthread_mutex_unlock(&s->lock);
    if (job < 0) return;
    jg_error e;
    jg_error_clear(&e);
    const jg_status st = grid_job(s->m, w, s->g, job, s->limit_given, &e);
    pthread_mutex_lock(&s->lock);
    if (st != JG_OK && job < s->first_failed) s->first_failed = job, s->status = st, s->err = e;
    if (--s->active == 0) pthread_cond_broadcast(&s->idle);
    pthread_mutex_unlock(&s->lock);
  }
}

/* A helper thread: a workspace of its own (without one it leaves the jobs
 * to the others, which do them all). */
static void *job_thread(void *arg) {
  jg_growth_grid_job *s = arg;
  jg_error e;
  jg_error_clear(&e);
  jg_perturb_workspace *w = jg_perturb_workspace_new(s->m, &e);
  if (w) jg_growth_grid_job_work(s, w);
  jg_perturb_workspace_free(w);
  return NULL;
}

jg_growth_grid_job *jg_growth_grid_job_new(const jg_perturb_model *m, const double *k, int n_k,
                                           const double *z, int n_z,
                                           const jg_perturb_limit *limit, jg_error *err) {
  if (!m || !k || !z) {
    JG_FAIL(err, JG_EINVAL, "growth grid: NULL model, wavenumbers or redshifts");
    return NULL;
  }
  if (n_k < 1 || n_z < 1) {
    JG_FAIL(err, JG_EINVAL, "growth grid: need at least one wavenumber and one redshift");
    return NULL;
  }
  jg_growth_grid_job *s = calloc(1, sizeof *s);
  jg_growth_grid *g = calloc(1, sizeof *g);
  if (!s || !g) {
    free(s);
    free(g);
    JG_FAIL(err, JG_ENOMEM, "out of memory for the growth grid");
    return NULL;
  }
  g->n_k = n_k;
  g->n_z = n_z;
  g->k = malloc(sizeof(double) * (size_t)n_k);
  g->z = malloc(sizeof(double) * (size_t)n_z);
  g->points = malloc(sizeof(jg_perturb_point) * (size_t)n_k * (size_t)n_z);
  g->limit = malloc(sizeof(jg_perturb_limit) * (size_t)n_z);
  g->D_ref = malloc(sizeof(double) * (size_t)n_z);
  g->f_ref = malloc(sizeof(double) * (size_t)n_z);
  int sync = 0;
  if (g->k && g->z && g->points && g->limit && g->D_ref && g->f_ref) {
    sync = pthread_mutex_init(&s->lock, NULL) == 0;
    if (sync && pthread_cond_init(&s->idle, NULL) != 0) {
      pthread_mutex_destroy(&s->lock);
      sync = 0;
    }
  }
  if (!sync) {
    jg_growth_grid_free(g);
    free(s);
    JG_FAIL(err, JG_ENOMEM, "out of memory for the growth grid");
    return NULL;
  }
  memcpy(g->k, k, sizeof(double) * (size_t)n_k);
  memcpy(g->z, z, sizeof(double) * (size_t)n_z);
  if (limit) memcpy(g->limit, limit, sizeof(jg_perturb_limit) * (size_t)n_z);
  s->limit_given = limit != NULL;
  jg_perturb_model_describe_start(m, g->start, sizeof g->start);
  s->m = m;
  s->g = g;
  s->n_jobs = grid_jobs(g);
  s->first_failed = s->n_jobs;
  s->status = JG_OK;
  jg_error_clear(&s->err);
  return s;
}

jg_status jg_growth_grid_job_result(jg_growth_grid_job *s, jg_growth_grid **out, jg_error *err) {
  *out = NULL;
  pthread_mutex_lock(&s->lock);
  while (s->active > 0) pthread_cond_wait(&s->idle, &s->lock);
  /* Nothing more is handed out: a late worker finds the jobs gone. */
  const int unfinished = s->next < s->n_jobs && s->first_failed == s->n_jobs;
  const int taken = s->closed;
  s->closed = 1;
  pthread_mutex_unlock(&s->lock);
  if (taken) return JG_FAIL(err, JG_EINVAL, "growth grid: its result was already taken");
  if (s->status != JG_OK) {
    if (err) *err = s->err;
    return s->status;
  }
  if (unfinished)
    return JG_FAIL(err, JG_EINVAL, "growth grid: asked for its result before every wavenumber "
                                   "was solved (no thread worked on it)");
  *out = s->g;
  s->g = NULL;
  return JG_OK;
}

void jg_growth_grid_job_free(jg_growth_grid_job *s) {
  if (!s) return;
  jg_growth_grid_free(s->g);
  pthread_cond_destroy(&s->idle);
  pthread_mutex_destroy(&s->lock);
  free(s);
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
  jg_error local; /* the failure's status, when the caller keeps no record */
  jg_growth_grid_job *s = jg_growth_grid_job_new(m, k, n_k, z, n_z, NULL, err ? err : &local);
  if (!s) return err ? err->status : local.status;
  if (threads > s->n_jobs) threads = s->n_jobs;
  pthread_t helper[JG_GROWTH_MAX_THREADS];
  int started = 0;
  while (started < threads - 1 && pthread_create(&helper[started], NULL, job_thread, s) == 0)
    started++;
  jg_growth_grid_job_work(s, w); /* the caller's thread takes its share */
  for (int i = 0; i < started; i++) pthread_join(helper[i], NULL);
  const jg_status st = jg_growth_grid_job_result(s, out, err);
  jg_growth_grid_job_free(s);
  return st;
}
