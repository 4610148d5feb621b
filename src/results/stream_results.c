/*
 * The streaming velocity's results (see include/jeansgrow/stream_results.h):
 * the averaged powers on the growth grid, the streamed filtering scale and
 * the streamed half-suppression scale.
 */
#include "jeansgrow/stream_results.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "../base/alloc.h" /* last: test builds route allocations through it */

/* The search for k_half_stream: from k_F_stream / 4 up by this factor (as
 * the unstreamed search), then regula falsi (Illinois) in ln k, every
 * redshift's trial wavenumber in one batch, until the bracket is narrower
 * than STREAM_HALF_TOL in ln k: a thousand times finer than the 1e-4 of
 * the averages' quadrature. */
#define STREAM_LADDER 1.5
#define STREAM_HALF_TOL 1.0e-7
#define STREAM_HALF_ROUNDS 60
#define STREAM_MAX_RUNGS 40

/* The stream model of `s`, with its status even when err is NULL. */
static jg_status open_stream_model(const jg_perturb_model *m, const jg_streaming_settings *s,
                                   jg_stream_model **sm, jg_error *err) {
  jg_error local;
  *sm = jg_stream_model_new(m, s, err ? err : &local);
  return *sm ? JG_OK : err ? err->status : local.status;
}

jg_status jg_growth_grid_add_streaming(jg_growth_grid *g, const jg_perturb_model *m,
                                       jg_perturb_workspace *w, const jg_streaming_settings *s,
                                       jg_error *err) {
  jg_stream_model *sm = NULL;
  const jg_status opened = open_stream_model(m, s, &sm, err);
  if (opened != JG_OK) return opened;
  jg_status st = JG_OK;
  if (jg_stream_active(sm)) {
    g->stream = malloc(sizeof *g->stream * (size_t)g->n_k * (size_t)g->n_z);
    st = g->stream ? jg_stream_powers(sm, w, g->k, g->n_k, g->z, g->n_z, 1, g->stream, err)
                   : JG_FAIL(err, JG_ENOMEM, "out of memory for the streaming powers");
  }
  jg_stream_model_free(sm);
  return st;
}

/* Per redshift: a bracket [ka, kb] in ln k with its residuals (> 0 at ka). */
typedef struct stream_half {
  int state; /* 0 searching, 1 bracketed, 2 done */
  double ta, tb, fa, fb;
  int side; /* Illinois: which end was kept last time (+1 a, -1 b) */
} stream_half;

/* sqrt(<P_b>/<P_c>) - target at every redshift for the wavenumbers k[0..n). */
static jg_status residuals(const jg_stream_model *sm, jg_perturb_workspace *w, const double *k,
                           int n, const double *z, int n_z, const double *target,
                           jg_stream_power *pw, double *f, jg_error *err) {
  jg_status st = jg_stream_powers(sm, w, k, n, z, n_z, 0, pw, err);
  for (int b = 0; st == JG_OK && b < n; b++)
    for (int i = 0; i < n_z; i++) f[b * n_z + i] = pw[b * n_z + i].b_over_c - target[i];
  return st;
}

