/* Private: the column tables of the reports, shared with the scan's
 * evaluators so that a scan and `jeansgrow scales` use the same names.
 * Each is indexed by jg_output_units: the names and conventions in 1/Mpc
 * and M_sun, or in h/Mpc and M_sun/h. */
#ifndef JEANSGROW_SRC_REPORT_TABLES_H
#define JEANSGROW_SRC_REPORT_TABLES_H

#include "jeansgrow/params.h"

#define JG__REPORT_SCALES_COLUMNS 26
#define JG__REPORT_SCALES_CONVENTIONS 10 /* lines, the terminating NULL included */
extern const char *const jg__report_scales_columns[][JG__REPORT_SCALES_COLUMNS];
extern const char *const jg__report_scales_conventions[][JG__REPORT_SCALES_CONVENTIONS];

/* The scan's per-point epoch columns. A scan table holds numbers only, so an
 * epoch a point's universe does not have (jg_epochs.absent) is written as
 * JG__REPORT_SCAN_NO_EPOCH: z = -1 is the infinite future, never an epoch. */
#define JG__REPORT_SCAN_NO_EPOCH (-1.0)
#define JG__REPORT_SCAN_EPOCHS_CONVENTION                                                    \
  "z_star: Thomson optical depth tau = 1; z_drag: baryon drag depth = 1; "                 \
  "z_gas_decoupling: T_gas / T_rad = 0.9; each is -1 where the point's universe does not " \
  "have that epoch (jeansgrow epochs says why)"
/* The scales conventions after that line, for the scan's scales evaluator. */
extern const char *const jg__report_scan_scales_conventions[][JG__REPORT_SCALES_CONVENTIONS + 1];

#endif
