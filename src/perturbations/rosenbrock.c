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
#include <stdint.h>
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
 * batch size (see jg__ros_integrate), so that their loops over the modes
 * have a length known when compiling (8: vector arithmetic; 1: no loop);
 * the arithmetic and its order are the same in every copy
 * (tests/test_integrator.c compares each copy with
 * jg__ros_integrate_generic to the last bit). */
#if defined(__GNUC__)
#define ROS_INLINE static inline __attribute__((always_inline))
#else
#define ROS_INLINE static inline
#endif

/* The operations on one row of the batch (M modes side by side, M fixed in
 * each compiled copy). GCC unrolls the plain loops of a full batch into
 * scalar code, unsure that the rows do not overlap (they never do: distinct
 * rows of the workspace's arrays); for the batch sizes with a compiled copy
 * (4 and 8 modes) they are written with GNU C vector types instead, which it
 * maps onto the widest registers the copy is compiled for. The same
 * operations in the same order either way. */
#if defined(__GNUC__) && PT_ROS_MAX_MODES == 8
#define ROS_ROWS 1
typedef double ros_row __attribute__((vector_size(8 * sizeof(double))));
typedef double ros_half_row __attribute__((vector_size(4 * sizeof(double))));
/* (Through memcpy: the rows need not be aligned to the vector's size; and
 * no vector crosses a function boundary, whose convention depends on the
 * processor.) */
#define ROW_OPERATION_AS(type, expression, y, a, x)                          \
  do {                                                                       \
    type vy_, va_, vx_;                                                      \
    memcpy(&vy_, (y), sizeof vy_);                                           \
    memcpy(&va_, (a), sizeof va_);                                           \
    memcpy(&vx_, (x), sizeof vx_);                                           \
    vy_ = (expression);                                                      \
    memcpy((y), &vy_, sizeof vy_);                                           \
  } while (0)
/* The row operation as a vector for the two compiled batch sizes (returns
 * from the calling function), else nothing: the plain loop follows. */
#define ROW_OPERATION(expression, y, a, x, M)                                \
  do {                                                                       \
    if ((M) == PT_ROS_MAX_MODES) {                                           \
      ROW_OPERATION_AS(ros_row, expression, y, a, x);                        \
      return;                                                                \
    }                                                                        \
    if ((M) == PT_ROS_HALF_BATCH) {                                          \
      ROW_OPERATION_AS(ros_half_row, expression, y, a, x);                   \
      return;                                                                \
    }                                                                        \
  } while (0)
#else
#define ROS_ROWS 0
#define ROW_OPERATION(expression, y, a, x, M) ((void)0)
#endif

ROS_INLINE void row_subtract_product(double *restrict y, const double *restrict a,
                                     const double *restrict x, const int M) {
  ROW_OPERATION(vy_ - va_ * vx_, y, a, x, M);
  for (int b = 0; b < M; b++) y[b] -= a[b] * x[b];
}
ROS_INLINE void row_add_product(double *restrict y, const double *restrict a,
                                const double *restrict x, const int M) {
  ROW_OPERATION(vy_ + va_ * vx_, y, a, x, M);
  for (int b = 0; b < M; b++) y[b] += a[b] * x[b];
}
/* y = a x + 0: the first term of a sum that starts at zero (the same
 * number, signed zeros included, as 0 + a x). */
ROS_INLINE void row_start_product(double *restrict y, const double *restrict a,
                                  const double *restrict x, const int M) {
  ROW_OPERATION(va_ * vx_ + 0.0, y, a, x, M);
  for (int b = 0; b < M; b++) y[b] = a[b] * x[b] + 0.0;
}
ROS_INLINE void row_negate(double *restrict y, const double *restrict a, const int M) {
  ROW_OPERATION(-va_, y, a, a, M);
  for (int b = 0; b < M; b++) y[b] = -a[b];
}
ROS_INLINE void row_add_number(double *restrict y, double number, const int M) {
  ROW_OPERATION(vy_ + number, y, y, y, M);
  for (int b = 0; b < M; b++) y[b] += number;
}
ROS_INLINE void row_multiply(double *restrict y, const double *restrict a, const int M) {
  ROW_OPERATION(vy_ * va_, y, a, a, M);
  for (int b = 0; b < M; b++) y[b] *= a[b];
}

