/*
 * http/waiter.c -- requests that wait without holding a thread.
 *
 * Design
 *   libmicrohttpd serves connections from a few event-loop threads, so a
 *   handler must never block (a check's wait_s, a cancel waiting for the
 *   record). A handler that would wait instead fills out->pending: a
 *   non-blocking predicate `ready` (e.g. "has the check ended?"), a
 *   deadline (monotonic seconds), a `finish` function that writes the
 *   answer, and `drop` that frees the context when the request goes away
 *   unanswered. server.c then suspends the connection
 *   (MHD_suspend_connection) and lists the request here.
 *
 *   One waiter thread looks at the listed requests every
 *   FG_HTTP_WAITER_TICK_MS: when `ready` says yes or the deadline has
 *   passed it unlists the request, records which (`timed_out`) and
 *   resumes the connection (MHD_resume_connection). libmicrohttpd then
 *   calls the access handler again on one of its threads, which calls
 *   `finish`; `finish` may fill out->pending once more to wait again
 *   (e.g. the next look at a shared store 50 ms later).
 *
 *   `ready` runs on the waiter thread, so it must be quick and
 *   thread-safe and must not block: a look at an atomic or a zero-timeout
 *   wait. Everything slow (the store, JSON) belongs in `finish`.
 *
 *   Shutdown (fg_waiter_stop): every listed request is resumed as timed
 *   out at once, and any added later is resumed at once, so none is left
 *   suspended when the daemon stops (libmicrohttpd refuses to stop with
 *   suspended connections). fg_waiter_free, after the daemon has
 *   stopped, releases the lock.
 *
 * Locking: `lock` guards the list and every listed request's `waiting`
 * flag; resuming happens under it (MHD_resume_connection only flags the
 * connection and wakes its thread; it calls none of our callbacks), so a
 * request is never freed (on_completed unlists it under the same lock)
 * while the waiter resumes it.
 *
 * Thread use: fg_waiter_add and fg_waiter_remove from libmicrohttpd's
 * threads; the loop on its own thread; start and stop on the main thread.
 */
#include "http/http_internal.h"

#include <errno.h>
#include <stdlib.h>
#include <time.h>

static void *waiter_loop(void *arg) {
  fg_server *srv = arg;
  fg_waiter *w = &srv->waiter;
  pthread_mutex_lock(&w->lock);
  while (!w->stop) {
    double now = fg_time_monotonic();
    for (fg_req **pp = &w->head; *pp;) {
      fg_req *r = *pp;
      bool ready = r->pending.ready && r->pending.ready(r->pending.ctx);
      if (ready || now >= r->pending.deadline) {
        *pp = r->next_waiting;
        r->next_waiting = NULL;
        r->waiting = false;
        r->resumed = true;
        r->timed_out = !ready;
        w->count--;
        MHD_resume_connection(r->conn);
      } else {
        pp = &r->next_waiting;
      }
    }
    struct timespec ts;
    fg_clock_abs_deadline(&ts, FG_HTTP_WAITER_TICK_MS / 1000.0);
    /* woken early by fg_waiter_add (a new request) and fg_waiter_stop */
    pthread_cond_timedwait(&w->wake, &w->lock, &ts);
  }
  /* Stopping: resume every request left, as timed out. */
  while (w->head) {
    fg_req *r = w->head;
    w->head = r->next_waiting;
    r->next_waiting = NULL;
    r->waiting = false;
    r->resumed = true;
    r->timed_out = true;
    w->count--;
    MHD_resume_connection(r->conn);
  }
  pthread_mutex_unlock(&w->lock);
  return NULL;
}

bool fg_waiter_start(fg_server *srv) {
  fg_waiter *w = &srv->waiter;
  pthread_mutex_init(&w->lock, NULL);
  pthread_cond_init(&w->wake, NULL);
  w->head = NULL;
  w->stop = false;
  w->joined = false;
  w->count = 0;
  if (pthread_create(&w->thread, NULL, waiter_loop, srv) != 0) {
    pthread_cond_destroy(&w->wake);
    pthread_mutex_destroy(&w->lock);
    return false;
  }
  w->started = true;
  return true;
}

void fg_waiter_add(fg_server *srv, fg_req *r) {
  fg_waiter *w = &srv->waiter;
  pthread_mutex_lock(&w->lock);
  r->resumed = false;
  r->timed_out = false;
  if (w->stop) {
    /* Shutting down: answer at once, as timed out. */
    r->resumed = true;
    r->timed_out = true;
    MHD_resume_connection(r->conn);
  } else {
    r->waiting = true;
    r->next_waiting = w->head;
    w->head = r;
    w->count++;
    pthread_cond_signal(&w->wake);
  }
  pthread_mutex_unlock(&w->lock);
}

void fg_waiter_remove(fg_server *srv, fg_req *r) {
  fg_waiter *w = &srv->waiter;
  if (!w->started) return;
  pthread_mutex_lock(&w->lock);
  if (r->waiting) {
    for (fg_req **pp = &w->head; *pp; pp = &(*pp)->next_waiting) {
      if (*pp == r) {
        *pp = r->next_waiting;
        w->count--;
        break;
      }
    }
    r->waiting = false;
  }
  pthread_mutex_unlock(&w->lock);
}

int fg_waiter_count(fg_server *srv) {
  fg_waiter *w = &srv->waiter;
  if (!w->started) return 0;
  pthread_mutex_lock(&w->lock);
  int n = w->count;
  pthread_mutex_unlock(&w->lock);
  return n;
}

void fg_waiter_stop(fg_server *srv) {
  fg_waiter *w = &srv->waiter;
  if (!w->started || w->joined) return;
  pthread_mutex_lock(&w->lock);
  w->stop = true;
  pthread_cond_signal(&w->wake);
  pthread_mutex_unlock(&w->lock);
  pthread_join(w->thread, NULL);
  w->joined = true;
}

void fg_waiter_free(fg_server *srv) {
  fg_waiter *w = &srv->waiter;
  if (!w->started) return;
  if (!w->joined) fg_waiter_stop(srv);
  w->started = false;
  pthread_cond_destroy(&w->wake);
  pthread_mutex_destroy(&w->lock);
}
