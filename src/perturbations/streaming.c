/*
 * The streaming velocity (see include/jeansgrow/streaming.h): the complex
 * mode system and the k -> 0 expansion of it as system tables for the
 * Rosenbrock integrator (rosenbrock.c), the flow, the quadrature rules and
 * the averaged powers.
 *
 * Why a real system of twice the dimension: the integrator is written for
 * real linear systems, and [[M, A P], [-A P, M]] keeps every property it
 * relies on (linear, A(x) exact with its slope, one LU per step); complex
 * arithmetic would have needed a second integrator.
 *
 * Why the solution is branched at the start: before it the streaming
 * system is the ordinary one, and that era (recombination, drag) costs
 * most of the steps; every velocity node shares it.
 */
#include "jeansgrow/streaming.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "jeansgrow/background.h"
#include "jeansgrow/constants.h"
#include "perturb_internal.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* Velocity nodes whose weight is below this are left out: the powers
 * averaged are ratios of order 1 (a few near a zero of the unstreamed gas
 * contrast), so together they would move an average by less than ~1e-9,
 * and they are the costliest solves (the fastest advection: 16 nodes reach
 * 5.8 v_rms, weight 8e-23; 5 of 16 fall below). */
#define STREAM_NEGLIGIBLE_WEIGHT 1.0e-10

/* Longest step of the complex solves, in ln a. The ordinary systems cap
 * theirs at 0.05 so that recombination cannot be stepped over unseen; the
 * complex solves start at streaming.start_redshift <= 1500, where the error
 * estimate already sees the slow tail of recombination, and 0.25 took the
 * growth columns from 0.89 to 0.64 s on 104 k <= 1000 /Mpc with every
 * average within 1.2e-5 (start 1000) and 3.1e-5 (start 1500) of rel_tol 1e-8
 * solves (the default rel_tol 1e-4). */
#define STREAM_MAX_STEP 0.25

struct jg_stream_model {
  const jg_perturb_model *m;
  jg_streaming_settings s;
  double x_start;      /* ln a where the flow starts (not before the perturbations) */
  double hubble_start; /* a H there */
  jg_stream_hubble_fn hubble;
  const void *ctx;
  int n_v, n_mu;
  double v_node[JG_STREAM_MAX_NODES], v_weight[JG_STREAM_MAX_NODES];
  double mu_node[JG_STREAM_MAX_NODES], mu_weight[JG_STREAM_MAX_NODES];
};

/* ---- quadrature rules ------------------------------------------------------ */

/* Newton's method on the orthonormal Hermite polynomials from the usual
 * asymptotic first guesses (Numerical Recipes, section 4.6, common
 * practice); the largest root first, each next guess from the ones before. */
int jg_stream_gauss_hermite_half(int n_half, double *x, double *w) {
  if (n_half < 1 || n_half > JG_STREAM_MAX_NODES) return 1;
  const int n = 2 * n_half;
  const double pi_m4 = 0.7511255444649425; /* pi^(-1/4) */
  double z = 0.0;
  for (int i = 0; i < n_half; i++) {
    if (i == 0) z = sqrt(2.0 * n + 1.0) - 1.85575 * pow(2.0 * n + 1.0, -1.0 / 6.0);
    else if (i == 1) z -= 1.14 * pow((double)n, 0.426) / z;
    else if (i == 2) z = 1.86 * z - 0.86 * x[0];
    else if (i == 3) z = 1.91 * z - 0.91 * x[1];
    else z = 2.0 * z - x[i - 2];
    double pp = 0.0;
    int converged = 0;
    for (int it = 0; it < 100 && !converged; it++) {
      double p1 = pi_m4, p2 = 0.0;
      for (int j = 1; j <= n; j++) {
        const double p3 = p2;
        p2 = p1;
        p1 = z * sqrt(2.0 / j) * p2 - sqrt((j - 1.0) / j) * p3;
      }
      pp = sqrt(2.0 * n) * p2;
      const double dz = p1 / pp;
      z -= dz;
      converged = fabs(dz) <= 1e-15 * fabs(z);
    }
    if (!converged) return 1;
    x[i] = z;
    w[i] = 2.0 / (pp * pp);
  }
  return 0;
}

/* Newton's method on the Legendre polynomials from z = cos(pi (i + 3/4) /
 * (n + 1/2)) (common practice), mapped from [-1, 1] to [0, 1]. */
