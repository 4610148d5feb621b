/*
 * Interrupts and unwritable outputs, on the real program (JG_PROGRAM).
 *
 * The promises under test (conventions: "an interrupted run never leaves a
 * truncated table"; README: exit 2 for bad input, 1 for a failure during a
 * run):
 *   - an output place that cannot be written (missing folder, read-only
 *     folder, read-only file system) is refused with one clear line and
 *     exit status 2 before any computation, and nothing is created;
 *   - SIGINT or SIGTERM while `history` computes or writes leaves either no
 *     file or the previous complete file, no temporary file, prints the
 *     interrupt message and exits with 128 + the signal number;
 *   - a full disk (a 64 KiB tmpfs, or /dev/full for standard output) gives a
 *     clear error, exit status 1, and no partial file;
 *   - a special file named by -o (device, named pipe) is written through,
 *     never replaced by a regular file, and a symbolic link is followed.
 *
 * Running as root (as CI does), permission bits do not stop writes, so the
 * read-only-folder case runs the program as user `nobody`; the tmpfs cases
 * need mount(2) and the device cases mknod(2). Each skips, saying why, where
 * that is impossible.
 */
#define _GNU_SOURCE
#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mount.h>
#include <sys/stat.h>
#include <sys/sysmacros.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include <criterion/criterion.h>

#include "support.h"

#define REFERENCE JG_SOURCE_DIR "/params/reference.cfg"

/* ---- files and folders ------------------------------------------------------ */

static void make_temp_folder(char *dir, size_t size) {
  const char *base = getenv("TMPDIR");
  snprintf(dir, size, "%s/jg_interrupts_XXXXXX", base && base[0] ? base : "/tmp");
  cr_assert(mkdtemp(dir) != NULL, "mkdtemp(%s): %s", dir, strerror(errno));
}

static void write_text(const char *path, const char *text) {
  FILE *f = fopen(path, "w");
  cr_assert(f != NULL, "cannot create %s: %s", path, strerror(errno));
  fputs(text, f);
  cr_assert(fclose(f) == 0, "cannot write %s", path);
}

/* The entries of a folder, '.' and '..' left out, as one line for messages. */
static int list_folder(const char *dir, char *names, size_t size) {
  DIR *d = opendir(dir);
  cr_assert(d != NULL, "cannot list %s: %s", dir, strerror(errno));
  int n = 0;
  names[0] = '\0';
  struct dirent *e;
  while ((e = readdir(d)) != NULL) {
    if (strcmp(e->d_name, ".") == 0 || strcmp(e->d_name, "..") == 0) continue;
    n++;
    strncat(names, " ", size - strlen(names) - 1);
    strncat(names, e->d_name, size - strlen(names) - 1);
  }
  closedir(d);
  return n;
}

/* Size of the first temporary output file (".NAME.*") in dir, or -1. */
static long temp_file_size(const char *dir, const char *name) {
  char prefix[256];
  snprintf(prefix, sizeof prefix, ".%s.", name);
  DIR *d = opendir(dir);
  if (!d) return -1;
  long size = -1;
  struct dirent *e;
  while (size < 0 && (e = readdir(d)) != NULL) {
    if (strncmp(e->d_name, prefix, strlen(prefix)) != 0) continue;
    char path[4096 + 256 + 2];
    struct stat sb;
    snprintf(path, sizeof path, "%s/%s", dir, e->d_name);
    if (stat(path, &sb) == 0) size = (long)sb.st_size;
  }
  closedir(d);
  return size;
}

static void remove_folder(const char *dir) {
  DIR *d = opendir(dir);
  if (!d) return;
  struct dirent *e;
  while ((e = readdir(d)) != NULL) {
    if (strcmp(e->d_name, ".") == 0 || strcmp(e->d_name, "..") == 0) continue;
    char path[4096];
    snprintf(path, sizeof path, "%s/%s", dir, e->d_name);
    unlink(path);
  }
  closedir(d);
  rmdir(dir);
}

/* ---- running the program ---------------------------------------------------- */

