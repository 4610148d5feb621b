/*
 * Benchmark (not a test): what the streaming velocity costs on the reference
 * cosmology with 30 km/s from z = 1000, at the default node counts and
 * tolerance. Per wavenumber band of the default grid (128 k from 1 to 5000
 * /Mpc, the 8 default redshifts): the growth columns (jg_stream_powers with
 * the direction averages) against the unstreamed solve of the same k
 * (jg_perturb_solve_many, Rosenbrock path); then the streamed scales
 * (jg_scales_add_streaming) against jg_scales_compute. Process CPU time,
 * best of REPEATS: the machine is shared, and wall-clock time there
 * measures the neighbours. Prints per-item costs and ratios; asserts
 * nothing.
 *
 *   bench_streaming [REPEATS]
 */
#include <gsl/gsl_errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include "jeansgrow/jeansgrow.h"

static double cpu_seconds(void) {
  struct timespec ts;
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

typedef jg_status (*timed_fn)(void *ctx, jg_error *err);

/* Fastest of `repeats` calls, seconds; negative on failure. */
static double fastest(timed_fn f, void *ctx, int repeats) {
  double best = 1e300;
  for (int r = 0; r < repeats; r++) {
    jg_error err;
    jg_error_clear(&err);
    const double t0 = cpu_seconds();
    if (f(ctx, &err) != JG_OK) {
      fprintf(stderr, "bench_streaming: %s\n", err.message);
      return -1.0;
    }
    const double t = cpu_seconds() - t0;
    if (t < best) best = t;
  }
  return best;
}

typedef struct bench {
  const jg_params *p;
  jg_perturb_model *m, *m_ros;
  jg_perturb_workspace *w, *w_ros;
  jg_stream_model *sm;
  const double *k;
  int n_k;
  jg_perturb_point *points;
  jg_stream_power *powers;
  jg_scales_point scales[JG_MAX_REDSHIFTS];
} bench;

static jg_status unstreamed(void *ctx, jg_error *err) {
  bench *b = ctx;
  return jg_perturb_solve_many(b->m_ros, b->w_ros, b->k, b->n_k, b->p->output.redshifts,
                               b->p->output.n_redshifts, b->points, err);
}

static jg_status streamed(void *ctx, jg_error *err) {
  bench *b = ctx;
  return jg_stream_powers(b->sm, b->w, b->k, b->n_k, b->p->output.redshifts,
                          b->p->output.n_redshifts, 1, b->powers, err);
}

static jg_status scales_alone(void *ctx, jg_error *err) {
  bench *b = ctx;
  return jg_scales_compute(b->m, b->w, b->p->output.redshifts, b->p->output.n_redshifts,
                           b->scales, err);
}

static jg_status scales_streamed(void *ctx, jg_error *err) {
  bench *b = ctx;
  return jg_scales_add_streaming(b->m, b->w, &b->p->streaming, b->p->output.redshifts,
                                 b->p->output.n_redshifts, b->scales, err);
}

int main(int argc, char **argv) {
  gsl_set_error_handler_off();
  const int repeats = argc > 1 ? atoi(argv[1]) : 3;
  jg_params p;
  jg_error err;
  jg_error_clear(&err);
  jg_params_set_defaults(&p);
  p.streaming.rms_velocity_kms = 30.0;
  p.streaming.start_redshift = 1000.0;
  jg_perturb_settings ros = p.perturbations;
  ros.stepper = JG_PERTURB_STEPPER_ROSENBROCK;
  ros.rel_tol = 3e-6; /* matched accuracy to the GSL default (contributor guide) */
  bench b = {.p = &p};
  jg_background *bg = jg_background_new(&p.cosmology, &err);
  jg_thermal *th = bg ? jg_thermal_new(bg, &p.thermal, &err) : NULL;
  b.m = th ? jg_perturb_model_new(th, &p.perturbations, NULL, &err) : NULL;
  b.m_ros = th ? jg_perturb_model_new(th, &ros, NULL, &err) : NULL;
  b.w = b.m ? jg_perturb_workspace_new(b.m, &err) : NULL;
  b.w_ros = b.m_ros ? jg_perturb_workspace_new(b.m_ros, &err) : NULL;
  b.sm = b.m ? jg_stream_model_new(b.m, &p.streaming, &err) : NULL;
  double *k = malloc(sizeof(double) * JG_MAX_WAVENUMBERS);
  int n_k = 0;
  if (!b.sm || !b.w_ros || !k || jg_perturb_wavenumbers(&p.perturbations, k, &n_k, &err) != JG_OK) {
    fprintf(stderr, "bench_streaming: %s\n", err.message);
    return 1;
  }
  b.points = malloc(sizeof *b.points * (size_t)n_k * p.output.n_redshifts);
  b.powers = malloc(sizeof *b.powers * (size_t)n_k * p.output.n_redshifts);
  printf("streaming velocity 30 km/s from z = 1000, %d velocity and %d direction nodes, "
         "rel_tol %g; best of %d\n",
         p.streaming.velocity_nodes, p.streaming.direction_nodes, p.streaming.rel_tol, repeats);
  printf("%-22s %6s %14s %14s %8s\n", "k band [1/Mpc]", "k", "unstreamed/k", "streamed/k",
         "ratio");
  const double edges[] = {0.0, 100.0, 1000.0, 1e6};
  double total = 0.0;
  for (int band = 0; band < 3; band++) {
    int first = 0, n = 0;
    while (first < n_k && k[first] <= edges[band]) first++;
    while (first + n < n_k && k[first + n] <= edges[band + 1]) n++;
    if (n == 0) continue;
    b.k = k + first;
    b.n_k = n;
    const double t_plain = fastest(unstreamed, &b, repeats);
    const double t_stream = fastest(streamed, &b, repeats);
    if (t_plain < 0.0 || t_stream < 0.0) return 1;
    total += t_stream;
    printf("%8g < k <= %-9g %6d %11.3f ms %11.3f ms %8.1f\n", edges[band], edges[band + 1], n,
           1e3 * t_plain / n, 1e3 * t_stream / n, t_stream / t_plain);
  }
  printf("growth columns, all %d k: %.3f s\n", n_k, total);
  const double t_scales = fastest(scales_alone, &b, repeats);
  const double t_add = fastest(scales_streamed, &b, repeats);
  if (t_scales < 0.0 || t_add < 0.0) return 1;
  printf("scales: %.3f s, streamed scales added: %.3f s (x%.1f)\n", t_scales, t_add,
         t_add / t_scales);
  free(b.points);
  free(b.powers);
  free(k);
  jg_stream_model_free(b.sm);
  jg_perturb_workspace_free(b.w_ros);
  jg_perturb_workspace_free(b.w);
  jg_perturb_model_free(b.m_ros);
  jg_perturb_model_free(b.m);
  jg_thermal_free(th);
  jg_background_free(bg);
  return 0;
}
