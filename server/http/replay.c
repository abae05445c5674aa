/*
 * http/replay.c -- re-running a logged check for audit, over HTTP and
 * offline.
 *
 *   POST /v1/checks/{id}/replay       (role: checker)
 *   feasgate replay --store STORE ID
 *
 * A replay runs the stored request (decision, samples, seed, sampling,
 * ...) on the stored model version as a new check, logged like any other
 * with replay_of = the original's id (store column and result member),
 * and compares the two checks' counts. Answer:
 *   {"check": ORIGINAL, "replay": NEW_ID, "reproduced": true|false|null,
 *    "differences": [{"field": "/joint/satisfied", "original": x,
 *                     "replay": y}, ...], "result": the replay's body}
 * 201 + Location of the replay when it ended within the server's max_wait;
 * else 202 with "reproduced": null, the replay running (its own GET shows
 * it; compare again by replaying once it is done).
 *
 * What is compared (replay_differences): status, verdict, joint samples
 * and satisfied, and for every constraint row by name violated,
 * sole_cause and nonfinite, and the failing scenarios' indices. Counts do
 * not depend on the number of workers or the chunk size (engine.h), so a
 * replay on another daemon or worker count reproduces them exactly;
 * floating-point sums (mean excess) may differ in the last bits with the
 * chunk size and are not compared. reproduced is true when no count
 * differs.
 *
 * Errors: unknown check 404; a check still running, or one that ended
 * without counts (interrupted, failed before it started), 409. The stored
 * request is read with the hard caps, not this server's (it was accepted
 * once).
 *
 * The offline command opens the store, runs the replay on a private pool
 * with as many workers as processors, prints the same answer (without a
 * new id: the offline replay is not logged) and exits 0 when reproduced,
 * 1 when not, 3 on usage or input faults.
 *
 * Thread use: handlers on connection threads; the replay runs on the
 * pool like any check, and the handler waits for it without any lock.
 */
#include "http/http_internal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

/* ---- comparing two result bodies ---- */

static void add_diff(cJSON *diffs, const char *field, const cJSON *a,
                     const cJSON *b) {
  cJSON *d = cJSON_CreateObject();
  cJSON_AddStringToObject(d, "field", field);
  cJSON_AddItemToObject(d, "original",
                        a ? cJSON_Duplicate(a, true) : cJSON_CreateNull());
  cJSON_AddItemToObject(d, "replay",
                        b ? cJSON_Duplicate(b, true) : cJSON_CreateNull());
  cJSON_AddItemToArray(diffs, d);
}

static void compare_item(cJSON *diffs, const char *field, const cJSON *a,
                         const cJSON *b) {
  if (!cJSON_Compare(a, b, true)) add_diff(diffs, field, a, b);
}

static const cJSON *member(const cJSON *o, const char *name) {
  return cJSON_GetObjectItemCaseSensitive(o, name);
}

static const cJSON *row_named(const cJSON *rows, const char *name) {
  const cJSON *r;
  cJSON_ArrayForEach(r, rows) {
    const char *n = cJSON_GetStringValue(member(r, "name"));
    if (n && strcmp(n, name) == 0) return r;
  }
  return NULL;
}

/* The failing scenarios' indices as an array (owned by the caller). */
static cJSON *failing_indices(const cJSON *body) {
  cJSON *a = cJSON_CreateArray();
  const cJSON *f;
  cJSON_ArrayForEach(f, member(body, "failing_scenarios"))
    cJSON_AddItemToArray(a, cJSON_Duplicate(member(f, "index"), true));
  return a;
}

cJSON *fg_replay_differences(const cJSON *orig, const cJSON *rep) {
  cJSON *diffs = cJSON_CreateArray();
  if (!diffs) return NULL;
  compare_item(diffs, "/status", member(orig, "status"), member(rep, "status"));
  compare_item(diffs, "/verdict", member(orig, "verdict"),
               member(rep, "verdict"));
  const cJSON *ja = member(orig, "joint"), *jb = member(rep, "joint");
  compare_item(diffs, "/joint/samples", member(ja, "samples"),
               member(jb, "samples"));
  compare_item(diffs, "/joint/satisfied", member(ja, "satisfied"),
               member(jb, "satisfied"));
  static const char *const counts[] = {"violated", "sole_cause", "nonfinite"};
  const cJSON *ra = member(orig, "constraints"), *rb = member(rep, "constraints");
  const cJSON *r;
  cJSON_ArrayForEach(r, ra) {
    const char *name = cJSON_GetStringValue(member(r, "name"));
    if (!name) continue;
    const cJSON *o = row_named(rb, name);
    for (size_t i = 0; i < sizeof counts / sizeof *counts; i++) {
      char field[FG_NAME_MAX + 96];
      snprintf(field, sizeof field, "/constraints/%s/%s", name, counts[i]);
      compare_item(diffs, field, member(r, counts[i]),
                   o ? member(o, counts[i]) : NULL);
    }
  }
  cJSON_ArrayForEach(r, rb) { /* rows only the replay has */
    const char *name = cJSON_GetStringValue(member(r, "name"));
    if (name && !row_named(ra, name)) {
      char field[FG_NAME_MAX + 96];
      snprintf(field, sizeof field, "/constraints/%s/violated", name);
      add_diff(diffs, field, NULL, member(r, "violated"));
    }
  }
  cJSON *fa = failing_indices(orig), *fb = failing_indices(rep);
  compare_item(diffs, "/failing_scenarios", fa, fb);
  cJSON_Delete(fa);
  cJSON_Delete(fb);
  return diffs;
}

