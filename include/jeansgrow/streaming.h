/*
 * The baryon-dark matter streaming velocity (src/PHYSICS.md §7.8).
 *
 * After kinematic decoupling the baryons stream past the dark matter with a
 * relative velocity v_bc, coherent over a few Mpc and decaying as 1/a
 * (Tseliakhovich & Hirata 2010, PRD 82, 083520). In the dark matter's rest
 * frame a mode k at angle mu = cos(k, v_bc) sees the baryon density, the
 * baryon velocity divergence and the gas-temperature fluctuation advected:
 *
 *   delta_b'  = -i A delta_b + w
 *   w'        = -i A w - (2 + e + d) w + g delta_m - p k^2 (delta_b + delta_T)
 *   delta_T'  = -i A delta_T + (2/3) w - r delta_T
 *   A         = k mu v_bc(a) / (a H)  (per Hubble time),
 *
 * with w = -theta_b / H the velocity variable (w = delta_b' without
 * streaming) and the dark matter unchanged. The state is complex; it is
 * integrated as its real and imaginary parts, a real system of twice the
 * dimension, [Re y; Im y]' = [[M, A P], [-A P, M]] [Re y; Im y], P the
 * projection on the baryon components (the integrator of rosenbrock.c).
 *
 * The flow: v_bc = 0 before streaming.start_redshift, v_bc = v_par (1 + z)/(1 + z_start)
 * after, v_par its value along k at the start. Only v_par = mu |v_bc|
 * enters. Averages are over an isotropic Maxwellian of 3-D rms v_rms: v_par
 * is then Gaussian with variance v_rms^2/3, and since v_par -> -v_par gives
 * the complex conjugate, |delta|^2 is even in v_par and the average is a
 * Gauss-Hermite rule over v_par >= 0 (streaming.velocity_nodes positive nodes
 * of a rule of twice as many). The direction average at a fixed |v_bc| is a
 * Gauss-Legendre rule in mu on [0, 1] (streaming.direction_nodes).
 *
 * Before the start the system is the real one of perturb.h: each k is solved
 * once without streaming (its v = 0 reference at every redshift), and every
 * velocity node continues from its state at the start.
 */
#ifndef JEANSGROW_STREAMING_H
#define JEANSGROW_STREAMING_H

#include "jeansgrow/error.h"
#include "jeansgrow/params.h"
#include "jeansgrow/perturb.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Most nodes of either rule (the keys' upper limit). */
#define JG_STREAM_MAX_NODES 32

/* a H at ln a in the velocity unit of v_rms per length unit of 1/k (km/s
 * per Mpc on the real history). */
typedef double (*jg_stream_hubble_fn)(const void *ctx, double ln_a);

typedef struct jg_stream_model jg_stream_model;

/* On the model's real history (a H from its background). The model must
 * outlive the stream model. JG_EINVAL for settings outside the key table. */
jg_stream_model *jg_stream_model_new(const jg_perturb_model *m, const jg_streaming_settings *s,
                                     jg_error *err);
/* Any medium, with its a H (analytic tests). */
jg_stream_model *jg_stream_model_new_flow(const jg_perturb_model *m,
                                          const jg_streaming_settings *s,
                                          jg_stream_hubble_fn hubble, const void *ctx,
                                          jg_error *err);
void jg_stream_model_free(jg_stream_model *sm);

/* 1 when the flow is on (rms_velocity_kms > 0). */
int jg_stream_active(const jg_stream_model *sm);
/* ln a where the flow starts. */
double jg_stream_start(const jg_stream_model *sm);
/* The advection per unit k mu at velocity v_rms: v_bc / (a H) in the length
 * unit of 1/k (Mpc), 0 before the start. A = k (v_par / v_rms) times this. */
double jg_stream_drift(const jg_stream_model *sm, double ln_a);

/* The rules: n nodes and weights (weights sum to 1). Velocity nodes are
 * v_par / v_rms >= 0 of the Gaussian with variance 1/3, direction nodes mu
 * in (0, 1). */
int jg_stream_velocity_rule(const jg_stream_model *sm, const double **node, const double **weight);
int jg_stream_direction_rule(const jg_stream_model *sm, const double **node,
                             const double **weight);
/* The rules themselves, for tests: Gauss-Hermite (weight exp(-x^2) on the
 * whole line, n_half positive nodes of a 2 n_half rule, weights summing to
 * sqrt(pi)/2 over them) and Gauss-Legendre on [0, 1]. 0 on success. */
int jg_stream_gauss_hermite_half(int n_half, double *x, double *w);
int jg_stream_gauss_legendre_unit(int n, double *x, double *w);

/* One complex solution. */
typedef struct jg_stream_state {
  double delta_c[2]; /* real, imaginary part; per unit initial CDM contrast */
  double delta_b[2];
  double delta_T[2];
} jg_stream_state;

/* Solve wavenumber k with velocities along k v_rel[0..n_v) (in units of
 * v_rms, any sign) at every z of z[0..n_z); out[iv * n_z + iz]. Before the
 * start (and at redshifts above it) the solution is the real one. */
jg_status jg_stream_solve(const jg_stream_model *sm, jg_perturb_workspace *w, double k,
                          const double *v_rel, int n_v, const double *z, int n_z,
                          jg_stream_state *out, jg_error *err);

/* The averaged powers of one wavenumber at one redshift. */
typedef struct jg_stream_power {
  double b_power;       /* <|delta_b|^2> / |delta_b(v = 0)|^2, Maxwellian and direction */
  double c_power;       /* the same for the dark matter */
  double b_power_rms;   /* direction average at |v_bc| = v_rms */
  double b_power_patch; /* direction average at |v_bc| = patch_multiple v_rms */
  double b_over_c;      /* sqrt(<|delta_b|^2> / <|delta_c|^2>) (Maxwellian and direction) */
} jg_stream_power;

/* Every k of k[0..n_k) at every z of z[0..n_z); out[ik * n_z + iz]. With
 * `directions` 0 only the Maxwellian averages are computed (b_power_rms and
 * b_power_patch are left 1). Inactive flow: every power 1, b_over_c the
 * ordinary ratio. */
jg_status jg_stream_powers(const jg_stream_model *sm, jg_perturb_workspace *w, const double *k,
                           int n_k, const double *z, int n_z, int directions,
                           jg_stream_power *out, jg_error *err);

/* The k^2 coefficient that streaming adds to the averaged baryon power at
 * k -> 0, exactly (the first and second derivatives of the solution with
 * respect to k, integrated alongside the k = 0 solution):
 *   <|delta_b|^2>(k) / |delta_b(k -> 0)|^2 = 1 + k^2 (2 dlnb_dk2 + stream_k2[iz]) + O(k^4),
 * dlnb_dk2 that of jg_perturb_limit; stream_k2 <= 0 is a loss, Mpc^2. */
jg_status jg_stream_limit(const jg_stream_model *sm, jg_perturb_workspace *w, const double *z,
                          int n_z, double *stream_k2, jg_error *err);

#ifdef __cplusplus
}
#endif
#endif
