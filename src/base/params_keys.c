/*
 * The key table: every key of a parameter file with its type, its place in
 * jg_params, its allowed range and its documentation. The loader, the range
 * checks, the header written into every output table and `jeansgrow keys`
 * all walk this one table, so a key cannot be documented one way and
 * checked another.
 *
 * libconfig 1.5 reads `1` as an integer and `1.0` as a float; number-valued
 * keys accept both, integer-valued keys accept only integers.
 */
#include "jeansgrow/params.h"

#include <limits.h>
#include <math.h>
#include <stddef.h>
#include <string.h>

#include "params_internal.h"

#define P_OFF(field) offsetof(jg_params, field)
#define NUMBER(key, field, unit, def, allowed, lo, lo_open, hi, hi_open, meaning) \
  {{key, "number", unit, def, allowed, meaning}, JG__KIND_NUMBER, P_OFF(field), 0, 0, 0, 0, lo, hi, lo_open, hi_open, NULL, 0}
#define REQUIRED_NUMBER(key, field, unit, allowed, lo, lo_open, hi, hi_open, meaning) \
  {{key, "number", unit, "required", allowed, meaning}, JG__KIND_NUMBER, P_OFF(field), 0, 0, 0, 1, lo, hi, lo_open, hi_open, NULL, 0}
#define INTEGER(key, field, def, allowed, lo, hi, meaning) \
  {{key, "integer", "", def, allowed, meaning}, JG__KIND_INTEGER, P_OFF(field), 0, 0, 0, 0, lo, hi, 0, 0, NULL, 0}

static const char *const sound_speed_words[] = {"fluctuating", "isothermal", "adiabatic",
                                                 "effective_gamma", NULL};
static const char *const stepper_words[] = {"msbdf+rk8pd", "msbdf", "rosenbrock", NULL};
static const char *const units_words[] = {"Mpc", "Mpc/h", NULL};
static const char *const mass_radius_words[] = {"half_wavelength", "full_wavelength", NULL};
static const char *const table_k_unit_words[] = {"1/Mpc", "h/Mpc", NULL};
static const char *const table_separator_words[] = {"blanks", "commas", NULL};
static const char *const table_gauge_words[] = {"newtonian", "synchronous", NULL};
static const char *const reionisation_words[] = {"none", "tanh", "tanh+heating", NULL};

