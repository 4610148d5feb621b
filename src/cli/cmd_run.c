/*
 * `jeansgrow run`: the main job. Computes the history, the epochs, the scales
 * at every output redshift and the growth on the wavenumber grid, then writes
 * the four tables into one folder and prints a short summary. Everything is
 * computed and formatted in memory before any file is touched, so a failure
 * leaves the folder as it was; each table is written to a temporary file and
 * renamed into place.
 */
#include <errno.h>
#include <pthread.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "cli.h"
#include "figures.h"

#define DEFAULT_RUN_FOLDER "jeansgrow-out"

enum { FILE_HISTORY, FILE_EPOCHS, FILE_SCALES, FILE_GROWTH, N_RUN_FILES };
static const char *const run_file_names[N_RUN_FILES] = {"history.txt", "epochs.txt",
                                                        "scales.txt", "growth.txt"};
/* The pieces formatted apart: one per file, the growth table's header and
 * first chunk of rows in FILE_GROWTH's, and its other chunks in parts of
 * their own that follow it into growth.txt in order. The chunks are handed
 * out to whichever thread is free (see compute_all). */
#define GROWTH_CHUNKS 16
enum { PART_GROWTH_CHUNK_1 = N_RUN_FILES, N_TABLE_PARTS = N_RUN_FILES + GROWTH_CHUNKS - 1 };
static int file_of_part(int part) { return part < N_RUN_FILES ? part : FILE_GROWTH; }
static int part_of_growth_chunk(int chunk) {
  return chunk == 0 ? FILE_GROWTH : PART_GROWTH_CHUNK_1 + chunk - 1;
}

/* Make sure the folder exists (create one level) and can be written, before
 * any long work. */
static int prepare_folder(const char *dir) {
  struct stat sb;
  if (stat(dir, &sb) != 0) {
    if (errno != ENOENT || mkdir(dir, 0777) != 0) {
      fprintf(stderr, "jeansgrow: %s: cannot create output folder (%s)\n", dir, strerror(errno));
      return EXIT_BAD_INPUT;
    }
  } else if (!S_ISDIR(sb.st_mode)) {
    fprintf(stderr, "jeansgrow: %s: exists and is not a folder (run -o takes a folder)\n", dir);
    return EXIT_BAD_INPUT;
  }
  if (access(dir, W_OK | X_OK) != 0) {
    fprintf(stderr, "jeansgrow: %s: cannot write into output folder (%s)\n", dir,
            strerror(errno));
    return EXIT_BAD_INPUT;
  }
  return -1;
}

typedef struct run_results {
  jg_epochs epochs;
  jg_scales_point scales[JG_MAX_REDSHIFTS];
  jg_growth_grid *growth;
  double *k;
  int n_k;
  cli_text tables[N_TABLE_PARTS];
} run_results;

/* Only the growth parts look at r->growth, which the second thread may be
 * writing while this thread formats the history table. */
static int growth_rows(const run_results *r) { return r->growth->n_z * r->growth->n_k; }
/* The first row of a chunk of the growth table (chunk GROWTH_CHUNKS: the end). */
static int growth_chunk_start(const run_results *r, int chunk) {
  return (int)((long long)growth_rows(r) * chunk / GROWTH_CHUNKS);
}

static jg_status write_table(int which, FILE *f, const jg_params *p, const jg_thermal *th,
                             const run_results *r, jg_error *err) {
  switch (which) {
  case FILE_HISTORY:
    return jg_report_history(f, p, th, err);
  case FILE_EPOCHS:
    return jg_report_epochs(f, p, &r->epochs, err);
  case FILE_SCALES:
    return jg_report_scales(f, p, th, r->scales, p->output.n_redshifts, err);
  case FILE_GROWTH:
    jg_report_growth_header(f, p, th, r->growth);
    return jg_report_growth_rows(f, p, th, r->growth, 0, growth_chunk_start(r, 1), err);
  default: {
    const int chunk = which - PART_GROWTH_CHUNK_1 + 1;
    return jg_report_growth_rows(f, p, th, r->growth, growth_chunk_start(r, chunk),
                                 growth_chunk_start(r, chunk + 1), err);
  }
  }
}

