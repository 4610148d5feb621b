/*
 * Jeans, filtering and half-suppression scales (see include/jeansgrow/scales.h).
 *
 * Sources: comoving Jeans wavenumber and the half-wavelength mass convention
 * of Barkana & Loeb (2001, Phys. Rep. 349, 125); filtering scale of Gnedin &
 * Hui (1998, MNRAS 296, 44), the integral being integrated alongside the
 * large-scale solve in perturb.c; filtering mass convention of Gnedin (2000,
 * ApJ 542, 535); growth factor of Heath (1977, MNRAS 179, 351) from
 * background.c. The half-suppression root: a shared ladder of wavenumbers and
 * cubic interpolation in ln k (half_suppression_all), GSL's Brent solver as
 * the fallback.
 */
#include "jeansgrow/scales.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_roots.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "jeansgrow/background.h"
#include "jeansgrow/constants.h"
#include "jeansgrow/jeans.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* The half-suppression search starts at k_F/4, where the quadratic law
 * 1 - k^2/k_F^2 still gives ~0.94 > 1/2, and steps up by this factor until
 * the ratio falls below one half; the first crossing on that ladder is then
 * refined. A factor 1.5 keeps the ladder finer than the width of the first
 * fall of delta_b/delta_c (about a factor 3 in k from 0.9 to 0.1). */
#define SC_LADDER 1.5
#define SC_START_FRACTION 0.25
/* Relative accuracy of k_1/2: a hundred times looser than the solver's
 * default 1e-8 on the ratio divided by |d ln ratio / d ln k| ~ 1. */
#define SC_ROOT_TOL 1.0e-7
#define SC_ROOT_ITER 100

double jg_scales_mass(const jg_perturb_model *m, double k, double f) {
  const double rho = jg_perturb_model_medium(m)->rho_m0;
  if (!(rho > 0.0) || !(k > 0.0)) return 0.0;
  const double r = f * JG_PI / k;
  return 4.0 * JG_PI / 3.0 * rho * r * r * r;
}

/* The search asks only for wavenumbers inside the model's accepted range,
 * so a refusal by the solver is a failure of this stage (exit 1), not bad
 * input: said as such, with the wavenumbers of `k_first` to `k_last` (one
 * wavenumber when they are equal) and, for one redshift, z (or NAN). */
static jg_status search_failed(jg_status st, double k_first, double k_last, double z,
                               jg_error *err) {
  if (st == JG_ENOMEM) return st;
  char why[JG_ERROR_MESSAGE_SIZE], where[96];
  snprintf(why, sizeof why, "%s", err ? err->message : "");
  int n = isnan(z) ? 0 : snprintf(where, sizeof where, " at z = %g", z);
  if (k_first == k_last)
    snprintf(where + n, sizeof where - (size_t)n, ", k = %.10g /Mpc", k_first);
  else
    snprintf(where + n, sizeof where - (size_t)n, ", k = %.10g to %.10g /Mpc", k_first, k_last);
  return JG_FAIL(err, st == JG_EINVAL ? JG_ENUMERIC : st, "half suppression%s: %s", where, why);
}

typedef struct half_ctx {
  const jg_perturb_model *m;
  jg_perturb_workspace *w;
  double z, target;
  double k_below, k_above; /* Brent's bracket, carried exactly as wavenumbers */
  jg_status status;
  jg_error *err;
} half_ctx;

/* (delta_b/delta_c)(k) - target; a refusal by the solver is the stage's
 * failure (search_failed). */
static double half_residual(half_ctx *c, double k) {
  if (c->status != JG_OK) return GSL_NAN;
  jg_perturb_point p;
  c->status = jg_perturb_solve(c->m, c->w, k, &c->z, 1, &p, c->err);
  if (c->status != JG_OK) {
    c->status = search_failed(c->status, k, k, c->z, c->err);
    return GSL_NAN;
  }
  return p.b_over_c - c->target;
}

/* Brent works in ln k; exp(log(k)) may differ from k in the last bit, so
 * its trial point is mapped back inside the bracket, whose ends are the
 * exact wavenumbers of the ladder (one of them may be the range's bound). */
static double half_residual_ln(double ln_k, void *params) {
  half_ctx *c = params;
  return half_residual(c, fmin(fmax(exp(ln_k), c->k_below), c->k_above));
}

static jg_status half_brent(half_ctx *cp, double ka, double kb, double *k_half, int *found);

