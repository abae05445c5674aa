/*
 * store/replicas.c -- interrupted checks, and the upkeep of replicas that
 * share one store: instance, heartbeat, sweep, cancel requests.
 *
 * Why: a check left "running" by a process that is gone must not stay so.
 * With one daemon per store (SQLite) every running check at start-up is
 * such a check; with several replicas on one database (PostgreSQL) only
 * those of replicas that stopped saying they are alive are.
 *
 * Design
 *   Store of one daemon: fg_store_mark_interrupted first lets the backend
 *   claim the store (SQLite: a lock on <path>.lock, refused with FG_EBUSY
 *   naming the holder while another daemon serves the file), so a second
 *   daemon never marks the first one's checks; then every running check
 *   and comparison becomes interrupted, in one transaction.
 *
 *   Shared store: each daemon is an *instance* (a random id made at open,
 *   with host and pid). fg_store_mark_interrupted registers it in
 *   `instances` and starts an upkeep thread that refreshes its heartbeat
 *   every FG_REPLICA_HEARTBEAT_MS (the database's clock, so replicas'
 *   clocks do not matter) and every FG_REPLICA_SWEEP_MS marks interrupted
 *   the running checks and comparisons whose owner's heartbeat is older
 *   than FG_REPLICA_STALE_S (a replica that died or lost the database),
 *   and removes instance rows silent for FG_REPLICA_KEEP_S (all in
 *   limits.h). A cancel asked through another replica sets the check's
 *   `cancel_requested`; the owner reads its requests every second
 *   (fg_store_cancel_requests) and cancels. A daemon that stops cleanly removes its instance row. Tools
 *   that only open the store (`feasgate keys`) are no instance.
 *
 * Thread use: any thread; the store's lock guards the upkeep fields and is
 * never held while a connection is used. The upkeep thread takes a
 * connection for each beat.
 */
#include "feasgate/clock.h"
#include "feasgate/limits.h"
#include "store/db.h"

#include <stdio.h>
#include <string.h>
#include <sys/random.h>
#include <unistd.h>

fg_status fg_replica_init(fg_store *s, fg_problem *p) {
  uint8_t rnd[16];
  if (getrandom(rnd, sizeof rnd, 0) != (ssize_t)sizeof rnd)
    return fg_problem_set(p, FG_EIO, "store: no random bytes for an id");
  for (int i = 0; i < 16; i++)
    snprintf(s->instance + 2 * i, 3, "%02x", rnd[i]);
  return FG_OK;
}

/* The owner recorded with a new check: this instance once registered,
 * "" before. */
const char *fg_replica_owner(fg_store *s, char buf[33]) {
  pthread_mutex_lock(&s->lock);
  snprintf(buf, 33, "%s", s->upkeep_started ? s->instance : "");
  pthread_mutex_unlock(&s->lock);
  return buf;
}

static bool upkeep_started(fg_store *s) {
  pthread_mutex_lock(&s->lock);
  bool on = s->upkeep_started;
  pthread_mutex_unlock(&s->lock);
  return on;
}

/* Marks interrupted, in one transaction: every running check and
 * comparison (a store of one daemon), or those of silent owners and then
 * old instance rows (a shared store). *count = checks marked. */
static fg_status mark(fg_store *s, fg_conn *c, int *count, fg_problem *p) {
  char now[32];
  fg_store_now_rfc3339(now);
  const char *what = "marking interrupted checks";
  fg_status res = c->b->begin(c, what, p);
  if (res != FG_OK) return res;
  const bool shared = s->b->shared;
  fg_arg a[] = {fg_text(now), fg_text(s->instance), fg_int(FG_REPLICA_STALE_S)};
  const int n = shared ? 3 : 1;
  long marked = 0;
  res = fg_db_write(s, c, shared ? SQL_MARK_STALE : SQL_MARK_RUNNING, a, n,
                    what, &marked, p);
  if (res == FG_OK) /* comparisons left running end with them */
    res = fg_db_write(s, c, shared ? SQL_MARK_CMP_STALE : SQL_MARK_CMP_RUNNING,
                      a, n, "marking interrupted comparisons", NULL, p);
  if (res == FG_OK && shared) {
    fg_arg keep[] = {fg_int(FG_REPLICA_KEEP_S)};
    res = fg_db_write(s, c, SQL_INSTANCE_PRUNE, FG_ARGS(keep),
                      "pruning instances", NULL, p);
  }
  res = fg_db_end_tx(c, res, what, p);
  if (count) *count = res == FG_OK ? (int)marked : 0;
  return res;
}

static void *upkeep_main(void *arg) {
  fg_store *s = arg;
  long since_sweep = 0;
  pthread_mutex_lock(&s->lock);
  while (!s->stopping) {
    struct timespec until;
    fg_clock_abs_deadline(&until, FG_REPLICA_HEARTBEAT_MS / 1000.0);
    while (!s->stopping &&
           pthread_cond_timedwait(&s->stop_cv, &s->lock, &until) == 0) {
    }
    if (s->stopping) break;
    /* Failures are retried at the next beat: a lost database shows in
     * /v1/ready, and a long silence lets other replicas take over. The
     * store's lock is not held while a connection is used. */
    pthread_mutex_unlock(&s->lock);
    fg_problem p;
    fg_problem_init(&p);
    fg_conn *c;
    if (fg_db_enter(s, &c, &p) == FG_OK) {
      fg_arg a[] = {fg_text(s->instance)};
      c->b->exec(c, SQL_INSTANCE_BEAT, FG_ARGS(a), "heartbeat", NULL, &p);
      since_sweep += FG_REPLICA_HEARTBEAT_MS;
      if (since_sweep >= FG_REPLICA_SWEEP_MS) {
        since_sweep = 0;
        fg_problem_init(&p);
        mark(s, c, NULL, &p);
      }
      fg_db_leave(c);
    }
    pthread_mutex_lock(&s->lock);
  }
  pthread_mutex_unlock(&s->lock);
  return NULL;
}

