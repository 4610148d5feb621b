/*
 * The background (src/history/background.c): analytic limits, check values of
 * src/PHYSICS.md §10, and bad input.
 *
 * CMake (tests/CMakeLists.txt), with the helper there, which links
 * jeansgrow_static and PkgConfig::CRITERION:
 *   jg_add_criterion_test(test_background test_background.c)
 *
 * "Radiation made negligible": several checks need a universe of matter
 * (+ Lambda) only, which the Friedmann equation of the library cannot
 * express exactly because T_cmb > 0 is required. T_cmb = 1e-3 K and
 * N_eff = 0 give Omega_r ~ 1e-18 (Omega_gamma ~ T^4), whose effect on H,
 * t, distances and D is below 1e-14 at the redshifts used (<= 1100):
 * invisible at the 1e-6 ... 1e-10 tolerances below.
 */
#include <math.h>
#include <stddef.h>
#include <stdio.h>
#include <string.h>

#include <criterion/criterion.h>
#include <criterion/new/assert.h>
#include <gsl/gsl_deriv.h>
#include <gsl/gsl_errno.h>

#include "jeansgrow/background.h"
#include "jeansgrow/constants.h"
#include "support.h"

static void assert_ok(jg_status st, const jg_error *err, const char *what) {
  cr_assert(st == JG_OK, "%s failed: %s: %s", what, jg_status_name(st), err->message);
}

/* Planck 2018, TT,TE,EE+lowE+lensing (Planck Collaboration 2020, A&A 641,
 * A6, Table 2; src/PHYSICS.md §10.1): the inputs of the z_eq check value. */
static jg_cosmology planck2018(void) {
  jg_cosmology c = {
      .hubble_h = 0.6736,
      .baryon_density_h2 = 0.02237,
      .cdm_density_h2 = 0.1200,
      .curvature_omega = 0.0,
      .cmb_temperature_K = 2.7255,
      .helium_mass_fraction = 0.2454,
      .neutrino_number_eff = 3.046,
      .de_w0 = -1.0,
      .de_wa = 0.0,
  };
  return c;
}

/* Matter (+ Lambda, + curvature) with radiation made negligible (see the
 * file comment). h is arbitrary: 0.7 makes omega_m h^2 = 0.49 Omega_m. */
static jg_cosmology matter_lambda(double omega_m, double omega_k) {
  const double h = 0.7, f_b = 0.157;
  jg_cosmology c = {
      .hubble_h = h,
      .baryon_density_h2 = f_b * omega_m * h * h,
      .cdm_density_h2 = (1.0 - f_b) * omega_m * h * h,
      .curvature_omega = omega_k,
      .cmb_temperature_K = 1.0e-3,
      .helium_mass_fraction = 0.2454,
      .neutrino_number_eff = 0.0,
      .de_w0 = -1.0,
      .de_wa = 0.0,
  };
  return c;
}

static jg_background *build(const jg_cosmology *c) {
  jg_error err;
  jg_error_clear(&err);
  jg_background *bg = jg_background_new(c, &err);
  cr_assert(bg != NULL, "jg_background_new failed: %s", err.message);
  return bg;
}

/* c / H0 in Mpc. */
static double hubble_distance(const jg_background *bg) { return JG_C_LIGHT / bg->H0 / JG_MPC; }

/* ---- Einstein-de Sitter: exact closed forms ------------------------------ */

TestSuite(einstein_de_sitter, .init = quiet_gsl);

/* Omega_m = 1: H = H0 a^-3/2, t = 2/(3 H0) a^3/2, eta = 2 (c/H0) sqrt(a),
 * chi(z) = 2 (c/H0) (1 - 1/sqrt(1+z)), D = a. Textbook closed forms
 * (common practice, no source). Tolerance 1e-6: the residual
 * Omega_r ~ 1e-18 is far below it, the quadrature error near 1e-9. */
static const double eds_a[] = {1.0e-3, 0.0137, 0.31, 0.77, 1.0};

Test(einstein_de_sitter, hubble_rate_and_its_slope) {
  jg_cosmology c = matter_lambda(1.0, 0.0);
  jg_background *bg = build(&c);
  for (size_t i = 0; i < sizeof eds_a / sizeof eds_a[0]; ++i) {
    double a = eds_a[i];
    char what[64];
    snprintf(what, sizeof what, "E(a = %g)", a);
    assert_rel(jg_background_E(bg, a), pow(a, -1.5), 1e-6, what);
    snprintf(what, sizeof what, "H(a = %g)", a);
    assert_rel(jg_background_hubble(bg, a), bg->H0 * pow(a, -1.5), 1e-6, what);
    snprintf(what, sizeof what, "dlnH/dlna(a = %g)", a);
    assert_rel(jg_background_dlnH_dlna(bg, a), -1.5, 1e-6, what);
    snprintf(what, sizeof what, "Omega_m(a = %g)", a);
    assert_rel(jg_background_omega_m_of_a(bg, a), 1.0, 1e-6, what);
  }
  jg_background_free(bg);
}