jg_status jg_scales_half_suppression(const jg_perturb_model *m, jg_perturb_workspace *w, double z,
                                     double ratio_large, double k_start, double *k_half,
                                     int *found, jg_error *err) {
  *found = 0;
  *k_half = 0.0;
  double k_lo, k_hi;
  jg_perturb_model_k_range(m, &k_lo, &k_hi);
  /* The ratio comes from the k = 0 solve: one that is not > 0 is a failure
   * of this stage (exit 1), not bad input. */
  if (!(ratio_large > 0.0))
    return JG_FAIL(err, JG_ENUMERIC,
                   "half suppression at z = %g: the large-scale delta_b/delta_c is %g (must be > 0)",
                   z, ratio_large);
  half_ctx c = {m, w, z, 0.5 * ratio_large, 0.0, 0.0, JG_OK, err};
  double ka = fmin(fmax(k_start, k_lo), k_hi);
  double fa = half_residual(&c, ka);
  /* Step down until the ratio is above one half (rarely needed). */
  while (c.status == JG_OK && fa <= 0.0 && ka > k_lo) {
    ka = fmax(ka / SC_LADDER, k_lo);
    fa = half_residual(&c, ka);
  }
  if (c.status != JG_OK) return c.status;
  if (fa <= 0.0) return JG_OK; /* already suppressed at the lowest accepted k */
  double kb = ka, fb = fa;
  while (fb > 0.0 && kb < k_hi) {
    ka = kb;
    fa = fb;
    kb = fmin(kb * SC_LADDER, k_hi);
    fb = half_residual(&c, kb);
    if (c.status != JG_OK) return c.status;
  }
  if (fb > 0.0) return JG_OK; /* no crossing below the upper limit */
  if (fb == 0.0) {
    *k_half = kb;
    *found = 1;
    return JG_OK;
  }
  return half_brent(&c, ka, kb, k_half, found);
}

/* Brent's method on ln k between the bracket ends ka < kb (residual > 0 at
 * ka, < 0 at kb). */
static jg_status half_brent(half_ctx *cp, double ka, double kb, double *k_half, int *found) {
  half_ctx c = *cp;
  const double z = c.z;
  jg_error *err = c.err;
  gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
  if (!s) return JG_FAIL(err, JG_ENOMEM, "half suppression: out of memory for the root solver");
  c.k_below = ka;
  c.k_above = kb;
  gsl_function F = {half_residual_ln, &c};
  int st = gsl_root_fsolver_set(s, &F, log(ka), log(kb));
  int iter = 0;
  while (st == GSL_SUCCESS && iter++ < SC_ROOT_ITER) {
    st = gsl_root_fsolver_iterate(s);
    if (c.status != JG_OK) break;
    if (st != GSL_SUCCESS) break;
    double lo = gsl_root_fsolver_x_lower(s), hi = gsl_root_fsolver_x_upper(s);
    if (gsl_root_test_interval(lo, hi, SC_ROOT_TOL, 0.0) == GSL_SUCCESS) {
      *k_half = fmin(fmax(exp(gsl_root_fsolver_root(s)), ka), kb);
      *found = 1;
      break;
    }
  }
  gsl_root_fsolver_free(s);
  if (c.status != JG_OK) return c.status;
  if (!*found)
    return JG_FAIL(err, JG_ENUMERIC,
                   "half suppression at z = %g: Brent's method did not converge between k = %g "
                   "and %g /Mpc (%s)",
                   z, ka, kb, st != GSL_SUCCESS ? gsl_strerror(st) : "too many iterations");
  return JG_OK;
}

/* Jeans wavenumbers at redshift z: from the thermal state on the real
 * history (jeans.c), else from the medium, k_J^2 = g / p (isothermal). */
static jg_status jeans_at(const jg_perturb_model *m, double z, double *k_iso, double *k_adi,
                          jg_error *err) {
  const jg_thermal *th = jg_perturb_model_thermal(m);
  if (th) {
    jg_thermal_state s;
    jg_thermal_state_at(th, z, &s);
    const jg_background *bg = jg_thermal_background(th);
    const double a = 1.0 / (1.0 + z);
    *k_iso = jg_jeans_wavenumber(bg, a, jg_sound_speed_squared(s.T_gas, s.mu, 1.0));
    *k_adi = jg_jeans_wavenumber(bg, a, jg_sound_speed_squared(s.T_gas, s.mu, 5.0 / 3.0));
  } else {
    const jg_medium *md = jg_perturb_model_medium(m);
    jg_medium_coefficients c;
    if (md->eval(md->ctx, -log1p(z), &c) != 0)
      return JG_FAIL(err, JG_ENUMERIC, "scales: medium undefined at z = %g", z);
    *k_iso = c.pressure > 0.0 ? sqrt(c.gravity / c.pressure) : HUGE_VAL;
    *k_adi = *k_iso * sqrt(3.0 / 5.0);
  }
  return JG_OK;
}

