/*
 * Tests of the gas physics shared by the history and the perturbations: the
 * one mean molecular weight, the effective adiabatic index of the uniform
 * sound speed, and the perturbation of the ionisation fraction.
 * Each check names its source beside it (src/PHYSICS.md §10).
 */
#include <criterion/criterion.h>
#include <gsl/gsl_spline.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "jeansgrow/constants.h"
#include "jeansgrow/perturb.h"
#include "real_case.h"
#include "support.h"
#include "../src/perturbations/perturb_internal.h"

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

/* ---- the effective adiabatic index ------------------------------------- */

/* gamma_eff = 1 - (1/3) d ln T_gas / d ln a (Ma & Bertschinger 1995, ApJ
 * 455, 7, their sound speed of the baryons; formula from memory):
 * - gas locked to the radiation, T_gas ~ 1/a: 4/3; the quasi-static T_gas =
 *   T_rad Gamma_C / (Gamma_C + H) departs from it by O(H/Gamma_C), < 1e-6 at
 *   z >= 3000 (src/PHYSICS.md §5);
 * - gas cooling adiabatically, T_gas ~ a^-2: 5/3 (common practice, no source);
 * - in between, wherever T_gas is integrated (below z ~ 800), the slope is
 *   the gas-temperature equation of src/PHYSICS.md §5, d ln T/d ln a =
 *   -2 + (Gamma_C/H)(T_rad/T_gas - 1): the spline derivative of the stored
 *   ln T_gas must agree with it to the history's accuracy (1.5e-7 in the
 *   values, src/PHYSICS.md §9; 1e-5 in the index allows for the derivative
 *   of the interpolant). */
Test(gas_physics, effective_gamma_limits_and_the_temperature_equation) {
  real_case r;
  real_case_open(&r, NULL);
  const double locked[] = {20000.0, 8000.0, 3000.0};
  for (size_t i = 0; i < sizeof locked / sizeof locked[0]; i++) {
    jg_thermal_state s;
    jg_thermal_state_at(r.th, locked[i], &s);
    cr_expect(fabs(s.gamma_effective - 4.0 / 3.0) < 1e-6, "z = %g: gamma_eff = %.9f",
              locked[i], s.gamma_effective);
  }
  const double integrated[] = {500.0, 200.0, 100.0, 50.0, 20.0, 10.0, 1.0};
  double previous = 0.0;
  for (size_t i = 0; i < sizeof integrated / sizeof integrated[0]; i++) {
    const double z = integrated[i], a = 1.0 / (1.0 + z);
    jg_thermal_state s;
    jg_thermal_state_at(r.th, z, &s);
    const double slope =
        -2.0 + s.compton_rate / jg_background_hubble(r.bg, a) * (s.T_rad / s.T_gas - 1.0);
    cr_expect(fabs(s.gamma_effective - (1.0 - slope / 3.0)) < 1e-5,
              "z = %g: gamma_eff %.8f, temperature equation %.8f", z, s.gamma_effective,
              1.0 - slope / 3.0);
    cr_expect(s.gamma_effective > previous && s.gamma_effective < 5.0 / 3.0,
              "z = %g: gamma_eff %.8f must rise towards 5/3", z, s.gamma_effective);
    previous = s.gamma_effective;
  }
  jg_thermal_state today;
  jg_thermal_state_at(r.th, 0.0, &today);
  cr_expect(fabs(today.gamma_effective - 5.0 / 3.0) < 1e-3, "z = 0: %.6f", today.gamma_effective);
  real_case_close(&r);
}

/* The history table carries gamma_eff, and the effective_gamma model
 * writes its gamma_eff(z) in the growth header: the values of the thermal
 * state, as written (%.10e in rows, %.6f in the header). */
