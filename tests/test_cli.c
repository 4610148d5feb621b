/*
 * Command-line tests: the real program (JG_PROGRAM), run on real files.
 *
 * The bad-input catalogue in tests/bad/ (see its README.md) is walked in
 * sorted order; every case must print its exact error line, exit with 2 and
 * leave its output folder empty. The good runs check what the commands
 * promise in their --help text and in the conventions: the table layout,
 * exact requested redshifts, --set applied and recorded, atomic output.
 */
#define _GNU_SOURCE /* sched_setaffinity: `run` with one usable core */
#include <criterion/criterion.h>
#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <sched.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "jeansgrow/jeansgrow.h"
#include "support.h"
#include "tables.h"

#define BAD_DIR JG_SOURCE_DIR "/tests/bad"
#define REFERENCE JG_SOURCE_DIR "/params/reference.cfg"
#define MAX_ARGS 64

/* ---- running the program ------------------------------------------------- */

typedef struct child {
  pid_t pid;
  char io_dir[64]; /* holds the captured stdout and stderr */
} child;

typedef struct run_result {
  int status; /* as from waitpid */
  char *out;
  char *err;
} run_result;

static void write_text(const char *path, const char *text) {
  FILE *f = fopen(path, "w");
  cr_assert_not_null(f, "cannot write %s", path);
  fputs(text, f);
  cr_assert_eq(fclose(f), 0);
}

/* Start the program with `args` (NULL-terminated, without argv[0]); its
 * stdout and stderr are captured in files of a fresh folder. */
static void child_start_program(child *c, const char *const *args) {
  snprintf(c->io_dir, sizeof c->io_dir, "/tmp/jg_cli_io_XXXXXX");
  cr_assert_not_null(mkdtemp(c->io_dir), "mkdtemp: %s", strerror(errno));
  char out_path[128], err_path[128];
  snprintf(out_path, sizeof out_path, "%s/stdout", c->io_dir);
  snprintf(err_path, sizeof err_path, "%s/stderr", c->io_dir);
  c->pid = child_start(JG_PROGRAM, args, out_path, err_path, 0);
}

static void child_finish(child *c, run_result *r) {
  r->status = child_wait(c->pid);
  char path[128];
  snprintf(path, sizeof path, "%s/stdout", c->io_dir);
  r->out = read_text(path);
  unlink(path);
  snprintf(path, sizeof path, "%s/stderr", c->io_dir);
  r->err = read_text(path);
  unlink(path);
  rmdir(c->io_dir);
  cr_assert(r->out && r->err, "lost the captured output of the program");
}

static void run(const char *const *args, run_result *r) {
  child c;
  child_start_program(&c, args);
  child_finish(&c, r);
}

static void run_free(run_result *r) {
  free(r->out);
  free(r->err);
}

static int exited_with(const run_result *r, int code) {
  return WIFEXITED(r->status) && WEXITSTATUS(r->status) == code;
}

/* ---- folders ------------------------------------------------------------- */

static void make_temp_dir(char *dir, size_t size) {
  snprintf(dir, size, "/tmp/jg_cli_out_XXXXXX");
  cr_assert_not_null(mkdtemp(dir), "mkdtemp: %s", strerror(errno));
}

/* The names in `dir` (hidden ones included), space-separated; returns how
 * many there are. */
static int list_dir(const char *dir, char *names, size_t size) {
  names[0] = '\0';
  DIR *d = opendir(dir);
  cr_assert_not_null(d, "cannot open %s", dir);
  int n = 0;
  struct dirent *e;
  while ((e = readdir(d)) != NULL) {
    if (strcmp(e->d_name, ".") == 0 || strcmp(e->d_name, "..") == 0) continue;
    size_t len = strlen(names);
    snprintf(names + len, size - len, "%s%s", n ? " " : "", e->d_name);
    n++;
  }
  closedir(d);
  return n;
}

/* Remove `dir` and whatever a failed check left in it (files or one level of
 * folders), so that one failing case does not litter /tmp. */
static void remove_dir(const char *dir) {
  DIR *d = opendir(dir);
  if (!d) return;
  struct dirent *e;
  while ((e = readdir(d)) != NULL) {
    if (strcmp(e->d_name, ".") == 0 || strcmp(e->d_name, "..") == 0) continue;
    char path[4096];
    snprintf(path, sizeof path, "%s/%s", dir, e->d_name);
    if (unlink(path) != 0) remove_dir(path);
  }
  closedir(d);
  rmdir(dir);
}

/* ---- the bad-input catalogue --------------------------------------------- */

typedef struct placeholders {
  const char *cfg, *dir, *outdir, *out;
} placeholders;

/* `text` with @CFG@, @DIR@, @OUTDIR@ and @OUT@ filled in (malloc'd). */
static char *fill(const char *text, const placeholders *ph) {
  const struct {
    const char *token, *value;
  } map[] = {{"@CFG@", ph->cfg}, {"@DIR@", ph->dir}, {"@OUTDIR@", ph->outdir}, {"@OUT@", ph->out}};
  size_t cap = strlen(text) + 1;
  for (const char *p = text; *p; p++)
    if (*p == '@') cap += 4096;
  char *res = malloc(cap);
  cr_assert_not_null(res);
  size_t len = 0;
  for (const char *p = text; *p;) {
    int done = 0;
    for (size_t i = 0; i < sizeof map / sizeof map[0] && !done; i++) {
      size_t tl = strlen(map[i].token);
      if (strncmp(p, map[i].token, tl) == 0) {
        len += (size_t)snprintf(res + len, cap - len, "%s", map[i].value);
        p += tl;
        done = 1;
      }
    }
    if (!done) res[len++] = *p++;
  }
  res[len] = '\0';
  return res;
}

static int has_suffix(const char *name, const char *suffix) {
  size_t n = strlen(name), s = strlen(suffix);
  return n > s && strcmp(name + n - s, suffix) == 0;
}

static int file_exists(const char *path) {
  struct stat sb;
  return stat(path, &sb) == 0;
}

/* Run one case; returns 1 if every check passed. Each failed check is
 * reported under the case name and the walk goes on. */
static int run_bad_case(const char *name) {
  char base[1024], path[1200], outdir[64], out[128];
  snprintf(base, sizeof base, "%s/%s", BAD_DIR, name);
  make_temp_dir(outdir, sizeof outdir);
  snprintf(out, sizeof out, "%s/out.txt", outdir);
  snprintf(path, sizeof path, "%s.cfg", base);
  char cfg[1200];
  snprintf(cfg, sizeof cfg, "%s", path);
  placeholders ph = {cfg, BAD_DIR, outdir, out};
  int ok = 1;

  snprintf(path, sizeof path, "%s.expect", base);
  char *expect_raw = read_text(path);
  cr_assert_not_null(expect_raw, "%s: cannot read %s", name, path);
  char *newline = strchr(expect_raw, '\n');
  if (!newline || newline[1] != '\0') {
    cr_expect_fail("%s: %s.expect must hold exactly one line ending in a newline", name, name);
    ok = 0;
  }
  char *expected = fill(expect_raw, &ph);

  /* Arguments: one per line of NAME.args, or the default command. */
  char *args_text = NULL;
  const char *args[MAX_ARGS + 1];
  char *filled[MAX_ARGS];
  int n_args = 0;
  snprintf(path, sizeof path, "%s.args", base);
  if (file_exists(path)) {
    args_text = read_text(path);
    cr_assert_not_null(args_text, "%s: cannot read %s", name, path);
    for (char *line = args_text; *line;) {
      char *end = strchr(line, '\n');
      if (end) *end = '\0';
      cr_assert_lt(n_args, MAX_ARGS, "%s: too many arguments", name);
      filled[n_args] = fill(line, &ph);
      args[n_args] = filled[n_args];
      n_args++;
      if (!end) break;
      line = end + 1;
    }
  } else {
    const char *def[] = {"history", "-o", "@OUT@", "@CFG@"};
    for (int i = 0; i < 4; i++) {
      filled[n_args] = fill(def[i], &ph);
      args[n_args] = filled[n_args];
      n_args++;
    }
  }
  args[n_args] = NULL;

  run_result r;
  run(args, &r);
  if (strcmp(r.err, expected) != 0) {
    cr_expect_fail("%s: stderr differs\n  got:      %s\n  expected: %s", name, r.err, expected);
    ok = 0;
  }
  if (!exited_with(&r, 2)) {
    cr_expect_fail("%s: exit status %d%s, expected 2", name,
                   WIFEXITED(r.status) ? WEXITSTATUS(r.status) : WTERMSIG(r.status),
                   WIFEXITED(r.status) ? "" : " (killed by signal)");
    ok = 0;
  }
  if (r.out[0] != '\0') {
    cr_expect_fail("%s: stdout should be empty, got: %.200s", name, r.out);
    ok = 0;
  }
  char left[1024];
  if (list_dir(outdir, left, sizeof left) != 0) {
    cr_expect_fail("%s: the output folder should be empty, holds: %s", name, left);
    ok = 0;
  }

  run_free(&r);
  for (int i = 0; i < n_args; i++) free(filled[i]);
  free(args_text);
  free(expected);
  free(expect_raw);
  remove_dir(outdir);
  return ok;
}

