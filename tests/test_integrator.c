/*
 * The Rosenbrock integrator (src/perturbations/rosenbrock.c): its order on
 * analytic problems, its dense output, and the perturbations it gives
 * against GSL's msbdf (the cross-check path), one k at a time and in
 * lockstep batches.
 */
#include <criterion/criterion.h>
#include <math.h>
#include <pthread.h>
#include <string.h>

#include "../src/perturbations/rosenbrock.h"
#include "jeansgrow/jeansgrow.h"
#include "real_case.h"
#include "support.h"

TestSuite(integrator, .init = quiet_gsl);

/* ---- analytic problems ----------------------------------------------------- */

/* y1' = -y1 + x y2, y2' = -2 y2 (non-autonomous): with y(0) = (1, 1),
 * y2 = e^{-2x}, y1 = e^{-x} (1 + 1 - (1 + x) e^{-x}) (integrating factor). */
static int nonautonomous(void *ctx, double x, double *A, double *dA, double *rate) {
  (void)ctx;
  A[0] = -1.0, A[1] = x, A[2] = 0.0, A[3] = -2.0;
  if (dA) dA[0] = 0.0, dA[1] = 1.0, dA[2] = 0.0, dA[3] = 0.0;
  if (rate) *rate = 2.0;
  return 0;
}
static double nonautonomous_y1(double x) { return exp(-x) * (2.0 - (1.0 + x) * exp(-x)); }

/* Prothero & Robinson's stiff test written as a linear system: y' =
 * -L(x) (y - cos x) - sin x with cos and sin carried as states (c' = -s,
 * s' = c); y = cos x is the solution from y(0) = 1 whatever the stiffness
 * L(x) = L0 e^x (Hairer & Wanner II, section IV.15, the test of order
 * reduction). */
static double pr_stiffness;
static int prothero_robinson(void *ctx, double x, double *A, double *dA, double *rate) {
  (void)ctx;
  const double L = pr_stiffness * exp(x);
  memset(A, 0, 9 * sizeof *A);
  A[0] = -L, A[1] = L, A[2] = -1.0, A[5] = -1.0, A[7] = 1.0;
  if (dA) {
    memset(dA, 0, 9 * sizeof *dA);
    dA[0] = -L, dA[1] = L;
  }
  if (rate) *rate = L;
  return 0;
}

typedef struct collected {
  int n;
  double y[600][3];
} collected;
static void collect(void *ctx, int index, const double *y) {
  collected *c = ctx;
  memcpy(c->y[index], y, 3 * sizeof *y);
  c->n++;
}

static pt_ros_work work;

/* Error at x = 2 of fixed steps h (tolerances so loose that no step is
 * rejected, the first and largest step h). */
static double fixed_step_error(pt_ros_matrices_fn f, int dim, double h, int component,
                               double exact) {
  collected c = {0};
  pt_ros_problem p = {dim, 1, f, collect, &c, NULL, 1e9, 1e9, h, h, 1000000, NULL, NULL};
  double y[3] = {1.0, 1.0, 0.0}, x_end = 2.0, x_fail;
  int st = jg__ros_integrate(&p, &work, 0.0, y, &x_end, 1, &x_fail);
  cr_assert_eq(st, PT_ROS_OK, "h = %g: code %d at x = %g", h, st, x_fail);
  return fabs(c.y[0][component] - exact);
}

/* RODAS is of order 4 (Hairer & Wanner II, section IV.7): halving the step
 * divides the error by 2^4. Measured orders 3.90 and 3.95 on the
 * non-autonomous problem (h = 1/128 .. 1/512), 4.00 on the stiff one. */
Test(integrator, order_four_on_analytic_problems) {
  double e[3];
  for (int i = 0; i < 3; i++)
    e[i] = fixed_step_error(nonautonomous, 2, 1.0 / (128 << i), 0, nonautonomous_y1(2.0));
  for (int i = 0; i < 2; i++) {
    double order = log2(e[i] / e[i + 1]);
    cr_assert(order > 3.8 && order < 4.2, "non-autonomous: order %g (errors %g, %g)", order,
              e[i], e[i + 1]);
  }
  /* Stiff: L h from 1e5 to 1e7; L-stable and stiffly accurate, no order
   * reduction here. */
  pr_stiffness = 1e6;
  for (int i = 0; i < 3; i++)
    e[i] = fixed_step_error(prothero_robinson, 3, 0.1 / (1 << i), 0, cos(2.0));
  for (int i = 0; i < 2; i++) {
    double order = log2(e[i] / e[i + 1]);
    cr_assert(order > 3.8 && order < 4.2, "stiff: order %g (errors %g, %g)", order, e[i],
              e[i + 1]);
  }
}

/* Outputs from the quintic Hermite interpolant: as accurate as the steps,
 * and 512 outputs take no more steps than 8 (the output list does not
 * limit the step). */
