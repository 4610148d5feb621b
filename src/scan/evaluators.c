/*
 * The built-in evaluators of a scan: what one grid point computes. The
 * thermal one (epochs and the isothermal Jeans scale of the gas) and the
 * scales one (every column of `jeansgrow scales`, in the units its user
 * data names).
 */
#include "jeansgrow/scan.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "jeansgrow/background.h"
#include "jeansgrow/epochs.h"
#include "jeansgrow/growth.h"
#include "jeansgrow/jeans.h"
#include "jeansgrow/perturb.h"
#include "jeansgrow/report.h"
#include "jeansgrow/stream_results.h"
#include "jeansgrow/scales.h"
#include "../results/report_tables.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

static const char *const thermal_point_columns[JG_SCAN_THERMAL_POINT_COLUMNS] = {
    "z_star", "z_drag", "z_gas_decoupling"};
static const char *const thermal_redshift_columns[JG_SCAN_THERMAL_REDSHIFT_COLUMNS] = {
    "T_gas[K]", "x_e", "k_J[1/Mpc]", "M_J[Msun]"};
static const char *const thermal_conventions[] = {
    JG__REPORT_SCAN_EPOCHS_CONVENTION,
    "x_e = n_e / n_H; k_J: comoving Jeans wavenumber of the isothermal gas, "
    "c_s^2 = k_B T_gas / (mu m_H) (gamma = 1), total matter density as the source",
    "M_J: mass inside the sphere of comoving radius pi / k_J at the mean matter density",
    NULL};

/* The per-point epoch columns of both evaluators, computed from the point's history. */
static jg_status epoch_columns(const jg_thermal *th, double *point_values, jg_error *err) {
  jg_epochs e;
  jg_status st = jg_epochs_compute(th, &e, err);
  if (st != JG_OK) return st;
  const int entries[JG_SCAN_THERMAL_POINT_COLUMNS] = {JG_EPOCH_Z_STAR, JG_EPOCH_Z_DRAG,
                                                      JG_EPOCH_Z_GAS_DECOUPLING};
  for (int i = 0; i < JG_SCAN_THERMAL_POINT_COLUMNS; i++) {
    jg_epoch_entry en = jg_epochs_entry(&e, entries[i]);
    point_values[i] = en.exists ? en.value : JG__REPORT_SCAN_NO_EPOCH;
  }
  return JG_OK;
}

jg_status jg_scan_thermal_columns(const jg_thermal *th, const jg_params *p,
                                  double *point_values, double *redshift_values, int stride,
                                  jg_error *err) {
  jg_status st = epoch_columns(th, point_values, err);
  if (st != JG_OK) return st;
  const jg_background *bg = jg_thermal_background(th);
  for (int j = 0; j < p->output.n_redshifts; j++) {
    double z = p->output.redshifts[j];
    jg_thermal_state s;
    jg_thermal_state_at(th, z, &s);
    double cs2 = jg_sound_speed_squared(s.T_gas, s.mu, 1.0);
    double k_J = jg_jeans_wavenumber(bg, 1.0 / (1.0 + z), cs2);
    double *row = redshift_values + (size_t)j * (size_t)stride;
    row[0] = s.T_gas;
    row[1] = s.x_e;
    row[2] = k_J;
    row[3] = jg_mass_half_wavelength(bg, k_J);
  }
  return JG_OK;
}

static jg_status thermal_evaluate(const jg_params *p, double *point_values,
                                  double *redshift_values, void *workspace, const void *user,
                                  jg_error *err) {
  (void)workspace;
  (void)user;
  jg_background *bg = jg_background_new(&p->cosmology, err);
  if (!bg) return err ? err->status : JG_EINVAL;
  jg_thermal *th = jg_thermal_new(bg, &p->thermal, err);
  jg_status st = th ? JG_OK : (err ? err->status : JG_ENUMERIC);
  if (st == JG_OK)
    st = jg_scan_thermal_columns(th, p, point_values, redshift_values,
                                 JG_SCAN_THERMAL_REDSHIFT_COLUMNS, err);
  jg_thermal_free(th);
  jg_background_free(bg);
  return st;
}

