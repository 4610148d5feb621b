/*
 * The real-history medium of the perturbations: the coefficients of the
 * equations tabulated once per model from the thermal history (see the
 * "Speed" note in perturb.c), and their slopes for the Rosenbrock path.
 */
#include <math.h>
#include <stdlib.h>

#include "jeansgrow/constants.h"
#include "perturb_internal.h"
#include "../history/thermal_nodes.h"

/* The relaxation rate q_r of delta_xe reaches 1e20 per e-fold while
 * hydrogen is in Saha equilibrium; GSL's msbdf fails on such a rate at tight
 * tolerances. It is capped smoothly, times cap / (q_r + cap), with the source
 * terms scaled alike: the quasi-equilibrium delta_xe is unchanged and only
 * its lag behind the sources, ~ 1/q_r e-folds, grows, to at most 1e-6
 * e-folds (measured effect: src/PHYSICS.md §9). */
#define PT_XE_RELAX_CAP 1.0e6
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* exp(v) for the small v of one table interval: the rates are
 * exp(c0 + v), v = u (c1 + u (c2 + u c3)), and exp(c0) is stored per node,
 * so only exp(v) is computed here. |v| is ~ (1/500) |d ln rate / d ln a| <=
 * ~0.03 inside the table; up to 1/16 the Taylor series to v^9 leaves less
 * than 3e-19 (far below the rounding of exp itself); beyond (only past the
 * table's ends), exp(). Saves ~3/4 of a look-up's cost: the Rosenbrock
 * path reads the coefficients five times per step. */
static inline double exp_small(double v) {
  if (!(fabs(v) <= 0.0625)) return exp(v);
  return 1.0 + v * (1.0 + v * (1.0 / 2 + v * (1.0 / 6 + v * (1.0 / 24 + v * (1.0 / 120 +
         v * (1.0 / 720 + v * (1.0 / 5040 + v * (1.0 / 40320 + v * (1.0 / 362880)))))))));
}

/* sinh and cosh of c0 + v for the small v of one table interval, from
 * sinh(c0) and cosh(c0) stored per node: sinh(c0 + v) = sinh(c0) cosh(v) +
 * cosh(c0) sinh(v), the same sum with the roles swapped for cosh. Up to
 * |v| = 1/16 the series of sinh(v) to v^9 and of cosh(v) to v^8 leave less
 * than 3e-19 relative; beyond, sinh and cosh themselves: past the table's
 * ends, and in ~1 % of the look-ups through hydrogen recombination, where
 * the asinh of a delta_xe rate moves by up to ~50 per e-fold (longer series
 * for them cost more in the other 99 % than they save). Exact to rounding,
 * as sinh(c0 + v) is: where the sum cancels, near a sign change of the
 * coefficient, both err by ~1e-16 absolute. */
typedef struct sinh_cosh {
  double sinh, cosh;
} sinh_cosh;

static inline sinh_cosh sinh_cosh_near(double c0, double sinh_c0, double cosh_c0, double v) {
  if (!(fabs(v) <= 0.0625)) return (sinh_cosh){sinh(c0 + v), cosh(c0 + v)};
  const double v2 = v * v;
  const double sh =
      v * (1.0 + v2 * (1.0 / 6) * (1.0 + v2 * (1.0 / 20) * (1.0 + v2 * (1.0 / 42) *
          (1.0 + v2 * (1.0 / 72)))));
  const double ch =
      1.0 + v2 * 0.5 * (1.0 + v2 * (1.0 / 12) * (1.0 + v2 * (1.0 / 30) * (1.0 + v2 * (1.0 / 56))));
  return (sinh_cosh){sinh_c0 * ch + cosh_c0 * sh, cosh_c0 * ch + sinh_c0 * sh};
}

/* Quantity q of the interval (polynomial c, stored values e0) at offset u. */
static inline sinh_cosh tabulated_sinh(const double *c, const double *e0, int q, double u) {
  const double *k = c + 4 * q;
  const double *stored = e0 + PT_NODE_RATES + 2 * (q - Q_XE_RELAX);
  return sinh_cosh_near(k[0], stored[0], stored[1], u * (k[1] + u * (k[2] + u * k[3])));
}

/* The table interval holding ln_a: its polynomials, its node's stored
 * values and the offset u from that node. */
typedef struct medium_interval {
  const double *c, *e0;
  double u;
} medium_interval;

static inline int locate(const thermal_medium *tm, double ln_a, medium_interval *at) {
  double t = (ln_a - tm->x0) * tm->inv_dx;
  if (!(t > -1.0e6 && t < 1.0e9)) return 1; /* NaN or absurdly far off */
  int i = (int)t;
  if (i < 0) i = 0;
  if (i > tm->n - 2) i = tm->n - 2;
  at->u = ln_a - (tm->x0 + i * tm->dx);
  at->c = tm->poly + (size_t)i * 4 * N_Q;
  at->e0 = tm->node_rate + (size_t)i * PT_NODE_VALUES;
  return 0;
}

/* The coefficients in the interval; with ionisation, xe receives sinh and
 * cosh of the four asinh-tabulated quantities, Q_XE_RELAX onwards (their
 * slopes need the cosh: kept rather than computed twice at one ln a).
 * Forced inline: gcc called it from both users, and the plain look-up then
 * paid for the call and the cosh it does not need. */
static inline __attribute__((always_inline)) void
values_at(const thermal_medium *tm, const medium_interval *at, jg_medium_coefficients *out,
          sinh_cosh xe[4]) {
  const double *c = at->c, *e0 = at->e0, u = at->u;
  out->pressure = e0[0] * exp_small(u * (c[1] + u * (c[2] + u * c[3])));
  out->drag = e0[1] * exp_small(u * (c[5] + u * (c[6] + u * c[7])));
  out->relaxation = e0[2] * exp_small(u * (c[9] + u * (c[10] + u * c[11])));
  out->dlnH_dlna = c[12] + u * (c[13] + u * (c[14] + u * c[15]));
  out->gravity = c[16] + u * (c[17] + u * (c[18] + u * c[19]));
  out->baryon_fraction = tm->bg->baryon_fraction;
#define PT_VALUE(q) (c[4 * (q)] + u * (c[4 * (q) + 1] + u * (c[4 * (q) + 2] + u * c[4 * (q) + 3])))
  if (tm->effective_gamma) out->pressure_effective = PT_VALUE(Q_GAMMA_EFF) * out->pressure;
  if (tm->ionisation) {
    for (int q = 0; q < 4; q++) xe[q] = tabulated_sinh(c, e0, Q_XE_RELAX + q, u);
    out->ionisation_relaxation = xe[0].sinh;
    out->ionisation_density = xe[1].sinh;
    out->ionisation_temperature = xe[2].sinh;
    out->ionisation_expansion = xe[3].sinh;
    out->heating_ionisation = PT_VALUE(Q_XE_HEATING) * out->relaxation;
    out->pressure_ionisation = PT_VALUE(Q_XE_PRESSURE) * out->pressure;
  }
#undef PT_VALUE
}

int jg__pt_thermal_medium_eval(const void *ctx, double ln_a, jg_medium_coefficients *out) {
  const thermal_medium *tm = ctx;
  medium_interval at;
  if (locate(tm, ln_a, &at) != 0) return 1;
  sinh_cosh unused[4];
  values_at(tm, &at, out, unused);
  return 0;
}

/* d/d ln a of the coefficients, from the same polynomials (exact for the
 * tabulated medium). */
int jg__pt_thermal_medium_eval_and_slope(const thermal_medium *tm, double ln_a,
                                         jg_medium_coefficients *c, jg_medium_coefficients *dc) {
  medium_interval at;
  if (locate(tm, ln_a, &at) != 0) return 1;
  sinh_cosh xe[4];
  values_at(tm, &at, c, xe);
  const double *q = at.c, u = at.u;
#define PT_SLOPE(o) (q[(o) + 1] + u * (2.0 * q[(o) + 2] + 3.0 * u * q[(o) + 3]))
  dc->pressure = c->pressure * PT_SLOPE(0);
  dc->drag = c->drag * PT_SLOPE(4);
  dc->relaxation = c->relaxation * PT_SLOPE(8);
  dc->dlnH_dlna = PT_SLOPE(12);
  dc->gravity = PT_SLOPE(16);
  /* The optional coefficients are products of a tabulated ratio and a
   * rate: the product rule, with the ratio from its polynomial. */
#define PT_VALUE(o) (q[(o)] + u * (q[(o) + 1] + u * (q[(o) + 2] + u * q[(o) + 3])))
  if (tm->effective_gamma) {
    const double g = PT_VALUE(4 * Q_GAMMA_EFF);
    dc->pressure_effective = PT_SLOPE(4 * Q_GAMMA_EFF) * c->pressure + g * dc->pressure;
  }
  if (tm->ionisation) {
    /* asinh-tabulated: d sinh(v)/dx = cosh(v) dv/dx. */
    dc->ionisation_relaxation = xe[0].cosh * PT_SLOPE(4 * Q_XE_RELAX);
    dc->ionisation_density = xe[1].cosh * PT_SLOPE(4 * Q_XE_DENSITY);
    dc->ionisation_temperature = xe[2].cosh * PT_SLOPE(4 * Q_XE_TEMPERATURE);
    dc->ionisation_expansion = xe[3].cosh * PT_SLOPE(4 * Q_XE_EXPANSION);
    dc->heating_ionisation = PT_SLOPE(4 * Q_XE_HEATING) * c->relaxation +
                             PT_VALUE(4 * Q_XE_HEATING) * dc->relaxation;
    dc->pressure_ionisation = PT_SLOPE(4 * Q_XE_PRESSURE) * c->pressure +
                              PT_VALUE(4 * Q_XE_PRESSURE) * dc->pressure;
  }
#undef PT_VALUE
#undef PT_SLOPE
  dc->baryon_fraction = c->baryon_fraction;
  return 0;
}

void jg__pt_thermal_medium_free(thermal_medium *tm) {
  if (!tm) return;
  free(tm->poly);
  free(tm->node_rate);
  free(tm);
}

/* The tabulated quantities, from the thermal history at one node (the
 * optional ones only if the medium tabulates them, 0 otherwise); cursor
 * follows the nodes through the history's grid. */
static void thermal_coefficients(const jg_thermal *th, const thermal_medium *tm, double x,
                                 gsl_interp_accel *cursor, double q[N_Q]) {
  const jg_background *bg = jg_thermal_background(th);
  double a = exp(x);
  jg_thermal_state s;
  jg_ionisation_response ir;
  jg__thermal_state_and_response(th, x, cursor, &s, tm->ionisation ? &ir : NULL);
  double H = jg_background_hubble(bg, a);
  double aH_mpc = a * H * JG_MPC; /* comoving: (k/a) c_T / H with k in 1/Mpc */
  double cT2 = JG_K_BOLTZMANN * s.T_gas / (s.mu * JG_M_HYDROGEN_ATOM);
  double n_e = s.x_e * jg_background_n_hydrogen(bg, a);
  double R = bg->R_coefficient * a;
  q[Q_PRESSURE] = cT2 / (aH_mpc * aH_mpc);
  q[Q_DRAG] = n_e * JG_SIGMA_THOMSON * JG_C_LIGHT / (R * H);
  /* Heating per particle taken uniform (its own perturbation neglected):
   * it relaxes delta_T as Compton does, at the rate (heating gains) / T_gas
   * (src/PHYSICS.md §12). Zero without heating. */
  q[Q_RELAX] =
      s.compton_rate * (s.T_rad / s.T_gas) / H + jg_thermal_heating_rate(th, s.z) / s.T_gas;
  q[Q_EXPANSION] = jg_background_dlnH_dlna(bg, a);
  q[Q_GRAVITY] = 1.5 * jg_background_omega_m_of_a(bg, a);
  for (int k = Q_GAMMA_EFF; k < N_Q; k++) q[k] = 0.0;
  if (tm->effective_gamma) q[Q_GAMMA_EFF] = s.gamma_effective;
  if (tm->ionisation) {
    const double cap =
        ir.relaxation > 0.0 ? PT_XE_RELAX_CAP / (ir.relaxation + PT_XE_RELAX_CAP) : 1.0;
    q[Q_XE_RELAX] = cap * ir.relaxation;
    q[Q_XE_DENSITY] = cap * ir.density;
    q[Q_XE_TEMPERATURE] = cap * ir.temperature;
    q[Q_XE_EXPANSION] = cap * ir.expansion;
    q[Q_XE_HEATING] = ir.heating / q[Q_RELAX];
    q[Q_XE_PRESSURE] = ir.pressure;
  }
}

/* Second derivatives M of the natural cubic splines through (x_i, y_i) for
 * N_Q ordinates on the same abscissae, as GSL's cspline computes them (the
 * same equations for c = M/2 and the same L D L^T elimination as
 * gsl_linalg_solve_symm_tridiag, so the same numbers), the elimination done
 * once for all. y[k * n + i], M likewise; work: 2 n doubles. */
static void natural_spline_curvatures(const double *x, const double *y, int n, double *M,
                                      double *work) {
  const int m = n - 2; /* interior nodes: the unknowns */
  double *alpha = work, *gamma = work + n;
  for (int k = 0; k < N_Q; k++) M[k * n] = M[k * n + n - 1] = 0.0;
  if (m < 1) return;
  /* diag_i = 2 (h_i + h_{i+1}), offdiag_i = h_{i+1}, for interior node i + 1. */
  alpha[0] = 2.0 * ((x[2] - x[1]) + (x[1] - x[0]));
  for (int i = 1; i < m; i++) {
    gamma[i - 1] = (x[i + 1] - x[i]) / alpha[i - 1];
    alpha[i] = 2.0 * ((x[i + 2] - x[i + 1]) + (x[i + 1] - x[i])) - (x[i + 1] - x[i]) * gamma[i - 1];
  }
  for (int k = 0; k < N_Q; k++) {
    const double *yk = y + (size_t)k * n;
    double *c = M + (size_t)k * n + 1; /* c[i]: interior node i + 1, first z then c */
    for (int i = 0; i < m; i++) {
      const double h_i = x[i + 1] - x[i], h_next = x[i + 2] - x[i + 1];
      const double g = 3.0 * ((yk[i + 2] - yk[i + 1]) * (1.0 / h_next) - (yk[i + 1] - yk[i]) * (1.0 / h_i));
      c[i] = i == 0 ? g : g - gamma[i - 1] * c[i - 1];
    }
    for (int i = 0; i < m; i++) c[i] = c[i] / alpha[i];
    for (int i = m - 2; i >= 0; i--) c[i] = c[i] - gamma[i] * c[i + 1];
    for (int i = 0; i < m; i++) c[i] *= 2.0;
  }
}

thermal_medium *jg__pt_thermal_medium_new(const jg_thermal *th, double x_first, double x_last,
                                          int effective_gamma, int ionisation, jg_error *err) {
  thermal_medium *tm = calloc(1, sizeof *tm);
  if (!tm) {
    JG_FAIL(err, JG_ENOMEM, "perturbations: out of memory for the coefficient tables");
    return NULL;
  }
  tm->bg = jg_thermal_background(th);
  tm->effective_gamma = effective_gamma;
  tm->ionisation = ionisation;
  tm->dx = 1.0 / PT_NODES_PER_EFOLD;
  tm->inv_dx = PT_NODES_PER_EFOLD;
  /* The nodes of the table that ends today; one that ends earlier stops
   * PT_MARGIN_NODES after x_last on the same nodes, so that its values
   * there are the whole table's (the natural end condition's effect on the
   * spline dies away within a few nodes of the end). */
  const int n_today = (int)ceil(-x_first * PT_NODES_PER_EFOLD) + PT_MARGIN_NODES + 1;
  tm->x0 = -(n_today - 1) * tm->dx;
  const int last_node = (int)ceil((x_last - tm->x0) * PT_NODES_PER_EFOLD);
  tm->n = last_node + PT_MARGIN_NODES + 1 < n_today ? last_node + PT_MARGIN_NODES + 1 : n_today;
  const int n = tm->n;
  /* x, the N_Q ordinates, their curvatures, the elimination's two rows */
  double *x = malloc(sizeof(double) * (size_t)n * (3 + 2 * N_Q));
  tm->poly = malloc(sizeof(double) * (size_t)(n - 1) * 4 * N_Q);
  tm->node_rate = malloc(sizeof(double) * (size_t)(n - 1) * PT_NODE_VALUES);
  jg_status st = JG_OK;
  if (!x || !tm->poly || !tm->node_rate)
    st = JG_FAIL(err, JG_ENOMEM, "perturbations: out of memory for the coefficient tables");
  if (st == JG_OK) {
    double *lq = x + n; /* lq[q * n + i] */
    double *curv = lq + (size_t)N_Q * n, *work = curv + (size_t)N_Q * n;
    gsl_interp_accel cursor = {0, 0, 0};
    for (int i = 0; i < n; i++) {
      x[i] = i == n_today - 1 ? 0.0 : tm->x0 + i * tm->dx;
      double q[N_Q];
      thermal_coefficients(th, tm, x[i], &cursor, q);
      for (int k = 0; k < N_Q; k++) {
        /* The rates p, d, r (power laws in a over decades) by their
         * logarithms; q_r turns negative where x_e (helium's electrons
         * included) falls faster than hydrogen relaxes, and q_b, q_T, q_v
         * change sign too: all four by their asinh, logarithmic in size,
         * linear through 0; e (negative), g (between 0 and 3/2) and the
         * rest as thermal_coefficients gives them. */
        const int logarithmic = k < Q_EXPANSION;
        const int signed_logarithmic = k >= Q_XE_RELAX && k <= Q_XE_EXPANSION;
        if (!isfinite(q[k]) || (logarithmic && !(q[k] > 0.0))) {
          st = JG_FAIL(err, JG_ENUMERIC,
                       "perturbations: coefficient %d of the medium is %g at z = %g (thermal "
                       "history out of range)",
                       k, q[k], exp(-x[i]) - 1.0);
          break;
        }
        lq[k * n + i] = logarithmic ? log(q[k]) : signed_logarithmic ? asinh(q[k]) : q[k];
        /* What a look-up at the node gives, kept so that one between nodes
         * needs no exp or sinh of the node's term: the rate itself, and for
         * the asinh-tabulated ones sinh and cosh of asinh(q), q itself and
         * sqrt(1 + q^2). */
        if (i == n - 1) continue;
        double *stored = tm->node_rate + (size_t)i * PT_NODE_VALUES;
        if (logarithmic) stored[k] = q[k];
        if (signed_logarithmic) {
          stored[PT_NODE_RATES + 2 * (k - Q_XE_RELAX)] = q[k];
          const double a = fabs(q[k]); /* q^2 would overflow only past 1e154 */
          stored[PT_NODE_RATES + 2 * (k - Q_XE_RELAX) + 1] = a < 1e150 ? sqrt(1.0 + a * a) : a;
        }
      }
      if (st != JG_OK) break;
    }
    if (st == JG_OK) natural_spline_curvatures(x, lq, n, curv, work);
    for (int k = 0; st == JG_OK && k < N_Q; k++) {
      const double *yk = lq + (size_t)k * n, *Mk = curv + (size_t)k * n;
      /* Per-interval polynomial of the natural cubic spline, from the
       * second derivatives at the nodes: y_i + b u + (M_i/2) u^2 +
       * (M_{i+1} - M_i)/(6h) u^3, b = (y_{i+1} - y_i)/h - h (2 M_i + M_{i+1})/6. */
      for (int i = 0; i < n - 1; i++) {
        double h = x[i + 1] - x[i];
        double *c = tm->poly + (size_t)i * 4 * N_Q + 4 * k;
        c[0] = yk[i];
        c[1] = (yk[i + 1] - yk[i]) / h - h * (2.0 * Mk[i] + Mk[i + 1]) / 6.0;
        c[2] = 0.5 * Mk[i];
        c[3] = (Mk[i + 1] - Mk[i]) / (6.0 * h);
      }
    }
  }
  free(x);
  if (st != JG_OK) {
    jg__pt_thermal_medium_free(tm);
    return NULL;
  }
  return tm;
}