/* k from 1/k^2; 0 (with mass 0, see jg_scales_mass) when 1/k^2 <= 0: the
 * small-k law shows no suppression yet, and the scale does not exist. */
static double k_from_inverse_square(double inv_k2) {
  return inv_k2 > 0.0 ? 1.0 / sqrt(inv_k2) : 0.0;
}

/* ---- the half-suppression search on a shared ladder ---------------------- */

/* Rungs of the shared ladder at most (1.5^40 spans 7 decades). */
#define SC_MAX_RUNGS 40
/* Refinement solves after the first estimate; a last move in ln k above
 * SC_CUBIC_SETTLED (within Brent's stopping interval, SC_ROOT_TOL times
 * |ln k| > 1e-7 for k > e) sends the redshift to Brent's method instead. */
#define SC_REFINEMENTS 3
#define SC_CUBIC_SETTLED 1.0e-7
#define SC_MAX_POINTS (SC_MAX_RUNGS + SC_REFINEMENTS)

/* The interpolating polynomial through n <= 4 points (t_i, f_i) at t, by
 * Neville's scheme. */
static double through_points(const double *t, const double *f, int n, double x) {
  double p[4];
  for (int i = 0; i < n; i++) p[i] = f[i];
  for (int level = 1; level < n; level++)
    for (int i = 0; i < n - level; i++)
      p[i] = ((x - t[i + level]) * p[i] + (t[i] - x) * p[i + 1]) / (t[i] - t[i + level]);
  return p[0];
}

/* The root inside [ta, tb] (f(ta) > 0 >= f(tb)) of the cubic through the
 * 4 known points nearest `centre` (fewer if fewer are known), by bisection
 * on the polynomial; the polynomial is cheap, so 60 halvings cost nothing. */
static double cubic_root(const double *t, const double *f, int n, double ta, double tb,
                         double centre) {
  double tt[4], ff[4];
  char used[SC_MAX_POINTS] = {0};
  int m = 0;
  for (; m < 4 && m < n; m++) {
    int best = -1;
    for (int i = 0; i < n; i++)
      if (!used[i] && (best < 0 || fabs(t[i] - centre) < fabs(t[best] - centre))) best = i;
    used[best] = 1;
    tt[m] = t[best];
    ff[m] = f[best];
  }
  double lo = ta, hi = tb;
  for (int it = 0; it < 60; it++) {
    const double x = 0.5 * (lo + hi);
    if (through_points(tt, ff, m, x) > 0.0) lo = x; else hi = x;
  }
  return 0.5 * (lo + hi);
}

typedef struct half_search {
  int state;            /* 0 searching, 1 bracketed, 2 done, 3 to Brent */
  int start_rung;       /* the rung at or below this redshift's start */
  double ka, kb;        /* bracket, exact wavenumbers */
  int n;                /* known points */
  double t[SC_MAX_POINTS], f[SC_MAX_POINTS]; /* ln k and residual */
} half_search;

/* How far up the ladder a redshift still searching needs solving: a
 * margin SC_REACH_MARGIN above where its crossing is expected. Before any
 * of its rungs is solved, the expectation is its k_F (k_start is
 * SC_START_FRACTION k_F); after, the quadratic law delta_b/delta_c =
 * (1 - k^2/k_e^2) (delta_b/delta_c)_0 through its newest rung, which
 * crosses one half at k_e/sqrt(2). Over the parameter box the crossing
 * lies between 0.8 and 3.9 k_F (at z = 0; below 1.3 k_F before z ~ 50,
 * measured), and the law fitted at a rung below the crossing puts it low
 * where the fall flattens, so the margin is generous. An expectation
 * short of the crossing costs one more batch; one far beyond it, rungs at
 * high k whose sound waves set the whole batch's steps (measured: the
 * second batch of 8 rungs to 5.6e4 /Mpc of the reference cosmology took
 * 1,670 steps against 374 for the first). */