Test(gas_physics, effective_gamma_in_history_and_growth_tables) {
  real_case r;
  jg_params p;
  jg_params_set_defaults(&p);
  p.perturbations.sound_speed = JG_SOUND_SPEED_EFFECTIVE_GAMMA;
  p.output.history_rows = 10;
  real_case_open(&r, &p);
  jg_error err;
  FILE *f = tmpfile();
  cr_assert_not_null(f);
  cr_assert_eq(jg_report_history(f, &p, r.th, &err), JG_OK, "%s", err.message);
  rewind(f);
  char line[4096];
  int rows = 0, column = -1;
  while (fgets(line, sizeof line, f)) {
    if (line[0] == '#') {
      if (strstr(line, "# z\t")) {
        /* gamma_eff is the last column. */
        column = 0;
        for (char *c = line; *c; c++) column += *c == '\t';
        cr_assert(strstr(line, "\tgamma_eff\n") != NULL, "%s", line);
      }
      continue;
    }
    double v[32];
    char *at = line;
    for (int j = 0; j <= column; j++) v[j] = strtod(at, &at);
    jg_thermal_state s;
    jg_thermal_state_at(r.th, v[0], &s);
    ASSERT_REL(v[column], s.gamma_effective, 1e-9, "history row z = %g", v[0]);
    rows++;
  }
  cr_assert(rows >= 10);
  fclose(f);

  const double z[] = {100.0, 10.0}, k[] = {300.0};
  jg_growth_grid *g = NULL;
  cr_assert_eq(jg_growth_grid_compute(r.m, r.w, k, 1, z, 2, &g, &err), JG_OK, "%s", err.message);
  f = tmpfile();
  cr_assert_eq(jg_report_growth(f, &p, r.th, g, &err), JG_OK, "%s", err.message);
  rewind(f);
  int found = 0;
  while (fgets(line, sizeof line, f)) {
    const char *at = strstr(line, "as z: gamma_eff:");
    if (!at) continue;
    found = 1;
    for (int i = 0; i < 2; i++) {
      char key[32];
      snprintf(key, sizeof key, " %g: ", z[i]);
      const char *v = strstr(at, key);
      cr_assert_not_null(v, "%s", line);
      jg_thermal_state s;
      jg_thermal_state_at(r.th, z[i], &s);
      cr_expect(fabs(strtod(v + strlen(key), NULL) - s.gamma_effective) < 1e-6, "z = %g: %s",
                z[i], line);
      /* The uniform model's delta_T is (gamma_eff - 1) delta_b. */
      const jg_perturb_point *pt = jg_growth_grid_at(g, 0, i);
      ASSERT_REL(pt->delta_T, (s.gamma_effective - 1.0) * pt->delta_b, 1e-12, "z = %g", z[i]);
    }
  }
  cr_expect(found, "no gamma_eff line in the growth header");
  fclose(f);
  jg_growth_grid_free(g);
  real_case_close(&r);
}

/* ---- sound-speed models ------------------------------------------------- */

/* delta_b/delta_c of one model at one k and z (the point in *out). */
static double baryon_ratio(const real_case *r, jg_sound_speed_model model, double k, double z,
                           jg_perturb_point *out) {
  jg_perturb_settings s = r->p.perturbations;
  s.sound_speed = model;
  jg_perturb_model *m;
  jg_perturb_workspace *w;
  real_case_model(r, &s, NULL, &m, &w);
  jg_error err;
  jg_perturb_point p;
  cr_assert_eq(jg_perturb_solve(m, w, k, &z, 1, &p, &err), JG_OK, "%s", err.message);
  if (out) *out = p;
  jg_perturb_workspace_free(w);
  jg_perturb_model_free(m);
  return p.b_over_c;
}

/* The baryon power below the filtering scale, (delta_b/delta_c)^2 times the
 * CDM power, orders with the pressure each model puts on delta_b (k = 500
 * /Mpc, z = 100): adiabatic (gamma =
 * 5/3 at all times) below effective_gamma (gamma_eff <= 5/3, above test)
 * below fluctuating below isothermal (gamma = 1). The fluctuating model's
 * delta_T lies between 0 and (2/3) delta_b (Naoz & Barkana 2005, MNRAS 362,
 * 1047: the gas temperature fluctuation relaxes to the radiation's by
 * Compton scattering and approaches the adiabatic 2/3 only late); and where
 * effective_gamma sits: its pressure gamma_eff delta_b exceeds the
 * fluctuating (1 + delta_T/delta_b) delta_b at every z (checked on the
 * large-scale delta_T/delta_b at k = 1 /Mpc), because the mean temperature
 * follows T_rad while the fluctuation is erased by the same Compton
 * coupling: the effective_gamma model has less baryon power than the
 * fluctuating one, with or without delta_xe. */
