/*
 * Linear perturbations of cold dark matter and gas, one comoving wavenumber
 * at a time (the repository's src/PHYSICS.md §7), in x = ln a:
 *
 *   delta_c'' + (2 + e) delta_c' = g delta_m
 *   delta_b'' + (2 + e + d) delta_b' = g delta_m - p k^2 (delta_b + delta_T)
 *   delta_T'  = (2/3) delta_b' - r delta_T
 *
 * with ' = d/d ln a, delta_m = (1 - f_b) delta_c + f_b delta_b and the
 * coefficients of the medium, all per Hubble time:
 *   e = d ln H / d ln a, g = 4 pi G rho_m / H^2,
 *   p = (k_B T_gas / (mu m_H)) / (a H)^2   (comoving Mpc^2),
 *   d = nu_drag / H,  nu_drag = n_e sigma_T c / R,  R = 3 rho_b / (4 rho_gamma),
 *   r = Gamma_C (T_rad / T_gas) / H.
 * This is the cosmic-time system delta'' + 2 H delta' = ... of src/PHYSICS.md
 * §7.1 divided by H^2 (d/dt = H d/dx, d^2/dt^2 = H^2 [d^2/dx^2 + e d/dx]).
 * The temperature equation is that of Naoz & Barkana (2005, MNRAS 362, 1047)
 * without photon perturbations.
 *
 * With perturbations.ionisation_perturbation (fluctuating model on a real
 * history) the free-electron fraction is perturbed too, delta_xe =
 * delta x_e / x_e, from the linearised recombination rate (jg_ionisation_
 * response in thermal.h, src/PHYSICS.md §7.1):
 *   delta_xe' = -q_r delta_xe + q_b delta_b + q_T delta_T + q_v delta_b'
 *   delta_T'  = (2/3) delta_b' - r delta_T + h_x delta_xe
 * and the pressure term reads p k^2 (delta_b + delta_T + w_x delta_xe).
 *
 * Sound-speed models (jg_sound_speed_model):
 *   fluctuating  delta_T evolved: state {delta_c, delta_c', delta_b, delta_b', delta_T
 *                [, delta_xe]};
 *   isothermal   delta_T = 0 identically: delta_T is dropped from the state;
 *   adiabatic    delta_T = (2/3) delta_b identically: dropped from the state,
 *                the pressure term becomes (5/3) p k^2 delta_b;
 *   effective_gamma  delta_T = (gamma_eff - 1) delta_b, gamma_eff(z) = 1 - (1/3)
 *                d ln T_gas / d ln a of the stored history: the pressure term
 *                is gamma_eff p k^2 delta_b (needs a thermal history).
 *
 * Initial conditions at z_initial: CDM on the growing mode of the Meszaros
 * (1974) equation in a radiation + matter background with the baryons not
 * clustering, y (1 + y) D'' + (1 + 3y/2) D' - (3/2) f_c D = 0 (' = d/dy,
 * y = a / a_eq), i.e. D = 2F1(alpha, beta; 1; -y) with alpha + beta = 1/2,
 * alpha beta = -3 f_c / 2; for f_c = 1 this is D = 1 + 3y/2. delta_c = 1 at
 * z_initial (every result is per unit initial CDM contrast); baryons by
 * default at rest and empty, delta_b = delta_b' = delta_T = 0.
 *
 * The large-scale limit is the same system at k = 0 exactly (no pressure).
 * Its first derivative with respect to k^2 is integrated alongside (the
 * k^2-coefficient of the analytic dependence of the solution on k^2), giving
 * the filtering wavenumber of the solved perturbations,
 * delta_b(k) / delta_b(0) = 1 - k^2 / k_F^2 + O(k^4), without truncation
 * error; and the Gnedin & Hui (1998, MNRAS 296, 44) integral over the Jeans
 * history is integrated alongside as J'' + (2 + e) J' = p D, 1/k_F^2 = J / D,
 * D the k = 0 total-matter contrast (the integral's Green function
 * a^2(t') int_t'^t dt''/a^2 written as an ODE).
 *
 * Objects: a jg_perturb_model (coefficients precomputed once, read-only,
 * share it between threads) and a jg_perturb_workspace per thread (the GSL
 * drivers; allocate once, reuse for every k). Integration (jg_perturb_stepper):
 * by default the library's own Rosenbrock integrator, outputs read off its
 * interpolants; or GSL msbdf with the analytic Jacobian while the drag and
 * Compton rates make the system stiff, then GSL's explicit rk8pd, the
 * requested redshifts reached by driving the integration to each in turn.
 */