#define SC_REACH_MARGIN 2.0
static double ladder_reach(const half_search *h, const double *rung, double target,
                           double k_start) {
  if (h->n == 0 || h->n - 1 < h->start_rung)
    return SC_REACH_MARGIN * k_start / SC_START_FRACTION;
  const double k_last = rung[h->n - 1];
  const double ratio = (h->f[h->n - 1] + target) / (2.0 * target); /* to the k -> 0 value */
  if (!(ratio < 1.0)) return k_last * pow(SC_LADDER, JG_PERTURB_BATCH); /* not falling yet */
  return SC_REACH_MARGIN * k_last / sqrt(2.0 * (1.0 - ratio));
}

/* The next batch of the ladder from rung `solved`: up to the first rung at
 * or above the farthest reach of the redshifts still searching, at most a
 * full batch, at least one rung. */
static int ladder_batch(const double *rung, int n_rungs, int solved, const half_search *hs,
                        int n_z, const double *target, const double *k_start) {
  int last = solved;
  for (int i = 0; i < n_z; i++) {
    if (hs[i].state != 0) continue;
    const double reach = ladder_reach(&hs[i], rung, target[i], k_start[i]);
    int j = solved;
    while (j + 1 < n_rungs && rung[j] < reach) j++;
    if (j > last) last = j;
  }
  const int n = last - solved + 1;
  return n < JG_PERTURB_BATCH ? n : JG_PERTURB_BATCH;
}

/* k_1/2 at every redshift at once. One ladder of wavenumbers, k_j = k_0
 * 1.5^j from the smallest start over the redshifts, solved in batches with
 * every redshift read off each solve; per redshift the first crossing at or
 * above its own start, located by the cubic in ln k through the nearest
 * rungs and refined three times by a fresh solve at the estimate (all
 * redshifts' refinements in one batch) and a new cubic through the points
 * nearest the newest one. Two rounds left the last move at 1e-6 to 7e-5 in
 * ln k on the reference cosmology, three at most 8e-8.
 * Brent's method only where this does not settle or the ladder cannot
 * bracket (a crossing below the smallest start). Wavenumbers are carried as
 * values and clamped to exact bounds, never rebuilt from their logarithms
 * outside them. */
static jg_status half_search_run(const jg_perturb_model *m, jg_perturb_workspace *w,
                                 const double *z, int n_z, const double *target,
                                 const double *k_start, double *k_half, int *found,
                                 half_search *hs, jg_perturb_point *pts, jg_error *err);

static jg_status half_suppression_all(const jg_perturb_model *m, jg_perturb_workspace *w,
                                      const double *z, int n_z, const double *target,
                                      const double *k_start, double *k_half, int *found,
                                      jg_error *err) {
  half_search *hs = malloc(sizeof *hs * (size_t)n_z);
  jg_perturb_point *pts = malloc(sizeof *pts * JG_PERTURB_BATCH * (size_t)n_z);
  jg_status st = JG_OK;
  if (!hs || !pts) st = JG_FAIL(err, JG_ENOMEM, "half suppression: out of memory");
  else st = half_search_run(m, w, z, n_z, target, k_start, k_half, found, hs, pts, err);
  free(hs);
  free(pts);
  return st;
}

