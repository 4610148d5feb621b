/*
 * Growth by wavenumber on a grid: the perturbation stage solved for every k
 * of a list at every requested redshift, plus the large-scale (k -> 0)
 * reference at each redshift, so that the pressure suppression
 * (delta_b/delta_c) / (delta_b/delta_c)_{k->0} can be reported.
 */
#ifndef JEANSGROW_GROWTH_H
#define JEANSGROW_GROWTH_H

#include "jeansgrow/error.h"
#include "jeansgrow/perturb.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct jg_growth_grid {
  int n_k, n_z;
  double *k;                /* [n_k], 1/Mpc */
  double *z;                /* [n_z], as requested */
  jg_perturb_point *points; /* [ik * n_z + iz] */
  jg_perturb_limit *limit;  /* [iz]: the k -> 0 reference */
  int has_reference;        /* 1 when D_ref, f_ref are set (model on a real history) */
  double *D_ref;            /* [iz]: scale-independent growth D(z), D -> a early */
  double *f_ref;            /* [iz]: its rate d ln D / d ln a */
  char start[JG_MAX_PATH + 256]; /* where the perturbations started (jg_perturb_model_describe_start) */
  /* [ik * n_z + iz]: the streaming averages (stream_results.h); NULL
   * without streaming. */
  struct jg_stream_power *stream;
} jg_growth_grid;

/* Solve every k of k[0..n_k) at every z of z[0..n_z), and (on a real
 * history) the scale-independent growth D(z) for reference
 * (jg_background_growth_factor: matter + dark energy, no radiation). Fails with the
 * solver's error (naming k and z); *out is NULL then. */
jg_status jg_growth_grid_compute(const jg_perturb_model *m, jg_perturb_workspace *w,
                                 const double *k, int n_k, const double *z, int n_z,
                                 jg_growth_grid **out, jg_error *err);
/* The same with the work shared out among `threads` threads (1 to
 * JG_GROWTH_MAX_THREADS; this one and threads - 1 it starts, each of those
 * with a workspace of its own; m is only read): the k -> 0 reference and
 * the batches of JG_PERTURB_BATCH consecutive wavenumbers, formed from the
 * k list alone, so the grid is the same to the last bit whatever the number
 * of threads, and a failure is the one the single-thread call reports. */
#define JG_GROWTH_MAX_THREADS 256
jg_status jg_growth_grid_compute_threads(const jg_perturb_model *m, jg_perturb_workspace *w,
                                         const double *k, int n_k, const double *z, int n_z,
                                         int threads, jg_growth_grid **out, jg_error *err);
void jg_growth_grid_free(jg_growth_grid *g);

/* The same grid with threads that join the work when they come free (a
 * program computing the grid beside other work, whose thread joins once
 * that work is done): jg_growth_grid_job_new sets it up (the same checks
 * and failures as jg_growth_grid_compute; m is only read; `limit`, if not
 * NULL, is the k -> 0 reference as jg_perturb_solve_limit gives it at z
 * with this model, solved once for the grid and the scales); any number of
 * threads call jg_growth_grid_job_work, each with a workspace of its own,
 * at any time, each taking the next job not yet taken (the k -> 0
 * reference, then the batches of the k list) until none is left;
 * jg_growth_grid_job_result, called once, waits for the jobs taken to be
 * finished and gives the grid (the caller frees it) or the failure the
 * single-thread call reports (JG_EINVAL if no thread has worked on it);
 * a worker that comes later finds nothing to do. jg_growth_grid_job_free
 * once no thread works on it any more. The grid is the same to the last
 * bit whoever computed which part. */
typedef struct jg_growth_grid_job jg_growth_grid_job;
jg_growth_grid_job *jg_growth_grid_job_new(const jg_perturb_model *m, const double *k, int n_k,
                                           const double *z, int n_z,
                                           const jg_perturb_limit *limit, jg_error *err);
void jg_growth_grid_job_work(jg_growth_grid_job *job, jg_perturb_workspace *w);
jg_status jg_growth_grid_job_result(jg_growth_grid_job *job, jg_growth_grid **out,
                                    jg_error *err);
void jg_growth_grid_job_free(jg_growth_grid_job *job);

/* The point for wavenumber index ik at redshift index iz. */
const jg_perturb_point *jg_growth_grid_at(const jg_growth_grid *g, int ik, int iz);

#ifdef __cplusplus
}
#endif
#endif