Test(bad_input, every_catalogued_case_prints_its_exact_message_exits_2_and_writes_nothing,
     .timeout = 300) {
  struct dirent **entries;
  int n = scandir(BAD_DIR, &entries, NULL, alphasort);
  cr_assert_geq(n, 0, "cannot list %s: %s", BAD_DIR, strerror(errno));
  int cases = 0, failed = 0;
  for (int i = 0; i < n; i++) {
    const char *file = entries[i]->d_name;
    char name[512];
    if (has_suffix(file, ".expect")) {
      snprintf(name, sizeof name, "%.*s", (int)(strlen(file) - strlen(".expect")), file);
      cases++;
      if (!run_bad_case(name)) failed++;
    } else if (has_suffix(file, ".cfg") || has_suffix(file, ".args")) {
      /* A bad file without its expected message would be skipped silently. */
      size_t stem = strlen(file) - strlen(has_suffix(file, ".cfg") ? ".cfg" : ".args");
      char expect_path[1024];
      snprintf(expect_path, sizeof expect_path, "%s/%.*s.expect", BAD_DIR, (int)stem, file);
      if (!file_exists(expect_path)) {
        cr_expect_fail("tests/bad/%s has no .expect file", file);
        failed++;
      }
    }
    free(entries[i]);
  }
  free(entries);
  cr_assert_gt(cases, 0, "no cases found in %s", BAD_DIR);
  cr_expect_eq(failed, 0, "%d problem(s) in the catalogue of %d cases (listed above)", failed, cases);
}

/* ---- version and help ---------------------------------------------------- */

Test(good_runs, version_option_prints_the_library_version) {
  const char *spellings[] = {"--version", "-V"};
  for (int i = 0; i < 2; i++) {
    const char *args[] = {spellings[i], NULL};
    run_result r;
    run(args, &r);
    cr_expect(exited_with(&r, 0), "%s: exit status", spellings[i]);
    cr_expect_str_eq(r.out, "jeansgrow " JG_VERSION_STRING "\n", "%s", spellings[i]);
    cr_expect_str_empty(r.err, "%s", spellings[i]);
    run_free(&r);
  }
}

/* The program help lists the commands ("  NAME  summary" under
 * "Commands:"); each one's --help is checked, so a command added later is
 * covered without touching this test. */
Test(good_runs, program_help_and_every_command_help_exit_0_with_usage) {
  const char *args[] = {"--help", NULL};
  run_result r;
  run(args, &r);
  cr_assert(exited_with(&r, 0), "--help: exit status");
  cr_expect_str_empty(r.err);
  cr_assert(strncmp(r.out, "Usage: jeansgrow COMMAND", 24) == 0, "--help printed: %.200s", r.out);
  const char *section = strstr(r.out, "\nCommands:\n");
  cr_assert_not_null(section, "--help lists no commands");
  int commands = 0;
  for (const char *line = section + strlen("\nCommands:\n"); strncmp(line, "  ", 2) == 0;) {
    char cmd[64];
    cr_assert_eq(sscanf(line, " %63s", cmd), 1);
    const char *cargs[] = {cmd, "--help", NULL};
    run_result c;
    run(cargs, &c);
    char usage[128];
    snprintf(usage, sizeof usage, "Usage: jeansgrow %s", cmd);
    cr_expect(exited_with(&c, 0), "%s --help: exit status", cmd);
    cr_expect(strncmp(c.out, usage, strlen(usage)) == 0, "%s --help printed: %.200s", cmd, c.out);
    cr_expect_str_empty(c.err, "%s --help", cmd);
    run_free(&c);
    commands++;
    const char *next = strchr(line, '\n');
    if (!next) break;
    line = next + 1;
  }
  cr_expect_geq(commands, 3, "expected at least history, epochs and keys");
  run_free(&r);

  const char *short_args[] = {"-h", NULL};
  run(short_args, &r);
  cr_expect(exited_with(&r, 0), "-h: exit status");
  cr_expect(strncmp(r.out, "Usage: jeansgrow COMMAND", 24) == 0);
  run_free(&r);
}

/* The README's key tables are the output of `keys --markdown`, pasted: a
 * key, a range or a combined rule changed in the key table and not in the
 * README fails here. */
Test(good_runs, readme_holds_the_key_tables_of_keys_markdown) {
  const char *args[] = {"keys", "--markdown", NULL};
  run_result r;
  run(args, &r);
  cr_assert(exited_with(&r, 0), "keys --markdown: exit status");
  cr_assert_not_null(strstr(r.out, "| de_w0 + de_wa < 1/3 |"), "no combined rules listed");
  char *readme = read_text(JG_SOURCE_DIR "/README.md");
  cr_assert_not_null(readme);
  /* Each table (a block of lines starting with '|') must appear whole. */
  for (char *block = r.out; *block;) {
    char *end = strstr(block, "\n\n");
    if (end) *end = '\0';
    cr_expect_not_null(strstr(readme, block),
                       "README.md lacks this part of `jeansgrow keys --markdown`; paste it "
                       "again:\n%s", block);
    if (!end) break;
    block = end + 2;
  }
  free(readme);
  run_free(&r);
}

/* Run `history` with `extra` arguments into a fresh folder and parse the
 * table; also checks that the run was clean and left exactly one file. */
static void run_history(const char *const *extra, table *t) {
  char dir[64], out[128];
  make_temp_dir(dir, sizeof dir);
  snprintf(out, sizeof out, "%s/history.txt", dir);
  const char *args[MAX_ARGS + 1];
  int n = 0;
  args[n++] = "history";
  for (int i = 0; extra[i]; i++) args[n++] = extra[i];
  args[n++] = "-o";
  args[n++] = out;
  args[n++] = REFERENCE;
  args[n] = NULL;
  run_result r;
  run(args, &r);
  cr_assert(exited_with(&r, 0), "history failed: %s", r.err);
  cr_expect_str_empty(r.err);
  cr_expect_str_empty(r.out, "with -o nothing goes to stdout");
  char names[1024];
  cr_expect_eq(list_dir(dir, names, sizeof names), 1, "the folder holds: %s", names);
  char *text = read_text(out);
  cr_assert_not_null(text);
  parse_table(text, t);
  free(text);
  run_free(&r);
  remove_dir(dir);
}

static int row_with_z(const table *t, double z) {
  for (int i = 0; i < t->n_rows; i++)
    if (cell(t, i, 0) == z) return i;
  return -1;
}

