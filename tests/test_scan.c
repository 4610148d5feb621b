/*
 * Parameter scans: the grid (parsing, spacing, order, rejected definitions),
 * the checkpoint (records, torn lines, resumption), the table (grid order,
 * failed points, slices and their merge), and the program: threads, MPI
 * ranks and an interrupted run all write the same bytes, bad grids are
 * refused before any work, and scan values equal those of single runs.
 *
 * Library tests use a toy evaluator (cheap closed forms of the varied
 * hubble_h) so that they exercise the scan machinery, not the physics; the
 * program tests run the real evaluator on params/reference.cfg with a
 * coarse history (thermal.grid_points = 1000) to stay quick.
 */
#define _GNU_SOURCE /* F_OFD_SETLK, to stand in for a running scan's lock */
#include <criterion/criterion.h>
#include <criterion/logging.h>
#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <gsl/gsl_errno.h>
#include <math.h>
#include <sched.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "jeansgrow/jeansgrow.h"
#include "support.h"
#include "tables.h"

#define REFERENCE JG_SOURCE_DIR "/params/reference.cfg"
#define COARSE "thermal.grid_points=1000"

TestSuite(scan, .init = quiet_gsl);

/* ---- helpers ------------------------------------------------------------- */


static void write_file(const char *path, const char *text) {
  FILE *f = fopen(path, "w");
  cr_assert_not_null(f, "cannot write %s", path);
  fputs(text, f);
  cr_assert_eq(fclose(f), 0);
}

static int exists(const char *path) {
  struct stat sb;
  return stat(path, &sb) == 0;
}

static void make_dir(char *dir, size_t size) {
  snprintf(dir, size, "/tmp/jg_scan_test_XXXXXX");
  cr_assert_not_null(mkdtemp(dir), "mkdtemp: %s", strerror(errno));
}

static int count_entries(const char *dir) {
  DIR *d = opendir(dir);
  cr_assert_not_null(d);
  int n = 0;
  struct dirent *e;
  while ((e = readdir(d)) != NULL) n += strcmp(e->d_name, ".") && strcmp(e->d_name, "..");
  closedir(d);
  return n;
}

static void remove_dir(const char *dir) {
  DIR *d = opendir(dir);
  if (!d) return;
  struct dirent *e;
  while ((e = readdir(d)) != NULL) {
    if (!strcmp(e->d_name, ".") || !strcmp(e->d_name, "..")) continue;
    char path[4096];
    snprintf(path, sizeof path, "%s/%s", dir, e->d_name);
    unlink(path);
  }
  closedir(d);
  rmdir(dir);
}

static void path_in(char *buf, size_t size, const char *dir, const char *name) {
  snprintf(buf, size, "%s/%s", dir, name);
}

/* ---- the toy evaluator ---------------------------------------------------- */

/* Closed forms of h = cosmology.hubble_h, with h / 3 so that the exact
 * round trip of values that no short decimal holds is exercised. It fails
 * numerically above h = 0.85 and returns a NaN below h = 0.55: both must
 * become failed points. */
static const char *const toy_point_columns[] = {"h_squared"};
static const char *const toy_redshift_columns[] = {"h_times_1pz", "h_third[km]"};

static jg_status toy_evaluate(const jg_params *p, double *point_values, double *redshift_values,
                              void *workspace, const void *user, jg_error *err) {
  (void)user;
  (void)workspace;
  const double h = p->cosmology.hubble_h;
  if (h > 0.85) return JG_FAIL(err, JG_ENUMERIC, "toy: no convergence at h = %g", h);
  point_values[0] = h < 0.55 ? NAN : h * h;
  for (int j = 0; j < p->output.n_redshifts; j++) {
    redshift_values[2 * j] = h * (1.0 + p->output.redshifts[j]);
    redshift_values[2 * j + 1] = h / 3.0;
  }
  return JG_OK;
}

static const jg_scan_evaluator toy = {"toy", 1, toy_point_columns, 2, toy_redshift_columns,
                                      NULL, NULL, NULL, toy_evaluate, NULL, JG_SCAN_ROWS_REDSHIFT};

static void toy_params(jg_params *p) {
  jg_params_set_defaults(p);
  p->output.n_redshifts = 3;
  p->output.redshifts[0] = 1000.0;
  p->output.redshifts[1] = 100.0;
  p->output.redshifts[2] = 10.0;
}

/* A scan of toy over hubble_h (first axis) and helium_mass_fraction. */
static jg_scan *toy_scan(const char *hubble_axis, int part, int parts) {
  jg_params p;
  toy_params(&p);
  jg_scan_grid g = {0};
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_scan_grid_parse(&g, hubble_axis, "test", &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.helium_mass_fraction=[0.24, 0.25]", "test", &err),
               JG_OK, "%s", err.message);
  jg_scan *s = NULL;
  cr_assert_eq(jg_scan_new(&p, &g, &toy, part, parts, &s, &err), JG_OK, "%s", err.message);
  jg_scan_grid_clear(&g);
  return s;
}

/* The table of `s` as text, computed on `threads` threads from a fresh
 * anonymous checkpoint. */
static char *toy_table(const jg_scan *s, int threads) {
  jg_error err;
  jg_error_clear(&err);
  jg_scan_checkpoint *c = NULL;
  cr_assert_eq(jg_scan_checkpoint_open(s, NULL, 0, &c, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_scan_run(s, c, threads, NULL, NULL, &err), JG_OK, "%s", err.message);
  char *text = NULL;
  size_t size = 0;
  FILE *f = open_memstream(&text, &size);
  cr_assert_eq(jg_scan_write_table(s, c, f, &err), JG_OK, "%s", err.message);
  fclose(f);
  jg_scan_checkpoint_close(c, 1);
  return text;
}

/* A toy scan over `hubble_axis` and a fresh folder `dir` for its
 * checkpoint `ck` (dir/t.checkpoint). */
static jg_scan *toy_scan_in_folder(char *dir, size_t dir_size, char *ck, size_t ck_size,
                                   const char *hubble_axis) {
  make_dir(dir, dir_size);
  path_in(ck, ck_size, dir, "t.checkpoint");
  return toy_scan(hubble_axis, 1, 1);
}

/* Evaluate points `indices` of `s` and record them in `c`, in that order. */
static void record_points(const jg_scan *s, jg_scan_checkpoint *c, const long long *indices,
                          int n) {
  jg_error err;
  jg_error_clear(&err);
  void *ws = jg_scan_workspace_new(s, &err);
  cr_assert_not_null(ws, "%s", err.message);
  double values[16];
  cr_assert_leq(jg_scan_values_per_point(s), 16);
  for (int i = 0; i < n; i++) {
    cr_assert_eq(jg_scan_evaluate(s, indices[i], ws, values, &err), JG_OK, "%s", err.message);
    cr_assert_eq(jg_scan_checkpoint_add(c, indices[i], JG_OK, values, NULL, &err), JG_OK, "%s",
                 err.message);
  }
  jg_scan_workspace_free(s, ws);
}

/* Does a data row (not a # line) contain `word`? */
static int rows_contain(const char *text, const char *word) {
  for (const char *line = text; *line;) {
    const char *nl = strchr(line, '\n');
    size_t len = nl ? (size_t)(nl - line) : strlen(line);
    if (*line != '#') {
      char *copy = strndup(line, len);
      cr_assert_not_null(copy);
      int hit = strstr(copy, word) != NULL;
      free(copy);
      if (hit) return 1;
    }
    if (!nl) break;
    line = nl + 1;
  }
  return 0;
}

static int count_data_rows(const char *text) {
  int n = 0;
  for (const char *line = text; *line;) {
    if (*line != '#') n++;
    const char *nl = strchr(line, '\n');
    if (!nl) break;
    line = nl + 1;
  }
  return n;
}

/* ---- the grid ------------------------------------------------------------ */

Test(scan, linear_and_log_axes_hit_their_ends_and_spacing) {
  jg_scan_grid g = {0};
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.hubble_h=0.6:0.8:5", NULL, &err), JG_OK, "%s",
               err.message);
  cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.baryon_density_h2 = 0.001:0.1:3:log", NULL, &err),
               JG_OK, "%s", err.message);
  const jg_scan_axis *lin = &g.axes[0], *lg = &g.axes[1];
  cr_assert_eq(lin->count, 5);
  /* The ends are exactly the numbers typed; inner points within rounding. */
  cr_assert_eq(jg_scan_axis_value(lin, 0), 0.6);
  cr_assert_eq(jg_scan_axis_value(lin, 4), 0.8);
  /* Inner values are the decimals a user would type (15 digits). */
  const double typed[5] = {0.6, 0.65, 0.7, 0.75, 0.8};
  for (int i = 0; i < 5; i++)
    cr_assert_eq(jg_scan_axis_value(lin, i), typed[i], "linear value %d is %.17g", i,
                 jg_scan_axis_value(lin, i));
  cr_assert_eq(lg->spacing, JG_SCAN_LOG);
  cr_assert_eq(jg_scan_axis_value(lg, 0), 0.001);
  cr_assert_eq(jg_scan_axis_value(lg, 2), 0.1);
  cr_assert_eq(jg_scan_axis_value(lg, 1), 0.01, "log midpoint is the geometric mean, %.17g",
               jg_scan_axis_value(lg, 1));
  jg_scan_grid_clear(&g);
  /* A linear value that is zero but for rounding is zero. */
  cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.curvature_omega=-0.1:0.2:4", NULL, &err), JG_OK);
  cr_assert_eq(jg_scan_axis_value(&g.axes[0], 1), 0.0, "got %.17g", jg_scan_axis_value(&g.axes[0], 1));
  cr_assert_eq(jg_scan_axis_value(&g.axes[0], 2), 0.1, "got %.17g", jg_scan_axis_value(&g.axes[0], 2));
  cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.hubble_h=0.6:0.8:5", NULL, &err), JG_OK);
  cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.baryon_density_h2=0.001:0.1:3:log", NULL, &err), JG_OK);
  cr_assert_eq(jg_scan_grid_points(&g), 4 * 5 * 3);
  jg_scan_grid_clear(&g);
  cr_assert_eq(g.n_axes, 0);
}

Test(scan, explicit_list_keeps_its_order) {
  jg_scan_grid g = {0};
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.hubble_h=[0.8, 0.6,0.7]", NULL, &err), JG_OK,
               "%s", err.message);
  cr_assert_eq(g.axes[0].spacing, JG_SCAN_LIST);
  cr_assert_eq(g.axes[0].count, 3);
  cr_assert_eq(jg_scan_axis_value(&g.axes[0], 0), 0.8);
  cr_assert_eq(jg_scan_axis_value(&g.axes[0], 1), 0.6);
  cr_assert_eq(jg_scan_axis_value(&g.axes[0], 2), 0.7);
  jg_scan_grid_clear(&g);
}