int jg_stream_gauss_legendre_unit(int n, double *x, double *w) {
  if (n < 1 || n > JG_STREAM_MAX_NODES) return 1;
  for (int i = 0; i < n; i++) {
    double z = cos(JG_PI * (i + 0.75) / (n + 0.5)), pp = 0.0;
    int converged = 0;
    for (int it = 0; it < 100 && !converged; it++) {
      double p1 = 1.0, p2 = 0.0;
      for (int j = 1; j <= n; j++) {
        const double p3 = p2;
        p2 = p1;
        p1 = ((2.0 * j - 1.0) * z * p2 - (j - 1.0) * p3) / j;
      }
      pp = n * (z * p1 - p2) / (z * z - 1.0);
      const double dz = p1 / pp;
      z -= dz;
      converged = fabs(dz) <= 1e-15;
    }
    if (!converged) return 1;
    x[i] = 0.5 * (1.0 + z);
    w[i] = 1.0 / ((1.0 - z * z) * pp * pp);
  }
  return 0;
}

/* ---- the model ------------------------------------------------------------- */

/* a H in km/s per Mpc on the real history. */
static double history_hubble(const void *ctx, double ln_a) {
  const double a = exp(ln_a);
  return a * jg_background_hubble(ctx, a) * JG_MPC / 1.0e3;
}

static const char *const stream_keys[] = {"streaming.rms_velocity_kms", "streaming.start_redshift",
                                          "streaming.velocity_nodes", "streaming.direction_nodes",
                                          "streaming.patch_multiple", "streaming.rel_tol"};

jg_stream_model *jg_stream_model_new_flow(const jg_perturb_model *m,
                                          const jg_streaming_settings *s,
                                          jg_stream_hubble_fn hubble, const void *ctx,
                                          jg_error *err) {
  if (!m || !s || !hubble) {
    JG_FAIL(err, JG_EINVAL, "jg_stream_model_new: model, settings and a H must be given");
    return NULL;
  }
  const double values[] = {s->rms_velocity_kms, s->start_redshift, s->velocity_nodes,
                           s->direction_nodes, s->patch_multiple, s->rel_tol};
  for (int i = 0; i < (int)(sizeof values / sizeof values[0]); i++)
    if (jg_params_check_value(stream_keys[i], values[i], err) != JG_OK) return NULL;
  jg_stream_model *sm = calloc(1, sizeof *sm);
  if (!sm) {
    JG_FAIL(err, JG_ENOMEM, "streaming: out of memory for the model");
    return NULL;
  }
  sm->m = m;
  sm->s = *s;
  sm->hubble = hubble;
  sm->ctx = ctx;
  sm->x_start = fmax(-log1p(s->start_redshift), m->x_init);
  sm->hubble_start = hubble(ctx, sm->x_start);
  sm->n_v = s->velocity_nodes;
  sm->n_mu = s->direction_nodes;
  if (!(sm->hubble_start > 0.0) || !isfinite(sm->hubble_start) ||
      jg_stream_gauss_hermite_half(sm->n_v, sm->v_node, sm->v_weight) != 0 ||
      jg_stream_gauss_legendre_unit(sm->n_mu, sm->mu_node, sm->mu_weight) != 0) {
    JG_FAIL(err, JG_ENUMERIC, "streaming: set-up failed (a H = %g at the start, %d and %d nodes)",
            sm->hubble_start, sm->n_v, sm->n_mu);
    free(sm);
    return NULL;
  }
  /* v_par Gaussian with variance 1/3 (in units of v_rms): v = sqrt(2/3) x
   * for the weight exp(-x^2); the half rule's weights sum to sqrt(pi)/2. */
  int kept = 0;
  for (int i = 0; i < sm->n_v; i++) {
    const double v = sm->v_node[i] * sqrt(2.0 / 3.0), weight = sm->v_weight[i] * 2.0 / sqrt(JG_PI);
    if (weight < STREAM_NEGLIGIBLE_WEIGHT) continue;
    sm->v_node[kept] = v;
    sm->v_weight[kept++] = weight;
  }
  sm->n_v = kept;
  return sm;
}

jg_stream_model *jg_stream_model_new(const jg_perturb_model *m, const jg_streaming_settings *s,
                                     jg_error *err) {
  const jg_thermal *th = m ? jg_perturb_model_thermal(m) : NULL;
  if (!th) {
    JG_FAIL(err, JG_EINVAL, "jg_stream_model_new: a model on a real history is needed");
    return NULL;
  }
  return jg_stream_model_new_flow(m, s, history_hubble, jg_thermal_background(th), err);
}

void jg_stream_model_free(jg_stream_model *sm) { free(sm); }

int jg_stream_active(const jg_stream_model *sm) { return sm && sm->s.rms_velocity_kms > 0.0; }

double jg_stream_start(const jg_stream_model *sm) { return sm->x_start; }

double jg_stream_drift(const jg_stream_model *sm, double ln_a) {
  if (ln_a < sm->x_start || !jg_stream_active(sm)) return 0.0;
  /* v_bc = v_rms a_start / a */
  return sm->s.rms_velocity_kms * exp(sm->x_start - ln_a) / sm->hubble(sm->ctx, ln_a);
}

