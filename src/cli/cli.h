/* The command-line program: shared option parsing and error reporting. */
#ifndef JEANSGROW_CLI_H
#define JEANSGROW_CLI_H

#include <getopt.h>
#include <pthread.h>

#include "jeansgrow/jeansgrow.h"

#define CLI_MAX_OVERRIDES 256

/* Exit statuses of the program. */
enum { EXIT_OK = 0, EXIT_RUN_FAILED = 1, EXIT_BAD_INPUT = 2, EXIT_TOLERANCE_NOT_MET = 3 };

/* What -o names. */
enum { OUTPUT_NONE = 0, OUTPUT_FILE = 1, OUTPUT_FOLDER = 2 };

typedef struct cli_command {
  const char *name;
  const char *summary;
  const char *usage;   /* after "jeansgrow NAME " */
  const char *details; /* extra --help text, may be NULL */
  int takes_output;    /* accepts -o: 1 a file, 2 a folder */
  int (*run)(const struct cli_command *cmd, int argc, char **argv);
} cli_command;

typedef struct cli_options {
  const char *param_path;
  const char *overrides[CLI_MAX_OVERRIDES];
  int n_overrides;
  const char *output_path; /* NULL: stdout */
} cli_options;

/* Parse `[--set k=v]... [-o FILE] [--help] PARAMFILE`. Returns -1 to go on,
 * or an exit status (after printing help or an error). */
int cli_parse_options(const cli_command *cmd, int argc, char **argv, cli_options *o);

/* A command's own long options beside the common ones: `handle` gets each
 * one's code (the option's val) and argument and returns -1 to go on or an
 * exit status (after printing the error); `help` replaces the generic help. */
typedef struct cli_extra_options {
  const struct option *long_opts; /* ends with {NULL, 0, NULL, 0}; at most 12 */
  int (*handle)(int code, const char *arg, void *context);
  void (*help)(const cli_command *cmd);
  void *context;
} cli_extra_options;
int cli_parse_options_with(const cli_command *cmd, int argc, char **argv, cli_options *o,
                           const cli_extra_options *extra);

/* Load the parameters named by the options; prints the error on failure. */
int cli_load_params(const cli_options *o, jg_params *p);

/* Print "jeansgrow: MESSAGE" for a failed library call and return the exit
 * status: 2 for bad input, 1 for a failure during the run. */
int cli_report(const jg_error *err);

/* Open the output (atomic file or stdout) and protect it from interrupts:
 * on SIGINT/SIGTERM the temporary file is removed and the program exits. */
int cli_open_output(const cli_options *o, jg_output **out);
/* Remove the temporary output files and exit on SIGINT/SIGTERM from now on,
 * printing `message` (a whole line; NULL for the generic one). */
void cli_protect_interrupts(const char *message);

/* A table formatted in memory, with what went wrong formatting it. */
typedef struct cli_text {
  char *text; /* malloc'd (NULL if nothing could be formatted) */
  size_t size;
  jg_status status;
  jg_error err;
} cli_text;
/* Format into t what `write` writes (formatting, mostly printf of %.10e,
 * costs about as much as computing the numbers, so threads format their
 * tables into memory while others compute); a failure to hold the text is
 * "out of memory for NAME". */
void cli_format_in_memory(cli_text *t, const char *name,
                          jg_status (*write)(FILE *f, const void *context, jg_error *err),
                          const void *context);

/* The cores this process may run on (taskset and cpusets count, not only
 * the machine's). */
int cli_usable_cores(void);
/* Start a thread that takes no interrupts (SIGINT and SIGTERM stay with the
 * threads that were there, whose handler removes the temporary files);
 * returns 1 if it started. */
int cli_start_quiet_thread(pthread_t *thread, void *(*work)(void *), void *arg);
/* Commit it; returns the exit status. */
int cli_commit_output(jg_output *out);
/* Throw it away (after a failure). */
void cli_discard_output(jg_output *out);

/* The background and thermal history for a parameter set, or an exit status. */
int cli_build_history(const jg_params *p, const char *param_path, jg_background **bg,
                      jg_thermal **th);

/* The perturbation model and one workspace for it, or an exit status. */
int cli_build_perturbations(const jg_params *p, const jg_thermal *th, jg_perturb_model **model,
                            jg_perturb_workspace **ws);

int cmd_history(const cli_command *cmd, int argc, char **argv);
int cmd_scales(const cli_command *cmd, int argc, char **argv);
int cmd_growth(const cli_command *cmd, int argc, char **argv);
int cmd_run(const cli_command *cmd, int argc, char **argv);
int cmd_epochs(const cli_command *cmd, int argc, char **argv);
int cmd_keys(const cli_command *cmd, int argc, char **argv);
int cmd_scan(const cli_command *cmd, int argc, char **argv);
int cmd_merge(const cli_command *cmd, int argc, char **argv);
int cmd_plot(const cli_command *cmd, int argc, char **argv);
int cmd_compare(const cli_command *cmd, int argc, char **argv);

/* MPI for `jeansgrow scan` (src/cli/scan_mpi.c; the library knows no MPI).
 * scan_mpi_launcher_rank: this process's rank as an MPI launcher announces
 * it in the environment, or -1 when not started by one (works without MPI
 * built in, so that such a build can refuse instead of running N copies). */
int scan_mpi_launcher_rank(void);
int scan_mpi_built_in(void);
/* MPI_Init_thread (funneled); 0 on success. */
int scan_mpi_begin(int *rank, int *size);
/* 1 on every rank if `ok` is 1 on every rank. */
int scan_mpi_all_ok(int ok);
/* Rank 0's value of v, on every rank. */
int scan_mpi_share(int v);
/* Manager/worker scan over all ranks, each with `threads` computing
 * threads; rank 0 (the manager) records into `c` and calls `listener`.
 * A worker rank that sends nothing for silence_limit seconds (> 0; workers
 * busy with long points say they are alive meanwhile) ends the run on rank
 * 0 with JG_EINTERRUPT and a message naming the rank; the caller keeps the
 * checkpoint and calls scan_mpi_abort. */
jg_status scan_mpi_run(const jg_scan *s, jg_scan_checkpoint *c, int threads,
                       double silence_limit, jg_scan_listener listener, void *context,
                       jg_error *err);
void scan_mpi_end(void);
/* End every rank at once with exit status `code` (MPI_Abort). */
void scan_mpi_abort(int code);

#endif