Test(integrator, dense_output_accurate_and_free) {
  static double x_out[512];
  static collected c;
  long steps[2];
  const int counts[2] = {8, 512};
  for (int t = 0; t < 2; t++) {
    const int n = counts[t];
    for (int i = 0; i < n; i++) x_out[i] = 3.0 * (i + 1) / n;
    memset(&c, 0, sizeof c);
    pt_ros_problem p = {2, 1, nonautonomous, collect, &c, NULL, 1e-10, 1e-12, 1e-3, 0.5, 100000,
                        NULL, NULL};
    double y[2] = {1.0, 1.0}, x_fail;
    const long before = work.stats.steps;
    cr_assert_eq(jg__ros_integrate(&p, &work, 0.0, y, x_out, n, &x_fail), PT_ROS_OK);
    steps[t] = work.stats.steps - before;
    cr_assert_eq(c.n, n);
    for (int i = 0; i < n; i++) {
      ASSERT_REL(c.y[i][0], nonautonomous_y1(x_out[i]), 1e-8, "x = %g of %d outputs", x_out[i], n);
      ASSERT_REL(c.y[i][1], exp(-2.0 * x_out[i]), 1e-8, "x = %g of %d outputs", x_out[i], n);
    }
  }
  cr_assert_eq(steps[1], steps[0], "steps with 512 outputs %ld, with 8 %ld", steps[1], steps[0]);
}

/* Outputs inside stiff steps (h * rate >> 1) from RODAS's continuous
 * extension: on Prothero & Robinson's problem (L = 1e6 e^x, solution cos x)
 * 512 outputs take no more steps than 8, and every output is as accurate as
 * the steps (measured largest error 2.0e-9 at rel_tol 1e-8, 89 steps); with
 * fixed steps the error at mid-step falls as h^4 (order 3 continuous
 * extension: local error O(h^4); measured 3.89 and 3.95 for h = 0.1 to
 * 0.025). */
Test(integrator, stiff_dense_output_accurate_and_free) {
  static double x_out[512];
  static collected c;
  pr_stiffness = 1e6;
  long steps[2];
  double worst = 0.0;
  const int counts[2] = {8, 512};
  for (int t = 0; t < 2; t++) {
    const int n = counts[t];
    for (int i = 0; i < n; i++) x_out[i] = 3.0 * (i + 1) / n;
    memset(&c, 0, sizeof c);
    pt_ros_problem p = {3, 1, prothero_robinson, collect, &c, NULL, 1e-8, 1e-10, 1e-3, 0.5,
                        100000, NULL, NULL};
    double y[3] = {1.0, 1.0, 0.0}, x_fail;
    const long before = work.stats.steps;
    cr_assert_eq(jg__ros_integrate(&p, &work, 0.0, y, x_out, n, &x_fail), PT_ROS_OK);
    steps[t] = work.stats.steps - before;
    cr_assert_eq(c.n, n);
    for (int i = 0; i < n; i++) worst = fmax(worst, fabs(c.y[i][0] - cos(x_out[i])));
  }
  cr_assert_eq(steps[1], steps[0], "steps with 512 outputs %ld, with 8 %ld", steps[1], steps[0]);
  cr_assert_lt(worst, 1e-8, "largest output error %g", worst);

  double e[3];
  for (int r = 0; r < 3; r++) {
    const double h = 0.1 / (1 << r);
    const double x_mid = 1.0 + 0.5 * h; /* inside the step from x = 1 */
    double xs[2] = {x_mid, 2.0};
    collected fixed = {0};
    pt_ros_problem p = {3, 1, prothero_robinson, collect, &fixed, NULL, 1e9, 1e9, h, h, 1000000,
                        NULL, NULL};
    double y[3] = {1.0, 1.0, 0.0}, x_fail;
    cr_assert_eq(jg__ros_integrate(&p, &work, 0.0, y, xs, 2, &x_fail), PT_ROS_OK);
    e[r] = fabs(fixed.y[0][0] - cos(x_mid));
  }
  for (int r = 0; r < 2; r++) {
    double order = log2(e[r] / e[r + 1]);
    cr_assert(order > 3.5 && order < 4.5, "mid-step order %g (errors %g, %g)", order, e[r],
              e[r + 1]);
  }
}

/* ---- the perturbations ----------------------------------------------------- */

static void solve_ok(const jg_perturb_model *m, jg_perturb_workspace *w, double k, const double *z,
                     int n, jg_perturb_point *out) {
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_perturb_solve(m, w, k, z, n, out, &err), JG_OK, "k = %g: %s", k, err.message);
}

/* The solver under test (Rosenbrock at the given settings' tolerances) and
 * the cross-check (GSL msbdf at rel_tol 1e-12, abs_tol 1e-20) on r's
 * history; free both with pair_free. GSL's abs_tol is absolute, in units of
 * the initial CDM contrast, and where the photons hold the gas (a hot CMB)
 * delta_b/delta_c is ~1e-10: abs_tol 1e-14 left the reference 4e-5 off
 * there, 1e-20 leaves it to rel_tol. */
typedef struct solver_pair {
  jg_perturb_model *mf, *mt;
  jg_perturb_workspace *wf, *wt;
} solver_pair;

static solver_pair pair_open(const real_case *r, const jg_perturb_settings *s) {
  jg_perturb_settings fast = *s, tight = *s;
  fast.stepper = JG_PERTURB_STEPPER_ROSENBROCK;
  tight.stepper = JG_PERTURB_STEPPER_MSBDF;
  tight.rel_tol = 1e-12;
  tight.abs_tol = 1e-20;
  solver_pair p;
  real_case_model(r, &fast, NULL, &p.mf, &p.wf);
  real_case_model(r, &tight, NULL, &p.mt, &p.wt);
  return p;
}

