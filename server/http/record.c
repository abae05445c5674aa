/*
 * http/record.c -- what the handlers that start checks (checks.c,
 * comparison.c) share: the steps up to the parsed body (fg_http_target),
 * the digest check and the bound on wait_s.
 *
 * Design: the first steps of the durability contract of checks.c in
 * helpers that answer the problem themselves (a server shutting down, a
 * retired model, an empty body and one that is not JSON turned away
 * around loading the model version; a request that names another digest
 * turned away with 409), so both handlers give the same statuses in the
 * same order. The record of
 * a check itself, from `running` to its end, is lifecycle.c's.
 *
 * Thread use: libmicrohttpd's threads; the store locks itself.
 */
#include "http/http_internal.h"
#include "http/metrics.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

bool fg_http_open_target(fg_req *r, const char *name, int version,
                         const char *verb, const char *expected,
                         fg_http_target *t, fg_resp *out) {
  memset(t, 0, sizeof *t);
  fg_problem_init(&t->p);
  if (atomic_load(&r->srv->stopping)) {
    fg_resp_error(out, 503, FG_EBUSY, "the server is shutting down");
    return false;
  }
  if (fg_http_load_model(r->srv, name, version, &t->v, &t->m, &t->p) !=
      FG_OK) {
    fg_resp_problem(out, &t->p, 0);
    return false;
  }
  if (t->v.retired) {
    fg_resp_error(out, 410, FG_EGONE,
                  "model '%s' is retired; register it again to %s "
                  "candidates against it",
                  t->v.name, verb);
    return false;
  }
  if (!r->body || r->len == 0) {
    fg_problem_add(&t->p, FG_EINVAL, "", 0, "expected %s, found an empty body",
                   expected);
    fg_resp_problem(out, &t->p, 0);
    return false;
  }
  if (fg_json_parse(r->body, r->len, &t->body, &t->p) != FG_OK) {
    fg_resp_problem(out, &t->p, 0);
    return false;
  }
  return true;
}

void fg_http_target_clear(fg_http_target *t) {
  cJSON_Delete(t->body);
  t->body = NULL;
  fg_model_unref(t->m);
  t->m = NULL;
  fg_store_version_clear(&t->v);
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

double fg_http_wait_bound(const fg_server *srv, double wait_s) {
  if (wait_s > srv->cfg.limits.max_wait_s) wait_s = srv->cfg.limits.max_wait_s;
  return wait_s >= 0 ? wait_s : 0;
}
