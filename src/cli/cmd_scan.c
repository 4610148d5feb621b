/*
 * `jeansgrow scan`: one table over a grid of parameter sets, on the usable cores,
 * on MPI ranks (under mpirun), or as slices of a job array; and
 * `jeansgrow merge`, which joins such slices.
 *
 * Everything is checked before any work: the options, the parameter file,
 * the grid, every grid point's model, the output place and the checkpoint.
 * Finished points go to OUTPUT.checkpoint as they come; the table appears
 * (atomically) only when the slice is complete, and the checkpoint is then
 * removed. An interrupted run is finished with --resume.
 */
#include <errno.h>
#include <fcntl.h>
#include <getopt.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "cli.h"
#include "figures.h"
#include "../base/clock.h"

/* The tables a scan can write (--table), each an evaluator in the units the
 * parameters ask for. */
static const struct {
  const char *name;
  const jg_scan_evaluator *(*evaluator)(jg_output_units units);
} scan_tables[] = {{"scales", jg_scan_evaluator_scales},
                   {"growth", jg_scan_evaluator_growth},
                   {"epochs", jg_scan_evaluator_epochs}};
#define N_SCAN_TABLES ((int)(sizeof scan_tables / sizeof scan_tables[0]))

#define MAX_THREADS 4096

/* How long a silent MPI rank is waited for, by default (seconds): long
 * enough for a node's hiccup, short next to the hours a stuck job would
 * otherwise hold its allocation. */
#define DEFAULT_RANK_TIMEOUT 300.0
#define MIN_RANK_TIMEOUT 1.0
#define MAX_RANK_TIMEOUT 604800.0

typedef struct scan_options {
  cli_options common; /* parameter file, --set, -o */
  const char *vary[JG_SCAN_MAX_AXES + 1];
  int n_vary;
  int threads; /* 0: the default */
  int part_index, part_count;
  int resume;
  double rank_timeout; /* seconds; 0: wait for ever */
  int table;           /* index into scan_tables */
  int figures;         /* draw the figures of the finished table */
} scan_options;

static void print_scan_help(const cli_command *cmd) {
  printf("Usage: jeansgrow %s %s\n\n%s.\n\n%s\n", cmd->name, cmd->usage, cmd->summary,
         cmd->details ? cmd->details : "");
  printf("\nOptions:\n"
         "  --vary KEY=FROM:TO:N[:log]  vary a number key over N values, linear (default)\n"
         "                         or log spacing; repeat for a grid (first --vary slowest)\n"
         "  --vary KEY=[V1,V2,...]  vary a key over the listed values (a word-valued key\n"
         "                         over its words: perturbations.sound_speed=[isothermal,\n"
         "                         adiabatic]; the column holds each word's number)\n"
         "  --table scales|growth|epochs  the table written for every point (default\n"
         "                         scales; growth: a row per redshift and wavenumber;\n"
         "                         epochs: one row per point)\n"
         "                         (--vary replaces the scan.vary list of PARAMFILE)\n"
         "  --set KEY=VALUE        override a base parameter (libconfig syntax; repeatable)\n"
         "  --threads N            computing threads (default: one per usable core; 1 per MPI rank)\n"
         "  --part I/N             compute slice I of N (1 <= I <= N) for a job array;\n"
         "                         join the slice files with jeansgrow merge\n"
         "  --resume               finish an interrupted run from OUTPUT.checkpoint\n"
         "  --rank-timeout SECONDS under MPI, end the job (keeping OUTPUT.checkpoint for\n"
         "                         --resume) when a rank has sent nothing for SECONDS\n"
         "                         (default %.0f, at least 1; 0 waits for ever)\n"
         "  -o, --output FILE      write the table to FILE (atomically) instead of stdout;\n"
         "                         the figures of a whole table go beside it (FILE without\n"
         "                         .txt, then _NAME.png and .svg) when gnuplot is installed\n"
         "  --no-figures           do not draw them\n"
         "  -h, --help             show this help\n", DEFAULT_RANK_TIMEOUT);
}

