/* Number literals that libconfig 1.5 would misread without a word. */
#include "jeansgrow/params.h"

#include <ctype.h>
#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "params_internal.h"

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

typedef struct literal_scan {
  char group[256];     /* enclosing groups, dot-separated */
  size_t outer[32];    /* length of `group` before each open '{' */
  int depth;
  char name[128];      /* last setting name: the key the next value belongs to */
} literal_scan;

static int is_name_start(int c) { return isalpha(c) || c == '*'; }
static int is_name_char(int c) { return isalnum(c) || c == '*' || c == '_' || c == '-'; }

static jg_status bad_literal(const jg__literal_origin *origin, int line, const literal_scan *sc,
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
static jg_status check_number(const char *tok, size_t n, const jg__literal_origin *origin, int line,
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

/* If `*c` starts a comment or a string, move past it (counting its lines
 * in *line) and return 1, or -1 for a block comment that is never closed
 * (it then ends at the end of the text); else 0. */
static int skip_comment_or_string(const char **c, int *line) {
  const char *s = *c;
  if (*s == '#' || (s[0] == '/' && s[1] == '/')) {
    while (*s && *s != '\n') s++;
  } else if (s[0] == '/' && s[1] == '*') {
    for (s += 2; *s && !(s[0] == '*' && s[1] == '/'); s++)
      if (*s == '\n') (*line)++;
    *c = *s ? s + 2 : s;
    return *s ? 1 : -1;
  } else if (*s == '"') {
    for (s++; *s && *s != '"'; s++) {
      if (*s == '\\' && s[1]) s++;
      if (*s == '\n') (*line)++;
    }
    if (*s) s++;
  } else {
    return 0;
  }
  *c = s;
  return 1;
}

/*
 * libconfig 1.5's scanner ends a block comment at the end of the text when
 * its closing mark is missing, and reports nothing: an opening mark without
 * its close between two groups silently drops every setting after it, and the defaults run
 * instead. Checked before libconfig parses the text, because where the
 * comment sits inside a group libconfig reports only a syntax error on the
 * last line, far from the cause.
 */
jg_status jg__check_comments(const char *text, const jg__literal_origin *origin,
                             jg_error *err) {
  int line = 1;
  for (const char *c = text; *c;) {
    int opened = line;
    int skipped = skip_comment_or_string(&c, &line);
    if (skipped < 0) {
      if (origin->override)
        return JG_FAIL(err, JG_ECONFIG,
                       "--set %s: comment '/*' is never closed by '*/' (everything after it "
                       "would be ignored)", origin->override);
      return JG_FAIL(err, JG_ECONFIG,
                     "%s:%d: comment '/*' opened here is never closed by '*/' (everything "
                     "after it would be ignored)", origin->path, opened);
    } else if (!skipped) {
      if (*c == '\n') line++;
      c++;
    }
  }
  return JG_OK;
}

/* Scan libconfig text for misread number literals. `outer_key` is the key a
 * --set value is assigned to ("" for a whole file). */
jg_status jg__check_literals(const char *text, const jg__literal_origin *origin,
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
    } else if (skip_comment_or_string(&c, &line) != 0) {
      continue;
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

