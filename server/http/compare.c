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
 * The wait of step 4 does not hold a thread: the handler (steps 1-3)
 * leaves the request suspended with the comparison's state (cmp_state)
 * and the waiter resumes it when every candidate has ended or wait_s has
 * passed; cmp_finish does steps 4-5. Only cancelled candidates are
 * waited for in place (they stop within one block of samples).
 *
 * Thread use: libmicrohttpd's threads; everything shared is locked by its
 * owner (store, pool, cache).
 */
#include "http/http_internal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Bytes of the list of check ids in a 504 detail. */
#define COMPARE_IDS_TEXT 400

/* One comparison between its two halves (it may wait suspended between
 * them: waiter.c). */
typedef struct cmp_state {
  fg_server *srv;
  fg_store_version v;
  bool have_v;
  fg_model *m;
  cJSON *json;
  fg_compare_request cr;
  fg_store_check rec[FG_COMPARE_CANDIDATES_MAX];
  fg_check *checks[FG_COMPARE_CANDIDATES_MAX];
  int n, started;
  bool refused;
  double wait_s;
  fg_problem p; /* the refusal's problem */
} cmp_state;

static void cmp_free(cmp_state *c) {
  for (int i = 0; i < FG_COMPARE_CANDIDATES_MAX; i++) {
    fg_check_unref(c->checks[i]);
    free(c->rec[i].request);
  }
  fg_compare_request_free(&c->cr);
  cJSON_Delete(c->json);
  fg_model_unref(c->m);
  if (c->have_v) fg_store_version_clear(&c->v);
  free(c);
}

/* Have all candidates ended? (the waiter's look; non-blocking) */
static bool cmp_ended(void *ctx) {
  cmp_state *c = ctx;
  for (int i = 0; i < c->started; i++)
    if (!fg_check_wait(c->checks[i], 0)) return false;
  return true;
}

/* The request went away while waiting: the candidates are cancelled and
 * recorded all the same. */
static void cmp_drop(void *ctx) {
  cmp_state *c = ctx;
  fg_problem sp;
  for (int i = 0; i < c->started; i++) {
    fg_check_cancel(c->checks[i]);
    fg_check_wait(c->checks[i], -1);
    fg_problem_init(&sp);
    fg_http_record_end(c->srv->store, c->checks[i], &c->rec[i], NULL, &sp);
  }
  cmp_free(c);
}

/* Step 4 on (the candidates ended, or wait_s passed): record, answer. */
static void cmp_finish(fg_req *r, void *ctx, bool timed_out, fg_resp *out) {
  cmp_state *c = ctx;
  fg_server *srv = c->srv;
  int n = c->n, started = c->started;
  fg_problem *p = &c->p;
  cJSON *bodies[FG_COMPARE_CANDIDATES_MAX] = {0};
  cJSON *answer = NULL;
  bool all_ended = !c->refused && cmp_ended(c);
  for (int i = 0; i < started; i++) {
    if (all_ended) break;
    /* cancelled checks stop within one block of samples */
    fg_check_cancel(c->checks[i]);
    fg_check_wait(c->checks[i], -1);
  }
  /* Record every candidate that ran, whatever happens next. */
  fg_status store_st = FG_OK;
  fg_problem sp;
  fg_problem_init(&sp);
  for (int i = 0; i < started; i++)
    if (fg_http_record_end(srv->store, c->checks[i], &c->rec[i], &bodies[i],
                           &sp) != FG_OK)
      store_st = sp.status;
  if (c->refused) {
    fg_resp_problem(out, p, 0);
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
      snprintf(ids + len, sizeof ids - len, "%s%s", i ? ", " : "",
               c->rec[i].id);
    }
    fg_problem_set(p, FG_ETIMEOUT,
                   "the comparison did not finish within wait_s = %g s; its "
                   "checks were cancelled and recorded (%s); ask for fewer "
                   "samples or a longer wait_s",
                   c->wait_s, ids);
    fg_resp_problem(out, p, 0);
    goto done;
  }
  for (int i = 0; i < n; i++)
    if (fg_check_get_state(c->checks[i]) != FG_CHECK_DONE) {
      fg_problem_set(p, FG_EINTERNAL,
                     "candidate '%s' (check %s) ended %s, not done",
                     c->cr.candidates[i].label, c->rec[i].id,
                     fg_check_state_name(fg_check_get_state(c->checks[i])));
      fg_resp_problem(out, p, 0);
      goto done;
    }

  const fg_check_request *first = &c->cr.candidates[0];
  const char *labels[FG_COMPARE_CANDIDATES_MAX];
  for (int i = 0; i < n; i++)
    labels[i] = c->cr.candidates[i].label;
  cJSON *pairs = NULL;
  if (fg_compare_pairs_json(c->checks, labels, n, first->confidence, &pairs,
                            p) != FG_OK) {
    fg_resp_problem(out, p, 0);
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
    cJSON_AddStringToObject(model, "name", c->v.name);
    cJSON_AddNumberToObject(model, "version", c->v.version);
    cJSON_AddStringToObject(model, "digest", c->v.digest);
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
  for (int i = 0; i < FG_COMPARE_CANDIDATES_MAX; i++)
    cJSON_Delete(bodies[i]);
  cJSON_Delete(answer);
  cmp_free(c);
}

