/*
 * A linearly implicit integrator for linear non-autonomous systems
 * y' = A(x) y, several of them (a batch) in lockstep on one step sequence.
 *
 * Method: the 4th-order L-stable, stiffly accurate Rosenbrock method with an
 * embedded 3rd-order solution of Hairer & Wanner (Solving Ordinary
 * Differential Equations II, 2nd ed., Springer 1996, section IV.7, the
 * method RODAS; coefficients as published there). Because the system is
 * linear, the Jacobian is A(x) itself and no Newton iteration is needed:
 * one LU factorisation of (1/(h gamma)) I - A(x_n) per step and mode, six
 * solves with it; the non-autonomous term uses dA/dx, supplied exactly.
 *
 * Error control, per mode: the estimate is the 6th stage U6 (the
 * difference of the 4th- and 3rd-order solutions) filtered as
 * e = (I - h gamma A(x_n))^-1 U6, with the step's own factorisation (one
 * more solve). Why: an error along a stiff direction (rate lambda, h lambda
 * >> 1) is damped by the next step (R(infinity) = 0), so only its part
 * along the slow directions carries into the solution; the filter passes
 * slow components unchanged and divides stiff ones by ~ h gamma lambda
 * (the filter Hairer & Wanner use for their Radau IIA code, section IV.8,
 * from memory). Without
 * it the tiny gas velocity slaved by the drag before recombination
 * (delta_b' ~ gravity delta_c / drag) set the step on the real history;
 * with it the same delta_b/delta_c accuracy costs ~25 % fewer steps
 * (DEVELOPERS.md, "The Rosenbrock path"). e is measured
 * component by component against
 *     w_i = rel_tol * max(|y_i(x_n)|, |y_i(x_n+1)|) + abs_tol * peak_i,
 * peak_i the largest |y_j| of this solve so far over the components j of
 * the group of i (the problem's `group`: components that enter the
 * equations together, such as a contrast, its rate and its temperature;
 * 1 while they are all still 0), and a step is accepted when the root mean
 * square of e_i / w_i over the components is at most 1 for every mode of
 * the batch. So rel_tol bounds the relative local error of each component,
 * and abs_tol that of a component passing through zero or much smaller than
 * its group, relative to the group's size, not to the CDM contrast (a gas
 * contrast that stays tiny, as at k ~ 1e5, keeps its relative accuracy; a
 * temperature fluctuation slaved to it far below it is not resolved for its
 * own sake). A component the problem marks `group_scaled` is measured with
 * peak_i in place of its own size in the rel_tol term: for a component the
 * others see only as a fraction of its group (the gas temperature and
 * ionisation contrasts in the gas pressure), its relative accuracy is
 * worth no more than that of the group it feeds.
 *
 * Outputs never shorten steps. A point x_out inside an accepted step is
 * read off the quintic Hermite interpolant through y, y' = A y and y'' =
 * (A' + A^2) y at both ends (interpolation error O(h^6), below the step's
 * own) while the step is short compared with the fastest rate of the system
 * (h * rate <= PT_ROS_DENSE_LIMIT). Where it is long (the stiff part),
 * y' and y'' of the numerical solution amplify its error along the stiff
 * directions by h * rate and its square, so the method's own continuous
 * extension of order 3, built from the stages, is used instead (it damps
 * as the stages do).
 *
 * Linear algebra: A is sparse (the perturbation systems couple each
 * component to a few others: 17 of the 36 entries of the default mode
 * system), so the problem states which entries may be non-zero (`pattern`)
 * and the integrator works on those alone: the matrix-vector products run
 * over the entries, and the step matrix is factorised on its fill pattern,
 * found once per solve. The modes of a batch are stored side by side
 * (entry by entry, component by component, the modes innermost), so that
 * every operation of the factorisation, the solves and the products is one
 * short loop over the modes, which the compiler turns into vector
 * arithmetic. The factorisation has no row interchanges (they would differ
 * from mode to mode): the step matrix (1/(h gamma)) I - A is dominated by
 * its diagonal for the physical couplings (the gas's pressure and drag
 * enlarge later pivots, they do not cancel them), and a pivot that has
 * fallen below PT_ROS_PIVOT_FLOOR times its row's diagonal before
 * elimination rejects the step, which is retried shorter (h -> 0 makes the
 * matrix diagonal).
 *
 * The workspace has fixed-size arrays: nothing is allocated while solving.
 */
#ifndef JG_PERTURBATIONS_ROSENBROCK_H
#define JG_PERTURBATIONS_ROSENBROCK_H

/* Largest system and batch: the streaming k -> 0 system with delta_xe has
 * 3 x 6 components. */
