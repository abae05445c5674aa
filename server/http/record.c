/*
 * http/record.c -- opening and closing the store record of a check, shared
 * by the handlers that start checks (checks.c, compare.c).
 *
 * Design: the durability contract of checks.c in two helpers: a check is
 * recorded `running` (with the request as it will be replayed, seed filled
 * in) before any work is queued, and a check the pool refused is closed
 * `failed` at once, so no record is left `running` by a live server. The
 * end of a check that ran is recorded by fg_http_record_end (checks.c).
 *
 * Thread use: connection threads; the store locks itself.
 */
#include "http/http_internal.h"
#include "http/metrics.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

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
