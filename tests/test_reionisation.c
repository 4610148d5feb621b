/*
 * Reionisation and photo-heating (src/history/reionisation.c, the history
 * driver's use of it, the epochs tau_reion and z_reion): against the Planck
 * 2018 optical depth, an independent quadrature of the tanh model, and the
 * unheated history it must leave alone (src/PHYSICS.md §12, §10.8).
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <criterion/criterion.h>
#include <gsl/gsl_integration.h>

#include "jeansgrow/background.h"
#include "jeansgrow/constants.h"
#include "jeansgrow/epochs.h"
#include "jeansgrow/params.h"
#include "jeansgrow/perturb.h"
#include "jeansgrow/scales.h"
#include "jeansgrow/thermal.h"
#include "real_case.h"
#include "support.h"

typedef struct history {
  jg_params p;
  jg_background *bg;
  jg_thermal *th;
} history;

/* The reference cosmology (Planck 2018, jg_params_set_defaults) with the
 * given reionisation model. */
static history open_history(int model) {
  history h;
  jg_params_set_defaults(&h.p);
  h.p.thermal.reionisation = model;
  jg_error err;
  jg_error_clear(&err);
  h.bg = jg_background_new(&h.p.cosmology, &err);
  cr_assert_not_null(h.bg, "%s", err.message);
  h.th = jg_thermal_new(h.bg, &h.p.thermal, &err);
  cr_assert_not_null(h.th, "%s", err.message);
  return h;
}

static void close_history(history *h) {
  jg_thermal_free(h->th);
  jg_background_free(h->bg);
}

static jg_epochs epochs_of(const history *h) {
  jg_epochs e;
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_epochs_compute(h->th, &e, &err), JG_OK, "%s", err.message);
  return e;
}

TestSuite(reionisation, .init = quiet_gsl);

/* Planck 2018 (A&A 641, A6, Table 2, TT,TE,EE+lowE+lensing): z_re = 7.67
 * gives tau = 0.0544 with the tanh model of width 0.5 and helium doubly
 * ionised at z = 3.5 (their convention; §10.8). 3 %: the published tau is a
 * posterior mean over the chain, not the tau of the mean z_re, and their
 * recombination history differs slightly; the model itself is the same. */
Test(reionisation, planck2018_optical_depth) {
  history h = open_history(JG_REIONISATION_TANH);
  jg_epochs e = epochs_of(&h);
  cr_assert(jg_epochs_entry(&e, JG_EPOCH_TAU_REION).exists);
  assert_rel(e.tau_reion, 0.0544, 0.03, "tau_reion");
  /* z_reion is where the ionised hydrogen fraction is 1/2: the tanh centre
   * by construction, moved only by the residual ionisation of
   * recombination (x_p ~ 2e-4 there shifts it by ~ 2e-4 / slope). */
  assert_rel(e.z_reion, 7.67, 2e-4, "z_reion");
  close_history(&h);
}

/* The model's electrons, written here from the published form (Planck
 * 2018 §3.3; Lewis 2008 appendix B; from memory): (1 + f_He) s_h + f_He s_he. */
typedef struct quadrature_case {
  const history *h;
} quadrature_case;

static double added_depth_per_z(double z, void *p) {
  const history *h = ((const quadrature_case *)p)->h;
  const jg_thermal_settings *t = &h->p.thermal;
  const double y = pow(1.0 + z, 1.5), y_re = pow(1.0 + t->reionisation_redshift, 1.5);
  const double dy = 1.5 * sqrt(1.0 + t->reionisation_redshift) * t->reionisation_width;
  const double s_h = 0.5 * (1.0 + tanh((y_re - y) / dy));
  const double s_he =
      0.5 * (1.0 + tanh((t->helium_reionisation_redshift - z) / t->helium_reionisation_width));
  const double f_he = h->bg->helium_to_hydrogen;
  const double a = 1.0 / (1.0 + z);
  const double x = (1.0 + f_he) * s_h + f_he * s_he;
  return x * jg_background_n_hydrogen(h->bg, a) * JG_SIGMA_THOMSON * JG_C_LIGHT /
         (jg_background_hubble(h->bg, a) * (1.0 + z));
}

