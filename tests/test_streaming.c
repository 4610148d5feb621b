/*
 * The streaming velocity (src/perturbations/streaming.c,
 * src/results/stream_results.c): quadrature rules, the analytic phase
 * rotation, the identities at zero velocity, the conjugate symmetry, the
 * small-k law, node doubling, the 1-D average against the 2-D one, and
 * published values (src/PHYSICS.md §7.8, §10.9). Each check names its source.
 */
#include <gsl/gsl_eigen.h>
#include <gsl/gsl_sf_gamma.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

#include "jeansgrow/jeansgrow.h"
#include "real_case.h"
#include "tables.h"
#include "support.h"

TestSuite(streaming, .init = quiet_gsl);

/* ---- the reference cosmology with a flow --------------------------------------- */

typedef struct stream_case {
  real_case r;
  jg_stream_model *sm;
} stream_case;

/* The reference cosmology, v_rms from z = 1000 (the case at 30 km/s),
 * with node counts and tolerance given. */
static void stream_open(stream_case *c, double v_rms, int n_v, int n_mu, double rel_tol) {
  jg_params p;
  jg_params_set_defaults(&p);
  p.perturbations.rel_tol = 1e-8;
  p.streaming.rms_velocity_kms = v_rms;
  p.streaming.start_redshift = 1000.0;
  p.streaming.velocity_nodes = n_v;
  p.streaming.direction_nodes = n_mu;
  p.streaming.rel_tol = rel_tol;
  real_case_open(&c->r, &p);
  jg_error err;
  c->sm = jg_stream_model_new(c->r.m, &c->r.p.streaming, &err);
  cr_assert_not_null(c->sm, "%s", err.message);
}

static void stream_close(stream_case *c) {
  jg_stream_model_free(c->sm);
  real_case_close(&c->r);
}

static double power(const double *d) { return d[0] * d[0] + d[1] * d[1]; }

/* ---- rules ------------------------------------------------------------------- */

/* The rules integrate polynomials exactly (analytic: a Gaussian of variance
 * s^2 has <v^2m> = (2m-1)!! s^2m; int_0^1 mu^j dmu = 1/(j+1)): the velocity
 * rule of n nodes up to v^(4n-2), the direction rule up to mu^(2n-1). */
Test(streaming, rules_are_exact_on_polynomials) {
  for (int n = 1; n <= JG_STREAM_MAX_NODES; n++) {
    double x[JG_STREAM_MAX_NODES], w[JG_STREAM_MAX_NODES];
    cr_assert_eq(jg_stream_gauss_hermite_half(n, x, w), 0);
    for (int m = 0; m <= 2 * n - 1 && m <= 20; m++) {
      double sum = 0.0, expected = sqrt(JG_PI) / 2.0; /* int_0^inf x^2m exp(-x^2) */
      for (int i = 0; i < n; i++) sum += w[i] * pow(x[i], 2 * m);
      for (int j = 1; j <= m; j++) expected *= (2.0 * j - 1.0) / 2.0;
      ASSERT_REL(sum, expected, 1e-11, "Hermite n = %d, x^%d", n, 2 * m);
    }
    cr_assert_eq(jg_stream_gauss_legendre_unit(n, x, w), 0);
    for (int j = 0; j <= 2 * n - 1; j++) {
      double sum = 0.0;
      for (int i = 0; i < n; i++) sum += w[i] * pow(x[i], j);
      ASSERT_REL(sum, 1.0 / (j + 1.0), 1e-12, "Legendre n = %d, mu^%d", n, j);
    }
  }
  cr_assert_neq(jg_stream_gauss_hermite_half(JG_STREAM_MAX_NODES + 1, NULL, NULL), 0);
}

/* ---- an analytic medium: pure advection -------------------------------------- */

/* Einstein-de Sitter (a H = a^(-1/2) in units of the flow's velocity per
 * length), with gravity, pressure, drag and relaxation off. */
