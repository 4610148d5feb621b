/*
 * The Rosenbrock integrator of rosenbrock.h: the stiffly accurate method
 * RODAS of order 4 with an embedded solution of order 3, Hairer & Wanner
 * (Solving Ordinary Differential Equations II, 2nd ed., Springer 1996,
 * section IV.7), with the coefficients published by them (value from
 * memory, checked by the convergence-order test). Written in the transformed variables
 * U_i = h sum_j gamma_ij k_j of that section:
 *
 *   (1/(h gamma) I - A(x_n)) U_i = A(x_n + c_i h) (y_n + sum_j<i a_ij U_j)
 *                                  + sum_j<i (c_ij / h) U_j + h d_i A'(x_n) y_n,
 *
 * with the stiffly accurate structure of RODAS: the 5th stage's argument is
 * the embedded 3rd-order solution y_n + sum a_5j U_j + U_5, the 6th
 * stage's argument that plus U_6 is the 4th-order solution, and U_6 is the
 * error estimate. Both solutions are L-stable (R(infinity) = 0), so the
 * stiff drag and Compton relaxation are damped at any step, as the physics
 * damps them. The convergence order is checked on analytic problems in
 * tests/test_integrator.c.
 *
 * Why this method rather than the GSL drivers: the perturbation systems are
 * linear with the Jacobian at hand, so a linearly implicit method does the
 * work of an implicit one with one factorisation per step and no Newton
 * iteration, and it needs no history (unlike BDF), so a step after a
 * rejection or after an output costs nothing extra.
 */
#include "rosenbrock.h"

#include <math.h>
#include <string.h>

/* RODAS (Hairer & Wanner 1996), method coefficients. */
static const double GAMMA = 0.25;
static const double C2 = 0.386, C3 = 0.21, C4 = 0.63;
static const double D1 = 0.25, D2 = -0.1043, D3 = 0.1035, D4 = -0.3620000000000023e-01;
static const double A21 = 0.1544e+01;
static const double A31 = 0.9466785280815826, A32 = 0.2557011698983284;
static const double A41 = 0.3314825187068521e+01, A42 = 0.2896124015972201e+01,
                    A43 = 0.9986419139977817;
static const double A51 = 0.1221224509226641e+01, A52 = 0.6019134481288629e+01,
                    A53 = 0.1253708332932087e+02, A54 = -0.6878860361058950;
static const double C21 = -0.56688e+01;
static const double C31 = -0.2430093356833875e+01, C32 = -0.2063599157091915;
static const double C41 = -0.1073529058151375, C42 = -0.9594562251023355e+01,
                    C43 = -0.2047028614809616e+02;
static const double C51 = 0.7496443313967647e+01, C52 = -0.1024680431464352e+02,
                    C53 = -0.3399990352819905e+02, C54 = 0.1170890893206160e+02;
static const double C61 = 0.8083246795921522e+01, C62 = -0.7981132988064893e+01,
                    C63 = -0.3152159432874371e+02, C64 = 0.1631930543123136e+02,
                    C65 = -0.6058818238834054e+01;
/* RODAS's continuous extension of order 3 (Hairer & Wanner's published
 * code for the method, value from memory, checked by the dense-output tests
 * in tests/test_integrator.c): y(x_n + t h) = (1 - t) y_n + t (y_n+1 +
 * (1 - t) (q1 + t q2)), q1 = sum D2j U_j, q2 = sum D3j U_j. Built from the
 * stages, it inherits their damping of the stiff components, which the
 * Hermite interpolant from derivatives does not (see rosenbrock.h). */
static const double E21 = 0.1012623508344586e+02, E22 = -0.7487995877610167e+01,
                    E23 = -0.3480091861555747e+02, E24 = -0.7992771707568823e+01,
                    E25 = 0.1025137723295662e+01;
static const double E31 = -0.6762803392801253e+00, E32 = 0.6087714651680015e+01,
                    E33 = 0.1643084320892478e+02, E34 = 0.2476722511418386e+02,
                    E35 = -0.6594389125716872e+01;