int jg_stream_velocity_rule(const jg_stream_model *sm, const double **node, const double **weight) {
  *node = sm->v_node;
  *weight = sm->v_weight;
  return sm->n_v;
}

int jg_stream_direction_rule(const jg_stream_model *sm, const double **node,
                             const double **weight) {
  *node = sm->mu_node;
  *weight = sm->mu_weight;
  return sm->n_mu;
}

/* ---- the systems ------------------------------------------------------------ */

/* Which system a run integrates; each mode b of a batch has its k and its
 * velocity along k (units of v_rms). */
typedef enum { SYS_REAL, SYS_COMPLEX, SYS_LIMIT } stream_system;

typedef struct stream_run {
  const jg_stream_model *sm;
  stream_system sys;
  int n, dim, modes; /* n: the real mode system's dimension */
  double k2[PT_ROS_MAX_MODES], kv[PT_ROS_MAX_MODES]; /* k^2 and k v_par / v_rms */
  double *states;      /* [output][mode][dim] */
  int undefined_output;
  /* The system's sparsity pattern, and for each of its entries where it
   * comes from: the mode matrix's entry `source` (row-major n x n) of its
   * diagonal block, or (source -1) the advection, `advection` per unit
   * drift and k v_par / v_rms. */
  unsigned char pattern[PT_ROS_MAX_ENTRIES];
  int n_entries, source[PT_ROS_MAX_ENTRIES], in_order[PT_ROS_MAX_ENTRIES];
  double advection[PT_ROS_MAX_ENTRIES];
  /* The positions of the mode matrix's entries with a k^2 term (its
   * pressure terms; every other entry is the same at k^2 = 0 and 1), and
   * the mode matrix at zero coefficients for the baryon fraction zero_fb
   * (NaN: not yet built; the slope's constant part): both found once per
   * solve. */
  int n_k2_entries, k2_position[PT_ROS_MAX_ENTRIES];
  double zero_fb, M_zero[PT_ROS_MAX_ENTRIES];
} stream_run;

/* Error-scale groups: CDM and gas of each block (real and imaginary part;
 * or the k = 0 solution, its first and its second derivative in k). */
static void stream_groups(const stream_run *r, int *group) {
  for (int i = 0; i < r->dim; i++) {
    const int block = i / r->n, within = i % r->n;
    group[i] = 2 * block + (within >= M_B);
  }
}

/* One part of the matrices, dense (dim x dim): the mode matrix M (n x n;
 * NULL: none) on every block's diagonal, and the advection of the baryon
 * components at `drift` per unit of the mode's k v_par / v_rms (complex
 * system) or per unit k_ref (limit system). */
static void stream_matrix(const stream_run *r, const double *M, double drift, double *A) {
  const jg_perturb_model *m = r->sm->m;
  const int n = r->n, N = r->dim;
  memset(A, 0, sizeof(double) * (size_t)N * N);
  for (int blk = 0; M && blk < N / n; blk++)
    for (int i = 0; i < n; i++)
      memcpy(A + (size_t)(blk * n + i) * N + blk * n, M + (size_t)i * n, sizeof(double) * n);
  if (r->sys == SYS_REAL || drift == 0.0) return;
  for (int i = M_B; i < n; i++) { /* the baryon components, advected */
    if (r->sys == SYS_COMPLEX) {
      /* Re' gains A Im, Im' gains -A Re, with A = k v_par drift. */
      A[(size_t)i * N + n + i] = drift;
      A[(size_t)(n + i) * N + i] = -drift;
    } else {
      /* u1' = M0 u1 - s P y0, y2' = M0 y2 + s P u1 (scaled by k_ref). */
      const double s = sqrt(m->k_ref2) * drift;
      A[(size_t)(n + i) * N + i] = -s;
      A[(size_t)(2 * n + i) * N + n + i] = s;
    }
  }
}

/* The three parts of a streaming matrix, A_b = B0 + k_b^2 B1 + kv_b B2,
 * entry by entry of the pattern, from the coefficients c and the drift
 * (the mode matrix is affine in k^2; M_zero, when given, is subtracted
 * from its k^2 = 0 part: the slope's constant term). */
