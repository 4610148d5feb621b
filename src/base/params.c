/*
 * The parameter file: a libconfig file read into a plain jg_params.
 *
 * One table (`specs` below) lists every key with its type, its place in the
 * struct, its allowed range and its documentation. The loader, the range
 * checks, the header written into every output table and `jeansgrow keys`
 * all walk the same table, so a key cannot be documented one way and checked
 * another.
 *
 * libconfig 1.5 reads `1` as an integer and `1.0` as a float; number-valued
 * keys accept both, integer-valued keys accept only integers.
 */
#include "jeansgrow/params.h"

#include <ctype.h>
#include <errno.h>
#include <libconfig.h>
#include <limits.h>
#include <math.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

typedef enum { KIND_NUMBER, KIND_INTEGER, KIND_NUMBER_LIST, KIND_CHOICE, KIND_TEXT } spec_kind;

typedef struct param_spec {
  jg_param_doc doc;
  spec_kind kind;
  size_t offset;       /* of the value (or the first list element) in jg_params */
  size_t count_offset; /* lists: of the int element count */
  int min_count;       /* lists: fewest elements (0: the list may be absent or empty) */
  int max_count;       /* lists: capacity */
  int required;
  double lo, hi;       /* allowed range */
  int lo_open, hi_open;/* strict (>) or inclusive (>=) bounds */
  const char *const *choices; /* KIND_CHOICE: the allowed words, NULL-terminated; stored as int index */
  size_t capacity;     /* KIND_TEXT: bytes of the char array, final zero included */
} param_spec;

#define P_OFF(field) offsetof(jg_params, field)
#define NUMBER(key, field, unit, def, allowed, lo, lo_open, hi, hi_open, meaning) \
  {{key, "number", unit, def, allowed, meaning}, KIND_NUMBER, P_OFF(field), 0, 0, 0, 0, lo, hi, lo_open, hi_open, NULL, 0}
#define REQUIRED_NUMBER(key, field, unit, allowed, lo, lo_open, hi, hi_open, meaning) \
  {{key, "number", unit, "required", allowed, meaning}, KIND_NUMBER, P_OFF(field), 0, 0, 0, 1, lo, hi, lo_open, hi_open, NULL, 0}
#define INTEGER(key, field, def, allowed, lo, hi, meaning) \
  {{key, "integer", "", def, allowed, meaning}, KIND_INTEGER, P_OFF(field), 0, 0, 0, 0, lo, hi, 0, 0, NULL, 0}

static const char *const sound_speed_words[] = {"fluctuating", "isothermal", "adiabatic", NULL};
static const char *const stepper_words[] = {"msbdf+rk8pd", "msbdf", NULL};
static const char *const units_words[] = {"Mpc", "Mpc/h", NULL};

static const param_spec specs[] = {
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
           "0 < value <= 0.1", 0, 1, 0.1, 0,
           "T_gas takes its quasi-static value while H / Gamma_C is below this (and while "
           "hydrogen is in Saha equilibrium)"),
    NUMBER("thermal.rel_tol", thermal.rel_tol, "", "1e-10", "1e-13 <= value <= 1e-3", 1e-13, 0,
           1e-3, 0, "relative tolerance of the stiff integration"),
    NUMBER("thermal.abs_tol", thermal.abs_tol, "", "1e-12", "0 < value <= 1e-3", 0, 1, 1e-3, 0,
           "absolute tolerance of the stiff integration (x_p, and T_gas in K)"),
    INTEGER("thermal.grid_points", thermal.grid_points, "4000", "1000 <= value <= 1000000", 1000,
            1000000, "nodes of the stored history, uniform in ln a"),

    NUMBER("perturbations.k_min", perturbations.k_min, "1/Mpc", "1.0", "1 <= value <= 1e5", 1,
           0, 1e5, 0,
           "smallest comoving wavenumber of the log-spaced grid, in 1/Mpc whatever "
           "output.units says (photon pressure and Silk damping are neglected, which needs "
           "k >= 1/Mpc)"),
    NUMBER("perturbations.k_max", perturbations.k_max, "1/Mpc", "5000.0",
           "k_min <= value <= 1e5", 1, 0, 1e5, 0,
           "largest comoving wavenumber of the grid, in 1/Mpc whatever output.units says"),
    INTEGER("perturbations.k_count", perturbations.k_count, "128", "1 <= value <= 4096", 1,
            JG_MAX_WAVENUMBERS, "number of grid wavenumbers"),
    {{"perturbations.k_values", "list of numbers", "1/Mpc", "[]",
      "0 to 4096 values, each 1 <= k <= 1e5",
      "explicit wavenumbers, used instead of the grid (empty: use the grid), in 1/Mpc "
      "whatever output.units says"},
     KIND_NUMBER_LIST, P_OFF(perturbations.k_values), P_OFF(perturbations.n_k_values), 0,
     JG_MAX_WAVENUMBERS, 0, 1, 1e5, 0, 0, NULL, 0},
    NUMBER("perturbations.z_initial", perturbations.z_initial, "", "10000.0",
           "1500 <= value <= 100000 and above every output redshift", 1500, 0, 1e5, 0,
           "redshift where CDM starts on the Meszaros growing mode, baryons at rest"),
    {{"perturbations.sound_speed", "one of \"fluctuating\", \"isothermal\", \"adiabatic\"", "",
      "\"fluctuating\"", "fluctuating, isothermal or adiabatic",
      "gas pressure model: delta_T evolved (scale dependent), or uniform with gamma = 1 or 5/3"},
     KIND_CHOICE, P_OFF(perturbations.sound_speed), 0, 0, 0, 0, 0, 2, 0, 0, sound_speed_words, 0},
    {{"perturbations.stepper", "one of \"msbdf+rk8pd\", \"msbdf\"", "", "\"msbdf+rk8pd\"",
      "msbdf+rk8pd or msbdf",
      "GSL steppers: implicit msbdf while the drag and Compton rates exceed 50 H, explicit "
      "rk8pd after; or msbdf throughout"},
     KIND_CHOICE, P_OFF(perturbations.stepper), 0, 0, 0, 0, 0, 1, 0, 0, stepper_words, 0},
    {{"perturbations.initial_table", "quoted file name", "", "\"\"",
      "empty, or a readable table (see the README); at most 1023 bytes",
      "baryon start per wavenumber at z_initial, read from this file (relative names from the "
      "current folder); empty: baryons empty and at rest"},
     KIND_TEXT, P_OFF(perturbations.initial_table), 0, 0, 0, 0, 0, 0, 0, 0, NULL, JG_MAX_PATH},
    NUMBER("perturbations.rel_tol", perturbations.rel_tol, "", "1e-8", "1e-13 <= value <= 1e-3",
           1e-13, 0, 1e-3, 0, "relative tolerance of the perturbation integration"),
    NUMBER("perturbations.abs_tol", perturbations.abs_tol, "", "1e-10", "0 < value <= 1e-3", 0,
           1, 1e-3, 0, "absolute tolerance, in units of the initial CDM contrast"),

    {{"output.redshifts", "list of numbers", "",
      "[1100.0, 1000.0, 500.0, 200.0, 100.0, 50.0, 20.0, 10.0]",
      "1 to 512 values, each 0 <= z <= thermal.start_redshift", "redshifts reported by every "
      "table (added exactly to the history table)"},
     KIND_NUMBER_LIST, P_OFF(output.redshifts), P_OFF(output.n_redshifts), 1, JG_MAX_REDSHIFTS, 0,
     0, 1e5, 0, 0, NULL, 0},
    INTEGER("output.history_rows", output.history_rows, "1000", "10 <= value <= 1000000", 10,
            1000000, "rows of the history table, uniform in ln(1+z)"),
    NUMBER("output.history_z_min", output.history_z_min, "", "0.0",
           "0 <= value < thermal.start_redshift", 0, 0, 1e5, 1,
           "last (lowest) redshift of the history table"),
    {{"output.units", "one of \"Mpc\", \"Mpc/h\"", "", "\"Mpc\"", "Mpc or Mpc/h",
      "units of what is written: k in 1/Mpc, masses in Msun, comoving lengths in Mpc; or "
      "h/Mpc, Msun/h and Mpc/h with h = cosmology.hubble_h (inputs stay in 1/Mpc)"},
     KIND_CHOICE, P_OFF(output.units), 0, 0, 0, 0, 0, 1, 0, 0, units_words, 0},
};

