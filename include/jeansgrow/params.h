/*
 * Parameters: the plain struct every stage reads, and the parameter-file loader.
 *
 * The numerical stages never see a parameter file: they take a jg_params
 * (or the part of it they need), so a C program or a test can fill one by
 * hand. jg_params_set_defaults() gives the documented defaults;
 * jg_params_load() reads a libconfig file, applies `key=value` overrides and
 * checks every value before any computation starts.
 *
 * The struct holds no pointers: it can be copied freely, which is what a
 * parameter scan does for each grid point.
 */
#ifndef JEANSGROW_PARAMS_H
#define JEANSGROW_PARAMS_H

#include <stdio.h>

#include "jeansgrow/error.h"

#ifdef __cplusplus
extern "C" {
#endif

#define JG_MAX_REDSHIFTS 512 /* longest output.redshifts list */
#define JG_MAX_WAVENUMBERS 4096 /* longest perturbations.k_values list / k_count */
#define JG_MAX_PATH 1024 /* longest file name a parameter may hold, with its final zero */
/* Wavenumbers (1/Mpc, comoving) the fluid equations hold for (why: perturb.h):
 * the key table's range of perturbations.k_min, k_max and k_values, and the
 * perturbation module's JG_PERTURB_K_MIN and JG_PERTURB_K_MAX. */
/* Longest column map (perturbations.initial_columns), with its final zero. */
#define JG_MAX_COLUMN_TEXT 256
/* The lowest perturbations.z_initial of our own start (CDM on the Meszaros
 * growing mode, baryons as given): a table that gives the dark matter's
 * velocity too may start lower. */
#define JG_PARAMS_OWN_START_Z_MIN 1500.0
/* Largest |ln((1 + z_2)/(1 + z_initial))| between two snapshots: the rate
 * from their difference errs by about half this times the change of the
 * rate per e-fold (a few per cent per e-fold near recombination). */
#define JG_PARAMS_SNAPSHOT_STEP_MAX 0.1
#define JG_PARAMS_K_LOWEST 1.0
#define JG_PARAMS_K_HIGHEST 1.0e5

/* The cosmological model (group `cosmology`). */
typedef struct jg_cosmology {
  double hubble_h;             /* H0 / (100 km/s/Mpc) */
  double baryon_density_h2;    /* Omega_b h^2 */
  double cdm_density_h2;       /* Omega_c h^2 */
  double curvature_omega;      /* Omega_k today (closed universe: < 0) */
  double cmb_temperature_K;    /* T_cmb today, K */
  double helium_mass_fraction; /* Y_P, helium mass fraction of the baryons */
  double neutrino_number_eff;  /* N_eff, massless neutrino species */
  double de_w0;                /* dark-energy equation of state today, w0 (CPL) */
  double de_wa;                /* its evolution, w(a) = w0 + wa (1 - a) (CPL) */
} jg_cosmology;

/* The ionisation and gas-temperature history (group `thermal`). */
typedef struct jg_thermal_settings {
  double start_redshift;     /* first redshift integrated; Saha equilibrium above */
  double recombination_fudge;/* F multiplying the case-B coefficient (SSS 1999: 1.14) */
  double saha_limit;         /* hydrogen in Saha equilibrium while x_p exceeds this */
  double quasi_static_limit; /* T_gas quasi-static while H / Gamma_C is below this */
  double rel_tol;            /* relative tolerance of the stiff integration */
  double abs_tol;            /* absolute tolerance (x_p and T_gas in K) */
  int grid_points;           /* stored-history nodes uniform in ln a (plus graded ones) */
  /* Reionisation and photo-heating (src/PHYSICS.md §12); off by default. */
  int reionisation;          /* a jg_reionisation_model */
  double reionisation_redshift;        /* z where the tanh model has ionised half the hydrogen */
  double reionisation_width;           /* its width Delta z */
  double helium_reionisation_redshift; /* z of the second helium ionisation (He II -> He III) */
  double helium_reionisation_width;    /* its width Delta z */
  double reionisation_temperature_K;   /* temperature the gas is heated to as it is ionised */
  double ionising_spectral_index;      /* alpha of J_nu ~ nu^-alpha beyond 13.6 eV */
  /* Heating per baryon against z from a file (README, "Heating table"); empty: none. */
  char heating_table[JG_MAX_PATH];
  /* x_e (and optionally T_gas) against z from a file, replacing the computed
   * ones below its top (README, "Ionisation table"); empty: none. */
  char ionisation_table[JG_MAX_PATH];
} jg_thermal_settings;

/* The reionisation of the intergalactic gas (thermal.reionisation). */
typedef enum {
  JG_REIONISATION_NONE = 0,  /* no reionisation: the history of a universe without stars */
  JG_REIONISATION_TANH = 1,  /* ionised fraction a tanh in (1+z)^(3/2); temperature unheated */
  JG_REIONISATION_TANH_HEATED = 2 /* the same, with photo-heating of the ionised gas */
} jg_reionisation_model;

/* How the gas pressure responds to a density fluctuation. */
typedef enum {
  JG_SOUND_SPEED_FLUCTUATING = 0, /* delta_T evolved (Naoz & Barkana 2005): scale dependent */
  JG_SOUND_SPEED_ISOTHERMAL = 1,  /* delta_T = 0: uniform, gamma = 1 */
  JG_SOUND_SPEED_ADIABATIC = 2,   /* delta_T = (2/3) delta_b: uniform, gamma = 5/3 */
  /* uniform, gamma_eff(z) = 1 - (1/3) d ln T_gas / d ln a of the stored
   * history: the sound speed of large Boltzmann codes, for cross-checks */
  JG_SOUND_SPEED_EFFECTIVE_GAMMA = 3
} jg_sound_speed_model;

/* How the perturbation equations are integrated. */
typedef enum {
  /* GSL msbdf (implicit, analytic Jacobian) while the drag and Compton rates
   * make the system stiff, then GSL rk8pd (explicit, 8th order). */
  JG_PERTURB_STEPPER_MSBDF_RK8PD = 0,
  /* GSL msbdf from z_initial to the end. */
  JG_PERTURB_STEPPER_MSBDF = 1,
  /* The library's own linearly implicit integrator (the 4th-order L-stable
   * Rosenbrock method RODAS, src/perturbations/rosenbrock.c); solves
   * batches of wavenumbers in lockstep. */
  JG_PERTURB_STEPPER_ROSENBROCK = 2
} jg_perturb_stepper;

/* The linear perturbations (group `perturbations`). */
typedef struct jg_perturb_settings {
  double k_min;          /* 1/Mpc, comoving; first point of the log-spaced grid */
  double k_max;          /* 1/Mpc, last point */
  int k_count;           /* points of the grid */
  double k_values[JG_MAX_WAVENUMBERS]; /* explicit list, 1/Mpc; used instead of the grid when n_k_values > 0 */
  int n_k_values;
  double z_initial;      /* start of the integration */
  jg_sound_speed_model sound_speed;
  jg_perturb_stepper stepper;
  /* 1: the fluctuating model evolves the perturbation of the free-electron
   * fraction (delta_xe) and its feedback on delta_T and the pressure; 0: x_e
   * unperturbed (the results of earlier versions) */
  int ionisation_perturbation;
  double rel_tol;        /* relative tolerance of the integration */
  double abs_tol;        /* absolute tolerance (contrasts per unit initial CDM contrast) */
  /* Baryon start per wavenumber from a table (see jg_perturb_start_table in
   * perturb.h); empty: the uniform start (baryons empty and at rest). */
  char initial_table[JG_MAX_PATH];
  /* Its layout: what each column holds (see jg_column_map_parse; "" the
   * plain layout k b_over_c velocity_ratio [T_over_c]), the unit of its
   * wavenumbers and velocity divergences (jg_table_k_unit), the separator
   * (jg_table_separator) and the gauge of its velocity divergences
   * (jg_table_gauge). */
  char initial_columns[JG_MAX_COLUMN_TEXT];
  int initial_k_unit;
  int initial_separator;
  int initial_gauge;
  /* A second snapshot of the same wavenumbers, same layout, at
   * initial_second_redshift: the rates come from the two (d ln delta/d ln a
   * as the difference of the logarithms); "" none. */
  char initial_second_table[JG_MAX_PATH];
  double initial_second_redshift;
} jg_perturb_settings;

/* ---- column maps: what each column of a table read by jeansgrow holds --- */

/* Unit of the wavenumbers (and velocity divergences) of a table. */
typedef enum { JG_TABLE_K_PER_MPC = 0, JG_TABLE_K_H_PER_MPC = 1 } jg_table_k_unit;
/* Cells separated by blanks (spaces, tabs) or by commas (blanks around them allowed). */
typedef enum { JG_TABLE_BLANKS = 0, JG_TABLE_COMMAS = 1 } jg_table_separator;
/* Gauge of the velocity divergences theta: conformal Newtonian (the
 * continuity equation delta' = -theta sub-horizon), or synchronous comoving
 * with the dark matter (theta_c = 0, delta_b' - delta_c' = -theta_b). */
typedef enum { JG_TABLE_NEWTONIAN = 0, JG_TABLE_SYNCHRONOUS = 1 } jg_table_gauge;

/* The quantities a column may hold (the words of a column map). */
typedef enum {
  JG_COLUMN_SKIP = 0,       /* "-": a column not read */
  JG_COLUMN_K,              /* "k": comoving wavenumber */
  JG_COLUMN_Z,              /* "z": redshift (compared tables only) */
  JG_COLUMN_DELTA_C,        /* "delta_c", "delta_b", "delta_T": contrasts, one normalisation */
  JG_COLUMN_DELTA_B,
  JG_COLUMN_DELTA_T,
  JG_COLUMN_B_OVER_C,       /* "b_over_c": delta_b / delta_c */
  JG_COLUMN_T_OVER_C,       /* "T_over_c": delta_T / delta_c */
  JG_COLUMN_VELOCITY_RATIO, /* "velocity_ratio": (d delta_b/d ln a) / (d delta_c/d ln a) */
  JG_COLUMN_RATE_C,         /* "rate_c", "rate_b": d ln delta / d ln a */
  JG_COLUMN_RATE_B,
  JG_COLUMN_THETA_C,        /* "theta_c", "theta_b": velocity divergences in conformal time */
  JG_COLUMN_THETA_B,
  JG_N_COLUMN_KINDS
} jg_column_kind;

#define JG_MAX_COLUMNS 64
typedef struct jg_column_map {
  int n;                            /* columns named (a row may hold more: they are not read) */
  jg_column_kind kind[JG_MAX_COLUMNS];
  int column[JG_N_COLUMN_KINDS];    /* 0-based column of each quantity, -1 if absent */
} jg_column_map;

/* Parse a column map: words separated by blanks or commas, one per column
 * in order, from the names above ("-" for a column to skip); each quantity
 * at most once. On failure `why` says what is wrong and JG_ECONFIG is
 * returned. */
jg_status jg_column_map_parse(const char *text, jg_column_map *map, char *why, size_t size);
/* The word of a quantity. */
const char *jg_column_kind_word(jg_column_kind kind);
/* Can `map` start the perturbations (k, the baryon density and velocity,
 * and what those need: a theta needs delta_c, theta_c is not a synchronous
 * quantity)? With a second snapshot the velocities may be left out (the
 * rates come from the two), and delta_c and delta_b are needed. JG_OK, or JG_ECONFIG with the reason in `why`. */
jg_status jg_column_map_check_start(const jg_column_map *map, jg_table_gauge gauge,
                                    int second_snapshot, char *why, size_t size);
/* Does a start with these settings give the dark matter's velocity (so that
 * it replaces the Meszaros start)? 0 for a bad or empty map. */
int jg_params_start_gives_cdm_velocity(const jg_perturb_settings *s);

/* The units of wavenumbers, masses and comoving lengths in what the
 * commands write (output.units). Inputs (perturbations.k_min, k_max,
 * k_values) are in 1/Mpc whatever this says, and so is the library itself:
 * only the reports convert, with h = cosmology.hubble_h. */
typedef enum {
  JG_UNITS_MPC = 0,  /* k in 1/Mpc, masses in M_sun, lengths in Mpc */
  JG_UNITS_MPC_H = 1 /* k in h/Mpc = (1/Mpc)/h, masses in M_sun/h = M_sun h, lengths in Mpc/h = Mpc h */
} jg_output_units;

/* The radius of the sphere a mass scale M = (4 pi/3) rho_m0 R^3 is quoted
 * with, in the `run` summary and the figures (output.mass_radius); the
 * tables carry both. */
typedef enum {
  JG_MASS_RADIUS_HALF_WAVELENGTH = 0, /* R = pi/k */
  JG_MASS_RADIUS_FULL_WAVELENGTH = 1  /* R = 2 pi/k: 8 times the mass */
} jg_mass_radius;

/* What the commands report (group `output`). */
typedef struct jg_output_settings {
  double redshifts[JG_MAX_REDSHIFTS]; /* requested redshifts, in file order */
  int n_redshifts;
  int history_rows;    /* rows of the dense `history` table (plus the requested z) */
  double history_z_max;/* first redshift of the history table (<= thermal.start_redshift) */
  double history_z_min;/* last redshift of the history table */
  jg_output_units units;
  jg_mass_radius mass_radius;
} jg_output_settings;

/* The baryon-dark matter streaming velocity (group `streaming`; see
 * streaming.h). */
typedef struct jg_streaming_settings {
  double rms_velocity_kms; /* 3-D rms of v_bc at start_redshift, km/s; 0: no streaming */
  double start_redshift;   /* v_bc = 0 before, decaying as 1/a after */
  int velocity_nodes;      /* Gauss-Hermite nodes of v_par >= 0 (Maxwellian average) */
  int direction_nodes;     /* Gauss-Legendre nodes of mu in [0, 1] (fixed |v_bc|) */
  double patch_multiple;   /* the local patch: |v_bc| = this times v_rms */
  double rel_tol;          /* relative tolerance of the streaming solves */
} jg_streaming_settings;

typedef struct jg_params {
  jg_cosmology cosmology;
  jg_thermal_settings thermal;
  jg_perturb_settings perturbations;
  jg_output_settings output;
  jg_streaming_settings streaming;
} jg_params;

/* Fill every field with its documented default. The three densities-and-h
 * keys are required in a parameter file; their defaults here are the Planck
 * 2018 values so that a C program has a valid starting point. */
void jg_params_set_defaults(jg_params *p);

/*
 * Read `path` (libconfig syntax), then apply each override "key=value"
 * (value in libconfig syntax, arrays included), then check every value.
 * On failure `out` is left untouched and `err` names the file and line (or
 * the override), the key, the value found and what is allowed.
 * Unknown keys are errors, with the nearest known key suggested. The `scan`
 * group is checked against its own table (see jg_params_read_scan) and
 * ignored otherwise; an override cannot set it. A block comment that is
 * never closed is an error naming its line.
 */
jg_status jg_params_load(const char *path, const char *const *overrides, int n_overrides,
                         jg_params *out, jg_error *err);

/* Check a filled struct (ranges, finiteness, consistency). The loader calls
 * this; programs that fill the struct by hand should call it too. */
jg_status jg_params_validate(const jg_params *p, jg_error *err);

/*
 * The same limits for a stage that defends its own inputs (library callers
 * bypass the loader): each takes its ranges and combined rules from the one
 * key table, and fails with JG_EINVAL and the loader's message ("KEY must
 * satisfy ALLOWED (got VALUE)"). jg_background_new and jg_thermal_new call
 * the first two, jg_perturb_wavenumbers the third; the perturbation model
 * checks its other keys one by one with jg_params_check_value. The
 * table grants a stage a wider domain than a file for a few keys, each with
 * its reason (cosmology.curvature_omega: any finite value, the background
 * checks H^2 itself; the thermal tolerances: 0 < value < 1).
 */
jg_status jg_params_check_cosmology(const jg_cosmology *c, jg_error *err);
jg_status jg_params_check_thermal(const jg_thermal_settings *s, jg_error *err);
/* The wavenumber keys of the perturbation settings (k_min, k_max, k_count,
 * k_values) and the rules between them. */
jg_status jg_params_check_wavenumbers(const jg_perturb_settings *s, jg_error *err);
/* One value of a number, integer or word key (a word as its index), or one
 * element of a list ("perturbations.k_values[3]"). */
jg_status jg_params_check_value(const char *key, double value, jg_error *err);

/* The allowed range of a number, integer or word key (of a list: of each
 * element; of a word: its index), as the key table holds it: the file's, or
 * with `for_stage` the one the stages check. */
typedef struct jg_param_range {
  double lo, hi;
  int lo_open, hi_open; /* 1: the bound itself is excluded */
} jg_param_range;
/* 1 and `range` filled for such a key, else 0. */
int jg_params_key_range(const char *key, int for_stage, jg_param_range *range);

/* Write every key with its effective value as `# key = value;` lines (the
 * header block of every output table). */
void jg_params_write_header(FILE *f, const jg_params *p);

/* Is `key` a single number (type "number" or "integer")? 0 for unknown
 * keys, lists and words. */
int jg_params_key_is_numeric(const char *key);

/* The words a word-valued key takes, in the order of their numbers 0, 1,
 * ... (NULL-terminated), or NULL when `key` is not word-valued. */
const char *const *jg_params_key_words(const char *key);

/* Set the number or integer `key` to `value`; a word-valued key takes the
 * number of its word (jg_params_key_words). JG_EINVAL for an unknown key
 * (the nearest known key suggested), a key that is not a single number or
 * word, a value that is not whole for an integer key, or no word of that
 * number; `p` is then unchanged. The range is not checked here: call
 * jg_params_validate afterwards. */
jg_status jg_params_set_number(jg_params *p, const char *key, double value, jg_error *err);
/* Setters by key for the other kinds of value, with the loader's type
 * checks and messages ("KEY must be ... (got ...)"), the range again left
 * to jg_params_validate; `p` is unchanged on failure:
 *   jg_params_set_text     a word key (perturbations.sound_speed: "isothermal")
 *                          or a text or file-name key (taken as given);
 *   jg_params_set_list     a list of numbers (n may be 0: the empty list);
 *   jg_params_set_boolean  a key that takes true or false;
 *   jg_params_set_value    any key from its value written as in a parameter
 *                          file ("0.7", "\"isothermal\"", "[20.0, 10.0]",
 *                          "true"): what --set KEY=VALUE does, messages
 *                          starting "--set KEY=VALUE: ". */
jg_status jg_params_set_text(jg_params *p, const char *key, const char *text, jg_error *err);
jg_status jg_params_set_list(jg_params *p, const char *key, const double *values, int n,
                             jg_error *err);
jg_status jg_params_set_boolean(jg_params *p, const char *key, int value, jg_error *err);
jg_status jg_params_set_value(jg_params *p, const char *key, const char *value, jg_error *err);

/* One documented key: the loader, `jeansgrow keys` and the README table all
 * come from the same list. */
typedef struct jg_param_doc {
  const char *key;        /* e.g. "cosmology.hubble_h" */
  const char *type;       /* "number", "integer", "list of numbers", "one of ..." */
  const char *unit;       /* "" when dimensionless */
  const char *default_text;
  const char *allowed;    /* human-readable range */
  const char *meaning;
} jg_param_doc;

/* The i-th documented key, or NULL past the end. */
const jg_param_doc *jg_param_doc_at(int i);
/* The documented key named `key`, or NULL if there is none. */
const jg_param_doc *jg_param_doc_find(const char *key);

/*
 * The grid of `jeansgrow scan` in a parameter file, read against its own key
 * table (jg_param_scan_doc_at) with the same type checks and messages as
 * the other keys:
 *
 *   scan: { vary = ( { key = "cosmology.hubble_h"; from = 0.6; to = 0.8; count = 3; },
 *                    { key = "thermal.recombination_fudge"; values = [1.0, 1.14]; },
 *                    "cosmology.cdm_density_h2=0.10:0.14:3" ); };
 *
 * One axis as written; the scan module turns it into a grid axis and checks
 * it as a grid (see scan.h).
 */
typedef struct jg_param_axis {
  const char *where;    /* "FILE:LINE: scan.vary[I]", to start messages */
  const char *text;     /* an element written as text "KEY=FROM:TO:N[:log]", else NULL */
  const char *key;      /* a group element: the varied key */
  const double *values; /* its `values` list (n_values long), or NULL for a range */
  int n_values;
  double from, to;      /* a range: from, to, count values, log spacing or not */
  long count;
  int log_spacing;
} jg_param_axis;

/* Called once per element of scan.vary, in file order; the pointers in
 * `axis` live until it returns. A non-OK status stops the reading. */
typedef jg_status (*jg_param_axis_fn)(void *user, const jg_param_axis *axis, jg_error *err);

/* Read the `scan` group of parameter file `path` and hand each axis to
 * `add`. A file without a scan group calls nothing and succeeds. Errors name
 * the file, the line and the key (JG_ECONFIG; JG_EIO when the file cannot be
 * read); jg_params_load makes the same checks, so a typo in the group is
 * caught by every command. */
jg_status jg_params_read_scan(const char *path, jg_param_axis_fn add, void *user, jg_error *err);

/* The i-th documented key of the scan group, or NULL past the end. */
const jg_param_doc *jg_param_scan_doc_at(int i);

/* A rule that ties several keys together (beyond each key's own range). */
typedef struct jg_param_rule {
  const char *keys;   /* the keys involved, comma-separated */
  const char *rule;   /* e.g. "de_w0 + de_wa < 1/3" */
  const char *reason; /* why the rule holds */
} jg_param_rule;

/* The i-th combined rule, or NULL past the end. jg_params_validate checks
 * every one of them. */
const jg_param_rule *jg_param_rule_at(int i);

#ifdef __cplusplus
}
#endif
#endif