Test(scan, points_run_with_the_first_axis_slowest) {
  jg_scan_grid g = {0};
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.hubble_h=[0.6, 0.7]", NULL, &err), JG_OK);
  cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.helium_mass_fraction=[0.23, 0.24, 0.25]", NULL,
                                  &err), JG_OK);
  const double expect[6][2] = {{0.6, 0.23}, {0.6, 0.24}, {0.6, 0.25},
                               {0.7, 0.23}, {0.7, 0.24}, {0.7, 0.25}};
  for (int i = 0; i < 6; i++) {
    double v[2];
    jg_scan_grid_values(&g, i, v);
    cr_assert(v[0] == expect[i][0] && v[1] == expect[i][1], "point %d is (%g, %g)", i, v[0], v[1]);
    jg_params p;
    jg_params_set_defaults(&p);
    cr_assert_eq(jg_scan_grid_apply(&g, i, &p, &err), JG_OK);
    cr_assert(p.cosmology.hubble_h == expect[i][0] &&
              p.cosmology.helium_mass_fraction == expect[i][1]);
  }
  jg_scan_grid_clear(&g);
}

/* Each bad definition is refused with JG_EINVAL, a message that says what
 * is wrong, and the grid left as it was. */
Test(scan, invalid_axis_definitions_are_refused_with_the_reason) {
  static const struct {
    const char *text, *reason;
  } cases[] = {
      {"cosmology.hubble_h=0.6:0.8:0", "the number of values N must be at least 1 (got 0)"},
      {"cosmology.hubble_h=0.6:0.8:-2", "the number of values N must be at least 1 (got -2)"},
      {"cosmology.hubble_h=0.8:0.6:3", "FROM = 0.8 is above TO = 0.6"},
      {"cosmology.hubble_h=0.8:0.6:3:log", "FROM = 0.8 is above TO = 0.6"},
      {"cosmology.curvature_omega=-0.1:0.1:3:log", "log spacing needs 0 < FROM <= TO (got FROM = -0.1)"},
      {"cosmology.curvature_omega=0:0.1:3:log", "log spacing needs 0 < FROM <= TO (got FROM = 0)"},
      {"cosmology.hubble_h=0.7:0.8:1", "N = 1 needs FROM = TO"},
      {"cosmology.hubble_h=0.6:0.8:2.5", "N must be a whole number of values (got '2.5')"},
      {"cosmology.hubble_h=0.6:inf:3", "FROM and TO must be finite numbers"},
      {"cosmology.hubble_h=0.6:0.8:3:cubic", "the spacing must be 'log' or 'linear' (got 'cubic')"},
      {"cosmology.hubble_h=0.6:0.8", "expected KEY=FROM:TO:N"},
      {"cosmology.hubble_h", "expected KEY=FROM:TO:N"},
      {"=0.6:0.8:3", "no key before '='"},
      {"cosmology.hubble_h=[]", "the list of values is empty"},
      {"cosmology.hubble_h=[0.6, seven]", "element 2 of the list is not a number ('seven')"},
      {"cosmology.hubble_h=[0.6, 0.7", "a list is written [V1, V2, ...]"},
      {"cosmology.hubble=0.6:0.8:3", "unknown key 'cosmology.hubble' (did you mean 'cosmology.hubble_h'?)"},
      {"perturbations.sound_speed=0:1:2", "perturbations.sound_speed is word-valued: vary it "
                                          "over a list of its words"},
      {"perturbations.sound_speed=[isothermal, hot]", "element 2 of the list ('hot') is not a "
                                                      "word perturbations.sound_speed takes"},
      {"output.redshifts=10:20:2", "output.redshifts is not a single number"},
      {"thermal.grid_points=1000:2000:4", "thermal.grid_points takes whole numbers only (got 1333.3333333333301) (value 2 of 4)"},
      {"cosmology.helium_mass_fraction=0.2:0.3:3", "cosmology.helium_mass_fraction is varied twice"},
  };
  for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
    jg_scan_grid g = {0};
    jg_error err;
    jg_error_clear(&err);
    cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.helium_mass_fraction=[0.24]", NULL, &err), JG_OK);
    jg_status st = jg_scan_grid_parse(&g, cases[i].text, "--vary", &err);
    cr_expect_eq(st, JG_EINVAL, "'%s' was accepted", cases[i].text);
    cr_expect(strstr(err.message, cases[i].reason) != NULL, "'%s': message '%s' lacks '%s'",
              cases[i].text, err.message, cases[i].reason);
    cr_expect(strncmp(err.message, "--vary ", 7) == 0, "'%s': message '%s' lacks its origin",
              cases[i].text, err.message);
    cr_expect_eq(g.n_axes, 1, "'%s' changed the grid", cases[i].text);
    jg_scan_grid_clear(&g);
  }
}

Test(scan, integer_keys_take_whole_grid_values) {
  jg_scan_grid g = {0};
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_scan_grid_parse(&g, "thermal.grid_points=1000:2000:3", NULL, &err), JG_OK, "%s",
               err.message);
  jg_params p;
  jg_params_set_defaults(&p);
  cr_assert_eq(jg_scan_grid_apply(&g, 1, &p, &err), JG_OK);
  cr_assert_eq(p.thermal.grid_points, 1500);
  jg_scan_grid_clear(&g);
  cr_assert(jg_params_key_is_numeric("thermal.grid_points"));
  cr_assert(jg_params_key_is_numeric("cosmology.hubble_h"));
  cr_assert(!jg_params_key_is_numeric("perturbations.k_values"));
  cr_assert(!jg_params_key_is_numeric("perturbations.sound_speed"));
  cr_assert(!jg_params_key_is_numeric("cosmology.nonsense"));
  cr_assert_eq(jg_params_set_number(&p, "thermal.grid_points", 2.5, &err), JG_EINVAL);
  cr_assert_eq(p.thermal.grid_points, 1500, "a refused value must leave the key as it was");
}

Test(scan, scan_group_of_a_file_gives_the_command_line_grid) {
  char dir[64], cfg[128];
  make_dir(dir, sizeof dir);
  path_in(cfg, sizeof cfg, dir, "scan.cfg");
  write_file(cfg, "cosmology: { hubble_h = 0.7; baryon_density_h2 = 0.022; cdm_density_h2 = 0.12; };\n"
                  "scan:\n{\n  vary = (\n"
                  "    { key = \"cosmology.baryon_density_h2\"; from = 0.01; to = 0.04; count = 4;"
                  " spacing = \"log\"; },\n"
                  "    { key = \"cosmology.hubble_h\"; values = [0.6, 0.7]; },\n"
                  "    \"thermal.recombination_fudge=1.0:1.2:3\"\n  );\n};\n");
  jg_scan_grid from_file = {0}, from_text = {0};
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_scan_grid_read_file(&from_file, cfg, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_scan_grid_parse(&from_text, "cosmology.baryon_density_h2=0.01:0.04:4:log", NULL, &err), JG_OK);
  cr_assert_eq(jg_scan_grid_parse(&from_text, "cosmology.hubble_h=[0.6,0.7]", NULL, &err), JG_OK);
  cr_assert_eq(jg_scan_grid_parse(&from_text, "thermal.recombination_fudge=1.0:1.2:3", NULL, &err), JG_OK);
  cr_assert_eq(from_file.n_axes, 3);
  for (int a = 0; a < 3; a++) {
    cr_assert_str_eq(from_file.axes[a].key, from_text.axes[a].key);
    cr_assert_eq(from_file.axes[a].count, from_text.axes[a].count);
    cr_assert_eq(from_file.axes[a].spacing, from_text.axes[a].spacing);
    for (int i = 0; i < from_text.axes[a].count; i++)
      cr_assert_eq(jg_scan_axis_value(&from_file.axes[a], i),
                   jg_scan_axis_value(&from_text.axes[a], i));
  }
  /* The loader of single runs accepts the file and ignores the scan group. */
  jg_params p;
  cr_assert_eq(jg_params_load(cfg, NULL, 0, &p, &err), JG_OK, "%s", err.message);
  cr_assert_eq(p.cosmology.hubble_h, 0.7);

  /* A bad element names the file, its line and the element. */
  write_file(cfg, "cosmology: { hubble_h = 0.7; baryon_density_h2 = 0.022; cdm_density_h2 = 0.12; };\n"
                  "scan: {\n  vary = (\n    { key = \"cosmology.hubble_h\"; from = 0.6; to = 0.8;"
                  " count = 0; }\n  );\n};\n");
  jg_scan_grid bad = {0};
  cr_assert_eq(jg_scan_grid_read_file(&bad, cfg, &err), JG_EINVAL);
  char expect[256];
  snprintf(expect, sizeof expect, "%s:4: scan.vary[0]: the number of values N must be at least 1 "
           "(got 0)", cfg);
  cr_assert_str_eq(err.message, expect);
  cr_assert_eq(bad.n_axes, 0);
  write_file(cfg, "scan: { vary = ( \"cosmology.hubble_h=0.6:0.8:3\" ); steps = 4; };\n");
  cr_assert_eq(jg_scan_grid_read_file(&bad, cfg, &err), JG_ECONFIG);
  cr_assert(strstr(err.message, "unknown key 'scan.steps'"), "%s", err.message);
  jg_scan_grid_clear(&from_file);
  jg_scan_grid_clear(&from_text);
  remove_dir(dir);
}

Test(scan, a_grid_point_with_an_impossible_model_is_refused_up_front) {
  jg_params p;
  jg_params_set_defaults(&p);
  jg_scan_grid g = {0};
  jg_error err;
  jg_error_clear(&err);
  /* w0 = -3 with Omega_k = -0.9 makes H^2 negative at late times (the
   * background check); h = 7 is outside the documented range (the params
   * check). Both sit at the last grid point. */
  cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.de_w0=[-1.0, -3.0]", NULL, &err), JG_OK);
  cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.curvature_omega=[0.0, -0.9]", NULL, &err), JG_OK);
  jg_scan *s = NULL;
  cr_assert_eq(jg_scan_new(&p, &g, jg_scan_evaluator_thermal(), 1, 1, &s, &err), JG_EINVAL);
  cr_assert_null(s);
  cr_assert(strstr(err.message, "scan point 4 of 4 (cosmology.de_w0 = -3, "
                                "cosmology.curvature_omega = -0.9) is not a valid model"),
            "%s", err.message);
  jg_scan_grid_clear(&g);
  cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.hubble_h=1:7:3", NULL, &err), JG_OK);
  cr_assert_eq(jg_scan_new(&p, &g, jg_scan_evaluator_thermal(), 1, 1, &s, &err), JG_EINVAL);
  cr_assert(strstr(err.message, "scan point 3 of 3 (cosmology.hubble_h = 7)"), "%s", err.message);
  jg_scan_grid_clear(&g);
}

/* ---- tables and checkpoints (toy evaluator) ----------------------------- */

Test(scan, table_is_the_same_for_one_and_four_threads) {
  jg_scan *s = toy_scan("cosmology.hubble_h=0.6:0.8:9", 1, 1);
  char *one = toy_table(s, 1), *four = toy_table(s, 4);
  cr_assert_str_eq(one, four);
  cr_assert_eq(count_data_rows(one), 9 * 2 * 3);
  free(one);
  free(four);
  jg_scan_free(s);
}

