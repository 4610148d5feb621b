/*
 * The expansion history: Friedmann equation, densities, and the integrals
 * over it (cosmic and conformal time, distances, sound horizon, Heath growth).
 *
 * Every integral is int g(a) da over the quantity
 *
 *   Q(a) = a^4 E(a)^2 = Omega_r + Omega_m a + Omega_k a^2 + Omega_de a^4 f_de(a),
 *
 * which tends to Omega_r > 0 as a -> 0, so no integrand is singular at a = 0
 * (1/sqrt(Q), a/sqrt(Q), ...). The quadrature runs in s = sqrt(a) while
 * radiation dominates, where the integrand is smooth in s, and in ln a
 * after that, where every change of regime spans O(1) e-folds; see
 * integrate_a(). The error estimate of GSL's Gauss-Kronrod rules is then
 * trustworthy, and 1e-9 is requested for the 1e-8 promised.
 *
 * Thread safety: the object is read-only after jg_background_new; each
 * integral allocates its own GSL workspace and keeps its state on the stack.
 * The library never touches the GSL error handler; callers switch it off.
 */
#include "jeansgrow/background.h"

#include <math.h>
#include <stdlib.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_integration.h>
#include <gsl/gsl_min.h>
#include <gsl/gsl_odeiv2.h>

#include "jeansgrow/constants.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* Smallest scale factor at which jg_background_new checks H^2 > 0, as the
 * public header promises (a = 1e-10, z ~ 1e10: far before anything the
 * thermal history or the perturbations integrate). */
#define BG_A_CHECK_MIN 1.0e-10
/* Samples per e-fold of a for the H^2 > 0 scan; any local minimum found on
 * this grid is then refined with Brent's method, so a dip narrower than the
 * spacing near a turning point is still caught. */
#define BG_SCAN_PER_EFOLD 200
/* Relative accuracy requested from GSL: ten times tighter than the 1e-8
 * promised for every integral, so the promise holds with the error estimate. */
#define BG_QUAD_EPSREL 1.0e-9
#define BG_QUAD_LIMIT 1000

/* ---- the Friedmann equation --------------------------------------------- */

static int is_cosmological_constant(const jg_background *bg) {
  return bg->cosmology.de_w0 == -1.0 && bg->cosmology.de_wa == 0.0;
}

/* Omega_de a^4 f_de(a), with the CPL f_de = a^(-3(1+w0+wa)) exp(-3 wa (1-a)).
 * The cosmological constant is special-cased so that it is exactly a^4 and
 * the Lambda-CDM results do not carry exp/log rounding. */
static double de_term_a4(const jg_background *bg, double a) {
  if (is_cosmological_constant(bg)) {
    double a2 = a * a;
    return bg->omega_de * a2 * a2;
  }
  double w0 = bg->cosmology.de_w0, wa = bg->cosmology.de_wa;
  return bg->omega_de * exp((1.0 - 3.0 * (w0 + wa)) * log(a) - 3.0 * wa * (1.0 - a));
}

/* Q(a) = a^4 E^2: positive and finite from a = 0 on for an accepted model. */
static double q_of_a(const jg_background *bg, double a) {
  return bg->omega_r + a * (bg->omega_m + a * bg->omega_k) + de_term_a4(bg, a);
}

double jg_background_E(const jg_background *bg, double a) {
  return sqrt(q_of_a(bg, a)) / (a * a);
}

double jg_background_hubble(const jg_background *bg, double a) {
  return bg->H0 * jg_background_E(bg, a);
}

double jg_background_dlnH_dlna(const jg_background *bg, double a) {
  /* d ln E^2 / d ln a of each term: -4 radiation, -3 matter, -2 curvature,
   * -3 (1 + w(a)) dark energy with w(a) = w0 + wa (1 - a). */
  double w = bg->cosmology.de_w0 + bg->cosmology.de_wa * (1.0 - a);
  double rad = bg->omega_r, mat = bg->omega_m * a, cur = bg->omega_k * a * a;
  double de = de_term_a4(bg, a);
  double q = rad + mat + cur + de;
  return 0.5 * (-4.0 * rad - 3.0 * mat - 2.0 * cur - 3.0 * (1.0 + w) * de) / q;
}

