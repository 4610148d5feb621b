/*
 * The library as a host program embeds it: NULL error records everywhere,
 * the opaque parameter object and its setters by key, the universe's
 * tables against the program's, the version, and inputs that would make
 * GSL abort the host if they reached it.
 */
#include <criterion/criterion.h>
#include <gsl/gsl_errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "jeansgrow/jeansgrow.h"
#include "support.h"

#define REFERENCE JG_SOURCE_DIR "/params/reference.cfg"

/* A small real cosmology: the reference one with two redshifts and three
 * wavenumbers, so that every stage runs in a few milliseconds. */
typedef struct stages {
  jg_params p;
  jg_background *bg;
  jg_thermal *th;
  jg_perturb_model *m;
  jg_perturb_workspace *w;
} stages;

static void stages_build(stages *s) {
  jg_params_set_defaults(&s->p);
  s->p.output.n_redshifts = 2;
  s->p.output.redshifts[0] = 200.0;
  s->p.output.redshifts[1] = 20.0;
  s->p.perturbations.k_count = 3;
  s->p.perturbations.k_min = 10.0;
  s->p.perturbations.k_max = 1000.0;
  s->bg = jg_background_new(&s->p.cosmology, NULL);
  cr_assert_not_null(s->bg);
  s->th = jg_thermal_new(s->bg, &s->p.thermal, NULL);
  cr_assert_not_null(s->th);
  s->m = jg_perturb_model_new(s->th, &s->p.perturbations, NULL, NULL);
  cr_assert_not_null(s->m);
  s->w = jg_perturb_workspace_new(s->m, NULL);
  cr_assert_not_null(s->w);
}

static void stages_free(stages *s) {
  jg_perturb_workspace_free(s->w);
  jg_perturb_model_free(s->m);
  jg_thermal_free(s->th);
  jg_background_free(s->bg);
}

/* ---- null_error: every public function that takes a jg_error *, called
 * with NULL on a path where it fails (and the constructors also where they
 * succeed, above). tests/check_public_api.py checks that none is missing. */

TestSuite(null_error, .init = quiet_gsl);

Test(null_error, base) {
  jg_error e;
  jg_error_clear(NULL);
  jg_error_clear(&e);
  cr_assert_eq(jg_error_set(NULL, JG_EIO, __FILE__, __LINE__, "x %d", 1), JG_EIO);
  jg_params p;
  jg_params_set_defaults(&p);
  cr_assert_eq(jg_params_load("/nonexistent/file.cfg", NULL, 0, &p, NULL), JG_EIO);
  jg_params bad = p;
  bad.cosmology.hubble_h = -1.0;
  cr_assert_neq(jg_params_validate(&bad, NULL), JG_OK);
  jg_cosmology bad_c = p.cosmology;
  bad_c.hubble_h = NAN;
  cr_assert_eq(jg_params_check_cosmology(&bad_c, NULL), JG_EINVAL);
  jg_thermal_settings bad_t = p.thermal;
  bad_t.rel_tol = -1.0;
  cr_assert_eq(jg_params_check_thermal(&bad_t, NULL), JG_EINVAL);
  jg_perturb_settings bad_k = p.perturbations;
  bad_k.k_min = 0.0;
  cr_assert_eq(jg_params_check_wavenumbers(&bad_k, NULL), JG_EINVAL);
  cr_assert_eq(jg_params_check_value("cosmology.hubble_h", 100.0, NULL), JG_EINVAL);
  cr_assert_neq(jg_params_read_scan("/nonexistent/file.cfg", NULL, NULL, NULL), JG_OK);
  cr_assert_neq(jg_params_set_number(&p, "cosmology.hubble", 0.7, NULL), JG_OK);
  cr_assert_neq(jg_params_set_text(&p, "perturbations.sound_speed", "cold", NULL), JG_OK);
  cr_assert_neq(jg_params_set_list(&p, "cosmology.hubble_h", (double[]){1.0}, 1, NULL), JG_OK);
  cr_assert_neq(jg_params_set_boolean(&p, "cosmology.hubble_h", 1, NULL), JG_OK);
  cr_assert_neq(jg_params_set_value(&p, "cosmology.hubble_h", "\"high\"", NULL), JG_OK);

  jg_config *c = NULL;
  cr_assert_eq(jg_config_new(NULL, NULL), JG_EINVAL);
  cr_assert_eq(jg_config_load("/nonexistent/file.cfg", NULL, 0, &c, NULL), JG_EIO);
  cr_assert_null(c);
  cr_assert_eq(jg_config_copy(NULL, &c, NULL), JG_EINVAL);
  cr_assert_eq(jg_config_new(&c, NULL), JG_OK);
  cr_assert_neq(jg_config_set_value(c, "cosmology.hubble_h", "[1.0]", NULL), JG_OK);
  cr_assert_neq(jg_config_set_number(c, "thermal.grid_points", 0.5, NULL), JG_OK);
  cr_assert_neq(jg_config_set_text(c, "output.units", "furlongs", NULL), JG_OK);
  cr_assert_neq(jg_config_set_list(c, "output.units", (double[]){1.0}, 1, NULL), JG_OK);
  cr_assert_neq(jg_config_set_boolean(c, "output.redshifts", 0, NULL), JG_OK);
  cr_assert_eq(jg_config_set_number(c, "cosmology.hubble_h", -1.0, NULL), JG_OK);
  cr_assert_neq(jg_config_validate(c, NULL), JG_OK);
  jg_config_free(c);

  jg_output *o = NULL;
  cr_assert_neq(jg_output_open("/nonexistent/folder/table.txt", &o, NULL), JG_OK);
  char committed[] = "/tmp/jg_embed_output_XXXXXX";
  close(mkstemp(committed));
  cr_assert_eq(jg_output_open(committed, &o, NULL), JG_OK);
  cr_assert_eq(jg_output_commit(o, NULL), JG_OK);
  unlink(committed);
  FILE *f = tmpfile();
  cr_assert_eq(jg_table_write_row(f, (double[]){NAN}, 1, (const char *const[]){"x"}, NULL),
               JG_ENUMERIC);
  fclose(f);
  char **lines = NULL;
  int n_lines = 0;
  FILE *unreadable = fopen("/dev/null", "w"); /* open for writing only */
  cr_assert_neq(jg_table_read_header(unreadable, "null", &lines, &n_lines, NULL), JG_OK);
  fclose(unreadable);
  cr_assert_neq(jg_table_check_row("1.0\tx\n", 6, 2, "t.txt", 3, NULL), JG_OK);
}