Test(einstein_de_sitter, cosmic_and_conformal_time) {
  jg_cosmology c = matter_lambda(1.0, 0.0);
  jg_background *bg = build(&c);
  jg_error err;
  for (size_t i = 0; i < sizeof eds_a / sizeof eds_a[0]; ++i) {
    double a = eds_a[i], t, eta;
    char what[64];
    assert_ok(jg_background_cosmic_time(bg, a, &t, &err), &err, "cosmic time");
    snprintf(what, sizeof what, "t(a = %g)", a);
    assert_rel(t, 2.0 / (3.0 * bg->H0) * pow(a, 1.5), 1e-6, what);
    assert_ok(jg_background_conformal_time(bg, a, &eta, &err), &err, "conformal time");
    snprintf(what, sizeof what, "eta(a = %g)", a);
    assert_rel(eta, 2.0 * hubble_distance(bg) * sqrt(a), 1e-6, what);
  }
  jg_background_free(bg);
}

Test(einstein_de_sitter, comoving_distance) {
  jg_cosmology c = matter_lambda(1.0, 0.0);
  jg_background *bg = build(&c);
  jg_error err;
  const double zs[] = {0.013, 0.37, 2.9, 47.0, 1100.0};
  for (size_t i = 0; i < sizeof zs / sizeof zs[0]; ++i) {
    double z = zs[i], chi, dm;
    char what[64];
    assert_ok(jg_background_comoving_distance(bg, z, &chi, &err), &err, "comoving distance");
    snprintf(what, sizeof what, "chi(z = %g)", z);
    assert_rel(chi, 2.0 * hubble_distance(bg) * (1.0 - 1.0 / sqrt(1.0 + z)), 1e-6, what);
    /* Flat: the transverse distance is the same number. */
    assert_ok(jg_background_transverse_distance(bg, z, &dm, &err), &err, "transverse distance");
    snprintf(what, sizeof what, "D_M(z = %g), flat", z);
    assert_rel(dm, chi, 1e-15, what);
  }
  jg_background_free(bg);
}

Test(einstein_de_sitter, heath_growth_is_a) {
  /* src/PHYSICS.md §10.4: EdS gives D = a exactly. */
  jg_cosmology c = matter_lambda(1.0, 0.0);
  jg_background *bg = build(&c);
  jg_error err;
  for (size_t i = 0; i < sizeof eds_a / sizeof eds_a[0]; ++i) {
    double a = eds_a[i], D;
    char what[64];
    assert_ok(jg_background_growth_heath(bg, a, &D, &err), &err, "Heath growth");
    snprintf(what, sizeof what, "D(a = %g)", a);
    assert_rel(D, a, 1e-6, what);
  }
  jg_background_free(bg);
}

/* ---- radiation + matter: closed forms that exercise the radiation term -- */

TestSuite(radiation_matter, .init = quiet_gsl);

/* Planck-like radiation and baryons, with CDM chosen so that
 * Omega_m + Omega_r = 1 and no dark energy or curvature remain. Then
 * Q = a^4 E^2 = Omega_r + Omega_m a and, with R = R_coefficient a,
 *   H0 eta / c = (2/Omega_m) [sqrt(Omega_r + Omega_m a) - sqrt(Omega_r)],
 *   H0 t = 2/(3 Omega_m^2) [(Omega_m a - 2 Omega_r) sqrt(Omega_r + Omega_m a)
 *                           + 2 Omega_r^(3/2)],
 *   H0 r_s / c = 2 / sqrt(3 R_c Omega_m) ln{ [sqrt(Omega_m (1 + R_c a))
 *                + sqrt(R_c (Omega_r + Omega_m a))] / [sqrt(Omega_m) + sqrt(R_c Omega_r)] },
 * the last from int du / sqrt((p + q u)(r + s u)) =
 * (2/sqrt(qs)) ln(sqrt(s(p+qu)) + sqrt(q(r+su))). Derived here (no source);
 * each was checked by differentiation. Tolerance 1e-8: the accuracy the
 * library promises for every integral. */
static jg_background *radiation_matter_background(void) {
  jg_cosmology c = planck2018();
  jg_background *probe = build(&c);
  double omega_r = probe->omega_r;
  jg_background_free(probe);
  double h2 = c.hubble_h * c.hubble_h;
  c.cdm_density_h2 = (1.0 - omega_r) * h2 - c.baryon_density_h2;
  jg_background *bg = build(&c);
  cr_assert(fabs(bg->omega_de) < 1e-15, "Omega_de should vanish, got %g", bg->omega_de);
  return bg;
}

static const double rm_a[] = {1.0e-6, 1.0e-4, 1.0 / 3403.0, 1.0 / 1101.0, 0.02, 1.0};

Test(radiation_matter, conformal_and_cosmic_time) {
  jg_background *bg = radiation_matter_background();
  const double om = bg->omega_m, orad = bg->omega_r;
  jg_error err;
  for (size_t i = 0; i < sizeof rm_a / sizeof rm_a[0]; ++i) {
    double a = rm_a[i], eta, t;
    char what[64];
    double q = orad + om * a;
    assert_ok(jg_background_conformal_time(bg, a, &eta, &err), &err, "conformal time");
    snprintf(what, sizeof what, "eta(a = %g)", a);
    assert_rel(eta, hubble_distance(bg) * 2.0 / om * (sqrt(q) - sqrt(orad)), 1e-8, what);
    assert_ok(jg_background_cosmic_time(bg, a, &t, &err), &err, "cosmic time");
    snprintf(what, sizeof what, "t(a = %g)", a);
    double t_exact =
        2.0 / (3.0 * om * om) * ((om * a - 2.0 * orad) * sqrt(q) + 2.0 * pow(orad, 1.5)) / bg->H0;
    assert_rel(t, t_exact, 1e-8, what);
  }
  jg_background_free(bg);
}

