/*
 * Reionisation of hydrogen and helium, and the photo-heating of the ionised
 * gas (src/PHYSICS.md §12).
 *
 * Ionisation: the tanh form of the Planck 2018 analyses (Planck
 * Collaboration 2020, A&A 641, A6, §3.3; the form is Lewis 2008, PRD 78,
 * 023002, appendix B; both from memory): hydrogen and He I together,
 *   s_h = [1 + tanh((y_re - y) / dy)] / 2,  y = (1+z)^(3/2),
 *   dy = (3/2) (1 + z_re)^(1/2) Delta z,
 * so that the width is Delta z near z_re; He II -> He III as a tanh in z,
 *   s_he = [1 + tanh((z_he - z) / Delta z_he)] / 2.
 * The recombination history's own ionisation is kept and the model's added
 * to the neutral part, so the electron fraction is continuous.
 *
 * Heating ("tanh+heating"): the gas is heated to T_front as it is ionised
 * (the ionisation front; Hui & Gnedin 1997, MNRAS 292, 27; Hui & Haiman
 * 2003, ApJ 596, 9: 1-3e4 K, from memory), then photo-heated in
 * photo-ionisation equilibrium: every recombination is balanced by a
 * photo-ionisation of the residual H I, which leaves E_HI / (alpha + 2) as
 * heat for J_nu ~ nu^-alpha and a cross-section ~ nu^-3 (derived in §12),
 * while the recombination takes k_B T (0.684 - 0.0416 ln(T / 1e4 K)) with
 * it (case B; Draine 2011, Physics of the Interstellar and Intergalactic
 * Medium, eq. 27.23, from memory). Compton and adiabatic cooling act as
 * always (gas_temperature.c).
 */
#include "reionisation.h"

#include <math.h>

#include "jeansgrow/constants.h"
#include "recombination.h"

/* The tanh is below e^-2 TAIL of its full value beyond TAIL widths: at 15
 * widths 1e-13, so the heating the model switches on there changes the
 * slope of ln T_gas by less than 1e-8 (the stored splines would see a
 * larger step as a kink). */
static const double TAIL = 15.0;

void jg__reionisation_init(jg__reionisation *m, const jg_thermal_settings *s,
                           const jg_background *bg, const jg__z_table *table,
                           const jg__z_table *ionisation) {
  m->model = s->reionisation;
  m->table = *table;
  m->ionisation = *ionisation;
  m->active = m->model != JG_REIONISATION_NONE || m->table.n > 0 || m->ionisation.n > 0;
  m->hydrogen_fraction = 1.0 - bg->cosmology.helium_mass_fraction;
  m->y_re = pow(1.0 + s->reionisation_redshift, 1.5);
  m->dy = 1.5 * sqrt(1.0 + s->reionisation_redshift) * s->reionisation_width;
  m->z_he = s->helium_reionisation_redshift;
  m->dz_he = s->helium_reionisation_width;
  m->f_he = bg->helium_to_hydrogen;
  const double z_h = pow(m->y_re + TAIL * m->dy, 2.0 / 3.0) - 1.0;
  const double z_he = m->z_he + TAIL * m->dz_he;
  /* The earliest of the tanh tails and the tables' tops. */
  const double z_model = m->model != JG_REIONISATION_NONE ? fmax(z_h, z_he) : 0.0;
  const double z_table = m->table.n > 0 ? expm1(m->table.ln_1pz[m->table.n - 1]) : 0.0;
  const double z_ion = m->ionisation.n > 0 ? expm1(m->ionisation.ln_1pz[m->ionisation.n - 1]) : 0.0;
  m->ln_a_onset = -log1p(fmax(fmax(z_model, z_table), z_ion));
  m->T_front = s->reionisation_temperature_K;
  m->heat_per_ionisation = JG_E_ION_HYDROGEN / (s->ionising_spectral_index + 2.0);
}

