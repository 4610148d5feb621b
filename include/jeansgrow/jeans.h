/*
 * Jeans scales.
 *
 * The classic Jeans length of a uniform, static, isothermal gas,
 * lambda_J = sqrt(pi k_B T / (G rho m)), and the comoving Jeans wavenumber
 * and mass of the expanding universe used by the later stages:
 * k_J = a sqrt(4 pi G rho_m) / c_s (comoving), M_J = (4 pi / 3) rho_m0 (pi / k_J)^3
 * (the sphere of radius half the Jeans wavelength).
 */
#ifndef JEANSGROW_JEANS_H
#define JEANSGROW_JEANS_H

#include "jeansgrow/background.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Jeans length in metres of a gas of temperature T (K), mass density rho
 * (kg m^-3) and particle mass m (kg). Returns NaN for non-positive input. */
double jg_jeans_length_classic(double T, double rho, double particle_mass);

/* Sound speed squared (m^2 s^-2) of an ideal gas, gamma k_B T / (mu m_H). */
double jg_sound_speed_squared(double T, double mu, double gamma);

/* Comoving Jeans wavenumber (1/Mpc) at scale factor a for sound speed
 * squared cs2 (m^2 s^-2), with the total matter density as the source. */
double jg_jeans_wavenumber(const jg_background *bg, double a, double cs2);

/* Mass (M_sun) inside a sphere of comoving radius pi / k (k in 1/Mpc) at the
 * mean matter density: the Jeans-mass convention of Barkana & Loeb (2001). */
double jg_mass_half_wavelength(const jg_background *bg, double k);

#ifdef __cplusplus
}
#endif
#endif
