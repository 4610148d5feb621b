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
#include <math.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

typedef enum { KIND_NUMBER, KIND_INTEGER, KIND_NUMBER_LIST, KIND_CHOICE } spec_kind;

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
} param_spec;

#define P_OFF(field) offsetof(jg_params, field)
#define NUMBER(key, field, unit, def, allowed, lo, lo_open, hi, hi_open, meaning) \
  {{key, "number", unit, def, allowed, meaning}, KIND_NUMBER, P_OFF(field), 0, 0, 0, 0, lo, hi, lo_open, hi_open, NULL}
#define REQUIRED_NUMBER(key, field, unit, allowed, lo, lo_open, hi, hi_open, meaning) \
  {{key, "number", unit, "required", allowed, meaning}, KIND_NUMBER, P_OFF(field), 0, 0, 0, 1, lo, hi, lo_open, hi_open, NULL}
#define INTEGER(key, field, def, allowed, lo, hi, meaning) \
  {{key, "integer", "", def, allowed, meaning}, KIND_INTEGER, P_OFF(field), 0, 0, 0, 0, lo, hi, 0, 0, NULL}

static const char *const sound_speed_words[] = {"fluctuating", "isothermal", "adiabatic", NULL};

static const param_spec specs[] = {
    REQUIRED_NUMBER("cosmology.hubble_h", cosmology.hubble_h, "", "0 < value <= 5", 0, 1, 5, 0,
                    "H0 / (100 km/s/Mpc)"),
    REQUIRED_NUMBER("cosmology.baryon_density_h2", cosmology.baryon_density_h2, "",
                    "0 < value <= 1", 0, 1, 1, 0, "baryon density Omega_b h^2"),
    REQUIRED_NUMBER("cosmology.cdm_density_h2", cosmology.cdm_density_h2, "", "0 < value <= 2",
                    0, 1, 2, 0, "cold dark matter density Omega_c h^2"),
    NUMBER("cosmology.curvature_omega", cosmology.curvature_omega, "", "0.0",
           "-1 < value < 1 (and H^2 > 0 at all times)", -1, 1, 1, 1,
           "curvature density Omega_k today (negative: closed)"),
    NUMBER("cosmology.cmb_temperature_K", cosmology.cmb_temperature_K, "K", "2.7255",
           "0 < value <= 30", 0, 1, 30, 0, "CMB temperature today"),
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
           "T_gas takes its quasi-static value while H / Gamma_C is below this"),
    NUMBER("thermal.rel_tol", thermal.rel_tol, "", "1e-8", "1e-13 <= value <= 1e-3", 1e-13, 0,
           1e-3, 0, "relative tolerance of the stiff integration"),
    NUMBER("thermal.abs_tol", thermal.abs_tol, "", "1e-12", "0 < value <= 1e-3", 0, 1, 1e-3, 0,
           "absolute tolerance of the stiff integration (x_p, and T_gas in K)"),
    INTEGER("thermal.grid_points", thermal.grid_points, "4000", "200 <= value <= 1000000", 200,
            1000000, "nodes of the stored history, uniform in ln a"),

    NUMBER("perturbations.k_min", perturbations.k_min, "1/Mpc", "1.0", "1 <= value <= 1e5", 1,
           0, 1e5, 0,
           "smallest comoving wavenumber of the log-spaced grid (photon pressure and Silk "
           "damping are neglected, which needs k >= 1/Mpc)"),
    NUMBER("perturbations.k_max", perturbations.k_max, "1/Mpc", "5000.0",
           "k_min <= value <= 1e5", 1, 0, 1e5, 0, "largest comoving wavenumber of the grid"),
    INTEGER("perturbations.k_count", perturbations.k_count, "128", "1 <= value <= 4096", 1,
            JG_MAX_WAVENUMBERS, "number of grid wavenumbers"),
    {{"perturbations.k_values", "list of numbers", "1/Mpc", "(none: use the grid)",
      "1 to 4096 values, each 1 <= k <= 1e5", "explicit wavenumbers, used instead of the grid"},
     KIND_NUMBER_LIST, P_OFF(perturbations.k_values), P_OFF(perturbations.n_k_values), 0,
     JG_MAX_WAVENUMBERS, 0, 1, 1e5, 0, 0, NULL},
    NUMBER("perturbations.z_initial", perturbations.z_initial, "", "10000.0",
           "1500 <= value <= 100000 and above every output redshift", 1500, 0, 1e5, 0,
           "redshift where CDM starts on the Meszaros growing mode, baryons at rest"),
    {{"perturbations.sound_speed", "one of \"fluctuating\", \"isothermal\", \"adiabatic\"", "",
      "\"fluctuating\"", "fluctuating, isothermal or adiabatic",
      "gas pressure model: delta_T evolved (scale dependent), or uniform with gamma = 1 or 5/3"},
     KIND_CHOICE, P_OFF(perturbations.sound_speed), 0, 0, 0, 0, 0, 2, 0, 0, sound_speed_words},
    NUMBER("perturbations.rel_tol", perturbations.rel_tol, "", "1e-8", "1e-13 <= value <= 1e-3",
           1e-13, 0, 1e-3, 0, "relative tolerance of the perturbation integration"),
    NUMBER("perturbations.abs_tol", perturbations.abs_tol, "", "1e-10", "0 < value <= 1e-3", 0,
           1, 1e-3, 0, "absolute tolerance, in units of the initial CDM contrast"),

    {{"output.redshifts", "list of numbers", "",
      "[1100.0, 1000.0, 500.0, 200.0, 100.0, 50.0, 20.0, 10.0]",
      "1 to 512 values, each 0 <= z <= thermal.start_redshift", "redshifts reported by every "
      "table (added exactly to the history table)"},
     KIND_NUMBER_LIST, P_OFF(output.redshifts), P_OFF(output.n_redshifts), 1, JG_MAX_REDSHIFTS, 0,
     0, 1e5, 0, 0, NULL},
    INTEGER("output.history_rows", output.history_rows, "1000", "10 <= value <= 1000000", 10,
            1000000, "rows of the history table, uniform in ln(1+z)"),
    NUMBER("output.history_z_min", output.history_z_min, "", "0.0",
           "0 <= value < thermal.start_redshift", 0, 0, 1e5, 1,
           "last (lowest) redshift of the history table"),
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
  p->thermal.rel_tol = 1e-8;
  p->thermal.abs_tol = 1e-12;
  p->thermal.grid_points = 4000;

  p->perturbations.k_min = 1.0;
  p->perturbations.k_max = 5000.0;
  p->perturbations.k_count = 128;
  p->perturbations.n_k_values = 0;
  p->perturbations.z_initial = 1.0e4;
  p->perturbations.sound_speed = JG_SOUND_SPEED_FLUCTUATING;
  p->perturbations.rel_tol = 1e-8;
  p->perturbations.abs_tol = 1e-10;

  p->output.n_redshifts = (int)(sizeof default_redshifts / sizeof default_redshifts[0]);
  memcpy(p->output.redshifts, default_redshifts, sizeof default_redshifts);
  p->output.history_rows = 1000;
  p->output.history_z_min = 0.0;
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

