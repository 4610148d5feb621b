/*
 * `jeansgrow scan` over MPI ranks: dynamic manager/worker balancing.
 *
 * Rank 0 is the manager: its main thread hands out grid-point indices on
 * request and records the results in the checkpoint (the only file the
 * scan writes while running), and its own computing threads take indices
 * from the same counter, so that rank 0 computes as much as any worker
 * instead of idling as a pure manager. Every other rank runs computing
 * threads fed by its main thread, which alone talks to rank 0 (MPI is
 * initialised MPI_THREAD_FUNNELED). A worker holds two indices per thread,
 * one computing and one waiting, and sends each result with the request for
 * its replacement, so that a thread never waits for the manager's answer;
 * points cost milliseconds, so one message per point costs nothing. Near
 * the end a worker gets no spare: an index queued behind a running point
 * would keep the job going while other threads have nothing left to do.
 *
 * Results travel as raw doubles (MPI_BYTE within a homogeneous cluster) and
 * the table is written from the checkpoint in grid order, so the file is
 * byte-identical to a single-process run. A point that fails numerically
 * travels as a failed result; only running out of memory stops the scan.
 *
 * The library knows nothing of MPI: this file uses only its public API.
 */
#include <stdlib.h>
#include <string.h>

#include "cli.h"

/* Launchers announce the rank in the environment: Open MPI, the PMI of
 * MPICH/Hydra and Slurm's srun (--mpi=pmi2), and PMIx (Open MPI 4, srun
 * --mpi=pmix). SLURM_PROCID is left out on purpose: it is set in every
 * batch script, MPI or not. */
int scan_mpi_launcher_rank(void) {
  static const char *const vars[] = {"OMPI_COMM_WORLD_RANK", "PMI_RANK", "PMIX_RANK", NULL};
  for (int i = 0; vars[i]; i++) {
    const char *v = getenv(vars[i]);
    if (v && *v) return atoi(v);
  }
  return -1;
}

#ifndef JG_HAVE_MPI

int scan_mpi_built_in(void) { return 0; }
int scan_mpi_begin(int *rank, int *size) {
  *rank = 0;
  *size = 1;
  return 1;
}
int scan_mpi_all_ok(int ok) { return ok; }
int scan_mpi_share(int v) { return v; }
jg_status scan_mpi_run(const jg_scan *s, jg_scan_checkpoint *c, int threads,
                       double silence_limit, jg_scan_listener listener, void *context,
                       jg_error *err) {
  (void)silence_limit;
  return jg_scan_run(s, c, threads, listener, context, err);
}
void scan_mpi_end(void) {}
void scan_mpi_abort(int code) { exit(code); }

#else

#include <mpi.h>
#include <pthread.h>
#include <time.h>

#include "../base/clock.h"

enum { TAG_REQUEST = 1, TAG_TASK = 2, TAG_BYE = 3, TAG_ALIVE = 4 };

/* A worker busy with long points sends nothing for as long as they take; it
 * says it is alive this many times per silence limit, so that only a rank
 * that is stopped, hung or cut off stays silent for the whole limit. */
#define HEARTBEATS_PER_LIMIT 4

/* Indices a worker holds per computing thread (one running, one waiting). */
#define WORKER_DEPTH 2

/* Waiting for a message. A blocking MPI call spins in common MPI libraries
 * and would take the core from this rank's computing threads, so the
 * manager and a worker's main thread test for messages and nap in between.
 * Each wake-up also takes the core from a computing thread (a rank bound to
 * one core, as launchers do by default, has no other), so naps grow while
 * nothing comes: from NAP_MIN right after a message (another often
 * follows: a worker's first requests, a burst from several ranks) by
 * doubling to a ceiling of a fraction of the measured cost of a point. A
 * worker holds a spare index per thread, so an answer may take a good part
 * of a point without idling anyone; an eighth leaves a wide margin and, for
 * points of tens of milliseconds, wakes the manager a few hundred times a
 * second rather than a thousand. */