Test(null_error, history) {
  jg_cosmology c;
  jg_params p;
  jg_params_set_defaults(&p);
  c = p.cosmology;
  c.hubble_h = NAN;
  cr_assert_null(jg_background_new(&c, NULL));
  stages s;
  stages_build(&s);
  double v = 0.0, v2 = 0.0;
  cr_assert_neq(jg_background_cosmic_time(s.bg, -1.0, &v, NULL), JG_OK);
  cr_assert_neq(jg_background_conformal_time(s.bg, -1.0, &v, NULL), JG_OK);
  cr_assert_neq(jg_background_comoving_distance(s.bg, -2.0, &v, NULL), JG_OK);
  cr_assert_neq(jg_background_transverse_distance(s.bg, -2.0, &v, NULL), JG_OK);
  cr_assert_neq(jg_background_sound_horizon(s.bg, -2.0, &v, NULL), JG_OK);
  cr_assert_neq(jg_background_growth_heath(s.bg, -1.0, &v, NULL), JG_OK);
  cr_assert_neq(jg_background_growth_factor(s.bg, -1.0, &v, &v2, NULL), JG_OK);
  jg_thermal_settings t = s.p.thermal;
  t.grid_points = 0;
  cr_assert_null(jg_thermal_new(s.bg, &t, NULL));
  jg_thermal_settings missing_table = s.p.thermal;
  snprintf(missing_table.heating_table, sizeof missing_table.heating_table,
           "/nonexistent/heating.txt");
  cr_assert_null(jg_thermal_new(s.bg, &missing_table, NULL));
  missing_table = s.p.thermal;
  snprintf(missing_table.ionisation_table, sizeof missing_table.ionisation_table,
           "/nonexistent/ionisation.txt");
  cr_assert_null(jg_thermal_new(s.bg, &missing_table, NULL));
  /* Absent epochs are not failures: the success path, where the search
   * for each epoch reads its own status back. */
  cr_assert_eq(jg_epochs_compute(s.th, &(jg_epochs){0}, NULL), JG_OK);
  stages_free(&s);
}

