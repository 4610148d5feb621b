/* Private, for the perturbations' coefficient tables: the thermal state and
 * the ionisation response in one pass, for a table that walks the stored
 * history node by node (thermal_query.c). */
#ifndef JEANSGROW_SRC_THERMAL_NODES_H
#define JEANSGROW_SRC_THERMAL_NODES_H

#include <gsl/gsl_interp.h>

#include "jeansgrow/thermal.h"

/* At ln a (z = expm1(-ln_a)): the state of jg_thermal_state_at but for
 * helium's ionisation fractions (left 0: the tables do not read them) and,
 * if response is not NULL, the response of jg_thermal_ionisation_response,
 * from one look-up of each stored spline (values and slopes together).
 * cursor: NULL, or a gsl_interp_accel zeroed before the first of a run of
 * calls at increasing ln a: the five look-ups of one call, and the calls
 * that fall in the interval of the last, then find it without a search. */
void jg__thermal_state_and_response(const jg_thermal *th, double ln_a, gsl_interp_accel *cursor,
                                    jg_thermal_state *s, jg_ionisation_response *response);

#endif
