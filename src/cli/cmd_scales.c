/* `jeansgrow scales` and `jeansgrow growth`: the perturbation stage as tables. */
#include <stdlib.h>
#include <unistd.h>

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
  /* Every core: the grid does not depend on the number of threads. */
  long cores = sysconf(_SC_NPROCESSORS_ONLN);
  const int threads = cores < 1 ? 1 : cores > JG_GROWTH_MAX_THREADS ? JG_GROWTH_MAX_THREADS : (int)cores;
  if (st == JG_OK)
    st = jg_growth_grid_compute_threads(r.model, r.ws, k, n_k, r.p.output.redshifts,
                                        r.p.output.n_redshifts, threads, &g, &err);
  if (st == JG_OK) st = jg_growth_grid_add_streaming(g, r.model, r.ws, &r.p.streaming, &err);
  if (st == JG_OK) st = jg_report_growth(jg_output_stream(r.out), &r.p, r.th, g, &err);
  jg_growth_grid_free(g);
  free(k);
  return run_end(&r, st, &err);
}