Test(scan, table_rows_hold_varied_values_redshift_and_columns_in_order) {
  jg_scan *s = toy_scan("cosmology.hubble_h=[0.6, 0.75]", 1, 1);
  char *t = toy_table(s, 2);
  cr_assert(strstr(t, "\n# cosmology.hubble_h\tcosmology.helium_mass_fraction\tz\th_squared\t"
                      "h_times_1pz\th_third[km]\n"), "column line missing:\n%s", t);
  /* Point 3 of 4 is (0.75, 0.24); its second row is z = 100. */
  char expect[512];
  snprintf(expect, sizeof expect, "\n%.10e\t%.10e\t%.10e\t%.10e\t%.10e\t%.10e\n", 0.75, 0.24,
           100.0, 0.75 * 0.75, 0.75 * 101.0, 0.75 / 3.0);
  const char *first_row = strstr(t, "\n6.0000000000e-01");
  const char *row = strstr(t, expect);
  cr_assert_not_null(row, "row missing:%s\nin\n%s", expect, t);
  cr_assert(first_row && first_row < row, "rows out of grid order");
  free(t);
  jg_scan_free(s);
}

Test(scan, failed_points_are_listed_and_get_no_rows) {
  /* 0.5 gives a NaN (below 0.55), 0.9 a numerical failure (above 0.85). */
  jg_scan *s = toy_scan("cosmology.hubble_h=[0.5, 0.7, 0.9]", 1, 1);
  char *t = toy_table(s, 2);
  cr_assert(strstr(t, "\n# failed points: 4\n"), "%s", t);
  cr_assert(strstr(t, "\n# failed point 1 of 6 (cosmology.hubble_h = 0.5, "
                      "cosmology.helium_mass_fraction = 0.24): JG_ENUMERIC: h_squared is not "
                      "finite (nan)\n"), "%s", t);
  cr_assert(strstr(t, "\n# failed point 6 of 6 (cosmology.hubble_h = 0.9, "
                      "cosmology.helium_mass_fraction = 0.25): JG_ENUMERIC: toy: no convergence "
                      "at h = 0.9\n"), "%s", t);
  cr_assert_eq(count_data_rows(t), 2 * 3, "only the two good points have rows");
  cr_assert(!rows_contain(t, "nan"), "a NaN reached the table");
  cr_assert(!rows_contain(t, "inf"), "an Inf reached the table");
  free(t);
  jg_scan_free(s);
}

Test(scan, resumed_checkpoint_with_a_torn_line_gives_the_same_table) {
  char dir[64], ck[128];
  jg_scan *s = toy_scan_in_folder(dir, sizeof dir, ck, sizeof ck, "cosmology.hubble_h=0.6:0.8:6");
  char *whole = toy_table(s, 1);

  jg_error err;
  jg_error_clear(&err);
  jg_scan_checkpoint *c = NULL;
  cr_assert_eq(jg_scan_checkpoint_open(s, ck, 0, &c, &err), JG_OK, "%s", err.message);
  const long long order[] = {7, 2, 11, 0};
  record_points(s, c, order, 4);
  jg_scan_checkpoint_close(c, 0);
  /* A kill in the middle of the last record: cut into its last line. */
  struct stat sb;
  cr_assert_eq(stat(ck, &sb), 0);
  cr_assert_eq(truncate(ck, sb.st_size - 10), 0);

  cr_assert_eq(jg_scan_checkpoint_open(s, ck, 1, &c, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_scan_checkpoint_resumed(c), 3, "the torn record must be dropped");
  cr_assert(jg_scan_checkpoint_has(c, 7) && jg_scan_checkpoint_has(c, 2) &&
            jg_scan_checkpoint_has(c, 11) && !jg_scan_checkpoint_has(c, 0));
  cr_assert_eq(jg_scan_run(s, c, 2, NULL, NULL, &err), JG_OK, "%s", err.message);
  char *text = NULL;
  size_t size = 0;
  FILE *f = open_memstream(&text, &size);
  cr_assert_eq(jg_scan_write_table(s, c, f, &err), JG_OK, "%s", err.message);
  fclose(f);
  jg_scan_checkpoint_close(c, 1);
  cr_assert_str_eq(text, whole);
  cr_assert(!exists(ck), "the checkpoint must go after success");
  free(text);
  free(whole);
  jg_scan_free(s);
  remove_dir(dir);
}

Test(scan, checkpoint_of_another_scan_or_without_resume_is_refused) {
  char dir[64], ck[128];
  make_dir(dir, sizeof dir);
  path_in(ck, sizeof ck, dir, "t.checkpoint");
  jg_scan *a = toy_scan("cosmology.hubble_h=0.6:0.8:3", 1, 1);
  jg_scan *b = toy_scan("cosmology.hubble_h=0.6:0.8:4", 1, 1);
  jg_error err;
  jg_error_clear(&err);
  jg_scan_checkpoint *c = NULL;
  cr_assert_eq(jg_scan_checkpoint_open(a, ck, 0, &c, &err), JG_OK, "%s", err.message);
  jg_scan_checkpoint_close(c, 0);
  char *before = read_text(ck);

  cr_assert_eq(jg_scan_checkpoint_open(a, ck, 0, &c, &err), JG_EINVAL);
  cr_assert(strstr(err.message, "exists: a run of this output was interrupted"), "%s", err.message);
  cr_assert_eq(jg_scan_checkpoint_open(b, ck, 1, &c, &err), JG_EINVAL);
  cr_assert(strstr(err.message, "belongs to a different scan or slice"), "%s", err.message);
  char *after = read_text(ck);
  cr_assert_str_eq(before, after, "a refused checkpoint must be left untouched");
  free(before);
  free(after);
  jg_scan_free(a);
  jg_scan_free(b);
  remove_dir(dir);
}

Test(scan, slices_merge_into_the_whole_table) {
  char dir[64];
  make_dir(dir, sizeof dir);
  jg_scan *whole_scan = toy_scan("cosmology.hubble_h=[0.5, 0.6, 0.7, 0.8, 0.9]", 1, 1);
  char *whole = toy_table(whole_scan, 2);
  jg_scan_free(whole_scan);
  char paths[3][128];
  const char *order[3];
  for (int i = 0; i < 3; i++) {
    jg_scan *s = toy_scan("cosmology.hubble_h=[0.5, 0.6, 0.7, 0.8, 0.9]", i + 1, 3);
    char *t = toy_table(s, 1);
    char name[32];
    snprintf(name, sizeof name, "part%d.txt", i + 1);
    path_in(paths[i], sizeof paths[i], dir, name);
    write_file(paths[i], t);
    free(t);
    jg_scan_free(s);
  }
  order[0] = paths[2], order[1] = paths[0], order[2] = paths[1]; /* any order */
  char *merged = NULL;
  size_t size = 0;
  FILE *f = open_memstream(&merged, &size);
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_scan_merge(order, 3, f, &err), JG_OK, "%s", err.message);
  fclose(f);
  cr_assert_str_eq(merged, whole);
  free(merged);

  /* A missing slice, a slice given twice, or a slice of another scan. */
  f = open_memstream(&merged, &size);
  cr_assert_eq(jg_scan_merge(order, 2, f, &err), JG_EINVAL);
  cr_assert(strstr(err.message, "a merge takes all 3 slices"), "%s", err.message);
  const char *twice[3] = {paths[0], paths[1], paths[1]};
  cr_assert_eq(jg_scan_merge(twice, 3, f, &err), JG_EINVAL);
  cr_assert(strstr(err.message, "are both slice 2 of 3"), "%s", err.message);
  jg_scan *other = toy_scan("cosmology.hubble_h=[0.5, 0.6, 0.7, 0.8, 0.95]", 3, 3);
  char *t = toy_table(other, 1);
  write_file(paths[2], t);
  free(t);
  jg_scan_free(other);
  cr_assert_eq(jg_scan_merge(order, 3, f, &err), JG_EINVAL);
  cr_assert(strstr(err.message, "belong to different scans"), "%s", err.message);
  fclose(f);
  free(merged);
  free(whole);
  remove_dir(dir);
}

static long max_resident_kib(void) {
  struct rusage ru;
  getrusage(RUSAGE_SELF, &ru);
  return ru.ru_maxrss;
}

/* The largest grid allowed (10^8 points) must start: nothing is held per
 * point before it is computed (the values follow from the index, the
 * checkpoint's index fills as points finish), and only the corners and
 * 20,000 spread points are checked up front. Before, the values alone
 * took 1.6 GB. The limit below (64 MiB for the whole set-up) is ten times
 * what it takes and a twentieth of one array of 10^8 doubles. */
Test(scan, largest_grid_starts_without_holding_its_points) {
  const long before = max_resident_kib();
  jg_scan *s = toy_scan("cosmology.hubble_h=0.5:0.9:50000000", 1, 1);
  cr_assert_eq(jg_scan_total_points(s), 100000000LL);
  double v[2];
  jg_scan_grid_values(jg_scan_grid_of(s), 99999999LL, v);
  cr_assert(v[0] == 0.9 && v[1] == 0.25, "last point: %.17g, %.17g", v[0], v[1]);
  /* 0.5 + 0.4 / 49999999, to 15 significant digits. */
  jg_scan_grid_values(jg_scan_grid_of(s), 2 * 1LL, v);
  cr_assert(v[0] == 0.500000008 && v[1] == 0.24, "second value: %.17g, %.17g", v[0], v[1]);
  jg_error err;
  jg_error_clear(&err);
  jg_scan_checkpoint *c = NULL;
  cr_assert_eq(jg_scan_checkpoint_open(s, NULL, 0, &c, &err), JG_OK, "%s", err.message);
  const long long some[] = {30000000, 20000000, 50000001}; /* h in 0.55-0.85 */
  record_points(s, c, some, 3);
  cr_assert(jg_scan_checkpoint_has(c, 20000000) && !jg_scan_checkpoint_has(c, 20000001));
  const long grown = max_resident_kib() - before;
  jg_scan_checkpoint_close(c, 1);
  jg_scan_free(s);
  cr_assert_lt(grown, 64 * 1024, "setting up 10^8 points took %ld KiB", grown);
}

/* The lock tells a running scan from an interrupted one: while one
 * checkpoint is open, a second open of the same file (another run, with or
 * without --resume) is refused as such, and the file is left as it is. */
Test(scan, checkpoint_in_use_is_refused_as_locked_not_as_interrupted) {
  char dir[64], ck[128];
  jg_scan *s = toy_scan_in_folder(dir, sizeof dir, ck, sizeof ck, "cosmology.hubble_h=0.6:0.8:3");
  jg_error err;
  jg_error_clear(&err);
  jg_scan_checkpoint *running = NULL, *second = NULL;
  cr_assert_eq(jg_scan_checkpoint_open(s, ck, 0, &running, &err), JG_OK, "%s", err.message);
  char *before = read_text(ck);
  for (int resume = 0; resume <= 1; resume++) {
    cr_assert_eq(jg_scan_checkpoint_open(s, ck, resume, &second, &err), JG_EINVAL);
    cr_assert(strstr(err.message, "is locked by another jeansgrow scan that is still writing"),
              "resume %d: %s", resume, err.message);
    cr_assert(!strstr(err.message, "interrupted"), "%s", err.message);
  }
  char *after = read_text(ck);
  cr_assert_str_eq(before, after);
  jg_scan_checkpoint_close(running, 0);
  /* Released with the run: now it is an interrupted run's checkpoint. */
  cr_assert_eq(jg_scan_checkpoint_open(s, ck, 0, &second, &err), JG_EINVAL);
  cr_assert(strstr(err.message, "a run of this output was interrupted"), "%s", err.message);
  cr_assert_eq(jg_scan_checkpoint_open(s, ck, 1, &second, &err), JG_OK, "%s", err.message);
  jg_scan_checkpoint_close(second, 1);
  free(before), free(after);
  jg_scan_free(s);
  remove_dir(dir);
}