#ifndef JEANSGROW_PERTURB_H
#define JEANSGROW_PERTURB_H

#include "jeansgrow/error.h"
#include "jeansgrow/params.h"
#include "jeansgrow/thermal.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Validity of the equations on the real history (src/PHYSICS.md §1),
 * comoving 1/Mpc. Below JG_PERTURB_K_MIN photon pressure and Silk damping,
 * neglected here, matter. Above JG_PERTURB_K_MAX the gas stops being a fluid
 * by z ~ 10: the collisional mean free path of the atoms (~1 pc physical at
 * z = 10 for n_H ~ 2.5e-4 cm^-3 and sigma ~ 1e-15 cm^2, value from memory)
 * approaches the wavelength (2 pi / k) / (1 + z) = 5.7 pc at k = 1e5; it is
 * also the bound of the parameter loader (one pair of constants, params.h). Each k must also exceed
 * JG_PERTURB_HORIZON_FACTOR times the comoving horizon wavenumber aH/c at
 * z_initial (Newtonian, sub-horizon equations). */
#define JG_PERTURB_K_MIN JG_PARAMS_K_LOWEST
#define JG_PERTURB_K_MAX JG_PARAMS_K_HIGHEST
#define JG_PERTURB_HORIZON_FACTOR 10.0

/* ---- the medium: coefficients of the equations -------------------------- */

/* The coefficients at one ln a, per Hubble time (the equations are written
 * in ln a, so only ratios to H enter; a medium defined by physical rates
 * divides them by H once). */
typedef struct jg_medium_coefficients {
  double dlnH_dlna;       /* e = d ln H / d ln a */
  double gravity;         /* g = 4 pi G rho_m / H^2 (= 3/2 Omega_m(a)) */
  double baryon_fraction; /* f_b in delta_m = (1 - f_b) delta_c + f_b delta_b */
  double pressure;        /* p = (k_B T_gas/(mu m_H)) / (a H)^2, Mpc^2 (or test units^-2) */
  double drag;            /* d = nu_drag / H */
  double relaxation;      /* r = Gamma_C (T_rad / T_gas) / H */
  /* Read only by the models that need a thermal history (the real-history
   * medium fills them; a custom medium may leave them unset): */
  double pressure_effective;    /* gamma_eff p ("effective_gamma" model) */
  double ionisation_relaxation; /* the jg_ionisation_response terms (thermal.h) */
  double ionisation_density;
  double ionisation_temperature;
  double ionisation_expansion;
  double heating_ionisation;    /* coefficient of delta_xe in delta_T' */
  double pressure_ionisation;   /* p x_e / (1 + f_He + x_e): pressure per unit delta_xe */
} jg_medium_coefficients;

/* Fill `out` at ln a; return 0 on success, non-zero if ln a is outside the
 * medium (the solver then reports a numerical failure). Must be thread-safe:
 * `ctx` is shared read-only by all threads. */
typedef int (*jg_medium_eval_fn)(const void *ctx, double ln_a, jg_medium_coefficients *out);

typedef struct jg_medium {
  jg_medium_eval_fn eval;
  const void *ctx;    /* must outlive every model built on this medium */
  double a_equality;  /* Omega_r / Omega_m for the Meszaros growing mode; 0: no radiation */
  double ln_a_min;    /* coefficients defined for ln_a_min <= ln a <= ln_a_max */
  double ln_a_max;
  double k_min;       /* wavenumbers accepted by the solver, same unit as 1/sqrt(pressure) */
  double k_max;
  double rho_m0;      /* comoving matter density, M_sun per unit volume (0: masses not reported) */
} jg_medium;

/* Baryon state at z_initial relative to the CDM there; with has_cdm_rate
 * the dark matter's rate too (it then replaces the Meszaros growing mode's
 * rate; a start of three values leaves it 0: the growing mode). */