static jg_status half_stream(const jg_perturb_model *m, const jg_stream_model *sm,
                             jg_perturb_workspace *w, const double *z, int n_z,
                             const double *target, double k_start, double *k_half, int *found,
                             jg_error *err) {
  double k_lo, k_hi;
  jg_perturb_model_k_range(m, &k_lo, &k_hi);
  stream_half *h = calloc((size_t)n_z, sizeof *h);
  jg_stream_power *pw = malloc(sizeof *pw * JG_PERTURB_BATCH * (size_t)n_z);
  double *f = malloc(sizeof(double) * JG_PERTURB_BATCH * (size_t)n_z);
  jg_status st = h && pw && f ? JG_OK : JG_FAIL(err, JG_ENOMEM, "streaming: out of memory");
  int open = 0;
  for (int i = 0; i < n_z; i++) {
    found[i] = 0;
    k_half[i] = 0.0;
    if (st == JG_OK && target[i] > 0.0) open++;
    else if (h) h[i].state = 2;
  }
  /* The ladder, a batch at a time, shared by every redshift. */
  double rung[STREAM_MAX_RUNGS];
  int n_rungs = 0;
  for (double k = fmin(fmax(k_start, k_lo), k_hi); n_rungs < STREAM_MAX_RUNGS; k *= STREAM_LADDER) {
    rung[n_rungs++] = fmin(k, k_hi);
    if (k >= k_hi) break;
  }
  for (int first = 0; st == JG_OK && open > 0 && first < n_rungs; first += JG_PERTURB_BATCH) {
    const int n = n_rungs - first < JG_PERTURB_BATCH ? n_rungs - first : JG_PERTURB_BATCH;
    st = residuals(sm, w, rung + first, n, z, n_z, target, pw, f, err);
    for (int b = 0; st == JG_OK && b < n; b++)
      for (int i = 0; i < n_z; i++) {
        stream_half *hi = &h[i];
        const double t = log(rung[first + b]), fi = f[b * n_z + i];
        if (hi->state != 0) continue;
        if (fi > 0.0) {
          hi->ta = t, hi->fa = fi, hi->side = 0;
          hi->tb = NAN;
          continue;
        }
        if (first + b == 0 || isnan(hi->fa) || hi->fa == 0.0) { /* suppressed at the start */
          hi->state = 2, open--;
          continue;
        }
        hi->tb = t, hi->fb = fi, hi->state = 1, open--;
      }
  }
  /* Regula falsi with the Illinois halving, all redshifts together. */
  for (int round = 0; st == JG_OK && round < STREAM_HALF_ROUNDS; round++) {
    double ks[JG_MAX_REDSHIFTS];
    int who[JG_MAX_REDSHIFTS], nk = 0;
    for (int i = 0; i < n_z; i++) {
      stream_half *hi = &h[i];
      if (hi->state != 1) continue;
      /* Settled, or (never seen) the rounds spent: the bracket's secant point. */
      if (hi->tb - hi->ta <= STREAM_HALF_TOL || round == STREAM_HALF_ROUNDS - 1) {
        const double t = hi->ta - hi->fa * (hi->tb - hi->ta) / (hi->fb - hi->fa);
        k_half[i] = fmin(fmax(exp(t), k_lo), k_hi), found[i] = 1, hi->state = 2;
        continue;
      }
      const double t = hi->ta - hi->fa * (hi->tb - hi->ta) / (hi->fb - hi->fa);
      ks[nk] = exp(fmin(fmax(t, hi->ta), hi->tb));
      who[nk++] = i;
    }
    if (nk == 0) break;
    for (int first = 0; st == JG_OK && first < nk; first += JG_PERTURB_BATCH) {
      const int n = nk - first < JG_PERTURB_BATCH ? nk - first : JG_PERTURB_BATCH;
      st = residuals(sm, w, ks + first, n, z, n_z, target, pw, f, err);
      for (int b = 0; st == JG_OK && b < n; b++) {
        const int i = who[first + b];
        stream_half *hi = &h[i];
        const double t = log(ks[first + b]), fi = f[b * n_z + i];
        if (fi == 0.0) {
          k_half[i] = ks[first + b], found[i] = 1, hi->state = 2;
        } else if (fi > 0.0) {
          hi->ta = t, hi->fa = fi;
          if (hi->side == 1) hi->fb *= 0.5;
          hi->side = 1;
        } else {
          hi->tb = t, hi->fb = fi;
          if (hi->side == -1) hi->fa *= 0.5;
          hi->side = -1;
        }
      }
    }
  }
  free(h);
  free(pw);
  free(f);
  return st;
}

jg_status jg_scales_add_streaming(const jg_perturb_model *m, jg_perturb_workspace *w,
                                  const jg_streaming_settings *s, const double *z, int n_z,
                                  jg_scales_point *out, jg_error *err) {
  jg_stream_model *sm = NULL;
  const jg_status opened = open_stream_model(m, s, &sm, err);
  if (opened != JG_OK) return opened;
  if (!jg_stream_active(sm)) {
    jg_stream_model_free(sm);
    return JG_OK;
  }
  jg_perturb_limit limit[JG_MAX_REDSHIFTS];
  double stream_k2[JG_MAX_REDSHIFTS], target[JG_MAX_REDSHIFTS], k_half[JG_MAX_REDSHIFTS];
  int found[JG_MAX_REDSHIFTS];
  jg_status st = jg_perturb_solve_limit(m, w, z, n_z, limit, err);
  if (st == JG_OK) st = jg_stream_limit(sm, w, z, n_z, stream_k2, err);
  double k_start = HUGE_VAL;
  for (int i = 0; st == JG_OK && i < n_z; i++) {
    /* <P_b>/P_b(k -> 0) = 1 - 2 k^2 / k_F_stream^2: 1/k_Fs^2 = 1/k_F^2 - stream_k2 / 2. */
    const double inv = -limit[i].dlnb_dk2 - 0.5 * stream_k2[i];
    out[i].k_filter_stream = inv > 0.0 ? 1.0 / sqrt(inv) : 0.0;
    out[i].m_filter_stream = jg_scales_mass(m, out[i].k_filter_stream, 2.0);
    /* At and above the start nothing streams yet: the unstreamed k_half stands. */
    const int streams = -log1p(z[i]) > jg_stream_start(sm);
    target[i] = streams && limit[i].k0.b_over_c > 0.0 ? 0.5 * limit[i].k0.b_over_c : NAN;
    if (target[i] > 0.0 && out[i].k_filter_stream > 0.0)
      k_start = fmin(k_start, 0.25 * out[i].k_filter_stream);
  }
  if (st == JG_OK) st = half_stream(m, sm, w, z, n_z, target, k_start, k_half, found, err);
  for (int i = 0; st == JG_OK && i < n_z; i++) {
    if (!(target[i] > 0.0)) continue;
    out[i].half_stream_found = found[i];
    out[i].k_half_stream = found[i] ? k_half[i] : 0.0;
    out[i].m_half_stream = found[i] ? jg_scales_mass(m, k_half[i], 1.0) : 0.0;
  }
  jg_stream_model_free(sm);
  return st;
}
