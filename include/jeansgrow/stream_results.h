/*
 * The streaming velocity's results (src/PHYSICS.md §7.8; the systems in
 * streaming.h): the averaged powers on the growth grid and, beside the
 * scales of scales.h, the streamed filtering and half-suppression scales:
 *
 *   k_F_stream: <P_b>(k) / P_b(k -> 0) = 1 - 2 k^2 / k_F_stream^2 + O(k^4)
 *               (exact k^2 coefficient; k_F_stream = k_F without streaming),
 *               M_F_stream = (4 pi/3) rho_m0 (2 pi / k_F_stream)^3 (as M_F);
 *   k_half_stream: the first k where sqrt(<P_b>/<P_c>) falls to half its
 *               k -> 0 value, M_half_stream = (4 pi/3) rho_m0 (pi/k)^3 (as M_half).
 *
 * Both functions build the streaming model from the settings themselves; with
 * rms_velocity_kms = 0 they do nothing (the grid keeps stream = NULL, the
 * scales keep the values jg_scales_compute gave them: the unstreamed ones).
 */
#ifndef JEANSGROW_STREAM_RESULTS_H
#define JEANSGROW_STREAM_RESULTS_H

#include "jeansgrow/growth.h"
#include "jeansgrow/scales.h"
#include "jeansgrow/streaming.h"

#ifdef __cplusplus
extern "C" {
#endif

/* g->stream[ik * n_z + iz]: the averages at every k and z of the grid. */
jg_status jg_growth_grid_add_streaming(jg_growth_grid *g, const jg_perturb_model *m,
                                       jg_perturb_workspace *w, const jg_streaming_settings *s,
                                       jg_error *err);

/* The streamed scales of out[0..n_z) (filled by jg_scales_compute for the
 * same z[0..n_z)). */
jg_status jg_scales_add_streaming(const jg_perturb_model *m, jg_perturb_workspace *w,
                                  const jg_streaming_settings *s, const double *z, int n_z,
                                  jg_scales_point *out, jg_error *err);

#ifdef __cplusplus
}
#endif
#endif
