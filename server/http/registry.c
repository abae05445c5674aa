/*
 * http/registry.c -- the checks and comparisons this process runs, by id,
 * and the watcher thread that records their ends.
 *
 * Design: every job (lifecycle.c) is listed from its start until its end
 * is in the store, so GET /v1/checks/{id} answers live from it and DELETE
 * finds it; every comparison (comparison.c) likewise until its result is
 * stored. The watcher looks every FG_REGISTRY_POLL_MS for listed jobs the
 * engine has ended and records them (fg_job_record_end: once, whoever is
 * first -- the handler that waited, DELETE, or the watcher), unlists what
 * is recorded, finishes comparisons whose candidates all ended
 * (fg_comparison_step), and writes again every FG_REGISTRY_RETRY_MS the
 * ends the store refused (a database outage loses no result while the
 * process lives; GET answers from the kept end meanwhile).
 *
 * Locking rule: `lock` guards the two lists and `stop`, nothing else; no
 * body is built, no interval computed and no store call made under it.
 * Whoever needs an entry takes a reference under the lock and works after
 * releasing it. The registry's lock is never held while taking a job's.
 *
 * Shared stores (PostgreSQL, several replicas): every
 * FG_REGISTRY_PROGRESS_MS the watcher also writes the live bodies of the
 * running checks to the store (fg_store_note_progress), so a replica that
 * does not run a check answers GET for it with progress at most that old,
 * and the watcher cancels the checks another replica was asked to cancel
 * (fg_store_cancel_requests).
 *
 * Shutdown (fg_registry_shutdown, main thread): wait up to grace_s for the
 * listed jobs to end and be recorded, cancel the rest (the engine ends a
 * cancelled check within FG_STUCK_WORKER_S even when a worker is stuck),
 * wait up to FG_REGISTRY_CANCEL_WAIT_S for them to be recorded (as
 * cancelled), then stop the watcher. A check whose end the store never
 * took stays `running` there and is marked `interrupted` at the next
 * start-up.
 *
 * Thread use: any thread; the watcher is internal.
 */
#include "http/http_internal.h"

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

typedef struct fg_entry {
  struct fg_entry *next;
  fg_job *job; /* one of job or cmp */
  fg_comparison *cmp;
} fg_entry;

struct fg_registry {
  fg_store *store;
  pthread_mutex_t lock;
  pthread_cond_t wake;    /* watcher: something to look at */
  pthread_cond_t changed; /* an entry went away */
  fg_entry *head;
  int njobs, ncmps;
  bool stop;
  pthread_t watcher;
  bool watcher_started;
};


static const char *entry_id(const fg_entry *e) {
  return e->job ? fg_job_id(e->job) : fg_comparison_id(e->cmp);
}

/* Unlink the entry of `job` or `cmp` (under lock); the caller drops the
 * reference it returns through *out. */
static fg_entry *unlink_entry(fg_registry *g, const void *item) {
  for (fg_entry **pp = &g->head; *pp; pp = &(*pp)->next) {
    fg_entry *e = *pp;
    if ((const void *)e->job == item || (const void *)e->cmp == item) {
      *pp = e->next;
      if (e->job)
        g->njobs--;
      else
        g->ncmps--;
      return e;
    }
  }
  return NULL;
}

static void drop_entry(fg_entry *e) {
  if (!e) return;
  fg_job_unref(e->job);
  fg_comparison_unref(e->cmp);
  free(e);
}

static void remove_item(fg_registry *g, const void *item) {
  pthread_mutex_lock(&g->lock);
  fg_entry *e = unlink_entry(g, item);
  pthread_cond_broadcast(&g->changed);
  pthread_mutex_unlock(&g->lock);
  drop_entry(e);
}

/* Shared store: write the bodies of running checks so that other
 * replicas answer GET with progress, and cancel what they asked for. */