/* tau_reion against an adaptive quadrature in z of the model written above
 * (derived, §10.8). 5e-4: the library adds the model's ionisation to the
 * neutral part only, (1 + f_He - x_e,rec) s_h, so the residual x_e,rec
 * ~ 2e-4 is missing here; the spline integral itself is good to 1e-7. */
Test(reionisation, optical_depth_is_the_integral_of_the_model) {
  history h = open_history(JG_REIONISATION_TANH);
  quadrature_case q = {&h};
  gsl_function F = {added_depth_per_z, &q};
  gsl_integration_workspace *w = gsl_integration_workspace_alloc(1000);
  double tau, abserr;
  cr_assert_eq(gsl_integration_qag(&F, 0.0, 60.0, 0.0, 1e-10, 1000, GSL_INTEG_GAUSS61, w, &tau,
                                   &abserr),
               0);
  gsl_integration_workspace_free(w);
  assert_rel(jg_thermal_reionisation_depth(h.th), tau, 5e-4, "tau_reion against quadrature");
  close_history(&h);
}

/* Above its onset the model changes nothing, and the epochs of
 * recombination keep their definitions (tau = 1 and the drag depth = 1
 * without the reionised electrons, as in the Planck analyses): the
 * history with reionisation equals the history without it there. */
Test(reionisation, history_above_the_onset_is_untouched) {
  history none = open_history(JG_REIONISATION_NONE);
  history heated = open_history(JG_REIONISATION_TANH_HEATED);
  const double z_onset = jg_thermal_reionisation_onset(heated.th);
  cr_assert(z_onset > 8.0 && z_onset < 15.0, "onset at z = %g", z_onset);
  /* The stored splines are cubic: a change below the onset reaches a few
   * nodes above it, decaying by ~0.27 per node (0.006 in ln a), hence 1e-6
   * just above the onset and the exact values from 0.2 in ln(1+z) up. */
  for (double z = z_onset * 1.01; z < 7000.0; z *= 1.1) {
    const double tol = log1p(z) - log1p(z_onset) < 0.2 ? 1e-6 : 1e-12;
    jg_thermal_state a, b;
    jg_thermal_state_at(none.th, z, &a);
    jg_thermal_state_at(heated.th, z, &b);
    ASSERT_REL(b.x_e, a.x_e, tol, "x_e at z = %g", z);
    ASSERT_REL(b.T_gas, a.T_gas, tol, "T_gas at z = %g", z);
  }
  jg_epochs e0 = epochs_of(&none), e1 = epochs_of(&heated);
  assert_rel(e1.z_star, e0.z_star, 1e-7, "z_star");
  assert_rel(e1.z_drag, e0.z_drag, 1e-7, "z_drag");
  assert_rel(e1.z_visibility_peak, e0.z_visibility_peak, 1e-7, "z_visibility_peak");
  assert_rel(e1.z_gas_decoupling, e0.z_gas_decoupling, 1e-9, "z_gas_decoupling");
  cr_assert(!jg_epochs_entry(&e0, JG_EPOCH_TAU_REION).exists);
  cr_assert(!jg_epochs_entry(&e0, JG_EPOCH_Z_REION).exists);
  close_history(&none);
  close_history(&heated);
}

/* Today, after both helium reionisations, every atom is ionised:
 * x_e = 1 + 2 f_He, x_HeIII = f_He (exact, common practice, no source);
 * 1e-6: the tanh tails and the residual neutral hydrogen. */
Test(reionisation, fully_ionised_today) {
  history h = open_history(JG_REIONISATION_TANH);
  const double f_he = h.bg->helium_to_hydrogen;
  jg_thermal_state s;
  jg_thermal_state_at(h.th, 0.0, &s);
  assert_rel(s.x_e, 1.0 + 2.0 * f_he, 1e-6, "x_e today");
  assert_rel(s.x_p, 1.0, 1e-6, "x_HII today");
  assert_rel(s.x_HeIII, f_he, 1e-6, "x_HeIII today");
  cr_assert(s.x_HeII < 1e-6 * f_he, "x_HeII today = %g", s.x_HeII);
  /* Between the two: hydrogen and He I ionised, He II not yet. */
  jg_thermal_state_at(h.th, 5.5, &s);
  assert_rel(s.x_e, 1.0 + f_he, 1e-3, "x_e at z = 5.5");
  assert_rel(s.x_HeII, f_he, 1e-3, "x_HeII at z = 5.5");
  close_history(&h);
}