const jg__param_spec jg__param_specs[] = {
    REQUIRED_NUMBER("cosmology.hubble_h", cosmology.hubble_h, "", "0.1 <= value <= 5", 0.1, 0, 5, 0,
                    "H0 / (100 km/s/Mpc)"),
    REQUIRED_NUMBER("cosmology.baryon_density_h2", cosmology.baryon_density_h2, "",
                    "0 < value <= 1", 0, 1, 1, 0, "baryon density Omega_b h^2"),
    REQUIRED_NUMBER("cosmology.cdm_density_h2", cosmology.cdm_density_h2, "", "0.01 <= value <= 2",
                    0.01, 0, 2, 0, "cold dark matter density Omega_c h^2"),
    NUMBER("cosmology.curvature_omega", cosmology.curvature_omega, "", "0.0",
           "-1 < value < 1 (and H^2 > 0 at all times)", -1, 1, 1, 1,
           "curvature density Omega_k today (negative: closed)"),
    NUMBER("cosmology.cmb_temperature_K", cosmology.cmb_temperature_K, "K", "2.7255",
           "1 <= value <= 30", 1, 0, 30, 0, "CMB temperature today"),
    NUMBER("cosmology.helium_mass_fraction", cosmology.helium_mass_fraction, "", "0.2454",
           "0 <= value < 1", 0, 0, 1, 1, "primordial helium mass fraction Y_P"),
    NUMBER("cosmology.neutrino_number_eff", cosmology.neutrino_number_eff, "", "3.046",
           "0 <= value <= 20", 0, 0, 20, 0,
           "effective number of massless neutrino species N_eff"),
    NUMBER("cosmology.de_w0", cosmology.de_w0, "", "-1.0", "-3 <= value <= 0", -3, 0, 0, 0,
           "dark-energy equation of state today, w0"),
    NUMBER("cosmology.de_wa", cosmology.de_wa, "", "0.0", "-3 <= value <= 3", -3, 0, 3, 0,
           "its evolution, w(a) = w0 + wa (1 - a)"),

    NUMBER("thermal.start_redshift", thermal.start_redshift, "", "8000.0",
           "3000 <= value <= 100000", 3000, 0, 1e5, 0,
           "first redshift integrated; Saha equilibrium is used above it"),
    NUMBER("thermal.recombination_fudge", thermal.recombination_fudge, "", "1.14",
           "0.5 <= value <= 2", 0.5, 0, 2, 0,
           "fudge factor F on the case-B recombination coefficient"),
    NUMBER("thermal.saha_limit", thermal.saha_limit, "", "0.99", "0.5 <= value <= 0.9999", 0.5,
           0, 0.9999, 0, "hydrogen follows Saha equilibrium while x_p is above this"),
    NUMBER("thermal.quasi_static_limit", thermal.quasi_static_limit, "", "0.001",
           "1e-4 <= value <= 0.1", 1e-4, 0, 0.1, 0,
           "T_gas takes its quasi-static value while H / Gamma_C is below this (and while "
           "hydrogen is in Saha equilibrium)"),
    NUMBER("thermal.rel_tol", thermal.rel_tol, "", "1e-10", "1e-13 <= value <= 1e-5", 1e-13, 0,
           1e-5, 0, "relative tolerance of the stiff integration"),
    NUMBER("thermal.abs_tol", thermal.abs_tol, "", "1e-12", "0 < value <= 1e-5", 0, 1, 1e-5, 0,
           "absolute tolerance of the stiff integration (x_p, and T_gas in K)"),
    INTEGER("thermal.grid_points", thermal.grid_points, "1500", "500 <= value <= 1000000", 500,
            1000000,
            "nodes of the stored history uniform in ln a (about 160 more are graded around the "
            "phase switches and the ends)"),
    {{"thermal.reionisation", "one of \"none\", \"tanh\", \"tanh+heating\"", "", "\"none\"",
      "none, tanh or tanh+heating",
      "reionisation of H and He: none; the ionised fraction a tanh in (1+z)^(3/2) (ionisation "
      "only); or the same with the gas photo-heated (README, \"Reionisation and heating\")"},
     JG__KIND_CHOICE, P_OFF(thermal.reionisation), 0, 0, 0, 0, 0, 2, 0, 0, reionisation_words, 0},
    NUMBER("thermal.reionisation_redshift", thermal.reionisation_redshift, "", "7.67",
           "2 <= value <= 30", 2, 0, 30, 0,
           "redshift where half the hydrogen (and He I) is reionised (Planck 2018: 7.67)"),
    NUMBER("thermal.reionisation_width", thermal.reionisation_width, "", "0.5",
           "0.05 <= value <= 5", 0.05, 0, 5, 0,
           "width Delta z of the hydrogen reionisation tanh"),
    NUMBER("thermal.helium_reionisation_redshift", thermal.helium_reionisation_redshift, "", "3.5",
           "0.5 <= value <= 10", 0.5, 0, 10, 0,
           "redshift where half the helium is doubly ionised"),
    NUMBER("thermal.helium_reionisation_width", thermal.helium_reionisation_width, "", "0.5",
           "0.05 <= value <= 5", 0.05, 0, 5, 0,
           "width Delta z of the helium double-ionisation tanh"),
    NUMBER("thermal.reionisation_temperature_K", thermal.reionisation_temperature_K, "K",
           "20000.0", "1000 <= value <= 100000", 1000, 0, 1e5, 0,
           "tanh+heating: temperature the gas is heated to as it is ionised"),
    NUMBER("thermal.ionising_spectral_index", thermal.ionising_spectral_index, "", "1.5",
           "0 <= value <= 5", 0, 0, 5, 0,
           "tanh+heating: alpha of the ionising spectrum J_nu ~ nu^-alpha; each photo-ionisation "
           "of the residual H I leaves 13.6 eV / (alpha + 2) as heat"),
    {{"thermal.heating_table", "quoted file name", "", "\"\"",
      "empty, or a readable table (see the README); at most 1023 bytes",
      "heating rate per baryon against z, added to the gas-temperature equation below the "
      "table's top (a relative name in a parameter file from that file's folder, one given "
      "with --set from the current folder); empty: none"},
     JG__KIND_FILE, P_OFF(thermal.heating_table), 0, 0, 0, 0, 0, 0, 0, 0, NULL, JG_MAX_PATH},
    {{"thermal.ionisation_table", "quoted file name", "", "\"\"",
      "empty, or a readable table (see the README); at most 1023 bytes",
      "x_e (and optionally T_gas) against z, replacing the computed ones below the table's "
      "top (a relative name in a parameter file from that file's folder, one given with --set "
      "from the current folder); empty: none"},
     JG__KIND_FILE, P_OFF(thermal.ionisation_table), 0, 0, 0, 0, 0, 0, 0, 0, NULL, JG_MAX_PATH},

    NUMBER("perturbations.k_min", perturbations.k_min, "1/Mpc", "1.0", "1 <= value <= 1e5",
           JG_PARAMS_K_LOWEST, 0, JG_PARAMS_K_HIGHEST, 0,
           "smallest comoving wavenumber of the log-spaced grid, in 1/Mpc whatever "
           "output.units says (photon pressure and Silk damping are neglected, which needs "
           "k >= 1/Mpc)"),
    NUMBER("perturbations.k_max", perturbations.k_max, "1/Mpc", "5000.0",
           "k_min <= value <= 1e5", JG_PARAMS_K_LOWEST, 0, JG_PARAMS_K_HIGHEST, 0,
           "largest comoving wavenumber of the grid, in 1/Mpc whatever output.units says"),
    INTEGER("perturbations.k_count", perturbations.k_count, "128", "1 <= value <= 4096", 1,
            JG_MAX_WAVENUMBERS, "number of grid wavenumbers"),
    {{"perturbations.k_values", "list of numbers", "1/Mpc", "[]",
      "0 to 4096 values, each 1 <= k <= 1e5",
      "explicit wavenumbers, used instead of the grid (empty: use the grid), in 1/Mpc "
      "whatever output.units says"},
     JG__KIND_NUMBER_LIST, P_OFF(perturbations.k_values), P_OFF(perturbations.n_k_values), 0,
     JG_MAX_WAVENUMBERS, 0, JG_PARAMS_K_LOWEST, JG_PARAMS_K_HIGHEST, 0, 0, NULL, 0},
    NUMBER("perturbations.z_initial", perturbations.z_initial, "", "10000.0",
           "0 < value <= 100000, >= 1500 unless the start table gives the dark matter's "
           "velocity, and above every output redshift", 0, 1, 1e5, 0,
           "redshift where the perturbations start: CDM on the Meszaros growing mode and "
           "baryons at rest, or as perturbations.initial_table gives them"),
    {{"perturbations.sound_speed",
      "one of \"fluctuating\", \"isothermal\", \"adiabatic\", \"effective_gamma\"", "",
      "\"fluctuating\"", "fluctuating, isothermal, adiabatic or effective_gamma",
      "gas pressure model: delta_T evolved (scale dependent), or uniform with gamma = 1, 5/3 "
      "or gamma_eff(z) = 1 - (1/3) d ln T_gas / d ln a (the uniform sound speed of large "
      "Boltzmann codes)"},
     JG__KIND_CHOICE, P_OFF(perturbations.sound_speed), 0, 0, 0, 0, 0, 3, 0, 0, sound_speed_words, 0},
    {{"perturbations.ionisation_perturbation", "boolean", "", "true", "true or false",
      "the fluctuating model also evolves the perturbation of the free-electron fraction "
      "(faster recombination where the gas is denser), which feeds back on delta_T and the "
      "pressure; false: x_e unperturbed, as in earlier versions"},
     JG__KIND_BOOLEAN, P_OFF(perturbations.ionisation_perturbation), 0, 0, 0, 0, 0, 1, 0, 0, NULL, 0},
    {{"perturbations.stepper", "one of \"msbdf+rk8pd\", \"msbdf\", \"rosenbrock\"", "",
      "\"rosenbrock\"", "msbdf+rk8pd, msbdf or rosenbrock",
      "GSL steppers (the cross-check path): implicit msbdf while the drag and Compton rates "
      "exceed 50 H, explicit rk8pd after; or msbdf throughout; or the built-in 4th-order "
      "L-stable Rosenbrock method (fastest)"},
     JG__KIND_CHOICE, P_OFF(perturbations.stepper), 0, 0, 0, 0, 0, 2, 0, 0, stepper_words, 0},
    {{"perturbations.initial_table", "quoted file name", "", "\"\"",
      "empty, or a readable table (see the README); at most 1023 bytes",
      "start per wavenumber at z_initial (the baryons; the dark matter too if it gives its "
      "velocity), read from this file (a relative name in a parameter file from that file's "
      "folder, one given with --set from the current folder); empty: our own start"},
     JG__KIND_FILE, P_OFF(perturbations.initial_table), 0, 0, 0, 0, 0, 0, 0, 0, NULL, JG_MAX_PATH},
    {{"perturbations.initial_columns", "quoted words", "", "\"\"",
      "empty, or words from k, delta_c, delta_b, delta_T, b_over_c, T_over_c, velocity_ratio, "
      "rate_c, rate_b, theta_c, theta_b, - (see the README); at most 255 bytes",
      "what each column of initial_table holds, in order (- skips a column); empty: k "
      "b_over_c velocity_ratio and optionally T_over_c"},
     JG__KIND_TEXT, P_OFF(perturbations.initial_columns), 0, 0, 0, 0, 0, 0, 0, 0, NULL,
     JG_MAX_COLUMN_TEXT},
    {{"perturbations.initial_k_unit", "one of \"1/Mpc\", \"h/Mpc\"", "", "\"1/Mpc\"",
      "1/Mpc or h/Mpc",
      "unit of the wavenumbers and velocity divergences theta of initial_table (h = "
      "cosmology.hubble_h)"},
     JG__KIND_CHOICE, P_OFF(perturbations.initial_k_unit), 0, 0, 0, 0, 0, 1, 0, 0,
     table_k_unit_words, 0},
    {{"perturbations.initial_separator", "one of \"blanks\", \"commas\"", "", "\"blanks\"",
      "blanks or commas", "what separates the cells of initial_table: spaces and tabs, or commas"},
     JG__KIND_CHOICE, P_OFF(perturbations.initial_separator), 0, 0, 0, 0, 0, 1, 0, 0,
     table_separator_words, 0},
    {{"perturbations.initial_gauge", "one of \"newtonian\", \"synchronous\"", "",
      "\"newtonian\"", "newtonian or synchronous",
      "gauge of the theta columns of initial_table: conformal Newtonian, or synchronous "
      "comoving with the dark matter (theta_c = 0)"},
     JG__KIND_CHOICE, P_OFF(perturbations.initial_gauge), 0, 0, 0, 0, 0, 1, 0, 0,
     table_gauge_words, 0},
    {{"perturbations.initial_second_table", "quoted file name", "", "\"\"",
      "empty, or a readable table of the same layout and wavenumbers; at most 1023 bytes",
      "second snapshot at initial_second_redshift: the growth rates come from the two "
      "(relative names as for initial_table); empty: none"},
     JG__KIND_FILE, P_OFF(perturbations.initial_second_table), 0, 0, 0, 0, 0, 0, 0, 0, NULL,
     JG_MAX_PATH},
    NUMBER("perturbations.initial_second_redshift", perturbations.initial_second_redshift, "",
           "0.0", "0 <= value <= 100000", 0, 0, 1e5, 0,
           "redshift of initial_second_table, within 0.1 of z_initial in ln(1+z)"),
    NUMBER("perturbations.rel_tol", perturbations.rel_tol, "", "1e-8", "1e-13 <= value <= 1e-3",
           1e-13, 0, 1e-3, 0, "relative tolerance of the perturbation integration: GSL's local error per step; "
           "the rosenbrock stepper holds its error estimate to 100 times it, calibrated so that "
           "the defaults give delta_b/delta_c to 1e-6 over the whole parameter box"),
    NUMBER("perturbations.abs_tol", perturbations.abs_tol, "", "1e-10", "0 < value <= 1e-3", 0,
           1, 1e-3, 0, "absolute tolerance: GSL steppers in units of the initial CDM contrast; rosenbrock "
           "100 times it, relative to the largest value so far of the component's group"),

    {{"output.redshifts", "list of numbers", "",
      "[1100.0, 1000.0, 500.0, 200.0, 100.0, 50.0, 20.0, 10.0]",
      "1 to 512 values, each 0 <= z <= thermal.start_redshift", "redshifts reported by every "
      "table (added exactly to the history table)"},
     JG__KIND_NUMBER_LIST, P_OFF(output.redshifts), P_OFF(output.n_redshifts), 1, JG_MAX_REDSHIFTS, 0,
     0, 1e5, 0, 0, NULL, 0},
    INTEGER("output.history_rows", output.history_rows, "1000", "10 <= value <= 1000000", 10,
            1000000, "rows of the history table, uniform in ln(1+z)"),
    NUMBER("output.history_z_min", output.history_z_min, "", "0.0",
           "0 <= value < thermal.start_redshift", 0, 0, 1e5, 1,
           "last (lowest) redshift of the history table"),
    {{"output.units", "one of \"Mpc\", \"Mpc/h\"", "", "\"Mpc\"", "Mpc or Mpc/h",
      "units of what is written: k in 1/Mpc, masses in Msun, comoving lengths in Mpc; or "
      "h/Mpc, Msun/h and Mpc/h with h = cosmology.hubble_h (inputs stay in 1/Mpc)"},
     JG__KIND_CHOICE, P_OFF(output.units), 0, 0, 0, 0, 0, 1, 0, 0, units_words, 0},
    {{"output.mass_radius", "one of \"half_wavelength\", \"full_wavelength\"", "",
      "\"half_wavelength\"", "half_wavelength or full_wavelength",
      "radius of the sphere every mass of the run summary and the figures is quoted with: pi/k, "
      "or 2 pi/k (8 times the mass); the tables hold both"},
     JG__KIND_CHOICE, P_OFF(output.mass_radius), 0, 0, 0, 0, 0, 1, 0, 0, mass_radius_words, 0},

    NUMBER("streaming.rms_velocity_kms", streaming.rms_velocity_kms, "km/s", "0.0",
           "0 <= value <= 200", 0, 0, 200, 0,
           "3-D rms baryon-dark matter relative velocity at streaming.start_redshift (about 30 "
           "at z ~ 1020, Tseliakhovich & Hirata 2010, value from memory); 0: no streaming, "
           "the classic results alone"),
    NUMBER("streaming.start_redshift", streaming.start_redshift, "", "1020.0",
           "10 <= value <= 1500", 10, 0, 1500, 0,
           "the flow starts here (the baryons' kinematic release; Tseliakhovich & Hirata 2010 "
           "quote the rms at z ~ 1020, value from memory) and decays as 1/a after"),
    INTEGER("streaming.velocity_nodes", streaming.velocity_nodes, "16", "1 <= value <= 32", 1,
            32,
            "Gauss-Hermite nodes of the velocity along k, v_par >= 0 (the Maxwellian and "
            "direction average; a rule of twice as many nodes, even in v_par)"),
    INTEGER("streaming.direction_nodes", streaming.direction_nodes, "8", "1 <= value <= 32", 1,
            32, "Gauss-Legendre nodes of mu in [0, 1] (direction averages at a fixed speed)"),
    NUMBER("streaming.patch_multiple", streaming.patch_multiple, "", "1.0", "0 <= value <= 5",
           0, 0, 5, 0,
           "the local patch: the stream_b_power_patch column at |v_bc| = this times the rms"),
    NUMBER("streaming.rel_tol", streaming.rel_tol, "", "1e-4", "1e-10 <= value <= 1e-3", 1e-10,
           0, 1e-3, 0,
           "relative tolerance of the streaming solves (their averages are ratios good to "
           "about 1e-4 by their quadrature; tighter costs time, not accuracy)"),
};