/* Start JG_PROGRAM with argv[1..] (argv[0] is ignored), standard output to
 * out_path (or /dev/null), standard error to err_path. With as_nobody the
 * child gives up root first. Does not wait. */
static pid_t start_program(const char *const *argv, const char *out_path, const char *err_path,
                           int as_nobody) {
  return child_start(JG_PROGRAM, argv + 1, out_path, err_path, as_nobody);
}

/* Run to the end; returns the exit status (or 1000 + signal) and fills
 * err_text with what the program printed on standard error. */
static int run_program(const char *const *argv, const char *out_path, int as_nobody,
                       char *err_text, size_t err_size) {
  char err_path[] = "/tmp/jg_interrupts_stderr_XXXXXX";
  int fd = mkstemp(err_path);
  cr_assert(fd >= 0, "mkstemp: %s", strerror(errno));
  close(fd);
  int status = child_wait(start_program(argv, out_path, err_path, as_nobody));
  char *text = read_text(err_path);
  unlink(err_path);
  snprintf(err_text, err_size, "%s", text ? text : "");
  free(text);
  return WIFEXITED(status) ? WEXITSTATUS(status) : 1000 + WTERMSIG(status);
}

/* One line, "jeansgrow: ...", naming `path` and the system's reason. */
static void assert_one_clear_line(const char *err_text, const char *path, const char *reason) {
  const char *nl = strchr(err_text, '\n');
  cr_assert(nl != NULL && nl[1] == '\0', "expected exactly one line on stderr, got: %s",
            err_text);
  cr_assert(strncmp(err_text, "jeansgrow: ", 11) == 0, "message without the program name: %s",
            err_text);
  cr_assert(strstr(err_text, path) != NULL, "message does not name %s: %s", path, err_text);
  cr_assert(strstr(err_text, reason) != NULL, "message does not give the reason '%s': %s",
            reason, err_text);
}

static void sleep_ms(long ms) {
  struct timespec ts = {ms / 1000, (ms % 1000) * 1000000L};
  while (nanosleep(&ts, &ts) != 0 && errno == EINTR) {
  }
}

/* ---- outputs that cannot be written ------------------------------------------ */

/* "Before any work": the cosmology below has no big bang (H^2 < 0 near
 * z = 1.1), which the background stage rejects with its own message. Getting
 * the output message instead shows that the output was checked first. */
#define NO_BIG_BANG "--set=cosmology.hubble_h=1.2", "--set=cosmology.curvature_omega=-0.9"

Test(unwritable_output, missing_folder_is_refused_before_any_work) {
  const char *path = "/nonexistent/dir/file";
  const char *argv[] = {"", "history", REFERENCE, NO_BIG_BANG, "-o", path, NULL};
  char err[4096];
  int rc = run_program(argv, NULL, 0, err, sizeof err);
  cr_assert(rc == 2, "exit status %d, expected 2; stderr: %s", rc, err);
  assert_one_clear_line(err, path, strerror(ENOENT));
  struct stat sb;
  cr_assert(stat("/nonexistent", &sb) != 0, "/nonexistent was created");
}

Test(unwritable_output, missing_folder_is_refused_for_epochs_too) {
  const char *path = "/nonexistent/dir/epochs.txt";
  const char *argv[] = {"", "epochs", REFERENCE, "-o", path, NULL};
  char err[4096];
  int rc = run_program(argv, NULL, 0, err, sizeof err);
  cr_assert(rc == 2, "exit status %d, expected 2; stderr: %s", rc, err);
  assert_one_clear_line(err, path, strerror(ENOENT));
}

/* Permission bits: root ignores them, so as root the program runs as
 * `nobody`, with a copy of the parameter file it can read. */
