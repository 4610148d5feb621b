/*
 * Derived epochs and scales of the background and thermal history: the
 * numbers a cosmologist checks first against a Boltzmann code.
 */
#ifndef JEANSGROW_EPOCHS_H
#define JEANSGROW_EPOCHS_H

#include "jeansgrow/error.h"
#include "jeansgrow/thermal.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct jg_epochs {
  double z_star;           /* photon decoupling: tau(z_star) = 1 */
  double z_visibility_peak;/* maximum of the visibility g(z) */
  double z_drag;           /* end of baryon drag: tau_drag(z_drag) = 1 */
  double r_star;           /* comoving sound horizon at z_star, Mpc */
  double r_drag;           /* comoving sound horizon at z_drag, Mpc */
  double theta_star_100;   /* 100 r_star / D_M(z_star) */
  double z_eq;             /* matter-radiation equality */
  double k_eq;             /* a_eq H(a_eq) / c at equality, 1/Mpc */
  double age_Gyr;          /* age of the universe today, Gyr */
  double z_gas_decoupling; /* T_gas / T_rad = 0.9 */
  double x_e_z100;         /* residual ionisation at z = 100 */
  double T_gas_z100;       /* gas temperature at z = 100, K */
} jg_epochs;

jg_status jg_epochs_compute(const jg_thermal *th, jg_epochs *out, jg_error *err);

/* One reported epoch: name, value and unit, in the order `jeansgrow epochs`
 * prints them. Past the end the entry's name is NULL. */
typedef struct jg_epoch_entry {
  const char *name;
  const char *unit;
  const char *meaning;
  double value;
} jg_epoch_entry;
int jg_epochs_count(void);
jg_epoch_entry jg_epochs_entry(const jg_epochs *e, int i);

#ifdef __cplusplus
}
#endif
#endif