#define N_SPECS ((int)(sizeof specs / sizeof specs[0]))

static const char *const known_groups[] = {"cosmology", "thermal", "perturbations", "output"};
#define N_GROUPS ((int)(sizeof known_groups / sizeof known_groups[0]))

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
  p->thermal.grid_points = 4000;

  p->perturbations.k_min = 1.0;
  p->perturbations.k_max = 5000.0;
  p->perturbations.k_count = 128;
  p->perturbations.n_k_values = 0;
  p->perturbations.z_initial = 1.0e4;
  p->perturbations.sound_speed = JG_SOUND_SPEED_FLUCTUATING;
  p->perturbations.stepper = JG_PERTURB_STEPPER_MSBDF_RK8PD;
  p->perturbations.initial_table[0] = '\0';
  p->perturbations.rel_tol = 1e-8;
  p->perturbations.abs_tol = 1e-10;

  p->output.n_redshifts = (int)(sizeof default_redshifts / sizeof default_redshifts[0]);
  memcpy(p->output.redshifts, default_redshifts, sizeof default_redshifts);
  p->output.history_rows = 1000;
  p->output.history_z_min = 0.0;
  p->output.units = JG_UNITS_MPC;
}

const jg_param_doc *jg_param_doc_at(int i) {
  if (i < 0 || i >= N_SPECS) return NULL;
  return &specs[i].doc;
}

/* ------------------------------------------------------------------------ */
/* Where a key came from, for messages: "file:line: " or "--set k=v: ".      */

#define MAX_OVERRIDES 256

typedef struct locator {
  const char *path;             /* the parameter file */
  const config_t *cfg;          /* NULL when validating a hand-filled struct */
  const char *const *overrides; /* the --set texts, in order */
  int n_overrides;
} locator;

/* Length of the key part of an override "key=value" (up to '='). */
static size_t override_key_length(const char *text) {
  const char *eq = strchr(text, '=');
  return eq ? (size_t)(eq - text) : strlen(text);
}

/* Does override `text` set `key`, a group that contains it, or (when `key`
 * is a group) something inside it? */
static int override_covers(const char *text, const char *key) {
  size_t n = override_key_length(text);
  while (n > 0 && isspace((unsigned char)text[n - 1])) n--;
  while (n > 0 && isspace((unsigned char)*text)) text++, n--;
  size_t k = strcspn(key, "[");
  size_t common = n < k ? n : k;
  if (strncmp(text, key, common) != 0) return 0;
  if (n == k) return 1;
  return n < k ? key[n] == '.' : text[k] == '.';
}

/* Settings read from the file carry their line; those an override added or
 * replaced carry line 0, so a line > 0 means the file is the culprit. */
static void locate(const locator *loc, const char *key, char *buf, size_t size) {
  buf[0] = '\0';
  if (!loc) return;
  if (loc->cfg) {
    char base[256];
    snprintf(base, sizeof base, "%s", key);
    char *bracket = strchr(base, '[');
    if (bracket) *bracket = '\0';
    const config_setting_t *s = config_lookup(loc->cfg, base);
    if (s && config_setting_source_line(s) > 0) {
      snprintf(buf, size, "%s:%d: ", loc->path, (int)config_setting_source_line(s));
      return;
    }
  }
  for (int i = loc->n_overrides - 1; i >= 0; i--) {
    if (override_covers(loc->overrides[i], key)) {
      snprintf(buf, size, "--set %s: ", loc->overrides[i]);
      return;
    }
  }
  if (loc->path) snprintf(buf, size, "%s: ", loc->path);
}

/* ------------------------------------------------------------------------ */
/* Range checks, shared by the loader and jg_params_validate().             */

static double *number_at(jg_params *p, const param_spec *s) {
  return (double *)((char *)p + s->offset);
}
static const double *cnumber_at(const jg_params *p, const param_spec *s) {
  return (const double *)((const char *)p + s->offset);
}
static const int *cint_at(const jg_params *p, size_t offset) {
  return (const int *)((const char *)p + offset);
}

/* The allowed text of a list reads "COUNT, each RANGE" ("1 to 512 values,
 * each 0 <= z <= ..."): a message about the length quotes COUNT, one about
 * an element quotes RANGE, so neither carries the other's half. */
static const char *list_element_range(const param_spec *s) {
  const char *each = strstr(s->doc.allowed, ", each ");
  return each ? each + strlen(", each ") : s->doc.allowed;
}
static int list_count_length(const param_spec *s) {
  const char *each = strstr(s->doc.allowed, ", each ");
  return each ? (int)(each - s->doc.allowed) : (int)strlen(s->doc.allowed);
}

