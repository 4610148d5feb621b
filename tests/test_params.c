/*
 * The parameter loader at library level: reference values, defaults,
 * overrides, validation of hand-filled structs, the failure contract
 * (output untouched) and agreement between the documented keys, the loader
 * and the header written into every table.
 */
#include <criterion/criterion.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "jeansgrow/jeansgrow.h"

#define REFERENCE JG_SOURCE_DIR "/params/reference.cfg"
#define BAD_DIR JG_SOURCE_DIR "/tests/bad"

/* The three required keys with the reference values: everything else is
 * left to the defaults. */
static const char minimal_text[] =
    "cosmology: { hubble_h = 0.6736; baryon_density_h2 = 0.02237; cdm_density_h2 = 0.1200; };\n";

static char temp_dir[64];

static void make_temp_dir(void) {
  snprintf(temp_dir, sizeof temp_dir, "/tmp/jg_params_XXXXXX");
  cr_assert_not_null(mkdtemp(temp_dir), "mkdtemp: %s", strerror(errno));
}

static void remove_temp_dir(void) {
  char path[128];
  const char *files[] = {"minimal.cfg", "bom.cfg",  "comments.cfg",
                         "unclosed.cfg", "scan.cfg", "beside.cfg", NULL};
  for (int i = 0; files[i]; i++) {
    snprintf(path, sizeof path, "%s/%s", temp_dir, files[i]);
    unlink(path);
  }
  rmdir(temp_dir);
}

TestSuite(params, .init = make_temp_dir, .fini = remove_temp_dir);

/* Write `text` to a file in the suite's folder; returns its path (static). */
static const char *temp_file(const char *name, const char *text) {
  static char path[128];
  snprintf(path, sizeof path, "%s/%s", temp_dir, name);
  FILE *f = fopen(path, "w");
  cr_assert_not_null(f);
  fputs(text, f);
  cr_assert_eq(fclose(f), 0);
  return path;
}

/* jg_params is large (fixed-size lists); keep the working copies off the
 * stack. */
static jg_params loaded, expected, sentinel_copy;

static void load_ok(const char *path, const char *const *overrides, int n, jg_params *p) {
  jg_error err;
  jg_error_clear(&err);
  jg_status st = jg_params_load(path, overrides, n, p, &err);
  cr_assert_eq(st, JG_OK, "jg_params_load(%s) failed: %s", path, err.message);
}

/* The header lines "# key = value;" of a parameter set, as one string. */
static char *header_of(const jg_params *p) {
  char *buf = NULL;
  size_t len = 0;
  FILE *f = open_memstream(&buf, &len);
  cr_assert_not_null(f);
  jg_params_write_header(f, p);
  cr_assert_eq(fclose(f), 0);
  return buf;
}

/* ---- loading ------------------------------------------------------------- */

Test(params, reference_file_gives_the_planck_2018_values) {
  load_ok(REFERENCE, NULL, 0, &loaded);
  /* Planck 2018 base-LCDM, TT,TE,EE+lowE+lensing (A&A 641, A6, Table 2):
   * h, Omega_b h^2, Omega_c h^2; T_cmb from Fixsen 2009; Y_P and N_eff as
   * in that fit. Compared exactly: the file and these C literals are the
   * same decimal text, which both parsers round to the same double. */
  cr_expect_eq(loaded.cosmology.hubble_h, 0.6736);
  cr_expect_eq(loaded.cosmology.baryon_density_h2, 0.02237);
  cr_expect_eq(loaded.cosmology.cdm_density_h2, 0.1200);
  cr_expect_eq(loaded.cosmology.cmb_temperature_K, 2.7255);
  cr_expect_eq(loaded.cosmology.helium_mass_fraction, 0.2454);
  cr_expect_eq(loaded.cosmology.neutrino_number_eff, 3.046);
  cr_expect_eq(loaded.cosmology.curvature_omega, 0.0);
  cr_expect_eq(loaded.cosmology.de_w0, -1.0);
  cr_expect_eq(loaded.cosmology.de_wa, 0.0);
  /* Seager, Sasselov & Scott 1999 fudge factor, as the file states. */
  cr_expect_eq(loaded.thermal.recombination_fudge, 1.14);
  cr_expect_eq(loaded.thermal.start_redshift, 8000.0);
  const double z[] = {1100.0, 1000.0, 500.0, 200.0, 100.0, 50.0, 20.0, 10.0};
  cr_assert_eq(loaded.output.n_redshifts, 8);
  for (int i = 0; i < 8; i++) cr_expect_eq(loaded.output.redshifts[i], z[i], "redshift %d", i);
}

Test(params, missing_optional_keys_take_their_defaults) {
  load_ok(temp_file("minimal.cfg", minimal_text), NULL, 0, &loaded);
  jg_params_set_defaults(&expected);
  /* The header lists every key with a round-trip exact value, so equal
   * headers mean equal parameter sets. */
  char *a = header_of(&loaded), *b = header_of(&expected);
  cr_expect_str_eq(a, b);
  free(a);
  free(b);
}

Test(params, override_replaces_a_value_from_the_file) {
  const char *set[] = {"cosmology.hubble_h=0.7"};
  load_ok(REFERENCE, set, 1, &loaded);
  cr_expect_eq(loaded.cosmology.hubble_h, 0.7);
  cr_expect_eq(loaded.cosmology.baryon_density_h2, 0.02237, "other keys keep their values");
}