static void pair_free(solver_pair *p) {
  jg_perturb_workspace_free(p->wt);
  jg_perturb_model_free(p->mt);
  jg_perturb_workspace_free(p->wf);
  jg_perturb_model_free(p->mf);
}

/* The cosmologies of the cross-check: the reference, the corners of the
 * densities' box and the extremes of the other keys' documented ranges
 * (README key table), each as the keys it moves from the reference. */
typedef struct box_case {
  const char *name;
  struct {
    const char *key;
    double value;
  } set[2];
} box_case;
static const box_case box_cases[] = {
    {"reference", {{NULL, 0}}},
    {"scarce baryons, little matter",
     {{"cosmology.baryon_density_h2", 0.005}, {"cosmology.cdm_density_h2", 0.05}}},
    {"many baryons, much matter",
     {{"cosmology.baryon_density_h2", 0.06}, {"cosmology.cdm_density_h2", 0.3}}},
    {"fewest baryons", {{"cosmology.baryon_density_h2", 1e-4}}},
    {"baryons dominate",
     {{"cosmology.baryon_density_h2", 1.0}, {"cosmology.cdm_density_h2", 0.01}}},
    {"most matter", {{"cosmology.cdm_density_h2", 2.0}}},
    {"smallest h", {{"cosmology.hubble_h", 0.1}}},
    {"largest h", {{"cosmology.hubble_h", 5.0}}},
    {"open", {{"cosmology.curvature_omega", 0.9}}},
    {"coldest CMB", {{"cosmology.cmb_temperature_K", 1.0}}},
    {"hottest CMB", {{"cosmology.cmb_temperature_K", 30.0}}},
    {"no helium", {{"cosmology.helium_mass_fraction", 0.0}}},
    {"mostly helium", {{"cosmology.helium_mass_fraction", 0.9}}},
    {"most neutrinos", {{"cosmology.neutrino_number_eff", 20.0}}},
    {"phantom dark energy", {{"cosmology.de_w0", -3.0}, {"cosmology.de_wa", 3.0}}},
};

/* The Rosenbrock integrator at the default tolerances against GSL msbdf at
 * rel_tol 1e-12 (abs_tol 1e-20), the cross-check path: delta_b/delta_c and
 * delta_c to 1e-6 (the accuracy src/PHYSICS.md §9 states for the defaults)
 * at redshifts from before recombination to today, for the three
 * sound-speed models, on every cosmology of box_cases, at the largest and
 * the smallest scales accepted. */
Test(integrator, agrees_with_gsl_msbdf, .timeout = 120) {
  const jg_sound_speed_model models[] = {JG_SOUND_SPEED_FLUCTUATING, JG_SOUND_SPEED_ISOTHERMAL,
                                         JG_SOUND_SPEED_ADIABATIC};
  enum { NZ = 8 };
  const double z[NZ] = {3000.0, 1100.0, 1000.0, 500.0, 100.0, 20.0, 10.0, 0.0};
  /* k = 1 /Mpc where the model accepts it (a hot CMB puts the horizon
   * limit at z_initial higher: its smallest k instead). */
  const double ks_wanted[] = {1.0, 1000.0, 1e5};
  enum { NK = 3 };
  const int n_cases = (int)(sizeof box_cases / sizeof box_cases[0]);
  for (int c = 0; c < n_cases; c++) {
    const box_case *bc = &box_cases[c];
    jg_params d;
    jg_params_set_defaults(&d);
    cr_assert_eq(d.perturbations.stepper, JG_PERTURB_STEPPER_ROSENBROCK, "default stepper");
    for (int j = 0; j < 2 && bc->set[j].key; j++) {
      jg_error err;
      jg_error_clear(&err);
      cr_assert_eq(jg_params_set_number(&d, bc->set[j].key, bc->set[j].value, &err), JG_OK,
                   "%s: %s", bc->name, err.message);
    }
    real_case r;
    real_case_open(&r, &d);
    for (int s = 0; s < 3; s++) {
      jg_perturb_settings set = d.perturbations;
      set.sound_speed = models[s];
      solver_pair sp = pair_open(&r, &set);
      double k_lo, k_hi;
      jg_perturb_model_k_range(sp.mf, &k_lo, &k_hi);
      for (int q = 0; q < NK; q++) {
        const double ks[NK] = {fmax(ks_wanted[0], k_lo), ks_wanted[1], ks_wanted[2]};
        jg_perturb_point a[NZ], b[NZ];
        solve_ok(sp.mf, sp.wf, ks[q], z, NZ, a);
        solve_ok(sp.mt, sp.wt, ks[q], z, NZ, b);
        for (int i = 0; i < NZ; i++) {
          ASSERT_REL(a[i].b_over_c, b[i].b_over_c, 1e-6, "%s, model %d, k = %g, z = %g",
                     bc->name, s, ks[q], z[i]);
          ASSERT_REL(a[i].delta_c, b[i].delta_c, 1e-6, "%s, model %d, k = %g, z = %g", bc->name,
                     s, ks[q], z[i]);
        }
      }
      pair_free(&sp);
    }
    real_case_close(&r);
  }
}