#define NAP_MIN_NS 50000L
#define NAP_CEILING_UNTIMED_NS 1000000L /* until a point's cost is known */
#define NAP_CEILING_MAX_NS 20000000L
#define NAP_POINT_FRACTION 8

/* The nap ceiling from the time spent on `points` points so far. */
static long nap_ceiling_ns(double seconds, long long points) {
  if (points <= 0) return NAP_CEILING_UNTIMED_NS;
  const double ns = 1e9 * seconds / (double)points / NAP_POINT_FRACTION;
  return ns < NAP_MIN_NS ? NAP_MIN_NS : ns > NAP_CEILING_MAX_NS ? NAP_CEILING_MAX_NS : (long)ns;
}

/* Sleep *nap_ns, then double it up to the ceiling. */
static void nap(long *nap_ns, long ceiling_ns) {
  const struct timespec t = {0, *nap_ns};
  nanosleep(&t, NULL);
  *nap_ns = *nap_ns >= ceiling_ns / 2 ? ceiling_ns : 2 * *nap_ns;
}

int scan_mpi_built_in(void) { return 1; }

int scan_mpi_begin(int *rank, int *size) {
  int provided = 0;
  if (MPI_Init_thread(NULL, NULL, MPI_THREAD_FUNNELED, &provided) != MPI_SUCCESS) return 1;
  if (provided < MPI_THREAD_FUNNELED) {
    MPI_Finalize();
    return 1;
  }
  MPI_Comm_rank(MPI_COMM_WORLD, rank);
  MPI_Comm_size(MPI_COMM_WORLD, size);
  return 0;
}

int scan_mpi_all_ok(int ok) {
  int all = 0;
  MPI_Allreduce(&ok, &all, 1, MPI_INT, MPI_MIN, MPI_COMM_WORLD);
  return all;
}

int scan_mpi_share(int v) {
  MPI_Bcast(&v, 1, MPI_INT, 0, MPI_COMM_WORLD);
  return v;
}

void scan_mpi_end(void) { MPI_Finalize(); }

/* A silent rank cannot take part in a clean finish (MPI_Finalize would wait
 * for it): the launcher ends every rank. */
void scan_mpi_abort(int code) { MPI_Abort(MPI_COMM_WORLD, code); }

/* One result as it travels: header, values, message. */
typedef struct result_head {
  long long index; /* -1: no result, only a request */
  int status;
  int message_length;
} result_head;

static size_t result_size(int n_values) {
  return sizeof(result_head) + sizeof(double) * (size_t)n_values + JG_ERROR_MESSAGE_SIZE;
}

static void pack_result(char *buf, long long index, jg_status st, const double *values,
                        int n_values, const char *message, int *bytes) {
  result_head h = {index, (int)st, 0};
  size_t off = sizeof h;
  if (index >= 0 && st == JG_OK) {
    memcpy(buf + off, values, sizeof(double) * (size_t)n_values);
    off += sizeof(double) * (size_t)n_values;
  } else if (index >= 0) {
    size_t n = strnlen(message ? message : "", JG_ERROR_MESSAGE_SIZE - 1);
    memcpy(buf + off, message, n);
    buf[off + n] = '\0';
    h.message_length = (int)n + 1;
    off += n + 1;
  }
  memcpy(buf, &h, sizeof h);
  *bytes = (int)off;
}

/* ---- the manager (rank 0) ---------------------------------------------- */

/* The manager: the library's slice feed hands out the indices and records
 * the results, for its own computing threads and for the other ranks'
 * alike; the manager adds the cost of its own points, for the naps. */
typedef struct manager {
  jg_scan_slice_feed *slice;
  jg_scan_feed feed;   /* the slice feed's functions */
  pthread_mutex_t lock;
  double eval_seconds; /* time the manager's own threads spent on points, */
  long long evaluated; /* and how many: the cost of a point, for the naps */
} manager;

