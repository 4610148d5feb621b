/*
 * The real-history medium of the perturbations: the coefficients of the
 * equations tabulated once per model from the thermal history (see the
 * "Speed" note in perturb.c), and their slopes for the Rosenbrock path.
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_spline.h>
#include <math.h>
#include <stdlib.h>

#include "jeansgrow/constants.h"
#include "perturb_internal.h"

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

int jg__pt_thermal_medium_eval(const void *ctx, double ln_a, jg_medium_coefficients *out) {
  const thermal_medium *tm = ctx;
  double t = (ln_a - tm->x0) * tm->inv_dx;
  if (!(t > -1.0e6 && t < 1.0e9)) return 1; /* NaN or absurdly far off */
  int i = (int)t;
  if (i < 0) i = 0;
  if (i > tm->n - 2) i = tm->n - 2;
  double u = ln_a - (tm->x0 + i * tm->dx);
  const double *c = tm->poly + (size_t)i * 4 * N_Q;
  const double *e0 = tm->node_rate + (size_t)i * 3;
  out->pressure = e0[0] * exp_small(u * (c[1] + u * (c[2] + u * c[3])));
  out->drag = e0[1] * exp_small(u * (c[5] + u * (c[6] + u * c[7])));
  out->relaxation = e0[2] * exp_small(u * (c[9] + u * (c[10] + u * c[11])));
  out->dlnH_dlna = c[12] + u * (c[13] + u * (c[14] + u * c[15]));
  out->gravity = c[16] + u * (c[17] + u * (c[18] + u * c[19]));
  out->baryon_fraction = tm->bg->baryon_fraction;
#define PT_VALUE(q) (c[4 * (q)] + u * (c[4 * (q) + 1] + u * (c[4 * (q) + 2] + u * c[4 * (q) + 3])))
  if (tm->effective_gamma) out->pressure_effective = PT_VALUE(Q_GAMMA_EFF) * out->pressure;
  if (tm->ionisation) {
    out->ionisation_relaxation = sinh(PT_VALUE(Q_XE_RELAX));
    out->ionisation_density = sinh(PT_VALUE(Q_XE_DENSITY));
    out->ionisation_temperature = sinh(PT_VALUE(Q_XE_TEMPERATURE));
    out->ionisation_expansion = sinh(PT_VALUE(Q_XE_EXPANSION));
    out->heating_ionisation = PT_VALUE(Q_XE_HEATING) * out->relaxation;
    out->pressure_ionisation = PT_VALUE(Q_XE_PRESSURE) * out->pressure;
  }
#undef PT_VALUE
  return 0;
}

/* d/d ln a of the coefficients, from the same polynomials (exact for the
 * tabulated medium; c holds the values at ln_a). */
void jg__pt_thermal_medium_slope(const thermal_medium *tm, double ln_a,
                                 const jg_medium_coefficients *c, jg_medium_coefficients *dc) {
  double t = (ln_a - tm->x0) * tm->inv_dx;
  int i = (int)t;
  if (i < 0) i = 0;
  if (i > tm->n - 2) i = tm->n - 2;
  double u = ln_a - (tm->x0 + i * tm->dx);
  const double *q = tm->poly + (size_t)i * 4 * N_Q;
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
    dc->ionisation_relaxation = cosh(PT_VALUE(4 * Q_XE_RELAX)) * PT_SLOPE(4 * Q_XE_RELAX);
    dc->ionisation_density = cosh(PT_VALUE(4 * Q_XE_DENSITY)) * PT_SLOPE(4 * Q_XE_DENSITY);
    dc->ionisation_temperature =
        cosh(PT_VALUE(4 * Q_XE_TEMPERATURE)) * PT_SLOPE(4 * Q_XE_TEMPERATURE);
    dc->ionisation_expansion = cosh(PT_VALUE(4 * Q_XE_EXPANSION)) * PT_SLOPE(4 * Q_XE_EXPANSION);
    dc->heating_ionisation = PT_SLOPE(4 * Q_XE_HEATING) * c->relaxation +
                             PT_VALUE(4 * Q_XE_HEATING) * dc->relaxation;
    dc->pressure_ionisation = PT_SLOPE(4 * Q_XE_PRESSURE) * c->pressure +
                              PT_VALUE(4 * Q_XE_PRESSURE) * dc->pressure;
  }
#undef PT_VALUE
#undef PT_SLOPE
  dc->baryon_fraction = c->baryon_fraction;
}

void jg__pt_thermal_medium_free(thermal_medium *tm) {
  if (!tm) return;
  free(tm->poly);
  free(tm->node_rate);
  free(tm);
}

/* The tabulated quantities, from the thermal history at one node (the
 * optional ones only if the medium tabulates them, 0 otherwise). */