static int parse_int(const char *text, long lo, long hi, long *out) {
  char *end;
  errno = 0;
  long v = strtol(text, &end, 10);
  if (errno || end == text || *end != '\0' || v < lo || v > hi) return 0;
  *out = v;
  return 1;
}

/* The options only scan has, beside --set, -o and --help. */
static int handle_scan_option(int code, const char *arg, void *context) {
  scan_options *o = context;
  long v;
  switch (code) {
  case 'v':
    if (o->n_vary >= JG_SCAN_MAX_AXES) {
      fprintf(stderr, "jeansgrow scan: too many --vary options (at most %d)\n", JG_SCAN_MAX_AXES);
      return EXIT_BAD_INPUT;
    }
    o->vary[o->n_vary++] = arg;
    break;
  case 't':
    if (!parse_int(arg, 1, MAX_THREADS, &v)) {
      fprintf(stderr, "jeansgrow scan: --threads must be a whole number from 1 to %d (got '%s')\n",
              MAX_THREADS, arg);
      return EXIT_BAD_INPUT;
    }
    o->threads = (int)v;
    break;
  case 'p': {
    const char *slash = strchr(arg, '/');
    long i = 0, n = 0;
    char left[32];
    int ok = slash && (size_t)(slash - arg) < sizeof left;
    if (ok) {
      memcpy(left, arg, (size_t)(slash - arg));
      left[slash - arg] = '\0';
      ok = parse_int(left, 1, 1000000000L, &i) && parse_int(slash + 1, 1, 1000000000L, &n) &&
           i <= n;
    }
    if (!ok) {
      fprintf(stderr, "jeansgrow scan: --part must be I/N with 1 <= I <= N, e.g. --part 2/8 "
                      "(got '%s')\n", arg);
      return EXIT_BAD_INPUT;
    }
    o->part_index = (int)i;
    o->part_count = (int)n;
    break;
  }
  case 'r':
    o->resume = 1;
    break;
  case 'F':
    o->figures = 0;
    break;
  case 'b': {
    int found = -1;
    for (int i = 0; i < N_SCAN_TABLES; i++)
      if (strcmp(arg, scan_tables[i].name) == 0) found = i;
    if (found < 0) {
      fprintf(stderr, "jeansgrow scan: --table must be scales, growth or epochs (got '%s')\n",
              arg);
      return EXIT_BAD_INPUT;
    }
    o->table = found;
    break;
  }
  case 'T': {
    char *end;
    errno = 0;
    double t = strtod(arg, &end);
    /* Below a second, heartbeats would flood rank 0 and a busy node's
     * ordinary pauses would end the job. */
    if (errno || end == arg || *end != '\0' ||
        !(t == 0 || (t >= MIN_RANK_TIMEOUT && t <= MAX_RANK_TIMEOUT))) {
      fprintf(stderr, "jeansgrow scan: --rank-timeout must be 0 (wait for ever) or a number of "
                      "seconds from %.0f to %.0f (got '%s')\n", MIN_RANK_TIMEOUT,
              MAX_RANK_TIMEOUT, arg);
      return EXIT_BAD_INPUT;
    }
    o->rank_timeout = t;
    break;
  }
  }
  return -1;
}

static int parse_scan_options(const cli_command *cmd, int argc, char **argv, scan_options *o) {
  memset(o, 0, sizeof *o);
  o->part_index = o->part_count = 1;
  o->rank_timeout = DEFAULT_RANK_TIMEOUT;
  o->figures = 1;
  static const struct option scan_opts[] = {{"vary", required_argument, NULL, 'v'},
                                            {"threads", required_argument, NULL, 't'},
                                            {"part", required_argument, NULL, 'p'},
                                            {"resume", no_argument, NULL, 'r'},
                                            {"rank-timeout", required_argument, NULL, 'T'},
                                            {"table", required_argument, NULL, 'b'},
                                            {"no-figures", no_argument, NULL, 'F'},
                                            {NULL, 0, NULL, 0}};
  const cli_extra_options extra = {scan_opts, handle_scan_option, print_scan_help, o};
  int rc = cli_parse_options_with(cmd, argc, argv, &o->common, &extra);
  if (rc >= 0) return rc;
  const char *out = o->common.output_path;
  if (out && strcmp(out, "-") == 0) out = o->common.output_path = NULL;
  if (o->resume && !out) {
    fprintf(stderr, "jeansgrow scan: --resume needs -o FILE (the run resumes from "
                    "FILE.checkpoint)\n");
    return EXIT_BAD_INPUT;
  }
  return -1;
}

