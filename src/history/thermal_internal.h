/* Private: the stored history, shared by the file that builds it
 * (thermal.c) and the one that reads it back (thermal_query.c). */
#ifndef JEANSGROW_SRC_THERMAL_INTERNAL_H
#define JEANSGROW_SRC_THERMAL_INTERNAL_H

#include <gsl/gsl_spline.h>

#include "jeansgrow/thermal.h"
#include "redshift_table.h"
#include "reionisation.h"

struct jg_thermal {
  const jg_background *bg;
  jg_thermal_settings settings;
  int n;                /* grid nodes */
  double ln_a_start;    /* first node; the last is ln a = 0 */
  double *ln_a;         /* node positions */
  gsl_spline *ln_xe, *ln_xp, *ln_Tgas;
  gsl_spline *tau;      /* optical depth from today back to the node */
  gsl_spline *tau_drag; /* drag depth, same */
  double tau_reion;     /* optical depth of the electrons reionisation adds */
  double drag_reion;    /* and their drag depth */
  double z_onset;       /* reionisation acts below this redshift (0: no model) */
  jg__reionisation reion;
  jg__z_table heating;    /* thermal.heating_table (n = 0: none) */
  jg__z_table ionisation; /* thermal.ionisation_table (n = 0: none) */
};

#endif
