/*
 * http/registry.c -- checks that outlived their request's wait_s, and
 * checks whose request is still waiting for them (so that DELETE
 * /v1/checks/{id} and GET find every running check of this process).
 *
 * Design: a list of held checks under one mutex, and one watcher thread.
 * The watcher wakes every FG_REGISTRY_POLL_MS (or when signalled), finds a
 * held check that has ended, records its end in the store
 * (fg_http_record_end) while the check is still listed -- so a GET in
 * between sees the live body, never a half-written record -- and only
 * then unlinks it and drops its reference. The store write happens outside
 * the registry mutex; the `recording` flag keeps the entry the watcher's
 * alone meanwhile.
 *
 * Waited entries (fg_registry_watch): the handler that started a check
 * lists it at once with its own reference and `waited` set; the watcher
 * leaves such an entry alone. The handler then either records the end
 * itself and drops the entry (fg_registry_drop), or answers 202 and hands
 * it over (fg_registry_hand_over: `waited` cleared, the watcher records
 * it). `count` counts held (handed-over) entries only, as before;
 * `nwaited` the others.
 *
 * Cancelling (fg_registry_cancel): find the entry, cancel the check, then
 * wait on `changed` until the entry is gone -- recorded by the watcher or
 * by its handler -- so the caller reads the cancelled record from the
 * store.
 *
 * Locking rule: `lock` guards the list, `count`, `nwaited`, `stop` and
 * every entry's `recording` and `waited`. A listed check's reference
 * belongs to the registry; live bodies are built under `lock`. Lock order:
 * registry lock, then the engine's pool lock (fg_check_*), never the
 * reverse.
 *
 * A failed store write of an end: the entry stays listed with its final
 * record (`unsaved`), GET answers from it, and the watcher writes it again
 * every FG_REGISTRY_RETRY_MS until the store takes it (a database outage
 * loses no result while the process lives); at shutdown, what is still
 * unsaved is logged.
 *
 * Shared stores (PostgreSQL, several replicas): every
 * FG_REGISTRY_PROGRESS_MS the watcher also writes the live bodies of the
 * running checks to the store (fg_store_note_progress), so a replica that
 * does not run a check answers GET for it with progress at most that old,
 * and the watcher cancels the checks another replica was asked to cancel
 * (fg_store_cancel_requests).
 *
 * Shutdown (fg_registry_shutdown, main thread): wait up to grace_s for held
 * checks to end, cancel the rest, wait up to FG_REGISTRY_CANCEL_WAIT_S for
 * them to stop and be recorded (as cancelled), then stop the watcher. A
 * check that still has not ended stays `running` in the store and is marked
 * `interrupted` at the next start-up.
 *
 * Thread use: any thread; the watcher is internal.
 */
#include "http/http_internal.h"

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

/* How often the watcher looks for ended checks: a 202'd check is recorded
 * at most this late. */
#define FG_REGISTRY_POLL_MS 50
/* How long cancelled checks get to stop at shutdown: workers test the
 * cancel flag once per block, so this is generous. */
#define FG_REGISTRY_CANCEL_WAIT_S 10.0
/* On a shared store (several replicas), how often the running checks'
 * bodies are written to the store so that another replica answers a GET
 * with progress at most this old. */
#define FG_REGISTRY_PROGRESS_MS 1000
/* How long after a failed store write of a check's end it is tried again
 * (the check stays listed, so GET still answers with its final body). */
#define FG_REGISTRY_RETRY_MS 1000
/* Running checks whose progress one round writes, at most. */
#define FG_REGISTRY_PROGRESS_MAX 64

typedef struct fg_held {
  struct fg_held *next;
  fg_check *check;
  fg_store_check rec; /* request and result are NULL */
  bool recording;
  bool waited; /* its handler records it; the watcher leaves it alone */
  /* its end, when writing it to the store failed: written again every
   * FG_REGISTRY_RETRY_MS until the store takes it */
  fg_store_check *unsaved;
  double retry_at; /* monotonic seconds */
  int attempts;
} fg_held;

struct fg_registry {
  fg_store *store;
  pthread_mutex_t lock;
  pthread_cond_t wake;    /* watcher: something to look at */
  pthread_cond_t changed; /* shutdown: an entry went away */
  fg_held *head;
  int count;   /* held entries (not waited) */
  int nwaited; /* waited entries */
  bool stop;
  pthread_t watcher;
  bool watcher_started;
};