/* One part of the run's tables (write_table's arguments). */
typedef struct table_part {
  int which;
  const jg_params *p;
  const jg_thermal *th;
  const run_results *r;
} table_part;
static jg_status write_part(FILE *f, const void *context, jg_error *err) {
  const table_part *t = context;
  return write_table(t->which, f, t->p, t->th, t->r, err);
}

/* Each table is formatted on the thread that has its numbers, as soon as it
 * has them, and only copied into its file at the end. */
static void format_table(int which, const jg_params *p, const jg_thermal *th, run_results *r) {
  const table_part part = {which, p, th, r};
  cli_format_in_memory(&r->tables[which], run_file_names[file_of_part(which)], write_part, &part);
}

/* The growth grid, on a thread of its own beside the scales (see
 * compute_all): its own workspace, its own error records; the scales'
 * thread joins its work (`grid`) when done with the scales. It says when
 * the grid is done; then both threads format the growth table's chunks,
 * each taking the next one not yet taken. */
typedef struct growth_job {
  const jg_params *p;
  const jg_thermal *th;
  const jg_perturb_model *model;
  run_results *r;
  jg_growth_grid_job *grid;
  jg_status status;
  jg_error err;
  pthread_mutex_t lock;
  pthread_cond_t grid_ready;
  int grid_done;
  int next_chunk; /* the next chunk of the growth table to format (under lock) */
} growth_job;

static void format_growth_chunks(growth_job *job) {
  for (;;) {
    pthread_mutex_lock(&job->lock);
    const int chunk = job->next_chunk++;
    pthread_mutex_unlock(&job->lock);
    if (chunk >= GROWTH_CHUNKS) return;
    format_table(part_of_growth_chunk(chunk), job->p, job->th, job->r);
  }
}

/* The grid's jobs this thread takes, the grid once every job is done (the
 * other thread's included), and its streaming columns. */
static jg_status compute_growth(growth_job *job, jg_perturb_workspace *ws) {
  const jg_params *p = job->p;
  run_results *r = job->r;
  jg_growth_grid_job_work(job->grid, ws);
  jg_status st = jg_growth_grid_job_result(job->grid, &r->growth, &job->err);
  if (st == JG_OK)
    st = jg_growth_grid_add_streaming(r->growth, job->model, ws, &p->streaming, &job->err);
  return st;
}

static void *growth_thread(void *arg) {
  growth_job *job = arg;
  jg_perturb_workspace *ws = jg_perturb_workspace_new(job->model, &job->err);
  const jg_status st = ws ? compute_growth(job, ws) : job->err.status;
  jg_perturb_workspace_free(ws);
  pthread_mutex_lock(&job->lock);
  job->status = st;
  job->grid_done = 1;
  pthread_cond_signal(&job->grid_ready);
  pthread_mutex_unlock(&job->lock);
  if (st == JG_OK) format_growth_chunks(job);
  return NULL;
}

/* Two cores or more: the growth grid runs on a second thread while this one
 * formats the history table and does the epochs and the scales, then takes
 * the grid's batches still left; then both format the growth table's
 * chunks as they come free, so that they finish together (at the
 * reference parameters, timed in the program: the grid alone took ~20 ms
 * of the second thread while this one was done with the scales after ~14
 * ms and waited; 2026-12-03). Both read the model and the history,
 * which are read-only once built, and write their own results; a batch of
 * wavenumbers gives the same numbers on any thread, so the tables do not
 * depend on it. The second thread takes no interrupts (they stay with this
 * one, whose handler removes the temporary files) and touches no file.
 * With one core the same steps run one after the other. */