/* The next index for a worker that holds `held` indices on `threads`
 * threads (every rank runs the same --threads), -1 if none for now. Once
 * fewer points are left than there are computing threads in the job, a
 * spare would wait behind a running point while some thread runs dry: the
 * worker then gets only what keeps its own threads busy, and the rest go
 * to whichever thread frees up first. It asks again with each result, so
 * it leaves only when nothing is left. */
static long long manager_take_for_worker(manager *m, int held, int threads, int ranks) {
  const int endgame = jg_scan_slice_feed_unassigned(m->slice) < (long long)threads * ranks;
  return endgame && held >= threads ? -1 : m->feed.take(m->feed.context);
}

/* The manager's own computing threads: the slice feed, timed. */
static long long manager_feed_take(void *context) {
  manager *m = context;
  return m->feed.take(m->feed.context);
}

static void manager_feed_give(void *context, long long index, jg_status st, const double *values,
                              const char *message, double seconds) {
  manager *m = context;
  pthread_mutex_lock(&m->lock);
  m->eval_seconds += seconds;
  m->evaluated++;
  pthread_mutex_unlock(&m->lock);
  m->feed.give(m->feed.context, index, st, values, message, seconds);
}

static void manager_feed_fail(void *context, const jg_error *e) {
  manager *m = context;
  m->feed.fail(m->feed.context, e);
}

/* The first worker rank that has sent nothing (no result, request or
 * heartbeat) for longer than `limit` seconds, or 0. */
static int silent_rank(const double *last_heard, const char *gone, int ranks, double limit,
                       double now) {
  if (limit <= 0) return 0;
  for (int r = 1; r < ranks; r++)
    if (!gone[r] && now - last_heard[r] > limit) return r;
  return 0;
}

/* Stop the job for a silent rank: the manager's own threads finish their
 * points and the caller keeps the checkpoint, from which --resume
 * recomputes whatever the silent rank held. */
static jg_status give_up_on(manager *m, jg_scan_checkpoint *c, int rank, int held,
                            double silent_for, double limit, jg_error *err) {
  jg_scan_slice_feed_stop(m->slice);
  const char *kept = jg_scan_checkpoint_path(c);
  char resume[4400];
  if (kept)
    snprintf(resume, sizeof resume, "the finished points are kept in %s: run the same command "
             "with --resume to finish", kept);
  else
    snprintf(resume, sizeof resume, "nothing is kept without -o FILE");
  return JG_FAIL(err, JG_EINTERRUPT, "MPI rank %d has sent nothing for %.0f s (holding %d "
                 "point%s; --rank-timeout %g): ending the job; %s", rank, silent_for, held,
                 held == 1 ? "" : "s", limit, resume);
}

