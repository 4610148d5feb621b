/* Status texts and the error record (see include/jeansgrow/error.h). */
#include "jeansgrow/error.h"

#include <gsl/gsl_errno.h>
#include <stdarg.h>
#include <stdio.h>

#include "jeansgrow/version.h"

const char *jg_strerror(jg_status status) {
  switch (status) {
#define JG_STATUS_TEXT(name, value, text) \
  case name:                              \
    return text;
    JG_STATUS_TABLE(JG_STATUS_TEXT)
#undef JG_STATUS_TEXT
  }
  return "unknown status";
}

const char *jg_status_name(jg_status status) {
  switch (status) {
#define JG_STATUS_NAME(name, value, text) \
  case name:                              \
    return #name;
    JG_STATUS_TABLE(JG_STATUS_NAME)
#undef JG_STATUS_NAME
  }
  return "JG_UNKNOWN";
}

void jg_error_clear(jg_error *err) {
  if (!err) return;
  err->status = JG_OK;
  err->message[0] = '\0';
  err->source_file = NULL;
  err->source_line = 0;
}

jg_status jg_error_set(jg_error *err, jg_status status, const char *file, int line,
                       const char *fmt, ...) {
  if (!err) return status;
  err->status = status;
  err->source_file = file;
  err->source_line = line;
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(err->message, sizeof err->message, fmt, ap);
  va_end(ap);
  /* The record promises one printable line, but messages quote user text (a
   * string from a parameter file, a --set argument, a path) that may hold a
   * newline or a terminal escape: those would split the line a program
   * prints, or drive the user's terminal. */
  for (char *c = err->message; *c; c++)
    if ((unsigned char)*c < 0x20 || *c == 0x7f) *c = '?';
  return status;
}

void jg_gsl_handler_off(void) { gsl_set_error_handler_off(); }

const char *jg_version(void) { return JG_VERSION_STRING; }

int jg_version_number(void) {
  return JG_VERSION_MAJOR * 10000 + JG_VERSION_MINOR * 100 + JG_VERSION_PATCH;
}
