/*
 * Figures: gnuplot draws them from the tables, with the scripts of plots/
 * compiled into the program (the shared style first, then the figure's
 * script, on gnuplot's standard input). Each figure is drawn under a hidden
 * name (.jgfig-PID-NAME) beside its table and renamed into place when
 * gnuplot succeeded, so a figure is complete or absent, never half drawn.
 */
#include <dirent.h>
#include <errno.h>
#include <spawn.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "cli.h"
#include "figures.h"

extern char **environ;

#define GNUPLOT "gnuplot"
#define TEMP_MARK ".jgfig-"
#define PATH_SIZE 4352

static const char *script_text(const char *name) {
  for (int i = 0; i < cli_figure_script_count; i++)
    if (strcmp(cli_figure_scripts[i].name, name) == 0) return cli_figure_scripts[i].text;
  return NULL;
}

int cli_figures_available(void) {
  const char *path = getenv("PATH");
  if (!path) return 0;
  char candidate[PATH_SIZE];
  for (const char *p = path;; p++) {
    const char *end = strchr(p, ':');
    size_t n = end ? (size_t)(end - p) : strlen(p);
    if (n > 0 && n + sizeof GNUPLOT + 1 < sizeof candidate) {
      snprintf(candidate, sizeof candidate, "%.*s/" GNUPLOT, (int)n, p);
      if (access(candidate, X_OK) == 0) return 1;
    }
    if (!end) return 0;
    p = end;
  }
}

void cli_figures_print_hint(FILE *f, const char *what) {
  fprintf(f, "  figures: none (gnuplot is not installed; on Debian: apt-get install gnuplot-nox, "
             "then jeansgrow plot %s)\n", what);
}

/* `name='value'` for gnuplot's -e, a quote in the value doubled as gnuplot
 * reads it back. */
static void append_variable(char *buf, size_t size, const char *name, const char *value) {
  size_t used = strlen(buf);
  used += (size_t)snprintf(buf + used, used < size ? size - used : 0, "%s='", name);
  for (const char *c = value; *c && used + 4 < size; c++) {
    if (*c == '\'') buf[used++] = '\'';
    buf[used++] = *c;
  }
  if (used + 4 < size) {
    memcpy(buf + used, "'; ", 4);
  } else {
    buf[size - 1] = '\0';
  }
}

/* One gnuplot at work: its process (0 if it could not start) and the
 * script file it reads. */
typedef struct gnuplot_run {
  pid_t pid;
  char path[PATH_SIZE];
} gnuplot_run;

/* Start gnuplot with `variables` set on the style followed by `script`
 * (gnuplot reads multi-line blocks from a file, not from a pipe). */
static void start_gnuplot(const char *variables, const char *script, gnuplot_run *g) {
  g->pid = 0;
  const char *tmpdir = getenv("TMPDIR");
  snprintf(g->path, sizeof g->path, "%s/jeansgrow-figure-XXXXXX",
           tmpdir && tmpdir[0] ? tmpdir : "/tmp");
  int fd = mkstemp(g->path);
  if (fd < 0) {
    g->path[0] = '\0';
    return;
  }
  FILE *f = fdopen(fd, "w");
  int ok = f && fputs(script_text("style"), f) >= 0 && fputs("\n", f) >= 0 &&
           fputs(script, f) >= 0;
  if (f ? fclose(f) != 0 : close(fd) != 0) ok = 0;
  pid_t pid;
  /* posix_spawn takes char *const[]; it does not write to the strings. */
  char program[] = GNUPLOT, set[] = "-e";
  char *const argv[] = {program, set, (char *)(uintptr_t)variables, g->path, NULL};
  if (ok && posix_spawnp(&pid, GNUPLOT, NULL, NULL, argv, environ) == 0) g->pid = pid;
}

/* Its exit status (-1 if it could not start or did not exit normally),
 * once `how` is known; its script file removed. */
static int gnuplot_status(gnuplot_run *g, int started, int how) {
  if (g->path[0]) unlink(g->path);
  g->path[0] = '\0';
  return started && WIFEXITED(how) ? WEXITSTATUS(how) : -1;
}

/* Wait for whichever of run[0 .. n) that is still running ends first
 * (status[i] < -1 marks them); returns its index, or -1 if none runs. Each
 * of our own processes is asked in turn, a few milliseconds apart: waiting
 * for any child at all could take the status of one the program did not
 * start here (an MPI library's, say). */
static int finish_one(gnuplot_run *run, int *status, int n) {
  for (;;) {
    int running = 0;
    for (int i = 0; i < n; i++) {
      if (status[i] >= -1) continue;
      running++;
      int how;
      const pid_t pid = waitpid(run[i].pid, &how, WNOHANG);
      if (pid == run[i].pid) {
        status[i] = gnuplot_status(&run[i], 1, how);
        return i;
      }
      if (pid < 0 && errno != EINTR) { /* not ours to wait for any more */
        status[i] = gnuplot_status(&run[i], 0, 0);
        return i;
      }
    }
    if (!running) return -1;
    const struct timespec pause = {0, 2000000};
    nanosleep(&pause, NULL);
  }
}