const int jg__n_param_specs = (int)(sizeof jg__param_specs / sizeof jg__param_specs[0]);

/* The scan group (read by params_scan.c). Values and counts are checked as a
 * grid by the scan module (scan.h), which knows the varied key's range. */
const jg_param_doc jg__scan_vary_doc = {
    "scan.vary", "list of axes", "", "none",
    "groups { key; from; to; count; spacing } or { key; values }, or texts "
    "\"KEY=FROM:TO:N[:log]\" or \"KEY=[V1, V2]\"",
    "the grid of jeansgrow scan, one axis per varied key, the first varying slowest "
    "(--vary on the command line replaces it)"};

#define V_OFF(field) offsetof(jg__vary_fields, field)
static const char *const spacing_words[] = {"linear", "log", NULL};

const jg__param_spec jg__vary_specs[] = {
    {{"scan.vary[].key", "quoted key", "", "required", "a number or integer key",
      "the key this axis varies"},
     JG__KIND_TEXT, V_OFF(key), 0, 0, 0, 1, 0, 0, 0, 0, NULL, JG__VARY_KEY_SIZE},
    {{"scan.vary[].from", "number", "of the key", "-", "a value the key takes",
      "first value of a range (with to and count)"},
     JG__KIND_NUMBER, V_OFF(from), 0, 0, 0, 0, -HUGE_VAL, HUGE_VAL, 0, 0, NULL, 0},
    {{"scan.vary[].to", "number", "of the key", "-", "a value the key takes, >= from",
      "last value of a range"},
     JG__KIND_NUMBER, V_OFF(to), 0, 0, 0, 0, -HUGE_VAL, HUGE_VAL, 0, 0, NULL, 0},
    {{"scan.vary[].count", "integer", "", "-",
      "1 <= value (the whole grid at most 100000000 points)", "number of values of a range"},
     JG__KIND_INTEGER, V_OFF(count), 0, 0, 0, 0, INT_MIN, INT_MAX, 0, 0, NULL, 0},
    {{"scan.vary[].spacing", "one of \"linear\", \"log\"", "", "\"linear\"", "linear or log",
      "values of a range uniform in the value, or in its logarithm (0 < from)"},
     JG__KIND_CHOICE, V_OFF(spacing), 0, 0, 0, 0, 0, 1, 0, 0, spacing_words, 0},
    {{"scan.vary[].values", "list of numbers", "of the key", "-",
      "1 to 100000 values the key takes", "explicit values, in order, instead of a range"},
     JG__KIND_NUMBER_LIST, V_OFF(values), V_OFF(n_values), 1, JG__VARY_MAX_VALUES, 0, -HUGE_VAL,
     HUGE_VAL, 0, 0, NULL, 0},
};
const int jg__n_vary_specs = (int)(sizeof jg__vary_specs / sizeof jg__vary_specs[0]);