Test(null_error, perturbations) {
  stages s;
  stages_build(&s);
  jg_perturb_settings ps = s.p.perturbations;
  snprintf(ps.initial_table, sizeof ps.initial_table, "/nonexistent/start.txt");
  cr_assert_null(jg_perturb_model_new(s.th, &ps, NULL, NULL));
  cr_assert_null(jg_perturb_model_new_until(s.th, &s.p.perturbations, NULL, -1.0, NULL));
  cr_assert_neq(jg_perturb_check_start_table(&ps, NULL), JG_OK);
  cr_assert_null(jg_perturb_start_table_read("/nonexistent/start.txt", NULL));
  char good_table[] = "/tmp/jg_embed_start_XXXXXX";
  int good = mkstemp(good_table);
  cr_assert_eq(write(good, "10.0 0.1 0.2\n100.0 0.1 0.2\n", 27), 27);
  close(good);
  jg_perturb_start_table *t = jg_perturb_start_table_read(good_table, NULL);
  cr_assert_not_null(t);
  jg_perturb_start start;
  cr_assert_neq(jg_perturb_start_table_at(t, 1e4, &start, NULL), JG_OK); /* outside its rows */
  jg_perturb_start_table_free(t);
  unlink(good_table);
  char bad_table[] = "/tmp/jg_embed_start_XXXXXX";
  int fd = mkstemp(bad_table);
  cr_assert_geq(fd, 0);
  cr_assert_eq(write(fd, "1.0 0.1\n", 8), 8);
  close(fd);
  cr_assert_null(jg_perturb_start_table_read(bad_table, NULL));
  const jg_perturb_table_frame frame = {1.0, 1.0, 1.0};
  cr_assert_null(jg_perturb_start_table_read_layout(bad_table, &ps, &frame, NULL));
  cr_assert_null(jg_perturb_start_table_read_layout(bad_table, &ps, NULL, NULL));
  jg_column_map map;
  char why[128];
  cr_assert_eq(jg_column_map_parse("k delta_c delta_b", &map, why, sizeof why), JG_OK);
  cr_assert_neq(jg_table_read_mapped("/nonexistent/table.txt", &map, JG_TABLE_BLANKS, 0,
                                     NULL, NULL, NULL, NULL),
                JG_OK);
  jg_compare_layout layout = {.k_unit = JG_TABLE_K_PER_MPC};
  jg_comparison *comparison = NULL;
  cr_assert_neq(jg_compare_tables(bad_table, "/nonexistent/reference.txt", &layout, &comparison,
                                  NULL),
                JG_OK);
  cr_assert_null(comparison);
  unlink(bad_table);
  cr_assert_null(jg_perturb_model_new_medium(NULL, &s.p.perturbations, NULL, NULL));
  cr_assert_null(jg_perturb_workspace_new(NULL, NULL));
  cr_assert_neq(jg_perturb_check_wavenumber(s.m, 1e9, NULL), JG_OK);
  double z[] = {20.0}, y[11] = {0}, f[121];
  jg_perturb_point pt[8];
  jg_perturb_limit lim;
  cr_assert_neq(jg_perturb_solve(s.m, s.w, 1e9, z, 1, pt, NULL), JG_OK);
  cr_assert_neq(jg_perturb_solve_many(s.m, s.w, (double[]){1e9}, 1, z, 1, pt, NULL), JG_OK);
  cr_assert_neq(jg_perturb_solve_limit(s.m, s.w, (double[]){-5.0}, 1, &lim, NULL), JG_OK);
  cr_assert_neq(jg_perturb_rhs(s.m, JG_PERTURB_SYSTEM_MODE, 100.0, NAN, y, f, NULL), JG_OK);
  cr_assert_neq(jg_perturb_jacobian(s.m, JG_PERTURB_SYSTEM_MODE, 100.0, NAN, y, f, NULL), JG_OK);
  double k[JG_MAX_WAVENUMBERS];
  int n_k = 0;
  jg_perturb_settings bad_k = s.p.perturbations;
  bad_k.k_count = 0;
  cr_assert_neq(jg_perturb_wavenumbers(&bad_k, k, &n_k, NULL), JG_OK);
  stages_free(&s);
}