/* The history holds to z = 0 only with the first sources' heating in it:
 * the validity flag 2 (below the thermal model) starts at z = 20 without
 * heating or with the unheated tanh, nowhere with photo-heating
 * (src/PHYSICS.md §11; z ~ 20 as the start of cosmic dawn: common
 * practice, no source). */
Test(reionisation, heated_history_holds_to_today) {
  const int models[] = {JG_REIONISATION_NONE, JG_REIONISATION_TANH, JG_REIONISATION_TANH_HEATED};
  const double lowest[] = {20.0, 20.0, 0.0};
  for (int i = 0; i < 3; i++) {
    history h = open_history(models[i]);
    cr_expect_eq(jg_thermal_lowest_valid_redshift(h.th), lowest[i], "model %d", models[i]);
    close_history(&h);
  }
}

/* The tanh model without heating leaves the gas cold (only the Compton
 * coupling of the new electrons warms it towards T_rad); with heating the
 * ionised gas is at ~1e4 K after reionisation, the temperature of the
 * intergalactic medium measured from the Lyman-alpha forest at z ~ 2-6
 * (common practice, no source; 5e3 to 3e4 K accepted: an order of
 * magnitude check). */
Test(reionisation, heating_brings_the_gas_to_ten_thousand_kelvin) {
  history cold = open_history(JG_REIONISATION_TANH);
  history hot = open_history(JG_REIONISATION_TANH_HEATED);
  for (double z = 6.0; z >= 4.0; z -= 1.0) {
    jg_thermal_state c, w;
    jg_thermal_state_at(cold.th, z, &c);
    jg_thermal_state_at(hot.th, z, &w);
    cr_assert(c.T_gas < c.T_rad, "unheated T_gas = %g K at z = %g", c.T_gas, z);
    cr_assert(w.T_gas > 5e3 && w.T_gas < 3e4, "heated T_gas = %g K at z = %g", w.T_gas, z);
  }
  close_history(&cold);
  close_history(&hot);
}

/* The filtering mass after reionisation: the halo mass below which halos
 * lose their gas. With reionisation at z ~ 7-8 and photo-heating to ~1e4
 * K, M_F (full-wavelength radius, Gnedin 2000, ApJ 542, 535) is ~1e8-1e9
 * M_sun at z ~ 6 and grows towards ~1e10 M_sun by z ~ 0-3 (Gnedin 2000;
 * Gnedin & Hui 1998, MNRAS 296, 44; orders of magnitude from memory).
 * Accepted: 5e7 to 5e9 M_sun at z = 6, 1e9 to 1e11 at z = 0, and a mass
 * that grows: a factor-of-ten check of the order of magnitude, as much as
 * a recalled figure allows. Before reionisation (z = 10) the gas is cold and
 * M_F is that of the dark ages, ~1e5-1e6 M_sun (§10.5). */
Test(reionisation, filtering_mass_after_reionisation) {
  jg_params p;
  jg_params_set_defaults(&p);
  p.thermal.reionisation = JG_REIONISATION_TANH_HEATED;
  p.perturbations.k_count = 8;
  real_case r;
  real_case_open(&r, &p);
  const double z[] = {10.0, 6.0, 0.0};
  jg_scales_point sc[3];
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_scales_compute(r.m, r.w, z, 3, sc, &err), JG_OK, "%s", err.message);
  for (int i = 0; i < 3; i++)
    cr_log_info("z = %g: M_F integral %.3e, measured %.3e M_sun", z[i],
                sc[i].m_filter_integral_isothermal, sc[i].m_filter_solved);
  cr_assert(sc[0].m_filter_integral_isothermal > 1e5 && sc[0].m_filter_integral_isothermal < 1e7,
            "M_F(z = 10) = %g M_sun", sc[0].m_filter_integral_isothermal);
  cr_assert(sc[1].m_filter_integral_isothermal > 5e7 && sc[1].m_filter_integral_isothermal < 5e9,
            "M_F(z = 6) = %g M_sun", sc[1].m_filter_integral_isothermal);
  cr_assert(sc[2].m_filter_integral_isothermal > 1e9 && sc[2].m_filter_integral_isothermal < 1e11,
            "M_F(z = 0) = %g M_sun", sc[2].m_filter_integral_isothermal);
  /* The measured filtering scale (fluctuating sound speed, delta_T relaxed
   * by the heating) agrees with the integral to the same order. */
  for (int i = 1; i < 3; i++)
    cr_assert(sc[i].m_filter_solved > 0.3 * sc[i].m_filter_integral_isothermal &&
                  sc[i].m_filter_solved < 3.0 * sc[i].m_filter_integral_isothermal,
              "measured M_F(z = %g) = %g M_sun", z[i], sc[i].m_filter_solved);
  real_case_close(&r);
}

