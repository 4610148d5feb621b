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

#include "jeansgrow/constants.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* Pequignot, Petitjean & Boisson (1991) case-B fit, as used by SSS 1999 eq. 3:
 * alpha_B = F 1e-19 a t^b / (1 + c t^d) m^3 s^-1, t = T / 1e4 K. */
static const double PPB_A = 4.309, PPB_B = -0.6166, PPB_C = 0.6703, PPB_D = 0.5300;

double jg__case_b_coefficient(double T, double fudge) {
  double t = T / 1.0e4;
  return fudge * 1.0e-19 * PPB_A * pow(t, PPB_B) / (1.0 + PPB_C * pow(t, PPB_D));
}

double jg__case_b_coefficient_dT(double T, double fudge) {
  double t = T / 1.0e4;
  double ctd = PPB_C * pow(t, PPB_D);
  return jg__case_b_coefficient(T, fudge) / T * (PPB_B - PPB_D * ctd / (1.0 + ctd));
}

double jg__electron_quantum_density(double T) {
  double q = 2.0 * JG_PI * JG_M_ELECTRON * JG_K_BOLTZMANN * T / (JG_H_PLANCK * JG_H_PLANCK);
  return q * sqrt(q);
}

/* Saha ratios for helium per unit electron fraction:
 * n_HeII/n_HeI = A1 / x_e with statistical weights 2 * 2 / 1 = 4,
 * n_HeIII/n_HeII = A2 / x_e with weights 2 * 1 / 2 = 1. */
void jg__helium_saha_at(const jg_background *bg, double T_rad, double n_H, double x_e,
                        jg__helium_saha *out) {
  const double f_He = bg->helium_to_hydrogen;
  const double s = jg__electron_quantum_density(T_rad) / n_H;
  const double kT = JG_K_BOLTZMANN * T_rad;
  const double A1 = 4.0 * s * exp(-JG_E_ION_HELIUM_I / kT);
  const double A2 = s * exp(-JG_E_ION_HELIUM_II / kT);
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
    q = (p1 + 2.0 * p2) / denom;
    double dnum = A1 + 4.0 * A1 * A2 * u, dden = A1 + 2.0 * A1 * A2 * u;
    dq_du = (dnum * denom - (p1 + 2.0 * p2) * dden) / (denom * denom);
    out->x_HeII = f_He * p1 / denom;
    out->x_HeIII = f_He * p2 / denom;
  }
  out->electrons = f_He * q;
  out->d_electrons_dxe = isfinite(dq_du) ? -f_He * dq_du * u * u : 0.0;
}

/* Hydrogen Saha: x_p x_e / (1 - x_p) = s e^(-E_ion/kT) (weights 2 * 1 / 2 = 1). */
static double hydrogen_saha_fraction(double saha_h, double x_e) {
  return saha_h / (x_e + saha_h);
}

typedef struct electron_balance {
  const jg_background *bg;
  double T_rad, n_H, saha_h; /* saha_h < 0: hydrogen fixed at x_p_fixed */
  double x_p_fixed;
} electron_balance;

/* Electrons supplied minus electrons assumed: decreasing in x_e. */
static double electron_excess(double x_e, void *params) {
  const electron_balance *b = params;
  jg__helium_saha he;
  jg__helium_saha_at(b->bg, b->T_rad, b->n_H, x_e, &he);
  double x_p = b->saha_h >= 0 ? hydrogen_saha_fraction(b->saha_h, x_e) : b->x_p_fixed;
  return x_p + he.electrons - x_e;
}

/* The Illinois variant of regula falsi: no allocation, because the thermal
 * queries above the stored grid, which cannot report a failure, solve this
 * too. Stops once the bracket is narrower than 1e-14 in x_e. */
static int solve_electrons(electron_balance *b, double lo, double hi, double *x_e) {
  double flo = electron_excess(lo, b), fhi = electron_excess(hi, b);
  if (flo <= 0) { *x_e = lo; return GSL_SUCCESS; }
  if (fhi >= 0) { *x_e = hi; return GSL_SUCCESS; }
  int kept = 0; /* which end the last step kept: -1 low, +1 high */
  for (int iter = 0; iter < 200; iter++) {
    double x = (lo * fhi - hi * flo) / (fhi - flo);
    if (!(x > lo && x < hi)) x = 0.5 * (lo + hi);
    double f = electron_excess(x, b);
    if (f == 0 || hi - lo < 1e-14) { *x_e = x; return GSL_SUCCESS; }
    if (f > 0) {
      lo = x, flo = f;
      if (kept == 1) fhi *= 0.5; /* the high end is stuck: pull the secant towards it */
      kept = 1;
    } else {
      hi = x, fhi = f;
      if (kept == -1) flo *= 0.5;
      kept = -1;
    }
  }
  *x_e = 0.5 * (lo + hi);
  return GSL_EMAXITER;
}

int jg__saha_equilibrium(const jg_background *bg, double T_rad, double n_H, double *x_e,
                         double *x_p) {
  electron_balance b = {bg, T_rad, n_H, 0.0, 0.0};
  b.saha_h = jg__electron_quantum_density(T_rad) / n_H *
             exp(-JG_E_ION_HYDROGEN / (JG_K_BOLTZMANN * T_rad));
  double hi = 1.0 + 2.0 * bg->helium_to_hydrogen;
  int status = solve_electrons(&b, 1e-300, hi, x_e);
  *x_p = hydrogen_saha_fraction(b.saha_h, *x_e);
  return status;
}

int jg__electrons_given_hydrogen(const jg_background *bg, double T_rad, double n_H, double x_p,
                                 double *x_e, double *dxe_dxp) {
  /* Once helium has recombined its electrons are below double precision
   * next to hydrogen's: skip the root search (most of the history). */
  jg__helium_saha he0;
  jg__helium_saha_at(bg, T_rad, n_H, x_p, &he0);
  if (he0.electrons < 1e-16 * x_p) {
    *x_e = x_p;
    *dxe_dxp = 1.0;
    return GSL_SUCCESS;
  }
  electron_balance b = {bg, T_rad, n_H, -1.0, x_p};
  double hi = x_p + 2.0 * bg->helium_to_hydrogen;
  int status = solve_electrons(&b, x_p, hi, x_e);
  jg__helium_saha he;
  jg__helium_saha_at(bg, T_rad, n_H, *x_e, &he);
  /* x_e = x_p + h(x_e)  =>  dx_e/dx_p = 1 / (1 - h'(x_e)); h' <= 0. */
  *dxe_dxp = 1.0 / (1.0 - he.d_electrons_dxe);
  return status;
}

void jg__peebles_rate_at(double x_p, double x_e, double dxe_dxp, double T_gas, double T_rad,
                         double n_H, double hubble, double fudge, jg__peebles_rate *out) {
  const double kT = JG_K_BOLTZMANN * T_rad;
  const double alpha = jg__case_b_coefficient(T_gas, fudge);
  const double alpha_rad = jg__case_b_coefficient(T_rad, fudge);
  const double quantum = jg__electron_quantum_density(T_rad);
  const double beta = alpha_rad * quantum * exp(-0.25 * JG_E_ION_HYDROGEN / kT);
  /* beta exp(-E_21/kT) written as one exponential so that it underflows
   * cleanly to zero at low temperature instead of multiplying 0 by inf. */
  const double beta_boltz = alpha_rad * quantum * exp(-JG_E_ION_HYDROGEN / kT);
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
  out->d_dTgas = -C * jg__case_b_coefficient_dT(T_gas, fudge) * n_H * x_e * x_p;
}