typedef struct jg_perturb_start {
  double density_ratio;     /* delta_b / delta_c */
  double velocity_ratio;    /* (d delta_b / d ln a) / (d delta_c / d ln a) */
  double temperature_ratio; /* delta_T / delta_c (fluctuating model only) */
  int has_cdm_rate;         /* 1: cdm_rate is given */
  double cdm_rate;          /* d ln delta_c / d ln a */
} jg_perturb_start;

typedef struct jg_perturb_model jg_perturb_model;

/* ---- initial conditions from a table ------------------------------------ */

/* The start per wavenumber at z_initial, for runs that continue another
 * code's solution (perturbations.initial_table). A text table read through
 * a column map (perturbations.initial_columns, _k_unit, _separator,
 * _gauge; see params.h and the README): k, the baryon density (b_over_c,
 * or delta_b with delta_c) and velocity, in one of these conventions, each
 * turned into the state of src/PHYSICS.md §7.3:
 *   velocity_ratio  (d delta_b/d ln a) / (d delta_c/d ln a);
 *   rate_b, rate_c  d ln delta / d ln a;
 *   theta_b, theta_c  velocity divergences in conformal time, in the
 *                   table's k unit (c = 1): Newtonian gauge
 *                   d delta/d ln a = -theta / (aH/c), or synchronous
 *                   (theta_c = 0): d delta_b/d ln a = d delta_c/d ln a
 *                   - theta_b / (aH/c).
 * Without rate_c (or Newtonian theta_c) the dark matter keeps the growing
 * mode's rate. Optional delta_T (or T_over_c). Rows with k strictly
 * increasing, also in ln k (at least two); values interpolated in ln k
 * (GSL Steffen, linear for two rows); k within 1e-9 relative of an end of
 * the table counts as that end; wavenumbers further out are refused. The
 * k -> 0 reference starts from the first row. */
typedef struct jg_perturb_start_table jg_perturb_start_table;
/* What turns the table's velocities into the state: h (for h/Mpc), the
 * comoving Hubble rate aH/c at z_initial in 1/Mpc (for theta), and the
 * growing mode's d ln delta_c / d ln a there (for a table without the dark
 * matter's velocity). */
typedef struct jg_perturb_table_frame {
  double hubble_h;
  double conformal_hubble;
  double growing_rate;
} jg_perturb_table_frame;
/* Read `path` with the layout of `s` (its initial_columns, _k_unit,
 * _separator, _gauge; the path itself is `path`). */
jg_perturb_start_table *jg_perturb_start_table_read_layout(const char *path,
                                                           const jg_perturb_settings *s,
                                                           const jg_perturb_table_frame *frame,
                                                           jg_error *err);
/* The plain layout k[1/Mpc] b_over_c velocity_ratio [T_over_c], blanks. */
jg_perturb_start_table *jg_perturb_start_table_read(const char *path, jg_error *err);
void jg_perturb_start_table_free(jg_perturb_start_table *t);
const char *jg_perturb_start_table_path(const jg_perturb_start_table *t);
/* 1/Mpc, whatever the table's unit. */
void jg_perturb_start_table_range(const jg_perturb_start_table *t, double *k_min, double *k_max);
int jg_perturb_start_table_has_temperature(const jg_perturb_start_table *t);
/* 1 when the table gives the dark matter's velocity. */
int jg_perturb_start_table_has_cdm_rate(const jg_perturb_start_table *t);
/* FNV-1a hash of the file's bytes, for table headers. */
unsigned long long jg_perturb_start_table_checksum(const jg_perturb_start_table *t);
/* The start at k (thread-safe). */
jg_status jg_perturb_start_table_at(const jg_perturb_start_table *t, double k,
                                    jg_perturb_start *out, jg_error *err);
/* Read and check settings->initial_table (if any) as a model would, without
 * building one: for callers that must refuse a bad table before any work. */
jg_status jg_perturb_check_start_table(const jg_perturb_settings *s, jg_error *err);
/* Where the perturbations start, in words for table headers (the table and
 * its checksum, or our own start), into buf. */
void jg_perturb_model_describe_start(const jg_perturb_model *m, char *buf, size_t size);

