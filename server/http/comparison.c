/*
 * http/comparison.c -- comparisons as detached jobs.
 *
 *   POST   /v1/models/{name}/comparisons  start; 200 with the result when
 *                                         done within wait_s, else 202
 *                                         with the running body
 *   GET    /v1/comparisons/{id}           progress, then the result
 *   DELETE /v1/comparisons/{id}           cancel every candidate
 *
 * Body of POST: {"candidates": [{"label", "decision"}, ...], "samples",
 * "seed", "target", "confidence", "interval", "wait_s", ...}. Every
 * candidate is a check of its own (lifecycle.c: recorded, logged, listed
 * under GET /v1/checks) on the same validation scenarios (one seed for
 * all, drawn when none is given), and the body is
 *   {"id": "cmp_...", "status", "model", "seed", "samples", "confidence",
 *    "candidates": [check result body with its "label", ...],
 *    "pairs": [{"a", "b", "a_only", "b_only", "both", "neither",
 *               "difference", "interval": {"lower", "upper", "method"}}],
 *    "created_at", "finished_at", "progress" (while running)}
 * with "pairs" empty until every candidate is done (engine/compare.c
 * counts them from the per-sample outcome bits).
 *
 * Order of work (the durability contract of checks.c, per candidate):
 *   1. load the version (404, 410 retired), parse (400), expect_digest
 *      (409);
 *   2. refuse with 503 + Retry-After unless the queue has room for every
 *      candidate, before anything is recorded;
 *   3. fg_job_start each candidate (recorded `running`, then queued); one
 *      the pool refuses is closed `failed`, the ones started are cancelled
 *      and recorded, and the answer is 503;
 *   4. the comparison's row (`running`, the candidates' check ids) goes
 *      to the store and the comparison to the registry;
 *   5. wait (suspended: out->pending, waiter.c -- no thread is held) for
 *      all candidates until wait_s has passed in total: ended ->
 *      fg_comparison_step records every candidate and the comparison, 200;
 *      else 202 + Location, and the registry's watcher steps it when the
 *      last candidate ends.
 * The store keeps the final body, so GET answers after the end and
 * through any replica sharing the store. A comparison this process does
 * not hold is shown from its row and its candidates' rows.
 *
 * Locking rule: as lifecycle.c's. A comparison's `mu` guards only its
 * finishing state and final text; bodies are built and the store written
 * with no lock held.
 *
 * Thread use: handlers on connection threads; fg_comparison_step also on
 * the registry's watcher.
 */
#include "http/http_internal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

typedef enum cmp_stage { CMP_RUNNING = 0, CMP_FINISHING, CMP_STORED } cmp_stage;

struct fg_comparison {
  atomic_int refs;
  fg_server *srv;
  fg_store_comparison rec; /* the running row; checks and result NULL */
  int n;
  fg_job *jobs[FG_COMPARE_CANDIDATES_MAX];
  char labels[FG_COMPARE_CANDIDATES_MAX][FG_LABEL_MAX + 1];
  uint64_t seed, samples;
  double confidence;
  pthread_mutex_t mu;
  pthread_cond_t cv;
  cmp_stage stage;        /* (mu) */
  char *final_text;       /* (mu) once stored */
  fg_check_state status;  /* (mu) once stored */
  fg_job_hook *on_stored; /* (mu) called once the result is stored */
  void *on_stored_ctx;    /* (mu) */
};

void fg_comparison_on_stored(fg_comparison *c, fg_job_hook *hook, void *ctx) {
  pthread_mutex_lock(&c->mu);
  bool now = c->stage == CMP_STORED;
  c->on_stored = now ? NULL : hook;
  c->on_stored_ctx = ctx;
  pthread_mutex_unlock(&c->mu);
  if (now && hook) hook(ctx);
}

fg_comparison *fg_comparison_ref(fg_comparison *c) {
  if (c) atomic_fetch_add(&c->refs, 1);
  return c;
}

void fg_comparison_unref(fg_comparison *c) {
  if (!c || atomic_fetch_sub(&c->refs, 1) != 1) return;
  for (int i = 0; i < c->n; i++)
    fg_job_unref(c->jobs[i]);
  free(c->final_text);
  pthread_cond_destroy(&c->cv);
  pthread_mutex_destroy(&c->mu);
  free(c);
}