/* ---- the user's heating table (thermal.heating_table) ---- */

/* Writes `length` bytes of `text` (0: up to its end) to a new file in a new
 * folder; returns its path in `path`. */
static void write_table(char path[256], const char *text, size_t length) {
  char dir[] = "/tmp/jg_heating_table_XXXXXX";
  cr_assert_not_null(mkdtemp(dir), "mkdtemp");
  snprintf(path, 256, "%s/heating.txt", dir);
  FILE *f = fopen(path, "w");
  cr_assert_not_null(f);
  fwrite(text, 1, length ? length : strlen(text), f);
  fclose(f);
}

static void remove_table(const char *path) {
  char dir[256];
  snprintf(dir, sizeof dir, "%s", path);
  *strrchr(dir, '/') = '\0';
  remove(path);
  remove(dir);
}

/* The history refuses a heating table (ionisation = 0) or an ionisation
 * table (1) holding `length` bytes of `text` (0: all of it) with
 * JG_ECONFIG, naming the key, the file and `message` (its line). */
static void assert_table_refused(int ionisation, const char *text, size_t length,
                                 const char *message) {
  char path[256];
  write_table(path, text, length);
  jg_params p;
  jg_params_set_defaults(&p);
  char *key = ionisation ? p.thermal.ionisation_table : p.thermal.heating_table;
  snprintf(key, JG_MAX_PATH, "%s", path);
  jg_error err;
  jg_error_clear(&err);
  jg_background *bg = jg_background_new(&p.cosmology, &err);
  jg_thermal *th = jg_thermal_new(bg, &p.thermal, &err);
  cr_assert_null(th, "accepted: %s", text);
  cr_assert_eq(err.status, JG_ECONFIG, "%s", err.message);
  cr_assert_not_null(strstr(err.message, ionisation ? "thermal.ionisation_table: "
                                                    : "thermal.heating_table: "),
                     "%s", err.message);
  cr_assert_not_null(strstr(err.message, path), "%s", err.message);
  cr_assert_not_null(strstr(err.message, message), "%s", err.message);
  jg_background_free(bg);
  remove_table(path);
}

TestSuite(heating_table, .init = quiet_gsl);

/* A constant heating rate per baryon Q in an Einstein-de Sitter universe
 * with Compton heating negligible: dT/dt = -2 H T + Q_T with H = 2/(3t),
 * Q_T = (2/3) Q / (k_B (1 - Y)(1 + f_He + x_e)), so
 *   T(t) = (3/7) Q_T t + (T_1 - (3/7) Q_T t_1) (t_1/t)^(4/3)
 * from T_1 at t_1 (derived, §10.8; T = (3/7) Q_T t once the start is
 * forgotten). The universe: Omega_m = 1 (h = 0.5, omega_b + omega_c =
 * 0.25), no neutrinos, T_cmb = 1 K (radiation 5.5e-6 of the matter today,
 * the Compton rate ~1e-6 of H below z = 3), helium-free. 1e-4: the
 * radiation (2e-5 of H at z = 3), the residual x_e changing by ~1e-5 and
 * the history's tolerance. */