/* A wavenumber within 1e-9 (relative) of a bound of the fluid equations is
 * that bound: 1 /Mpc converted to h/Mpc and back with ten digits reads
 * 0.9999999999; 1e-8 off is still refused. */
Test(params, wavenumbers_rounded_at_a_bound_are_the_bound) {
  const char *set[] = {"perturbations.k_values=[0.9999999999, 10.0, 100000.00005]",
                       "perturbations.k_min=0.9999999999"};
  load_ok(REFERENCE, set, 2, &loaded);
  cr_expect_eq(loaded.perturbations.k_values[0], 1.0);
  cr_expect_eq(loaded.perturbations.k_values[1], 10.0, "inside values stay as written");
  cr_expect_eq(loaded.perturbations.k_values[2], 1e5);
  cr_expect_eq(loaded.perturbations.k_min, 1.0);
  const char *off[] = {"perturbations.k_min=0.99999999"};
  jg_error err;
  jg_error_clear(&err);
  cr_expect_eq(jg_params_load(REFERENCE, off, 1, &loaded, &err), JG_ECONFIG, "1e-8 below");
}

Test(params, later_override_of_the_same_key_wins) {
  const char *set[] = {"cosmology.hubble_h=0.7", "cosmology.hubble_h=0.65"};
  load_ok(REFERENCE, set, 2, &loaded);
  cr_expect_eq(loaded.cosmology.hubble_h, 0.65);
}

Test(params, override_creates_a_missing_group) {
  /* minimal.cfg has no thermal group at all. */
  const char *set[] = {"thermal.start_redshift=9000.0", "thermal.grid_points=1500"};
  load_ok(temp_file("minimal.cfg", minimal_text), set, 2, &loaded);
  cr_expect_eq(loaded.thermal.start_redshift, 9000.0);
  cr_expect_eq(loaded.thermal.grid_points, 1500);
}

Test(params, override_accepts_an_array_and_an_integer_for_a_number) {
  const char *set[] = {"output.redshifts=[300.0, 30.0, 3.0]", "cosmology.hubble_h=1"};
  load_ok(REFERENCE, set, 2, &loaded);
  cr_assert_eq(loaded.output.n_redshifts, 3);
  cr_expect_eq(loaded.output.redshifts[0], 300.0);
  cr_expect_eq(loaded.output.redshifts[1], 30.0);
  cr_expect_eq(loaded.output.redshifts[2], 3.0);
  cr_expect_eq(loaded.cosmology.hubble_h, 1.0);
}

Test(params, override_of_a_whole_group_replaces_it) {
  const char *set[] = {"thermal={ start_redshift = 9000.0; }"};
  load_ok(REFERENCE, set, 1, &loaded);
  cr_expect_eq(loaded.thermal.start_redshift, 9000.0);
  /* The reference file sets the fudge factor in that group; it is gone
   * with the group and falls back to its default. */
  jg_params_set_defaults(&expected);
  cr_expect_eq(loaded.thermal.recombination_fudge, expected.thermal.recombination_fudge);
}

/* The two words of output.units, from the file or from --set, give the two
 * unit systems; the default is 1/Mpc and M_sun. */
Test(params, output_units_words_select_the_unit_system) {
  load_ok(temp_file("minimal.cfg", minimal_text), NULL, 0, &loaded);
  cr_expect_eq(loaded.output.units, JG_UNITS_MPC);
  const char *set_h[] = {"output.units=\"Mpc/h\""};
  load_ok(REFERENCE, set_h, 1, &loaded);
  cr_expect_eq(loaded.output.units, JG_UNITS_MPC_H);
  cr_expect_eq(loaded.perturbations.k_min, 1.0, "inputs are not converted");
  load_ok(temp_file("minimal.cfg", "cosmology: { hubble_h = 0.6736; baryon_density_h2 = 0.02237; "
                                   "cdm_density_h2 = 0.12; };\noutput: { units = \"Mpc/h\"; };\n"),
          NULL, 0, &loaded);
  cr_expect_eq(loaded.output.units, JG_UNITS_MPC_H);
  const char *set_mpc[] = {"output.units=\"Mpc\""};
  load_ok(REFERENCE, set_mpc, 1, &loaded);
  cr_expect_eq(loaded.output.units, JG_UNITS_MPC);
}

Test(params, byte_order_mark_at_the_start_is_ignored) {
  char text[sizeof minimal_text + 3] = "\xEF\xBB\xBF";
  strcat(text, minimal_text);
  load_ok(temp_file("bom.cfg", text), NULL, 0, &loaded);
  cr_expect_eq(loaded.cosmology.hubble_h, 0.6736);
}

/* A table named in a parameter file lies beside that file wherever the
 * program is started from; a name given with --set is the shell's, taken
 * from the current folder; absolute names stay as written. */
