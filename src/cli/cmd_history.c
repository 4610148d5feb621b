/* `jeansgrow history`: the ionisation and gas-temperature history as a table. */
#include <math.h>
#include <stdlib.h>

#include "cli.h"

static const char *const history_columns[] = {
    "z",        "x_e",     "x_HII",      "x_HeII",           "x_HeIII",
    "T_gas[K]", "T_rad[K]", "mu",        "compton_rate[1/s]", "H[km/s/Mpc]",
    "tau",      "visibility", "tau_drag"};
#define N_HISTORY_COLUMNS ((int)(sizeof history_columns / sizeof history_columns[0]))

static const char *const history_conventions[] = {
    "x_e = n_e / n_H: free electrons per hydrogen nucleus (helium electrons included)",
    "x_HII, x_HeII, x_HeIII: ionised hydrogen and helium per hydrogen nucleus",
    "mu: mean molecular weight in units of the hydrogen-atom mass",
    "compton_rate: Gamma_C, the coefficient of (T_rad - T_gas) in dT_gas/dt",
    "tau: Thomson optical depth from z = 0 back to z (no reionisation)",
    "visibility: (dtau/dz) exp(-tau), per unit redshift",
    "tau_drag: baryon drag depth, integrand of tau divided by R = 3 rho_b / (4 rho_gamma)",
    NULL};

static int descending(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x < y) - (x > y);
}

/* Rows uniform in ln(1+z) from the start redshift to history_z_min, plus
 * every requested redshift in that range, in decreasing z, no duplicates. */
static double *history_redshifts(const jg_params *p, int *count) {
  const int n_grid = p->output.history_rows;
  const int n_max = n_grid + p->output.n_redshifts;
  double *z = malloc(sizeof(double) * (size_t)n_max);
  if (!z) return NULL;
  const double lo = log1p(p->output.history_z_min), hi = log1p(p->thermal.start_redshift);
  int n = 0;
  for (int i = 0; i < n_grid; i++) z[n++] = expm1(hi + (lo - hi) * i / (n_grid - 1));
  z[0] = p->thermal.start_redshift;
  z[n_grid - 1] = p->output.history_z_min;
  for (int i = 0; i < p->output.n_redshifts; i++) {
    double zr = p->output.redshifts[i];
    if (zr >= p->output.history_z_min && zr <= p->thermal.start_redshift) z[n++] = zr;
  }
  qsort(z, (size_t)n, sizeof *z, descending);
  int m = 0;
  for (int i = 0; i < n; i++)
    if (m == 0 || z[i] != z[m - 1]) z[m++] = z[i];
  *count = m;
  return z;
}

static jg_status write_history(FILE *f, const jg_params *p, const jg_thermal *th,
                               const double *z, int n, jg_error *err) {
  const jg_background *bg = jg_thermal_background(th);
  jg_table_write_preamble(f, "ionisation and gas-temperature history", p, history_conventions);
  jg_table_write_columns(f, history_columns, N_HISTORY_COLUMNS);
  for (int i = 0; i < n; i++) {
    jg_thermal_state s;
    jg_thermal_state_at(th, z[i], &s);
    double a = 1.0 / (1.0 + z[i]);
    double row[N_HISTORY_COLUMNS] = {
        z[i],     s.x_e,      s.x_p,     s.x_HeII,
        s.x_HeIII, s.T_gas,   s.T_rad,   s.mu,
        s.compton_rate,
        jg_background_hubble(bg, a) / JG_H100 * 100.0,
        jg_thermal_optical_depth(th, z[i]),
        jg_thermal_visibility(th, z[i]),
        jg_thermal_drag_depth(th, z[i])};
    jg_status st = jg_table_write_row(f, row, N_HISTORY_COLUMNS, history_columns, err);
    if (st != JG_OK) return st;
  }
  return JG_OK;
}

int cmd_history(const cli_command *cmd, int argc, char **argv) {
  cli_options o;
  jg_params p;
  int rc = cli_parse_options(cmd, argc, argv, &o);
  if (rc < 0) rc = cli_load_params(&o, &p);
  if (rc >= 0) return rc;

  jg_output *out = NULL;
  if ((rc = cli_open_output(&o, &out)) >= 0) return rc;
  jg_background *bg = NULL;
  jg_thermal *th = NULL;
  if ((rc = cli_build_history(&p, &bg, &th)) >= 0) {
    cli_discard_output(out);
    return rc;
  }
  int n = 0;
  double *z = history_redshifts(&p, &n);
  jg_error err;
  jg_error_clear(&err);
  jg_status st = z ? write_history(jg_output_stream(out), &p, th, z, n, &err)
                   : JG_FAIL(&err, JG_ENOMEM, "out of memory for the history table");
  free(z);
  jg_thermal_free(th);
  jg_background_free(bg);
  if (st != JG_OK) {
    cli_discard_output(out);
    return cli_report(&err);
  }
  return cli_commit_output(out);
}