/* ---- model and workspace -------------------------------------------------- */

typedef struct jg_perturb_workspace jg_perturb_workspace;

/* Real history: coefficients from the thermal history (cubic splines in ln a,
 * 500 nodes per e-fold from z_initial to today, built once here), baryons at
 * rest (start = NULL) or as given. The thermal history must outlive the
 * model. Fails with JG_EINVAL on bad settings (tolerances, z_initial). */
jg_perturb_model *jg_perturb_model_new(const jg_thermal *th, const jg_perturb_settings *s,
                                       const jg_perturb_start *start, jg_error *err);
/* The same with the tables ending at z_end (0 <= z_end < z_initial)
 * instead of today: a quarter cheaper to build when no redshift after
 * z = 10 is wanted (a scan's points); a later redshift is refused
 * (JG_EINVAL), earlier ones give the numbers of the model that ends today
 * (the same nodes; only the splines' end condition differs, measured: 7e-13
 * relative at most, at z_end itself). jg_perturb_model_new is this with
 * z_end = 0. */
jg_perturb_model *jg_perturb_model_new_until(const jg_thermal *th, const jg_perturb_settings *s,
                                             const jg_perturb_start *start, double z_end,
                                             jg_error *err);
/* Any medium (analytic test cases, cross-checks). The struct is copied; its
 * ctx is not. */
jg_perturb_model *jg_perturb_model_new_medium(const jg_medium *medium,
                                              const jg_perturb_settings *s,
                                              const jg_perturb_start *start, jg_error *err);
void jg_perturb_model_free(jg_perturb_model *m);

/* The medium the model integrates (for the thermal one: the splined
 * coefficients). */
const jg_medium *jg_perturb_model_medium(const jg_perturb_model *m);
/* The thermal history, or NULL for a custom medium. */
const jg_thermal *jg_perturb_model_thermal(const jg_perturb_model *m);
const jg_perturb_settings *jg_perturb_model_settings(const jg_perturb_model *m);
/* The growing mode D_+(y) at z_initial, normalised to D_+ -> 1 deep in the
 * radiation era (y -> 0). A contrast per unit initial CDM contrast times this
 * is per unit primordial growing-mode amplitude, which does not depend on
 * z_initial. For a medium without radiation D_+ = a^n, n the growing exponent. */
double jg_perturb_model_initial_growth(const jg_perturb_model *m);
/* Smallest and largest wavenumber accepted (validity, horizon at z_initial). */
void jg_perturb_model_k_range(const jg_perturb_model *m, double *k_min, double *k_max);

/* Reject (JG_EINVAL, naming k and the limit) a wavenumber outside the range
 * of validity; k = 0 (the large-scale limit) is accepted. */
jg_status jg_perturb_check_wavenumber(const jg_perturb_model *m, double k, jg_error *err);

/* One per thread; reusable for any k of this model. */
jg_perturb_workspace *jg_perturb_workspace_new(const jg_perturb_model *m, jg_error *err);
void jg_perturb_workspace_free(jg_perturb_workspace *w);

/* Work done through this workspace since it was created: right-hand-side
 * evaluations (including the two per Jacobian for its x-derivative) and
 * Jacobian evaluations, over every solve. For benchmarks and diagnostics. */
typedef struct jg_perturb_work {
  long rhs_evals;
  long jacobian_evals;
} jg_perturb_work;
jg_perturb_work jg_perturb_workspace_work(const jg_perturb_workspace *w);

/* ---- results --------------------------------------------------------------- */

typedef struct jg_perturb_point {
  double z;
  double k;        /* comoving, 1/Mpc; 0 for the large-scale limit */
  double delta_c;  /* per unit initial CDM contrast */
  double delta_b;
  double delta_m;  /* (1 - f_b) delta_c + f_b delta_b */
  double delta_T;  /* 0 (isothermal), (gamma - 1) delta_b (uniform models), or evolved */
  double b_over_c; /* delta_b / delta_c */
  double growth_c; /* d ln delta / d ln a */
  double growth_b;
  double growth_m;
  double delta_xe; /* delta x_e / x_e, evolved with the ionisation perturbation; else 0 */
} jg_perturb_point;

