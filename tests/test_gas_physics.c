/*
 * Tests of the gas physics shared by the history and the perturbations: the
 * one mean molecular weight, the effective adiabatic index of the uniform
 * sound speed, and the perturbation of the ionisation fraction.
 * Each check names its source beside it (src/PHYSICS.md §10).
 */
#include <criterion/criterion.h>
#include <math.h>
#include <string.h>

#include "jeansgrow/constants.h"
#include "jeansgrow/perturb.h"
#include "real_case.h"
#include "support.h"

TestSuite(gas_physics, .init = quiet_gsl);

/* mu from the mass fractions alone, for a gas of hydrogen and helium with
 * free electrons: 1 kg holds (1 - Y)/m_H hydrogen and Y/m_He helium nuclei,
 * each hydrogen nucleus with x_e electrons (derived, src/PHYSICS.md §2: the
 * mass per particle over m_H; CODATA 2018 / AME2016 masses). */
static double mu_from_mass_fractions(double Y, double x_e) {
  const double n_H = (1.0 - Y) / JG_M_HYDROGEN_ATOM, n_He = Y / JG_M_HELIUM4_ATOM;
  return 1.0 / (JG_M_HYDROGEN_ATOM * (n_H * (1.0 + x_e) + n_He));
}

/* One mean molecular weight: the background's definition, the thermal
 * state's mu and the mu inside the perturbations' pressure coefficient
 * p = (k_B T_gas / (mu m_H)) / (a H)^2 agree, and all equal the mass per
 * particle derived from the mass fractions. */
Test(gas_physics, one_mean_molecular_weight_everywhere) {
  real_case r;
  real_case_open(&r, NULL);
  const double Y = r.p.cosmology.helium_mass_fraction;
  /* Neutral and fully ionised hydrogen (helium's own electrons are counted
   * in x_e): 1/mu = (1 - Y)(1 + x_e) + Y m_H/m_He. */
  ASSERT_REL(jg_background_mean_molecular_weight(r.bg, 0.0), mu_from_mass_fractions(Y, 0.0), 1e-14,
             "neutral");
  ASSERT_REL(jg_background_mean_molecular_weight(r.bg, 1.0), mu_from_mass_fractions(Y, 1.0), 1e-14,
             "ionised hydrogen");
  /* The shortcut m_He = 4 m_H would give 1/[(1-Y) + Y/4] = 1.2275 neutral:
   * the true masses give a mu 5.6e-4 lower (common practice, no source, for
   * the shortcut). */
  const double shortcut = 1.0 / ((1.0 - Y) + 0.25 * Y);
  ASSERT_REL(jg_background_mean_molecular_weight(r.bg, 0.0) / shortcut, 1.0 - 5.6e-4, 1e-4,
             "against the shortcut");

  const jg_medium *md = jg_perturb_model_medium(r.m);
  const double zs[] = {5000.0, 1500.0, 1100.0, 800.0, 300.0, 100.0, 20.0};
  for (size_t i = 0; i < sizeof zs / sizeof zs[0]; i++) {
    jg_thermal_state s;
    jg_thermal_state_at(r.th, zs[i], &s);
    const double mu_bg = jg_background_mean_molecular_weight(r.bg, s.x_e);
    ASSERT_REL(s.mu, mu_bg, 1e-15, "thermal state at z = %g", zs[i]);
    ASSERT_REL(s.mu, mu_from_mass_fractions(Y, s.x_e), 1e-14, "z = %g", zs[i]);
    /* The pressure coefficient is a spline of its logarithm (500 nodes per
     * e-fold): 1e-9 is its interpolation error, not a second definition. */
    const double ln_a = -log1p(zs[i]), a = exp(ln_a);
    jg_medium_coefficients c;
    cr_assert_eq(md->eval(md->ctx, ln_a, &c), 0);
    const double aH = a * jg_background_hubble(r.bg, a) * JG_MPC;
    const double mu_pert = JG_K_BOLTZMANN * s.T_gas / (JG_M_HYDROGEN_ATOM * c.pressure * aH * aH);
    ASSERT_REL(mu_pert, mu_bg, 1e-9, "perturbations at z = %g", zs[i]);
  }
  real_case_close(&r);
}
