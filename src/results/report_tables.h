/* Private: the column tables of the reports, shared with the scan's
 * evaluators so that a scan and `jeansgrow scales` use the same names.
 * Each is indexed by jg_output_units: the names and conventions in 1/Mpc
 * and M_sun, or in h/Mpc and M_sun/h. */
#ifndef JEANSGROW_SRC_REPORT_TABLES_H
#define JEANSGROW_SRC_REPORT_TABLES_H

#include "jeansgrow/params.h"

#define JG__REPORT_SCALES_COLUMNS 22
#define JG__REPORT_SCALES_CONVENTIONS 9 /* lines, the terminating NULL included */
extern const char *const jg__report_scales_columns[][JG__REPORT_SCALES_COLUMNS];
extern const char *const jg__report_scales_conventions[][JG__REPORT_SCALES_CONVENTIONS];

#endif