Test(heating_table, constant_heating_in_einstein_de_sitter) {
  char path[256];
  const double Q_eV = 1e-17, z_top = 3.0;
  write_table(path, "# z   heating [eV/s per baryon]\n0.0  1e-17\n3.0  1e-17\n", 0);
  jg_params p;
  jg_params_set_defaults(&p);
  p.cosmology.hubble_h = 0.5;
  p.cosmology.baryon_density_h2 = 0.05;
  p.cosmology.cdm_density_h2 = 0.2;
  p.cosmology.cmb_temperature_K = 1.0;
  p.cosmology.neutrino_number_eff = 0.0;
  p.cosmology.helium_mass_fraction = 0.0;
  snprintf(p.thermal.heating_table, sizeof p.thermal.heating_table, "%s", path);
  jg_error err;
  jg_error_clear(&err);
  jg_background *bg = jg_background_new(&p.cosmology, &err);
  cr_assert_not_null(bg, "%s", err.message);
  jg_thermal *th = jg_thermal_new(bg, &p.thermal, &err);
  cr_assert_not_null(th, "%s", err.message);
  const double H0 = 0.5 * JG_H100;
  const double t1 = 2.0 / (3.0 * H0) * pow(1.0 + z_top, -1.5);
  jg_thermal_state s1, s;
  jg_thermal_state_at(th, z_top, &s1);
  for (double z = 2.0; z >= 0.0; z -= 1.0) {
    jg_thermal_state_at(th, z, &s);
    const double Q_T = (2.0 / 3.0) * Q_eV * JG_ELECTRON_VOLT / (JG_K_BOLTZMANN * (1.0 + s.x_e));
    const double t = 2.0 / (3.0 * H0) * pow(1.0 + z, -1.5);
    const double expected = 3.0 / 7.0 * Q_T * t + (s1.T_gas - 3.0 / 7.0 * Q_T * t1) *
                                                      pow(t1 / t, 4.0 / 3.0);
    ASSERT_REL(s.T_gas, expected, 1e-4, "T_gas at z = %g (T_1 = %g K)", z, s1.T_gas);
  }
  /* Above the table nothing changes: no heating there. */
  jg_thermal_state_at(th, 2.0 * z_top, &s);
  cr_assert(s.T_gas < s.T_rad, "T_gas = %g K above the table", s.T_gas);
  jg_thermal_free(th);
  jg_background_free(bg);
  remove_table(path);
}

/* Bad tables are refused before any work, naming the file and the line
 * (common practice, no source: the project's rule for bad input). */
Test(heating_table, bad_tables_are_refused_with_their_line) {
  static const struct {
    const char *text, *message;
    size_t length; /* 0: the text up to its end */
  } cases[] = {
      {"0 1e-20\n2 1e-20\n1 1e-20\n", ":3: z = 1 does not increase (the row before has 2)", 0},
      {"0 1e-20\n1 nan\n", ":2: value 2 ('nan') is not a finite number", 0},
      {"# heating\n0 1e-20\n1\n", ":3: 1 value(s) on a row", 0},
      {"0 1e-20\n2000 1e-20\n", ":2: z = 2000 must satisfy 0 <= z <= 1000", 0},
      {"0 -1e-20\n1 1e-20\n", ":1: heating rate -1e-20 eV/s must be >= 0", 0},
      {"0 1e-20\n1 one\n", ":2: 'one' is not a number", 0},
      {"0 1e-20\n\x7f" "ELF\x01\x00\x00\n", ":2: a zero byte (not a text table)", 15},
      {"0 1e-20\n", ": 1 data row(s); at least two are needed", 0},
  };
  for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++)
    assert_table_refused(0, cases[i].text, cases[i].length, cases[i].message);
}

/* ---- the user's ionisation table (thermal.ionisation_table) ---- */

/* Writes the reference history from z_top to 0 as an ionisation table of
 * `rows` rows uniform in ln(1+z), with or without its temperature. */
static void write_own_history(char path[256], const jg_thermal *th, double z_top, int rows,
                              int with_temperature) {
  char dir[] = "/tmp/jg_ionisation_table_XXXXXX";
  cr_assert_not_null(mkdtemp(dir), "mkdtemp");
  snprintf(path, 256, "%s/history.txt", dir);
  FILE *f = fopen(path, "w");
  cr_assert_not_null(f);
  fputs("# z  x_e  T_gas[K]\n", f);
  for (int i = 0; i < rows; i++) {
    const double z = expm1(log1p(z_top) * i / (rows - 1));
    jg_thermal_state s;
    jg_thermal_state_at(th, z, &s);
    if (with_temperature)
      fprintf(f, "%.17g %.17g %.17g\n", z, s.x_e, s.T_gas);
    else
      fprintf(f, "%.17g %.17g\n", z, s.x_e);
  }
  fclose(f);
}