static void note_progress(fg_registry *g) {
  fg_job *jobs[FG_REGISTRY_BATCH];
  int n = 0;
  pthread_mutex_lock(&g->lock);
  for (fg_entry *e = g->head; e && n < FG_REGISTRY_BATCH; e = e->next)
    if (e->job && !fg_job_ended(e->job)) jobs[n++] = fg_job_ref(e->job);
  pthread_mutex_unlock(&g->lock);
  char ids[FG_REGISTRY_BATCH][40];
  for (int i = 0; i < n; i++) {
    snprintf(ids[i], sizeof ids[i], "%s", fg_job_id(jobs[i]));
    cJSON *body = fg_job_body(jobs[i]);
    char *text = body ? cJSON_PrintUnformatted(body) : NULL;
    cJSON_Delete(body);
    if (!text) continue;
    fg_problem p;
    fg_problem_init(&p);
    if (fg_store_note_progress(g->store, ids[i], text, &p) != FG_OK)
      fg_log_msg(FG_LOG_WARN, "store_error", "noting progress of check %s: %s",
                 ids[i], p.detail);
    cJSON_free(text);
  }
  fg_problem p;
  fg_problem_init(&p);
  int nask = 0;
  char asked[FG_REGISTRY_BATCH][40];
  memcpy(asked, ids, sizeof ids);
  if (n > 0 && fg_store_cancel_requests(g->store, asked, FG_REGISTRY_BATCH,
                                        &nask, &p) != FG_OK)
    fg_log_msg(FG_LOG_WARN, "store_error", "reading cancel requests: %s",
               p.detail);
  for (int k = 0; k < nask; k++)
    for (int i = 0; i < n; i++)
      if (strcmp(asked[k], fg_job_id(jobs[i])) == 0 && !fg_job_ended(jobs[i])) {
        fg_job_cancel(jobs[i]);
        fg_log_msg(FG_LOG_INFO, "check_cancel_asked",
                   "check %s cancelled at another replica's request", asked[k]);
      }
  for (int i = 0; i < n; i++)
    fg_job_unref(jobs[i]);
}

/* One round: record ended jobs, retry unsaved ends, step comparisons.
 * True when something was done (look again at once). */
static bool round_once(fg_registry *g, double *next_retry) {
  fg_job *jobs[FG_REGISTRY_BATCH];
  fg_comparison *cmps[FG_REGISTRY_BATCH];
  int nj = 0, nc = 0;
  double now = fg_time_monotonic();
  bool retry_due = now >= *next_retry;
  pthread_mutex_lock(&g->lock);
  for (fg_entry *e = g->head; e; e = e->next) {
    if (e->job && nj < FG_REGISTRY_BATCH && fg_job_ended(e->job) &&
        (!fg_job_unsaved(e->job) || retry_due))
      jobs[nj++] = fg_job_ref(e->job);
    else if (e->cmp && nc < FG_REGISTRY_BATCH)
      cmps[nc++] = fg_comparison_ref(e->cmp);
  }
  pthread_mutex_unlock(&g->lock);
  if (retry_due) *next_retry = now + FG_REGISTRY_RETRY_MS / 1000.0;
  bool did = false;
  for (int i = 0; i < nj; i++) {
    fg_problem p;
    fg_problem_init(&p);
    fg_status st = fg_job_unsaved(jobs[i]) ? fg_job_retry_unsaved(jobs[i], &p)
                                           : fg_job_record_end(jobs[i], &p);
    if (st != FG_OK) {
      fg_log_msg(FG_LOG_ERROR, "store_error",
                 "recording check %s: %s; trying again every second",
                 fg_job_id(jobs[i]), p.detail);
    } else if (fg_job_recorded(jobs[i])) {
      remove_item(g, jobs[i]);
      did = true;
    }
    fg_job_unref(jobs[i]);
  }
  for (int i = 0; i < nc; i++) {
    if (fg_comparison_step(cmps[i])) {
      remove_item(g, cmps[i]);
      did = true;
    }
    fg_comparison_unref(cmps[i]);
  }
  return did;
}