static const jg_scan_evaluator thermal_evaluator = {
    "thermal (epochs, T_gas, x_e, isothermal Jeans scale)",
    JG_SCAN_THERMAL_POINT_COLUMNS,
    thermal_point_columns,
    JG_SCAN_THERMAL_REDSHIFT_COLUMNS,
    thermal_redshift_columns,
    thermal_conventions,
    NULL,
    NULL,
    thermal_evaluate,
    NULL,
    JG_SCAN_ROWS_REDSHIFT};

const jg_scan_evaluator *jg_scan_evaluator_thermal(void) { return &thermal_evaluator; }

/* ---- the scales evaluator: what `jeansgrow scales` reports, per point ---- */

/* The `scales` table's columns without its leading `z` (the scan writes z). */
#define SCALES_REDSHIFT_COLUMNS (JG__REPORT_SCALES_COLUMNS - 1)

/* The evaluator carries its units itself, as its user data, rather than
 * reading p->output.units, so that its values always match its column
 * names. */
/* A point's history and perturbation model, built and freed together. */
typedef struct point_model {
  jg_background *bg;
  jg_thermal *th;
  jg_perturb_model *m;
  jg_perturb_workspace *w;
} point_model;

static jg_status point_model_build(const jg_params *p, point_model *pm, jg_error *err) {
  pm->bg = jg_background_new(&p->cosmology, err);
  pm->th = pm->bg ? jg_thermal_new(pm->bg, &p->thermal, err) : NULL;
  /* A point needs the perturbations only down to its latest output
   * redshift: the coefficient tables end there (a quarter of their nodes
   * spared for outputs down to z = 10). */
  double z_end = HUGE_VAL;
  for (int i = 0; i < p->output.n_redshifts; i++) z_end = fmin(z_end, p->output.redshifts[i]);
  if (!(z_end > 0.0 && z_end < p->perturbations.z_initial)) z_end = 0.0;
  pm->m = pm->th ? jg_perturb_model_new_until(pm->th, &p->perturbations, NULL, z_end, err) : NULL;
  pm->w = pm->m ? jg_perturb_workspace_new(pm->m, err) : NULL;
  return pm->w ? JG_OK : (err && err->status != JG_OK ? err->status : JG_ENUMERIC);
}

static void point_model_free(point_model *pm) {
  jg_perturb_workspace_free(pm->w);
  jg_perturb_model_free(pm->m);
  jg_thermal_free(pm->th);
  jg_background_free(pm->bg);
}

static jg_status scales_evaluate(const jg_params *p, double *point_values,
                                 double *redshift_values, void *workspace, const void *user,
                                 jg_error *err) {
  (void)workspace;
  const jg_output_units units = *(const jg_output_units *)user;
  const int n_z = p->output.n_redshifts;
  jg_scales_point *s = malloc(sizeof *s * (size_t)n_z);
  if (!s) return JG_FAIL(err, JG_ENOMEM, "out of memory for the scales of a scan point");
  point_model pm = {0};
  jg_status st = point_model_build(p, &pm, err);
  if (st == JG_OK) st = epoch_columns(pm.th, point_values, err);
  if (st == JG_OK) st = jg_scales_compute(pm.m, pm.w, p->output.redshifts, n_z, s, err);
  if (st == JG_OK)
    st = jg_scales_add_streaming(pm.m, pm.w, &p->streaming, p->output.redshifts, n_z, s, err);
  double row[SCALES_REDSHIFT_COLUMNS + 1];
  for (int j = 0; st == JG_OK && j < n_z; j++) {
    jg_report_scales_row(pm.th, &s[j], units, row);
    memcpy(redshift_values + (size_t)j * SCALES_REDSHIFT_COLUMNS, row + 1,
           sizeof(double) * SCALES_REDSHIFT_COLUMNS);
  }
  point_model_free(&pm);
  free(s);
  return st;
}

static const jg_output_units units_mpc = JG_UNITS_MPC, units_mpc_h = JG_UNITS_MPC_H;

