/*
 * Range checks and combined rules, from the key table: shared by the loader
 * and jg_params_validate().
 */
#include "jeansgrow/params.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#include "params_internal.h"

/* The allowed text of a list reads "COUNT, each RANGE" ("1 to 512 values,
 * each 0 <= z <= ..."): a message about the length quotes COUNT, one about
 * an element quotes RANGE, so neither carries the other's half. */
static const char *list_element_range(const jg__param_spec *s) {
  const char *each = strstr(s->doc.allowed, ", each ");
  return each ? each + strlen(", each ") : s->doc.allowed;
}
int jg__list_count_length(const jg__param_spec *s) {
  const char *each = strstr(s->doc.allowed, ", each ");
  return each ? (int)(each - s->doc.allowed) : (int)strlen(s->doc.allowed);
}

static jg_status check_range(const jg__locator *loc, const jg__param_spec *s, const char *name, double v,
                             jg_error *err) {
  char where[512];
  if (!isfinite(v)) {
    jg__locate(loc, name, where, sizeof where);
    return JG_FAIL(err, JG_ECONFIG, "%s%s must be a finite number (got %g)", where, name, v);
  }
  int below = s->lo_open ? !(v > s->lo) : !(v >= s->lo);
  int above = s->hi_open ? !(v < s->hi) : !(v <= s->hi);
  if (below || above) {
    jg__locate(loc, name, where, sizeof where);
    const char *allowed = s->kind == JG__KIND_NUMBER_LIST ? list_element_range(s) : s->doc.allowed;
    return JG_FAIL(err, JG_ECONFIG, "%s%s must satisfy %s (got %.10g)", where, name, allowed, v);
  }
  return JG_OK;
}

/* ---- combined rules (listed in jg__param_rules) ---- */

/* The first output redshift at or above `limit` (above only when
 * `equal_allowed`), or -1. */
static int first_redshift_not_below(const jg_params *p, double limit, int equal_allowed) {
  for (int i = 0; i < p->output.n_redshifts; i++) {
    double z = p->output.redshifts[i];
    if (equal_allowed ? z > limit : z >= limit) return i;
  }
  return -1;
}

jg_status jg__rule_redshifts_in_history(const jg__locator *loc, const jg_params *p,
                                        jg_error *err) {
  int i = first_redshift_not_below(p, p->thermal.start_redshift, 1);
  if (i < 0) return JG_OK;
  char where[512], name[64];
  snprintf(name, sizeof name, "output.redshifts[%d]", i);
  jg__locate(loc, name, where, sizeof where);
  return JG_FAIL(err, JG_ECONFIG,
                 "%s%s = %g lies above thermal.start_redshift = %g; raise "
                 "thermal.start_redshift or drop that redshift",
                 where, name, p->output.redshifts[i], p->thermal.start_redshift);
}

jg_status jg__rule_dark_energy_fades(const jg__locator *loc, const jg_params *p,
                                     jg_error *err) {
  const jg_cosmology *c = &p->cosmology;
  if (c->de_w0 + c->de_wa < 1.0 / 3.0) return JG_OK;
  char where[512];
  jg__locate(loc, "cosmology.de_wa", where, sizeof where);
  return JG_FAIL(err, JG_ECONFIG,
                 "%scosmology.de_w0 + cosmology.de_wa must be below 1/3 (got %g): such dark "
                 "energy would not fade before radiation at early times",
                 where, c->de_w0 + c->de_wa);
}

jg_status jg__rule_wavenumbers_ordered(const jg__locator *loc, const jg_params *p,
                                       jg_error *err) {
  const jg_perturb_settings *pt = &p->perturbations;
  if (pt->n_k_values > 0 || !(pt->k_max < pt->k_min)) return JG_OK;
  char where[512];
  jg__locate(loc, "perturbations.k_max", where, sizeof where);
  return JG_FAIL(err, JG_ECONFIG,
                 "%sperturbations.k_max = %g is below perturbations.k_min = %g (reversed "
                 "wavenumber range)",
                 where, pt->k_max, pt->k_min);
}

