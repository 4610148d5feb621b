/*
 * Extreme but valid cosmologies: background, thermal history, epochs and
 * the perturbation stage (scales; modes at k = 1 and 1e5 /Mpc) must finish, and everything they report must be finite and physically
 * possible, across
 *
 *   Omega_b h^2  0.001 .. 0.1      Omega_c h^2  0.01 .. 0.5
 *   h            0.3   .. 1.2      T_cmb        1 .. 5 K
 *   Y_P          0     .. 0.5      N_eff        0 .. 6
 *
 * at all 64 corners of that box and at 16 interior points drawn with a
 * fixed seed (so a failure is reproducible). The range is wider than any
 * fit to data allows on purpose: the stiff integrations see very different
 * recombination epochs (T_cmb moves recombination from z ~ 3000 to z ~ 600),
 * electron fractions and expansion rates.
 *
 * Runtime: each point builds a full history with thermal.grid_points =
 * 1000 instead of the default 4000; the grid only sets the spacing of the
 * stored splines, not the ODE tolerances, so the integrations are the same
 * ones that a default run does.
 *
 * The checks are physical bounds, not reference values, so none needs a
 * source: an ionised fraction between 0 and full ionisation, a gas that is
 * never hotter than the radiation heating it, an optical depth that grows
 * with redshift, positive times and lengths.
 */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include <criterion/criterion.h>
#include <criterion/parameterized.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_rng.h>

#include "jeansgrow/background.h"
#include "jeansgrow/epochs.h"
#include "jeansgrow/params.h"
#include "jeansgrow/perturb.h"
#include "jeansgrow/scales.h"
#include "jeansgrow/thermal.h"

static void quiet_gsl(void) { gsl_set_error_handler_off(); }

/* Plain doubles only: Criterion passes parameters between processes. */
typedef struct extreme_case {
  double obh2, och2, h, T_cmb, Y_P, N_eff;
} extreme_case;

#define N_CORNERS 64
#define N_INTERIOR 16
#define EXTREMES_SEED 20240611UL

static const double lo[6] = {0.001, 0.01, 0.3, 1.0, 0.0, 0.0};
static const double hi[6] = {0.1, 0.5, 1.2, 5.0, 0.5, 6.0};

static extreme_case from_array(const double v[6]) {
  extreme_case c = {v[0], v[1], v[2], v[3], v[4], v[5]};
  return c;
}

ParameterizedTestParameters(extremes, box_corners) {
  extreme_case *cases = cr_malloc(sizeof(extreme_case) * N_CORNERS);
  for (int i = 0; i < N_CORNERS; i++) {
    double v[6];
    for (int d = 0; d < 6; d++) v[d] = (i >> d) & 1 ? hi[d] : lo[d];
    cases[i] = from_array(v);
  }
  return cr_make_param_array(extreme_case, cases, N_CORNERS);
}

/* The two densities are drawn uniform in their logarithm (they span two
 * decades), the others uniform. */
ParameterizedTestParameters(extremes, random_interior) {
  extreme_case *cases = cr_malloc(sizeof(extreme_case) * N_INTERIOR);
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, EXTREMES_SEED);
  for (int i = 0; i < N_INTERIOR; i++) {
    double v[6];
    for (int d = 0; d < 6; d++) {
      double u = gsl_rng_uniform(r);
      v[d] = d < 2 ? lo[d] * pow(hi[d] / lo[d], u) : lo[d] + u * (hi[d] - lo[d]);
    }
    cases[i] = from_array(v);
  }
  gsl_rng_free(r);
  return cr_make_param_array(extreme_case, cases, N_INTERIOR);
}

static void describe(const extreme_case *c, char *buf, size_t size) {
  snprintf(buf, size,
           "omega_b h^2 = %g, omega_c h^2 = %g, h = %g, T_cmb = %g K, Y_P = %g, N_eff = %g",
           c->obh2, c->och2, c->h, c->T_cmb, c->Y_P, c->N_eff);
}

/* A numerical failure must say which stage failed (one of `stages`) and at
 * which redshift, so that the user can act on it. Checked first, then the
 * case fails: the sweep expects every point of the box to work. */
