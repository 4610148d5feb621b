/* Option parsing, error reporting and interrupt safety shared by all commands. */
#define _GNU_SOURCE /* sched_getaffinity: the cores this process may use */
#include <getopt.h>
#include <pthread.h>
#include <sched.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "cli.h"

/* The temporary output files being written (`run` writes several at once),
 * for the signal handler. Program state, not library state: the library
 * keeps no globals. */
#define MAX_TEMP_FILES 8
static volatile sig_atomic_t temp_in_use[MAX_TEMP_FILES];
static char temp_paths[MAX_TEMP_FILES][4096];

/* A command's own message for an interrupt (empty: the generic ones). */
static char interrupt_message[4352];

static void on_interrupt(int sig) {
  static const char removed[] = "jeansgrow: interrupted; no output file was written\n";
  static const char plain[] = "jeansgrow: interrupted\n";
  ssize_t ignored;
  int any = 0;
  for (int i = 0; i < MAX_TEMP_FILES; i++)
    if (temp_in_use[i]) unlink(temp_paths[i]), any = 1;
  if (interrupt_message[0]) {
    ignored = write(STDERR_FILENO, interrupt_message, strlen(interrupt_message));
  } else if (any) {
    ignored = write(STDERR_FILENO, removed, sizeof removed - 1);
  } else {
    ignored = write(STDERR_FILENO, plain, sizeof plain - 1);
  }
  (void)ignored;
  _exit(128 + sig);
}

/* SIGINT and SIGTERM are held back while the temporary file and the handler's
 * record of it disagree: between mkstemp and the record, the default action
 * would leave the hidden file behind; between the rename and clearing the
 * record, the handler would claim no file was written. */
static void hold_interrupts(sigset_t *saved) {
  sigset_t block;
  sigemptyset(&block);
  sigaddset(&block, SIGINT);
  sigaddset(&block, SIGTERM);
  sigprocmask(SIG_BLOCK, &block, saved);
}
static void release_interrupts(const sigset_t *saved) { sigprocmask(SIG_SETMASK, saved, NULL); }

static void install_interrupt_handlers(void);

void cli_protect_interrupts(const char *message) {
  sigset_t saved;
  hold_interrupts(&saved);
  snprintf(interrupt_message, sizeof interrupt_message, "%s", message ? message : "");
  install_interrupt_handlers();
  release_interrupts(&saved);
}

static void install_interrupt_handlers(void) {
  struct sigaction sa;
  memset(&sa, 0, sizeof sa);
  sa.sa_handler = on_interrupt;
  sigemptyset(&sa.sa_mask);
  sigaction(SIGINT, &sa, NULL);
  sigaction(SIGTERM, &sa, NULL);
}

static void print_command_help(const cli_command *cmd) {
  printf("Usage: jeansgrow %s %s\n\n%s.\n", cmd->name, cmd->usage, cmd->summary);
  if (cmd->details) printf("\n%s\n", cmd->details);
  printf("\nOptions:\n"
         "  --set KEY=VALUE  override a parameter (libconfig syntax; repeatable)\n");
  if (cmd->takes_output == OUTPUT_FILE)
    printf("  -o, --output FILE  write the table to FILE (atomically) instead of stdout\n");
  else if (cmd->takes_output == OUTPUT_FOLDER)
    printf("  -o, --output DIR   write the tables into folder DIR (created if missing)\n");
  printf("  -h, --help       show this help\n");
}

int cli_parse_options(const cli_command *cmd, int argc, char **argv, cli_options *o) {
  return cli_parse_options_with(cmd, argc, argv, o, NULL);
}

