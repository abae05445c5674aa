/*
 * http/replica_wait.c -- a DELETE of a check or comparison that another
 * replica runs: the cancel is asked through the store (the owner picks it
 * up within a second), and the request waits, suspended, for the record to
 * end.
 *
 * Design: the request is suspended (waiter.c) with a deadline
 * FG_HTTP_REPLICA_LOOK_S away; each time it comes due, finish runs on a
 * libmicrohttpd thread and calls the caller's `look`, which reads the
 * record from the store and either answers (ended, or an error) or says
 * it still runs. Still running before FG_HTTP_CANCEL_WAIT_S has passed:
 * wait again; after: 503 naming what and its id. No lock is held while
 * the store is read.
 *
 * Thread use: libmicrohttpd's threads; each wait belongs to one request.
 */
#include "http/http_internal.h"

#include <stdio.h>
#include <stdlib.h>

typedef struct replica_wait {
  double until; /* fg_time_monotonic() seconds */
  const char *what;
  fg_replica_look *look;
  char id[FG_HTTP_PATH_MAX + 1];
} replica_wait;

/* The next look: FG_HTTP_REPLICA_LOOK_S away, never past the end. */
static void wait_again(replica_wait *rw, double now, fg_resp *out);

static void finish(fg_req *r, void *ctx, bool timed_out, fg_resp *out) {
  (void)timed_out; /* the deadline is ours: the wait's own clock decides */
  replica_wait *rw = ctx;
  if (rw->look(r, rw->id, out)) {
    free(rw);
    return;
  }
  double now = fg_time_monotonic();
  if (now < rw->until) {
    wait_again(rw, now, out);
    return;
  }
  fg_resp_error(out, 503, FG_EBUSY,
                "%s %s runs in another replica, which was asked to stop it "
                "but has not within %g s; GET it shortly",
                rw->what, rw->id, FG_HTTP_CANCEL_WAIT_S);
  free(rw);
}

static void wait_again(replica_wait *rw, double now, fg_resp *out) {
  double next = now + FG_HTTP_REPLICA_LOOK_S;
  out->pending = (fg_pending){.finish = finish,
                              .drop = free,
                              .ctx = rw,
                              .deadline = next < rw->until ? next : rw->until};
}

void fg_replica_wait(const char *what, const char *id, fg_replica_look *look,
                     fg_resp *out) {
  replica_wait *rw = malloc(sizeof *rw);
  if (!rw) {
    fg_resp_error(out, 503, FG_ENOMEM,
                  "out of memory waiting for %s %s to stop", what, id);
    return;
  }
  double now = fg_time_monotonic();
  rw->until = now + FG_HTTP_CANCEL_WAIT_S;
  rw->what = what;
  rw->look = look;
  snprintf(rw->id, sizeof rw->id, "%s", id);
  wait_again(rw, now, out);
}
