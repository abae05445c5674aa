/*
 * http/checks.c -- running, reading and listing checks.
 *
 *   POST /v1/models/{name}/checks               against the latest version
 *   POST /v1/models/{name}/versions/{n}/checks  against version n
 *   GET  /v1/checks/{id}                        one check (live if running)
 *   DELETE /v1/checks/{id}                      cancel a running check
 *   GET  /v1/checks?model=&verdict=&since=&label=&key=&limit=&after=
 *
 * How a check is run (the order is the durability contract):
 *   1. load the version (404, 410 when retired) and its compiled model;
 *   2. parse the body (fg_json_parse: byte offset on malformed JSON) and
 *      the request (fg_request_parse: pointers for every fault);
 *   3. 409 when expect_digest names another digest;
 *   4. draw a seed when none was given, so the log can replay the check;
 *   5. fg_job_start (lifecycle.c): record the check as `running` in the
 *      store -- before any work, so a crash from here on leaves a record
 *      that the next start-up marks `interrupted` -- then queue it on the
 *      pool (503 + Retry-After when the queue is full: checked before too,
 *      so a refused check normally leaves no record; one refused by the
 *      pool after all is closed as `failed`);
 *   6. wait up to wait_s: ended -> record the end (fg_job_record_end),
 *      201 + Location; still running -> 202 with the running body, and
 *      the registry's watcher records it when it ends. No wait here holds
 *      a thread: the request is suspended (out->pending, waiter.c) until
 *      the job has ended or the time is up; so are DELETE's wait for a
 *      cancelled check and GET's look for a just-started one.
 *
 * Check ids are made by ids.c.
 *
 * Thread use: handlers on connection threads. The life of a check itself
 * (record, queue, end, record) is lifecycle.c's.
 */
#include "http/http_internal.h"
#include "http/metrics.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/random.h>
#include <time.h>

/* ---- result bodies and records ---- */

static void add_number_or_null(cJSON *o, const char *name, double v) {
  if (isfinite(v))
    cJSON_AddNumberToObject(o, name, v);
  else
    cJSON_AddNullToObject(o, name);
}

static void add_string_or_null(cJSON *o, const char *name, const char *s) {
  if (s && s[0])
    cJSON_AddStringToObject(o, name, s);
  else
    cJSON_AddNullToObject(o, name);
}

/* The summary of a stored check, as listed (and as the body of a check
 * that has no result body: interrupted, or failed to start). */
static cJSON *check_summary(const fg_store_check *c) {
  cJSON *o = cJSON_CreateObject();
  if (!o) return NULL;
  cJSON_AddStringToObject(o, "id", c->id);
  cJSON_AddStringToObject(o, "status", c->status);
  cJSON *m = cJSON_AddObjectToObject(o, "model");
  if (m) {
    cJSON_AddStringToObject(m, "name", c->model);
    cJSON_AddNumberToObject(m, "version", c->version);
    cJSON_AddStringToObject(m, "digest", c->digest);
  }
  add_string_or_null(o, "verdict", c->verdict);
  /* joint: null before anything was merged; interval null until known */
  bool have_p = isfinite(c->probability);
  bool have_iv = isfinite(c->lower) && isfinite(c->upper);
  if (!have_p && !have_iv) {
    cJSON_AddNullToObject(o, "joint");
  } else {
    cJSON *j = cJSON_AddObjectToObject(o, "joint");
    if (j) {
      add_number_or_null(j, "probability", c->probability);
      cJSON *iv = have_iv ? cJSON_AddObjectToObject(j, "interval") : NULL;
      if (iv) {
        cJSON_AddNumberToObject(iv, "lower", c->lower);
        cJSON_AddNumberToObject(iv, "upper", c->upper);
      } else if (!have_iv) {
        cJSON_AddNullToObject(j, "interval");
      }
    }
  }
  cJSON_AddStringToObject(o, "created_at", c->created_at);
  add_string_or_null(o, "finished_at", c->finished_at);
  add_string_or_null(o, "label", c->label);
  add_string_or_null(o, "key", c->key);
  return o;
}