/* The large-scale limit: the Gnedin-Hui 1/k_F^2 to 1e-6 and the k^2
 * derivative to 5e-6, as asked of the GSL paths (test_perturb.c). */
Test(integrator, limit_agrees_with_gsl_msbdf) {
  real_case r;
  real_case_open(&r, NULL);
  solver_pair sp = pair_open(&r, &r.p.perturbations);
  const double z[] = {1000.0, 300.0, 100.0, 10.0};
  jg_perturb_limit a[4], b[4];
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_perturb_solve_limit(sp.mf, sp.wf, z, 4, a, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_perturb_solve_limit(sp.mt, sp.wt, z, 4, b, &err), JG_OK, "%s", err.message);
  for (int i = 0; i < 4; i++) {
    ASSERT_REL(a[i].gh_inverse_kf2, b[i].gh_inverse_kf2, 1e-6, "z = %g", z[i]);
    ASSERT_REL(a[i].dlnb_dk2, b[i].dlnb_dk2, 5e-6, "z = %g", z[i]);
    ASSERT_REL(a[i].k0.b_over_c, b[i].k0.b_over_c, 1e-6, "z = %g", z[i]);
  }
  pair_free(&sp);
  real_case_close(&r);
}

/* The reference cosmology with the Rosenbrock stepper, its error test held
 * to 1e-8 and 1e-10 (the tolerances the lockstep test below was written
 * for, before the tolerances were put on the GSL steppers' scale). */
static void open_rosenbrock(real_case *r) {
  jg_params d;
  jg_params_set_defaults(&d);
  d.perturbations.stepper = JG_PERTURB_STEPPER_ROSENBROCK;
  d.perturbations.rel_tol = 1e-8 / 100.0;
  d.perturbations.abs_tol = 1e-10 / 100.0;
  real_case_open(r, &d);
}

/* Lockstep batches: the same results as one k at a time (to the
 * tolerance: a batch steps as its most demanding mode asks), and digits
 * that depend on the list alone: the list's first 8 and last 3 solved as
 * lists of their own give the same bits as the whole list (batches of 8
 * cut from the list). */
Test(integrator, batches_agree_and_depend_on_the_list_alone) {
  real_case r;
  open_rosenbrock(&r);
  enum { N = 11, NZ = 3 };
  double k[N];
  for (int i = 0; i < N; i++) k[i] = pow(10.0, 5.0 * i / (N - 1));
  const double z[NZ] = {10.0, 500.0, 100.0};
  static jg_perturb_point all[N * NZ], head[8 * NZ], tail[3 * NZ];
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_perturb_solve_many(r.m, r.w, k, N, z, NZ, all, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_perturb_solve_many(r.m, r.w, k, 8, z, NZ, head, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_perturb_solve_many(r.m, r.w, k + 8, 3, z, NZ, tail, &err), JG_OK, "%s",
               err.message);
  cr_assert(memcmp(all, head, sizeof head) == 0, "first batch differs when solved alone");
  cr_assert(memcmp(all + 8 * NZ, tail, sizeof tail) == 0, "last batch differs when solved alone");
  for (int i = 0; i < N; i++) {
    jg_perturb_point one[NZ];
    solve_ok(r.m, r.w, k[i], z, NZ, one);
    for (int j = 0; j < NZ; j++) {
      ASSERT_REL(all[i * NZ + j].b_over_c, one[j].b_over_c, 1e-7, "k = %g z = %g", k[i], z[j]);
      ASSERT_REL(all[i * NZ + j].delta_c, one[j].delta_c, 1e-7, "k = %g z = %g", k[i], z[j]);
      cr_assert_eq(all[i * NZ + j].z, z[j]);
      cr_assert_eq(all[i * NZ + j].k, k[i]);
    }
  }
  real_case_close(&r);
}

/* A batch the integrator refuses (a k outside the accepted range) is
 * reported by its k, as a single solve would. */
Test(integrator, batch_with_a_bad_k_names_it) {
  real_case r;
  open_rosenbrock(&r);
  const double k[3] = {10.0, 2e5, 100.0}, z = 10.0;
  jg_perturb_point out[3];
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_perturb_solve_many(r.m, r.w, k, 3, &z, 1, out, &err), JG_EINVAL);
  cr_assert(strstr(err.message, "k = 200000") != NULL, "%s", err.message);
  real_case_close(&r);
}

/* A grid computed by a helper thread started first and this thread joining
 * its work later (jg_growth_grid_job, as `run`'s scales thread does). */
typedef struct late_worker {
  const jg_perturb_model *m;
  jg_growth_grid_job *job;
} late_worker;

static void *work_on_grid(void *arg) {
  late_worker *lw = arg;
  jg_error e;
  jg_error_clear(&e);
  jg_perturb_workspace *w = jg_perturb_workspace_new(lw->m, &e);
  if (w) jg_growth_grid_job_work(lw->job, w);
  jg_perturb_workspace_free(w);
  return NULL;
}