Test(unwritable_output, read_only_folder_is_refused_before_any_work) {
  char dir[4096], cfg[4200], path[4200], names[4096];
  make_temp_folder(dir, sizeof dir);
  snprintf(cfg, sizeof cfg, "%s/reference.cfg", dir);
  snprintf(path, sizeof path, "%s/history.txt", dir);
  char *text = read_text(REFERENCE);
  cr_assert(text != NULL, "cannot read %s", REFERENCE);
  write_text(cfg, text);
  free(text);
  cr_assert(chmod(dir, 0555) == 0 && chmod(cfg, 0444) == 0, "chmod: %s", strerror(errno));
  int as_nobody = geteuid() == 0;
  const char *argv[] = {"", "history", cfg, NO_BIG_BANG, "-o", path, NULL};
  char err[4096];
  int rc = run_program(argv, NULL, as_nobody, err, sizeof err);
  int n = list_folder(dir, names, sizeof names);
  chmod(dir, 0700);
  remove_folder(dir);
  if (rc == CHILD_EXEC_FAILED && as_nobody)
    cr_skip_test("running as root, and user nobody cannot run %s (%s): permission bits cannot "
                 "be tested here",
                 JG_PROGRAM, err);
  cr_assert(rc == 2, "exit status %d, expected 2; stderr: %s", rc, err);
  assert_one_clear_line(err, path, strerror(EACCES));
  cr_assert(n == 1, "the read-only folder holds more than the parameter file:%s", names);
}

/* ---- file systems: read-only and full ------------------------------------- */

static char mount_dir[4096];
static int mounted = 0;

/* A fresh tmpfs of 64 KiB (options e.g. "ro"); skips the test if mounting
 * is not allowed here. */
static void mount_small_tmpfs(const char *extra_options) {
  make_temp_folder(mount_dir, sizeof mount_dir);
  char options[64];
  snprintf(options, sizeof options, "size=64k,mode=0755%s%s", extra_options[0] ? "," : "",
           extra_options);
  if (mount("jg_test_tmpfs", mount_dir, "tmpfs", 0, options) != 0) {
    int e = errno;
    rmdir(mount_dir);
    cr_skip_test("cannot mount a tmpfs (%s): needs root with CAP_SYS_ADMIN", strerror(e));
  }
  mounted = 1;
}

static void unmount_small_tmpfs(void) {
  if (mounted && umount(mount_dir) == 0) rmdir(mount_dir);
  mounted = 0;
}

TestSuite(file_systems, .fini = unmount_small_tmpfs);

Test(file_systems, read_only_file_system_is_refused_before_any_work) {
  mount_small_tmpfs("ro");
  char path[4200], names[4096];
  snprintf(path, sizeof path, "%s/history.txt", mount_dir);
  const char *argv[] = {"", "history", REFERENCE, NO_BIG_BANG, "-o", path, NULL};
  char err[4096];
  int rc = run_program(argv, NULL, 0, err, sizeof err);
  cr_assert(rc == 2, "exit status %d, expected 2; stderr: %s", rc, err);
  assert_one_clear_line(err, path, strerror(EROFS));
  cr_assert(list_folder(mount_dir, names, sizeof names) == 0, "files appeared:%s", names);
}

/* The history table of the reference file is ~230 KB: the disk fills while
 * rows are written. */
Test(file_systems, disk_filling_up_while_writing_leaves_no_partial_file) {
  mount_small_tmpfs("");
  char path[4200], names[4096];
  snprintf(path, sizeof path, "%s/history.txt", mount_dir);
  const char *argv[] = {"", "history", REFERENCE, "-o", path, NULL};
  char err[4096];
  int rc = run_program(argv, NULL, 0, err, sizeof err);
  cr_assert(rc == 1, "exit status %d, expected 1 (failure during the run); stderr: %s", rc, err);
  assert_one_clear_line(err, path, strerror(ENOSPC));
  cr_assert(list_folder(mount_dir, names, sizeof names) == 0, "files left behind:%s", names);
}

/* A disk already full: the small epochs table fails only when it is
 * flushed at the end; the previous file must survive untouched. */
