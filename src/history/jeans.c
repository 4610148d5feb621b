/* Jeans scales (see include/jeansgrow/jeans.h). */
#include "jeansgrow/jeans.h"

#include <math.h>

#include "jeansgrow/constants.h"

double jg_jeans_length_classic(double T, double rho, double particle_mass) {
  if (!(T > 0) || !(rho > 0) || !(particle_mass > 0)) return NAN;
  return sqrt(JG_PI * JG_K_BOLTZMANN * T / (JG_G_NEWTON * rho * particle_mass));
}

double jg_sound_speed_squared(double T, double mu, double gamma) {
  return gamma * JG_K_BOLTZMANN * T / (mu * JG_M_HYDROGEN_ATOM);
}

double jg_jeans_wavenumber(const jg_background *bg, double a, double cs2) {
  double rho_m = jg_background_rho_matter(bg, a);
  double k_si = a * sqrt(4.0 * JG_PI * JG_G_NEWTON * rho_m / cs2); /* 1/m comoving */
  return k_si * JG_MPC;
}

double jg_mass_half_wavelength(const jg_background *bg, double k) {
  double rho_m0 = bg->omega_m * bg->rho_crit0; /* kg m^-3, comoving */
  double radius = JG_PI / k * JG_MPC;          /* m */
  return 4.0 * JG_PI / 3.0 * rho_m0 * radius * radius * radius / JG_M_SUN;
}