Test(null_error, results) {
  stages s;
  stages_build(&s);
  double z_bad[] = {-5.0};
  jg_scales_point sp[1];
  cr_assert_neq(jg_scales_compute(s.m, s.w, z_bad, 1, sp, NULL), JG_OK);
  cr_assert_neq(jg_scales_compute_from_limit(s.m, s.w, z_bad, 1, NULL, sp, NULL), JG_OK);
  double k_half = 0.0;
  int found = 0;
  cr_assert_neq(jg_scales_half_suppression(s.m, s.w, -5.0, 0.5, 10.0, &k_half, &found, NULL),
                JG_OK);
  jg_growth_grid *g = NULL;
  cr_assert_neq(jg_growth_grid_compute(s.m, s.w, (double[]){1e9}, 1, z_bad, 1, &g, NULL), JG_OK);
  cr_assert_null(g);
  cr_assert_neq(jg_growth_grid_compute_threads(s.m, s.w, (double[]){1.0}, 1, s.p.output.redshifts,
                                               1, 0, &g, NULL),
                JG_OK);
  double k_bad[17];
  for (int i = 0; i < 17; i++) k_bad[i] = i == 12 ? 1e9 : 1.0 + i;
  cr_assert_neq(jg_growth_grid_compute_threads(s.m, s.w, k_bad, 17, s.p.output.redshifts, 1, 2,
                                               &g, NULL),
                JG_OK);
  cr_assert_null(g);
  cr_assert_null(jg_growth_grid_job_new(s.m, (double[]){1.0}, 0, z_bad, 1, NULL, NULL));
  cr_assert_eq(jg_growth_grid_compute(s.m, s.w, (double[]){1.0}, 0, z_bad, 1, &g, NULL),
               JG_EINVAL);
  jg_growth_grid_job *job = jg_growth_grid_job_new(s.m, (double[]){1.0}, 1, s.p.output.redshifts,
                                                   1, NULL, NULL);
  cr_assert_not_null(job);
  cr_assert_neq(jg_growth_grid_job_result(job, &g, NULL), JG_OK); /* nobody worked on it */
  cr_assert_null(g);
  jg_growth_grid_job_free(job);
  /* The reports refuse what is not finite. */
  FILE *sink = tmpfile();
  jg_params no_end = s.p;
  no_end.output.history_z_min = NAN;
  cr_assert_neq(jg_report_history(sink, &no_end, s.th, NULL), JG_OK);
  jg_epochs e;
  cr_assert_eq(jg_epochs_compute(s.th, &e, NULL), JG_OK);
  e.age_Gyr = NAN;
  cr_assert_neq(jg_report_epochs(sink, &s.p, &e, NULL), JG_OK);
  jg_scales_point two[2];
  cr_assert_eq(jg_scales_compute(s.m, s.w, s.p.output.redshifts, 2, two, NULL), JG_OK);
  two[1].k_half = NAN;
  cr_assert_neq(jg_report_scales(sink, &s.p, s.th, two, 2, NULL), JG_OK);
  cr_assert_eq(jg_growth_grid_compute(s.m, s.w, (double[]){10.0}, 1, s.p.output.redshifts, 2, &g,
                                      NULL),
               JG_OK);
  g->points[0].delta_b = NAN;
  cr_assert_neq(jg_report_growth(sink, &s.p, s.th, g, NULL), JG_OK);
  cr_assert_neq(jg_report_growth_rows(sink, &s.p, s.th, g, 0, 1, NULL), JG_OK);
  /* and rows it does not have (two: one wavenumber, two redshifts) */
  cr_assert_neq(jg_report_growth_rows(sink, &s.p, s.th, g, 1, 3, NULL), JG_OK);
  jg_growth_grid_free(g);
  fclose(sink);

  jg_config *c = NULL;
  jg_universe *u = NULL;
  cr_assert_eq(jg_config_new(&c, NULL), JG_OK);
  cr_assert_eq(jg_config_set_number(c, "cosmology.hubble_h", 9.0, NULL), JG_OK);
  cr_assert_neq(jg_universe_new(c, &u, NULL), JG_OK);
  cr_assert_null(u);
  cr_assert_eq(jg_config_set_number(c, "cosmology.hubble_h", 0.7, NULL), JG_OK);
  cr_assert_eq(jg_config_set_text(c, "perturbations.initial_table", "/nonexistent/start.txt", NULL),
               JG_OK);
  cr_assert_eq(jg_universe_new(c, &u, NULL), JG_OK);
  char *text = NULL;
  cr_assert_eq(jg_universe_table(u, JG_TABLE_SCALES, NULL, 0, NULL, 0, &text, NULL, NULL),
               JG_ECONFIG);
  cr_assert_eq(jg_universe_write(u, JG_TABLE_EPOCHS, (double[]){-1.0}, 1, NULL, 0, stdout, NULL),
               JG_EINVAL);
  cr_assert_null(text);
  jg_universe_free(u);
  jg_config_free(c);
  stages_free(&s);
}

static jg_status count_axis(void *user, const jg_param_axis *axis, jg_error *err) {
  (void)axis;
  (void)err;
  ++*(int *)user;
  return JG_OK;
}

