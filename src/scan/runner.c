/*
 * Running a scan on threads. jg_scan_runner_start runs threads that take
 * point indices from a feed and give it the results; the feed decides where
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

typedef struct run_state {
  const jg_scan *s;
  jg_scan_checkpoint *c;
  jg_scan_listener listener;
  void *context;
  pthread_mutex_t lock;
  long long next;      /* lowest index not yet handed out */
  int stop;
  jg_status fatal;
  jg_error fatal_err;
} run_state;

static long long take_point(run_state *r) {
  pthread_mutex_lock(&r->lock);
  const long long end = r->s->first + r->s->count;
  while (r->next < end && jg_scan_checkpoint_has(r->c, r->next)) r->next++;
  long long i = (!r->stop && r->next < end) ? r->next++ : -1;
  pthread_mutex_unlock(&r->lock);
  return i;
}

static void run_fail(run_state *r, const jg_error *e) {
  pthread_mutex_lock(&r->lock);
  if (r->fatal == JG_OK) {
    r->fatal = e->status != JG_OK ? e->status : JG_EIO;
    r->fatal_err = *e;
  }
  r->stop = 1;
  pthread_mutex_unlock(&r->lock);
}

static void *run_worker(void *arg) {
  run_state *r = arg;
  jg_error e;
  jg_error_clear(&e);
  void *ws = jg_scan_workspace_new(r->s, &e);
  double *values = malloc(sizeof(double) * (size_t)(r->s->n_values > 0 ? r->s->n_values : 1));
  if (!ws || !values) {
    if (!values) JG_FAIL(&e, JG_ENOMEM, "out of memory for a scan thread");
    run_fail(r, &e);
    jg_scan_workspace_free(r->s, ws);
    free(values);
    return NULL;
  }
  long long i;
  while ((i = take_point(r)) >= 0) {
    jg_error_clear(&e);
    jg_status st = jg_scan_evaluate(r->s, i, ws, values, &e);
    if (st == JG_ENOMEM) {
      run_fail(r, &e);
      break;
    }
    pthread_mutex_lock(&r->lock);
    jg_error werr;
    jg_error_clear(&werr);
    jg_status wst = jg_scan_checkpoint_add(r->c, i, st, values, e.message, &werr);
    if (wst == JG_OK && r->listener) {
      jg_scan_event ev = {i, st, st == JG_OK ? "" : e.message, r->c->done, r->c->failed,
                          r->s->count};
      r->listener(r->context, &ev);
    }
    pthread_mutex_unlock(&r->lock);
    if (wst != JG_OK) {
      run_fail(r, &werr);
      break;
    }
  }
  jg_scan_workspace_free(r->s, ws);
  free(values);
  return NULL;
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
  pthread_t *tid = malloc(sizeof *tid * (size_t)threads);
  if (!tid) {
    pthread_mutex_destroy(&r.lock);
    return JG_FAIL(err, JG_ENOMEM, "out of memory for %d threads", threads);
  }
  int started = 0;
  for (; started < threads; started++)
    if (pthread_create(&tid[started], NULL, run_worker, &r) != 0) break;
  if (started == 0) run_worker(&r); /* no thread could start: do the work here */
  for (int i = 0; i < started; i++) pthread_join(tid[i], NULL);
  free(tid);
  pthread_mutex_destroy(&r.lock);
  if (r.fatal != JG_OK) {
    if (err) *err = r.fatal_err;
    return r.fatal;
  }
  return JG_OK;
}