/* The larger of two numbers that are not NaN. fmax() is a library call
 * unless NaN handling is switched off for the whole build: too dear on the
 * per-step paths. */
ROS_INLINE double larger(double a, double b) { return a > b ? a : b; }

int jg__ros_entry_positions(int dim, const unsigned char *pattern, int *position) {
  int n = 0;
  for (int i = 0; i < dim * dim; i++)
    if (!pattern || pattern[i]) position[n++] = i;
  return n;
}

/* Compiled twice where the compiler can (x86-64 with GCC, outside the
 * sanitizer builds), for the baseline processor and for AVX2, picked when
 * the program loads: the loops over the modes then do four modes per
 * instruction instead of two. The arithmetic is the same (no fused
 * multiply-add: AVX2 alone does not bring it), so the results do not
 * depend on the processor. */
#if defined(__GNUC__) && !defined(__clang__) && defined(__x86_64__) && !defined(__SANITIZE_ADDRESS__) && \
    !defined(JG_NO_TARGET_CLONES)
#define ROS_CLONES __attribute__((target_clones("avx2", "default")))
#else
#define ROS_CLONES
#endif

ROS_CLONES
void jg__ros_gather(int n_entries, const int *position, int n_modes, const double *B0,
                    const double *B1, const double *s1, const double *B2, const double *s2,
                    double *restrict A) {
#if ROS_ROWS
  /* The batch sizes with a compiled copy: whole rows at once. */
#define GATHER_ROWS(type)                                                    \
  do {                                                                       \
    type r1 = {0}, r2 = {0};                                                 \
    if (B1) memcpy(&r1, s1, sizeof r1);                                      \
    if (B2) memcpy(&r2, s2, sizeof r2);                                      \
    for (int e = 0; e < n_entries; e++) {                                    \
      const int at = position[e];                                            \
      const double b1 = B1 ? B1[at] : 0.0, b2 = B2 ? B2[at] : 0.0;           \
      type a = B0[at] + r1 * b1 + r2 * b2;                                   \
      memcpy(A + (size_t)e * n_modes, &a, sizeof a);                         \
    }                                                                        \
  } while (0)
  if (n_modes == PT_ROS_MAX_MODES) {
    GATHER_ROWS(ros_row);
    return;
  }
  if (n_modes == PT_ROS_HALF_BATCH) {
    GATHER_ROWS(ros_half_row);
    return;
  }
#undef GATHER_ROWS
#endif
  if (n_modes == 1 && !B1 && !B2) { /* a lone mode at its own k, the limit system */
    for (int e = 0; e < n_entries; e++) A[e] = B0[position[e]];
    return;
  }
  for (int e = 0; e < n_entries; e++) {
    const int at = position[e];
    const double b0 = B0[at], b1 = B1 ? B1[at] : 0.0, b2 = B2 ? B2[at] : 0.0;
    double *restrict a = A + (size_t)e * n_modes;
    for (int b = 0; b < n_modes; b++) a[b] = b0 + (B1 ? s1[b] * b1 : 0.0) + (B2 ? s2[b] * b2 : 0.0);
  }
}

/* The structure of a solve for a batch of M modes: the entries of A, the
 * fill pattern of the factors of (1/(h gamma)) I - A without row
 * interchanges (the diagonal is always there), and the lists of row
 * operations the factorisation, the solves and the products walk
 * (rosenbrock.h). Once per solve: O(dim^3) with dim <= 18. */