Test(null_error, scan) {
  jg_scan_grid g = {0};
  cr_assert_neq(jg_scan_grid_parse(&g, "cosmology.hubble_h=1:0:3", NULL, NULL), JG_OK);
  cr_assert_neq(jg_scan_grid_add_range(&g, "cosmology.nothing", 0.5, 0.6, 2, JG_SCAN_LINEAR, NULL,
                                       NULL),
                JG_OK);
  cr_assert_neq(jg_scan_grid_add_list(&g, "cosmology.hubble_h", (double[]){0.5}, 0, NULL, NULL),
                JG_OK);
  cr_assert_neq(jg_scan_grid_read_file(&g, "/nonexistent/file.cfg", NULL), JG_OK);
  int axes = 0;
  cr_assert_eq(jg_params_read_scan(REFERENCE, count_axis, &axes, NULL), JG_OK);
  jg_params p;
  jg_params_set_defaults(&p);
  p.output.n_redshifts = 1;
  p.output.redshifts[0] = 20.0;
  cr_assert_eq(jg_scan_grid_parse(&g, "cosmology.hubble_h=[0.6, 0.7]", NULL, NULL), JG_OK);
  jg_scan_grid unknown = {.n_axes = 1};
  snprintf(unknown.axes[0].key, JG_SCAN_KEY_SIZE, "output.no_such_key");
  unknown.axes[0].count = 1;
  cr_assert_neq(jg_scan_grid_apply(&unknown, 0, &p, NULL), JG_OK);
  jg_scan *s = NULL;
  const jg_scan_evaluator *ev = jg_scan_evaluator_thermal();
  cr_assert_neq(jg_scan_new(&p, &g, ev, 3, 2, &s, NULL), JG_OK);
  cr_assert_eq(jg_scan_new(&p, &g, ev, 1, 1, &s, NULL), JG_OK);
  void *w = jg_scan_workspace_new(s, NULL);
  double values[16];
  cr_assert_neq(jg_scan_evaluate(s, 99, w, values, NULL), JG_OK);
  jg_scan_workspace_free(s, w);
  jg_scan_checkpoint *cp = NULL;
  cr_assert_neq(jg_scan_checkpoint_open(s, "/nonexistent/folder/c.checkpoint", 0, &cp, NULL),
                JG_OK);
  cr_assert_eq(jg_scan_checkpoint_open(s, NULL, 0, &cp, NULL), JG_OK);
  cr_assert_neq(jg_scan_checkpoint_add(cp, 99, JG_OK, values, "", NULL), JG_OK);
  FILE *f = tmpfile();
  cr_assert_neq(jg_scan_write_table(s, cp, f, NULL), JG_OK);
  cr_assert_neq(jg_scan_run(s, cp, 0, NULL, NULL, NULL), JG_OK);
  jg_scan_slice_feed *feed = NULL;
  cr_assert_eq(jg_scan_slice_feed_new(s, cp, NULL, NULL, &feed, NULL), JG_OK);
  jg_scan_slice_feed_stop(feed);
  cr_assert_eq(jg_scan_slice_feed_free(feed, NULL), JG_OK);
  jg_scan_runner *r = NULL;
  jg_scan_feed none = {0};
  cr_assert_neq(jg_scan_runner_start(s, 0, &none, &r, NULL), JG_OK);
  stages st;
  stages_build(&st);
  /* It fails only when a search inside GSL does: the success path. */
  cr_assert_eq(jg_scan_thermal_columns(st.th, &p, values, values + 3, 4, NULL), JG_OK);
  stages_free(&st);
  const char *missing[] = {"/nonexistent/slice.txt"};
  cr_assert_neq(jg_scan_merge(missing, 1, f, NULL), JG_OK);
  fclose(f);
  jg_scan_checkpoint_close(cp, 1);
  jg_scan_free(s);
  jg_scan_grid_clear(&g);
  jg_config *c = NULL;
  cr_assert_eq(jg_config_new(&c, NULL), JG_OK);
  char *text = NULL;
  cr_assert_eq(jg_config_scan(c, (const char *const[]){"cosmology.hubble_h=1:0:3"}, 1, 1, &text,
                              NULL, NULL, NULL),
               JG_EINVAL);
  cr_assert_null(text);
  jg_config_free(c);
}

Test(null_error, streaming) {
  stages s;
  stages_build(&s);
  jg_streaming_settings bad = s.p.streaming;
  bad.velocity_nodes = 0; /* outside the key table */
  cr_assert_null(jg_stream_model_new(s.m, &bad, NULL));
  cr_assert_null(jg_stream_model_new(NULL, &s.p.streaming, NULL));
  cr_assert_null(jg_stream_model_new_flow(s.m, &bad, NULL, NULL, NULL));
  jg_streaming_settings on = s.p.streaming;
  on.rms_velocity_kms = 30.0;
  jg_stream_model *sm = jg_stream_model_new(s.m, &on, NULL);
  cr_assert_not_null(sm);
  const double k = 100.0, z_bad = -5.0, v = 1.0;
  jg_stream_state state;
  jg_stream_power power;
  double k2;
  cr_assert_neq(jg_stream_solve(sm, s.w, k, &v, 1, &z_bad, 1, &state, NULL), JG_OK);
  cr_assert_neq(jg_stream_powers(sm, s.w, &k, 1, &z_bad, 1, 1, &power, NULL), JG_OK);
  cr_assert_neq(jg_stream_limit(sm, s.w, &z_bad, 1, &k2, NULL), JG_OK);
  jg_stream_model_free(sm);
  jg_scales_point sp[1];
  cr_assert_neq(jg_scales_add_streaming(s.m, s.w, &bad, &z_bad, 1, sp, NULL), JG_OK);
  jg_growth_grid *g = NULL;
  cr_assert_eq(jg_growth_grid_compute(s.m, s.w, &k, 1, s.p.output.redshifts, 2, &g, NULL), JG_OK);
  cr_assert_neq(jg_growth_grid_add_streaming(g, s.m, s.w, &bad, NULL), JG_OK);
  jg_growth_grid_free(g);
  stages_free(&s);
}