static void stream_parts(const stream_run *r, const jg_medium_coefficients *c, double drift,
                         const double *M_zero, double *B0, double *B1, double *B2) {
  const jg_perturb_model *m = r->sm->m;
  const int n = r->n;
  /* (Zeroed over n x n only: the arrays have room for the largest system.)
   * The k^2 part A(1) - A(0) is exactly 0 but at the pressure terms, which
   * alone are built at k^2 = 1 (the same numbers as the whole matrix
   * there, tests/test_perturb.c). */
  double M0[PT_ROS_MAX_ENTRIES], M1[PT_ROS_MAX_ENTRIES];
  memset(M0, 0, sizeof(double) * (size_t)(n * n));
  memset(M1, 0, sizeof(double) * (size_t)(n * n));
  jg__pt_jac_mode(m, c, 0.0, M0, n, 0);
  if (r->sys != SYS_LIMIT) {
    double at_one[PT_ROS_MAX_ENTRIES];
    jg__pt_jac_mode_k2_terms(m, c, 1.0, at_one, n, 0);
    for (int e = 0; e < r->n_k2_entries; e++) {
      const int at = r->k2_position[e];
      M1[at] = at_one[at] - M0[at];
    }
  }
  if (M_zero)
    for (int i = 0; i < n * n; i++) M0[i] -= M_zero[i];
  for (int e = 0; e < r->n_entries; e++) {
    const int s = r->source[e];
    B0[e] = s >= 0 ? M0[s] : 0.0;
    B1[e] = s >= 0 ? M1[s] : 0.0;
    B2[e] = s >= 0 ? 0.0 : r->advection[e] * drift;
  }
}

static int stream_matrices(void *ctx, double x, double *A, double *dA, double *rate) {
  stream_run *r = ctx;
  const jg_stream_model *sm = r->sm;
  jg_medium_coefficients c, dc = {0};
  if (jg__pt_coefficients_and_slope(sm->m, x, &c, dA ? &dc : NULL) != 0) return 1;
  const double drift = r->sys == SYS_REAL ? 0.0 : jg_stream_drift(sm, x);
  const int k_dependent = r->sys != SYS_LIMIT, advected = r->sys != SYS_REAL;
  /* The limit system's advection is per unit k_ref (in its matrix). */
  double unit[PT_ROS_MAX_MODES];
  for (int b = 0; b < PT_ROS_MAX_MODES; b++) unit[b] = 1.0;
  const double *advection = r->sys == SYS_COMPLEX ? r->kv : unit;
  double B0[PT_ROS_MAX_ENTRIES], B1[PT_ROS_MAX_ENTRIES], B2[PT_ROS_MAX_ENTRIES];
  stream_parts(r, &c, drift, NULL, B0, B1, B2);
  jg__ros_gather(r->n_entries, r->in_order, r->modes, B0, k_dependent ? B1 : NULL, r->k2,
                 advected ? B2 : NULL, advection, A);
  if (rate) {
    double fastest = 0.0;
    for (int b = 0; b < r->modes; b++) {
      const double k2 = r->sys == SYS_LIMIT ? 0.0 : r->k2[b];
      const double advecting = r->sys == SYS_COMPLEX ? fabs(r->kv[b] * drift) : 0.0;
      fastest = fmax(fastest, jg__pt_fastest_rate(sm->m, &c, k2) + advecting);
    }
    *rate = fastest;
  }
  if (dA) {
    /* Slopes: the mode matrix is affine in the coefficients, dM/dx =
     * M(c') - M(0); v_bc / (a H) with v_bc ~ 1/a: the drift's slope is
     * -(2 + d ln H / d ln a) times it. */
    if (!(c.baryon_fraction == r->zero_fb)) {
      jg_medium_coefficients zero = {0};
      zero.baryon_fraction = c.baryon_fraction;
      memset(r->M_zero, 0, sizeof(double) * (size_t)(r->n * r->n));
      jg__pt_jac_mode(sm->m, &zero, 0.0, r->M_zero, r->n, 0);
      r->zero_fb = c.baryon_fraction;
    }
    stream_parts(r, &dc, -(2.0 + c.dlnH_dlna) * drift, r->M_zero, B0, B1, B2);
    jg__ros_gather(r->n_entries, r->in_order, r->modes, B0, k_dependent ? B1 : NULL, r->k2,
                   advected ? B2 : NULL, advection, dA);
  }
  return 0;
}

/* Which entries of the run's matrices can be non-zero, and where each comes
 * from (see stream_run), from the dense matrices at coefficients that are
 * all non-zero: the blocks of the mode matrix at k^2 = 1, the advection at
 * unit drift; and which entries of the mode matrix change with k^2. */