static jg_status check_range(const locator *loc, const param_spec *s, const char *name, double v,
                             jg_error *err) {
  char where[512];
  if (!isfinite(v)) {
    locate(loc, name, where, sizeof where);
    return JG_FAIL(err, JG_ECONFIG, "%s%s must be a finite number (got %g)", where, name, v);
  }
  int below = s->lo_open ? !(v > s->lo) : !(v >= s->lo);
  int above = s->hi_open ? !(v < s->hi) : !(v <= s->hi);
  if (below || above) {
    locate(loc, name, where, sizeof where);
    const char *allowed = s->kind == KIND_NUMBER_LIST ? list_element_range(s) : s->doc.allowed;
    return JG_FAIL(err, JG_ECONFIG, "%s%s must satisfy %s (got %.10g)", where, name, allowed, v);
  }
  return JG_OK;
}

static jg_status check_cross(const locator *loc, const jg_params *p, jg_error *err) {
  char where[512];
  const double z_start = p->thermal.start_redshift;
  for (int i = 0; i < p->output.n_redshifts; i++) {
    if (p->output.redshifts[i] > z_start) {
      char name[64];
      snprintf(name, sizeof name, "output.redshifts[%d]", i);
      locate(loc, name, where, sizeof where);
      return JG_FAIL(err, JG_ECONFIG,
                     "%s%s = %g lies above thermal.start_redshift = %g; raise "
                     "thermal.start_redshift or drop that redshift",
                     where, name, p->output.redshifts[i], z_start);
    }
  }
  const jg_cosmology *c = &p->cosmology;
  if (c->de_w0 + c->de_wa >= 1.0 / 3.0) {
    locate(loc, "cosmology.de_wa", where, sizeof where);
    return JG_FAIL(err, JG_ECONFIG,
                   "%scosmology.de_w0 + cosmology.de_wa must be below 1/3 (got %g): such dark "
                   "energy would not fade before radiation at early times",
                   where, c->de_w0 + c->de_wa);
  }
  const jg_perturb_settings *pt = &p->perturbations;
  if (pt->n_k_values == 0 && pt->k_max < pt->k_min) {
    locate(loc, "perturbations.k_max", where, sizeof where);
    return JG_FAIL(err, JG_ECONFIG,
                   "%sperturbations.k_max = %g is below perturbations.k_min = %g (reversed "
                   "wavenumber range)",
                   where, pt->k_max, pt->k_min);
  }
  if (pt->n_k_values == 0 && pt->k_count == 1 && pt->k_max != pt->k_min) {
    locate(loc, "perturbations.k_count", where, sizeof where);
    return JG_FAIL(err, JG_ECONFIG,
                   "%sperturbations.k_count = 1 needs k_min = k_max (got %g and %g)", where,
                   pt->k_min, pt->k_max);
  }
  for (int i = 0; i < p->output.n_redshifts; i++) {
    if (p->output.redshifts[i] >= pt->z_initial) {
      char name[64];
      snprintf(name, sizeof name, "output.redshifts[%d]", i);
      locate(loc, name, where, sizeof where);
      return JG_FAIL(err, JG_ECONFIG,
                     "%s%s = %g is not below perturbations.z_initial = %g (reversed redshift "
                     "range)",
                     where, name, p->output.redshifts[i], pt->z_initial);
    }
  }
  if (p->output.history_z_min >= z_start) {
    locate(loc, "output.history_z_min", where, sizeof where);
    return JG_FAIL(err, JG_ECONFIG,
                   "%soutput.history_z_min = %g must lie below thermal.start_redshift = %g "
                   "(reversed redshift range)",
                   where, p->output.history_z_min, z_start);
  }
  return JG_OK;
}

static jg_status validate(const locator *loc, const jg_params *p, jg_error *err) {
  char where[512];
  for (int i = 0; i < N_SPECS; i++) {
    const param_spec *s = &specs[i];
    jg_status st = JG_OK;
    switch (s->kind) {
    case KIND_NUMBER:
      st = check_range(loc, s, s->doc.key, *cnumber_at(p, s), err);
      break;
    case KIND_INTEGER: {
      int v = *cint_at(p, s->offset);
      if (v < s->lo || v > s->hi) {
        locate(loc, s->doc.key, where, sizeof where);
        st = JG_FAIL(err, JG_ECONFIG, "%s%s must satisfy %s (got %d)", where, s->doc.key,
                     s->doc.allowed, v);
      }
      break;
    }
    case KIND_CHOICE: {
      int v = *cint_at(p, s->offset);
      if (v < s->lo || v > s->hi) {
        locate(loc, s->doc.key, where, sizeof where);
        st = JG_FAIL(err, JG_ECONFIG, "%s%s must be one of %s (got choice number %d)", where,
                     s->doc.key, s->doc.allowed, v);
      }
      break;
    }
    case KIND_TEXT: {
      const char *text = (const char *)p + s->offset;
      if (!memchr(text, '\0', s->capacity)) {
        locate(loc, s->doc.key, where, sizeof where);
        st = JG_FAIL(err, JG_ECONFIG, "%s%s is not terminated within %zu bytes", where,
                     s->doc.key, s->capacity);
      }
      break;
    }
    case KIND_NUMBER_LIST: {
      int n = *cint_at(p, s->count_offset);
      if (n < s->min_count || n > s->max_count) {
        locate(loc, s->doc.key, where, sizeof where);
        st = JG_FAIL(err, JG_ECONFIG, "%s%s must hold %.*s (got %d values)", where, s->doc.key,
                     list_count_length(s), s->doc.allowed, n);
        break;
      }
      const double *v = cnumber_at(p, s);
      for (int j = 0; j < n && st == JG_OK; j++) {
        char name[128];
        snprintf(name, sizeof name, "%s[%d]", s->doc.key, j);
        st = check_range(loc, s, name, v[j], err);
      }
      break;
    }
    }
    if (st != JG_OK) return st;
  }
  return check_cross(loc, p, err);
}

jg_status jg_params_validate(const jg_params *p, jg_error *err) {
  return validate(NULL, p, err);
}

/* ------------------------------------------------------------------------ */
/* Reading values out of libconfig, with the type errors a user can act on. */

static void format_exact(char *buf, size_t size, double v);

/* What a setting holds, with its value, for "(got ...)": the user sees what
 * libconfig made of the text ("the string \"0.7\"" tells them to drop the
 * quotes, "the number 4000.0" to drop the decimal point). */
