/*
 * Benchmark (not a test): the cost of one full ionisation and gas-temperature
 * history on the reference cosmology, of the derived epochs and of the
 * perturbations' coefficient tables built from the history (the default
 * model, with the delta_xe terms), as the median of many repeats; then the
 * history again on denser stored grids, to show what the node count costs
 * now that the integration no longer stops at every node. Prints per-item
 * costs and ratios; asserts nothing.
 *
 *   bench_history [REPEATS]
 */
#include <gsl/gsl_errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include "jeansgrow/jeansgrow.h"

static double now_seconds(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static int compare_doubles(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

static double median(double *v, int n) {
  qsort(v, (size_t)n, sizeof *v, compare_doubles);
  return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

/* Median seconds of background + history (and of the epochs, if asked). */
static int time_history(const jg_params *p, int repeats, double *t_history, double *t_epochs,
                        double *scratch, jg_epochs *e) {
  jg_error err;
  jg_error_clear(&err);
  double *t_e = scratch + repeats;
  for (int r = 0; r < repeats; r++) {
    double t0 = now_seconds();
    jg_background *bg = jg_background_new(&p->cosmology, &err);
    jg_thermal *th = bg ? jg_thermal_new(bg, &p->thermal, &err) : NULL;
    double t1 = now_seconds();
    if (!th || (t_epochs && jg_epochs_compute(th, e, &err) != JG_OK)) {
      fprintf(stderr, "bench_history: %s\n", err.message);
      return 1;
    }
    double t2 = now_seconds();
    scratch[r] = t1 - t0;
    t_e[r] = t2 - t1;
    jg_thermal_free(th);
    jg_background_free(bg);
  }
  *t_history = median(scratch, repeats);
  if (t_epochs) *t_epochs = median(t_e, repeats);
  return 0;
}

/* Median seconds of the perturbation model (its coefficient tables) on one
 * history. */
static int time_tables(const jg_params *p, int repeats, double *t_tables, double *scratch) {
  jg_error err;
  jg_error_clear(&err);
  jg_background *bg = jg_background_new(&p->cosmology, &err);
  jg_thermal *th = bg ? jg_thermal_new(bg, &p->thermal, &err) : NULL;
  int failed = th == NULL;
  for (int r = 0; !failed && r < repeats; r++) {
    double t0 = now_seconds();
    jg_perturb_model *m = jg_perturb_model_new(th, &p->perturbations, NULL, &err);
    scratch[r] = now_seconds() - t0;
    failed = m == NULL;
    jg_perturb_model_free(m);
  }
  if (failed) fprintf(stderr, "bench_history: %s\n", err.message);
  else *t_tables = median(scratch, repeats);
  jg_thermal_free(th);
  jg_background_free(bg);
  return failed;
}

int main(int argc, char **argv) {
  gsl_set_error_handler_off();
  int repeats = argc > 1 ? atoi(argv[1]) : 51;
  if (repeats < 1) repeats = 1;
  jg_params p;
  jg_params_set_defaults(&p);
  double *scratch = malloc(sizeof(double) * (size_t)repeats * 2);
  if (!scratch) return 1;
  jg_epochs e = {0};
  double t_history, t_epochs;
  if (time_history(&p, repeats, &t_history, &t_epochs, scratch, &e)) return 1;
  printf("reference cosmology, thermal.grid_points = %d, %d repeats\n", p.thermal.grid_points,
         repeats);
  printf("history (background + recombination + gas temperature): median %.3f ms\n",
         1e3 * t_history);
  printf("epochs (z_star, z_drag, sound horizons, age, ...):      median %.3f ms\n",
         1e3 * t_epochs);
  printf("(z_star = %.2f as a sanity check)\n", e.z_star);
  double t_tables;
  if (time_tables(&p, repeats, &t_tables, scratch)) return 1;
  printf("perturbation coefficient tables (default model):      median %.3f ms\n",
         1e3 * t_tables);
  const int grids[] = {4000, 16000};
  for (size_t i = 0; i < sizeof grids / sizeof grids[0]; i++) {
    jg_params dense = p;
    dense.thermal.grid_points = grids[i];
    double t;
    if (time_history(&dense, repeats, &t, NULL, scratch, &e)) return 1;
    printf("history with thermal.grid_points = %5d: median %.3f ms (x%.2f the default)\n",
           grids[i], 1e3 * t, t / t_history);
  }
  free(scratch);
  return 0;
}