const char *fg_comparison_id(const fg_comparison *c) {
  return c->rec.id;
}

bool fg_comparison_ended(fg_comparison *c) {
  pthread_mutex_lock(&c->mu);
  bool e = c->stage == CMP_STORED;
  pthread_mutex_unlock(&c->mu);
  return e;
}

static void add_u64(cJSON *o, const char *k, uint64_t v) {
  char buf[32];
  snprintf(buf, sizeof buf, "%llu", (unsigned long long)v);
  cJSON_AddRawToObject(o, k, buf);
}

/* The frame of a comparison body: everything but candidates and pairs. */
static cJSON *frame(const fg_store_comparison *rec, fg_check_state status,
                    uint64_t seed, uint64_t samples, double confidence) {
  cJSON *o = cJSON_CreateObject();
  if (!o) return NULL;
  cJSON_AddStringToObject(o, "id", rec->id);
  cJSON_AddStringToObject(o, "status", fg_check_state_name(status));
  cJSON *model = cJSON_AddObjectToObject(o, "model");
  if (model) {
    cJSON_AddStringToObject(model, "name", rec->model);
    cJSON_AddNumberToObject(model, "version", rec->version);
    cJSON_AddStringToObject(model, "digest", rec->digest);
  }
  add_u64(o, "seed", seed);
  cJSON_AddNumberToObject(o, "samples", (double)samples);
  if (isfinite(confidence))
    cJSON_AddNumberToObject(o, "confidence", confidence);
  cJSON_AddStringToObject(o, "created_at", rec->created_at);
  if (rec->finished_at[0])
    cJSON_AddStringToObject(o, "finished_at", rec->finished_at);
  else
    cJSON_AddNullToObject(o, "finished_at");
  if (rec->key[0]) cJSON_AddStringToObject(o, "key", rec->key);
  return o;
}

/* The body built from the candidates now (running, or their ends):
 * no lock held. `pairs` is taken (NULL: an empty array). */
static cJSON *body_of(fg_comparison *c, fg_check_state status,
                      const char *finished, cJSON *pairs) {
  fg_store_comparison rec = c->rec;
  snprintf(rec.finished_at, sizeof rec.finished_at, "%s",
           finished ? finished : "");
  cJSON *o = frame(&rec, status, c->seed, c->samples, c->confidence);
  cJSON *cands = o ? cJSON_AddArrayToObject(o, "candidates") : NULL;
  if (!cands) {
    cJSON_Delete(o);
    cJSON_Delete(pairs);
    return NULL;
  }
  uint64_t done = 0;
  for (int i = 0; i < c->n; i++) {
    cJSON *b = fg_job_body(c->jobs[i]);
    if (b) cJSON_AddItemToArray(cands, b);
    uint64_t d, k;
    fg_check_progress(fg_job_check(c->jobs[i]), &d, &k);
    done += d;
  }
  cJSON_AddItemToObject(o, "pairs", pairs ? pairs : cJSON_CreateArray());
  if (status == FG_CHECK_RUNNING) {
    cJSON *pr = cJSON_AddObjectToObject(o, "progress");
    if (pr) {
      cJSON_AddNumberToObject(pr, "samples_done", (double)done);
      cJSON_AddNumberToObject(pr, "samples_total",
                              (double)c->samples * (double)c->n);
    }
  }
  return o;
}

/* What the candidates' ends make of the comparison. */
static fg_check_state status_of(fg_comparison *c) {
  fg_check_state worst = FG_CHECK_DONE;
  for (int i = 0; i < c->n; i++) {
    fg_check_state s = fg_job_final_state(c->jobs[i]);
    if (s == FG_CHECK_DONE) continue;
    if (s == FG_CHECK_FAILED || worst == FG_CHECK_DONE ||
        (s == FG_CHECK_TIMED_OUT && worst == FG_CHECK_CANCELLED))
      worst = s;
  }
  return worst;
}