double jg_background_rho_matter(const jg_background *bg, double a) {
  return bg->omega_m * bg->rho_crit0 / (a * a * a);
}

double jg_background_rho_baryon(const jg_background *bg, double a) {
  return bg->omega_b * bg->rho_crit0 / (a * a * a);
}

double jg_background_omega_m_of_a(const jg_background *bg, double a) {
  /* Omega_m a^-3 / E^2 = Omega_m a / Q: the share of H^2 (curvature counted
   * as a term of H^2, as in the usual Omega_m(z)). */
  return bg->omega_m * a / q_of_a(bg, a);
}

double jg_background_n_hydrogen(const jg_background *bg, double a) {
  return bg->n_H0 / (a * a * a);
}

double jg_background_T_radiation(const jg_background *bg, double a) {
  return bg->cosmology.cmb_temperature_K / a;
}

/* rho_b = n_H m_H / (1 - Y) (the masses counted in atoms, as n_H0 is) over
 * n_H (1 + f_He + x_e) particles: nuclei of both kinds and free electrons. */
double jg_background_mean_molecular_weight(const jg_background *bg, double x_e) {
  return 1.0 / ((1.0 - bg->cosmology.helium_mass_fraction) *
                (1.0 + bg->helium_to_hydrogen + x_e));
}

double jg_background_z_equality(const jg_background *bg) {
  return bg->omega_m / bg->omega_r - 1.0;
}

/* ---- construction and validation ---------------------------------------- */

/* The ranges and the dark-energy rule (w0 + wa < 1/3: the whole library
 * assumes a radiation-dominated start) are the key table's, so that a
 * program filling jg_cosmology by hand meets the limits a parameter file
 * does. Whether H^2 stays positive is this module's own check below. */
static jg_status validate_cosmology(const jg_cosmology *c, jg_error *err) {
  return jg_params_check_cosmology(c, err);
}

/* The state an integrand or the minimiser needs. GSL passes a void *; a
 * mutable context on the caller's stack keeps the background itself const
 * and records a bad point (H^2 <= 0) instead of feeding NaN to the quadrature. */
typedef struct bg_ctx {
  const jg_background *bg;
  int bad;      /* set when Q(a) <= 0 or non-finite was met */
  double bad_a; /* where */
} bg_ctx;

static double q_checked(bg_ctx *ctx, double a) {
  double q = q_of_a(ctx->bg, a);
  if (!(q > 0.0) || !isfinite(q)) {
    if (!ctx->bad) ctx->bad_a = a;
    ctx->bad = 1;
    return NAN;
  }
  return q;
}

/* Q as a function of ln a, for the minimiser. */
static double q_of_lna(double lna, void *params) {
  bg_ctx *ctx = params;
  return q_of_a(ctx->bg, exp(lna));
}

/* Refine a sampled local minimum of Q between ln a = x_lo and x_hi (with
 * x_mid the sample) using Brent's method. *q_min gets the smallest Q found
 * and *x_min its ln a; if the minimiser cannot run (flat samples) or fails,
 * the sampled value stands, which is still a valid point to check. */
