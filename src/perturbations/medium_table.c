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
#include "../base/alloc.h" /* last: test builds route allocations through it */

int jg__pt_thermal_medium_eval(const void *ctx, double ln_a, jg_medium_coefficients *out) {
  const thermal_medium *tm = ctx;
  double t = (ln_a - tm->x0) * tm->inv_dx;
  if (!(t > -1.0e6 && t < 1.0e9)) return 1; /* NaN or absurdly far off */
  int i = (int)t;
  if (i < 0) i = 0;
  if (i > tm->n - 2) i = tm->n - 2;
  double u = ln_a - (tm->x0 + i * tm->dx);
  const double *c = tm->poly + (size_t)i * 4 * N_Q;
  double lp = c[0] + u * (c[1] + u * (c[2] + u * c[3]));
  double ld = c[4] + u * (c[5] + u * (c[6] + u * c[7]));
  double lr = c[8] + u * (c[9] + u * (c[10] + u * c[11]));
  out->dlnH_dlna = c[12] + u * (c[13] + u * (c[14] + u * c[15]));
  out->gravity = c[16] + u * (c[17] + u * (c[18] + u * c[19]));
  out->baryon_fraction = tm->bg->baryon_fraction;
  out->pressure = exp(lp);
  out->drag = exp(ld);
  out->relaxation = exp(lr);
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
#undef PT_SLOPE
  dc->baryon_fraction = c->baryon_fraction;
}

void jg__pt_thermal_medium_free(thermal_medium *tm) {
  if (!tm) return;
  free(tm->poly);
  free(tm);
}

/* The five coefficients, from the thermal history at one node. */
static void thermal_coefficients(const jg_thermal *th, double x, double q[N_Q]) {
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
   * (src/PHYSICS.md §11). Zero without heating. */
  q[Q_RELAX] =
      s.compton_rate * (s.T_rad / s.T_gas) / H + jg_thermal_heating_rate(th, s.z) / s.T_gas;
  q[Q_EXPANSION] = jg_background_dlnH_dlna(bg, a);
  q[Q_GRAVITY] = 1.5 * jg_background_omega_m_of_a(bg, a);
}

thermal_medium *jg__pt_thermal_medium_new(const jg_thermal *th, double x_first, jg_error *err) {
  thermal_medium *tm = calloc(1, sizeof *tm);
  if (!tm) {
    JG_FAIL(err, JG_ENOMEM, "perturbations: out of memory for the coefficient tables");
    return NULL;
  }
  tm->bg = jg_thermal_background(th);
  tm->dx = 1.0 / PT_NODES_PER_EFOLD;
  tm->inv_dx = PT_NODES_PER_EFOLD;
  tm->n = (int)ceil(-x_first * PT_NODES_PER_EFOLD) + PT_MARGIN_NODES + 1;
  tm->x0 = -(tm->n - 1) * tm->dx;
  const int n = tm->n;
  double *x = malloc(sizeof(double) * (size_t)n * (1 + N_Q));
  tm->poly = malloc(sizeof(double) * (size_t)(n - 1) * 4 * N_Q);
  gsl_spline *sp = gsl_spline_alloc(gsl_interp_cspline, (size_t)n);
  jg_status st = JG_OK;
  if (!x || !tm->poly || !sp)
    st = JG_FAIL(err, JG_ENOMEM, "perturbations: out of memory for the coefficient tables");
  if (st == JG_OK) {
    double *lq = x + n; /* lq[q * n + i] */
    for (int i = 0; i < n; i++) {
      x[i] = i == n - 1 ? 0.0 : tm->x0 + i * tm->dx;
      double q[N_Q];
      thermal_coefficients(th, x[i], q);
      for (int k = 0; k < N_Q; k++) {
        /* The rates p, d, r (power laws in a over decades) by their
         * logarithms; e (negative) and g (between 0 and 3/2) as they are. */
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