static jg_status run_manager(const jg_scan *s, jg_scan_checkpoint *c, int threads, int ranks,
                             double silence_limit, jg_scan_listener listener, void *context,
                             jg_error *err) {
  manager m;
  memset(&m, 0, sizeof m);
  if (jg_scan_slice_feed_new(s, c, listener, context, &m.slice, err) != JG_OK) {
    /* Without it no worker's request can be answered: end every rank. */
    cli_report(err);
    MPI_Abort(MPI_COMM_WORLD, EXIT_RUN_FAILED);
  }
  m.feed = jg_scan_slice_feed_of(m.slice);
  pthread_mutex_init(&m.lock, NULL);
  const int n_values = jg_scan_values_per_point(s);
  char *buf = malloc(result_size(n_values));
  int *held = calloc((size_t)ranks, sizeof *held); /* indices each worker holds */
  double *last_heard = malloc(sizeof *last_heard * (size_t)ranks);
  char *gone = calloc((size_t)ranks, 1); /* said goodbye */
  if (!last_heard || !gone) held = (free(held), NULL);
  for (int r = 0; last_heard && r < ranks; r++) last_heard[r] = jg__monotonic_seconds();
  jg_scan_runner *runner = NULL;
  if (buf && held) {
    const jg_scan_feed feed = {&m, manager_feed_take, manager_feed_give, manager_feed_fail};
    jg_error e;
    if (jg_scan_runner_start(s, threads, &feed, &runner, &e) != JG_OK) manager_feed_fail(&m, &e);
  }
  if (!buf || !held) {
    jg_error e;
    JG_FAIL(&e, JG_ENOMEM, "out of memory for the MPI manager");
    manager_feed_fail(&m, &e);
  }
  /* Serve until every worker has said goodbye, which each does only after
   * its last result was answered: no message is left unanswered. */
  int byes = 0, silent = 0;
  double silent_for = 0;
  long nap_ns = NAP_MIN_NS;
  while (byes < ranks - 1) {
    int flag = 0;
    MPI_Status status;
    MPI_Iprobe(MPI_ANY_SOURCE, MPI_ANY_TAG, MPI_COMM_WORLD, &flag, &status);
    const double now = jg__monotonic_seconds();
    if (held && (silent = silent_rank(last_heard, gone, ranks, silence_limit, now)) > 0) {
      silent_for = now - last_heard[silent];
      break;
    }
    if (!flag) {
      pthread_mutex_lock(&m.lock);
      const long ceiling = nap_ceiling_ns(m.eval_seconds, m.evaluated);
      pthread_mutex_unlock(&m.lock);
      nap(&nap_ns, ceiling);
      continue;
    }
    nap_ns = NAP_MIN_NS;
    int bytes = 0;
    MPI_Get_count(&status, MPI_BYTE, &bytes);
    if (!buf || !held || bytes > (int)result_size(n_values) || status.MPI_SOURCE < 1 ||
        status.MPI_SOURCE >= ranks)
      MPI_Abort(MPI_COMM_WORLD, EXIT_RUN_FAILED);
    MPI_Recv(buf, bytes, MPI_BYTE, status.MPI_SOURCE, status.MPI_TAG, MPI_COMM_WORLD,
             MPI_STATUS_IGNORE);
    last_heard[status.MPI_SOURCE] = now;
    if (status.MPI_TAG == TAG_ALIVE) continue;
    if (status.MPI_TAG == TAG_BYE) {
      gone[status.MPI_SOURCE] = 1;
      byes++;
      continue;
    }
    result_head h;
    memcpy(&h, buf, sizeof h);
    if (h.index >= 0) {
      held[status.MPI_SOURCE]--;
      char no_memory[64];
      const char *text = h.message_length > 0 ? buf + sizeof h : "";
      if (h.status == JG_ENOMEM) {
        snprintf(no_memory, sizeof no_memory, "out of memory on MPI rank %d", status.MPI_SOURCE);
        text = no_memory;
      }
      m.feed.give(m.feed.context, h.index, (jg_status)h.status,
                  (const double *)(buf + sizeof h), text, 0.0);
    }
    long long next = manager_take_for_worker(&m, held[status.MPI_SOURCE], threads, ranks);
    if (next >= 0) held[status.MPI_SOURCE]++;
    MPI_Send(&next, 1, MPI_LONG_LONG, status.MPI_SOURCE, TAG_TASK, MPI_COMM_WORLD);
  }
  jg_status gave_up = silent ? give_up_on(&m, c, silent, held[silent], silent_for,
                                          silence_limit, err) : JG_OK;
  jg_scan_runner_join(runner);
  free(held);
  free(last_heard);
  free(gone);
  free(buf);
  pthread_mutex_destroy(&m.lock);
  jg_error fed_err;
  const jg_status fed = jg_scan_slice_feed_free(m.slice, &fed_err);
  if (gave_up != JG_OK) return gave_up;
  if (fed != JG_OK) {
    if (err) *err = fed_err;
    return fed;
  }
  /* Every point must be in: a worker that vanished would leave holes, and
   * the table writer refuses those rather than write a partial table. */
  return JG_OK;
}