static void find_structure(const pt_ros_problem *p, pt_ros_work *w, int M) {
  const int n = p->dim;
  unsigned char fill[PT_ROS_MAX_ENTRIES];
  int position[PT_ROS_MAX_ENTRIES];
  w->n_entries = jg__ros_entry_positions(n, p->pattern, position);
  memset(fill, 0, sizeof fill);
  for (int i = 0; i < n; i++) w->diagonal_entry[i] = -1, fill[i * n + i] = 1;
  for (int e = 0; e < w->n_entries; e++) {
    const int i = position[e] / n, j = position[e] % n;
    w->entry_factor[e] = position[e] * M;
    if (i == j) w->diagonal_entry[i] = e;
    fill[position[e]] = 1;
  }
  /* The product's terms: each row's first, then the others in order. */
  int n_terms = 0, row_has[PT_ROS_MAX_DIM] = {0};
  for (int pass = 0; pass < 2; pass++)
    for (int e = 0; e < w->n_entries; e++) {
      const int i = position[e] / n, first = e == 0 || position[e - 1] / n != i;
      if (first != (pass == 0)) continue;
      w->product_entry[n_terms] = e * M;
      w->product_out[n_terms] = i * M;
      w->product_in[n_terms++] = (position[e] % n) * M;
      row_has[i] = 1;
      if (first) w->n_row_starts = n_terms;
    }
  w->n_empty_rows = 0;
  for (int i = 0; i < n; i++)
    if (!row_has[i]) w->empty_row[w->n_empty_rows++] = i * M;
  for (int k = 0; k < n; k++)
    for (int i = k + 1; i < n; i++)
      if (fill[i * n + k])
        for (int j = k + 1; j < n; j++)
          if (fill[k * n + j]) fill[i * n + j] = 1;
  w->n_factor = 0;
  for (int i = 0; i < n * n; i++)
    if (fill[i]) w->factor_position[w->n_factor++] = i * M;
  for (int i = 0; i < n; i++) w->diagonal_factor[i] = (i * n + i) * M;
  int n_scaled = 0, n_updates = 0;
  for (int k = 0; k < n; k++) {
    w->pivot_start[k] = n_scaled;
    for (int i = k + 1; i < n; i++) {
      if (!fill[i * n + k]) continue;
      w->update_start[n_scaled] = n_updates;
      w->scaled[n_scaled++] = (i * n + k) * M;
      for (int j = k + 1; j < n; j++)
        if (fill[k * n + j]) {
          w->update_target[n_updates] = (i * n + j) * M;
          w->update_source[n_updates++] = (k * n + j) * M;
        }
    }
  }
  w->pivot_start[n] = n_scaled;
  w->update_start[n_scaled] = n_updates;
  w->n_forward = 0;
  for (int i = 1; i < n; i++)
    for (int j = 0; j < i; j++)
      if (fill[i * n + j]) {
        w->forward_target[w->n_forward] = i * M;
        w->forward_factor[w->n_forward] = (i * n + j) * M;
        w->forward_source[w->n_forward++] = j * M;
      }
  int n_backward = 0;
  for (int r = 0; r < n; r++) {
    const int i = n - 1 - r;
    for (int j = i + 1; j < n; j++)
      if (fill[i * n + j]) {
        w->backward_target[n_backward] = i * M;
        w->backward_factor[n_backward] = (i * n + j) * M;
        w->backward_source[n_backward++] = j * M;
      }
    w->backward_end[r] = n_backward;
  }
}

/* Factorise (1/(h gamma)) I - A for every mode on the fill pattern, without
 * row interchanges (rosenbrock.h); 0 if a pivot falls below
 * PT_ROS_PIVOT_FLOOR times its diagonal before elimination, or is not
 * finite. */
ROS_INLINE int factorise(pt_ros_work *w, const double *A, double fac, int n, const int M) {
  double *restrict LU = w->LU;
  for (int q = 0; q < w->n_factor; q++)
    for (int b = 0; b < M; b++) LU[w->factor_position[q] + b] = 0.0;
  for (int e = 0; e < w->n_entries; e++) row_negate(LU + w->entry_factor[e], A + e * M, M);
  for (int i = 0; i < n; i++) row_add_number(LU + w->diagonal_factor[i], fac, M);
  int fine = 1;
  for (int k = 0; k < n; k++) {
    const double *restrict pivot = LU + w->diagonal_factor[k];
    double *restrict inverse = w->inverse_pivot + k * M;
    const int de = w->diagonal_entry[k];
    if (de >= 0) {
      const double *restrict a_kk = A + de * M;
      for (int b = 0; b < M; b++)
        fine &= fabs(pivot[b]) >= PT_ROS_PIVOT_FLOOR * (fac + fabs(a_kk[b]));
    } else {
      for (int b = 0; b < M; b++) fine &= fabs(pivot[b]) >= PT_ROS_PIVOT_FLOOR * (fac + 0.0);
    }
    for (int b = 0; b < M; b++) inverse[b] = 1.0 / pivot[b];
    for (int s = w->pivot_start[k]; s < w->pivot_start[k + 1]; s++) {
      double *restrict l = LU + w->scaled[s];
      row_multiply(l, inverse, M);
      for (int u = w->update_start[s]; u < w->update_start[s + 1]; u++)
        row_subtract_product(LU + w->update_target[u], l, LU + w->update_source[u], M);
    }
  }
  return fine;
}