int cli_parse_options_with(const cli_command *cmd, int argc, char **argv, cli_options *o,
                           const cli_extra_options *extra) {
  memset(o, 0, sizeof *o);
  enum { MAX_EXTRA = 12 };
  struct option long_opts[MAX_EXTRA + 4] = {{"set", required_argument, NULL, 's'},
                                            {"output", required_argument, NULL, 'o'},
                                            {"help", no_argument, NULL, 'h'}};
  int n_opts = 3;
  for (int i = 0; extra && extra->long_opts[i].name && i < MAX_EXTRA; i++)
    long_opts[n_opts++] = extra->long_opts[i];
  long_opts[n_opts] = (struct option){NULL, 0, NULL, 0};
  opterr = 0;
  optind = 1;
  int c;
  while ((c = getopt_long(argc, argv, ":o:h", long_opts, NULL)) != -1) {
    if (extra && c != 's' && c != 'o' && c != 'h' && c != ':' && c != '?') {
      const int status = extra->handle(c, optarg, extra->context);
      if (status >= 0) return status;
      continue;
    }
    switch (c) {
    case 's':
      if (o->n_overrides >= CLI_MAX_OVERRIDES) {
        fprintf(stderr, "jeansgrow %s: too many --set options (at most %d)\n", cmd->name,
                CLI_MAX_OVERRIDES);
        return EXIT_BAD_INPUT;
      }
      o->overrides[o->n_overrides++] = optarg;
      break;
    case 'o':
      if (!cmd->takes_output) {
        fprintf(stderr, "jeansgrow %s: this command does not write a file (no -o)\n", cmd->name);
        return EXIT_BAD_INPUT;
      }
      o->output_path = optarg;
      break;
    case 'h':
      if (extra && extra->help) extra->help(cmd);
      else print_command_help(cmd);
      return EXIT_OK;
    case ':':
      fprintf(stderr, "jeansgrow %s: option '%s' needs a value\n", cmd->name, argv[optind - 1]);
      return EXIT_BAD_INPUT;
    default:
      /* For an unknown short option optopt holds the letter; argv[optind - 1]
       * would name the wrong word when it sits in a cluster ("-qz"). */
      if (optopt)
        fprintf(stderr, "jeansgrow %s: unknown option '-%c' (see jeansgrow %s --help)\n",
                cmd->name, optopt, cmd->name);
      else
        fprintf(stderr, "jeansgrow %s: unknown option '%s' (see jeansgrow %s --help)\n",
                cmd->name, argv[optind - 1], cmd->name);
      return EXIT_BAD_INPUT;
    }
  }
  /* Caught here, before any work: otherwise the run would end with a
   * failed rename and a less helpful message. */
  if (o->output_path && o->output_path[0] == '\0') {
    fprintf(stderr, "jeansgrow %s: option '-o' needs a %s name (got an empty one)\n", cmd->name,
            cmd->takes_output == OUTPUT_FOLDER ? "folder" : "file");
    return EXIT_BAD_INPUT;
  }
  struct stat sb;
  if (cmd->takes_output == OUTPUT_FILE && o->output_path && stat(o->output_path, &sb) == 0 &&
      S_ISDIR(sb.st_mode)) {
    fprintf(stderr, "jeansgrow %s: %s is a directory; -o needs a file name\n", cmd->name,
            o->output_path);
    return EXIT_BAD_INPUT;
  }
  if (optind >= argc) {
    fprintf(stderr, "jeansgrow %s: missing parameter file (usage: jeansgrow %s %s)\n", cmd->name,
            cmd->name, cmd->usage);
    return EXIT_BAD_INPUT;
  }
  if (optind + 1 < argc) {
    fprintf(stderr, "jeansgrow %s: unexpected argument '%s' (one parameter file only)\n",
            cmd->name, argv[optind + 1]);
    return EXIT_BAD_INPUT;
  }
  o->param_path = argv[optind];
  return -1;
}

int cli_report(const jg_error *err) {
  fprintf(stderr, "jeansgrow: %s\n", err->message[0] ? err->message : jg_strerror(err->status));
  switch (err->status) {
  case JG_EINVAL:
  case JG_ECONFIG:
    return EXIT_BAD_INPUT;
  default:
    return EXIT_RUN_FAILED;
  }
}

int cli_load_params(const cli_options *o, jg_params *p) {
  jg_error err;
  jg_error_clear(&err);
  if (jg_params_load(o->param_path, o->overrides, o->n_overrides, p, &err) != JG_OK) {
    cli_report(&err);
    /* a missing or unreadable file is bad input too; a shortage of memory is not */
    return err.status == JG_ENOMEM ? EXIT_RUN_FAILED : EXIT_BAD_INPUT;
  }
  return -1;
}

