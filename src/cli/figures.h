/* Figures of the program's tables, drawn by gnuplot from the scripts of
 * plots/ (compiled into the program, see cmake/embed_scripts.cmake). */
#ifndef JEANSGROW_CLI_FIGURES_H
#define JEANSGROW_CLI_FIGURES_H

#include <stdio.h>

typedef struct cli_figure_script {
  const char *name; /* the script's file name without .gp */
  const char *text;
} cli_figure_script;
extern const cli_figure_script cli_figure_scripts[];
extern const int cli_figure_script_count;

/* 1 when a gnuplot program is on the PATH. */
int cli_figures_available(void);

/* Draw the figures of every table of `dir` (history.txt, scales.txt,
 * growth.txt) that is there, as DIR/NAME.png and DIR/NAME.svg; each file
 * appears complete or not at all. Prints one line per failure on stderr;
 * returns the number of figures drawn, or -1 after a failure. */
int cli_figures_for_folder(const char *dir);

/* Draw the figures of one table file (a table of history, scales, growth
 * or scan, recognised by its header) beside it, as TABLE_NAME.png and
 * .svg with TABLE without its .txt. Returns as above; 0 when the table is
 * of a kind that has no figure. */
int cli_figures_for_table(const char *table);

/* The line that says how to get the figures without gnuplot. */
void cli_figures_print_hint(FILE *f, const char *what);

#endif