static jg_status compute_all(const jg_params *p, const jg_thermal *th, jg_perturb_model *model,
                             jg_perturb_workspace *ws, run_results *r, jg_error *err) {
  r->k = malloc(sizeof(double) * JG_MAX_WAVENUMBERS);
  if (!r->k) return JG_FAIL(err, JG_ENOMEM, "out of memory for the wavenumbers");
  jg_status st = jg_perturb_wavenumbers(&p->perturbations, r->k, &r->n_k, err);
  if (st != JG_OK) return st;
  growth_job job = {p, th, model, r, NULL, JG_OK, {0}, PTHREAD_MUTEX_INITIALIZER,
                    PTHREAD_COND_INITIALIZER, 0, 0};
  jg_error_clear(&job.err);
  /* The k -> 0 reference, which the scales and the growth grid both need:
   * solved once, here. A failure is told where the scales' own solve would
   * have told it (after the history and the epochs), and the grid then
   * solves it again and fails after them, as in the sequential order. */
  jg_perturb_limit limit[JG_MAX_REDSHIFTS];
  jg_error limit_err;
  jg_error_clear(&limit_err);
  const jg_status limit_st = jg_perturb_solve_limit(model, ws, p->output.redshifts,
                                                    p->output.n_redshifts, limit, &limit_err);
  job.grid = jg_growth_grid_job_new(model, r->k, r->n_k, p->output.redshifts,
                                    p->output.n_redshifts, limit_st == JG_OK ? limit : NULL, err);
  if (!job.grid) return err->status;
  pthread_t worker;
  const int parallel = cli_usable_cores() > 1 && cli_start_quiet_thread(&worker, growth_thread, &job);
  format_table(FILE_HISTORY, p, th, r);
  st = jg_epochs_compute(th, &r->epochs, err);
  if (st == JG_OK && limit_st != JG_OK) {
    *err = limit_err;
    st = limit_st;
  }
  if (st == JG_OK)
    st = jg_scales_compute_from_limit(model, ws, p->output.redshifts, p->output.n_redshifts, limit,
                                      r->scales, err);
  if (st == JG_OK)
    st = jg_scales_add_streaming(model, ws, &p->streaming, p->output.redshifts,
                                 p->output.n_redshifts, r->scales, err);
  if (parallel) {
    if (st == JG_OK) jg_growth_grid_job_work(job.grid, ws);
    pthread_mutex_lock(&job.lock);
    while (!job.grid_done) pthread_cond_wait(&job.grid_ready, &job.lock);
    pthread_mutex_unlock(&job.lock);
  } else if (st == JG_OK) {
    job.status = compute_growth(&job, ws);
  }
  if (st == JG_OK && job.status == JG_OK) format_growth_chunks(&job);
  if (parallel) pthread_join(worker, NULL);
  jg_growth_grid_job_free(job.grid);
  pthread_cond_destroy(&job.grid_ready);
  pthread_mutex_destroy(&job.lock);
  /* The first failure in the order of the sequential run is the one told. */
  if (st == JG_OK && job.status != JG_OK) {
    *err = job.err;
    st = job.status;
  }
  if (st == JG_OK) {
    format_table(FILE_EPOCHS, p, th, r);
    format_table(FILE_SCALES, p, th, r);
  }
  return st;
}

/* One epoch of the summary: its value in `format`, scaled by `factor`, or
 * "none (why)" where this universe does not have it. */
static const char *summary_epoch(char *buf, size_t size, const jg_epochs *e, int entry,
                                 const char *format, double factor) {
  jg_epoch_entry en = jg_epochs_entry(e, entry);
  if (en.exists)
    snprintf(buf, size, format, en.value * factor);
  else
    snprintf(buf, size, "none (%s)", en.reason);
  return buf;
}