Test(params, relative_table_names_are_taken_from_the_parameter_files_folder) {
  static const char text[] =
      "cosmology: { hubble_h = 0.6736; baryon_density_h2 = 0.02237; cdm_density_h2 = 0.1200; };\n"
      "perturbations: { initial_table = \"start.txt\"; };\n";
  const char *path = temp_file("beside.cfg", text);
  char want[256];
  snprintf(want, sizeof want, "%s/start.txt", temp_dir);
  load_ok(path, NULL, 0, &loaded);
  cr_expect_str_eq(loaded.perturbations.initial_table, want);

  const char *from_shell[] = {"perturbations.initial_table=\"start.txt\""};
  load_ok(path, from_shell, 1, &loaded);
  cr_expect_str_eq(loaded.perturbations.initial_table, "start.txt");

  const char *absolute[] = {"perturbations.initial_table=\"/data/start.txt\""};
  load_ok(path, absolute, 1, &loaded);
  cr_expect_str_eq(loaded.perturbations.initial_table, "/data/start.txt");
}

/* libconfig 1.5 ends a block comment that is never closed at the end of the
 * file without a word, so the settings after it silently took their
 * defaults. Closed comments, and comment marks inside strings and line
 * comments, must still read as before. */
Test(params, block_comments_read_and_an_unclosed_one_names_its_line) {
  static const char closed[] =
      "/* first line\n   second line, with a stray /* inside */\n"
      "cosmology: { hubble_h = 0.7; # not a comment start: /*\n"
      "  baryon_density_h2 = 0.02237; // nor this: /*\n"
      "  cdm_density_h2 = 0.1200; };\n"
      "perturbations: { initial_table = \"/*.txt\"; };\n";
  load_ok(temp_file("comments.cfg", closed), NULL, 0, &loaded);
  cr_expect_eq(loaded.cosmology.hubble_h, 0.7);
  cr_expect_str_eq(loaded.perturbations.initial_table, "/*.txt");

  static const char unclosed[] =
      "cosmology: { hubble_h = 0.7; baryon_density_h2 = 0.02237; cdm_density_h2 = 0.12; };\n"
      "# a line\n"
      "/* closed */ /* the note that never ends\n"
      "thermal: { start_redshift = 9000.0; };\n";
  const char *path = temp_file("unclosed.cfg", unclosed);
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_params_load(path, NULL, 0, &loaded, &err), JG_ECONFIG, "accepted: %s",
               err.message);
  char expected_message[256];
  snprintf(expected_message, sizeof expected_message,
           "%s:3: comment '/*' opened here is never closed by '*/' (everything after it would "
           "be ignored)",
           path);
  cr_expect_str_eq(err.message, expected_message);

  const char *set[] = {"cosmology.hubble_h=0.7 /* was 0.6736"};
  jg_error_clear(&err);
  cr_expect_eq(jg_params_load(REFERENCE, set, 1, &loaded, &err), JG_ECONFIG);
  cr_expect_str_eq(err.message, "--set cosmology.hubble_h=0.7 /* was 0.6736: comment '/*' is "
                                "never closed by '*/' (everything after it would be ignored)");
}

/* ---- the scan group ------------------------------------------------------- */

typedef struct seen_axes {
  int n;
  char text[4][64], key[4][64];
  double from[4], to[4], values[4][4];
  long count[4];
  int log_spacing[4], n_values[4];
  char where[4][256];
} seen_axes;

static jg_status record_axis(void *user, const jg_param_axis *a, jg_error *err) {
  (void)err;
  seen_axes *s = user;
  cr_assert_lt(s->n, 4);
  int i = s->n++;
  snprintf(s->text[i], sizeof s->text[i], "%s", a->text ? a->text : "");
  snprintf(s->key[i], sizeof s->key[i], "%s", a->key ? a->key : "");
  snprintf(s->where[i], sizeof s->where[i], "%s", a->where);
  s->from[i] = a->from, s->to[i] = a->to, s->count[i] = a->count;
  s->log_spacing[i] = a->log_spacing;
  s->n_values[i] = a->values ? a->n_values : -1;
  for (int j = 0; j < a->n_values && j < 4; j++) s->values[i][j] = a->values[j];
  return JG_OK;
}

/* The scan group is read against its own key table: each element form
 * arrives as written, and a misspelt key anywhere in it is refused by
 * jg_params_load (every command) with the message the scan reader gives. */