/* --resume never overwrites a file it cannot trust: a foreign file, a
 * damaged header, or damage before the last line (a kill tears only the
 * last line) is refused with the line, and the file stays as it was. Only
 * a header cut by a kill before it was complete starts afresh. */
Test(scan, damaged_or_foreign_checkpoint_is_refused_under_resume) {
  char dir[64], ck[128];
  jg_scan *s = toy_scan_in_folder(dir, sizeof dir, ck, sizeof ck, "cosmology.hubble_h=0.6:0.8:3");
  jg_error err;
  jg_error_clear(&err);
  jg_scan_checkpoint *c = NULL;
  cr_assert_eq(jg_scan_checkpoint_open(s, ck, 0, &c, &err), JG_OK, "%s", err.message);
  const long long first_three[] = {0, 1, 2};
  record_points(s, c, first_three, 3);
  jg_scan_checkpoint_close(c, 0);
  char *good = read_text(ck);
  char *second_line = strchr(good, '\n') + 1;
  char *third_line = strchr(second_line, '\n') + 1;

  typedef struct { const char *what, *expect; char *text; } damage;
  damage cases[4];
  cases[0] = (damage){"a foreign file", ":1: not a jeansgrow scan checkpoint", strdup("my notes\n")};
  cases[1] = (damage){"a damaged header", ":1: not a jeansgrow scan checkpoint", strdup(good)};
  cases[1].text[3] = 'X';
  cases[2] = (damage){"a damaged middle record", ":2: the record's checksum does not match",
                      strdup(good)};
  cases[2].text[second_line - good + 4] ^= 1;
  cases[3] = (damage){"a record given twice", ":5: a record of a point outside this slice, "
                      "recorded twice", NULL};
  size_t head = (size_t)(third_line - good);
  cases[3].text = malloc(strlen(good) + head + 1);
  sprintf(cases[3].text, "%s%.*s", good, (int)(head - (second_line - good)), second_line);
  for (int k = 0; k < 4; k++) {
    write_file(ck, cases[k].text);
    cr_assert_eq(jg_scan_checkpoint_open(s, ck, 1, &c, &err), JG_EINVAL, "%s was accepted",
                 cases[k].what);
    cr_assert(strstr(err.message, ck) && strstr(err.message, cases[k].expect), "%s: %s",
              cases[k].what, err.message);
    char *after = read_text(ck);
    cr_assert_str_eq(after, cases[k].text, "%s was changed", cases[k].what);
    free(after);
    free(cases[k].text);
  }
  /* A header torn by a kill: nothing was recorded, the run starts afresh. */
  good[20] = '\0';
  write_file(ck, good);
  cr_assert_eq(jg_scan_checkpoint_open(s, ck, 1, &c, &err), JG_OK, "%s", err.message);
  cr_assert_eq(jg_scan_checkpoint_resumed(c), 0);
  jg_scan_checkpoint_close(c, 1);
  free(good);
  jg_scan_free(s);
  remove_dir(dir);
}

/* ---- the program --------------------------------------------------------- */

typedef struct outcome {
  int status;
  char *err; /* what it printed on stderr */
} outcome;

/* Start `argv0 args...` with stdout and stderr in files of `dir`. */
static pid_t start(const char *dir, const char *const *args) {
  char out[256], err[256];
  path_in(out, sizeof out, dir, ".stdout");
  path_in(err, sizeof err, dir, ".stderr");
  return child_start(args[0], args + 1, out, err, 0);
}

static outcome finish(const char *dir, pid_t pid) {
  outcome o;
  o.status = child_wait(pid);
  char path[256];
  path_in(path, sizeof path, dir, ".stderr");
  o.err = read_text(path);
  unlink(path);
  path_in(path, sizeof path, dir, ".stdout");
  unlink(path);
  cr_assert_not_null(o.err);
  return o;
}

static outcome run_program(const char *dir, const char *const *args) {
  return finish(dir, start(dir, args));
}

static int exit_code(const outcome *o) {
  return WIFEXITED(o->status) ? WEXITSTATUS(o->status) : -1;
}