/* ---- end of null_error ---- */

/* ---- the parameter object and the setters by key ---- */

TestSuite(config, .init = quiet_gsl);

Test(config, every_kind_of_value_is_set_by_key_with_the_loader_messages) {
  jg_config *c = NULL;
  jg_error e;
  jg_error_clear(&e);
  cr_assert_eq(jg_config_load(REFERENCE, NULL, 0, &c, &e), JG_OK, "%s", e.message);
  cr_assert_eq(jg_config_set_number(c, "cosmology.hubble_h", 0.7, &e), JG_OK);
  cr_assert_eq(jg_config_set_number(c, "thermal.grid_points", 800, &e), JG_OK);
  cr_assert_eq(jg_config_set_text(c, "perturbations.sound_speed", "adiabatic", &e), JG_OK);
  cr_assert_eq(jg_config_set_text(c, "output.units", "Mpc/h", &e), JG_OK);
  cr_assert_eq(jg_config_set_list(c, "output.redshifts", (double[]){300.0, 30.0}, 2, &e), JG_OK);
  cr_assert_eq(jg_config_set_list(c, "perturbations.k_values", NULL, 0, &e), JG_OK);
  cr_assert_eq(jg_config_set_value(c, "cosmology.cdm_density_h2", "0.11", &e), JG_OK);
  cr_assert_eq(jg_config_set_value(c, "perturbations.stepper", "\"rosenbrock\"", &e), JG_OK);
  cr_assert_eq(jg_config_validate(c, &e), JG_OK, "%s", e.message);
  const jg_params *p = jg_config_params(c);
  cr_assert_eq(p->cosmology.hubble_h, 0.7);
  cr_assert_eq(p->thermal.grid_points, 800);
  cr_assert_eq(p->perturbations.sound_speed, JG_SOUND_SPEED_ADIABATIC);
  cr_assert_eq(p->perturbations.stepper, JG_PERTURB_STEPPER_ROSENBROCK);
  cr_assert_eq(p->output.units, JG_UNITS_MPC_H);
  cr_assert_eq(p->output.n_redshifts, 2);
  cr_assert_eq(p->output.redshifts[1], 30.0);
  cr_assert_eq(p->cosmology.cdm_density_h2, 0.11);

  /* Refused values leave the object as it was, with the loader's words. */
  jg_params before = *p;
  cr_assert_eq(jg_config_set_text(c, "perturbations.sound_speed", "cold", &e), JG_ECONFIG);
  cr_assert_str_eq(e.message, "perturbations.sound_speed must be one of fluctuating, isothermal, "
                              "adiabatic or effective_gamma (got \"cold\")");
  cr_assert_eq(jg_config_set_list(c, "output.redshifts", (double[]){1.0, 2.0, 3.0}, -1, &e),
               JG_EINVAL);
  cr_assert_eq(jg_config_set_value(c, "cosmology.hubble", "0.7", &e), JG_ECONFIG);
  cr_assert_str_eq(e.message, "--set cosmology.hubble=0.7: unknown key 'cosmology.hubble' (did "
                              "you mean 'cosmology.hubble_h'?)");
  cr_assert_eq(jg_config_set_value(c, "cosmology.hubble_h", "\"high\"", &e), JG_ECONFIG);
  cr_assert_str_eq(e.message, "--set cosmology.hubble_h=\"high\": cosmology.hubble_h must be a "
                              "number (got the string \"high\")");
  cr_assert_eq(jg_config_set_boolean(c, "cosmology.hubble_h", 1, &e), JG_ECONFIG);
  cr_assert(memcmp(&before, jg_config_params(c), sizeof before) == 0);
  jg_config_free(c);
}

/* ---- the universe: the program's tables, in-process ---- */

TestSuite(universe, .init = quiet_gsl);

/* The program's table for `command` with the given --set texts. */
static char *program_table(const char *command, const char *const *sets, int n_sets) {
  char out[] = "/tmp/jg_embed_table_XXXXXX";
  int fd = mkstemp(out);
  cr_assert_geq(fd, 0);
  close(fd);
  const char *argv[16] = {command, REFERENCE, "-o", out};
  int argc = 4;
  for (int i = 0; i < n_sets; i++) {
    argv[argc++] = "--set";
    argv[argc++] = sets[i];
  }
  argv[argc] = NULL;
  pid_t pid = child_start(JG_PROGRAM, argv, NULL, "/dev/null", 0);
  cr_assert_eq(child_wait(pid), 0, "%s %s failed", JG_PROGRAM, command);
  char *text = read_text(out);
  unlink(out);
  return text;
}

