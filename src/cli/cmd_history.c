/*
 * `jeansgrow history` and `jeansgrow epochs`: the two tables that need only
 * the background and the thermal history. Both go through one driver that
 * parses, loads, opens the output, builds the history and commits.
 */
#include "cli.h"

typedef jg_status (*history_table_writer)(FILE *f, const jg_params *p, const jg_thermal *th,
                                          jg_error *err);

static int run_history_table(const cli_command *cmd, int argc, char **argv,
                             history_table_writer write) {
  cli_options o;
  jg_params p;
  int rc = cli_parse_options(cmd, argc, argv, &o);
  if (rc < 0) rc = cli_load_params(&o, &p);
  if (rc >= 0) return rc;

  jg_output *out = NULL;
  if ((rc = cli_open_output(&o, &out)) >= 0) return rc;
  jg_background *bg = NULL;
  jg_thermal *th = NULL;
  if ((rc = cli_build_history(&p, o.param_path, &bg, &th)) >= 0) {
    cli_discard_output(out);
    return rc;
  }
  jg_error err;
  jg_error_clear(&err);
  jg_status st = write(jg_output_stream(out), &p, th, &err);
  jg_thermal_free(th);
  jg_background_free(bg);
  if (st != JG_OK) {
    cli_discard_output(out);
    return cli_report(&err);
  }
  return cli_commit_output(out);
}

static jg_status write_epochs(FILE *f, const jg_params *p, const jg_thermal *th, jg_error *err) {
  jg_epochs e;
  jg_status st = jg_epochs_compute(th, &e, err);
  return st == JG_OK ? jg_report_epochs(f, p, &e, err) : st;
}

int cmd_history(const cli_command *cmd, int argc, char **argv) {
  return run_history_table(cmd, argc, argv, jg_report_history);
}

int cmd_epochs(const cli_command *cmd, int argc, char **argv) {
  return run_history_table(cmd, argc, argv, write_epochs);
}
