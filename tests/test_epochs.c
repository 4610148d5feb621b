/*
 * Derived epochs (src/history/epochs.c) of the Planck 2018 cosmology against the
 * published values.
 *
 * Source of every reference value unless stated otherwise: Planck
 * Collaboration 2020, A&A 641, A6 ("Planck 2018 results VI"), Table 2,
 * column TT,TE,EE+lowE+lensing (src/PHYSICS.md §10.1). The cosmology is built with
 * jg_params_set_defaults(), which holds that column's omega_b, omega_c, h,
 * T_cmb = 2.7255 K, Y_P = 0.2454 and N_eff = 3.046.
 *
 * Why the tolerances are wider than the published error bars: our hydrogen
 * is an effective three-level atom with a fudge factor and our helium is in
 * Saha equilibrium, whereas the published fit used a multi-level
 * recombination treatment; that moves the decoupling redshifts by a few
 * 0.1 % at most (drifts of ~0.4 % are reported for the crudest
 * H-only + Saha-He treatment; value from memory). Planck's baseline also has one 0.06 eV massive
 * neutrino, which we treat as massless radiation: this changes the matter
 * density today by omega_nu = 0.00064 (0.45 % of omega_m) and so the age and,
 * slightly, the sound horizons.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <criterion/criterion.h>
#include <gsl/gsl_errno.h>

#include "jeansgrow/background.h"
#include "jeansgrow/epochs.h"
#include "jeansgrow/params.h"
#include "jeansgrow/report.h"
#include "jeansgrow/thermal.h"
#include "support.h"

/* The epochs of the default (Planck 2018) cosmology with the default
 * thermal settings. */
static jg_epochs planck_epochs(void) {
  jg_params p;
  jg_params_set_defaults(&p);
  jg_error err;
  jg_error_clear(&err);
  jg_background *bg = jg_background_new(&p.cosmology, &err);
  cr_assert(bg != NULL, "jg_background_new failed: %s", err.message);
  jg_thermal *th = jg_thermal_new(bg, &p.thermal, &err);
  cr_assert(th != NULL, "jg_thermal_new failed: %s", err.message);
  jg_epochs e;
  jg_status st = jg_epochs_compute(th, &e, &err);
  cr_assert(st == JG_OK, "jg_epochs_compute failed: %s: %s", jg_status_name(st), err.message);
  jg_thermal_free(th);
  jg_background_free(bg);
  return e;
}

TestSuite(planck2018_epochs, .init = quiet_gsl);

/* z_star = 1089.92 +- 0.25, tau = 1 definition (Planck 2018, A&A 641, A6,
 * Table 2). 0.3 %: the simpler recombination model (file comment). */
Test(planck2018_epochs, photon_decoupling_redshift) {
  jg_epochs e = planck_epochs();
  assert_rel(e.z_star, 1089.92, 3e-3, "z_star");
}

/* z_drag = 1059.94 +- 0.30 (Planck 2018, A&A 641, A6, Table 2). 0.3 %: as
 * for z_star, the drag depth is the same electron column divided by R. */
Test(planck2018_epochs, baryon_drag_redshift) {
  jg_epochs e = planck_epochs();
  assert_rel(e.z_drag, 1059.94, 3e-3, "z_drag");
}

/* r_star = 144.43 +- 0.26 Mpc (Planck 2018, A&A 641, A6, Table 2). 0.5 %:
 * the error of z_star propagates (dr_s/dz ~ 0.1 Mpc per unit z near 1090)
 * and the expansion rate differs slightly with massless neutrinos. */
Test(planck2018_epochs, sound_horizon_at_decoupling) {
  jg_epochs e = planck_epochs();
  assert_rel(e.r_star, 144.43, 5e-3, "r_star [Mpc]");
}

/* r_drag = 147.09 +- 0.26 Mpc (Planck 2018, A&A 641, A6, Table 2). 0.5 %,
 * same reasons as r_star. */
Test(planck2018_epochs, sound_horizon_at_drag) {
  jg_epochs e = planck_epochs();
  assert_rel(e.r_drag, 147.09, 5e-3, "r_drag [Mpc]");
}