static void print_summary(const char *param_path, const char *dir, const jg_params *p,
                          const jg_thermal *th, const run_results *r) {
  const jg_epochs *e = &r->epochs;
  /* The summary speaks the units of the tables it summarises. */
  const jg_output_units units = p->output.units;
  const double h = p->cosmology.hubble_h;
  double k_factor, m_factor, l_factor;
  const char *k_unit = jg_report_unit("1/Mpc", units, h, &k_factor);
  const char *m_unit = jg_report_unit("Msun", units, h, &m_factor);
  const char *l_unit = jg_report_unit("Mpc", units, h, &l_factor);
  printf("jeansgrow run: %s -> %s/\n", param_path, dir);
  char z_star[JG_EPOCH_REASON_SIZE + 8], z_drag[JG_EPOCH_REASON_SIZE + 8];
  char r_drag[JG_EPOCH_REASON_SIZE + 8], z_gas[JG_EPOCH_REASON_SIZE + 8];
  char r_format[32];
  snprintf(r_format, sizeof r_format, "%%.2f %s", l_unit);
  printf("  photon decoupling z_star = %s, end of drag z_drag = %s, sound horizon r_drag = %s\n",
         summary_epoch(z_star, sizeof z_star, e, JG_EPOCH_Z_STAR, "%.2f", 1.0),
         summary_epoch(z_drag, sizeof z_drag, e, JG_EPOCH_Z_DRAG, "%.2f", 1.0),
         summary_epoch(r_drag, sizeof r_drag, e, JG_EPOCH_R_DRAG, r_format, l_factor));
  printf("  gas decouples from the CMB (T_gas = 0.9 T_rad) at z = %s; x_e(z=100) = %.3g; "
         "age %.3f Gyr\n",
         summary_epoch(z_gas, sizeof z_gas, e, JG_EPOCH_Z_GAS_DECOUPLING, "%.1f", 1.0),
         e->x_e_z100, e->age_Gyr);
  char k_J[32], M_J[32], k_F[32], M_F[32], k_half[32], M_half[32];
  snprintf(k_J, sizeof k_J, "k_J[%s]", k_unit);
  snprintf(M_J, sizeof M_J, "M_J[%s]", m_unit);
  snprintf(k_F, sizeof k_F, "k_F[%s]", k_unit);
  snprintf(M_F, sizeof M_F, "M_F[%s]", m_unit);
  snprintf(k_half, sizeof k_half, "k_half[%s]", k_unit);
  snprintf(M_half, sizeof M_half, "M_half[%s]", m_unit);
  /* Every mass in one radius convention (output.mass_radius): the library
   * gives the Jeans and half-suppression masses with radius pi/k and the
   * filtering mass with both. */
  const int full = p->output.mass_radius == JG_MASS_RADIUS_FULL_WAVELENGTH;
  const double to_convention = full ? 8.0 : 1.0;
  printf("  %8s %10s %11s %11s %11s %11s %13s %14s  %s\n", "z", "T_gas[K]", k_J, M_J, k_F, M_F,
         k_half, M_half, "flags");
  int seen_flags = 0;
  for (int i = 0; i < p->output.n_redshifts; i++) {
    const jg_scales_point *s = &r->scales[i];
    jg_thermal_state ts;
    jg_thermal_state_at(th, s->z, &ts);
    const double m_filter = full ? s->m_filter_solved : s->m_filter_solved_half;
    printf("  %8.1f %10.4g %11.4g %11.3e %11.4g %11.3e", s->z, ts.T_gas,
           s->k_jeans_isothermal * k_factor, s->m_jeans_isothermal * to_convention * m_factor,
           s->k_filter_solved * k_factor, m_filter * m_factor);
    if (s->half_found)
      printf(" %13.4g %14.3e", s->k_half * k_factor, s->m_half * to_convention * m_factor);
    else printf(" %13s %14s", "none", "-");
    const int flags = jg_validity_scales_flags(th, s);
    seen_flags |= flags;
    printf("  %d\n", flags);
  }
  static const char *const sound_speed_names[] = {"fluctuating", "isothermal", "adiabatic",
                                                  "effective_gamma"};
  printf("  masses: (4 pi/3) rho_m R^3 with R = %s (output.mass_radius = \"%s\"); Jeans scale "
         "isothermal; filtering scale from the solved perturbations; sound speed: %s%s\n",
         full ? "2 pi/k, the full wavelength" : "pi/k, half the wavelength",
         full ? "full_wavelength" : "half_wavelength",
         sound_speed_names[p->perturbations.sound_speed],
         p->perturbations.sound_speed == JG_SOUND_SPEED_FLUCTUATING
             ? (p->perturbations.ionisation_perturbation ? " with delta_xe" : " without delta_xe")
             : "");
  if (seen_flags & JG_FLAG_GAS_NOT_STARTED)
    printf("  flags 1: the gas has barely started (k -> 0 delta_b/delta_c < %g): k_F, k_half "
           "and their masses describe a perturbation not yet there\n", JG_VALIDITY_GAS_STARTED);
  if (seen_flags & JG_FLAG_BELOW_THERMAL_MODEL)
    printf("  flags 2: below z = %g, where the thermal history (no heating, no reionisation) "
           "stops being valid\n", jg_validity_thermal_z_min(th));
  if (seen_flags & JG_FLAG_NEAR_FLUID_LIMIT)
    printf("  flags 4: k_F or k_half within ten mean free paths of the atoms: the gas is no "
           "longer a fluid there\n");
  if (p->streaming.rms_velocity_kms > 0.0) {
    printf("  with the streaming velocity (rms %g km/s from z = %g), beside the values above:\n",
           p->streaming.rms_velocity_kms, p->streaming.start_redshift);
    char k_Fs[40], M_Fs[40], k_hs[40], M_hs[40];
    snprintf(k_Fs, sizeof k_Fs, "k_F_stream[%s]", k_unit);
    snprintf(M_Fs, sizeof M_Fs, "M_F_stream[%s]", m_unit);
    snprintf(k_hs, sizeof k_hs, "k_half_stream[%s]", k_unit);
    snprintf(M_hs, sizeof M_hs, "M_half_stream[%s]", m_unit);
    printf("  %8s %18s %17s %20s %19s\n", "z", k_Fs, M_Fs, k_hs, M_hs);
    for (int i = 0; i < p->output.n_redshifts; i++) {
      const jg_scales_point *s = &r->scales[i];
      printf("  %8.1f %18.4g %17.3e", s->z, s->k_filter_stream * k_factor,
             s->m_filter_stream * m_factor);
      if (s->half_stream_found)
        printf(" %20.4g %19.3e\n", s->k_half_stream * k_factor, s->m_half_stream * m_factor);
      else printf(" %20s %19s\n", "none", "-");
    }
  }
  printf("  files: history.txt, epochs.txt, scales.txt (%d redshifts), growth.txt (%d x %d "
         "rows)\n",
         p->output.n_redshifts, p->output.n_redshifts, r->n_k);
}

