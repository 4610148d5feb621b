/* Private: the column tables of the reports, shared with the scan's
 * evaluators so that a scan and `jeansgrow scales` use the same names.
 * Each is indexed by jg_output_units: the names and conventions in 1/Mpc
 * and M_sun, or in h/Mpc and M_sun/h. */
#ifndef JEANSGROW_SRC_REPORT_TABLES_H
#define JEANSGROW_SRC_REPORT_TABLES_H

#include "jeansgrow/growth.h"
#include "jeansgrow/params.h"
#include "jeansgrow/thermal.h"

#define JG__REPORT_SCALES_COLUMNS 23
#define JG__REPORT_SCALES_CONVENTIONS 10 /* lines, the terminating NULL included */
extern const char *const jg__report_scales_columns[][JG__REPORT_SCALES_COLUMNS];
extern const char *const jg__report_scales_conventions[][JG__REPORT_SCALES_CONVENTIONS];

/* The growth table's columns: z, k, ..., rate_m, flags, D_ref, rate_ref
 * (the last two left out where that universe has no reference growth). */
#define JG__REPORT_GROWTH_COLUMNS 15
#define JG__REPORT_GROWTH_SCAN_COLUMNS 12 /* k to flags: the scan's per-row columns */
extern const char *const jg__report_growth_columns[][JG__REPORT_GROWTH_COLUMNS];
#define JG__REPORT_SCAN_GROWTH_CONVENTIONS 9 /* the scan's epochs line, the growth lines, NULL */
extern const char *const jg__report_scan_growth_conventions[][JG__REPORT_SCAN_GROWTH_CONVENTIONS];
/* Row (ik, iz) of the growth table, all JG__REPORT_GROWTH_COLUMNS values, in
 * `units` with the cosmology's h. */
void jg__report_growth_row(const jg_thermal *th, const jg_growth_grid *g, int ik, int iz,
                           jg_output_units units, double h, double *row);

/* The flags column of the scales and growth tables (validity.h). */
#define JG__REPORT_FLAGS_CONVENTION                                                          \
  "flags: 0 inside the stated validity, else the sum of 1 = the gas has barely started "    \
  "(k -> 0 delta_b/delta_c < 0.1: filtering and half-suppression scales describe a "        \
  "perturbation not yet there), 2 = below the lowest redshift of the thermal model, 4 = "   \
  "wavelength within ten mean free paths of the atoms (the gas stops being a fluid)"

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
