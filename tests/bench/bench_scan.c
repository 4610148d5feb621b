/*
 * Benchmark (not a test): `jeansgrow scan` as a user runs it.
 *
 *   bench_scan [POINTS] [MEMORY_MAX_POINTS] [REPEATS]
 *
 * 1. Throughput in cosmologies (grid points) per second, 4 output redshifts,
 *    default thermal settings, on 1 and 2 threads and (when built with MPI)
 *    on 1 and 2 MPI ranks of one thread each; the speed-ups 1 -> 2.
 *    Wall time of the whole program, start-up and the up-front check of
 *    every grid point included; the best of REPEATS runs (default 3), as
 *    other work on the machine only ever adds time.
 * 2. Peak memory (ru_maxrss of the program and its children, from wait4)
 *    for 100, 1000 and 10000 points (up to MEMORY_MAX_POINTS), with a
 *    coarse history (thermal.grid_points = 1000) to keep the run short:
 *    the scan's own memory does not depend on it.
 * Each run is checked to exit 0 and write its table; no time is asserted.
 *
 * The "others" column is the machine's CPU time not spent by the run (from
 * /proc/stat, less the run's own rusage), in cores, averaged over the run:
 * on a shared machine another job on one of 2 cores halves a 2-rank run
 * while a 1-rank run goes on untouched, so a speed-up measured beside
 * other work says little about the program. Bound MPI ranks feel it most:
 * a rank cannot move away from a busy core.
 */
#include <errno.h>
#include <fcntl.h>
#include <spawn.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

extern char **environ;

#define REFERENCE JG_SOURCE_DIR "/params/reference.cfg"