static void fail_with_message(const char *what, const char *case_text, const jg_error *err,
                              const char *const *stages) {
  int named = 0;
  for (int i = 0; stages[i]; i++) named = named || strstr(err->message, stages[i]) != NULL;
  cr_expect(named, "%s failed and its message does not name the stage: %s", what,
            err->message);
  cr_expect(strstr(err->message, "z = ") != NULL,
            "%s failed and its message does not name the redshift: %s", what, err->message);
  cr_assert_fail("%s failed for %s: %s: %s", what, case_text, jg_status_name(err->status),
                 err->message);
}

static const char *const background_stages[] = {"cosmology", NULL};
static const char *const thermal_stages[] = {"thermal history", NULL};
/* Each epoch names itself; the sound horizons and the age name the
 * background integral. */
static const char *const epoch_stages[] = {"z_star", "z_drag", "visibility peak",
                                           "z_gas_decoupling", "background", NULL};

static void assert_finite(double v, const char *what, double z, const char *case_text) {
  cr_assert(isfinite(v), "%s = %g at z = %g is not finite (%s)", what, v, z, case_text);
}

static void check_history(const jg_background *bg, const jg_thermal *th, const char *case_text) {
  const double z_start = jg_thermal_start_redshift(th);
  const double full = 1.0 + 2.0 * bg->helium_to_hydrogen; /* electrons per H, all ionised */
  double tau_prev = -1.0, drag_prev = -1.0;
  /* From today to twice the start redshift (beyond it the equilibrium
   * branch answers), uniform in ln(1+z). */
  const int n = 60;
  for (int i = 0; i < n; i++) {
    double z = expm1(log1p(2.0 * z_start) * i / (n - 1));
    jg_thermal_state s;
    jg_thermal_state_at(th, z, &s);
    assert_finite(s.x_e, "x_e", z, case_text);
    assert_finite(s.x_p, "x_HII", z, case_text);
    assert_finite(s.x_HeII, "x_HeII", z, case_text);
    assert_finite(s.x_HeIII, "x_HeIII", z, case_text);
    assert_finite(s.T_gas, "T_gas", z, case_text);
    assert_finite(s.compton_rate, "compton_rate", z, case_text);
    assert_finite(s.mu, "mu", z, case_text);
    /* Bounds with a relative slack of 1e-6 for interpolation and rounding. */
    cr_assert(s.x_e > 0 && s.x_e <= full * (1 + 1e-6),
              "x_e = %g at z = %g outside (0, %g] (%s)", s.x_e, z, full, case_text);
    cr_assert(s.x_p > 0 && s.x_p <= 1 + 1e-6, "x_HII = %g at z = %g outside (0, 1] (%s)", s.x_p,
              z, case_text);
    cr_assert(s.T_gas > 0 && s.T_gas <= s.T_rad * (1 + 1e-6),
              "T_gas = %g K at z = %g outside (0, T_rad = %g K] (%s)", s.T_gas, z, s.T_rad,
              case_text);
    cr_assert(s.mu > 0, "mu = %g at z = %g (%s)", s.mu, z, case_text);
    double H = jg_background_hubble(bg, 1.0 / (1.0 + z));
    cr_assert(isfinite(H) && H > 0, "H = %g at z = %g (%s)", H, z, case_text);
    double tau = jg_thermal_optical_depth(th, z);
    double drag = jg_thermal_drag_depth(th, z);
    double g = jg_thermal_visibility(th, z);
    assert_finite(tau, "tau", z, case_text);
    assert_finite(drag, "tau_drag", z, case_text);
    assert_finite(g, "visibility", z, case_text);
    cr_assert(tau >= tau_prev && drag >= drag_prev,
              "optical or drag depth decreases with z at z = %g (tau %g after %g, drag %g "
              "after %g) (%s)",
              z, tau, tau_prev, drag, drag_prev, case_text);
    cr_assert(g >= 0, "visibility = %g < 0 at z = %g (%s)", g, z, case_text);
    tau_prev = tau;
    drag_prev = drag;
  }
}