Test(params, scan_group_is_read_against_its_key_table) {
  char text[1024];
  snprintf(text, sizeof text,
           "%sscan:\n{\n  vary = (\n"
           "    { key = \"cosmology.hubble_h\"; from = 0.6; to = 0.8; count = 3;\n"
           "      spacing = \"log\"; },\n"
           "    { key = \"thermal.grid_points\"; values = [1000, 2000]; },\n"
           "    \"cosmology.cdm_density_h2=0.10:0.14:3\"\n  );\n};\n",
           minimal_text);
  const char *path = temp_file("scan.cfg", text);
  static seen_axes seen;
  memset(&seen, 0, sizeof seen);
  jg_error err;
  jg_error_clear(&err);
  cr_assert_eq(jg_params_read_scan(path, record_axis, &seen, &err), JG_OK, "%s", err.message);
  cr_assert_eq(seen.n, 3);
  cr_expect_str_eq(seen.key[0], "cosmology.hubble_h");
  cr_expect(seen.from[0] == 0.6 && seen.to[0] == 0.8 && seen.count[0] == 3 && seen.log_spacing[0]);
  cr_expect_eq(seen.n_values[0], -1, "a range has no values list");
  cr_expect_str_eq(seen.key[1], "thermal.grid_points");
  cr_expect(seen.n_values[1] == 2 && seen.values[1][0] == 1000.0 && seen.values[1][1] == 2000.0);
  cr_expect_str_eq(seen.text[2], "cosmology.cdm_density_h2=0.10:0.14:3");
  char where[256];
  snprintf(where, sizeof where, "%s:7: scan.vary[1]", path);
  cr_expect_str_eq(seen.where[1], where);
  load_ok(path, NULL, 0, &loaded);

  const struct {
    const char *group, *message;
  } bad[] = {
      {"vary = ( { key = \"cosmology.hubble_h\"; form = 0.6; to = 0.8; count = 3; } );",
       "unknown key 'scan.vary[0].form' (did you mean 'scan.vary[0].from'?)"},
      {"vray = ( \"cosmology.hubble_h=0.6:0.8:3\" );",
       "unknown key 'scan.vray' (did you mean 'scan.vary'?)"},
      {"vary = ( { key = \"cosmology.hubble_h\"; from = 0.6; to = 0.8; count = 3.0; } );",
       "scan.vary[0].count must be an integer (got the number 3.0)"},
      {"vary = ( { key = \"cosmology.hubble_h\"; values = [0.6]; spacing = \"lin\"; } );",
       "scan.vary[0].spacing must be one of linear or log (got \"lin\")"},
      {"vary = ( { from = 0.6; to = 0.8; count = 3; } );",
       "scan.vary[0]: needs key = \"group.name\"; (a quoted parameter key)"},
      {"vary = ( { key = \"cosmology.hubble_h\"; values = [0.6]; count = 3; } );",
       "scan.vary[0]: give either values or from, to, count (and spacing), not both"},
      {"vary = ();", "scan.vary is empty (nothing to vary)"},
  };
  for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
    snprintf(text, sizeof text, "%sscan: {\n  %s\n};\n", minimal_text, bad[i].group);
    path = temp_file("scan.cfg", text);
    char expected_message[512];
    snprintf(expected_message, sizeof expected_message, "%s:3: %s", path, bad[i].message);
    jg_error_clear(&err);
    cr_expect_eq(jg_params_load(path, NULL, 0, &loaded, &err), JG_ECONFIG, "%s accepted",
                 bad[i].group);
    cr_expect_str_eq(err.message, expected_message);
    jg_error_clear(&err);
    memset(&seen, 0, sizeof seen);
    cr_expect_eq(jg_params_read_scan(path, record_axis, &seen, &err), JG_ECONFIG);
    cr_expect_str_eq(err.message, expected_message);
  }

  /* --set cannot reach the group: a known key is refused, an unknown one
   * is an unknown key like any other. */
  const char *set_vary[] = {"scan.vary=[\"cosmology.hubble_h=0.6:0.8:3\"]"};
  jg_error_clear(&err);
  cr_expect_eq(jg_params_load(REFERENCE, set_vary, 1, &loaded, &err), JG_ECONFIG);
  cr_expect(strstr(err.message, "the scan group is read from the parameter file only"), "%s",
            err.message);
  const char *set_other[] = {"scan.anything=1"};
  jg_error_clear(&err);
  cr_expect_eq(jg_params_load(REFERENCE, set_other, 1, &loaded, &err), JG_ECONFIG);
  cr_expect_str_eq(err.message, "--set scan.anything=1: unknown key 'scan.anything' (no known key "
                                "is similar; jeansgrow keys lists them all)");

  /* The documented scan keys are the ones the reader knows. */
  cr_expect_str_eq(jg_param_scan_doc_at(0)->key, "scan.vary");
  const jg_param_doc *d;
  int n = 0;
  for (int i = 1; (d = jg_param_scan_doc_at(i)) != NULL; i++, n++)
    cr_expect(strncmp(d->key, "scan.vary[].", 12) == 0, "%s", d->key);
  cr_expect_eq(n, 6, "key, from, to, count, spacing, values");
}

/* ---- the failure contract ------------------------------------------------ */

Test(params, failing_load_leaves_the_output_untouched_and_says_why) {
  const struct {
    const char *path, *override;
    jg_status status;
    const char *in_message;
  } cases[] = {
      {BAD_DIR "/hubble_negative.cfg", NULL, JG_ECONFIG, "cosmology.hubble_h"},
      /* Fails only in the final cross-check, after every value was read. */
      {BAD_DIR "/redshift_above_start.cfg", NULL, JG_ECONFIG, "output.redshifts[0]"},
      {BAD_DIR "/syntax_missing_equals.cfg", NULL, JG_ECONFIG, "syntax error"},
      {BAD_DIR "/missing_file.cfg", NULL, JG_EIO, "missing_file.cfg"},
      {REFERENCE, "cosmology.cdm_density_h2=-1", JG_ECONFIG, "cosmology.cdm_density_h2"},
      {REFERENCE, "cosmology.sigma_8=0.8", JG_ECONFIG, "unknown key"},
      {BAD_DIR "/output_units_unknown_word.cfg", NULL, JG_ECONFIG, "output.units must be one of"},
  };
  for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
    memset(&loaded, 0xA5, sizeof loaded);
    memcpy(&sentinel_copy, &loaded, sizeof loaded);
    jg_error err;
    jg_error_clear(&err);
    const char *set[] = {cases[i].override};
    jg_status st = jg_params_load(cases[i].path, set, cases[i].override ? 1 : 0, &loaded, &err);
    cr_expect_eq(st, cases[i].status, "case %zu (%s): status %d", i, cases[i].path, st);
    cr_expect_eq(err.status, st, "case %zu: the record holds the returned status", i);
    cr_expect(strstr(err.message, cases[i].in_message) != NULL,
              "case %zu: message '%s' does not mention '%s'", i, err.message,
              cases[i].in_message);
    cr_expect(memcmp(&loaded, &sentinel_copy, sizeof loaded) == 0,
              "case %zu (%s): the output struct was modified", i, cases[i].path);
  }
}