/* ---- progress on a terminal -------------------------------------------- */

typedef struct progress {
  const jg_scan *scan;
  int tty;
  int drawn;          /* a bar is on the current line */
  double t0, last_draw;
  long long at_start; /* points already done when this run started (resumed) */
} progress;

static void format_duration(double s, char *buf, size_t size) {
  long t = s > 0 && s < 1e9 ? (long)(s + 0.5) : 0;
  if (t >= 3600) snprintf(buf, size, "%ld:%02ld:%02ld", t / 3600, t / 60 % 60, t % 60);
  else snprintf(buf, size, "%ld:%02ld", t / 60, t % 60);
}

static void draw_bar(progress *pr, long long done, long long total) {
  const int width = 28;
  double now = jg__monotonic_seconds();
  double rate = (double)(done - pr->at_start) / (now - pr->t0 > 1e-6 ? now - pr->t0 : 1e-6);
  int fill = total > 0 ? (int)((double)width * (double)done / (double)total) : width;
  char bar[64], left[32];
  for (int i = 0; i < width; i++) bar[i] = i < fill ? '#' : '.';
  bar[width] = '\0';
  if (rate > 0 && done > pr->at_start) format_duration((double)(total - done) / rate, left, sizeof left);
  else snprintf(left, sizeof left, "?");
  fprintf(stderr, "\r[%s] %lld/%lld points  %.2f points/s  %s left\033[K", bar, done, total,
          rate, left);
  fflush(stderr);
  pr->drawn = 1;
  pr->last_draw = now;
}

static void on_point(void *context, const jg_scan_event *e) {
  progress *pr = context;
  if (e->status != JG_OK) {
    char desc[1024];
    jg_scan_describe_point(pr->scan, e->index, desc, sizeof desc);
    if (pr->drawn) fputs("\r\033[K", stderr), pr->drawn = 0;
    fprintf(stderr, "jeansgrow scan: point %lld of %lld (%s) failed: %s\n", e->index + 1,
            jg_scan_total_points(pr->scan), desc, e->message);
  }
  /* A redraw costs a write to the terminal; ten a second is smooth enough. */
  if (pr->tty && (jg__monotonic_seconds() - pr->last_draw >= 0.1 || e->done == e->total))
    draw_bar(pr, e->done, e->total);
}

/* ---- interrupts -------------------------------------------------------- */

/* The generic handler removes the table's temporary file; its message
 * would say nothing of the finished points kept in the checkpoint. */
static void protect_scan_output(const char *checkpoint_path) {
  char message[4352];
  if (checkpoint_path)
    snprintf(message, sizeof message,
             "\njeansgrow scan: interrupted; the finished points are kept in %s: run the same "
             "command with --resume to finish\n", checkpoint_path);
  else
    snprintf(message, sizeof message, "\njeansgrow scan: interrupted; no output was written\n");
  cli_protect_interrupts(message);
}

/* ---- the command ------------------------------------------------------- */

typedef struct scan_setup {
  scan_options opt;
  jg_params params;
  jg_scan_grid grid;
  jg_scan *scan;
  jg_output *out;
  jg_scan_checkpoint *checkpoint;
  char *checkpoint_path;
} scan_setup;

static void setup_release(scan_setup *su, int keep_checkpoint) {
  jg_scan_checkpoint_close(su->checkpoint, !keep_checkpoint);
  su->checkpoint = NULL;
  if (su->out) cli_discard_output(su->out);
  su->out = NULL;
  jg_scan_free(su->scan);
  su->scan = NULL;
  jg_scan_grid_clear(&su->grid);
  free(su->checkpoint_path);
  su->checkpoint_path = NULL;
}