static void stream_pattern(stream_run *r) {
  const int n = r->n, N = r->dim;
  jg_medium_coefficients c;
  jg__pt_structural_coefficients(&c);
  double M[PT_ROS_MAX_ENTRIES] = {0}, M_no_k2[PT_ROS_MAX_ENTRIES] = {0};
  double blocks[PT_ROS_MAX_ENTRIES], advecting[PT_ROS_MAX_ENTRIES];
  jg__pt_jac_mode(r->sm->m, &c, 1.0, M, n, 0);
  jg__pt_jac_mode(r->sm->m, &c, 0.0, M_no_k2, n, 0);
  /* (The coefficients are distinct and non-zero: an entry with a k^2 term
   * differs here.) */
  r->n_k2_entries = 0;
  for (int i = 0; i < n * n; i++)
    if (M[i] != M_no_k2[i]) r->k2_position[r->n_k2_entries++] = i;
  r->zero_fb = NAN;
  stream_matrix(r, M, 0.0, blocks);
  stream_matrix(r, NULL, 1.0, advecting);
  r->n_entries = 0;
  for (int i = 0; i < N; i++)
    for (int j = 0; j < N; j++) {
      const int at = i * N + j;
      r->pattern[at] = blocks[at] != 0.0 || advecting[at] != 0.0;
      if (!r->pattern[at]) continue;
      const int e = r->n_entries++;
      r->in_order[e] = e;
      /* The advection couples different blocks, the mode matrix sits in
       * the diagonal ones: never both. */
      r->source[e] = i / n == j / n ? (i % n) * n + j % n : -1;
      r->advection[e] = advecting[at];
    }
}

static void stream_emit(void *ctx, int index, const double *y) {
  stream_run *r = ctx;
  memcpy(r->states + (size_t)index * r->modes * r->dim, y,
         sizeof(double) * (size_t)r->modes * r->dim);
}

static const char *const system_names[] = {"streaming, before the start", "streaming",
                                           "streaming, large-scale limit"};

/* Integrate the batch y (modes x dim) from x0 through the increasing
 * x_out[0..n_out), each output's states into `states`. */
static jg_status stream_integrate(stream_run *r, jg_perturb_workspace *w, double x0, double *y,
                                  const double *x_out, int n_out, double k_first,
                                  jg_error *err) {
  const jg_perturb_model *m = r->sm->m;
  int group[PT_ROS_MAX_DIM];
  stream_groups(r, group);
  stream_pattern(r);
  const pt_ros_problem p = {r->dim, r->modes, stream_matrices, stream_emit, r, group,
                            r->sm->s.rel_tol, m->settings.abs_tol, 1.0e-4, r->sys == SYS_COMPLEX ? STREAM_MAX_STEP : 0.05,
                            PT_MAX_STEPS, r->pattern, NULL};
  double x_fail;
  const int code = jg__ros_integrate(&p, w->ros, x0, y, x_out, n_out, &x_fail);
  if (code != PT_ROS_OK)
    return JG_FAIL(err, JG_ENUMERIC,
                   "perturbations (%s, k = %g /Mpc): integration failed at z = %.6g (code %d)",
                   system_names[r->sys], k_first, exp(-x_fail) - 1.0, code);
  return JG_OK;
}

/* ---- solves ----------------------------------------------------------------- */

/* The outputs in integration order: z[order[i]] as ln a; the ones at or
 * before the start are `n_before`. */
static int split_outputs(const jg_stream_model *sm, const jg_perturb_workspace *w,
                         const double *z, int n_z, double *x_out) {
  int n_before = 0;
  for (int i = 0; i < n_z; i++) {
    x_out[i] = -log1p(z[w->order[i]]);
    if (x_out[i] <= sm->x_start) n_before++;
  }
  return n_before;
}

/* The ordinary solution of k[0..n) to every output and to the start:
 * `real` gets [output][mode][n] (outputs in integration order) and
 * `at_start` [mode][n]. */
static jg_status solve_real(const jg_stream_model *sm, jg_perturb_workspace *w, const double *k,
                            int nk, const double *x_out, int n_z, int n_before, double *real,
                            double *at_start, jg_error *err) {
  const jg_perturb_model *m = sm->m;
  /* (Padded to a compiled batch size with copies of the last mode, whose
   * results are dropped: jg__ros_lanes.) */
  const int lanes = jg__ros_lanes(nk);
  stream_run r = {.sm = sm, .sys = SYS_REAL, .n = m->dim_mode, .dim = m->dim_mode, .modes = lanes};
  const int n = m->dim_mode;
  double y[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM];
  for (int b = nk; b < lanes; b++) r.k2[b] = k[nk - 1] * k[nk - 1];
  for (int b = 0; b < nk; b++) {
    r.k2[b] = k[b] * k[b];
    jg_perturb_start start = m->start;
    if (m->start_table && k[b] > 0.0) {
      jg_status st = jg_perturb_start_table_at(m->start_table, k[b], &start, err);
      if (st != JG_OK) return st;
    }
    jg__pt_initial_mode(m, &start, y + b * n);
  }
  for (int b = nk; b < lanes; b++) memcpy(y + b * n, y + (nk - 1) * n, sizeof(double) * n);
  /* The start joins the outputs at its place (unless not wanted). */
  const int with_start = at_start != NULL, n_xs = n_z + with_start;
  double xs[JG_MAX_REDSHIFTS + 1];
  for (int i = 0, j = 0; i < n_xs; i++)
    xs[i] = with_start && i == n_before ? sm->x_start : x_out[j++];
  double *states = malloc(sizeof(double) * (size_t)n_xs * lanes * n);
  if (!states) return JG_FAIL(err, JG_ENOMEM, "streaming: out of memory");
  r.states = states;
  jg_status st = stream_integrate(&r, w, m->x_init, y, xs, n_xs, k[0], err);
  if (st == JG_OK) {
    const size_t per = (size_t)nk * n, stride = (size_t)lanes * n;
    for (int i = 0, j = 0; i < n_xs; i++) {
      if (with_start && i == n_before) memcpy(at_start, states + i * stride, sizeof(double) * per);
      else memcpy(real + (size_t)(j++) * per, states + i * stride, sizeof(double) * per);
    }
  }
  free(states);
  return st;
}