/* Limits for re-reading a request that was accepted once: the hard caps. */
void fg_replay_limits(fg_request_limits *lim) {
  fg_request_limits_default(lim);
  lim->max_samples = FG_MAX_SAMPLES_HARD;
  lim->max_scenarios = FG_HTTP_MAX_SCENARIOS_HARD;
  lim->max_wait_s = 1e9;
}

/* The stored check's counts must exist: it ended with a result body. */
bool fg_replay_has_counts(const fg_store_check *c, fg_problem *p) {
  fg_check_state s = fg_check_state_parse(c->status);
  if (s == FG_CHECK_RUNNING) {
    fg_problem_set(p, FG_ECONFLICT,
                   "check %s is still running; replay it once it has ended",
                   c->id);
    return false;
  }
  if (!c->result || s == FG_CHECK_INTERRUPTED) {
    fg_problem_set(p, FG_ECONFLICT,
                   "check %s ended %s without counts to compare a replay "
                   "with",
                   c->id, c->status);
    return false;
  }
  return true;
}

cJSON *fg_replay_answer(const char *orig_id, const char *replay_id,
                     const cJSON *orig_body, cJSON *rep_body, bool ended) {
  cJSON *o = cJSON_CreateObject();
  cJSON_AddStringToObject(o, "check", orig_id);
  if (replay_id) cJSON_AddStringToObject(o, "replay", replay_id);
  else cJSON_AddNullToObject(o, "replay");
  if (ended) {
    cJSON *d = fg_replay_differences(orig_body, rep_body);
    cJSON_AddBoolToObject(o, "reproduced", cJSON_GetArraySize(d) == 0);
    cJSON_AddItemToObject(o, "differences", d);
  } else {
    cJSON_AddNullToObject(o, "reproduced");
    cJSON_AddItemToObject(o, "differences", cJSON_CreateArray());
  }
  if (rep_body) cJSON_AddItemToObject(o, "result", rep_body);
  return o;
}

fg_status fg_replay_load(fg_server *srv, fg_store *st, const char *id,
                         fg_replay_source *src, fg_problem *p) {
  memset(src, 0, sizeof *src);
  if (fg_store_get_check(st, id, &src->check, p) != FG_OK) return p->status;
  src->have_check = true;
  if (!fg_replay_has_counts(&src->check, p)) return p->status;
  src->orig = cJSON_Parse(src->check.result);
  if (!src->orig)
    return fg_problem_set(p, FG_EINTERNAL,
                          "check %s: its stored result is not JSON", id);
  const fg_store_check *c = &src->check;
  if (srv) {
    if (fg_http_load_model(srv, c->model, c->version, &src->version,
                           &src->model, p) != FG_OK)
      return p->status;
  } else if (fg_store_get_version(st, c->model, c->version, &src->version,
                                  p) != FG_OK ||
             fg_model_compile(src->version.document,
                              strlen(src->version.document), &src->model,
                              p) != FG_OK) {
    return p->status;
  }
  if (fg_json_parse(c->request, strlen(c->request), &src->body, p) != FG_OK)
    return p->status;
  fg_request_limits lim;
  fg_replay_limits(&lim);
  if (fg_request_parse(src->model, src->body, &lim, &src->req, p) != FG_OK)
    return p->status;
  src->have_req = true;
  src->req.seed = c->seed;
  src->req.seed_given = true;
  return FG_OK;
}

void fg_replay_source_clear(fg_replay_source *src) {
  if (src->have_req) fg_request_free(&src->req);
  cJSON_Delete(src->body);
  cJSON_Delete(src->orig);
  if (src->model) fg_model_unref(src->model);
  fg_store_version_clear(&src->version);
  if (src->have_check) fg_store_check_clear(&src->check);
  memset(src, 0, sizeof *src);
}

void fg_h_check_replay(fg_req *r, fg_resp *out) {
  fg_server *srv = r->srv;
  const char *id = r->params[0];
  fg_problem p;
  fg_problem_init(&p);
  fg_replay_source src;
  fg_job *job = NULL;
  if (fg_replay_load(srv, srv->store, id, &src, &p) != FG_OK) goto fail;
  const fg_store_check *cs = &src.check;
  fg_check_request *req = &src.req;
  req->max_seconds = srv->cfg.max_check_s;
  if (fg_pool_queued(srv->pool) >= srv->cfg.queue) {
    fg_problem_set(&p, FG_EBUSY,
                   "the check queue is full (%d checks waiting or running); "
                   "try again shortly",
                   srv->cfg.queue);
    goto fail;
  }
  if (fg_job_start_replay(srv, &src.version, src.model, req, r->key_name,
                          cs->id, &job, &p) != FG_OK)
    goto fail;
  snprintf(out->location, sizeof out->location, "/v1/checks/%s",
           fg_job_id(job));
  if (fg_job_wait(job, srv->cfg.limits.max_wait_s)) {
    fg_problem sp;
    fg_problem_init(&sp);
    if (fg_job_record_end(job, &sp) != FG_OK) {
      out->location[0] = '\0';
      fg_resp_problem(out, &sp, 0);
      goto done;
    }
    fg_resp_json(
        out, 201,
        fg_replay_answer(cs->id, fg_job_id(job), src.orig, fg_job_body(job),
                         true));
  } else {
    fg_job_detach(job);
    fg_resp_json(
        out, 202,
        fg_replay_answer(cs->id, fg_job_id(job), src.orig, fg_job_body(job),
                         false));
  }
  goto done;
fail:
  fg_resp_problem(out, &p, 0);
done:
  fg_job_unref(job);
  fg_replay_source_clear(&src);
}