/* ---- a worker (rank > 0) ----------------------------------------------- */

typedef struct worker {
  const jg_scan *s;
  pthread_mutex_t lock;
  pthread_cond_t have_task, have_result;
  long long *tasks; /* stack of indices, capacity WORKER_DEPTH * threads */
  int n_tasks;
  char *results;    /* packed results, same capacity */
  int *result_bytes;
  int n_results;
  int quit;
  double eval_seconds; /* time spent on points, and how many: for the naps */
  long long evaluated;
} worker;

/* A worker's computing threads: indices from the queue its main thread
 * fills, results packed for its main thread to send. */
static long long worker_feed_take(void *context) {
  worker *w = context;
  pthread_mutex_lock(&w->lock);
  while (w->n_tasks == 0 && !w->quit) pthread_cond_wait(&w->have_task, &w->lock);
  const long long i = w->n_tasks > 0 ? w->tasks[--w->n_tasks] : -1;
  pthread_mutex_unlock(&w->lock);
  return i;
}

static void worker_feed_give(void *context, long long index, jg_status st, const double *values,
                             const char *message, double seconds) {
  worker *w = context;
  const int n_values = jg_scan_values_per_point(w->s);
  pthread_mutex_lock(&w->lock);
  w->eval_seconds += seconds;
  w->evaluated++;
  char *slot = w->results + (size_t)w->n_results * result_size(n_values);
  pack_result(slot, index, st, values, n_values, message, &w->result_bytes[w->n_results]);
  w->n_results++;
  pthread_cond_signal(&w->have_result);
  pthread_mutex_unlock(&w->lock);
}

/* No memory for a thread's workspace: the rank cannot keep its promises. */
static void worker_feed_fail(void *context, const jg_error *e) {
  (void)context;
  (void)e;
  MPI_Abort(MPI_COMM_WORLD, EXIT_RUN_FAILED);
}

/* Send a request (with a result, or none) and take the reply: the next
 * index to compute, or -1 when there is none for now (none left, or none
 * to queue near the end). The wait naps instead of blocking in MPI_Recv
 * (see NAP_MIN_NS), with the ceiling from this rank's own points. */
static long long ask(worker *w, const char *msg, int bytes) {
  long long next = -1;
  MPI_Request rq[2];
  MPI_Isend(msg, bytes, MPI_BYTE, 0, TAG_REQUEST, MPI_COMM_WORLD, &rq[0]);
  MPI_Irecv(&next, 1, MPI_LONG_LONG, 0, TAG_TASK, MPI_COMM_WORLD, &rq[1]);
  long nap_ns = NAP_MIN_NS;
  int done = 0;
  for (;;) {
    MPI_Testall(2, rq, &done, MPI_STATUSES_IGNORE);
    if (done) break;
    pthread_mutex_lock(&w->lock);
    const long ceiling = nap_ceiling_ns(w->eval_seconds, w->evaluated);
    pthread_mutex_unlock(&w->lock);
    nap(&nap_ns, ceiling);
  }
  return next;
}

/* Wait for a computed result, saying every `beat` seconds (if > 0) that
 * this rank is alive. Called with w->lock held. */
static void wait_for_result(worker *w, double beat) {
  while (w->n_results == 0) {
    if (beat <= 0) {
      pthread_cond_wait(&w->have_result, &w->lock);
      continue;
    }
    struct timespec until;
    clock_gettime(CLOCK_REALTIME, &until);
    const double t = (double)until.tv_sec + 1e-9 * (double)until.tv_nsec + beat;
    until.tv_sec = (time_t)t;
    until.tv_nsec = (long)((t - (double)until.tv_sec) * 1e9);
    if (pthread_cond_timedwait(&w->have_result, &w->lock, &until) != 0 && w->n_results == 0) {
      pthread_mutex_unlock(&w->lock);
      MPI_Send(NULL, 0, MPI_BYTE, 0, TAG_ALIVE, MPI_COMM_WORLD);
      pthread_mutex_lock(&w->lock);
    }
  }
}