static int still_eval(const void *ctx, double ln_a, jg_medium_coefficients *c) {
  (void)ctx, (void)ln_a;
  memset(c, 0, sizeof *c);
  c->dlnH_dlna = -1.5;
  c->baryon_fraction = 0.15;
  return 0;
}

static double eds_hubble(const void *ctx, double ln_a) {
  (void)ctx;
  return exp(-0.5 * ln_a);
}

/* With gravity, pressure and drag off the baryons released moving with the
 * dark matter (delta_b = 1, w = 0) only rotate in phase:
 * delta_b = exp(-i int A d ln a), A = k v_par a_s / a / (a H), so in EdS
 * int A dx = 2 k v_par a_s (a_s^(-1/2) - a^(-1/2)) (analytic; src/PHYSICS.md
 * §7.8). The velocity and the temperature fluctuation stay 0, the dark
 * matter does not see the flow. Through the jg_medium seam. */
Test(streaming, analytic_phase_rotation) {
  jg_params p;
  jg_params_set_defaults(&p);
  p.perturbations.rel_tol = 1e-10;
  p.perturbations.abs_tol = 1e-12;
  p.streaming.rms_velocity_kms = 1.0;
  p.streaming.start_redshift = 1000.0;
  p.streaming.rel_tol = 1e-10;
  jg_medium md = {still_eval, NULL, 0.0, -40.0, 10.0, 0.0, 1e30, 0.0};
  const jg_perturb_start start = {1.0, 0.0, 0.0, 0, 0.0};
  jg_error err;
  jg_perturb_model *m = jg_perturb_model_new_medium(&md, &p.perturbations, &start, &err);
  cr_assert(m, "%s", err.message);
  jg_perturb_workspace *w = jg_perturb_workspace_new(m, &err);
  jg_stream_model *sm = jg_stream_model_new_flow(m, &p.streaming, eds_hubble, NULL, &err);
  cr_assert(w && sm, "%s", err.message);
  const double k = 50.0, v[] = {1.0, 0.4, -2.0};
  const double z[] = {2000.0, 1000.0, 500.0, 100.0, 10.0, 0.0};
  jg_stream_state out[3 * 6];
  cr_assert_eq(jg_stream_solve(sm, w, k, v, 3, z, 6, out, &err), JG_OK, "%s", err.message);
  const double a_s = 1.0 / 1001.0;
  for (int iv = 0; iv < 3; iv++)
    for (int iz = 0; iz < 6; iz++) {
      const double a = 1.0 / (1.0 + z[iz]);
      const double phase = a > a_s ? 2.0 * k * v[iv] * a_s * (1.0 / sqrt(a_s) - 1.0 / sqrt(a)) : 0.0;
      const jg_stream_state *o = &out[iv * 6 + iz];
      cr_assert(fabs(o->delta_b[0] - cos(phase)) < 1e-7 && fabs(o->delta_b[1] + sin(phase)) < 1e-7,
                "v = %g, z = %g: delta_b = %.10g %+.10g i, expected phase %.10g", v[iv], z[iz],
                o->delta_b[0], o->delta_b[1], phase);
      cr_assert(fabs(o->delta_T[0]) < 1e-12 && fabs(o->delta_T[1]) < 1e-12);
      cr_assert_eq(o->delta_c[1], 0.0, "the dark matter is not advected");
    }
  jg_stream_model_free(sm);
  jg_perturb_workspace_free(w);
  jg_perturb_model_free(m);
}

/* ---- identities on the real history ------------------------------------------- */

/* Along mu = 0 (v_par = 0) the streaming system is the ordinary one: the
 * imaginary part stays exactly 0 and the real part is the unstreamed
 * solution (here from the GSL stepper at rel_tol 1e-10) to the solves'
 * tolerance; v -> -v is the complex conjugate (the two solves run in one
 * batch on one step sequence: equal to rounding). Identities of the
 * equations (src/PHYSICS.md §7.8). */