/* A device, pipe or socket (/dev/null, /dev/full, a named pipe) is written
 * in place and has no folder of its own to keep a checkpoint in: putting
 * one beside /dev/null would litter /dev. Such a scan keeps its points in
 * an anonymous temporary checkpoint and cannot be resumed. */
static int output_is_special(const char *path) {
  struct stat sb;
  return stat(path, &sb) == 0 && !S_ISREG(sb.st_mode) && !S_ISDIR(sb.st_mode);
}

/* Everything before the first point: returns -1 to go on, else an exit
 * status (the error printed). Only the writing rank opens files. */
static int scan_prepare(const cli_command *cmd, int argc, char **argv, int writer,
                        scan_setup *su) {
  int rc = parse_scan_options(cmd, argc, argv, &su->opt);
  if (rc >= 0) return rc;
  if ((rc = cli_load_params(&su->opt.common, &su->params)) >= 0) return rc;
  jg_error err;
  jg_error_clear(&err);
  jg_status st = JG_OK;
  for (int i = 0; st == JG_OK && i < su->opt.n_vary; i++)
    st = jg_scan_grid_parse(&su->grid, su->opt.vary[i], "--vary", &err);
  if (st == JG_OK && su->opt.n_vary == 0)
    st = jg_scan_grid_read_file(&su->grid, su->opt.common.param_path, &err);
  if (st == JG_OK && su->grid.n_axes == 0)
    st = JG_FAIL(&err, JG_EINVAL, "nothing to vary: give --vary KEY=FROM:TO:N (or a scan.vary "
                 "list in %s)", su->opt.common.param_path);
  if (st != JG_OK) {
    cli_report(&err);
    return st == JG_ENOMEM ? EXIT_RUN_FAILED : EXIT_BAD_INPUT;
  }
  /* The output place is tried now, before the grid check (which takes a
   * while for large grids), but the table's temporary file is only opened
   * at the end: a run killed while computing leaves the checkpoint and
   * nothing else. */
  if (writer) {
    if ((rc = cli_open_output(&su->opt.common, &su->out)) >= 0) return rc;
    cli_discard_output(su->out);
    su->out = NULL;
  }
  st = jg_scan_new(&su->params, &su->grid,
                   scan_tables[su->opt.table].evaluator(su->params.output.units), su->opt.part_index,
                   su->opt.part_count, &su->scan, &err);
  if (st != JG_OK) {
    cli_report(&err);
    return st == JG_ENOMEM || st == JG_EIO ? EXIT_RUN_FAILED : EXIT_BAD_INPUT;
  }
  if (!writer) return -1;

  const char *path = su->opt.common.output_path;
  if (path && output_is_special(path)) {
    if (su->opt.resume) {
      fprintf(stderr, "jeansgrow scan: --resume needs a regular file after -o: %s is a device, "
                      "pipe or socket, beside which no checkpoint is kept\n", path);
      return EXIT_BAD_INPUT;
    }
    path = NULL; /* the points are kept in an anonymous checkpoint */
  }
  if (path && !(su->checkpoint_path = jg_scan_checkpoint_path_for(path))) {
    JG_FAIL(&err, JG_ENOMEM, "out of memory");
    return cli_report(&err);
  }
  protect_scan_output(su->checkpoint_path);
  st = jg_scan_checkpoint_open(su->scan, su->checkpoint_path, su->opt.resume, &su->checkpoint,
                               &err);
  if (st != JG_OK) return cli_report(&err);
  return -1;
}