static void *watch(void *arg) {
  fg_registry *g = arg;
  const bool shared = fg_store_shared(g->store);
  double last_note = fg_time_monotonic(), next_retry = 0;
  pthread_mutex_lock(&g->lock);
  while (!g->stop) {
    pthread_mutex_unlock(&g->lock);
    if (shared &&
        fg_time_monotonic() - last_note >= FG_REGISTRY_PROGRESS_MS / 1000.0) {
      note_progress(g);
      last_note = fg_time_monotonic();
    }
    bool did = round_once(g, &next_retry);
    pthread_mutex_lock(&g->lock);
    if (did || g->stop) continue;
    struct timespec ts;
    fg_clock_abs_deadline(&ts, FG_REGISTRY_POLL_MS / 1000.0);
    pthread_cond_timedwait(&g->wake, &g->lock, &ts);
  }
  pthread_mutex_unlock(&g->lock);
  return NULL;
}

fg_status fg_registry_new(fg_store *store, fg_registry **out, fg_problem *p) {
  *out = NULL;
  fg_registry *g = calloc(1, sizeof *g);
  if (!g) return fg_problem_set(p, FG_ENOMEM, "registry: out of memory");
  g->store = store;
  pthread_mutex_init(&g->lock, NULL);
  pthread_cond_init(&g->wake, NULL);
  pthread_cond_init(&g->changed, NULL);
  int rc = pthread_create(&g->watcher, NULL, watch, g);
  if (rc != 0) {
    fg_registry_free(g);
    return fg_problem_set(
        p, FG_EINTERNAL, "registry: cannot start its thread: %s", strerror(rc));
  }
  g->watcher_started = true;
  *out = g;
  return FG_OK;
}

static fg_status add_entry(fg_registry *g, fg_job *j, fg_comparison *c,
                           fg_problem *p) {
  fg_entry *e = calloc(1, sizeof *e);
  if (!e)
    return fg_problem_set(p, FG_ENOMEM, "out of memory listing %s as running",
                          j ? fg_job_id(j) : fg_comparison_id(c));
  e->job = fg_job_ref(j);
  e->cmp = fg_comparison_ref(c);
  pthread_mutex_lock(&g->lock);
  e->next = g->head;
  g->head = e;
  if (j)
    g->njobs++;
  else
    g->ncmps++;
  pthread_cond_signal(&g->wake);
  pthread_mutex_unlock(&g->lock);
  return FG_OK;
}

fg_status fg_registry_add(fg_registry *g, fg_job *j, fg_problem *p) {
  return add_entry(g, j, NULL, p);
}

fg_status fg_registry_add_comparison(fg_registry *g, fg_comparison *c,
                                     fg_problem *p) {
  return add_entry(g, NULL, c, p);
}

void fg_registry_poke(fg_registry *g) {
  pthread_mutex_lock(&g->lock);
  pthread_cond_signal(&g->wake);
  pthread_mutex_unlock(&g->lock);
}

fg_job *fg_registry_find(fg_registry *g, const char *id) {
  fg_job *j = NULL;
  pthread_mutex_lock(&g->lock);
  for (fg_entry *e = g->head; e; e = e->next)
    if (e->job && strcmp(entry_id(e), id) == 0) {
      j = fg_job_ref(e->job);
      break;
    }
  pthread_mutex_unlock(&g->lock);
  return j;
}

fg_comparison *fg_registry_find_comparison(fg_registry *g, const char *id) {
  fg_comparison *c = NULL;
  pthread_mutex_lock(&g->lock);
  for (fg_entry *e = g->head; e; e = e->next)
    if (e->cmp && strcmp(entry_id(e), id) == 0) {
      c = fg_comparison_ref(e->cmp);
      break;
    }
  pthread_mutex_unlock(&g->lock);
  return c;
}

