/*
 * One cosmology built once, tables on request (include/jeansgrow/universe.h).
 * The tables are written by the same report functions as the program's
 * commands, from the same stages called in the same way, so the text is
 * the program's own.
 */
#include "jeansgrow/universe.h"

#include <pthread.h>
#include <stdlib.h>
#include <string.h>

#include "jeansgrow/background.h"
#include "jeansgrow/epochs.h"
#include "jeansgrow/growth.h"
#include "jeansgrow/perturb.h"
#include "jeansgrow/report.h"
#include "jeansgrow/scales.h"
#include "jeansgrow/thermal.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

struct jg_universe {
  jg_params params;
  jg_background *bg;
  jg_thermal *th;
  /* Built by the first table that needs it; read-only afterwards. A failed
   * build is kept too, so that every later table reports the same error. */
  pthread_mutex_t model_lock;
  int model_tried;
  jg_perturb_model *model;
  jg_error model_error;
};

jg_status jg_universe_new(const jg_config *c, jg_universe **out, jg_error *err) {
  if (!c || !out) return JG_FAIL(err, JG_EINVAL, "jg_universe_new: NULL config or output");
  jg_status st = jg_config_validate(c, err);
  if (st != JG_OK) return st;
  jg_universe *u = calloc(1, sizeof *u);
  if (!u) return JG_FAIL(err, JG_ENOMEM, "out of memory for a universe");
  u->params = *jg_config_params(c);
  if (pthread_mutex_init(&u->model_lock, NULL) != 0) {
    free(u);
    return JG_FAIL(err, JG_ENOMEM, "cannot create the lock of a universe");
  }
  jg_error build; /* the status is needed whether or not err was given */
  jg_error_clear(&build);
  u->bg = jg_background_new(&u->params.cosmology, &build);
  if (u->bg) u->th = jg_thermal_new(u->bg, &u->params.thermal, &build);
  if (!u->th) {
    if (err) *err = build;
    jg_universe_free(u);
    return build.status;
  }
  *out = u;
  return JG_OK;
}

void jg_universe_free(jg_universe *u) {
  if (!u) return;
  jg_perturb_model_free(u->model);
  jg_thermal_free(u->th);
  jg_background_free(u->bg);
  pthread_mutex_destroy(&u->model_lock);
  free(u);
}

void jg_free(void *p) { free(p); }

static const jg_perturb_model *universe_model(jg_universe *u, jg_error *err) {
  pthread_mutex_lock(&u->model_lock);
  if (!u->model_tried) {
    jg_error_clear(&u->model_error);
    u->model = jg_perturb_model_new(u->th, &u->params.perturbations, NULL, &u->model_error);
    u->model_tried = 1;
  }
  const jg_perturb_model *m = u->model;
  if (!m && err) *err = u->model_error;
  pthread_mutex_unlock(&u->model_lock);
  return m;
}

/* The parameters of one table: the universe's, with z and k replaced. */
static jg_status table_params(const jg_universe *u, const double *z, int n_z, const double *k,
                              int n_k, jg_params *p, jg_error *err) {
  *p = u->params;
  jg_status st = JG_OK;
  if (z && n_z > 0) st = jg_params_set_list(p, "output.redshifts", z, n_z, err);
  if (st == JG_OK && k && n_k > 0) st = jg_params_set_list(p, "perturbations.k_values", k, n_k, err);
  if (st == JG_OK) st = jg_params_validate(p, err);
  if (st != JG_ECONFIG) return st;
  /* A list too long for its key is a caller's input, not a file's. */
  if (err) err->status = JG_EINVAL;
  return JG_EINVAL;
}