static void deadline_in(struct timespec *ts, double seconds) {
  clock_gettime(CLOCK_REALTIME, ts);
  double whole = (double)(long)seconds;
  ts->tv_sec += (time_t)whole;
  ts->tv_nsec += (long)((seconds - whole) * 1e9);
  if (ts->tv_nsec >= 1000000000L) {
    ts->tv_sec++;
    ts->tv_nsec -= 1000000000L;
  }
}

/* An ended entry not yet being recorded, or NULL. Called under lock. */
static fg_held *find_ended(fg_registry *g) {
  for (fg_held *e = g->head; e; e = e->next)
    if (!e->recording && !e->waited && !e->unsaved &&
        fg_check_wait(e->check, 0))
      return e;
  return NULL;
}

static double now_s(void);

/* An entry whose unsaved end is due for another try, or NULL. */
static fg_held *find_due(fg_registry *g) {
  double now = now_s();
  for (fg_held *e = g->head; e; e = e->next)
    if (e->unsaved && !e->recording && now >= e->retry_at) return e;
  return NULL;
}

static void free_entry(fg_held *e) {
  if (e->unsaved) {
    fg_store_check_clear(e->unsaved);
    free(e->unsaved);
  }
  fg_check_unref(e->check);
  free(e);
}

static void unlink_entry(fg_registry *g, fg_held *target) {
  for (fg_held **pp = &g->head; *pp; pp = &(*pp)->next) {
    if (*pp == target) {
      *pp = target->next;
      if (target->waited)
        g->nwaited--;
      else
        g->count--;
      return;
    }
  }
}

/* The entry of check `id`, or NULL. Called under lock. */
static fg_held *find_id(fg_registry *g, const char *id) {
  for (fg_held *e = g->head; e; e = e->next)
    if (strcmp(e->rec.id, id) == 0) return e;
  return NULL;
}

static double now_s(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + ts.tv_nsec * 1e-9;
}

/* A running entry's live body (as GET gives it). Called under lock. */
static cJSON *live_body(const fg_held *e) {
  if (e->unsaved && e->unsaved->result) /* its final body, as it will be stored */
    return cJSON_Parse(e->unsaved->result);
  char ended_at[32] = "";
  /* Ended but not yet recorded: the body is final, so it carries an end
   * time (the record's may be later by the poll interval at most). */
  if (fg_check_wait(e->check, 0))
    fg_time_now_rfc3339(ended_at, sizeof ended_at);
  fg_check_meta meta = {.id = e->rec.id,
                        .model_version = e->rec.version,
                        .created_at = e->rec.created_at,
                        .finished_at = ended_at[0] ? ended_at : NULL,
                        .key = e->rec.key[0] ? e->rec.key : NULL};
  return fg_check_result_json(e->check, &meta);
}

/* Shared store: write the bodies of running checks (held and waited) so
 * that other replicas answer GET with progress. Entered and left under
 * lock; the writes happen outside it, on copies. */
static void note_progress(fg_registry *g) {
  char ids[FG_REGISTRY_PROGRESS_MAX][40];
  char *bodies[FG_REGISTRY_PROGRESS_MAX];
  int n = 0;
  for (fg_held *e = g->head; e && n < FG_REGISTRY_PROGRESS_MAX; e = e->next) {
    if (e->recording || fg_check_wait(e->check, 0)) continue;
    cJSON *body = live_body(e);
    char *text = body ? cJSON_PrintUnformatted(body) : NULL;
    cJSON_Delete(body);
    if (!text) continue;
    snprintf(ids[n], sizeof ids[n], "%s", e->rec.id);
    bodies[n++] = text;
  }
  pthread_mutex_unlock(&g->lock);
  for (int i = 0; i < n; i++) {
    fg_problem p;
    fg_problem_init(&p);
    if (fg_store_note_progress(g->store, ids[i], bodies[i], &p) != FG_OK)
      fg_log_msg(FG_LOG_WARN, "store_error", "noting progress of check %s: %s",
                 ids[i], p.detail);
    cJSON_free(bodies[i]);
  }
  /* cancels asked for through other replicas */
  fg_problem p;
  fg_problem_init(&p);
  int nask = 0;
  if (n > 0 &&
      fg_store_cancel_requests(g->store, ids, FG_REGISTRY_PROGRESS_MAX, &nask,
                               &p) != FG_OK)
    fg_log_msg(FG_LOG_WARN, "store_error", "reading cancel requests: %s",
               p.detail);
  pthread_mutex_lock(&g->lock);
  for (int i = 0; i < nask; i++) {
    fg_held *e = find_id(g, ids[i]);
    if (e && !e->recording) {
      fg_check_cancel(e->check);
      fg_log_msg(FG_LOG_INFO, "check_cancel_asked",
                 "check %s cancelled at another replica's request", ids[i]);
    }
  }
}