int cli_open_output(const cli_options *o, jg_output **out) {
  jg_error err;
  jg_error_clear(&err);
  sigset_t saved;
  hold_interrupts(&saved);
  if (jg_output_open(o->output_path, out, &err) != JG_OK) {
    release_interrupts(&saved);
    cli_report(&err);
    return err.status == JG_ENOMEM ? EXIT_RUN_FAILED : EXIT_BAD_INPUT;
  }
  const char *tmp = jg_output_temp_path(*out);
  for (int i = 0; tmp && i < MAX_TEMP_FILES; i++) {
    if (!temp_in_use[i] && strlen(tmp) < sizeof temp_paths[i]) {
      strcpy(temp_paths[i], tmp);
      temp_in_use[i] = 1;
      break;
    }
  }
  install_interrupt_handlers();
  release_interrupts(&saved);
  return -1;
}

/* Forget the handler's record of this output's temporary file. */
static void forget_temp_file(const jg_output *out) {
  const char *tmp = jg_output_temp_path(out);
  for (int i = 0; tmp && i < MAX_TEMP_FILES; i++)
    if (temp_in_use[i] && strcmp(temp_paths[i], tmp) == 0) temp_in_use[i] = 0;
}

int cli_commit_output(jg_output *out) {
  jg_error err;
  jg_error_clear(&err);
  sigset_t saved;
  hold_interrupts(&saved);
  forget_temp_file(out);
  jg_status st = jg_output_commit(out, &err);
  release_interrupts(&saved);
  return st == JG_OK ? EXIT_OK : cli_report(&err);
}

void cli_discard_output(jg_output *out) {
  sigset_t saved;
  hold_interrupts(&saved);
  forget_temp_file(out);
  jg_output_discard(out);
  release_interrupts(&saved);
}

int cli_build_history(const jg_params *p, const char *param_path, jg_background **bg,
                      jg_thermal **th) {
  jg_error err;
  jg_error_clear(&err);
  *th = NULL;
  *bg = jg_background_new(&p->cosmology, &err);
  if (!*bg) {
    /* A cosmology refused as a whole (e.g. no big bang) is bad input from
     * that file: name it, as the loader does for single keys. */
    if (err.status == JG_EINVAL) {
      fprintf(stderr, "jeansgrow: %s: %s\n", param_path, err.message);
      return EXIT_BAD_INPUT;
    }
    return cli_report(&err);
  }
  *th = jg_thermal_new(*bg, &p->thermal, &err);
  if (!*th) {
    jg_background_free(*bg);
    *bg = NULL;
    return cli_report(&err);
  }
  return -1;
}

int cli_usable_cores(void) {
  cpu_set_t set;
  if (sched_getaffinity(0, sizeof set, &set) == 0) return CPU_COUNT(&set);
  return (int)sysconf(_SC_NPROCESSORS_ONLN);
}

int cli_start_quiet_thread(pthread_t *thread, void *(*work)(void *), void *arg) {
  sigset_t interrupts, saved;
  sigemptyset(&interrupts);
  sigaddset(&interrupts, SIGINT);
  sigaddset(&interrupts, SIGTERM);
  pthread_sigmask(SIG_BLOCK, &interrupts, &saved);
  const int started = pthread_create(thread, NULL, work, arg) == 0;
  pthread_sigmask(SIG_SETMASK, &saved, NULL);
  return started;
}

void cli_format_in_memory(cli_text *t, const char *name,
                          jg_status (*write)(FILE *f, const void *context, jg_error *err),
                          const void *context) {
  jg_error_clear(&t->err);
  t->text = NULL;
  t->size = 0;
  FILE *f = open_memstream(&t->text, &t->size);
  if (!f) {
    t->text = NULL;
    t->status = JG_FAIL(&t->err, JG_ENOMEM, "out of memory for %s", name);
    return;
  }
  t->status = write(f, context, &t->err);
  const int failed = ferror(f);
  if ((fclose(f) != 0 || failed) && t->status == JG_OK)
    t->status = JG_FAIL(&t->err, JG_ENOMEM, "out of memory for %s", name);
}
