/*
 * http/compare.c -- POST /v1/models/{name}/comparisons.
 *
 * Body: {"candidates": [{"label", "decision"}, ...], "samples", "seed",
 * "target", "confidence", "interval", "wait_s", ...}. Every candidate is
 * checked against the latest version on the same validation scenarios (one
 * seed for all, drawn when none is given), and the answer is
 *   {"model", "seed", "samples", "confidence",
 *    "candidates": [check result body with its "label", ...],
 *    "pairs": [{"a", "b", "a_only", "b_only", "both", "neither",
 *               "difference", "interval": {"lower", "upper", "method"}}]}
 * (engine/compare.c counts the pairs).
 *
 * Order of work (the durability contract of checks.c, per candidate):
 *   1. load the version (404, 410 retired), parse (400), expect_digest
 *      (409);
 *   2. refuse with 503 + Retry-After unless the queue has room for every
 *      candidate, before anything is recorded;
 *   3. record each candidate `running`, then queue it; one the pool
 *      refuses is closed `failed` and the ones already queued are
 *      cancelled and recorded as they ended (503);
 *   4. wait for all of them until wait_s has passed in total: every
 *      candidate's end is recorded like a check's; if some did not end in
 *      time they are cancelled and recorded, and the answer is a 504
 *      problem listing the check ids (the counts are in the log);
 *   5. 200 with the candidates' result bodies and the pairs.
 *
 * Thread use: a connection thread; everything shared is locked by its
 * owner (store, pool, cache).
 */
#include "http/http_internal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Bytes of the list of check ids in a 504 detail. */
#define COMPARE_IDS_TEXT 400