static jg_status half_search_run(const jg_perturb_model *m, jg_perturb_workspace *w,
                                 const double *z, int n_z, const double *target,
                                 const double *k_start, double *k_half, int *found,
                                 half_search *hs, jg_perturb_point *pts, jg_error *err) {
  double k_lo, k_hi;
  jg_perturb_model_k_range(m, &k_lo, &k_hi);
  double k0 = k_hi;
  for (int i = 0; i < n_z; i++)
    if (target[i] > 0.0) k0 = fmin(k0, fmin(fmax(k_start[i], k_lo), k_hi));
  double rung[SC_MAX_RUNGS];
  int n_rungs = 0;
  for (int j = 0; j < SC_MAX_RUNGS; j++) {
    rung[n_rungs++] = j == 0 ? k0 : fmin(rung[j - 1] * SC_LADDER, k_hi);
    if (rung[n_rungs - 1] >= k_hi) break;
  }
  int open = 0;
  for (int i = 0; i < n_z; i++) {
    memset(&hs[i], 0, sizeof hs[i]);
    found[i] = 0;
    k_half[i] = 0.0;
    if (!(target[i] > 0.0)) { /* no such scale at this redshift */
      hs[i].state = 2;
      continue;
    }
    open++;
    const double start = fmin(fmax(k_start[i], k_lo), k_hi);
    while (hs[i].start_rung + 1 < n_rungs && rung[hs[i].start_rung + 1] <= start) hs[i].start_rung++;
  }
  /* The ladder, a batch at a time, until every redshift is bracketed or the
   * ladder ends; each batch only as far up as the open redshifts' crossings
   * are expected (ladder_reach). */
  int solved = 0;
  while (open > 0 && solved < n_rungs) {
    const int n = ladder_batch(rung, n_rungs, solved, hs, n_z, target, k_start);
    jg_status st = jg_perturb_solve_many(m, w, rung + solved, n, z, n_z, pts, err);
    if (st != JG_OK) return search_failed(st, rung[solved], rung[solved + n - 1], NAN, err);
    for (int b = 0; b < n; b++) {
      const int j = solved + b;
      for (int i = 0; i < n_z; i++) {
        half_search *h = &hs[i];
        h->t[h->n] = log(rung[j]);
        h->f[h->n] = pts[b * n_z + i].b_over_c - target[i];
        h->n++;
        if (h->state != 0 || j < h->start_rung) continue;
        const double fj = h->f[h->n - 1];
        if (j == h->start_rung) {
          if (fj <= 0.0) h->state = 3, open--; /* suppressed at its start: Brent's path */
          continue;
        }
        if (fj <= 0.0) {
          h->ka = rung[j - 1];
          h->kb = rung[j];
          h->state = fj == 0.0 ? 2 : 1;
          if (fj == 0.0) k_half[i] = rung[j], found[i] = 1;
          open--;
        }
      }
    }
    solved += n;
  }
  /* The refinements, every open redshift in one batch per round; the
   * rungs solved beyond a bracket join the cubic too. */
  for (int round = 0; round <= SC_REFINEMENTS; round++) {
    double ks[JG_MAX_REDSHIFTS];
    int who[JG_MAX_REDSHIFTS], nk = 0;
    for (int i = 0; i < n_z; i++) {
      half_search *h = &hs[i];
      if (h->state != 1) continue;
      /* Around the bracket's middle first, then around the newest point. */
      const double centre = round == 0 ? 0.5 * (log(h->ka) + log(h->kb)) : h->t[h->n - 1];
      const double t = cubic_root(h->t, h->f, h->n, log(h->ka), log(h->kb), centre);
      const double k = fmin(fmax(exp(t), h->ka), h->kb);
      if (round == SC_REFINEMENTS) {
        const double moved = fabs(t - h->t[h->n - 1]);
        if (moved <= SC_CUBIC_SETTLED) k_half[i] = k, found[i] = 1, h->state = 2;
        else h->state = 3;
        continue;
      }
      ks[nk] = k;
      who[nk++] = i;
    }
    for (int first = 0; first < nk; first += JG_PERTURB_BATCH) {
      const int n = nk - first < JG_PERTURB_BATCH ? nk - first : JG_PERTURB_BATCH;
      jg_status st = jg_perturb_solve_many(m, w, ks + first, n, z, n_z, pts, err);
      if (st != JG_OK) return search_failed(st, ks[first], ks[first + n - 1], NAN, err);
      for (int b = 0; b < n; b++) {
        const int i = who[first + b];
        half_search *h = &hs[i];
        const double fk = pts[b * n_z + i].b_over_c - target[i];
        h->t[h->n] = log(ks[first + b]);
        h->f[h->n] = fk;
        h->n++;
        if (fk > 0.0) h->ka = ks[first + b];
        else if (fk < 0.0) h->kb = ks[first + b];
        else k_half[i] = ks[first + b], found[i] = 1, h->state = 2;
      }
    }
  }
  /* Fallbacks: the one-redshift search with Brent's method. */
  for (int i = 0; i < n_z; i++) {
    if (hs[i].state != 3) continue;
    jg_status st = jg_scales_half_suppression(m, w, z[i], 2.0 * target[i], k_start[i], &k_half[i],
                                              &found[i], err);
    if (st != JG_OK) return st;
  }
  return JG_OK;
}

jg_status jg_scales_compute(const jg_perturb_model *m, jg_perturb_workspace *w, const double *z,
                            int n_z, jg_scales_point *out, jg_error *err) {
  if (!m || !w || !z || !out || n_z < 1 || n_z > JG_MAX_REDSHIFTS)
    return JG_FAIL(err, JG_EINVAL,
                   "jg_scales_compute: model, workspace, 1 to %d redshifts and output needed",
                   JG_MAX_REDSHIFTS);
  jg_perturb_limit limit[JG_MAX_REDSHIFTS];
  jg_status st = jg_perturb_solve_limit(m, w, z, n_z, limit, err);
  if (st != JG_OK) return st;
  return jg_scales_compute_from_limit(m, w, z, n_z, limit, out, err);
}

