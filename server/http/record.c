/*
 * http/record.c -- what the handlers that start checks (checks.c,
 * comparison.c) share: the steps before the body is parsed and the digest
 * check.
 *
 * Design: the first steps of the durability contract of checks.c in two
 * helpers that answer the problem themselves (a server shutting down, a
 * retired model and an empty body turned away around loading the model
 * version; a request that names another digest turned away with 409), so
 * both handlers give the same statuses in the same order. The record of
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