/* 1 + z_eq = (omega_b + omega_c) / omega_r with omega_r from T_cmb and
 * N_eff: z_eq = 3401.97 (src/PHYSICS.md §10.1, derived from the Table 2
 * inputs with CODATA 2018 constants; Planck's own 3402 +- 26 agrees). Pure
 * algebra on the inputs, so 1e-4 covers only the rounding of the derived
 * value to six digits. */
Test(planck2018_epochs, matter_radiation_equality) {
  jg_epochs e = planck_epochs();
  assert_rel(e.z_eq, 3401.97, 1e-4, "z_eq");
}

/* k_eq = a_eq H(a_eq) / c = 0.0103832 /Mpc (src/PHYSICS.md §10.1, derived from
 * the same inputs; Planck 2018 Table 2 gives 0.010384 +- 0.000081). 1e-4:
 * the rounding of the derived value. */
Test(planck2018_epochs, equality_wavenumber) {
  jg_epochs e = planck_epochs();
  assert_rel(e.k_eq, 0.0103832, 1e-4, "k_eq [1/Mpc]");
}

/* Age 13.797 +- 0.023 Gyr (Planck 2018, A&A 641, A6, Table 2). Planck's
 * baseline has a 0.06 eV neutrino that is non-relativistic today; we treat
 * it as massless, so our matter density today is lower by
 * omega_nu ~ 0.00064 and our universe is slightly older (~0.1 %). 0.3 %
 * allows for that and nothing else: the age depends only on the background. */
Test(planck2018_epochs, age_of_the_universe) {
  jg_epochs e = planck_epochs();
  assert_rel(e.age_Gyr, 13.797, 3e-3, "age [Gyr]");
}

/* ---- epochs a universe does not have -------------------------------------
 *
 * Inside the documented parameter box some universes lack an epoch: too few
 * electrons for tau to reach 1, radiation still outweighing matter today.
 * Such an epoch is absent with a reason (and value 0), the computation
 * succeeds, and whatever depends on it is absent too. Each case below is a
 * cosmology that shows it (the random sweep tests/valid_sweep.c found the
 * z_drag and visibility cases; their keys are copied from its reproducers),
 * checked against the defining quantity itself. */

typedef struct key_value {
  const char *key;
  double value;
} key_value;

typedef struct absent_case {
  jg_background *bg;
  jg_thermal *th;
  jg_epochs e;
} absent_case;

static absent_case compute_case(const key_value *set, int n) {
  jg_params p;
  jg_params_set_defaults(&p);
  jg_error err;
  jg_error_clear(&err);
  for (int i = 0; i < n; i++)
    cr_assert(jg_params_set_number(&p, set[i].key, set[i].value, &err) == JG_OK, "%s: %s",
              set[i].key, err.message);
  cr_assert(jg_params_validate(&p, &err) == JG_OK, "inside the documented box: %s", err.message);
  absent_case c;
  c.bg = jg_background_new(&p.cosmology, &err);
  cr_assert(c.bg != NULL, "jg_background_new failed: %s", err.message);
  c.th = jg_thermal_new(c.bg, &p.thermal, &err);
  cr_assert(c.th != NULL, "jg_thermal_new failed: %s", err.message);
  jg_status st = jg_epochs_compute(c.th, &c.e, &err);
  cr_assert(st == JG_OK, "an absent epoch is not a failure: %s: %s", jg_status_name(st),
            err.message);
  for (int i = 0; i < jg_epochs_count(); i++) {
    jg_epoch_entry en = jg_epochs_entry(&c.e, i);
    cr_assert(isfinite(en.value), "%s = %g", en.name, en.value);
    cr_assert(en.exists || (en.value == 0.0 && en.reason[0]), "%s absent without a reason",
              en.name);
  }
  return c;
}

static void free_case(absent_case *c) {
  jg_thermal_free(c->th);
  jg_background_free(c->bg);
}

static void assert_absent(const absent_case *c, int entry, const char *reason_part) {
  jg_epoch_entry en = jg_epochs_entry(&c->e, entry);
  cr_assert(!en.exists, "%s should be absent, is %g", en.name, en.value);
  cr_assert(strstr(en.reason, reason_part), "%s: reason \"%s\" lacks \"%s\"", en.name, en.reason,
            reason_part);
}

static int exists(const absent_case *c, int entry) { return jg_epochs_entry(&c->e, entry).exists; }

TestSuite(absent_epochs, .init = quiet_gsl);