/* ---- validating a hand-filled struct ------------------------------------- */

Test(params, defaults_pass_validation) {
  jg_params_set_defaults(&expected);
  jg_error err;
  jg_error_clear(&err);
  cr_expect_eq(jg_params_validate(&expected, &err), JG_OK, "%s", err.message);
}

Test(params, validate_rejects_nan_and_infinity_anywhere) {
  struct {
    double *field;
    const char *key;
  } slots[] = {
      {&expected.cosmology.hubble_h, "cosmology.hubble_h"},
      {&expected.cosmology.de_wa, "cosmology.de_wa"},
      {&expected.thermal.rel_tol, "thermal.rel_tol"},
      {&expected.output.redshifts[3], "output.redshifts[3]"},
      {&expected.output.history_z_min, "output.history_z_min"},
  };
  const double bad[] = {NAN, INFINITY, -INFINITY};
  for (size_t s = 0; s < sizeof slots / sizeof slots[0]; s++) {
    for (size_t b = 0; b < 3; b++) {
      jg_params_set_defaults(&expected);
      *slots[s].field = bad[b];
      jg_error err;
      jg_error_clear(&err);
      jg_status st = jg_params_validate(&expected, &err);
      cr_expect_eq(st, JG_ECONFIG, "%s = %g accepted", slots[s].key, bad[b]);
      char want[128];
      snprintf(want, sizeof want, "%s must be a finite number", slots[s].key);
      cr_expect(strstr(err.message, want) != NULL, "%s = %g: message '%s'", slots[s].key, bad[b],
                err.message);
    }
  }
}

/* A hand-filled struct with a unit system outside the enum is refused,
 * not read as one of the two. */
Test(params, validate_rejects_an_unknown_unit_system) {
  jg_params_set_defaults(&expected);
  expected.output.units = (jg_output_units)2;
  jg_error err;
  jg_error_clear(&err);
  cr_expect_eq(jg_params_validate(&expected, &err), JG_ECONFIG);
  cr_expect(strstr(err.message, "output.units must be one of Mpc or Mpc/h (got choice number 2)"),
            "message: %s", err.message);
}

/* ---- documentation, loader and header agree ------------------------------ */

Test(params, documented_keys_are_unique_and_in_a_group) {
  const jg_param_doc *a, *b;
  int n = 0;
  for (int i = 0; (a = jg_param_doc_at(i)) != NULL; i++, n++) {
    cr_expect_not_null(strchr(a->key, '.'), "%s has no group", a->key);
    for (int j = 0; j < i; j++) {
      b = jg_param_doc_at(j);
      cr_expect_str_neq(a->key, b->key, "%s documented twice", a->key);
    }
  }
  cr_expect_gt(n, 0);
  cr_expect_null(jg_param_doc_at(-1));
}

/* Each combined rule that `jeansgrow keys` lists is enforced, by a message
 * that names its keys, and names only documented keys; a rule added to the
 * table without a case here fails the count at the end. The violations
 * follow the table's order. */
Test(params, every_listed_combined_rule_is_enforced_naming_its_keys) {
  enum { N_RULES = 9 };
  for (int i = 0; i < N_RULES; i++) {
    const jg_param_rule *r = jg_param_rule_at(i);
    cr_assert_not_null(r, "rule %d is missing", i);
    jg_params_set_defaults(&loaded);
    jg_perturb_settings *pt = &loaded.perturbations;
    switch (i) {
    case 0: loaded.output.redshifts[0] = loaded.thermal.start_redshift + 1.0; break;
    case 1: loaded.cosmology.de_w0 = -0.2, loaded.cosmology.de_wa = 0.6; break;
    case 2: pt->k_min = 10.0, pt->k_max = 5.0; break;
    case 3: pt->k_count = 1, pt->k_min = 10.0, pt->k_max = 20.0; break;
    case 4: loaded.output.redshifts[0] = pt->z_initial = 6000.0; break;
    case 5:
      snprintf(pt->initial_columns, sizeof pt->initial_columns, "k delta_b theta_b");
      pt->initial_gauge = JG_TABLE_SYNCHRONOUS;
      break;
    case 6:
      snprintf(pt->initial_table, sizeof pt->initial_table, "start.csv");
      snprintf(pt->initial_columns, sizeof pt->initial_columns, "k delta_c delta_b");
      snprintf(pt->initial_second_table, sizeof pt->initial_second_table, "later.csv");
      pt->initial_second_redshift = pt->z_initial;
      break;
    case 7:
      loaded.output.redshifts[0] = 20.0, loaded.output.n_redshifts = 1, pt->z_initial = 1000.0;
      snprintf(pt->initial_table, sizeof pt->initial_table, "start.csv");
      snprintf(pt->initial_columns, sizeof pt->initial_columns, "k b_over_c rate_b");
      break;
    case 8: loaded.output.history_z_min = loaded.thermal.start_redshift; break;
    }
    jg_error err;
    jg_error_clear(&err);
    cr_expect_eq(jg_params_validate(&loaded, &err), JG_ECONFIG, "rule '%s' not enforced",
                 r->rule);
    char keys[256];
    snprintf(keys, sizeof keys, "%s", r->keys);
    char *save = NULL;
    for (char *key = strtok_r(keys, ", ", &save); key; key = strtok_r(NULL, ", ", &save)) {
      int documented = 0;
      const jg_param_doc *d;
      for (int j = 0; (d = jg_param_doc_at(j)) != NULL; j++) documented |= !strcmp(d->key, key);
      cr_expect(documented, "rule '%s' names %s, which is not a key", r->rule, key);
      const char *last = strrchr(key, '.') + 1;
      cr_expect_not_null(strstr(err.message, last), "rule '%s': message '%s' does not name %s",
                         r->rule, err.message, last);
    }
  }
  cr_expect_null(jg_param_rule_at(N_RULES), "a rule without a case in this test");
  cr_expect_null(jg_param_rule_at(-1));
}