Test(good_runs, history_table_has_its_columns_exact_requested_redshifts_and_clean_numbers) {
  jg_params p;
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_params_load(REFERENCE, NULL, 0, &p, &err), JG_OK, "%s", err.message);

  const char *none[] = {NULL};
  table t;
  run_history(none, &t);
  const char *wanted[] = {"z", "x_e", "T_gas[K]", "T_rad[K]", "tau", "visibility"};
  for (size_t i = 0; i < sizeof wanted / sizeof wanted[0]; i++)
    cr_expect_geq(column_index(&t, wanted[i]), 0, "no column %s", wanted[i]);
  cr_assert_eq(column_index(&t, "z"), 0, "z must be the first column");
  cr_expect(strstr(t.header, "# jeansgrow " JG_VERSION_STRING) != NULL,
            "the header records the version");

  cr_expect_geq(t.n_rows, p.output.history_rows);
  for (int i = 1; i < t.n_rows; i++)
    cr_expect_lt(cell(&t, i, 0), cell(&t, i - 1, 0), "z does not decrease at row %d", i + 1);
  /* Exact equality: %.10e reads back to the same double for these values,
   * and the help promises every requested redshift "exactly". */
  for (int i = 0; i < p.output.n_redshifts; i++)
    cr_expect_geq(row_with_z(&t, p.output.redshifts[i]), 0, "no row at z = %.17g",
                  p.output.redshifts[i]);
  cr_expect_eq(cell(&t, 0, 0), p.thermal.start_redshift, "first row at the start redshift");
  cr_expect_eq(cell(&t, t.n_rows - 1, 0), p.output.history_z_min, "last row at history_z_min");
  table_free(&t);
}

Test(good_runs, set_options_change_the_results_and_are_recorded_in_the_header) {
  const char *only_z[] = {"--set", "output.redshifts=[300.0,30.0]", NULL};
  const char *more_baryons[] = {"--set", "cosmology.baryon_density_h2=0.03", "--set",
                                "output.redshifts=[300.0,30.0]", NULL};
  table base, changed;
  run_history(only_z, &base);
  run_history(more_baryons, &changed);
  cr_expect(strstr(changed.header, "# cosmology.baryon_density_h2 = 0.03;\n") != NULL,
            "override not recorded:\n%s", changed.header);
  cr_expect(strstr(changed.header, "# output.redshifts = [300.0, 30.0];\n") != NULL,
            "array override not recorded:\n%s", changed.header);
  cr_expect(strstr(base.header, "# cosmology.baryon_density_h2 = 0.02237;\n") != NULL);
  int xe = column_index(&changed, "x_e");
  cr_assert_geq(xe, 0);
  int rb = row_with_z(&base, 300.0), rc = row_with_z(&changed, 300.0);
  cr_assert(rb >= 0 && rc >= 0, "no row at z = 300");
  cr_expect_geq(row_with_z(&changed, 30.0), 0, "no row at z = 30");
  /* The override must reach the computation, not only the header. */
  cr_expect_neq(cell(&base, rb, xe), cell(&changed, rc, xe),
                "x_e at z = 300 is the same with Omega_b h^2 = 0.02237 and 0.03");
  table_free(&base);
  table_free(&changed);
}

typedef struct epoch_line {
  char name[64], unit[32];
  double value;
} epoch_line;

/* Read the `name<TAB>value<TAB>unit` lines of an epochs output into lines[]
 * (at most 128), checking their form; returns how many. */
static int parse_epochs(const char *text, epoch_line *lines) {
  int n = 0;
  char *copy = strdup(text);
  char *save = NULL;
  for (char *line = strtok_r(copy, "\n", &save); line; line = strtok_r(NULL, "\n", &save)) {
    if (line[0] == '#') continue;
    cr_assert_lt(n, 128);
    char *tab1 = strchr(line, '\t');
    char *tab2 = tab1 ? strchr(tab1 + 1, '\t') : NULL;
    cr_assert(tab1 && tab2 && !strchr(tab2 + 1, '\t'), "not name<TAB>value<TAB>unit: %s", line);
    *tab1 = *tab2 = '\0';
    snprintf(lines[n].name, sizeof lines[n].name, "%s", line);
    snprintf(lines[n].unit, sizeof lines[n].unit, "%s", tab2 + 1);
    char *stop;
    lines[n].value = strtod(tab1 + 1, &stop);
    cr_expect(stop != tab1 + 1 && *stop == '\0' && isfinite(lines[n].value),
              "%s: value is not a finite number: %s", line, tab1 + 1);
    cr_expect(lines[n].unit[0] != '\0', "%s: empty unit ('-' marks dimensionless)", line);
    n++;
  }
  free(copy);
  return n;
}

Test(good_runs, epochs_prints_name_value_unit_lines) {
  const char *args[] = {"epochs", REFERENCE, NULL};
  run_result r;
  run(args, &r);
  cr_assert(exited_with(&r, 0), "epochs failed: %s", r.err);
  cr_expect_str_empty(r.err);
  epoch_line lines[128];
  int n = parse_epochs(r.out, lines);
  /* Units as the command documents them ('-' for dimensionless). */
  const struct {
    const char *name, *unit;
  } wanted[] = {{"z_star", "-"},      {"z_drag", "-"}, {"r_star", "Mpc"},
                {"r_drag", "Mpc"},    {"z_eq", "-"},   {"age", "Gyr"},
                {"z_gas_decoupling", "-"}};
  for (size_t w = 0; w < sizeof wanted / sizeof wanted[0]; w++) {
    int found = -1;
    for (int i = 0; i < n; i++)
      if (strcmp(lines[i].name, wanted[w].name) == 0) found = i;
    cr_expect_geq(found, 0, "epochs has no %s line", wanted[w].name);
    if (found >= 0) {
      cr_expect_str_eq(lines[found].unit, wanted[w].unit, "unit of %s", wanted[w].name);
      cr_expect_gt(lines[found].value, 0.0, "%s", wanted[w].name);
    }
  }
  run_free(&r);
}

Test(good_runs, integers_written_for_number_keys_are_accepted) {
  char dir[64], cfg[128], out[128];
  make_temp_dir(dir, sizeof dir);
  snprintf(cfg, sizeof cfg, "%s/integers.cfg", dir);
  snprintf(out, sizeof out, "%s/epochs.txt", dir);
  /* hubble_h = 1 lies inside 0 < h <= 5; the others are ordinary values
   * written without a decimal point. */
  write_text(cfg, "cosmology: { hubble_h = 1; baryon_density_h2 = 0.02237; cdm_density_h2 = 0.12;\n"
                  "             cmb_temperature_K = 3; };\n"
                  "thermal: { start_redshift = 9000; };\n"
                  "output: { redshifts = [1000, 100, 10]; history_z_min = 0; };\n");
  const char *args[] = {"epochs", "-o", out, cfg, NULL};
  run_result r;
  run(args, &r);
  cr_assert(exited_with(&r, 0), "epochs failed: %s", r.err);
  char *text = read_text(out);
  cr_assert_not_null(text);
  const char *recorded[] = {"# cosmology.hubble_h = 1.0;\n", "# cosmology.cmb_temperature_K = 3.0;\n",
                            "# thermal.start_redshift = 9000.0;\n",
                            "# output.redshifts = [1000.0, 100.0, 10.0];\n",
                            "# output.history_z_min = 0.0;\n"};
  for (size_t i = 0; i < sizeof recorded / sizeof recorded[0]; i++)
    cr_expect(strstr(text, recorded[i]) != NULL, "header lacks %s", recorded[i]);
  free(text);
  run_free(&r);
  remove_dir(dir);
}

/* A failed run must not touch a table already at the output path: neither
 * when the input is rejected up front nor when the run fails after the
 * temporary file was opened (the closed, matter-poor model fails when the
 * background is built). */
