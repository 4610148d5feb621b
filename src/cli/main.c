/*
 * jeansgrow: the command-line program. Each command is a thin layer over the
 * library (src/cli/cmd_*.c); this file only dispatches.
 */
#include <gsl/gsl_errno.h>
#include <stdio.h>
#include <string.h>

#include "cli.h"

static const cli_command commands[] = {
    {"history", "Ionisation and gas-temperature history from the start redshift to z = 0",
     "PARAMFILE [--set KEY=VALUE]... [-o FILE]",
     "Columns: z, x_e, x_HII, x_HeII, x_HeIII, T_gas[K], T_rad[K], mu, compton_rate[1/s],\n"
     "H[km/s/Mpc], tau, visibility, tau_drag (see the README). Rows uniform in ln(1+z),\n"
     "output.history_rows of them, plus every output.redshifts value exactly.",
     1, cmd_history},
    {"epochs", "Derived epochs: decoupling, drag, sound horizons, equality, age, gas decoupling",
     "PARAMFILE [--set KEY=VALUE]... [-o FILE]",
     "One line per value: name<TAB>value<TAB>unit ('-' for dimensionless).", 1, cmd_epochs},
    {"keys", "List every parameter key with its unit, default and allowed range", "[--markdown]",
     NULL, 0, cmd_keys},
};
#define N_COMMANDS ((int)(sizeof commands / sizeof commands[0]))

static void print_help(void) {
  printf("Usage: jeansgrow COMMAND [options] PARAMFILE\n\n"
         "Jeans and filtering scales, and linear growth of baryon and dark-matter\n"
         "perturbations with gas pressure, after recombination.\n\nCommands:\n");
  for (int i = 0; i < N_COMMANDS; i++) printf("  %-9s %s\n", commands[i].name, commands[i].summary);
  printf("\nOptions:\n  -h, --help     show this help (jeansgrow COMMAND --help for a command)\n"
         "  -V, --version  show the version\n");
}

int main(int argc, char **argv) {
  /* GSL's default handler aborts the process; the library checks every
   * status instead, so switch it off once, before any work. */
  gsl_set_error_handler_off();
  if (argc < 2) {
    print_help();
    return EXIT_BAD_INPUT;
  }
  const char *name = argv[1];
  if (strcmp(name, "-h") == 0 || strcmp(name, "--help") == 0) {
    print_help();
    return EXIT_OK;
  }
  if (strcmp(name, "-V") == 0 || strcmp(name, "--version") == 0) {
    printf("jeansgrow %s\n", JG_VERSION_STRING);
    return EXIT_OK;
  }
  for (int i = 0; i < N_COMMANDS; i++)
    if (strcmp(name, commands[i].name) == 0) return commands[i].run(&commands[i], argc - 1, argv + 1);
  if (name[0] == '-')
    fprintf(stderr, "jeansgrow: unknown option '%s' (see jeansgrow --help)\n", name);
  else
    fprintf(stderr, "jeansgrow: unknown command '%s' (see jeansgrow --help)\n", name);
  return EXIT_BAD_INPUT;
}