/* The figures of the folder's tables, or the line that says how to get
 * them; a figure gnuplot could not draw is a failed run (exit 1). */
static int draw_figures(const char *dir) {
  if (!cli_figures_available()) {
    cli_figures_print_hint(stdout, dir);
    return EXIT_OK;
  }
  fflush(stdout);
  const int drawn = cli_figures_for_folder(dir);
  if (drawn < 0) return EXIT_RUN_FAILED;
  printf("  figures: history, masses, scales, suppression, rates (.png for screens, .svg for "
         "papers; jeansgrow plot %s draws them again)\n", dir);
  return EXIT_OK;
}

enum { OPTION_NO_FIGURES = 1000 };

static int run_option(int code, const char *arg, void *context) {
  (void)arg;
  if (code == OPTION_NO_FIGURES) *(int *)context = 0;
  return -1;
}

int cmd_run(const cli_command *cmd, int argc, char **argv) {
  cli_options o;
  jg_params p;
  int figures = 1;
  static const struct option run_options[] = {{"no-figures", no_argument, NULL, OPTION_NO_FIGURES},
                                              {NULL, 0, NULL, 0}};
  const cli_extra_options extra = {run_options, run_option, NULL, &figures};
  int rc = cli_parse_options_with(cmd, argc, argv, &o, &extra);
  if (rc < 0) rc = cli_load_params(&o, &p);
  if (rc >= 0) return rc;
  const char *dir = o.output_path ? o.output_path : DEFAULT_RUN_FOLDER;
  if (strcmp(dir, "-") == 0) {
    fprintf(stderr, "jeansgrow run: -o takes a folder, not standard output\n");
    return EXIT_BAD_INPUT;
  }
  if ((rc = prepare_folder(dir)) >= 0) return rc;
  /* The computation comes before any file is opened: without this an
   * interrupt there would end the program silently. */
  cli_protect_interrupts("jeansgrow: interrupted; no table was written, the output folder is as it was\n");

  jg_background *bg = NULL;
  jg_thermal *th = NULL;
  jg_perturb_model *model = NULL;
  jg_perturb_workspace *ws = NULL;
  if ((rc = cli_build_history(&p, o.param_path, &bg, &th)) >= 0) return rc;
  if ((rc = cli_build_perturbations(&p, th, &model, &ws)) >= 0) {
    jg_thermal_free(th);
    jg_background_free(bg);
    return rc;
  }
  jg_error err;
  jg_error_clear(&err);
  run_results *r = calloc(1, sizeof *r);
  jg_status st = r ? compute_all(&p, th, model, ws, r, &err)
                   : JG_FAIL(&err, JG_ENOMEM, "out of memory for the results");

  jg_output *out[N_RUN_FILES] = {NULL};
  for (int i = 0; rc < 0 && st == JG_OK && i < N_RUN_FILES; i++) {
    size_t n = strlen(dir) + strlen(run_file_names[i]) + 2;
    char *path = malloc(n);
    if (!path) {
      st = JG_FAIL(&err, JG_ENOMEM, "out of memory");
      break;
    }
    snprintf(path, n, "%s/%s", dir, run_file_names[i]);
    cli_options file_options = o;
    file_options.output_path = path;
    rc = cli_open_output(&file_options, &out[i]);
    free(path);
    /* A table that could not be formatted fails where writing it would
     * have, after its file was opened: the first failure of the run in
     * its order is the one told. */
    for (int part = 0; rc < 0 && st == JG_OK && part < N_TABLE_PARTS; part++) {
      const cli_text *t = &r->tables[part];
      if (file_of_part(part) != i) continue;
      if (t->status != JG_OK) {
        err = t->err;
        st = t->status;
      } else {
        /* a failed write shows in the stream's error flag at the commit */
        fwrite(t->text, 1, t->size, jg_output_stream(out[i]));
      }
    }
  }
  if (rc < 0 && st == JG_OK) {
    /* All four tables or none: an interrupt between two renames would
     * leave a folder mixing two runs. */
    sigset_t block, saved;
    sigemptyset(&block);
    sigaddset(&block, SIGINT);
    sigaddset(&block, SIGTERM);
    sigprocmask(SIG_BLOCK, &block, &saved);
    for (int i = 0; i < N_RUN_FILES && rc < 0; i++) {
      int c = cli_commit_output(out[i]);
      out[i] = NULL;
      if (c != EXIT_OK) rc = c;
    }
    cli_protect_interrupts("jeansgrow: interrupted after the tables were written\n");
    sigprocmask(SIG_SETMASK, &saved, NULL);
  }
  for (int i = 0; i < N_RUN_FILES; i++)
    if (out[i]) cli_discard_output(out[i]);
  if (rc < 0 && st != JG_OK) rc = cli_report(&err);
  if (rc < 0) {
    print_summary(o.param_path, dir, &p, th, r);
    rc = EXIT_OK;
    if (figures) rc = draw_figures(dir);
  }
  if (r) {
    for (int i = 0; i < N_TABLE_PARTS; i++) free(r->tables[i].text);
    jg_growth_grid_free(r->growth);
    free(r->k);
    free(r);
  }
  jg_perturb_workspace_free(ws);
  jg_perturb_model_free(model);
  jg_thermal_free(th);
  jg_background_free(bg);
  return rc;
}