static const char *describe_value(const config_setting_t *s, char *buf, size_t size) {
  char num[64];
  switch (config_setting_type(s)) {
  case CONFIG_TYPE_INT:
    snprintf(buf, size, "the integer %d", config_setting_get_int(s));
    break;
  case CONFIG_TYPE_INT64:
    snprintf(buf, size, "the integer %lld", (long long)config_setting_get_int64(s));
    break;
  case CONFIG_TYPE_FLOAT:
    format_exact(num, sizeof num, config_setting_get_float(s));
    snprintf(buf, size, "the number %s", num);
    break;
  case CONFIG_TYPE_STRING:
    snprintf(buf, size, "the string \"%.40s%s\"", config_setting_get_string(s),
             strlen(config_setting_get_string(s)) > 40 ? "..." : "");
    break;
  case CONFIG_TYPE_BOOL:
    snprintf(buf, size, "the boolean %s", config_setting_get_bool(s) ? "true" : "false");
    break;
  case CONFIG_TYPE_ARRAY:
  case CONFIG_TYPE_LIST:
    snprintf(buf, size, "a list of %d value%s", config_setting_length(s),
             config_setting_length(s) == 1 ? "" : "s");
    break;
  case CONFIG_TYPE_GROUP:
    snprintf(buf, size, "a group");
    break;
  default:
    snprintf(buf, size, "a setting of unknown type");
    break;
  }
  return buf;
}

static int is_numeric(const config_setting_t *s) {
  int t = config_setting_type(s);
  return t == CONFIG_TYPE_INT || t == CONFIG_TYPE_INT64 || t == CONFIG_TYPE_FLOAT;
}

static double numeric_value(const config_setting_t *s) {
  switch (config_setting_type(s)) {
  case CONFIG_TYPE_INT:
    return (double)config_setting_get_int(s);
  case CONFIG_TYPE_INT64:
    return (double)config_setting_get_int64(s);
  default:
    return config_setting_get_float(s);
  }
}

static jg_status read_spec(const locator *loc, const param_spec *s, const config_setting_t *set,
                           jg_params *p, jg_error *err) {
  char where[512], got[128];
  locate(loc, s->doc.key, where, sizeof where);
  int type = config_setting_type(set);
  switch (s->kind) {
  case KIND_NUMBER:
    if (!is_numeric(set))
      return JG_FAIL(err, JG_ECONFIG, "%s%s must be a number (got %s)", where, s->doc.key,
                     describe_value(set, got, sizeof got));
    *number_at(p, s) = numeric_value(set);
    return JG_OK;
  case KIND_INTEGER: {
    if (type != CONFIG_TYPE_INT && type != CONFIG_TYPE_INT64)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must be an integer (got %s)", where, s->doc.key,
                     describe_value(set, got, sizeof got));
    long long v = type == CONFIG_TYPE_INT ? config_setting_get_int(set)
                                          : config_setting_get_int64(set);
    if (v < (long long)s->lo || v > (long long)s->hi)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must satisfy %s (got %lld)", where, s->doc.key,
                     s->doc.allowed, v);
    *(int *)((char *)p + s->offset) = (int)v;
    return JG_OK;
  }
  case KIND_CHOICE: {
    if (type != CONFIG_TYPE_STRING)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must be a quoted word, one of %s (got %s)", where,
                     s->doc.key, s->doc.allowed, describe_value(set, got, sizeof got));
    const char *word = config_setting_get_string(set);
    for (int j = 0; s->choices[j]; j++) {
      if (strcmp(word, s->choices[j]) == 0) {
        *(int *)((char *)p + s->offset) = j;
        return JG_OK;
      }
    }
    return JG_FAIL(err, JG_ECONFIG, "%s%s must be one of %s (got \"%s\")", where, s->doc.key,
                   s->doc.allowed, word);
  }
  case KIND_TEXT: {
    if (type != CONFIG_TYPE_STRING)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must be quoted text such as \"file.txt\" (got %s)",
                     where, s->doc.key, describe_value(set, got, sizeof got));
    const char *text = config_setting_get_string(set);
    size_t n = strlen(text);
    if (n >= s->capacity)
      return JG_FAIL(err, JG_ECONFIG, "%s%s is too long (%zu bytes; at most %zu)", where,
                     s->doc.key, n, s->capacity - 1);
    /* Written back into table headers as one line of libconfig text. */
    for (size_t j = 0; j < n; j++)
      if ((unsigned char)text[j] < 0x20 || text[j] == 0x7f)
        return JG_FAIL(err, JG_ECONFIG, "%s%s holds a control character (byte %zu)", where,
                       s->doc.key, j + 1);
    memcpy((char *)p + s->offset, text, n + 1);
    return JG_OK;
  }
  case KIND_NUMBER_LIST: {
    if (type != CONFIG_TYPE_ARRAY && type != CONFIG_TYPE_LIST)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must be a list of numbers such as [20.0, 10.0] (got %s)",
                     where, s->doc.key, describe_value(set, got, sizeof got));
    int n = config_setting_length(set);
    /* min_count 0 allows the empty list, which is also how the header
     * records such a list, so a header line reads back as it was written. */
    if (n < s->min_count || n > s->max_count)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must hold %.*s (got %s)", where, s->doc.key,
                     list_count_length(s), s->doc.allowed,
                     n == 0 ? "an empty list" : describe_value(set, got, sizeof got));
    double *out = number_at(p, s);
    for (int j = 0; j < n; j++) {
      const config_setting_t *e = config_setting_get_elem(set, (unsigned)j);
      if (!is_numeric(e))
        return JG_FAIL(err, JG_ECONFIG, "%s%s[%d] must be a number (got %s)", where, s->doc.key,
                       j, describe_value(e, got, sizeof got));
      out[j] = numeric_value(e);
    }
    *(int *)((char *)p + s->count_offset) = n;
    return JG_OK;
  }
  }
  return JG_OK;
}

/* ------------------------------------------------------------------------ */
/* Unknown keys, with the nearest known key as a suggestion.                 */

static size_t edit_distance(const char *a, const char *b) {
  size_t la = strlen(a), lb = strlen(b);
  if (la > 128 || lb > 128) return (size_t)-1;
  size_t row[129];
  for (size_t j = 0; j <= lb; j++) row[j] = j;
  for (size_t i = 1; i <= la; i++) {
    size_t diag = row[0];
    row[0] = i;
    for (size_t j = 1; j <= lb; j++) {
      size_t up = row[j];
      size_t cost = a[i - 1] == b[j - 1] ? 0 : 1;
      size_t best = diag + cost;
      if (row[j] + 1 < best) best = row[j] + 1;
      if (row[j - 1] + 1 < best) best = row[j - 1] + 1;
      row[j] = best;
      diag = up;
    }
  }
  return row[lb];
}