static double seconds_now(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

#define SCAN_ARGS(out)                                                                   \
  JG_PROGRAM, "scan", REFERENCE, "--no-figures", "--vary", "cosmology.baryon_density_h2=0.01:0.04:4:log", \
      "--vary", "cosmology.hubble_h=[0.6,0.7]", "--set", COARSE, "--set",                  \
      "output.redshifts=[1000.0, 200.0, 50.0, 10.0]", "-o", out

Test(scan, program_writes_the_same_file_with_one_and_two_threads) {
  char dir[64], f1[128], f2[128];
  make_dir(dir, sizeof dir);
  path_in(f1, sizeof f1, dir, "one.txt");
  path_in(f2, sizeof f2, dir, "two.txt");
  const char *a1[] = {SCAN_ARGS(f1), "--threads", "1", NULL};
  const char *a2[] = {SCAN_ARGS(f2), "--threads", "2", NULL};
  outcome o1 = run_program(dir, a1), o2 = run_program(dir, a2);
  cr_assert_eq(exit_code(&o1), 0, "%s", o1.err);
  cr_assert_eq(exit_code(&o2), 0, "%s", o2.err);
  char *t1 = read_text(f1), *t2 = read_text(f2);
  cr_assert(t1 && t2);
  cr_assert_str_eq(t1, t2);
  cr_assert_eq(count_data_rows(t1), 8 * 4);
  char ck[160];
  snprintf(ck, sizeof ck, "%s.checkpoint", f1);
  cr_assert(!exists(ck), "the checkpoint must go after success");
  cr_assert(strstr(o1.err, "8 points x 4 redshifts"), "summary line: %s", o1.err);
  free(t1), free(t2), free(o1.err), free(o2.err);
  remove_dir(dir);
}

/* Without --threads a scan runs one thread per core it may use (its CPU
 * affinity, which the child inherits: taskset, a batch system's binding),
 * not one per core of the machine, and writes the same file. */
Test(scan, program_without_threads_runs_one_thread_per_usable_core) {
  cpu_set_t all, one;
  cr_assert_eq(sched_getaffinity(0, sizeof all, &all), 0, "sched_getaffinity: %s",
               strerror(errno));
  CPU_ZERO(&one);
  for (int c = 0; c < CPU_SETSIZE; c++)
    if (CPU_ISSET(c, &all)) {
      CPU_SET(c, &one);
      break;
    }
  char dir[64], f1[128], fd[128], fa[128];
  make_dir(dir, sizeof dir);
  path_in(f1, sizeof f1, dir, "threads1.txt");
  path_in(fd, sizeof fd, dir, "one_core.txt");
  path_in(fa, sizeof fa, dir, "all_cores.txt");
  const char *a1[] = {SCAN_ARGS(f1), "--threads", "1", NULL};
  const char *ad[] = {SCAN_ARGS(fd), NULL};
  const char *aa[] = {SCAN_ARGS(fa), NULL};
  outcome o1 = run_program(dir, a1);
  cr_assert_eq(sched_setaffinity(0, sizeof one, &one), 0, "sched_setaffinity: %s",
               strerror(errno));
  outcome od = run_program(dir, ad);
  sched_setaffinity(0, sizeof all, &all);
  outcome oa = run_program(dir, aa);
  cr_assert_eq(exit_code(&o1), 0, "%s", o1.err);
  cr_assert_eq(exit_code(&od), 0, "%s", od.err);
  cr_assert_eq(exit_code(&oa), 0, "%s", oa.err);
  cr_expect(strstr(od.err, "points/s on 1 thread\n"), "on one usable core: %s", od.err);
  char on_all[64];
  const int n_all = CPU_COUNT(&all);
  snprintf(on_all, sizeof on_all, "points/s on %d thread%s\n", n_all, n_all == 1 ? "" : "s");
  cr_expect(strstr(oa.err, on_all), "on %d usable cores: %s", n_all, oa.err);
  char *t1 = read_text(f1), *td = read_text(fd), *ta = read_text(fa);
  cr_assert(t1 && td && ta);
  cr_expect_str_eq(td, t1);
  cr_expect_str_eq(ta, t1);
  free(t1), free(td), free(ta), free(o1.err), free(od.err), free(oa.err);
  remove_dir(dir);
}

#ifdef JG_TEST_MPIEXEC
/* A fresh folder for a test on two MPI ranks. Open MPI refuses root
 * without both variables, and 2 ranks may exceed the slots of a small CI
 * machine (DEVELOPERS.md, MPI). */
static void mpi_test_folder(char *dir, size_t size) {
  make_dir(dir, size);
  setenv("OMPI_ALLOW_RUN_AS_ROOT", "1", 1);
  setenv("OMPI_ALLOW_RUN_AS_ROOT_CONFIRM", "1", 1);
  setenv("OMPI_MCA_rmaps_base_oversubscribe", "1", 1);
}
#endif

Test(scan, program_on_two_mpi_ranks_writes_the_single_process_file) {
#ifndef JG_TEST_MPIEXEC
  cr_skip_test("jeansgrow was built without MPI (JG_WITH_MPI off or MPI not found)");
#else
  char dir[64], f1[128], f2[128];
  mpi_test_folder(dir, sizeof dir);
  path_in(f1, sizeof f1, dir, "serial.txt");
  path_in(f2, sizeof f2, dir, "mpi.txt");
  const char *a1[] = {SCAN_ARGS(f1), "--threads", "1", NULL};
  const char *a2[] = {JG_TEST_MPIEXEC, JG_TEST_MPI_NP_FLAG, "2", SCAN_ARGS(f2), NULL};
  outcome o1 = run_program(dir, a1), o2 = run_program(dir, a2);
  cr_assert_eq(exit_code(&o1), 0, "%s", o1.err);
  cr_assert_eq(exit_code(&o2), 0, "mpirun: %s", o2.err);
  cr_assert(strstr(o2.err, "2 MPI ranks"), "the run did not use two ranks: %s", o2.err);
  char *t1 = read_text(f1), *t2 = read_text(f2);
  cr_assert(t1 && t2);
  cr_assert_str_eq(t1, t2);
  free(t1), free(t2), free(o1.err), free(o2.err);
  remove_dir(dir);
#endif
}

/* Lines in a file (0 if missing). */
static int count_lines(const char *path) {
  char *t = read_text(path);
  int n = 0;
  for (const char *c = t; c && *c; c++) n += *c == '\n';
  free(t);
  return n;
}

#ifdef JG_TEST_MPIEXEC

/* The pid of the process whose command line mentions `word` and whose
 * environment says it is MPI rank `rank`, or 0. */
static pid_t find_rank(const char *word, int rank) {
  char want[64];
  snprintf(want, sizeof want, "OMPI_COMM_WORLD_RANK=%d", rank);
  DIR *d = opendir("/proc");
  cr_assert_not_null(d);
  pid_t found = 0;
  struct dirent *e;
  while (!found && (e = readdir(d)) != NULL) {
    char path[300], buf[8192];
    if (e->d_name[0] < '1' || e->d_name[0] > '9') continue;
    int hit[2] = {0, 0};
    const char *files[2] = {"cmdline", "environ"}, *needles[2] = {word, want};
    for (int k = 0; k < 2; k++) {
      snprintf(path, sizeof path, "/proc/%s/%s", e->d_name, files[k]);
      FILE *f = fopen(path, "rb");
      if (!f) break;
      size_t n = fread(buf, 1, sizeof buf - 1, f);
      fclose(f);
      for (size_t i = 0; i < n; i += strlen(buf + i) + 1) {
        buf[n] = '\0';
        if (strcmp(buf + i, needles[k]) == 0) hit[k] = 1;
      }
    }
    if (hit[0] && hit[1]) found = (pid_t)atoi(e->d_name);
  }
  closedir(d);
  return found;
}
#endif

/* A rank that stops answering (here: SIGSTOP) must not hang the job: after
 * --rank-timeout seconds of silence rank 0 ends it with exit 1, naming the
 * rank, and the checkpoint resumes to the table of a single run. */
Test(scan, program_silent_mpi_rank_ends_the_job_with_a_resumable_checkpoint, .timeout = 120) {
#ifndef JG_TEST_MPIEXEC
  cr_skip_test("jeansgrow was built without MPI (JG_WITH_MPI off or MPI not found)");
#else
  char dir[64], out[128], ck[160];
  mpi_test_folder(dir, sizeof dir);
  path_in(out, sizeof out, dir, "silent.txt");
  snprintf(ck, sizeof ck, "%s.checkpoint", out);
#define SILENT_ARGS(o)                                                                       \
  JG_PROGRAM, "scan", REFERENCE, "--no-figures", "--vary", "cosmology.hubble_h=0.6:0.8:100", "--set", COARSE, \
      "--set", "output.redshifts=[10.0]", "--threads", "1", "-o", o
  const char *a_mpi[] = {JG_TEST_MPIEXEC, JG_TEST_MPI_NP_FLAG, "2", SILENT_ARGS(out),
                         "--rank-timeout", "2", NULL};
  pid_t job = start(dir, a_mpi);
  const double t0 = seconds_now();
  while (count_lines(ck) < 3 && seconds_now() - t0 < 60) usleep(20000);
  pid_t rank1 = find_rank(out, 1);
  cr_assert(rank1 > 0, "rank 1 not found");
  cr_assert_eq(kill(rank1, SIGSTOP), 0);
  outcome o = finish(dir, job);
  kill(rank1, SIGKILL); /* if the launcher left it behind */
  cr_assert_eq(exit_code(&o), 1, "exit %d: %s", exit_code(&o), o.err);
  cr_assert(strstr(o.err, "MPI rank 1 has sent nothing for 2 s") &&
            strstr(o.err, "run the same command with --resume"), "%s", o.err);
  cr_assert(exists(ck) && !exists(out));
  free(o.err);
  /* Resumed (byte-identity of resumed tables is checked above). */
  const char *a_resume[] = {SILENT_ARGS(out), "--resume", NULL};
  outcome r = run_program(dir, a_resume);
  cr_assert_eq(exit_code(&r), 0, "%s", r.err);
  cr_assert(strstr(r.err, " resumed, 0 failed"), "%s", r.err);
  char *tr = read_text(out);
  cr_assert_not_null(tr);
  cr_assert_eq(count_data_rows(tr), 100);
  free(tr), free(r.err);
  remove_dir(dir);
#endif
}

/* A random fraction in [lo, hi) from the system's entropy: the kill should
 * land anywhere in the run, differently each time; the value is logged so
 * a failure can be replayed. */
static double random_fraction(double lo, double hi) {
  unsigned int r = 0;
  FILE *f = fopen("/dev/urandom", "rb");
  cr_assert_not_null(f);
  cr_assert_eq(fread(&r, sizeof r, 1, f), 1);
  fclose(f);
  return lo + (hi - lo) * (double)r / 4294967296.0;
}

Test(scan, program_killed_at_a_random_moment_then_resumed_writes_the_same_file) {
  char dir[64], ref[128], out[128], ck[160];
  make_dir(dir, sizeof dir);
  path_in(ref, sizeof ref, dir, "reference.txt");
  path_in(out, sizeof out, dir, "resumed.txt");
  snprintf(ck, sizeof ck, "%s.checkpoint", out);
#define KILL_ARGS(o)                                                                       \
  JG_PROGRAM, "scan", REFERENCE, "--no-figures", "--vary", "cosmology.baryon_density_h2=0.015:0.035:16",    \
      "--vary", "cosmology.cdm_density_h2=[0.11,0.12,0.13]", "--set",                      \
      "output.redshifts=[1000.0, 200.0, 50.0, 10.0]", "--threads", "2", "-o", o
  const char *a_ref[] = {KILL_ARGS(ref), NULL};
  double t0 = seconds_now();
  outcome o = run_program(dir, a_ref);
  double duration = seconds_now() - t0;
  cr_assert_eq(exit_code(&o), 0, "%s", o.err);
  free(o.err);

  /* The run's own duration sets the range of the delay: this is not a
   * timing assertion, only aim. */
  double delay = random_fraction(0.05, 0.95) * duration;
  cr_log_info("killing after %.3f s of a %.3f s run", delay, duration);
  const char *a_run[] = {KILL_ARGS(out), NULL};
  pid_t pid = start(dir, a_run);
  struct timespec ts = {(time_t)delay, (long)((delay - floor(delay)) * 1e9)};
  nanosleep(&ts, NULL);
  kill(pid, SIGKILL);
  o = finish(dir, pid);
  free(o.err);
  if (WIFSIGNALED(o.status) && exists(out)) {
    /* The kill landed after the rename, before the exit: then the table is
     * the complete one, never a partial one. */
    char *t_ref = read_text(ref), *t_early = read_text(out);
    int same = t_ref && t_early && strcmp(t_ref, t_early) == 0;
    free(t_ref), free(t_early);
    cr_assert(same, "a killed run left a table that is not the complete one");
  }

  const char *a_resume[] = {KILL_ARGS(out), "--resume", NULL};
  o = run_program(dir, a_resume);
  cr_assert_eq(exit_code(&o), 0, "%s", o.err);
  char *t_ref = read_text(ref), *t_out = read_text(out);
  cr_assert(t_ref && t_out);
  cr_assert_str_eq(t_out, t_ref);
  cr_assert(!exists(ck), "the checkpoint must go after success");
  free(t_ref), free(t_out), free(o.err);
  remove_dir(dir);
#undef KILL_ARGS
}

Test(scan, program_refuses_bad_grids_before_any_work) {
  char dir[64], out[128];
  make_dir(dir, sizeof dir);
  path_in(out, sizeof out, dir, "never.txt");
  static const struct {
    const char *vary, *set, *message;
  } cases[] = {
      {"cosmology.hubble_h=0.6:0.8:0", NULL,
       "jeansgrow: --vary cosmology.hubble_h=0.6:0.8:0: the number of values N must be at least "
       "1 (got 0)\n"},
      {"cosmology.baryon_density_h2=0.04:0.01:3:log", NULL,
       "jeansgrow: --vary cosmology.baryon_density_h2=0.04:0.01:3:log: FROM = 0.04 is above TO = "
       "0.01 (reversed range; give the values as a list [...] for a descending order)\n"},
      {"cosmology.curvature_omega=0:0.1:3:log", NULL,
       "jeansgrow: --vary cosmology.curvature_omega=0:0.1:3:log: log spacing needs 0 < FROM <= TO "
       "(got FROM = 0)\n"},
      {"cosmology.baryon_density=0.01:0.04:3", NULL,
       "jeansgrow: --vary cosmology.baryon_density=0.01:0.04:3: unknown key "
       "'cosmology.baryon_density' (did you mean 'cosmology.baryon_density_h2'?)\n"},
      {"perturbations.sound_speed=0:2:3", NULL,
       "jeansgrow: --vary perturbations.sound_speed=0:2:3: perturbations.sound_speed is "
       "word-valued: vary it over a list of its words, perturbations.sound_speed=[WORD1, WORD2, "
       "...] (allowed: fluctuating, isothermal, adiabatic or effective_gamma)\n"},
      {"output.redshifts=10:20:2", NULL,
       "jeansgrow: --vary output.redshifts=10:20:2: output.redshifts is not a single number (its "
       "type: list of numbers); only number, integer and word-valued keys can be varied "
       "(jeansgrow keys lists them)\n"},
      /* Only the last point is impossible: refused all the same, before any. */
      {"cosmology.de_w0=[-1.0,-3.0]", "cosmology.curvature_omega=-0.9",
       "jeansgrow: scan point 2 of 2 (cosmology.de_w0 = -3) is not a valid model: cosmology: H^2 "
       "<= 0"},
      {"cosmology.hubble_h=0.5:7:3", NULL,
       "jeansgrow: scan point 3 of 3 (cosmology.hubble_h = 7) is not a valid model: "
       "cosmology.hubble_h must satisfy 0.1 <= value <= 5 (got 7)\n"},
  };
  for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
    const char *args[16] = {JG_PROGRAM, "scan", REFERENCE, "--no-figures", "--vary",
                            cases[i].vary, "--set", COARSE, "-o", out};
    int n = 10;
    if (cases[i].set) args[n++] = "--set", args[n++] = cases[i].set;
    args[n] = NULL;
    outcome o = run_program(dir, args);
    cr_expect_eq(exit_code(&o), 2, "case %zu: exit %d", i, exit_code(&o));
    cr_expect(strncmp(o.err, cases[i].message, strlen(cases[i].message)) == 0,
              "case %zu: got\n%s\nexpected\n%s", i, o.err, cases[i].message);
    cr_expect_eq(count_entries(dir), 0, "case %zu left a file (output or checkpoint)", i);
    free(o.err);
  }
  /* No varied key at all. */
  const char *none[] = {JG_PROGRAM, "scan", REFERENCE, "--no-figures", "-o", out, NULL};
  outcome o = run_program(dir, none);
  cr_expect_eq(exit_code(&o), 2);
  cr_expect(strstr(o.err, "nothing to vary"), "%s", o.err);
  cr_expect_eq(count_entries(dir), 0);
  free(o.err);
  remove_dir(dir);
}

/* z_star, z_drag, z_gas_decoupling, x_e and T_gas at z = 100 of every grid
 * point equal what `jeansgrow epochs` prints for the same --set: the scan
 * adds no physics of its own. Tolerance 1e-9 relative: epochs prints ten
 * significant digits (%.10g) and the table eleven (%.10e), so each side
 * rounds by up to 5e-10. */