static jg_status refine_minimum(bg_ctx *ctx, double x_lo, double x_mid, double x_hi,
                                double *x_min, double *q_min, jg_error *err) {
  gsl_function f = {q_of_lna, ctx};
  double f_lo = q_of_lna(x_lo, ctx), f_mid = q_of_lna(x_mid, ctx), f_hi = q_of_lna(x_hi, ctx);
  *x_min = x_mid;
  *q_min = f_mid;
  if (!(f_mid < f_lo && f_mid < f_hi)) return JG_OK;
  gsl_min_fminimizer *m = gsl_min_fminimizer_alloc(gsl_min_fminimizer_brent);
  if (!m) return JG_FAIL(err, JG_ENOMEM, "background: out of memory for the GSL minimiser");
  if (gsl_min_fminimizer_set_with_values(m, &f, x_mid, f_mid, x_lo, f_lo, x_hi, f_hi) ==
      GSL_SUCCESS) {
    /* A double root of Q has a flat bottom: stop on the bracket width in
     * ln a, far below any physically meaningful interval. */
    for (int iter = 0; iter < 200; ++iter) {
      if (gsl_min_fminimizer_iterate(m) != GSL_SUCCESS) break;
      double lo = gsl_min_fminimizer_x_lower(m), hi = gsl_min_fminimizer_x_upper(m);
      double fm = gsl_min_fminimizer_f_minimum(m);
      if (fm < *q_min) {
        *q_min = fm;
        *x_min = gsl_min_fminimizer_x_minimum(m);
      }
      if (gsl_min_test_interval(lo, hi, 1e-12, 0.0) == GSL_SUCCESS) break;
    }
  }
  gsl_min_fminimizer_free(m);
  return JG_OK;
}

/* Reject models in which H^2 <= 0 (or overflows) somewhere on
 * [BG_A_CHECK_MIN, 1]: such a universe did not expand from a hot big bang
 * (a bounce or loitering closed model), and every integral from a = 0 would
 * be meaningless. */
static jg_status check_expansion(const jg_background *bg, jg_error *err) {
  bg_ctx ctx = {bg, 0, 0.0};
  const double x0 = log(BG_A_CHECK_MIN);
  const int n = (int)ceil(-x0 * BG_SCAN_PER_EFOLD);
  const double dx = -x0 / n;
  double worst_q = HUGE_VAL, worst_x = 0.0;
  double q_prev2 = 0.0, q_prev = 0.0;
  for (int i = 0; i <= n; ++i) {
    double x = (i == n) ? 0.0 : x0 + i * dx;
    double q = q_of_lna(x, &ctx);
    if (!isfinite(q))
      return JG_FAIL(err, JG_EINVAL,
                     "cosmology: H^2 is not finite at z = %.6g (a = %.6g); check "
                     "cosmology.de_w0 and cosmology.de_wa",
                     exp(-x) - 1.0, exp(x));
    if (q < worst_q) {
      worst_q = q;
      worst_x = x;
    }
    /* A sampled local minimum: a turning point of H^2 between the samples
     * i-2 and i. Refine it; the true minimum may dip below zero in between. */
    if (i >= 2 && q_prev <= q_prev2 && q_prev <= q) {
      double xm, qm;
      jg_status st = refine_minimum(&ctx, x - 2.0 * dx, x - dx, x, &xm, &qm, err);
      if (st != JG_OK) return st;
      if (qm < worst_q) {
        worst_q = qm;
        worst_x = xm;
      }
    }
    q_prev2 = q_prev;
    q_prev = q;
  }
  if (!(worst_q > 0.0)) {
    double a = exp(worst_x);
    return JG_FAIL(err, JG_EINVAL,
                   "cosmology: H^2 <= 0 at z = %.6g (a = %.6g, H^2/H0^2 = %.3g): no "
                   "expansion from a hot big bang with cosmology.curvature_omega = %g, "
                   "Omega_m = %g and dark-energy Omega_de = %g",
                   1.0 / a - 1.0, a, worst_q / (a * a * a * a), bg->omega_k, bg->omega_m,
                   bg->omega_de);
  }
  return JG_OK;
}

