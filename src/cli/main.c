/*
 * jeansgrow: the command-line program. Each command is a thin layer over the
 * library (src/cli/cmd_*.c); this file only dispatches.
 */
#include <gsl/gsl_errno.h>
#include <stdio.h>
#include <string.h>

#include "cli.h"

static const cli_command commands[] = {
    {"run", "The main job: history, epochs, scales and growth into one folder, with a summary",
     "PARAMFILE [--set KEY=VALUE]... [-o DIR]",
     "Writes DIR/history.txt, DIR/epochs.txt, DIR/scales.txt and DIR/growth.txt (DIR is\n"
     "created if missing; default jeansgrow-out), each atomically, then prints a summary\n"
     "and, when gnuplot is installed, draws the figures (history, masses, scales,\n"
     "suppression, rates; each as .png and .svg) into DIR. --no-figures skips them.\n"
     "Masses in the summary and figures use one radius (output.mass_radius).",
     OUTPUT_FOLDER, cmd_run},
    {"history", "Ionisation and gas-temperature history from the start redshift to output.history_z_min",
     "PARAMFILE [--set KEY=VALUE]... [-o FILE]",
     "Columns: z, x_e, x_HII, x_HeII, x_HeIII, T_gas[K], T_rad[K], mu, compton_rate[1/s],\n"
     "H[km/s/Mpc], tau, visibility, tau_drag, gamma_eff (see the README). Rows uniform in\n"
     "ln(1+z), output.history_rows of them, plus every output.redshifts value exactly.",
     1, cmd_history},
    {"epochs", "Derived epochs: decoupling, drag, sound horizons, equality, age, gas decoupling",
     "PARAMFILE [--set KEY=VALUE]... [-o FILE]",
     "One line per value: name<TAB>value<TAB>unit ('-' for dimensionless). Sound horizons\n"
     "in Mpc and k_eq in 1/Mpc, or Mpc/h and h/Mpc with output.units = \"Mpc/h\".",
     1, cmd_epochs},
    {"scales", "Jeans, filtering and half-suppression scales at every output redshift",
     "PARAMFILE [--set KEY=VALUE]... [-o FILE]",
     "Headline columns: z, T_gas[K], x_e, k_J[1/Mpc], M_J[Msun] (isothermal Jeans),\n"
     "k_F[1/Mpc], M_F[Msun] (filtering from the solved perturbations), k_half[1/Mpc],\n"
     "M_half[Msun]; further conventions in further columns (see the README).\n"
     "With output.units = \"Mpc/h\": wavenumbers in h/Mpc, masses in Msun/h.",
     1, cmd_scales},
    {"growth", "Linear growth of CDM, baryons and total matter by wavenumber and redshift",
     "PARAMFILE [--set KEY=VALUE]... [-o FILE]",
     "One row per (z, k): z, k[1/Mpc], delta_c, delta_b, delta_m, delta_T, b_over_c,\n"
     "b_over_m, suppression, rate_c, rate_b, rate_m (per unit initial CDM contrast).\n"
     "With output.units = \"Mpc/h\": k[h/Mpc]. The k grid is set in 1/Mpc in any case.",
     1, cmd_growth},
    {"compare", "Our growth table against another code's at the same redshifts",
     "OURS REFERENCE [--columns WORDS] [--k-unit 1/Mpc|h/Mpc] [--separator blanks|commas]\n"
     "       [--normalise-at K] [--tolerance X] [--figure FILE.png] [-o FILE]",
     "OURS is a growth table of jeansgrow (growth, or run's growth.txt); REFERENCE holds\n"
     "the other code's values, its columns named by --columns (default \"z k delta_c\n"
     "delta_b\"; words as for perturbations.initial_columns: z, k, delta_c, delta_b or\n"
     "b_over_c, - to skip). Per reference row: ours interpolated in ln k, the relative\n"
     "difference of delta_b/delta_c, and with --normalise-at K of delta_b and delta_c each\n"
     "divided by its value at k = K (the reference's unit). A summary (largest, where,\n"
     "rms) goes to stdout with -o, else to stderr after the table. --figure draws the\n"
     "difference against k with gnuplot, if installed. Exit status 3 when a largest\n"
     "difference exceeds --tolerance X (the table is written all the same).",
     OUTPUT_FILE, cmd_compare},
    {"keys", "List every parameter key with its unit, default and allowed range", "[--markdown]",
     NULL, 0, cmd_keys},
    {"scan", "One table over a grid of parameter values, on threads, MPI ranks or job slices",
     "PARAMFILE --vary KEY=FROM:TO:N[:log] [--vary ...] [--set KEY=VALUE]... [--threads N]\n"
     "       [--table scales|growth|epochs] [--part I/N] [--resume] [--no-figures] [-o FILE]",
     "One row per grid point and output redshift: the varied values, z, z_star, z_drag,\n"
     "z_gas_decoupling (-1 where that universe has no such epoch), then every column\n"
     "of `jeansgrow scales` at that redshift\n"
     "(T_gas[K], x_e, k_J[1/Mpc], M_J[Msun], k_F[1/Mpc], M_F[Msun], k_half[1/Mpc], ...;\n"
     "h/Mpc and Msun/h with output.units = \"Mpc/h\", each point with its own h).\n"
     "--table growth writes the growth table's columns per redshift and wavenumber,\n"
     "--table epochs one row of epochs per point. The grid may instead come from the\n"
     "scan.vary list of PARAMFILE. Under mpirun the ranks share the points; the file is\n"
     "the same whatever the threads or ranks. Figures of the table are drawn beside it.",
     1, cmd_scan},
    {"plot", "Draw the figures of a run folder or of one table (a scan's too) with gnuplot",
     "DIR|TABLE",
     "For a folder: the figures of its history.txt, scales.txt and growth.txt, as `run`\n"
     "draws them. For a table: its figures beside it, named after it (a scan table:\n"
     "each scale against the varied key, or maps for two varied keys).",
     0, cmd_plot},
    {"merge", "Join the slice tables of a scan run with --part I/N into the whole table",
     "OUT PART_FILE...", "The slices must come from one scan (same fingerprint), all of them.",
     1, cmd_merge},
};
#define N_COMMANDS ((int)(sizeof commands / sizeof commands[0]))

static void print_help(void) {
  printf("Usage: jeansgrow COMMAND PARAMFILE [options]\n\n"
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
    /* A usage error: one line on stderr, as for every other bad input, so
     * that a script sees it and stdout stays empty. */
    fprintf(stderr, "jeansgrow: no command given (usage: jeansgrow COMMAND PARAMFILE [options]; "
                    "see jeansgrow --help)\n");
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
