/*
 * Atomic physics of recombination: Saha equilibrium of hydrogen and helium,
 * and the effective three-level atom of Peebles (1968, ApJ 153, 1) in the form
 * of Seager, Sasselov & Scott (1999, ApJ 523, L1, eqs. 1-3):
 *
 *   dx_p/dt = -C [ alpha_B(T_gas) n_H x_e x_p - beta_B(T_rad) (1 - x_p) exp(-E_21/kT_rad) ]
 *   C = [1 + K Lambda_2s1s n_H (1 - x_p)] / [1 + K (Lambda_2s1s + beta_B) n_H (1 - x_p)]
 *   K = lambda_alpha^3 / (8 pi H),
 *   beta_B = alpha_B(T_rad) (2 pi m_e k T_rad / h^2)^(3/2) exp(-E_2 / kT_rad),
 *   E_2 = E_ion / 4 (binding energy of n = 2), E_21 = 3 E_ion / 4.
 */
#include "recombination.h"

#include <gsl/gsl_errno.h>
#include <math.h>
#include <stdbool.h>

#include "jeansgrow/constants.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* Pequignot, Petitjean & Boisson (1991) case-B fit, as used by SSS 1999 eq. 3:
 * alpha_B = F 1e-19 a t^b / (1 + c t^d) m^3 s^-1, t = T / 1e4 K. */
static const double PPB_A = 4.309, PPB_B = -0.6166, PPB_C = 0.6703, PPB_D = 0.5300;

/* The fit from ln t alone: t^b and t^d as exp(b ln t) and exp(d ln t), two
 * exponentials sharing one logarithm instead of two pow() calls (pow was the
 * largest single cost of the history). *c_td receives c t^d, which the
 * temperature derivative needs. */
static double case_b_of_log(double ln_t, double fudge, double *c_td) {
  *c_td = PPB_C * exp(PPB_D * ln_t);
  return fudge * 1.0e-19 * PPB_A * exp(PPB_B * ln_t) / (1.0 + *c_td);
}

/* d alpha_B / dT from alpha_B and c t^d: d ln alpha / d ln T = b - d c t^d / (1 + c t^d). */
static double case_b_slope(double alpha, double c_td, double T) {
  return alpha / T * (PPB_B - PPB_D * c_td / (1.0 + c_td));
}

double jg__case_b_coefficient(double T, double fudge) {
  double c_td;
  return case_b_of_log(log(T / 1.0e4), fudge, &c_td);
}

double jg__case_b_coefficient_dT(double T, double fudge) {
  double c_td;
  double alpha = case_b_of_log(log(T / 1.0e4), fudge, &c_td);
  return case_b_slope(alpha, c_td, T);
}

double jg__electron_quantum_density(double T) {
  double q = 2.0 * JG_PI * JG_M_ELECTRON * JG_K_BOLTZMANN * T / (JG_H_PLANCK * JG_H_PLANCK);
  return q * sqrt(q);
}

/* Saha ratios for helium per unit electron fraction:
 * n_HeII/n_HeI = A1 / x_e with statistical weights 2 * 2 / 1 = 4,
 * n_HeIII/n_HeII = A2 / x_e with weights 2 * 1 / 2 = 1.
 * They depend on T_rad and n_H only, so the searches for x_e below compute
 * them (two exponentials) once and then iterate on arithmetic alone. */
typedef struct helium_ratios {
  double f_He, A1, A2;
} helium_ratios;

static helium_ratios helium_ratios_at(const jg_background *bg, double T_rad, double n_H) {
  const double s = jg__electron_quantum_density(T_rad) / n_H;
  const double kT = JG_K_BOLTZMANN * T_rad;
  helium_ratios r = {bg->helium_to_hydrogen, 4.0 * s * exp(-JG_E_ION_HELIUM_I / kT),
                     s * exp(-JG_E_ION_HELIUM_II / kT)};
  return r;
}

static void helium_given_electrons(const helium_ratios *r, double x_e, jg__helium_saha *out) {
  const double f_He = r->f_He, A1 = r->A1, A2 = r->A2;
  /* In u = 1/x_e: r1 = A1 u, r1 r2 = A1 A2 u^2. */
  const double u = 1.0 / x_e;
  const double p1 = A1 * u, p2 = A1 * A2 * u * u;
  double denom = 1.0 + p1 + p2;
  double q, dq_du;
  if (!isfinite(denom)) { /* all helium doubly ionised */
    q = 2.0;
    dq_du = 0.0;
    out->x_HeII = 0.0;
    out->x_HeIII = f_He;
  } else {
    /* Scaled by the largest term: p1 + 2 p2 can overflow where denom does
     * not (p2 near the largest double, far below any real recombination). */
    const double m = fmax(1.0, fmax(p1, p2));
    q = (p1 / m + 2.0 * (p2 / m)) / (denom / m);
    double dnum = A1 + 4.0 * A1 * A2 * u, dden = A1 + 2.0 * A1 * A2 * u;
    dq_du = (dnum * denom - (p1 + 2.0 * p2) * dden) / (denom * denom);
    out->x_HeII = f_He * p1 / denom;
    out->x_HeIII = f_He * p2 / denom;
  }
  out->electrons = f_He * q;
  out->d_electrons_dxe = isfinite(dq_du) ? -f_He * dq_du * u * u : 0.0;
}