jg_background *jg_background_new(const jg_cosmology *c, jg_error *err) {
  if (!c) {
    JG_FAIL(err, JG_EINVAL, "jg_background_new: no cosmology given (NULL)");
    return NULL;
  }
  if (validate_cosmology(c, err) != JG_OK) return NULL;

  jg_background *bg = calloc(1, sizeof *bg);
  if (!bg) {
    JG_FAIL(err, JG_ENOMEM, "jg_background_new: out of memory");
    return NULL;
  }
  bg->cosmology = *c;
  const double h = c->hubble_h, T0 = c->cmb_temperature_K, Y = c->helium_mass_fraction;
  bg->H0 = h * JG_H100;
  bg->rho_crit0 = 3.0 * bg->H0 * bg->H0 / (8.0 * JG_PI * JG_G_NEWTON);
  /* Black-body photons: energy density a_rad T^4, as a mass density / c^2. */
  bg->omega_gamma = JG_A_RADIATION * T0 * T0 * T0 * T0 /
                    (bg->rho_crit0 * JG_C_LIGHT * JG_C_LIGHT);
  /* Massless neutrinos: (7/8) per fermionic degree of freedom, with
   * T_nu/T_gamma = (4/11)^(1/3) after e+e- annihilation. */
  bg->omega_nu = c->neutrino_number_eff * (7.0 / 8.0) * pow(4.0 / 11.0, 4.0 / 3.0) *
                 bg->omega_gamma;
  bg->omega_r = bg->omega_gamma + bg->omega_nu;
  bg->omega_b = c->baryon_density_h2 / (h * h);
  bg->omega_c = c->cdm_density_h2 / (h * h);
  bg->omega_m = bg->omega_b + bg->omega_c;
  bg->omega_k = c->curvature_omega;
  bg->omega_de = 1.0 - bg->omega_m - bg->omega_r - bg->omega_k;
  bg->baryon_fraction = bg->omega_b / bg->omega_m;
  const double rho_b0 = bg->omega_b * bg->rho_crit0;
  /* The hydrogen mass fraction 1 - Y counted in 1H atoms: the atomic mass
   * includes the electron, which is where the baryon mass sits. */
  bg->n_H0 = (1.0 - Y) * rho_b0 / JG_M_HYDROGEN_ATOM;
  /* Exact number ratio from the mass fraction and the two atomic masses:
   * n_He/n_H = [Y/m_He4] / [(1-Y)/m_H] = Y m_H / ((1-Y) m_He4). The common
   * shortcut Y/(4(1-Y)) takes m_He4 = 4 m_H and is 0.7 % lower. */
  bg->helium_to_hydrogen = Y * JG_M_HYDROGEN_ATOM / ((1.0 - Y) * JG_M_HELIUM4_ATOM);
  /* R = 3 rho_b / (4 rho_gamma) grows as a since rho_b ~ a^-3, rho_gamma ~ a^-4. */
  bg->R_coefficient = 3.0 * bg->omega_b / (4.0 * bg->omega_gamma);

  /* Extreme but finite inputs can still overflow (h ~ 1e200) or underflow
   * (T_cmb ~ 1e-100) here; every later formula divides by these. */
  const double positive[] = {bg->H0, bg->rho_crit0, bg->omega_gamma, bg->omega_m, bg->n_H0,
                             bg->R_coefficient};
  int representable = isfinite(bg->omega_de) && isfinite(bg->omega_r);
  for (size_t i = 0; i < sizeof positive / sizeof positive[0]; ++i)
    representable = representable && isfinite(positive[i]) && positive[i] > 0.0;
  if (!representable) {
    JG_FAIL(err, JG_EINVAL,
            "cosmology: derived densities overflow or underflow double precision "
            "(hubble_h = %g, baryon_density_h2 = %g, cdm_density_h2 = %g, "
            "cmb_temperature_K = %g)",
            h, c->baryon_density_h2, c->cdm_density_h2, T0);
    free(bg);
    return NULL;
  }
  if (check_expansion(bg, err) != JG_OK) {
    free(bg);
    return NULL;
  }
  return bg;
}