Test(good_runs, failed_run_leaves_an_existing_output_file_untouched) {
  const char *precious = "# a table from an earlier run\n1.0\t2.0\n";
  const char *const failing[][12] = {
      {"history", "--set", "cosmology.hubble_h=-1", NULL},
      {"history", "--set", "cosmology.hubble_h=0.7", "--set", "cosmology.baryon_density_h2=0.001",
       "--set", "cosmology.cdm_density_h2=0.001", "--set", "cosmology.curvature_omega=-0.9",
       NULL},
  };
  for (size_t k = 0; k < sizeof failing / sizeof failing[0]; k++) {
    char dir[64], out[128];
    make_temp_dir(dir, sizeof dir);
    snprintf(out, sizeof out, "%s/table.txt", dir);
    write_text(out, precious);
    const char *args[MAX_ARGS + 1];
    int n = 0;
    for (int i = 0; failing[k][i]; i++) args[n++] = failing[k][i];
    args[n++] = "-o";
    args[n++] = out;
    args[n++] = REFERENCE;
    args[n] = NULL;
    run_result r;
    run(args, &r);
    cr_expect(exited_with(&r, 2), "case %zu: expected exit status 2; stderr: %s", k, r.err);
    char *text = read_text(out);
    cr_expect(text && strcmp(text, precious) == 0, "case %zu: the existing file changed", k);
    char names[1024];
    cr_expect_eq(list_dir(dir, names, sizeof names), 1, "case %zu: the folder holds: %s", k,
                 names);
    free(text);
    run_free(&r);
    remove_dir(dir);
  }
}

/* Tables are for sharing: the file gets the usual permissions (0666 less
 * the umask), not those of a private temporary file. */
Test(good_runs, output_file_gets_the_usual_permissions) {
  char dir[64], out[128];
  make_temp_dir(dir, sizeof dir);
  snprintf(out, sizeof out, "%s/epochs.txt", dir);
  mode_t old = umask(022); /* inherited by the child */
  const char *args[] = {"epochs", "-o", out, REFERENCE, NULL};
  run_result r;
  run(args, &r);
  umask(old);
  cr_assert(exited_with(&r, 0), "epochs failed: %s", r.err);
  struct stat sb;
  cr_assert_eq(stat(out, &sb), 0);
  cr_expect_eq(sb.st_mode & 0777, 0644, "mode %o, expected 644 under umask 022",
               (unsigned)(sb.st_mode & 0777));
  run_free(&r);
  remove_dir(dir);
}

/* SIGTERM while the table is being written: the program removes its
 * temporary file and exits with 128 + 15. The signal is sent as soon as the
 * hidden temporary file appears; the program holds signals back until it
 * has recorded that file, so this is deterministic as long as the run
 * (a million rows, seconds) outlasts the polling (about a millisecond). */
Test(good_runs, sigterm_during_a_run_leaves_no_file, .timeout = 120) {
  char dir[64], out[128];
  make_temp_dir(dir, sizeof dir);
  snprintf(out, sizeof out, "%s/history.txt", dir);
  const char *args[] = {"history", "--set", "output.history_rows=1000000", "-o", out, REFERENCE,
                        NULL};
  child c;
  child_start_program(&c, args);
  int seen = 0;
  const struct timespec pause = {0, 200000};
  for (int i = 0; i < 100000 && !seen; i++) {
    DIR *d = opendir(dir);
    cr_assert_not_null(d);
    struct dirent *e;
    while ((e = readdir(d)) != NULL)
      if (e->d_name[0] == '.' && strcmp(e->d_name, ".") != 0 && strcmp(e->d_name, "..") != 0)
        seen = 1;
    closedir(d);
    if (!seen) {
      int status;
      if (waitpid(c.pid, &status, WNOHANG) == c.pid)
        cr_assert_fail("the run ended (status %d) before its temporary file was seen", status);
      nanosleep(&pause, NULL);
    }
  }
  cr_assert(seen, "no temporary file appeared in %s", dir);
  cr_assert_eq(kill(c.pid, SIGTERM), 0);
  run_result r;
  child_finish(&c, &r);
  cr_expect(exited_with(&r, 128 + SIGTERM),
            "expected exit status %d after SIGTERM (a finished run would give 0); status %d",
            128 + SIGTERM, r.status);
  cr_expect_str_eq(r.err, "jeansgrow: interrupted; no output file was written\n");
  char names[1024];
  cr_expect_eq(list_dir(dir, names, sizeof names), 0, "the folder holds: %s", names);
  run_free(&r);
  remove_dir(dir);
}

/* ---- the main job and the perturbation tables ----------------------------- */

/* `run` writes its four tables into the folder, each a clean table with the
 * headline columns of its command, and prints a summary naming them. */
Test(good_runs, run_writes_four_tables_and_a_summary, .timeout = 120) {
  char dir[64];
  make_temp_dir(dir, sizeof dir);
  char folder[128];
  snprintf(folder, sizeof folder, "%s/results", dir); /* created by run */
  const char *args[] = {"run", REFERENCE, "--set", "perturbations.k_count=24",
                        "-o", folder, NULL};
  run_result r;
  run(args, &r);
  cr_assert(exited_with(&r, 0), "run failed: %s", r.err);
  cr_expect(strstr(r.out, "z_star = ") && strstr(r.out, "growth.txt"), "summary: %s", r.out);
  static const struct {
    const char *file;
    const char *columns[9];
    int rows;
  } expected[] = {
      {"scales.txt",
       {"z", "T_gas[K]", "x_e", "k_J[1/Mpc]", "M_J[Msun]", "k_F[1/Mpc]", "M_F[Msun]",
        "k_half[1/Mpc]", "M_half[Msun]"},
       8},
      {"growth.txt",
       {"z", "k[1/Mpc]", "delta_c", "delta_b", "delta_m", "b_over_c", "rate_c", "rate_b", NULL},
       8 * 24},
      {"history.txt", {"z", "x_e", "T_gas[K]", "T_rad[K]", "tau", "visibility", NULL}, -1},
  };
  for (size_t i = 0; i < sizeof expected / sizeof expected[0]; i++) {
    char path[192];
    snprintf(path, sizeof path, "%s/%s", folder, expected[i].file);
    char *text = read_text(path);
    cr_assert_not_null(text, "run wrote no %s", expected[i].file);
    table t;
    parse_table(text, &t);
    for (int c = 0; c < 9 && expected[i].columns[c]; c++)
      cr_expect(column_index(&t, expected[i].columns[c]) >= 0, "%s has no column %s",
                expected[i].file, expected[i].columns[c]);
    if (expected[i].rows > 0)
      cr_expect_eq(t.n_rows, expected[i].rows, "%s: %d rows", expected[i].file, t.n_rows);
    table_free(&t);
    free(text);
  }
  char path[192];
  snprintf(path, sizeof path, "%s/epochs.txt", folder);
  char *epochs = read_text(path);
  cr_assert_not_null(epochs);
  cr_expect(strstr(epochs, "\nz_star\t") != NULL, "epochs.txt has no z_star line");
  free(epochs);
  run_free(&r);
  remove_dir(dir);
}

/* The data lines (not the comments) of a table file. */
static char *data_lines(const char *path) {
  char *text = read_text(path);
  if (!text) return NULL;
  char *out = calloc(strlen(text) + 1, 1), *o = out;
  for (char *line = text; *line;) {
    char *end = strchr(line, '\n');
    size_t n = end ? (size_t)(end - line) + 1 : strlen(line);
    if (line[0] != '#') memcpy(o, line, n), o += n;
    line += n;
  }
  free(text);
  return out;
}

/* `run` computes the growth grid on a second thread beside the scales when
 * there are two cores: its tables must be those of `growth` and `scales`,
 * which run on one, to the last digit. */