Test(scan, baryon_scan_reproduces_single_runs_point_by_point) {
  char dir[64], out[128];
  make_dir(dir, sizeof dir);
  path_in(out, sizeof out, dir, "baryons.txt");
  static const char *const values[] = {"0.018", "0.02237", "0.03"};
  const char *args[] = {JG_PROGRAM, "scan", REFERENCE, "--no-figures", "--vary",
                        "cosmology.baryon_density_h2=[0.018, 0.02237, 0.03]", "--set", COARSE,
                        "--set", "output.redshifts=[1000.0, 100.0]", "-o", out, NULL};
  outcome o = run_program(dir, args);
  cr_assert_eq(exit_code(&o), 0, "%s", o.err);
  free(o.err);
  char *scan_text = read_text(out);
  cr_assert_not_null(scan_text);
  for (int i = 0; i < 3; i++) {
    /* The scan's row for z = 100 of point i. */
    double row[8] = {0};
    int found = 0;
    for (const char *line = scan_text; line && *line; line = strchr(line, '\n') ? strchr(line, '\n') + 1 : NULL) {
      if (*line == '#') continue;
      double v[9];
      if (sscanf(line, "%lf %lf %lf %lf %lf %lf %lf %lf %lf", &v[0], &v[1], &v[2], &v[3], &v[4],
                 &v[5], &v[6], &v[7], &v[8]) != 9)
        continue;
      if (v[0] == strtod(values[i], NULL) && v[1] == 100.0) {
        memcpy(row, v + 1, sizeof row);
        found = 1;
      }
    }
    cr_assert(found, "no z = 100 row for baryon density %s", values[i]);
    char set[64], ep[128];
    snprintf(set, sizeof set, "cosmology.baryon_density_h2=%s", values[i]);
    path_in(ep, sizeof ep, dir, "epochs.txt");
    const char *e_args[] = {JG_PROGRAM, "epochs", REFERENCE, "--set", COARSE, "--set", set,
                            "-o", ep, NULL};
    o = run_program(dir, e_args);
    cr_assert_eq(exit_code(&o), 0, "%s", o.err);
    free(o.err);
    char *epochs = read_text(ep);
    static const struct {
      const char *name;
      int column; /* in row[]: z, z_star, z_drag, z_gas_decoupling, T_gas, x_e, k_J, M_J */
    } pairs[] = {{"z_star", 1}, {"z_drag", 2}, {"z_gas_decoupling", 3}, {"T_gas_z100", 4},
                 {"x_e_z100", 5}};
    for (size_t k = 0; k < sizeof pairs / sizeof pairs[0]; k++) {
      char key[64];
      snprintf(key, sizeof key, "\n%s\t", pairs[k].name);
      const char *at = strstr(epochs, key);
      cr_assert_not_null(at, "epochs printed no %s", pairs[k].name);
      double single = strtod(at + strlen(key), NULL);
      double scanned = row[pairs[k].column];
      cr_expect(fabs(scanned - single) <= 1e-9 * fabs(single),
                "Omega_b h^2 = %s: %s scan %.12g, single run %.12g", values[i], pairs[k].name,
                scanned, single);
    }
    free(epochs);
    unlink(ep);
  }
  free(scan_text);
  remove_dir(dir);
}

/* Omega_b h^2 = 1e-5 leaves too few electrons for the Thomson optical depth
 * to reach 1 after z = 8000 (tau(z) grows with n_e ~ Omega_b h^2; at
 * Omega_b h^2 = 0.0224 it reaches 1 near z = 1090): that point has no z_star,
 * a property of the model. It is computed like any other, and its z_star
 * column holds the documented -1 (README, scan section), which no real
 * redshift takes, while its z_drag (drag depth, divided by the small R) still
 * exists and is positive. */
Test(scan, program_writes_an_absent_epoch_as_minus_one_and_computes_the_point) {
  char dir[64], out[128];
  make_dir(dir, sizeof dir);
  path_in(out, sizeof out, dir, "absent.txt");
  const char *args[] = {JG_PROGRAM, "scan", REFERENCE, "--no-figures", "--vary",
                        "cosmology.baryon_density_h2=[0.00001, 0.0224]", "--set", COARSE, "--set",
                        "output.redshifts=[100.0, 10.0]", "-o", out, NULL};
  outcome o = run_program(dir, args);
  cr_assert_eq(exit_code(&o), 0, "a point without z_star is not a failure: %s", o.err);
  char *t = read_text(out);
  cr_assert_not_null(t);
  cr_assert(strstr(t, "each is -1 where the point's universe does not have that epoch"),
            "the convention line is missing: %s", t);
  cr_assert_eq(count_data_rows(t), 4);
  cr_assert(!rows_contain(t, "nan") && !rows_contain(t, "inf"));
  /* Row: varied value, z, z_star, z_drag, z_gas_decoupling, ... */
  int rows = 0;
  for (const char *line = t, *next; *line; line = next) {
    next = strchr(line, '\n') ? strchr(line, '\n') + 1 : line + strlen(line);
    if (*line == '#') continue;
    char *end;
    double omega_b = strtod(line, &end);
    strtod(end, &end); /* z */
    double z_star = strtod(end, &end), z_drag = strtod(end, &end);
    if (omega_b < 1e-4) {
      cr_expect_eq(z_star, -1.0, "z_star of the point without one: %g", z_star);
      cr_expect(z_drag > 1.0, "z_drag of the low-baryon point: %g", z_drag);
    } else {
      /* Planck 2018 (A&A 641, A6, Table 2): z_star = 1089.92; 0.5 % for the coarse grid. */
      cr_expect(fabs(z_star / 1089.92 - 1.0) < 5e-3, "z_star of the reference point: %g", z_star);
    }
    rows++;
  }
  cr_assert_eq(rows, 4);
  free(t), free(o.err);
  remove_dir(dir);
}

/* A second run on an output another run is writing (a plain run, or a
 * --resume) refuses with exit 2 and says that the other run holds it, not
 * that it "was interrupted"; the running one is stood in for by this test
 * holding the lock on OUTPUT.checkpoint. */
Test(scan, program_second_run_on_a_busy_output_says_another_run_holds_it) {
  char dir[64], out[128], ck[160];
  make_dir(dir, sizeof dir);
  path_in(out, sizeof out, dir, "busy.txt");
  snprintf(ck, sizeof ck, "%s.checkpoint", out);
  write_file(ck, "");
  int fd = open(ck, O_RDWR);
  struct flock fl = {.l_type = F_WRLCK, .l_whence = SEEK_SET};
  cr_assert(fd >= 0 && fcntl(fd, F_OFD_SETLK, &fl) == 0, "lock: %s", strerror(errno));
  const char *plain[] = {SCAN_ARGS(out), NULL};
  const char *resume[] = {SCAN_ARGS(out), "--resume", NULL};
  const char *const *runs[] = {plain, resume};
  for (int k = 0; k < 2; k++) {
    outcome o = run_program(dir, runs[k]);
    cr_expect_eq(exit_code(&o), 2, "run %d: exit %d: %s", k, exit_code(&o), o.err);
    cr_expect(strstr(o.err, "is locked by another jeansgrow scan that is still writing this "
                            "output") && !strstr(o.err, "interrupted"), "run %d: %s", k, o.err);
    free(o.err);
  }
  close(fd);
  cr_assert(!exists(out), "a refused run wrote the table");
  char *left = read_text(ck);
  cr_assert_str_eq(left, "", "a refused run changed the other run's checkpoint");
  free(left);
  remove_dir(dir);
}

Test(scan, program_slices_merge_into_the_whole_file) {
  char dir[64], whole[128], merged[128], parts[3][128];
  make_dir(dir, sizeof dir);
  path_in(whole, sizeof whole, dir, "whole.txt");
  path_in(merged, sizeof merged, dir, "merged.txt");
  const char *a_whole[] = {SCAN_ARGS(whole), NULL};
  outcome o = run_program(dir, a_whole);
  cr_assert_eq(exit_code(&o), 0, "%s", o.err);
  free(o.err);
  for (int i = 0; i < 3; i++) {
    char name[32], part[8];
    snprintf(name, sizeof name, "part%d.txt", i + 1);
    snprintf(part, sizeof part, "%d/3", i + 1);
    path_in(parts[i], sizeof parts[i], dir, name);
    const char *a_part[] = {SCAN_ARGS(parts[i]), "--part", part, NULL};
    o = run_program(dir, a_part);
    cr_assert_eq(exit_code(&o), 0, "%s", o.err);
    free(o.err);
  }
  const char *a_merge[] = {JG_PROGRAM, "merge", merged, parts[1], parts[2], parts[0], NULL};
  o = run_program(dir, a_merge);
  cr_assert_eq(exit_code(&o), 0, "%s", o.err);
  free(o.err);
  char *tw = read_text(whole), *tm = read_text(merged);
  cr_assert(tw && tm);
  cr_assert_str_eq(tm, tw);
  free(tw), free(tm);
  const char *a_short[] = {JG_PROGRAM, "merge", merged, parts[0], parts[2], NULL};
  o = run_program(dir, a_short);
  cr_assert_eq(exit_code(&o), 2);
  cr_assert(strstr(o.err, "a merge takes all 3 slices"), "%s", o.err);
  free(o.err);
  remove_dir(dir);
}

/* A merge refuses, with exit 2, the file and the line, every slice that is
 * not exactly what a scan writes, and writes nothing then. */
static void expect_merge_refused(const char *dir, const char *const *args, const char *message) {
  outcome o = run_program(dir, args);
  cr_expect_eq(exit_code(&o), 2, "merge %s: exit %d: %s", args[3], exit_code(&o), o.err);
  cr_expect(strstr(o.err, message), "merge %s: expected '%s' in: %s", args[3], message, o.err);
  free(o.err);
}

