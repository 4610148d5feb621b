/* Private: the column tables of the reports, shared with the scan's
 * evaluators so that a scan and `jeansgrow scales` use the same names. */
#ifndef JEANSGROW_SRC_REPORT_TABLES_H
#define JEANSGROW_SRC_REPORT_TABLES_H

#define JG__REPORT_SCALES_COLUMNS 22
extern const char *const jg__report_scales_columns[JG__REPORT_SCALES_COLUMNS];
extern const char *const jg__report_scales_conventions[];

#endif