/* One stage: solve (1/(h gamma) - A0) U = rhs for every mode, in place in
 * rhs, with the factors (forward, then backward substitution). */
ROS_INLINE void solve_all(const pt_ros_work *w, int n, const int M, double *restrict x) {
  const double *restrict LU = w->LU;
  for (int o = 0; o < w->n_forward; o++)
    row_subtract_product(x + w->forward_target[o], LU + w->forward_factor[o],
                         x + w->forward_source[o], M);
  int o = 0;
  for (int r = 0; r < n; r++) {
    for (; o < w->backward_end[r]; o++)
      row_subtract_product(x + w->backward_target[o], LU + w->backward_factor[o],
                           x + w->backward_source[o], M);
    const int i = n - 1 - r;
    row_multiply(x + i * M, w->inverse_pivot + i * M, M);
  }
}

/* out = A v for every mode, over the entries. */
ROS_INLINE void mat_vec(const pt_ros_work *w, const double *restrict A, const double *restrict v,
                        double *restrict out, const int M) {
  for (int r = 0; r < w->n_empty_rows; r++)
    for (int b = 0; b < M; b++) out[w->empty_row[r] + b] = 0.0;
  int t = 0;
  for (; t < w->n_row_starts; t++)
    row_start_product(out + w->product_out[t], A + w->product_entry[t], v + w->product_in[t], M);
  for (; t < w->n_entries; t++)
    row_add_product(out + w->product_out[t], A + w->product_entry[t], v + w->product_in[t], M);
}

/* y'' = A' y + A (A y) for the quintic Hermite interpolant. */
ROS_INLINE void second_derivative(const pt_ros_work *w, const double *A, const double *dA,
                                  const double *y, const double *f, double *out, int n,
                                  const int M, double *tmp) {
  mat_vec(w, dA, y, out, M);
  mat_vec(w, A, f, tmp, M);
  for (int i = 0; i < n * M; i++) out[i] += tmp[i];
}

/* No infinity or NaN among v[0 .. len): read off the exponent bits (all
 * ones for both), so that the loop has no early exit and runs as vector
 * arithmetic. */
ROS_INLINE int all_finite(const double *v, int len) {
  const uint64_t exponent = UINT64_C(0x7ff0000000000000);
  int bad = 0;
  for (int i = 0; i < len; i++) {
    uint64_t bits;
    memcpy(&bits, v + i, sizeof bits);
    bad |= (bits & exponent) == exponent;
  }
  return !bad;
}

/* Between the caller's layout (mode after mode) and the integrator's
 * (component after component, the modes innermost). */
ROS_INLINE void by_component(const double *by_mode, double *out, int n, const int M) {
  for (int b = 0; b < M; b++)
    for (int i = 0; i < n; i++) out[i * M + b] = by_mode[b * n + i];
}
ROS_INLINE void by_mode(const double *by_component, double *out, int n, const int M) {
  for (int b = 0; b < M; b++)
    for (int i = 0; i < n; i++) out[b * n + i] = by_component[i * M + b];
}

ROS_INLINE void emit_output(const pt_ros_problem *p, pt_ros_work *w, int index, const double *v,
                            int n, const int M) {
  by_mode(v, w->by_mode, n, M);
  p->emit(p->ctx, index, w->by_mode);
}

/* The largest |y_i| so far per component, and per group of components
 * (p->group, numbers 0 .. n - 1; the absolute tolerance's reference). y is
 * finite here (a non-finite step is rejected before). */
