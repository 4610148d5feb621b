/*
 * Benchmark of the perturbation solver on the reference cosmology (defaults
 * of jg_params_set_defaults: Planck 2018, fluctuating sound speed, the
 * Rosenbrock stepper, rel_tol 1e-8, abs_tol 1e-10): the cost of one k-mode
 * and of the 128-mode default grid (1 to 5000 /Mpc) from z_initial = 1e4 to
 * z = 10 with 7 output redshifts, one k at a time and in lockstep batches,
 * as the median of repeated runs; the same grid on the GSL paths (msbdf then
 * rk8pd, msbdf throughout); the cost of 512 output redshifts against 8
 * (dense output); the steps and the cost of one mode alone by wavenumber,
 * 1 to 1e5 /Mpc (what makes a mode dear: its steps, not the cost of a
 * step); and the peak memory.
 *
 * Then the comparison of the GSL path (msbdf then rk8pd, the cross-check
 * path) with SciPy on the same work: 16 modes of that grid,
 * the same 7 redshifts. Equal nominal tolerances are not equal accuracy
 * (GSL's step control takes the largest error over the components, SciPy's
 * BDF a root mean square, and the methods differ), so both solvers are run
 * over a ladder of tolerances (abs_tol = rel_tol / 100, the default ratio)
 * and their errors are measured against a tight reference: this solver at
 * rel_tol 1e-12, abs_tol 1e-14, which the SciPy script cross-checks with
 * SciPy's Radau at the same tolerance. Two ratios are printed: at the
 * same (default) tolerance, the comparison users make first,
 * and the stricter one at matched accuracy, between the cheapest tolerance
 * of each solver that reaches a common error target in delta_b/delta_c.
 * Costs on that ladder are the best of several runs of all 16 modes (the
 * least disturbed by other processes), per mode; evaluations are
 * right-hand sides plus Jacobians per mode, as SciPy's nfev + njev.
 *
 * Then the library's own Rosenbrock integrator (perturbations.stepper =
 * "rosenbrock", the default) over the same ladder against the same
 * reference, one k at a time and in lockstep batches of 8
 * (jg_perturb_solve_many), with its matched-accuracy ratios against the GSL
 * path and, once the script has run, against SciPy. Instruction counts, which
 * other work on the machine does not disturb, come from running this under
 * valgrind --tool=callgrind.
 *
 * Usage: bench_perturb [DIR]
 *   Writes DIR/perturb_coefficients.txt (the medium coefficients, delta_xe
 *   terms included, on the nodes of the model's table: what the SciPy
 *   comparison interpolates),
 *   DIR/perturb_reference.txt (the tight reference: delta_c and
 *   delta_b/delta_c for the 16 modes) and DIR/perturb_c_ladder.txt (this
 *   solver's error and cost per tolerance). tests/bench/scipy_perturb.py DIR
 *   solves the same equations with scipy.integrate.solve_ivp (BDF, analytic
 *   Jacobian) over the same ladder and writes DIR/perturb_scipy_ladder.txt;
 *   run bench_perturb DIR again to print the comparison. Nothing here
 *   asserts a time.
 * Usage: bench_perturb --coefficients PARAMFILE DIR
 *   Writes only DIR/perturb_coefficients.txt, for the model of PARAMFILE
 *   (tests/bench/scipy_growth.py, which times the whole program).
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
/* The GSL path of the comparison with SciPy, as the tables name it. */
#define STEPPER_NAME "msbdf+rk8pd"

/* The tolerance ladder of the same-work comparison (rel_tol; abs_tol is
 * rel_tol / 100 as in the defaults) and the reference tolerance. Also read
 * by tests/bench/scipy_perturb.py from DIR/perturb_c_ladder.txt. */
#define N_LADDER 11
static const double ladder_rtol[N_LADDER] = {1e-4, 3e-5, 1e-5, 3e-6, 1e-6, 3e-7,
                                             1e-7, 3e-8, 1e-8, 3e-9, 1e-9};
#define ABS_PER_REL 1e-2
#define REF_RTOL 1e-12
/* Runs of the 16 modes per ladder tolerance; the best one is kept. */
#define LADDER_REPEATS 7
/* Common error targets in delta_b/delta_c; the first is the headline. */
static const double targets[] = {1e-6, 1e-5, 1e-7};
#define N_TARGETS 3