void jg__helium_saha_at(const jg_background *bg, double T_rad, double n_H, double x_e,
                        jg__helium_saha *out) {
  helium_ratios r = helium_ratios_at(bg, T_rad, n_H);
  helium_given_electrons(&r, x_e, out);
}

/* Hydrogen Saha: x_p x_e / (1 - x_p) = s e^(-E_ion/kT) (weights 2 * 1 / 2 = 1). */
static double hydrogen_saha_fraction(double saha_h, double x_e) {
  return saha_h / (x_e + saha_h);
}

typedef struct electron_balance {
  helium_ratios helium;
  double saha_h; /* hydrogen's Saha ratio */
} electron_balance;

/* Electrons supplied minus electrons assumed: decreasing in x_e. */
static double electron_excess(double x_e, void *params) {
  const electron_balance *b = params;
  jg__helium_saha he;
  helium_given_electrons(&b->helium, x_e, &he);
  return hydrogen_saha_fraction(b->saha_h, x_e) + he.electrons - x_e;
}

/* The Illinois variant of regula falsi: no allocation, because the thermal
 * queries above the stored grid, which cannot report a failure, solve the
 * electron balance too. */
int jg__bracketed_root(double (*f)(double, void *), void *params, double lo, double hi,
                       double tol, double *root) {
  double flo = f(lo, params), fhi = f(hi, params);
  if (!(flo * fhi <= 0)) return GSL_EINVAL; /* no sign change, or NaN */
  if (flo == 0 || fhi == 0) {
    *root = flo == 0 ? lo : hi;
    return GSL_SUCCESS;
  }
  const bool rising = flo < 0;
  int kept = 0; /* which end the last step kept: -1 low, +1 high */
  for (int iter = 0; iter < 400; iter++) {
    double x = (lo * fhi - hi * flo) / (fhi - flo);
    /* Every third step a bisection: regula falsi can creep along a bracket
     * where the function is flat over most of it; halving bounds the work
     * at three times the bisection count, whatever the function's shape. */
    if (!(x > lo && x < hi) || iter % 3 == 2) x = 0.5 * (lo + hi);
    double fx = f(x, params);
    if (fx == 0 || hi - lo < tol) {
      *root = x;
      return GSL_SUCCESS;
    }
    if (!isfinite(fx)) return GSL_EBADFUNC;
    if ((fx < 0) == rising) {
      lo = x, flo = fx;
      if (kept == 1) fhi *= 0.5; /* the high end is stuck: pull the secant towards it */
      kept = 1;
    } else {
      hi = x, fhi = fx;
      if (kept == -1) flo *= 0.5;
      kept = -1;
    }
  }
  *root = 0.5 * (lo + hi);
  return GSL_EMAXITER;
}

/* x_e to 1e-15 relative, or the end of [lo, hi] the balance does not reach.
 * The bracket is first narrowed by bisection in ln x_e to 1e-6 (30 halvings
 * of the 700 e-folds from 1e-300): regula falsi in x_e itself, from 1e-300
 * to the fully ionised value, took more than its steps to close on a root
 * many decades below the top. The root is then found in x_e, relative to
 * its size, inside that narrow bracket, whose ends keep their signs. */
static int solve_electrons(electron_balance *b, double lo, double hi, double *x_e) {
  if (electron_excess(lo, b) <= 0) { *x_e = lo; return GSL_SUCCESS; }
  if (electron_excess(hi, b) >= 0) { *x_e = hi; return GSL_SUCCESS; }
  double t_lo = log(lo), t_hi = log(hi), x_lo = lo, x_hi = hi;
  while (t_hi - t_lo > 1e-6) {
    const double t = 0.5 * (t_lo + t_hi), x = fmin(fmax(exp(t), lo), hi);
    const double f = electron_excess(x, b);
    if (!isfinite(f)) return GSL_EBADFUNC;
    if (f > 0) t_lo = t, x_lo = x;
    else t_hi = t, x_hi = x;
  }
  if (jg__bracketed_root(electron_excess, b, x_lo, x_hi, 1e-15 * x_hi, x_e) != GSL_SUCCESS)
    *x_e = 0.5 * (x_lo + x_hi); /* within 1e-6 relative: the bracket itself */
  return GSL_SUCCESS;
}