TestSuite(ionisation_table, .init = quiet_gsl);

/* Round trip: our own history written as an ionisation table (x_e and
 * T_gas, 20000 rows from z = 1500, 17 digits) and read back gives the same
 * history (derived: the table is the history, so only the interpolation of
 * the table, Steffen's method with rows 3.7e-4 apart in ln(1+z), and that of
 * the second stored grid separate them). Measured: x_e 1.7e-9, T_gas
 * 1.4e-8; without the temperature column T_gas is integrated again from the
 * table's x_e, from the table's top instead of where H/Gamma_C reaches
 * thermal.quasi_static_limit, 4.4e-6. Tolerances: about five times these. */
Test(ionisation_table, own_history_round_trip) {
  history ref = open_history(JG_REIONISATION_NONE);
  for (int with_T = 1; with_T >= 0; with_T--) {
    char path[256];
    write_own_history(path, ref.th, 1500.0, 20000, with_T);
    jg_params p = ref.p;
    snprintf(p.thermal.ionisation_table, sizeof p.thermal.ionisation_table, "%s", path);
    jg_error err;
    jg_error_clear(&err);
    jg_thermal *th = jg_thermal_new(ref.bg, &p.thermal, &err);
    cr_assert_not_null(th, "%s", err.message);
    double worst_x = 0.0, worst_T = 0.0;
    for (double z = 0.0; z < 3000.0; z = z * 1.07 + 0.01) {
      jg_thermal_state a, b;
      jg_thermal_state_at(ref.th, z, &a);
      jg_thermal_state_at(th, z, &b);
      worst_x = fmax(worst_x, fabs(b.x_e / a.x_e - 1.0));
      worst_T = fmax(worst_T, fabs(b.T_gas / a.T_gas - 1.0));
    }
    cr_log_info("round trip (temperature column %d): x_e %.2e, T_gas %.2e", with_T, worst_x,
                worst_T);
    cr_assert(worst_x < 1e-8, "x_e differs by %g", worst_x);
    cr_assert(worst_T < (with_T ? 1e-7 : 2e-5), "T_gas differs by %g", worst_T);
    jg_epochs e0 = epochs_of(&ref);
    history h = {p, ref.bg, th};
    jg_epochs e1 = epochs_of(&h);
    assert_rel(e1.z_star, e0.z_star, 1e-9, "z_star (above the table)");
    assert_rel(e1.z_drag, e0.z_drag, 1e-6, "z_drag");
    cr_assert(!jg_epochs_entry(&e1, JG_EPOCH_TAU_REION).exists);
    jg_thermal_free(th);
    remove_table(path);
  }
  close_history(&ref);
}

/* Bad ionisation tables are refused before any work, naming the line. */
Test(ionisation_table, bad_tables_are_refused_with_their_line) {
  static const struct {
    const char *text, *message;
  } cases[] = {
      {"0 1.16\n20 0.0002\n10 0.0002\n", ":3: z = 10 does not increase (the row before has 20)"},
      {"0 1.16 3\n10 0.0002\n", ":2: 2 values on this row, 3 on the first"},
      {"0 1.5\n10 0.0002\n", ":1: x_e = 1.5 must satisfy 0 < x_e <= 1.1"},
      {"0 1.16\n10 0\n", ":2: x_e = 0 must satisfy 0 < x_e <= 1.1"},
      {"0 1.16 -3\n10 0.0002 20\n", ":1: T_gas = -3 K must be > 0"},
      {"0 1.16\n9000 1.16\n", ":2: z = 9000 must satisfy 0 <= z <= 8000"},
  };
  for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++)
    assert_table_refused(1, cases[i].text, 0, cases[i].message);
}

/* ---- a temperature step: Gnedin & Hui in closed form ---- */