Test(scan, program_merge_refuses_torn_nan_missing_endless_and_overwriting_slices) {
  char dir[64], merged[128], parts[2][128], bad[128];
  make_dir(dir, sizeof dir);
  path_in(merged, sizeof merged, dir, "merged.txt");
  path_in(bad, sizeof bad, dir, "bad.txt");
  for (int i = 0; i < 2; i++) {
    char name[32], part[8];
    snprintf(name, sizeof name, "part%d.txt", i + 1);
    snprintf(part, sizeof part, "%d/2", i + 1);
    path_in(parts[i], sizeof parts[i], dir, name);
    const char *a_part[] = {SCAN_ARGS(parts[i]), "--part", part, NULL};
    outcome o = run_program(dir, a_part);
    cr_assert_eq(exit_code(&o), 0, "%s", o.err);
    free(o.err);
  }
  char *second = read_text(parts[1]);
  cr_assert_not_null(second);
  size_t len = strlen(second);
  char *last_row = second + len - 1;
  while (last_row > second && last_row[-1] != '\n') last_row--;
  long line = 0;
  for (const char *t = second; t < last_row; t++) line += *t == '\n';
  char where[160];
  snprintf(where, sizeof where, "%s:%ld: ", bad, line + 1);
  const char *a_bad[] = {JG_PROGRAM, "merge", merged, bad, parts[0], NULL};

  /* Cut in the middle of the last row (a kill or a full disk). */
  const char cut_char = second[len - 7];
  second[len - 7] = '\0';
  write_file(bad, second);
  second[len - 7] = cut_char;
  char message[256];
  snprintf(message, sizeof message, "%sthe last row is cut short", where);
  expect_merge_refused(dir, a_bad, message);

  /* A value edited to nan (and to inf): no NaN ever reaches a table. */
  const char *const non_finite[] = {"nan", "-inf"};
  for (int k = 0; k < 2; k++) {
    char *edited = malloc(len + 8);
    cr_assert_not_null(edited);
    snprintf(edited, len + 8, "%.*s%s%s", (int)(last_row - second), second, non_finite[k],
             strchr(last_row, '\t'));
    write_file(bad, edited);
    free(edited);
    snprintf(message, sizeof message, "%scolumn 1 holds '%s', not a finite number", where,
             non_finite[k]);
    expect_merge_refused(dir, a_bad, message);
  }

  /* A missing slice is bad input like any missing input (exit 2). */
  remove(bad);
  expect_merge_refused(dir, a_bad, "bad.txt: cannot read the slice (No such file or directory)");

  /* An endless device would be read forever: only regular files are slices. */
  const char *a_zero[] = {JG_PROGRAM, "merge", merged, "/dev/zero", parts[0], NULL};
  expect_merge_refused(dir, a_zero, "/dev/zero: not a slice of a jeansgrow scan (it is a device");
  cr_assert(!exists(merged));

  /* The output may not be one of the slices: it would be lost. */
  const char *a_onto[] = {JG_PROGRAM, "merge", parts[1], parts[0], parts[1], NULL};
  expect_merge_refused(dir, a_onto, "is the slice");
  char *after = read_text(parts[1]);
  cr_assert_str_eq(after, second, "the slice named as output was changed");
  free(after);
  free(second);
  remove_dir(dir);
}

/* Every `jeansgrow scales` column of every grid point, as text, equals the
 * scan's: both format the same doubles with %.10e, so the comparison is
 * exact. The scan row is: varied value, z, z_star, z_drag, z_gas_decoupling,
 * then the scales columns after their `z`. */
static const char *skip_fields(const char *line, int n) {
  for (int i = 0; i < n && line; i++) {
    line = strchr(line, '\t');
    if (line) line++;
  }
  return line;
}

Test(scan, baryon_scan_reproduces_scales_tables_point_by_point) {
  char dir[64], out[128], single[128];
  make_dir(dir, sizeof dir);
  path_in(out, sizeof out, dir, "scan.txt");
  path_in(single, sizeof single, dir, "scales.txt");
  static const char *const values[] = {"0.018", "0.03"};
  const char *args[] = {JG_PROGRAM, "scan", REFERENCE, "--no-figures", "--vary",
                        "cosmology.baryon_density_h2=[0.018, 0.03]", "--set", COARSE,
                        "--set", "output.redshifts=[500.0, 20.0]", "-o", out, NULL};
  outcome o = run_program(dir, args);
  cr_assert_eq(exit_code(&o), 0, "%s", o.err);
  free(o.err);
  char *scan_text = read_text(out);
  cr_assert_not_null(scan_text);
  int compared = 0;
  for (int i = 0; i < 2; i++) {
    char set[64];
    snprintf(set, sizeof set, "cosmology.baryon_density_h2=%s", values[i]);
    const char *s_args[] = {JG_PROGRAM, "scales", REFERENCE, "--set", COARSE, "--set", set,
                            "--set", "output.redshifts=[500.0, 20.0]", "-o", single, NULL};
    o = run_program(dir, s_args);
    cr_assert_eq(exit_code(&o), 0, "%s", o.err);
    free(o.err);
    char *scales = read_text(single);
    cr_assert_not_null(scales);
    for (const char *sl = scales; sl && *sl; sl = strchr(sl, '\n') ? strchr(sl, '\n') + 1 : NULL) {
      if (*sl == '#' || *sl == '\n') continue;
      double z = strtod(sl, NULL);
      const char *s_rest = skip_fields(sl, 1);
      size_t s_len = strcspn(s_rest, "\n");
      int matched = 0;
      for (const char *tl = scan_text; tl && *tl; tl = strchr(tl, '\n') ? strchr(tl, '\n') + 1 : NULL) {
        if (*tl == '#' || *tl == '\n') continue;
        if (strtod(tl, NULL) != strtod(values[i], NULL)) continue;
        if (strtod(skip_fields(tl, 1), NULL) != z) continue;
        const char *t_rest = skip_fields(tl, 5);
        size_t t_len = strcspn(t_rest, "\n");
        cr_expect(t_len == s_len && strncmp(t_rest, s_rest, s_len) == 0,
                  "Omega_b h^2 = %s, z = %g:\n scan   %.*s\n scales %.*s", values[i], z,
                  (int)t_len, t_rest, (int)s_len, s_rest);
        matched = 1;
        compared++;
      }
      cr_expect(matched, "no scan row for Omega_b h^2 = %s, z = %g", values[i], z);
    }
    free(scales);
    unlink(single);
  }
  cr_expect_eq(compared, 4, "compared %d rows, expected 4", compared);
  free(scan_text);
  remove_dir(dir);
}

/* A scan with output.units = "Mpc/h" is the default scan converted, each
 * grid point with its own h (h itself is varied here): the same rows, the
 * scales columns renamed and converted (the definition is in tables.h),
 * every other column identical. 1e-10 relative: both tables print 11
 * significant digits (%.10e), each rounded by at most 5e-11 relative. */
Test(scan, scan_in_h_units_is_the_default_scan_converted_point_by_point) {
  char dir[64], f_mpc[128], f_h[128];
  make_dir(dir, sizeof dir);
  path_in(f_mpc, sizeof f_mpc, dir, "mpc.txt");
  path_in(f_h, sizeof f_h, dir, "h.txt");
#define UNITS_SCAN_ARGS(out)                                                                  \
  JG_PROGRAM, "scan", REFERENCE, "--no-figures", "--vary", "cosmology.hubble_h=[0.6, 0.75]", "--set", COARSE, \
      "--set", "output.redshifts=[500.0, 20.0]", "-o", out
  const char *a_mpc[] = {UNITS_SCAN_ARGS(f_mpc), NULL};
  const char *a_h[] = {UNITS_SCAN_ARGS(f_h), "--set", "output.units=\"Mpc/h\"", NULL};
#undef UNITS_SCAN_ARGS
  outcome o_mpc = run_program(dir, a_mpc), o_h = run_program(dir, a_h);
  cr_assert_eq(exit_code(&o_mpc), 0, "%s", o_mpc.err);
  cr_assert_eq(exit_code(&o_h), 0, "%s", o_h.err);
  char *text_mpc = read_text(f_mpc), *text_h = read_text(f_h);
  cr_assert(text_mpc && text_h);
  table in_mpc, in_h;
  parse_table(text_mpc, &in_mpc);
  parse_table(text_h, &in_h);
  int h_column = column_index(&in_mpc, "cosmology.hubble_h");
  cr_assert_eq(h_column, 0, "the varied key comes first");
  cr_assert_eq(in_mpc.n_rows, 4);
  assert_h_units_table(&in_mpc, &in_h, 0.0, h_column, 1e-10, "scan");
  cr_expect(strstr(in_h.header, "\n# units: k comoving h/Mpc"), "no h units line");
  table_free(&in_mpc);
  table_free(&in_h);
  free(text_mpc), free(text_h), free(o_mpc.err), free(o_h.err);
  remove_dir(dir);
}

/* A scan's fingerprint covers the start table by its content, not by its
 * name: a table edited between an interrupted run and --resume must make
 * the checkpoint "a different scan" instead of mixing two starts. */
Test(scan, fingerprint_follows_the_start_table_content) {
  char dir[] = "/tmp/jg_scan_table_XXXXXX";
  cr_assert(mkdtemp(dir));
  char path[512];
  snprintf(path, sizeof path, "%s/start.txt", dir);
  const char *tables[3] = {"1 0.1 0.2\n100000 0.1 0.2\n", "1 0.1 0.2\n100000 0.1 0.3\n",
                           "1 0.1 0.2\n100000 0.1 0.2\n"};
  char prints[3][17];
  for (int i = 0; i < 3; i++) {
    FILE *f = fopen(path, "w");
    cr_assert(f);
    fputs(tables[i], f);
    fclose(f);
    jg_params p;
    toy_params(&p);
    snprintf(p.perturbations.initial_table, sizeof p.perturbations.initial_table, "%s", path);
    jg_scan_grid g = {0};
    jg_error err;
    jg_error_clear(&err);
    cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.hubble_h=0.6:0.7:2", "test", &err), JG_OK,
                 "%s", err.message);
    jg_scan *s = NULL;
    cr_assert_eq(jg_scan_new(&p, &g, &toy, 1, 1, &s, &err), JG_OK, "%s", err.message);
    snprintf(prints[i], sizeof prints[i], "%s", jg_scan_fingerprint(s));
    jg_scan_free(s);
    jg_scan_grid_clear(&g);
  }
  cr_assert_str_neq(prints[0], prints[1], "an edited table kept the fingerprint");
  cr_assert_str_eq(prints[0], prints[2], "the same table changed the fingerprint");
  remove(path);
  rmdir(dir);
}

/* ---- scans of the growth and epochs tables, and of word-valued keys ------ */

/* The data rows of a table, in order. */
static int data_lines(const char *text, const char **lines, int max) {
  int n = 0;
  for (const char *l = text; l && *l; l = strchr(l, '\n') ? strchr(l, '\n') + 1 : NULL)
    if (*l != '#' && *l != '\n' && n < max) lines[n++] = l;
  return n;
}

/* Fields [from, from + count) of a row as text, for an exact comparison. */
static size_t fields_text(const char *line, int from, int count, const char **start) {
  *start = skip_fields(line, from);
  const char *end = *start;
  for (int i = 0; i < count && end; i++) {
    end += strcspn(end, "\t\n");
    if (i + 1 < count && *end == '\t') end++;
  }
  return (size_t)(end - *start);
}

/* Run a scan (or any command writing `out`) that must succeed; its table. */
static char *table_of_run(const char *dir, const char *const *args, const char *out) {
  outcome o = run_program(dir, args);
  cr_assert_eq(exit_code(&o), 0, "%s: %s", args[1], o.err);
  free(o.err);
  char *text = read_text(out);
  cr_assert_not_null(text, "%s wrote no %s", args[1], out);
  return text;
}

/* Every row of the single runs `singles[i]` (the command `single`, with
 * `--set sets[i]`) must appear, in order, among the scan rows whose first
 * column is point_values[i]: the scan's fields from scan_from compared
 * with the single table's fields from 1 (after its z), `count` of them,
 * character for character. */