Test(file_systems, full_disk_keeps_the_previous_file) {
  mount_small_tmpfs("");
  char path[4200], filler[4200], names[4096];
  snprintf(path, sizeof path, "%s/epochs.txt", mount_dir);
  snprintf(filler, sizeof filler, "%s/filler", mount_dir);
  const char *old = "previous complete table\n";
  write_text(path, old);
  FILE *f = fopen(filler, "w");
  cr_assert(f != NULL);
  static const char block[4096];
  while (fwrite(block, 1, sizeof block, f) == sizeof block && fflush(f) == 0) {
  }
  fclose(f);
  const char *argv[] = {"", "epochs", REFERENCE, "-o", path, NULL};
  char err[4096];
  int rc = run_program(argv, NULL, 0, err, sizeof err);
  cr_assert(rc == 1, "exit status %d, expected 1 (failure during the run); stderr: %s", rc, err);
  assert_one_clear_line(err, path, strerror(ENOSPC));
  char *now = read_text(path);
  cr_assert(now != NULL && strcmp(now, old) == 0, "the previous file changed: %s",
            now ? now : "(gone)");
  free(now);
  cr_assert(list_folder(mount_dir, names, sizeof names) == 2, "files left behind:%s", names);
}

/* Standard output on a full device: no mount needed. */
Test(file_systems, full_standard_output_is_an_error) {
  struct stat sb;
  if (stat("/dev/full", &sb) != 0) cr_skip_test("/dev/full is missing");
  const char *argv[] = {"", "history", REFERENCE, NULL};
  char err[4096];
  int rc = run_program(argv, "/dev/full", 0, err, sizeof err);
  cr_assert(rc == 1, "exit status %d, expected 1; stderr: %s", rc, err);
  assert_one_clear_line(err, "standard output", strerror(ENOSPC));
}

/* ---- special files as the output -------------------------------------------- */

/* The atomic write (temporary file renamed into place) must not replace a
 * special file: as root, `-o /dev/null` once turned /dev/null into a
 * regular file. These use a device node and a FIFO of their own. */

static int is_char_device(const char *path) {
  struct stat sb;
  return lstat(path, &sb) == 0 && S_ISCHR(sb.st_mode);
}

/* mknod needs root: skips otherwise. */
static void make_device(const char *path, unsigned minor) {
  if (mknod(path, S_IFCHR | 0666, makedev(1, minor)) != 0)
    cr_skip_test("cannot create a device node (%s): needs root", strerror(errno));
}

Test(special_outputs, a_device_is_written_through_not_replaced) {
  char dir[4096], path[4200], names[4096];
  make_temp_folder(dir, sizeof dir);
  snprintf(path, sizeof path, "%s/null", dir);
  make_device(path, 3); /* 1:3 is the null device on Linux */
  const char *argv[] = {"", "epochs", REFERENCE, "-o", path, NULL};
  char err[4096];
  int rc = run_program(argv, NULL, 0, err, sizeof err);
  int still = is_char_device(path);
  int n = list_folder(dir, names, sizeof names);
  remove_folder(dir);
  cr_assert(rc == 0, "exit status %d, expected 0; stderr: %s", rc, err);
  cr_assert(still, "the device node was replaced");
  cr_assert(n == 1, "files left beside the device:%s", names);
}

Test(special_outputs, a_full_device_is_an_error_and_stays_a_device) {
  char dir[4096], path[4200];
  make_temp_folder(dir, sizeof dir);
  snprintf(path, sizeof path, "%s/full", dir);
  make_device(path, 7); /* 1:7 is the full device on Linux */
  const char *argv[] = {"", "epochs", REFERENCE, "-o", path, NULL};
  char err[4096];
  int rc = run_program(argv, NULL, 0, err, sizeof err);
  int still = is_char_device(path);
  remove_folder(dir);
  cr_assert(rc == 1, "exit status %d, expected 1; stderr: %s", rc, err);
  assert_one_clear_line(err, path, strerror(ENOSPC));
  cr_assert(still, "the device node was replaced");
}