bool fg_comparison_step(fg_comparison *c) {
  for (int i = 0; i < c->n; i++)
    if (!fg_job_ended(c->jobs[i])) return false;
  pthread_mutex_lock(&c->mu);
  while (c->stage == CMP_FINISHING)
    pthread_cond_wait(&c->cv, &c->mu);
  if (c->stage == CMP_STORED) {
    pthread_mutex_unlock(&c->mu);
    return true;
  }
  c->stage = CMP_FINISHING;
  pthread_mutex_unlock(&c->mu);

  /* No lock from here to the store's answer. */
  bool ok = true;
  for (int i = 0; i < c->n; i++) {
    fg_problem p;
    fg_problem_init(&p);
    if (fg_job_record_end(c->jobs[i], &p) != FG_OK) ok = false;
  }
  fg_check_state status = status_of(c);
  cJSON *pairs = NULL;
  if (status == FG_CHECK_DONE) {
    fg_check *checks[FG_COMPARE_CANDIDATES_MAX];
    const char *labels[FG_COMPARE_CANDIDATES_MAX];
    for (int i = 0; i < c->n; i++) {
      checks[i] = fg_job_check(c->jobs[i]);
      labels[i] = c->labels[i];
    }
    fg_problem p;
    fg_problem_init(&p);
    if (fg_compare_pairs_json(checks, labels, c->n, c->confidence, &pairs,
                              &p) != FG_OK) {
      fg_log_msg(FG_LOG_ERROR, "comparison", "comparison %s: %s", c->rec.id,
                 p.detail);
      status = FG_CHECK_FAILED;
    }
  }
  char finished[32];
  fg_time_now_rfc3339(finished, sizeof finished);
  cJSON *body = body_of(c, status, finished, pairs);
  char *text = body ? cJSON_PrintUnformatted(body) : NULL;
  cJSON_Delete(body);
  fg_store_comparison fin = c->rec;
  snprintf(fin.status, sizeof fin.status, "%s", fg_check_state_name(status));
  snprintf(fin.finished_at, sizeof fin.finished_at, "%s", finished);
  fin.checks = NULL;
  fin.result = text;
  fg_problem p;
  fg_problem_init(&p);
  if (ok && text &&
      fg_store_finish_comparison(c->srv->store, &fin, &p) != FG_OK)
    ok = false;
  if (!text) ok = false;
  cJSON *ev = cJSON_CreateObject();
  if (ev) {
    cJSON_AddStringToObject(ev, "event", "comparison");
    cJSON_AddStringToObject(ev, "id", c->rec.id);
    cJSON_AddStringToObject(ev, "model", c->rec.model);
    cJSON_AddNumberToObject(ev, "version", c->rec.version);
    cJSON_AddStringToObject(ev, "status", fin.status);
    cJSON *ids = cJSON_AddArrayToObject(ev, "checks");
    for (int i = 0; ids && i < c->n; i++)
      cJSON_AddItemToArray(ids, cJSON_CreateString(fg_job_id(c->jobs[i])));
    if (!ok) cJSON_AddStringToObject(ev, "store_error", p.detail);
    fg_log_emit(ok ? FG_LOG_INFO : FG_LOG_ERROR, ev);
  }
  fg_job_hook *hook = NULL;
  void *hctx = NULL;
  pthread_mutex_lock(&c->mu);
  if (ok) {
    c->stage = CMP_STORED;
    c->final_text = text;
    c->status = status;
    text = NULL;
    hook = c->on_stored;
    hctx = c->on_stored_ctx;
    c->on_stored = NULL;
  } else {
    c->stage = CMP_RUNNING; /* the watcher tries again */
  }
  pthread_cond_broadcast(&c->cv);
  pthread_mutex_unlock(&c->mu);
  free(text);
  if (hook) hook(hctx);
  return ok;
}

/* The answer: the stored text once stored, else the live body. */
void fg_comparison_answer(fg_comparison *c, int status, fg_resp *out) {
  char *text = NULL;
  pthread_mutex_lock(&c->mu);
  if (c->stage == CMP_STORED && c->final_text) text = strdup(c->final_text);
  pthread_mutex_unlock(&c->mu);
  if (text)
    fg_resp_json_text(out, status, text);
  else
    fg_resp_json(out, status, body_of(c, FG_CHECK_RUNNING, NULL, NULL));
}

static fg_check_state stored_status(fg_comparison *c) {
  pthread_mutex_lock(&c->mu);
  fg_check_state s = c->stage == CMP_STORED ? c->status : FG_CHECK_RUNNING;
  pthread_mutex_unlock(&c->mu);
  return s;
}

/* ---- POST ---- */