/* The large-scale limit and its k^2 coefficients at one redshift. */
typedef struct jg_perturb_limit {
  jg_perturb_point k0;     /* the solution at k = 0 */
  double dlnb_dk2;         /* d ln delta_b / d k^2 at k = 0 (Mpc^2); -1/k_F^2 measured */
  double dlnc_dk2;         /* d ln delta_c / d k^2 at k = 0 (baryon gravity feeds back) */
  double gh_inverse_kf2;   /* Gnedin-Hui integral 1/k_F^2 (Mpc^2), isothermal sound speed
                            * (gamma = 1); gamma = 5/3 multiplies it by 5/3 */
  double gamma_uniform;    /* adiabatic index of a uniform model at this z (1, 5/3 or
                            * gamma_eff); 0 for the fluctuating model */
} jg_perturb_limit;

/* Solve one wavenumber k (1/Mpc, or 0) from z_initial to every redshift of
 * z[0..n_z) (any order, each -1 < z < z_initial and inside the medium).
 * out[i] belongs to z[i]. Fails with JG_EINVAL (bad k or z) or JG_ENUMERIC
 * (naming the stage, k and the redshift interval). */
jg_status jg_perturb_solve(const jg_perturb_model *m, jg_perturb_workspace *w, double k,
                           const double *z, int n_z, jg_perturb_point *out, jg_error *err);

/* Solve the wavenumbers k[0..n_k) (each as jg_perturb_solve would) at
 * every redshift of z[0..n_z); out[ik * n_z + iz]. With the rosenbrock
 * stepper, runs of JG_PERTURB_BATCH consecutive entries of k are solved in
 * lockstep on one step sequence (coefficients read once per step for the
 * whole batch; the step is the one the most demanding mode of the batch
 * allows). Batches are cut from the list alone, so a given list always
 * gives the same digits, whoever solves it; a batch that fails is solved
 * again mode by mode, and only a failing mode is reported. The GSL steppers
 * solve one k at a time. */
#define JG_PERTURB_BATCH 8
jg_status jg_perturb_solve_many(const jg_perturb_model *m, jg_perturb_workspace *w,
                                const double *k, int n_k, const double *z, int n_z,
                                jg_perturb_point *out, jg_error *err);

/* The large-scale limit with its k^2 coefficients and the Gnedin-Hui
 * integral, at every redshift of z[0..n_z). */
jg_status jg_perturb_solve_limit(const jg_perturb_model *m, jg_perturb_workspace *w,
                                 const double *z, int n_z, jg_perturb_limit *out,
                                 jg_error *err);

/* The wavenumbers of the settings: the explicit list if n_k_values > 0,
 * otherwise k_count points log-spaced from k_min to k_max. k must hold
 * JG_MAX_WAVENUMBERS values. */
jg_status jg_perturb_wavenumbers(const jg_perturb_settings *s, double *k, int *n_k,
                                 jg_error *err);

/* ---- diagnostics (tests, cross-checks) ---------------------------------- */

typedef enum {
  JG_PERTURB_SYSTEM_MODE = 0,  /* one wavenumber */
  JG_PERTURB_SYSTEM_LIMIT = 1  /* k = 0 with the k^2 derivative and the Gnedin-Hui integral */
} jg_perturb_system;

/* Number of components of a system for this model's sound-speed model:
 * mode 6 (fluctuating with delta_xe), 5 (fluctuating) or 4; limit 6 more. */
int jg_perturb_dimension(const jg_perturb_model *m, jg_perturb_system which);
/* Right-hand side f = dy/d ln a and analytic Jacobian dfdy (row-major,
 * dimension^2) of a system at ln a, as the integrator sees them. The k^2
 * derivative and Gnedin-Hui components of the limit system are scaled by the
 * model's reference wavenumber squared (see perturb.c). */
jg_status jg_perturb_rhs(const jg_perturb_model *m, jg_perturb_system which, double k,
                         double ln_a, const double *y, double *f, jg_error *err);
jg_status jg_perturb_jacobian(const jg_perturb_model *m, jg_perturb_system which, double k,
                              double ln_a, const double *y, double *dfdy, jg_error *err);

#ifdef __cplusplus
}
#endif
#endif
