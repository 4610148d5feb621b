/*
 * The property "valid input runs": random cosmologies drawn inside the
 * documented range of every key must run through `scales` and `growth`
 * (and the epochs of `run`) and give finite, physically ordered results.
 *
 * Every number key is drawn inside the range its own entry in the key table
 * states (the `allowed` text of jg_param_doc_at, as `jeansgrow keys` prints
 * it), so a range changed there is what the sweep draws; a number key whose
 * range the sweep cannot read is an error, so no new key is skipped
 * silently. Word keys take each allowed word. Draws are uniform, uniform in
 * the logarithm, or an inclusive end of the range, because the edges are
 * where defects hide. The parameters go through the loader as `--set`
 * overrides of the reference file, exactly as a user would give them, so a
 * failure prints the command that reproduces it.
 *
 * Combined limits: the sweep keeps the documented ones (k_max >= k_min,
 * output redshifts below thermal.start_redshift and perturbations.z_initial,
 * history_z_min below the start, k_count = 1 with k_min = k_max) and draws
 * the grid's wavenumbers above the horizon limit of the cosmology (the
 * README: k >= 10 aH/c at z_initial). Inputs that the loader or the
 * background still refuse with exit 2 (e.g. w0 + wa >= 1/3, a curvature
 * that leaves no big bang) are counted and listed apart from failures: they
 * are clean refusals, but one of a value inside the documented range is a
 * gap in the documentation worth reporting.
 *
 * Cost: each cosmology is computed in-process on the library. By default
 * the keys that only cost time are drawn from a cheap part of their range
 * (thermal.grid_points <= 20000, perturbations.k_count <= 6, at most three
 * output redshifts); --full draws them over the whole range as well.
 *
 *   valid_sweep [--count N] [--first I] [--seed S] [--threads T] [--full]
 *               [--params FILE] [--program PATH] [--verbose]
 *
 * JG_SWEEP_COUNT in the environment overrides --count (the long mode of the
 * CTest entries). Exit 0 when every drawn cosmology ran, 1 otherwise.
 */
#include <errno.h>
#include <math.h>
#include <stdbool.h>
#include <pthread.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#include "jeansgrow/jeansgrow.h"

#define MAX_SETS 64
#define SET_SIZE 768 /* room for MAX_LIST redshifts of 17 digits */
#define MAX_LIST 16
#define MAX_ATTEMPTS 100

/* ---- random numbers: splitmix64, one stream per cosmology ---------------- */

typedef struct rng {
  uint64_t s;
} rng;

static uint64_t rng_next(rng *r) {
  uint64_t z = (r->s += 0x9E3779B97F4A7C15ull);
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
  return z ^ (z >> 31);
}

/* Uniform in [0, 1). */
static double rng_unit(rng *r) { return (double)(rng_next(r) >> 11) * 0x1.0p-53; }

/* ---- the documented ranges ------------------------------------------------ */

typedef struct bound {
  double value;
  char key[64]; /* a bound given by another key ("k_min"), else empty */
  int inclusive;
} bound;

static int parse_bound(const char *tok, bound *b) {
  char *end;
  errno = 0;
  double v = strtod(tok, &end);
  if (end != tok && *end == '\0' && errno == 0) {
    b->value = v;
    b->key[0] = '\0';
    return 1;
  }
  if (strlen(tok) >= sizeof b->key) return 0;
  for (const char *c = tok; *c; c++)
    if (!(*c == '_' || *c == '.' || (*c >= 'a' && *c <= 'z') || (*c >= '0' && *c <= '9')))
      return 0;
  strcpy(b->key, tok);
  return 1;
}

