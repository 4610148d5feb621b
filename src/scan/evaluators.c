/*
 * The built-in evaluators of a scan: what one grid point computes. The
 * thermal one (epochs and the isothermal Jeans scale of the gas) and the
 * scales one (every column of `jeansgrow scales`, in the units its user
 * data names).
 */
#include "jeansgrow/scan.h"

#include <stdlib.h>
#include <string.h>

#include "jeansgrow/background.h"
#include "jeansgrow/epochs.h"
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
    NULL};

const jg_scan_evaluator *jg_scan_evaluator_thermal(void) { return &thermal_evaluator; }

/* ---- the scales evaluator: what `jeansgrow scales` reports, per point ---- */

/* The `scales` table's columns without its leading `z` (the scan writes z). */
#define SCALES_REDSHIFT_COLUMNS (JG__REPORT_SCALES_COLUMNS - 1)

/* The evaluator carries its units itself, as its user data, rather than
 * reading p->output.units, so that its values always match its column
 * names. */
static jg_status scales_evaluate(const jg_params *p, double *point_values,
                                 double *redshift_values, void *workspace, const void *user,
                                 jg_error *err) {
  (void)workspace;
  const jg_output_units units = *(const jg_output_units *)user;
  const int n_z = p->output.n_redshifts;
  jg_scales_point *s = malloc(sizeof *s * (size_t)n_z);
  if (!s) return JG_FAIL(err, JG_ENOMEM, "out of memory for the scales of a scan point");
  jg_background *bg = jg_background_new(&p->cosmology, err);
  jg_thermal *th = bg ? jg_thermal_new(bg, &p->thermal, err) : NULL;
  jg_perturb_model *m = th ? jg_perturb_model_new(th, &p->perturbations, NULL, err) : NULL;
  jg_perturb_workspace *w = m ? jg_perturb_workspace_new(m, err) : NULL;
  jg_status st = w ? JG_OK : (err && err->status != JG_OK ? err->status : JG_ENUMERIC);
  if (st == JG_OK) st = epoch_columns(th, point_values, err);
  if (st == JG_OK) st = jg_scales_compute(m, w, p->output.redshifts, n_z, s, err);
  if (st == JG_OK) st = jg_scales_add_streaming(m, w, &p->streaming, p->output.redshifts, n_z, s, err);
  double row[SCALES_REDSHIFT_COLUMNS + 1];
  for (int j = 0; st == JG_OK && j < n_z; j++) {
    jg_report_scales_row(th, &s[j], units, row);
    memcpy(redshift_values + (size_t)j * SCALES_REDSHIFT_COLUMNS, row + 1,
           sizeof(double) * SCALES_REDSHIFT_COLUMNS);
  }
  jg_perturb_workspace_free(w);
  jg_perturb_model_free(m);
  jg_thermal_free(th);
  jg_background_free(bg);
  free(s);
  return st;
}

static const jg_output_units units_mpc = JG_UNITS_MPC, units_mpc_h = JG_UNITS_MPC_H;

/* The report module owns the names and conventions. */
static const jg_scan_evaluator scales_evaluators[] = {
    [JG_UNITS_MPC] = {"scales (epochs; Jeans, filtering and half-suppression scales as jeansgrow "
                      "scales)",
                      JG_SCAN_THERMAL_POINT_COLUMNS, thermal_point_columns,
                      SCALES_REDSHIFT_COLUMNS, jg__report_scales_columns[JG_UNITS_MPC] + 1,
                      jg__report_scan_scales_conventions[JG_UNITS_MPC], NULL, NULL,
                      scales_evaluate, &units_mpc},
    [JG_UNITS_MPC_H] = {"scales (epochs; Jeans, filtering and half-suppression scales as "
                        "jeansgrow scales), in h units",
                        JG_SCAN_THERMAL_POINT_COLUMNS, thermal_point_columns,
                        SCALES_REDSHIFT_COLUMNS, jg__report_scales_columns[JG_UNITS_MPC_H] + 1,
                        jg__report_scan_scales_conventions[JG_UNITS_MPC_H], NULL, NULL,
                        scales_evaluate, &units_mpc_h}};

const jg_scan_evaluator *jg_scan_evaluator_scales(jg_output_units units) {
  return &scales_evaluators[units == JG_UNITS_MPC_H ? JG_UNITS_MPC_H : JG_UNITS_MPC];
}