jg_status jg__rule_single_wavenumber(const jg__locator *loc, const jg_params *p,
                                     jg_error *err) {
  const jg_perturb_settings *pt = &p->perturbations;
  if (pt->n_k_values > 0 || pt->k_count != 1 || pt->k_max == pt->k_min) return JG_OK;
  char where[512];
  jg__locate(loc, "perturbations.k_count", where, sizeof where);
  return JG_FAIL(err, JG_ECONFIG,
                 "%sperturbations.k_count = 1 needs k_min = k_max (got %g and %g)", where,
                 pt->k_min, pt->k_max);
}

jg_status jg__rule_redshifts_after_start(const jg__locator *loc, const jg_params *p,
                                         jg_error *err) {
  int i = first_redshift_not_below(p, p->perturbations.z_initial, 0);
  if (i < 0) return JG_OK;
  char where[512], name[64];
  snprintf(name, sizeof name, "output.redshifts[%d]", i);
  jg__locate(loc, name, where, sizeof where);
  return JG_FAIL(err, JG_ECONFIG,
                 "%s%s = %g is not below perturbations.z_initial = %g (reversed redshift "
                 "range)",
                 where, name, p->output.redshifts[i], p->perturbations.z_initial);
}

jg_status jg__rule_history_range_ordered(const jg__locator *loc, const jg_params *p,
                                         jg_error *err) {
  if (p->output.history_z_min < p->thermal.start_redshift) return JG_OK;
  char where[512];
  jg__locate(loc, "output.history_z_min", where, sizeof where);
  return JG_FAIL(err, JG_ECONFIG,
                 "%soutput.history_z_min = %g must lie below thermal.start_redshift = %g "
                 "(reversed redshift range)",
                 where, p->output.history_z_min, p->thermal.start_redshift);
}

jg_status jg__validate(const jg__locator *loc, const jg_params *p, jg_error *err) {
  char where[512];
  for (int i = 0; i < jg__n_param_specs; i++) {
    const jg__param_spec *s = &jg__param_specs[i];
    jg_status st = JG_OK;
    switch (s->kind) {
    case JG__KIND_NUMBER:
      st = check_range(loc, s, s->doc.key, *jg__cnumber_at(p, s), err);
      break;
    case JG__KIND_INTEGER: {
      int v = *jg__cint_at(p, s->offset);
      if (v < s->lo || v > s->hi) {
        jg__locate(loc, s->doc.key, where, sizeof where);
        st = JG_FAIL(err, JG_ECONFIG, "%s%s must satisfy %s (got %d)", where, s->doc.key,
                     s->doc.allowed, v);
      }
      break;
    }
    case JG__KIND_CHOICE: {
      int v = *jg__cint_at(p, s->offset);
      if (v < s->lo || v > s->hi) {
        jg__locate(loc, s->doc.key, where, sizeof where);
        st = JG_FAIL(err, JG_ECONFIG, "%s%s must be one of %s (got choice number %d)", where,
                     s->doc.key, s->doc.allowed, v);
      }
      break;
    }
    case JG__KIND_TEXT: {
      const char *text = (const char *)p + s->offset;
      if (!memchr(text, '\0', s->capacity)) {
        jg__locate(loc, s->doc.key, where, sizeof where);
        st = JG_FAIL(err, JG_ECONFIG, "%s%s is not terminated within %zu bytes", where,
                     s->doc.key, s->capacity);
      }
      break;
    }
    case JG__KIND_NUMBER_LIST: {
      int n = *jg__cint_at(p, s->count_offset);
      if (n < s->min_count || n > s->max_count) {
        jg__locate(loc, s->doc.key, where, sizeof where);
        st = JG_FAIL(err, JG_ECONFIG, "%s%s must hold %.*s (got %d values)", where, s->doc.key,
                     jg__list_count_length(s), s->doc.allowed, n);
        break;
      }
      const double *v = jg__cnumber_at(p, s);
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
  for (int i = 0; i < jg__n_param_rules; i++) {
    jg_status st = jg__param_rules[i].check(loc, p, err);
    if (st != JG_OK) return st;
  }
  return JG_OK;
}

jg_status jg_params_validate(const jg_params *p, jg_error *err) {
  return jg__validate(NULL, p, err);
}