/* Every key, set through an override to the text its documentation gives as
 * the default, must load, and must give exactly the default parameter set:
 * so the docs name real keys, in syntax the loader reads, with the values
 * jg_params_set_defaults really uses. */
Test(params, every_documented_default_loads_and_equals_the_real_default) {
  const char *minimal = temp_file("minimal.cfg", minimal_text);
  jg_params_set_defaults(&expected);
  char *want = header_of(&expected);
  const jg_param_doc *d;
  int checked = 0;
  for (int i = 0; (d = jg_param_doc_at(i)) != NULL; i++) {
    if (strcmp(d->default_text, "required") == 0) continue;
    char text[1024];
    snprintf(text, sizeof text, "%s=%s", d->key, d->default_text);
    const char *set[] = {text};
    jg_error err;
    jg_error_clear(&err);
    jg_status st = jg_params_load(minimal, set, 1, &loaded, &err);
    cr_expect_eq(st, JG_OK, "--set %s rejected: %s", text, err.message);
    if (st != JG_OK) continue;
    char *got = header_of(&loaded);
    cr_expect_str_eq(got, want, "--set %s does not give the default parameter set", text);
    free(got);
    checked++;
  }
  cr_expect_gt(checked, 0);
  free(want);
}

/* The header records "the full effective parameter set" in the file's own
 * syntax: fed back as overrides it must give the same set. Non-default
 * values make the check meaningful. */
Test(params, header_lines_read_back_as_the_same_parameters) {
  const char *changes[] = {"cosmology.hubble_h=0.7",
                           "cosmology.curvature_omega=0.01",
                           "thermal.rel_tol=3e-9",
                           "thermal.grid_points=5000",
                           "output.redshifts=[900.0, 0.1, 12.5]",
                           "output.history_z_min=0.5",
                           "output.units=\"Mpc/h\"",
                           /* a file name with a quote, a backslash and a space */
                           "perturbations.initial_table=\"run \\\"7\\\"\\\\a.txt\""};
  load_ok(REFERENCE, changes, (int)(sizeof changes / sizeof changes[0]), &expected);
  char *header = header_of(&expected);

  const char *overrides[256];
  int n = 0;
  char *copy = strdup(header);
  char *save = NULL;
  for (char *line = strtok_r(copy, "\n", &save); line; line = strtok_r(NULL, "\n", &save)) {
    cr_assert(strncmp(line, "# ", 2) == 0, "header line: %s", line);
    char *eq = strstr(line, " = ");
    cr_assert_not_null(eq, "header line: %s", line);
    /* "# key = value;" -> "key=value;" */
    memmove(eq + 1, eq + 3, strlen(eq + 3) + 1);
    *eq = '=';
    cr_assert_lt(n, 256);
    overrides[n++] = line + 2;
  }
  load_ok(temp_file("minimal.cfg", minimal_text), overrides, n, &loaded);
  char *again = header_of(&loaded);
  cr_expect_str_eq(again, header);
  cr_expect_str_eq(loaded.perturbations.initial_table, "run \"7\"\\a.txt");
  free(again);
  free(copy);
  free(header);
}

/* ---- one source for every range ------------------------------------------ */

/* The numeric bounds written in a key's allowed text ("0 < value <= 5",
 * "..., each 1 <= k <= 1e5") must be the ones the table enforces; a bound
 * written as another key ("k_min <= value") is a combined rule instead. */