ROS_INLINE void update_peaks(const pt_ros_problem *p, pt_ros_work *w, const double *y, const int n,
                             const int M) {
  for (int i = 0; i < n * M; i++) w->own_peak[i] = larger(w->own_peak[i], fabs(y[i]));
  if (!p->group) {
    memcpy(w->peak, w->own_peak, sizeof(double) * (size_t)(n * M));
    return;
  }
  double group_peak[PT_ROS_MAX_LEN];
  for (int i = 0; i < n * M; i++) group_peak[i] = 0.0;
  for (int i = 0; i < n; i++)
    for (int b = 0; b < M; b++) {
      double *g = group_peak + p->group[i] * M + b;
      *g = larger(*g, w->own_peak[i * M + b]);
    }
  for (int i = 0; i < n; i++)
    for (int b = 0; b < M; b++) w->peak[i * M + b] = group_peak[p->group[i] * M + b];
}

/* The step's error: the root mean square over the components of the
 * filtered estimate w->err_est against its scale (rosenbrock.h), the
 * largest over the modes; NaN if any mode's is. The loop over the modes is
 * innermost, with the per-component choices hoisted, so that it runs as
 * vector arithmetic. */
ROS_INLINE double error_norm(const pt_ros_problem *p, const pt_ros_work *w, const double *y,
                             int n, const int M) {
  const double rel_tol = p->rel_tol, abs_tol = p->abs_tol;
  double sum[PT_ROS_MAX_MODES] = {0.0};
  for (int i = 0; i < n; i++) {
    const double *restrict peak_i = w->peak + i * M, *restrict err_i = w->err_est + i * M;
    const double *restrict before = y + i * M, *restrict after = w->ynew + i * M;
    if (p->group_scaled && p->group_scaled[i]) {
      for (int b = 0; b < M; b++) {
        const double peak = peak_i[b] > 0.0 ? peak_i[b] : 1.0;
        const double e = err_i[b] / (rel_tol * peak + abs_tol * peak);
        sum[b] += e * e;
      }
    } else {
      for (int b = 0; b < M; b++) {
        const double peak = peak_i[b] > 0.0 ? peak_i[b] : 1.0;
        const double size = larger(fabs(before[b]), fabs(after[b]));
        const double e = err_i[b] / (rel_tol * size + abs_tol * peak);
        sum[b] += e * e;
      }
    }
  }
  double err = 0.0;
  for (int b = 0; b < M; b++) {
    /* (NaN carried on: the caller rejects it.) */
    const double mode_err = sqrt(sum[b] / n);
    if (!(mode_err <= err)) err = mode_err;
  }
  return err;
}

/* Outputs x_out[next ..] inside the stiff step (x, x + h) from the method's
 * own continuous extension, from the stages (q1 into U[5], q2 into ytmp;
 * neither is needed any more); returns the next output's index. Kept out of
 * line: it runs on few steps. */
static int stiff_outputs(const pt_ros_problem *p, pt_ros_work *w, double x, double h,
                         const double *x_out, int next, int n_out, int n, int M) {
  double(*U)[PT_ROS_MAX_LEN] = w->U;
  double *q1 = U[5], *q2 = w->ytmp;
  const int len = n * M;
  for (int i = 0; i < len; i++) {
    q1[i] = E21 * U[0][i] + E22 * U[1][i] + E23 * U[2][i] + E24 * U[3][i] + E25 * U[4][i];
    q2[i] = E31 * U[0][i] + E32 * U[1][i] + E33 * U[2][i] + E34 * U[3][i] + E35 * U[4][i];
  }
  while (next < n_out && x_out[next] < x + h) {
    const double t = (x_out[next] - x) / h;
    for (int i = 0; i < len; i++)
      w->yout[i] = (1.0 - t) * w->y[i] + t * (w->ynew[i] + (1.0 - t) * (q1[i] + t * q2[i]));
    emit_output(p, w, next++, w->yout, n, M);
  }
  return next;
}