Test(radiation_matter, sound_horizon) {
  jg_background *bg = radiation_matter_background();
  const double om = bg->omega_m, orad = bg->omega_r, rc = bg->R_coefficient;
  jg_error err;
  for (size_t i = 0; i < sizeof rm_a / sizeof rm_a[0]; ++i) {
    double a = rm_a[i], rs;
    char what[64];
    assert_ok(jg_background_sound_horizon(bg, 1.0 / a - 1.0, &rs, &err), &err, "sound horizon");
    double num = sqrt(om * (1.0 + rc * a)) + sqrt(rc * (orad + om * a));
    double den = sqrt(om) + sqrt(rc * orad);
    double exact = hubble_distance(bg) * 2.0 / sqrt(3.0 * rc * om) * log(num / den);
    snprintf(what, sizeof what, "r_s(a = %g)", a);
    assert_rel(rs, exact, 1e-8, what);
  }
  jg_background_free(bg);
}

Test(radiation_matter, heath_growth_starts_as_a) {
  /* The Heath integral leaves radiation out by construction, so in this
   * model it is EdS-like with Omega_m = 1 - Omega_r: D -> a as a -> 0 and
   * D(a) = a up to O(Omega_r). Checks the normalisation (5 Omega_m / 2). */
  jg_background *bg = radiation_matter_background();
  jg_error err;
  double D;
  assert_ok(jg_background_growth_heath(bg, 1.0e-5, &D, &err), &err, "Heath growth");
  assert_rel(D, 1.0e-5, 1e-8, "D(a = 1e-5) without radiation");
  jg_background_free(bg);
}

/* An open universe of matter, curvature and nearly no radiation (T_cmb =
 * 0.01 K, Omega_r ~ 1e-14, Omega_m = 0.04, Omega_k = 1 - Omega_m - Omega_r,
 * no dark energy). Its radiation-matter transition at a_eq ~ 2e-13 is a
 * layer far too thin for a quadrature sampling [0, 1] in sqrt(a) (such a
 * rule was measured 8e-7 wrong while reporting success). With
 * Q = Omega_r + Omega_m a + Omega_k a^2 the integrals are elementary
 * (derived here, no source):
 *   H0 eta / c = ln[(2 sqrt(Omega_k Q) + 2 Omega_k a + Omega_m)
 *                   / (2 sqrt(Omega_k Omega_r) + Omega_m)] / sqrt(Omega_k),
 *   H0 t = [sqrt(Q) - sqrt(Omega_r)] / Omega_k - Omega_m / (2 Omega_k) H0 eta / c,
 * the latter checked only for a >= 0.01: below, its two terms cancel to
 * O(a) and the closed form itself loses the digits. Tolerance 1e-8, the
 * promised accuracy. */
Test(radiation_matter, thin_equality_layer_open_universe) {
  jg_cosmology c = matter_lambda(0.04, 0.0);
  c.cmb_temperature_K = 0.01;
  jg_background *probe = build(&c);
  c.curvature_omega = 1.0 - probe->omega_m - probe->omega_r;
  jg_background_free(probe);
  jg_background *bg = build(&c);
  cr_assert(fabs(bg->omega_de) < 1e-15, "Omega_de should vanish, got %g", bg->omega_de);
  const double om = bg->omega_m, ok = bg->omega_k, orad = bg->omega_r;
  const double as[] = {1e-14, 3.7e-9, 0.011, 0.43, 1.0};
  jg_error err;
  for (size_t i = 0; i < sizeof as / sizeof as[0]; ++i) {
    double a = as[i], eta, t;
    char what[64];
    double q = orad + om * a + ok * a * a;
    double eta_exact =
        log((2.0 * sqrt(ok * q) + 2.0 * ok * a + om) / (2.0 * sqrt(ok * orad) + om)) / sqrt(ok);
    double t_exact = (sqrt(q) - sqrt(orad)) / ok - om / (2.0 * ok) * eta_exact;
    assert_ok(jg_background_conformal_time(bg, a, &eta, &err), &err, "conformal time");
    snprintf(what, sizeof what, "eta(a = %g)", a);
    assert_rel(eta, eta_exact * hubble_distance(bg), 1e-8, what);
    if (a < 0.01) continue;
    assert_ok(jg_background_cosmic_time(bg, a, &t, &err), &err, "cosmic time");
    snprintf(what, sizeof what, "t(a = %g)", a);
    assert_rel(t, t_exact / bg->H0, 1e-8, what);
  }
  jg_background_free(bg);
}

/* ---- check values: Planck 2018 ----------------------------------------- */

TestSuite(planck2018, .init = quiet_gsl);