/* Complex solutions of the pairs (k of mode, v_rel) from the start, the real
 * state there `from` ([mode][n]), to the outputs after the start; `out`
 * gets [output after start][pair][2n]. */
static jg_status solve_complex(const jg_stream_model *sm, jg_perturb_workspace *w,
                               const double *k, const double *v_rel, int n_pairs,
                               const double *const *from, const double *x_after, int n_after,
                               double *out, jg_error *err) {
  const int n = sm->m->dim_mode, N = 2 * n;
  double *states = malloc(sizeof(double) * (size_t)n_after * PT_ROS_MAX_MODES * N);
  if (!states) return JG_FAIL(err, JG_ENOMEM, "streaming: out of memory");
  jg_status st = JG_OK;
  for (int first = 0; st == JG_OK && first < n_pairs; first += PT_ROS_MAX_MODES) {
    const int modes = n_pairs - first < PT_ROS_MAX_MODES ? n_pairs - first : PT_ROS_MAX_MODES;
    const int lanes = jg__ros_lanes(modes); /* the extra lanes copy the last pair */
    stream_run r = {.sm = sm, .sys = SYS_COMPLEX, .n = n, .dim = N, .modes = lanes,
                    .states = states};
    double y[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM];
    for (int b = 0; b < lanes; b++) {
      const int q = first + (b < modes ? b : modes - 1);
      r.k2[b] = k[q] * k[q];
      r.kv[b] = k[q] * v_rel[q];
      memcpy(y + b * N, from[q], sizeof(double) * n);
      memset(y + b * N + n, 0, sizeof(double) * n);
    }
    st = stream_integrate(&r, w, sm->x_start, y, x_after, n_after, k[first], err);
    for (int i = 0; st == JG_OK && i < n_after; i++)
      for (int b = 0; b < modes; b++)
        memcpy(out + ((size_t)i * n_pairs + first + b) * N, states + ((size_t)i * lanes + b) * N,
               sizeof(double) * N);
  }
  free(states);
  return st;
}

jg_status jg_stream_solve(const jg_stream_model *sm, jg_perturb_workspace *w, double k,
                          const double *v_rel, int n_v, const double *z, int n_z,
                          jg_stream_state *out, jg_error *err) {
  if (!sm || !w || w->m != sm->m || !v_rel || !out || n_v < 1)
    return JG_FAIL(err, JG_EINVAL, "jg_stream_solve: model, its workspace, velocities and output needed");
  const jg_perturb_model *m = sm->m;
  jg_status st = jg_perturb_check_wavenumber(m, k, err);
  if (st == JG_OK) st = jg__pt_order_redshifts(m, w, z, n_z, err);
  if (st != JG_OK) return st;
  const int n = m->dim_mode;
  double x_out[JG_MAX_REDSHIFTS], at_start[PT_ROS_MAX_DIM];
  const int n_before = split_outputs(sm, w, z, n_z, x_out);
  double *real = malloc(sizeof(double) * (size_t)n_z * n);
  double *cplx = malloc(sizeof(double) * (size_t)n_z * n_v * 2 * n);
  const double **from = malloc(sizeof *from * (size_t)n_v);
  double *ks = malloc(sizeof(double) * (size_t)n_v);
  if (!real || !cplx || !from || !ks) st = JG_FAIL(err, JG_ENOMEM, "streaming: out of memory");
  if (st == JG_OK)
    st = solve_real(sm, w, &k, 1, x_out, n_z, n_before, real, n_z > n_before ? at_start : NULL,
                    err);
  for (int iv = 0; iv < n_v && st == JG_OK; iv++) from[iv] = at_start, ks[iv] = k;
  if (st == JG_OK && n_z > n_before)
    st = solve_complex(sm, w, ks, v_rel, n_v, from, x_out + n_before, n_z - n_before, cplx, err);
  for (int i = 0; st == JG_OK && i < n_z; i++) {
    const int iz = w->order[i];
    for (int iv = 0; iv < n_v; iv++) {
      jg_stream_state *o = &out[(size_t)iv * n_z + iz];
      const double *re = i < n_before ? real + (size_t)i * n : cplx + ((size_t)(i - n_before) * n_v + iv) * 2 * n;
      const double *im = i < n_before ? NULL : re + n;
      o->delta_c[0] = re[M_C], o->delta_c[1] = im ? im[M_C] : 0.0;
      o->delta_b[0] = re[M_B], o->delta_b[1] = im ? im[M_B] : 0.0;
      o->delta_T[0] = m->fluctuating ? re[M_T] : (m->gamma - 1.0) * re[M_B];
      o->delta_T[1] = !im ? 0.0 : m->fluctuating ? im[M_T] : (m->gamma - 1.0) * im[M_B];
    }
  }
  free(real);
  free(cplx);
  free(from);
  free(ks);
  return st;
}