static void check_epochs(const jg_epochs *e, const jg_thermal *th, const char *case_text) {
  for (int i = 0; i < jg_epochs_count(); i++) {
    jg_epoch_entry en = jg_epochs_entry(e, i);
    cr_assert(isfinite(en.value), "epoch %s = %g is not finite (%s)", en.name, en.value,
              case_text);
  }
  const double z_top = jg_thermal_start_redshift(th);
  cr_assert(e->z_star > 1 && e->z_star < z_top, "z_star = %g outside (1, %g) (%s)", e->z_star,
            z_top, case_text);
  cr_assert(e->z_drag > 1 && e->z_drag < z_top, "z_drag = %g outside (1, %g) (%s)", e->z_drag,
            z_top, case_text);
  cr_assert(e->z_visibility_peak > 0, "z_visibility_peak = %g (%s)", e->z_visibility_peak,
            case_text);
  cr_assert(e->r_star > 0 && e->r_drag > 0 && e->theta_star_100 > 0 && e->age_Gyr > 0 &&
                e->k_eq > 0 && e->z_eq > 0 && e->z_gas_decoupling > 0 && e->x_e_z100 > 0 &&
                e->T_gas_z100 > 0,
            "a length, time, rate or redshift is not positive: r_star %g, r_drag %g, "
            "theta %g, age %g, k_eq %g, z_eq %g, z_gas_decoupling %g, x_e(100) %g, T_gas(100) "
            "%g (%s)",
            e->r_star, e->r_drag, e->theta_star_100, e->age_Gyr, e->k_eq, e->z_eq,
            e->z_gas_decoupling, e->x_e_z100, e->T_gas_z100, case_text);
  /* Each epoch is what its definition says (epochs.h), to the 1e-6 of the
   * root searches' tolerances and the spline interpolation. */
  double tau = jg_thermal_optical_depth(th, e->z_star);
  double drag = jg_thermal_drag_depth(th, e->z_drag);
  cr_assert(fabs(tau - 1.0) < 1e-6 && fabs(drag - 1.0) < 1e-6,
            "tau(z_star) = %.9g and tau_drag(z_drag) = %.9g, both should be 1 (%s)", tau, drag,
            case_text);
  /* The peak is the largest visibility, not only a local bump: compare with
   * points 1 % away and with the whole history on a coarse grid. */
  double g_peak = jg_thermal_visibility(th, e->z_visibility_peak);
  for (int i = 0; i <= 200; i++) {
    double z = i < 200 ? expm1(log1p(z_top) * i / 199.0) : e->z_visibility_peak * 1.01;
    double g = jg_thermal_visibility(th, z);
    cr_assert(g <= g_peak * (1 + 1e-9),
              "visibility %g at z = %g exceeds the one at the reported peak z = %g (%g) (%s)", g,
              z, e->z_visibility_peak, g_peak, case_text);
  }
}

static const char *const perturbation_stages[] = {"perturbation", "k =", NULL};

/* The perturbation stage on the same history, from the default z_initial
 * (1e4) down to z = 10, for the scales at four redshifts and single modes at
 * both ends of the accepted wavenumber range (1 and 1e5 /Mpc): every value
 * finite, contrasts and wavenumbers positive, masses positive. */
static void check_perturbations(const jg_params *p, const jg_thermal *th, const char *case_text) {
  jg_error err;
  jg_error_clear(&err);
  jg_perturb_model *m = jg_perturb_model_new(th, &p->perturbations, NULL, &err);
  if (!m) fail_with_message("perturbation model", case_text, &err, perturbation_stages);
  jg_perturb_workspace *w = jg_perturb_workspace_new(m, &err);
  cr_assert_not_null(w, "workspace: %s", err.message);
  const double z[] = {1000.0, 100.0, 20.0, 10.0};
  jg_scales_point s[4];
  if (jg_scales_compute(m, w, z, 4, s, &err) != JG_OK)
    fail_with_message("scales", case_text, &err, perturbation_stages);
  for (int i = 0; i < 4; i++) {
    const double v[] = {s[i].k_jeans_isothermal, s[i].m_jeans_isothermal, s[i].k_filter_solved,
                        s[i].m_filter_solved, s[i].k_filter_integral_isothermal,
                        s[i].b_over_c_large, s[i].delta_m_large};
    for (size_t j = 0; j < sizeof v / sizeof v[0]; j++)
      cr_expect(isfinite(v[j]) && v[j] > 0, "scale %zu at z = %g is %g (%s)", j, z[i], v[j],
                case_text);
    if (s[i].half_found)
      cr_expect(isfinite(s[i].k_half) && s[i].k_half > 0 && s[i].m_half > 0,
                "k_half at z = %g is %g (%s)", z[i], s[i].k_half, case_text);
  }
  const double ks[] = {1.0, 1e5};
  for (int j = 0; j < 2; j++) {
    jg_perturb_point pt[4];
    if (jg_perturb_solve(m, w, ks[j], z, 4, pt, &err) != JG_OK)
      fail_with_message("perturbations", case_text, &err, perturbation_stages);
    for (int i = 0; i < 4; i++)
      cr_expect(isfinite(pt[i].delta_c) && pt[i].delta_c > 0 && isfinite(pt[i].delta_b) &&
                    isfinite(pt[i].delta_T) && isfinite(pt[i].growth_b),
                "k = %g, z = %g: delta_c %g, delta_b %g (%s)", ks[j], z[i], pt[i].delta_c,
                pt[i].delta_b, case_text);
  }
  jg_perturb_workspace_free(w);
  jg_perturb_model_free(m);
}

