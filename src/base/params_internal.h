/*
 * Shared internals of the parameter module (private: not installed).
 *
 * The module is one key table and the machinery that walks it:
 *
 *   params_keys.c      the key table, the combined rules, the scan group's
 *                      keys, the defaults
 *   params_check.c     range and combined-rule checks (the loader, the
 *                      public validators and the stages all use these)
 *   params_load.c      reading a file: text, types, the header written
 *                      back into every table, setting one number by key
 *   params_literals.c  what libconfig 1.5 would misread without a word
 *                      (wrapped integers, inf, an unclosed comment)
 *   params_override.c  --set key=value, and where a key came from
 *   params_suggest.c   unknown keys and groups, with the nearest known key
 *   params_scan.c      the `scan` group, read against its own key table
 */
#ifndef JEANSGROW_PARAMS_INTERNAL_H
#define JEANSGROW_PARAMS_INTERNAL_H

#include <libconfig.h>
#include <stddef.h>

#include "jeansgrow/params.h"

typedef enum {
  JG__KIND_NUMBER,
  JG__KIND_INTEGER,
  JG__KIND_NUMBER_LIST,
  JG__KIND_CHOICE,
  JG__KIND_TEXT,
  /* Text naming a file: a relative name written in a parameter file is taken
   * from that file's folder (one given with --set, from the current folder). */
  JG__KIND_FILE,
  /* true or false, stored as the int 1 or 0 */
  JG__KIND_BOOLEAN
} jg__spec_kind;

typedef struct jg__param_spec {
  jg_param_doc doc;
  jg__spec_kind kind;
  size_t offset;       /* of the value (or the first list element) in jg_params */
  size_t count_offset; /* lists: of the int element count */
  int min_count;       /* lists: fewest elements (0: the list may be absent or empty) */
  int max_count;       /* lists: capacity */
  int required;
  double lo, hi;       /* allowed range */
  int lo_open, hi_open;/* strict (>) or inclusive (>=) bounds */
  const char *const *choices; /* JG__KIND_CHOICE: the allowed words, NULL-terminated;
                                 stored as the int index of the word */
  size_t capacity;     /* JG__KIND_TEXT, _FILE: bytes of the char array, final zero included */
} jg__param_spec;

extern const jg__param_spec jg__param_specs[];
extern const int jg__n_param_specs;
extern const char *const jg__param_groups[]; /* the groups of jg_params, in table order */
extern const int jg__n_param_groups;

/* One element of scan.vary, as the scan key table reads it. */
#define JG__VARY_KEY_SIZE 64
#define JG__VARY_MAX_VALUES 100000
typedef struct jg__vary_fields {
  char key[JG__VARY_KEY_SIZE];
  double from, to;
  int count;
  int spacing; /* index into the words of scan.vary[].spacing */
  int n_values;
  double values[JG__VARY_MAX_VALUES];
} jg__vary_fields;

/* The scan group's keys: scan.vary itself (documented only: its elements
 * are read one by one), then the members of an element. */
extern const jg_param_doc jg__scan_vary_doc;
extern const jg__param_spec jg__vary_specs[];
extern const int jg__n_vary_specs;

/* A key a stage (a library module) accepts more widely than a parameter
 * file does, and why: the wider domain is what the stage's own check uses.
 * Every other key's stage check is its file range. */
typedef struct jg__stage_domain {
  const char *key;
  double lo, hi;
  int lo_open, hi_open;
  const char *allowed; /* human-readable, for messages */
  const char *reason;
} jg__stage_domain;

extern const jg__stage_domain jg__stage_domains[];
extern const int jg__n_stage_domains;

/* The spec of `key`, or NULL. */
const jg__param_spec *jg__find_spec(const char *key);

/* Where a key came from, for messages: "file:line: " or "--set k=v: ". */
typedef struct jg__locator {
  const char *path;             /* the parameter file */
  const config_t *cfg;          /* NULL when validating a hand-filled struct */
  const char *const *overrides; /* the --set texts, in order */
  int n_overrides;
} jg__locator;

/* Settings read from the file carry their line; those an override added or
 * replaced carry line 0, so a line > 0 means the file is the culprit. An
 * empty text when `loc` is NULL (a struct filled by hand). */
void jg__locate(const jg__locator *loc, const char *key, char *buf, size_t size);

/* A rule on several keys at once: listed by `jeansgrow keys`, checked by
 * jg__validate (and, when all its keys lie in one group, by that group's
 * public check, which the stages call). */
typedef jg_status (*jg__rule_check)(const jg__locator *loc, const jg_params *p,
                                    jg_error *err);