/* Registers this instance (once), sweeps, and starts the upkeep thread. */
static fg_status start_instance(fg_store *s, int *count, fg_problem *p) {
  fg_conn *c;
  fg_status res = fg_db_enter(s, &c, p);
  if (res != FG_OK) return res;
  const bool started = upkeep_started(s);
  if (!started) {
    char now[32], host[256] = "";
    fg_store_now_rfc3339(now);
    if (gethostname(host, sizeof host - 1) != 0)
      snprintf(host, sizeof host, "?");
    fg_arg a[] = {fg_text(s->instance), fg_text(host),
                  fg_int((long long)getpid()), fg_text(now)};
    const char *what = "registering this instance";
    res = c->b->begin(c, what, p);
    if (res == FG_OK)
      res = fg_db_write(s, c, SQL_INSTANCE_UPSERT, FG_ARGS(a), what, NULL, p);
    res = fg_db_end_tx(c, res, what, p);
  }
  if (res == FG_OK) res = mark(s, c, count, p);
  fg_db_leave(c);
  if (res == FG_OK && !started) {
    pthread_mutex_lock(&s->lock);
    if (pthread_create(&s->upkeep, NULL, upkeep_main, s) != 0)
      res =
          fg_problem_set(p, FG_EIO, "store: cannot start the heartbeat thread");
    else
      s->upkeep_started = true;
    pthread_mutex_unlock(&s->lock);
  }
  return res;
}

fg_status fg_store_mark_interrupted(fg_store *s, int *count, fg_problem *p) {
  *count = 0;
  if (s->b->shared) return start_instance(s, count, p);
  /* Only the store's one daemon may call running checks interrupted: a
   * second daemon stops here, before it touches a check. */
  fg_status res = s->b->claim ? s->b->claim(s->db, p) : FG_OK;
  if (res != FG_OK) return res;
  fg_conn *c;
  res = fg_db_enter(s, &c, p);
  if (res != FG_OK) return res;
  res = mark(s, c, count, p);
  fg_db_leave(c);
  return res;
}

void fg_replica_stop(fg_store *s) {
  if (!upkeep_started(s)) return;
  pthread_mutex_lock(&s->lock);
  s->stopping = true;
  pthread_cond_broadcast(&s->stop_cv);
  pthread_mutex_unlock(&s->lock);
  pthread_join(s->upkeep, NULL);
  /* a clean stop: this instance's row goes (its checks have ended) */
  fg_conn *c;
  if (fg_db_enter(s, &c, NULL) == FG_OK) {
    fg_arg a[] = {fg_text(s->instance)};
    c->b->exec(c, SQL_INSTANCE_END, FG_ARGS(a), "ending this instance", NULL,
               NULL);
    fg_db_leave(c);
  }
}

fg_status fg_store_request_cancel(fg_store *s, const char *id, fg_problem *p) {
  if (!s->b->shared)
    return fg_problem_set(p, FG_EUNSUPPORTED,
                          "store: the %s store has no other replicas to ask",
                          s->b->scheme);
  fg_conn *c;
  fg_status res = fg_db_enter(s, &c, p);
  if (res != FG_OK) return res;
  fg_arg a[] = {fg_text(id)};
  long asked = 0;
  res = fg_db_write(s, c, SQL_CANCEL_ASK, FG_ARGS(a), "asking for a cancel",
                    &asked, p);
  if (res == FG_OK && asked == 0) {
    bool row = false;
    res = fg_db_first(c, SQL_CANCEL_STATUS, FG_ARGS(a),
                      "reading a check's status", &row, p);
    if (res == FG_OK && !row)
      res = fg_problem_set(p, FG_ENOTFOUND, "no check with id '%s'", id);
    else if (res == FG_OK)
      res = fg_problem_set(p, FG_ECONFLICT,
                           "check %s is not running: it ended %s", id,
                           c->b->text(c, 0));
    fg_db_done(c);
  }
  fg_db_leave(c);
  return res;
}

fg_status fg_store_cancel_requests(fg_store *s, char (*ids)[40], int cap,
                                   int *n, fg_problem *p) {
  *n = 0;
  /* not shared, or no instance: no checks of ours to ask about */
  if (!s->b->shared || !upkeep_started(s)) return FG_OK;
  fg_conn *c;
  fg_status res = fg_db_enter(s, &c, p);
  if (res != FG_OK) return res;
  fg_arg a[] = {fg_text(s->instance), fg_int(cap)};
  bool row = false;
  res = fg_db_first(c, SQL_CANCEL_ASKED, FG_ARGS(a), "reading cancel requests",
                    &row, p);
  while (res == FG_OK && row && *n < cap) {
    fg_db_copy(c, 0, ids[(*n)++], 40);
    res = fg_db_next(c, &row, p);
  }
  fg_db_done(c);
  fg_db_leave(c);
  return res;
}
