/*
 * Column maps: which column of a table written by another program holds
 * which quantity. The start table (perturbations.initial_columns) and
 * `jeansgrow compare` read their tables through one map, so both accept
 * the same words and refuse the same mistakes.
 */
#include "jeansgrow/params.h"

#include <stdio.h>
#include <string.h>

static const char *const column_words[JG_N_COLUMN_KINDS] = {
    [JG_COLUMN_SKIP] = "-",
    [JG_COLUMN_K] = "k",
    [JG_COLUMN_Z] = "z",
    [JG_COLUMN_DELTA_C] = "delta_c",
    [JG_COLUMN_DELTA_B] = "delta_b",
    [JG_COLUMN_DELTA_T] = "delta_T",
    [JG_COLUMN_B_OVER_C] = "b_over_c",
    [JG_COLUMN_T_OVER_C] = "T_over_c",
    [JG_COLUMN_VELOCITY_RATIO] = "velocity_ratio",
    [JG_COLUMN_RATE_C] = "rate_c",
    [JG_COLUMN_RATE_B] = "rate_b",
    [JG_COLUMN_THETA_C] = "theta_c",
    [JG_COLUMN_THETA_B] = "theta_b",
};

const char *jg_column_kind_word(jg_column_kind kind) {
  return kind >= 0 && kind < JG_N_COLUMN_KINDS ? column_words[kind] : "?";
}

jg_status jg_column_map_parse(const char *text, jg_column_map *map, char *why, size_t size) {
  memset(map, 0, sizeof *map);
  for (int q = 0; q < JG_N_COLUMN_KINDS; q++) map->column[q] = -1;
  const char *s = text ? text : "";
  while (*s) {
    s += strspn(s, " \t,");
    if (!*s) break;
    const size_t len = strcspn(s, " \t,");
    int kind = -1;
    for (int q = 0; q < JG_N_COLUMN_KINDS; q++)
      if (strlen(column_words[q]) == len && strncmp(s, column_words[q], len) == 0) kind = q;
    if (kind < 0) {
      snprintf(why, size,
               "column %d is '%.*s'; the words are k, z, delta_c, delta_b, delta_T, b_over_c, "
               "T_over_c, velocity_ratio, rate_c, rate_b, theta_c, theta_b and - (skip)",
               map->n + 1, len > 40 ? 40 : (int)len, s);
      return JG_ECONFIG;
    }
    if (map->n == JG_MAX_COLUMNS) {
      snprintf(why, size, "more than %d columns named", JG_MAX_COLUMNS);
      return JG_ECONFIG;
    }
    if (kind != JG_COLUMN_SKIP && map->column[kind] >= 0) {
      snprintf(why, size, "'%s' names columns %d and %d", column_words[kind],
               map->column[kind] + 1, map->n + 1);
      return JG_ECONFIG;
    }
    if (kind != JG_COLUMN_SKIP) map->column[kind] = map->n;
    map->kind[map->n++] = (jg_column_kind)kind;
    s += len;
  }
  if (map->n == 0) {
    snprintf(why, size, "no column named");
    return JG_ECONFIG;
  }
  return JG_OK;
}

/* The first of `kinds` (ended by -1) that the map holds, or -1. */
static int first_held(const jg_column_map *m, const int *kinds) {
  for (; *kinds >= 0; kinds++)
    if (m->column[*kinds] >= 0) return *kinds;
  return -1;
}

/* How many of `kinds` (ended by -1) the map holds. */
static int count_held(const jg_column_map *m, const int *kinds) {
  int n = 0;
  for (; *kinds >= 0; kinds++) n += m->column[*kinds] >= 0;
  return n;
}

jg_status jg_column_map_check_start(const jg_column_map *m, jg_table_gauge gauge,
                                    int second_snapshot, char *why, size_t size) {
  static const int baryon_velocity[] = {JG_COLUMN_VELOCITY_RATIO, JG_COLUMN_RATE_B,
                                        JG_COLUMN_THETA_B, -1};
  static const int cdm_velocity[] = {JG_COLUMN_RATE_C, JG_COLUMN_THETA_C, -1};
  static const int temperature[] = {JG_COLUMN_DELTA_T, JG_COLUMN_T_OVER_C, -1};
  static const int needs_delta_c[] = {JG_COLUMN_DELTA_B, JG_COLUMN_DELTA_T, JG_COLUMN_THETA_C,
                                      JG_COLUMN_THETA_B, -1};
  const int *col = m->column;
  if (col[JG_COLUMN_K] < 0) return snprintf(why, size, "no column holds k"), JG_ECONFIG;
  if (col[JG_COLUMN_Z] >= 0)
    return snprintf(why, size, "a start table holds one redshift (z_initial): drop 'z'"),
           JG_ECONFIG;
  if ((col[JG_COLUMN_B_OVER_C] >= 0) == (col[JG_COLUMN_DELTA_B] >= 0))
    return snprintf(why, size,
                    "the baryon density must be given once: b_over_c, or delta_b with delta_c"),
           JG_ECONFIG;
  if (second_snapshot && (col[JG_COLUMN_DELTA_C] < 0 || col[JG_COLUMN_DELTA_B] < 0))
    return snprintf(why, size,
                    "two snapshots give rates through delta_c and delta_b: name both columns"),
           JG_ECONFIG;
  if (count_held(m, baryon_velocity) > 1 ||
      (!second_snapshot && count_held(m, baryon_velocity) != 1))
    return snprintf(why, size,
                    "the baryon velocity must be given once: velocity_ratio, rate_b or theta_b "
                    "(or a second snapshot, perturbations.initial_second_table)"),
           JG_ECONFIG;
  if (count_held(m, cdm_velocity) > 1 || count_held(m, temperature) > 1)
    return snprintf(why, size,
                    "give the dark-matter velocity (rate_c or theta_c) and the temperature "
                    "(delta_T or T_over_c) at most once each"),
           JG_ECONFIG;
  const int q = first_held(m, needs_delta_c);
  if (q >= 0 && col[JG_COLUMN_DELTA_C] < 0)
    return snprintf(why, size, "'%s' needs a delta_c column of the same normalisation",
                    column_words[q]),
           JG_ECONFIG;
  if (gauge == JG_TABLE_SYNCHRONOUS && col[JG_COLUMN_THETA_C] >= 0)
    return snprintf(why, size,
                    "theta_c is 0 by definition in the synchronous gauge (the dark matter's "
                    "rate then comes from rate_c or its growing mode): drop it"),
           JG_ECONFIG;
  return JG_OK;
}

int jg_params_start_gives_cdm_velocity(const jg_perturb_settings *s) {
  if (!s->initial_table[0] || !s->initial_columns[0]) return 0;
  if (s->initial_second_table[0]) return 1;
  jg_column_map m;
  char why[256];
  if (jg_column_map_parse(s->initial_columns, &m, why, sizeof why) != JG_OK) return 0;
  return m.column[JG_COLUMN_RATE_C] >= 0 ||
         (m.column[JG_COLUMN_THETA_C] >= 0 && s->initial_gauge == JG_TABLE_NEWTONIAN);
}