static void expect_scan_is_single_runs(const char *dir, const char *scan_text, const char *single,
                                       const char *const *sets, const double *point_values,
                                       int n_points, const char *const *extra, int scan_from,
                                       int count, int rows_per_point) {
  static const char *lines[4096], *single_lines[4096];
  const int n = data_lines(scan_text, lines, 4096);
  cr_assert_eq(n, n_points * rows_per_point, "scan rows: %d", n);
  char out[160];
  path_in(out, sizeof out, dir, "single.txt");
  for (int i = 0; i < n_points; i++) {
    const char *args[24] = {JG_PROGRAM, single, REFERENCE, "--set", sets[i]};
    int a = 5;
    for (int e = 0; extra[e]; e++) args[a++] = extra[e];
    args[a++] = "-o";
    args[a++] = out;
    args[a] = NULL;
    char *text = table_of_run(dir, args, out);
    const int m = data_lines(text, single_lines, 4096);
    cr_assert_eq(m, rows_per_point, "%s %s: %d rows", single, sets[i], m);
    for (int r = 0; r < m; r++) {
      const char *row = lines[i * rows_per_point + r];
      cr_assert_eq(strtod(row, NULL), point_values[i], "scan row %d is not point %d", r, i);
      const char *s0, *t0;
      size_t sl = fields_text(single_lines[r], 1, count, &s0);
      size_t tl = fields_text(row, scan_from, count, &t0);
      cr_expect(sl == tl && strncmp(s0, t0, sl) == 0, "%s, row %d:\n scan   %.*s\n single %.*s",
                sets[i], r, (int)tl, t0, (int)sl, s0);
    }
    free(text);
  }
}

#define GROWTH_SCAN_SETTINGS                                                                  \
  "--set", COARSE, "--set", "output.redshifts=[500.0, 20.0]", "--set",                        \
      "perturbations.k_values=[10.0, 300.0, 3000.0]"

/* A growth scan is the `growth` table of each point: its columns k to
 * flags (12), for every redshift and wavenumber, after the varied key, z
 * and the three epochs. */
Test(scan, growth_scan_equals_growth_runs_point_by_point, .timeout = 120) {
  char dir[64], out[128];
  make_dir(dir, sizeof dir);
  path_in(out, sizeof out, dir, "scan.txt");
  const char *args[] = {JG_PROGRAM, "scan", REFERENCE, "--no-figures", "--table", "growth",
                        "--vary", "cosmology.baryon_density_h2=[0.018, 0.03]",
                        GROWTH_SCAN_SETTINGS, "-o", out, NULL};
  char *text = table_of_run(dir, args, out);
  cr_assert_eq(count_data_rows(text), 2 * 6);
  cr_assert(strstr(text, "\n# cosmology.baryon_density_h2\tz\tz_star\tz_drag\tz_gas_decoupling\t"
                         "k[1/Mpc]\tdelta_c\t"), "column line missing");
  const char *sets[] = {"cosmology.baryon_density_h2=0.018", "cosmology.baryon_density_h2=0.03"};
  const double values[] = {0.018, 0.03};
  const char *extra[] = {GROWTH_SCAN_SETTINGS, NULL};
  expect_scan_is_single_runs(dir, text, "growth", sets, values, 2, extra, 5, 12, 6);
  free(text);
  remove_dir(dir);
}

/* A scan over the three words of perturbations.sound_speed is the three
 * single `scales` runs, its key column holding each word's number. */
Test(scan, sound_speed_scan_equals_the_three_single_runs, .timeout = 120) {
  char dir[64], out[128];
  make_dir(dir, sizeof dir);
  path_in(out, sizeof out, dir, "scan.txt");
  const char *args[] = {JG_PROGRAM, "scan", REFERENCE, "--no-figures", "--vary",
                        "perturbations.sound_speed=[fluctuating, \"isothermal\", adiabatic]",
                        "--set", COARSE, "--set", "output.redshifts=[500.0, 20.0]", "-o", out,
                        NULL};
  char *text = table_of_run(dir, args, out);
  cr_expect(strstr(text, "# scan vary: perturbations.sound_speed = [fluctuating, isothermal, "
                         "adiabatic]\n"), "vary line");
  cr_expect(strstr(text, "# scan words: the column perturbations.sound_speed holds 0 = "
                         "fluctuating, 1 = isothermal, 2 = adiabatic, 3 = effective_gamma\n"),
            "words line");
  const char *sets[] = {"perturbations.sound_speed=\"fluctuating\"",
                        "perturbations.sound_speed=\"isothermal\"",
                        "perturbations.sound_speed=\"adiabatic\""};
  const double values[] = {0, 1, 2};
  const char *extra[] = {"--set", COARSE, "--set", "output.redshifts=[500.0, 20.0]", NULL};
  expect_scan_is_single_runs(dir, text, "scales", sets, values, 3, extra, 5,
                             jg_report_scales_column_count() - 1, 2);
  free(text);
  remove_dir(dir);
}

/* The epochs scan writes one row per point, no z, the `epochs` values in
 * their order (the table prints %.10g, the scan %.10e: compared as numbers
 * to the 1e-9 both keep). */
Test(scan, epochs_scan_row_is_the_epochs_table) {
  char dir[64], out[128], single[128];
  make_dir(dir, sizeof dir);
  path_in(out, sizeof out, dir, "scan.txt");
  path_in(single, sizeof single, dir, "epochs.txt");
  const char *args[] = {JG_PROGRAM, "scan", REFERENCE, "--no-figures", "--table", "epochs",
                        "--vary", "cosmology.hubble_h=[0.7]", "-o", out, NULL};
  const char *e_args[] = {JG_PROGRAM, "epochs", REFERENCE, "--set", "cosmology.hubble_h=0.7",
                          "-o", single, NULL};
  char *scan_text = table_of_run(dir, args, out), *epochs = table_of_run(dir, e_args, single);
  table t;
  parse_table(scan_text, &t);
  cr_assert_eq(t.n_rows, 1);
  cr_assert_eq(t.n_columns, 1 + jg_epochs_count());
  int i = 1;
  for (const char *l = epochs; l && *l; l = strchr(l, '\n') ? strchr(l, '\n') + 1 : NULL) {
    char name[64];
    double v;
    if (*l == '#') {
      /* An epoch this universe lacks: a comment line "# NAME: none (why)"
       * in the table, -1 in the scan. */
      if (sscanf(l, "# %63[a-z_0-9]: non%c", name, (char[2]){0}) != 2) continue;
      v = -1.0;
    } else {
      cr_assert_eq(sscanf(l, "%63s %lf", name, &v), 2);
    }
    cr_expect(strncmp(t.columns[i], name, strlen(name)) == 0, "column %d: %s, epochs: %s", i,
              t.columns[i], name);
    assert_rel(cell(&t, 0, i), v, 1e-9, name);
    i++;
  }
  cr_expect_eq(i, t.n_columns);
  table_free(&t);
  free(scan_text), free(epochs);
  remove_dir(dir);
}

#define GROWTH_WORD_ARGS(o)                                                                  \
  JG_PROGRAM, "scan", REFERENCE, "--no-figures", "--table", "growth", "--vary",              \
      "perturbations.sound_speed=[isothermal, adiabatic]", "--vary",                         \
      "cosmology.baryon_density_h2=0.015:0.03:3", GROWTH_SCAN_SETTINGS, "-o", o

/* The guarantees of the scales scan hold for a growth scan over a word key:
 * the same bytes on one and two threads, as slices merged, and on two MPI
 * ranks when built with MPI. */
Test(scan, growth_scan_of_a_word_key_is_the_same_on_threads_slices_and_ranks, .timeout = 240) {
  char dir[64], f1[128], f2[128], merged[128], parts[2][128];
  make_dir(dir, sizeof dir);
  path_in(f1, sizeof f1, dir, "one.txt");
  path_in(f2, sizeof f2, dir, "two.txt");
  path_in(merged, sizeof merged, dir, "merged.txt");
  const char *a1[] = {GROWTH_WORD_ARGS(f1), "--threads", "1", NULL};
  const char *a2[] = {GROWTH_WORD_ARGS(f2), "--threads", "2", NULL};
  char *t1 = table_of_run(dir, a1, f1), *t2 = table_of_run(dir, a2, f2);
  cr_assert_str_eq(t1, t2);
  cr_assert_eq(count_data_rows(t1), 6 * 2 * 3);
  for (int i = 0; i < 2; i++) {
    char name[32], part[8];
    snprintf(name, sizeof name, "part%d.txt", i + 1);
    snprintf(part, sizeof part, "%d/2", i + 1);
    path_in(parts[i], sizeof parts[i], dir, name);
    const char *a_part[] = {GROWTH_WORD_ARGS(parts[i]), "--part", part, NULL};
    free(table_of_run(dir, a_part, parts[i]));
  }
  const char *a_merge[] = {JG_PROGRAM, "merge", merged, parts[1], parts[0], NULL};
  char *tm = table_of_run(dir, a_merge, merged);
  cr_assert_str_eq(tm, t1);
  free(tm);
#ifdef JG_TEST_MPIEXEC
  char fm[128], mdir[64];
  mpi_test_folder(mdir, sizeof mdir);
  path_in(fm, sizeof fm, mdir, "mpi.txt");
  const char *am[] = {JG_TEST_MPIEXEC, JG_TEST_MPI_NP_FLAG, "2", GROWTH_WORD_ARGS(fm), NULL};
  char *tmpi = table_of_run(mdir, am, fm);
  cr_assert_str_eq(tmpi, t1);
  free(tmpi);
  remove_dir(mdir);
#endif
  free(t1), free(t2);
  remove_dir(dir);
}

/* Killed (SIGKILL) once its checkpoint holds a few points, a growth scan of
 * a word key resumed with --resume writes the bytes of an uninterrupted
 * run. */
Test(scan, growth_scan_of_a_word_key_killed_then_resumed_writes_the_same_file, .timeout = 240) {
  char dir[64], ref[128], out[128], ck[160];
  make_dir(dir, sizeof dir);
  path_in(ref, sizeof ref, dir, "reference.txt");
  path_in(out, sizeof out, dir, "resumed.txt");
  snprintf(ck, sizeof ck, "%s.checkpoint", out);
#define RESUME_ARGS(o)                                                                        \
  JG_PROGRAM, "scan", REFERENCE, "--no-figures", "--table", "growth", "--vary",                \
      "perturbations.sound_speed=[isothermal, fluctuating]", "--vary",                         \
      "cosmology.baryon_density_h2=0.015:0.03:12", GROWTH_SCAN_SETTINGS, "--threads", "1",     \
      "-o", o
  const char *a_ref[] = {RESUME_ARGS(ref), NULL};
  char *t_ref = table_of_run(dir, a_ref, ref);
  const char *a_run[] = {RESUME_ARGS(out), NULL};
  pid_t pid = start(dir, a_run);
  const double t0 = seconds_now();
  /* The header line and at least three points recorded. */
  while (count_lines(ck) < 4 && seconds_now() - t0 < 120) usleep(2000);
  kill(pid, SIGKILL);
  outcome o = finish(dir, pid);
  free(o.err);
  cr_assert(!exists(out), "the run finished before it was killed: make the grid larger");
  const char *a_resume[] = {RESUME_ARGS(out), "--resume", NULL};
  char *t_out = table_of_run(dir, a_resume, out);
  cr_assert_str_eq(t_out, t_ref);
  cr_assert(!exists(ck), "the checkpoint must go after success");
  free(t_ref), free(t_out);
  remove_dir(dir);
#undef RESUME_ARGS
}