#define PT_ROS_MAX_DIM 18
#define PT_ROS_MAX_MODES 8
#define PT_ROS_MAX_ENTRIES (PT_ROS_MAX_DIM * PT_ROS_MAX_DIM)
#define PT_ROS_MAX_LEN (PT_ROS_MAX_MODES * PT_ROS_MAX_DIM)
/* The batch sizes with a copy of the integrator compiled for them (vector
 * arithmetic over the modes): 1, PT_ROS_HALF_BATCH and PT_ROS_MAX_MODES.
 * Any other size runs the generic copy, several times slower per mode. */
#define PT_ROS_HALF_BATCH 4

/* The lanes to give a batch of n modes (1 <= n <= PT_ROS_MAX_MODES): n
 * rounded up to a compiled batch size. The caller fills the extra lanes
 * with copies of a mode of the batch and ignores their outputs: a copy
 * changes nothing for the others (the step is accepted on the largest
 * error over the modes, which a copy repeats, and each lane's arithmetic
 * is its own), while the batch runs the compiled copy. */
static inline int jg__ros_lanes(int n) {
  return n <= 1 ? 1 : n <= PT_ROS_HALF_BATCH ? PT_ROS_HALF_BATCH : PT_ROS_MAX_MODES;
}

/* The matrices of every mode of the batch at x, in the integrator's layout:
 * A[e * n_modes + b] is entry e of mode b, the entries e being the
 * non-zeros of the problem's pattern in row-major order (every entry, row
 * by row, without a pattern); when dA is not NULL also dA/dx alike; when
 * rate is not NULL, *rate: an upper estimate of the largest |eigenvalue|
 * over the modes (for the choice between dense output and a step cut to the
 * output). Return non-zero if x is outside the coefficients' domain. */
typedef int (*pt_ros_matrices_fn)(void *ctx, double x, double *A, double *dA, double *rate);
/* One output: y holds n_modes states of dim components, mode after mode, at
 * x_out[index]. */
typedef void (*pt_ros_emit_fn)(void *ctx, int index, const double *y);

typedef struct pt_ros_problem {
  int dim, n_modes;
  pt_ros_matrices_fn matrices;
  pt_ros_emit_fn emit;
  void *ctx;
  const int *group; /* dim entries: the error-scale group of each component, numbered
                       0 .. dim - 1 (NULL: its own) */
  double rel_tol, abs_tol;
  double h_start; /* first trial step */
  double h_max;   /* no step longer */
  long max_steps; /* accepted + rejected, before giving up */
  /* dim x dim, row-major: non-zero where an entry of A (or dA/dx) may be
   * non-zero for some x and mode (NULL: every entry) */
  const unsigned char *pattern;
  /* dim entries (NULL: none): 1 where a component's error is measured
   * against rel_tol times its group's peak instead of its own size (see
   * above) */
  const unsigned char *group_scaled;
} pt_ros_problem;

typedef struct pt_ros_stats {
  long steps;        /* accepted */
  long rejected;     /* by the error test, a small pivot, or non-finite */
  long matrix_evals; /* calls of the matrices function */
} pt_ros_stats;

enum {
  PT_ROS_OK = 0,
  PT_ROS_UNDEFINED = 1,  /* the matrices function refused an x */
  PT_ROS_TOO_MANY = 2,   /* max_steps reached */
  PT_ROS_TOO_SMALL = 3,  /* step below the rounding of x (non-finite values, or a step matrix
                            that cannot be factorised) */
  PT_ROS_BAD_INPUT = 5   /* dimension or batch too large, outputs not increasing */
};

/* A pivot below this fraction of its row's diagonal before elimination
 * rejects the step (see above). */
#define PT_ROS_PIVOT_FLOOR 1.0e-8