/* Step-size control (Hairer & Wanner, section IV.8, common practice): the
 * estimate is O(h^4), so the step scales with err^(-1/4), with a safety
 * factor and bounded growth and shrinkage. */
#define SAFETY 0.9
#define GROW_MAX 6.0
#define SHRINK_MIN 0.2

/* The helpers below are inlined into a copy of the integrator per common
 * dimension (see jg__ros_integrate), so that their loops over n are
 * unrolled for n = 4, 5, 6, 8, 10, 11, 12; the arithmetic and its order
 * are the same in every copy (tests/test_integrator.c compares each copy
 * with jg__ros_integrate_generic to the last bit). */
#if defined(__GNUC__)
#define ROS_INLINE static inline __attribute__((always_inline))
#else
#define ROS_INLINE static inline
#endif

/* The larger of two numbers that are not NaN. fmax() is a library call
 * unless NaN handling is switched off for the whole build: too dear on the
 * per-step paths. */
ROS_INLINE double larger(double a, double b) { return a > b ? a : b; }

/* LU with partial pivoting of the n x n row-major matrices of every mode;
 * 0 if one is singular. Column by column, the modes in turn within each
 * column, for the reason given at solve_all; each mode's arithmetic and its
 * order are those of a factorisation on its own. */
ROS_INLINE int lu_factor_all(double *lu, int *pivot, int n, int modes) {
  for (int k = 0; k < n; k++)
    for (int b = 0; b < modes; b++) {
      double *a = lu + (size_t)b * n * n;
      int p = k;
      double best = fabs(a[k * n + k]);
      for (int i = k + 1; i < n; i++)
        if (fabs(a[i * n + k]) > best) best = fabs(a[i * n + k]), p = i;
      if (!(best > 0.0)) return 0;
      pivot[b * n + k] = p;
      if (p != k)
        for (int j = 0; j < n; j++) {
          double t = a[k * n + j];
          a[k * n + j] = a[p * n + j];
          a[p * n + j] = t;
        }
      const double inv = 1.0 / a[k * n + k];
      for (int i = k + 1; i < n; i++) {
        double l = a[i * n + k] * inv;
        if (l == 0.0) continue;
        a[i * n + k] = l;
        for (int j = k + 1; j < n; j++) a[i * n + j] -= l * a[k * n + j];
      }
    }
  return 1;
}

/* out = A v for every mode. */
ROS_INLINE void mat_vec(const double *A, const double *v, double *out, int n, int modes) {
  for (int b = 0; b < modes; b++) {
    const double *Ab = A + (size_t)b * n * n;
    const double *vb = v + b * n;
    double *ob = out + b * n;
    for (int i = 0; i < n; i++) {
      double s = 0.0;
      for (int j = 0; j < n; j++) s += Ab[i * n + j] * vb[j];
      ob[i] = s;
    }
  }
}

/* lu_factor swaps whole rows, multipliers included (P A = L U): all the
 * interchanges come first, then the two triangular solves. One stage: solve
 * (1/(h gamma) - A0) U = rhs for every mode, in place in rhs. Row by row
 * (the same operations in the same order as column by column): a short dot
 * product, which compilers do not turn into strided vector code that costs
 * more than it saves at n = 5. The modes are taken in turn within each row,
 * not one after the other: each row's dot product waits on the rows before
 * it, so a single mode's solve is a chain of dependent operations, and the
 * other modes' rows give the processor independent work meanwhile. Each
 * mode's arithmetic and its order are those of a solve on its own. */
