/* `jeansgrow epochs`: derived epochs and scales, one `name<TAB>value<TAB>unit` line each. */
#include "cli.h"

int cmd_epochs(const cli_command *cmd, int argc, char **argv) {
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
  jg_epochs e;
  jg_status st = jg_epochs_compute(th, &e, &err);
  if (st == JG_OK) st = jg_report_epochs(jg_output_stream(out), &p, &e, &err);
  jg_thermal_free(th);
  jg_background_free(bg);
  if (st != JG_OK) {
    cli_discard_output(out);
    return cli_report(&err);
  }
  return cli_commit_output(out);
}