Test(planck2018, matter_radiation_equality) {
  /* 1 + z_eq = (omega_b + omega_c) / omega_r = 3402.97: src/PHYSICS.md §10.1,
   * derived from Planck 2018 inputs with CODATA constants (not the paper's
   * 3402 +- 26, which counts its massive neutrino differently). Printed to
   * 6 figures (half a unit 1.5e-6): 1e-5. */
  jg_cosmology c = planck2018();
  jg_background *bg = build(&c);
  assert_rel(1.0 + jg_background_z_equality(bg), 3402.97, 1e-5, "1 + z_eq");
  jg_background_free(bg);
}

Test(planck2018, radiation_and_hydrogen_densities) {
  jg_cosmology c = planck2018();
  jg_background *bg = build(&c);
  double h2 = c.hubble_h * c.hubble_h;
  /* src/PHYSICS.md §10.2 (derived from CODATA/IAU): omega_gamma h^2 = 2.472975e-5
   * and omega_r h^2 = 4.183703e-5 for N_eff = 3.046 (7 figures, 1e-6). */
  assert_rel(bg->omega_gamma * h2, 2.472975e-5, 1e-6, "omega_gamma h^2");
  assert_rel(bg->omega_r * h2, 4.183703e-5, 1e-6, "omega_r h^2");
  /* src/PHYSICS.md §10.2 (derived): n_H today = 0.18946 m^-3 for Y_P = 0.2454
   * (5 figures: half a unit is 2.6e-5). */
  assert_rel(bg->n_H0, 0.18946, 3e-5, "n_H0 [m^-3]");
  assert_rel(jg_background_n_hydrogen(bg, 1.0 / 1101.0), 0.18946 * pow(1101.0, 3), 3e-5,
             "n_H(z = 1100)");
  /* src/PHYSICS.md §10.2 (derived): f_He = n_He/n_H = 0.0819 (3 figures, half a unit
   * 6e-4). The shortcut Y/(4(1-Y)) = 0.0813 would fail. */
  assert_rel(bg->helium_to_hydrogen, 0.0819, 6e-4, "f_He");
  /* R = 3 rho_b / (4 rho_gamma) ~ a: R_c = 3 omega_b / (4 omega_gamma h^2)
   * with the value of omega_gamma h^2 above. */
  assert_rel(bg->R_coefficient, 3.0 * 0.02237 / (4.0 * 2.472975e-5), 1e-6, "R coefficient");
  /* T_rad = T0 (1 + z). */
  assert_rel(jg_background_T_radiation(bg, 1.0 / 1101.0), 2.7255 * 1101.0, 1e-15, "T(z = 1100)");
  jg_background_free(bg);
}

Test(planck2018, closure_and_densities) {
  jg_cosmology c = planck2018();
  jg_background *bg = build(&c);
  /* E(1) = 1 by closure (rounding only). */
  assert_rel(jg_background_E(bg, 1.0), 1.0, 1e-14, "E(a = 1)");
  /* rho_crit0 = 1.878342e-26 h^2 kg m^-3 (src/PHYSICS.md §10.2, derived; 1e-6). */
  assert_rel(bg->rho_crit0, 1.878342e-26 * 0.6736 * 0.6736, 1e-6, "rho_crit0");
  assert_rel(jg_background_rho_matter(bg, 0.5), bg->omega_m * bg->rho_crit0 * 8.0, 1e-15,
             "rho_m(a = 0.5)");
  assert_rel(jg_background_rho_baryon(bg, 0.5), bg->omega_b * bg->rho_crit0 * 8.0, 1e-15,
             "rho_b(a = 0.5)");
  assert_rel(bg->baryon_fraction, 0.02237 / (0.02237 + 0.1200), 1e-15, "f_b");
  jg_background_free(bg);
}

Test(planck2018, age_and_sound_horizon_vs_published) {
  /* Planck 2018 TT,TE,EE+lowE+lensing (A&A 641, A6, Table 2; src/PHYSICS.md
   * §10.1): age 13.797 +- 0.023 Gyr, r_* = 144.43 +- 0.26 Mpc at
   * z_* = 1089.92. The paper has one 0.06 eV neutrino, this library only
   * massless ones; each check treats that neutrino as it behaves when the
   * quantity is accumulated:
   * - r_*: accumulated at z > 1090, where the neutrino (mean momentum
   *   ~0.6 eV) is still relativistic: all of N_eff massless, as input.
   *   Remaining difference: its small rest-mass energy at z_*, O(1e-4).
   *   Measured 6e-5; tolerance 1e-3, inside Planck's +-1.8e-3, and
   *   tight enough that a wrong neutrino factor or a missing (1 + R) fails.
   * - age: accumulated mostly at z < 10, where it is matter: its density
   *   omega_nu h^2 = 0.06 eV / 93.14 eV = 0.00064 (src/PHYSICS.md §10.1) is added
   *   to the CDM (still counted massless in the radiation too, a 1e-6
   *   effect on the age). Measured 3e-5; tolerance 5e-4, a third of
   *   Planck's +-1.7e-3. Without the neutrino
   *   mass the age comes out 1.2e-3 high, so the tolerance tells the two
   *   apart. */
  jg_cosmology c = planck2018();
  jg_background *bg = build(&c);
  jg_error err;
  double t0, rs;
  assert_ok(jg_background_sound_horizon(bg, 1089.92, &rs, &err), &err, "sound horizon");
  assert_rel(rs, 144.43, 1e-3, "r_s(z_*) [Mpc] vs Planck 2018");
  jg_background_free(bg);

  c.cdm_density_h2 += 0.00064;
  bg = build(&c);
  assert_ok(jg_background_cosmic_time(bg, 1.0, &t0, &err), &err, "age");
  assert_rel(t0 / JG_GYR, 13.797, 5e-4, "age [Gyr] vs Planck 2018");
  jg_background_free(bg);
}

