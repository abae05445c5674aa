/*
 * http/lifecycle.c -- the life of one check, in one place (prefix fg_job_).
 *
 *   id -> record `running` -> queue -> run -> end -> record the end
 *
 * Every check takes this path, whether a POST .../checks runs it, a
 * comparison runs it as a candidate (comparison.c), or the registry's
 * watcher records it after its request has been answered (registry.c):
 *   fg_job_start       new id, the store row `running` (with the request
 *                      as it will be replayed), queued on the pool, listed
 *                      in the registry (so GET and DELETE find it);
 *   fg_job_ended       has the engine ended it? (never blocks)
 *   fg_job_wait        the same, waiting at most a bounded time;
 *   fg_job_record_end  the end, once: the store row, the metrics and the
 *                      log line are made from the engine's outcome struct
 *                      (fg_check_get_outcome), never read back out of a
 *                      JSON body; later callers get the first call's
 *                      status (waiting while another thread records it);
 *   fg_job_answer      the body as GET shows it: the stored text once
 *                      recorded, else built live from the engine.
 * The engine's workers never come here: they touch no HTTP or store
 * state. Whoever ends first records: the handler that waited, DELETE, or
 * the watcher; a check is recorded exactly once.
 *
 * States are enums: the engine's fg_check_state, and the recording state
 * of a job below; a stored status string is parsed once with
 * fg_check_state_parse where a row is read.
 *
 * Locking rule: no lock that a reader, the metrics or the readiness probe
 * needs is ever held across simulation, interval computation, JSON
 * building or a store call. A job's `mu` guards only its recording state
 * and its final text (copied out under it, never built under it); the
 * registry's lock guards only its list (registry.c); the engine publishes
 * progress and end figures for lock-free reading (engine_internal.h).
 *
 * A failed store write of the end: the job keeps the final row and text
 * (`unsaved`), GET answers from it, and the watcher writes it again every
 * second (fg_job_retry_unsaved) until the store takes it.
 *
 * Thread use: any thread. A job is reference counted; the registry holds
 * one while it is listed.
 */
#include "http/http_internal.h"
#include "http/metrics.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

typedef enum job_record {
  JOB_RUNNING = 0, /* not recorded yet */
  JOB_RECORDING,   /* one thread writes the end now */
  JOB_RECORDED,    /* the store has the end */
  JOB_UNSAVED      /* the store refused it; kept for the next try */
} job_record;

struct fg_job {
  atomic_int refs;
  fg_server *srv;
  fg_check *check;
  fg_store_check rec;   /* the running row; request and result NULL */
  char comparison[40];  /* the comparison it is a candidate of; "" none */
  atomic_bool detached; /* its request was answered before its end */
  pthread_mutex_t mu;
  pthread_cond_t cv;
  job_record state;         /* (mu) */
  char *final_text;         /* (mu) the final body as stored */
  fg_store_check final;     /* (mu) the final row (result = final_text) */
  fg_status store_st;       /* (mu) status of the last write of the end */
  char store_err[256];      /* (mu) its detail */
  int attempts;             /* (mu) writes of the end tried */
  fg_job_hook *on_recorded; /* (mu) called once the end is recorded */
  void *on_recorded_ctx;    /* (mu) */
};

static void add_string_or_null(cJSON *o, const char *name, const char *s) {
  if (s && s[0])
    cJSON_AddStringToObject(o, name, s);
  else
    cJSON_AddNullToObject(o, name);
}

static void add_number_or_null(cJSON *o, const char *name, double v) {
  if (isfinite(v))
    cJSON_AddNumberToObject(o, name, v);
  else
    cJSON_AddNullToObject(o, name);
}

/* ---- starting ---- */

static fg_status record_running(fg_store *store, const fg_store_version *v,
                                const fg_model *m, const fg_check_request *req,
                                const char *key, const char *replay_of,
                                fg_store_check *rec, fg_problem *p) {
  memset(rec, 0, sizeof *rec);
  snprintf(rec->replay_of, sizeof rec->replay_of, "%s",
           replay_of ? replay_of : "");
  fg_http_check_id(rec->id);
  snprintf(rec->model, sizeof rec->model, "%s", v->name);
  rec->version = v->version;
  snprintf(rec->digest, sizeof rec->digest, "%s", v->digest);
  snprintf(rec->status, sizeof rec->status, "%s",
           fg_check_state_name(FG_CHECK_RUNNING));
  rec->seed = req->seed;
  fg_time_now_rfc3339(rec->created_at, sizeof rec->created_at);
  snprintf(rec->label, sizeof rec->label, "%s", req->label);
  snprintf(rec->key, sizeof rec->key, "%s", key ? key : "");
  rec->probability = rec->lower = rec->upper = rec->elapsed_ms = NAN;
  cJSON *rj = fg_request_json(m, req);
  rec->request = rj ? cJSON_PrintUnformatted(rj) : NULL;
  cJSON_Delete(rj);
  if (!rec->request)
    return fg_problem_set(p, FG_ENOMEM, "out of memory recording check %s",
                          rec->id);
  return fg_store_put_check(store, rec, p);
}

