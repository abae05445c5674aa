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
 *   5. record the check as `running` in the store -- before any work, so a
 *      crash from here on leaves a record that the next start-up marks
 *      `interrupted`;
 *   6. queue it on the pool (503 + Retry-After when the queue is full:
 *      checked before step 5 too, so a refused check normally leaves no
 *      record; one refused by the pool after all is closed as `failed`);
 *   7. wait up to wait_s: ended -> record the result, 201 + Location;
 *      still running -> 202 with the running body, and the registry
 *      (registry.c) records it when it ends. The wait holds no thread:
 *      the request is suspended (out->pending, waiter.c) until the check
 *      has ended or wait_s has passed, then answer_created answers.
 *
 * Check ids: "chk_" + 26 Crockford base32 characters of a 128-bit value,
 * 48 bits of Unix milliseconds then 80 random bits. Ids made in the same
 * millisecond by this process increase by one in their random part, so ids
 * sort in creation order and the list cursor can be an id. The generator's
 * last value is the one piece of process-wide state here (mutex-guarded).
 *
 * Thread use: handlers on libmicrohttpd's threads; fg_http_record_end also on
 * the registry's watcher thread.
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

/* ---- ids ---- */

static const char crockford[] = "0123456789ABCDEFGHJKMNPQRSTVWXYZ";

static pthread_mutex_t id_lock = PTHREAD_MUTEX_INITIALIZER;
static uint64_t id_last_ms;
static uint8_t id_last_rand[10];

void fg_http_check_id(char out[40]) {
  struct timespec ts;
  clock_gettime(CLOCK_REALTIME, &ts);
  uint64_t ms = (uint64_t)ts.tv_sec * 1000u + (uint64_t)ts.tv_nsec / 1000000u;
  uint8_t rnd[10];
  if (getrandom(rnd, sizeof rnd, 0) != (ssize_t)sizeof rnd) {
    /* No entropy: fall back to the clock; monotonicity still holds. */
    uint64_t x = (uint64_t)ts.tv_nsec * 0x9E3779B97F4A7C15ull;
    for (size_t i = 0; i < sizeof rnd; i++)
      rnd[i] = (uint8_t)(x >> (i * 6));
  }
  pthread_mutex_lock(&id_lock);
  if (ms <= id_last_ms) {
    ms = id_last_ms;
    memcpy(rnd, id_last_rand, sizeof rnd);
    for (int i = (int)sizeof rnd - 1; i >= 0; i--)
      if (++rnd[i] != 0) break;
  }
  id_last_ms = ms;
  memcpy(id_last_rand, rnd, sizeof rnd);
  pthread_mutex_unlock(&id_lock);

  uint8_t bytes[16];
  for (int i = 0; i < 6; i++)
    bytes[i] = (uint8_t)(ms >> (8 * (5 - i)));
  memcpy(bytes + 6, rnd, sizeof rnd);
  /* 26 groups of 5 bits over 130 bits: two zero bits, then the 128. */
  memcpy(out, "chk_", 4);
  for (int k = 0; k < 26; k++) {
    int v = 0;
    for (int b = k * 5 - 2; b < k * 5 + 3; b++) {
      int bit = b < 0 ? 0 : (bytes[b / 8] >> (7 - b % 8)) & 1;
      v = (v << 1) | bit;
    }
    out[4 + k] = crockford[v];
  }
  out[30] = '\0';
}

static bool is_check_id(const char *s) {
  if (strncmp(s, "chk_", 4) != 0 || strlen(s) != 30) return false;
  for (int i = 4; i < 30; i++)
    if (!strchr(crockford, s[i]) || s[i] == '\0') return false;
  return true;
}

/* ---- result bodies and records ---- */

static double number_at(const cJSON *o, const char *a, const char *b,
                        const char *c) {
  const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, a);
  if (b) v = cJSON_GetObjectItemCaseSensitive(v, b);
  if (c) v = cJSON_GetObjectItemCaseSensitive(v, c);
  return cJSON_IsNumber(v) ? v->valuedouble : NAN;
}

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

fg_status fg_http_record_end(fg_store *store, fg_check *c,
                             const fg_store_check *rec, cJSON **body,
                             fg_problem *p) {
  return fg_http_record_end_keep(store, c, rec, body, NULL, p);
}