/* The pair of evaluators of one table, in 1/Mpc and in h units (both names
 * enter the fingerprint); POINTS, ROWS and CONVENTIONS are macros of the
 * units index. The report module owns the names and conventions. */
#define UNITS_EVALUATORS(label, label_h, n_points, POINTS, n_rows, ROWS, CONVENTIONS, evaluate, \
                         rows)                                                                 \
  {[JG_UNITS_MPC] = {label, n_points, POINTS(JG_UNITS_MPC), n_rows, ROWS(JG_UNITS_MPC),         \
                     CONVENTIONS(JG_UNITS_MPC), NULL, NULL, evaluate, &units_mpc, rows},       \
   [JG_UNITS_MPC_H] = {label_h, n_points, POINTS(JG_UNITS_MPC_H), n_rows, ROWS(JG_UNITS_MPC_H), \
                       CONVENTIONS(JG_UNITS_MPC_H), NULL, NULL, evaluate, &units_mpc_h, rows}}
#define EPOCH_POINTS(u) thermal_point_columns
#define SCALES_ROWS(u) (jg__report_scales_columns[u] + 1)
#define SCALES_CONVENTIONS(u) jg__report_scan_scales_conventions[u]

static const jg_scan_evaluator scales_evaluators[] = UNITS_EVALUATORS(
    "scales (epochs; Jeans, filtering and half-suppression scales as jeansgrow scales)",
    "scales (epochs; Jeans, filtering and half-suppression scales as jeansgrow scales), in h "
    "units",
    JG_SCAN_THERMAL_POINT_COLUMNS, EPOCH_POINTS, SCALES_REDSHIFT_COLUMNS, SCALES_ROWS,
    SCALES_CONVENTIONS, scales_evaluate, JG_SCAN_ROWS_REDSHIFT);

const jg_scan_evaluator *jg_scan_evaluator_scales(jg_output_units units) {
  return &scales_evaluators[units == JG_UNITS_MPC_H ? JG_UNITS_MPC_H : JG_UNITS_MPC];
}

/* ---- the growth evaluator: the `growth` table per point ---------------- */

/* The scan's per-row growth columns: the table's k to flags (the scan
 * writes z; D_ref and rate_ref do not depend on k). */
static jg_status growth_evaluate(const jg_params *p, double *point_values,
                                 double *redshift_values, void *workspace, const void *user,
                                 jg_error *err) {
  (void)workspace;
  const jg_output_units units = *(const jg_output_units *)user;
  const int n_z = p->output.n_redshifts;
  double *k = malloc(sizeof(double) * JG_MAX_WAVENUMBERS);
  if (!k) return JG_FAIL(err, JG_ENOMEM, "out of memory for the wavenumbers of a scan point");
  int n_k = 0;
  jg_growth_grid *g = NULL;
  point_model pm = {0};
  jg_status st = point_model_build(p, &pm, err);
  if (st == JG_OK) st = epoch_columns(pm.th, point_values, err);
  if (st == JG_OK) st = jg_perturb_wavenumbers(&p->perturbations, k, &n_k, err);
  if (st == JG_OK)
    st = jg_growth_grid_compute(pm.m, pm.w, k, n_k, p->output.redshifts, n_z, &g, err);
  if (st == JG_OK) st = jg_growth_grid_add_streaming(g, pm.m, pm.w, &p->streaming, err);
  double row[JG__REPORT_GROWTH_COLUMNS];
  const double h = p->cosmology.hubble_h;
  for (int iz = 0; st == JG_OK && iz < n_z; iz++)
    for (int ik = 0; ik < n_k; ik++) {
      jg__report_growth_row(pm.th, g, ik, iz, units, h, row);
      memcpy(redshift_values + ((size_t)iz * (size_t)n_k + (size_t)ik) *
                                   JG__REPORT_GROWTH_SCAN_COLUMNS,
             row + 1, sizeof(double) * JG__REPORT_GROWTH_SCAN_COLUMNS);
    }
  jg_growth_grid_free(g);
  point_model_free(&pm);
  free(k);
  return st;
}

