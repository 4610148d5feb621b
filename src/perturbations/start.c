/*
 * Where a model's perturbations start: the start table of another code's
 * state attached to the model (read through its column map and checked
 * against the sound-speed model), the header line saying where the run
 * started, and the state vector of a mode at z_initial.
 */
#include "jeansgrow/perturb.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "jeansgrow/background.h"
#include "jeansgrow/constants.h"
#include "perturb_internal.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* perturbations.initial_table, read with its layout and checked against
 * the sound-speed model; NULL with err filled on failure. */
static jg_perturb_start_table *read_start_table(const jg_perturb_settings *s,
                                                const jg_perturb_table_frame *frame,
                                                jg_error *err) {
  const char *path = s->initial_table;
  jg_error table_err; /* the caller's record may be NULL */
  jg_error_clear(&table_err);
  jg_perturb_start_table *t = jg_perturb_start_table_read_layout(path, s, frame, &table_err);
  if (!t) {
    /* Name the key: the file's own message does not say where it came from. */
    if (strncmp(table_err.message, "perturbations.", 14) != 0)
      JG_FAIL(err, table_err.status, "perturbations.initial_table: %s", table_err.message);
    else
      JG_FAIL(err, table_err.status, "%s", table_err.message);
    return NULL;
  }
  if (s->sound_speed != JG_SOUND_SPEED_FLUCTUATING && jg_perturb_start_table_has_temperature(t)) {
    static const char *const fixed[] = {"fluctuating", "isothermal", "adiabatic",
                                        "effective_gamma"};
    JG_FAIL(err, JG_ECONFIG,
            "perturbations.initial_table: %s has a gas-temperature column, but "
            "perturbations.sound_speed = \"%s\" fixes delta_T (drop the column or use "
            "\"fluctuating\")",
            path, fixed[s->sound_speed]);
    jg_perturb_start_table_free(t);
    return NULL;
  }
  return t;
}

jg_status jg_perturb_check_start_table(const jg_perturb_settings *s, jg_error *err) {
  if (!s) return JG_FAIL(err, JG_EINVAL, "jg_perturb_check_start_table: NULL settings");
  if (!s->initial_table[0]) return JG_OK;
  /* Only the reading is checked: any frame converts. */
  const jg_perturb_table_frame frame = {1.0, 1.0, 1.0};
  jg_error local;
  jg_perturb_start_table *t = read_start_table(s, &frame, err ? err : &local);
  if (!t) return err ? err->status : local.status;
  jg_perturb_start_table_free(t);
  return JG_OK;
}

/* Attach perturbations.initial_table to the model and take the k -> 0 start
 * from its first row. */
jg_status jg__pt_attach_start_table(jg_perturb_model *m, jg_error *err) {
  const char *path = m->settings.initial_table;
  if (m->start_given)
    return JG_FAIL(err, JG_EINVAL,
                   "perturbations: give either a uniform start or perturbations.initial_table "
                   "(%s), not both",
                   path);
  /* h and aH/c (1/Mpc) come from the real history; a custom medium has
   * neither, so h/Mpc and theta columns give a non-finite start there and
   * are refused. */
  jg_perturb_table_frame frame = {NAN, NAN, m->growth_rate_init};
  if (m->th) {
    const jg_background *bg = jg_thermal_background(m->th);
    const double a_i = exp(m->x_init);
    frame.hubble_h = bg->cosmology.hubble_h;
    frame.conformal_hubble = a_i * jg_background_hubble(bg, a_i) * JG_MPC / JG_C_LIGHT;
  } else if (m->settings.initial_k_unit == JG_TABLE_K_PER_MPC) {
    frame.hubble_h = 1.0;
  }
  jg_error local;
  m->start_table = read_start_table(&m->settings, &frame, err ? err : &local);
  if (!m->start_table) return err ? err->status : local.status;
  double t_lo, t_hi;
  jg_perturb_start_table_range(m->start_table, &t_lo, &t_hi);
  if (t_hi < m->k_lo || t_lo > m->k_hi)
    return JG_FAIL(err, JG_ECONFIG,
                   "perturbations.initial_table: %s covers k from %g to %g /Mpc, none of the "
                   "accepted %g to %g /Mpc",
                   path, t_lo, t_hi, m->k_lo, m->k_hi);
  return jg_perturb_start_table_at(m->start_table, t_lo, &m->start, err);
}

void jg_perturb_model_describe_start(const jg_perturb_model *m, char *buf, size_t size) {
  if (m->start_table) {
    snprintf(buf, size,
             "start: from the table %s (FNV-1a checksum %016llx) at z = %g, dark matter %s",
             jg_perturb_start_table_path(m->start_table),
             jg_perturb_start_table_checksum(m->start_table), m->settings.z_initial,
             !jg_perturb_start_table_has_cdm_rate(m->start_table)
                 ? "with the Meszaros growing mode's rate"
             : m->settings.initial_second_table[0] ? "and baryon rates from the second snapshot"
                                                   : "with the table's velocity");
  } else if (m->start_given) {
    snprintf(buf, size,
             "start: at z = %g, dark matter on the Meszaros growing mode, baryons as the "
             "calling program gave them",
             m->settings.z_initial);
  } else {
    snprintf(buf, size,
             "start: at z = %g, dark matter on the Meszaros growing mode, baryons at rest "
             "and empty",
             m->settings.z_initial);
  }
}

void jg__pt_initial_mode(const jg_perturb_model *m, const jg_perturb_start *start, double *y) {
  const double cdm_rate = start->has_cdm_rate ? start->cdm_rate : m->growth_rate_init;
  y[M_C] = 1.0;
  y[M_CP] = cdm_rate;
  y[M_B] = start->density_ratio;
  y[M_BP] = start->velocity_ratio * cdm_rate;
  if (m->fluctuating) y[M_T] = start->temperature_ratio;
  /* delta_xe starts in its quasi-equilibrium with the other components
   * (d delta_xe / d ln a = 0). At our own start it would relax there within
   * a tiny fraction of an e-fold anyway (q_r ~ 1e20 at z = 1e4); a start
   * from another code's state near z = 1000, where q_r is far smaller,
   * would otherwise carry the transient of a zero start into the results. */
  if (m->ionisation) {
    jg_medium_coefficients c;
    y[M_X] = 0.0;
    if (m->medium.eval(m->medium.ctx, m->x_init, &c) == 0 && c.ionisation_relaxation > 0.0)
      y[M_X] = (c.ionisation_density * y[M_B] + c.ionisation_temperature * y[M_T] +
                c.ionisation_expansion * y[M_BP]) /
               c.ionisation_relaxation;
  }
}