typedef struct ladder_row {
  double rtol, atol, err_ratio, err_dc, ms, evals;
} ladder_row;

/* The 16 benchmark modes: every (n_k - 1)/15-th of the grid, ends included. */
static int batched; /* solve the set with jg_perturb_solve_many */
static int solve_set(const jg_perturb_model *m, jg_perturb_workspace *w, const double *ks,
                     const double *z, jg_perturb_point out[N_REF][N_Z], jg_error *err) {
  if (batched) return jg_perturb_solve_many(m, w, ks, N_REF, z, N_Z, &out[0][0], err) != JG_OK;
  for (int j = 0; j < N_REF; j++)
    if (jg_perturb_solve(m, w, ks[j], z, N_Z, out[j], err) != JG_OK) return 1;
  return 0;
}

/* Largest relative errors in delta_b/delta_c and delta_c against `ref`. */
static void set_errors(jg_perturb_point a[N_REF][N_Z], jg_perturb_point ref[N_REF][N_Z],
                       double *e_ratio, double *e_dc) {
  *e_ratio = *e_dc = 0.0;
  for (int j = 0; j < N_REF; j++)
    for (int q = 0; q < N_Z; q++) {
      *e_ratio = fmax(*e_ratio, fabs(a[j][q].b_over_c / ref[j][q].b_over_c - 1.0));
      *e_dc = fmax(*e_dc, fabs(a[j][q].delta_c / ref[j][q].delta_c - 1.0));
    }
}

/* Solve the 16 modes at one tolerance: errors against `ref` (if given), the
 * best time of LADDER_REPEATS runs and the medium evaluations per mode. */
static int run_tolerance(const jg_thermal *th, const jg_perturb_settings *base, double rtol,
                         double atol, const double *ks, const double *z,
                         jg_perturb_point out[N_REF][N_Z], jg_perturb_point ref[N_REF][N_Z],
                         int repeats, ladder_row *row, jg_error *err) {
  jg_perturb_settings s = *base;
  s.rel_tol = rtol;
  s.abs_tol = atol;
  jg_perturb_model *m = jg_perturb_model_new(th, &s, NULL, err);
  jg_perturb_workspace *w = m ? jg_perturb_workspace_new(m, err) : NULL;
  int bad = !w;
  double best = 0.0;
  for (int r = 0; !bad && r < repeats; r++) {
    double a = now();
    bad = solve_set(m, w, ks, z, out, err);
    double t = now() - a;
    if (r == 0 || t < best) best = t;
  }
  /* Evaluations per mode: the workspace counts them; one more untimed run
   * of the same modes (identical results) measures them alone. */
  static jg_perturb_point tmp[N_REF][N_Z];
  jg_perturb_work before = jg_perturb_workspace_work(w);
  bad = bad || solve_set(m, w, ks, z, tmp, err);
  jg_perturb_work after = jg_perturb_workspace_work(w);
  const long calls = after.rhs_evals - before.rhs_evals + after.jacobian_evals -
                     before.jacobian_evals;
  row->rtol = rtol;
  row->atol = atol;
  row->ms = 1e3 * best / N_REF;
  row->evals = (double)calls / N_REF;
  row->err_ratio = row->err_dc = 0.0;
  if (!bad && ref) set_errors(out, ref, &row->err_ratio, &row->err_dc);
  jg_perturb_workspace_free(w);
  jg_perturb_model_free(m);
  return bad;
}

/* The cheapest row whose delta_b/delta_c error is at most `target`, or -1. */
static int cheapest(const ladder_row *rows, int n, double target) {
  int best = -1;
  for (int i = 0; i < n; i++)
    if (rows[i].err_ratio <= target && (best < 0 || rows[i].ms < rows[best].ms)) best = i;
  return best;
}

/* DIR/perturb_scipy_ladder.txt: comment lines ("# radau ..." holds the
 * cross-check of the reference), then rel_tol abs_tol err_ratio err_dc
 * ms_per_mode nfev_per_mode per line. Returns the number of rows. */
