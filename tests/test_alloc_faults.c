/* Out of memory, everywhere: the program built with JG_ALLOC_FAULTS
 * (src/base/alloc.h) refuses its N-th allocation when JG_ALLOC_FAIL_AT=N. A
 * first run counts the allocations of the job; then every one of them is
 * refused in turn, N = 1, 2, ..., and each run must end cleanly: exit status
 * 1 and one "jeansgrow: ..." line per failure that names the shortage, no
 * crash, no sanitizer report (tests/sanitize.sh: leaks included), and no
 * temporary file left behind (tables are written beside their target as
 * hidden files, then renamed). Small configurations keep the walk to
 * seconds. */
#include <dirent.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include <criterion/criterion.h>

#include "support.h"

#define REFERENCE JG_SOURCE_DIR "/params/reference.cfg"

/* A run as small as keeps every stage: a coarse history, two output
 * redshifts, three wavenumbers (so the half-suppression search runs). */
#define SMALL                                                                                  \
  "--set", "thermal.grid_points=500", "--set", "output.history_rows=20", "--set",               \
      "output.redshifts=[200.0, 20.0]", "--set", "perturbations.k_count=3", "--set",             \
      "perturbations.k_max=300.0"

typedef struct attempt {
  int status;
  char err[8192];
  long allocations; /* counted by the program, -1 if it did not say */
} attempt;

static void one_attempt(const char *dir, const char *const *args, long fail_at, attempt *a) {
  char tally[512], err_path[512], value[32];
  snprintf(tally, sizeof tally, "%s/tally", dir);
  snprintf(err_path, sizeof err_path, "%s/stderr", dir);
  snprintf(value, sizeof value, "%ld", fail_at);
  unlink(tally);
  cr_assert_eq(setenv("JG_ALLOC_FAIL_AT", value, 1), 0);
  cr_assert_eq(setenv("JG_ALLOC_TALLY", tally, 1), 0);
  a->status = child_wait(child_start(JG_FAULTY_PROGRAM, args, NULL, err_path, 0));
  char *text = read_text(err_path);
  cr_assert_not_null(text, "lost the program's standard error");
  snprintf(a->err, sizeof a->err, "%s", text);
  free(text);
  unlink(err_path);
  a->allocations = -1;
  FILE *f = fopen(tally, "r");
  if (f) {
    if (fscanf(f, "%ld", &a->allocations) != 1) a->allocations = -1;
    fclose(f);
  }
}

/* Every line of stderr is the program's own, and one names the shortage. */
static void assert_clean_failure(const attempt *a, long n, const char *job) {
  cr_assert(WIFEXITED(a->status) && WEXITSTATUS(a->status) == 1,
            "%s, allocation %ld refused: %s %d, expected exit 1; stderr:\n%s", job, n,
            WIFEXITED(a->status) ? "exit" : "signal",
            WIFEXITED(a->status) ? WEXITSTATUS(a->status) : WTERMSIG(a->status), a->err);
  cr_assert(strstr(a->err, "out of memory") != NULL,
            "%s, allocation %ld refused: the message does not say out of memory:\n%s", job, n,
            a->err);
  for (const char *line = a->err; *line; line = strchr(line, '\n') + 1) {
    cr_assert(strncmp(line, "jeansgrow: ", 11) == 0,
              "%s, allocation %ld refused: a line not from the program:\n%s", job, n, a->err);
    cr_assert_not_null(strchr(line, '\n'), "%s: unterminated line:\n%s", job, a->err);
  }
}

/* No hidden (temporary) file in `folder` or in its subfolders. */
static void assert_no_temporary(const char *folder, long n, const char *job) {
  DIR *d = opendir(folder);
  if (!d) return;
  struct dirent *e;
  while ((e = readdir(d)) != NULL) {
    if (strcmp(e->d_name, ".") == 0 || strcmp(e->d_name, "..") == 0) continue;
    cr_assert(e->d_name[0] != '.', "%s, allocation %ld refused: left %s/%s behind", job, n,
              folder, e->d_name);
    char path[1024];
    snprintf(path, sizeof path, "%s/%s", folder, e->d_name);
    struct stat sb;
    if (stat(path, &sb) == 0 && S_ISDIR(sb.st_mode)) assert_no_temporary(path, n, job);
  }
  closedir(d);
}

/* Count the job's allocations, then refuse each in turn. `output` is the
 * file or folder the job writes, which a failed run must not leave behind. */
static void walk(const char *dir, const char *const *args, const char *output, const char *job) {
  attempt a;
  one_attempt(dir, args, 0, &a);
  cr_assert(WIFEXITED(a.status) && WEXITSTATUS(a.status) == 0,
            "%s without faults failed; stderr:\n%s", job, a.err);
  long total = a.allocations;
  cr_assert_gt(total, 10, "%s: the program counted %ld allocations", job, total);
  cr_log_info("%s: %ld allocations refused in turn", job, total);
  for (long n = 1; n <= total; n++) {
    char command[1024];
    snprintf(command, sizeof command, "rm -rf '%s' '%s.checkpoint'", output, output);
    cr_assert_eq(system(command), 0);
    one_attempt(dir, args, n, &a);
    assert_clean_failure(&a, n, job);
    assert_no_temporary(dir, n, job);
    cr_assert_geq(a.allocations, n, "%s: failed at allocation %ld before reaching the refused %ld",
                  job, a.allocations, n);
  }
}

static void make_folder(char *dir, size_t size) {
  snprintf(dir, size, "/tmp/jg_alloc_faults_XXXXXX");
  cr_assert_not_null(mkdtemp(dir), "mkdtemp: %s", strerror(errno));
}

static void remove_folder(const char *dir) {
  char command[600];
  snprintf(command, sizeof command, "rm -rf '%s'", dir);
  cr_assert_eq(system(command), 0);
}

TestSuite(alloc_faults, .timeout = 600);

Test(alloc_faults, every_allocation_of_a_run) {
  char dir[64], out[128];
  make_folder(dir, sizeof dir);
  snprintf(out, sizeof out, "%s/results", dir);
  const char *args[] = {"run", REFERENCE, SMALL, "--no-figures", "-o", out, NULL};
  walk(dir, args, out, "run");
  remove_folder(dir);
}

Test(alloc_faults, every_allocation_of_a_scan) {
  char dir[64], out[128];
  make_folder(dir, sizeof dir);
  snprintf(out, sizeof out, "%s/scan.txt", dir);
  const char *args[] = {"scan", REFERENCE, "--no-figures", SMALL, "--vary", "cosmology.baryon_density_h2=0.02:0.03:2",
                        "--threads", "1", "-o", out, NULL};
  walk(dir, args, out, "scan");
  remove_folder(dir);
}