void fg_h_comparisons_create(fg_req *r, fg_resp *out) {
  fg_server *srv = r->srv;
  const char *name = r->params[0];
  cmp_state *c = calloc(1, sizeof *c);
  if (!c) {
    fg_resp_error(out, 503, FG_ENOMEM, "out of memory starting a comparison");
    return;
  }
  c->srv = srv;
  fg_problem *p = &c->p;
  fg_problem_init(p);

  if (!fg_http_load_target(r, name, 0, "compare",
                           "a comparison request object with "
                           "\"candidates\"",
                           &c->v, &c->m, p, out)) {
    free(c);
    return;
  }
  c->have_v = true;
  if (fg_json_parse(r->body, r->len, &c->json, p) != FG_OK ||
      fg_compare_parse(c->m, c->json, &srv->cfg.limits, &c->cr, p) != FG_OK) {
    fg_resp_problem(out, p, 0);
    cmp_free(c);
    return;
  }
  int n = c->n = c->cr.ncandidates;
  const fg_check_request *first = &c->cr.candidates[0];
  if (!fg_http_digest_agrees(first, &c->v, p, out)) {
    cmp_free(c);
    return;
  }
  if (!first->seed_given) fg_compare_set_seed(&c->cr, fg_seed_draw());
  double wait_s = first->wait_s;
  if (wait_s > srv->cfg.limits.max_wait_s) wait_s = srv->cfg.limits.max_wait_s;
  if (!(wait_s >= 0)) wait_s = 0;
  c->wait_s = wait_s;

  int queued = fg_pool_queued(srv->pool);
  if (queued + n > srv->cfg.queue) {
    fg_resp_error(out, 503, FG_EBUSY,
                  "the check queue has room for %d of the %d candidates "
                  "(%d of %d places taken); try again shortly",
                  srv->cfg.queue - queued > 0 ? srv->cfg.queue - queued : 0, n,
                  queued, srv->cfg.queue);
    cmp_free(c);
    return;
  }
  double t0 = fg_http_now();
  for (; c->started < n; c->started++) {
    int i = c->started;
    c->cr.candidates[i].max_seconds = srv->cfg.max_check_s;
    if (fg_http_record_start(srv->store, &c->v, c->m, &c->cr.candidates[i],
                             r->key_name, &c->rec[i], p) != FG_OK)
      break;
    if (fg_check_start(srv->pool, c->m, &c->cr.candidates[i], &c->checks[i],
                       p) != FG_OK) {
      fg_http_record_unstarted(srv->store, &c->rec[i]);
      break;
    }
  }
  c->refused = c->started < n;
  if (!c->refused && wait_s > 0 && !cmp_ended(c)) {
    /* Step 4 waits suspended, holding no thread. */
    out->pending = (fg_pending){.ready = cmp_ended,
                                .finish = cmp_finish,
                                .drop = cmp_drop,
                                .ctx = c,
                                .deadline = t0 + wait_s};
    return;
  }
  cmp_finish(r, c, true, out);
}