/* ---- Heath growth, Omega_m = 0.3153 and 0.3 flat (src/PHYSICS.md §10.4) - */

TestSuite(heath_growth, .init = quiet_gsl);

/* src/PHYSICS.md §10.4 values (derived by quadrature of the Heath integral,
 * matter + Lambda, no radiation: hence radiation made negligible here).
 * Printed to 6 decimals: half a unit is 5e-7 absolute, i.e. 2e-5 relative
 * for D(50)/D(0) = 0.024883. The comparison is therefore absolute, 1e-6 (two
 * half-units), tighter than the suggested 1e-5 relative for every entry
 * above 0.1. */
Test(heath_growth, growth_table_omega_m_0_3153) {
  jg_cosmology c = matter_lambda(0.3153, 0.0);
  jg_background *bg = build(&c);
  jg_error err;
  double D0;
  assert_ok(jg_background_growth_heath(bg, 1.0, &D0, &err), &err, "D(a = 1)");
  cr_assert(fabs(D0 - 0.787985) <= 1e-6, "g0 = D(1): got %.8f, expected 0.787985", D0);

  const double z[] = {0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0};
  const double ratio[] = {0.768839, 0.606656, 0.417057, 0.211125, 0.115335, 0.060429, 0.024883};
  const double d_over_a[] = {0.908751, 0.956071, 0.985904, 0.998181, 0.999704, -1, -1};
  for (size_t i = 0; i < sizeof z / sizeof z[0]; ++i) {
    double a = 1.0 / (1.0 + z[i]), D;
    assert_ok(jg_background_growth_heath(bg, a, &D, &err), &err, "Heath growth");
    cr_assert(fabs(D / D0 - ratio[i]) <= 1e-6, "D(z = %g)/D(0): got %.8f, expected %.6f", z[i],
              D / D0, ratio[i]);
    if (d_over_a[i] > 0.0)
      cr_assert(fabs(D / a - d_over_a[i]) <= 1e-6, "D/a at z = %g: got %.8f, expected %.6f",
                z[i], D / a, d_over_a[i]);
  }
  jg_background_free(bg);
}

/* ln D as a function of ln a, for the growth rate f = d ln D / d ln a. */
static double ln_growth(double ln_a, void *params) {
  const jg_background *bg = *(const jg_background **)params;
  double D;
  jg_error err;
  if (jg_background_growth_heath(bg, exp(ln_a), &D, &err) != JG_OK) return NAN;
  return log(D);
}

Test(heath_growth, present_growth_factor_and_rate) {
  /* src/PHYSICS.md §10.4: g0 = 0.778981 and f(z = 0) = 0.512796 for Omega_m = 0.3;
   * f = 0.527386 for Omega_m = 0.3153 (derived by quadrature; 6 figures). The rate is
   * a one-sided numerical derivative (a <= 1 is all the API accepts); the
   * 1e-9 quadrature noise in D limits it to ~1e-7 (GSL's estimate, required
   * below 5e-7), so f is compared at 1e-6 absolute: half a unit of the 6th
   * decimal plus that error. */
  const double om[] = {0.3, 0.3153};
  const double f_expected[] = {0.512796, 0.527386};
  for (int i = 0; i < 2; ++i) {
    jg_cosmology c = matter_lambda(om[i], 0.0);
    jg_background *bg = build(&c);
    jg_error err;
    double D0;
    assert_ok(jg_background_growth_heath(bg, 1.0, &D0, &err), &err, "D(a = 1)");
    if (i == 0) cr_assert(fabs(D0 - 0.778981) <= 1e-6, "g0(Omega_m = 0.3): got %.8f", D0);
    const jg_background *p = bg;
    gsl_function fn = {ln_growth, &p};
    double f, ferr;
    cr_assert(gsl_deriv_backward(&fn, 0.0, 0.05, &f, &ferr) == GSL_SUCCESS);
    cr_assert(ferr < 5e-7, "derivative error estimate %g", ferr);
    cr_assert(fabs(f - f_expected[i]) <= 1e-6, "f(z = 0), Omega_m = %g: got %.8f, expected %.6f",
              om[i], f, f_expected[i]);
    jg_background_free(bg);
  }
}

Test(heath_growth, rejects_evolving_dark_energy) {
  jg_cosmology c = planck2018();
  c.de_w0 = -0.9;
  jg_background *bg = build(&c);
  jg_error err;
  jg_error_clear(&err);
  double D = -1.0;
  cr_assert(jg_background_growth_heath(bg, 0.5, &D, &err) == JG_EINVAL);
  cr_assert(strstr(err.message, "de_w0") != NULL, "message: %s", err.message);
  cr_assert(D == -1.0, "the result must be left untouched on failure");
  jg_background_free(bg);
}

