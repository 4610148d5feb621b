/*
 * `jeansgrow run`: the main job. Computes the history, the epochs, the scales
 * at every output redshift and the growth on the wavenumber grid, then writes
 * the four tables into one folder and prints a short summary. Everything is
 * computed before any file is touched, so a failure leaves the folder as it
 * was; each table is written to a temporary file and renamed into place.
 */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "cli.h"

#define DEFAULT_RUN_FOLDER "jeansgrow-out"

enum { FILE_HISTORY, FILE_EPOCHS, FILE_SCALES, FILE_GROWTH, N_RUN_FILES };
static const char *const run_file_names[N_RUN_FILES] = {"history.txt", "epochs.txt",
                                                        "scales.txt", "growth.txt"};

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
} run_results;

static jg_status compute_all(const jg_params *p, const jg_thermal *th, jg_perturb_model *model,
                             jg_perturb_workspace *ws, run_results *r, jg_error *err) {
  jg_status st = jg_epochs_compute(th, &r->epochs, err);
  if (st == JG_OK)
    st = jg_scales_compute(model, ws, p->output.redshifts, p->output.n_redshifts, r->scales, err);
  r->k = malloc(sizeof(double) * JG_MAX_WAVENUMBERS);
  if (!r->k) return JG_FAIL(err, JG_ENOMEM, "out of memory for the wavenumbers");
  if (st == JG_OK) st = jg_perturb_wavenumbers(&p->perturbations, r->k, &r->n_k, err);
  if (st == JG_OK)
    st = jg_growth_grid_compute(model, ws, r->k, r->n_k, p->output.redshifts,
                                p->output.n_redshifts, &r->growth, err);
  return st;
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
  default:
    return jg_report_growth(f, p, r->growth, err);
  }
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
  printf("  %8s %10s %11s %11s %11s %11s %13s %14s\n", "z", "T_gas[K]", k_J, M_J, k_F, M_F,
         k_half, M_half);
  for (int i = 0; i < p->output.n_redshifts; i++) {
    const jg_scales_point *s = &r->scales[i];
    jg_thermal_state ts;
    jg_thermal_state_at(th, s->z, &ts);
    printf("  %8.1f %10.4g %11.4g %11.3e %11.4g %11.3e", s->z, ts.T_gas,
           s->k_jeans_isothermal * k_factor, s->m_jeans_isothermal * m_factor,
           s->k_filter_solved * k_factor, s->m_filter_solved * m_factor);
    if (s->half_found) printf(" %13.4g %14.3e\n", s->k_half * k_factor, s->m_half * m_factor);
    else printf(" %13s %14s\n", "none", "-");
  }
  static const char *const sound_speed_names[] = {"fluctuating", "isothermal", "adiabatic",
                                                  "effective_gamma"};
  printf("  (isothermal Jeans mass; filtering mass (4 pi/3) rho_m (2 pi/k_F)^3 from the solved "
         "perturbations; sound speed: %s%s)\n",
         sound_speed_names[p->perturbations.sound_speed],
         p->perturbations.sound_speed == JG_SOUND_SPEED_FLUCTUATING
             ? (p->perturbations.ionisation_perturbation ? " with delta_xe" : " without delta_xe")
             : "");
  printf("  files: history.txt, epochs.txt, scales.txt (%d redshifts), growth.txt (%d x %d "
         "rows)\n",
         p->output.n_redshifts, p->output.n_redshifts, r->n_k);
}

int cmd_run(const cli_command *cmd, int argc, char **argv) {
  cli_options o;
  jg_params p;
  int rc = cli_parse_options(cmd, argc, argv, &o);
  if (rc < 0) rc = cli_load_params(&o, &p);
  if (rc >= 0) return rc;
  const char *dir = o.output_path ? o.output_path : DEFAULT_RUN_FOLDER;
  if (strcmp(dir, "-") == 0) {
    fprintf(stderr, "jeansgrow run: -o takes a folder, not standard output\n");
    return EXIT_BAD_INPUT;
  }
  if ((rc = prepare_folder(dir)) >= 0) return rc;

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
    if (rc < 0) st = write_table(i, jg_output_stream(out[i]), &p, th, r, &err);
  }
  if (rc < 0 && st == JG_OK) {
    for (int i = 0; i < N_RUN_FILES && rc < 0; i++) {
      int c = cli_commit_output(out[i]);
      out[i] = NULL;
      if (c != EXIT_OK) rc = c;
    }
  }
  for (int i = 0; i < N_RUN_FILES; i++)
    if (out[i]) cli_discard_output(out[i]);
  if (rc < 0 && st != JG_OK) rc = cli_report(&err);
  if (rc < 0) {
    print_summary(o.param_path, dir, &p, th, r);
    rc = EXIT_OK;
  }
  if (r) {
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
