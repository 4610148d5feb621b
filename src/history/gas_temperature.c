/*
 * Gas temperature after recombination: Compton heating by the CMB photons
 * against adiabatic cooling (Seager, Sasselov & Scott 2000, ApJS 128, 407):
 *
 *   dT_gas/dt = -2 H T_gas + Gamma_C (T_rad - T_gas),
 *   Gamma_C = (8 sigma_T a_rad T_rad^4 / (3 m_e c)) x_e / (1 + f_He + x_e).
 *
 * Gamma_C >> H until z ~ 600-800, so the equation is stiff there; the
 * history driver uses the quasi-static solution until H / Gamma_C reaches
 * thermal.quasi_static_limit and integrates the equation afterwards.
 */
#include "gas_temperature.h"

#include "jeansgrow/constants.h"

static double compton_prefactor(double T_rad) {
  double T2 = T_rad * T_rad;
  return 8.0 * JG_SIGMA_THOMSON * JG_A_RADIATION * T2 * T2 /
         (3.0 * JG_M_ELECTRON * JG_C_LIGHT);
}

double jg__compton_rate(const jg_background *bg, double T_rad, double x_e) {
  return compton_prefactor(T_rad) * x_e / (1.0 + bg->helium_to_hydrogen + x_e);
}

double jg__compton_rate_dxe(const jg_background *bg, double T_rad, double x_e) {
  double d = 1.0 + bg->helium_to_hydrogen + x_e;
  return compton_prefactor(T_rad) * (1.0 + bg->helium_to_hydrogen) / (d * d);
}

double jg__gas_temperature_quasi_static(double T_rad, double hubble, double compton_rate) {
  return T_rad * compton_rate / (compton_rate + hubble);
}

double jg__gas_temperature_dlna(double T_gas, double T_rad, double hubble, double compton_rate) {
  return -2.0 * T_gas + compton_rate / hubble * (T_rad - T_gas);
}