Test(streaming, mu_zero_and_conjugate_symmetry) {
  stream_case c;
  stream_open(&c, 30.0, 16, 8, 1e-9);
  const double k = 300.0, z[] = {1100.0, 500.0, 50.0, 20.0, 10.0};
  const double v[] = {0.0, 0.8, -0.8};
  jg_stream_state s[3 * 5];
  jg_perturb_point ref[5];
  jg_error err;
  cr_assert_eq(jg_stream_solve(c.sm, c.r.w, k, v, 3, z, 5, s, &err), JG_OK, "%s", err.message);
  jg_perturb_settings tight = c.r.p.perturbations;
  tight.stepper = JG_PERTURB_STEPPER_MSBDF_RK8PD;
  tight.rel_tol = 1e-10;
  tight.abs_tol = 1e-12;
  jg_perturb_model *m;
  jg_perturb_workspace *w;
  real_case_model(&c.r, &tight, NULL, &m, &w);
  cr_assert_eq(jg_perturb_solve(m, w, k, z, 5, ref, &err), JG_OK, "%s", err.message);
  for (int iz = 0; iz < 5; iz++) {
    cr_assert_eq(s[iz].delta_b[1], 0.0);
    cr_assert_eq(s[iz].delta_c[1], 0.0);
    ASSERT_REL(s[iz].delta_b[0], ref[iz].delta_b, 1e-6, "z = %g", z[iz]);
    ASSERT_REL(s[iz].delta_c[0], ref[iz].delta_c, 1e-7, "z = %g", z[iz]);
    ASSERT_REL(s[iz].delta_T[0], ref[iz].delta_T, 1e-6, "z = %g", z[iz]);
    const jg_stream_state *p = &s[5 + iz], *q = &s[10 + iz];
    const double size = sqrt(power(p->delta_b));
    cr_assert(fabs(p->delta_b[0] - q->delta_b[0]) <= 1e-9 * size &&
                  fabs(p->delta_b[1] + q->delta_b[1]) <= 1e-9 * size,
              "z = %g: %g%+gi against %g%+gi", z[iz], p->delta_b[0], p->delta_b[1], q->delta_b[0],
              q->delta_b[1]);
    ASSERT_REL(power(p->delta_c), power(q->delta_c), 1e-9, "z = %g", z[iz]);
  }
  jg_perturb_workspace_free(w);
  jg_perturb_model_free(m);
  stream_close(&c);
}

/* streaming.rms_velocity_kms = 0 switches the stage off: every power is 1
 * exactly and the streamed scales are the unstreamed ones, digit for digit
 * (definition, src/PHYSICS.md §7.8). */