jg_status jg_scales_compute_from_limit(const jg_perturb_model *m, jg_perturb_workspace *w,
                                       const double *z, int n_z, const jg_perturb_limit *limit,
                                       jg_scales_point *out, jg_error *err) {
  if (!m || !w || !z || !limit || !out || n_z < 1 || n_z > JG_MAX_REDSHIFTS)
    return JG_FAIL(err, JG_EINVAL,
                   "jg_scales_compute_from_limit: model, workspace, 1 to %d redshifts, their "
                   "large-scale solve and output needed",
                   JG_MAX_REDSHIFTS);
  double target[JG_MAX_REDSHIFTS], k_start[JG_MAX_REDSHIFTS], k_half[JG_MAX_REDSHIFTS];
  int found[JG_MAX_REDSHIFTS];
  jg_status st = JG_OK;
  const jg_thermal *th = jg_perturb_model_thermal(m);
  for (int i = 0; i < n_z; i++) {
    jg_scales_point *p = &out[i];
    const jg_perturb_limit *l = &limit[i];
    memset(p, 0, sizeof *p);
    p->z = z[i];
    st = jeans_at(m, z[i], &p->k_jeans_isothermal, &p->k_jeans_adiabatic, err);
    if (st != JG_OK) return st;
    p->m_jeans_isothermal = jg_scales_mass(m, p->k_jeans_isothermal, 1.0);
    p->m_jeans_adiabatic = jg_scales_mass(m, p->k_jeans_adiabatic, 1.0);

    p->k_filter_integral_isothermal = k_from_inverse_square(l->gh_inverse_kf2);
    p->k_filter_integral_adiabatic = k_from_inverse_square(l->gh_inverse_kf2 * 5.0 / 3.0);
    p->k_filter_solved = k_from_inverse_square(-l->dlnb_dk2);
    p->k_filter_solved_cdm = k_from_inverse_square(l->dlnc_dk2 - l->dlnb_dk2);
    p->m_filter_integral_isothermal = jg_scales_mass(m, p->k_filter_integral_isothermal, 2.0);
    p->m_filter_integral_adiabatic = jg_scales_mass(m, p->k_filter_integral_adiabatic, 2.0);
    p->m_filter_solved = jg_scales_mass(m, p->k_filter_solved, 2.0);
    p->m_filter_integral_isothermal_half = jg_scales_mass(m, p->k_filter_integral_isothermal, 1.0);
    p->m_filter_solved_half = jg_scales_mass(m, p->k_filter_solved, 1.0);

    p->b_over_c_large = l->k0.b_over_c;
    p->delta_m_large = l->k0.delta_m;
    p->growth_rate_large = l->k0.growth_m;

    /* No half-suppression scale while the k -> 0 baryons have not started
     * to follow the dark matter (delta_b/delta_c <= 0 there): its target is
     * NaN, which the search skips. */
    target[i] = l->k0.b_over_c > 0.0 ? 0.5 * l->k0.b_over_c : NAN;
    k_start[i] = p->k_filter_solved_cdm > 0.0 ? SC_START_FRACTION * p->k_filter_solved_cdm
                                               : HUGE_VAL;

    if (th) {
      const jg_background *bg = jg_thermal_background(th);
      const double a = 1.0 / (1.0 + z[i]);
      if (bg->cosmology.de_w0 == -1.0 && bg->cosmology.de_wa == 0.0 &&
          jg_background_reference_growth_defined(bg, a)) {
        st = jg_background_growth_heath(bg, a, &p->growth_heath, err);
        if (st != JG_OK) return st;
        p->has_heath = 1;
      }
    }
  }
  st = half_suppression_all(m, w, z, n_z, target, k_start, k_half, found, err);
  if (st != JG_OK) return st;
  for (int i = 0; i < n_z; i++) {
    out[i].half_found = found[i];
    out[i].k_half = found[i] ? k_half[i] : 0.0;
    out[i].m_half = found[i] ? jg_scales_mass(m, k_half[i], 1.0) : 0.0;
    /* Without streaming (jg_scales_add_streaming replaces them). */
    out[i].k_filter_stream = out[i].k_filter_solved;
    out[i].m_filter_stream = out[i].m_filter_solved;
    out[i].half_stream_found = out[i].half_found;
    out[i].k_half_stream = out[i].k_half;
    out[i].m_half_stream = out[i].m_half;
  }
  return JG_OK;
}