/* Does override `text` set `key` or a group that contains it? */
static int override_covers(const char *text, const char *key) {
  size_t n = override_key_length(text);
  while (n > 0 && isspace((unsigned char)text[n - 1])) n--;
  while (n > 0 && isspace((unsigned char)*text)) text++, n--;
  if (strncmp(text, key, n) != 0) return 0;
  return key[n] == '\0' || key[n] == '.' || key[n] == '[';
}

static void locate(const locator *loc, const char *key, char *buf, size_t size) {
  buf[0] = '\0';
  if (!loc) return;
  for (int i = loc->n_overrides - 1; i >= 0; i--) {
    if (override_covers(loc->overrides[i], key)) {
      snprintf(buf, size, "--set %s: ", loc->overrides[i]);
      return;
    }
  }
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
    return JG_FAIL(err, JG_ECONFIG, "%s%s must satisfy %s (got %.10g)", where, name,
                   s->doc.allowed, v);
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
    case KIND_NUMBER_LIST: {
      int n = *cint_at(p, s->count_offset);
      if (n < s->min_count || n > s->max_count) {
        locate(loc, s->doc.key, where, sizeof where);
        st = JG_FAIL(err, JG_ECONFIG, "%s%s must hold %s (got %d values)", where, s->doc.key,
                     s->doc.allowed, n);
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

static const char *type_phrase(int type) {
  switch (type) {
  case CONFIG_TYPE_INT:
  case CONFIG_TYPE_INT64:
    return "an integer";
  case CONFIG_TYPE_FLOAT:
    return "a floating-point number";
  case CONFIG_TYPE_STRING:
    return "a string";
  case CONFIG_TYPE_BOOL:
    return "a boolean";
  case CONFIG_TYPE_ARRAY:
  case CONFIG_TYPE_LIST:
    return "a list";
  case CONFIG_TYPE_GROUP:
    return "a group";
  default:
    return "an unknown type";
  }
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
  char where[512];
  locate(loc, s->doc.key, where, sizeof where);
  int type = config_setting_type(set);
  switch (s->kind) {
  case KIND_NUMBER:
    if (!is_numeric(set))
      return JG_FAIL(err, JG_ECONFIG, "%s%s must be a number (got %s)", where, s->doc.key,
                     type_phrase(type));
    *number_at(p, s) = numeric_value(set);
    return JG_OK;
  case KIND_INTEGER: {
    if (type != CONFIG_TYPE_INT && type != CONFIG_TYPE_INT64)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must be an integer (got %s)", where, s->doc.key,
                     type_phrase(type));
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
                     s->doc.key, s->doc.allowed, type_phrase(type));
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
  case KIND_NUMBER_LIST: {
    if (type != CONFIG_TYPE_ARRAY && type != CONFIG_TYPE_LIST)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must be a list of numbers such as [20.0, 10.0] (got %s)",
                     where, s->doc.key, type_phrase(type));
    int n = config_setting_length(set);
    if (n < (s->min_count > 0 ? s->min_count : 1) || n > s->max_count)
      return JG_FAIL(err, JG_ECONFIG, "%s%s must hold %s (got %d values)", where, s->doc.key,
                     s->doc.allowed, n);
    double *out = number_at(p, s);
    for (int j = 0; j < n; j++) {
      const config_setting_t *e = config_setting_get_elem(set, (unsigned)j);
      if (!is_numeric(e))
        return JG_FAIL(err, JG_ECONFIG, "%s%s[%d] must be a number (got %s)", where, s->doc.key,
                       j, type_phrase(config_setting_type(e)));
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

static const char *nearest_key(const char *key) {
  const char *best = specs[0].doc.key;
  size_t best_d = (size_t)-1;
  for (int i = 0; i < N_SPECS; i++) {
    size_t d = edit_distance(key, specs[i].doc.key);
    /* A key written without its group ("hubble_h") should find its home. */
    const char *dot = strchr(specs[i].doc.key, '.');
    if (dot) {
      size_t d2 = edit_distance(key, dot + 1);
      if (d2 < d) d = d2;
    }
    if (d < best_d) best_d = d, best = specs[i].doc.key;
  }
  return best;
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
  return JG_FAIL(err, JG_ECONFIG, "%sunknown key '%s' (did you mean '%s'?)", where, key,
                 nearest_key(key));
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
    if (!prefix[0] && config_setting_type(s) == CONFIG_TYPE_GROUP && is_known_group(key)) {
      jg_status st = check_known_keys(loc, s, key, err);
      if (st != JG_OK) return st;
      continue;
    }
    return unknown_key(loc, key, err);
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
  char *doc = malloc(vlen + 16);
  if (!doc) return JG_FAIL(err, JG_ENOMEM, "out of memory reading --set %s", text);
  snprintf(doc, vlen + 16, "value = %s\n;", eq + 1);
  config_t tmp;
  config_init(&tmp);
  int ok = config_read_string(&tmp, doc);
  free(doc);
  const config_setting_t *src = ok ? config_lookup(&tmp, "value") : NULL;
  if (!src || (vlen == 0)) {
    const char *why = ok ? "empty value" : config_error_text(&tmp);
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

static jg_status read_file(config_t *cfg, const char *path, jg_error *err) {
  struct stat sb;
  if (stat(path, &sb) != 0)
    return JG_FAIL(err, JG_EIO, "%s: cannot read parameter file (%s)", path, strerror(errno));
  if (S_ISDIR(sb.st_mode))
    return JG_FAIL(err, JG_EIO, "%s: cannot read parameter file (it is a directory)", path);
  FILE *f = fopen(path, "r");
  if (!f)
    return JG_FAIL(err, JG_EIO, "%s: cannot read parameter file (%s)", path, strerror(errno));
  int ok = config_read(cfg, f);
  fclose(f);
  if (!ok) {
    int line = config_error_line(cfg);
    const char *text = config_error_text(cfg);
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: %s", path, line, text ? text : "syntax error");
  }
  return JG_OK;
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