static jg_status write_scales(const jg_perturb_model *m, jg_perturb_workspace *w,
                              const jg_params *p, const jg_thermal *th, FILE *f, jg_error *err) {
  jg_scales_point *s = malloc(sizeof *s * (size_t)p->output.n_redshifts);
  if (!s) return JG_FAIL(err, JG_ENOMEM, "out of memory for the scales");
  jg_status st = jg_scales_compute(m, w, p->output.redshifts, p->output.n_redshifts, s, err);
  if (st == JG_OK) st = jg_report_scales(f, p, th, s, p->output.n_redshifts, err);
  free(s);
  return st;
}

static jg_status write_growth(const jg_perturb_model *m, jg_perturb_workspace *w,
                              const jg_params *p, const jg_thermal *th, FILE *f, jg_error *err) {
  double *k = malloc(sizeof(double) * JG_MAX_WAVENUMBERS);
  int n_k = 0;
  jg_growth_grid *g = NULL;
  jg_status st = k ? jg_perturb_wavenumbers(&p->perturbations, k, &n_k, err)
                   : JG_FAIL(err, JG_ENOMEM, "out of memory for the wavenumbers");
  if (st == JG_OK)
    st = jg_growth_grid_compute(m, w, k, n_k, p->output.redshifts, p->output.n_redshifts, &g,
                                err);
  if (st == JG_OK) st = jg_report_growth(f, p, th, g, err);
  jg_growth_grid_free(g);
  free(k);
  return st;
}

jg_status jg_universe_write(jg_universe *u, jg_table_kind kind, const double *z, int n_z,
                            const double *k, int n_k, FILE *f, jg_error *err) {
  if (!u || !f) return JG_FAIL(err, JG_EINVAL, "jg_universe_write: NULL universe or stream");
  if (n_z < 0 || n_k < 0)
    return JG_FAIL(err, JG_EINVAL, "jg_universe_write: negative count (%d redshifts, %d wavenumbers)",
                   n_z, n_k);
  jg_params *p = malloc(sizeof *p);
  if (!p) return JG_FAIL(err, JG_ENOMEM, "out of memory for a table's parameters");
  jg_status st = table_params(u, z, n_z, k, n_k, p, err);
  if (st == JG_OK) {
    switch (kind) {
    case JG_TABLE_HISTORY:
      st = jg_report_history(f, p, u->th, err);
      break;
    case JG_TABLE_EPOCHS: {
      jg_epochs e;
      st = jg_epochs_compute(u->th, &e, err);
      if (st == JG_OK) st = jg_report_epochs(f, p, &e, err);
      break;
    }
    case JG_TABLE_SCALES:
    case JG_TABLE_GROWTH: {
      const jg_perturb_model *m = universe_model(u, err);
      jg_perturb_workspace *w = m ? jg_perturb_workspace_new(m, err) : NULL;
      if (!w) st = m ? JG_ENOMEM : u->model_error.status;
      else if (kind == JG_TABLE_SCALES) st = write_scales(m, w, p, u->th, f, err);
      else st = write_growth(m, w, p, u->th, f, err);
      jg_perturb_workspace_free(w);
      break;
    }
    default:
      st = JG_FAIL(err, JG_EINVAL, "jg_universe_write: unknown table kind %d", (int)kind);
    }
  }
  free(p);
  return st;
}

jg_status jg_universe_table(jg_universe *u, jg_table_kind kind, const double *z, int n_z,
                            const double *k, int n_k, char **text, size_t *size, jg_error *err) {
  if (!text) return JG_FAIL(err, JG_EINVAL, "jg_universe_table: NULL text pointer");
  char *buf = NULL;
  size_t n = 0;
  FILE *f = open_memstream(&buf, &n);
  if (!f) return JG_FAIL(err, JG_ENOMEM, "out of memory for a table");
  jg_status st = jg_universe_write(u, kind, z, n_z, k, n_k, f, err);
  if (fclose(f) != 0 && st == JG_OK) st = JG_FAIL(err, JG_ENOMEM, "out of memory for a table");
  if (st != JG_OK) {
    free(buf);
    return st;
  }
  *text = buf;
  if (size) *size = n;
  return JG_OK;
}