void jg__reionisation_fronts(const jg__reionisation *m, double ranges[2][2]) {
  if (m->model == JG_REIONISATION_NONE) { /* a heating table alone has no front */
    ranges[0][0] = ranges[0][1] = ranges[1][0] = ranges[1][1] = 0.0;
    return;
  }
  /* From the onset (TAIL widths before the centre) to AFTER widths past
   * it: beyond, the fraction still missing (e^-2u < 5e-5) changes x_e by
   * too little for the spline to need more than the uniform nodes. */
  const double AFTER = 5.0;
  const double y_low = m->y_re - AFTER * m->dy;
  ranges[0][0] = -log1p(pow(m->y_re + TAIL * m->dy, 2.0 / 3.0) - 1.0);
  ranges[0][1] = y_low > 1.0 ? -log(pow(y_low, 2.0 / 3.0)) : 0.0;
  ranges[1][0] = -log1p(m->z_he + TAIL * m->dz_he);
  ranges[1][1] = m->z_he - AFTER * m->dz_he > 0.0 ? -log1p(m->z_he - AFTER * m->dz_he) : 0.0;
}

void jg__reionisation_at(const jg__reionisation *m, double ln_a, jg__reionised *r) {
  if (m->model == JG_REIONISATION_NONE) {
    r->s_h = r->ds_h_dlna = r->s_he = 0.0;
    return;
  }
  const double y = exp(-1.5 * ln_a), z = expm1(-ln_a);
  const double th = tanh((m->y_re - y) / m->dy);
  r->s_h = 0.5 * (1.0 + th);
  /* d s_h / d ln a = (1/2) sech^2 u du/d ln a, u = (y_re - y)/dy, dy/d ln a = -(3/2) y. */
  r->ds_h_dlna = 0.5 * (1.0 - th * th) * 1.5 * y / m->dy;
  /* Helium's second electron cannot go before its first: with the widths
   * chosen freely the He III tanh could run ahead of the hydrogen one. */
  r->s_he = fmin(0.5 * (1.0 + tanh((m->z_he - z) / m->dz_he)), r->s_h);
}

double jg__reionised_electrons(const jg__reionisation *m, const jg__reionised *r, double x_e) {
  return x_e + (1.0 + m->f_he - x_e) * r->s_h + m->f_he * r->s_he;
}

double jg__reionised_hydrogen(const jg__reionised *r, double x_p) {
  return x_p + (1.0 - x_p) * r->s_h;
}

/* The heating split into gains (table, front, photo-ionisation) and the
 * recombination cooling, d T_gas / d ln a in K. */
static void heating_parts(const jg__reionisation *m, const jg__reionised *r, double ln_a,
                          double x_e, double T_gas, double n_H, double hubble, double *gain,
                          double *loss) {
  /* The table's rate per baryon into temperature: (2/3) rate / k_B per
   * particle, n_b / n_particles = 1 / ((1 - Y)(1 + f_He + x_e)). */
  const double per_energy = (2.0 / 3.0) / (JG_K_BOLTZMANN * (1.0 + m->f_he + x_e) * hubble);
  *gain = m->table.n > 0
              ? per_energy * jg__heating_table_rate(&m->table, -ln_a) / m->hydrogen_fraction
              : 0.0;
  *loss = 0.0;
  if (m->model != JG_REIONISATION_TANH_HEATED) return;
  /* The ionising background shines only in the reionised gas: the
   * recombinations it balances are those of the model's ionised hydrogen
   * (s_h), not of the residual ionisation left by recombination, which
   * would otherwise be photo-heated from the onset on. Per H nucleus, 1/s. */
  const double recombinations = jg__case_b_coefficient(T_gas, 1.0) * n_H * x_e * r->s_h;
  const double carried = JG_K_BOLTZMANN * T_gas * (0.684 - 0.0416 * log(T_gas / 1.0e4));
  *gain += m->T_front * r->ds_h_dlna + per_energy * recombinations * m->heat_per_ionisation;
  *loss = per_energy * recombinations * carried;
}

double jg__photo_heating_dlna(const jg__reionisation *m, const jg__reionised *r, double ln_a,
                              double x_e, double T_gas, double n_H, double hubble) {
  double gain, loss;
  heating_parts(m, r, ln_a, x_e, T_gas, n_H, hubble, &gain, &loss);
  return gain - loss;
}

double jg__heating_gain_dlna(const jg__reionisation *m, const jg__reionised *r, double ln_a,
                             double x_e, double T_gas, double n_H, double hubble) {
  double gain, loss;
  heating_parts(m, r, ln_a, x_e, T_gas, n_H, hubble, &gain, &loss);
  return gain;
}
