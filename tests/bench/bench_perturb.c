/*
 * Benchmark of the perturbation solver on the reference cosmology (defaults
 * of jg_params_set_defaults: Planck 2018, fluctuating sound speed, rel_tol
 * 1e-8, abs_tol 1e-10): the cost of one k-mode and of the 128-mode default
 * grid (1 to 5000 /Mpc) from z_initial = 1e4 to z = 10 with 7 output
 * redshifts, as the median of repeated runs, and the peak memory.
 *
 * Usage: bench_perturb [DIR]
 *   Writes DIR/perturb_coefficients.txt (the medium coefficients on a grid
 *   of 500 nodes per e-fold: what the SciPy comparison interpolates) and
 *   DIR/perturb_reference.txt (this solver's delta_b/delta_c and delta_c for
 *   a subset of the grid). tests/bench/scipy_perturb.py DIR solves the same
 *   equations with scipy.integrate.solve_ivp (BDF, analytic Jacobian, same
 *   tolerances), prints its cost and the agreement, and writes
 *   DIR/perturb_scipy_timing.txt; run bench_perturb DIR again to print the
 *   speed ratio. Nothing here asserts a time.
 */
#include <gsl/gsl_errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <time.h>

#include "jeansgrow/jeansgrow.h"
#include "jeansgrow/perturb.h"