static void thermal_coefficients(const jg_thermal *th, const thermal_medium *tm, double x,
                                 double q[N_Q]) {
  const jg_background *bg = jg_thermal_background(th);
  double a = exp(x);
  jg_thermal_state s;
  jg_thermal_state_at(th, 1.0 / a - 1.0, &s);
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
    jg_ionisation_response ir;
    jg_thermal_ionisation_response(th, x, &ir);
    /* q_r turns negative where x_e (helium's electrons included) falls
     * faster than hydrogen relaxes, and q_b, q_T, q_v change sign too: all
     * four are tabulated as asinh, logarithmic in size, linear through 0. */
    const double cap =
        ir.relaxation > 0.0 ? PT_XE_RELAX_CAP / (ir.relaxation + PT_XE_RELAX_CAP) : 1.0;
    q[Q_XE_RELAX] = asinh(cap * ir.relaxation);
    q[Q_XE_DENSITY] = asinh(cap * ir.density);
    q[Q_XE_TEMPERATURE] = asinh(cap * ir.temperature);
    q[Q_XE_EXPANSION] = asinh(cap * ir.expansion);
    q[Q_XE_HEATING] = ir.heating / q[Q_RELAX];
    q[Q_XE_PRESSURE] = ir.pressure;
  }
}

thermal_medium *jg__pt_thermal_medium_new(const jg_thermal *th, double x_first,
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
  tm->n = (int)ceil(-x_first * PT_NODES_PER_EFOLD) + PT_MARGIN_NODES + 1;
  tm->x0 = -(tm->n - 1) * tm->dx;
  const int n = tm->n;
  double *x = malloc(sizeof(double) * (size_t)n * (1 + N_Q));
  tm->poly = malloc(sizeof(double) * (size_t)(n - 1) * 4 * N_Q);
  tm->node_rate = malloc(sizeof(double) * (size_t)(n - 1) * 3);
  gsl_spline *sp = gsl_spline_alloc(gsl_interp_cspline, (size_t)n);
  jg_status st = JG_OK;
  if (!x || !tm->poly || !tm->node_rate || !sp)
    st = JG_FAIL(err, JG_ENOMEM, "perturbations: out of memory for the coefficient tables");
  if (st == JG_OK) {
    double *lq = x + n; /* lq[q * n + i] */
    for (int i = 0; i < n; i++) {
      x[i] = i == n - 1 ? 0.0 : tm->x0 + i * tm->dx;
      double q[N_Q];
      thermal_coefficients(th, tm, x[i], q);
      for (int k = 0; k < N_Q; k++) {
        /* The rates p, d, r (power laws in a over decades) by their
         * logarithms; e (negative), g (between 0 and 3/2) and the rest as
         * thermal_coefficients gives them. */
        const int logarithmic = k < Q_EXPANSION;
        if (!isfinite(q[k]) || (logarithmic && !(q[k] > 0.0))) {
          st = JG_FAIL(err, JG_ENUMERIC,
                       "perturbations: coefficient %d of the medium is %g at z = %g (thermal "
                       "history out of range)",
                       k, q[k], exp(-x[i]) - 1.0);
          break;
        }
        lq[k * n + i] = logarithmic ? log(q[k]) : q[k];
      }
      if (st != JG_OK) break;
    }
    for (int k = 0; st == JG_OK && k < N_Q; k++) {
      const double *yk = lq + k * n;
      if (gsl_spline_init(sp, x, yk, (size_t)n) != GSL_SUCCESS) {
        st = JG_FAIL(err, JG_ENUMERIC, "perturbations: cannot build the coefficient splines");
        break;
      }
      /* Per-interval polynomial of GSL's natural cubic spline, from the
       * second derivatives at the nodes: y_i + b u + (M_i/2) u^2 +
       * (M_{i+1} - M_i)/(6h) u^3, b = (y_{i+1} - y_i)/h - h (2 M_i + M_{i+1})/6. */
      double M_prev = gsl_spline_eval_deriv2(sp, x[0], NULL);
      for (int i = 0; i < n - 1; i++) {
        double h = x[i + 1] - x[i];
        double M_next = (i + 1 == n - 1) ? 0.0 : gsl_spline_eval_deriv2(sp, x[i + 1], NULL);
        double *c = tm->poly + (size_t)i * 4 * N_Q + 4 * k;
        c[0] = yk[i];
        c[1] = (yk[i + 1] - yk[i]) / h - h * (2.0 * M_prev + M_next) / 6.0;
        c[2] = 0.5 * M_prev;
        c[3] = (M_next - M_prev) / (6.0 * h);
        if (k < Q_EXPANSION) tm->node_rate[(size_t)i * 3 + k] = exp(yk[i]);
        M_prev = M_next;
      }
    }
  }
  gsl_spline_free(sp);
  free(x);
  if (st != JG_OK) {
    jg__pt_thermal_medium_free(tm);
    return NULL;
  }
  return tm;
}