static void *watch(void *arg) {
  fg_registry *g = arg;
  const bool shared = fg_store_shared(g->store);
  double last_note = now_s();
  pthread_mutex_lock(&g->lock);
  while (!g->stop) {
    if (shared && now_s() - last_note >= FG_REGISTRY_PROGRESS_MS / 1000.0) {
      note_progress(g);
      last_note = now_s();
      continue;
    }
    fg_held *due = find_due(g);
    if (due) {
      due->recording = true;
      pthread_mutex_unlock(&g->lock);
      fg_problem p;
      fg_problem_init(&p);
      fg_status st = fg_store_finish_check(g->store, due->unsaved, &p);
      pthread_mutex_lock(&g->lock);
      due->recording = false;
      due->attempts++;
      if (st == FG_OK) {
        fg_log_msg(FG_LOG_INFO, "recorded_late",
                   "check %s recorded after %d more attempt(s)", due->rec.id,
                   due->attempts);
        unlink_entry(g, due);
        pthread_cond_broadcast(&g->changed);
        pthread_mutex_unlock(&g->lock);
        free_entry(due);
        pthread_mutex_lock(&g->lock);
      } else {
        due->retry_at = now_s() + FG_REGISTRY_RETRY_MS / 1000.0;
      }
      continue;
    }
    fg_held *e = find_ended(g);
    if (!e) {
      struct timespec ts;
      deadline_in(&ts, FG_REGISTRY_POLL_MS / 1000.0);
      pthread_cond_timedwait(&g->wake, &g->lock, &ts);
      continue;
    }
    e->recording = true;
    pthread_mutex_unlock(&g->lock);
    fg_problem p;
    fg_problem_init(&p);
    fg_store_check *unsaved = NULL;
    fg_status st =
        fg_http_record_end_keep(g->store, e->check, &e->rec, NULL, &unsaved, &p);
    if (st != FG_OK)
      fg_log_msg(FG_LOG_ERROR, "store_error",
                 "recording check %s: %s%s", e->rec.id, p.detail,
                 unsaved ? "; trying again every second" : "");
    pthread_mutex_lock(&g->lock);
    e->recording = false;
    if (st != FG_OK && unsaved) { /* stays listed until the store takes it */
      e->unsaved = unsaved;
      e->retry_at = now_s() + FG_REGISTRY_RETRY_MS / 1000.0;
      continue;
    }
    unlink_entry(g, e);
    pthread_cond_broadcast(&g->changed);
    pthread_mutex_unlock(&g->lock);
    free_entry(e);
    pthread_mutex_lock(&g->lock);
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

fg_status fg_registry_watch(fg_registry *g, fg_check *c,
                            const fg_store_check *rec, fg_problem *p) {
  fg_held *e = calloc(1, sizeof *e);
  if (!e)
    return fg_problem_set(p, FG_ENOMEM,
                          "out of memory listing check %s as running", rec->id);
  e->check = fg_check_ref(c);
  e->rec = *rec;
  e->rec.request = NULL;
  e->rec.result = NULL;
  e->waited = true;
  pthread_mutex_lock(&g->lock);
  e->next = g->head;
  g->head = e;
  g->nwaited++;
  pthread_mutex_unlock(&g->lock);
  return FG_OK;
}

void fg_registry_hand_over(fg_registry *g, const char *id) {
  pthread_mutex_lock(&g->lock);
  fg_held *e = find_id(g, id);
  if (e && e->waited) {
    e->waited = false;
    g->nwaited--;
    g->count++;
    pthread_cond_signal(&g->wake);
  }
  pthread_mutex_unlock(&g->lock);
}

void fg_registry_drop(fg_registry *g, const char *id) {
  pthread_mutex_lock(&g->lock);
  fg_held *e = find_id(g, id);
  if (e && e->waited)
    unlink_entry(g, e);
  else
    e = NULL;
  pthread_cond_broadcast(&g->changed);
  pthread_mutex_unlock(&g->lock);
  if (e) {
    fg_check_unref(e->check);
    free(e);
  }
}

fg_registry_cancel_result fg_registry_cancel(fg_registry *g, const char *id,
                                             double wait_s) {
  pthread_mutex_lock(&g->lock);
  fg_held *e = find_id(g, id);
  if (!e) {
    pthread_mutex_unlock(&g->lock);
    return FG_REGISTRY_NOT_HELD;
  }
  if (e->recording || fg_check_wait(e->check, 0)) {
    pthread_mutex_unlock(&g->lock);
    return FG_REGISTRY_ENDED;
  }
  fg_check_cancel(e->check);
  pthread_cond_signal(&g->wake);
  struct timespec ts;
  deadline_in(&ts, wait_s);
  while (find_id(g, id)) {
    if (pthread_cond_timedwait(&g->changed, &g->lock, &ts) == ETIMEDOUT) {
      bool still = find_id(g, id) != NULL;
      pthread_mutex_unlock(&g->lock);
      return still ? FG_REGISTRY_CANCEL_PENDING : FG_REGISTRY_CANCELLED;
    }
  }
  pthread_mutex_unlock(&g->lock);
  return FG_REGISTRY_CANCELLED;
}

bool fg_registry_holds(fg_registry *g, const char *id) {
  pthread_mutex_lock(&g->lock);
  bool held = find_id(g, id) != NULL;
  pthread_mutex_unlock(&g->lock);
  return held;
}

cJSON *fg_registry_live_json(fg_registry *g, const char *id) {
  cJSON *body = NULL;
  pthread_mutex_lock(&g->lock);
  for (fg_held *e = g->head; e; e = e->next) {
    if (strcmp(e->rec.id, id) != 0) continue;
    body = live_body(e);
    break;
  }
  pthread_mutex_unlock(&g->lock);
  return body;
}

int fg_registry_unsaved(fg_registry *g) {
  pthread_mutex_lock(&g->lock);
  int n = 0;
  for (fg_held *e = g->head; e; e = e->next) n += e->unsaved != NULL;
  pthread_mutex_unlock(&g->lock);
  return n;
}

int fg_registry_count(fg_registry *g) {
  pthread_mutex_lock(&g->lock);
  int n = g->count;
  pthread_mutex_unlock(&g->lock);
  return n;
}

/* Wait (under lock) until no entry is listed or `seconds` pass. */
static void wait_empty(fg_registry *g, double seconds) {
  struct timespec ts;
  deadline_in(&ts, seconds);
  while (g->count + g->nwaited > 0) {
    if (pthread_cond_timedwait(&g->changed, &g->lock, &ts) == ETIMEDOUT) break;
  }
}

void fg_registry_shutdown(fg_registry *g, double grace_s) {
  if (!g) return;
  pthread_mutex_lock(&g->lock);
  if (g->count > 0) {
    fg_log_msg(FG_LOG_INFO, "draining",
               "%d running check(s); waiting up to %g s", g->count, grace_s);
    wait_empty(g, grace_s);
  }
  if (g->count > 0) {
    fg_log_msg(FG_LOG_WARN, "cancelling", "cancelling %d running check(s)",
               g->count);
    for (fg_held *e = g->head; e; e = e->next)
      fg_check_cancel(e->check);
    pthread_cond_signal(&g->wake);
    wait_empty(g, FG_REGISTRY_CANCEL_WAIT_S);
  }
  if (g->count > 0)
    fg_log_msg(FG_LOG_ERROR, "abandoned",
               "%d check(s) did not stop; they stay running in the store "
               "and are marked interrupted at the next start",
               g->count);
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
  fg_held *e = g->head;
  while (e) {
    fg_held *next = e->next;
    if (e->unsaved)
      fg_log_msg(FG_LOG_ERROR, "unrecorded",
                 "the end of check %s (%s) never reached the store; its "
                 "record stays as it was (running checks are marked "
                 "interrupted at the next start)",
                 e->rec.id, e->unsaved->status);
    free_entry(e);
    e = next;
  }
  pthread_cond_destroy(&g->wake);
  pthread_cond_destroy(&g->changed);
  pthread_mutex_destroy(&g->lock);
  free(g);
}