void jg_background_free(jg_background *bg) { free(bg); }

/* ---- integrals ----------------------------------------------------------- */

/* Each integral is int g(a) da with one of the integrands below, evaluated
 * by integrate_a() in two variables (see the file comment). */
typedef double (*bg_integrand)(bg_ctx *ctx, double a);

/* H0 t = int a da / sqrt(Q). */
static double g_time(bg_ctx *ctx, double a) { return a / sqrt(q_checked(ctx, a)); }

/* H0 eta / c = int da / sqrt(Q) (also the comoving distance). */
static double g_conformal(bg_ctx *ctx, double a) { return 1.0 / sqrt(q_checked(ctx, a)); }

/* H0 r_s / c = int da / (sqrt(3 (1 + R)) sqrt(Q)), R = R_coefficient a. */
static double g_sound(bg_ctx *ctx, double a) {
  return 1.0 / (sqrt(3.0 * (1.0 + ctx->bg->R_coefficient * a)) * sqrt(q_checked(ctx, a)));
}

/* Heath's integrand without radiation: da / (a E)^3 with (a E)^2 = P(a)/a,
 * P = Omega_m + Omega_k a + Omega_Lambda a^3, i.e. (a / P)^(3/2) da. */
static double heath_p(const jg_background *bg, double a) {
  return bg->omega_m + a * (bg->omega_k + a * a * bg->omega_de);
}

static double g_heath(bg_ctx *ctx, double a) {
  double p = heath_p(ctx->bg, a);
  if (!(p > 0.0)) {
    if (!ctx->bad) ctx->bad_a = a;
    ctx->bad = 1;
    return NAN;
  }
  double r = a / p;
  return r * sqrt(r);
}

typedef struct bg_quad {
  bg_ctx ctx;
  bg_integrand g;
} bg_quad;

/* g(a) da = 2 s g(s^2) ds. */
static double in_sqrt_a(double s, void *params) {
  bg_quad *q = params;
  return 2.0 * s * q->g(&q->ctx, s * s);
}

/* g(a) da = a g(a) d ln a. */
static double in_ln_a(double x, void *params) {
  bg_quad *q = params;
  double a = exp(x);
  return a * q->g(&q->ctx, a);
}

static jg_status quad_failed(const char *what, double z, int st, double value, double abserr,
                             jg_error *err) {
  return JG_FAIL(err, JG_ENUMERIC,
                 "background: %s to z = %g failed in GSL quadrature: %s (value %g, error "
                 "estimate %g)",
                 what, z, gsl_strerror(st), value, abserr);
}

/*
 * int_{a_lo}^{a_hi} g(a) da, 0 <= a_lo < a_hi <= 1, to relative BG_QUAD_EPSREL.
 *
 * Above a_split = 1e-3 a_eq (a_eq = Omega_r/Omega_m) the integral runs in
 * x = ln a, where every change of regime (radiation -> matter -> curvature or
 * dark energy, R ~ 1) spans O(1) in x and is seen by the Gauss-Kronrod nodes.
 * In s = sqrt(a) the radiation-matter transition of a test cosmology with
 * Omega_r ~ 1e-15 is a layer of width ~1e-6 at the end of [0, 1]: the rule
 * can miss it and still report convergence (measured: 8e-7 wrong with a
 * 2e-10 error estimate). Below a_split, radiation dominates Q and the
 * integrand is smooth in s; qags there also copes with the algebraic
 * endpoint behaviour of unusual CPL dark energy (w0 + wa close to 1/3).
 * `what` and `z` only name a failure.
 */