static jg_status grid_with_late_joiner(real_case *r, const double *k, int n_k, const double *z,
                                       int n_z, jg_growth_grid **out, jg_error *err) {
  jg_growth_grid_job *job = jg_growth_grid_job_new(r->m, k, n_k, z, n_z, NULL, err);
  cr_assert_not_null(job, "%s", err->message);
  late_worker lw = {r->m, job};
  pthread_t helper;
  cr_assert_eq(pthread_create(&helper, NULL, work_on_grid, &lw), 0);
  jg_growth_grid_job_work(job, r->w);
  const jg_status st = jg_growth_grid_job_result(job, out, err);
  pthread_join(helper, NULL);
  jg_growth_grid_job_free(job);
  return st;
}

/* The growth grid on several threads, or with a thread joining the work
 * late: the same numbers to the last bit as on one (the batches come from
 * the k list alone, whoever solves them), with a partial last batch; and
 * with bad wavenumbers in two batches, the failure told is the first in
 * the list's order, as on one thread. */
Test(integrator, growth_grid_on_threads_or_joined_late_is_the_single_thread_grid) {
  real_case r;
  open_rosenbrock(&r);
  enum { NK = 37 };
  double k[NK];
  for (int i = 0; i < NK; i++) k[i] = 2.0 * pow(2500.0, (double)i / (NK - 1));
  const double z[3] = {1000.0, 100.0, 10.0};
  jg_growth_grid *one = NULL, *three = NULL;
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_growth_grid_compute(r.m, r.w, k, NK, z, 3, &one, &err), JG_OK, "%s",
               err.message);
  cr_assert_eq(jg_growth_grid_compute_threads(r.m, r.w, k, NK, z, 3, 3, &three, &err), JG_OK,
               "%s", err.message);
  cr_assert(memcmp(one->points, three->points, sizeof(jg_perturb_point) * NK * 3) == 0,
            "the grid depends on the number of threads");
  jg_growth_grid_free(three);
  cr_assert_eq(grid_with_late_joiner(&r, k, NK, z, 3, &three, &err), JG_OK, "%s", err.message);
  cr_assert(memcmp(one->points, three->points, sizeof(jg_perturb_point) * NK * 3) == 0,
            "the grid depends on who computed which part");
  cr_assert(memcmp(one->limit, three->limit, sizeof(jg_perturb_limit) * 3) == 0);
  jg_growth_grid_free(one);
  jg_growth_grid_free(three);
  /* Its result: refused before anyone worked and a second time; a worker
   * that comes after it finds nothing to do. */
  jg_growth_grid_job *job = jg_growth_grid_job_new(r.m, k, NK, z, 3, NULL, &err);
  cr_assert_not_null(job);
  cr_assert_eq(jg_growth_grid_job_result(job, &three, &err), JG_EINVAL);
  cr_assert_null(three);
  const jg_perturb_work before = jg_perturb_workspace_work(r.w);
  jg_growth_grid_job_work(job, r.w);
  cr_assert_eq(jg_perturb_workspace_work(r.w).rhs_evals, before.rhs_evals,
               "a worker after the result solved something");
  cr_assert_eq(jg_growth_grid_job_result(job, &three, &err), JG_EINVAL);
  jg_growth_grid_job_free(job);

  k[12] = 3e5; /* the second batch */
  k[30] = 4e5; /* the fourth */
  jg_error err_one, err_threads;
  jg_error_clear(&err_one);
  jg_error_clear(&err_threads);
  cr_assert_neq(jg_growth_grid_compute(r.m, r.w, k, NK, z, 3, &one, &err_one), JG_OK);
  cr_assert_neq(jg_growth_grid_compute_threads(r.m, r.w, k, NK, z, 3, 4, &three, &err_threads),
                JG_OK);
  cr_assert_null(three);
  cr_assert(strstr(err_one.message, "k = 300000") != NULL, "%s", err_one.message);
  cr_assert_str_eq(err_threads.message, err_one.message);
  jg_error_clear(&err_threads);
  cr_assert_neq(grid_with_late_joiner(&r, k, NK, z, 3, &three, &err_threads), JG_OK);
  cr_assert_null(three);
  cr_assert_str_eq(err_threads.message, err_one.message);
  cr_assert_eq(jg_growth_grid_compute_threads(r.m, r.w, k, NK, z, 3, 0, &three, &err_threads),
               JG_EINVAL);
  real_case_close(&r);
}


/* The k -> 0 reference solved once and given to the scales and to the
 * growth grid (as `run` does): the same scales and the same grid, to the
 * last bit, as when each solves it itself. */