void fg_h_comparisons_create(fg_req *r, fg_resp *out) {
  fg_server *srv = r->srv;
  const char *name = r->params[0];
  fg_problem p;
  fg_problem_init(&p);
  fg_store_version v;
  fg_model *m = NULL;
  cJSON *json = NULL, *answer = NULL;
  fg_compare_request cr;
  memset(&cr, 0, sizeof cr);
  fg_store_check rec[FG_COMPARE_CANDIDATES_MAX];
  memset(rec, 0, sizeof rec);
  fg_check *checks[FG_COMPARE_CANDIDATES_MAX] = {0};
  cJSON *bodies[FG_COMPARE_CANDIDATES_MAX] = {0};
  int started = 0;

  if (!fg_http_load_target(r, name, 0, "compare",
                           "a comparison request object with "
                           "\"candidates\"",
                           &v, &m, &p, out))
    return;
  if (fg_json_parse(r->body, r->len, &json, &p) != FG_OK ||
      fg_compare_parse(m, json, &srv->cfg.limits, &cr, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    goto done;
  }
  int n = cr.ncandidates;
  const fg_check_request *first = &cr.candidates[0];
  if (!fg_http_digest_agrees(first, &v, &p, out)) goto done;
  if (!first->seed_given) fg_compare_set_seed(&cr, fg_seed_draw());
  double wait_s = first->wait_s;
  if (wait_s > srv->cfg.limits.max_wait_s) wait_s = srv->cfg.limits.max_wait_s;
  if (!(wait_s >= 0)) wait_s = 0;

  int queued = fg_pool_queued(srv->pool);
  if (queued + n > srv->cfg.queue) {
    fg_resp_error(out, 503, FG_EBUSY,
                  "the check queue has room for %d of the %d candidates "
                  "(%d of %d places taken); try again shortly",
                  srv->cfg.queue - queued > 0 ? srv->cfg.queue - queued : 0, n,
                  queued, srv->cfg.queue);
    goto done;
  }
  double t0 = fg_time_monotonic();
  for (; started < n; started++) {
    cr.candidates[started].max_seconds = srv->cfg.max_check_s;
    if (fg_http_record_start(srv->store, &v, m, &cr.candidates[started],
                             r->key_name, &rec[started], &p) != FG_OK)
      break;
    if (fg_check_start(srv->pool, m, &cr.candidates[started], &checks[started],
                       &p) != FG_OK) {
      fg_http_record_unstarted(srv->store, &rec[started]);
      break;
    }
  }
  bool refused = started < n;
  bool all_ended = !refused;
  for (int i = 0; i < started; i++) {
    if (refused) {
      fg_check_cancel(checks[i]);
      fg_check_wait(checks[i], -1);
      continue;
    }
    double left = wait_s - (fg_time_monotonic() - t0);
    if (!fg_check_wait(checks[i], left > 0 ? left : 0)) all_ended = false;
  }
  if (!all_ended)
    for (int i = 0; i < started; i++) {
      fg_check_cancel(checks[i]);
      fg_check_wait(checks[i], -1);
    }
  /* Record every candidate that ran, whatever happens next. */
  fg_status store_st = FG_OK;
  fg_problem sp;
  fg_problem_init(&sp);
  for (int i = 0; i < started; i++)
    if (fg_http_record_end(srv->store, checks[i], &rec[i], &bodies[i], &sp) !=
        FG_OK)
      store_st = sp.status;
  if (refused) {
    fg_resp_problem(out, &p, 0);
    goto done;
  }
  if (store_st != FG_OK) {
    fg_resp_problem(out, &sp, 0);
    goto done;
  }
  if (!all_ended) {
    char ids[COMPARE_IDS_TEXT] = "";
    for (int i = 0; i < started; i++) {
      size_t len = strlen(ids);
      snprintf(ids + len, sizeof ids - len, "%s%s", i ? ", " : "", rec[i].id);
    }
    fg_problem_set(&p, FG_ETIMEOUT,
                   "the comparison did not finish within wait_s = %g s; its "
                   "checks were cancelled and recorded (%s); ask for fewer "
                   "samples or a longer wait_s",
                   wait_s, ids);
    fg_resp_problem(out, &p, 0);
    goto done;
  }
  for (int i = 0; i < n; i++)
    if (fg_check_get_state(checks[i]) != FG_CHECK_DONE) {
      fg_problem_set(&p, FG_EINTERNAL,
                     "candidate '%s' (check %s) ended %s, not done",
                     cr.candidates[i].label, rec[i].id,
                     fg_check_state_name(fg_check_get_state(checks[i])));
      fg_resp_problem(out, &p, 0);
      goto done;
    }

  const char *labels[FG_COMPARE_CANDIDATES_MAX];
  for (int i = 0; i < n; i++)
    labels[i] = cr.candidates[i].label;
  cJSON *pairs = NULL;
  if (fg_compare_pairs_json(checks, labels, n, first->confidence, &pairs, &p) !=
      FG_OK) {
    fg_resp_problem(out, &p, 0);
    goto done;
  }
  answer = cJSON_CreateObject();
  cJSON *cands = answer ? cJSON_AddArrayToObject(answer, "candidates") : NULL;
  if (!cands) {
    cJSON_Delete(pairs);
    fg_resp_error(out, 503, FG_ENOMEM, "out of memory writing the comparison");
    goto done;
  }
  cJSON *model = cJSON_AddObjectToObject(answer, "model");
  if (model) {
    cJSON_AddStringToObject(model, "name", v.name);
    cJSON_AddNumberToObject(model, "version", v.version);
    cJSON_AddStringToObject(model, "digest", v.digest);
  }
  char seed[32];
  snprintf(seed, sizeof seed, "%llu", (unsigned long long)first->seed);
  cJSON_AddRawToObject(answer, "seed", seed);
  cJSON_AddNumberToObject(answer, "samples", (double)first->samples);
  cJSON_AddNumberToObject(answer, "confidence", first->confidence);
  for (int i = 0; i < n; i++) {
    cJSON_AddItemToArray(cands, bodies[i]);
    bodies[i] = NULL;
  }
  cJSON_AddItemToObject(answer, "pairs", pairs);
  fg_resp_json(out, 200, answer);
  answer = NULL;

done:
  for (int i = 0; i < FG_COMPARE_CANDIDATES_MAX; i++) {
    cJSON_Delete(bodies[i]);
    fg_check_unref(checks[i]);
    free(rec[i].request);
  }
  cJSON_Delete(answer);
  fg_compare_request_free(&cr);
  cJSON_Delete(json);
  fg_model_unref(m);
  fg_store_version_clear(&v);
}