Test(good_runs, run_tables_equal_the_single_commands, .timeout = 120) {
  char dir[64];
  make_temp_dir(dir, sizeof dir);
  char folder[128], growth[128], scales[128];
  snprintf(folder, sizeof folder, "%s/results", dir);
  snprintf(growth, sizeof growth, "%s/growth.txt", dir);
  snprintf(scales, sizeof scales, "%s/scales.txt", dir);
  const char *run_args[] = {"run", REFERENCE, "--set", "perturbations.k_count=20", "--no-figures",
                            "-o", folder, NULL};
  const char *growth_args[] = {"growth", REFERENCE, "--set", "perturbations.k_count=20",
                               "-o", growth, NULL};
  const char *scales_args[] = {"scales", REFERENCE, "-o", scales, NULL};
  const char *const *all[] = {run_args, growth_args, scales_args};
  for (int i = 0; i < 3; i++) {
    run_result r;
    run(all[i], &r);
    cr_assert(exited_with(&r, 0), "%s failed: %s", all[i][0], r.err);
    run_free(&r);
  }
  const char *names[2] = {"growth.txt", "scales.txt"}, *single[2] = {growth, scales};
  for (int i = 0; i < 2; i++) {
    char path[192];
    snprintf(path, sizeof path, "%s/%s", folder, names[i]);
    char *a = data_lines(path), *b = data_lines(single[i]);
    cr_assert(a && b && a[0], "%s missing", names[i]);
    cr_expect(strcmp(a, b) == 0, "%s of run differs from the single command's", names[i]);
    free(a);
    free(b);
  }
  remove_dir(dir);
}

/* `run` formats its tables on a second thread when it may use two cores
 * and on one thread otherwise (its CPU affinity decides, which the child
 * inherits): either way each of its four files must be, byte for byte,
 * what the single command writes to its own file; and `growth`, which
 * shares its grid and its table out over the usable cores, must write the
 * same file on one core as on two. */
Test(good_runs, run_and_growth_files_equal_the_single_commands_on_one_core_and_two, .timeout = 120) {
  cpu_set_t all, one;
  cr_assert_eq(sched_getaffinity(0, sizeof all, &all), 0, "sched_getaffinity: %s",
               strerror(errno));
  if (CPU_COUNT(&all) < 2) cr_skip_test("needs two usable cores to run `run` both ways");
  CPU_ZERO(&one);
  for (int c = 0; c < CPU_SETSIZE; c++)
    if (CPU_ISSET(c, &all)) {
      CPU_SET(c, &one);
      break;
    }
  char dir[64];
  make_temp_dir(dir, sizeof dir);
  static const char *const commands[] = {"history", "epochs", "scales", "growth"};
  enum { N_TABLES = sizeof commands / sizeof commands[0] };
  char single[N_TABLES][128];
  for (int i = 0; i < N_TABLES; i++) {
    snprintf(single[i], sizeof single[i], "%s/%s.txt", dir, commands[i]);
    const char *args[] = {commands[i], REFERENCE, "--set", "perturbations.k_count=20",
                          "-o", single[i], NULL};
    run_result r;
    run(args, &r);
    cr_assert(exited_with(&r, 0), "%s failed: %s", commands[i], r.err);
    run_free(&r);
  }
  for (int cores = 1; cores <= 2; cores++) {
    char folder[128];
    snprintf(folder, sizeof folder, "%s/cores%d", dir, cores);
    const char *args[] = {"run", REFERENCE, "--set", "perturbations.k_count=20", "--no-figures",
                          "-o", folder, NULL};
    cr_assert_eq(sched_setaffinity(0, sizeof(cpu_set_t), cores == 1 ? &one : &all), 0,
                 "sched_setaffinity: %s", strerror(errno));
    run_result r;
    run(args, &r);
    cr_assert(exited_with(&r, 0), "run on %d core(s) failed: %s", cores, r.err);
    run_free(&r);
    /* `growth` alone shares its grid and its table out over the usable
     * cores too: the same file on one. */
    char growth_alone[160];
    snprintf(growth_alone, sizeof growth_alone, "%s/growth_alone%d.txt", dir, cores);
    const char *growth_args[] = {"growth", REFERENCE, "--set", "perturbations.k_count=20", "-o",
                                 growth_alone, NULL};
    run(growth_args, &r);
    sched_setaffinity(0, sizeof(cpu_set_t), &all);
    cr_assert(exited_with(&r, 0), "growth on %d core(s) failed: %s", cores, r.err);
    run_free(&r);
    char *alone = read_text(growth_alone), *two = read_text(single[N_TABLES - 1]);
    cr_assert(alone && two && alone[0], "growth file missing");
    cr_expect(strcmp(alone, two) == 0, "growth on %d core(s) differs from growth on all", cores);
    free(alone);
    free(two);
    for (int i = 0; i < N_TABLES; i++) {
      char path[192];
      snprintf(path, sizeof path, "%s/%s.txt", folder, commands[i]);
      char *a = read_text(path), *b = read_text(single[i]);
      cr_assert(a && b && a[0], "%s.txt missing", commands[i]);
      cr_expect(strcmp(a, b) == 0, "%s.txt of run on %d core(s) differs from `%s -o`'s file",
                commands[i], cores, commands[i]);
      free(a);
      free(b);
    }
  }
  remove_dir(dir);
}

/* With Omega_b h^2 = 1e-5 the optical depth stays below 1 back to the start
 * (tests/test_epochs.c, absent_epochs): `run` succeeds, its summary says
 * "none" with the reason, and epochs.txt comments the missing lines out. */
Test(good_runs, run_reports_an_absent_epoch_as_none, .timeout = 120) {
  char dir[64];
  make_temp_dir(dir, sizeof dir);
  char folder[128];
  snprintf(folder, sizeof folder, "%s/results", dir);
  const char *args[] = {"run", REFERENCE, "--no-figures", "--set", "cosmology.baryon_density_h2=0.00001",
                        "--set", "perturbations.k_count=4", "-o", folder, NULL};
  run_result r;
  run(args, &r);
  cr_assert(exited_with(&r, 0), "an absent epoch is not a failure: %s", r.err);
  cr_expect(strstr(r.out, "photon decoupling z_star = none (the Thomson optical depth stays "
                          "below 1 from z = 8000 down to z = 1), end of drag z_drag = "),
            "summary: %s", r.out);
  char path[192];
  snprintf(path, sizeof path, "%s/epochs.txt", folder);
  char *epochs = read_text(path);
  cr_assert_not_null(epochs);
  cr_expect(strstr(epochs, "\n# z_star: none (") && !strstr(epochs, "\nz_star\t") &&
                strstr(epochs, "\n# theta_star_100: none (no z_star)\n") &&
                strstr(epochs, "\nz_drag\t"),
            "%s", epochs);
  free(epochs);
  run_free(&r);
  remove_dir(dir);
}

/* `run -o` takes a folder: an existing file there is refused before any work. */
Test(good_runs, run_refuses_a_file_as_its_folder) {
  char dir[64], file[128];
  make_temp_dir(dir, sizeof dir);
  snprintf(file, sizeof file, "%s/not_a_folder", dir);
  write_text(file, "keep me\n");
  const char *args[] = {"run", REFERENCE, "-o", file, NULL};
  run_result r;
  run(args, &r);
  cr_expect(exited_with(&r, 2), "exit status");
  cr_expect(strstr(r.err, "is not a folder") != NULL, "message: %s", r.err);
  char *kept = read_text(file);
  cr_expect(kept && strcmp(kept, "keep me\n") == 0, "the file was changed");
  free(kept);
  run_free(&r);
  remove_dir(dir);
}

/* ---- output.units = "Mpc/h" ----------------------------------------------- */

#define IN_H_UNITS "output.units=\"Mpc/h\""

/* h of the reference parameter file, which the conversions use. */
static double reference_h(void) {
  jg_params p;
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_params_load(REFERENCE, NULL, 0, &p, &err), JG_OK, "%s", err.message);
  return p.cosmology.hubble_h;
}

/* Run `command REFERENCE [--set output.units="Mpc/h"]` to stdout and parse
 * the table. */
static void run_table(const char *command, int in_h_units, table *t) {
  const char *args[] = {command, REFERENCE, in_h_units ? "--set" : NULL, IN_H_UNITS, NULL};
  run_result r;
  run(args, &r);
  cr_assert(exited_with(&r, 0), "%s failed: %s", command, r.err);
  cr_expect_str_empty(r.err);
  parse_table(r.out, t);
  run_free(&r);
}

