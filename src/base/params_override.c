/*
 * --set key=value overrides, and where a key came from ("file:line: " or
 * "--set key=value: ") for every message of the module.
 */
#include "jeansgrow/params.h"

#include <ctype.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "params_internal.h"
#include "alloc.h" /* last: test builds route allocations through it */

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
void jg__locate(const jg__locator *loc, const char *key, char *buf, size_t size) {
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
      /* A long list is not echoed whole: the message after it must stay. */
      const char *o = loc->overrides[i];
      snprintf(buf, size, "--set %.60s%s: ", o, strlen(o) > 60 ? "..." : "");
      return;
    }
  }
  if (loc->path) snprintf(buf, size, "%s: ", loc->path);
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

jg_status jg__apply_override(config_t *cfg, const char *text, jg_error *err) {
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
  if (strcmp(key, "scan") == 0 || strncmp(key, "scan.", 5) == 0)
    return jg__scan_override_refused(text, key, err);

  /* Parse the value with libconfig itself, so --set takes exactly the
   * syntax of the file (numbers, strings, [arrays]). */
  size_t vlen = strlen(eq + 1);
  if (strspn(eq + 1, " \t\r\n") == vlen)
    return JG_FAIL(err, JG_ECONFIG, "--set %s: empty value (write e.g. --set %s=0.7)", text, key);
  char *doc = malloc(vlen + 16);
  if (!doc) return JG_FAIL(err, JG_ENOMEM, "out of memory reading --set %s", text);
  /* No ';' of our own, so that a value written with one ("0.7;") reads too. */
  snprintf(doc, vlen + 16, "value = %s\n", eq + 1);
  jg__literal_origin origin = {NULL, text};
  jg_status cst = jg__check_comments(doc, &origin, err);
  if (cst != JG_OK) {
    free(doc);
    return cst;
  }
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
    jg_status lst = jg__check_literals(eq + 1, &origin, key, err);
    if (lst != JG_OK) {
      config_destroy(&tmp);
      return lst;
    }
  }
  const jg__param_spec *spec = jg__find_spec(key);
  if (!src && spec && (spec->kind == JG__KIND_CHOICE || spec->kind == JG__KIND_TEXT ||
                         spec->kind == JG__KIND_FILE) &&
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