Test(integrator, scales_and_grid_from_a_given_limit_are_the_ones_that_solve_it) {
  real_case r;
  open_rosenbrock(&r);
  const double z[3] = {1000.0, 100.0, 10.0};
  const double k[10] = {1.0, 3.0, 10.0, 30.0, 100.0, 300.0, 1e3, 3e3, 1e4, 3e4};
  jg_error err;
  jg_error_clear(&err);
  jg_perturb_limit limit[3];
  cr_assert_eq(jg_perturb_solve_limit(r.m, r.w, z, 3, limit, &err), JG_OK, "%s", err.message);
  jg_scales_point solved[3], given[3];
  cr_assert_eq(jg_scales_compute(r.m, r.w, z, 3, solved, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_scales_compute_from_limit(r.m, r.w, z, 3, limit, given, &err), JG_OK, "%s",
               err.message);
  cr_assert(memcmp(solved, given, sizeof solved) == 0, "the scales differ");
  jg_growth_grid *own = NULL, *shared = NULL;
  cr_assert_eq(jg_growth_grid_compute(r.m, r.w, k, 10, z, 3, &own, &err), JG_OK, "%s",
               err.message);
  jg_growth_grid_job *job = jg_growth_grid_job_new(r.m, k, 10, z, 3, limit, &err);
  cr_assert_not_null(job, "%s", err.message);
  jg_growth_grid_job_work(job, r.w);
  cr_assert_eq(jg_growth_grid_job_result(job, &shared, &err), JG_OK, "%s", err.message);
  jg_growth_grid_job_free(job);
  cr_assert(memcmp(own->points, shared->points, sizeof(jg_perturb_point) * 10 * 3) == 0);
  cr_assert(memcmp(own->limit, shared->limit, sizeof(jg_perturb_limit) * 3) == 0);
  cr_assert(memcmp(own->D_ref, shared->D_ref, sizeof(double) * 3) == 0);
  jg_growth_grid_free(own);
  jg_growth_grid_free(shared);
  real_case_close(&r);
}

/* A model whose coefficient tables end at z = 10 (what a scan point with
 * no later output builds): the same nodes as the model that ends today,
 * so the same numbers at z >= 10 but for the natural end condition of the
 * shorter splines, 8 nodes past z = 10, whose effect dies away within a
 * few nodes (measured: identical to the last bit at z >= 100, at z = 10 at
 * most 7e-13 relative, at k = 1e5 where the gas contrast is tiny, 2e-14
 * below; asserted to 1e-11); a later redshift is refused, as is an end
 * outside [0, z_initial). */
Test(integrator, model_ending_early_gives_the_same_numbers) {
  real_case r;
  open_rosenbrock(&r);
  jg_error err;
  jg_error_clear(&err);
  jg_perturb_model *early =
      jg_perturb_model_new_until(r.th, &r.p.perturbations, NULL, 10.0, &err);
  cr_assert_not_null(early, "%s", err.message);
  jg_perturb_workspace *w = jg_perturb_workspace_new(early, &err);
  cr_assert_not_null(w, "%s", err.message);
  enum { NK = 8, NZ = 4 };
  const double k[NK] = {1.0, 10.0, 100.0, 300.0, 1000.0, 3000.0, 1e4, 1e5};
  const double z[NZ] = {3000.0, 1000.0, 100.0, 10.0};
  jg_perturb_point a[NK * NZ], b[NK * NZ];
  cr_assert_eq(jg_perturb_solve_many(early, w, k, NK, z, NZ, a, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_perturb_solve_many(r.m, r.w, k, NK, z, NZ, b, &err), JG_OK, "%s", err.message);
  for (int i = 0; i < NK * NZ; i++) {
    ASSERT_REL(a[i].b_over_c, b[i].b_over_c, 1e-11, "k = %g, z = %g", k[i / NZ], z[i % NZ]);
    ASSERT_REL(a[i].delta_c, b[i].delta_c, 1e-11, "k = %g, z = %g", k[i / NZ], z[i % NZ]);
  }
  jg_perturb_limit la[NZ], lb[NZ];
  cr_assert_eq(jg_perturb_solve_limit(early, w, z, NZ, la, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_perturb_solve_limit(r.m, r.w, z, NZ, lb, &err), JG_OK, "%s", err.message);
  for (int i = 0; i < NZ; i++)
    ASSERT_REL(la[i].gh_inverse_kf2, lb[i].gh_inverse_kf2, 1e-11, "z = %g", z[i]);
  const double later = 9.0;
  cr_assert_eq(jg_perturb_solve_many(early, w, k, 1, &later, 1, a, &err), JG_EINVAL);
  cr_assert(strstr(err.message, "beyond the end of the medium") != NULL, "%s", err.message);
  jg_perturb_workspace_free(w);
  jg_perturb_model_free(early);
  cr_assert_null(jg_perturb_model_new_until(r.th, &r.p.perturbations, NULL,
                                            r.p.perturbations.z_initial, &err));
  cr_assert_eq(err.status, JG_EINVAL);
  real_case_close(&r);
}

/* ---- the per-batch-size compiled copies and the sparse kernel ---------------- */

typedef struct any_dim_outputs {
  int len;
  double y[40][PT_ROS_MAX_MODES * PT_ROS_MAX_DIM];
} any_dim_outputs;

/* A linear system of any dimension n (a made-up demo, not physics): decay
 * rates from 0.5 to ~5e4 on the diagonal, falling as e^{-4x} (stiff at
 * first, not at the end), and couplings that differ per mode, so that every
 * part of the integrator (the factorisation with fill-in, rejected steps,
 * both interpolants, grouped error scales) takes part. A(x) = D e^{-4x} +
 * C (1 + x); non-zero on the diagonal, next to it and at j = i + 3 mod n. */
typedef struct any_dim {
  int n, modes;
  const unsigned char *pattern; /* the entries written (NULL: all) */
  any_dim_outputs *out;
  int distinct; /* lanes from this one on repeat the mode before (0: every lane its own) */
} any_dim;
static int any_dim_mode(const any_dim *s, int lane) {
  return s->distinct > 0 && lane >= s->distinct ? s->distinct - 1 : lane;
}
static int any_dim_matrices(void *ctx, double x, double *A, double *dA, double *rate) {
  const any_dim *s = ctx;
  const int n = s->n, M = s->modes;
  double fastest = 0.0;
  int e = 0;
  for (int i = 0; i < n; i++)
    for (int j = 0; j < n; j++) {
      if (s->pattern && !s->pattern[i * n + j]) continue;
      for (int lane = 0; lane < M; lane++) {
        const int b = any_dim_mode(s, lane);
        const double decay = i == j ? -0.5 * pow(10.0, 5.0 * i / n) * (1.0 + 0.3 * b) : 0.0;
        const double coupling = abs(i - j) == 1 ? sin(1.0 + i + 2.0 * j + 3.0 * b)
                                : j == (i + 3) % n ? 0.1 * cos(i + b) : 0.0;
        A[e * M + lane] = decay * exp(-4.0 * x) + coupling * (1.0 + x);
        if (dA) dA[e * M + lane] = -4.0 * decay * exp(-4.0 * x) + coupling;
        fastest = fmax(fastest, fabs(decay) * exp(-4.0 * x) + 2.0 * (1.0 + x));
      }
      e++;
    }
  if (rate) *rate = fastest;
  return 0;
}
static void any_dim_pattern(int n, unsigned char *pattern) {
  for (int i = 0; i < n; i++)
    for (int j = 0; j < n; j++)
      pattern[i * n + j] = i == j || abs(i - j) == 1 || j == (i + 3) % n;
}

static void any_dim_collect(void *ctx, int index, const double *y) {
  any_dim_outputs *c = ((any_dim *)ctx)->out;
  memcpy(c->y[index], y, sizeof(double) * (size_t)c->len);
}

/* One solve of the demo system (the lanes from `distinct` on copies of the
 * mode before; 0: none); returns the end state in y. */
static void any_dim_solve_lanes(int n, int modes, int distinct, const unsigned char *pattern,
                                int generic, pt_ros_work *w, any_dim_outputs *out, double *y) {
  enum { N_OUT = 40 };
  double x_out[N_OUT];
  for (int i = 0; i < N_OUT; i++) x_out[i] = 0.02 + 3.0 * i / N_OUT;
  any_dim s = {n, modes, pattern, out, distinct};
  int group[PT_ROS_MAX_DIM];
  for (int i = 0; i < n; i++) group[i] = i / 3;
  memset(out, 0, sizeof *out);
  out->len = n * modes;
  pt_ros_problem p = {n, modes, any_dim_matrices, any_dim_collect, &s, group,
                      1e-9, 1e-12, 0.5, 0.5, 100000, pattern, NULL};
  for (int lane = 0; lane < modes; lane++)
    for (int i = 0; i < n; i++) y[lane * n + i] = 1.0 + 0.25 * cos(any_dim_mode(&s, lane) * n + i);
  double fail;
  memset(&w->stats, 0, sizeof w->stats);
  const int code = generic ? jg__ros_integrate_generic(&p, w, 0.0, y, x_out, N_OUT, &fail)
                           : jg__ros_integrate(&p, w, 0.0, y, x_out, N_OUT, &fail);
  cr_assert_eq(code, PT_ROS_OK, "dimension %d, %d modes: code %d at x = %g", n, modes, code, fail);
}
static void any_dim_solve(int n, int modes, const unsigned char *pattern, int generic,
                          pt_ros_work *w, any_dim_outputs *out, double *y) {
  any_dim_solve_lanes(n, modes, 0, pattern, generic, w, out, y);
}

/* jg__ros_integrate runs a copy compiled for each common batch size
 * (rosenbrock.c): each must give the generic copy's results to the last
 * bit (the same arithmetic in the same order; a compiler that reordered or
 * fused it would show here), with the same steps and rejections. */
Test(integrator, compiled_copies_match_the_generic_one_exactly) {
  static const int dims[] = {4, 6, 12, 18}, batch[] = {1, PT_ROS_HALF_BATCH, PT_ROS_MAX_MODES};
  static any_dim_outputs fast, generic;
  static pt_ros_work work_generic;
  for (size_t d = 0; d < sizeof dims / sizeof *dims; d++)
    for (size_t m = 0; m < sizeof batch / sizeof *batch; m++) {
      const int n = dims[d], modes = batch[m];
      unsigned char pattern[PT_ROS_MAX_ENTRIES];
      any_dim_pattern(n, pattern);
      double y_fast[PT_ROS_MAX_LEN], y_generic[PT_ROS_MAX_LEN];
      any_dim_solve(n, modes, pattern, 0, &work, &fast, y_fast);
      any_dim_solve(n, modes, pattern, 1, &work_generic, &generic, y_generic);
      cr_assert_gt(work.stats.rejected, 0, "dimension %d: no rejected step tried", n);
      cr_assert_eq(work.stats.steps, work_generic.stats.steps, "dimension %d", n);
      cr_assert_eq(work.stats.rejected, work_generic.stats.rejected, "dimension %d", n);
      cr_assert(memcmp(y_fast, y_generic, sizeof(double) * (size_t)(n * modes)) == 0,
                "dimension %d, %d modes: end states differ", n, modes);
      cr_assert(memcmp(fast.y, generic.y, sizeof fast.y) == 0,
                "dimension %d, %d modes: outputs differ", n, modes);
    }
}

/* A batch of a size without a compiled copy is padded to one with copies of
 * its last mode (jg__ros_lanes): the padded batch must give its real modes
 * the unpadded batch's numbers to the last bit, with the same steps (the
 * copies repeat the largest error, they never raise it). */
Test(integrator, padding_with_copies_changes_nothing) {
  static any_dim_outputs padded, plain;
  static pt_ros_work work_plain;
  for (int modes = 2; modes < PT_ROS_MAX_MODES; modes++) {
    const int n = 6, lanes = jg__ros_lanes(modes);
    if (lanes == modes) continue;
    cr_assert(lanes > modes && lanes <= PT_ROS_MAX_MODES);
    unsigned char pattern[PT_ROS_MAX_ENTRIES];
    any_dim_pattern(n, pattern);
    double y_padded[PT_ROS_MAX_LEN], y_plain[PT_ROS_MAX_LEN];
    any_dim_solve_lanes(n, lanes, modes, pattern, 0, &work, &padded, y_padded);
    any_dim_solve_lanes(n, modes, 0, pattern, 1, &work_plain, &plain, y_plain);
    cr_assert_eq(work.stats.steps, work_plain.stats.steps, "%d modes in %d lanes", modes, lanes);
    cr_assert_eq(work.stats.rejected, work_plain.stats.rejected, "%d modes", modes);
    cr_assert(memcmp(y_padded, y_plain, sizeof(double) * (size_t)(n * modes)) == 0,
              "%d modes in %d lanes: end states differ", modes, lanes);
    for (int o = 0; o < 40; o++)
      cr_assert(memcmp(padded.y[o], plain.y[o], sizeof(double) * (size_t)(n * modes)) == 0,
                "%d modes in %d lanes: output %d differs", modes, lanes, o);
  }
}

/* The pattern decides which entries are worked on, not the result: the
 * entries it leaves out are zeros, which add nothing to a product or an
 * elimination (x - 0 y = x exactly), so the same system given as a full
 * matrix must give the same numbers to the last bit. */
Test(integrator, sparse_pattern_gives_the_dense_result_exactly) {
  static any_dim_outputs sparse, dense;
  static pt_ros_work work_dense;
  const int n = 11, modes = 3;
  unsigned char pattern[PT_ROS_MAX_ENTRIES];
  any_dim_pattern(n, pattern);
  double y_sparse[PT_ROS_MAX_LEN], y_dense[PT_ROS_MAX_LEN];
  any_dim_solve(n, modes, pattern, 0, &work, &sparse, y_sparse);
  any_dim_solve(n, modes, NULL, 0, &work_dense, &dense, y_dense);
  cr_assert_eq(work.stats.steps, work_dense.stats.steps);
  cr_assert_eq(work.stats.rejected, work_dense.stats.rejected);
  for (int i = 0; i < n * modes; i++)
    cr_assert(y_sparse[i] == y_dense[i], "component %d: %.17g against %.17g", i, y_sparse[i],
              y_dense[i]);
  for (int o = 0; o < 40; o++)
    for (int i = 0; i < n * modes; i++)
      cr_assert(sparse.y[o][i] == dense.y[o][i], "output %d component %d", o, i);
}

/* Without row interchanges a step matrix can have a zero pivot where one
 * with interchanges would not: y'' = y (A = [[0, 1], [1, 0]]) with
 * 1/(h gamma) = 1 gives (1/(h gamma)) I - A = [[1, -1], [-1, 1]], singular
 * at the second pivot. The step must be refused and retried shorter, and
 * the solution still be right: y = cosh x + sinh x = e^x (analytic). */
static int swap_matrices(void *ctx, double x, double *A, double *dA, double *rate) {
  (void)ctx, (void)x;
  const double a[4] = {0.0, 1.0, 1.0, 0.0};
  for (int i = 0; i < 4; i++) {
    A[i] = a[i];
    if (dA) dA[i] = 0.0;
  }
  if (rate) *rate = 1.0;
  return 0;
}
Test(integrator, zero_pivot_step_is_retried_shorter) {
  collected c = {0};
  const double h = 4.0; /* gamma = 1/4 in RODAS: 1/(h gamma) = 1 */
  pt_ros_problem p = {2, 1, swap_matrices, collect, &c, NULL, 1e-10, 1e-12, h, h, 100000, NULL, NULL};
  double y[3] = {1.0, 1.0, 0.0}, x_end = 6.0, x_fail;
  memset(&work.stats, 0, sizeof work.stats);
  cr_assert_eq(jg__ros_integrate(&p, &work, 0.0, y, &x_end, 1, &x_fail), PT_ROS_OK);
  cr_assert_gt(work.stats.rejected, 0, "the singular first step was not refused");
  ASSERT_REL(y[0], exp(6.0), 1e-8, "y(6)");
  ASSERT_REL(y[1], exp(6.0), 1e-8, "y'(6)");
}