static jg_status integrate_a(const jg_background *bg, bg_integrand g, double a_lo, double a_hi,
                             const char *what, double z, double *result, jg_error *err) {
  bg_quad q = {{bg, 0, 0.0}, g};
  const double a_split = 1e-3 * bg->omega_r / bg->omega_m;
  gsl_integration_workspace *w = gsl_integration_workspace_alloc(BG_QUAD_LIMIT);
  if (!w) return JG_FAIL(err, JG_ENOMEM, "background: out of memory for the %s workspace", what);
  double total = 0.0, value = 0.0, abserr = 0.0;
  int st = GSL_SUCCESS;
  if (a_lo < a_split) {
    gsl_function fn = {in_sqrt_a, &q};
    double s_hi = sqrt(a_hi < a_split ? a_hi : a_split);
    st = gsl_integration_qags(&fn, sqrt(a_lo), s_hi, 0.0, BG_QUAD_EPSREL, BG_QUAD_LIMIT, w,
                              &value, &abserr);
    total += value;
  }
  if (st == GSL_SUCCESS && !q.ctx.bad && a_hi > a_split) {
    gsl_function fn = {in_ln_a, &q};
    double x_lo = log(a_lo > a_split ? a_lo : a_split);
    st = gsl_integration_qag(&fn, x_lo, log(a_hi), 0.0, BG_QUAD_EPSREL, BG_QUAD_LIMIT,
                             GSL_INTEG_GAUSS61, w, &value, &abserr);
    total += value;
  }
  gsl_integration_workspace_free(w);
  if (q.ctx.bad)
    return JG_FAIL(err, g == g_heath ? JG_EINVAL : JG_ENUMERIC,
                   g == g_heath
                       ? "background: %s to z = %g: without radiation H^2 <= 0 at a = %.6g, "
                         "so the Heath integral does not apply"
                       : "background: %s to z = %g: H^2 <= 0 at a = %.6g inside the integral",
                   what, z, q.ctx.bad_a);
  if (st != GSL_SUCCESS || !isfinite(total)) return quad_failed(what, z, st, value, abserr, err);
  *result = total;
  return JG_OK;
}

static jg_status check_args_a(const jg_background *bg, double a, const void *out,
                              const char *fn, jg_error *err) {
  if (!bg || !out) return JG_FAIL(err, JG_EINVAL, "%s: NULL background or result pointer", fn);
  if (!(a > 0.0 && a <= 1.0))
    return JG_FAIL(err, JG_EINVAL, "%s: scale factor a = %g is outside (0, 1]", fn, a);
  return JG_OK;
}

static jg_status check_args_z(const jg_background *bg, double z, const void *out,
                              const char *fn, jg_error *err) {
  if (!bg || !out) return JG_FAIL(err, JG_EINVAL, "%s: NULL background or result pointer", fn);
  if (!(z >= 0.0 && isfinite(z)))
    return JG_FAIL(err, JG_EINVAL, "%s: redshift z = %g must be finite and >= 0", fn, z);
  return JG_OK;
}

/* c / H0 in Mpc. */
static double hubble_distance_mpc(const jg_background *bg) {
  return JG_C_LIGHT / bg->H0 / JG_MPC;
}

/* A time since the big bang: the integral of g from a = 0, times `unit`. */
static jg_status time_since_big_bang(const jg_background *bg, double a,
                                     double (*g)(bg_ctx *, double), double unit,
                                     const char *what, const char *caller, double *out,
                                     jg_error *err) {
  jg_status st = check_args_a(bg, a, out, caller, err);
  if (st != JG_OK) return st;
  double v;
  st = integrate_a(bg, g, 0.0, a, what, 1.0 / a - 1.0, &v, err);
  if (st != JG_OK) return st;
  *out = v * unit;
  return JG_OK;
}

jg_status jg_background_cosmic_time(const jg_background *bg, double a, double *t, jg_error *err) {
  return time_since_big_bang(bg, a, g_time, bg ? 1.0 / bg->H0 : 0.0, "cosmic time",
                             "jg_background_cosmic_time", t, err);
}