/* The velocity nodes of one wavenumber: the Maxwellian rule, then (with
 * directions) mu v_rms, then mu patch_multiple v_rms unless that is v_rms. */
static int node_list(const jg_stream_model *sm, int directions, double *v, double *weight,
                     int *kind) {
  int n = 0;
  for (int i = 0; i < sm->n_v; i++) v[n] = sm->v_node[i], weight[n] = sm->v_weight[i], kind[n++] = 0;
  if (!directions) return n;
  for (int i = 0; i < sm->n_mu; i++) v[n] = sm->mu_node[i], weight[n] = sm->mu_weight[i], kind[n++] = 1;
  if (sm->s.patch_multiple != 1.0)
    for (int i = 0; i < sm->n_mu; i++)
      v[n] = sm->mu_node[i] * sm->s.patch_multiple, weight[n] = sm->mu_weight[i], kind[n++] = 2;
  return n;
}

static double squared(const double *y) { return y[0] * y[0] + y[1] * y[1]; }

/* One batch of wavenumbers k[0..nk) (nk <= PT_ROS_MAX_MODES). */
static jg_status powers_batch(const jg_stream_model *sm, jg_perturb_workspace *w,
                              const double *k, int nk, const double *x_out, int n_z,
                              int n_before, int directions, jg_stream_power *out,
                              jg_error *err) {
  const jg_perturb_model *m = sm->m;
  const int n = m->dim_mode, N = 2 * n, n_after = n_z - n_before;
  double v[3 * JG_STREAM_MAX_NODES], weight[3 * JG_STREAM_MAX_NODES];
  int kind[3 * JG_STREAM_MAX_NODES];
  const int per_k = node_list(sm, directions, v, weight, kind);
  const int n_pairs = per_k * nk;
  double at_start[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM];
  double *real = malloc(sizeof(double) * (size_t)n_z * nk * n);
  double *cplx = malloc(sizeof(double) * ((size_t)n_after * n_pairs * N + 1));
  double *ks = malloc(sizeof(double) * (size_t)n_pairs);
  double *vs = malloc(sizeof(double) * (size_t)n_pairs);
  const double **from = malloc(sizeof *from * (size_t)n_pairs);
  int *place = malloc(sizeof(int) * (size_t)n_pairs);
  jg_status st = JG_OK;
  if (!real || !cplx || !ks || !vs || !from || !place)
    st = JG_FAIL(err, JG_ENOMEM, "streaming: out of memory");
  if (st == JG_OK)
    st = solve_real(sm, w, k, nk, x_out, n_z, n_before, real, n_after > 0 ? at_start : NULL, err);
  /* The pairs in increasing k v_par (insertion into place): a lockstep batch
   * steps as its most demanding mode, the fastest advection, so modes of
   * like advection share batches. place[pair] = its position. */
  for (int q = 0; st == JG_OK && q < n_pairs; q++) {
    const double kv = k[q / per_k] * v[q % per_k];
    int at = q;
    while (at > 0 && ks[at - 1] * vs[at - 1] > kv) {
      ks[at] = ks[at - 1], vs[at] = vs[at - 1], from[at] = from[at - 1];
      at--;
    }
    ks[at] = k[q / per_k];
    vs[at] = v[q % per_k];
    from[at] = at_start + (q / per_k) * n;
  }
  for (int q = 0; st == JG_OK && q < n_pairs; q++) {
    /* Ties keep their order, so the position is found by matching. */
    const double kq = k[q / per_k], vq = v[q % per_k];
    const double *fq = at_start + (q / per_k) * n;
    int at = 0;
    while (!(ks[at] == kq && vs[at] == vq && from[at] == fq)) at++;
    place[q] = at;
  }
  if (st == JG_OK && n_after > 0)
    st = solve_complex(sm, w, ks, vs, n_pairs, from, x_out + n_before, n_after, cplx, err);
  for (int i = 0; st == JG_OK && i < n_z; i++) {
    const int iz = w->order[i];
    for (int b = 0; b < nk; b++) {
      jg_stream_power *o = &out[(size_t)b * n_z + iz];
      const double *y0 = real + ((size_t)i * nk + b) * n;
      const double pb0 = y0[M_B] * y0[M_B], pc0 = y0[M_C] * y0[M_C];
      o->b_power = o->c_power = o->b_power_rms = o->b_power_patch = 1.0;
      o->b_over_c = y0[M_B] / y0[M_C];
      if (i < n_before) continue;
      double sum[3] = {0.0, 0.0, 0.0}, sum_c = 0.0;
      for (int j = 0; j < per_k; j++) {
        const double *y = cplx + ((size_t)(i - n_before) * n_pairs + place[b * per_k + j]) * N;
        const double yb[2] = {y[M_B], y[n + M_B]}, yc[2] = {y[M_C], y[n + M_C]};
        sum[kind[j]] += weight[j] * squared(yb);
        if (kind[j] == 0) sum_c += weight[j] * squared(yc);
      }
      o->b_power = sum[0] / pb0;
      o->c_power = sum_c / pc0;
      o->b_over_c = sqrt(sum[0] / sum_c);
      if (directions) {
        o->b_power_rms = sum[1] / pb0;
        o->b_power_patch = sm->s.patch_multiple != 1.0 ? sum[2] / pb0 : o->b_power_rms;
      }
    }
  }
  free(real);
  free(cplx);
  free(ks);
  free(vs);
  free(from);
  free(place);
  return st;
}

