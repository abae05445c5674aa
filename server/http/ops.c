/*
 * http/ops.c -- operational endpoints.
 *
 *   GET /v1/health  200 {"status": "ok"} while the process serves
 *   GET /v1/ready   200 {"status": "ok", "workers", ...} (health.schema.json)
 *                   when the store answers and the work queue has room,
 *                   else a 503 problem saying why
 *   GET /v1/limits  {"limits": [{"name", "value"}, ...]}: every compiled-in
 *                   limit of FG_LIMITS_TABLE and every runtime setting;
 *                   whole values print as exact integers
 *
 * Thread use: handlers on libmicrohttpd's threads; they only read.
 */
#include "http/http_internal.h"

#include <inttypes.h>
#include <stdint.h>
#include <stdio.h>

void fg_h_health(fg_req *r, fg_resp *out) {
  cJSON *o = cJSON_CreateObject();
  if (o) cJSON_AddStringToObject(o, "status", "ok");
  fg_resp_json(out, 200, o);
}

void fg_h_ready(fg_req *r, fg_resp *out) {
  fg_server *srv = r->srv;
  if (atomic_load(&srv->stopping)) {
    fg_resp_error(out, 503, FG_EBUSY, "the server is shutting down");
    return;
  }
  fg_problem p;
  fg_problem_init(&p);
  if (fg_store_ping(srv->store, &p) != FG_OK) {
    fg_resp_problem(out, &p, 503);
    return;
  }
  int queued = fg_pool_queued(srv->pool);
  if (queued >= srv->cfg.queue) {
    fg_resp_error(out, 503, FG_EBUSY,
                  "the work queue is full (%d of %d checks waiting)", queued,
                  srv->cfg.queue);
    return;
  }
  cJSON *o = cJSON_CreateObject();
  if (o) {
    cJSON_AddStringToObject(o, "status", "ok");
    cJSON_AddNumberToObject(o, "workers", fg_pool_workers(srv->pool));
    cJSON_AddNumberToObject(o, "workers_busy", fg_pool_busy(srv->pool));
    cJSON_AddNumberToObject(o, "queued", queued);
    cJSON_AddNumberToObject(o, "running_detached",
                            fg_registry_count(srv->registry));
  }
  fg_resp_json(out, 200, o);
}

/* A whole value prints as an exact integer: cJSON's %.15g would print
 * seed_max (2^53 - 1) as 9.00719925474099e+15, 2 less than the truth
 * after the digits it drops. Fractions (seconds) print as cJSON does. */
static void add_limit(cJSON *arr, const char *name, double value) {
  cJSON *e = cJSON_CreateObject();
  if (!e) return;
  cJSON_AddStringToObject(e, "name", name);
  if (value >= 0 && value < 0x1p64 && value == (double)(uint64_t)value) {
    char digits[24];
    snprintf(digits, sizeof digits, "%" PRIu64, (uint64_t)value);
    cJSON_AddRawToObject(e, "value", digits);
  } else {
    cJSON_AddNumberToObject(e, "value", value);
  }
  cJSON_AddItemToArray(arr, e);
}

void fg_h_limits(fg_req *r, fg_resp *out) {
  const fg_http_config *cfg = &r->srv->cfg;
  cJSON *o = cJSON_CreateObject();
  cJSON *arr = o ? cJSON_AddArrayToObject(o, "limits") : NULL;
  if (arr) {
#define FG_ADD_LIMIT(id, name, value) add_limit(arr, name, (double)(value));
    FG_LIMITS_TABLE(FG_ADD_LIMIT)
#undef FG_ADD_LIMIT
#define SETTING(id, value) add_limit(arr, fg_limit_name(FG_LIMIT_##id), value)
    SETTING(MAX_BODY, (double)cfg->max_body);
    SETTING(MAX_SAMPLES, (double)cfg->limits.max_samples);
    SETTING(MAX_SCENARIOS, (double)cfg->limits.max_scenarios);
    SETTING(MAX_WAIT, cfg->limits.max_wait_s);
    SETTING(MAX_CHECK_TIME, cfg->max_check_s);
    SETTING(WORKERS, cfg->workers);
    SETTING(CHUNK, cfg->chunk);
    SETTING(QUEUE, cfg->queue);
    SETTING(MAX_CONNECTIONS, cfg->max_connections);
    SETTING(MAX_CONNECTIONS_PER_CLIENT, cfg->max_connections_per_client);
#undef SETTING
  }
  fg_resp_json(out, 200, o);
}