static void run_worker(const jg_scan *s, int threads, double silence_limit) {
  worker w;
  memset(&w, 0, sizeof w);
  w.s = s;
  const int depth = WORKER_DEPTH * threads;
  const int n_values = jg_scan_values_per_point(s);
  const size_t slot = result_size(n_values);
  w.tasks = malloc(sizeof *w.tasks * (size_t)depth);
  w.results = malloc(slot * (size_t)depth);
  w.result_bytes = malloc(sizeof *w.result_bytes * (size_t)depth);
  char *msg = malloc(slot);
  if (!w.tasks || !w.results || !w.result_bytes || !msg) MPI_Abort(MPI_COMM_WORLD, EXIT_RUN_FAILED);
  pthread_mutex_init(&w.lock, NULL);
  pthread_cond_init(&w.have_task, NULL);
  pthread_cond_init(&w.have_result, NULL);
  const jg_scan_feed feed = {&w, worker_feed_take, worker_feed_give, worker_feed_fail};
  jg_scan_runner *runner = NULL;
  jg_error e;
  if (jg_scan_runner_start(s, threads, &feed, &runner, &e) != JG_OK ||
      jg_scan_runner_threads(runner) < threads)
    MPI_Abort(MPI_COMM_WORLD, EXIT_RUN_FAILED); /* fewer threads would leave queued points */

  /* Every index held is in the queue, computing, or a result not yet sent;
   * never more than `depth` of them, the capacity of each buffer. */
  int outstanding = 0, bytes = 0;
  pack_result(msg, -1, JG_OK, NULL, 0, NULL, &bytes);
  for (int i = 0; i < depth; i++) {
    long long next = ask(&w, msg, bytes);
    if (next < 0) break;
    pthread_mutex_lock(&w.lock);
    w.tasks[w.n_tasks++] = next;
    pthread_cond_signal(&w.have_task);
    pthread_mutex_unlock(&w.lock);
    outstanding++;
  }
  while (outstanding > 0) {
    pthread_mutex_lock(&w.lock);
    wait_for_result(&w, silence_limit / HEARTBEATS_PER_LIMIT);
    w.n_results--;
    bytes = w.result_bytes[w.n_results];
    memcpy(msg, w.results + (size_t)w.n_results * slot, (size_t)bytes);
    pthread_mutex_unlock(&w.lock);
    outstanding--;
    long long next = ask(&w, msg, bytes);
    if (next >= 0) {
      pthread_mutex_lock(&w.lock);
      w.tasks[w.n_tasks++] = next;
      pthread_cond_signal(&w.have_task);
      pthread_mutex_unlock(&w.lock);
      outstanding++;
    }
  }
  pthread_mutex_lock(&w.lock);
  w.quit = 1;
  pthread_cond_broadcast(&w.have_task);
  pthread_mutex_unlock(&w.lock);
  jg_scan_runner_join(runner);
  MPI_Send(msg, 0, MPI_BYTE, 0, TAG_BYE, MPI_COMM_WORLD);
  pthread_cond_destroy(&w.have_task);
  pthread_cond_destroy(&w.have_result);
  pthread_mutex_destroy(&w.lock);
  free(w.tasks);
  free(w.results);
  free(w.result_bytes);
  free(msg);
}

jg_status scan_mpi_run(const jg_scan *s, jg_scan_checkpoint *c, int threads,
                       double silence_limit, jg_scan_listener listener, void *context,
                       jg_error *err) {
  int rank = 0, ranks = 1;
  MPI_Comm_rank(MPI_COMM_WORLD, &rank);
  MPI_Comm_size(MPI_COMM_WORLD, &ranks);
  if (rank == 0)
    return run_manager(s, c, threads, ranks, silence_limit, listener, context, err);
  run_worker(s, threads, silence_limit);
  return JG_OK;
}

#endif
