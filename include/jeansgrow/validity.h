/*
 * Where a result has lost its meaning. Every row of the scales and growth
 * tables carries a `flags` column: 0 inside the stated validity, otherwise
 * the sum of the reasons below. The `run` summary and the figures show the
 * same flags. The rules and their thresholds are in src/PHYSICS.md §11.
 */
#ifndef JEANSGROW_VALIDITY_H
#define JEANSGROW_VALIDITY_H

#include <stddef.h>

#include "jeansgrow/scales.h"
#include "jeansgrow/thermal.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef enum {
  /* The gas has barely fallen into the dark-matter wells: the k -> 0
   * delta_b/delta_c is below JG_VALIDITY_GAS_STARTED, so a filtering or
   * half-suppression scale describes the shape of a perturbation that is
   * not there yet. */
  JG_FLAG_GAS_NOT_STARTED = 1,
  /* The redshift is below the lowest one the thermal model in force
   * describes (jg_validity_thermal_z_min). */
  JG_FLAG_BELOW_THERMAL_MODEL = 2,
  /* The wavenumber (a growth row's k, or a scales row's k_F or k_1/2) is
   * within a factor ten in wavelength of the atoms' mean free path: the gas
   * stops being a fluid there (jg_validity_fluid_k_max). */
  JG_FLAG_NEAR_FLUID_LIMIT = 4
} jg_validity_flag;

#define JG_VALIDITY_GAS_STARTED 0.1

/* The lowest redshift the thermal history `th` describes: 20 without
 * heating or reionisation (below, the gas temperature is that of a universe
 * without stars). */
double jg_validity_thermal_z_min(const jg_thermal *th);

/* The largest comoving wavenumber (1/Mpc) at redshift z whose wavelength
 * 2 pi/k spans at least ten mean free paths of a hydrogen atom among
 * hydrogen atoms (hard spheres of the Bohr radius). */
double jg_validity_fluid_k_max(const jg_thermal *th, double z);

/* The flags of a scales row, and of a growth row (wavenumber k in 1/Mpc at
 * redshift z, b_over_c_large the k -> 0 delta_b/delta_c there). */
int jg_validity_scales_flags(const jg_thermal *th, const jg_scales_point *s);
int jg_validity_growth_flags(const jg_thermal *th, double z, double k, double b_over_c_large);

/* The header line that states the thermal model's lowest redshift, as
 * "validity: ... z >= Z ...", into buf. */
void jg_validity_thermal_line(const jg_thermal *th, char *buf, size_t size);

#ifdef __cplusplus
}
#endif
#endif