/* Rename (ok) or remove the files gnuplot wrote under `prefix` in `dir`. */
static int settle_outputs(const char *dir, const char *prefix, int ok) {
  DIR *d = opendir(dir);
  if (!d) return 0;
  int renamed = 0;
  struct dirent *e;
  const size_t n = strlen(prefix);
  char from[PATH_SIZE], to[PATH_SIZE];
  while ((e = readdir(d)) != NULL) {
    if (strncmp(e->d_name, prefix, n) != 0) continue;
    snprintf(from, sizeof from, "%s/%s", dir, e->d_name);
    snprintf(to, sizeof to, "%s/%s", dir, e->d_name + n);
    if (ok && rename(from, to) == 0) renamed++;
    else unlink(from);
  }
  closedir(d);
  return renamed;
}

/* A figure to draw: `script` from `table` into DIR/OUT_NAME.png and .svg
 * (a scan script writes DIR/OUT_NAME_*.png and .svg); `more` holds further
 * variables (or is empty). */
typedef struct figure_request {
  const char *script;
  char table[PATH_SIZE], out_name[PATH_SIZE + 32], more[PATH_SIZE + 32];
  int shared; /* one of several gnuplots sharing the script's pictures (`part` of `parts`):
                 it may have none to draw */
} figure_request;
#define MAX_FIGURES 8

/* Draw the figures into `dir`, as many gnuplots at once as this process
 * has usable cores (each is one process on one core), a new one as soon as
 * any ends, each under its own hidden prefix; complaints in the requests'
 * order. Returns how many figures were drawn (each a .png and an .svg), or
 * -1 if any request could not be. */
static int draw(const figure_request *req, int n, const char *dir) {
  const int cores = cli_usable_cores();
  const int at_once = cores > 1 ? cores : 1;
  gnuplot_run run[MAX_FIGURES];
  char prefix[MAX_FIGURES][64];
  int status[MAX_FIGURES], running = 0;
  for (int i = 0; i < n; i++) {
    if (running >= at_once && finish_one(run, status, i) >= 0) running--;
    snprintf(prefix[i], sizeof prefix[i], TEMP_MARK "%ld-%d-", (long)getpid(), i);
    const char *text = script_text(req[i].script);
    char out[PATH_SIZE], variables[3 * PATH_SIZE];
    snprintf(out, sizeof out, "%s/%s%s", dir, prefix[i], req[i].out_name);
    variables[0] = '\0';
    append_variable(variables, sizeof variables, "table", req[i].table);
    append_variable(variables, sizeof variables, "out", out);
    strncat(variables, req[i].more, sizeof variables - strlen(variables) - 1);
    run[i].pid = 0;
    run[i].path[0] = '\0';
    if (text) start_gnuplot(variables, text, &run[i]);
    if (run[i].pid > 0) {
      status[i] = -2; /* running */
      running++;
    } else {
      status[i] = gnuplot_status(&run[i], 0, 0);
    }
  }
  while (finish_one(run, status, n) >= 0) {
  }
  int files = 0, failed = 0;
  for (int i = 0; i < n; i++) {
    const int settled = settle_outputs(dir, prefix[i], status[i] == 0);
    files += settled;
    if (status[i] == 0 && (settled > 0 || req[i].shared)) continue;
    failed = 1;
    if (status[i] < 0)
      fprintf(stderr, "jeansgrow: figures: cannot run " GNUPLOT " for %s\n", req[i].table);
    else
      fprintf(stderr,
              "jeansgrow: figures: " GNUPLOT " could not draw %s from %s (exit status %d)\n",
              req[i].out_name, req[i].table, status[i]);
  }
  return failed ? -1 : files / 2;
}

static int readable(const char *path) { return access(path, R_OK) == 0; }

int cli_figures_for_folder(const char *dir) {
  static const struct {
    const char *script, *table;
  } figures[] = {/* the dearest first (growth's two ~0.2 s of gnuplot each, the history's
                  * ~0.1 s, the scales' two ~0.08 s), so that the cores finish together */
                 {"suppression", "growth.txt"}, {"rates", "growth.txt"},
                 {"history", "history.txt"},    {"masses", "scales.txt"},
                 {"scales", "scales.txt"}};
  figure_request req[MAX_FIGURES];
  int n = 0;
  char scales[PATH_SIZE];
  snprintf(scales, sizeof scales, "%s/scales.txt", dir);
  for (size_t i = 0; i < sizeof figures / sizeof figures[0]; i++) {
    figure_request *r = &req[n];
    r->shared = 0;
    snprintf(r->table, sizeof r->table, "%s/%s", dir, figures[i].table);
    if (!readable(r->table)) continue;
    r->script = figures[i].script;
    snprintf(r->out_name, sizeof r->out_name, "%s", figures[i].script);
    r->more[0] = '\0';
    if (strcmp(figures[i].table, "growth.txt") == 0)
      append_variable(r->more, sizeof r->more, "scales", scales);
    n++;
  }
  return n ? draw(req, n, dir) : 0;
}