/* Write the table from the checkpoint, commit it, drop the checkpoint. */
static int scan_finish(scan_setup *su, double t0, int threads, int ranks) {
  const jg_scan *s = su->scan;
  jg_scan_checkpoint *c = su->checkpoint;
  int rc = cli_open_output(&su->opt.common, &su->out);
  if (rc >= 0) {
    setup_release(su, 1);
    return rc;
  }
  jg_error err;
  jg_error_clear(&err);
  jg_status st = jg_scan_write_table(s, c, jg_output_stream(su->out), &err);
  if (st != JG_OK) {
    setup_release(su, 1);
    return cli_report(&err);
  }
  jg_output *out = su->out;
  su->out = NULL;
  rc = cli_commit_output(out);
  if (rc != EXIT_OK) {
    setup_release(su, 1);
    return rc;
  }
  long long failed = jg_scan_checkpoint_failed(c), resumed = jg_scan_checkpoint_resumed(c);
  long long points = jg_scan_slice_points(s);
  double dt = jg__monotonic_seconds() - t0;
  double rate = dt > 0 ? (double)(points - resumed) / dt : 0.0;
  char where[64];
  if (ranks > 1) snprintf(where, sizeof where, "%d MPI ranks x %d thread%s", ranks, threads,
                          threads == 1 ? "" : "s");
  else snprintf(where, sizeof where, "%d thread%s", threads, threads == 1 ? "" : "s");
  const int rows = jg_scan_rows_per_point(s);
  fprintf(stderr, "jeansgrow scan: %lld points x %d %s -> %s: %lld computed, %lld "
          "resumed, %lld failed; %.1f s, %.2f points/s on %s\n", points,
          rows,
          rows == jg_scan_redshifts(s) ? "redshifts" : rows == 1 ? "row" : "rows",
          su->opt.common.output_path ? su->opt.common.output_path : "stdout", points - resumed,
          resumed, failed, dt, rate, where);
  setup_release(su, 0);
  rc = failed > 0 ? EXIT_RUN_FAILED : EXIT_OK;
  /* Figures of the whole table, beside it (a slice waits for its merge). */
  struct stat sb;
  const char *path = su->opt.common.output_path;
  if (su->opt.figures && path && su->opt.part_count == 1 && stat(path, &sb) == 0 &&
      S_ISREG(sb.st_mode)) {
    if (!cli_figures_available()) cli_figures_print_hint(stderr, path);
    else if (cli_figures_for_table(path) < 0) rc = EXIT_RUN_FAILED;
  }
  return rc;
}

/* The cores this process may run on (its CPU affinity: taskset, a batch
 * system's binding, a container's cpuset), not all the machine's: a job
 * given 4 cores of a 64-core node must not start 64 threads on them. */
static int default_threads(int under_mpi) {
  if (under_mpi) return 1; /* a rank per core is the launcher's business */
  const int n = cli_usable_cores();
  return n < 1 ? 1 : n > MAX_THREADS ? MAX_THREADS : n;
}

int cmd_scan(const cli_command *cmd, int argc, char **argv) {
  const int launched = scan_mpi_launcher_rank() >= 0;
  if (launched && !scan_mpi_built_in()) {
    if (scan_mpi_launcher_rank() == 0)
      fprintf(stderr, "jeansgrow scan: started by an MPI launcher, but this jeansgrow was built "
                      "without MPI; run it without mpirun (it uses all cores with threads), or "
                      "rebuild with MPI installed (-DJG_WITH_MPI=ON)\n");
    return EXIT_BAD_INPUT;
  }
  int rank = 0, ranks = 1;
  if (launched && scan_mpi_begin(&rank, &ranks) != 0) {
    fprintf(stderr, "jeansgrow scan: MPI could not start\n");
    return EXIT_RUN_FAILED;
  }
  /* The other ranks check the same inputs and would repeat every message. */
  int saved_stderr = -1;
  if (rank != 0) {
    int null_fd = open("/dev/null", O_WRONLY);
    saved_stderr = dup(STDERR_FILENO);
    if (null_fd >= 0) dup2(null_fd, STDERR_FILENO), close(null_fd);
  }
  scan_setup su;
  memset(&su, 0, sizeof su);
  int rc = scan_prepare(cmd, argc, argv, rank == 0, &su);
  if (saved_stderr >= 0) dup2(saved_stderr, STDERR_FILENO), close(saved_stderr);
  if (launched) {
    int all_ok = scan_mpi_all_ok(rc < 0);
    if (!all_ok) {
      if (rank == 0 && rc < 0)
        fprintf(stderr, "jeansgrow scan: the set-up failed on another MPI rank (does every node "
                        "see the same files?)\n");
      rc = scan_mpi_share(rc < 0 ? EXIT_BAD_INPUT : rc);
      setup_release(&su, rank == 0 && su.checkpoint && jg_scan_checkpoint_done(su.checkpoint) > 0);
      scan_mpi_end();
      return rc;
    }
  } else if (rc >= 0) {
    setup_release(&su, su.checkpoint && jg_scan_checkpoint_done(su.checkpoint) > 0);
    return rc;
  }
  const int threads = su.opt.threads > 0 ? su.opt.threads : default_threads(launched);
  progress pr;
  memset(&pr, 0, sizeof pr);
  pr.scan = su.scan;
  pr.tty = rank == 0 && isatty(STDERR_FILENO);
  pr.t0 = jg__monotonic_seconds();
  pr.at_start = su.checkpoint ? jg_scan_checkpoint_done(su.checkpoint) : 0;
  jg_error err;
  jg_error_clear(&err);
  jg_status st = ranks > 1 ? scan_mpi_run(su.scan, su.checkpoint, threads, su.opt.rank_timeout,
                                          on_point, &pr, &err)
                           : jg_scan_run(su.scan, su.checkpoint, threads, on_point, &pr, &err);
  if (pr.drawn) fputc('\n', stderr);
  if (rank == 0) {
    if (st != JG_OK) {
      rc = cli_report(&err);
      setup_release(&su, 1);
      /* A silent rank would hold up the collective finish below for ever. */
      if (st == JG_EINTERRUPT && ranks > 1) scan_mpi_abort(rc);
    } else {
      rc = scan_finish(&su, pr.t0, threads, ranks);
    }
  } else {
    setup_release(&su, 0);
  }
  if (launched) {
    rc = scan_mpi_share(rc);
    scan_mpi_end();
  }
  return rc;
}