Test(universe, tables_are_the_programs_character_for_character) {
  const char *sets[] = {"output.redshifts=[300.0, 40.0]", "perturbations.k_values=[20.0, 700.0]"};
  jg_config *c = NULL;
  jg_universe *u = NULL;
  jg_error e;
  jg_error_clear(&e);
  cr_assert_eq(jg_config_load(REFERENCE, NULL, 0, &c, &e), JG_OK, "%s", e.message);
  cr_assert_eq(jg_universe_new(c, &u, &e), JG_OK, "%s", e.message);
  const struct {
    jg_table_kind kind;
    const char *command;
  } tables[] = {{JG_TABLE_HISTORY, "history"},
                {JG_TABLE_EPOCHS, "epochs"},
                {JG_TABLE_SCALES, "scales"},
                {JG_TABLE_GROWTH, "growth"}};
  for (size_t i = 0; i < sizeof tables / sizeof tables[0]; i++) {
    char *text = NULL;
    size_t size = 0;
    /* Other redshifts and wavenumbers from the same universe. */
    cr_assert_eq(jg_universe_table(u, tables[i].kind, (double[]){300.0, 40.0}, 2,
                                   (double[]){20.0, 700.0}, 2, &text, &size, &e),
                 JG_OK, "%s", e.message);
    char *expected = program_table(tables[i].command, sets, 2);
    cr_assert_eq(size, strlen(text));
    cr_assert_str_eq(text, expected, "%s table differs", tables[i].command);
    jg_free(text);
    free(expected);
  }
  char *text = NULL;
  cr_assert_eq(jg_universe_table(u, JG_TABLE_SCALES, NULL, 0, NULL, 0, &text, NULL, &e), JG_OK);
  char *expected = program_table("scales", NULL, 0);
  cr_assert_str_eq(text, expected, "the parameters' own redshifts");
  jg_free(text);
  free(expected);
  /* A redshift the perturbations never reach is the key's own error. */
  cr_assert_eq(jg_universe_table(u, JG_TABLE_SCALES, (double[]){20000.0}, 1, NULL, 0, &text, NULL,
                                 &e),
               JG_EINVAL);
  cr_assert(strstr(e.message, "output.redshifts") != NULL, "%s", e.message);
  jg_universe_free(u);
  jg_config_free(c);
}

/* The growth table written in pieces (header, then consecutive row ranges,
 * as `run` does on two threads) is the whole table, whatever the cut. */
Test(embed, growth_table_in_pieces_is_the_whole_table) {
  stages s;
  stages_build(&s);
  double k[JG_MAX_WAVENUMBERS];
  int n_k = 0;
  cr_assert_eq(jg_perturb_wavenumbers(&s.p.perturbations, k, &n_k, NULL), JG_OK);
  jg_growth_grid *g = NULL;
  cr_assert_eq(jg_growth_grid_compute(s.m, s.w, k, n_k, s.p.output.redshifts,
                                      s.p.output.n_redshifts, &g, NULL),
               JG_OK);
  const int n_rows = g->n_z * g->n_k;
  char *whole = NULL;
  size_t whole_size = 0;
  FILE *f = open_memstream(&whole, &whole_size);
  cr_assert_not_null(f);
  cr_assert_eq(jg_report_growth(f, &s.p, s.th, g, NULL), JG_OK);
  cr_assert_eq(fclose(f), 0);
  for (int cut = 0; cut <= n_rows; cut++) {
    char *pieces = NULL;
    size_t size = 0;
    f = open_memstream(&pieces, &size);
    cr_assert_not_null(f);
    jg_report_growth_header(f, &s.p, s.th, g);
    cr_assert_eq(jg_report_growth_rows(f, &s.p, s.th, g, 0, cut, NULL), JG_OK);
    cr_assert_eq(jg_report_growth_rows(f, &s.p, s.th, g, cut, n_rows, NULL), JG_OK);
    cr_assert_eq(fclose(f), 0);
    cr_assert_str_eq(pieces, whole, "cut after row %d of %d", cut, n_rows);
    free(pieces);
  }
  free(whole);
  jg_growth_grid_free(g);
  stages_free(&s);
}

/* ---- version and GSL ---- */

Test(embed, version_of_the_library_is_the_headers) {
  cr_assert_str_eq(jg_version(), JG_VERSION_STRING);
  cr_assert_eq(jg_version_number(), JG_VERSION_NUMBER);
}

