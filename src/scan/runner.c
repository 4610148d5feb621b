/*
 * Running a scan on threads. jg_scan_runner_start starts threads that take
 * point indices from a feed, evaluate them (each thread with its own
 * workspace) and give the results back to the feed; the feed decides where
 * indices come from and where results go. jg_scan_run is the feed of one
 * process (the missing points of the slice, into the checkpoint); the
 * program's MPI driver has feeds of its own (indices from rank 0, results
 * back to it) and keeps only the messaging.
 */
#include "scan_internal.h"

#include <stdlib.h>
#include <string.h>

#include "../base/clock.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* ---- threads over a feed -------------------------------------------------- */

struct jg_scan_runner {
  const jg_scan *s;
  jg_scan_feed feed;
  pthread_t *threads;
  int started;
};

void jg_scan_feed_work(const jg_scan *s, const jg_scan_feed *feed) {
  jg_error e;
  jg_error_clear(&e);
  void *ws = jg_scan_workspace_new(s, &e);
  const int n_values = jg_scan_values_per_point(s);
  double *values = malloc(sizeof(double) * (size_t)(n_values > 0 ? n_values : 1));
  if (!ws || !values) {
    if (!values) JG_FAIL(&e, JG_ENOMEM, "out of memory for a scan thread");
    feed->fail(feed->context, &e);
    jg_scan_workspace_free(s, ws);
    free(values);
    return;
  }
  long long i;
  while ((i = feed->take(feed->context)) >= 0) {
    jg_error_clear(&e);
    const double t0 = jg__monotonic_seconds();
    const jg_status st = jg_scan_evaluate(s, i, ws, values, &e);
    const double seconds = jg__monotonic_seconds() - t0;
    feed->give(feed->context, i, st, values, st == JG_OK ? "" : e.message, seconds);
  }
  jg_scan_workspace_free(s, ws);
  free(values);
}

static void *run_thread(void *arg) {
  jg_scan_runner *r = arg;
  jg_scan_feed_work(r->s, &r->feed);
  return NULL;
}

jg_status jg_scan_runner_start(const jg_scan *s, int threads, const jg_scan_feed *feed,
                               jg_scan_runner **out, jg_error *err) {
  *out = NULL;
  if (!s || !feed || !feed->take || !feed->give || !feed->fail)
    return JG_FAIL(err, JG_EINVAL, "jg_scan_runner_start: scan and a complete feed needed");
  if (threads < 1)
    return JG_FAIL(err, JG_EINVAL, "jg_scan_runner_start: threads must be >= 1 (got %d)",
                   threads);
  jg_scan_runner *r = calloc(1, sizeof *r);
  pthread_t *tid = malloc(sizeof *tid * (size_t)threads);
  if (!r || !tid) {
    free(r);
    free(tid);
    return JG_FAIL(err, JG_ENOMEM, "out of memory for %d scan threads", threads);
  }
  r->s = s;
  r->feed = *feed;
  r->threads = tid;
  for (; r->started < threads; r->started++)
    if (pthread_create(&tid[r->started], NULL, run_thread, r) != 0) break;
  *out = r;
  return JG_OK;
}

int jg_scan_runner_threads(const jg_scan_runner *r) { return r ? r->started : 0; }

void jg_scan_runner_join(jg_scan_runner *r) {
  if (!r) return;
  for (int i = 0; i < r->started; i++) pthread_join(r->threads[i], NULL);
  free(r->threads);
  free(r);
}

/* ---- the feed of one process: the slice's missing points, into the
 * checkpoint ---------------------------------------------------------------- */

typedef struct run_state {
  const jg_scan *s;
  jg_scan_checkpoint *c;
  jg_scan_listener listener;
  void *context;
  pthread_mutex_t lock;
  long long next; /* lowest index not yet handed out */
  int stop;
  jg_status fatal;
  jg_error fatal_err;
} run_state;

/* Called with the lock held. */
static void run_stop(run_state *r, const jg_error *e) {
  if (r->fatal == JG_OK) {
    r->fatal = e->status != JG_OK ? e->status : JG_EIO;
    r->fatal_err = *e;
  }
  r->stop = 1;
}

static long long run_take(void *context) {
  run_state *r = context;
  pthread_mutex_lock(&r->lock);
  const long long end = r->s->first + r->s->count;
  while (r->next < end && jg_scan_checkpoint_has(r->c, r->next)) r->next++;
  long long i = (!r->stop && r->next < end) ? r->next++ : -1;
  pthread_mutex_unlock(&r->lock);
  return i;
}

static void run_give(void *context, long long index, jg_status status, const double *values,
                     const char *message, double seconds) {
  (void)seconds;
  run_state *r = context;
  pthread_mutex_lock(&r->lock);
  jg_error werr;
  jg_error_clear(&werr);
  if (status == JG_ENOMEM) { /* the run cannot go on; the point stays missing */
    JG_FAIL(&werr, JG_ENOMEM, "%s", message);
    run_stop(r, &werr);
  } else if (jg_scan_checkpoint_add(r->c, index, status, values, message, &werr) != JG_OK) {
    run_stop(r, &werr);
  } else if (r->listener) {
    jg_scan_event ev = {index, status, message, r->c->done, r->c->failed, r->s->count};
    r->listener(r->context, &ev);
  }
  pthread_mutex_unlock(&r->lock);
}

static void run_fail(void *context, const jg_error *e) {
  run_state *r = context;
  pthread_mutex_lock(&r->lock);
  run_stop(r, e);
  pthread_mutex_unlock(&r->lock);
}

jg_status jg_scan_run(const jg_scan *s, jg_scan_checkpoint *c, int threads,
                      jg_scan_listener listener, void *context, jg_error *err) {
  if (!s || !c || c->s != s) return JG_FAIL(err, JG_EINVAL, "jg_scan_run: scan and checkpoint do not match");
  if (threads < 1) return JG_FAIL(err, JG_EINVAL, "jg_scan_run: threads must be >= 1 (got %d)", threads);
  long long missing = s->count - c->done;
  if (missing <= 0) return JG_OK;
  if (threads > missing) threads = (int)missing;
  run_state r;
  memset(&r, 0, sizeof r);
  r.s = s;
  r.c = c;
  r.listener = listener;
  r.context = context;
  r.next = s->first;
  r.fatal = JG_OK;
  pthread_mutex_init(&r.lock, NULL);
  const jg_scan_feed feed = {&r, run_take, run_give, run_fail};
  jg_scan_runner *runner = NULL;
  jg_status st = jg_scan_runner_start(s, threads, &feed, &runner, err);
  if (st == JG_OK && jg_scan_runner_threads(runner) == 0)
    jg_scan_feed_work(s, &feed); /* no thread could start: do the work here */
  jg_scan_runner_join(runner);
  pthread_mutex_destroy(&r.lock);
  if (st != JG_OK) return st;
  if (r.fatal != JG_OK) {
    if (err) *err = r.fatal_err;
    return r.fatal;
  }
  return JG_OK;
}