/* "LO OP value OP HI[ more]" or "... each LO OP z OP HI". */
static int parse_range(const char *allowed, bound *lo, bound *hi) {
  const char *text = strstr(allowed, "each ");
  text = text ? text + 5 : allowed;
  char a[64], op1[4], var[16], op2[4], b[64];
  if (sscanf(text, "%63s %3s %15s %3s %63[^ ,;()]", a, op1, var, op2, b) != 5) return 0;
  if (strcmp(var, "value") != 0 && strcmp(var, "k") != 0 && strcmp(var, "z") != 0) return 0;
  int ok1 = !strcmp(op1, "<") || !strcmp(op1, "<="), ok2 = !strcmp(op2, "<") || !strcmp(op2, "<=");
  if (!ok1 || !ok2 || !parse_bound(a, lo) || !parse_bound(b, hi)) return 0;
  lo->inclusive = !strcmp(op1, "<=");
  hi->inclusive = !strcmp(op2, "<=");
  return 1;
}

/* ---- one cosmology --------------------------------------------------------- */

typedef struct drawn {
  char sets[MAX_SETS][SET_SIZE];
  int n_sets;
  /* values drawn so far, to resolve bounds named by other keys */
  const char *keys[MAX_SETS];
  double values[MAX_SETS];
  int n_values;
} drawn;

typedef struct sweep_options {
  long first, count;
  uint64_t seed;
  int threads, full, verbose, epochs;
  const char *params, *program;
} sweep_options;

static int value_of(const drawn *d, const char *group, const char *key, double *v) {
  char full[128];
  if (!strchr(key, '.')) {
    snprintf(full, sizeof full, "%.*s.%s", (int)(strchr(group, '.') - group), group, key);
    key = full;
  }
  for (int i = 0; i < d->n_values; i++)
    if (!strcmp(d->keys[i], key)) {
      *v = d->values[i];
      return 1;
    }
  return 0;
}

static void remember(drawn *d, const char *key, double v) {
  for (int i = 0; i < d->n_values; i++)
    if (!strcmp(d->keys[i], key)) {
      d->values[i] = v;
      return;
    }
  d->keys[d->n_values] = key;
  d->values[d->n_values++] = v;
}