Test(gas_physics, model_ordering_of_the_baryon_power) {
  real_case r;
  real_case_open(&r, NULL);
  const double k = 500.0, z = 100.0;
  const double adiabatic = baryon_ratio(&r, JG_SOUND_SPEED_ADIABATIC, k, z, NULL);
  const double effective = baryon_ratio(&r, JG_SOUND_SPEED_EFFECTIVE_GAMMA, k, z, NULL);
  const double fluctuating = baryon_ratio(&r, JG_SOUND_SPEED_FLUCTUATING, k, z, NULL);
  const double isothermal = baryon_ratio(&r, JG_SOUND_SPEED_ISOTHERMAL, k, z, NULL);
  cr_expect(adiabatic > 0.0 && adiabatic < effective && effective < fluctuating &&
                fluctuating < isothermal,
            "delta_b/delta_c at k = %g, z = %g: adiabatic %g, effective_gamma %g, fluctuating %g, "
            "isothermal %g",
            k, z, adiabatic, effective, fluctuating, isothermal);
  const double zs[] = {1000.0, 500.0, 200.0, 100.0, 50.0, 20.0, 10.0};
  for (size_t i = 0; i < sizeof zs / sizeof zs[0]; i++) {
    jg_perturb_point p;
    baryon_ratio(&r, JG_SOUND_SPEED_FLUCTUATING, 1.0, zs[i], &p);
    jg_thermal_state s;
    jg_thermal_state_at(r.th, zs[i], &s);
    const double ratio = p.delta_T / p.delta_b;
    cr_expect(ratio > 0.0 && ratio < 2.0 / 3.0 && 1.0 + ratio < s.gamma_effective,
              "z = %g: delta_T/delta_b = %g, gamma_eff = %g", zs[i], ratio, s.gamma_effective);
  }
  real_case_close(&r);
}

/* ---- the perturbation of the free-electron fraction -------------------- */

/* While hydrogen is in Saha equilibrium (x_p > 0.9998 at z >= 1800 on the
 * reference history) delta_xe must be the linearised Saha equation of
 * src/PHYSICS.md §4.3, x_p x_e / (1 - x_p) = S(T_rad) / n_H, with helium's
 * electrons held (delta x_e = delta x_p):
 *   delta x_p (1/x_p + 1/x_e + 1/(1 - x_p)) = -delta_b   (derived).
 * The three-level-atom rate relaxes to it at 3e6 to 2e11 per e-fold (capped
 * at 1e6 in the tables), so the lag behind delta_b, which grows by at most
 * ~100 per e-fold there, is below 1e-4 of it; the delta_T term (alpha_B at
 * T_gas) is of the order delta_T/delta_b < 1e-5. Measured 1e-4 at most;
 * tolerance 5e-4. delta_xe is ~5e-7 of delta_b here, far below what the
 * default tolerances control (delta_b/delta_c to 1e-6), so the solve runs
 * at rel_tol 1e-10 to resolve it (at the defaults: 1.7e-3 at z = 2200). */