static const char *last_component(const char *key) {
  const char *dot = strrchr(key, '.');
  return dot ? dot + 1 : key;
}

/* How far `typed` is from the known name `known`; a clear abbreviation
 * ("curvature" for "curvature_omega") counts as one edit. */
static size_t name_distance(const char *typed, const char *known) {
  size_t d = edit_distance(typed, known);
  size_t lt = strlen(typed), lk = strlen(known);
  size_t shorter = lt < lk ? lt : lk;
  if (shorter >= 4 && d > 1 && strncmp(typed, known, shorter) == 0) d = 1;
  return d;
}

/* Close enough to suggest: a few typos, not a different word. */
static int worth_suggesting(size_t d, const char *typed) {
  size_t n = strlen(typed);
  return d <= (n / 3 > 2 ? n / 3 : 2);
}

/* The known key nearest to `key`, or NULL if none is close. The group part
 * and the last part are compared separately too, so that a key written
 * without its group ("hubble_h") or in the wrong group
 * ("thermal.hubble_h") finds its home. */
static const char *nearest_key(const char *key) {
  const char *best = NULL;
  size_t best_d = (size_t)-1;
  const char *typed_last = last_component(key);
  for (int i = 0; i < N_SPECS; i++) {
    const char *known_last = last_component(specs[i].doc.key);
    size_t d = name_distance(key, specs[i].doc.key);
    size_t d2 = name_distance(typed_last, known_last);
    if (d2 < d) d = d2;
    if (d < best_d) best_d = d, best = specs[i].doc.key;
  }
  return best && worth_suggesting(best_d, typed_last) ? best : NULL;
}

static const param_spec *find_spec(const char *key) {
  for (int i = 0; i < N_SPECS; i++)
    if (strcmp(specs[i].doc.key, key) == 0) return &specs[i];
  return NULL;
}

static int is_known_group(const char *name) {
  for (int i = 0; i < N_GROUPS; i++)
    if (strcmp(known_groups[i], name) == 0) return 1;
  return 0;
}

static jg_status unknown_key(const locator *loc, const char *key, jg_error *err) {
  char where[512];
  locate(loc, key, where, sizeof where);
  const char *near = nearest_key(key);
  if (near)
    return JG_FAIL(err, JG_ECONFIG, "%sunknown key '%s' (did you mean '%s'?)", where, key, near);
  return JG_FAIL(err, JG_ECONFIG,
                 "%sunknown key '%s' (no known key is similar; jeansgrow keys lists them all)",
                 where, key);
}

static jg_status unknown_group(const locator *loc, const char *name, jg_error *err) {
  char where[512], groups[256] = "";
  locate(loc, name, where, sizeof where);
  const char *near = NULL;
  size_t best_d = (size_t)-1;
  for (int i = 0; i < N_GROUPS; i++) {
    size_t d = name_distance(name, known_groups[i]);
    if (d < best_d) best_d = d, near = known_groups[i];
    snprintf(groups + strlen(groups), sizeof groups - strlen(groups), "%s%s", i ? ", " : "",
             known_groups[i]);
  }
  if (near && worth_suggesting(best_d, name))
    return JG_FAIL(err, JG_ECONFIG, "%sunknown group '%s' (did you mean '%s'? the groups are %s)",
                   where, name, near, groups);
  return JG_FAIL(err, JG_ECONFIG, "%sunknown group '%s' (the groups are %s)", where, name,
                 groups);
}

static jg_status check_known_keys(const locator *loc, const config_setting_t *group,
                                  const char *prefix, jg_error *err) {
  int n = config_setting_length(group);
  for (int i = 0; i < n; i++) {
    const config_setting_t *s = config_setting_get_elem(group, (unsigned)i);
    const char *name = config_setting_name(s);
    char key[512];
    if (prefix[0]) snprintf(key, sizeof key, "%s.%s", prefix, name ? name : "?");
    else snprintf(key, sizeof key, "%s", name ? name : "?");
    if (find_spec(key)) continue; /* its type is checked when it is read */
    int is_group = config_setting_type(s) == CONFIG_TYPE_GROUP;
    /* The scan definition belongs to `jeansgrow scan`, which reads and checks
     * it (src/scan/scan.c); a single run of the same file uses the base values. */
    if (!prefix[0] && is_group && strcmp(key, "scan") == 0) continue;
    if (!prefix[0] && is_known_group(key)) {
      if (!is_group) {
        char where[512], got[128];
        locate(loc, key, where, sizeof where);
        return JG_FAIL(err, JG_ECONFIG, "%s%s must be a group such as %s: { ... }; (got %s)",
                       where, key, key, describe_value(s, got, sizeof got));
      }
      jg_status st = check_known_keys(loc, s, key, err);
      if (st != JG_OK) return st;
      continue;
    }
    /* A misspelt group would otherwise be reported by its first key. */
    if (!prefix[0] && is_group) return unknown_group(loc, key, err);
    return unknown_key(loc, key, err);
  }
  return JG_OK;
}

/* ------------------------------------------------------------------------ */
/* Number literals that libconfig 1.5 would misread without a word.          */
/*
 * libconfig 1.5 reads a decimal integer without an L suffix through a long
 * and stores it in an int: `99999999999` becomes 1215752191 and
 * `4294967496` becomes 200, a valid value, with no error. Hexadecimal
 * integers above 0x7fffffff wrap the same way, `...L` integers beyond the
 * 64-bit range are clamped, and `1e400` becomes inf. The parsed settings
 * keep no trace of the text, so the text itself is scanned with libconfig's
 * token rules (comments, strings, names, numbers) after a successful parse,
 * and such a literal is rejected with the key it belongs to and the text as
 * written.
 */

typedef struct literal_origin {
  const char *path;     /* the parameter file, or NULL */
  const char *override; /* the --set text, or NULL */
} literal_origin;

typedef struct literal_scan {
  char group[256];     /* enclosing groups, dot-separated */
  size_t outer[32];    /* length of `group` before each open '{' */
  int depth;
  char name[128];      /* last setting name: the key the next value belongs to */
} literal_scan;

static int is_name_start(int c) { return isalpha(c) || c == '*'; }
static int is_name_char(int c) { return isalnum(c) || c == '*' || c == '_' || c == '-'; }