/* ---- POST .../checks ---- */

/* Steps 6-7 for a started job: ended -> record the end, 201; still
 * running -> 202, and the registry's watcher records its end. */
static void answer_created(fg_job *job, fg_resp *out) {
  snprintf(out->location, sizeof out->location, "/v1/checks/%s",
           fg_job_id(job));
  if (fg_job_ended(job)) {
    fg_problem sp;
    fg_problem_init(&sp);
    if (fg_job_record_end(job, &sp) != FG_OK) {
      out->location[0] = '\0';
      fg_resp_problem(out, &sp, 0);
      return;
    }
    fg_job_answer(job, 201, out);
    return;
  }
  /* Still running: answer 202 with the running body; the registry's
   * watcher records its end. */
  fg_job_detach(job);
  fg_job_answer(job, 202, out);
}

/* The waiter's look: has the job ended? (non-blocking) */
static bool job_ended(void *ctx) { return fg_job_ended(ctx); }

static void create_finish(fg_req *r, void *ctx, bool timed_out,
                          fg_resp *out) {
  answer_created(ctx, out);
  fg_job_unref(ctx);
}

/* The request went away while waiting: the watcher records the job. */
static void create_drop(void *ctx) {
  fg_job_detach(ctx);
  fg_job_unref(ctx);
}

void fg_h_checks_create(fg_req *r, fg_resp *out) {
  fg_server *srv = r->srv;
  const char *name = r->params[0];
  int version = 0;
  if (r->nparams > 1) {
    version = fg_http_parse_version(r->params[1]);
    if (version < 1) {
      fg_resp_error(out, 404, FG_ENOTFOUND,
                    "model '%.64s' has no version '%.32s'", name, r->params[1]);
      return;
    }
  }
  fg_http_target t;
  fg_check_request req;
  memset(&req, 0, sizeof req);
  bool have_req = false;
  fg_job *job = NULL;

  if (!fg_http_open_target(r, name, version, "check",
                           "a check request object with at least "
                           "\"decision\"",
                           &t, out))
    goto done;
  have_req = true;
  if (fg_request_parse(t.m, t.body, &srv->cfg.limits, &req, &t.p) != FG_OK) {
    fg_resp_problem(out, &t.p, 0);
    goto done;
  }
  if (!fg_http_digest_agrees(&req, &t.v, &t.p, out)) goto done;
  if (!req.seed_given) {
    req.seed = fg_seed_draw();
    req.seed_given = true;
  }
  req.wait_s = fg_http_wait_bound(srv, req.wait_s);

  /* Refuse before recording when the queue is visibly full, so that a
   * 503 leaves no record; a burst that races past this is closed as
   * `failed` below. */
  if (fg_pool_queued(srv->pool) >= srv->cfg.queue) {
    fg_resp_error(out, 503, FG_EBUSY,
                  "the check queue is full (%d checks waiting or running); "
                  "try again shortly",
                  srv->cfg.queue);
    goto done;
  }
  req.max_seconds = srv->cfg.max_check_s;
  if (fg_job_start(srv, &t.v, t.m, &req, r->key_name, NULL, &job, &t.p) !=
      FG_OK) {
    fg_resp_problem(out, &t.p, 0);
    goto done;
  }
  snprintf(out->location, sizeof out->location, "/v1/checks/%s",
           fg_job_id(job));
  if (req.wait_s > 0 && !fg_job_ended(job)) {
    /* Wait suspended, holding no thread (waiter.c). */
    out->location[0] = '\0';
    out->pending = (fg_pending){.ready = job_ended,
                                .finish = create_finish,
                                .drop = create_drop,
                                .ctx = job,
                                .deadline = fg_time_monotonic() + req.wait_s};
    job = NULL; /* the wait owns the reference */
    goto done;
  }
  answer_created(job, out);

done:
  fg_job_unref(job);
  if (have_req) fg_request_free(&req);
  fg_http_target_clear(&t);
}

