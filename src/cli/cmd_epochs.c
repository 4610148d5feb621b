/* `jeansgrow epochs`: derived epochs and scales, one `name<TAB>value<TAB>unit` line each. */
#include <math.h>

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
  if ((rc = cli_build_history(&p, &bg, &th)) >= 0) {
    cli_discard_output(out);
    return rc;
  }
  jg_error err;
  jg_error_clear(&err);
  jg_epochs e;
  jg_status st = jg_epochs_compute(th, &e, &err);
  for (int i = 0; st == JG_OK && i < jg_epochs_count(); i++)
    if (!isfinite(jg_epochs_entry(&e, i).value))
      st = JG_FAIL(&err, JG_ENUMERIC, "epochs: %s is not finite", jg_epochs_entry(&e, i).name);
  if (st == JG_OK) {
    FILE *f = jg_output_stream(out);
    jg_table_write_preamble(f, "derived epochs (name, value, unit; '-' = dimensionless)", &p,
                            NULL);
    for (int i = 0; i < jg_epochs_count(); i++) {
      jg_epoch_entry en = jg_epochs_entry(&e, i);
      fprintf(f, "# %s: %s\n", en.name, en.meaning);
    }
    fprintf(f, "# name\tvalue\tunit\n");
    for (int i = 0; i < jg_epochs_count(); i++) {
      jg_epoch_entry en = jg_epochs_entry(&e, i);
      fprintf(f, "%s\t%.10g\t%s\n", en.name, en.value, en.unit[0] ? en.unit : "-");
    }
  }
  jg_thermal_free(th);
  jg_background_free(bg);
  if (st != JG_OK) {
    cli_discard_output(out);
    return cli_report(&err);
  }
  return cli_commit_output(out);
}
