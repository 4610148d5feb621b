/* `jeansgrow scales` and `jeansgrow growth`: the perturbation stage as tables. */
#include <errno.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"

int cli_build_perturbations(const jg_params *p, const jg_thermal *th, jg_perturb_model **model,
                            jg_perturb_workspace **ws) {
  jg_error err;
  jg_error_clear(&err);
  *ws = NULL;
  *model = jg_perturb_model_new(th, &p->perturbations, NULL, &err);
  if (*model) *ws = jg_perturb_workspace_new(*model, &err);
  if (!*ws) {
    jg_perturb_model_free(*model);
    *model = NULL;
    return cli_report(&err);
  }
  return -1;
}

/* Everything the two commands share: parameters, output, history, model. */
typedef struct perturbation_run {
  cli_options o;
  jg_params p;
  jg_output *out;
  jg_background *bg;
  jg_thermal *th;
  jg_perturb_model *model;
  jg_perturb_workspace *ws;
} perturbation_run;

static void run_free(perturbation_run *r) {
  jg_perturb_workspace_free(r->ws);
  jg_perturb_model_free(r->model);
  jg_thermal_free(r->th);
  jg_background_free(r->bg);
}

static int run_begin(const cli_command *cmd, int argc, char **argv, perturbation_run *r) {
  int rc = cli_parse_options(cmd, argc, argv, &r->o);
  if (rc < 0) rc = cli_load_params(&r->o, &r->p);
  if (rc < 0) rc = cli_open_output(&r->o, &r->out);
  if (rc >= 0) return rc;
  if ((rc = cli_build_history(&r->p, r->o.param_path, &r->bg, &r->th)) < 0)
    rc = cli_build_perturbations(&r->p, r->th, &r->model, &r->ws);
  if (rc >= 0) {
    run_free(r);
    cli_discard_output(r->out);
  }
  return rc;
}

static int run_end(perturbation_run *r, jg_status st, const jg_error *err) {
  run_free(r);
  if (st != JG_OK) {
    cli_discard_output(r->out);
    return cli_report(err);
  }
  return cli_commit_output(r->out);
}

int cmd_scales(const cli_command *cmd, int argc, char **argv) {
  perturbation_run r = {0};
  int rc = run_begin(cmd, argc, argv, &r);
  if (rc >= 0) return rc;
  jg_error err;
  jg_error_clear(&err);
  jg_scales_point s[JG_MAX_REDSHIFTS];
  jg_status st = jg_scales_compute(r.model, r.ws, r.p.output.redshifts, r.p.output.n_redshifts,
                                   s, &err);
  if (st == JG_OK)
    st = jg_scales_add_streaming(r.model, r.ws, &r.p.streaming, r.p.output.redshifts,
                                 r.p.output.n_redshifts, s, &err);
  if (st == JG_OK)
    st = jg_report_scales(jg_output_stream(r.out), &r.p, r.th, s, r.p.output.n_redshifts, &err);
  return run_end(&r, st, &err);
}

/* The second half of the growth table's rows, formatted into memory on a
 * thread of its own while this one writes the header and the first half. */
typedef struct growth_rows {
  const jg_params *p;
  const jg_thermal *th;
  const jg_growth_grid *g;
  int first, end;
  cli_text text;
} growth_rows;
static jg_status write_rows(FILE *f, const void *context, jg_error *err) {
  const growth_rows *h = context;
  return jg_report_growth_rows(f, h->p, h->th, h->g, h->first, h->end, err);
}
static void *format_rows(void *arg) {
  growth_rows *h = arg;
  cli_format_in_memory(&h->text, "the growth table", write_rows, h);
  return NULL;
}

/* The growth table, in halves on two threads where two cores are usable
 * (the same bytes: the halves are the rows in order); the first failure in
 * the table's order is the one told. */
static jg_status write_growth_table(FILE *out, const jg_params *p, const jg_thermal *th,
                                    const jg_growth_grid *g, int cores, jg_error *err) {
  const int rows = g->n_k * g->n_z;
  growth_rows tail = {p, th, g, rows / 2, rows, {NULL, 0, JG_OK, {0}}};
  pthread_t worker;
  if (cores < 2 || rows < 2 || !cli_start_quiet_thread(&worker, format_rows, &tail))
    return jg_report_growth(out, p, th, g, err);
  jg_report_growth_header(out, p, th, g);
  jg_status st = jg_report_growth_rows(out, p, th, g, 0, rows / 2, err);
  pthread_join(worker, NULL);
  if (st == JG_OK && tail.text.status != JG_OK) {
    *err = tail.text.err;
    st = tail.text.status;
  }
  if (st == JG_OK && fwrite(tail.text.text, 1, tail.text.size, out) != tail.text.size)
    st = JG_FAIL(err, JG_EIO, "cannot write the growth table (%s)", strerror(errno));
  free(tail.text.text);
  return st;
}

int cmd_growth(const cli_command *cmd, int argc, char **argv) {
  perturbation_run r = {0};
  int rc = run_begin(cmd, argc, argv, &r);
  if (rc >= 0) return rc;
  jg_error err;
  jg_error_clear(&err);
  double *k = malloc(sizeof(double) * JG_MAX_WAVENUMBERS);
  int n_k = 0;
  jg_growth_grid *g = NULL;
  jg_status st = k ? jg_perturb_wavenumbers(&r.p.perturbations, k, &n_k, &err)
                   : JG_FAIL(&err, JG_ENOMEM, "out of memory for the wavenumbers");
  /* Every usable core: the grid and the table do not depend on their number. */
  const int cores = cli_usable_cores();
  const int threads = cores < 1 ? 1 : cores > JG_GROWTH_MAX_THREADS ? JG_GROWTH_MAX_THREADS : cores;
  if (st == JG_OK)
    st = jg_growth_grid_compute_threads(r.model, r.ws, k, n_k, r.p.output.redshifts,
                                        r.p.output.n_redshifts, threads, &g, &err);
  if (st == JG_OK) st = jg_growth_grid_add_streaming(g, r.model, r.ws, &r.p.streaming, &err);
  if (st == JG_OK) st = write_growth_table(jg_output_stream(r.out), &r.p, r.th, g, threads, &err);
  jg_growth_grid_free(g);
  free(k);
  return run_end(&r, st, &err);
}