static jg_status bad_literal(const literal_origin *origin, int line, const literal_scan *sc,
                             const char *tok, size_t n, const char *what, const char *why,
                             jg_error *err) {
  char where[512], key[512];
  if (origin->override) snprintf(where, sizeof where, "--set %s: ", origin->override);
  else snprintf(where, sizeof where, "%s:%d: ", origin->path, line);
  if (sc->group[0] && sc->name[0]) snprintf(key, sizeof key, "%s.%s", sc->group, sc->name);
  else snprintf(key, sizeof key, "%s", sc->group[0] ? sc->group : sc->name);
  return JG_FAIL(err, JG_ECONFIG, "%s%s must be %s (got %.*s, %s)", where, key, what,
                 n > 60 ? 60 : (int)n, tok, why);
}

/* Check one number token (`n` characters at `tok`); libconfig has already
 * accepted it, so its shape is valid. */
static jg_status check_number(const char *tok, size_t n, const literal_origin *origin, int line,
                              const literal_scan *sc, jg_error *err) {
  char buf[512];
  if (n >= sizeof buf) n = sizeof buf - 1;
  memcpy(buf, tok, n);
  buf[n] = '\0';
  size_t m = n;
  int wide = 0; /* an L or LL suffix: a 64-bit integer */
  while (m > 0 && buf[m - 1] == 'L') buf[--m] = '\0', wide = 1;
  const char *digits = buf + (buf[0] == '+' || buf[0] == '-');
  int hex = digits[0] == '0' && (digits[1] == 'x' || digits[1] == 'X');
  errno = 0;
  if (!hex && strpbrk(buf, ".eE")) {
    double v = strtod(buf, NULL);
    if (errno == ERANGE && isinf(v))
      return bad_literal(origin, line, sc, tok, n, "a finite number",
                         "beyond the largest double, about 1.8e308", err);
    return JG_OK;
  }
  if (hex) {
    unsigned long long v = strtoull(digits + 2, NULL, 16);
    unsigned long long limit = wide ? (unsigned long long)LLONG_MAX : (unsigned long long)INT_MAX;
    if (errno == ERANGE || v > limit)
      return bad_literal(origin, line, sc, tok, n,
                         wide ? "an integer up to 0x7fffffffffffffffL" : "an integer up to 0x7fffffff",
                         "which libconfig would silently wrap", err);
    return JG_OK;
  }
  long long v = strtoll(buf, NULL, 10);
  if (wide ? errno == ERANGE : (errno == ERANGE || v < INT_MIN || v > INT_MAX))
    return bad_literal(origin, line, sc, tok, n,
                       wide ? "an integer from -9223372036854775808 to 9223372036854775807"
                            : "an integer from -2147483648 to 2147483647",
                       wide ? "which libconfig would silently clamp"
                            : "which libconfig would silently wrap; write larger numbers with a "
                              "decimal point, e.g. 1e10",
                       err);
  return JG_OK;
}

/* Scan libconfig text for misread number literals. `outer_key` is the key a
 * --set value is assigned to ("" for a whole file). */
static jg_status check_literals(const char *text, const literal_origin *origin,
                                const char *outer_key, jg_error *err) {
  literal_scan sc;
  memset(&sc, 0, sizeof sc);
  snprintf(sc.group, sizeof sc.group, "%s", outer_key);
  int line = 1;
  const char *c = text;
  while (*c) {
    unsigned char ch = (unsigned char)*c;
    if (ch == '\n') {
      line++, c++;
    } else if (ch == '#' || (ch == '/' && c[1] == '/')) {
      while (*c && *c != '\n') c++;
    } else if (ch == '/' && c[1] == '*') {
      for (c += 2; *c && !(c[0] == '*' && c[1] == '/'); c++)
        if (*c == '\n') line++;
      if (*c) c += 2;
    } else if (ch == '"') {
      for (c++; *c && *c != '"'; c++) {
        if (*c == '\\' && c[1]) c++;
        if (*c == '\n') line++;
      }
      if (*c) c++;
    } else if (is_name_start(ch)) {
      const char *start = c;
      while (is_name_char((unsigned char)*c)) c++;
      const char *after = c;
      while (*after == ' ' || *after == '\t' || *after == '\r' || *after == '\n') after++;
      /* Only a name followed by '=' or ':' names a setting; true and false
       * are names too. */
      if (*after == '=' || *after == ':')
        snprintf(sc.name, sizeof sc.name, "%.*s", (int)(c - start), start);
    } else if (ch == '{') {
      if (sc.depth < (int)(sizeof sc.outer / sizeof sc.outer[0])) {
        size_t len = strlen(sc.group);
        sc.outer[sc.depth++] = len;
        if (sc.name[0])
          snprintf(sc.group + len, sizeof sc.group - len, "%s%s", len ? "." : "", sc.name);
      }
      sc.name[0] = '\0';
      c++;
    } else if (ch == '}') {
      if (sc.depth > 0) sc.group[sc.outer[--sc.depth]] = '\0';
      sc.name[0] = '\0';
      c++;
    } else if (isdigit(ch) || (ch == '.' && isdigit((unsigned char)c[1])) ||
               ((ch == '+' || ch == '-') &&
                (isdigit((unsigned char)c[1]) ||
                 (c[1] == '.' && isdigit((unsigned char)c[2]))))) {
      const char *start = c++;
      const char *d = start + (*start == '+' || *start == '-');
      int hex = d[0] == '0' && (d[1] == 'x' || d[1] == 'X');
      while (isalnum((unsigned char)*c) || *c == '.' ||
             (!hex && (*c == '+' || *c == '-') && (c[-1] == 'e' || c[-1] == 'E')))
        c++;
      jg_status st = check_number(start, (size_t)(c - start), origin, line, &sc, err);
      if (st != JG_OK) return st;
    } else {
      c++;
    }
  }
  return JG_OK;
}

/* ------------------------------------------------------------------------ */
/* --set key=value overrides.                                                */

static int copy_setting(config_setting_t *dst, const config_setting_t *src);

static int copy_children(config_setting_t *dst, const config_setting_t *src) {
  int n = config_setting_length(src);
  for (int i = 0; i < n; i++) {
    const config_setting_t *c = config_setting_get_elem(src, (unsigned)i);
    config_setting_t *d = config_setting_add(dst, config_setting_name(c), config_setting_type(c));
    if (!d || !copy_setting(d, c)) return 0;
  }
  return 1;
}

static int copy_setting(config_setting_t *dst, const config_setting_t *src) {
  switch (config_setting_type(src)) {
  case CONFIG_TYPE_INT:
    return config_setting_set_int(dst, config_setting_get_int(src));
  case CONFIG_TYPE_INT64:
    return config_setting_set_int64(dst, config_setting_get_int64(src));
  case CONFIG_TYPE_FLOAT:
    return config_setting_set_float(dst, config_setting_get_float(src));
  case CONFIG_TYPE_BOOL:
    return config_setting_set_bool(dst, config_setting_get_bool(src));
  case CONFIG_TYPE_STRING:
    return config_setting_set_string(dst, config_setting_get_string(src));
  default:
    return copy_children(dst, src);
  }
}

