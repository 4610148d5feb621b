/*
 * Shared inside the perturbations layer (not installed): the model and
 * workspace, the coefficient tables of the real history (medium_table.c),
 * the equations (perturb.c) and the Rosenbrock path (perturb_rosenbrock.c).
 */
#ifndef JG_PERTURBATIONS_INTERNAL_H
#define JG_PERTURBATIONS_INTERNAL_H

#include <gsl/gsl_odeiv2.h>

#include "jeansgrow/background.h"
#include "jeansgrow/perturb.h"
#include "rosenbrock.h"

/* Steps allowed per output interval before reporting a failure (a stuck
 * integration should fail, not hang a scan). */
#define PT_MAX_STEPS 2000000

/* Nodes per e-fold of the coefficient tables. The cubic-spline error,
 * ~ (5/384) h^4 max|f''''| with h = 2e-3, is below 1e-10 for the logarithms
 * of the coefficients, which vary on scales Delta ln a >~ 0.05 (hydrogen
 * recombination is the sharpest feature). Not across the history's kinks
 * (the hand-over from Saha equilibrium, the start of the integrated T_gas,
 * the reionisation fronts), which the splines round off over a few nodes:
 * measured on the reference history 2e-5 in ln p and 7e-3 in asinh q_r
 * next to the hand-over (z = 1572), 2e-6 next to z = 788; delta_b/delta_c
 * moves by 2e-8 against 2000 nodes per e-fold (6e-8 with 250 nodes, which
 * the pressure check of tests/test_gas_physics.c refuses). */
#define PT_NODES_PER_EFOLD 500
/* Extra nodes before the start, so that the finite difference for dfdt and
 * the first trial steps stay on the table; and after the end of a table
 * that ends before today (jg_perturb_model_new_until), so that the natural
 * spline's end condition does not reach the last wanted redshift. The
 * table of today ends at a = 1 exactly: beyond today the background is not
 * checked (H^2 may turn negative soon after a = 1 when Omega_de < 0, e.g.
 * h = 0.1 with the largest densities), and the only evaluations there,
 * dfdt's PT_DFDT_STEP past the last output, extrapolate the last
 * interval's polynomial. */
#define PT_MARGIN_NODES 8

/* State layouts. */
enum { M_C = 0, M_CP = 1, M_B = 2, M_BP = 3, M_T = 4, M_X = 5 };
/* Largest mode system (fluctuating with delta_xe). */
#define PT_MAX_MODE_DIM 6

/* ---- the real-history medium: coefficient tables (medium_table.c) ------ */

typedef struct thermal_medium {
  const jg_background *bg;
  int effective_gamma, ionisation; /* which of the optional coefficients are tabulated */
  double x0, dx, inv_dx; /* node i at x0 + i dx */
  int n;                 /* nodes */
  double *poly;          /* per interval: N_Q quantities x 4 polynomial coefficients */
  double *node_rate;     /* per interval: PT_NODE_VALUES, the values at its first node */
} thermal_medium;

/* node_rate per interval: p, d, r (exp of the constant terms of their
 * polynomials), then sinh and cosh of the constant terms of the four
 * asinh-tabulated quantities (q_r, q_b, q_T, q_v and sqrt(1 + q^2)). */
#define PT_NODE_RATES 3
#define PT_NODE_VALUES (PT_NODE_RATES + 2 * 4)

/* The tabulated quantities: ln p, ln d, ln r, e, g; gamma_eff; asinh of the
 * delta_xe terms q_r, q_b, q_T, q_v (signed, spanning decades); h_x / r and
 * w_x (of order one). */
enum {
  Q_PRESSURE = 0, Q_DRAG = 1, Q_RELAX = 2, Q_EXPANSION = 3, Q_GRAVITY = 4,
  Q_GAMMA_EFF = 5,
  Q_XE_RELAX = 6, Q_XE_DENSITY = 7, Q_XE_TEMPERATURE = 8, Q_XE_EXPANSION = 9,
  Q_XE_HEATING = 10, Q_XE_PRESSURE = 11,
  N_Q = 12
};

/* Tables from x_first (ln a) to x_last (<= 0: today's ln a is 0);
 * effective_gamma, ionisation: tabulate those optional coefficients. */
thermal_medium *jg__pt_thermal_medium_new(const jg_thermal *th, double x_first, double x_last,
                                          int effective_gamma, int ionisation, jg_error *err);
void jg__pt_thermal_medium_free(thermal_medium *tm);
int jg__pt_thermal_medium_eval(const void *ctx, double ln_a, jg_medium_coefficients *out);
/* The coefficients c at ln_a, as jg__pt_thermal_medium_eval gives them, and
 * their d/d ln a dc; non-zero where the eval would refuse ln_a. */
int jg__pt_thermal_medium_eval_and_slope(const thermal_medium *tm, double ln_a,
                                         jg_medium_coefficients *c, jg_medium_coefficients *dc);

/* ---- model and workspace ----------------------------------------------- */