jg_status jg_background_conformal_time(const jg_background *bg, double a, double *eta_mpc,
                                       jg_error *err) {
  return time_since_big_bang(bg, a, g_conformal, bg ? hubble_distance_mpc(bg) : 0.0,
                             "conformal time", "jg_background_conformal_time", eta_mpc, err);
}

jg_status jg_background_comoving_distance(const jg_background *bg, double z, double *d_mpc,
                                          jg_error *err) {
  jg_status st = check_args_z(bg, z, d_mpc, "jg_background_comoving_distance", err);
  if (st != JG_OK) return st;
  if (z == 0.0) {
    *d_mpc = 0.0;
    return JG_OK;
  }
  /* Integrated directly from a to 1 rather than as eta(1) - eta(a), which
   * would lose relative accuracy at low z. */
  double v;
  st = integrate_a(bg, g_conformal, 1.0 / (1.0 + z), 1.0, "comoving distance", z, &v, err);
  if (st != JG_OK) return st;
  *d_mpc = v * hubble_distance_mpc(bg);
  return JG_OK;
}

jg_status jg_background_transverse_distance(const jg_background *bg, double z, double *d_mpc,
                                            jg_error *err) {
  double chi;
  jg_status st = jg_background_comoving_distance(bg, z, &chi, err);
  if (st != JG_OK) return st;
  const double ok = bg->omega_k, dh = hubble_distance_mpc(bg);
  if (ok > 0.0) {
    double sk = sqrt(ok);
    *d_mpc = dh / sk * sinh(sk * chi / dh);
  } else if (ok < 0.0) {
    double sk = sqrt(-ok);
    *d_mpc = dh / sk * sin(sk * chi / dh);
  } else {
    *d_mpc = chi;
  }
  return JG_OK;
}

jg_status jg_background_sound_horizon(const jg_background *bg, double z, double *r_mpc,
                                      jg_error *err) {
  jg_status st = check_args_z(bg, z, r_mpc, "jg_background_sound_horizon", err);
  if (st != JG_OK) return st;
  double v;
  st = integrate_a(bg, g_sound, 0.0, 1.0 / (1.0 + z), "sound horizon", z, &v, err);
  if (st != JG_OK) return st;
  *r_mpc = v * hubble_distance_mpc(bg);
  return JG_OK;
}

jg_status jg_background_growth_heath(const jg_background *bg, double a, double *D,
                                     jg_error *err) {
  jg_status st = check_args_a(bg, a, D, "jg_background_growth_heath", err);
  if (st != JG_OK) return st;
  /* Heath's closed form solves the growth equation only when the smooth
   * components are matter, curvature and a cosmological constant. */
  if (!is_cosmological_constant(bg))
    return JG_FAIL(err, JG_EINVAL,
                   "jg_background_growth_heath: the Heath (1977) integral holds only for a "
                   "cosmological constant (cosmology.de_w0 = -1, cosmology.de_wa = 0); got "
                   "w0 = %g, wa = %g",
                   bg->cosmology.de_w0, bg->cosmology.de_wa);
  /* Radiation is left out of E, as in the integral's derivation; Omega_Lambda
   * and Omega_k keep their values (closure with radiation), so E(1) = 1 -
   * O(Omega_r), and D -> a as a -> 0 whatever the closure. */
  const double p_a = heath_p(bg, a);
  if (!(p_a > 0.0))
    return JG_FAIL(err, JG_EINVAL,
                   "jg_background_growth_heath: without radiation H^2 <= 0 at a = %g", a);
  double v;
  st = integrate_a(bg, g_heath, 0.0, a, "Heath growth integral", 1.0 / a - 1.0, &v, err);
  if (st != JG_OK) return st;
  const double e_no_rad = sqrt(p_a / (a * a * a));
  *D = 2.5 * bg->omega_m * e_no_rad * v;
  return JG_OK;
}

