/*
 * http/http_internal.h -- what the files of http/ share.
 *
 * How a request travels:
 *   server.c  libmicrohttpd access handler: one fg_req per request, body
 *             accumulated up to --max-body (413 beyond), then
 *   router.c  method + path -> handler (404 unknown path, 405 + Allow),
 *   models.c / checks.c / scenarios.c / ops.c  the handlers: each fills
 *             one fg_resp,
 *   problem.c fg_problem -> RFC 9457 problem document, JSON responses,
 *   server.c  queues the fg_resp and writes the request log line (log.c).
 *   registry.c keeps checks that outlived their request's wait and records
 *             them when they end.
 *
 * Ownership: an fg_req lives from the first call of the access handler to
 * MHD's completion callback; an fg_resp's body is malloc'd and handed to
 * libmicrohttpd, which frees it. The fg_server is created by
 * fg_serve_command and passed to every handler through the request; there
 * is no global server state.
 *
 * Thread use: handlers run on libmicrohttpd's connection threads, several
 * at once; everything they touch through fg_server is thread-safe (store:
 * its own mutex; cache: its own mutex; pool and checks: engine.h; registry:
 * its own mutex).
 */
#ifndef FG_HTTP_INTERNAL_H
#define FG_HTTP_INTERNAL_H

#include "feasgate/engine.h"
#include "feasgate/model.h"
#include "feasgate/status.h"
#include "http/http.h"
#include "store/store.h"

#include <cjson/cJSON.h>
#include <microhttpd.h>
#include <pthread.h>
#include <stdatomic.h>
#include <stdbool.h>

/* Compiled models kept in memory (by digest). Compiling is milliseconds;
 * this only spares repeated checks of the same few models. */
#define FG_HTTP_MODEL_CACHE 64
/* Path parameters of one route at most ({name}, {n}, {id}). */
#define FG_ROUTE_PARAMS 4
/* Characters of a request path we route (longer ones are 404s). */
#define FG_HTTP_PATH_MAX 1024
/* Seconds a client is told to wait after a 503. */
#define FG_HTTP_RETRY_AFTER_S 2

typedef struct fg_registry fg_registry;

typedef struct fg_server {
  fg_http_config cfg;
  fg_store *store;
  fg_pool *pool;
  fg_model_cache *cache;
  fg_registry *registry;
  struct MHD_Daemon *daemon;
  /* Requests between the first access-handler call and completion. */
  pthread_mutex_t inflight_lock;
  pthread_cond_t inflight_cv;
  int inflight;
  atomic_bool stopping;
} fg_server;

typedef struct fg_req {
  fg_server *srv;
  struct MHD_Connection *conn;
  char method[16];
  char path[FG_HTTP_PATH_MAX + 1];
  bool path_too_long;
  char *body; /* NUL-terminated; NULL when empty */
  size_t len, cap;
  bool too_large;
  size_t discarded; /* bytes of a refused body thrown away */
  bool responded;
  double t0;         /* monotonic seconds at the first call */
  const char *route; /* the matched pattern, for the log */
  int nparams;
  char params[FG_ROUTE_PARAMS][FG_HTTP_PATH_MAX + 1];
} fg_req;

typedef struct fg_resp {
  int status;
  char *body; /* malloc'd; NULL for an empty body */
  size_t len;
  const char *content_type;
  char location[FG_HTTP_PATH_MAX + 1];
  char allow[64];
  int retry_after; /* seconds; 0 = no header */
} fg_resp;

typedef void fg_handler(fg_req *r, fg_resp *out);

/* ---- router.c ---- */
/* Find the handler for r->method and r->path, filling r->params and
 * r->route; on no match fill *out with 404 or 405 and return NULL. */
fg_handler *fg_route(fg_req *r, fg_resp *out);

/* ---- problem.c: responses ---- */
#define FG_CT_JSON "application/json; charset=utf-8"
#define FG_CT_PROBLEM "application/problem+json"

/* Print `body` as the JSON response (takes and frees `body`). A print that
 * fails for memory becomes a 503 problem. */