/* The title of a table, from its first line "# jeansgrow VERSION: TITLE". */
static int table_title(const char *path, char *title, size_t size) {
  FILE *f = fopen(path, "r");
  if (!f) return 0;
  char line[512];
  const int got = fgets(line, sizeof line, f) != NULL;
  fclose(f);
  const char *colon = got && strncmp(line, "# jeansgrow ", 12) == 0 ? strchr(line, ':') : NULL;
  if (!colon) return 0;
  snprintf(title, size, "%s", colon + 2);
  title[strcspn(title, "\n")] = '\0';
  return 1;
}

int cli_figures_for_table(const char *table) {
  char title[512];
  if (!table_title(table, title, sizeof title)) {
    fprintf(stderr, "jeansgrow plot: %s is not a jeansgrow table\n", table);
    return -1;
  }
  /* Beside the table, named after it. */
  char dir[PATH_SIZE], stem[PATH_SIZE];
  const char *slash = strrchr(table, '/');
  snprintf(dir, sizeof dir, "%.*s", slash ? (int)(slash - table) : 1, slash ? table : ".");
  if (slash == table) snprintf(dir, sizeof dir, "/");
  snprintf(stem, sizeof stem, "%s", slash ? slash + 1 : table);
  char *dot = strrchr(stem, '.');
  if (dot && strcmp(dot, ".txt") == 0) *dot = '\0';
  static const struct {
    const char *title_start, *scripts[2];
  } kinds[] = {{"ionisation and gas-temperature history", {"history", NULL}},
               {"Jeans, filtering and half-suppression scales", {"masses", "scales"}},
               {"linear growth by wavenumber", {"suppression", "rates"}},
               {"parameter scan", {"scan", NULL}}};
  for (size_t k = 0; k < sizeof kinds / sizeof kinds[0]; k++) {
    if (strncmp(title, kinds[k].title_start, strlen(kinds[k].title_start)) != 0) continue;
    /* A scan's pictures (up to 8: a map per quantity and format) come from
     * one script, named after the table alone: one gnuplot per usable core
     * shares them out (`part` of `parts`). */
    const int scan = strcmp(kinds[k].scripts[0], "scan") == 0, cores = cli_usable_cores();
    const int parts = !scan || cores < 2 ? 1 : cores > MAX_FIGURES ? MAX_FIGURES : cores;
    figure_request req[MAX_FIGURES];
    int n = 0;
    for (int s = 0; s < 2 && kinds[k].scripts[s]; s++)
      for (int part = 0; part < parts; part++, n++) {
        req[n].script = kinds[k].scripts[s];
        req[n].shared = parts > 1;
        snprintf(req[n].table, sizeof req[n].table, "%s", table);
        if (scan)
          snprintf(req[n].out_name, sizeof req[n].out_name, "%s", stem);
        else
          snprintf(req[n].out_name, sizeof req[n].out_name, "%s_%s", stem, kinds[k].scripts[s]);
        req[n].more[0] = '\0';
        if (parts > 1)
          snprintf(req[n].more, sizeof req[n].more, "part=%d; parts=%d; ", part, parts);
      }
    return draw(req, n, dir);
  }
  return 0;
}

int cmd_plot(const cli_command *cmd, int argc, char **argv) {
  cli_options o;
  int rc = cli_parse_options(cmd, argc, argv, &o);
  if (rc >= 0) return rc;
  if (o.n_overrides > 0) {
    fprintf(stderr, "jeansgrow plot: --set has no meaning here (the tables hold their parameters)\n");
    return EXIT_BAD_INPUT;
  }
  struct stat sb;
  if (stat(o.param_path, &sb) != 0) {
    fprintf(stderr, "jeansgrow plot: %s: %s\n", o.param_path, strerror(errno));
    return EXIT_BAD_INPUT;
  }
  if (!cli_figures_available()) {
    fprintf(stderr, "jeansgrow plot: gnuplot is not installed (on Debian: apt-get install "
                    "gnuplot-nox)\n");
    return EXIT_RUN_FAILED;
  }
  const int drawn = S_ISDIR(sb.st_mode) ? cli_figures_for_folder(o.param_path)
                                        : cli_figures_for_table(o.param_path);
  if (drawn < 0) return EXIT_RUN_FAILED;
  if (drawn == 0) {
    fprintf(stderr, "jeansgrow plot: %s holds no table that has a figure\n", o.param_path);
    return EXIT_BAD_INPUT;
  }
  return EXIT_OK;
}