/* ------------------------------------------------------------------------ */
/* Growth factor for any dark energy: the growth equation itself,            */
/*   D'' + (2 + d ln E / d ln a) D' = (3/2) Omega_m a^-3 / E^2 D   (' = d/d ln a), */
/* with E^2 = Omega_m a^-3 + Omega_k a^-2 + Omega_de f_de(a) (radiation left  */
/* out as in the Heath integral, so that the two agree for a cosmological     */
/* constant), started on D = a deep in matter domination.                    */

static double growth_e2(const jg_background *bg, double a, double *de2_dlna) {
  const jg_cosmology *c = &bg->cosmology;
  double fde = pow(a, -3.0 * (1.0 + c->de_w0 + c->de_wa)) * exp(-3.0 * c->de_wa * (1.0 - a));
  double m = bg->omega_m / (a * a * a), k = bg->omega_k / (a * a), d = bg->omega_de * fde;
  *de2_dlna = -3.0 * m - 2.0 * k + d * (-3.0 * (1.0 + c->de_w0 + c->de_wa) + 3.0 * c->de_wa * a);
  return m + k + d;
}

/* GSL passes a non-const void *; this wrapper keeps the background const. */
typedef struct background_ref {
  const jg_background *bg;
} background_ref;

static int growth_rhs(double x, const double y[], double f[], void *params) {
  const jg_background *bg = ((const background_ref *)params)->bg;
  double a = exp(x), de2;
  double e2 = growth_e2(bg, a, &de2);
  if (!(e2 > 0.0)) return GSL_EBADFUNC;
  f[0] = y[1];
  f[1] = -(2.0 + 0.5 * de2 / e2) * y[1] + 1.5 * bg->omega_m / (a * a * a) / e2 * y[0];
  return GSL_SUCCESS;
}

/* Start of the growth equation: where dark energy and curvature are
 * negligible next to matter. */
static double growth_a_start(double a) { return fmin(1e-5, 0.5 * a); }

/* Points per e-fold at which the reference H^2 is checked: its terms are
 * powers of a (times exp(-3 wa (1 - a))), so a sign change between two
 * points 1/64 e-fold apart would need a double root there. */
#define BG_REFERENCE_CHECKS_PER_EFOLD 64.0

int jg_background_reference_growth_defined(const jg_background *bg, double a) {
  if (!bg || !(a > 0.0 && a <= 1.0)) return 0;
  const double a_start = growth_a_start(a), span = log(a / a_start);
  const int n = (int)ceil(BG_REFERENCE_CHECKS_PER_EFOLD * span);
  double de2;
  for (int i = 0; i <= n; i++) {
    const double ai = i == n ? a : a_start * exp(span * i / n);
    if (!(growth_e2(bg, ai, &de2) > 0.0)) return 0;
  }
  return 1;
}

jg_status jg_background_growth_factor(const jg_background *bg, double a, double *D, double *f,
                                      jg_error *err) {
  jg_status st = check_args_a(bg, a, D, "jg_background_growth_factor", err);
  if (st != JG_OK) return st;
  const double a_start = growth_a_start(a);
  background_ref ref = {bg};
  gsl_odeiv2_system sys = {growth_rhs, NULL, 2, &ref};
  gsl_odeiv2_driver *d =
      gsl_odeiv2_driver_alloc_y_new(&sys, gsl_odeiv2_step_rk8pd, 1e-3, 1e-14, 1e-11);
  if (!d) return JG_FAIL(err, JG_ENOMEM, "out of memory for the growth equation");
  double x = log(a_start), y[2] = {a_start, a_start};
  int status = gsl_odeiv2_driver_apply(d, &x, log(a), y);
  gsl_odeiv2_driver_free(d);
  if (status != GSL_SUCCESS)
    return JG_FAIL(err, JG_ENUMERIC, "growth factor: integration failed at z = %g (%s)",
                   exp(-x) - 1.0, gsl_strerror(status));
  *D = y[0];
  if (f) *f = y[1] / y[0];
  return JG_OK;
}
