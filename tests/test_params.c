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
  const char *files[] = {"minimal.cfg", "bom.cfg", NULL};
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