static int read_scipy_ladder(const char *path, ladder_row *rows, int max, char *info,
                             size_t info_size, double radau[2]) {
  FILE *f = fopen(path, "r");
  if (!f) return 0;
  char line[1024];
  int n = 0;
  info[0] = '\0';
  radau[0] = radau[1] = -1.0;
  while (fgets(line, sizeof line, f)) {
    if (line[0] == '#') {
      if (sscanf(line, "# radau %lf %lf", &radau[0], &radau[1]) == 2) continue;
      if (strncmp(line, "# scipy ", 8) == 0) {
        snprintf(info, info_size, "%s", line + 8);
        info[strcspn(info, "\n")] = '\0';
      }
      continue;
    }
    ladder_row r;
    if (n < max && sscanf(line, "%lf %lf %lf %lf %lf %lf", &r.rtol, &r.atol, &r.err_ratio,
                          &r.err_dc, &r.ms, &r.evals) == 6)
      rows[n++] = r;
  }
  fclose(f);
  return n;
}

/* DIR/perturb_coefficients.txt: the medium coefficients of the model on the
 * nodes of its table (ln a from ln_a_min to 0, 500 per e-fold), every one
 * the equations read, the delta_xe terms included; what the SciPy scripts
 * (tests/bench/scipy_equations.py) interpolate. The delta_xe columns are 0
 * when the model has no delta_xe (the meta line says which). */
static int write_coefficients(const char *dir, const jg_perturb_settings *s,
                              const jg_perturb_model *m) {
  char path[4096];
  snprintf(path, sizeof path, "%s/perturb_coefficients.txt", dir);
  FILE *f = fopen(path, "w");
  if (!f) {
    fprintf(stderr, "bench_perturb: cannot write %s\n", path);
    return 1;
  }
  const jg_medium *md = jg_perturb_model_medium(m);
  const int fluctuating = s->sound_speed == JG_SOUND_SPEED_FLUCTUATING;
  const int ionisation = fluctuating && s->ionisation_perturbation;
  fprintf(f, "# medium coefficients, on the nodes of the model's table (500 per e-fold)\n");
  fprintf(f, "# z_initial %.17g a_equality %.17g rel_tol %.17g abs_tol %.17g fluctuating %d "
          "ionisation %d\n", s->z_initial, md->a_equality, s->rel_tol, s->abs_tol, fluctuating,
          ionisation);
  fprintf(f, "# ln_a\tdlnH_dlna\tgravity\tbaryon_fraction\tpressure[Mpc^2]\tdrag\trelaxation"
          "\tionisation_relaxation\tionisation_density\tionisation_temperature"
          "\tionisation_expansion\theating_ionisation\tpressure_ionisation[Mpc^2]\n");
  const int intervals = (int)lround(-md->ln_a_min * 500.0);
  for (int i = 0; i <= intervals; i++) {
    const double x = i == intervals ? md->ln_a_max
                                    : md->ln_a_min + i * (md->ln_a_max - md->ln_a_min) / intervals;
    jg_medium_coefficients c = {0};
    md->eval(md->ctx, x, &c);
    if (!ionisation)
      c.ionisation_relaxation = c.ionisation_density = c.ionisation_temperature =
          c.ionisation_expansion = c.heating_ionisation = c.pressure_ionisation = 0.0;
    fprintf(f, "%.17g\t%.17g\t%.17g\t%.17g\t%.17g\t%.17g\t%.17g\t%.17g\t%.17g\t%.17g\t%.17g\t%.17g"
            "\t%.17g\n", x, c.dlnH_dlna, c.gravity, c.baryon_fraction, c.pressure, c.drag,
            c.relaxation, c.ionisation_relaxation, c.ionisation_density,
            c.ionisation_temperature, c.ionisation_expansion, c.heating_ionisation,
            c.pressure_ionisation);
  }
  if (fclose(f) != 0) {
    fprintf(stderr, "bench_perturb: cannot write %s\n", path);
    return 1;
  }
  return 0;
}

