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
 * own sake).
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
 * The workspace has fixed-size arrays: nothing is allocated while solving.
 */
#ifndef JG_PERTURBATIONS_ROSENBROCK_H
#define JG_PERTURBATIONS_ROSENBROCK_H

/* Largest system and batch: the streaming k -> 0 system with delta_xe has
 * 3 x 6 components. */
#define PT_ROS_MAX_DIM 18
#define PT_ROS_MAX_MODES 8

/* The matrices of every mode of the batch at x: A[b * dim * dim ...]
 * (row-major); when dA is not NULL also dA/dx; *rate: an upper estimate of
 * the largest |eigenvalue| over the modes (for the choice between dense
 * output and a step cut to the output). Return non-zero if x is outside the
 * coefficients' domain. */
typedef int (*pt_ros_matrices_fn)(void *ctx, double x, double *A, double *dA, double *rate);
/* One output: y holds n_modes states of dim components, at x_out[index]. */
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
} pt_ros_problem;

typedef struct pt_ros_stats {
  long steps;        /* accepted */
  long rejected;     /* by the error test, or non-finite */
  long matrix_evals; /* calls of the matrices function */
} pt_ros_stats;

enum {
  PT_ROS_OK = 0,
  PT_ROS_UNDEFINED = 1,  /* the matrices function refused an x */
  PT_ROS_TOO_MANY = 2,   /* max_steps reached */
  PT_ROS_TOO_SMALL = 3,  /* step below the rounding of x (non-finite values) */
  PT_ROS_SINGULAR = 4,   /* the step matrix could not be factorised */
  PT_ROS_BAD_INPUT = 5   /* dimension or batch too large, outputs not increasing */
};

typedef struct pt_ros_work {
  double A0[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM * PT_ROS_MAX_DIM];  /* at x_n */
  double dA0[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM * PT_ROS_MAX_DIM];
  double A1[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM * PT_ROS_MAX_DIM];  /* at x_n + h */
  double dA1[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM * PT_ROS_MAX_DIM];
  double As[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM * PT_ROS_MAX_DIM];  /* inner stages */
  double LU[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM * PT_ROS_MAX_DIM];
  int pivot[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM];
  double U[6][PT_ROS_MAX_MODES * PT_ROS_MAX_DIM];
  double f0[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM], fx0[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM];
  double ytmp[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM], ynew[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM];
  double peak[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM];
  double own_peak[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM];
  double yout[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM];
  double err_est[PT_ROS_MAX_MODES * PT_ROS_MAX_DIM]; /* filtered error estimate */
  pt_ros_stats stats; /* accumulated over every solve with this workspace */
} pt_ros_work;

/* Integrate y (n_modes x dim, in place) from x0 through the increasing
 * outputs x_out[0..n_out), calling emit at each; the last output is the end.
 * Returns PT_ROS_OK or a failure code, with *x_fail the x reached. */
int jg__ros_integrate(const pt_ros_problem *p, pt_ros_work *w, double x0, double *y,
                     const double *x_out, int n_out, double *x_fail);
/* The same with the dimension a run-time value (the copy every dimension
 * without its own compiled copy takes): the reference the compiled copies
 * must match bit for bit. */
int jg__ros_integrate_generic(const pt_ros_problem *p, pt_ros_work *w, double x0, double *y,
                              const double *x_out, int n_out, double *x_fail);

/* The quintic Hermite interpolation limit: above this h * rate, outputs come
 * from the stages' continuous extension. */
#define PT_ROS_DENSE_LIMIT 1.0

#endif