typedef struct jg__param_rule {
  jg_param_rule doc;
  const char *group; /* the one group all its keys lie in, or NULL */
  jg__rule_check check;
} jg__param_rule;

extern const jg__param_rule jg__param_rules[];
extern const int jg__n_param_rules;

jg_status jg__rule_redshifts_in_history(const jg__locator *loc, const jg_params *p, jg_error *err);
jg_status jg__rule_dark_energy_fades(const jg__locator *loc, const jg_params *p, jg_error *err);
jg_status jg__rule_wavenumbers_ordered(const jg__locator *loc, const jg_params *p, jg_error *err);
jg_status jg__rule_single_wavenumber(const jg__locator *loc, const jg_params *p, jg_error *err);
jg_status jg__rule_redshifts_after_start(const jg__locator *loc, const jg_params *p, jg_error *err);
jg_status jg__rule_history_range_ordered(const jg__locator *loc, const jg_params *p, jg_error *err);
jg_status jg__rule_start_columns(const jg__locator *loc, const jg_params *p, jg_error *err);
jg_status jg__rule_own_start_early(const jg__locator *loc, const jg_params *p, jg_error *err);
jg_status jg__rule_second_snapshot_near(const jg__locator *loc, const jg_params *p, jg_error *err);

static inline double *jg__number_at(jg_params *p, const jg__param_spec *s) {
  return (double *)((char *)p + s->offset);
}
static inline const double *jg__cnumber_at(const jg_params *p, const jg__param_spec *s) {
  return (const double *)((const char *)p + s->offset);
}
static inline const int *jg__cint_at(const jg_params *p, size_t offset) {
  return (const int *)((const char *)p + offset);
}

/* Length of the COUNT half of a list's allowed text "COUNT, each RANGE". */
int jg__list_count_length(const jg__param_spec *s);

/* Every range of the table, then every combined rule. */
jg_status jg__validate(const jg__locator *loc, const jg_params *p, jg_error *err);

/* What a setting holds, with its value, for "(got ...)". */
const char *jg__describe_value(const config_setting_t *s, char *buf, size_t size);

/* The key of `table` (n entries) nearest to `key`, or NULL if none is
 * close; jg__nearest_key searches the key table. */
const char *jg__nearest_in(const char *key, const jg__param_spec *table, int n);
const char *jg__nearest_key(const char *key);
/* "WHEREunknown key 'KEY' (did you mean 'NEAR'?)", or without a NEAR. */
jg_status jg__unknown_key(const char *where, const char *key, const char *near, jg_error *err);

/* Read one setting as spec `s` says into `base` + s->offset (`base` is a
 * jg_params, or the struct a smaller table describes). `where` starts the
 * message, `name` is the key as the user wrote it. */
jg_status jg__read_setting(const char *where, const char *name, const jg__param_spec *s,
                           const config_setting_t *set, void *base, jg_error *err);

/* Every setting under `group` is a known key or group; `prefix` is the
 * group's dotted name ("" for the root). */
jg_status jg__check_known_keys(const jg__locator *loc, const config_setting_t *group,
                               const char *prefix, jg_error *err);

/* Who wrote a text checked by jg__check_literals. */
typedef struct jg__literal_origin {
  const char *path;     /* the parameter file, or NULL */
  const char *override; /* the --set text, or NULL */
} jg__literal_origin;

/* Scan libconfig text for what libconfig 1.5 would misread. `outer_key` is
 * the key a --set value is assigned to ("" for a whole file). */
jg_status jg__check_literals(const char *text, const jg__literal_origin *origin,
                             const char *outer_key, jg_error *err);

/* A block comment opened and never closed, which libconfig 1.5 accepts,
 * ignoring the rest of the text. */
jg_status jg__check_comments(const char *text, const jg__literal_origin *origin, jg_error *err);

/* Apply one --set "key=value" to the parsed file. */
jg_status jg__apply_override(config_t *cfg, const char *text, jg_error *err);

/* Read a parameter file's text into `cfg`, with every check of the text. */
jg_status jg__read_file(config_t *cfg, const char *path, jg_error *err);

/* Read the `scan` setting of file `path` against the scan key table and
 * hand each axis of scan.vary to `add` (NULL: only check). */
jg_status jg__read_scan_group(const char *path, const config_setting_t *scan,
                              jg_param_axis_fn add, void *user, jg_error *err);
/* The answer to --set of a key in the scan group (`text` the whole
 * override, `key` its key): always an error. */
jg_status jg__scan_override_refused(const char *text, const char *key, jg_error *err);

#endif
