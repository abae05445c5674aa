/*
 * http/explain.c -- one scenario of a logged check, explained, over HTTP
 * (and offline through cli/explain.c).
 *
 *   GET /v1/checks/{id}/scenarios/{index}     (role: reader)
 *   feasgate explain MODEL.json REQUEST.json --index I
 *
 * Answers {"check", "index", "seed", "stream", "sampling", "inputs",
 * "definitions", "rows": [{"name", "excess", "holds"}], "holds"}
 * (engine/explain.c computes everything but "check"). The HTTP handler
 * reads the check's stored request and model version from the store, so
 * the scenario is recomputed from exactly what the check ran: the stored
 * request carries the seed that was drawn. A check that is still running
 * can be explained too (its request is recorded before it starts).
 *
 * Errors: an index that is not a whole number or not below the check's
 * samples (those it counted, when it stopped early), 400 naming
 * /index; an unknown check, 404; a Latin hypercube or
 * Sobol check, 422 (its samples are drawn replicate by replicate).
 *
 * Thread use: handlers on connection threads; one block of samples is
 * evaluated on the connection thread, no lock held.
 */
#include "http/http_internal.h"

#include <ctype.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

bool fg_explain_parse_index(const char *s, uint64_t *out) {
  if (!s || !*s || strlen(s) > 20) return false;
  for (const char *t = s; *t; t++)
    if (!isdigit((unsigned char)*t)) return false;
  errno = 0;
  char *end = NULL;
  unsigned long long v = strtoull(s, &end, 10);
  if (errno || *end) return false;
  *out = v;
  return true;
}

void fg_h_check_scenario(fg_req *r, fg_resp *out) {
  const char *id = r->params[0];
  uint64_t index = 0;
  if (!fg_explain_parse_index(r->params[1], &index)) {
    fg_problem p;
    fg_problem_init(&p);
    fg_problem_add(&p, FG_EINVAL, "/index", 0,
                   "expected a sample index (a whole number from 0), found "
                   "'%.32s'",
                   r->params[1]);
    fg_resp_problem(out, &p, 400);
    return;
  }
  fg_problem p;
  fg_problem_init(&p);
  fg_store_check c;
  if (fg_store_get_check(r->srv->store, id, &c, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    return;
  }
  fg_store_version v;
  fg_model *m = NULL;
  memset(&v, 0, sizeof v);
  cJSON *body = NULL, *res = NULL;
  fg_check_request req;
  bool have_req = false;
  if (fg_http_load_model(r->srv, c.model, c.version, &v, &m, &p) != FG_OK)
    goto fail;
  if (!c.request ||
      fg_json_parse(c.request, strlen(c.request), &body, &p) != FG_OK) {
    if (!c.request)
      fg_problem_set(&p, FG_EINTERNAL, "check %s has no stored request", id);
    goto fail;
  }
  fg_request_limits lim;
  fg_replay_limits(&lim);
  if (fg_request_parse(m, body, &lim, &req, &p) != FG_OK) goto fail;
  have_req = true;
  req.seed = c.seed; /* the seed the check ran with */
  /* A check that stopped early (or was cancelled) counted fewer samples
   * than it asked for: its scenarios end where its counts end. */
  cJSON *stored = c.result ? cJSON_Parse(c.result) : NULL;
  const cJSON *done = cJSON_GetObjectItemCaseSensitive(
      cJSON_GetObjectItemCaseSensitive(stored, "joint"), "samples");
  if (cJSON_IsNumber(done) && done->valuedouble >= 0 &&
      done->valuedouble < (double)req.samples)
    req.samples = (uint64_t)done->valuedouble;
  cJSON_Delete(stored);
  if (fg_explain_scenario(m, &req, index, &res, &p) != FG_OK) goto fail;
  cJSON_AddStringToObject(res, "check", c.id);
  fg_resp_json(out, 200, res);
  goto done;
fail:
  fg_resp_problem(out, &p, p.status == FG_EUNSUPPORTED ? 422 : 0);
done:
  if (have_req) fg_request_free(&req);
  cJSON_Delete(body);
  fg_store_version_clear(&v);
  if (m) fg_model_unref(m);
  fg_store_check_clear(&c);
}