/* Replace or add the --set of key. */
static void set_text(drawn *d, const char *key, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static void set_text(drawn *d, const char *key, const char *fmt, ...) {
  char value[SET_SIZE - 96];
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(value, sizeof value, fmt, ap);
  va_end(ap);
  size_t n = strlen(key);
  int i = 0;
  while (i < d->n_sets && !(strncmp(d->sets[i], key, n) == 0 && d->sets[i][n] == '=')) i++;
  if (i == d->n_sets) d->n_sets++;
  snprintf(d->sets[i], SET_SIZE, "%s=%s", key, value);
}

/* A number in [lo, hi] honouring open ends: an inclusive end (1 in 8 each),
 * uniform, or uniform in the logarithm (over at most 6 decades below hi
 * when lo is 0). */
static double draw_number(rng *r, double lo, int lo_in, double hi, int hi_in) {
  double u = rng_unit(r);
  if (lo_in && u < 0.125) return lo;
  if (hi_in && u < 0.25) return hi;
  for (;;) {
    double v;
    if (rng_unit(r) < 0.5 || hi <= 0.0 || lo < 0.0) {
      v = lo + (hi - lo) * rng_unit(r);
    } else {
      double l = lo > 0.0 ? lo : hi * 1e-6;
      v = exp(log(l) + (log(hi) - log(l)) * rng_unit(r));
    }
    if ((v > lo || (lo_in && v == lo)) && (v < hi || (hi_in && v == hi))) return v;
  }
}

/* Words of an allowed text "a, b or c". */
static int allowed_words(const char *allowed, char words[][32], int max) {
  int n = 0;
  const char *p = allowed;
  while (*p && n < max) {
    size_t len = strcspn(p, ", ");
    if (len > 0 && len < 32 && strncmp(p, "or", len) != 0) {
      memcpy(words[n], p, len);
      words[n++][len] = '\0';
    }
    p += len;
    while (*p == ',' || *p == ' ') p++;
  }
  return n;
}

/* Draw every key (table order, so bounds named by earlier keys are known).
 * Returns 0 when a number key's range cannot be read. */
static int draw_all(rng *r, const sweep_options *o, double k_floor, drawn *d, char *why,
                    size_t why_size) {
  memset(d, 0, sizeof *d);
  for (int i = 0; jg_param_doc_at(i); i++) {
    const jg_param_doc *doc = jg_param_doc_at(i);
    const char *key = doc->key;
    if (!strncmp(doc->type, "one of", 6)) {
      char words[8][32];
      int n = allowed_words(doc->allowed, words, 8);
      if (n < 1) {
        snprintf(why, why_size, "%s: no words in '%s'", key, doc->allowed);
        return 0;
      }
      set_text(d, key, "\"%s\"", words[rng_next(r) % (uint64_t)n]);
      continue;
    }
    if (!strcmp(doc->type, "boolean")) {
      set_text(d, key, "%s", rng_next(r) % 2 ? "true" : "false");
      continue;
    }
    if (!strcmp(doc->type, "quoted file name") || !strcmp(key, "perturbations.k_values") ||
        !strcmp(key, "perturbations.initial_columns") ||
        !strcmp(key, "perturbations.initial_second_redshift"))
      continue; /* files and a table's layout (their own tests), and the grid's list twin
                 * (the grid is drawn) */
    bound lo, hi;
    if (!parse_range(doc->allowed, &lo, &hi)) {
      snprintf(why, why_size, "%s: cannot read the range '%s'", key, doc->allowed);
      return 0;
    }
    if (!strcmp(key, "perturbations.z_initial")) {
      /* No start table is drawn, so our own start's floor applies (its range says so). */
      lo.value = JG_PARAMS_OWN_START_Z_MIN;
      lo.inclusive = 1;
    }
    if ((lo.key[0] && !value_of(d, key, lo.key, &lo.value)) ||
        (hi.key[0] && !value_of(d, key, hi.key, &hi.value))) {
      snprintf(why, why_size, "%s: range '%s' names a key not drawn before it", key, doc->allowed);
      return 0;
    }
    const int integer = !strcmp(doc->type, "integer");
    if (!strcmp(key, "output.redshifts")) {
      /* Below z_initial too (its own range says so). */
      double z_init;
      if (value_of(d, key, "perturbations.z_initial", &z_init) && z_init <= hi.value) {
        hi.value = z_init;
        hi.inclusive = 0;
      }
      int n = 1 + (int)(rng_next(r) % (uint64_t)(o->full ? MAX_LIST : 3));
      char list[SET_SIZE - 96];
      size_t used = 0;
      list[used++] = '[';
      for (int j = 0; j < n; j++) {
        double z = rng_unit(r) < 0.5
                       ? draw_number(r, lo.value, lo.inclusive, hi.value, hi.inclusive)
                       : expm1(draw_number(r, log1p(lo.value), lo.inclusive, log1p(hi.value), 0));
        if (!(z < hi.value || (hi.inclusive && z == hi.value))) z = lo.value;
        /* Written as a float ("0.0", not "0"): libconfig lists hold one type. */
        char num[40];
        snprintf(num, sizeof num, "%.17g", z);
        used += (size_t)snprintf(list + used, sizeof list - used, "%s%s%s", j ? ", " : "", num,
                                 strpbrk(num, ".e") ? "" : ".0");
      }
      snprintf(list + used, sizeof list - used, "]");
      set_text(d, key, "%s", list);
      continue;
    }
    if (!strcmp(doc->type, "list of numbers")) {
      snprintf(why, why_size, "%s: a list the sweep does not draw", key);
      return 0;
    }
    double top = hi.value;
    if (!o->full && !strcmp(key, "thermal.grid_points")) top = fmin(top, 20000.0);
    if (!o->full && !strcmp(key, "perturbations.k_count")) top = fmin(top, 6.0);
    double bottom = lo.value;
    int bottom_in = lo.inclusive;
    if (!strcmp(key, "perturbations.k_min") && k_floor > bottom) {
      bottom = k_floor;
      bottom_in = 1;
    }
    double v = draw_number(r, bottom, bottom_in, top, hi.inclusive || top < hi.value);
    if (integer) {
      v = floor(v + 0.5);
      if (v < bottom || (!bottom_in && v == bottom)) v = floor(bottom) + 1.0;
      if (v > top) v = floor(top);
      set_text(d, key, "%d", (int)v);
    } else {
      set_text(d, key, "%.17g", v);
    }
    remember(d, key, v);
  }
  /* A one-point grid needs k_min = k_max (loader rule). */
  double k_count, k_min;
  if (value_of(d, "perturbations.x", "k_count", &k_count) && k_count == 1.0 &&
      value_of(d, "perturbations.x", "k_min", &k_min))
    set_text(d, "perturbations.k_max", "%.17g", k_min);
  return 1;
}

/* ---- checks --------------------------------------------------------------- */

typedef struct outcome {
  int refused;     /* exit 2: a clean refusal */
  int failed;      /* exit 1 or a broken property */
  const char *command;
  char message[JG_ERROR_MESSAGE_SIZE + 128];
} outcome;

#define FAIL_IF(cond, cmd, ...)                                                   \
  do {                                                                            \
    if (cond) {                                                                   \
      out->failed = 1;                                                            \
      out->command = (cmd);                                                       \
      snprintf(out->message, sizeof out->message, __VA_ARGS__);                   \
      goto done;                                                                  \
    }                                                                             \
  } while (0)

static int finite_positive(double v) { return isfinite(v) && v > 0.0; }

/* Both 0 (no such scale), or both finite and positive. */
static int scale_and_mass(double k, double mass) {
  return (k == 0.0 && mass == 0.0) || (finite_positive(k) && finite_positive(mass));
}

/* Load, build and compute; the checks of the file comment. */
static void run_one(const sweep_options *o, long index, int attempt, FILE *sink, drawn *d,
                    outcome *out) {
  memset(out, 0, sizeof *out);
  rng r = {o->seed ^ (0xD1B54A32D192ED03ull * (uint64_t)(index + 1)) ^
           (0x8CB92BA72F3D8DD7ull * (uint64_t)attempt)};
  char why[256];
  jg_params *p = malloc(sizeof *p);
  double *k = malloc(sizeof(double) * JG_MAX_WAVENUMBERS);
  jg_background *bg = NULL;
  jg_thermal *th = NULL;
  jg_perturb_model *m = NULL;
  jg_perturb_workspace *w = NULL;
  jg_growth_grid *g = NULL;
  jg_error err;
  jg_error_clear(&err);
  FAIL_IF(!p || !k, "setup", "out of memory");
  rng saved = r;
  FAIL_IF(!draw_all(&r, o, 0.0, d, why, sizeof why), "setup", "%s", why);
  for (int pass = 0; pass < 2; pass++) {
    const char *sets[MAX_SETS];
    for (int i = 0; i < d->n_sets; i++) sets[i] = d->sets[i];
    if (jg_params_load(o->params, sets, d->n_sets, p, &err) != JG_OK) {
      out->refused = 1;
      out->command = "load";
      snprintf(out->message, sizeof out->message, "%s", err.message);
      goto done;
    }
    bg = jg_background_new(&p->cosmology, &err);
    if (!bg && err.status == JG_EINVAL) {
      out->refused = 1;
      out->command = "background";
      snprintf(out->message, sizeof out->message, "%s", err.message);
      goto done;
    }
    FAIL_IF(!bg, "scales", "%s", err.message);
    th = jg_thermal_new(bg, &p->thermal, &err);
    FAIL_IF(!th, "scales", "%s", err.message);
    m = jg_perturb_model_new(th, &p->perturbations, NULL, &err);
    FAIL_IF(!m, "scales", "%s", err.message);
    double k_lo, k_hi;
    jg_perturb_model_k_range(m, &k_lo, &k_hi);
    if (pass == 1 || p->perturbations.k_min >= k_lo) break;
    /* The grid starts inside the horizon limit: draw again above it (the
     * same stream, so the cosmology stays the same). */
    jg_perturb_model_free(m);
    jg_thermal_free(th);
    jg_background_free(bg);
    m = NULL, th = NULL, bg = NULL;
    r = saved;
    FAIL_IF(!draw_all(&r, o, k_lo, d, why, sizeof why), "setup", "%s", why);
  }
  w = jg_perturb_workspace_new(m, &err);
  FAIL_IF(!w, "scales", "%s", err.message);

  /* scales */
  const int n_z = p->output.n_redshifts;
  const double *z = p->output.redshifts;
  jg_scales_point s[MAX_LIST];
  jg_status st = jg_scales_compute(m, w, z, n_z, s, &err);
  FAIL_IF(st != JG_OK, "scales", "%s (%s)", err.message, jg_status_name(st));
  st = jg_report_scales(sink, p, th, s, n_z, &err);
  FAIL_IF(st != JG_OK, "scales", "table: %s", err.message);
  double k_lo, k_hi;
  jg_perturb_model_k_range(m, &k_lo, &k_hi);
  const double x_e_max = 1.0 + 2.0 * bg->helium_to_hydrogen; /* H and He fully ionised */
  /* The history is only as accurate as the stiff integration was asked to
   * be: T_gas <= T_rad and x_e <= x_e_max hold to ten times its tolerance. */
  const double slack = 1.0 + 1e-6 + 10.0 * p->thermal.rel_tol;
  for (int i = 0; i < n_z; i++) {
    const jg_scales_point *q = &s[i];
    jg_thermal_state ts;
    jg_thermal_state_at(th, z[i], &ts);
    /* Photo-heating lifts the gas above T_rad, below the onset of
     * reionisation only. */
    const bool heated = p->thermal.reionisation == JG_REIONISATION_TANH_HEATED &&
                        z[i] < jg_thermal_reionisation_onset(th);
    FAIL_IF(!finite_positive(ts.T_gas) || (!heated && ts.T_gas > ts.T_rad * slack), "scales",
            "z = %g: T_gas = %g K, T_rad = %g K (need 0 < T_gas <= T_rad)", z[i], ts.T_gas,
            ts.T_rad);
    FAIL_IF(!finite_positive(ts.x_e) || ts.x_e > x_e_max * slack, "scales",
            "z = %g: x_e = %g (need 0 < x_e <= %g)", z[i], ts.x_e, x_e_max);
    FAIL_IF(!finite_positive(q->k_jeans_adiabatic) ||
                !(q->k_jeans_adiabatic < q->k_jeans_isothermal) ||
                !finite_positive(q->m_jeans_isothermal) ||
                !(q->m_jeans_adiabatic > q->m_jeans_isothermal),
            "scales", "z = %g: Jeans k %g (adiabatic %g), M %g (adiabatic %g) not ordered", z[i],
            q->k_jeans_isothermal, q->k_jeans_adiabatic, q->m_jeans_isothermal,
            q->m_jeans_adiabatic);
    /* A filtering scale is 0 (mass 0) where the small-k law shows no
     * suppression; otherwise positive, and gamma = 5/3 gives a smaller k. */
    FAIL_IF(!scale_and_mass(q->k_filter_solved, q->m_filter_solved) ||
                !scale_and_mass(q->k_filter_integral_isothermal,
                                q->m_filter_integral_isothermal) ||
                !(q->k_filter_integral_adiabatic < q->k_filter_integral_isothermal ||
                  q->k_filter_integral_isothermal == 0.0),
            "scales", "z = %g: filtering k %g (M %g), integral %g (M %g, adiabatic k %g)", z[i],
            q->k_filter_solved, q->m_filter_solved, q->k_filter_integral_isothermal,
            q->m_filter_integral_isothermal, q->k_filter_integral_adiabatic);
    FAIL_IF(!isfinite(q->b_over_c_large) || !finite_positive(q->delta_m_large) ||
                (q->half_found && !(q->b_over_c_large > 0.0)),
            "scales", "z = %g: k -> 0 delta_b/delta_c %g, delta_m %g, half found %d", z[i],
            q->b_over_c_large, q->delta_m_large, q->half_found);
    FAIL_IF(q->half_found && !(q->k_half >= k_lo && q->k_half <= k_hi &&
                               finite_positive(q->m_half)),
            "scales", "z = %g: k_half = %.17g outside [%g, %g] or M_half = %g", z[i], q->k_half,
            k_lo, k_hi, q->m_half);
  }

  /* growth */
  int n_k = 0;
  st = jg_perturb_wavenumbers(&p->perturbations, k, &n_k, &err);
  FAIL_IF(st != JG_OK, "growth", "%s", err.message);
  st = jg_growth_grid_compute(m, w, k, n_k, z, n_z, &g, &err);
  FAIL_IF(st != JG_OK, "growth", "%s (%s)", err.message, jg_status_name(st));
  st = jg_report_growth(sink, p, th, g, &err);
  FAIL_IF(st != JG_OK, "growth", "table: %s", err.message);
  for (int ik = 0; ik < n_k; ik++)
    for (int iz = 0; iz < n_z; iz++) {
      const jg_perturb_point *pt = jg_growth_grid_at(g, ik, iz);
      FAIL_IF(!finite_positive(pt->delta_c) || !isfinite(pt->b_over_c), "growth",
              "k = %g, z = %g: delta_c = %g, delta_b/delta_c = %g", k[ik], z[iz], pt->delta_c,
              pt->b_over_c);
    }

  /* the epochs of `run` (--epochs) */
  if (!o->epochs) goto done;
  jg_epochs e;
  st = jg_epochs_compute(th, &e, &err);
  FAIL_IF(st != JG_OK, "epochs", "%s (%s)", err.message, jg_status_name(st));
  /* An epoch this universe lacks is absent with a reason, never a number
   * that is not one. */
  for (int i = 0; i < jg_epochs_count(); i++) {
    jg_epoch_entry en = jg_epochs_entry(&e, i);
    FAIL_IF(en.exists ? !isfinite(en.value) : (en.value != 0.0 || !en.reason[0]), "epochs",
            "%s = %g (exists %d, reason \"%s\")", en.name, en.value, en.exists, en.reason);
  }
  st = jg_report_epochs(sink, p, &e, &err);
  FAIL_IF(st != JG_OK, "epochs", "table: %s", err.message);
done:
  jg_growth_grid_free(g);
  jg_perturb_workspace_free(w);
  jg_perturb_model_free(m);
  jg_thermal_free(th);
  jg_background_free(bg);
  free(k);
  free(p);
}

/* ---- the sweep -------------------------------------------------------------- */

typedef struct worker {
  const sweep_options *o;
  int id;
  long ran, refused, failed;
  pthread_mutex_t *lock;
} worker;

static void print_reproducer(const sweep_options *o, const char *command, const drawn *d) {
  const char *cmd = !strcmp(command, "growth") || !strcmp(command, "epochs")
                        ? (!strcmp(command, "epochs") ? "epochs" : "growth")
                        : "scales";
  fprintf(stderr, "  %s %s %s", o->program, cmd, o->params);
  for (int i = 0; i < d->n_sets; i++) fprintf(stderr, " --set '%s'", d->sets[i]);
  fputc('\n', stderr);
}

static void *work(void *arg) {
  worker *wk = arg;
  const sweep_options *o = wk->o;
  FILE *sink = fopen("/dev/null", "w");
  drawn *d = malloc(sizeof *d);
  if (!sink || !d) {
    wk->failed++;
    if (sink) fclose(sink);
    free(d);
    return NULL;
  }
  for (long i = o->first + wk->id; i < o->first + o->count; i += o->threads) {
    /* A draw refused cleanly (exit 2) is counted and replaced by another,
     * so that every index is a cosmology that runs. */
    outcome out;
    for (int attempt = 0; attempt < MAX_ATTEMPTS; attempt++) {
      run_one(o, i, attempt, sink, d, &out);
      if (!out.refused) break;
      pthread_mutex_lock(wk->lock);
      wk->refused++;
      if (o->verbose) {
        fprintf(stderr, "refused cosmology %ld.%d (%s, exit 2): %s\n", i, attempt, out.command,
                out.message);
        print_reproducer(o, "scales", d);
      }
      pthread_mutex_unlock(wk->lock);
    }
    pthread_mutex_lock(wk->lock);
    if (out.failed) {
      wk->failed++;
      fprintf(stderr, "FAILED cosmology %ld (%s): %s\n", i, out.command, out.message);
      print_reproducer(o, out.command, d);
    } else if (out.refused) {
      wk->failed++;
      fprintf(stderr, "FAILED cosmology %ld: %d draws in a row refused, the last: %s\n", i,
              MAX_ATTEMPTS, out.message);
    } else {
      wk->ran++;
    }
    pthread_mutex_unlock(wk->lock);
  }
  fclose(sink);
  free(d);
  return NULL;
}

int main(int argc, char **argv) {
  gsl_set_error_handler_off();
  sweep_options o = {0, 500, 20261203, 1, 0, 0, 0, "params/reference.cfg", "build/jeansgrow"};
#ifdef JG_SOURCE_DIR
  o.params = JG_SOURCE_DIR "/params/reference.cfg";
#endif
#ifdef JG_PROGRAM
  o.program = JG_PROGRAM;
#endif
  for (int i = 1; i < argc; i++) {
    const char *a = argv[i], *v = i + 1 < argc ? argv[i + 1] : NULL;
    if (!strcmp(a, "--full")) o.full = 1;
    else if (!strcmp(a, "--verbose")) o.verbose = 1;
    else if (!strcmp(a, "--epochs")) o.epochs = 1;
    else if (v && !strcmp(a, "--count")) o.count = atol(argv[++i]);
    else if (v && !strcmp(a, "--first")) o.first = atol(argv[++i]);
    else if (v && !strcmp(a, "--seed")) o.seed = strtoull(argv[++i], NULL, 10);
    else if (v && !strcmp(a, "--threads")) o.threads = atoi(argv[++i]);
    else if (v && !strcmp(a, "--params")) o.params = argv[++i];
    else if (v && !strcmp(a, "--program")) o.program = argv[++i];
    else {
      fprintf(stderr, "valid_sweep: unknown argument '%s'\n", a);
      return 2;
    }
  }
  const char *env = getenv("JG_SWEEP_COUNT");
  if (env && *env) o.count = atol(env);
  if (o.count < 0 || o.first < 0 || o.threads < 1 || o.threads > 256) {
    fprintf(stderr, "valid_sweep: bad --count, --first or --threads\n");
    return 2;
  }
  pthread_mutex_t lock = PTHREAD_MUTEX_INITIALIZER;
  worker wk[256];
  pthread_t tid[256];
  for (int t = 0; t < o.threads; t++) {
    wk[t] = (worker){&o, t, 0, 0, 0, &lock};
    if (pthread_create(&tid[t], NULL, work, &wk[t]) != 0) {
      fprintf(stderr, "valid_sweep: cannot start thread %d\n", t);
      return 1;
    }
  }
  long ran = 0, refused = 0, failed = 0;
  for (int t = 0; t < o.threads; t++) {
    pthread_join(tid[t], NULL);
    ran += wk[t].ran, refused += wk[t].refused, failed += wk[t].failed;
  }
  printf("valid_sweep: seed %llu, cosmologies %ld to %ld%s: %ld ran, %ld failed; %ld other "
         "draws refused cleanly by the loader or background (exit 2) and replaced\n",
         (unsigned long long)o.seed, o.first, o.first + o.count - 1,
         o.full ? " (full ranges)" : "", ran, failed, refused);
  return failed ? 1 : 0;
}