/* The reference universe of the growth functions drops radiation but keeps
 * Omega_Lambda = 1 - Omega_m - Omega_r (flat). When radiation dominates
 * today (T_cmb = 30 K: Omega_r = 1.35 at h = 0.6736) its H^2 = Omega_m a^-3 +
 * Omega_Lambda vanishes at a_c = (Omega_m / -Omega_Lambda)^(1/3) (algebra):
 * defined just before, not just after; always defined on Planck 2018. */
Test(heath_growth, reference_defined_while_its_hubble_rate_is_real) {
  jg_cosmology c = planck2018();
  jg_background *bg = build(&c);
  cr_assert_eq(jg_background_reference_growth_defined(bg, 1.0), 1);
  jg_background_free(bg);
  c.cmb_temperature_K = 30.0;
  bg = build(&c);
  cr_assert_gt(bg->omega_r, 1.0, "the premise: radiation dominates today");
  cr_assert_lt(bg->omega_de, 0.0);
  const double a_c = cbrt(bg->omega_m / -bg->omega_de);
  cr_assert_lt(a_c, 1.0);
  cr_assert_eq(jg_background_reference_growth_defined(bg, 0.999 * a_c), 1, "a_c = %g", a_c);
  cr_assert_eq(jg_background_reference_growth_defined(bg, 1.001 * a_c), 0, "a_c = %g", a_c);
  cr_assert_eq(jg_background_reference_growth_defined(bg, 1.0), 0);
  double D;
  jg_error err;
  cr_assert_eq(jg_background_growth_heath(bg, 0.999 * a_c, &D, &err), JG_OK, "%s", err.message);
  cr_assert(isfinite(D) && D > 0.0);
  jg_background_free(bg);
}

/* ---- the analytic slope and curvature ---------------------------------- */

TestSuite(derivatives, .init = quiet_gsl);

static double ln_hubble(double ln_a, void *params) {
  const jg_background *bg = *(const jg_background **)params;
  return log(jg_background_hubble(bg, exp(ln_a)));
}

Test(derivatives, dlnH_dlna_matches_finite_differences) {
  /* Curvature and CPL dark energy switched on so that every term of the
   * analytic derivative is exercised; GSL's central difference with its own
   * error estimate (< 1e-8) is the reference. */
  jg_cosmology c = planck2018();
  c.curvature_omega = 0.05;
  c.de_w0 = -0.83;
  c.de_wa = -0.41;
  jg_background *bg = build(&c);
  const jg_background *p = bg;
  gsl_function fn = {ln_hubble, &p};
  const double as[] = {1.0e-7, 1.0 / 3403.0, 0.013, 0.29, 0.83};
  for (size_t i = 0; i < sizeof as / sizeof as[0]; ++i) {
    double d, derr;
    cr_assert(gsl_deriv_central(&fn, log(as[i]), 1e-3, &d, &derr) == GSL_SUCCESS);
    cr_assert(derr < 1e-8, "derivative error estimate %g at a = %g", derr, as[i]);
    double ours = jg_background_dlnH_dlna(bg, as[i]);
    cr_assert(fabs(ours - d) <= 1e-8 + 1e-8 * fabs(d), "dlnH/dlna at a = %g: %.12g vs %.12g",
              as[i], ours, d);
  }
  jg_background_free(bg);
}

Test(derivatives, closed_transverse_distance_uses_sine) {
  /* Omega_k < 0: D_M = (c/H0)/sqrt(-Omega_k) sin(sqrt(-Omega_k) chi H0/c),
   * shorter than chi; Omega_k > 0: sinh, longer. Textbook (common practice,
   * no source); the Astropy comparison checks the numbers. Here: the sign of
   * the effect and the formula on the library's own chi. */
  const double oks[] = {-0.05, 0.05};
  for (int i = 0; i < 2; ++i) {
    jg_cosmology c = planck2018();
    c.curvature_omega = oks[i];
    jg_background *bg = build(&c);
    jg_error err;
    double chi, dm;
    assert_ok(jg_background_comoving_distance(bg, 1100.0, &chi, &err), &err, "chi");
    assert_ok(jg_background_transverse_distance(bg, 1100.0, &dm, &err), &err, "D_M");
    double dh = hubble_distance(bg), sk = sqrt(fabs(oks[i]));
    double expected = oks[i] < 0 ? dh / sk * sin(sk * chi / dh) : dh / sk * sinh(sk * chi / dh);
    assert_rel(dm, expected, 1e-14, "D_M from chi");
    cr_assert(oks[i] < 0 ? dm < chi : dm > chi);
    jg_background_free(bg);
  }
}

/* ---- bad input ----------------------------------------------------------- */

TestSuite(bad_input, .init = quiet_gsl);

static void expect_rejected(const jg_cosmology *c, const char *needle, const char *what) {
  jg_error err;
  jg_error_clear(&err);
  jg_background *bg = jg_background_new(c, &err);
  cr_expect(bg == NULL, "%s: accepted", what);
  cr_expect(err.status == JG_EINVAL, "%s: status %s", what, jg_status_name(err.status));
  cr_expect(strstr(err.message, needle) != NULL, "%s: message '%s' does not name '%s'", what,
            err.message, needle);
  jg_background_free(bg);
}