static double now(void) {
  struct timespec t;
  clock_gettime(CLOCK_MONOTONIC, &t);
  return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

static int cmp_double(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

static double median(double *v, int n) {
  qsort(v, (size_t)n, sizeof *v, cmp_double);
  return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

#define N_Z 7
#define N_REF 16

int main(int argc, char **argv) {
  gsl_set_error_handler_off();
  const char *dir = argc > 1 ? argv[1] : ".";
  jg_params p;
  jg_params_set_defaults(&p);
  jg_error err;
  jg_error_clear(&err);
  jg_background *bg = jg_background_new(&p.cosmology, &err);
  jg_thermal *th = bg ? jg_thermal_new(bg, &p.thermal, &err) : NULL;
  if (!th) {
    fprintf(stderr, "bench_perturb: %s\n", err.message);
    return 1;
  }
  double t0 = now();
  jg_perturb_model *m = jg_perturb_model_new(th, &p.perturbations, NULL, &err);
  double t_model = now() - t0;
  jg_perturb_workspace *w = m ? jg_perturb_workspace_new(m, &err) : NULL;
  if (!w) {
    fprintf(stderr, "bench_perturb: %s\n", err.message);
    return 1;
  }
  const double z[N_Z] = {1000.0, 500.0, 200.0, 100.0, 50.0, 20.0, 10.0};
  static double k[JG_MAX_WAVENUMBERS];
  int n_k = 0;
  if (jg_perturb_wavenumbers(&p.perturbations, k, &n_k, &err) != JG_OK) {
    fprintf(stderr, "bench_perturb: %s\n", err.message);
    return 1;
  }
  static jg_perturb_point out[JG_MAX_WAVENUMBERS][N_Z];

  /* One mode (k = 300 /Mpc, near the filtering scale), 41 repeats. */
  enum { R1 = 41, RN = 9 };
  double t1[R1], tn[RN], tl[R1];
  for (int r = 0; r < R1; r++) {
    double a = now();
    if (jg_perturb_solve(m, w, 300.0, z, N_Z, out[0], &err) != JG_OK) {
      fprintf(stderr, "bench_perturb: %s\n", err.message);
      return 1;
    }
    t1[r] = now() - a;
    jg_perturb_limit lim[N_Z];
    a = now();
    if (jg_perturb_solve_limit(m, w, z, N_Z, lim, &err) != JG_OK) {
      fprintf(stderr, "bench_perturb: %s\n", err.message);
      return 1;
    }
    tl[r] = now() - a;
  }
  for (int r = 0; r < RN; r++) {
    double a = now();
    for (int i = 0; i < n_k; i++)
      if (jg_perturb_solve(m, w, k[i], z, N_Z, out[i], &err) != JG_OK) {
        fprintf(stderr, "bench_perturb: %s\n", err.message);
        return 1;
      }
    tn[r] = now() - a;
  }
  double one = median(t1, R1), all = median(tn, RN), lim = median(tl, R1);
  struct rusage ru;
  getrusage(RUSAGE_SELF, &ru);
  printf("# perturbation solver, reference cosmology, %s sound speed, rel_tol %g, abs_tol %g\n",
         p.perturbations.sound_speed == JG_SOUND_SPEED_FLUCTUATING ? "fluctuating" : "uniform",
         p.perturbations.rel_tol, p.perturbations.abs_tol);
  printf("model build (coefficient tables)     %10.3f ms\n", 1e3 * t_model);
  printf("one mode, k = 300 /Mpc, %d redshifts  %10.3f ms (median of %d)\n", N_Z, 1e3 * one, R1);
  printf("large-scale limit with k^2 terms     %10.3f ms (median of %d)\n", 1e3 * lim, R1);
  printf("%d modes, k = %g..%g /Mpc          %10.3f ms (median of %d), %.3f ms per mode\n", n_k,
         k[0], k[n_k - 1], 1e3 * all, RN, 1e3 * all / n_k);
  printf("peak resident memory                 %10.1f MB\n", ru.ru_maxrss / 1024.0);

  /* Files for the SciPy comparison. */
  char path[4096];
  snprintf(path, sizeof path, "%s/perturb_coefficients.txt", dir);
  FILE *f = fopen(path, "w");
  if (!f) {
    fprintf(stderr, "bench_perturb: cannot write %s\n", path);
    return 1;
  }
  const jg_medium *md = jg_perturb_model_medium(m);
  const double x_init = -log1p(p.perturbations.z_initial);
  fprintf(f, "# medium coefficients of the reference cosmology, 500 nodes per e-fold\n");
  fprintf(f, "# z_initial %.17g a_equality %.17g rel_tol %.17g abs_tol %.17g\n",
          p.perturbations.z_initial, md->a_equality, p.perturbations.rel_tol,
          p.perturbations.abs_tol);
  fprintf(f, "# ln_a\tdlnH_dlna\tgravity\tbaryon_fraction\tpressure[Mpc^2]\tdrag\trelaxation\n");
  const int nodes = (int)ceil(-x_init * 500.0) + 5;
  for (int i = 0; i <= nodes; i++) {
    double x = x_init - 2.0 / 500.0 + i * (-x_init + 2.0 / 500.0) / nodes;
    jg_medium_coefficients c;
    md->eval(md->ctx, x, &c);
    fprintf(f, "%.17g\t%.17g\t%.17g\t%.17g\t%.17g\t%.17g\t%.17g\n", x, c.dlnH_dlna, c.gravity,
            c.baryon_fraction, c.pressure, c.drag, c.relaxation);
  }
  fclose(f);
  /* The initial CDM slope is not in the file: the script recomputes the
   * Meszaros growing mode from a_equality and f_b with SciPy's hyp2f1, an
   * independent check of the initial conditions. */
  snprintf(path, sizeof path, "%s/perturb_reference.txt", dir);
  f = fopen(path, "w");
  if (!f) {
    fprintf(stderr, "bench_perturb: cannot write %s\n", path);
    return 1;
  }
  fprintf(f, "# k[1/Mpc]\tz\tdelta_c\tb_over_c\n");
  for (int j = 0; j < N_REF; j++) {
    int i = j * (n_k - 1) / (N_REF - 1);
    for (int q = 0; q < N_Z; q++)
      fprintf(f, "%.17g\t%.17g\t%.17g\t%.17g\n", k[i], z[q], out[i][q].delta_c, out[i][q].b_over_c);
  }
  fclose(f);
  fprintf(stdout, "wrote %s/perturb_coefficients.txt and %s/perturb_reference.txt\n", dir, dir);

  snprintf(path, sizeof path, "%s/perturb_scipy_timing.txt", dir);
  f = fopen(path, "r");
  if (f) {
    double scipy_per_mode = 0.0;
    if (fscanf(f, "%lf", &scipy_per_mode) == 1 && scipy_per_mode > 0.0)
      printf("SciPy solve_ivp (BDF) per mode %.1f ms: this solver is %.0f times faster per mode\n",
             1e3 * scipy_per_mode, scipy_per_mode / (all / n_k));
    fclose(f);
  } else {
    printf("(run tests/bench/scipy_perturb.py %s, then this program again, for the ratio)\n", dir);
  }
  jg_perturb_workspace_free(w);
  jg_perturb_model_free(m);
  jg_thermal_free(th);
  jg_background_free(bg);
  return 0;
}