ROS_INLINE int integrate(const pt_ros_problem *p, pt_ros_work *w, double x0, double *y_caller,
                         const double *x_out, int n_out, double *x_fail, const int M) {
  const int n = p->dim, len = n * M;
  *x_fail = x0;
  if (n < 1 || n > PT_ROS_MAX_DIM || M < 1 || M > PT_ROS_MAX_MODES || M != p->n_modes ||
      n_out < 1)
    return PT_ROS_BAD_INPUT;
  for (int i = 0; i < n_out; i++)
    if (!(x_out[i] >= (i ? x_out[i - 1] : x0))) return PT_ROS_BAD_INPUT;
  for (int i = 0; p->group && i < n; i++)
    if (p->group[i] < 0 || p->group[i] >= n) return PT_ROS_BAD_INPUT;
  find_structure(p, w, M);
  double *y = w->y;
  by_component(y_caller, y, n, M);

  double x = x0, rate0 = 0.0, rate1 = 0.0;
  /* The matrices at both ends of the step: swapped, not copied, when a
   * step is accepted. */
  double *A0 = w->A0, *dA0 = w->dA0, *A1 = w->A1, *dA1 = w->dA1;
  w->stats.matrix_evals++;
  if (p->matrices(p->ctx, x, A0, dA0, &rate0) != 0) return PT_ROS_UNDEFINED;
  for (int i = 0; i < len; i++) w->own_peak[i] = 0.0;
  update_peaks(p, w, y, n, M);

  int next = 0;
  while (next < n_out && x_out[next] == x) emit_output(p, w, next++, y, n, M);
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
    if (!factorise(w, A0, fac, n, M)) {
      w->stats.rejected++;
      h *= 0.25;
      continue;
    }
    mat_vec(w, A0, y, w->f0, M);
    mat_vec(w, dA0, y, w->fx0, M);

    /* Stage 1. */
    for (int i = 0; i < len; i++) U1[i] = w->f0[i] + h * D1 * w->fx0[i];
    solve_all(w, n, M, U1);
    /* Stage 2. */
    w->stats.matrix_evals++;
    if (p->matrices(p->ctx, x + C2 * h, w->As, NULL, NULL) != 0) goto undefined;
    for (int i = 0; i < len; i++) w->ytmp[i] = y[i] + A21 * U1[i];
    mat_vec(w, w->As, w->ytmp, U2, M);
    for (int i = 0; i < len; i++) U2[i] += ih * C21 * U1[i] + h * D2 * w->fx0[i];
    solve_all(w, n, M, U2);
    /* Stage 3. */
    w->stats.matrix_evals++;
    if (p->matrices(p->ctx, x + C3 * h, w->As, NULL, NULL) != 0) goto undefined;
    for (int i = 0; i < len; i++) w->ytmp[i] = y[i] + A31 * U1[i] + A32 * U2[i];
    mat_vec(w, w->As, w->ytmp, U3, M);
    for (int i = 0; i < len; i++)
      U3[i] += ih * (C31 * U1[i] + C32 * U2[i]) + h * D3 * w->fx0[i];
    solve_all(w, n, M, U3);
    /* Stage 4. */
    w->stats.matrix_evals++;
    if (p->matrices(p->ctx, x + C4 * h, w->As, NULL, NULL) != 0) goto undefined;
    for (int i = 0; i < len; i++)
      w->ytmp[i] = y[i] + A41 * U1[i] + A42 * U2[i] + A43 * U3[i];
    mat_vec(w, w->As, w->ytmp, U4, M);
    for (int i = 0; i < len; i++)
      U4[i] += ih * (C41 * U1[i] + C42 * U2[i] + C43 * U3[i]) + h * D4 * w->fx0[i];
    solve_all(w, n, M, U4);
    /* Stage 5, at the end of the step (matrices kept for the next step). */
    w->stats.matrix_evals++;
    if (p->matrices(p->ctx, x_new, A1, dA1, &rate1) != 0) goto undefined;
    for (int i = 0; i < len; i++)
      w->ytmp[i] = y[i] + A51 * U1[i] + A52 * U2[i] + A53 * U3[i] + A54 * U4[i];
    mat_vec(w, A1, w->ytmp, U5, M);
    for (int i = 0; i < len; i++)
      U5[i] += ih * (C51 * U1[i] + C52 * U2[i] + C53 * U3[i] + C54 * U4[i]);
    solve_all(w, n, M, U5);
    /* Stage 6 from the embedded solution; U6 is the error estimate. */
    for (int i = 0; i < len; i++) w->ytmp[i] += U5[i];
    mat_vec(w, A1, w->ytmp, U6, M);
    for (int i = 0; i < len; i++)
      U6[i] += ih * (C61 * U1[i] + C62 * U2[i] + C63 * U3[i] + C64 * U4[i] + C65 * U5[i]);
    solve_all(w, n, M, U6);
    for (int i = 0; i < len; i++) w->ynew[i] = w->ytmp[i] + U6[i];

    /* Error: the filtered estimate (I - h gamma A0)^-1 U6 (rosenbrock.h). */
    for (int i = 0; i < len; i++) w->err_est[i] = fac * U6[i];
    solve_all(w, n, M, w->err_est);
    const double err = error_norm(p, w, y, n, M);
    if (!isfinite(err) || !all_finite(w->ynew, len)) {
      w->stats.rejected++;
      h *= 0.25;
      continue;
    }
    double grow = err > 0.0 ? SAFETY * pow(err, -0.25) : GROW_MAX;
    if (err > 1.0) {
      w->stats.rejected++;
      h *= fmax(SHRINK_MIN, grow);
      continue;
    }

    /* Accepted: outputs inside (x, x_new] from an interpolant. */
    w->stats.steps++;
    if (next < n_out && x_out[next] < x_new && h * rate0 > PT_ROS_DENSE_LIMIT)
      next = stiff_outputs(p, w, x, h, x_out, next, n_out, n, M);
    if (next < n_out && x_out[next] <= x_new) {
      /* Hermite data: derivatives at both ends (f1 into U1, y''0 into U2,
       * y''1 into U3; the stage values are no longer needed). */
      double *f1 = U1, *ydd0 = U2, *ydd1 = U3;
      mat_vec(w, A1, w->ynew, f1, M);
      second_derivative(w, A0, dA0, y, w->f0, ydd0, n, M, U4);
      second_derivative(w, A1, dA1, w->ynew, f1, ydd1, n, M, U4);
      while (next < n_out && x_out[next] <= x_new) {
        if (x_out[next] == x_new) {
          emit_output(p, w, next++, w->ynew, n, M);
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
        emit_output(p, w, next++, w->yout, n, M);
      }
    }
    memcpy(y, w->ynew, sizeof(double) * (size_t)len);
    update_peaks(p, w, y, n, M);
    double *swap = A0;
    A0 = A1, A1 = swap;
    swap = dA0, dA0 = dA1, dA1 = swap;
    rate0 = rate1;
    x = x_new;
    /* A step cut to an output says nothing against the longer one. */
    h = fmin(h * fmin(GROW_MAX, grow), p->h_max);
    if (cut) h = fmax(h, fmin(h_free, p->h_max));
  }
  by_mode(y, y_caller, n, M);
  *x_fail = x;
  return PT_ROS_OK;

undefined:
  by_mode(y, y_caller, n, M);
  *x_fail = x;
  return PT_ROS_UNDEFINED;
}

ROS_CLONES
int jg__ros_integrate(const pt_ros_problem *p, pt_ros_work *w, double x0, double *y,
                      const double *x_out, int n_out, double *x_fail) {
  switch (p->n_modes) { /* a lone mode, and the batch sizes ros_lanes pads to */
    case 1: return integrate(p, w, x0, y, x_out, n_out, x_fail, 1);
    case PT_ROS_HALF_BATCH: return integrate(p, w, x0, y, x_out, n_out, x_fail, PT_ROS_HALF_BATCH);
    case PT_ROS_MAX_MODES: return integrate(p, w, x0, y, x_out, n_out, x_fail, PT_ROS_MAX_MODES);
    default: return jg__ros_integrate_generic(p, w, x0, y, x_out, n_out, x_fail);
  }
}

ROS_CLONES
int jg__ros_integrate_generic(const pt_ros_problem *p, pt_ros_work *w, double x0, double *y,
                              const double *x_out, int n_out, double *x_fail) {
  return integrate(p, w, x0, y, x_out, n_out, x_fail, p->n_modes);
}