const jg_param_doc *jg_param_scan_doc_at(int i) {
  if (i == 0) return &jg__scan_vary_doc;
  if (i < 1 || i > jg__n_vary_specs) return NULL;
  return &jg__vary_specs[i - 1].doc;
}

const jg__stage_domain jg__stage_domains[] = {
    {"cosmology.curvature_omega", -HUGE_VAL, HUGE_VAL, 1, 1, "a finite number",
     "the background itself refuses any model whose H^2 turns negative, and is tested on "
     "strongly closed ones (Omega_k = -1.5, -5) where that check, not the file range, must act"},
    {"cosmology.cmb_temperature_K", 0.0, 30.0, 1, 0, "0 < value <= 30",
     "the file's lower limit of 1 K is for the thermal history (below it hydrogen recombined "
     "before any allowed start); the background alone is tested down to 0.001 K, where the "
     "radiation is small enough for the matter-only closed forms"},
    {"thermal.rel_tol", 0.0, 1.0, 1, 1, "0 < value < 1",
     "tolerances beyond the file range are legal for a program: the test of a genuine "
     "solver failure asks 1e-300"},
    {"thermal.abs_tol", 0.0, 1.0, 1, 1, "0 < value < 1", "as thermal.rel_tol"},
};
const int jg__n_stage_domains = (int)(sizeof jg__stage_domains / sizeof jg__stage_domains[0]);