fg_status fg_http_record_end_keep(fg_store *store, fg_check *c,
                                  const fg_store_check *rec, cJSON **body,
                                  fg_store_check **unsaved, fg_problem *p) {
  if (body) *body = NULL;
  if (unsaved) *unsaved = NULL;
  char finished[32];
  fg_time_now_rfc3339(finished, sizeof finished);
  fg_check_meta meta = {.id = rec->id,
                        .model_version = rec->version,
                        .created_at = rec->created_at,
                        .finished_at = finished,
                        .key = rec->key[0] ? rec->key : NULL};
  cJSON *res = fg_check_result_json(c, &meta);

  fg_store_check fin = *rec;
  fin.request = NULL;
  fin.result = NULL;
  snprintf(fin.finished_at, sizeof fin.finished_at, "%s", finished);
  fg_check_state state = fg_check_get_state(c);
  const cJSON *s = cJSON_GetObjectItemCaseSensitive(res, "status");
  snprintf(fin.status, sizeof fin.status, "%s",
           cJSON_IsString(s) ? s->valuestring : fg_check_state_name(state));
  const cJSON *vd = cJSON_GetObjectItemCaseSensitive(res, "verdict");
  if (cJSON_IsString(vd))
    snprintf(fin.verdict, sizeof fin.verdict, "%s", vd->valuestring);
  else if (!res && state == FG_CHECK_DONE)
    snprintf(fin.verdict, sizeof fin.verdict, "%s",
             fg_verdict_name(fg_check_get_verdict(c)));
  else
    fin.verdict[0] = '\0';
  fin.probability = number_at(res, "joint", "probability", NULL);
  fin.lower = number_at(res, "joint", "interval", "lower");
  fin.upper = number_at(res, "joint", "interval", "upper");
  fin.elapsed_ms = number_at(res, "elapsed_ms", NULL, NULL);
  fin.result = res ? cJSON_PrintUnformatted(res) : NULL;

  fg_status st = fg_store_finish_check(store, &fin, p);
  if (st != FG_OK && unsaved && fin.result &&
      (*unsaved = malloc(sizeof **unsaved)) != NULL) {
    **unsaved = fin; /* takes the result text */
    fin.result = NULL;
  }
  free(fin.result);
  fg_metrics_check_ended(fin.status, fin.verdict,
                         number_at(res, "joint", "samples", NULL),
                         fin.elapsed_ms / 1000.0);

  cJSON *ev = cJSON_CreateObject();
  if (ev) {
    cJSON_AddStringToObject(ev, "event", "check");
    cJSON_AddStringToObject(ev, "id", rec->id);
    cJSON_AddStringToObject(ev, "model", rec->model);
    cJSON_AddNumberToObject(ev, "version", rec->version);
    cJSON_AddStringToObject(ev, "digest", rec->digest);
    cJSON_AddStringToObject(ev, "status", fin.status);
    add_string_or_null(ev, "verdict", fin.verdict);
    add_number_or_null(ev, "probability", fin.probability);
    cJSON *iv = cJSON_AddArrayToObject(ev, "interval");
    if (iv) {
      cJSON_AddItemToArray(iv, isfinite(fin.lower)
                                   ? cJSON_CreateNumber(fin.lower)
                                   : cJSON_CreateNull());
      cJSON_AddItemToArray(iv, isfinite(fin.upper)
                                   ? cJSON_CreateNumber(fin.upper)
                                   : cJSON_CreateNull());
    }
    add_number_or_null(ev, "samples", number_at(res, "joint", "samples", NULL));
    add_number_or_null(ev, "elapsed_ms", fin.elapsed_ms);
    if (st != FG_OK) cJSON_AddStringToObject(ev, "store_error", p->detail);
    fg_log_emit(st == FG_OK ? FG_LOG_INFO : FG_LOG_ERROR, ev);
  }
  if (body)
    *body = res;
  else
    cJSON_Delete(res);
  return st;
}

/* ---- POST .../checks ---- */

/* Steps 7-8 for a started, listed check `c` (its reference is taken):
 * ended -> record, 201; still running -> 202, handed to the watcher. */
static void answer_created(fg_server *srv, fg_check *c,
                           const fg_store_check *rec, fg_resp *out) {
  snprintf(out->location, sizeof out->location, "/v1/checks/%s", rec->id);
  if (fg_check_wait(c, 0)) {
    cJSON *body = NULL;
    fg_problem sp;
    fg_problem_init(&sp);
    fg_status st = fg_http_record_end(srv->store, c, rec, &body, &sp);
    fg_registry_drop(srv->registry, rec->id);
    fg_check_unref(c);
    if (st != FG_OK) {
      cJSON_Delete(body);
      out->location[0] = '\0';
      fg_resp_problem(out, &sp, 0);
      return;
    }
    fg_resp_json(out, 201, body);
    return;
  }
  /* Still running: answer 202 with the running body, hand it over. */
  fg_check_meta meta = {.id = rec->id,
                        .model_version = rec->version,
                        .created_at = rec->created_at,
                        .finished_at = NULL,
                        .key = rec->key[0] ? rec->key : NULL};
  cJSON *running = fg_check_result_json(c, &meta);
  fg_registry_hand_over(srv->registry, rec->id); /* it records the end */
  fg_check_unref(c);
  fg_resp_json(out, 202, running);
}