int jg__saha_equilibrium(const jg_background *bg, double T_rad, double n_H, double *x_e,
                         double *x_p) {
  electron_balance b = {helium_ratios_at(bg, T_rad, n_H), 0.0};
  b.saha_h = jg__electron_quantum_density(T_rad) / n_H *
             exp(-JG_E_ION_HYDROGEN / (JG_K_BOLTZMANN * T_rad));
  /* The root lies between hydrogen's own Saha fraction x_H (x_H^2 /
   * (1 - x_H) = saha_h, where the balance is helium's electrons >= 0) and
   * x_H + 2 f_He (where hydrogen gives less than x_H and helium at most
   * 2 f_He): a bracket a few e-folds wide at most instead of 700, so the
   * bisection in ln x_e below takes about 20 halvings instead of 30. */
  const double x_H = 2.0 / (1.0 + sqrt(1.0 + 4.0 / b.saha_h)); /* 0 if saha_h is */
  const double lo = fmax(x_H, 1e-300);
  const double hi = fmin(lo + 2.0 * bg->helium_to_hydrogen, 1.0 + 2.0 * bg->helium_to_hydrogen);
  int status = solve_electrons(&b, lo, hi, x_e);
  *x_p = hydrogen_saha_fraction(b.saha_h, *x_e);
  return status;
}

int jg__electrons_given_hydrogen(const jg_background *bg, double T_rad, double n_H, double x_p,
                                 double *x_e, double *dxe_dxp) {
  /* Once helium has recombined its electrons are below double precision
   * next to hydrogen's: skip the search (most of the history). */
  const helium_ratios r = helium_ratios_at(bg, T_rad, n_H);
  jg__helium_saha he;
  helium_given_electrons(&r, x_p, &he);
  if (he.electrons < 1e-16 * x_p) {
    *x_e = x_p;
    *dxe_dxp = 1.0;
    return GSL_SUCCESS;
  }
  /* Newton on g(x_e) = x_p + h(x_e) - x_e, which falls with slope
   * h' - 1 <= -1, kept inside the bracket [x_p, x_p + h(x_p)] (h falls as
   * x_e grows) by bisection when a step would leave it. */
  double lo = x_p, hi = x_p + he.electrons, x = hi;
  int status = GSL_EMAXITER;
  for (int iter = 0; iter < 100; iter++) {
    helium_given_electrons(&r, x, &he);
    const double g = x_p + he.electrons - x;
    if (g > 0) lo = x;
    else hi = x;
    double next = x - g / (he.d_electrons_dxe - 1.0);
    if (!(next > lo && next < hi)) next = 0.5 * (lo + hi);
    const bool converged = fabs(next - x) <= 1e-15 * x || hi - lo <= 1e-15 * x;
    x = next;
    if (converged) {
      status = GSL_SUCCESS;
      break;
    }
  }
  helium_given_electrons(&r, x, &he);
  *x_e = x;
  /* x_e = x_p + h(x_e)  =>  dx_e/dx_p = 1 / (1 - h'(x_e)); h' <= 0. */
  *dxe_dxp = 1.0 / (1.0 - he.d_electrons_dxe);
  return status;
}

void jg__peebles_rate_at(double x_p, double x_e, double dxe_dxp, double T_gas, double T_rad,
                         double n_H, double hubble, double fudge, jg__peebles_rate *out) {
  const double kT = JG_K_BOLTZMANN * T_rad;
  double c_td_gas, c_td_rad;
  const double alpha = case_b_of_log(log(T_gas / 1.0e4), fudge, &c_td_gas);
  const double alpha_rad = case_b_of_log(log(T_rad / 1.0e4), fudge, &c_td_rad);
  const double quantum = jg__electron_quantum_density(T_rad);
  /* exp(-E_ion/kT) as the fourth power of exp(-E_ion/4kT): one exponential
   * for both; it still underflows cleanly to zero at low temperature, so
   * beta exp(-E_21/kT) never multiplies 0 by inf. */
  const double boltzmann_n2 = exp(-0.25 * JG_E_ION_HYDROGEN / kT);
  const double boltzmann_n2_sq = boltzmann_n2 * boltzmann_n2;
  const double beta = alpha_rad * quantum * boltzmann_n2;
  const double beta_boltz = alpha_rad * quantum * (boltzmann_n2_sq * boltzmann_n2_sq);
  const double lambda3 = JG_LAMBDA_LYMAN_ALPHA * JG_LAMBDA_LYMAN_ALPHA * JG_LAMBDA_LYMAN_ALPHA;
  const double K = lambda3 / (8.0 * JG_PI * hubble);
  const double u = K * n_H * (1.0 - x_p);
  const double denom = 1.0 + (JG_RATE_2S1S + beta) * u;
  const double C = (1.0 + JG_RATE_2S1S * u) / denom;
  const double B = alpha * n_H * x_e * x_p - beta_boltz * (1.0 - x_p);

  out->dxp_dt = -C * B;
  const double dC_dxp = beta * K * n_H / (denom * denom);
  const double dB_dxp = alpha * n_H * (x_e + x_p * dxe_dxp) + beta_boltz;
  out->d_dxp = -dC_dxp * B - C * dB_dxp;
  out->d_dTgas = -C * case_b_slope(alpha, c_td_gas, T_gas) * n_H * x_e * x_p;
  /* u = K n_H (1 - x_p) is proportional to n_H / H, and dC/du = -beta / denom^2. */
  const double dC_dlnu = -beta * u / (denom * denom);
  out->d_dlnnH = -dC_dlnu * B - C * alpha * n_H * x_e * x_p;
  out->d_dlnH = dC_dlnu * B;
}