Test(bad_input, each_parameter_is_checked_and_named) {
  const double nan = NAN, inf = INFINITY;
  struct {
    size_t offset;
    double value;
    const char *key;
  } cases[] = {
      {offsetof(jg_cosmology, hubble_h), 0.0, "hubble_h"},
      {offsetof(jg_cosmology, hubble_h), -0.7, "hubble_h"},
      {offsetof(jg_cosmology, hubble_h), nan, "hubble_h"},
      {offsetof(jg_cosmology, baryon_density_h2), -0.02, "baryon_density_h2"},
      {offsetof(jg_cosmology, baryon_density_h2), 0.0, "baryon_density_h2"},
      {offsetof(jg_cosmology, cdm_density_h2), -0.12, "cdm_density_h2"},
      {offsetof(jg_cosmology, cdm_density_h2), inf, "cdm_density_h2"},
      {offsetof(jg_cosmology, curvature_omega), nan, "curvature_omega"},
      {offsetof(jg_cosmology, cmb_temperature_K), 0.0, "cmb_temperature_K"},
      {offsetof(jg_cosmology, cmb_temperature_K), -2.7, "cmb_temperature_K"},
      {offsetof(jg_cosmology, helium_mass_fraction), 1.0, "helium_mass_fraction"},
      {offsetof(jg_cosmology, helium_mass_fraction), 1.2, "helium_mass_fraction"},
      {offsetof(jg_cosmology, helium_mass_fraction), -0.01, "helium_mass_fraction"},
      {offsetof(jg_cosmology, neutrino_number_eff), -1.0, "neutrino_number_eff"},
      {offsetof(jg_cosmology, de_w0), -inf, "de_w0"},
      {offsetof(jg_cosmology, de_wa), nan, "de_wa"},
      /* w0 + wa = 0.4 >= 1/3: dark energy not negligible early on. */
      {offsetof(jg_cosmology, de_wa), 1.4, "de_wa"},
  };
  for (size_t i = 0; i < sizeof cases / sizeof cases[0]; ++i) {
    jg_cosmology c = planck2018();
    *(double *)((char *)&c + cases[i].offset) = cases[i].value;
    char what[96];
    snprintf(what, sizeof what, "%s = %g", cases[i].key, cases[i].value);
    expect_rejected(&c, cases[i].key, what);
  }
}

Test(bad_input, null_cosmology) {
  jg_error err;
  jg_error_clear(&err);
  cr_assert(jg_background_new(NULL, &err) == NULL);
  cr_assert(err.status == JG_EINVAL);
}

Test(bad_input, strongly_closed_universe_has_negative_h2) {
  /* Omega_m = 0.3, Omega_k = -5 => Omega_Lambda ~ 5.7 and
   * Q(a) = 0.3 a - 5 a^2 + 5.7 a^4 < 0 for 0.060 < a < 0.905: no big bang
   * (a bounce). Must be rejected, saying where. */
  jg_cosmology c = matter_lambda(0.3, -5.0);
  expect_rejected(&c, "curvature_omega", "Omega_k = -5");
  expect_rejected(&c, "z = ", "Omega_k = -5");
}

/* The loitering boundary. With Omega_r -> 0, Q(a) = a^4 E^2 = Omega_m a +
 * Omega_k a^2 + Omega_L a^4 has a double root at a_* when Omega_m = 2 L a_*^3,
 * Omega_k = -3 L a_*^2, L = 1/((1 - a_*)^2 (1 + 2 a_*)) (derived here: Q/a
 * and its derivative vanish together, plus closure). a_* = 1/2 gives
 * Omega_m = 0.5, Omega_k = -1.5, Omega_L = 2. Shifting Omega_k by -delta
 * makes min Q = -0.1875 delta over |a - 1/2| < ~1e-4 for delta = 1e-7:
 * a dip 4.5e-4 wide in ln a, ten times narrower than the scan's grid (0.005),
 * found only by refining the turning point; +delta must be accepted. */
Test(bad_input, loitering_boundary_is_resolved) {
  const double delta = 1e-7;
  jg_cosmology c = matter_lambda(0.5, -1.5 - delta);
  jg_error err;
  jg_error_clear(&err);
  jg_background *bg = jg_background_new(&c, &err);
  cr_assert(bg == NULL, "min H^2 < 0 at z = 1 was not detected");
  cr_assert(err.status == JG_EINVAL);
  const char *at = strstr(err.message, "z = ");
  cr_assert(at != NULL, "message: %s", err.message);
  double z = -1.0;
  cr_assert(sscanf(at, "z = %lf", &z) == 1);
  cr_assert(fabs(z - 1.0) < 1e-3, "reported z = %g, the dip is at z = 1", z);

  c = matter_lambda(0.5, -1.5 + delta);
  jg_error_clear(&err);
  bg = jg_background_new(&c, &err);
  cr_assert(bg != NULL, "min H^2 > 0 but rejected: %s", err.message);
  jg_background_free(bg);
}