/* A reader on the other end gets the whole table. */
Test(special_outputs, a_named_pipe_receives_the_table) {
  char dir[4096], path[4200];
  make_temp_folder(dir, sizeof dir);
  snprintf(path, sizeof path, "%s/pipe", dir);
  cr_assert(mkfifo(path, 0600) == 0, "mkfifo: %s", strerror(errno));
  pid_t reader = fork();
  cr_assert(reader >= 0);
  if (reader == 0) {
    int fd = open(path, O_RDONLY);
    char buf[1 << 16];
    size_t n = 0;
    ssize_t got;
    while (fd >= 0 && n < sizeof buf - 1 && (got = read(fd, buf + n, sizeof buf - 1 - n)) > 0)
      n += (size_t)got;
    buf[n] = '\0';
    /* The table opens with the program's name and ends with the last epoch. */
    _exit(strncmp(buf, "# jeansgrow", 11) == 0 && strstr(buf, "\nT_gas_z100\t") ? 0 : 1);
  }
  const char *argv[] = {"", "epochs", REFERENCE, "-o", path, NULL};
  char err[4096];
  int rc = run_program(argv, NULL, 0, err, sizeof err);
  /* If the program never opened the pipe, the reader would wait forever:
   * give it 20 s after the program ended, then stop it. */
  int reader_status = 0, reader_done = 0;
  for (int i = 0; i < 10000 && !reader_done; i++) {
    reader_done = waitpid(reader, &reader_status, WNOHANG) == reader;
    if (!reader_done) sleep_ms(2);
  }
  if (!reader_done) {
    kill(reader, SIGKILL);
    reader_status = child_wait(reader);
  }
  struct stat sb;
  int still = lstat(path, &sb) == 0 && S_ISFIFO(sb.st_mode);
  remove_folder(dir);
  cr_assert(rc == 0, "exit status %d, expected 0; stderr: %s", rc, err);
  cr_assert(WIFEXITED(reader_status) && WEXITSTATUS(reader_status) == 0,
            "the reader did not receive the epochs table");
  cr_assert(still, "the named pipe was replaced");
}

/* Make `link_path` a symbolic link to `target` and run `epochs -o` on it;
 * returns the exit status and says whether the link is still a link. */
static int epochs_through_link(const char *link_path, const char *target, char *err,
                               size_t err_size, int *still_link) {
  cr_assert(symlink(target, link_path) == 0, "symlink: %s", strerror(errno));
  const char *argv[] = {"", "epochs", REFERENCE, "-o", link_path, NULL};
  int rc = run_program(argv, NULL, 0, err, err_size);
  struct stat sb;
  *still_link = lstat(link_path, &sb) == 0 && S_ISLNK(sb.st_mode);
  return rc;
}

Test(special_outputs, a_symbolic_link_is_followed_and_kept) {
  char dir[4096], link_path[4200], file_path[4200];
  make_temp_folder(dir, sizeof dir);
  snprintf(link_path, sizeof link_path, "%s/link.txt", dir);
  snprintf(file_path, sizeof file_path, "%s/table.txt", dir);
  write_text(file_path, "previous complete table\n");
  char err[4096];
  int still_link = 0;
  int rc = epochs_through_link(link_path, "table.txt", err, sizeof err, &still_link);
  char *text = read_text(file_path);
  remove_folder(dir);
  cr_assert(rc == 0, "exit status %d, expected 0; stderr: %s", rc, err);
  cr_assert(still_link, "the symbolic link was replaced by a file");
  cr_assert(text && strncmp(text, "# jeansgrow", 11) == 0,
            "the table did not reach the link's target: %.60s", text ? text : "(missing)");
  free(text);
}

/* A scan has no folder of its own beside a device: no checkpoint is put
 * there (it would land in /dev), a full device is reported with its
 * reason (not "Success"), and --resume, which needs a checkpoint, is
 * refused. */
#define SMALL_SCAN "scan", REFERENCE, "--no-figures", "--vary", "cosmology.hubble_h=[0.6,0.7]", \
    "--set=thermal.grid_points=1000", "--set=output.redshifts=[1000.0, 10.0]"