jg_status jg_stream_powers(const jg_stream_model *sm, jg_perturb_workspace *w, const double *k,
                           int n_k, const double *z, int n_z, int directions,
                           jg_stream_power *out, jg_error *err) {
  if (!sm || !w || w->m != sm->m || !k || !out || n_k < 0)
    return JG_FAIL(err, JG_EINVAL, "jg_stream_powers: model, its workspace, wavenumbers and output needed");
  const jg_perturb_model *m = sm->m;
  jg_status st = jg__pt_order_redshifts(m, w, z, n_z, err);
  for (int i = 0; st == JG_OK && i < n_k; i++) st = jg_perturb_check_wavenumber(m, k[i], err);
  if (st != JG_OK) return st;
  double x_out[JG_MAX_REDSHIFTS];
  /* Inactive: every output counts as before the start (the real solve alone). */
  const int split = split_outputs(sm, w, z, n_z, x_out);
  const int n_before = jg_stream_active(sm) ? split : n_z;
  for (int first = 0; st == JG_OK && first < n_k; first += PT_ROS_MAX_MODES) {
    const int nk = n_k - first < PT_ROS_MAX_MODES ? n_k - first : PT_ROS_MAX_MODES;
    st = powers_batch(sm, w, k + first, nk, x_out, n_z, n_before, directions,
                      out + (size_t)first * n_z, err);
  }
  return st;
}

jg_status jg_stream_limit(const jg_stream_model *sm, jg_perturb_workspace *w, const double *z,
                          int n_z, double *stream_k2, jg_error *err) {
  if (!sm || !w || w->m != sm->m || !stream_k2)
    return JG_FAIL(err, JG_EINVAL, "jg_stream_limit: model, its workspace and output needed");
  const jg_perturb_model *m = sm->m;
  jg_status st = jg__pt_order_redshifts(m, w, z, n_z, err);
  if (st != JG_OK) return st;
  const int n = m->dim_mode, N = 3 * n;
  double x_out[JG_MAX_REDSHIFTS], y[PT_ROS_MAX_DIM] = {0};
  split_outputs(sm, w, z, n_z, x_out);
  if (!jg_stream_active(sm)) {
    for (int i = 0; i < n_z; i++) stream_k2[i] = 0.0;
    return JG_OK;
  }
  double *states = malloc(sizeof(double) * (size_t)n_z * N);
  if (!states) return JG_FAIL(err, JG_ENOMEM, "streaming: out of memory");
  stream_run r = {.sm = sm, .sys = SYS_LIMIT, .n = n, .dim = N, .modes = 1, .states = states};
  jg__pt_initial_mode(m, &m->start, y);
  st = stream_integrate(&r, w, m->x_init, y, x_out, n_z, 0.0, err);
  for (int i = 0; st == JG_OK && i < n_z; i++) {
    const double *s = states + (size_t)i * N;
    const double b0 = s[M_B], u1 = s[n + M_B] / sqrt(m->k_ref2), y2 = s[2 * n + M_B] / m->k_ref2;
    /* |delta_b|^2 = b0^2 + k^2 (u1^2 + 2 b0 y2) at velocity v_rms along k;
     * <v_par^2> = v_rms^2 / 3. */
    stream_k2[w->order[i]] = b0 != 0.0 ? (u1 * u1 / (b0 * b0) + 2.0 * y2 / b0) / 3.0 : 0.0;
  }
  free(states);
  return st;
}