/* In the order the loader checks them. */
const jg__param_rule jg__param_rules[] = {
    {{"output.redshifts, thermal.start_redshift",
      "every output redshift <= thermal.start_redshift",
      "the thermal history starts there"},
     NULL, jg__rule_redshifts_in_history},
    {{"cosmology.de_w0, cosmology.de_wa", "de_w0 + de_wa < 1/3",
      "dark energy must fade before radiation at early times (w -> w0 + wa as a -> 0)"},
     "cosmology", jg__rule_dark_energy_fades},
    {{"perturbations.k_min, perturbations.k_max", "k_min <= k_max, unless k_values is given",
      "the grid runs from k_min up to k_max"},
     "perturbations", jg__rule_wavenumbers_ordered},
    {{"perturbations.k_count, perturbations.k_min, perturbations.k_max",
      "k_count = 1 needs k_min = k_max, unless k_values is given",
      "a grid of one point has no spacing to place k_max"},
     "perturbations", jg__rule_single_wavenumber},
    {{"output.redshifts, perturbations.z_initial",
      "every output redshift < perturbations.z_initial",
      "the perturbations start there"},
     NULL, jg__rule_redshifts_after_start},
    {{"perturbations.initial_columns, perturbations.initial_gauge",
      "the columns give k, the baryon density and velocity, each once",
      "the start needs them; a theta needs delta_c, and theta_c is 0 in the synchronous gauge"},
     NULL, jg__rule_start_columns},
    {{"perturbations.initial_second_table, perturbations.initial_second_redshift, "
      "perturbations.z_initial, perturbations.initial_table, perturbations.initial_columns",
      "a second snapshot needs a start table with columns, at abs(ln((1 + z_2)/(1 + "
      "z_initial))) <= 0.1, not 0",
      "the rates are differences of ln delta over that step, which err by about half the step "
      "times the change of the rate"},
     NULL, jg__rule_second_snapshot_near},
    {{"perturbations.z_initial, perturbations.initial_table, perturbations.initial_columns",
      "z_initial >= 1500 unless the start table gives the dark matter's velocity",
      "our own start puts the dark matter on the Meszaros growing mode with smooth baryons, "
      "which holds only while the photons hold the baryons"},
     NULL, jg__rule_own_start_early},
    {{"output.history_z_min, thermal.start_redshift", "history_z_min < thermal.start_redshift",
      "the history table runs down from the start of the thermal history"},
     NULL, jg__rule_history_range_ordered},
};
const int jg__n_param_rules = (int)(sizeof jg__param_rules / sizeof jg__param_rules[0]);