/* Einstein-de Sitter, baryon gravity negligible (f_b = 0), no drag, the
 * isothermal sound speed of gas heated at a_t from (practically) nothing to
 * a constant temperature, as by an instantaneous reionisation: p = 0 before
 * a_t, and p = (3/2) C a / a_t after (c_s^2 fixed and (aH)^2 ~ 1/a), so
 * 1/k_J^2 = C a / a_t. */
typedef struct step_medium {
  double C, a_t;
} step_medium;

static int step_eval(const void *ctx, double ln_a, jg_medium_coefficients *c) {
  const step_medium *g = ctx;
  const double a = exp(ln_a);
  c->dlnH_dlna = -1.5;
  c->gravity = 1.5;
  c->baryon_fraction = 0.0;
  c->pressure = a > g->a_t ? 1.5 * g->C * a / g->a_t : 0.0;
  c->drag = 0.0;
  c->relaxation = 0.0;
  return 0;
}

/* The Gnedin & Hui (1998, MNRAS 296, 44) integral in EdS (§7.4),
 * 1/k_F^2 = (3/a) int da' (1 - sqrt(a'/a)) / k_J^2(a'), for this history
 * (derived, §10.8): with x = a_t/a,
 *   1/k_F^2 = (3 C / x) [1/10 - x^2/2 + (2/5) x^(5/2)],
 *   (k_F/k_J)^2 = 1 / (3 [1/10 - x^2/2 + (2/5) x^(5/2)]) -> 10/3 long after.
 * Their assumptions hold here (baryons on the dark matter from the start,
 * no drag, isothermal, EdS), so the measured k_F (the k^2 coefficient of
 * the solved delta_b) and the integral must both give it: 1e-6, the
 * accuracy the existing two-phase test reaches with these tolerances. */
Test(reionisation, temperature_step_gnedin_hui_closed_form) {
  step_medium g = {1e-2, 1e-2};
  jg_medium md = {step_eval, &g, 0.0, -40.0, 10.0, 0.0, 1e30, 1.0};
  jg_perturb_settings s;
  memset(&s, 0, sizeof s);
  s.z_initial = 1.0 / 1e-4 - 1.0;
  s.sound_speed = JG_SOUND_SPEED_ISOTHERMAL;
  s.rel_tol = 1e-11;
  s.abs_tol = 1e-14;
  jg_perturb_start start = {1.0, 1.0, 0.0, 0, 0.0};
  jg_error err;
  jg_error_clear(&err);
  jg_perturb_model *m = jg_perturb_model_new_medium(&md, &s, &start, &err);
  cr_assert_not_null(m, "%s", err.message);
  jg_perturb_workspace *w = jg_perturb_workspace_new(m, &err);
  cr_assert_not_null(w, "%s", err.message);
  const double x[] = {0.5, 0.1, 0.01};
  double z[3];
  for (int i = 0; i < 3; i++) z[i] = x[i] / g.a_t - 1.0;
  jg_scales_point sc[3];
  cr_assert_eq(jg_scales_compute(m, w, z, 3, sc, &err), JG_OK, "%s", err.message);
  for (int i = 0; i < 3; i++) {
    const double bracket = 0.1 - 0.5 * x[i] * x[i] + 0.4 * pow(x[i], 2.5);
    const double inverse_kf2 = 3.0 * g.C / x[i] * bracket;
    const double kj = sqrt(x[i] / g.C);
    ASSERT_REL(sc[i].k_jeans_isothermal, kj, 1e-12, "k_J at x = %g", x[i]);
    ASSERT_REL(1.0 / (sc[i].k_filter_solved * sc[i].k_filter_solved), inverse_kf2, 1e-6,
               "measured 1/k_F^2 at x = %g", x[i]);
    ASSERT_REL(1.0 / (sc[i].k_filter_integral_isothermal * sc[i].k_filter_integral_isothermal),
               inverse_kf2, 1e-6, "Gnedin-Hui integral 1/k_F^2 at x = %g", x[i]);
    ASSERT_REL(sc[i].k_filter_solved / kj, 1.0 / sqrt(3.0 * bracket), 1e-6, "k_F/k_J at x = %g",
               x[i]);
  }
  jg_perturb_workspace_free(w);
  jg_perturb_model_free(m);
}
