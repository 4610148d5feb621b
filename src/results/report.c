/*
 * The tables jeansgrow writes (see include/jeansgrow/report.h). Column names
 * are `name[unit]`; every table states its conventions in its header.
 *
 * The stages hand over wavenumbers in 1/Mpc, comoving lengths in Mpc and
 * masses in M_sun; output.units = "Mpc/h" is applied here and nowhere else,
 * at the moment a value is written.
 */
#include "jeansgrow/report.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "jeansgrow/constants.h"
#include "jeansgrow/streaming.h"
#include "jeansgrow/table.h"
#include "jeansgrow/validity.h"
#include "report_tables.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* ---- units --------------------------------------------------------------- */

/* What a column measures decides how output.units converts it. */
typedef enum { Q_NONE, Q_KELVIN, Q_WAVENUMBER, Q_MASS, Q_LENGTH } quantity;

/* The unit names, in the library's units (Mpc) and in h units (Mpc/h). The
 * column lists below build their names from the same words. */
#define U_MPC_WAVENUMBER "1/Mpc"
#define U_MPC_MASS "Msun"
#define U_MPC_LENGTH "Mpc"
#define U_MPC_H_WAVENUMBER "h/Mpc"
#define U_MPC_H_MASS "Msun/h"
#define U_MPC_H_LENGTH "Mpc/h"

static const struct {
  const char *mpc, *mpc_h;
  quantity q;
} unit_names[] = {{U_MPC_WAVENUMBER, U_MPC_H_WAVENUMBER, Q_WAVENUMBER},
                  {U_MPC_MASS, U_MPC_H_MASS, Q_MASS},
                  {U_MPC_LENGTH, U_MPC_H_LENGTH, Q_LENGTH}};

/* The factor that takes a value from the library's unit to the output's:
 * k[h/Mpc] = k[1/Mpc] / h, M[Msun/h] = M[Msun] h, L[Mpc/h] = L[Mpc] h. */
static double unit_factor(quantity q, jg_output_units units, double h) {
  if (units != JG_UNITS_MPC_H) return 1.0;
  switch (q) {
  case Q_WAVENUMBER:
    return 1.0 / h;
  case Q_MASS:
  case Q_LENGTH:
    return h;
  default:
    return 1.0;
  }
}

const char *jg_report_unit(const char *unit, jg_output_units units, double hubble_h,
                           double *factor) {
  for (size_t i = 0; i < sizeof unit_names / sizeof unit_names[0]; i++) {
    if (strcmp(unit, unit_names[i].mpc) != 0) continue;
    if (factor) *factor = unit_factor(unit_names[i].q, units, hubble_h);
    return units == JG_UNITS_MPC_H ? unit_names[i].mpc_h : unit_names[i].mpc;
  }
  if (factor) *factor = 1.0;
  return unit;
}

/* Index of the column and convention tables: a value outside the enum (a
 * hand-filled struct that skipped jg_params_validate) reads as the default. */
static jg_output_units table_units(jg_output_units units) {
  return units == JG_UNITS_MPC_H ? JG_UNITS_MPC_H : JG_UNITS_MPC;
}

/* A column list is written once as COLUMNS(X), X(stem, QUANTITY) per
 * column; these turn it into the names in either unit system and into the
 * quantity of each column, so names and conversions cannot drift apart. */
#define SUFFIX_NONE(u) ""
#define SUFFIX_KELVIN(u) "[K]"
#define SUFFIX_WAVENUMBER(u) "[" U_##u##_WAVENUMBER "]"
#define SUFFIX_MASS(u) "[" U_##u##_MASS "]"
#define NAME_IN_MPC(stem, q) stem SUFFIX_##q(MPC),
#define NAME_IN_MPC_H(stem, q) stem SUFFIX_##q(MPC_H),
#define QUANTITY_OF(stem, q) Q_##q,

/* ---- validity ----------------------------------------------------------- */

/* The preamble with one more convention line: the thermal history's
 * lowest valid redshift, which depends on the history (figures shade what
 * lies below it). */
