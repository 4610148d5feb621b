/* A whole scan in memory (include/jeansgrow/embed_scan.h): the program's
 * scan without files, through the same grid, evaluator, runner and table. */
#include "jeansgrow/embed_scan.h"

#include <stdio.h>
#include <stdlib.h>

#include "jeansgrow/scan.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

jg_status jg_config_scan(const jg_config *c, const char *const *vary, int n_vary, int threads,
                         char **text, size_t *size, long long *failed, jg_error *err) {
  if (!c || !text || (n_vary > 0 && !vary))
    return JG_FAIL(err, JG_EINVAL, "jg_config_scan: NULL config, axes or text pointer");
  if (n_vary < 1) return JG_FAIL(err, JG_EINVAL, "nothing to vary: give at least one axis");
  if (threads < 1) return JG_FAIL(err, JG_EINVAL, "jg_config_scan: %d threads (at least 1)", threads);
  const jg_params *p = jg_config_params(c);
  jg_scan_grid grid = {0};
  jg_status st = jg_config_validate(c, err);
  for (int i = 0; st == JG_OK && i < n_vary; i++)
    st = jg_scan_grid_parse(&grid, vary[i], "--vary", err);
  jg_scan *s = NULL;
  if (st == JG_OK)
    st = jg_scan_new(p, &grid, jg_scan_evaluator_scales(p->output.units), 1, 1, &s, err);
  jg_scan_checkpoint *cp = NULL;
  if (st == JG_OK) st = jg_scan_checkpoint_open(s, NULL, 0, &cp, err);
  if (st == JG_OK) st = jg_scan_run(s, cp, threads, NULL, NULL, err);
  char *buf = NULL;
  size_t n = 0;
  FILE *f = NULL;
  if (st == JG_OK && !(f = open_memstream(&buf, &n)))
    st = JG_FAIL(err, JG_ENOMEM, "out of memory for the scan table");
  if (st == JG_OK) st = jg_scan_write_table(s, cp, f, err);
  if (f && fclose(f) != 0 && st == JG_OK)
    st = JG_FAIL(err, JG_ENOMEM, "out of memory for the scan table");
  if (st == JG_OK) {
    if (failed) *failed = jg_scan_checkpoint_failed(cp);
    *text = buf;
    if (size) *size = n;
  } else {
    free(buf);
  }
  jg_scan_checkpoint_close(cp, 1);
  jg_scan_free(s);
  jg_scan_grid_clear(&grid);
  return st;
}