Test(gas_physics, delta_xe_is_linearised_saha_in_equilibrium) {
  real_case r;
  jg_params tight;
  jg_params_set_defaults(&tight);
  tight.perturbations.rel_tol = 1e-10;
  real_case_open(&r, &tight);
  const double z[] = {2500.0, 2200.0, 2000.0, 1800.0};
  jg_perturb_point p[4];
  jg_perturb_limit l[4];
  jg_error err;
  cr_assert_eq(jg_perturb_solve(r.m, r.w, 1.0, z, 4, p, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_perturb_solve_limit(r.m, r.w, z, 4, l, &err), JG_OK, "%s", err.message);
  for (int i = 0; i < 4; i++) {
    jg_thermal_state s;
    jg_thermal_state_at(r.th, z[i], &s);
    cr_assert(s.x_p > 0.9998, "z = %g: x_p = %g (not in Saha equilibrium)", z[i], s.x_p);
    const double saha = -1.0 / (s.x_e * (1.0 / s.x_p + 1.0 / s.x_e + 1.0 / (1.0 - s.x_p)));
    ASSERT_REL(p[i].delta_xe / p[i].delta_b, saha, 5e-4, "k = 1 /Mpc, z = %g", z[i]);
    ASSERT_REL(l[i].k0.delta_xe / l[i].k0.delta_b, saha, 5e-4, "k -> 0, z = %g", z[i]);
  }
  real_case_close(&r);
}

/* Pequignot, Petitjean & Boisson (1991, A&A 251, 680) case-B fit,
 * alpha_B ~ t^b / (1 + c t^d), t = T / 1e4 K: d ln alpha / d ln T. */
static double case_b_log_slope(double T) {
  const double b = -0.6166, c = 0.6703, d = 0.5300;
  const double ctd = c * pow(T / 1.0e4, d);
  return b - d * ctd / (1.0 + ctd);
}

/* The other limit: long after recombination the CMB no longer ionises
 * (beta_B ~ exp(-E_2/kT_rad) = 0) and the Peebles factor C is 1, so the
 * rate is the two-body -alpha_B(T_gas) n_H x_e x_p with x_e = x_p:
 * d ln R / d ln n_H = 1, d ln R / d ln x_e = 2, d ln R / d ln T_gas =
 * d ln alpha_B / d ln T, and no dependence on H. With R / (H x_e) =
 * d ln x_e / d ln a the response of thermal.h becomes relaxation =
 * -d ln x_e/d ln a, density = -relaxation, temperature = -(d ln alpha_B /
 * d ln T) relaxation, expansion = 0 (derived from the rate of Seager,
 * Sasselov & Scott 1999 in src/PHYSICS.md §4.1). 1e-6: the slope of the
 * stored x_e against the rate (measured 3e-7 at z = 100). Also the
 * heating term, (Gamma_C/H)(T_rad/T_gas - 1) d ln Gamma_C / d ln x_e, with
 * d ln Gamma_C / d ln x_e = (1 + f_He)/(1 + f_He + x_e) from §5 (the form
 * of Naoz & Barkana 2005, MNRAS 362, 1047, for the x_e fluctuation in the
 * Compton term; from memory), and the pressure weight x_e/(1 + f_He + x_e). */
Test(gas_physics, ionisation_response_after_recombination) {
  real_case r;
  real_case_open(&r, NULL);
  const double zs[] = {100.0, 20.0, 10.0};
  for (int i = 0; i < 3; i++) {
    const double ln_a = -log1p(zs[i]), a = exp(ln_a);
    jg_ionisation_response q;
    jg_thermal_ionisation_response(r.th, ln_a, &q);
    jg_thermal_state s;
    jg_thermal_state_at(r.th, zs[i], &s);
    double dlnxe;
    jg_thermal_log_slopes(r.th, ln_a, &dlnxe, NULL);
    cr_expect(q.relaxation > 0.0, "z = %g", zs[i]);
    ASSERT_REL(q.relaxation, -dlnxe, 1e-6, "relaxation, z = %g", zs[i]);
    ASSERT_REL(q.density, -q.relaxation, 1e-6, "density, z = %g", zs[i]);
    ASSERT_REL(q.temperature, -case_b_log_slope(s.T_gas) * q.relaxation, 1e-6,
               "temperature, z = %g", zs[i]);
    cr_expect(fabs(q.expansion) < 1e-12 * q.relaxation, "expansion %g, z = %g", q.expansion,
              zs[i]);
    const double f = r.bg->helium_to_hydrogen, H = jg_background_hubble(r.bg, a);
    ASSERT_REL(q.heating,
               s.compton_rate / H * (s.T_rad / s.T_gas - 1.0) * (1.0 + f) / (1.0 + f + s.x_e),
               1e-12, "heating, z = %g", zs[i]);
    ASSERT_REL(q.pressure, s.x_e / (1.0 + f + s.x_e), 1e-12, "pressure, z = %g", zs[i]);
  }
  real_case_close(&r);
}

/* Lewis (2007, PRD 76, 063001; from memory): after recombination a denser
 * region recombines faster, delta_xe is anti-correlated with delta_b, and
 * the feedback on the gas changes the small-scale baryon perturbations at
 * the per-cent level. Checked: delta_xe/delta_b < 0 at z <= 800 for every
 * k, and the change of delta_b/delta_c at z = 100 for k = 1000 and 3000
 * /Mpc between 0.1 % and 10 %, an increase (less pressure: the colder
 * denser gas, src/PHYSICS.md §7.1). The switch off gives delta_xe = 0. */
Test(gas_physics, delta_xe_after_recombination_as_published) {
  real_case r;
  real_case_open(&r, NULL);
  jg_perturb_settings off = r.p.perturbations;
  off.ionisation_perturbation = 0;
  jg_perturb_model *m_off;
  jg_perturb_workspace *w_off;
  real_case_model(&r, &off, NULL, &m_off, &w_off);
  const double z[] = {800.0, 500.0, 200.0, 100.0, 20.0, 10.0};
  const double ks[] = {1.0, 300.0, 1000.0, 3000.0};
  jg_error err;
  for (int q = 0; q < 4; q++) {
    jg_perturb_point on[6], none[6];
    cr_assert_eq(jg_perturb_solve(r.m, r.w, ks[q], z, 6, on, &err), JG_OK, "%s", err.message);
    cr_assert_eq(jg_perturb_solve(m_off, w_off, ks[q], z, 6, none, &err), JG_OK, "%s",
                 err.message);
    for (int i = 0; i < 6; i++) {
      cr_expect(on[i].delta_xe / on[i].delta_b < 0.0, "k = %g z = %g: delta_xe/delta_b = %g",
                ks[q], z[i], on[i].delta_xe / on[i].delta_b);
      cr_expect_eq(none[i].delta_xe, 0.0);
    }
    if (ks[q] >= 1000.0) {
      const double change = on[3].b_over_c / none[3].b_over_c - 1.0;
      cr_expect(change > 1e-3 && change < 0.1, "k = %g, z = 100: change %g", ks[q], change);
    }
  }
  jg_perturb_workspace_free(w_off);
  jg_perturb_model_free(m_off);
  real_case_close(&r);
}

/* Both integrator paths solve the new systems alike: the Rosenbrock
 * integrator (rel_tol 1e-8) against GSL msbdf at rel_tol 1e-12, on the
 * fluctuating model with delta_xe and on effective_gamma, for one mode and
 * the k -> 0 limit (its k^2 coefficient carries delta_xe through the
 * pressure): 1e-6, the agreement the integrator's own tests ask for the
 * other systems (tests/test_integrator.c). */
Test(gas_physics, both_integrators_agree_on_the_new_systems) {
  real_case r;
  real_case_open(&r, NULL);
  const jg_sound_speed_model models[] = {JG_SOUND_SPEED_FLUCTUATING,
                                         JG_SOUND_SPEED_EFFECTIVE_GAMMA};
  const double z[] = {1000.0, 200.0, 20.0};
  jg_error err;
  for (int c = 0; c < 2; c++) {
    jg_perturb_settings fast = r.p.perturbations, tight = r.p.perturbations;
    fast.sound_speed = tight.sound_speed = models[c];
    fast.stepper = JG_PERTURB_STEPPER_ROSENBROCK;
    fast.rel_tol = 1e-8;
    fast.abs_tol = 1e-10;
    tight.stepper = JG_PERTURB_STEPPER_MSBDF;
    tight.rel_tol = 1e-12;
    tight.abs_tol = 1e-14;
    jg_perturb_model *mf, *mt;
    jg_perturb_workspace *wf, *wt;
    real_case_model(&r, &fast, NULL, &mf, &wf);
    real_case_model(&r, &tight, NULL, &mt, &wt);
    const double ks[] = {1.0, 700.0, 1e4};
    jg_perturb_point a[3 * 3], b[3 * 3];
    cr_assert_eq(jg_perturb_solve_many(mf, wf, ks, 3, z, 3, a, &err), JG_OK, "%s", err.message);
    cr_assert_eq(jg_perturb_solve_many(mt, wt, ks, 3, z, 3, b, &err), JG_OK, "%s", err.message);
    for (int i = 0; i < 9; i++) {
      ASSERT_REL(a[i].b_over_c, b[i].b_over_c, 1e-6, "model %d k = %g z = %g", c, a[i].k, a[i].z);
      if (c == 0)
        ASSERT_REL(a[i].delta_xe, b[i].delta_xe, 1e-6, "k = %g z = %g", a[i].k, a[i].z);
    }
    jg_perturb_limit la[3], lb[3];
    cr_assert_eq(jg_perturb_solve_limit(mf, wf, z, 3, la, &err), JG_OK, "%s", err.message);
    cr_assert_eq(jg_perturb_solve_limit(mt, wt, z, 3, lb, &err), JG_OK, "%s", err.message);
    for (int i = 0; i < 3; i++)
      ASSERT_REL(la[i].dlnb_dk2, lb[i].dlnb_dk2, 1e-6, "model %d z = %g", c, z[i]);
    jg_perturb_workspace_free(wt);
    jg_perturb_model_free(mt);
    jg_perturb_workspace_free(wf);
    jg_perturb_model_free(mf);
  }
  real_case_close(&r);
}

/* ---- the coefficient tables against their direct evaluation ------------ */

/* The tabulated quantities at one node as the tables were first built (the
 * old direct evaluation, kept here as the reference): the thermal state at
 * z = 1/a - 1 and the ionisation response, each read from the history on
 * its own; the four delta_xe rates capped and as asinh. */
static void direct_coefficients(const jg_thermal *th, double x, double q[N_Q]) {
  const jg_background *bg = jg_thermal_background(th);
  const double a = exp(x);
  jg_thermal_state s;
  jg_thermal_state_at(th, 1.0 / a - 1.0, &s);
  const double H = jg_background_hubble(bg, a), aH_mpc = a * H * JG_MPC;
  q[Q_PRESSURE] = JG_K_BOLTZMANN * s.T_gas / (s.mu * JG_M_HYDROGEN_ATOM) / (aH_mpc * aH_mpc);
  q[Q_DRAG] = s.x_e * jg_background_n_hydrogen(bg, a) * JG_SIGMA_THOMSON * JG_C_LIGHT /
              (bg->R_coefficient * a * H);
  q[Q_RELAX] =
      s.compton_rate * (s.T_rad / s.T_gas) / H + jg_thermal_heating_rate(th, s.z) / s.T_gas;
  q[Q_EXPANSION] = jg_background_dlnH_dlna(bg, a);
  q[Q_GRAVITY] = 1.5 * jg_background_omega_m_of_a(bg, a);
  q[Q_GAMMA_EFF] = s.gamma_effective;
  jg_ionisation_response ir;
  jg_thermal_ionisation_response(th, x, &ir);
  const double cap = ir.relaxation > 0.0 ? 1e6 / (ir.relaxation + 1e6) : 1.0;
  q[Q_XE_RELAX] = asinh(cap * ir.relaxation);
  q[Q_XE_DENSITY] = asinh(cap * ir.density);
  q[Q_XE_TEMPERATURE] = asinh(cap * ir.temperature);
  q[Q_XE_EXPANSION] = asinh(cap * ir.expansion);
  q[Q_XE_HEATING] = ir.heating / q[Q_RELAX];
  q[Q_XE_PRESSURE] = ir.pressure;
}

/* Largest difference of the tabulated medium (its eval and its slope) from
 * the old construction: the direct evaluation at the same nodes, GSL's
 * natural cubic splines through it (ln p, ln d, ln r, asinh of the delta_xe
 * rates, the rest as they are), read back with exp and sinh of the
 * splines, at every node and every interval's midpoint. err[0]: relative,
 * of the rates and the products with them; err[1]: in the tables' own
 * variables (ln for the rates, asinh for the delta_xe rates, as is for e,
 * g, gamma_eff) of the values; err[2]: of the slopes, relative to the
 * largest slope of that coefficient. */
static void medium_against_direct(const jg_thermal *th, const thermal_medium *tm, double err[3]) {
  const int n = tm->n;
  double *x = malloc(sizeof(double) * (size_t)n * (1 + N_Q));
  cr_assert_not_null(x);
  double *y = x + n;
  for (int i = 0; i < n; i++) {
    x[i] = i == n - 1 ? 0.0 : tm->x0 + i * tm->dx;
    double q[N_Q];
    direct_coefficients(th, x[i], q);
    for (int k = 0; k < N_Q; k++) y[k * n + i] = k < Q_EXPANSION ? log(q[k]) : q[k];
  }
  gsl_spline *sp[N_Q];
  gsl_interp_accel *acc = gsl_interp_accel_alloc();
  for (int k = 0; k < N_Q; k++) {
    sp[k] = gsl_spline_alloc(gsl_interp_cspline, (size_t)n);
    gsl_spline_init(sp[k], x, y + (size_t)k * n, (size_t)n);
  }
  double slope_scale[N_Q] = {0};
  for (int pass = 0; pass < 2; pass++) {
    err[0] = err[1] = err[2] = 0.0;
    for (int j = 0; j < 2 * n - 1; j++) {
      const int i = j / 2;
      const double at = j % 2 ? 0.5 * (x[i] + x[i + 1]) : x[i];
      double v[N_Q], d[N_Q];
      for (int k = 0; k < N_Q; k++) {
        v[k] = gsl_spline_eval(sp[k], at, acc);
        d[k] = gsl_spline_eval_deriv(sp[k], at, acc);
      }
      /* (Zeroed: the fields a medium does not tabulate stay 0 in both.) */
      jg_medium_coefficients c = {0}, dc = {0}, c_alone = {0};
      cr_assert_eq(jg__pt_thermal_medium_eval_and_slope(tm, at, &c, &dc), 0);
      /* The values that come with the slope are the look-up's own, to the
       * last bit (the Rosenbrock path reads both in one step). */
      cr_assert_eq(jg__pt_thermal_medium_eval(tm, at, &c_alone), 0);
      cr_assert(memcmp(&c, &c_alone, sizeof c) == 0, "values with the slope differ at ln a = %.17g",
                at);
      /* value (tabulated variable), old read-out, new read-out, old slope, new slope */
      double t[][5] = {
          {v[Q_PRESSURE], exp(v[Q_PRESSURE]), c.pressure, exp(v[Q_PRESSURE]) * d[Q_PRESSURE], dc.pressure},
          {v[Q_DRAG], exp(v[Q_DRAG]), c.drag, exp(v[Q_DRAG]) * d[Q_DRAG], dc.drag},
          {v[Q_RELAX], exp(v[Q_RELAX]), c.relaxation, exp(v[Q_RELAX]) * d[Q_RELAX], dc.relaxation},
          {v[Q_EXPANSION], v[Q_EXPANSION], c.dlnH_dlna, d[Q_EXPANSION], dc.dlnH_dlna},
          {v[Q_GRAVITY], v[Q_GRAVITY], c.gravity, d[Q_GRAVITY], dc.gravity},
          {v[Q_GAMMA_EFF], v[Q_GAMMA_EFF] * exp(v[Q_PRESSURE]), c.pressure_effective,
           (d[Q_GAMMA_EFF] + v[Q_GAMMA_EFF] * d[Q_PRESSURE]) * exp(v[Q_PRESSURE]), dc.pressure_effective},
          {v[Q_XE_RELAX], sinh(v[Q_XE_RELAX]), c.ionisation_relaxation,
           cosh(v[Q_XE_RELAX]) * d[Q_XE_RELAX], dc.ionisation_relaxation},
          {v[Q_XE_DENSITY], sinh(v[Q_XE_DENSITY]), c.ionisation_density,
           cosh(v[Q_XE_DENSITY]) * d[Q_XE_DENSITY], dc.ionisation_density},
          {v[Q_XE_TEMPERATURE], sinh(v[Q_XE_TEMPERATURE]), c.ionisation_temperature,
           cosh(v[Q_XE_TEMPERATURE]) * d[Q_XE_TEMPERATURE], dc.ionisation_temperature},
          {v[Q_XE_EXPANSION], sinh(v[Q_XE_EXPANSION]), c.ionisation_expansion,
           cosh(v[Q_XE_EXPANSION]) * d[Q_XE_EXPANSION], dc.ionisation_expansion},
          {v[Q_XE_HEATING], v[Q_XE_HEATING] * exp(v[Q_RELAX]), c.heating_ionisation,
           (d[Q_XE_HEATING] + v[Q_XE_HEATING] * d[Q_RELAX]) * exp(v[Q_RELAX]), dc.heating_ionisation},
          {v[Q_XE_PRESSURE], v[Q_XE_PRESSURE] * exp(v[Q_PRESSURE]), c.pressure_ionisation,
           (d[Q_XE_PRESSURE] + v[Q_XE_PRESSURE] * d[Q_PRESSURE]) * exp(v[Q_PRESSURE]), dc.pressure_ionisation}};
      for (int k = 0; k < N_Q; k++) {
        if (k == Q_GAMMA_EFF && !tm->effective_gamma) continue;
        if (k > Q_GAMMA_EFF && !tm->ionisation) continue;
        if (pass == 0) {
          slope_scale[k] = fmax(slope_scale[k], fabs(t[k][3]));
          continue;
        }
        const int rate = k < Q_EXPANSION || k == Q_GAMMA_EFF || k >= Q_XE_HEATING;
        const int signed_log = k >= Q_XE_RELAX && k <= Q_XE_EXPANSION;
        if (rate) err[0] = fmax(err[0], fabs(t[k][2] / t[k][1] - 1.0));
        const double table_variable = k < Q_EXPANSION ? log(t[k][2]) : signed_log ? asinh(t[k][2])
                                      : k < Q_GAMMA_EFF ? t[k][2] : NAN;
        if (!isnan(table_variable)) err[1] = fmax(err[1], fabs(table_variable - t[k][0]));
        err[2] = fmax(err[2], fabs(t[k][4] - t[k][3]) / slope_scale[k]);
      }
    }
  }
  for (int k = 0; k < N_Q; k++) gsl_spline_free(sp[k]);
  gsl_interp_accel_free(acc);
  free(x);
}

/* The tables are built in one pass over the history (one look-up per
 * spline, the curvatures by one shared elimination) and read between nodes
 * from stored node values (the rate, sinh and cosh of the asinh-tabulated
 * term) instead of exp and sinh of the whole polynomial: exact in exact
 * arithmetic, so the old construction (source: the old direct evaluation,
 * above) must agree to rounding. Measured on the reference cosmology, with
 * and without "tanh+heating": 4e-15 relative in the values, 4e-15 in the
 * tabulated variables (a few units in the last place of ln q ~ 30), slopes
 * 9e-14 of the largest slope (GSL's derivative of its spline against the
 * tables' polynomial). The bounds, 1e-13, 1e-13 and 1e-12, leave room for
 * other compilers and stay 1000 times below the tables' own interpolation
 * error (1e-10 on smooth stretches, more across the history's kinks:
 * src/perturbations/perturb_internal.h). */
Test(gas_physics, coefficient_tables_match_their_direct_evaluation) {
  jg_params p;
  jg_params_set_defaults(&p);
  for (int heated = 0; heated < 2; heated++) {
    p.thermal.reionisation = heated ? JG_REIONISATION_TANH_HEATED : JG_REIONISATION_NONE;
    real_case r;
    real_case_open(&r, &p);
    for (int model = 0; model < 2; model++) {
      jg_perturb_settings s = r.p.perturbations;
      s.sound_speed = model ? JG_SOUND_SPEED_EFFECTIVE_GAMMA : JG_SOUND_SPEED_FLUCTUATING;
      jg_perturb_model *m;
      jg_perturb_workspace *w;
      real_case_model(&r, &s, NULL, &m, &w);
      double err[3];
      medium_against_direct(r.th, m->owned, err);
      cr_expect(err[0] <= 1e-13 && err[1] <= 1e-13 && err[2] <= 1e-12,
                "heated %d, %s: values %.2e relative, %.2e in the tabulated variables, slopes "
                "%.2e of the largest",
                heated, model ? "effective_gamma" : "fluctuating", err[0], err[1], err[2]);
      jg_perturb_workspace_free(w);
      jg_perturb_model_free(m);
    }
    real_case_close(&r);
  }
}