static void expect_text_matches_range(const jg_param_doc *d, const jg_param_range *r) {
  const char *text = strstr(d->allowed, ", each ");
  text = text ? text + strlen(", each ") : d->allowed;
  char left[64], op1[4], name[64], op2[4], right[64];
  if (sscanf(text, "%63s %3s %63s %3s %63[^ ,]", left, op1, name, op2, right) != 5) {
    cr_expect(strstr(d->type, "one of") != NULL || strcmp(d->type, "boolean") == 0,
              "%s: allowed text '%s' not of the form A < x < B",
              d->key, d->allowed);
    return;
  }
  char *end;
  double lo = strtod(left, &end);
  if (*end == '\0') {
    cr_expect_eq(lo, r->lo, "%s: text says %s, table %g", d->key, left, r->lo);
    cr_expect_eq(r->lo_open, strcmp(op1, "<") == 0, "%s: text says '%s'", d->key, op1);
  }
  double hi = strtod(right, &end);
  if (*end == '\0') {
    cr_expect_eq(hi, r->hi, "%s: text says %s, table %g", d->key, right, r->hi);
    cr_expect_eq(r->hi_open, strcmp(op2, "<") == 0, "%s: text says '%s'", d->key, op2);
  }
}

/* Values just outside and just inside a range's bounds (whole numbers for
 * integer and word keys). */
static int probes(const jg_param_range *r, int whole, double *outside, double *inside) {
  int n = 0;
  if (isfinite(r->lo)) {
    outside[n] = r->lo_open ? r->lo : whole ? r->lo - 1 : nextafter(r->lo, -INFINITY);
    inside[n++] = r->lo_open ? (whole ? r->lo + 1 : nextafter(r->lo, INFINITY)) : r->lo;
  }
  if (isfinite(r->hi)) {
    outside[n] = r->hi_open ? r->hi : whole ? r->hi + 1 : nextafter(r->hi, INFINITY);
    inside[n++] = r->hi_open ? (whole ? r->hi - 1 : nextafter(r->hi, -INFINITY)) : r->hi;
  }
  return n;
}

static int medium_never_used(const void *ctx, double ln_a, jg_medium_coefficients *out) {
  (void)ctx, (void)ln_a, (void)out;
  return 1;
}

/* A medium a model can be built on (the streaming model needs one). */
static int medium_still(const void *ctx, double ln_a, jg_medium_coefficients *out) {
  (void)ctx, (void)ln_a;
  memset(out, 0, sizeof *out);
  out->dlnH_dlna = -1.5;
  return 0;
}

static double still_hubble(const void *ctx, double ln_a) {
  (void)ctx;
  return exp(-0.5 * ln_a);
}

/* The stage that defends `key` builds with `value` put in; NULL when it
 * would build (the stage's message otherwise, in `err`). Only values
 * outside the range are given, so every stage fails at its first check,
 * before any work. */
static const char *stage_refusal(const char *key, double value, jg_error *err) {
  jg_params_set_defaults(&loaded);
  jg_error_clear(err);
  int whole = strcmp(key, "perturbations.sound_speed") == 0 ||
              strcmp(key, "perturbations.stepper") == 0 ||
              strcmp(key, "perturbations.ionisation_perturbation") == 0 ||
              strcmp(key, "thermal.reionisation") == 0;
  if (whole) {
    if (strcmp(key, "perturbations.stepper") == 0) loaded.perturbations.stepper = (int)value;
    else if (strcmp(key, "perturbations.ionisation_perturbation") == 0)
      loaded.perturbations.ionisation_perturbation = (int)value;
    else if (strcmp(key, "thermal.reionisation") == 0) loaded.thermal.reionisation = (int)value;
    else loaded.perturbations.sound_speed = (int)value;
  } else if (strcmp(key, "perturbations.k_values") == 0) {
    loaded.perturbations.n_k_values = 1;
    loaded.perturbations.k_values[0] = value;
  } else {
    cr_assert_eq(jg_params_set_number(&loaded, key, value, err), JG_OK, "%s", err->message);
  }
  if (strncmp(key, "cosmology.", 10) == 0) {
    jg_background *bg = jg_background_new(&loaded.cosmology, err);
    jg_background_free(bg);
    return bg ? NULL : err->message;
  }
  if (strncmp(key, "thermal.", 8) == 0) {
    jg_params defaults;
    jg_params_set_defaults(&defaults);
    jg_background *bg = jg_background_new(&defaults.cosmology, err);
    cr_assert_not_null(bg, "%s", err->message);
    jg_thermal *th = jg_thermal_new(bg, &loaded.thermal, err);
    cr_assert_null(th, "%s = %.17g: the thermal history was built", key, value);
    jg_background_free(bg);
    return err->message;
  }
  if (strncmp(key, "perturbations.k_", 16) == 0) {
    static double k[JG_MAX_WAVENUMBERS];
    int n = 0;
    return jg_perturb_wavenumbers(&loaded.perturbations, k, &n, err) == JG_OK ? NULL
                                                                             : err->message;
  }
  if (strncmp(key, "streaming.", 10) == 0) {
    jg_medium still = {medium_still, NULL, 0.0, -10.0, 0.0, 0.0, 1e30, 1.0};
    jg_perturb_model *m = jg_perturb_model_new_medium(&still, &loaded.perturbations, NULL, err);
    cr_assert_not_null(m, "%s", err->message);
    jg_stream_model *sm = jg_stream_model_new_flow(m, &loaded.streaming, still_hubble, NULL, err);
    cr_assert_null(sm, "%s = %.17g: the streaming model was built", key, value);
    jg_perturb_model_free(m);
    return err->message;
  }
  jg_medium medium = {medium_never_used, NULL, 0.0, -10.0, 0.0, 0.0, 1e30, 1.0};
  jg_perturb_model *m = jg_perturb_model_new_medium(&medium, &loaded.perturbations, NULL, err);
  cr_assert_null(m, "%s = %.17g: the model was built", key, value);
  return err->message;
}

