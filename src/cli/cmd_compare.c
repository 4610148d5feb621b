/* `jeansgrow compare`: our growth table against another code's table. */
#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

#include "cli.h"

static const char *const quantity_names[JG_COMPARE_N] = {"delta_b/delta_c", "delta_b", "delta_c"};
static const char *const diff_columns[JG_COMPARE_N] = {"diff_b_over_c", "diff_delta_b_norm",
                                                       "diff_delta_c_norm"};

typedef struct compare_options {
  jg_compare_layout layout;
  double tolerance; /* < 0: none */
  const char *figure;
  const char *output;
  const char *paths[2];
} compare_options;

static int bad(const char *fmt, const char *a, const char *b) {
  fprintf(stderr, "jeansgrow compare: ");
  fprintf(stderr, fmt, a, b);
  fputc('\n', stderr);
  return EXIT_BAD_INPUT;
}

/* A positive finite number, or -1 after printing the error. */
static double positive_number(const char *option, const char *text) {
  char *end = NULL;
  errno = 0;
  double v = strtod(text, &end);
  if (end == text || *end || !isfinite(v) || !(v > 0.0)) {
    bad("%s needs a positive number (got '%s')", option, text);
    return -1.0;
  }
  return v;
}

static int parse(const cli_command *cmd, int argc, char **argv, compare_options *o) {
  static const struct option opts[] = {{"columns", required_argument, NULL, 'c'},
                                       {"k-unit", required_argument, NULL, 'u'},
                                       {"separator", required_argument, NULL, 's'},
                                       {"normalise-at", required_argument, NULL, 'n'},
                                       {"tolerance", required_argument, NULL, 't'},
                                       {"figure", required_argument, NULL, 'f'},
                                       {"output", required_argument, NULL, 'o'},
                                       {"help", no_argument, NULL, 'h'},
                                       {NULL, 0, NULL, 0}};
  memset(o, 0, sizeof *o);
  o->tolerance = -1.0;
  opterr = 0;
  optind = 1;
  int c;
  while ((c = getopt_long(argc, argv, ":o:h", opts, NULL)) != -1) {
    switch (c) {
    case 'c':
      if (strlen(optarg) >= sizeof o->layout.columns)
        return bad("--columns: longer than %s bytes%s", "255", "");
      snprintf(o->layout.columns, sizeof o->layout.columns, "%s", optarg);
      break;
    case 'u':
      if (strcmp(optarg, "1/Mpc") && strcmp(optarg, "h/Mpc"))
        return bad("--k-unit must be 1/Mpc or h/Mpc (got '%s')%s", optarg, "");
      o->layout.k_unit = strcmp(optarg, "h/Mpc") == 0 ? JG_TABLE_K_H_PER_MPC : JG_TABLE_K_PER_MPC;
      break;
    case 's':
      if (strcmp(optarg, "blanks") && strcmp(optarg, "commas"))
        return bad("--separator must be blanks or commas (got '%s')%s", optarg, "");
      o->layout.separator = strcmp(optarg, "commas") == 0 ? JG_TABLE_COMMAS : JG_TABLE_BLANKS;
      break;
    case 'n':
      if ((o->layout.k_norm = positive_number("--normalise-at", optarg)) < 0) return EXIT_BAD_INPUT;
      break;
    case 't':
      if ((o->tolerance = positive_number("--tolerance", optarg)) < 0) return EXIT_BAD_INPUT;
      break;
    case 'f': o->figure = optarg; break;
    case 'o': o->output = optarg; break;
    case 'h':
      printf("Usage: jeansgrow %s %s\n\n%s.\n\n%s\n", cmd->name, cmd->usage, cmd->summary,
             cmd->details);
      return EXIT_OK;
    case ':': return bad("option '%s' needs a value%s", argv[optind - 1], "");
    default: return bad("unknown option '%s' (see jeansgrow compare --help)%s", argv[optind - 1], "");
    }
  }
  if (argc - optind != 2)
    return bad("give our growth table and the reference table (usage: jeansgrow compare %s)%s",
               cmd->usage, "");
  o->paths[0] = argv[optind];
  o->paths[1] = argv[optind + 1];
  if (o->output && !o->output[0]) return bad("option '-o' needs a file name%s%s", "", "");
  return -1;
}

static const char *k_unit_text(const compare_options *o) {
  return o->layout.k_unit == JG_TABLE_K_H_PER_MPC ? "h/Mpc" : "1/Mpc";
}

/* The summary lines, with `prefix` before each ("# " in the table header). */
static void write_summary(FILE *f, const char *prefix, const compare_options *o,
                          const jg_comparison *c) {
  fprintf(f, "%scompared %d rows (%d reference rows outside our k range, not compared)\n",
          prefix, c->n_rows, c->n_outside);
  for (int q = 0; q < c->n_quantities; q++) {
    const jg_compare_stat *s = &c->stat[q];
    fprintf(f, "%s%s%s: largest relative difference %.3e at z = %g, k = %.6g %s; rms %.3e\n",
            prefix, quantity_names[q], q ? " (normalised)" : "", s->largest, s->z, s->k,
            k_unit_text(o), s->rms);
  }
}