/* Cancel and record candidates started before a refusal. */
static void abandon(fg_job **jobs, int n) {
  for (int i = 0; i < n; i++)
    fg_job_cancel(jobs[i]);
  for (int i = 0; i < n; i++) {
    fg_job_wait(jobs[i], -1);
    fg_problem p;
    fg_problem_init(&p);
    fg_job_record_end(jobs[i], &p);
  }
}

/* Have all candidates ended? (the waiter's look; non-blocking) */
static bool jobs_ended(void *ctx) {
  fg_comparison *c = ctx;
  for (int i = 0; i < c->n; i++)
    if (!fg_job_ended(c->jobs[i])) return false;
  return true;
}

/* Step 5's answer: 200 when every candidate ended and the result is
 * stored, else 202 with the running ones detached. */
static void answer_created(fg_server *srv, fg_comparison *c, fg_resp *out) {
  snprintf(out->location, sizeof out->location, "/v1/comparisons/%s",
           c->rec.id);
  bool all = jobs_ended(c);
  for (int i = 0; i < c->n; i++)
    if (!fg_job_ended(c->jobs[i])) fg_job_detach(c->jobs[i]);
  if (all && fg_comparison_step(c)) {
    fg_registry_poke(srv->registry);
    fg_comparison_answer(c, 200, out);
    return;
  }
  fg_comparison_answer(c, 202, out);
}

static void created_finish(fg_req *r, void *ctx, bool timed_out,
                           fg_resp *out) {
  answer_created(r->srv, ctx, out);
  fg_comparison_unref(ctx);
}

/* The request went away while waiting: the watcher finishes it. */
static void created_drop(void *ctx) {
  fg_comparison *c = ctx;
  for (int i = 0; i < c->n; i++)
    if (!fg_job_ended(c->jobs[i])) fg_job_detach(c->jobs[i]);
  fg_comparison_unref(c);
}

void fg_h_comparisons_create(fg_req *r, fg_resp *out) {
  fg_server *srv = r->srv;
  const char *name = r->params[0];
  fg_http_target t;
  fg_compare_request cr;
  memset(&cr, 0, sizeof cr);
  fg_comparison *c = NULL;

  if (!fg_http_open_target(r, name, 0, "compare",
                           "a comparison request object with "
                           "\"candidates\"",
                           &t, out))
    goto done;
  fg_problem *p = &t.p;
  const fg_store_version *v = &t.v;
  if (fg_compare_parse(t.m, t.body, &srv->cfg.limits, &cr, p) != FG_OK) {
    fg_resp_problem(out, p, 0);
    goto done;
  }
  int n = cr.ncandidates;
  const fg_check_request *first = &cr.candidates[0];
  if (!fg_http_digest_agrees(first, v, p, out)) goto done;
  if (!first->seed_given) fg_compare_set_seed(&cr, fg_seed_draw());
  double wait_s = fg_http_wait_bound(srv, first->wait_s);

  int queued = fg_pool_queued(srv->pool);
  if (queued + n > srv->cfg.queue) {
    fg_resp_error(out, 503, FG_EBUSY,
                  "the check queue has room for %d of the %d candidates "
                  "(%d of %d places taken); try again shortly",
                  srv->cfg.queue - queued > 0 ? srv->cfg.queue - queued : 0, n,
                  queued, srv->cfg.queue);
    goto done;
  }
  c = calloc(1, sizeof *c);
  if (!c) {
    fg_resp_error(out, 503, FG_ENOMEM, "out of memory starting a comparison");
    goto done;
  }
  atomic_init(&c->refs, 1);
  pthread_mutex_init(&c->mu, NULL);
  pthread_cond_init(&c->cv, NULL);
  c->srv = srv;
  fg_http_new_id("cmp_", c->rec.id);
  snprintf(c->rec.model, sizeof c->rec.model, "%s", v->name);
  c->rec.version = v->version;
  snprintf(c->rec.digest, sizeof c->rec.digest, "%s", v->digest);
  snprintf(c->rec.status, sizeof c->rec.status, "%s",
           fg_check_state_name(FG_CHECK_RUNNING));
  fg_time_now_rfc3339(c->rec.created_at, sizeof c->rec.created_at);
  snprintf(c->rec.key, sizeof c->rec.key, "%s", r->key_name);
  c->seed = first->seed;
  c->samples = first->samples;
  c->confidence = first->confidence;
  double t0 = fg_time_monotonic();
  for (; c->n < n; c->n++) {
    cr.candidates[c->n].max_seconds = srv->cfg.max_check_s;
    snprintf(c->labels[c->n], sizeof c->labels[c->n], "%s",
             cr.candidates[c->n].label);
    if (fg_job_start(srv, v, t.m, &cr.candidates[c->n], r->key_name, c->rec.id,
                     &c->jobs[c->n], p) != FG_OK)
      break;
  }
  if (c->n < n) {
    abandon(c->jobs, c->n);
    fg_resp_problem(out, p, 0);
    goto done;
  }
  cJSON *ids = cJSON_CreateArray();
  for (int i = 0; ids && i < n; i++)
    cJSON_AddItemToArray(ids, cJSON_CreateString(fg_job_id(c->jobs[i])));
  fg_store_comparison row = c->rec;
  row.checks = ids ? cJSON_PrintUnformatted(ids) : NULL;
  row.result = NULL;
  cJSON_Delete(ids);
  fg_status st = row.checks ? fg_store_put_comparison(srv->store, &row, p)
                            : fg_problem_set(p, FG_ENOMEM, "out of memory");
  free(row.checks);
  if (st == FG_OK) st = fg_registry_add_comparison(srv->registry, c, p);
  if (st != FG_OK) {
    abandon(c->jobs, c->n);
    fg_resp_problem(out, p, 0);
    goto done;
  }
  if (wait_s > 0 && !jobs_ended(c)) {
    /* Step 5 waits suspended, holding no thread (waiter.c). */
    out->pending = (fg_pending){.ready = jobs_ended,
                                .finish = created_finish,
                                .drop = created_drop,
                                .ctx = fg_comparison_ref(c),
                                .deadline = fg_time_monotonic() + wait_s -
                                            (fg_time_monotonic() - t0)};
    goto done;
  }
  answer_created(srv, c, out);

done:
  fg_comparison_unref(c);
  fg_compare_request_free(&cr);
  fg_http_target_clear(&t);
}