static int valid_key_syntax(const char *key, size_t n) {
  if (n == 0 || key[0] == '.' || key[n - 1] == '.') return 0;
  for (size_t i = 0; i < n; i++) {
    char c = key[i];
    if (c == '.' && key[i + 1] == '.') return 0;
    if (!(isalnum((unsigned char)c) || c == '_' || c == '.' || c == '-')) return 0;
  }
  return isalpha((unsigned char)key[0]) || key[0] == '_';
}

static jg_status apply_override(config_t *cfg, const char *text, jg_error *err) {
  const char *eq = strchr(text, '=');
  if (!eq)
    return JG_FAIL(err, JG_EINVAL, "--set %s: expected key=value, e.g. --set cosmology.hubble_h=0.7",
                   text);
  char key[256];
  size_t klen = (size_t)(eq - text);
  while (klen > 0 && isspace((unsigned char)text[klen - 1])) klen--;
  const char *kstart = text;
  while (klen > 0 && isspace((unsigned char)*kstart)) kstart++, klen--;
  if (klen >= sizeof key || !valid_key_syntax(kstart, klen))
    return JG_FAIL(err, JG_EINVAL, "--set %s: '%.*s' is not a valid key", text, (int)klen,
                   kstart);
  memcpy(key, kstart, klen);
  key[klen] = '\0';

  /* Parse the value with libconfig itself, so --set takes exactly the
   * syntax of the file (numbers, strings, [arrays]). */
  size_t vlen = strlen(eq + 1);
  if (strspn(eq + 1, " \t\r\n") == vlen)
    return JG_FAIL(err, JG_ECONFIG, "--set %s: empty value (write e.g. --set %s=0.7)", text, key);
  char *doc = malloc(vlen + 16);
  if (!doc) return JG_FAIL(err, JG_ENOMEM, "out of memory reading --set %s", text);
  /* No ';' of our own, so that a value written with one ("0.7;") reads too. */
  snprintf(doc, vlen + 16, "value = %s\n", eq + 1);
  config_t tmp;
  config_init(&tmp);
  int ok = config_read_string(&tmp, doc);
  free(doc);
  /* "0.7; hubble_h = 0.5" parses as two settings; the second would vanish. */
  if (ok && config_setting_length(config_root_setting(&tmp)) != 1) {
    config_destroy(&tmp);
    return JG_FAIL(err, JG_ECONFIG,
                   "--set %s: cannot read the value (text after it; give one value per --set)",
                   text);
  }
  const config_setting_t *src = ok ? config_lookup(&tmp, "value") : NULL;
  if (ok) {
    literal_origin origin = {NULL, text};
    jg_status lst = check_literals(eq + 1, &origin, key, err);
    if (lst != JG_OK) {
      config_destroy(&tmp);
      return lst;
    }
  }
  const param_spec *spec = find_spec(key);
  if (!src && spec && (spec->kind == KIND_CHOICE || spec->kind == KIND_TEXT) &&
      eq[1] != '"') {
    /* The usual cause: the shell ate the quotes of --set key="word". */
    config_destroy(&tmp);
    return JG_FAIL(err, JG_ECONFIG,
                   "--set %s: %s takes quoted text; write --set '%s=\"%s\"' (quotes inside "
                   "single quotes, so that the shell keeps them)",
                   text, key, key, eq + 1);
  }
  if (!src) {
    const char *why = config_error_text(&tmp);
    jg_status st = JG_FAIL(err, JG_ECONFIG,
                           "--set %s: cannot read the value (%s; libconfig syntax, e.g. 0.7, "
                           "\"text\" or [1.0, 2.0] with all elements of one type)",
                           text, why ? why : "syntax error");
    config_destroy(&tmp);
    return st;
  }

  config_setting_t *parent = config_root_setting(cfg);
  char *save = NULL;
  char path[256];
  memcpy(path, key, klen + 1);
  char *part = strtok_r(path, ".", &save);
  jg_status st = JG_OK;
  while (part) {
    char *next = strtok_r(NULL, ".", &save);
    config_setting_t *child = config_setting_get_member(parent, part);
    if (!next) {
      if (child) config_setting_remove(parent, part);
      config_setting_t *dst = config_setting_add(parent, part, config_setting_type(src));
      if (!dst || !copy_setting(dst, src))
        st = JG_FAIL(err, JG_ECONFIG, "--set %s: cannot store this value at '%s'", text, key);
      break;
    }
    if (!child) child = config_setting_add(parent, part, CONFIG_TYPE_GROUP);
    if (!child || config_setting_type(child) != CONFIG_TYPE_GROUP) {
      st = JG_FAIL(err, JG_ECONFIG, "--set %s: '%s' is not a group", text, part);
      break;
    }
    parent = child;
    part = next;
  }
  config_destroy(&tmp);
  return st;
}

/* ------------------------------------------------------------------------ */

/* libconfig's own words for a parse error, with a hint where its words
 * alone would leave a user guessing. */
static const char *parse_error_hint(const char *text) {
  if (text && strcmp(text, "mismatched element type in array") == 0)
    return " (write every element alike: [1100.0, 10.0], not [1100.0, 10])";
  return "";
}