#define MAX_CONVENTIONS 16
static void write_preamble_with_validity(FILE *f, const char *title, const jg_params *p,
                                         const jg_thermal *th, const char *const *conventions) {
  const char *lines[MAX_CONVENTIONS + 2];
  char validity[256];
  jg_validity_thermal_line(th, validity, sizeof validity);
  int n = 0;
  while (conventions && n < MAX_CONVENTIONS && conventions[n]) lines[n] = conventions[n], n++;
  lines[n++] = validity;
  lines[n] = NULL;
  jg_table_write_preamble(f, title, p, lines);
}

/* ---- history ------------------------------------------------------------ */

static const char *const history_columns[] = {
    "z",        "x_e",      "x_HII", "x_HeII",            "x_HeIII",
    "T_gas[K]", "T_rad[K]", "mu",    "compton_rate[1/s]", "H[km/s/Mpc]",
    "tau",      "visibility", "tau_drag", "gamma_eff"};
#define N_HISTORY_COLUMNS ((int)(sizeof history_columns / sizeof history_columns[0]))

static const char *const history_conventions[] = {
    "x_e = n_e / n_H: free electrons per hydrogen nucleus (helium electrons included)",
    "x_HII, x_HeII, x_HeIII: ionised hydrogen and helium per hydrogen nucleus",
    "mu: mean molecular weight in units of the hydrogen-atom mass",
    "compton_rate: Gamma_C, the coefficient of (T_rad - T_gas) in dT_gas/dt",
    "tau: Thomson optical depth from z = 0 back to z (with reionisation if thermal.reionisation is on)",
    "visibility: (dtau/dz) exp(-tau), per unit redshift",
    "tau_drag: baryon drag depth, integrand of tau divided by R = 3 rho_b / (4 rho_gamma)",
    "gamma_eff: 1 - (1/3) d ln T_gas / d ln a, the adiabatic index of the uniform sound speed "
    "of large Boltzmann codes (perturbations.sound_speed = \"effective_gamma\"), held at 1 "
    "where a heating model raises T_gas",
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

jg_status jg_report_history(FILE *f, const jg_params *p, const jg_thermal *th, jg_error *err) {
  const jg_background *bg = jg_thermal_background(th);
  int n = 0;
  double *z = history_redshifts(p, &n);
  if (!z) return JG_FAIL(err, JG_ENOMEM, "out of memory for the history table");
  write_preamble_with_validity(f, "ionisation and gas-temperature history", p, th,
                               history_conventions);
  jg_table_write_columns(f, history_columns, N_HISTORY_COLUMNS);
  jg_status st = JG_OK;
  for (int i = 0; st == JG_OK && i < n; i++) {
    jg_thermal_state s;
    jg_thermal_state_at(th, z[i], &s);
    double a = 1.0 / (1.0 + z[i]);
    double row[N_HISTORY_COLUMNS] = {z[i],
                                     s.x_e,
                                     s.x_p,
                                     s.x_HeII,
                                     s.x_HeIII,
                                     s.T_gas,
                                     s.T_rad,
                                     s.mu,
                                     s.compton_rate,
                                     jg_background_hubble(bg, a) / JG_H100 * 100.0,
                                     jg_thermal_optical_depth(th, z[i]),
                                     jg_thermal_visibility(th, z[i]),
                                     jg_thermal_drag_depth(th, z[i]),
                                     s.gamma_effective};
    st = jg_table_write_row(f, row, N_HISTORY_COLUMNS, history_columns, err);
  }
  free(z);
  return st;
}

/* ---- epochs ------------------------------------------------------------- */

static const char *const epochs_conventions_mpc_h[] = {
    "units: comoving lengths in Mpc/h (Mpc times h), wavenumbers in h/Mpc (1/Mpc divided by "
    "h), h = cosmology.hubble_h",
    NULL};

jg_status jg_report_epochs(FILE *f, const jg_params *p, const jg_epochs *e, jg_error *err) {
  const jg_output_units units = p->output.units;
  const double h = p->cosmology.hubble_h;
  const int n = jg_epochs_count();
  for (int i = 0; i < n; i++)
    if (jg_epochs_entry(e, i).exists && !isfinite(jg_epochs_entry(e, i).value))
      return JG_FAIL(err, JG_ENUMERIC, "epochs: %s is not finite", jg_epochs_entry(e, i).name);
  jg_table_write_preamble(f, "derived epochs (name, value, unit; '-' = dimensionless)", p,
                          units == JG_UNITS_MPC_H ? epochs_conventions_mpc_h : NULL);
  for (int i = 0; i < n; i++) {
    jg_epoch_entry en = jg_epochs_entry(e, i);
    fprintf(f, "# %s: %s\n", en.name, en.meaning);
  }
  fprintf(f, "# name\tvalue\tunit\n");
  for (int i = 0; i < n; i++) {
    jg_epoch_entry en = jg_epochs_entry(e, i);
    double factor;
    const char *unit = jg_report_unit(en.unit, units, h, &factor);
    /* An epoch this universe does not have stays a comment, so that the
     * table keeps numbers only and still loads as it is. */
    if (!en.exists)
      fprintf(f, "# %s: none (%s)\n", en.name, en.reason);
    else
      fprintf(f, "%s\t%.10g\t%s\n", en.name, en.value * factor, unit[0] ? unit : "-");
  }
  return JG_OK;
}

/* ---- the effective_gamma model's index, in the scales and growth headers -- */

/* One header line with gamma_eff(z) at each output redshift, for the
 * "effective_gamma" sound speed (the other models' gamma is a constant the
 * parameter lines already state). */
static void write_effective_gamma(FILE *f, const jg_params *p, const double *z,
                                  const double *gamma, int n) {
  if (p->perturbations.sound_speed != JG_SOUND_SPEED_EFFECTIVE_GAMMA) return;
  fputs("# gamma_eff(z) = 1 - (1/3) d ln T_gas / d ln a of the stored history, as z: gamma_eff:",
        f);
  for (int i = 0; i < n; i++) fprintf(f, " %.10g: %.6f%s", z[i], gamma[i], i + 1 < n ? "," : "");
  fputc('\n', f);
}

/* ---- scales ------------------------------------------------------------- */

#define SCALES_COLUMNS(X)                                                                  \
  X("z", NONE)                                                                             \
  X("T_gas", KELVIN)                                                                       \
  X("x_e", NONE)                                                                           \
  X("k_J", WAVENUMBER)                                                                     \
  X("M_J", MASS)                                                                           \
  X("k_F", WAVENUMBER)                                                                     \
  X("M_F", MASS)                                                                           \
  X("k_half", WAVENUMBER)                                                                  \
  X("M_half", MASS)                                                                        \
  X("half_found", NONE)                                                                    \
  X("k_J_adiabatic", WAVENUMBER)                                                           \
  X("M_J_adiabatic", MASS)                                                                 \
  X("k_F_integral", WAVENUMBER)                                                            \
  X("M_F_integral", MASS)                                                                  \
  X("k_F_integral_adiabatic", WAVENUMBER)                                                  \
  X("M_F_integral_adiabatic", MASS)                                                        \
  X("M_F_halfwave", MASS)                                                                  \
  X("M_F_integral_halfwave", MASS)                                                         \
  X("k_F_b_over_c", WAVENUMBER)                                                            \
  X("b_over_c_large", NONE)                                                                \
  X("delta_m_large", NONE)                                                                 \
  X("rate_m_large", NONE)                                                                  \
  X("k_F_stream", WAVENUMBER)                                                              \
  X("M_F_stream", MASS)                                                                    \
  X("k_half_stream", WAVENUMBER)                                                           \
  X("M_half_stream", MASS)                                                                  \
  X("flags", NONE)

const char *const jg__report_scales_columns[][JG__REPORT_SCALES_COLUMNS] = {
    [JG_UNITS_MPC] = {SCALES_COLUMNS(NAME_IN_MPC)},
    [JG_UNITS_MPC_H] = {SCALES_COLUMNS(NAME_IN_MPC_H)}};
static const quantity scales_quantities[] = {SCALES_COLUMNS(QUANTITY_OF)};
#define N_SCALES_COLUMNS JG__REPORT_SCALES_COLUMNS
_Static_assert(sizeof scales_quantities / sizeof scales_quantities[0] ==
                   JG__REPORT_SCALES_COLUMNS,
               "JG__REPORT_SCALES_COLUMNS must match the column list");

/* The lines both unit systems share; each table adds its own units line. */
#define SCALES_CONVENTIONS                                                                   \
  "k_J, M_J: isothermal Jeans scale, k_J = a sqrt(4 pi G rho_m) / c_s (comoving), "          \
  "c_s^2 = k_B T_gas / (mu m_H); M_J = (4 pi/3) rho_m0 (pi/k_J)^3 (half-wavelength radius, " \
  "comoving mean matter density)",                                                           \
      "k_J_adiabatic, M_J_adiabatic: the same with c_s^2 = (5/3) k_B T_gas / (mu m_H)",      \
      "k_F, M_F: filtering scale measured on the solved perturbations, "                     \
      "delta_b(k)/delta_b(k->0) = 1 - k^2/k_F^2 at small k (exact k^2 coefficient), with "   \
      "the sound-speed model of perturbations.sound_speed; M_F = (4 pi/3) rho_m0 "           \
      "(2 pi/k_F)^3 (full wavelength, Gnedin 2000); M_F_halfwave = (4 pi/3) rho_m0 "         \
      "(pi/k_F)^3 = M_F/8",                                                                  \
      "k_F_integral, M_F_integral: Gnedin & Hui (1998) integral over the isothermal k_J "    \
      "history from perturbations.z_initial (it counts pressure smoothing before the "       \
      "baryons are released near z_drag: below k_F with the isothermal sound speed; with "   \
      "the fluctuating or adiabatic model it can lie above k_F at low z); _adiabatic: with " \
      "gamma = 5/3",                                                                         \
      "k_F_b_over_c: the same measurement on (delta_b/delta_c)(k) / "                        \
      "(delta_b/delta_c)(k->0)",                                                             \
      "k_half, M_half: where delta_b/delta_c has fallen to half of its k -> 0 value; "       \
      "M_half = (4 pi/3) rho_m0 (pi/k_half)^3; half_found = 0 when no crossing lies in the " \
      "accepted k range (k_half and M_half are then written as 0)",                          \
      "b_over_c_large, delta_m_large, rate_m_large: the k -> 0 limit: delta_b/delta_c, "     \
      "delta_m per unit initial CDM contrast, and d ln delta_m / d ln a",                    \
      "k_F_stream, M_F_stream: with the streaming velocity (streaming.*), from the baryon "   \
      "power averaged over direction and the Maxwellian, <P_b>(k)/P_b(k->0) = 1 - 2 "        \
      "k^2/k_F_stream^2 (exact k^2 coefficient), mass as M_F; k_half_stream, M_half_stream: " \
      "where sqrt(<P_b>/<P_c>) falls to half its k -> 0 value, mass as M_half (0 when no "   \
      "crossing); all equal to k_F, M_F, k_half, M_half when streaming.rms_velocity_kms = 0",   \
      JG__REPORT_FLAGS_CONVENTION

#define SCALES_UNITS_MPC "units: k comoving 1/Mpc, masses M_sun, temperatures K"
#define SCALES_UNITS_MPC_H                                                                   \
  "units: k comoving h/Mpc (1/Mpc divided by h), masses M_sun/h (M_sun times h), "         \
  "temperatures K; h = cosmology.hubble_h"

const char *const jg__report_scales_conventions[][JG__REPORT_SCALES_CONVENTIONS] = {
    [JG_UNITS_MPC] = {SCALES_CONVENTIONS, SCALES_UNITS_MPC, NULL},
    [JG_UNITS_MPC_H] = {SCALES_CONVENTIONS, SCALES_UNITS_MPC_H, NULL}};

const char *const jg__report_scan_scales_conventions[][JG__REPORT_SCALES_CONVENTIONS + 1] = {
    [JG_UNITS_MPC] = {JG__REPORT_SCAN_EPOCHS_CONVENTION, SCALES_CONVENTIONS, SCALES_UNITS_MPC,
                      NULL},
    [JG_UNITS_MPC_H] = {JG__REPORT_SCAN_EPOCHS_CONVENTION, SCALES_CONVENTIONS,
                        SCALES_UNITS_MPC_H, NULL}};

int jg_report_scales_column_count(void) { return N_SCALES_COLUMNS; }

const char *const *jg_report_scales_columns(jg_output_units units) {
  return jg__report_scales_columns[table_units(units)];
}

const char *const *jg_report_scales_conventions(jg_output_units units) {
  return jg__report_scales_conventions[table_units(units)];
}

const char *jg_report_scales_column_name(jg_output_units units, int i) {
  return i >= 0 && i < N_SCALES_COLUMNS ? jg_report_scales_columns(units)[i] : NULL;
}

void jg_report_scales_row(const jg_thermal *th, const jg_scales_point *s, jg_output_units units,
                          double *row) {
  jg_thermal_state st;
  jg_thermal_state_at(th, s->z, &st);
  /* The h of the cosmology these scales belong to (in a scan, the point's). */
  const double h = jg_thermal_background(th)->cosmology.hubble_h;
  double values[N_SCALES_COLUMNS] = {s->z,
                                     st.T_gas,
                                     st.x_e,
                                     s->k_jeans_isothermal,
                                     s->m_jeans_isothermal,
                                     s->k_filter_solved,
                                     s->m_filter_solved,
                                     s->half_found ? s->k_half : 0.0,
                                     s->half_found ? s->m_half : 0.0,
                                     s->half_found ? 1.0 : 0.0,
                                     s->k_jeans_adiabatic,
                                     s->m_jeans_adiabatic,
                                     s->k_filter_integral_isothermal,
                                     s->m_filter_integral_isothermal,
                                     s->k_filter_integral_adiabatic,
                                     s->m_filter_integral_adiabatic,
                                     s->m_filter_solved_half,
                                     s->m_filter_integral_isothermal_half,
                                     s->k_filter_solved_cdm,
                                     s->b_over_c_large,
                                     s->delta_m_large,
                                     s->growth_rate_large,
                                     s->k_filter_stream,
                                     s->m_filter_stream,
                                     s->half_stream_found ? s->k_half_stream : 0.0,
                                     s->half_stream_found ? s->m_half_stream : 0.0,
                                     jg_validity_scales_flags(th, s)};
  for (int i = 0; i < N_SCALES_COLUMNS; i++)
    row[i] = values[i] * unit_factor(scales_quantities[i], units, h);
}

jg_status jg_report_scales(FILE *f, const jg_params *p, const jg_thermal *th,
                           const jg_scales_point *s, int n, jg_error *err) {
  const jg_output_units units = p->output.units;
  const char *const *columns = jg_report_scales_columns(units);
  write_preamble_with_validity(f, "Jeans, filtering and half-suppression scales", p, th,
                               jg_report_scales_conventions(units));
  double z[JG_MAX_REDSHIFTS], gamma[JG_MAX_REDSHIFTS];
  const int n_gamma = n < JG_MAX_REDSHIFTS ? n : JG_MAX_REDSHIFTS;
  for (int i = 0; i < n_gamma; i++) {
    jg_thermal_state st;
    jg_thermal_state_at(th, s[i].z, &st);
    z[i] = s[i].z;
    gamma[i] = st.gamma_effective;
  }
  write_effective_gamma(f, p, z, gamma, n_gamma);
  jg_table_write_columns(f, columns, N_SCALES_COLUMNS);
  double row[N_SCALES_COLUMNS];
  for (int i = 0; i < n; i++) {
    jg_report_scales_row(th, &s[i], units, row);
    jg_status st = jg_table_write_row(f, row, N_SCALES_COLUMNS, columns, err);
    if (st != JG_OK) return st;
  }
  return JG_OK;
}

/* ---- growth ------------------------------------------------------------- */

#define GROWTH_COLUMNS(X)                                                                 \
  X("z", NONE)                                                                            \
  X("k", WAVENUMBER)                                                                      \
  X("delta_c", NONE)                                                                      \
  X("delta_b", NONE)                                                                      \
  X("delta_m", NONE)                                                                      \
  X("delta_T", NONE)                                                                      \
  X("b_over_c", NONE)                                                                     \
  X("b_over_m", NONE)                                                                     \
  X("suppression", NONE)                                                                  \
  X("rate_c", NONE)                                                                       \
  X("rate_b", NONE)                                                                       \
  X("rate_m", NONE)                                                                       \
  X("stream_b_power", NONE)                                                               \
  X("stream_c_power", NONE)                                                               \
  X("stream_b_power_rms", NONE)                                                           \
  X("stream_b_power_patch", NONE)                                                         \
  X("flags", NONE)                                                                        \
  X("D_ref", NONE)                                                                        \
  X("rate_ref", NONE)

static const quantity growth_quantities[] = {GROWTH_COLUMNS(QUANTITY_OF)};
#define N_GROWTH_COLUMNS JG__REPORT_GROWTH_COLUMNS
_Static_assert(sizeof growth_quantities / sizeof growth_quantities[0] == JG__REPORT_GROWTH_COLUMNS,
               "JG__REPORT_GROWTH_COLUMNS must match the column list");
const char *const jg__report_growth_columns[][N_GROWTH_COLUMNS] = {
    [JG_UNITS_MPC] = {GROWTH_COLUMNS(NAME_IN_MPC)},
    [JG_UNITS_MPC_H] = {GROWTH_COLUMNS(NAME_IN_MPC_H)}};

#define GROWTH_CONVENTIONS                                                                    \
  "delta_c, delta_b, delta_m, delta_T: CDM, baryon, total-matter and gas-temperature "        \
  "contrasts per unit initial CDM contrast (delta_c = 1 at perturbations.z_initial; the "     \
  "start line below says how the perturbations started)",                                     \
      "delta_m = (1 - f_b) delta_c + f_b delta_b; b_over_c = delta_b/delta_c; "               \
      "b_over_m = delta_b/delta_m",                                                           \
      "suppression: b_over_c divided by its k -> 0 value at the same z (pressure alone)",     \
      "rate_x: d ln delta_x / d ln a",                                                        \
      "stream_b_power, stream_c_power: with the streaming velocity (streaming.*), "            \
      "<|delta|^2> over direction and the Maxwellian divided by |delta(v_bc = 0)|^2, baryons " \
      "and dark matter; stream_b_power_rms, stream_b_power_patch: the baryons' direction "     \
      "average at |v_bc| = v_rms and at streaming.patch_multiple v_rms; 1 above "              \
      "streaming.start_redshift and when streaming.rms_velocity_kms = 0",                      \
      "D_ref, rate_ref: scale-independent growth D(z) of matter + dark energy without "       \
      "radiation (Heath 1977 integral for w = -1; its differential equation otherwise), "     \
      "D -> a early, and d ln D / d ln a, for reference (the same on every row of a redshift)", \
      JG__REPORT_FLAGS_CONVENTION

#define GROWTH_UNITS_MPC "units: k comoving 1/Mpc"
#define GROWTH_UNITS_MPC_H "units: k comoving h/Mpc (1/Mpc divided by h); h = cosmology.hubble_h"
static const char *const growth_conventions[][10] = {
    [JG_UNITS_MPC] = {GROWTH_CONVENTIONS, GROWTH_UNITS_MPC, NULL},
    [JG_UNITS_MPC_H] = {GROWTH_CONVENTIONS,
                        GROWTH_UNITS_MPC_H,
                        NULL}};
const char *const jg__report_scan_growth_conventions[][JG__REPORT_SCAN_GROWTH_CONVENTIONS] = {
    [JG_UNITS_MPC] = {JG__REPORT_SCAN_EPOCHS_CONVENTION, GROWTH_CONVENTIONS, GROWTH_UNITS_MPC,
                      NULL},
    [JG_UNITS_MPC_H] = {JG__REPORT_SCAN_EPOCHS_CONVENTION, GROWTH_CONVENTIONS,
                        GROWTH_UNITS_MPC_H, NULL}};

/* Without a real history there is no reference growth: its two columns are
 * left out rather than filled. */
static int growth_column_count(const jg_growth_grid *g) {
  return g->has_reference ? N_GROWTH_COLUMNS : N_GROWTH_COLUMNS - 2;
}

void jg_report_growth_header(FILE *f, const jg_params *p, const jg_thermal *th,
                             const jg_growth_grid *g) {
  const jg_output_units units = table_units(p->output.units);
  /* The conventions plus the start line, which depends on the run. */
  const char *conventions[MAX_CONVENTIONS + 1] = {0};
  int n_conv = 0;
  for (; growth_conventions[units][n_conv]; n_conv++)
    conventions[n_conv] = growth_conventions[units][n_conv];
  conventions[n_conv++] = g->start;
  conventions[n_conv] = NULL;
  write_preamble_with_validity(f, "linear growth by wavenumber", p, th, conventions);
  double gamma[JG_MAX_REDSHIFTS];
  const int n_gamma = g->n_z < JG_MAX_REDSHIFTS ? g->n_z : JG_MAX_REDSHIFTS;
  for (int iz = 0; iz < n_gamma; iz++) gamma[iz] = g->limit[iz].gamma_uniform;
  write_effective_gamma(f, p, g->z, gamma, n_gamma);
  jg_table_write_columns(f, jg__report_growth_columns[units], growth_column_count(g));
}

jg_status jg_report_growth_rows(FILE *f, const jg_params *p, const jg_thermal *th,
                                const jg_growth_grid *g, int first, int end, jg_error *err) {
  const int n_rows = g->n_z * g->n_k;
  if (first < 0 || first > end || end > n_rows)
    return JG_FAIL(err, JG_EINVAL, "growth rows [%d, %d) asked of a table of %d rows", first, end,
                   n_rows);
  const jg_output_units units = table_units(p->output.units);
  const double h = p->cosmology.hubble_h;
  const char *const *columns = jg__report_growth_columns[units];
  const int n_columns = growth_column_count(g);
  double row[N_GROWTH_COLUMNS];
  for (int i = first; i < end; i++) {
    jg__report_growth_row(th, g, i % g->n_k, i / g->n_k, units, h, row);
    jg_status st = jg_table_write_row(f, row, n_columns, columns, err);
    if (st != JG_OK) return st;
  }
  return JG_OK;
}

jg_status jg_report_growth(FILE *f, const jg_params *p, const jg_thermal *th,
                           const jg_growth_grid *g, jg_error *err) {
  jg_report_growth_header(f, p, th, g);
  return jg_report_growth_rows(f, p, th, g, 0, g->n_z * g->n_k, err);
}

void jg__report_growth_row(const jg_thermal *th, const jg_growth_grid *g, int ik, int iz,
                           jg_output_units units, double h, double *row) {
  const double large = g->limit[iz].k0.b_over_c;
  const jg_perturb_point *pt = jg_growth_grid_at(g, ik, iz);
  const jg_stream_power *streamed = g->stream ? &g->stream[(size_t)ik * g->n_z + iz] : NULL;
  const double values[N_GROWTH_COLUMNS] = {pt->z,        pt->k,        pt->delta_c,
                                           pt->delta_b,  pt->delta_m,  pt->delta_T,
                                           pt->b_over_c, pt->delta_b / pt->delta_m,
                                           pt->b_over_c / large,
                                           pt->growth_c, pt->growth_b, pt->growth_m,
                                           streamed ? streamed->b_power : 1.0,
                                           streamed ? streamed->c_power : 1.0,
                                           streamed ? streamed->b_power_rms : 1.0,
                                           streamed ? streamed->b_power_patch : 1.0,
                                           jg_validity_growth_flags(th, pt->z, pt->k, large),
                                           g->has_reference ? g->D_ref[iz] : 0.0,
                                           g->has_reference ? g->f_ref[iz] : 0.0};
  for (int i = 0; i < N_GROWTH_COLUMNS; i++)
    row[i] = values[i] * unit_factor(growth_quantities[i], table_units(units), h);
}