/* The reference `scales` and `growth` tables with output.units = "Mpc/h"
 * are the default ones converted with h = cosmology.hubble_h (tables.h
 * states the definition), the columns renamed (k_J[h/Mpc], M_J[Msun/h],
 * k[h/Mpc], ...), and the conventions line states the units. Tolerance
 * 1e-10 relative: each side is printed with 11 significant digits (%.10e),
 * so each is rounded by at most 5e-11 relative. */
Test(good_runs, scales_and_growth_in_h_units_are_the_default_tables_converted, .timeout = 120) {
  const double h = reference_h();
  static const char *const commands[] = {"scales", "growth"};
  for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++) {
    table in_mpc, in_h;
    run_table(commands[i], 0, &in_mpc);
    run_table(commands[i], 1, &in_h);
    assert_h_units_table(&in_mpc, &in_h, h, -1, 1e-10, commands[i]);
    cr_expect(strstr(in_mpc.header, "\n# units: k comoving 1/Mpc"), "%s: default units line",
              commands[i]);
    cr_expect(strstr(in_h.header, "\n# units: k comoving h/Mpc"), "%s: h units line:\n%s",
              commands[i], in_h.header);
    table_free(&in_mpc);
    table_free(&in_h);
  }
}

/* The reference epochs with output.units = "Mpc/h": the sound horizons in
 * Mpc/h and k_eq in h/Mpc, converted from the default ones (definition in
 * tables.h), every other line unchanged. Tolerance 1e-9 relative: epochs
 * prints 10 significant digits (%.10g), each side rounded by at most 5e-10. */
Test(good_runs, epochs_in_h_units_are_the_default_epochs_converted) {
  const double h = reference_h();
  const char *a_mpc[] = {"epochs", REFERENCE, NULL};
  const char *a_h[] = {"epochs", REFERENCE, "--set", IN_H_UNITS, NULL};
  run_result r_mpc, r_h;
  run(a_mpc, &r_mpc);
  run(a_h, &r_h);
  cr_assert(exited_with(&r_mpc, 0) && exited_with(&r_h, 0), "epochs failed: %s%s", r_mpc.err,
            r_h.err);
  cr_expect(strstr(r_h.out, "\n# units: comoving lengths in Mpc/h"), "no units line:\n%s",
            r_h.out);
  epoch_line in_mpc[128], in_h[128];
  int n = parse_epochs(r_mpc.out, in_mpc);
  cr_assert_eq(parse_epochs(r_h.out, in_h), n, "different numbers of epochs");
  int converted = 0;
  for (int i = 0; i < n; i++) {
    cr_expect_str_eq(in_h[i].name, in_mpc[i].name, "line %d", i + 1);
    const char *h_unit;
    int power = h_units_unit(in_mpc[i].unit, &h_unit);
    cr_expect_str_eq(in_h[i].unit, h_unit, "unit of %s", in_mpc[i].name);
    double expected = in_mpc[i].value * pow(h, power);
    if (power == 0)
      cr_expect(in_h[i].value == expected, "%s changed: %.12g, was %.12g", in_mpc[i].name,
                in_h[i].value, expected);
    else
      cr_expect(fabs(in_h[i].value - expected) <= 1e-9 * fabs(expected),
                "%s[%s] = %.12g, expected %.12g", in_h[i].name, h_unit, in_h[i].value, expected);
    converted += power != 0;
  }
  cr_expect_eq(converted, 3, "r_star, r_drag and k_eq convert; %d lines did", converted);
  run_free(&r_mpc);
  run_free(&r_h);
}

/* `run` with output.units = "Mpc/h": the tables carry the h-unit columns,
 * and the summary speaks the same units as the tables it summarises (its
 * r_drag is the epochs table's, to its two decimals). */
Test(good_runs, run_in_h_units_writes_and_summarises_in_h_units, .timeout = 120) {
  char dir[64];
  make_temp_dir(dir, sizeof dir);
  const char *args[] = {"run", REFERENCE, "--no-figures", "--set", "perturbations.k_count=8", "--set",
                        IN_H_UNITS, "-o", dir, NULL};
  run_result r;
  run(args, &r);
  cr_assert(exited_with(&r, 0), "run failed: %s", r.err);
  static const char *const names[] = {"k_J[h/Mpc]", "M_J[Msun/h]", "k_F[h/Mpc]", "M_F[Msun/h]",
                                      "k_half[h/Mpc]", "M_half[Msun/h]"};
  for (size_t i = 0; i < sizeof names / sizeof names[0]; i++)
    cr_expect(strstr(r.out, names[i]), "the summary has no %s:\n%s", names[i], r.out);
  cr_expect(!strstr(r.out, "1/Mpc") && !strstr(r.out, "Msun]"), "default units:\n%s", r.out);
  char path[128];
  snprintf(path, sizeof path, "%s/epochs.txt", dir);
  char *text = read_text(path);
  cr_assert_not_null(text);
  const char *at = strstr(text, "\nr_drag\t");
  cr_assert_not_null(at);
  char expected[64];
  snprintf(expected, sizeof expected, "sound horizon r_drag = %.2f Mpc/h\n",
           strtod(at + strlen("\nr_drag\t"), NULL));
  cr_expect(strstr(r.out, expected), "the summary lacks \"%s\":\n%s", expected, r.out);
  free(text);
  static const struct {
    const char *file, *column;
  } tables[] = {{"scales.txt", "M_F[Msun/h]"}, {"growth.txt", "k[h/Mpc]"}};
  for (size_t i = 0; i < sizeof tables / sizeof tables[0]; i++) {
    snprintf(path, sizeof path, "%s/%s", dir, tables[i].file);
    text = read_text(path);
    cr_assert_not_null(text);
    table t;
    parse_table(text, &t);
    cr_expect_geq(column_index(&t, tables[i].column), 0, "%s has no %s", tables[i].file,
                  tables[i].column);
    table_free(&t);
    free(text);
  }
  run_free(&r);
  remove_dir(dir);
}

/* The program's help states the order the commands take (PARAMFILE first,
 * options after, as every command's usage says), and `history --help`
 * names where the table ends instead of promising z = 0. */
Test(good_runs, help_states_the_real_usage_order_and_the_history_end) {
  const char *args[] = {"--help", NULL};
  run_result r;
  run(args, &r);
  cr_assert(exited_with(&r, 0));
  cr_expect(strncmp(r.out, "Usage: jeansgrow COMMAND PARAMFILE [options]\n", 45) == 0,
            "--help printed: %.80s", r.out);
  run_free(&r);
  const char *history_args[] = {"history", "--help", NULL};
  run(history_args, &r);
  cr_assert(exited_with(&r, 0));
  cr_expect(strstr(r.out, "output.history_z_min") != NULL, "history --help: %s", r.out);
  cr_expect(strstr(r.out, "to z = 0") == NULL, "history --help still says z = 0: %s", r.out);
  run_free(&r);
}

/* The scales header must not state an order between the two filtering
 * wavenumbers that its own rows contradict: the Gnedin-Hui integral lies
 * below the measured k_F with the isothermal sound speed, but above it at
 * z = 10 in the default fluctuating model (510.94 against 510.18 /Mpc on
 * the reference cosmology, measured with this program). */