/* Omega_b h^2 = 1e-5 (2237 times fewer electrons than Planck's): tau from
 * z = 8000 to today stays below 1, so there is no z_star, hence no r_star or
 * theta_star. The drag depth (tau's integrand divided by R ~ Omega_b) still
 * reaches 1, so z_drag exists and is where it is 1. */
Test(absent_epochs, too_few_electrons_no_photon_decoupling) {
  const key_value set[] = {{"cosmology.baryon_density_h2", 1e-5}};
  absent_case c = compute_case(set, 1);
  cr_assert(jg_thermal_optical_depth(c.th, jg_thermal_start_redshift(c.th)) < 1.0);
  assert_absent(&c, JG_EPOCH_Z_STAR, "optical depth stays below 1");
  assert_absent(&c, JG_EPOCH_R_STAR, "no z_star");
  assert_absent(&c, JG_EPOCH_THETA_STAR, "no z_star");
  cr_assert(exists(&c, JG_EPOCH_Z_DRAG) && exists(&c, JG_EPOCH_R_DRAG));
  assert_rel(jg_thermal_drag_depth(c.th, c.e.z_drag), 1.0, 1e-6, "tau_drag(z_drag)");
  free_case(&c);
}

/* Omega_b h^2 = 1 with T_cmb = 1 K and the history starting at z = 4412: R
 * = 3 rho_b / (4 rho_gamma) is huge, so the drag depth stays below 1 while
 * the optical depth passes 1: no z_drag, no r_drag, but z_star. */
Test(absent_epochs, heavy_baryons_no_end_of_drag) {
  const key_value set[] = {{"cosmology.hubble_h", 1.4818306516316906},
                           {"cosmology.baryon_density_h2", 1},
                           {"cosmology.cdm_density_h2", 2},
                           {"cosmology.curvature_omega", -0.49811806187510643},
                           {"cosmology.cmb_temperature_K", 1},
                           {"cosmology.helium_mass_fraction", 0.64203571366213819},
                           {"cosmology.neutrino_number_eff", 12.527268707687293},
                           {"cosmology.de_w0", -1.6299000262912684},
                           {"cosmology.de_wa", 1.8844433513849079},
                           {"thermal.start_redshift", 4412.2809035498185},
                           {"thermal.recombination_fudge", 1.223683347032076},
                           {"thermal.saha_limit", 0.95302754092435515},
                           {"thermal.quasi_static_limit", 0.0001473513295712042},
                           {"thermal.rel_tol", 1e-5},
                           {"thermal.abs_tol", 8.2234950292061159e-06},
                           {"thermal.grid_points", 17531}};
  absent_case c = compute_case(set, (int)(sizeof set / sizeof set[0]));
  cr_assert(jg_thermal_drag_depth(c.th, jg_thermal_start_redshift(c.th)) < 1.0);
  assert_absent(&c, JG_EPOCH_Z_DRAG, "drag depth stays below 1");
  assert_absent(&c, JG_EPOCH_R_DRAG, "no z_drag");
  cr_assert(exists(&c, JG_EPOCH_Z_STAR) && exists(&c, JG_EPOCH_R_STAR));
  assert_rel(jg_thermal_optical_depth(c.th, c.e.z_star), 1.0, 1e-6, "tau(z_star)");
  free_case(&c);
}

/* A universe whose visibility g(z) only grows toward today on the history
 * grid (the sweep's reproducer): no interior maximum, so no visibility peak. */