/* ---- GET /v1/checks/{id} ---- */

/* The body of a stored check that has no result body (left running by a
 * dead process and marked interrupted, closed failed before it started,
 * or just started by another replica), in check-result.schema.json's
 * shape: the summary, the run
 * settings from the stored request, and no "joint" (nothing was merged). */
static cJSON *stored_body(const fg_store_check *c) {
  cJSON *o = check_summary(c);
  if (!o) return NULL;
  cJSON_DeleteItemFromObjectCaseSensitive(o, "joint");
  cJSON *req = c->request ? cJSON_Parse(c->request) : NULL;
  static const char *const settings[] = {"target", "confidence"};
  for (size_t i = 0; i < sizeof settings / sizeof *settings; i++) {
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(req, settings[i]);
    if (cJSON_IsNumber(v))
      cJSON_AddNumberToObject(o, settings[i], v->valuedouble);
  }
  cJSON_Delete(req);
  char seed[24]; /* as integer text: doubles print 2^53 in exponent form */
  snprintf(seed, sizeof seed, "%llu", (unsigned long long)c->seed);
  cJSON_AddRawToObject(o, "seed", seed);
  if (fg_check_state_parse(c->status) == FG_CHECK_RUNNING) {
    /* Running in another replica that has not noted its progress yet (it
     * does within FG_REGISTRY_PROGRESS_MS of the start): nothing merged
     * is known here. */
    cJSON *pr = cJSON_AddObjectToObject(o, "progress");
    if (pr) {
      cJSON_AddNumberToObject(pr, "samples_done", 0);
      cJSON_AddNullToObject(pr, "probability");
      cJSON_AddNullToObject(pr, "interval");
    }
  }
  return o;
}

cJSON *fg_http_stored_check_body(const fg_store_check *c) {
  cJSON *o = c->result ? cJSON_Parse(c->result) : NULL;
  return o ? o : stored_body(c);
}

/* Answers 200 with the stored result body of `c`, sent as stored (the
 * answer as it was given), and moves it out of `c`; false when `c` has no
 * result body. */
static bool send_stored_result(fg_resp *out, fg_store_check *c) {
  if (!c->result) return false;
  fg_resp_json_text(out, 200, c->result);
  c->result = NULL;
  return true;
}

/* A GET of a check stored as running but not (yet) listed here: looks
 * at the registry for FG_HTTP_LIVE_RETRIES x 2 ms, suspended. */
typedef struct get_wait {
  fg_server *srv;
  char id[FG_HTTP_PATH_MAX + 1];
} get_wait;

static bool get_listed(void *ctx) {
  get_wait *gw = ctx;
  fg_job *job = fg_registry_find(gw->srv->registry, gw->id);
  fg_job_unref(job);
  return job != NULL;
}

static void get_answer(fg_server *srv, const char *id, bool look_again,
                       fg_resp *out);

static void get_finish(fg_req *r, void *ctx, bool timed_out, fg_resp *out) {
  get_wait *gw = ctx;
  get_answer(gw->srv, gw->id, false, out);
  free(gw);
}