Test(streaming, zero_rms_is_the_unstreamed_solution) {
  stream_case c;
  stream_open(&c, 0.0, 16, 8, 1e-5);
  const double k[] = {10.0, 300.0}, z[] = {500.0, 20.0};
  jg_stream_power pw[4];
  jg_error err;
  cr_assert_eq(jg_stream_powers(c.sm, c.r.w, k, 2, z, 2, 1, pw, &err), JG_OK, "%s", err.message);
  for (int i = 0; i < 4; i++)
    cr_assert(pw[i].b_power == 1.0 && pw[i].c_power == 1.0 && pw[i].b_power_rms == 1.0 &&
              pw[i].b_power_patch == 1.0);
  jg_scales_point sc[2];
  cr_assert_eq(jg_scales_compute(c.r.m, c.r.w, z, 2, sc, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_scales_add_streaming(c.r.m, c.r.w, &c.r.p.streaming, z, 2, sc, &err), JG_OK);
  for (int i = 0; i < 2; i++) {
    cr_assert_eq(sc[i].k_filter_stream, sc[i].k_filter_solved);
    cr_assert_eq(sc[i].m_filter_stream, sc[i].m_filter_solved);
    cr_assert_eq(sc[i].k_half_stream, sc[i].k_half);
  }
  stream_close(&c);
}

/* ---- laws and convergence ------------------------------------------------------ */

/* At small k the loss of baryon power grows as k^2 v_rms^2 (the first
 * order in k v_bc of the advection, src/PHYSICS.md §7.8): the exponents
 * fitted between k = 3 and 6 /Mpc and between v_rms = 15 and 30 km/s are 2
 * (1 %: the k^4 term is ~ (k/k_F)^2 ~ 1e-3 of the loss, the solves' error
 * ~ 1e-9 on a loss of ~ 3e-4), and the loss equals -k^2 times the exact
 * coefficient of jg_stream_limit (1 %, the same reasons). */
Test(streaming, small_k_loss_goes_as_k2_v2) {
  const double k[] = {3.0, 6.0}, z[] = {50.0, 20.0};
  double loss[2][2][2]; /* [v][k][z] */
  double coefficient[2];
  for (int iv = 0; iv < 2; iv++) {
    stream_case c;
    stream_open(&c, iv == 0 ? 30.0 : 15.0, 16, 8, 1e-10);
    jg_stream_power pw[4];
    jg_error err;
    cr_assert_eq(jg_stream_powers(c.sm, c.r.w, k, 2, z, 2, 0, pw, &err), JG_OK, "%s", err.message);
    for (int ik = 0; ik < 2; ik++)
      for (int iz = 0; iz < 2; iz++) loss[iv][ik][iz] = 1.0 - pw[ik * 2 + iz].b_power;
    if (iv == 0)
      cr_assert_eq(jg_stream_limit(c.sm, c.r.w, z, 2, coefficient, &err), JG_OK, "%s", err.message);
    stream_close(&c);
  }
  for (int iz = 0; iz < 2; iz++) {
    ASSERT_REL(log(loss[0][1][iz] / loss[0][0][iz]) / log(2.0), 2.0, 0.01, "k exponent, z = %g",
               z[iz]);
    ASSERT_REL(log(loss[0][0][iz] / loss[1][0][iz]) / log(2.0), 2.0, 0.01, "v exponent, z = %g",
               z[iz]);
    ASSERT_REL(loss[0][0][iz], -k[0] * k[0] * coefficient[iz], 0.01, "coefficient, z = %g", z[iz]);
  }
}

/* Doubling the node counts moves the averages by less than 1e-4 at the
 * defaults where they are resolved, k <= 400 /Mpc (src/PHYSICS.md §7.8 and
 * the README's limits: above, |delta_b|^2 oscillates in v_par on scales
 * ~ c_s and needs more nodes than the keys allow). */
Test(streaming, node_doubling) {
  const double k[] = {50.0, 150.0, 300.0, 400.0}, z[] = {50.0, 20.0, 10.0};
  jg_stream_power pw[2][12];
  for (int d = 0; d < 2; d++) {
    stream_case c;
    stream_open(&c, 30.0, 16 << d, 8 << d, 1e-5);
    jg_error err;
    cr_assert_eq(jg_stream_powers(c.sm, c.r.w, k, 4, z, 3, 1, pw[d], &err), JG_OK, "%s",
                 err.message);
    stream_close(&c);
  }
  for (int i = 0; i < 12; i++) {
    cr_assert(fabs(pw[0][i].b_power - pw[1][i].b_power) < 1e-4, "k = %g z = %g: %.8f %.8f",
              k[i / 3], z[i % 3], pw[0][i].b_power, pw[1][i].b_power);
    cr_assert(fabs(pw[0][i].c_power - pw[1][i].c_power) < 1e-4, "k = %g z = %g", k[i / 3], z[i % 3]);
    cr_assert(fabs(pw[0][i].b_power_rms - pw[1][i].b_power_rms) < 1e-4, "k = %g z = %g",
              k[i / 3], z[i % 3]);
  }
}

/* Generalised Gauss-Laguerre nodes (weight t^alpha e^-t) by the Golub-Welsch
 * eigenvalue method (common practice, no source): the Jacobi matrix has
 * diagonal 2i + 1 + alpha and off-diagonal sqrt(i (i + alpha)). */
static void gauss_laguerre(int n, double alpha, double *t, double *w) {
  gsl_matrix *J = gsl_matrix_calloc((size_t)n, (size_t)n), *V = gsl_matrix_alloc((size_t)n, (size_t)n);
  gsl_vector *e = gsl_vector_alloc((size_t)n);
  gsl_eigen_symmv_workspace *ws = gsl_eigen_symmv_alloc((size_t)n);
  for (int i = 0; i < n; i++) {
    gsl_matrix_set(J, (size_t)i, (size_t)i, 2.0 * i + 1.0 + alpha);
    if (i > 0) {
      const double b = sqrt(i * (i + alpha));
      gsl_matrix_set(J, (size_t)i, (size_t)i - 1, b);
      gsl_matrix_set(J, (size_t)i - 1, (size_t)i, b);
    }
  }
  gsl_eigen_symmv(J, e, V, ws);
  for (int i = 0; i < n; i++) {
    t[i] = gsl_vector_get(e, (size_t)i);
    const double v0 = gsl_matrix_get(V, 0, (size_t)i);
    w[i] = gsl_sf_gamma(alpha + 1.0) * v0 * v0;
  }
  gsl_eigen_symmv_free(ws);
  gsl_vector_free(e);
  gsl_matrix_free(V);
  gsl_matrix_free(J);
}

/* The 1-D average over v_par (Gaussian of variance v_rms^2/3) equals the
 * 2-D average over direction and the Maxwellian speed it stands for
 * (analytic: the projection of an isotropic 3-D Gaussian on one axis;
 * src/PHYSICS.md §7.8): mu by Gauss-Legendre on [0, 1], the speed by
 * generalised Gauss-Laguerre in t = 3 v^2 / (2 v_rms^2) (weight t^(1/2)
 * e^-t, normalised by Gamma(3/2)), 20 x 20 nodes; the 1-D rule at its
 * defaults. 2e-5: both rules converged to better than 1e-5 at k = 150 (their
 * own doubling). */
Test(streaming, maxwellian_average_is_the_gaussian_one) {
  stream_case c;
  stream_open(&c, 30.0, 16, 8, 1e-8);
  enum { N = 20 };
  const double k = 150.0, z[] = {50.0, 20.0};
  double mu[N], wmu[N], t[N], wt[N], v[N * N];
  cr_assert_eq(jg_stream_gauss_legendre_unit(N, mu, wmu), 0);
  gauss_laguerre(N, 0.5, t, wt);
  for (int i = 0; i < N; i++)
    for (int j = 0; j < N; j++) v[i * N + j] = mu[i] * sqrt(2.0 * t[j] / 3.0);
  jg_stream_state *s = malloc(sizeof *s * N * N * 2);
  jg_stream_state s0[2];
  jg_stream_power pw[2];
  jg_error err;
  const double zero = 0.0;
  cr_assert_eq(jg_stream_solve(c.sm, c.r.w, k, v, N * N, z, 2, s, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_stream_solve(c.sm, c.r.w, k, &zero, 1, z, 2, s0, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_stream_powers(c.sm, c.r.w, &k, 1, z, 2, 0, pw, &err), JG_OK, "%s", err.message);
  for (int iz = 0; iz < 2; iz++) {
    double b = 0.0, cdm = 0.0;
    for (int i = 0; i < N; i++)
      for (int j = 0; j < N; j++) {
        const double weight = wmu[i] * wt[j] / gsl_sf_gamma(1.5);
        b += weight * power(s[(i * N + j) * 2 + iz].delta_b);
        cdm += weight * power(s[(i * N + j) * 2 + iz].delta_c);
      }
    ASSERT_REL(pw[iz].b_power, b / power(s0[iz].delta_b), 2e-5, "z = %g", z[iz]);
    ASSERT_REL(pw[iz].c_power, cdm / power(s0[iz].delta_c), 2e-5, "z = %g", z[iz]);
  }
  free(s);
  stream_close(&c);
}

/* ---- published values ----------------------------------------------------------- */

/* Tseliakhovich & Hirata (2010, PRD 82, 083520): the relative velocity,
 * about 30 km/s rms at recombination, is supersonic, Mach number ~ 5
 * against the gas sound speed (values from memory): our adiabatic sound
 * speed at z = 1000 against 30 km/s, 4 to 7 (the Mach number recalled only
 * to its first digit). Tseliakhovich, Barkana & Hirata (2011, MNRAS 418,
 * 906) and Naoz, Yoshida & Gnedin (2012, ApJ 747, 128): with the rms flow
 * the filtering (characteristic) mass of the gas at z ~ 20 rises by about
 * an order of magnitude (value from memory): M_F_stream / M_F between 3 and
 * 30. Tseliakhovich & Hirata (2010): the dark-matter power at k ~ 100-500
 * /Mpc and z ~ 20-40 falls by of order 10 % (value from memory): between 2
 * and 20 % at k = 200 /Mpc, z = 40. The baryons lose more than the dark
 * matter there (the flow acts on them directly). */
Test(streaming, published_suppression_and_filtering_mass) {
  stream_case c;
  stream_open(&c, 30.0, 16, 8, 1e-5);
  jg_thermal_state ts;
  jg_thermal_state_at(c.r.th, 1000.0, &ts);
  const double c_s = sqrt(5.0 / 3.0 * JG_K_BOLTZMANN * ts.T_gas / (ts.mu * JG_M_HYDROGEN_ATOM)) / 1e3;
  cr_assert(30.0 / c_s > 4.0 && 30.0 / c_s < 7.0, "Mach %g", 30.0 / c_s);
  const double z[] = {40.0, 20.0};
  jg_scales_point sc[2];
  jg_error err;
  cr_assert_eq(jg_scales_compute(c.r.m, c.r.w, z, 2, sc, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_scales_add_streaming(c.r.m, c.r.w, &c.r.p.streaming, z, 2, sc, &err), JG_OK, "%s",
               err.message);
  const double mass_ratio = sc[1].m_filter_stream / sc[1].m_filter_solved;
  cr_assert(mass_ratio > 3.0 && mass_ratio < 30.0, "M_F_stream / M_F = %g", mass_ratio);
  cr_assert(sc[1].half_stream_found && sc[1].k_half_stream < sc[1].k_half);
  const double k = 200.0;
  jg_stream_power pw[2];
  cr_assert_eq(jg_stream_powers(c.sm, c.r.w, &k, 1, z, 2, 0, pw, &err), JG_OK, "%s", err.message);
  cr_assert(1.0 - pw[0].c_power > 0.02 && 1.0 - pw[0].c_power < 0.20, "c_power %g", pw[0].c_power);
  cr_assert(pw[0].b_power < pw[0].c_power);
  stream_close(&c);
}

/* ---- the program ------------------------------------------------------------------ */

/* `run` with the flow (30 km/s from z = 1000) writes the streaming
 * columns for every k and redshift and the streamed scales: powers in
 * (0, 1] below the start on k <= 1000 /Mpc where the flow only suppresses
 * (measured on the reference grid; above, the ratio to the unstreamed
 * oscillating gas may exceed 1), exactly 1 at and above the start, and the
 * scales finite and below the unstreamed ones there. The run sets
 * streaming.rel_tol = 1e-6: at the default 1e-4 the averages carry errors
 * of about 1e-5 (the key's documented accuracy), more than the loss itself
 * at k = 1 /Mpc (4e-6 at z = 500), which the bound (0, 1] needs resolved. */
Test(streaming, program_run_writes_the_streaming_columns) {
  char dir[] = "/tmp/jg_streaming_XXXXXX";
  cr_assert_not_null(mkdtemp(dir));
  const char *args[] = {"run", JG_SOURCE_DIR "/params/reference.cfg", "-o", dir,
                        "--set", "streaming.rms_velocity_kms=30.0", "--set",
                        "streaming.start_redshift=1000.0", "--set", "perturbations.k_count=6",
                        "--set", "perturbations.k_max=1000.0", "--set",
                        "streaming.rel_tol=1e-6", NULL};
  char out[128], errs[128], path[128];
  snprintf(out, sizeof out, "%s/stdout", dir);
  snprintf(errs, sizeof errs, "%s/stderr", dir);
  const int status = child_wait(child_start(JG_PROGRAM, args, out, errs, 0));
  cr_assert(WIFEXITED(status) && WEXITSTATUS(status) == 0, "run failed");
  char *summary = read_text(out);
  cr_assert(summary && strstr(summary, "with the streaming velocity (rms 30 km/s from z = 1000)"));
  free(summary);
  snprintf(path, sizeof path, "%s/growth.txt", dir);
  char *text = read_text(path);
  table g;
  parse_table(text, &g);
  const int cz = column_index(&g, "z"), ck = column_index(&g, "k[1/Mpc]");
  const char *const names[] = {"stream_b_power", "stream_c_power", "stream_b_power_rms",
                               "stream_b_power_patch"};
  cr_assert_eq(g.n_rows, 6 * 8);
  for (int c = 0; c < 4; c++) {
    const int col = column_index(&g, names[c]);
    cr_assert_geq(col, 0, "%s", names[c]);
    for (int row = 0; row < g.n_rows; row++) {
      const double v = cell(&g, row, col), z = cell(&g, row, cz);
      if (z >= 1000.0) cr_assert_eq(v, 1.0, "%s at z = %g", names[c], z);
      else cr_assert(v > 0.0 && v <= 1.0, "%s = %g at z = %g, k = %g", names[c], v, z, cell(&g, row, ck));
    }
  }
  table_free(&g);
  free(text);
  snprintf(path, sizeof path, "%s/scales.txt", dir);
  text = read_text(path);
  table s;
  parse_table(text, &s);
  const int kf = column_index(&s, "k_F[1/Mpc]"), kfs = column_index(&s, "k_F_stream[1/Mpc]");
  const int kh = column_index(&s, "k_half[1/Mpc]"), khs = column_index(&s, "k_half_stream[1/Mpc]");
  cr_assert(kfs >= 0 && khs >= 0 && column_index(&s, "M_F_stream[Msun]") >= 0 &&
            column_index(&s, "M_half_stream[Msun]") >= 0);
  for (int row = 0; row < s.n_rows; row++) {
    const double z = cell(&s, row, 0);
    if (z >= 1000.0) {
      cr_assert_eq(cell(&s, row, kfs), cell(&s, row, kf));
      cr_assert_eq(cell(&s, row, khs), cell(&s, row, kh));
    } else {
      cr_assert(cell(&s, row, kfs) > 0.0 && cell(&s, row, kfs) < cell(&s, row, kf), "z = %g", z);
      cr_assert(cell(&s, row, khs) > 0.0 && cell(&s, row, khs) < cell(&s, row, kh), "z = %g", z);
    }
  }
  table_free(&s);
  free(text);
  const char *const files[] = {"history.txt", "epochs.txt", "scales.txt", "growth.txt", "stdout",
                               "stderr"};
  for (int i = 0; i < 6; i++) {
    snprintf(path, sizeof path, "%s/%s", dir, files[i]);
    remove(path);
  }
  rmdir(dir);
}