void fg_resp_json(fg_resp *out, int status, cJSON *body);
/* The problem document of `p`; http_status 0 = fg_status_http(p->status). */
void fg_resp_problem(fg_resp *out, const fg_problem *p, int http_status);
/* A whole-request problem in one call. */
void fg_resp_error(fg_resp *out, int http_status, fg_status st, const char *fmt,
                   ...) __attribute__((format(printf, 4, 5)));
/* The problem document as a cJSON object (for tests and the log). */
cJSON *fg_problem_json(const fg_problem *p, int http_status);

/* ---- log.c: JSON lines on stderr ---- */
void fg_log_set_level(fg_log_level level);
bool fg_log_enabled(fg_log_level level);
/* Adds "time" and "level", prints one line, frees `obj`. */
void fg_log_emit(fg_log_level level, cJSON *obj);
/* The same whatever the threshold (the "listening" line). */
void fg_log_force(fg_log_level level, cJSON *obj);
/* A one-off message: {"event": event, "message": ...}. */
void fg_log_msg(fg_log_level level, const char *event, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
double fg_http_now(void); /* monotonic seconds */

/* ---- models.c ---- */
void fg_h_models_register(fg_req *r, fg_resp *out);
void fg_h_models_list(fg_req *r, fg_resp *out);
void fg_h_model_get(fg_req *r, fg_resp *out);
void fg_h_model_version_get(fg_req *r, fg_resp *out);
void fg_h_model_retire(fg_req *r, fg_resp *out);
/* Parse a {n} path segment: 1..INT_MAX, else -1. */
int fg_http_parse_version(const char *s);
/* The stored version `version` (0 = latest) of `name` and its compiled
 * model (from the cache, or compiled and cached). */
fg_status fg_http_load_model(fg_server *srv, const char *name, int version,
                             fg_store_version *v, fg_model **m, fg_problem *p);

/* ---- checks.c ---- */
void fg_h_checks_create(fg_req *r, fg_resp *out);
void fg_h_check_get(fg_req *r, fg_resp *out);
void fg_h_checks_list(fg_req *r, fg_resp *out);
/* A new time-sortable check id "chk_" + 26 base32 characters. */
void fg_http_check_id(char out[40]);
/* Record the end of check `c` (status, verdict, estimate, result body) in
 * the store and log it; *body (if not NULL) receives the result body. */
fg_status fg_http_record_end(fg_store *store, fg_check *c,
                             const fg_store_check *rec, cJSON **body,
                             fg_problem *p);

/* ---- record.c ---- */
/* Fill *rec for a check of version `v` about to start (new id, status
 * running, seed, label, the replayable request) and put it in the store;
 * rec->request is malloc'd and the caller frees it. */
fg_status fg_http_record_start(fg_store *store, const fg_store_version *v,
                               const fg_model *m, const fg_check_request *req,
                               fg_store_check *rec, fg_problem *p);
/* Close the record of a check the pool refused as `failed`. */
void fg_http_record_unstarted(fg_store *store, const fg_store_check *rec);

/* ---- compare.c ---- */
void fg_h_comparisons_create(fg_req *r, fg_resp *out);

/* ---- sizes.c ---- */
void fg_h_sample_size(fg_req *r, fg_resp *out);

/* ---- registry.c ---- */
fg_status fg_registry_new(fg_store *store, fg_registry **out, fg_problem *p);
/* Hand over a check still running (takes the caller's reference) with its
 * record (request/result are not used). */
fg_status fg_registry_add(fg_registry *g, fg_check *c,
                          const fg_store_check *rec, fg_problem *p);
/* The live result body of check `id`, or NULL when not held here. */
cJSON *fg_registry_live_json(fg_registry *g, const char *id);
int fg_registry_count(fg_registry *g);
/* Let held checks run up to grace_s, cancel the rest, record every one,
 * stop the watcher thread. */
void fg_registry_shutdown(fg_registry *g, double grace_s);
void fg_registry_free(fg_registry *g);

/* ---- scenarios.c ---- */
void fg_h_model_scenarios(fg_req *r, fg_resp *out);

/* ---- ops.c ---- */
void fg_h_health(fg_req *r, fg_resp *out);
void fg_h_ready(fg_req *r, fg_resp *out);
void fg_h_limits(fg_req *r, fg_resp *out);

#endif
