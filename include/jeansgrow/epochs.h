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

/* The entries, in the order `jeansgrow epochs` prints them: the bit
 * (1u << JG_EPOCH_...) of jg_epochs.absent marks an entry that does not exist
 * in the universe computed (e.g. tau never reaches 1: too few electrons). */
enum {
  JG_EPOCH_Z_STAR,
  JG_EPOCH_Z_VISIBILITY_PEAK,
  JG_EPOCH_Z_DRAG,
  JG_EPOCH_R_STAR,
  JG_EPOCH_R_DRAG,
  JG_EPOCH_THETA_STAR,
  JG_EPOCH_Z_EQ,
  JG_EPOCH_K_EQ,
  JG_EPOCH_AGE,
  JG_EPOCH_Z_GAS_DECOUPLING,
  JG_EPOCH_X_E_Z100,
  JG_EPOCH_T_GAS_Z100,
  JG_EPOCH_TAU_REION,
  JG_EPOCH_Z_REION,
  JG_EPOCH_COUNT
};

#define JG_EPOCH_REASON_SIZE 128

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
  double tau_reion;        /* Thomson optical depth of the reionised electrons (absent without
                              reionisation) */
  double z_reion;          /* where the ionised hydrogen fraction reaches one half on its way up */
  /* Bit i set: entry i does not exist in this universe; its value is 0 and
   * reason[i] says why in one line. An absent z_star makes r_star and
   * theta_star_100 absent, an absent z_drag r_drag. */
  unsigned absent;
  char reason[JG_EPOCH_COUNT][JG_EPOCH_REASON_SIZE];
} jg_epochs;

/* JG_OK also when some epochs do not exist (see `absent`); a failure is a
 * numerical one (a root or peak search that does not converge, a background
 * integral that fails). */
jg_status jg_epochs_compute(const jg_thermal *th, jg_epochs *out, jg_error *err);

/* One reported epoch: name, value and unit, in the order `jeansgrow epochs`
 * prints them. Past the end the entry's name is NULL. An entry that does not
 * exist has exists = 0, value 0 and the reason (else reason is ""). */
typedef struct jg_epoch_entry {
  const char *name;
  const char *unit;
  const char *meaning;
  double value;
  int exists;
  const char *reason;
} jg_epoch_entry;
int jg_epochs_count(void);
jg_epoch_entry jg_epochs_entry(const jg_epochs *e, int i);

#ifdef __cplusplus
}
#endif
#endif