static void run_case(const extreme_case *c) {
  char case_text[256];
  describe(c, case_text, sizeof case_text);
  jg_params p;
  jg_params_set_defaults(&p);
  p.cosmology.baryon_density_h2 = c->obh2;
  p.cosmology.cdm_density_h2 = c->och2;
  p.cosmology.hubble_h = c->h;
  p.cosmology.cmb_temperature_K = c->T_cmb;
  p.cosmology.helium_mass_fraction = c->Y_P;
  p.cosmology.neutrino_number_eff = c->N_eff;
  p.thermal.grid_points = 1000;
  jg_error err;
  jg_error_clear(&err);
  /* The box lies inside the documented ranges: the sweep tests valid input. */
  cr_assert(jg_params_validate(&p, &err) == JG_OK, "parameters refused: %s (%s)", err.message,
            case_text);

  jg_background *bg = jg_background_new(&p.cosmology, &err);
  if (!bg) fail_with_message("background", case_text, &err, background_stages);
  jg_thermal *th = jg_thermal_new(bg, &p.thermal, &err);
  if (!th) fail_with_message("thermal history", case_text, &err, thermal_stages);
  jg_epochs e;
  memset(&e, 0, sizeof e);
  if (jg_epochs_compute(th, &e, &err) != JG_OK)
    fail_with_message("epochs", case_text, &err, epoch_stages);
  check_history(bg, th, case_text);
  check_epochs(&e, th, case_text);
  check_perturbations(&p, th, case_text);
  jg_thermal_free(th);
  jg_background_free(bg);
}

ParameterizedTest(extreme_case *c, extremes, box_corners, .init = quiet_gsl) { run_case(c); }

ParameterizedTest(extreme_case *c, extremes, random_interior, .init = quiet_gsl) { run_case(c); }

/* The messages promised above, provoked on purpose: tolerances of 1e-300
 * (reachable through the C API only; the parameter file stops at 1e-13)
 * cannot be met by any step, so the stiff integration genuinely fails. */
Test(extremes, a_genuine_solver_failure_names_the_stage_and_redshift, .init = quiet_gsl) {
  jg_params p;
  jg_params_set_defaults(&p);
  p.thermal.rel_tol = 1e-300;
  p.thermal.abs_tol = 1e-300;
  p.thermal.grid_points = 1000;
  jg_error err;
  jg_error_clear(&err);
  jg_background *bg = jg_background_new(&p.cosmology, &err);
  cr_assert(bg != NULL, "jg_background_new failed: %s", err.message);
  jg_thermal *th = jg_thermal_new(bg, &p.thermal, &err);
  cr_assert(th == NULL, "an integration at rel_tol = abs_tol = 1e-300 succeeded");
  cr_assert(err.status == JG_ENUMERIC, "status %s, expected JG_ENUMERIC: %s",
            jg_status_name(err.status), err.message);
  cr_assert(strstr(err.message, "thermal history (") != NULL && strstr(err.message, "z = "),
            "the message names neither the stage nor the redshift: %s", err.message);
  jg_background_free(bg);
}