Test(absent_epochs, visibility_without_a_maximum) {
  const key_value set[] = {{"cosmology.hubble_h", 0.1},
                           {"cosmology.baryon_density_h2", 0.0067129984925429079},
                           {"cosmology.cdm_density_h2", 0.2047646770105615},
                           {"cosmology.curvature_omega", -0.96612592468142311},
                           {"cosmology.cmb_temperature_K", 28.385327726265256},
                           {"cosmology.helium_mass_fraction", 0.17666305111941175},
                           {"cosmology.neutrino_number_eff", 16.458736797141885},
                           {"cosmology.de_w0", 0},
                           {"cosmology.de_wa", -3},
                           {"thermal.start_redshift", 51390.841088133537},
                           {"thermal.recombination_fudge", 1.4394263103923692},
                           {"thermal.saha_limit", 0.54013778302046911},
                           {"thermal.quasi_static_limit", 0.0001},
                           {"thermal.rel_tol", 6.2101543268714329e-11},
                           {"thermal.abs_tol", 1e-5},
                           {"thermal.grid_points", 2964}};
  absent_case c = compute_case(set, (int)(sizeof set / sizeof set[0]));
  assert_absent(&c, JG_EPOCH_Z_VISIBILITY_PEAK, "no maximum");
  /* Independent of the sampling in epochs.c: g today exceeds g everywhere
   * on a grid 10 times finer than the start redshift's ln(1+z) / 1000. */
  const double g0 = jg_thermal_visibility(c.th, 0.0);
  const double span = log1p(jg_thermal_start_redshift(c.th));
  for (int i = 1; i <= 4000; i++) {
    double z = expm1(span * i / 4000.0);
    cr_assert(jg_thermal_visibility(c.th, z) <= g0, "g(%g) > g(0)", z);
  }
  free_case(&c);
}

/* T_cmb = 30 K puts (30 / 2.7255)^4 = 14680 times more radiation than
 * Planck's: with Planck's matter 1 + z_eq = 3402.97 (src/PHYSICS.md §10.1)
 * becomes 3402.97 / 14680 = 0.2318 < 1, so radiation outweighs matter still
 * today: no equality, no k_eq. The other epochs stay. */
Test(absent_epochs, radiation_still_dominates_no_equality) {
  const key_value set[] = {{"cosmology.cmb_temperature_K", 30}};
  absent_case c = compute_case(set, 1);
  assert_rel(1.0 + jg_background_z_equality(c.bg), 3402.97 * pow(2.7255 / 30.0, 4), 1e-5,
             "Omega_m / Omega_r");
  assert_absent(&c, JG_EPOCH_Z_EQ, "radiation outweighs matter");
  assert_absent(&c, JG_EPOCH_K_EQ, "no z_eq");
  free_case(&c);
}

/* T_cmb = 30 K, h = 4.6, Omega_b h^2 = 4e-4 from z = 1e5: the Compton
 * coupling (rate ~ x_e T_rad^4 / H per Hubble time) keeps the gas within
 * 10 % of the radiation temperature until today: no gas decoupling. */
Test(absent_epochs, gas_coupled_until_today_no_gas_decoupling) {
  const key_value set[] = {{"cosmology.cmb_temperature_K", 30},
                           {"cosmology.hubble_h", 4.6},
                           {"cosmology.baryon_density_h2", 4e-4},
                           {"thermal.start_redshift", 1e5}};
  absent_case c = compute_case(set, (int)(sizeof set / sizeof set[0]));
  jg_thermal_state today;
  jg_thermal_state_at(c.th, 0.0, &today);
  cr_assert(today.T_gas > 0.9 * today.T_rad, "T_gas / T_rad today = %g",
            today.T_gas / today.T_rad);
  assert_absent(&c, JG_EPOCH_Z_GAS_DECOUPLING, "T_gas / T_rad stays above 0.9");
  free_case(&c);
}

/* The epochs table writes an absent epoch as a comment with its reason, so
 * that it holds numbers only and still loads row by row. */
Test(absent_epochs, table_comments_out_an_absent_epoch) {
  const key_value set[] = {{"cosmology.baryon_density_h2", 1e-5}};
  absent_case c = compute_case(set, 1);
  jg_params p;
  jg_params_set_defaults(&p);
  p.cosmology.baryon_density_h2 = 1e-5;
  char *text = NULL;
  size_t size = 0;
  FILE *f = open_memstream(&text, &size);
  cr_assert_not_null(f);
  jg_error err;
  jg_error_clear(&err);
  cr_assert(jg_report_epochs(f, &p, &c.e, &err) == JG_OK, "%s", err.message);
  fclose(f);
  cr_assert(strstr(text, "\n# z_star: none (the Thomson optical depth stays below 1 from z = "
                         "8000 down to z = 1)\n"), "%s", text);
  cr_assert(strstr(text, "\n# r_star: none (no z_star)\n"), "%s", text);
  cr_assert(strstr(text, "\nz_drag\t"), "%s", text);
  cr_assert(!strstr(text, "nan") && !strstr(text, "inf"), "%s", text);
  free(text);
  free_case(&c);
}