static double now_seconds(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

typedef struct measure {
  double seconds;     /* wall time of the program */
  double scan_rate;   /* points/s from its summary line: the computing phase alone */
  long max_rss_kib;
  double others;      /* cores kept busy by other processes meanwhile; < 0: unknown */
} measure;

/* CPU seconds the whole machine has been busy (all cores; idle and I/O wait
 * left out; steal counts, as the host took the time), or -1 without
 * /proc/stat. */
static double machine_busy_seconds(void) {
  FILE *f = fopen("/proc/stat", "r");
  if (!f) return -1.0;
  unsigned long long v[8] = {0};
  int n = fscanf(f, "cpu %llu %llu %llu %llu %llu %llu %llu %llu", &v[0], &v[1], &v[2], &v[3],
                 &v[4], &v[5], &v[6], &v[7]);
  fclose(f);
  long hz = sysconf(_SC_CLK_TCK);
  if (n != 8 || hz <= 0) return -1.0;
  /* user nice system idle iowait irq softirq steal (guest time is in user) */
  return (double)(v[0] + v[1] + v[2] + v[5] + v[6] + v[7]) / (double)hz;
}

static char stderr_path[160];

/* Run args (NULL-terminated), stdout/stderr to /dev/null; 0 on success. */
static int run(const char *const *list, measure *m) {
  /* posix_spawn takes char *const argv[]: give it copies it may not write. */
  char *args[32];
  int n = 0;
  for (; list[n] && n < 31; n++) args[n] = strdup(list[n]);
  args[n] = NULL;
  posix_spawn_file_actions_t fa;
  posix_spawn_file_actions_init(&fa);
  posix_spawn_file_actions_addopen(&fa, 0, "/dev/null", O_RDONLY, 0);
  posix_spawn_file_actions_addopen(&fa, 1, "/dev/null", O_WRONLY, 0);
  posix_spawn_file_actions_addopen(&fa, 2, stderr_path, O_WRONLY | O_CREAT | O_TRUNC, 0600);
  pid_t pid;
  double busy0 = machine_busy_seconds();
  double t0 = now_seconds();
  int rc = posix_spawn(&pid, args[0], &fa, NULL, args, environ);
  posix_spawn_file_actions_destroy(&fa);
  for (int i = 0; i < n; i++) free(args[i]);
  if (rc != 0) {
    fprintf(stderr, "bench_scan: cannot start %s: %s\n", args[0], strerror(rc));
    return 1;
  }
  int status;
  struct rusage ru;
  pid_t w;
  do w = wait4(pid, &status, 0, &ru);
  while (w < 0 && errno == EINTR);
  m->seconds = now_seconds() - t0;
  double busy1 = machine_busy_seconds();
  m->max_rss_kib = ru.ru_maxrss;
  /* ru covers the program and the children it waited for (mpirun's ranks). */
  double own = (double)ru.ru_utime.tv_sec + 1e-6 * (double)ru.ru_utime.tv_usec +
               (double)ru.ru_stime.tv_sec + 1e-6 * (double)ru.ru_stime.tv_usec;
  m->others = busy0 >= 0 && busy1 >= 0 && m->seconds > 0
                  ? (busy1 - busy0 - own) / m->seconds : -1.0;
  /* /proc/stat counts in ticks, rusage finer: a little below zero is zero. */
  if (m->others < 0 && m->others > -0.1) m->others = 0.0;
  if (w != pid || !WIFEXITED(status) || WEXITSTATUS(status) != 0) {
    fprintf(stderr, "bench_scan: %s failed (status %d)\n", list[0], status);
    return 1;
  }
  /* The summary line ends "..., S s, R points/s on ...". */
  m->scan_rate = 0.0;
  FILE *f = fopen(stderr_path, "r");
  char line[1024];
  while (f && fgets(line, sizeof line, f)) {
    const char *at = strstr(line, " points/s on ");
    if (!at) continue;
    while (at > line && at[-1] != ' ') at--;
    m->scan_rate = strtod(at, NULL);
  }
  if (f) fclose(f);
  return 0;
}

/* A scan of `points` cosmologies: baryon density x CDM density. */
static int scan(const char *mpiexec, int ranks, int threads, int points, const char *extra_set,
                const char *out, measure *m) {
  int n_cdm = points >= 100 ? 10 : 1;
  int n_b = points / n_cdm;
  char vary_b[128], vary_c[128], threads_text[16], ranks_text[16];
  snprintf(vary_b, sizeof vary_b, "cosmology.baryon_density_h2=0.015:0.035:%d", n_b);
  snprintf(vary_c, sizeof vary_c, "cosmology.cdm_density_h2=0.10:0.14:%d", n_cdm);
  if (n_cdm == 1) snprintf(vary_c, sizeof vary_c, "cosmology.cdm_density_h2=[0.12]");
  snprintf(threads_text, sizeof threads_text, "%d", threads);
  snprintf(ranks_text, sizeof ranks_text, "%d", ranks);
  const char *args[32];
  int n = 0;
#ifdef JG_MPI_NP_FLAG
  if (mpiexec) {
    args[n++] = mpiexec;
    args[n++] = JG_MPI_NP_FLAG;
    args[n++] = ranks_text;
  }
#endif
  const char *const tail[] = {JG_PROGRAM, "scan", REFERENCE, "--vary", vary_b, "--vary", vary_c,
                              "--set", "output.redshifts=[1000.0, 200.0, 50.0, 10.0]",
                              "--threads", threads_text, "-o", out};
  for (size_t i = 0; i < sizeof tail / sizeof tail[0]; i++) args[n++] = tail[i];
  if (extra_set) {
    args[n++] = "--set";
    args[n++] = extra_set;
  }
  args[n] = NULL;
  unlink(out);
  if (run(args, m) != 0) return 1;
  struct stat sb;
  if (stat(out, &sb) != 0) {
    fprintf(stderr, "bench_scan: no table written\n");
    return 1;
  }
  unlink(out);
  return 0;
}

/* The fastest of `repeats` runs. */
static int best_scan(int repeats, const char *mpiexec, int ranks, int threads, int points,
                     const char *out, measure *best) {
  best->seconds = 1e300;
  for (int r = 0; r < repeats; r++) {
    measure m;
    if (scan(mpiexec, ranks, threads, points, NULL, out, &m) != 0) return 1;
    if (m.seconds < best->seconds) *best = m;
  }
  return 0;
}

static double most_others = 0.0; /* the busiest "others" printed */

/* A row of the throughput table; the gains are against `base` (NULL: this
 * row is the base). */
static void print_row(const char *name, int points, const measure *m, const measure *base) {
  char wall_gain[16] = "1", scan_gain[16] = "1", others[16] = "?";
  if (base) {
    snprintf(wall_gain, sizeof wall_gain, "%.2f", base->seconds / m->seconds);
    snprintf(scan_gain, sizeof scan_gain, "%.2f", m->scan_rate / base->scan_rate);
  }
  if (m->others >= 0) snprintf(others, sizeof others, "%.2f", m->others);
  if (m->others > most_others) most_others = m->others;
  printf("%-14s %9.2f %9.2f %9.2f %10s %10s %7s\n", name, m->seconds, points / m->seconds,
         m->scan_rate, wall_gain, scan_gain, others);
  fflush(stdout);
}

int main(int argc, char **argv) {
  int points = argc > 1 ? atoi(argv[1]) : 40;
  int memory_max = argc > 2 ? atoi(argv[2]) : 10000;
  int repeats = argc > 3 ? atoi(argv[3]) : 3;
  if (repeats < 1) repeats = 1;
  if (points < 2) points = 2;
  char dir[] = "/tmp/jg_bench_scan_XXXXXX";
  if (!mkdtemp(dir)) return 1;
  char out[128];
  snprintf(out, sizeof out, "%s/scan.txt", dir);
  snprintf(stderr_path, sizeof stderr_path, "%s/stderr.txt", dir);
  const char *mpiexec = NULL;
#ifdef JG_MPIEXEC
  mpiexec = JG_MPIEXEC;
  /* Open MPI as root needs both variables; oversubscription for small CI
   * machines (DEVELOPERS.md, MPI). */
  setenv("OMPI_ALLOW_RUN_AS_ROOT", "1", 1);
  setenv("OMPI_ALLOW_RUN_AS_ROOT_CONFIRM", "1", 1);
  setenv("OMPI_MCA_rmaps_base_oversubscribe", "1", 1);
#endif
  int bad = 0;
  printf("jeansgrow scan throughput: %d cosmologies x 4 redshifts, default thermal settings, "
         "best of %d\n", points, repeats);
  printf("(wall: the whole program, launch included; scan: the computing phase, from the "
         "program's summary;\n others: cores kept busy by other processes during the run)\n");
  printf("%-14s %9s %9s %9s %10s %10s %7s\n", "run", "wall [s]", "wall /s", "scan /s",
         "wall gain", "scan gain", "others");
  measure t1, t2, m1, m2;
  bad |= best_scan(repeats, NULL, 1, 1, points, out, &t1);
  print_row("1 thread", points, &t1, NULL);
  bad |= best_scan(repeats, NULL, 1, 2, points, out, &t2);
  print_row("2 threads", points, &t2, &t1);
  if (mpiexec) {
    bad |= best_scan(repeats, mpiexec, 1, 1, points, out, &m1);
    print_row("mpirun -n 1", points, &m1, NULL);
    bad |= best_scan(repeats, mpiexec, 2, 1, points, out, &m2);
    print_row("mpirun -n 2", points, &m2, &m1);
  } else {
    printf("(built without MPI: no rank runs)\n");
  }
  if (most_others > 0.1)
    printf("(other processes kept up to %.2f cores busy during these runs: the speed-ups "
           "understate the program's; measure on an idle machine)\n", most_others);

  printf("\npeak memory (ru_maxrss), 2 threads, thermal.grid_points = 1000, 4 redshifts\n");
  printf("%-10s %10s %12s\n", "points", "wall [s]", "max RSS [MB]");
  for (int n = 100; n <= memory_max; n *= 10) {
    measure m;
    bad |= scan(NULL, 1, 2, n, "thermal.grid_points=1000", out, &m);
    printf("%-10d %10.2f %12.1f\n", n, m.seconds, m.max_rss_kib / 1024.0);
    fflush(stdout);
  }
  unlink(stderr_path);
  rmdir(dir);
  return bad;
}