ROS_INLINE void solve_all(pt_ros_work *w, int n, int modes, double *rhs) {
  for (int b = 0; b < modes; b++) {
    const int *piv = w->pivot + b * n;
    double *x = rhs + b * n;
    for (int k = 0; k < n; k++)
      if (piv[k] != k) {
        double t = x[k];
        x[k] = x[piv[k]];
        x[piv[k]] = t;
      }
  }
  for (int i = 1; i < n; i++)
    for (int b = 0; b < modes; b++) {
      const double *a = w->LU + (size_t)b * n * n;
      double *x = rhs + b * n;
      double s = x[i];
      for (int k = 0; k < i; k++) s -= a[i * n + k] * x[k];
      x[i] = s;
    }
  for (int i = n - 1; i >= 0; i--)
    for (int b = 0; b < modes; b++) {
      const double *a = w->LU + (size_t)b * n * n;
      double *x = rhs + b * n;
      double s = x[i];
      for (int j = i + 1; j < n; j++) s -= a[i * n + j] * x[j];
      x[i] = s / a[i * n + i];
    }
}

/* y'' = A' y + A (A y) for the quintic Hermite interpolant. */
ROS_INLINE void second_derivative(const double *A, const double *dA, const double *y,
                              const double *f, double *out, int n, int modes, double *tmp) {
  mat_vec(dA, y, out, n, modes);
  mat_vec(A, f, tmp, n, modes);
  for (int i = 0; i < n * modes; i++) out[i] += tmp[i];
}

static int all_finite(const double *v, int len) {
  for (int i = 0; i < len; i++)
    if (!isfinite(v[i])) return 0;
  return 1;
}

/* The largest |y_i| so far per component, and per group of components
 * (p->group, numbers 0 .. n - 1; the absolute tolerance's reference). y is
 * finite here (a non-finite step is rejected before). */
ROS_INLINE void update_peaks(const pt_ros_problem *p, pt_ros_work *w, const double *y,
                             const int n) {
  for (int i = 0; i < n * p->n_modes; i++) w->own_peak[i] = larger(w->own_peak[i], fabs(y[i]));
  if (!p->group) {
    memcpy(w->peak, w->own_peak, sizeof(double) * (size_t)(n * p->n_modes));
    return;
  }
  for (int b = 0; b < p->n_modes; b++) {
    double group_peak[PT_ROS_MAX_DIM] = {0.0};
    const double *own = w->own_peak + b * n;
    for (int i = 0; i < n; i++) group_peak[p->group[i]] = larger(group_peak[p->group[i]], own[i]);
    for (int i = 0; i < n; i++) w->peak[b * n + i] = group_peak[p->group[i]];
  }
}

/* Outputs x_out[next ..] inside the stiff step (x, x + h) from the method's
 * own continuous extension, from the stages (q1 into U[5], q2 into ytmp;
 * neither is needed any more); returns the next output's index. Kept out of
 * line: it runs on few steps. */
static int stiff_outputs(const pt_ros_problem *p, pt_ros_work *w, double x, double h,
                         const double *y, const double *x_out, int next, int n_out, int len) {
  double(*U)[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM] = w->U;
  double *q1 = U[5], *q2 = w->ytmp;
  for (int i = 0; i < len; i++) {
    q1[i] = E21 * U[0][i] + E22 * U[1][i] + E23 * U[2][i] + E24 * U[3][i] + E25 * U[4][i];
    q2[i] = E31 * U[0][i] + E32 * U[1][i] + E33 * U[2][i] + E34 * U[3][i] + E35 * U[4][i];
  }
  while (next < n_out && x_out[next] < x + h) {
    const double t = (x_out[next] - x) / h;
    for (int i = 0; i < len; i++)
      w->yout[i] = (1.0 - t) * y[i] + t * (w->ynew[i] + (1.0 - t) * (q1[i] + t * q2[i]));
    p->emit(p->ctx, next++, w->yout);
  }
  return next;
}