struct jg_perturb_model {
  jg_medium medium;
  thermal_medium *owned;   /* the real-history tables, when built from a history */
  const jg_thermal *th;    /* NULL for a custom medium */
  jg_perturb_settings settings;
  jg_perturb_start start;   /* uniform start, or the table's first row (the k -> 0 start) */
  jg_perturb_start_table *start_table; /* owned; NULL: the uniform start for every k */
  int start_given;          /* a start was passed to the constructor */
  double x_init;           /* ln a at z_initial */
  double growth_init;      /* D_+ at z_initial (see the header) */
  double growth_rate_init; /* d ln D_+ / d ln a at z_initial */
  double k_lo, k_hi;       /* accepted wavenumbers */
  double k_ref2;           /* scale of the k^2-derivative and Gnedin-Hui components */
  int fluctuating;         /* delta_T in the state */
  int ionisation;          /* delta_xe in the state (fluctuating, real history) */
  int effective_gamma;     /* uniform pressure gamma_eff(z) p (real history) */
  double gamma;            /* uniform models: pressure on (gamma) delta_b */
  int dim_mode, dim_limit;
  double x_explicit;       /* ln a from which the explicit stepper takes over */
};


typedef struct sys_params {
  const jg_perturb_model *m;
  double k2;
  /* The coefficients at the last ln a evaluated: msbdf's Newton iterations
   * evaluate the right-hand side several times at the same ln a. They do
   * not depend on k, so the cache stays valid from one mode to the next. */
  double x_cached;
  jg_medium_coefficients c_cached;
  jg_perturb_work *work; /* the workspace's counters */
} sys_params;


struct jg_perturb_workspace {
  const jg_perturb_model *m;
  sys_params prm_mode, prm_limit;
  gsl_odeiv2_system sys_mode, sys_limit;
  /* [0] msbdf while stiff, [1] the explicit stepper after */
  gsl_odeiv2_driver *drv_mode[2], *drv_limit[2];
  pt_ros_work *ros; /* the Rosenbrock integrator's arrays */
  int order[JG_MAX_REDSHIFTS];
  double x_out[JG_MAX_REDSHIFTS]; /* ln a of the ordered redshifts */
  jg_perturb_work work;
};


/* ---- the equations and their read-out (perturb.c) ----------------------- */

void jg__pt_jac_mode(const jg_perturb_model *m, const jg_medium_coefficients *c, double k2,
                     double *J, int ld, int off);
/* The entries of that block with a k^2 term (the pressure's) alone, the
 * same numbers as jg__pt_jac_mode writes there: where only the part that
 * changes with k^2 is wanted (a batch's A(1) - A(0), perturb_rosenbrock.c). */
void jg__pt_jac_mode_k2_terms(const jg_perturb_model *m, const jg_medium_coefficients *c,
                              double k2, double *J, int ld, int off);
void jg__pt_jac_limit(const jg_perturb_model *m, const jg_medium_coefficients *c, double *J);
void jg__pt_initial_mode(const jg_perturb_model *m, const jg_perturb_start *start, double *y);
/* perturbations.initial_table read and attached to the model (start.c). */
jg_status jg__pt_attach_start_table(jg_perturb_model *m, jg_error *err);
/* Store one result: out[index] of the system's result type. */
typedef void (*emit_fn)(const jg_perturb_model *m, double z, double k, double fb,
                        const double *y, void *out, int index);

void jg__pt_emit_mode(const jg_perturb_model *m, double z, double k, double fb, const double *y,
                      void *out, int index);
void jg__pt_emit_limit(const jg_perturb_model *m, double z, double k, double fb,
                       const double *y, void *out, int index);
/* Check z[0..n_z) and order it into w->order, highest first. */
jg_status jg__pt_order_redshifts(const jg_perturb_model *m, jg_perturb_workspace *w,
                                 const double *z, int n_z, jg_error *err);

/* ---- the Rosenbrock path (perturb_rosenbrock.c) -------------------------- */

/* Wavenumbers k[0..n) (n <= PT_ROS_MAX_MODES) of the mode system in
 * lockstep, redshifts already checked and ordered in w->order; outs[b]
 * receives mode b's points, indexed like z. */
jg_status jg__pt_ros_solve_modes(const jg_perturb_model *m, jg_perturb_workspace *w,
                                 const double *k, int n, const double *z, int n_z,
                                 void *const *outs, jg_error *err);
/* The large-scale limit system, redshifts already checked and ordered. */
jg_status jg__pt_ros_solve_limit(const jg_perturb_model *m, jg_perturb_workspace *w,
                                 const double *z, int n_z, jg_perturb_limit *out, jg_error *err);
/* The coefficients at x and (dc not NULL) their slope in x, as the
 * Rosenbrock path reads them; non-zero outside the medium. */
int jg__pt_coefficients_and_slope(const jg_perturb_model *m, double x, jg_medium_coefficients *c,
                                  jg_medium_coefficients *dc);
/* Coefficients with every field non-zero and distinct: a system's matrix
 * built from them shows which entries can be non-zero. */
void jg__pt_structural_coefficients(jg_medium_coefficients *c);
/* Upper estimate of the fastest rate of the mode system at k^2. */
double jg__pt_fastest_rate(const jg_perturb_model *m, const jg_medium_coefficients *c, double k2);

#endif
