/*
 * Validity flags of the scales and growth rows (see
 * include/jeansgrow/validity.h and src/PHYSICS.md §11).
 */
#include "jeansgrow/validity.h"

#include <math.h>
#include <stdio.h>

#include "jeansgrow/background.h"
#include "jeansgrow/constants.h"


/* A fluid needs many collisions per wavelength; ten mean free paths per
 * wavelength is the margin used (common practice, no source). */
#define WAVELENGTH_IN_MEAN_FREE_PATHS 10.0

/* The Rydberg energy R_inf h c = 13.605693122994 eV (CODATA 2018) gives the
 * Bohr radius a_0 = hbar / sqrt(2 m_e R_inf h c) = 5.29177e-11 m. */
#define RYDBERG_ENERGY (13.605693122994 * JG_ELECTRON_VOLT)

double jg_validity_thermal_z_min(const jg_thermal *th) {
  return jg_thermal_lowest_valid_redshift(th);
}

double jg_validity_fluid_k_max(const jg_thermal *th, double z) {
  const double a = 1.0 / (1.0 + z);
  const double bohr = JG_HBAR / sqrt(2.0 * JG_M_ELECTRON * RYDBERG_ENERGY);
  /* Hard spheres of radius a_0 collide within a distance 2 a_0. */
  const double sigma = JG_PI * 4.0 * bohr * bohr;
  const double n_h = jg_background_n_hydrogen(jg_thermal_background(th), a);
  const double mean_free_path_comoving_mpc = 1.0 / (n_h * sigma) / a / JG_MPC;
  return 2.0 * JG_PI / (WAVELENGTH_IN_MEAN_FREE_PATHS * mean_free_path_comoving_mpc);
}

static int redshift_flags(const jg_thermal *th, double z, double b_over_c_large) {
  int flags = 0;
  if (!(b_over_c_large >= JG_VALIDITY_GAS_STARTED)) flags |= JG_FLAG_GAS_NOT_STARTED;
  if (z < jg_validity_thermal_z_min(th)) flags |= JG_FLAG_BELOW_THERMAL_MODEL;
  return flags;
}

int jg_validity_scales_flags(const jg_thermal *th, const jg_scales_point *s) {
  int flags = redshift_flags(th, s->z, s->b_over_c_large);
  const double k_max = jg_validity_fluid_k_max(th, s->z);
  if (s->k_filter_solved > k_max || (s->half_found && s->k_half > k_max))
    flags |= JG_FLAG_NEAR_FLUID_LIMIT;
  return flags;
}

int jg_validity_growth_flags(const jg_thermal *th, double z, double k, double b_over_c_large) {
  int flags = redshift_flags(th, z, b_over_c_large);
  if (k > jg_validity_fluid_k_max(th, z)) flags |= JG_FLAG_NEAR_FLUID_LIMIT;
  return flags;
}


void jg_validity_thermal_line(const jg_thermal *th, char *buf, size_t size) {
  const double z_min = jg_validity_thermal_z_min(th);
  if (z_min > 0.0)
    snprintf(buf, size, "validity: the thermal history (no heating, no reionisation) holds for "
             "z >= %g; rows below are flagged 2", z_min);
  else
    snprintf(buf, size, "validity: the thermal history includes the heating of the first sources "
             "and holds to z = 0 within its model's assumptions; no row is flagged 2");
}