ROS_INLINE int integrate(const pt_ros_problem *p, pt_ros_work *w, double x0, double *y,
                        const double *x_out, int n_out, double *x_fail, const int n) {
  const int modes = p->n_modes, len = n * modes;
  *x_fail = x0;
  if (n < 1 || n > PT_ROS_MAX_DIM || modes < 1 || modes > PT_ROS_MAX_MODES || n_out < 1)
    return PT_ROS_BAD_INPUT;
  for (int i = 0; i < n_out; i++)
    if (!(x_out[i] >= (i ? x_out[i - 1] : x0))) return PT_ROS_BAD_INPUT;
  for (int i = 0; p->group && i < n; i++)
    if (p->group[i] < 0 || p->group[i] >= n) return PT_ROS_BAD_INPUT;

  double x = x0, rate0 = 0.0, rate1 = 0.0, rate_s = 0.0;
  /* The matrices at both ends of the step: swapped, not copied, when a
   * step is accepted. */
  double *A0 = w->A0, *dA0 = w->dA0, *A1 = w->A1, *dA1 = w->dA1;
  w->stats.matrix_evals++;
  if (p->matrices(p->ctx, x, A0, dA0, &rate0) != 0) return PT_ROS_UNDEFINED;
  for (int i = 0; i < len; i++) w->own_peak[i] = 0.0;
  update_peaks(p, w, y, n);

  int next = 0;
  while (next < n_out && x_out[next] == x) p->emit(p->ctx, next++, y);
  double h = fmin(p->h_start, p->h_max);
  const double x_end = x_out[n_out - 1];
  long attempts = 0;
  double *U1 = w->U[0], *U2 = w->U[1], *U3 = w->U[2], *U4 = w->U[3], *U5 = w->U[4],
         *U6 = w->U[5];

  while (next < n_out) {
    if (++attempts > p->max_steps) {
      *x_fail = x;
      return PT_ROS_TOO_MANY;
    }
    /* The step: never past the end, cut to an output where the
     * interpolant would not be trusted (see rosenbrock.h). */
    const double h_free = h;
    double x_new = x + h;
    int cut = 0;
    /* (A step that would leave a sliver before the end or an output is
     * stretched to it.) */
    const double sliver = 1e-3 * h;
    if (x_new >= x_end - sliver) x_new = x_end;
    if (x_out[next] < x_new + sliver && x_out[next] >= x_new) x_new = x_out[next], cut = 1;
    h = x_new - x;
    if (!(h > 1e-14 * fmax(1.0, fabs(x)))) {
      *x_fail = x;
      return PT_ROS_TOO_SMALL;
    }
    const double ih = 1.0 / h, fac = 1.0 / (h * GAMMA);

    /* Factorise (1/(h gamma)) I - A0 per mode; f0 = A0 y, fx0 = A0' y. */
    for (int b = 0; b < modes; b++) {
      double *M = w->LU + (size_t)b * n * n;
      const double *A = A0 + (size_t)b * n * n;
      for (int i = 0; i < n * n; i++) M[i] = -A[i];
      for (int i = 0; i < n; i++) M[i * n + i] += fac;
    }
    if (!lu_factor_all(w->LU, w->pivot, n, modes)) {
      *x_fail = x;
      return PT_ROS_SINGULAR;
    }
    mat_vec(A0, y, w->f0, n, modes);
    mat_vec(dA0, y, w->fx0, n, modes);

    /* Stage 1. */
    for (int i = 0; i < len; i++) U1[i] = w->f0[i] + h * D1 * w->fx0[i];
    solve_all(w, n, modes, U1);
    /* Stage 2. */
    w->stats.matrix_evals++;
    if (p->matrices(p->ctx, x + C2 * h, w->As, NULL, &rate_s) != 0) goto undefined;
    for (int i = 0; i < len; i++) w->ytmp[i] = y[i] + A21 * U1[i];
    mat_vec(w->As, w->ytmp, U2, n, modes);
    for (int i = 0; i < len; i++) U2[i] += ih * C21 * U1[i] + h * D2 * w->fx0[i];
    solve_all(w, n, modes, U2);
    /* Stage 3. */
    w->stats.matrix_evals++;
    if (p->matrices(p->ctx, x + C3 * h, w->As, NULL, &rate_s) != 0) goto undefined;
    for (int i = 0; i < len; i++) w->ytmp[i] = y[i] + A31 * U1[i] + A32 * U2[i];
    mat_vec(w->As, w->ytmp, U3, n, modes);
    for (int i = 0; i < len; i++)
      U3[i] += ih * (C31 * U1[i] + C32 * U2[i]) + h * D3 * w->fx0[i];
    solve_all(w, n, modes, U3);
    /* Stage 4. */
    w->stats.matrix_evals++;
    if (p->matrices(p->ctx, x + C4 * h, w->As, NULL, &rate_s) != 0) goto undefined;
    for (int i = 0; i < len; i++)
      w->ytmp[i] = y[i] + A41 * U1[i] + A42 * U2[i] + A43 * U3[i];
    mat_vec(w->As, w->ytmp, U4, n, modes);
    for (int i = 0; i < len; i++)
      U4[i] += ih * (C41 * U1[i] + C42 * U2[i] + C43 * U3[i]) + h * D4 * w->fx0[i];
    solve_all(w, n, modes, U4);
    /* Stage 5, at the end of the step (matrices kept for the next step). */
    w->stats.matrix_evals++;
    if (p->matrices(p->ctx, x_new, A1, dA1, &rate1) != 0) goto undefined;
    for (int i = 0; i < len; i++)
      w->ytmp[i] = y[i] + A51 * U1[i] + A52 * U2[i] + A53 * U3[i] + A54 * U4[i];
    mat_vec(A1, w->ytmp, U5, n, modes);
    for (int i = 0; i < len; i++)
      U5[i] += ih * (C51 * U1[i] + C52 * U2[i] + C53 * U3[i] + C54 * U4[i]);
    solve_all(w, n, modes, U5);
    /* Stage 6 from the embedded solution; U6 is the error estimate. */
    for (int i = 0; i < len; i++) w->ytmp[i] += U5[i];
    mat_vec(A1, w->ytmp, U6, n, modes);
    for (int i = 0; i < len; i++)
      U6[i] += ih * (C61 * U1[i] + C62 * U2[i] + C63 * U3[i] + C64 * U4[i] + C65 * U5[i]);
    solve_all(w, n, modes, U6);
    for (int i = 0; i < len; i++) w->ynew[i] = w->ytmp[i] + U6[i];

    /* Error: RMS over the components, largest over the modes, of the
     * filtered estimate (I - h gamma A0)^-1 U6 (rosenbrock.h). */
    for (int i = 0; i < len; i++) w->err_est[i] = fac * U6[i];
    solve_all(w, n, modes, w->err_est);
    double err = 0.0;
    for (int b = 0; b < modes; b++) {
      double sum = 0.0;
      for (int i = b * n; i < (b + 1) * n; i++) {
        double peak = w->peak[i] > 0.0 ? w->peak[i] : 1.0;
        double scale = p->rel_tol * larger(fabs(y[i]), fabs(w->ynew[i])) + p->abs_tol * peak;
        double e = w->err_est[i] / scale;
        sum += e * e;
      }
      /* (NaN carried on: the test below rejects it.) */
      const double mode_err = sqrt(sum / n);
      if (!(mode_err <= err)) err = mode_err;
    }
    if (!isfinite(err) || !all_finite(w->ynew, len)) {
      w->stats.rejected++;
      h *= 0.25;
      continue;
    }
    double grow = err > 0.0 ? SAFETY * pow(err, -0.25) : GROW_MAX;
#ifdef PT_ROS_DEBUG
    {
      int worst = 0; double we = 0;
      for (int i = 0; i < len; i++) { double pk = w->peak[i] > 0.0 ? w->peak[i] : 1.0;
        double e = fabs(w->err_est[i]) / (p->rel_tol * fmax(fabs(y[i]), fabs(w->ynew[i])) + p->abs_tol * pk);
        if (e > we) we = e, worst = i; }
      fprintf(stderr, "x %.6f h %.3e err %.3e worst %d y %.3e e %.3e\n", x, h, err, worst, y[worst], w->err_est[worst]);
    }
#endif
    if (err > 1.0) {
      w->stats.rejected++;
      h *= fmax(SHRINK_MIN, grow);
      continue;
    }

    /* Accepted: outputs inside (x, x_new] from an interpolant. */
    w->stats.steps++;
    if (next < n_out && x_out[next] < x_new && h * rate0 > PT_ROS_DENSE_LIMIT)
      next = stiff_outputs(p, w, x, h, y, x_out, next, n_out, len);
    if (next < n_out && x_out[next] <= x_new) {
      /* Hermite data: derivatives at both ends (f1 into U1, y''0 into U2,
       * y''1 into U3; the stage values are no longer needed). */
      double *f1 = U1, *ydd0 = U2, *ydd1 = U3;
      mat_vec(A1, w->ynew, f1, n, modes);
      second_derivative(A0, dA0, y, w->f0, ydd0, n, modes, U4);
      second_derivative(A1, dA1, w->ynew, f1, ydd1, n, modes, U4);
      while (next < n_out && x_out[next] <= x_new) {
        if (x_out[next] == x_new) {
          p->emit(p->ctx, next++, w->ynew);
          continue;
        }
        const double t = (x_out[next] - x) / h, t2 = t * t, t3 = t2 * t, t4 = t3 * t,
                     t5 = t4 * t;
        const double H0 = 1.0 - 10.0 * t3 + 15.0 * t4 - 6.0 * t5;
        const double H1 = t - 6.0 * t3 + 8.0 * t4 - 3.0 * t5;
        const double H2 = 0.5 * (t2 - 3.0 * t3 + 3.0 * t4 - t5);
        const double H3 = 1.0 - H0;
        const double H4 = -4.0 * t3 + 7.0 * t4 - 3.0 * t5;
        const double H5 = 0.5 * (t3 - 2.0 * t4 + t5);
        for (int i = 0; i < len; i++)
          w->yout[i] = H0 * y[i] + h * H1 * w->f0[i] + h * h * H2 * ydd0[i] + H3 * w->ynew[i] +
                       h * H4 * f1[i] + h * h * H5 * ydd1[i];
        p->emit(p->ctx, next++, w->yout);
      }
    }
    memcpy(y, w->ynew, sizeof(double) * (size_t)len);
    update_peaks(p, w, y, n);
    double *swap = A0;
    A0 = A1, A1 = swap;
    swap = dA0, dA0 = dA1, dA1 = swap;
    rate0 = rate1;
    x = x_new;
    /* A step cut to an output says nothing against the longer one. */
    h = fmin(h * fmin(GROW_MAX, grow), p->h_max);
    if (cut) h = fmax(h, fmin(h_free, p->h_max));
  }
  *x_fail = x;
  return PT_ROS_OK;

undefined:
  *x_fail = x;
  return PT_ROS_UNDEFINED;
}

int jg__ros_integrate(const pt_ros_problem *p, pt_ros_work *w, double x0, double *y,
                      const double *x_out, int n_out, double *x_fail) {
  switch (p->dim) { /* the perturbation systems' dimensions */
    case 4: return integrate(p, w, x0, y, x_out, n_out, x_fail, 4);
    case 5: return integrate(p, w, x0, y, x_out, n_out, x_fail, 5);
    case 6: return integrate(p, w, x0, y, x_out, n_out, x_fail, 6);
    case 8: return integrate(p, w, x0, y, x_out, n_out, x_fail, 8);
    case 10: return integrate(p, w, x0, y, x_out, n_out, x_fail, 10);
    case 11: return integrate(p, w, x0, y, x_out, n_out, x_fail, 11);
    case 12: return integrate(p, w, x0, y, x_out, n_out, x_fail, 12);
    default: return jg__ros_integrate_generic(p, w, x0, y, x_out, n_out, x_fail);
  }
}

int jg__ros_integrate_generic(const pt_ros_problem *p, pt_ros_work *w, double x0, double *y,
                              const double *x_out, int n_out, double *x_fail) {
  return integrate(p, w, x0, y, x_out, n_out, x_fail, p->dim);
}