/* Every range and combined rule lives in the key table, and the stages that
 * defend their own inputs (a program can bypass the loader) use it: for
 * every key, a value just outside its range is refused by the loader and
 * by the stage that reads it, with the same words, and a value just inside
 * passes both checks. The written range agrees with the enforced one. */
Test(params, every_range_is_the_one_the_stages_check) {
  /* Keys no stage reads as a range of its own: the output choices are the
   * program's; z_initial is bounded by the medium a model is built on (an
   * analytic test medium may start anywhere); the table name is a file, and
   * its layout keys are read only with a table (the table reader checks the
   * three words with jg_params_check_value; tests/test_perturb.c). */
  static const char *const loader_only[] = {
      "perturbations.z_initial", "perturbations.initial_table", "perturbations.initial_columns",
      "perturbations.initial_k_unit", "perturbations.initial_separator",
      "perturbations.initial_gauge", "perturbations.initial_second_table",
      "perturbations.initial_second_redshift", "output.redshifts",
      "output.history_rows",     "output.history_z_min",        "output.units",
      "output.mass_radius",
      "thermal.heating_table",   "thermal.ionisation_table", NULL};
  const jg_param_doc *d;
  int stage_keys = 0;
  for (int i = 0; (d = jg_param_doc_at(i)) != NULL; i++) {
    int only_loader = 0;
    for (int j = 0; loader_only[j]; j++) only_loader |= strcmp(loader_only[j], d->key) == 0;
    jg_param_range file, stage;
    int has_range = jg_params_key_range(d->key, 0, &file);
    int is_list = strncmp(d->type, "list", 4) == 0;
    if (is_list) {
      char element[128];
      snprintf(element, sizeof element, "%s[0]", d->key);
      has_range = jg_params_key_range(element, 0, &file) && jg_params_key_range(element, 1, &stage);
    } else if (has_range) {
      cr_assert(jg_params_key_range(d->key, 1, &stage));
    }
    if (!has_range) {
      cr_expect(only_loader, "%s has no range and is not listed as loader-only", d->key);
      continue;
    }
    expect_text_matches_range(d, &file);
    int is_word = strncmp(d->type, "one of", 6) == 0;
    int is_boolean = strcmp(d->type, "boolean") == 0;
    int whole = is_word || is_boolean || strcmp(d->type, "integer") == 0;
    double outside[2], inside[2];
    int n = probes(&file, whole, outside, inside);
    /* The loader's range, through a whole parameter set. */
    for (int j = 0; j < n && !is_list && !is_word && !is_boolean; j++) {
      jg_error err;
      char expected_start[160];
      snprintf(expected_start, sizeof expected_start, "%s must satisfy ", d->key);
      jg_params_set_defaults(&loaded);
      jg_error_clear(&err);
      cr_assert_eq(jg_params_set_number(&loaded, d->key, outside[j], &err), JG_OK);
      cr_expect_eq(jg_params_validate(&loaded, &err), JG_ECONFIG, "%s = %.17g accepted", d->key,
                   outside[j]);
      cr_expect(strncmp(err.message, expected_start, strlen(expected_start)) == 0, "%s",
                err.message);
      jg_params_set_defaults(&loaded);
      jg_error_clear(&err);
      cr_assert_eq(jg_params_set_number(&loaded, d->key, inside[j], &err), JG_OK);
      jg_params_validate(&loaded, &err); /* a combined rule may object, the range may not */
      cr_expect(strncmp(err.message, expected_start, strlen(expected_start)) != 0,
                "%s = %.17g refused: %s", d->key, inside[j], err.message);
    }
    if (only_loader) continue;
    /* The stage's range: the file's unless the table grants it a wider one. */
    stage_keys++;
    n = probes(&stage, whole, outside, inside);
    for (int j = 0; j < n; j++) {
      char name[128];
      snprintf(name, sizeof name, is_list ? "%s[0]" : "%s", d->key);
      jg_error table_err, stage_err;
      jg_error_clear(&table_err);
      cr_expect_eq(jg_params_check_value(name, outside[j], &table_err), JG_EINVAL);
      const char *refusal = stage_refusal(d->key, outside[j], &stage_err);
      cr_expect_not_null(refusal, "%s = %.17g: the stage accepts it", d->key, outside[j]);
      if (refusal) {
        cr_expect_eq(stage_err.status, JG_EINVAL, "%s: %s", d->key, refusal);
        cr_expect_str_eq(refusal, table_err.message);
      }
      jg_error_clear(&table_err);
      cr_expect_eq(jg_params_check_value(name, inside[j], &table_err), JG_OK, "%s = %.17g: %s",
                   d->key, inside[j], table_err.message);
    }
    /* A wider stage domain holds the file's range. */
    cr_expect(stage.lo <= file.lo && stage.hi >= file.hi, "%s: the stage refuses file values",
              d->key);
  }
  cr_expect_geq(stage_keys, 20, "the stages defend fewer keys than expected");
}
