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
 *   lifecycle.c the life of one check (id, record, queue, end, record);
 *   comparison.c comparisons as detached jobs of several checks;
 *   registry.c lists what runs here by id, and its watcher records ends.
 *
 * Ownership: an fg_req lives from the first call of the access handler to
 * MHD's completion callback; an fg_resp's body is malloc'd and handed to
 * libmicrohttpd, which frees it. The fg_server is created by
 * fg_serve_command and passed to every handler through the request; there
 * is no global server state.
 *
 * Thread use: handlers run on libmicrohttpd's event-loop threads, several
 * at once, and must not block (a wait is an fg_pending: waiter.c); everything they touch through fg_server is thread-safe (store:
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

/* Who may call a route (keys.c); each route in router.c names its least
 * role. */
typedef enum fg_role {
  FG_ROLE_NONE = 0, /* open routes */
  FG_ROLE_READER,
  FG_ROLE_CHECKER,
  FG_ROLE_AUTHOR,
  FG_ROLE_ADMIN
} fg_role;

/* Path parameters of one route at most ({name}, {n}, {id}). */
#define FG_ROUTE_PARAMS 4

typedef struct fg_registry fg_registry;
typedef struct fg_keyring fg_keyring;
typedef struct fg_req fg_req;
typedef struct fg_resp fg_resp;

/* Bytes of a client address as counted (IPv6; IPv4 uses 4). */
#define FG_CLIENT_KEY 16
typedef struct fg_client {
  unsigned char key[FG_CLIENT_KEY];
  size_t len;
  int count; /* open connections */
} fg_client;

/* The suspended requests and the thread that resumes them (waiter.c). */
typedef struct fg_waiter {
  pthread_mutex_t lock;
  pthread_cond_t wake;
  pthread_t thread;
  fg_req *head; /* listed requests, linked by next_waiting */
  int count;
  bool stop, started, joined;
} fg_waiter;

typedef struct fg_server {
  fg_http_config cfg;
  fg_store *store;
  fg_pool *pool;
  fg_model_cache *cache;
  fg_registry *registry;
  fg_keyring *keys;   /* live API keys (keys.c) */
  bool keys_required; /* non-loopback without --allow-keyless: keys even when
                         the store holds none (then nothing keyed opens) */
  struct MHD_Daemon *daemon;
  /* Requests between the first access-handler call and completion. */
  pthread_mutex_t inflight_lock;
  pthread_cond_t inflight_cv;
  int inflight;
  atomic_bool stopping;
  /* Connections (conns.c): open ones in all and by client address. */
  pthread_mutex_t conn_lock;
  int open;
  fg_client *clients;
  int nclients, clients_cap;
  atomic_ullong conns_refused; /* answered 503 for a connection limit */
  fg_waiter waiter;
} fg_server;

/* A wait a handler asks for instead of blocking (waiter.c): the waiter
 * thread polls ready(ctx) (quick, non-blocking, thread-safe) until it is
 * true or `deadline` (fg_time_monotonic() seconds) passes, then the request's
 * connection is resumed and finish(r, ctx, timed_out, out) answers on a
 * libmicrohttpd thread -- or fills out->pending again to wait more.
 * finish owns ctx (frees it or hands it on); drop(ctx) frees it when the
 * request ends before finish runs. */
typedef struct fg_pending {
  bool (*ready)(void *ctx);
  void (*finish)(fg_req *r, void *ctx, bool timed_out, fg_resp *out);
  void (*drop)(void *ctx);
  void *ctx;
  double deadline;
} fg_pending;

struct fg_req {
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
  fg_role role;      /* the matched route's least role (router.c) */
  int nparams;
  char params[FG_ROUTE_PARAMS][FG_HTTP_PATH_MAX + 1];
  bool authorized;                 /* fg_auth_request said yes */
  char key_name[FG_NAME_MAX + 1]; /* the caller's key; "" when none */
  /* Suspended (waiter.c): `pending` is the wait; `waiting` while listed
   * (under the waiter's lock); `resumed` once the waiter let it go, with
   * `timed_out` when the deadline rather than `ready` did. */
  bool suspended;
  fg_pending pending;
  bool waiting, resumed, timed_out;
  fg_req *next_waiting;
};

struct fg_resp {
  int status;
  char *body; /* malloc'd; NULL for an empty body */
  size_t len;
  const char *content_type;
  char location[FG_HTTP_PATH_MAX + 1];
  char allow[64];
  int retry_after; /* seconds; 0 = no header */
  char www_authenticate[64]; /* "" = no header */
  /* A streamed body instead of `body` (reader != NULL): libmicrohttpd
   * pulls it through `reader` (chunked transfer coding, the length being
   * unknown) and calls reader_free(reader_ctx) when done; so does queue()
   * when no response could be made. */
  MHD_ContentReaderCallback reader;
  void *reader_ctx;
  MHD_ContentReaderFreeCallback reader_free;
  /* status 0 and pending.finish set: suspend and answer later */
  fg_pending pending;
  bool close; /* "Connection: close": the connection ends after this */
  bool page;  /* the page's own files: CSP and other browser headers */
};

typedef void fg_handler(fg_req *r, fg_resp *out);

/* ---- listen.c: the listening socket and the TLS files ---- */
/* A listening socket on cfg's host and port; its bound address as
 * "HOST:PORT" or "[V6]:PORT" in addr; -1 with err naming --listen. */
int fg_http_bind_listener(const fg_http_config *cfg, char *addr, size_t cap,
                          char *err, size_t errcap);
/* True when the socket is bound to a loopback address (127.0.0.0/8, ::1,
 * or ::ffff:127.x.y.z). */
bool fg_http_bound_to_loopback(int fd);
/* A whole PEM file as a NUL-terminated string; NULL with err naming the
 * flag and the path. */
char *fg_http_read_pem(const char *flag, const char *path, char *err,
                       size_t errcap);
/* Free PEM text after wiping it (the key is a secret). */
void fg_http_free_pem(char *pem);

/* ---- conns.c: connections, their limits, the header timeout ---- */
enum { FG_OVER_NONE = 0, FG_OVER_ALL, FG_OVER_CLIENT };
/* What the daemon keeps per connection (libmicrohttpd's socket context). */
typedef struct fg_conn {
  bool nul_seen; /* an escape of the current request decoded to NUL */
  int over;      /* FG_OVER_*: opened beyond a connection limit */
  bool counted;  /* counted under its client address */
  unsigned char key[FG_CLIENT_KEY];
  size_t len;
} fg_conn;
bool fg_http_conns_init(fg_server *srv);
void fg_http_conns_free(fg_server *srv);
/* MHD_OPTION_NOTIFY_CONNECTION: an fg_conn per connection, counted. */
void fg_http_conn_notify(void *cls, struct MHD_Connection *conn,
                         void **socket_context,
                         enum MHD_ConnectionNotificationCode code);
/* The fg_conn of `conn` (NULL if none could be made). */
fg_conn *fg_http_conn_of(struct MHD_Connection *conn);
/* Connections open now. */
int fg_http_conns_open(fg_server *srv);
/* On the 1st call of a request: false with a 503 (close) in *out when its
 * connection is beyond a limit; else the idle timeout replaces the
 * header timeout. */
bool fg_http_conn_admit(fg_req *r, fg_resp *out);

/* ---- waiter.c: suspended requests ---- */
bool fg_waiter_start(fg_server *srv);
/* List r (already suspended) until r->pending says ready or times out. */
void fg_waiter_add(fg_server *srv, fg_req *r);
/* Unlist r if listed (its connection is going away). */
void fg_waiter_remove(fg_server *srv, fg_req *r);
int fg_waiter_count(fg_server *srv);
/* Resume every request as timed out, and any added later at once. */
void fg_waiter_stop(fg_server *srv);
void fg_waiter_free(fg_server *srv);

/* ---- replica_wait.c: a DELETE waiting for another replica ---- */
/* Reads record `id` from the store: true when it answered in *out (the
 * record ended, or an error), false when it still runs (nothing
 * written). */
typedef bool fg_replica_look(fg_req *r, const char *id, fg_resp *out);
/* Suspend the request until `look` answers, reading every
 * FG_HTTP_REPLICA_LOOK_S, or 503 after FG_HTTP_CANCEL_WAIT_S ("WHAT ID
 * runs in another replica ..."). */
void fg_replica_wait(const char *what, const char *id, fg_replica_look *look,
                     fg_resp *out);

/* ---- strict.c: requests refused before routing, echoed text ---- */
/* MHD_OPTION_UNESCAPE_CALLBACK: libmicrohttpd's decoding; marks "%00". */
size_t fg_http_unescape(void *cls, struct MHD_Connection *conn, char *s);
/* False, with a 400 in *out, for two Content-Length headers, one with
 * Transfer-Encoding, or a NUL decoded in the path or query. */
bool fg_http_request_strict(fg_req *r, fg_resp *out);
/* True when `s` is valid UTF-8 (RFC 3629). */
bool fg_utf8_valid(const char *s);
/* A malloc'd copy of `s` with each invalid UTF-8 subpart as U+FFFD. */
char *fg_utf8_fix(const char *s);
/* The same for every name and string of a cJSON tree (and its siblings). */
void fg_json_utf8_fix(cJSON *item);

/* ---- router.c ---- */
/* Find the handler for r->method and r->path, filling r->params and
 * r->route; on no match fill *out with 404 or 405 and return NULL. */
fg_handler *fg_route(fg_req *r, fg_resp *out);
/* The least role for `method` on router pattern `route` (router.c; admin
 * for a pair that is not a route). */
fg_role fg_route_role(const char *method, const char *route);

/* ---- query.c ---- */
/* Query parameters named names[i] into *slots[i] (first occurrence; NULL
 * when absent). False, with a 400 in *out naming the first parameter of
 * another name (or an empty one) and listing the expected names, when
 * there is one. */
bool fg_http_query_args(fg_req *r, const char *const *names,
                        const char **const *slots, int n, fg_resp *out);
/* "a, b or c" of the n names, for that message. */
void fg_http_query_expected(const char *const *names, int n, char *buf,
                            size_t cap);
/* The slots over given pairs (keys[i] NULL: an empty name), the unknown
 * name in `unknown` ("" for the empty one); the unit tests' way in, and
 * what fg_http_query_args does per parameter. */
bool fg_http_query_pairs(const char *const *keys, const char *const *values,
                         int npairs, const char *const *names,
                         const char **const *slots, int n,
                         char unknown[FG_HTTP_PARAM_NAME_MAX]);
/* True when the Accept header prefers media type `type` (e.g. "text/csv")
 * to JSON (RFC 9110 section 12.5.1: the highest q wins; JSON, any type and
 * application/anything win ties, JSON being the default). */
bool fg_http_accept_prefers(const char *accept, const char *type);
/* 400: "query parameter 'NAME': <message>". */
void fg_resp_bad_param(fg_resp *out, const char *name, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

/* ---- problem.c: responses ---- */
#define FG_CT_JSON "application/json; charset=utf-8"
#define FG_CT_PROBLEM "application/problem+json"

/* Print `body` as the JSON response (takes and frees `body`). A print that
 * fails for memory becomes a 503 problem. */
void fg_resp_json(fg_resp *out, int status, cJSON *body);
/* `text` (malloc'd JSON, not NULL) as the JSON response; takes it. */
void fg_resp_json_text(fg_resp *out, int status, char *text);
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
/* explain.c: GET /v1/checks/{id}/scenarios/{index} */
void fg_h_check_scenario(fg_req *r, fg_resp *out);
/* replay.c: POST /v1/checks/{id}/replay */
void fg_h_check_replay(fg_req *r, fg_resp *out);
/* The differing counts of two check result bodies (replay.c): an array
 * of {"field", "original", "replay"}; empty when every count agrees. */
cJSON *fg_replay_differences(const cJSON *orig, const cJSON *rep);
void fg_h_checks_list(fg_req *r, fg_resp *out);
void fg_h_check_cancel(fg_req *r, fg_resp *out);
/* A new time-sortable id: `prefix` ("chk_", "cmp_") + 26 base32
 * characters (out >= 40 bytes). */
void fg_http_new_id(const char *prefix, char out[40]);
/* A check id "chk_..." */
void fg_http_check_id(char out[40]);
/* The body of a stored check: its result text, or one made from the row
 * (interrupted, failed to start, or running in another replica). */
cJSON *fg_http_stored_check_body(const fg_store_check *c);
/* True when s is prefix + 26 Crockford base32 characters. */
bool fg_http_is_id(const char *prefix, const char *s);

/* ---- record.c ---- */
/* What POST .../checks and .../comparisons hold while they start
 * candidates: the model version named, its compiled model, the body as
 * JSON, and the problem every step adds to. */
typedef struct fg_http_target {
  fg_problem p;
  fg_store_version v;
  fg_model *m; /* a reference */
  cJSON *body;
} fg_http_target;
/* The steps of those requests before their own parsing: 503 while the
 * server shuts down; load version `version` of `name` (0: the latest);
 * then turn away a retired model (410: "register it again to <verb>
 * candidates against it"), an empty body (400: "expected <expected>,
 * found an empty body") and a body that is not JSON (400). False when it
 * has answered `out`. fg_http_target_clear is due either way. */
bool fg_http_open_target(fg_req *r, const char *name, int version,
                         const char *verb, const char *expected,
                         fg_http_target *t, fg_resp *out);
void fg_http_target_clear(fg_http_target *t);
/* False, with a 409 problem answered, when `req` asks for a model digest
 * other than that of `v`. */
bool fg_http_digest_agrees(const fg_check_request *req,
                           const fg_store_version *v, fg_problem *p,
                           fg_resp *out);
/* A request's wait_s held to 0 .. --max-wait (NaN: 0). */
double fg_http_wait_bound(const fg_server *srv, double wait_s);

/* ---- lifecycle.c: the life of one check (see its top comment) ----
 * Locking rule: no lock that a reader, the metrics or the readiness probe
 * needs is ever held across simulation, interval computation, JSON
 * building or a store call. */
typedef struct fg_job fg_job;
/* New id, store row `running`, queued on the pool, listed in the
 * registry. `comparison`: the id of the comparison it is a candidate of,
 * or NULL. FG_EBUSY when the pool refuses it (its row is then closed
 * `failed`). */
fg_status fg_job_start(fg_server *srv, const fg_store_version *v, fg_model *m,
                       const fg_check_request *req, const char *key,
                       const char *comparison, fg_job **out, fg_problem *p);
/* The same for a replay of check `replay_of` (replay.c): its row and
 * result body carry replay_of. */
fg_status fg_job_start_replay(fg_server *srv, const fg_store_version *v,
                              fg_model *m, const fg_check_request *req,
                              const char *key, const char *replay_of,
                              fg_job **out, fg_problem *p);
fg_job *fg_job_ref(fg_job *j);
void fg_job_unref(fg_job *j);
const char *fg_job_id(const fg_job *j);
const char *fg_job_comparison(const fg_job *j);
const fg_store_check *fg_job_row(const fg_job *j); /* the running row */
fg_check *fg_job_check(fg_job *j);
/* Has the engine ended it? Never blocks. */
bool fg_job_ended(fg_job *j);
/* Wait up to timeout_s (< 0: for ever) for the end; true when ended. */
bool fg_job_wait(fg_job *j, double timeout_s);
void fg_job_cancel(fg_job *j);
fg_check_state fg_job_final_state(fg_job *j);
/* Its request was answered before its end (counted as detached). */
void fg_job_detach(fg_job *j);
bool fg_job_detached(fg_job *j);
/* Record the end once (store, metrics, log, from the engine's outcome);
 * later calls give the first's status. Only after fg_job_ended. */
fg_status fg_job_record_end(fg_job *j, fg_problem *p);
bool fg_job_recorded(fg_job *j);
bool fg_job_unsaved(fg_job *j); /* the store refused the end: kept */
fg_status fg_job_retry_unsaved(fg_job *j, fg_problem *p);
/* The body as GET shows it (the stored text once recorded, else live). */
cJSON *fg_job_body(fg_job *j);
/* The same as the answer `status` in *out. */
void fg_job_answer(fg_job *j, int status, fg_resp *out);
/* Called once (with no lock held, on the thread that records it) when the
 * end is recorded -- at once when it already is. For a handler that
 * suspends its connection instead of waiting: resume it from the hook,
 * then fg_job_answer. One hook per job; a second call replaces it. */
typedef void fg_job_hook(void *ctx);
void fg_job_on_recorded(fg_job *j, fg_job_hook *hook, void *ctx);

/* ---- comparison.c: comparisons as detached jobs ---- */
typedef struct fg_comparison fg_comparison;
void fg_h_comparisons_create(fg_req *r, fg_resp *out);
void fg_h_comparison_get(fg_req *r, fg_resp *out);
void fg_h_comparison_cancel(fg_req *r, fg_resp *out);
fg_comparison *fg_comparison_ref(fg_comparison *c);
void fg_comparison_unref(fg_comparison *c);
const char *fg_comparison_id(const fg_comparison *c);
/* Has every candidate ended and the comparison's result been stored?
 * Never blocks. */
bool fg_comparison_ended(fg_comparison *c);
/* Watcher: when every candidate has ended, record them and the
 * comparison; true when the comparison is stored (it may be unlisted). */
bool fg_comparison_step(fg_comparison *c);
/* The body as GET shows it (the stored text once stored, else live). */
void fg_comparison_answer(fg_comparison *c, int status, fg_resp *out);
/* As fg_job_on_recorded, once the comparison's result is stored. */
void fg_comparison_on_stored(fg_comparison *c, fg_job_hook *hook, void *ctx);

/* ---- sizes.c ---- */
void fg_h_sample_size(fg_req *r, fg_resp *out);

/* ---- check_request.c: GET /v1/checks/{id}/request ---- */
void fg_h_check_request(fg_req *r, fg_resp *out);

/* ---- page.c: the page a person looks at (server/http/page/) ---- */
void fg_h_page(fg_req *r, fg_resp *out);
void fg_h_page_js(fg_req *r, fg_resp *out);
void fg_h_page_css(fg_req *r, fg_resp *out);
/* The Content-Security-Policy and other browser headers of the page's
 * files (set when fg_resp.page). */
void fg_page_headers(struct MHD_Response *mr);
/* 200 with a copy of an embedded document (libmicrohttpd frees the body
 * it is given; the documents are fetched rarely); false after a 503 when
 * the copy cannot be made (page.c). */
bool fg_resp_embedded(fg_resp *out, const unsigned char *doc, size_t len,
                      const char *type);

/* ---- registry.c: what runs here, by id; the watcher ---- */
fg_status fg_registry_new(fg_store *store, fg_registry **out, fg_problem *p);
/* List a job / a comparison (takes a reference) until its end is stored. */
fg_status fg_registry_add(fg_registry *g, fg_job *j, fg_problem *p);
fg_status fg_registry_add_comparison(fg_registry *g, fg_comparison *c,
                                     fg_problem *p);
/* Wake the watcher (something ended). */
void fg_registry_poke(fg_registry *g);
/* The listed job / comparison of `id` (a new reference), or NULL. */
fg_job *fg_registry_find(fg_registry *g, const char *id);
fg_comparison *fg_registry_find_comparison(fg_registry *g, const char *id);
/* Running checks whose request was answered before their end. */
int fg_registry_count(fg_registry *g);
/* Ended checks whose end the store has not taken yet (retried). */
int fg_registry_unsaved(fg_registry *g);
/* Cancel every listed check still running (shutdown). */
void fg_registry_cancel_all(fg_registry *g);
/* Let listed checks run up to grace_s, cancel the rest, record every one,
 * stop the watcher thread. */
void fg_registry_shutdown(fg_registry *g, double grace_s);
void fg_registry_free(fg_registry *g);

/* ---- keys.c: API keys, roles, the cache of live keys ---- */
/* A key: prefix + FG_KEY_BYTES random bytes in unpadded base64url. */
#define FG_KEY_PREFIX "fgk_"
#define FG_KEY_BYTES 32


typedef enum fg_auth_result {
  FG_AUTH_OK = 0,
  FG_AUTH_WRONG,      /* matches no live key */
  FG_AUTH_UNAVAILABLE /* the keys could never be read */
} fg_auth_result;

const char *fg_role_name(fg_role r);
fg_role fg_role_parse(const char *s); /* FG_ROLE_NONE when unknown */
/* hash (FG_STORE_KEY_HASH bytes) = SHA-256(salt || text). */
fg_status fg_key_hash(const char *text, const uint8_t *salt, uint8_t *hash,
                      fg_problem *p);

fg_status fg_keyring_new(fg_store *store, fg_keyring **out, fg_problem *p);
void fg_keyring_free(fg_keyring *k);
/* Live keys now (reloading when stale); -1 when never readable. */
int fg_keyring_live(fg_keyring *k);
fg_auth_result fg_keyring_check(fg_keyring *k, const char *text,
                                char name[FG_NAME_MAX + 1], fg_role *role);
/* May request `r` (routed: a handler matched r->method and r->route) go
 * on? Fills r->key_name; false with *out set to 401 (missing, malformed,
 * wrong or revoked key), 403 (role too low) or 503 (keys unreadable). */
bool fg_auth_request(fg_req *r, bool routed, fg_resp *out);

/* ---- scenarios.c ---- */
void fg_h_model_scenarios(fg_req *r, fg_resp *out);
/* samplemodels.c: POST /v1/models/{name}/sample-models */
void fg_h_model_sample_models(fg_req *r, fg_resp *out);

/* ---- ops.c ---- */
void fg_h_health(fg_req *r, fg_resp *out);
void fg_h_ready(fg_req *r, fg_resp *out);
void fg_h_limits(fg_req *r, fg_resp *out);

#endif