typedef struct pt_ros_work {
  /* The matrices' entries, [entry][mode]: at x_n, at x_n + h, at the inner
   * stages. */
  double A0[PT_ROS_MAX_MODES * PT_ROS_MAX_ENTRIES], dA0[PT_ROS_MAX_MODES * PT_ROS_MAX_ENTRIES];
  double A1[PT_ROS_MAX_MODES * PT_ROS_MAX_ENTRIES], dA1[PT_ROS_MAX_MODES * PT_ROS_MAX_ENTRIES];
  double As[PT_ROS_MAX_MODES * PT_ROS_MAX_ENTRIES];
  /* The factors of the step matrix, [i * dim + j][mode] (the fill pattern's
   * positions only), and the pivots' inverses [i][mode]. */
  double LU[PT_ROS_MAX_MODES * PT_ROS_MAX_ENTRIES];
  double inverse_pivot[PT_ROS_MAX_LEN];
  /* Vectors, [component][mode]. */
  double U[6][PT_ROS_MAX_LEN];
  double y[PT_ROS_MAX_LEN], f0[PT_ROS_MAX_LEN], fx0[PT_ROS_MAX_LEN];
  double ytmp[PT_ROS_MAX_LEN], ynew[PT_ROS_MAX_LEN], yout[PT_ROS_MAX_LEN];
  double peak[PT_ROS_MAX_LEN], own_peak[PT_ROS_MAX_LEN];
  double err_est[PT_ROS_MAX_LEN]; /* filtered error estimate */
  double by_mode[PT_ROS_MAX_LEN]; /* an output, mode after mode, for emit */
  /* The structure, found at the start of each solve (find_structure) and
   * kept as flat lists of row operations, every position an offset in
   * doubles into the batch's arrays (a component's or an entry's index
   * times the batch size), so that the loops per stage only walk lists:
   * - the matrix-vector product: its terms A_e v[in] added into out[row],
   *   each row's first term first (it starts the row: out = A_e v + 0, the
   *   same number as 0 + A_e v without clearing the row first), the rows
   *   without a term cleared;
   * - the entries of A: their place in the factors, the diagonal's;
   * - the factorisation: for pivot k, the places l of L's column k
   *   ([pivot_start[k], pivot_start[k + 1]) of scaled), and for each l the
   *   updates LU[target] -= LU[l] LU[source] ([update_start[l-index],
   *   update_start[l-index + 1]) of update_target, update_source);
   * - the forward substitution: x[target] -= LU[factor] x[source], in
   *   order; the backward one the same, row n - 1 first, each row's
   *   operations in [backward_end[r - 1], backward_end[r]) followed by the
   *   row's multiplication by its inverse pivot. */
  int n_entries, n_factor;
  int n_row_starts, product_entry[PT_ROS_MAX_ENTRIES], product_out[PT_ROS_MAX_ENTRIES],
      product_in[PT_ROS_MAX_ENTRIES];
  int n_empty_rows, empty_row[PT_ROS_MAX_DIM];
  int entry_factor[PT_ROS_MAX_ENTRIES];
  int diagonal_entry[PT_ROS_MAX_DIM]; /* entry of A_ii, or -1 */
  int diagonal_factor[PT_ROS_MAX_DIM];
  int factor_position[PT_ROS_MAX_ENTRIES];
  int pivot_start[PT_ROS_MAX_DIM + 1], scaled[PT_ROS_MAX_ENTRIES];
  int update_start[PT_ROS_MAX_ENTRIES + 1];
  int update_target[PT_ROS_MAX_DIM * PT_ROS_MAX_ENTRIES],
      update_source[PT_ROS_MAX_DIM * PT_ROS_MAX_ENTRIES];
  int n_forward, forward_target[PT_ROS_MAX_ENTRIES], forward_factor[PT_ROS_MAX_ENTRIES],
      forward_source[PT_ROS_MAX_ENTRIES];
  int backward_end[PT_ROS_MAX_DIM], backward_target[PT_ROS_MAX_ENTRIES],
      backward_factor[PT_ROS_MAX_ENTRIES], backward_source[PT_ROS_MAX_ENTRIES];
  pt_ros_stats stats; /* accumulated over every solve with this workspace */
} pt_ros_work;

/* Integrate y (n_modes states of dim components, mode after mode; in place)
 * from x0 through the increasing outputs x_out[0..n_out), calling emit at
 * each; the last output is the end. Returns PT_ROS_OK or a failure code,
 * with *x_fail the x reached. */
int jg__ros_integrate(const pt_ros_problem *p, pt_ros_work *w, double x0, double *y,
                      const double *x_out, int n_out, double *x_fail);
/* The same with the batch size a run-time value (the copy every batch size
 * without its own compiled copy takes): the reference the compiled copies
 * must match bit for bit. */
int jg__ros_integrate_generic(const pt_ros_problem *p, pt_ros_work *w, double x0, double *y,
                              const double *x_out, int n_out, double *x_fail);

/* The positions i * dim + j of the entries of a pattern (NULL: every
 * entry), in the layout's order; returns their number. */
int jg__ros_entry_positions(int dim, const unsigned char *pattern, int *position);
/* Entries of every mode's matrix in the layout of pt_ros_matrices_fn, for
 * matrices affine in per-mode numbers: A_b = B0 + s1[b] B1 + s2[b] B2, the
 * B dense dim x dim row-major (B1, B2 may be NULL, then s1, s2 unused). */
void jg__ros_gather(int n_entries, const int *position, int n_modes, const double *B0,
                    const double *B1, const double *s1, const double *B2, const double *s2,
                    double *A);

/* The quintic Hermite interpolation limit: above this h * rate, outputs come
 * from the stages' continuous extension. */
#define PT_ROS_DENSE_LIMIT 1.0

#endif