/* Close the row of a check the pool refused: `failed`, never ran. */
static void record_unstarted(fg_store *store, const fg_store_check *rec) {
  fg_store_check fin = *rec;
  fin.request = fin.result = NULL;
  snprintf(fin.status, sizeof fin.status, "%s",
           fg_check_state_name(FG_CHECK_FAILED));
  fin.verdict[0] = '\0';
  fg_time_now_rfc3339(fin.finished_at, sizeof fin.finished_at);
  fg_problem p;
  fg_problem_init(&p);
  if (fg_store_finish_check(store, &fin, &p) != FG_OK)
    fg_log_msg(FG_LOG_ERROR, "store_error", "closing check %s: %s", rec->id,
               p.detail);
  fg_metrics_check_ended(fin.status, NULL, NAN, NAN); /* never ran */
}

static fg_status job_start(fg_server *srv, const fg_store_version *v,
                           fg_model *m, const fg_check_request *req,
                           const char *key, const char *comparison,
                           const char *replay_of, fg_job **out,
                           fg_problem *p) {
  *out = NULL;
  fg_job *j = calloc(1, sizeof *j);
  if (!j) return fg_problem_set(p, FG_ENOMEM, "out of memory starting a check");
  atomic_init(&j->refs, 1);
  atomic_init(&j->detached, false);
  pthread_mutex_init(&j->mu, NULL);
  pthread_cond_init(&j->cv, NULL);
  j->srv = srv;
  snprintf(j->comparison, sizeof j->comparison, "%s",
           comparison ? comparison : "");
  fg_status st =
      record_running(srv->store, v, m, req, key, replay_of, &j->rec, p);
  free(j->rec.request);
  j->rec.request = NULL;
  if (st != FG_OK) {
    fg_job_unref(j);
    return st;
  }
  st = fg_check_start(srv->pool, m, req, &j->check, p);
  if (st != FG_OK) {
    record_unstarted(srv->store, &j->rec);
    fg_job_unref(j);
    return st;
  }
  st = fg_registry_add(srv->registry, j, p);
  if (st != FG_OK) { /* not findable: stop it and close its row here */
    fg_job_cancel(j);
    fg_job_wait(j, -1);
    fg_problem sp;
    fg_problem_init(&sp);
    fg_job_record_end(j, &sp);
    fg_job_unref(j);
    return st;
  }
  *out = j;
  return FG_OK;
}

fg_status fg_job_start(fg_server *srv, const fg_store_version *v, fg_model *m,
                       const fg_check_request *req, const char *key,
                       const char *comparison, fg_job **out, fg_problem *p) {
  return job_start(srv, v, m, req, key, comparison, NULL, out, p);
}

fg_status fg_job_start_replay(fg_server *srv, const fg_store_version *v,
                              fg_model *m, const fg_check_request *req,
                              const char *key, const char *replay_of,
                              fg_job **out, fg_problem *p) {
  return job_start(srv, v, m, req, key, NULL, replay_of, out, p);
}

/* ---- reading ---- */

fg_job *fg_job_ref(fg_job *j) {
  if (j) atomic_fetch_add(&j->refs, 1);
  return j;
}

void fg_job_unref(fg_job *j) {
  if (!j || atomic_fetch_sub(&j->refs, 1) != 1) return;
  fg_check_unref(j->check);
  free(j->final_text);
  pthread_cond_destroy(&j->cv);
  pthread_mutex_destroy(&j->mu);
  free(j);
}

const char *fg_job_id(const fg_job *j) {
  return j->rec.id;
}

const char *fg_job_comparison(const fg_job *j) {
  return j->comparison;
}

const fg_store_check *fg_job_row(const fg_job *j) {
  return &j->rec;
}

fg_check *fg_job_check(fg_job *j) {
  return j->check;
}

bool fg_job_ended(fg_job *j) {
  return fg_check_ended(j->check);
}

bool fg_job_wait(fg_job *j, double timeout_s) {
  return fg_check_wait(j->check, timeout_s);
}

void fg_job_cancel(fg_job *j) {
  fg_check_cancel(j->check);
}