Test(good_runs, scales_header_claims_no_order_of_the_filtering_scales_its_rows_break,
     .timeout = 120) {
  const char *models[] = {"perturbations.sound_speed=\"isothermal\"",
                          "perturbations.sound_speed=\"fluctuating\""};
  for (int m = 0; m < 2; m++) {
    const char *args[] = {"scales", REFERENCE, "--set", models[m], "--set",
                          "output.redshifts=[100.0, 20.0, 10.0]", NULL};
    run_result r;
    run(args, &r);
    cr_assert(exited_with(&r, 0), "%s", r.err);
    table t;
    parse_table(r.out, &t);
    const int measured = column_index(&t, "k_F[1/Mpc]");
    const int integral = column_index(&t, "k_F_integral[1/Mpc]");
    cr_assert(measured >= 0 && integral >= 0);
    cr_expect(strstr(t.header, "so it lies below k_F") == NULL, "%s", t.header);
    cr_expect(strstr(t.header, "below k_F with the isothermal sound speed") != NULL);
    for (int i = 0; i < t.n_rows; i++) {
      const double ratio = cell(&t, i, integral) / cell(&t, i, measured);
      if (m == 0) cr_expect(ratio < 1, "isothermal, z = %g: integral/measured = %g",
                            cell(&t, i, 0), ratio);
    }
    if (m == 1)
      cr_expect(cell(&t, 2, integral) > cell(&t, 2, measured),
                "fluctuating, z = 10: the integral (%g) is expected above the measured k_F (%g)",
                cell(&t, 2, integral), cell(&t, 2, measured));
    table_free(&t);
    run_free(&r);
  }
}

/* The flags (include/jeansgrow/validity.h) appear exactly where their rules
 * put them. Reference cosmology: the k -> 0 delta_b/delta_c is below 0.1 at
 * z = 1000 and above it from z = 500 on (this program's scales table:
 * 0.0073 and 0.17); the thermal model holds down to z = 20; the fluid
 * limit: hydrogen atoms as hard spheres of the Bohr radius, sigma =
 * 4 pi a_0^2 = 3.52e-20 m^2 (a_0 = 5.29177e-11 m, CODATA 2018), mean free
 * path 1/(n_H sigma) with n_H(z) = n_H0 (1+z)^3, a wavelength of at least
 * ten of them: k_max = 2 pi n_H0 (1+z)^2 sigma / 10 comoving, about
 * 1.6e4 /Mpc at z = 10 and 180 /Mpc at z = 0 for n_H0 = 0.19 /m^3. */
Test(good_runs, validity_flags_mark_exactly_the_rows_their_rules_name, .timeout = 120) {
  const char *s_args[] = {"scales", REFERENCE, "--set", "output.redshifts=[1000.0, 500.0, 20.0, 10.0]",
                          NULL};
  run_result r;
  run(s_args, &r);
  cr_assert(exited_with(&r, 0), "%s", r.err);
  table t;
  parse_table(r.out, &t);
  const int flags = column_index(&t, "flags"), large = column_index(&t, "b_over_c_large");
  cr_assert(flags >= 0 && large >= 0, "no flags or b_over_c_large column");
  cr_expect(strstr(t.header, "# flags: 0 inside the stated validity") != NULL);
  cr_expect(strstr(t.header, "# validity: the thermal history (no heating, no reionisation) "
                             "holds for z >= 20;") != NULL, "%s", t.header);
  const double expected[] = {1, 0, 0, 2};
  for (int i = 0; i < 4; i++)
    cr_expect_eq(cell(&t, i, flags), expected[i], "z = %g: flags %g (b/c large %g)",
                 cell(&t, i, 0), cell(&t, i, flags), cell(&t, i, large));
  cr_expect(cell(&t, 0, large) < 0.1 && cell(&t, 1, large) > 0.1, "the rule's premise moved");
  table_free(&t);
  run_free(&r);

  const char *g_args[] = {"growth", REFERENCE, "--set", "output.redshifts=[100.0, 10.0, 0.0]",
                          "--set", "perturbations.k_values=[100.0, 1000.0, 10000.0, 30000.0]", NULL};
  run(g_args, &r);
  cr_assert(exited_with(&r, 0), "%s", r.err);
  parse_table(r.out, &t);
  const int gf = column_index(&t, "flags");
  cr_assert(gf >= 0);
  /* z = 100: nothing; z = 10: below the thermal model (2), and 3e4 /Mpc
   * beyond the fluid limit (4); z = 0: 2, and every k from 1000 on is
   * beyond the fluid limit (~180 /Mpc there), 100 /Mpc not. */
  const double g_expected[] = {0, 0, 0, 0, 2, 2, 2, 6, 2, 6, 6, 6};
  cr_assert_eq(t.n_rows, 12);
  for (int i = 0; i < 12; i++)
    cr_expect_eq(cell(&t, i, gf), g_expected[i], "z = %g, k = %g: flags %g, expected %g",
                 cell(&t, i, 0), cell(&t, i, 1), cell(&t, i, gf), g_expected[i]);
  table_free(&t);
  run_free(&r);
}

/* The run summary quotes every mass in one radius convention and says
 * which: by default pi/k (its M_F is the table's M_F_halfwave, its M_J the
 * table's M_J); with output.mass_radius = "full_wavelength" 2 pi/k (M_F is
 * the table's M_F, M_J and M_half eight times the table's). Flag legends
 * appear for the flags present. */
Test(good_runs, run_summary_speaks_one_mass_convention_and_explains_its_flags, .timeout = 120) {
  for (int full = 0; full < 2; full++) {
    char dir[64];
    make_temp_dir(dir, sizeof dir);
    const char *args[] = {"run", REFERENCE, "--no-figures", "--set", "perturbations.k_count=8",
                          "--set", "output.redshifts=[1000.0, 100.0, 10.0]", "--set",
                          full ? "output.mass_radius=\"full_wavelength\""
                               : "output.mass_radius=\"half_wavelength\"",
                          "-o", dir, NULL};
    run_result r;
    run(args, &r);
    cr_assert(exited_with(&r, 0), "%s", r.err);
    cr_expect(strstr(r.out, full ? "with R = 2 pi/k, the full wavelength (output.mass_radius = "
                                   "\"full_wavelength\")"
                                 : "with R = pi/k, half the wavelength (output.mass_radius = "
                                   "\"half_wavelength\")") != NULL, "%s", r.out);
    cr_expect(strstr(r.out, "flags 1: the gas has barely started") != NULL, "%s", r.out);
    cr_expect(strstr(r.out, "flags 2: below z = 20") != NULL, "%s", r.out);
    cr_expect(strstr(r.out, "flags 4:") == NULL, "%s", r.out);
    char path[128];
    snprintf(path, sizeof path, "%s/scales.txt", dir);
    char *text = read_text(path);
    cr_assert_not_null(text);
    table t;
    parse_table(text, &t);
    /* The z = 100 line of the summary: z, T_gas, k_J, M_J, k_F, M_F, k_half, M_half, flags. */
    const char *line = strstr(r.out, "\n     100.0 ");
    cr_assert_not_null(line, "%s", r.out);
    double z, T, kJ, MJ, kF, MF, kh, Mh;
    int fl;
    cr_assert_eq(sscanf(line, " %lf %lf %lf %lf %lf %lf %lf %lf %d", &z, &T, &kJ, &MJ, &kF, &MF,
                        &kh, &Mh, &fl), 9, "%s", line);
    const double factor = full ? 8.0 : 1.0;
    assert_rel(MJ, factor * cell(&t, 1, column_index(&t, "M_J[Msun]")), 1e-3, "M_J");
    assert_rel(MF, cell(&t, 1, column_index(&t, full ? "M_F[Msun]" : "M_F_halfwave[Msun]")), 1e-3,
               "M_F");
    assert_rel(Mh, factor * cell(&t, 1, column_index(&t, "M_half[Msun]")), 1e-3, "M_half");
    cr_expect_eq(fl, 0);
    table_free(&t);
    free(text);
    run_free(&r);
    remove_dir(dir);
  }
}

/* ---- compare: our growth table against another code's -------------------- */

TestSuite(compare);

/* A growth table of the reference cosmology with `extra` --set overrides,
 * written to dir/name. */
