/*
 * Benchmark (not a test): the cost of one full ionisation and gas-temperature
 * history on the reference cosmology, and of the derived epochs, as the
 * median of many repeats. Prints per-item costs; asserts nothing.
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

int main(int argc, char **argv) {
  gsl_set_error_handler_off();
  int repeats = argc > 1 ? atoi(argv[1]) : 51;
  if (repeats < 1) repeats = 1;
  jg_params p;
  jg_params_set_defaults(&p);
  jg_error err;
  jg_error_clear(&err);
  double *t_history = malloc(sizeof(double) * (size_t)repeats);
  double *t_epochs = malloc(sizeof(double) * (size_t)repeats);
  if (!t_history || !t_epochs) return 1;
  jg_epochs e = {0};
  for (int r = 0; r < repeats; r++) {
    double t0 = now_seconds();
    jg_background *bg = jg_background_new(&p.cosmology, &err);
    jg_thermal *th = bg ? jg_thermal_new(bg, &p.thermal, &err) : NULL;
    double t1 = now_seconds();
    if (!th || jg_epochs_compute(th, &e, &err) != JG_OK) {
      fprintf(stderr, "bench_history: %s\n", err.message);
      return 1;
    }
    double t2 = now_seconds();
    t_history[r] = t1 - t0;
    t_epochs[r] = t2 - t1;
    jg_thermal_free(th);
    jg_background_free(bg);
  }
  printf("reference cosmology, thermal.grid_points = %d, %d repeats\n", p.thermal.grid_points,
         repeats);
  printf("history (background + recombination + gas temperature): median %.3f ms\n",
         1e3 * median(t_history, repeats));
  printf("epochs (z_star, z_drag, sound horizons, age, ...):      median %.3f ms\n",
         1e3 * median(t_epochs, repeats));
  printf("per grid node: %.3f us\n", 1e6 * median(t_history, repeats) / p.thermal.grid_points);
  printf("(z_star = %.2f as a sanity check)\n", e.z_star);
  free(t_history);
  free(t_epochs);
  return 0;
}
