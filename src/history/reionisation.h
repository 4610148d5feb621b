/*
 * Private: reionisation of hydrogen and helium and the photo-heating of the
 * ionised gas (reionisation.c; src/PHYSICS.md §12). The history driver
 * (thermal.c) adds these to the recombination history; with
 * thermal.reionisation = "none" it never calls them.
 */
#ifndef JEANSGROW_SRC_REIONISATION_H
#define JEANSGROW_SRC_REIONISATION_H

#include <stdbool.h>

#include "redshift_table.h"
#include "jeansgrow/background.h"
#include "jeansgrow/params.h"

/* The model, prepared once from the settings. */
typedef struct jg__reionisation {
  bool active;            /* a reionisation model or a heating table */
  int model;              /* a jg_reionisation_model */
  double y_re, dy;        /* hydrogen tanh centre and width in y = (1+z)^(3/2) */
  double z_he, dz_he;     /* helium double ionisation, centre and width in z */
  double f_he;            /* helium nuclei per hydrogen nucleus */
  double ln_a_onset;      /* above this redshift the model changes nothing */
  double T_front;         /* K, thermal.reionisation_temperature_K */
  double heat_per_ionisation; /* J, 13.6 eV / (alpha + 2) */
  double hydrogen_fraction;   /* 1 - Y: hydrogen nuclei per baryon (per m_H of gas) */
  jg__z_table table;          /* thermal.heating_table (n = 0: none); owned by the history */
  jg__z_table ionisation;     /* thermal.ionisation_table (n = 0: none); owned by the history */
} jg__reionisation;

/* The ln a ranges where the model's fractions grow from nothing (the
 * hydrogen and the helium tanh from their onset to 5 widths past their
 * centre, cut at today); both empty without reionisation. The history grid
 * is refined there: [0] for hydrogen, [1] for helium. */
void jg__reionisation_fronts(const jg__reionisation *m, double ranges[2][2]);

/* `table` and `ionisation` (heating and ionisation tables, each may be
 * empty) are kept by value: their arrays stay the caller's. */
void jg__reionisation_init(jg__reionisation *m, const jg_thermal_settings *s,
                           const jg_background *bg, const jg__z_table *table,
                           const jg__z_table *ionisation);

/* Does the model act at ln a (below its onset redshift)? */
static inline bool jg__reionisation_acts(const jg__reionisation *m, double ln_a) {
  return m->active && ln_a > m->ln_a_onset;
}

/* The fractions reionised at ln a: hydrogen with He I (s_h) and helium's
 * second electron (s_he), each from 0 to 1; d s_h / d ln a. */
typedef struct jg__reionised {
  double s_h, ds_h_dlna, s_he;
} jg__reionised;
void jg__reionisation_at(const jg__reionisation *m, double ln_a, jg__reionised *r);

/* Electrons and ionised hydrogen per hydrogen nucleus once the model's
 * ionisation is added to the recombination history's x_e, x_p:
 *   x_p -> x_p + (1 - x_p) s_h,  x_e -> x_e + (1 + f_He - x_e) s_h + f_He s_he. */
double jg__reionised_electrons(const jg__reionisation *m, const jg__reionised *r, double x_e);
double jg__reionised_hydrogen(const jg__reionised *r, double x_p);

/* The heating, d T_gas / d ln a (K), at ln a: with "tanh+heating" the
 * front (T_front d s_h / d ln a) and the photo-heating of the residual H I
 * in photo-ionisation equilibrium less the recombination cooling, in the
 * reionised gas (fraction s_h); plus the heating table's rate; for all
 * free electrons x_e at hydrogen density n_H (m^-3) and Hubble rate H
 * (1/s). */
double jg__photo_heating_dlna(const jg__reionisation *m, const jg__reionised *r, double ln_a,
                              double x_e, double T_gas, double n_H, double hubble);
/* Its gains alone (without the recombination cooling), >= 0. */
double jg__heating_gain_dlna(const jg__reionisation *m, const jg__reionised *r, double ln_a,
                             double x_e, double T_gas, double n_H, double hubble);

#endif