/* ---- GET and DELETE ---- */

/* A comparison this process does not hold: its row, and while it has no
 * result, its candidates' rows (progress noted by the replica that runs
 * them, or their ends). */
static void answer_stored(fg_req *r, const fg_store_comparison *row,
                          fg_resp *out) {
  if (row->result) {
    char *text = strdup(row->result);
    if (text) {
      fg_resp_json_text(out, 200, text);
      return;
    }
  }
  cJSON *ids = row->checks ? cJSON_Parse(row->checks) : NULL;
  fg_check_state status = fg_check_state_parse(row->status);
  uint64_t seed = 0, samples = 0;
  double confidence = NAN;
  cJSON *cands = cJSON_CreateArray();
  const cJSON *id;
  cJSON_ArrayForEach(id, ids) {
    if (!cJSON_IsString(id)) continue;
    fg_store_check ch;
    fg_problem p;
    fg_problem_init(&p);
    if (fg_store_get_check(r->srv->store, id->valuestring, &ch, &p) != FG_OK)
      continue;
    cJSON *b = fg_http_stored_check_body(&ch);
    seed = ch.seed;
    const cJSON *sr = cJSON_GetObjectItemCaseSensitive(b, "samples_requested");
    if (cJSON_IsNumber(sr)) samples = (uint64_t)sr->valuedouble;
    const cJSON *cf = cJSON_GetObjectItemCaseSensitive(b, "confidence");
    if (cJSON_IsNumber(cf)) confidence = cf->valuedouble;
    if (b && cands) cJSON_AddItemToArray(cands, b);
    fg_store_check_clear(&ch);
  }
  cJSON_Delete(ids);
  cJSON *o = frame(row, status, seed, samples, confidence);
  if (!o) {
    cJSON_Delete(cands);
    fg_resp_error(out, 503, FG_ENOMEM, "out of memory");
    return;
  }
  cJSON_AddItemToObject(o, "candidates", cands ? cands : cJSON_CreateArray());
  cJSON_AddItemToObject(o, "pairs", cJSON_CreateArray());
  fg_resp_json(out, 200, o);
}

static bool valid_id(const char *id, fg_resp *out) {
  if (fg_http_is_id("cmp_", id)) return true;
  fg_resp_error(out, 404, FG_ENOTFOUND, "no comparison with id '%.40s'", id);
  return false;
}