static void growth_table(const char *dir, const char *name, const char *extra1,
                         const char *extra2) {
  char out[256];
  snprintf(out, sizeof out, "%s/%s", dir, name);
  const char *args[] = {"growth", REFERENCE, "--set", "perturbations.k_count=9",
                        "--set", "output.redshifts=[1000.0, 100.0, 20.0]",
                        "--set", extra1 ? extra1 : "perturbations.k_max=5000.0",
                        "--set", extra2 ? extra2 : "perturbations.k_min=1.0",
                        "-o", out, NULL};
  run_result r;
  run(args, &r);
  cr_assert(exited_with(&r, 0), "growth %s: %s", name, r.err);
  run_free(&r);
}

/* A fresh folder holding our growth table, ours.txt (its path in `ours`). */
static void our_growth_table(char *dir, size_t dir_size, char *ours, size_t ours_size) {
  make_temp_dir(dir, dir_size);
  growth_table(dir, "ours.txt", NULL, NULL);
  snprintf(ours, ours_size, "%s/ours.txt", dir);
}

static table read_table_file(const char *path) {
  char *text = read_text(path);
  cr_assert_not_null(text, "cannot read %s", path);
  table t;
  parse_table(text, &t);
  free(text);
  return t;
}

/* The same table on both sides: exit 0, and every difference exactly 0
 * (a reference k on one of our rows takes that row's value). */
Test(compare, identical_tables_give_exit_0_and_zero_difference) {
  char dir[64], ours[128], cmp[128];
  our_growth_table(dir, sizeof dir, ours, sizeof ours);
  snprintf(cmp, sizeof cmp, "%s/cmp.txt", dir);
  char png[128];
  snprintf(png, sizeof png, "%s/cmp.png", dir);
  const char *args[] = {"compare", ours, ours, "--normalise-at", "10", "--tolerance", "1e-12",
                        "--figure", png, "-o", cmp, NULL};
  run_result r;
  run(args, &r);
  cr_assert(exited_with(&r, 0), "exit status; stderr %s", r.err);
  /* The figure, when gnuplot is installed (tests/setup.sh installs it). */
  if (system("command -v gnuplot >/dev/null 2>&1") == 0) {
    char *image = read_text(png);
    cr_expect(image && strncmp(image, "\x89PNG", 4) == 0, "no PNG figure in %s", png);
    free(image);
  } else {
    cr_expect(strstr(r.err, "gnuplot is not installed"), "%s", r.err);
  }
  cr_expect(strstr(r.out, "delta_b/delta_c: largest relative difference 0.000e+00"), "%s", r.out);
  table t = read_table_file(cmp);
  cr_assert_eq(t.n_rows, 27, "9 k x 3 z compared");
  const char *diffs[] = {"diff_b_over_c", "diff_delta_b_norm", "diff_delta_c_norm"};
  for (int d = 0; d < 3; d++) {
    const int c = column_index(&t, diffs[d]);
    cr_assert_geq(c, 0, "no column %s", diffs[d]);
    for (int i = 0; i < t.n_rows; i++) cr_expect_eq(cell(&t, i, c), 0.0, "%s row %d", diffs[d], i);
  }
  table_free(&t);
  run_free(&r);
  remove_dir(dir);
}

/* Two cosmologies (Omega_b h^2 0.02237 and 0.024), the second written as a
 * comma-separated table in h/Mpc with its columns in another order, as
 * another code might: the largest difference and its place must be the
 * ones computed here from the two tables row by row (same k grid), and a
 * tolerance below it gives exit status 3, one above it 0. */
Test(compare, two_cosmologies_give_the_tolerance_status_and_the_place_of_the_largest) {
  char dir[64], ours[128], theirs[128], csv[128];
  our_growth_table(dir, sizeof dir, ours, sizeof ours);
  growth_table(dir, "theirs.txt", "cosmology.baryon_density_h2=0.024", "output.units=\"Mpc/h\"");
  snprintf(theirs, sizeof theirs, "%s/theirs.txt", dir);
  snprintf(csv, sizeof csv, "%s/theirs.csv", dir);
  table a = read_table_file(ours), b = read_table_file(theirs);
  cr_assert_eq(a.n_rows, b.n_rows);
  const int az = column_index(&a, "z"), abc = column_index(&a, "b_over_c");
  const int bz = column_index(&b, "z"), bk = column_index(&b, "k[h/Mpc]");
  const int bdc = column_index(&b, "delta_c"), bdb = column_index(&b, "delta_b");
  cr_assert(az >= 0 && abc >= 0 && bz >= 0 && bk >= 0 && bdc >= 0 && bdb >= 0);
  FILE *f = fopen(csv, "w");
  cr_assert_not_null(f);
  fprintf(f, "# k [h/Mpc], z, delta_b, delta_c (another code's layout)\n");
  double largest = 0.0, z_at = 0.0, k_at = 0.0;
  for (int i = 0; i < b.n_rows; i++) {
    const double db = cell(&b, i, bdb) * 7.0, dc = cell(&b, i, bdc) * 7.0; /* any normalisation */
    fprintf(f, "%.10e, %.10e ,%.10e, %.10e\n", cell(&b, i, bk), cell(&b, i, bz), db, dc);
    const double diff = fabs(cell(&a, i, abc) / (db / dc) - 1.0);
    if (diff > largest) largest = diff, z_at = cell(&b, i, bz), k_at = cell(&b, i, bk);
  }
  fclose(f);
  cr_assert_gt(largest, 1e-3, "the cosmologies differ by %g only", largest);
  char expected[160], tight[32], loose[32];
  snprintf(expected, sizeof expected, "largest relative difference %.3e at z = %g, k = %.6g h/Mpc",
           largest, z_at, k_at);
  snprintf(tight, sizeof tight, "%g", largest * 0.5);
  snprintf(loose, sizeof loose, "%g", largest * 2.0);
  const char *tolerances[] = {tight, loose};
  for (int j = 0; j < 2; j++) {
    const char *args[] = {"compare", ours, csv, "--columns", "k z delta_b delta_c",
                          "--separator", "commas", "--k-unit", "h/Mpc", "--tolerance",
                          tolerances[j], NULL};
    run_result r;
    run(args, &r);
    cr_expect(exited_with(&r, j == 0 ? 3 : 0), "tolerance %s: exit status; stderr %s",
              tolerances[j], r.err);
    cr_expect(strstr(r.err, expected), "summary '%s' not in: %s", expected, r.err);
    cr_expect(strncmp(r.out, "# jeansgrow", 11) == 0, "the table goes to stdout");
    run_free(&r);
  }
  table_free(&a);
  table_free(&b);
  remove_dir(dir);
}

/* A malformed reference is refused with its file and line (exit 2), and so
 * is a reference redshift our table does not have. */
Test(compare, malformed_reference_and_missing_redshift_are_refused) {
  char dir[64], ours[128], ref[128];
  our_growth_table(dir, sizeof dir, ours, sizeof ours);
  snprintf(ref, sizeof ref, "%s/ref.txt", dir);
  const struct {
    const char *text, *message;
  } cases[] = {
      {"# z k delta_c delta_b\n20 1 1 0.5\n20 10 1\n", "ref.txt:3: 3 cell(s) on this row"},
      {"20 1 1 0.5\n20 x 1 0.5\n", "ref.txt:2: cell 2 ('x') is not a number"},
      {"20 1 1 nan\n", "ref.txt:1: cell 4 ('nan') is not a finite number"},
      {"20 10 1 0.5\n20 10 1 0.5\n", "ref.txt:2: z = 20, k = 10 repeats line 1"},
      {"30 10 1 0.5\n", "ref.txt:1: z = 30 is not among the redshifts"},
  };
  for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
    write_text(ref, cases[i].text);
    const char *args[] = {"compare", ours, ref, NULL};
    run_result r;
    run(args, &r);
    cr_expect(exited_with(&r, 2), "case %zu: exit status", i);
    cr_expect(strstr(r.err, cases[i].message), "case %zu: %s", i, r.err);
    cr_expect_str_empty(r.out, "case %zu: nothing written", i);
    run_free(&r);
  }
  remove_dir(dir);
}