Test(bad_input, integrals_reject_out_of_range_arguments) {
  jg_cosmology c = planck2018();
  jg_background *bg = build(&c);
  jg_error err;
  double v = 42.0;
  const double bad_a[] = {0.0, -0.5, 1.5, NAN};
  for (size_t i = 0; i < sizeof bad_a / sizeof bad_a[0]; ++i) {
    jg_error_clear(&err);
    cr_expect(jg_background_cosmic_time(bg, bad_a[i], &v, &err) == JG_EINVAL, "t, a = %g",
              bad_a[i]);
    cr_expect(strstr(err.message, "scale factor") != NULL, "message: %s", err.message);
    cr_expect(jg_background_conformal_time(bg, bad_a[i], &v, &err) == JG_EINVAL);
    cr_expect(jg_background_growth_heath(bg, bad_a[i], &v, &err) == JG_EINVAL);
  }
  const double bad_z[] = {-0.5, NAN, INFINITY};
  for (size_t i = 0; i < sizeof bad_z / sizeof bad_z[0]; ++i) {
    jg_error_clear(&err);
    cr_expect(jg_background_comoving_distance(bg, bad_z[i], &v, &err) == JG_EINVAL, "z = %g",
              bad_z[i]);
    cr_expect(strstr(err.message, "redshift") != NULL, "message: %s", err.message);
    cr_expect(jg_background_transverse_distance(bg, bad_z[i], &v, &err) == JG_EINVAL);
    cr_expect(jg_background_sound_horizon(bg, bad_z[i], &v, &err) == JG_EINVAL);
  }
  cr_expect(v == 42.0, "results must be left untouched on failure");
  cr_expect(jg_background_cosmic_time(NULL, 0.5, &v, &err) == JG_EINVAL);
  cr_expect(jg_background_cosmic_time(bg, 0.5, NULL, &err) == JG_EINVAL);
  jg_background_free(bg);
}

/* ---- growth factor from the growth equation ------------------------------ */

TestSuite(growth_equation, .init = quiet_gsl);

/* Einstein-de Sitter: D = a and f = 1 exactly (common practice, no source).
 * 1e-8: the ODE tolerance (1e-11) over a few e-folds. */
Test(growth_equation, einstein_de_sitter_is_a) {
  jg_cosmology c = matter_lambda(1.0, 0.0);
  jg_background *bg = build(&c);
  for (size_t i = 0; i < sizeof eds_a / sizeof eds_a[0]; i++) {
    double D = 0, f = 0;
    jg_error err;
    jg_error_clear(&err);
    assert_ok(jg_background_growth_factor(bg, eds_a[i], &D, &f, &err), &err, "growth factor");
    assert_rel(D, eds_a[i], 1e-8, "EdS D = a");
    assert_rel(f, 1.0, 1e-8, "EdS f = 1");
  }
  jg_background_free(bg);
}

/* A cosmological constant: the equation must give the Heath (1977) integral,
 * an independent closed form (1e-7: both quadratures are good to ~1e-9), and
 * f(z = 0) = 0.527386 for Omega_m = 0.3153 flat (src/PHYSICS.md §10.4, derived from
 * the Heath integral; 1e-5 as the table's digits allow). */
Test(growth_equation, equals_heath_for_lambda) {
  jg_cosmology c = matter_lambda(0.3153, 0.0);
  jg_background *bg = build(&c);
  const double a_values[] = {0.02, 0.1, 0.37, 0.8, 1.0};
  for (size_t i = 0; i < sizeof a_values / sizeof a_values[0]; i++) {
    double D = 0, f = 0, D_heath = 0;
    jg_error err;
    jg_error_clear(&err);
    assert_ok(jg_background_growth_factor(bg, a_values[i], &D, &f, &err), &err, "growth");
    assert_ok(jg_background_growth_heath(bg, a_values[i], &D_heath, &err), &err, "Heath");
    assert_rel(D, D_heath, 1e-7, "growth equation vs Heath integral");
    if (a_values[i] == 1.0) assert_rel(f, 0.527386, 1e-5, "f(z=0), Omega_m = 0.3153");
  }
  jg_background_free(bg);
}

/* Constant w != -1, where the Heath integral does not apply: flat wCDM has
 * the closed form D(a) = a 2F1(-1/(3w), (w-1)/(2w); 1 - 5/(6w);
 * -(Omega_de/Omega_m) a^(-3w)) (Silveira & Waga 1994, PRD 50, 4890; formula
 * from memory, it reduces to the Lambda case at w = -1). Expected values
 * evaluated with SciPy 1.10.1 (Debian python3-scipy, scipy.special.hyp2f1)
 * for w = -0.8, Omega_m = 0.3: 1e-8 (ODE tolerance; they agree to 1e-11). */
Test(growth_equation, constant_w_closed_form) {
  jg_cosmology c = matter_lambda(0.3, 0.0);
  c.de_w0 = -0.8;
  jg_background *bg = build(&c);
  const double a_values[] = {0.1, 0.5, 1.0};
  const double D_scipy[] = {0.09978770304706634, 0.45800766552092825, 0.7296286020829227};
  for (int i = 0; i < 3; i++) {
    double D = 0;
    jg_error err;
    jg_error_clear(&err);
    assert_ok(jg_background_growth_factor(bg, a_values[i], &D, NULL, &err), &err, "growth");
    assert_rel(D, D_scipy[i], 1e-8, "wCDM growth vs hypergeometric closed form");
  }
  jg_background_free(bg);
}
