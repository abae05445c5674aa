/*
 * http/check_request.c -- GET /v1/checks/{id}/request: the request a
 * check ran with, as recorded.
 *
 * Design: the store keeps every check's request in its normal form
 * (engine/request.c fg_request_json: every decision value, samples,
 * seed, target, confidence, interval, stop_early, sampling, and the
 * optional expect_digest, in_sample and label), so the answer is a check
 * request body that can be sent again (POST .../checks) to repeat the
 * check, or changed and sent to try a neighbouring plan. The page uses it
 * to start its run form from the last check of a model and to offer
 * logged decisions for comparison. The stored text is sent as stored.
 *
 * Thread use: a connection thread; the store locks itself.
 */
#include "http/http_internal.h"

#include <string.h>

void fg_h_check_request(fg_req *r, fg_resp *out) {
  fg_problem p;
  fg_problem_init(&p);
  fg_store_check c;
  if (fg_store_get_check(r->srv->store, r->params[0], &c, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0); /* 404 for an unknown id */
    return;
  }
  if (!c.request || !c.request[0]) {
    fg_store_check_clear(&c);
    fg_resp_error(out, 404, FG_ENOTFOUND,
                  "check %s has no recorded request", r->params[0]);
    return;
  }
  fg_resp_json_text(out, 200, c.request);
  c.request = NULL; /* the response owns it now */
  fg_store_check_clear(&c);
}