/* A check creation waiting (suspended) for its check to end. */
typedef struct create_wait {
  fg_server *srv;
  fg_check *c;
  fg_store_check rec; /* rec.request owned */
} create_wait;

static bool create_ended(void *ctx) {
  return fg_check_wait(((create_wait *)ctx)->c, 0);
}

static void create_finish(fg_req *r, void *ctx, bool timed_out,
                          fg_resp *out) {
  create_wait *cw = ctx;
  answer_created(cw->srv, cw->c, &cw->rec, out);
  free(cw->rec.request);
  free(cw);
}

/* The request went away while waiting: the watcher records the check. */
static void create_drop(void *ctx) {
  create_wait *cw = ctx;
  fg_registry_hand_over(cw->srv->registry, cw->rec.id);
  fg_check_unref(cw->c);
  free(cw->rec.request);
  free(cw);
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
  fg_problem p;
  fg_problem_init(&p);
  fg_store_version v;
  fg_model *m = NULL;
  cJSON *json = NULL;
  fg_check_request req;
  memset(&req, 0, sizeof req);
  bool have_req = false;
  fg_store_check rec;
  memset(&rec, 0, sizeof rec);
  fg_check *c = NULL;

  if (!fg_http_load_target(r, name, version, "check",
                           "a check request object with at least "
                           "\"decision\"",
                           &v, &m, &p, out))
    return;
  if (fg_json_parse(r->body, r->len, &json, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    goto done;
  }
  have_req = true;
  if (fg_request_parse(m, json, &srv->cfg.limits, &req, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    goto done;
  }
  if (!fg_http_digest_agrees(&req, &v, &p, out)) goto done;
  if (!req.seed_given) {
    req.seed = fg_seed_draw();
    req.seed_given = true;
  }
  if (req.wait_s > srv->cfg.limits.max_wait_s)
    req.wait_s = srv->cfg.limits.max_wait_s;
  if (!(req.wait_s >= 0)) req.wait_s = 0;

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
  if (fg_http_record_start(srv->store, &v, m, &req, r->key_name, &rec, &p) !=
      FG_OK) {
    fg_resp_problem(out, &p, 0);
    goto done;
  }
  if (fg_check_start(srv->pool, m, &req, &c, &p) != FG_OK) {
    fg_http_record_unstarted(srv->store, &rec);
    fg_resp_problem(out, &p, 0);
    goto done;
  }
  /* Listed at once, so that DELETE finds it while this handler waits. */
  if (fg_registry_watch(srv->registry, c, &rec, &p) != FG_OK) {
    fg_check_cancel(c);
    fg_check_wait(c, -1);
    fg_problem sp;
    fg_problem_init(&sp);
    fg_http_record_end(srv->store, c, &rec, NULL, &sp);
    fg_check_unref(c);
    fg_resp_problem(out, &p, 0);
    goto done;
  }
  if (req.wait_s > 0 && !fg_check_wait(c, 0)) {
    /* Wait suspended, holding no thread (waiter.c). */
    create_wait *cw = malloc(sizeof *cw);
    if (cw) {
      cw->srv = srv;
      cw->c = c;
      cw->rec = rec;
      rec.request = NULL; /* cw owns it now */
      c = NULL;
      out->pending = (fg_pending){.ready = create_ended,
                                  .finish = create_finish,
                                  .drop = create_drop,
                                  .ctx = cw,
                                  .deadline = fg_http_now() + req.wait_s};
      goto done;
    }
  }
  answer_created(srv, c, &rec, out);
  c = NULL;

done:
  free(rec.request);
  if (have_req) fg_request_free(&req);
  cJSON_Delete(json);
  fg_model_unref(m);
  fg_store_version_clear(&v);
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
  if (strcmp(c->status, "running") == 0) {
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

/* Answers 200 with the stored result body of `c`, sent as stored (the
 * answer as it was given), and moves it out of `c`; false when `c` has no
 * result body. */
static bool send_stored_result(fg_resp *out, fg_store_check *c) {
  if (!c->result) return false;
  out->status = 200;
  out->body = c->result;
  out->len = strlen(c->result);
  out->content_type = FG_CT_JSON;
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
  return fg_registry_holds(gw->srv->registry, gw->id);
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
  cJSON *live = fg_registry_live_json(srv->registry, id);
  if (live) {
    fg_resp_json(out, 200, live);
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
   * registry (record, start, watch). A GET in that gap would get the
   * stored body without progress; look again for a short while. */
  if (look_again && strcmp(c.status, "running") == 0) {
    get_wait *gw = malloc(sizeof *gw);
    if (gw) {
      gw->srv = srv;
      snprintf(gw->id, sizeof gw->id, "%s", id);
      fg_store_check_clear(&c);
      out->pending =
          (fg_pending){.ready = get_listed,
                       .finish = get_finish,
                       .drop = free,
                       .ctx = gw,
                       .deadline = fg_http_now() +
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


/* A DELETE waiting (suspended) for a cancelled check's record: stage 1
 * for this daemon's registry to let go of it, stage 2 for another
 * replica to record it in the shared store (looked at every
 * CANCEL_LOOK_S). */
#define CANCEL_LOOK_S 0.05
typedef struct cancel_wait {
  fg_server *srv;
  int stage;
  double until; /* fg_http_now() seconds */
  char id[FG_HTTP_PATH_MAX + 1];
} cancel_wait;

static void cancel_continue(fg_server *srv, const char *id,
                            fg_registry_cancel_result res, cancel_wait *cw,
                            fg_resp *out);

static bool cancel_released(void *ctx) {
  cancel_wait *cw = ctx;
  return !fg_registry_holds(cw->srv->registry, cw->id);
}

static void cancel_drop(void *ctx) { free(ctx); }

/* The end of a DELETE: 409 unless the check ended cancelled by it; else
 * 200 with its stored body. Clears *c. */
static void cancel_answer(const char *id, fg_registry_cancel_result res,
                          fg_store_check *c, fg_resp *out) {
  if (res != FG_REGISTRY_CANCELLED || strcmp(c->status, "cancelled") != 0) {
    /* Ended before the cancel reached it (or not running here at all). */
    if (strcmp(c->status, "running") == 0)
      fg_resp_error(out, 409, FG_ECONFLICT,
                    "check %s is ending (or runs in another process) and "
                    "can no longer be cancelled here",
                    id);
    else
      fg_resp_error(out, 409, FG_ECONFLICT,
                    "check %s is not running: it ended %s", id, c->status);
    fg_store_check_clear(c);
    return;
  }
  if (!send_stored_result(out, c)) fg_resp_json(out, 200, check_summary(c));
  fg_store_check_clear(c);
}

static void cancel_finish(fg_req *r, void *ctx, bool timed_out,
                          fg_resp *out) {
  cancel_wait *cw = ctx;
  if (cw->stage == 1) {
    if (!cancel_released(cw)) {
      fg_resp_error(out, 503, FG_EBUSY,
                    "check %s was told to stop but has not stopped within "
                    "%g s; GET it shortly",
                    cw->id, FG_HTTP_CANCEL_WAIT_S);
      free(cw);
      return;
    }
    cancel_continue(cw->srv, cw->id, FG_REGISTRY_CANCELLED, cw, out);
    return;
  }
  /* stage 2: has the other replica recorded its end? */
  fg_problem p;
  fg_problem_init(&p);
  fg_store_check c;
  if (fg_store_get_check(cw->srv->store, cw->id, &c, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    free(cw);
    return;
  }
  if (strcmp(c.status, "running") != 0) {
    cancel_answer(cw->id, FG_REGISTRY_CANCELLED, &c, out);
    free(cw);
    return;
  }
  fg_store_check_clear(&c);
  double now = fg_http_now();
  if (now >= cw->until) {
    fg_resp_error(out, 503, FG_EBUSY,
                  "check %s runs in another replica, which was asked to "
                  "stop it but has not within %g s; GET it shortly",
                  cw->id, FG_HTTP_CANCEL_WAIT_S);
    free(cw);
    return;
  }
  out->pending = (fg_pending){
      .finish = cancel_finish,
      .drop = cancel_drop,
      .ctx = cw,
      .deadline = now + CANCEL_LOOK_S < cw->until ? now + CANCEL_LOOK_S
                                                  : cw->until};
}

/* After the registry's part: read the record; a check running in another
 * replica is asked through the store and waited for (stage 2). Owns cw
 * (may be NULL). */
static void cancel_continue(fg_server *srv, const char *id,
                            fg_registry_cancel_result res, cancel_wait *cw,
                            fg_resp *out) {
  fg_problem p;
  fg_problem_init(&p);
  fg_store_check c;
  if (fg_store_get_check(srv->store, id, &c, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0); /* 404 for an unknown id */
    free(cw);
    return;
  }
  if (res == FG_REGISTRY_NOT_HELD && strcmp(c.status, "running") == 0 &&
      fg_store_shared(srv->store)) {
    /* Running in another replica: ask it through the store, and wait for
     * the record to end. */
    fg_store_check_clear(&c);
    fg_problem_init(&p);
    if (fg_store_request_cancel(srv->store, id, &p) != FG_OK) {
      fg_resp_problem(out, &p, 0);
      free(cw);
      return;
    }
    if (!cw) cw = calloc(1, sizeof *cw);
    if (!cw) {
      fg_resp_error(out, 503, FG_ENOMEM,
                    "out of memory waiting for check %s to stop", id);
      return;
    }
    if (cw->id != id) snprintf(cw->id, sizeof cw->id, "%s", id);
    cw->srv = srv;
    cw->stage = 2;
    cw->until = fg_http_now() + FG_HTTP_CANCEL_WAIT_S;
    out->pending = (fg_pending){.finish = cancel_finish,
                                .drop = cancel_drop,
                                .ctx = cw,
                                .deadline = fg_http_now() + CANCEL_LOOK_S};
    return;
  }
  free(cw);
  cancel_answer(id, res, &c, out);
}

void fg_h_check_cancel(fg_req *r, fg_resp *out) {
  const char *id = r->params[0];
  /* Cancel without waiting; the wait for the record is suspended. */
  fg_registry_cancel_result res = fg_registry_cancel(r->srv->registry, id, 0);
  if (res == FG_REGISTRY_CANCEL_PENDING) {
    cancel_wait *cw = calloc(1, sizeof *cw);
    if (!cw) {
      fg_resp_error(out, 503, FG_ENOMEM,
                    "out of memory waiting for check %s to stop", id);
      return;
    }
    cw->srv = r->srv;
    cw->stage = 1;
    snprintf(cw->id, sizeof cw->id, "%s", id);
    out->pending = (fg_pending){.ready = cancel_released,
                                .finish = cancel_finish,
                                .drop = cancel_drop,
                                .ctx = cw,
                                .deadline =
                                    fg_http_now() + FG_HTTP_CANCEL_WAIT_S};
    return;
  }
  cancel_continue(r->srv, id, res, NULL, out);
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

void fg_h_checks_list(fg_req *r, fg_resp *out) {
  list_query q;
  static const char *const names[] = {"model", "verdict", "since", "label",
                                      "key",   "limit",   "after"};
  const char **const slots[] = {&q.model, &q.verdict, &q.since, &q.label,
                                &q.key,   &q.limit,   &q.after};
  char unknown[FG_HTTP_PARAM_NAME_MAX];
  if (!fg_http_query_args(r, names, slots, 7, unknown)) {
    fg_resp_bad_param(out, unknown,
                      "unknown parameter; expected model, verdict, since, "
                      "label, key, limit or after");
    return;
  }
  fg_check_filter f = {.limit = FG_LIST_LIMIT_DEFAULT};
  if (q.model) {
    if (!fg_model_is_model_name(q.model)) {
      fg_resp_bad_param(out, "model",
                "expected a model name ([a-z0-9][a-z0-9_.-]{0,63}), found "
                "'%.64s'",
                q.model);
      return;
    }
    f.model = q.model;
  }
  if (q.verdict) {
    if (strcmp(q.verdict, "pass") && strcmp(q.verdict, "fail") &&
        strcmp(q.verdict, "inconclusive")) {
      fg_resp_bad_param(out, "verdict",
                "expected pass, fail or inconclusive, found '%.32s'",
                q.verdict);
      return;
    }
    f.verdict = q.verdict;
  }
  char since[32];
  if (q.since) {
    if (!normalise_time(q.since, since)) {
      fg_resp_bad_param(out, "since",
                "expected an RFC 3339 date-time such as "
                "2026-12-01T21:40:00Z, found '%.64s'",
                q.since);
      return;
    }
    f.since = since;
  }
  if (q.label) {
    if (strlen(q.label) > FG_LABEL_MAX) {
      fg_resp_bad_param(out, "label", "longer than label_length");
      return;
    }
    f.label = q.label;
  }
  if (q.key) {
    if (!fg_key_name_valid(q.key)) {
      fg_resp_bad_param(out, "key",
                "expected an API key's name (as `feasgate keys list` shows "
                "it), found '%.64s'",
                q.key);
      return;
    }
    f.key = q.key;
  }
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
  if (q.after) {
    if (!is_check_id(q.after)) {
      fg_resp_bad_param(out, "after",
                "expected the id of the last check seen (chk_...), found "
                "'%.40s'",
                q.after);
      return;
    }
    f.after = q.after;
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