int main(int argc, char **argv) {
  gsl_set_error_handler_off();
  /* --coefficients PARAMFILE DIR: only the coefficient table of that
   * parameter file's model (tests/bench/scipy_growth.py), then stop. */
  const int coefficients_only = argc > 1 && strcmp(argv[1], "--coefficients") == 0;
  if (coefficients_only && argc != 4) {
    fprintf(stderr, "usage: bench_perturb [DIR] | bench_perturb --coefficients PARAMFILE DIR\n");
    return 2;
  }
  const char *dir = coefficients_only ? argv[3] : argc > 1 ? argv[1] : ".";
  jg_params p;
  jg_params_set_defaults(&p);
  jg_error err;
  jg_error_clear(&err);
  if (coefficients_only && jg_params_load(argv[2], NULL, 0, &p, &err) != JG_OK) {
    fprintf(stderr, "bench_perturb: %s\n", err.message);
    return 2;
  }
  jg_background *bg = jg_background_new(&p.cosmology, &err);
  jg_thermal *th = bg ? jg_thermal_new(bg, &p.thermal, &err) : NULL;
  if (!th) {
    fprintf(stderr, "bench_perturb: %s\n", err.message);
    return 1;
  }
  double t0 = now();
  jg_perturb_model *m = jg_perturb_model_new(th, &p.perturbations, NULL, &err);
  double t_model = now() - t0;
  if (coefficients_only) {
    if (!m) fprintf(stderr, "bench_perturb: %s\n", err.message);
    const int bad = !m || write_coefficients(dir, &p.perturbations, m);
    jg_perturb_model_free(m);
    jg_thermal_free(th);
    jg_background_free(bg);
    return bad;
  }
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
  double tb[RN];
  for (int r = 0; r < RN; r++) {
    double a = now();
    if (jg_perturb_solve_many(m, w, k, n_k, z, N_Z, &out[0][0], &err) != JG_OK) {
      fprintf(stderr, "bench_perturb: %s\n", err.message);
      return 1;
    }
    tb[r] = now() - a;
  }
  double one = median(t1, R1), all = median(tn, RN), lim = median(tl, R1),
         all_batched = median(tb, RN);
  /* Where a mode's cost comes from: its steps (attempted: six right-hand
   * sides each), which grow with k once the gas oscillates after
   * recombination, and the cost of one step, which does not. */
  static const double k_steps[] = {1.0, 10.0, 100.0, 300.0, 1e3, 3e3, 5e3, 1e4, 3e4, 1e5};
  enum { N_K_STEPS = sizeof k_steps / sizeof k_steps[0] };
  double steps_by_k[N_K_STEPS], us_by_k[N_K_STEPS];
  double k_lo, k_hi;
  jg_perturb_model_k_range(m, &k_lo, &k_hi);
  for (int i = 0; i < N_K_STEPS; i++) {
    steps_by_k[i] = us_by_k[i] = NAN;
    if (k_steps[i] < k_lo || k_steps[i] > k_hi) continue;
    double t_k[RN];
    jg_perturb_work w0 = jg_perturb_workspace_work(w);
    for (int r = 0; r < RN; r++) {
      double a = now();
      if (jg_perturb_solve(m, w, k_steps[i], z, N_Z, out[0], &err) != JG_OK) {
        fprintf(stderr, "bench_perturb (k = %g): %s\n", k_steps[i], err.message);
        return 1;
      }
      t_k[r] = now() - a;
    }
    jg_perturb_work w1 = jg_perturb_workspace_work(w);
    steps_by_k[i] = (double)(w1.rhs_evals - w0.rhs_evals) / (6.0 * RN);
    us_by_k[i] = 1e6 * median(t_k, RN);
  }
  /* The same grid on the GSL paths: msbdf then rk8pd, msbdf throughout. */
  double all_gsl[2];
  for (int g = 0; g < 2; g++) {
    double t_gsl[RN];
    jg_perturb_settings s = p.perturbations;
    s.stepper = g == 0 ? JG_PERTURB_STEPPER_MSBDF_RK8PD : JG_PERTURB_STEPPER_MSBDF;
    jg_perturb_model *mm = jg_perturb_model_new(th, &s, NULL, &err);
    jg_perturb_workspace *wm = mm ? jg_perturb_workspace_new(mm, &err) : NULL;
    for (int r = 0; wm && r < RN; r++) {
      double a = now();
      for (int i = 0; i < n_k; i++)
        if (jg_perturb_solve(mm, wm, k[i], z, N_Z, out[i], &err) != JG_OK) break;
      t_gsl[r] = now() - a;
    }
    if (!wm || err.status != JG_OK) {
      fprintf(stderr, "bench_perturb (GSL stepper %d): %s\n", g, err.message);
      return 1;
    }
    jg_perturb_workspace_free(wm);
    jg_perturb_model_free(mm);
    all_gsl[g] = median(t_gsl, RN);
  }
  /* Dense output: 8 and 512 output redshifts from 1100 to 0, the 16 modes
   * of the comparison below, one k at a time and in batches; evaluations of
   * the coefficient matrices and time, best of 5. */
  double dense_ms[2][2], dense_evals[2][2];
  {
    static double zd[512];
    static jg_perturb_point pd[16 * 512];
    double kd[16];
    for (int j = 0; j < 16; j++) kd[j] = k[j * (n_k - 1) / 15];
    const int counts[2] = {8, 512};
    for (int c = 0; c < 2; c++) {
      for (int i = 0; i < counts[c]; i++) zd[i] = 1100.0 * (counts[c] - 1 - i) / (counts[c] - 1);
      for (int b = 0; b < 2; b++) {
        double best = 0.0;
        jg_perturb_work w0 = jg_perturb_workspace_work(w);
        for (int r = 0; r < 5; r++) {
          double a = now();
          jg_status st = JG_OK;
          if (b)
            st = jg_perturb_solve_many(m, w, kd, 16, zd, counts[c], pd, &err);
          else
            for (int j = 0; j < 16 && st == JG_OK; j++)
              st = jg_perturb_solve(m, w, kd[j], zd, counts[c], pd, &err);
          if (st != JG_OK) {
            fprintf(stderr, "bench_perturb (dense output): %s\n", err.message);
            return 1;
          }
          double t = now() - a;
          if (r == 0 || t < best) best = t;
        }
        jg_perturb_work w1 = jg_perturb_workspace_work(w);
        dense_ms[c][b] = 1e3 * best / 16;
        dense_evals[c][b] = (double)(w1.jacobian_evals - w0.jacobian_evals) / (5 * 16);
      }
    }
  }
  struct rusage ru;
  getrusage(RUSAGE_SELF, &ru);
  printf("# perturbation solver, reference cosmology, %s sound speed, default stepper "
         "(rosenbrock), rel_tol %g, abs_tol %g\n",
         p.perturbations.sound_speed == JG_SOUND_SPEED_FLUCTUATING ? "fluctuating" : "uniform",
         p.perturbations.rel_tol, p.perturbations.abs_tol);
  printf("model build (coefficient tables)     %10.3f ms\n", 1e3 * t_model);
  printf("one mode, k = 300 /Mpc, %d redshifts  %10.3f ms (median of %d)\n", N_Z, 1e3 * one, R1);
  printf("large-scale limit with k^2 terms     %10.3f ms (median of %d)\n", 1e3 * lim, R1);
  printf("%d modes, k = %g..%g /Mpc          %10.3f ms (median of %d), %.3f ms per mode\n", n_k,
         k[0], k[n_k - 1], 1e3 * all, RN, 1e3 * all / n_k);
  printf("the same in lockstep batches of %d     %10.3f ms (median of %d), %.3f ms per mode\n",
         JG_PERTURB_BATCH, 1e3 * all_batched, RN, 1e3 * all_batched / n_k);
  printf("the same, GSL msbdf then rk8pd        %10.3f ms (median of %d), %.3f ms per mode: "
         "x%.2f the default's time, x%.2f in batches\n",
         1e3 * all_gsl[0], RN, 1e3 * all_gsl[0] / n_k, all_gsl[0] / all, all_gsl[0] / all_batched);
  printf("the same, GSL msbdf throughout        %10.3f ms (median of %d), %.3f ms per mode: "
         "the switch to rk8pd saves a factor %.2f\n",
         1e3 * all_gsl[1], RN, 1e3 * all_gsl[1] / n_k, all_gsl[1] / all_gsl[0]);
  printf("dense output, 16 modes, z 1100..0:    8 outputs %.3f ms/mode (%.0f matrices), 512 "
         "outputs %.3f ms/mode (%.0f): x%.2f time, x%.2f matrices\n",
         dense_ms[0][0], dense_evals[0][0], dense_ms[1][0], dense_evals[1][0],
         dense_ms[1][0] / dense_ms[0][0], dense_evals[1][0] / dense_evals[0][0]);
  printf("  the same in batches of %d:           8 outputs %.3f ms/mode (%.0f matrices), 512 "
         "outputs %.3f ms/mode (%.0f): x%.2f time, x%.2f matrices\n",
         JG_PERTURB_BATCH, dense_ms[0][1], dense_evals[0][1], dense_ms[1][1], dense_evals[1][1],
         dense_ms[1][1] / dense_ms[0][1], dense_evals[1][1] / dense_evals[0][1]);
  printf("one mode alone by wavenumber, %d redshifts 1000..10 (median of %d):\n", N_Z, RN);
  printf("  %-9s %8s %10s %12s\n", "k [1/Mpc]", "steps", "us/mode", "us/step");
  for (int i = 0; i < N_K_STEPS; i++)
    if (isfinite(steps_by_k[i]))
      printf("  %-9g %8.0f %10.1f %12.3f\n", k_steps[i], steps_by_k[i], us_by_k[i],
             us_by_k[i] / steps_by_k[i]);
  printf("peak resident memory                 %10.1f MB\n", ru.ru_maxrss / 1024.0);

  /* Files for the SciPy comparison. */
  char path[4096];
  if (write_coefficients(dir, &p.perturbations, m)) return 1;
  FILE *f;

  /* The same work: 16 modes, the tight reference, then the ladder, on the
   * GSL path. */
  jg_perturb_settings gsl_path = p.perturbations;
  gsl_path.stepper = JG_PERTURB_STEPPER_MSBDF_RK8PD;
  double ks[N_REF];
  for (int j = 0; j < N_REF; j++) ks[j] = k[j * (n_k - 1) / (N_REF - 1)];
  static jg_perturb_point ref[N_REF][N_Z], sol[N_REF][N_Z];
  ladder_row ref_row, c_rows[N_LADDER];
  if (run_tolerance(th, &gsl_path, REF_RTOL, REF_RTOL * ABS_PER_REL, ks, z, ref, NULL, 1,
                    &ref_row, &err)) {
    fprintf(stderr, "bench_perturb (reference): %s\n", err.message);
    return 1;
  }
  for (int t = 0; t < N_LADDER; t++)
    if (run_tolerance(th, &gsl_path, ladder_rtol[t], ladder_rtol[t] * ABS_PER_REL, ks, z,
                      sol, ref, LADDER_REPEATS, &c_rows[t], &err)) {
      fprintf(stderr, "bench_perturb (rel_tol %g): %s\n", ladder_rtol[t], err.message);
      return 1;
    }
  /* The initial CDM slope is not in the files: the script recomputes the
   * Meszaros growing mode from a_equality and f_b with SciPy's hyp2f1, an
   * independent check of the initial conditions. */
  snprintf(path, sizeof path, "%s/perturb_reference.txt", dir);
  f = fopen(path, "w");
  if (!f) {
    fprintf(stderr, "bench_perturb: cannot write %s\n", path);
    return 1;
  }
  fprintf(f, "# reference: this solver at rel_tol %g abs_tol %g\n", REF_RTOL,
          REF_RTOL * ABS_PER_REL);
  fprintf(f, "# k[1/Mpc]\tz\tdelta_c\tb_over_c\n");
  for (int j = 0; j < N_REF; j++)
    for (int q = 0; q < N_Z; q++)
      fprintf(f, "%.17g\t%.17g\t%.17g\t%.17g\n", ks[j], z[q], ref[j][q].delta_c,
              ref[j][q].b_over_c);
  fclose(f);
  snprintf(path, sizeof path, "%s/perturb_c_ladder.txt", dir);
  f = fopen(path, "w");
  if (!f) {
    fprintf(stderr, "bench_perturb: cannot write %s\n", path);
    return 1;
  }
  fprintf(f, "# this solver (GSL %s) over the tolerance ladder, 16 modes x %d redshifts\n",
          STEPPER_NAME, N_Z);
  fprintf(f, "# rel_tol\tabs_tol\terr_b_over_c\terr_delta_c\tms_per_mode\tevals_per_mode\n");
  for (int t = 0; t < N_LADDER; t++)
    fprintf(f, "%.3g\t%.3g\t%.6e\t%.6e\t%.6f\t%.1f\n", c_rows[t].rtol, c_rows[t].atol,
            c_rows[t].err_ratio, c_rows[t].err_dc, c_rows[t].ms, c_rows[t].evals);
  fclose(f);
  printf("wrote %s/perturb_coefficients.txt, perturb_reference.txt, perturb_c_ladder.txt\n", dir);

  /* The comparison table, with SciPy's ladder if the script has run. */
  ladder_row s_rows[N_LADDER];
  char info[1024];
  double radau[2];
  snprintf(path, sizeof path, "%s/perturb_scipy_ladder.txt", dir);
  const int n_s = read_scipy_ladder(path, s_rows, N_LADDER, info, sizeof info, radau);
  printf("\nsame work: %d modes, k = %g..%g /Mpc, %d redshifts 1000..10, abs_tol = rel_tol/100\n",
         N_REF, ks[0], ks[N_REF - 1], N_Z);
  printf("error: largest relative error over modes and redshifts against this solver at "
         "rel_tol %g (%.2f ms/mode)\n", REF_RTOL, ref_row.ms);
  if (n_s > 0 && radau[0] >= 0.0)
    printf("reference cross-check, SciPy Radau at rel_tol %g: largest difference delta_b/delta_c "
           "%.1e, delta_c %.1e\n", REF_RTOL, radau[0], radau[1]);
  printf("cost: this solver best of %d runs%s, per mode\n", LADDER_REPEATS,
         n_s > 0 ? ", SciPy as its line below says" : "");
  printf("%-8s | %-41s | %s\n", "", "this solver (GSL " STEPPER_NAME ")",
         n_s > 0 ? "SciPy solve_ivp (its line below)" : "(SciPy: run tests/bench/scipy_perturb.py DIR)");
  printf("%-8s | %9s %9s %9s %9s | %9s %9s %9s %9s\n", "rel_tol", "err b/c", "err d_c",
         "ms/mode", "evals", "err b/c", "err d_c", "ms/mode", "f+J evals");
  for (int t = 0; t < N_LADDER; t++) {
    printf("%-8.0e | %9.2e %9.2e %9.3f %9.0f |", c_rows[t].rtol, c_rows[t].err_ratio,
           c_rows[t].err_dc, c_rows[t].ms, c_rows[t].evals);
    const ladder_row *sr = NULL;
    for (int i = 0; i < n_s; i++)
      if (fabs(s_rows[i].rtol / c_rows[t].rtol - 1.0) < 1e-6) sr = &s_rows[i];
    if (sr)
      printf(" %9.2e %9.2e %9.1f %9.0f", sr->err_ratio, sr->err_dc, sr->ms, sr->evals);
    printf("\n");
  }
  if (n_s > 0) {
    if (info[0]) printf("SciPy: %s\n", info);
    /* Equal nominal tolerance: the defaults. */
    for (int t = 0; t < N_LADDER; t++)
      for (int i = 0; i < n_s; i++)
        if (fabs(c_rows[t].rtol / p.perturbations.rel_tol - 1.0) < 1e-6 &&
            fabs(s_rows[i].rtol / c_rows[t].rtol - 1.0) < 1e-6)
          printf("same tolerance (rel_tol %g, the default): SciPy %.1f "
                 "ms/mode, this solver %.3f ms/mode: %.0f times faster%s (errors in "
                 "delta_b/delta_c: %.1e here, %.1e SciPy)\n",
                 c_rows[t].rtol, s_rows[i].ms, c_rows[t].ms, s_rows[i].ms / c_rows[t].ms,
                 s_rows[i].ms / c_rows[t].ms >= 100.0 ? " (target 100x met)"
                                                      : " (below the 100x target)",
                 c_rows[t].err_ratio, s_rows[i].err_ratio);
    for (int q = 0; q < N_TARGETS; q++) {
      int ic = cheapest(c_rows, N_LADDER, targets[q]), is = cheapest(s_rows, n_s, targets[q]);
      if (ic < 0 || is < 0) {
        printf("matched accuracy, delta_b/delta_c error <= %g: %s reaches it on no rung of the "
               "ladder\n", targets[q], ic < 0 ? "this solver" : "SciPy");
        continue;
      }
      const double ratio = s_rows[is].ms / c_rows[ic].ms;
      printf("matched accuracy (stricter), delta_b/delta_c error <= %g: SciPy %.1f ms/mode "
             "(rel_tol %g), this solver %.3f ms/mode (rel_tol %g): %.0f times faster\n",
             targets[q], s_rows[is].ms, s_rows[is].rtol, c_rows[ic].ms, c_rows[ic].rtol, ratio);
    }
  }

  /* The Rosenbrock integrator (perturbations.stepper = "rosenbrock") on the
   * same ladder, one k at a time and in lockstep batches of 8, against the
   * same reference; matched accuracy against the GSL default. */
  ladder_row r_rows[2][N_LADDER];
  jg_perturb_settings rs = p.perturbations;
  rs.stepper = JG_PERTURB_STEPPER_ROSENBROCK;
  for (batched = 0; batched < 2; batched++)
    for (int t = 0; t < N_LADDER; t++)
      if (run_tolerance(th, &rs, ladder_rtol[t], ladder_rtol[t] * ABS_PER_REL, ks, z, sol, ref,
                        LADDER_REPEATS, &r_rows[batched][t], &err)) {
        fprintf(stderr, "bench_perturb (rosenbrock, rel_tol %g): %s\n", ladder_rtol[t],
                err.message);
        return 1;
      }
  printf("\nRosenbrock integrator (RODAS), same work and reference\n");
  printf("%-8s | %-31s | %-31s\n", "", "one k at a time", "batches of 8 in lockstep");
  printf("%-8s | %9s %9s %11s | %9s %9s %11s\n", "rel_tol", "err b/c", "ms/mode", "evals/mode",
         "err b/c", "ms/mode", "evals/mode");
  for (int t = 0; t < N_LADDER; t++)
    printf("%-8.0e | %9.2e %9.3f %11.0f | %9.2e %9.3f %11.0f\n", ladder_rtol[t],
           r_rows[0][t].err_ratio, r_rows[0][t].ms, r_rows[0][t].evals, r_rows[1][t].err_ratio,
           r_rows[1][t].ms, r_rows[1][t].evals);
  for (int q = 0; q < N_TARGETS; q++) {
    int ig = cheapest(c_rows, N_LADDER, targets[q]);
    int i1 = cheapest(r_rows[0], N_LADDER, targets[q]), ib = cheapest(r_rows[1], N_LADDER, targets[q]);
    if (ig < 0 || i1 < 0 || ib < 0) continue;
    printf("matched accuracy, delta_b/delta_c error <= %g: GSL %s %.3f ms/mode (rel_tol %g); "
           "Rosenbrock %.3f ms/mode alone (rel_tol %g, x%.2f), %.3f in batches (rel_tol %g, "
           "x%.2f)\n",
           targets[q], STEPPER_NAME, c_rows[ig].ms, c_rows[ig].rtol, r_rows[0][i1].ms,
           r_rows[0][i1].rtol, c_rows[ig].ms / r_rows[0][i1].ms, r_rows[1][ib].ms,
           r_rows[1][ib].rtol, c_rows[ig].ms / r_rows[1][ib].ms);
    const int is = n_s > 0 ? cheapest(s_rows, n_s, targets[q]) : -1;
    if (is >= 0)
      printf("  against SciPy (%.1f ms/mode, rel_tol %g): x%.0f alone, x%.0f in batches\n",
             s_rows[is].ms, s_rows[is].rtol, s_rows[is].ms / r_rows[0][i1].ms,
             s_rows[is].ms / r_rows[1][ib].ms);
  }
  jg_perturb_workspace_free(w);
  jg_perturb_model_free(m);
  jg_thermal_free(th);
  jg_background_free(bg);
  return 0;
}