Test(special_outputs, a_scan_keeps_no_checkpoint_beside_a_device) {
  char dir[4096], null_path[4200], full_path[4200], names[4096];
  make_temp_folder(dir, sizeof dir);
  snprintf(null_path, sizeof null_path, "%s/null", dir);
  snprintf(full_path, sizeof full_path, "%s/full", dir);
  make_device(null_path, 3);
  make_device(full_path, 7);
  const char *to_null[] = {"", SMALL_SCAN, "-o", null_path, NULL};
  const char *to_full[] = {"", SMALL_SCAN, "-o", full_path, NULL};
  const char *resume[] = {"", SMALL_SCAN, "--resume", "-o", null_path, NULL};
  char err_null[4096], err_full[4096], err_resume[4096];
  int rc_null = run_program(to_null, NULL, 0, err_null, sizeof err_null);
  int rc_full = run_program(to_full, NULL, 0, err_full, sizeof err_full);
  int rc_resume = run_program(resume, NULL, 0, err_resume, sizeof err_resume);
  int n = list_folder(dir, names, sizeof names);
  int still = is_char_device(null_path) && is_char_device(full_path);
  remove_folder(dir);
  cr_assert(rc_null == 0, "exit status %d, expected 0; stderr: %s", rc_null, err_null);
  cr_assert(rc_full == 1, "exit status %d, expected 1; stderr: %s", rc_full, err_full);
  cr_assert(strstr(err_full, strerror(ENOSPC)) && !strstr(err_full, "Success"),
            "a full device must be reported as such: %s", err_full);
  cr_assert(rc_resume == 2, "exit status %d, expected 2; stderr: %s", rc_resume, err_resume);
  cr_assert(strstr(err_resume, "--resume needs a regular file"), "%s", err_resume);
  cr_assert(n == 2, "files left beside the devices:%s", names);
  cr_assert(still, "a device node was replaced");
}

/* A link to nothing is refused with its target named: the table would
 * otherwise replace the link, or be written wherever the link points. */
Test(special_outputs, a_dangling_symbolic_link_is_refused_and_kept) {
  char dir[4096], link_path[4200], names[4096];
  make_temp_folder(dir, sizeof dir);
  snprintf(link_path, sizeof link_path, "%s/link.txt", dir);
  char err[4096];
  int still_link = 0;
  int rc = epochs_through_link(link_path, "missing/table.txt", err, sizeof err, &still_link);
  int n = list_folder(dir, names, sizeof names);
  remove_folder(dir);
  cr_assert(rc == 2, "exit status %d, expected 2; stderr: %s", rc, err);
  assert_one_clear_line(err, link_path, "symbolic link to 'missing/table.txt', which does not exist");
  cr_assert(still_link && n == 1, "the link was replaced or files were left:%s", names);
}

/* Every name the system allows can be written: the hidden temporary name
 * (and a scan's checkpoint name) must not pass NAME_MAX (255 bytes) when
 * the output's own name is close to it. */
Test(special_outputs, output_names_up_to_the_longest_allowed_are_written) {
  char dir[4096], path[4600], names[8192];
  make_temp_folder(dir, sizeof dir);
  const size_t lengths[] = {241, 242, 250, 255};
  for (size_t k = 0; k < sizeof lengths / sizeof lengths[0]; k++) {
    char name[256];
    memset(name, 'a' + (int)k, lengths[k]);
    name[lengths[k]] = '\0';
    snprintf(path, sizeof path, "%s/%s", dir, name);
    const char *epochs[] = {"", "epochs", REFERENCE, "-o", path, NULL};
    const char *scan[] = {"", SMALL_SCAN, "-o", path, NULL};
    char err[4096];
    int rc = run_program(epochs, NULL, 0, err, sizeof err);
    cr_assert(rc == 0, "a %zu-byte name: exit status %d; stderr: %s", lengths[k], rc, err);
    cr_assert(unlink(path) == 0, "a %zu-byte name was not written", lengths[k]);
    rc = run_program(scan, NULL, 0, err, sizeof err);
    cr_assert(rc == 0, "scan, a %zu-byte name: exit status %d; stderr: %s", lengths[k], rc, err);
    cr_assert(unlink(path) == 0, "scan: a %zu-byte name was not written", lengths[k]);
  }
  int n = list_folder(dir, names, sizeof names);
  remove_folder(dir);
  cr_assert(n == 0, "files left behind:%s", names);
}

