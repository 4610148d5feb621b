/* Private: the gas temperature against Compton heating (gas_temperature.c). */
#ifndef JEANSGROW_SRC_GAS_TEMPERATURE_H
#define JEANSGROW_SRC_GAS_TEMPERATURE_H

#include "jeansgrow/background.h"

/* Compton heating rate Gamma_C (s^-1), the coefficient of (T_rad - T_gas):
 * Gamma_C = (8 sigma_T a_rad T_rad^4 / (3 m_e c)) x_e / (1 + f_He + x_e),
 * and its derivative with respect to x_e. */
double jg__compton_rate(const jg_background *bg, double T_rad, double x_e);
double jg__compton_rate_dxe(const jg_background *bg, double T_rad, double x_e);

/* Gas temperature while Compton coupling is tight: dT/dt = -2 H T + Gamma (T_rad - T)
 * with T_rad ~ 1/a has the slowly varying solution T = T_rad (1 - H/(Gamma + H))
 * up to O((H/Gamma)^2) (src/PHYSICS.md §5). */
double jg__gas_temperature_quasi_static(double T_rad, double hubble, double compton_rate);

/* d T_gas / d ln a (its derivative with respect to T_gas, -2 - Gamma/H, is
 * written where the Jacobian is built). */
double jg__gas_temperature_dlna(double T_gas, double T_rad, double hubble, double compton_rate);

#endif