/* The stored row of comparison `id`; false after answering the problem
 * (404 for an unknown id). */
static bool read_row(fg_req *r, const char *id, fg_store_comparison *row,
                     fg_resp *out) {
  fg_problem p;
  fg_problem_init(&p);
  if (fg_store_get_comparison(r->srv->store, id, row, &p) == FG_OK)
    return true;
  fg_resp_problem(out, &p, 0);
  return false;
}

void fg_h_comparison_get(fg_req *r, fg_resp *out) {
  const char *id = r->params[0];
  if (!valid_id(id, out)) return;
  fg_comparison *c = fg_registry_find_comparison(r->srv->registry, id);
  if (c) {
    fg_comparison_answer(c, 200, out);
    fg_comparison_unref(c);
    return;
  }
  fg_store_comparison row;
  if (!read_row(r, id, &row, out)) return;
  answer_stored(r, &row, out);
  fg_store_comparison_clear(&row);
}

/* Another replica's comparison, read from the store (fg_replica_look). */
static bool look_comparison(fg_req *r, const char *id, fg_resp *out) {
  fg_store_comparison row;
  if (!read_row(r, id, &row, out)) return true;
  bool answered = fg_check_state_parse(row.status) != FG_CHECK_RUNNING;
  if (answered) answer_stored(r, &row, out);
  fg_store_comparison_clear(&row);
  return answered;
}

static void cancelled_finish(fg_req *r, void *ctx, bool timed_out,
                             fg_resp *out) {
  fg_comparison *c = ctx;
  if (!fg_comparison_step(c)) {
    fg_resp_error(out, 503, FG_EBUSY,
                  "comparison %s was told to stop but its end is not "
                  "recorded yet; GET it shortly",
                  c->rec.id);
  } else {
    fg_comparison_answer(c, 200, out);
  }
  fg_registry_poke(r->srv->registry);
  fg_comparison_unref(c);
}

static void cancelled_drop(void *ctx) { fg_comparison_unref(ctx); }

void fg_h_comparison_cancel(fg_req *r, fg_resp *out) {
  const char *id = r->params[0];
  if (!valid_id(id, out)) return;
  fg_comparison *c = fg_registry_find_comparison(r->srv->registry, id);
  if (c) {
    bool running = false;
    for (int i = 0; i < c->n; i++)
      if (!fg_job_ended(c->jobs[i])) running = true;
    if (!running) {
      fg_comparison_step(c);
      fg_resp_error(out, 409, FG_ECONFLICT,
                    "comparison %s is not running: it ended %s", id,
                    fg_check_state_name(stored_status(c)));
      fg_comparison_unref(c);
      return;
    }
    for (int i = 0; i < c->n; i++)
      fg_job_cancel(c->jobs[i]);
    /* The wait for the candidates' ends is suspended (waiter.c). */
    out->pending =
        (fg_pending){.ready = jobs_ended,
                     .finish = cancelled_finish,
                     .drop = cancelled_drop,
                     .ctx = c, /* the reference found */
                     .deadline = fg_time_monotonic() + FG_HTTP_CANCEL_WAIT_S};
    return;
  }
  fg_store_comparison row;
  if (!read_row(r, id, &row, out)) return;
  fg_check_state state = fg_check_state_parse(row.status);
  if (state == FG_CHECK_RUNNING && fg_store_shared(r->srv->store)) {
    /* Runs in another replica: ask it to cancel every candidate, then
     * wait for the comparison's row to end. */
    cJSON *ids = row.checks ? cJSON_Parse(row.checks) : NULL;
    const cJSON *cid;
    cJSON_ArrayForEach(cid, ids) {
      if (!cJSON_IsString(cid)) continue;
      fg_problem p; /* a candidate already ended: nothing to ask */
      fg_problem_init(&p);
      fg_store_request_cancel(r->srv->store, cid->valuestring, &p);
    }
    cJSON_Delete(ids);
    fg_store_comparison_clear(&row);
    fg_replica_wait("comparison", id, look_comparison, out);
    return;
  }
  fg_resp_error(out, 409, FG_ECONFLICT,
                "comparison %s is not running here: it is %s", id, row.status);
  fg_store_comparison_clear(&row);
}