/* A run killed with SIGKILL cannot remove its hidden temporary file; the
 * next run of the same output removes it, but never the temporary file of
 * a run still writing (it holds a lock on it), nor a file that only looks
 * alike. */
Test(special_outputs, a_killed_run_leaves_temporaries_that_the_next_run_removes) {
  char dir[4096], path[4200], stale[4200], live[4200], other[4200], names[4096];
  make_temp_folder(dir, sizeof dir);
  snprintf(path, sizeof path, "%s/table.txt", dir);
  snprintf(stale, sizeof stale, "%s/.table.txt.0123456789ab", dir);
  snprintf(live, sizeof live, "%s/.table.txt.ba9876543210", dir);
  snprintf(other, sizeof other, "%s/.table.txt.not-ours-at-all", dir);
  write_text(stale, "# half a table from a killed run\n");
  write_text(live, "# a table being written\n");
  write_text(other, "# somebody else's file\n");
  /* Both temporaries as old as a long run's. */
  const struct timespec old[2] = {{time(NULL) - 3600, 0}, {time(NULL) - 3600, 0}};
  cr_assert(utimensat(AT_FDCWD, stale, old, 0) == 0 && utimensat(AT_FDCWD, live, old, 0) == 0);
  int live_fd = open(live, O_WRONLY);
  struct flock fl = {.l_type = F_WRLCK, .l_whence = SEEK_SET};
  cr_assert(live_fd >= 0 && fcntl(live_fd, F_OFD_SETLK, &fl) == 0, "lock: %s", strerror(errno));
  const char *argv[] = {"", "epochs", REFERENCE, "-o", path, NULL};
  char err[4096];
  int rc = run_program(argv, NULL, 0, err, sizeof err);
  int stale_gone = access(stale, F_OK) != 0, live_kept = access(live, F_OK) == 0;
  int other_kept = access(other, F_OK) == 0;
  close(live_fd);
  int n = list_folder(dir, names, sizeof names);
  remove_folder(dir);
  cr_assert(rc == 0, "exit status %d; stderr: %s", rc, err);
  cr_assert(stale_gone, "the temporary file of the killed run is still there:%s", names);
  cr_assert(live_kept, "the temporary file of a run still writing was removed");
  cr_assert(other_kept, "a file that only looks like a temporary file was removed");
  cr_assert(n == 3, "files:%s", names);
}

/* ---- interrupts ------------------------------------------------------------ */

typedef enum { WHILE_COMPUTING, WHILE_WRITING } interrupt_phase;

/*
 * Interrupt `history` with `sig`. While computing: a history on 10^6 grid
 * nodes (seconds of work), signalled once its temporary file exists. While
 * writing: 10^6 rows (~220 MB), signalled once the temporary file holds
 * 1 MB, over a previous complete file that must survive.
 */