/* ---- merge ------------------------------------------------------------- */

/* The merged table replaces its output only at the end, but by then the
 * slice it names would be gone for good: an output that is one of the
 * slices (the same file, under any name or link) is refused before
 * anything is written. Returns -1 to go on, else the exit status. */
static int refuse_output_among_slices(const char *output, char *const *slices, int n) {
  struct stat out_sb, slice_sb;
  if (!output || stat(output, &out_sb) != 0) return -1;
  for (int i = 0; i < n; i++) {
    if (stat(slices[i], &slice_sb) == 0 && slice_sb.st_dev == out_sb.st_dev &&
        slice_sb.st_ino == out_sb.st_ino) {
      fprintf(stderr, "jeansgrow merge: the output %s is the slice %s; write the merged table "
                      "to a new file\n", output, slices[i]);
      return EXIT_BAD_INPUT;
    }
  }
  return -1;
}

int cmd_merge(const cli_command *cmd, int argc, char **argv) {
  for (int i = 1; i < argc; i++) {
    if (strcmp(argv[i], "-h") == 0 || strcmp(argv[i], "--help") == 0) {
      printf("Usage: jeansgrow %s %s\n\n%s.\n\n%s\n\nOptions:\n  -h, --help  show this help\n",
             cmd->name, cmd->usage, cmd->summary, cmd->details ? cmd->details : "");
      return EXIT_OK;
    }
  }
  int rc;
  if (argc < 3) {
    fprintf(stderr, "jeansgrow merge: give the output and the slice files (usage: jeansgrow "
                    "merge %s)\n", cmd->usage);
    return EXIT_BAD_INPUT;
  }
  cli_options o;
  memset(&o, 0, sizeof o);
  o.output_path = strcmp(argv[1], "-") == 0 ? NULL : argv[1];
  if ((rc = refuse_output_among_slices(o.output_path, argv + 2, argc - 2)) >= 0) return rc;
  jg_output *out = NULL;
  if ((rc = cli_open_output(&o, &out)) >= 0) return rc;
  jg_error err;
  jg_error_clear(&err);
  jg_status st = jg_scan_merge((const char *const *)(argv + 2), argc - 2, jg_output_stream(out),
                               &err);
  if (st != JG_OK) {
    cli_discard_output(out);
    cli_report(&err);
    return st == JG_EIO || st == JG_ENOMEM ? EXIT_RUN_FAILED : EXIT_BAD_INPUT;
  }
  return cli_commit_output(out);
}