static jg_status read_file(config_t *cfg, const char *path, jg_error *err) {
  struct stat sb;
  if (stat(path, &sb) != 0)
    return JG_FAIL(err, JG_EIO, "%s: cannot read parameter file (%s)", path, strerror(errno));
  if (S_ISDIR(sb.st_mode))
    return JG_FAIL(err, JG_EIO, "%s: cannot read parameter file (it is a directory)", path);
  FILE *f = fopen(path, "r");
  if (!f)
    return JG_FAIL(err, JG_EIO, "%s: cannot read parameter file (%s)", path, strerror(errno));
  /* Read the whole text first: the literal check below needs it, and a zero
   * byte (a binary file given by mistake, or /dev/zero) stops the read at
   * once instead of reaching libconfig, which reports it as a syntax error. */
  size_t cap = 4096, len = 0;
  char *text = malloc(cap);
  jg_status st = text ? JG_OK : JG_FAIL(err, JG_ENOMEM, "%s: out of memory reading it", path);
  while (st == JG_OK) {
    if (cap - len < 2) {
      char *bigger = realloc(text, cap * 2);
      if (!bigger) {
        st = JG_FAIL(err, JG_ENOMEM, "%s: out of memory reading it", path);
        break;
      }
      text = bigger, cap *= 2;
    }
    size_t got = fread(text + len, 1, cap - len - 1, f);
    const char *zero = memchr(text + len, '\0', got);
    if (zero) {
      st = JG_FAIL(err, JG_ECONFIG, "%s: not a text parameter file (zero byte at offset %zu)",
                   path, (size_t)(zero - text));
      break;
    }
    len += got;
    if (got == 0) {
      if (ferror(f))
        st = JG_FAIL(err, JG_EIO, "%s: cannot read parameter file (%s)", path, strerror(errno));
      break;
    }
  }
  fclose(f);
  if (st != JG_OK) {
    free(text);
    return st;
  }
  text[len] = '\0';
  /* Editors on some systems start UTF-8 files with a byte-order mark, which
   * libconfig 1.5 takes for a syntax error on line 1. */
  const char *body = strncmp(text, "\xEF\xBB\xBF", 3) == 0 ? text + 3 : text;
  if (!config_read_string(cfg, body)) {
    const char *why = config_error_text(cfg);
    st = JG_FAIL(err, JG_ECONFIG, "%s:%d: %s%s", path, config_error_line(cfg),
                 why ? why : "syntax error", parse_error_hint(why));
  } else {
    literal_origin origin = {path, NULL};
    st = check_literals(body, &origin, "", err);
  }
  free(text);
  return st;
}

jg_status jg_params_load(const char *path, const char *const *overrides, int n_overrides,
                         jg_params *out, jg_error *err) {
  if (!path || !out)
    return JG_FAIL(err, JG_EINVAL, "jg_params_load: path and output must not be NULL");
  if (n_overrides < 0 || n_overrides > MAX_OVERRIDES)
    return JG_FAIL(err, JG_EINVAL, "too many --set overrides (%d; at most %d)", n_overrides,
                   MAX_OVERRIDES);
  config_t cfg;
  config_init(&cfg);
  jg_status st = read_file(&cfg, path, err);
  for (int i = 0; st == JG_OK && i < n_overrides; i++) st = apply_override(&cfg, overrides[i], err);

  locator loc = {path, &cfg, overrides, n_overrides};
  if (st == JG_OK) st = check_known_keys(&loc, config_root_setting(&cfg), "", err);

  jg_params p;
  jg_params_set_defaults(&p);
  for (int i = 0; st == JG_OK && i < N_SPECS; i++) {
    const param_spec *s = &specs[i];
    const config_setting_t *set = config_lookup(&cfg, s->doc.key);
    if (!set) {
      if (s->required)
        st = JG_FAIL(err, JG_ECONFIG, "%s: missing required key %s (%s)", path, s->doc.key,
                     s->doc.meaning);
      continue;
    }
    st = read_spec(&loc, s, set, &p, err);
  }
  if (st == JG_OK) st = validate(&loc, &p, err);
  config_destroy(&cfg);
  if (st == JG_OK) *out = p;
  return st;
}

/* ------------------------------------------------------------------------ */

/* Shortest decimal text that reads back to the same double. */
static void format_exact(char *buf, size_t size, double v) {
  for (int digits = 6; digits <= 17; digits++) {
    snprintf(buf, size, "%.*g", digits, v);
    if (strtod(buf, NULL) == v) break;
  }
  /* libconfig needs a decimal point or exponent to read a float back. */
  if (!strpbrk(buf, ".eEn")) strncat(buf, ".0", size - strlen(buf) - 1);
}

void jg_params_write_header(FILE *f, const jg_params *p) {
  char buf[64];
  for (int i = 0; i < N_SPECS; i++) {
    const param_spec *s = &specs[i];
    fprintf(f, "# %s = ", s->doc.key);
    switch (s->kind) {
    case KIND_NUMBER:
      format_exact(buf, sizeof buf, *cnumber_at(p, s));
      fprintf(f, "%s;\n", buf);
      break;
    case KIND_INTEGER:
      fprintf(f, "%d;\n", *cint_at(p, s->offset));
      break;
    case KIND_CHOICE:
      fprintf(f, "\"%s\";\n", s->choices[*cint_at(p, s->offset)]);
      break;
    case KIND_TEXT: {
      /* libconfig's escapes, so that the line reads back as it was. */
      fputc('"', f);
      for (const char *c = (const char *)p + s->offset; *c; c++) {
        if (*c == '"' || *c == '\\') fputc('\\', f);
        fputc(*c, f);
      }
      fputs("\";\n", f);
      break;
    }
    case KIND_NUMBER_LIST: {
      int n = *cint_at(p, s->count_offset);
      const double *v = cnumber_at(p, s);
      fputc('[', f);
      for (int j = 0; j < n; j++) {
        format_exact(buf, sizeof buf, v[j]);
        fprintf(f, "%s%s", j ? ", " : "", buf);
      }
      fputs("];\n", f);
      break;
    }
    }
  }
}

/* ------------------------------------------------------------------------ */
/* Setting one number by key: what a parameter scan does at each grid point. */

int jg_params_key_is_numeric(const char *key) {
  const param_spec *s = key ? find_spec(key) : NULL;
  return s && (s->kind == KIND_NUMBER || s->kind == KIND_INTEGER);
}

jg_status jg_params_set_number(jg_params *p, const char *key, double value, jg_error *err) {
  if (!p || !key) return JG_FAIL(err, JG_EINVAL, "jg_params_set_number: NULL argument");
  const param_spec *s = find_spec(key);
  if (!s) {
    const char *near = nearest_key(key);
    if (near)
      return JG_FAIL(err, JG_EINVAL, "unknown key '%s' (did you mean '%s'?)", key, near);
    return JG_FAIL(err, JG_EINVAL,
                   "unknown key '%s' (no known key is similar; jeansgrow keys lists them all)",
                   key);
  }
  switch (s->kind) {
  case KIND_NUMBER:
    *number_at(p, s) = value;
    return JG_OK;
  case KIND_INTEGER:
    /* Rounding would silently move the point; the range itself is left to
     * jg_params_validate, like every other value. */
    if (!(value == floor(value)) || value < INT_MIN || value > INT_MAX)
      return JG_FAIL(err, JG_EINVAL, "%s takes whole numbers only (got %.17g)", key, value);
    *(int *)((char *)p + s->offset) = (int)value;
    return JG_OK;
  default:
    return JG_FAIL(err, JG_EINVAL, "%s is not a single number (its type: %s)", key, s->doc.type);
  }
}
