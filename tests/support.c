/* The shared test helpers declared in tests/support.h. */
#include "support.h"

#include <errno.h>
#include <fcntl.h>
#include <grp.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

#define CHILD_MAX_ARGS 72
#define NOBODY_ID 65534

pid_t child_start(const char *program, const char *const *args, const char *out_path,
                  const char *err_path, int as_nobody) {
  /* execv wants strings it may write; copied before fork, because only
   * async-signal-safe calls are allowed in the child of a threaded parent. */
  char *argv[CHILD_MAX_ARGS + 1];
  int n = 0;
  argv[n++] = strdup(program);
  for (int i = 0; args[i]; i++) {
    cr_assert_lt(n, CHILD_MAX_ARGS, "too many arguments for %s", program);
    argv[n++] = strdup(args[i]);
  }
  argv[n] = NULL;
  for (int i = 0; i < n; i++) cr_assert_not_null(argv[i]);

  pid_t pid = fork();
  cr_assert(pid >= 0, "fork: %s", strerror(errno));
  if (pid > 0) {
    for (int i = 0; i < n; i++) free(argv[i]);
    return pid;
  }
  sigset_t none;
  sigemptyset(&none);
  sigprocmask(SIG_SETMASK, &none, NULL);
  signal(SIGINT, SIG_DFL);
  signal(SIGTERM, SIG_DFL);
  int in = open("/dev/null", O_RDONLY);
  int out = open(out_path ? out_path : "/dev/null", O_WRONLY | O_CREAT | O_TRUNC, 0644);
  int err = open(err_path, O_WRONLY | O_CREAT | O_TRUNC, 0644);
  if (in < 0 || out < 0 || err < 0) _exit(CHILD_EXEC_FAILED);
  dup2(in, 0), dup2(out, 1), dup2(err, 2);
  if (as_nobody && (setgroups(0, NULL) != 0 || setgid(NOBODY_ID) != 0 || setuid(NOBODY_ID) != 0))
    _exit(CHILD_EXEC_FAILED);
  execv(program, argv);
  _exit(CHILD_EXEC_FAILED);
}

int child_wait(pid_t pid) {
  int status;
  pid_t w;
  do w = waitpid(pid, &status, 0);
  while (w < 0 && errno == EINTR);
  cr_assert_eq(w, pid, "waitpid: %s", strerror(errno));
  return status;
}

char *read_text(const char *path) {
  FILE *f = fopen(path, "rb");
  if (!f) return NULL;
  size_t cap = 1 << 16, len = 0, got;
  char *buf = malloc(cap);
  cr_assert_not_null(buf);
  while ((got = fread(buf + len, 1, cap - len - 1, f)) > 0) {
    len += got;
    if (cap - len < 2) {
      buf = realloc(buf, cap *= 2);
      cr_assert_not_null(buf);
    }
  }
  fclose(f);
  buf[len] = '\0';
  return buf;
}