/* A medium that would make GSL's hypergeometric function raise an error:
 * with GSL's default handler (print and abort) still installed, as in a
 * host that never heard of it, the model is refused with a message. */
static int negative_baryons(const void *ctx, double ln_a, jg_medium_coefficients *out) {
  (void)ctx;
  (void)ln_a;
  *out = (jg_medium_coefficients){.dlnH_dlna = -1.5, .gravity = 1.5, .baryon_fraction = -3.0};
  return 0;
}

Test(embed, an_unphysical_medium_is_refused_before_gsl_sees_it) {
  gsl_set_error_handler(NULL); /* GSL's default: abort */
  jg_medium md = {negative_baryons, NULL, 1e-4, log(1e-5), 0.0, 1.0, 1e4, 0.0};
  jg_perturb_settings s;
  jg_params p;
  jg_params_set_defaults(&p);
  s = p.perturbations;
  jg_error e;
  jg_error_clear(&e);
  cr_assert_null(jg_perturb_model_new_medium(&md, &s, NULL, &e));
  cr_assert_eq(e.status, JG_EINVAL);
  cr_assert(strstr(e.message, "baryon fraction -3") != NULL, "%s", e.message);
  jg_gsl_handler_off();
}

/* Extreme values given to the public functions of every stage, with GSL's
 * default handler installed: each is refused or answered, none reaches a
 * GSL routine that raises (which would abort this process). The optical
 * depth beyond z ~ 1e14 did, through GSL's adaptive quadrature. */
Test(embed, extreme_values_never_make_gsl_abort_the_host, .timeout = 60) {
  gsl_set_error_handler(NULL);
  stages s;
  stages_build(&s);
  const double extreme[] = {NAN, -1.0, -0.999999, 1e300, INFINITY, -INFINITY, 0.0, 1e-300};
  for (size_t i = 0; i < sizeof extreme / sizeof extreme[0]; i++) {
    double x = extreme[i], v, f, k_half;
    int found;
    jg_perturb_point pt;
    jg_perturb_limit lim;
    jg_scales_point sp;
    jg_thermal_state ts;
    jg_perturb_solve(s.m, s.w, 100.0, &x, 1, &pt, NULL);
    jg_perturb_solve(s.m, s.w, x, (double[]){20.0}, 1, &pt, NULL);
    jg_perturb_solve_limit(s.m, s.w, &x, 1, &lim, NULL);
    jg_scales_compute(s.m, s.w, &x, 1, &sp, NULL);
    jg_scales_half_suppression(s.m, s.w, 20.0, x, 10.0, &k_half, &found, NULL);
    jg_scales_half_suppression(s.m, s.w, 20.0, 0.5, x, &k_half, &found, NULL);
    jg_background_comoving_distance(s.bg, x, &v, NULL);
    jg_background_transverse_distance(s.bg, x, &v, NULL);
    jg_background_sound_horizon(s.bg, x, &v, NULL);
    jg_background_cosmic_time(s.bg, x, &v, NULL);
    jg_background_conformal_time(s.bg, x, &v, NULL);
    jg_background_growth_heath(s.bg, x, &v, NULL);
    jg_background_growth_factor(s.bg, x, &v, &f, NULL);
    jg_thermal_state_at(s.th, x, &ts);
    jg_thermal_optical_depth(s.th, x);
    jg_thermal_drag_depth(s.th, x);
    jg_thermal_visibility(s.th, x);
    jg_growth_grid *g = NULL;
    jg_growth_grid_compute(s.m, s.w, &x, 1, (double[]){20.0}, 1, &g, NULL);
    jg_growth_grid_free(g);
    jg_cosmology c = s.p.cosmology;
    c.de_w0 = x;
    jg_background_free(jg_background_new(&c, NULL));
    jg_thermal_settings t = s.p.thermal;
    t.start_redshift = x;
    jg_thermal_free(jg_thermal_new(s.bg, &t, NULL));
    jg_perturb_settings ps = s.p.perturbations;
    ps.z_initial = x;
    jg_perturb_model_free(jg_perturb_model_new(s.th, &ps, NULL, NULL));
    jg_perturb_start start = {x, x, x, 1, x};
    jg_perturb_model_free(jg_perturb_model_new(s.th, &s.p.perturbations, &start, NULL));
  }
  /* Beyond the stored history the depths keep growing with z. */
  cr_assert_lt(jg_thermal_optical_depth(s.th, 1e20), jg_thermal_optical_depth(s.th, 1e22));
  cr_assert_lt(jg_thermal_drag_depth(s.th, 1e20), jg_thermal_drag_depth(s.th, 1e22));
  stages_free(&s);
  jg_gsl_handler_off();
}