static int write_table(const compare_options *o, const jg_comparison *c) {
  cli_options co = {.output_path = o->output};
  jg_output *out = NULL;
  int rc = cli_open_output(&co, &out);
  if (rc >= 0) return rc;
  FILE *f = jg_output_stream(out);
  fprintf(f, "# jeansgrow %s: comparison of growth tables\n", JG_VERSION_STRING);
  fprintf(f, "# ours: %s (FNV-1a checksum %016llx)\n", o->paths[0], c->checksum_ours);
  fprintf(f, "# reference: %s (FNV-1a checksum %016llx), columns \"%s\", k in %s, %s\n",
          o->paths[1], c->checksum_reference,
          o->layout.columns[0] ? o->layout.columns : "z k delta_c delta_b", k_unit_text(o),
          o->layout.separator == JG_TABLE_COMMAS ? "commas" : "blanks");
  fprintf(f, "# diff_X = ours / reference - 1; ours interpolated in ln k (Steffen) at the "
             "reference's k%s\n",
          c->n_quantities > 1 ? "; delta_b, delta_c divided by their value at the "
                                "normalisation k on each side"
                              : "");
  if (c->n_quantities > 1) fprintf(f, "# normalisation k = %g %s\n", o->layout.k_norm, k_unit_text(o));
  write_summary(f, "# ", o, c);
  char k_name[16];
  snprintf(k_name, sizeof k_name, "k[%s]", k_unit_text(o));
  const char *names[4 + JG_COMPARE_N] = {"z", k_name, "b_over_c", "b_over_c_reference"};
  int n_cols = 4;
  for (int q = 0; q < c->n_quantities; q++) names[n_cols++] = diff_columns[q];
  jg_table_write_columns(f, names, n_cols);
  jg_error err;
  jg_error_clear(&err);
  for (int i = 0; i < c->n_rows; i++) {
    const jg_compare_row *r = &c->rows[i];
    double row[4 + JG_COMPARE_N] = {r->z, r->k, r->ours[0], r->reference[0]};
    for (int q = 0; q < c->n_quantities; q++) row[4 + q] = r->diff[q];
    if (jg_table_write_row(f, row, n_cols, names, &err) != JG_OK) {
      cli_discard_output(out);
      return cli_report(&err);
    }
  }
  return cli_commit_output(out);
}

/* Is `name` an executable on PATH? */
static int on_path(const char *name) {
  const char *path = getenv("PATH");
  if (!path) return 0;
  char dir[4096], full[4200];
  for (const char *p = path; *p;) {
    size_t len = strcspn(p, ":");
    snprintf(dir, sizeof dir, "%.*s", (int)len, p);
    snprintf(full, sizeof full, "%s/%s", dir[0] ? dir : ".", name);
    if (access(full, X_OK) == 0) return 1;
    p += len + (p[len] == ':');
  }
  return 0;
}

/* delta_b/delta_c's relative difference against k, one line per redshift,
 * drawn by gnuplot (PNG). */
static int draw_figure(const compare_options *o, const jg_comparison *c) {
  if (!on_path("gnuplot")) {
    fprintf(stderr, "jeansgrow compare: gnuplot is not installed: no figure %s\n", o->figure);
    return EXIT_OK;
  }
  FILE *g = popen("gnuplot", "w");
  if (!g) {
    fprintf(stderr, "jeansgrow compare: cannot start gnuplot: %s\n", strerror(errno));
    return EXIT_RUN_FAILED;
  }
  fprintf(g, "set terminal pngcairo size 900,600\nset output '");
  for (const char *s = o->figure; *s; s++) fprintf(g, *s == '\'' ? "''" : "%c", *s);
  fprintf(g, "'\nset logscale x\nset xlabel 'k [%s]'\n"
             "set ylabel '(delta_b/delta_c) ours / reference - 1'\nset key outside right\n"
             "set grid\nplot ",
          k_unit_text(o));
  int groups = 0;
  for (int i = 0; i < c->n_rows; i++)
    if (i == 0 || c->rows[i].z != c->rows[i - 1].z)
      fprintf(g, "%s'-' using 1:2 with linespoints title 'z = %g'", groups++ ? ", " : "",
              c->rows[i].z);
  fputc('\n', g);
  for (int i = 0; i < c->n_rows; i++) {
    fprintf(g, "%.10e %.10e\n", c->rows[i].k, c->rows[i].diff[0]);
    if (i + 1 == c->n_rows || c->rows[i + 1].z != c->rows[i].z) fprintf(g, "e\n");
  }
  const int status = pclose(g);
  if (status != 0 || access(o->figure, F_OK) != 0) {
    fprintf(stderr, "jeansgrow compare: gnuplot could not draw %s (status %d)\n", o->figure,
            WIFEXITED(status) ? WEXITSTATUS(status) : -1);
    return EXIT_RUN_FAILED;
  }
  return EXIT_OK;
}

int cmd_compare(const cli_command *cmd, int argc, char **argv) {
  compare_options o;
  int rc = parse(cmd, argc, argv, &o);
  if (rc >= 0) return rc;
  jg_error err;
  jg_error_clear(&err);
  jg_comparison *c = NULL;
  if (jg_compare_tables(o.paths[0], o.paths[1], &o.layout, &c, &err) != JG_OK)
    return cli_report(&err);
  rc = write_table(&o, c);
  if (rc == EXIT_OK && o.figure) rc = draw_figure(&o, c);
  if (rc == EXIT_OK) {
    /* The table on stdout leaves the summary to stderr. */
    write_summary(o.output ? stdout : stderr, "", &o, c);
    for (int q = 0; o.tolerance >= 0.0 && q < c->n_quantities; q++)
      if (c->stat[q].largest > o.tolerance) {
        fprintf(stderr,
                "jeansgrow compare: %s differs by %.3e (z = %g, k = %.6g %s), more than the "
                "tolerance %g\n",
                quantity_names[q], c->stat[q].largest, c->stat[q].z, c->stat[q].k,
                k_unit_text(&o), o.tolerance);
        rc = EXIT_TOLERANCE_NOT_MET;
      }
  }
  jg_comparison_free(c);
  return rc;
}