static void get_answer(fg_server *srv, const char *id, bool look_again,
                       fg_resp *out) {
  fg_job *job = fg_registry_find(srv->registry, id);
  if (job) {
    fg_job_answer(job, 200, out);
    fg_job_unref(job);
    return;
  }
  fg_problem p;
  fg_problem_init(&p);
  fg_store_check c;
  if (fg_store_get_check(srv->store, id, &c, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    return;
  }
  /* A check is recorded as running a moment before it is listed in the
   * registry (record, start, list). A GET in that gap would get the
   * stored body without progress; look again for a short while. */
  if (look_again && fg_check_state_parse(c.status) == FG_CHECK_RUNNING) {
    get_wait *gw = malloc(sizeof *gw);
    if (gw) {
      gw->srv = srv;
      snprintf(gw->id, sizeof gw->id, "%s", id);
      fg_store_check_clear(&c);
      out->pending = (fg_pending){.ready = get_listed,
                                  .finish = get_finish,
                                  .drop = free,
                                  .ctx = gw,
                                  .deadline = fg_time_monotonic() +
                                              FG_HTTP_LIVE_RETRIES * 0.002};
      return;
    }
  }
  if (!send_stored_result(out, &c)) fg_resp_json(out, 200, stored_body(&c));
  fg_store_check_clear(&c);
}

void fg_h_check_get(fg_req *r, fg_resp *out) {
  get_answer(r->srv, r->params[0], true, out);
}

/* ---- DELETE /v1/checks/{id} ---- */

/* Cancel a check this process runs: the engine ends it within one block,
 * or within FG_STUCK_WORKER_S when a worker is stuck; its end is then
 * recorded here (or was, by whoever came first). */
/* The end of a DELETE of a job this process runs, once it has ended. */
static void cancel_answer(fg_server *srv, fg_job *job, fg_resp *out) {
  const char *id = fg_job_id(job);
  fg_problem sp;
  fg_problem_init(&sp);
  if (fg_job_record_end(job, &sp) != FG_OK) {
    fg_resp_problem(out, &sp, 0);
    return;
  }
  fg_registry_poke(srv->registry);
  if (fg_job_final_state(job) == FG_CHECK_CANCELLED) {
    fg_job_answer(job, 200, out);
    return;
  }
  fg_resp_error(out, 409, FG_ECONFLICT, "check %s is not running: it ended %s",
                id, fg_check_state_name(fg_job_final_state(job)));
}

typedef struct cancel_wait {
  fg_server *srv;
  fg_job *job; /* a reference */
} cancel_wait;

static bool cancel_ended(void *ctx) {
  return fg_job_ended(((cancel_wait *)ctx)->job);
}

static void cancel_drop(void *ctx) {
  cancel_wait *cw = ctx;
  fg_job_unref(cw->job);
  free(cw);
}

static void cancel_finish(fg_req *r, void *ctx, bool timed_out,
                          fg_resp *out) {
  cancel_wait *cw = ctx;
  if (!fg_job_ended(cw->job))
    fg_resp_error(out, 503, FG_EBUSY,
                  "check %s was told to stop but has not stopped within "
                  "%g s; GET it shortly",
                  fg_job_id(cw->job), FG_HTTP_CANCEL_WAIT_S);
  else
    cancel_answer(cw->srv, cw->job, out);
  cancel_drop(cw);
}

/* Cancel a check this process runs: the engine ends it within one block,
 * or within FG_STUCK_WORKER_S when a worker is stuck; its end is then
 * recorded here (or was, by whoever came first). The wait for the end is
 * suspended. */
static void cancel_here(fg_req *r, fg_job *job, fg_resp *out) {
  const char *id = fg_job_id(job);
  if (!fg_job_ended(job)) {
    fg_job_cancel(job);
    if (!fg_job_ended(job)) {
      cancel_wait *cw = malloc(sizeof *cw);
      if (!cw) {
        fg_resp_error(out, 503, FG_ENOMEM,
                      "out of memory waiting for check %s to stop", id);
        return;
      }
      cw->srv = r->srv;
      cw->job = fg_job_ref(job);
      out->pending =
          (fg_pending){.ready = cancel_ended,
                       .finish = cancel_finish,
                       .drop = cancel_drop,
                       .ctx = cw,
                       .deadline = fg_time_monotonic() + FG_HTTP_CANCEL_WAIT_S};
      return;
    }
    cancel_answer(r->srv, job, out);
    return;
  }
  fg_resp_error(out, 409, FG_ECONFLICT, "check %s is not running: it ended %s",
                id, fg_check_state_name(fg_job_final_state(job)));
}

/* Another replica's check, read from the store (fg_replica_look). */
static bool look_check(fg_req *r, const char *id, fg_resp *out) {
  fg_problem p;
  fg_problem_init(&p);
  fg_store_check c;
  if (fg_store_get_check(r->srv->store, id, &c, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    return true;
  }
  fg_check_state state = fg_check_state_parse(c.status);
  bool answered = state != FG_CHECK_RUNNING;
  if (state == FG_CHECK_CANCELLED) {
    if (!send_stored_result(out, &c))
      fg_resp_json(out, 200, check_summary(&c));
  } else if (answered) {
    fg_resp_error(out, 409, FG_ECONFLICT,
                  "check %s is not running: it ended %s", id, c.status);
  }
  fg_store_check_clear(&c);
  return answered;
}

void fg_h_check_cancel(fg_req *r, fg_resp *out) {
  const char *id = r->params[0];
  fg_job *job = fg_registry_find(r->srv->registry, id);
  if (job) {
    cancel_here(r, job, out);
    fg_job_unref(job);
    return;
  }
  fg_problem p;
  fg_problem_init(&p);
  fg_store_check c;
  if (fg_store_get_check(r->srv->store, id, &c, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0); /* 404 for an unknown id */
    return;
  }
  fg_check_state state = fg_check_state_parse(c.status);
  if (state == FG_CHECK_RUNNING && fg_store_shared(r->srv->store)) {
    /* Running in another replica: ask it through the store, and wait for
     * the record to end. */
    fg_problem_init(&p);
    if (fg_store_request_cancel(r->srv->store, id, &p) != FG_OK) {
      fg_store_check_clear(&c);
      fg_resp_problem(out, &p, 0);
      return;
    }
    fg_store_check_clear(&c);
    fg_replica_wait("check", id, look_check, out);
    return;
  }
  if (state == FG_CHECK_RUNNING)
    fg_resp_error(out, 409, FG_ECONFLICT,
                  "check %s is ending (or runs in another process) and "
                  "can no longer be cancelled here",
                  id);
  else
    fg_resp_error(out, 409, FG_ECONFLICT,
                  "check %s is not running: it ended %s", id, c.status);
  fg_store_check_clear(&c);
}

/* ---- GET /v1/checks ---- */

typedef struct list_query {
  const char *model, *verdict, *since, *label, *key, *limit, *after;
} list_query;

/* RFC 3339 date-time (or a plain date) -> "YYYY-MM-DDTHH:MM:SSZ" in UTC,
 * the form created_at is stored in. Fractions of a second are dropped. */
static bool normalise_time(const char *s, char out[32]) {
  int y, mo, d, h = 0, mi = 0, se = 0, n = 0;
  if (sscanf(s, "%4d-%2d-%2d%n", &y, &mo, &d, &n) != 3 || n != 10) return false;
  const char *t = s + n;
  long offset_s = 0;
  if (*t) {
    if (*t != 'T' && *t != 't' && *t != ' ') return false;
    t++;
    int m = 0;
    if (sscanf(t, "%2d:%2d:%2d%n", &h, &mi, &se, &m) != 3 || m != 8)
      return false;
    t += m;
    if (*t == '.') {
      t++;
      if (!isdigit((unsigned char)*t)) return false;
      while (isdigit((unsigned char)*t))
        t++;
    }
    if (*t == 'Z' || *t == 'z') {
      t++;
    } else if (*t == '+' || *t == '-') {
      int oh, om, k = 0;
      if (sscanf(t + 1, "%2d:%2d%n", &oh, &om, &k) != 2 || k != 5 || oh > 23 ||
          om > 59)
        return false;
      offset_s = (oh * 3600L + om * 60L) * (*t == '-' ? -1 : 1);
      t += 6;
    } else {
      return false;
    }
    if (*t) return false;
  }
  if (mo < 1 || mo > 12 || d < 1 || d > 31 || h > 23 || mi > 59 || se > 60)
    return false;
  struct tm tm = {.tm_year = y - 1900,
                  .tm_mon = mo - 1,
                  .tm_mday = d,
                  .tm_hour = h,
                  .tm_min = mi,
                  .tm_sec = se > 59 ? 59 : se};
  time_t when = timegm(&tm);
  if (when == (time_t)-1) return false;
  if (tm.tm_mday != d || tm.tm_mon != mo - 1) return false; /* Feb 30 */
  when -= offset_s;
  struct tm u;
  if (!gmtime_r(&when, &u)) return false;
  strftime(out, 32, "%Y-%m-%dT%H:%M:%SZ", &u);
  return true;
}

/* A filter given as `value`: into *dst when `ok`, else a 400 naming the
 * parameter, what was expected and what was found; true when absent. */
static bool filter(fg_resp *out, const char *name, const char *value, bool ok,
                   const char *expected, const char **dst) {
  if (!value) return true;
  if (!ok) {
    fg_resp_bad_param(out, name, "expected %s, found '%.64s'", expected,
                      value);
    return false;
  }
  *dst = value;
  return true;
}

void fg_h_checks_list(fg_req *r, fg_resp *out) {
  list_query q;
  static const char *const names[] = {"model", "verdict", "since", "label",
                                      "key",   "limit",   "after"};
  const char **const slots[] = {&q.model, &q.verdict, &q.since, &q.label,
                                &q.key,   &q.limit,   &q.after};
  if (!fg_http_query_args(r, names, slots, 7, out)) return;
  fg_check_filter f = {.limit = FG_LIST_LIMIT_DEFAULT};
  char since[32];
  bool verdict_ok = q.verdict && (!strcmp(q.verdict, "pass") ||
                                  !strcmp(q.verdict, "fail") ||
                                  !strcmp(q.verdict, "inconclusive"));
  if (!filter(out, "model", q.model, q.model && fg_model_is_model_name(q.model),
              "a model name ([a-z0-9][a-z0-9_.-]{0,63})", &f.model) ||
      !filter(out, "verdict", q.verdict, verdict_ok,
              "pass, fail or inconclusive", &f.verdict) ||
      !filter(out, "since", q.since, q.since && normalise_time(q.since, since),
              "an RFC 3339 date-time such as 2026-12-01T21:40:00Z",
              &f.since) ||
      !filter(out, "label", q.label, q.label && strlen(q.label) <= FG_LABEL_MAX,
              "a label of at most label_length characters", &f.label) ||
      !filter(out, "key", q.key, q.key && fg_key_name_valid(q.key),
              "an API key's name (as `feasgate keys list` shows it)",
              &f.key) ||
      !filter(out, "after", q.after, q.after && fg_http_is_id("chk_", q.after),
              "the id of the last check seen (chk_...)", &f.after))
    return;
  if (f.since) f.since = since;
  if (q.limit) {
    char *end = NULL;
    errno = 0;
    long lim = strtol(q.limit, &end, 10);
    if (errno || !q.limit[0] || *end || lim < 1 || lim > FG_LIST_LIMIT_MAX) {
      fg_resp_bad_param(out, "limit",
                        "expected a whole number from 1 to %d, found '%.32s'",
                        FG_LIST_LIMIT_MAX, q.limit);
      return;
    }
    f.limit = (int)lim;
  }

  fg_problem p;
  fg_problem_init(&p);
  fg_store_check *list = NULL;
  int n = 0;
  char next[40];
  fg_status st = fg_store_list_checks(r->srv->store, &f, &list, &n, next, &p);
  if (st == FG_EINVAL) {
    fg_resp_bad_param(out, "after", "%s", p.detail);
    return;
  }
  if (st != FG_OK) {
    fg_resp_problem(out, &p, 0);
    return;
  }
  cJSON *o = cJSON_CreateObject();
  cJSON *arr = o ? cJSON_AddArrayToObject(o, "checks") : NULL;
  for (int i = 0; arr && i < n; i++) {
    cJSON *s = check_summary(&list[i]);
    if (s) cJSON_AddItemToArray(arr, s);
  }
  fg_store_checks_free(list, n);
  if (o) add_string_or_null(o, "next", next);
  fg_resp_json(out, 200, o);
}