const jg_param_rule *jg_param_rule_at(int i) {
  if (i < 0 || i >= jg__n_param_rules) return NULL;
  return &jg__param_rules[i].doc;
}

const char *const jg__param_groups[] = {"cosmology", "thermal", "perturbations", "output",
                                        "streaming"};
const int jg__n_param_groups = (int)(sizeof jg__param_groups / sizeof jg__param_groups[0]);

static const double default_redshifts[] = {1100.0, 1000.0, 500.0, 200.0,
                                           100.0,  50.0,   20.0,  10.0};

void jg_params_set_defaults(jg_params *p) {
  memset(p, 0, sizeof *p);
  /* Planck 2018 base-LCDM, TT,TE,EE+lowE+lensing (A&A 641, A6, Table 2). */
  p->cosmology.hubble_h = 0.6736;
  p->cosmology.baryon_density_h2 = 0.02237;
  p->cosmology.cdm_density_h2 = 0.1200;
  p->cosmology.curvature_omega = 0.0;
  p->cosmology.cmb_temperature_K = 2.7255;
  p->cosmology.helium_mass_fraction = 0.2454;
  p->cosmology.neutrino_number_eff = 3.046;
  p->cosmology.de_w0 = -1.0;
  p->cosmology.de_wa = 0.0;

  p->thermal.start_redshift = 8000.0;
  p->thermal.recombination_fudge = 1.14;
  p->thermal.saha_limit = 0.99;
  p->thermal.quasi_static_limit = 1e-3;
  p->thermal.rel_tol = 1e-10;
  p->thermal.abs_tol = 1e-12;
  p->thermal.grid_points = 1500;
  p->thermal.reionisation = JG_REIONISATION_NONE;
  p->thermal.reionisation_redshift = 7.67;
  p->thermal.reionisation_width = 0.5;
  p->thermal.helium_reionisation_redshift = 3.5;
  p->thermal.helium_reionisation_width = 0.5;
  p->thermal.reionisation_temperature_K = 2.0e4;
  p->thermal.ionising_spectral_index = 1.5;
  p->thermal.heating_table[0] = '\0';
  p->thermal.ionisation_table[0] = '\0';

  p->perturbations.k_min = 1.0;
  p->perturbations.k_max = 5000.0;
  p->perturbations.k_count = 128;
  p->perturbations.n_k_values = 0;
  p->perturbations.z_initial = 1.0e4;
  p->perturbations.sound_speed = JG_SOUND_SPEED_FLUCTUATING;
  p->perturbations.stepper = JG_PERTURB_STEPPER_ROSENBROCK;
  p->perturbations.ionisation_perturbation = 1;
  p->perturbations.initial_table[0] = '\0';
  p->perturbations.initial_columns[0] = '\0';
  p->perturbations.initial_k_unit = JG_TABLE_K_PER_MPC;
  p->perturbations.initial_separator = JG_TABLE_BLANKS;
  p->perturbations.initial_gauge = JG_TABLE_NEWTONIAN;
  p->perturbations.initial_second_table[0] = '\0';
  p->perturbations.initial_second_redshift = 0.0;
  p->perturbations.rel_tol = 1e-8;
  p->perturbations.abs_tol = 1e-10;

  p->output.n_redshifts = (int)(sizeof default_redshifts / sizeof default_redshifts[0]);
  memcpy(p->output.redshifts, default_redshifts, sizeof default_redshifts);
  p->output.history_rows = 1000;
  p->output.history_z_min = 0.0;
  p->output.units = JG_UNITS_MPC;
  p->output.mass_radius = JG_MASS_RADIUS_HALF_WAVELENGTH;

  p->streaming.rms_velocity_kms = 0.0;
  p->streaming.start_redshift = 1020.0;
  p->streaming.velocity_nodes = 16;
  p->streaming.direction_nodes = 8;
  p->streaming.patch_multiple = 1.0;
  p->streaming.rel_tol = 1e-4;
}

const jg_param_doc *jg_param_doc_at(int i) {
  if (i < 0 || i >= jg__n_param_specs) return NULL;
  return &jg__param_specs[i].doc;
}

const jg_param_doc *jg_param_doc_find(const char *key) {
  const jg_param_doc *d;
  for (int i = 0; key && (d = jg_param_doc_at(i)) != NULL; i++)
    if (strcmp(d->key, key) == 0) return d;
  return NULL;
}

const jg__param_spec *jg__find_spec(const char *key) {
  for (int i = 0; i < jg__n_param_specs; i++)
    if (strcmp(jg__param_specs[i].doc.key, key) == 0) return &jg__param_specs[i];
  return NULL;
}