int fg_registry_unsaved(fg_registry *g) {
  fg_job *jobs[FG_REGISTRY_BATCH];
  int n = 0, unsaved = 0;
  pthread_mutex_lock(&g->lock);
  for (fg_entry *e = g->head; e && n < FG_REGISTRY_BATCH; e = e->next)
    if (e->job) jobs[n++] = fg_job_ref(e->job);
  pthread_mutex_unlock(&g->lock);
  for (int i = 0; i < n; i++) {
    unsaved += fg_job_unsaved(jobs[i]);
    fg_job_unref(jobs[i]);
  }
  return unsaved;
}

int fg_registry_count(fg_registry *g) {
  pthread_mutex_lock(&g->lock);
  int n = 0;
  for (fg_entry *e = g->head; e; e = e->next)
    if (e->job && fg_job_detached(e->job) && !fg_job_ended(e->job)) n++;
  pthread_mutex_unlock(&g->lock);
  return n;
}

void fg_registry_cancel_all(fg_registry *g) {
  fg_job *jobs[FG_REGISTRY_BATCH];
  int n = 0;
  pthread_mutex_lock(&g->lock);
  for (fg_entry *e = g->head; e && n < FG_REGISTRY_BATCH; e = e->next)
    if (e->job && !fg_job_ended(e->job)) jobs[n++] = fg_job_ref(e->job);
  pthread_cond_signal(&g->wake);
  pthread_mutex_unlock(&g->lock);
  if (n > 0)
    fg_log_msg(FG_LOG_WARN, "cancelling", "cancelling %d running check(s)", n);
  for (int i = 0; i < n; i++) {
    fg_job_cancel(jobs[i]);
    fg_job_unref(jobs[i]);
  }
}

/* Wait (under lock) until no entry is listed or `seconds` pass. */
static void wait_empty(fg_registry *g, double seconds) {
  struct timespec ts;
  fg_clock_abs_deadline(&ts, seconds);
  while (g->head) {
    pthread_cond_signal(&g->wake);
    if (pthread_cond_timedwait(&g->changed, &g->lock, &ts) == ETIMEDOUT) break;
  }
}

void fg_registry_shutdown(fg_registry *g, double grace_s) {
  if (!g) return;
  pthread_mutex_lock(&g->lock);
  if (g->head) {
    fg_log_msg(FG_LOG_INFO, "draining",
               "%d running check(s), %d comparison(s); waiting up to %g s",
               g->njobs, g->ncmps, grace_s);
    wait_empty(g, grace_s);
  }
  if (g->head) {
    pthread_mutex_unlock(&g->lock);
    fg_registry_cancel_all(g);
    pthread_mutex_lock(&g->lock);
    wait_empty(g, FG_REGISTRY_CANCEL_WAIT_S);
  }
  if (g->head)
    fg_log_msg(FG_LOG_ERROR, "abandoned",
               "%d check(s) and %d comparison(s) could not be recorded; "
               "running checks are marked interrupted at the next start",
               g->njobs, g->ncmps);
  g->stop = true;
  pthread_cond_signal(&g->wake);
  pthread_mutex_unlock(&g->lock);
  if (g->watcher_started) {
    pthread_join(g->watcher, NULL);
    g->watcher_started = false;
  }
}

void fg_registry_free(fg_registry *g) {
  if (!g) return;
  if (g->watcher_started) fg_registry_shutdown(g, 0);
  fg_entry *e = g->head;
  while (e) {
    fg_entry *next = e->next;
    if (e->job && fg_job_unsaved(e->job))
      fg_log_msg(FG_LOG_ERROR, "unrecorded",
                 "the end of check %s never reached the store; its record "
                 "stays as it was (running checks are marked interrupted at "
                 "the next start)",
                 fg_job_id(e->job));
    drop_entry(e);
    e = next;
  }
  pthread_cond_destroy(&g->wake);
  pthread_cond_destroy(&g->changed);
  pthread_mutex_destroy(&g->lock);
  free(g);
}