void fg_job_detach(fg_job *j) {
  atomic_store(&j->detached, true);
}

bool fg_job_detached(fg_job *j) {
  return atomic_load(&j->detached);
}

bool fg_job_recorded(fg_job *j) {
  pthread_mutex_lock(&j->mu);
  bool r = j->state == JOB_RECORDED;
  pthread_mutex_unlock(&j->mu);
  return r;
}

bool fg_job_unsaved(fg_job *j) {
  pthread_mutex_lock(&j->mu);
  bool r = j->state == JOB_UNSAVED;
  pthread_mutex_unlock(&j->mu);
  return r;
}

/* The body built from the engine (running, or ended and not yet
 * recorded: then with an end time, which the record's may follow by a
 * moment). No lock held. */
static cJSON *live_body(fg_job *j) {
  char ended_at[32] = "";
  if (fg_check_ended(j->check)) fg_time_now_rfc3339(ended_at, sizeof ended_at);
  fg_check_meta meta = {.id = j->rec.id,
                        .model_version = j->rec.version,
                        .created_at = j->rec.created_at,
                        .finished_at = ended_at[0] ? ended_at : NULL,
                        .key = j->rec.key[0] ? j->rec.key : NULL,
                        .replay_of = j->rec.replay_of};
  return fg_check_result_json(j->check, &meta);
}

/* The final text (malloc'd copy) when the end has been written or kept;
 * NULL otherwise. */
static char *final_copy(fg_job *j) {
  char *text = NULL;
  pthread_mutex_lock(&j->mu);
  if ((j->state == JOB_RECORDED || j->state == JOB_UNSAVED) && j->final_text)
    text = strdup(j->final_text);
  pthread_mutex_unlock(&j->mu);
  return text;
}

cJSON *fg_job_body(fg_job *j) {
  char *text = final_copy(j);
  if (text) {
    cJSON *o = cJSON_Parse(text);
    free(text);
    if (o) return o;
  }
  return live_body(j);
}

void fg_job_answer(fg_job *j, int status, fg_resp *out) {
  char *text = final_copy(j);
  if (text)
    fg_resp_json_text(out, status, text);
  else
    fg_resp_json(out, status, live_body(j));
}

/* ---- the end ---- */

/* Take the hook (under mu) when the end is recorded or kept; the caller
 * calls it with no lock held. */
static fg_job_hook *take_hook(fg_job *j, void **ctx) {
  fg_job_hook *h = NULL;
  if (j->state == JOB_RECORDED || j->state == JOB_UNSAVED) {
    h = j->on_recorded;
    *ctx = j->on_recorded_ctx;
    j->on_recorded = NULL;
  }
  return h;
}

void fg_job_on_recorded(fg_job *j, fg_job_hook *hook, void *ctx) {
  pthread_mutex_lock(&j->mu);
  j->on_recorded = hook;
  j->on_recorded_ctx = ctx;
  void *c = NULL;
  fg_job_hook *h = take_hook(j, &c);
  pthread_mutex_unlock(&j->mu);
  if (h) h(c);
}

/* The store row of the end, from the outcome (no JSON read back). */
static void row_of(const fg_job *j, const fg_check_outcome *o,
                   const char *finished, fg_store_check *fin) {
  *fin = j->rec;
  fin->request = NULL;
  fin->result = NULL;
  snprintf(fin->finished_at, sizeof fin->finished_at, "%s", finished);
  snprintf(fin->status, sizeof fin->status, "%s",
           fg_check_state_name(o->state));
  if (o->has_verdict)
    snprintf(fin->verdict, sizeof fin->verdict, "%s",
             fg_verdict_name(o->verdict));
  else
    fin->verdict[0] = '\0';
  fin->probability = o->probability;
  fin->lower = o->lower;
  fin->upper = o->upper;
  fin->elapsed_ms = round(o->elapsed_ms);
}