static void interrupt_history(int sig, interrupt_phase phase) {
  char dir[4096], path[4200], err_path[4200], names[4096];
  make_temp_folder(dir, sizeof dir);
  snprintf(path, sizeof path, "%s/history.txt", dir);
  snprintf(err_path, sizeof err_path, "%s/../%s.stderr", dir, strrchr(dir, '/') + 1);
  const char *old = "previous complete table\n";
  if (phase == WHILE_WRITING) write_text(path, old);
  const char *setting = phase == WHILE_COMPUTING ? "--set=thermal.grid_points=1000000"
                                                 : "--set=output.history_rows=1000000";
  const char *argv[] = {"", "history", REFERENCE, setting, "-o", path, NULL};
  pid_t pid = start_program(argv, NULL, err_path, 0);

  const long threshold = phase == WHILE_COMPUTING ? 0 : 1000000;
  int status = 0, finished = 0;
  /* Polls every 2 ms; the deadline only stops a hung test (a full run
   * takes a few seconds, far more under sanitizers). */
  for (int i = 0; i < 150000; i++) {
    if (temp_file_size(dir, "history.txt") >= threshold) break;
    if (waitpid(pid, &status, WNOHANG) == pid) {
      finished = 1;
      break;
    }
    sleep_ms(2);
  }
  if (!finished) {
    cr_assert(kill(pid, sig) == 0, "kill: %s", strerror(errno));
    status = child_wait(pid);
  }
  char *err = read_text(err_path);
  unlink(err_path);
  char *now = read_text(path);
  int n = list_folder(dir, names, sizeof names);
  remove_folder(dir);

  cr_assert(!finished, "history finished before it could be interrupted (status %d): the "
                       "run is too short for this test", status);
  cr_assert(WIFEXITED(status) && WEXITSTATUS(status) == 128 + sig,
            "expected exit status %d after signal %d, got %s %d; stderr: %s", 128 + sig, sig,
            WIFEXITED(status) ? "exit status" : "death by signal",
            WIFEXITED(status) ? WEXITSTATUS(status) : WTERMSIG(status), err ? err : "");
  cr_assert(err && strstr(err, "jeansgrow: interrupted"), "no interrupt message; stderr: %s",
            err ? err : "");
  if (phase == WHILE_COMPUTING) {
    cr_assert(n == 0, "files left after the interrupt:%s", names);
  } else {
    cr_assert(n == 1, "files left after the interrupt:%s", names);
    cr_assert(now && strcmp(now, old) == 0, "the previous file changed (%.60s...)",
              now ? now : "(gone)");
  }
  free(now);
  free(err);
}

Test(interrupts, sigint_while_computing_leaves_no_file) {
  interrupt_history(SIGINT, WHILE_COMPUTING);
}
Test(interrupts, sigterm_while_computing_leaves_no_file) {
  interrupt_history(SIGTERM, WHILE_COMPUTING);
}
Test(interrupts, sigint_while_writing_keeps_the_previous_file) {
  interrupt_history(SIGINT, WHILE_WRITING);
}
Test(interrupts, sigterm_while_writing_keeps_the_previous_file) {
  interrupt_history(SIGTERM, WHILE_WRITING);
}

/* `run` computes everything before it opens a file: an interrupt then must
 * still say what happened (it once ended silently with status 130), and
 * leave the folder as it was. A million-node history keeps it computing
 * for seconds; the signal comes after 300 ms. */
static void interrupt_run_while_computing(int sig) {
  char dir[4096], err_path[4200], names[4096];
  make_temp_folder(dir, sizeof dir);
  snprintf(err_path, sizeof err_path, "%s/../%s.stderr", dir, strrchr(dir, '/') + 1);
  const char *argv[] = {"", "run", REFERENCE, "--set=thermal.grid_points=1000000", "--no-figures",
                        "-o", dir, NULL};
  pid_t pid = start_program(argv, NULL, err_path, 0);
  sleep_ms(300);
  int status = 0;
  const int finished = waitpid(pid, &status, WNOHANG) == pid;
  if (!finished) {
    cr_assert(kill(pid, sig) == 0, "kill: %s", strerror(errno));
    status = child_wait(pid);
  }
  char *err = read_text(err_path);
  unlink(err_path);
  int n = list_folder(dir, names, sizeof names);
  remove_folder(dir);
  cr_assert(!finished, "run finished before it could be interrupted (status %d); stderr: %s",
            status, err ? err : "");
  cr_assert(WIFEXITED(status) && WEXITSTATUS(status) == 128 + sig,
            "expected exit status %d after signal %d; stderr: %s", 128 + sig, sig, err ? err : "");
  cr_assert(err && strcmp(err, "jeansgrow: interrupted; no table was written, the output folder "
                               "is as it was\n") == 0,
            "stderr: %s", err ? err : "(none)");
  cr_assert(n == 0, "files left after the interrupt:%s", names);
  free(err);
}

Test(interrupts, sigint_while_run_computes_says_so_and_writes_nothing) {
  interrupt_run_while_computing(SIGINT);
}
Test(interrupts, sigterm_while_run_computes_says_so_and_writes_nothing) {
  interrupt_run_while_computing(SIGTERM);
}