#define GROWTH_ROWS(u) (jg__report_growth_columns[u] + 1)
#define GROWTH_CONVENTIONS(u) jg__report_scan_growth_conventions[u]
static const jg_scan_evaluator growth_evaluators[] = UNITS_EVALUATORS(
    "growth (epochs; the growth table by redshift and wavenumber)",
    "growth (epochs; the growth table by redshift and wavenumber), in h units",
    JG_SCAN_THERMAL_POINT_COLUMNS, EPOCH_POINTS, JG__REPORT_GROWTH_SCAN_COLUMNS, GROWTH_ROWS,
    GROWTH_CONVENTIONS, growth_evaluate, JG_SCAN_ROWS_WAVENUMBER);

const jg_scan_evaluator *jg_scan_evaluator_growth(jg_output_units units) {
  return &growth_evaluators[units == JG_UNITS_MPC_H ? JG_UNITS_MPC_H : JG_UNITS_MPC];
}

/* ---- the epochs evaluator: the `epochs` table per point, one row ------- */

/* The names of jg_epochs_entry in order, with their units as output.units
 * writes them (tests/test_scan.c checks them against the entries). */
static const char *const epochs_columns[][JG_EPOCH_COUNT] = {
    [JG_UNITS_MPC] = {"z_star", "z_visibility_peak", "z_drag", "r_star[Mpc]", "r_drag[Mpc]",
                      "theta_star_100", "z_eq", "k_eq[1/Mpc]", "age[Gyr]", "z_gas_decoupling",
                      "x_e_z100", "T_gas_z100[K]", "tau_reion", "z_reion"},
    [JG_UNITS_MPC_H] = {"z_star", "z_visibility_peak", "z_drag", "r_star[Mpc/h]",
                        "r_drag[Mpc/h]", "theta_star_100", "z_eq", "k_eq[h/Mpc]", "age[Gyr]",
                        "z_gas_decoupling", "x_e_z100", "T_gas_z100[K]", "tau_reion",
                        "z_reion"}};

static const char *const epochs_conventions[] = {
    "one row per point: every value of jeansgrow epochs; -1 where the point's universe does "
    "not have that epoch or the value derived from it (jeansgrow epochs says why)",
    NULL};

static jg_status epochs_evaluate(const jg_params *p, double *point_values,
                                 double *redshift_values, void *workspace, const void *user,
                                 jg_error *err) {
  (void)workspace;
  (void)redshift_values;
  const jg_output_units units = *(const jg_output_units *)user;
  jg_background *bg = jg_background_new(&p->cosmology, err);
  jg_thermal *th = bg ? jg_thermal_new(bg, &p->thermal, err) : NULL;
  jg_status st = th ? JG_OK : (err && err->status != JG_OK ? err->status : JG_ENUMERIC);
  jg_epochs e;
  if (st == JG_OK) st = jg_epochs_compute(th, &e, err);
  for (int i = 0; st == JG_OK && i < JG_EPOCH_COUNT; i++) {
    jg_epoch_entry en = jg_epochs_entry(&e, i);
    double factor;
    jg_report_unit(en.unit, units, p->cosmology.hubble_h, &factor);
    point_values[i] = en.exists ? en.value * factor : JG__REPORT_SCAN_NO_EPOCH;
  }
  jg_thermal_free(th);
  jg_background_free(bg);
  return st;
}

#define EPOCHS_POINTS(u) epochs_columns[u]
#define NO_ROWS(u) NULL
#define EPOCHS_CONVENTIONS(u) epochs_conventions
static const jg_scan_evaluator epochs_evaluators[] = UNITS_EVALUATORS(
    "epochs (the epochs table, one row per point)",
    "epochs (the epochs table, one row per point), in h units", JG_EPOCH_COUNT, EPOCHS_POINTS, 0,
    NO_ROWS, EPOCHS_CONVENTIONS, epochs_evaluate, JG_SCAN_ROWS_POINT);

const jg_scan_evaluator *jg_scan_evaluator_epochs(jg_output_units units) {
  return &epochs_evaluators[units == JG_UNITS_MPC_H ? JG_UNITS_MPC_H : JG_UNITS_MPC];
}
