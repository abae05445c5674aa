/*
 * http/record.c -- what the handlers that start checks (checks.c,
 * compare.c) share: the steps before the body is parsed, the digest check,
 * and opening and closing the store record of a check.
 *
 * Design: the first steps of the durability contract of checks.c in two
 * helpers that answer the problem themselves (a server shutting down, a
 * retired model and an empty body turned away around loading the model
 * version; a request that names another digest turned away with 409), so
 * both handlers give the same statuses in the same order. Then the
 * record: a check is recorded `running` (with the request as it will be
 * replayed, seed filled in) before any work is queued, and a check the
 * pool refused is closed `failed` at once, so no record is left `running`
 * by a live server. The end of a check that ran is recorded by
 * fg_http_record_end (checks.c).
 *
 * Thread use: libmicrohttpd's threads; the store locks itself.
 */
#include "http/http_internal.h"
#include "http/metrics.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

bool fg_http_load_target(fg_req *r, const char *name, int version,
                         const char *verb, const char *expected,
                         fg_store_version *v, fg_model **m, fg_problem *p,
                         fg_resp *out) {
  *m = NULL;
  if (atomic_load(&r->srv->stopping)) {
    fg_resp_error(out, 503, FG_EBUSY, "the server is shutting down");
    return false;
  }
  if (fg_http_load_model(r->srv, name, version, v, m, p) != FG_OK) {
    fg_resp_problem(out, p, 0);
    return false;
  }
  if (v->retired) {
    fg_resp_error(out, 410, FG_EGONE,
                  "model '%s' is retired; register it again to %s "
                  "candidates against it",
                  v->name, verb);
  } else if (!r->body || r->len == 0) {
    fg_problem_add(p, FG_EINVAL, "", 0, "expected %s, found an empty body",
                   expected);
    fg_resp_problem(out, p, 0);
  } else {
    return true;
  }
  fg_model_unref(*m);
  *m = NULL;
  fg_store_version_clear(v);
  return false;
}

bool fg_http_digest_agrees(const fg_check_request *req,
                           const fg_store_version *v, fg_problem *p,
                           fg_resp *out) {
  if (!req->expect_digest[0] || strcmp(req->expect_digest, v->digest) == 0)
    return true;
  fg_problem_add(p, FG_ECONFLICT, "/expect_digest", 0,
                 "expected model digest %s, but %s version %d has digest %s",
                 req->expect_digest, v->name, v->version, v->digest);
  fg_resp_problem(out, p, 0);
  return false;
}

fg_status fg_http_record_start(fg_store *store, const fg_store_version *v,
                               const fg_model *m, const fg_check_request *req,
                               const char *key, fg_store_check *rec,
                               fg_problem *p) {
  memset(rec, 0, sizeof *rec);
  fg_http_check_id(rec->id);
  snprintf(rec->model, sizeof rec->model, "%s", v->name);
  rec->version = v->version;
  snprintf(rec->digest, sizeof rec->digest, "%s", v->digest);
  snprintf(rec->status, sizeof rec->status, "running");
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

void fg_http_record_unstarted(fg_store *store, const fg_store_check *rec) {
  fg_store_check fin = *rec;
  fin.request = fin.result = NULL;
  snprintf(fin.status, sizeof fin.status, "failed");
  fin.verdict[0] = '\0';
  fg_time_now_rfc3339(fin.finished_at, sizeof fin.finished_at);
  fg_problem p;
  fg_problem_init(&p);
  if (fg_store_finish_check(store, &fin, &p) != FG_OK)
    fg_log_msg(FG_LOG_ERROR, "store_error", "closing check %s: %s", rec->id,
               p.detail);
  fg_metrics_check_ended(fin.status, NULL, NAN, NAN); /* never ran */
}
