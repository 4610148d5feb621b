/*
 * Running a scan on threads. jg_scan_runner_start starts threads that take
 * point indices from a feed, evaluate them (each thread with its own
 * workspace) and give the results back to the feed; the feed decides where
 * indices come from and where results go. The slice feed hands out the
 * points of a slice missing from its checkpoint and records the results:
 * jg_scan_run runs it on threads, and the program's MPI manager feeds its
 * own threads and the other ranks' results through it. The MPI workers
 * have feeds of their own (indices from rank 0, results back to it), so the
 * MPI code keeps only its messaging.
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

/* ---- the slice feed: the slice's missing points, into the checkpoint ----- */

struct jg_scan_slice_feed {
  const jg_scan *s;
  jg_scan_checkpoint *c;
  jg_scan_listener listener;
  void *context;
  pthread_mutex_t lock;
  long long next;       /* lowest index not yet handed out */
  long long unassigned; /* points neither recorded nor handed out */
  int stop;
  jg_status fatal;
  jg_error fatal_err;
};

/* Called with the lock held. */
static void slice_stop(jg_scan_slice_feed *f, const jg_error *e) {
  if (e && f->fatal == JG_OK) {
    f->fatal = e->status != JG_OK ? e->status : JG_EIO;
    f->fatal_err = *e;
  }
  f->stop = 1;
}

static long long slice_take(void *context) {
  jg_scan_slice_feed *f = context;
  pthread_mutex_lock(&f->lock);
  const long long end = f->s->first + f->s->count;
  while (f->next < end && jg_scan_checkpoint_has(f->c, f->next)) f->next++;
  long long i = (!f->stop && f->next < end) ? f->next++ : -1;
  if (i >= 0) f->unassigned--;
  pthread_mutex_unlock(&f->lock);
  return i;
}

static void slice_give(void *context, long long index, jg_status status, const double *values,
                       const char *message, double seconds) {
  (void)seconds;
  jg_scan_slice_feed *f = context;
  pthread_mutex_lock(&f->lock);
  jg_error werr;
  jg_error_clear(&werr);
  if (status == JG_ENOMEM) { /* the run cannot go on; the point stays missing */
    JG_FAIL(&werr, JG_ENOMEM, "%s", message);
    slice_stop(f, &werr);
  } else if (jg_scan_checkpoint_add(f->c, index, status, values, message, &werr) != JG_OK) {
    slice_stop(f, &werr);
  } else if (f->listener) {
    jg_scan_event ev = {index, status, message, f->c->done, f->c->failed, f->s->count};
    f->listener(f->context, &ev);
  }
  pthread_mutex_unlock(&f->lock);
}

static void slice_fail(void *context, const jg_error *e) {
  jg_scan_slice_feed *f = context;
  pthread_mutex_lock(&f->lock);
  slice_stop(f, e);
  pthread_mutex_unlock(&f->lock);
}

jg_status jg_scan_slice_feed_new(const jg_scan *s, jg_scan_checkpoint *c,
                                 jg_scan_listener listener, void *context,
                                 jg_scan_slice_feed **out, jg_error *err) {
  *out = NULL;
  if (!s || !c || c->s != s)
    return JG_FAIL(err, JG_EINVAL, "jg_scan_slice_feed_new: scan and checkpoint do not match");
  jg_scan_slice_feed *f = calloc(1, sizeof *f);
  if (!f) return JG_FAIL(err, JG_ENOMEM, "out of memory for the scan feed");
  f->s = s;
  f->c = c;
  f->listener = listener;
  f->context = context;
  f->next = s->first;
  f->unassigned = s->count - c->done;
  f->fatal = JG_OK;
  pthread_mutex_init(&f->lock, NULL);
  *out = f;
  return JG_OK;
}

jg_scan_feed jg_scan_slice_feed_of(jg_scan_slice_feed *f) {
  const jg_scan_feed feed = {f, slice_take, slice_give, slice_fail};
  return feed;
}

long long jg_scan_slice_feed_unassigned(jg_scan_slice_feed *f) {
  pthread_mutex_lock(&f->lock);
  const long long n = f->unassigned;
  pthread_mutex_unlock(&f->lock);
  return n;
}

void jg_scan_slice_feed_stop(jg_scan_slice_feed *f) { slice_fail(f, NULL); }

jg_status jg_scan_slice_feed_free(jg_scan_slice_feed *f, jg_error *err) {
  if (!f) return JG_OK;
  const jg_status st = f->fatal;
  if (st != JG_OK && err) *err = f->fatal_err;
  pthread_mutex_destroy(&f->lock);
  free(f);
  return st;
}

jg_status jg_scan_run(const jg_scan *s, jg_scan_checkpoint *c, int threads,
                      jg_scan_listener listener, void *context, jg_error *err) {
  if (!s || !c || c->s != s) return JG_FAIL(err, JG_EINVAL, "jg_scan_run: scan and checkpoint do not match");
  if (threads < 1) return JG_FAIL(err, JG_EINVAL, "jg_scan_run: threads must be >= 1 (got %d)", threads);
  long long missing = s->count - c->done;
  if (missing <= 0) return JG_OK;
  if (threads > missing) threads = (int)missing;
  jg_scan_slice_feed *f = NULL;
  jg_status st = jg_scan_slice_feed_new(s, c, listener, context, &f, err);
  if (st != JG_OK) return st;
  const jg_scan_feed feed = jg_scan_slice_feed_of(f);
  jg_scan_runner *runner = NULL;
  st = jg_scan_runner_start(s, threads, &feed, &runner, err);
  if (st == JG_OK && jg_scan_runner_threads(runner) == 0)
    jg_scan_feed_work(s, &feed); /* no thread could start: do the work here */
  jg_scan_runner_join(runner);
  const jg_status fed = jg_scan_slice_feed_free(f, err);
  return st != JG_OK ? st : fed;
}