static void log_end(const fg_job *j, const fg_store_check *fin,
                    const fg_check_outcome *o, fg_status st, const char *err) {
  cJSON *ev = cJSON_CreateObject();
  if (!ev) return;
  cJSON_AddStringToObject(ev, "event", "check");
  cJSON_AddStringToObject(ev, "id", j->rec.id);
  cJSON_AddStringToObject(ev, "model", j->rec.model);
  cJSON_AddNumberToObject(ev, "version", j->rec.version);
  cJSON_AddStringToObject(ev, "digest", j->rec.digest);
  cJSON_AddStringToObject(ev, "status", fin->status);
  add_string_or_null(ev, "verdict", fin->verdict);
  add_number_or_null(ev, "probability", fin->probability);
  cJSON *iv = cJSON_AddArrayToObject(ev, "interval");
  if (iv) {
    cJSON_AddItemToArray(iv, isfinite(fin->lower)
                                 ? cJSON_CreateNumber(fin->lower)
                                 : cJSON_CreateNull());
    cJSON_AddItemToArray(iv, isfinite(fin->upper)
                                 ? cJSON_CreateNumber(fin->upper)
                                 : cJSON_CreateNull());
  }
  cJSON_AddNumberToObject(ev, "samples", (double)o->samples);
  add_number_or_null(ev, "elapsed_ms", fin->elapsed_ms);
  if (j->comparison[0])
    cJSON_AddStringToObject(ev, "comparison", j->comparison);
  if (o->forced) cJSON_AddBoolToObject(ev, "worker_stuck", true);
  if (st != FG_OK) cJSON_AddStringToObject(ev, "store_error", err);
  fg_log_emit(st == FG_OK ? FG_LOG_INFO : FG_LOG_ERROR, ev);
}

fg_status fg_job_record_end(fg_job *j, fg_problem *p) {
  fg_check_outcome o;
  if (!fg_check_get_outcome(j->check, &o))
    return fg_problem_set(p, FG_EINTERNAL, "check %s has not ended", j->rec.id);
  pthread_mutex_lock(&j->mu);
  while (j->state == JOB_RECORDING)
    pthread_cond_wait(&j->cv, &j->mu);
  if (j->state != JOB_RUNNING) { /* recorded (or kept) by another thread */
    fg_status st = j->store_st;
    if (st != FG_OK) fg_problem_set(p, st, "%s", j->store_err);
    pthread_mutex_unlock(&j->mu);
    return st;
  }
  j->state = JOB_RECORDING;
  pthread_mutex_unlock(&j->mu);

  /* No lock from here to the store's answer. */
  char finished[32];
  fg_time_now_rfc3339(finished, sizeof finished);
  fg_check_meta meta = {.id = j->rec.id,
                        .model_version = j->rec.version,
                        .created_at = j->rec.created_at,
                        .finished_at = finished,
                        .key = j->rec.key[0] ? j->rec.key : NULL,
                        .replay_of = j->rec.replay_of};
  cJSON *res = fg_check_result_json(j->check, &meta);
  char *text = res ? cJSON_PrintUnformatted(res) : NULL;
  cJSON_Delete(res);
  fg_store_check fin;
  row_of(j, &o, finished, &fin);
  fin.result = text;
  fg_status st = fg_store_finish_check(j->srv->store, &fin, p);
  fg_metrics_check_ended(fin.status, fin.verdict, (double)o.samples,
                         o.elapsed_ms / 1000.0);
  log_end(j, &fin, &o, st, p->detail);

  pthread_mutex_lock(&j->mu);
  j->final = fin;
  j->final.result = NULL;
  j->final_text = text;
  j->store_st = st;
  snprintf(j->store_err, sizeof j->store_err, "%s",
           st == FG_OK ? "" : p->detail);
  j->attempts = 1;
  j->state = st == FG_OK || !text ? JOB_RECORDED : JOB_UNSAVED;
  pthread_cond_broadcast(&j->cv);
  void *hctx = NULL;
  fg_job_hook *hook = take_hook(j, &hctx);
  pthread_mutex_unlock(&j->mu);
  if (hook) hook(hctx);
  return st;
}

fg_status fg_job_retry_unsaved(fg_job *j, fg_problem *p) {
  pthread_mutex_lock(&j->mu);
  if (j->state != JOB_UNSAVED) {
    pthread_mutex_unlock(&j->mu);
    return FG_OK;
  }
  j->state = JOB_RECORDING;
  fg_store_check fin = j->final;
  pthread_mutex_unlock(&j->mu);
  fin.result = j->final_text; /* not changed while RECORDING */
  fg_status st = fg_store_finish_check(j->srv->store, &fin, p);
  pthread_mutex_lock(&j->mu);
  j->attempts++;
  j->store_st = st;
  snprintf(j->store_err, sizeof j->store_err, "%s",
           st == FG_OK ? "" : p->detail);
  j->state = st == FG_OK ? JOB_RECORDED : JOB_UNSAVED;
  int attempts = j->attempts;
  pthread_cond_broadcast(&j->cv);
  pthread_mutex_unlock(&j->mu);
  if (st == FG_OK)
    fg_log_msg(FG_LOG_INFO, "recorded_late",
               "check %s recorded after %d more attempt(s)", j->rec.id,
               attempts - 1);
  return st;
}

fg_check_state fg_job_final_state(fg_job *j) {
  return fg_check_get_state(j->check);
}
