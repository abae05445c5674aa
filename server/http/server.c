/*
 * http/server.c -- the libmicrohttpd daemon and `feasgate serve`.
 *
 * Design
 *   libmicrohttpd runs a small pool of event-loop threads (epoll where
 *   available) that serve every connection; connection limits, the
 *   per-connection state and the header timeout are in conns.c. Handlers
 *   never simulate (checks run on the engine's worker pool) and never
 *   block: one that must wait (a check's wait_s, a cancel) leaves
 *   out->pending, answer() suspends the connection and the waiter
 *   (waiter.c) resumes it, after which the access handler's next call
 *   runs pending.finish. Bodies may be streamed (fg_resp.reader).
 *
 *   The access handler is called several times per request:
 *     1st call   set up an fg_req; a request with bad framing (two
 *                Content-Length headers, or one with Transfer-Encoding)
 *                or a NUL in its path or query is refused with 400
 *                (strict.c); a Content-Length above --max-body is
 *                refused with 413 at once, before any of the body is read;
 *                so is a request without the key its route needs (401,
 *                403: keys.c), so no body is read for an unknown caller;
 *     body calls append to r->body; as soon as the bytes received exceed
 *                --max-body the buffer is dropped and the rest discarded
 *                (up to FG_HTTP_DISCARD_MAX, then the connection is
 *                closed), so an oversize body is never held whole; the
 *                413 goes out on the last call, as libmicrohttpd takes
 *                no response in the middle of a body;
 *     last call  (no more data) route, authorise (again, unless the 1st
 *                call did), run the handler, queue the answer.
 *   The completion callback logs the request (method, route, status,
 *   duration_ms) and frees the fg_req.
 *
 *   We create the listening socket ourselves (listen.c: so port 0 can be
 *   resolved to the bound address, which is the first log line) and hand
 *   it to libmicrohttpd with MHD_OPTION_LISTEN_SOCKET. A listener that is not
 *   loopback (127.0.0.0/8, ::1) is refused (exit 3) while the store holds
 *   no live key, unless --allow-keyless; without --allow-keyless it then
 *   also keeps requiring keys should every key be revoked later.
 *
 *   HTTPS: with --tls-cert and --tls-key both PEM files are read at
 *   start-up (at most FG_HTTP_TLS_FILE_MAX bytes each) and handed to
 *   libmicrohttpd (MHD_USE_TLS, GnuTLS underneath) from memory.
 *
 * Start-up and shutdown (fg_serve_command, main thread)
 *   parse settings (exit 3 on a bad one) -> read the TLS files (exit 3)
 *   -> block SIGINT/SIGTERM in every thread -> bind -> open the store,
 *   mark checks left running as interrupted -> load the keys, refuse a
 *   keyless non-loopback listener (exit 3) -> worker pool, model cache,
 *   registry -> connection table, waiter -> daemon -> log
 *   "listening" -> sigwait. On SIGINT/SIGTERM: stop accepting (quiesce),
 *   wait for requests in flight up to --grace (then cancel the running
 *   checks, which answers the requests waiting for them, and wait
 *   FG_HTTP_STOP_ANSWER_S more), stop the daemon, let detached checks
 *   finish within what is left of --grace (then cancel and record them),
 *   free the pool (stuck workers are left behind), close the store,
 *   exit 0: within --grace plus a few seconds whatever a worker does.
 *   Whatever is still suspended then is resumed (answered as timed
 *   out) before the daemon stops.
 *
 * Thread use: the access handler and completion callback run on
 * libmicrohttpd's pool threads; fg_serve_command on the main thread only.
 */
#include "core/buf.h"
#include "http/http_internal.h"
#include "http/metrics.h"

#include <arpa/inet.h>
#include <errno.h>
#include <inttypes.h>
#include <netdb.h>
#include <math.h>
#include <netinet/in.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <unistd.h>


/* ---- responses ---- */

static void queue(fg_req *r, fg_resp *resp) {
  struct MHD_Response *mr;
  if (resp->reader) {
    mr = MHD_create_response_from_callback(MHD_SIZE_UNKNOWN,
                                           FG_HTTP_STREAM_BLOCK, resp->reader,
                                           resp->reader_ctx,
                                           resp->reader_free);
    if (!mr && resp->reader_free) resp->reader_free(resp->reader_ctx);
    resp->reader = NULL;
  } else if (resp->body && resp->len > 0) {
    mr = MHD_create_response_from_buffer(resp->len, resp->body,
                                         MHD_RESPMEM_MUST_FREE);
    if (mr) resp->body = NULL; /* libmicrohttpd owns it now */
  } else {
    mr = MHD_create_response_from_buffer(0, (void *)"", MHD_RESPMEM_PERSISTENT);
  }
  free(resp->body);
  resp->body = NULL;
  if (!mr) {
    r->responded = true;
    return;
  }
  if (resp->content_type)
    MHD_add_response_header(mr, MHD_HTTP_HEADER_CONTENT_TYPE,
                            resp->content_type);
  if (resp->location[0])
    MHD_add_response_header(mr, MHD_HTTP_HEADER_LOCATION, resp->location);
  if (resp->allow[0])
    MHD_add_response_header(mr, MHD_HTTP_HEADER_ALLOW, resp->allow);
  if (resp->www_authenticate[0])
    MHD_add_response_header(mr, MHD_HTTP_HEADER_WWW_AUTHENTICATE,
                            resp->www_authenticate);
  if (resp->retry_after > 0) {
    char ra[16];
    snprintf(ra, sizeof ra, "%d", resp->retry_after);
    MHD_add_response_header(mr, MHD_HTTP_HEADER_RETRY_AFTER, ra);
  }
  MHD_add_response_header(mr, "Cache-Control", "no-store");
  if (resp->close)
    MHD_add_response_header(mr, MHD_HTTP_HEADER_CONNECTION, "close");
  if (resp->page) fg_page_headers(mr);
  /* libmicrohttpd takes a response only on the first call or the last;
   * `responded` records whether this one was taken. */
  r->responded =
      MHD_queue_response(r->conn, (unsigned int)resp->status, mr) == MHD_YES;
  MHD_destroy_response(mr);
}

static void log_request(const fg_req *r, int status) {
  fg_metrics_request(r->method, r->route, status);
  cJSON *o = cJSON_CreateObject();
  if (!o) return;
  cJSON_AddStringToObject(o, "event", "request");
  cJSON_AddStringToObject(o, "method", r->method);
  cJSON_AddStringToObject(o, "route", r->route ? r->route : "(none)");
  cJSON_AddStringToObject(o, "path", r->path);
  cJSON_AddNumberToObject(o, "status", status);
  if (r->key_name[0])
    cJSON_AddStringToObject(o, "key", r->key_name);
  else
    cJSON_AddNullToObject(o, "key");
  double ms = (fg_time_monotonic() - r->t0) * 1000.0;
  cJSON_AddNumberToObject(o, "duration_ms", (double)(long)(ms * 1000) / 1000);
  fg_log_emit(status >= 500 ? FG_LOG_WARN : FG_LOG_INFO, o);
}

static void respond(fg_req *r, fg_resp *resp) {
  int status = resp->status;
  queue(r, resp);
  if (r->responded) log_request(r, status);
}

static void refuse_too_large(fg_req *r, const char *how) {
  fg_problem p;
  fg_problem_init(&p);
  fg_problem_limit(&p, "", FG_LIMIT_MAX_BODY, (double)r->srv->cfg.max_body,
                   "request body %s the limit %s = %" PRIu64 " bytes", how,
                   fg_limit_name(FG_LIMIT_MAX_BODY), r->srv->cfg.max_body);
  fg_resp resp = {0};
  fg_resp_problem(&resp, &p, 413);
  r->route = "(body too large)";
  respond(r, &resp);
}

/* Queue the handler's answer, or suspend the request when the handler
 * asked to wait (resp->pending): the waiter resumes it and the access
 * handler's next call runs pending.finish. */
static enum MHD_Result answer(fg_req *r, fg_resp *resp) {
  if (resp->status == 0 && resp->pending.finish) {
    free(resp->body);
    r->pending = resp->pending;
    r->suspended = true;
    MHD_suspend_connection(r->conn);
    fg_waiter_add(r->srv, r);
    return MHD_YES;
  }
  if (resp->status == 0)
    fg_resp_error(resp, 500, FG_EINTERNAL, "handler for %s gave no answer",
                  r->route ? r->route : "?");
  respond(r, resp);
  return r->responded ? MHD_YES : MHD_NO;
}

/* ---- libmicrohttpd callbacks ---- */

static enum MHD_Result on_request(void *cls, struct MHD_Connection *conn,
                                  const char *url, const char *method,
                                  const char *version, const char *upload,
                                  size_t *upload_size, void **con_cls) {
  fg_server *srv = cls;
  fg_req *r = *con_cls;
  if (!r) {
    r = calloc(1, sizeof *r);
    if (!r) return MHD_NO; /* libmicrohttpd closes the connection */
    r->srv = srv;
    r->conn = conn;
    r->t0 = fg_time_monotonic();
    snprintf(r->method, sizeof r->method, "%s", method);
    if (strlen(url) > FG_HTTP_PATH_MAX) r->path_too_long = true;
    snprintf(r->path, sizeof r->path, "%s", url);
    *con_cls = r;
    pthread_mutex_lock(&srv->inflight_lock);
    srv->inflight++;
    pthread_mutex_unlock(&srv->inflight_lock);
    fg_resp bad = {0};
    if (!fg_http_conn_admit(r, &bad) || !fg_http_request_strict(r, &bad))
      respond(r, &bad);
    const char *cl =
        MHD_lookup_connection_value(conn, MHD_HEADER_KIND, "Content-Length");
    if (cl && !r->responded) {
      char *end = NULL;
      errno = 0;
      unsigned long long n = strtoull(cl, &end, 10);
      if (errno == ERANGE || n > srv->cfg.max_body) {
        /* Answered now, before any of the body is read; libmicrohttpd
         * then closes the connection instead of reading the body. */
        r->too_large = true;
        refuse_too_large(r, "declared in Content-Length exceeds");
      }
    }
    if (!r->responded) {
      /* Refuse a caller without the right key before reading its body. */
      fg_resp routed = {0};
      fg_handler *h = fg_route(r, &routed);
      free(routed.body);
      fg_resp denied = {0};
      if (fg_auth_request(r, h != NULL, &denied))
        r->authorized = true;
      else
        respond(r, &denied);
    }
    return MHD_YES;
  }
  if (*upload_size > 0) {
    size_t n = *upload_size;
    *upload_size = 0; /* consumed (or discarded) */
    if (r->too_large || r->responded) {
      /* Discarding the rest of a refused body, so that the client reads
       * the 413 at the end; a client that keeps sending far beyond the
       * limit loses the connection instead. */
      r->discarded += n;
      if (r->discarded > FG_HTTP_DISCARD_MAX) {
        fg_log_msg(FG_LOG_WARN, "request_aborted",
                   "%s %.200s: body goes on past max_body + %d bytes; "
                   "connection closed",
                   r->method, r->path, FG_HTTP_DISCARD_MAX);
        return MHD_NO;
      }
      return MHD_YES;
    }
    if (r->len + n > srv->cfg.max_body) {
      /* Drop what was kept at once; the 413 goes out on the last call
       * (libmicrohttpd takes no response in the middle of a body). */
      r->too_large = true;
      free(r->body);
      r->body = NULL;
      r->discarded = r->len + n;
      r->len = r->cap = 0;
      return MHD_YES;
    }
    if (!fg_buf_grow(&r->body, &r->cap, r->len + n + 1, FG_HTTP_BODY_INITIAL,
                     (size_t)srv->cfg.max_body + 1)) {
      /* No answer is possible mid-body: close the connection. */
      fg_log_msg(FG_LOG_ERROR, "request_aborted",
                 "%s %.200s: out of memory receiving %zu body bytes",
                 r->method, r->path, r->len + n);
      return MHD_NO;
    }
    memcpy(r->body + r->len, upload, n);
    r->len += n;
    r->body[r->len] = '\0';
    return MHD_YES;
  }
  if (r->suspended) {
    /* Resumed by the waiter: the handler's finish answers (or waits
     * again). */
    r->suspended = false;
    fg_pending pd = r->pending;
    memset(&r->pending, 0, sizeof r->pending);
    fg_resp resp = {0};
    pd.finish(r, pd.ctx, r->timed_out, &resp);
    return answer(r, &resp);
  }
  if (r->responded) return MHD_YES;
  if (r->too_large) {
    refuse_too_large(r, "exceeds");
    return r->responded ? MHD_YES : MHD_NO;
  }
  fg_resp resp = {0};
  fg_handler *h = fg_route(r, &resp);
  if (!r->authorized) {
    /* The 1st call's refusal was not taken: refuse now. */
    fg_resp denied = {0};
    if (!fg_auth_request(r, h != NULL, &denied)) {
      free(resp.body);
      resp = denied;
      h = NULL;
    }
  }
  if (h) h(r, &resp);
  return answer(r, &resp);
}

static void on_completed(void *cls, struct MHD_Connection *conn, void **con_cls,
                         enum MHD_RequestTerminationCode why) {
  fg_server *srv = cls;
  fg_req *r = *con_cls;
  if (!r) return;
  if (r->suspended) {
    /* Ended while waiting (the daemon stopped): unlist, free the wait. */
    fg_waiter_remove(srv, r);
    if (r->pending.drop) r->pending.drop(r->pending.ctx);
    r->suspended = false;
  }
  if (!r->responded)
    fg_log_msg(FG_LOG_DEBUG, "request_aborted",
               "%s %.200s ended (code %d) "
               "before an answer",
               r->method, r->path, (int)why);
  free(r->body);
  free(r);
  *con_cls = NULL;
  pthread_mutex_lock(&srv->inflight_lock);
  srv->inflight--;
  pthread_cond_broadcast(&srv->inflight_cv);
  pthread_mutex_unlock(&srv->inflight_lock);
}

static void on_mhd_log(void *cls, const char *fmt, va_list ap) {
  char msg[512];
  vsnprintf(msg, sizeof msg, fmt, ap);
  size_t n = strlen(msg);
  while (n > 0 && (msg[n - 1] == '\n' || msg[n - 1] == '\r'))
    msg[--n] = '\0';
  fg_log_msg(FG_LOG_WARN, "http_library", "%s", msg);
}

/* ---- the subcommand ---- */

/* Wait up to `seconds` for the requests in flight; how many are left
 * (logged when `say` and some are). */
static int wait_inflight(fg_server *srv, double seconds, bool say) {
  struct timespec ts;
  fg_clock_abs_deadline(&ts, seconds);
  pthread_mutex_lock(&srv->inflight_lock);
  while (srv->inflight > 0) {
    if (pthread_cond_timedwait(&srv->inflight_cv, &srv->inflight_lock, &ts) ==
        ETIMEDOUT)
      break;
  }
  int left = srv->inflight;
  pthread_mutex_unlock(&srv->inflight_lock);
  if (left > 0 && say)
    fg_log_msg(FG_LOG_WARN, "stopping",
               "%d request(s) still in flight; "
               "closing their connections",
               left);
  return left;
}

int fg_serve_command(int argc, char **argv) {
  fg_server *srv = calloc(1, sizeof *srv);
  if (!srv) {
    fprintf(stderr, "feasgate serve: out of memory\n");
    return 1;
  }
  char err[512];
  int rc = fg_http_config_parse(argc, argv, &srv->cfg, err, sizeof err);
  if (rc != 0) {
    free(srv);
    if (rc > 0) return 0; /* --help */
    fprintf(stderr, "feasgate serve: %s\n", err);
    return 3;
  }
  fg_log_set_level(srv->cfg.log_level);
  char *tls_cert = NULL, *tls_key = NULL;
  if (srv->cfg.tls_cert[0]) {
    if (MHD_is_feature_supported(MHD_FEATURE_TLS) != MHD_YES) {
      fprintf(stderr, "feasgate serve: --tls-cert: this libmicrohttpd was "
                      "built without TLS; serve plain HTTP behind a TLS "
                      "proxy instead\n");
      free(srv);
      return 3;
    }
    tls_cert =
        fg_http_read_pem("--tls-cert", srv->cfg.tls_cert, err, sizeof err);
    if (tls_cert)
      tls_key =
          fg_http_read_pem("--tls-key", srv->cfg.tls_key, err, sizeof err);
    if (!tls_key) {
      fprintf(stderr, "feasgate serve: %s\n", err);
      fg_http_free_pem(tls_cert);
      free(srv);
      return 3;
    }
  }
  fg_metrics_start();
  /* Test builds only (-DFG_FAULTS=ON): arm the faults the environment
   * names, before any worker exists. */
  bool faults = fg_faults_init();
  pthread_mutex_init(&srv->inflight_lock, NULL);
  pthread_cond_init(&srv->inflight_cv, NULL);
  atomic_init(&srv->stopping, false);

  /* Every thread started from here on inherits this mask; the signals
   * are taken by sigwait below. */
  sigset_t stop_signals;
  sigemptyset(&stop_signals);
  sigaddset(&stop_signals, SIGINT);
  sigaddset(&stop_signals, SIGTERM);
  pthread_sigmask(SIG_BLOCK, &stop_signals, NULL);
  signal(SIGPIPE, SIG_IGN);

  int status = 1;
  int listen_fd = -1;
  fg_problem p;
  fg_problem_init(&p);
  char address[INET6_ADDRSTRLEN + 16] = "";

  listen_fd = fg_http_bind_listener(&srv->cfg, address, sizeof address, err,
                                    sizeof err);
  if (listen_fd < 0) {
    fg_log_msg(FG_LOG_ERROR, "start_failed", "%s", err);
    goto cleanup;
  }
  /* the store URL as logs may show it (no password) */
  char store_shown[sizeof srv->cfg.store];
  fg_store_url_display(srv->cfg.store, store_shown, sizeof store_shown);
  if (fg_store_open(srv->cfg.store, &srv->store, &p) != FG_OK) {
    fg_log_msg(FG_LOG_ERROR, "start_failed", "--store %s: %s", store_shown,
               p.detail);
    goto cleanup;
  }
  int interrupted = 0;
  fg_problem_init(&p);
  if (fg_store_mark_interrupted(srv->store, &interrupted, &p) != FG_OK) {
    fg_log_msg(FG_LOG_ERROR, "start_failed", "%s", p.detail);
    goto cleanup;
  }
  fg_problem_init(&p);
  if (fg_keyring_new(srv->store, &srv->keys, &p) != FG_OK) {
    fg_log_msg(FG_LOG_ERROR, "start_failed", "reading the keys: %s", p.detail);
    goto cleanup;
  }
  srv->keys_required =
      !srv->cfg.allow_keyless && !fg_http_bound_to_loopback(listen_fd);
  if (srv->keys_required && fg_keyring_live(srv->keys) == 0) {
    fg_log_msg(FG_LOG_ERROR, "start_refused",
               "--listen %s is not a loopback address and the store %s holds "
               "no live key: add one with `feasgate keys add NAME --role "
               "admin --store %s`, or give --allow-keyless to serve "
               "without keys",
               address, store_shown, store_shown);
    status = 3;
    goto cleanup;
  }
  fg_problem_init(&p);
  if (fg_pool_new(srv->cfg.workers, srv->cfg.chunk, srv->cfg.queue, &srv->pool,
                  &p) != FG_OK) {
    fg_log_msg(FG_LOG_ERROR, "start_failed", "worker pool: %s", p.detail);
    goto cleanup;
  }
  srv->cache = fg_model_cache_new(FG_HTTP_MODEL_CACHE);
  if (!srv->cache) {
    fg_log_msg(FG_LOG_ERROR, "start_failed", "model cache: out of memory");
    goto cleanup;
  }
  fg_problem_init(&p);
  if (fg_registry_new(srv->store, &srv->registry, &p) != FG_OK) {
    fg_log_msg(FG_LOG_ERROR, "start_failed", "%s", p.detail);
    goto cleanup;
  }
  struct MHD_OptionItem tls_opts[] = {
      {MHD_OPTION_HTTPS_MEM_KEY, 0, tls_key},
      {MHD_OPTION_HTTPS_MEM_CERT, 0, tls_cert},
      {MHD_OPTION_END, 0, NULL}};
  struct MHD_OptionItem no_opts[] = {{MHD_OPTION_END, 0, NULL}};
  if (!fg_http_conns_init(srv) || !fg_waiter_start(srv)) {
    fg_log_msg(FG_LOG_ERROR, "start_failed",
               "connection table or waiter thread: out of resources");
    goto cleanup;
  }
  long cores = sysconf(_SC_NPROCESSORS_ONLN);
  unsigned threads = cores < FG_HTTP_THREADS_MIN   ? FG_HTTP_THREADS_MIN
                     : cores > FG_HTTP_THREADS_MAX ? FG_HTTP_THREADS_MAX
                                                   : (unsigned)cores;
  bool epoll = MHD_is_feature_supported(MHD_FEATURE_EPOLL) == MHD_YES;
  srv->daemon = MHD_start_daemon(
      MHD_USE_INTERNAL_POLLING_THREAD | (epoll ? MHD_USE_EPOLL : MHD_USE_POLL) |
          MHD_ALLOW_SUSPEND_RESUME | MHD_USE_ERROR_LOG |
          (tls_key ? MHD_USE_TLS : 0),
      0, NULL, NULL, on_request, srv,
      /* the logger first, so that no message escapes it */
      MHD_OPTION_EXTERNAL_LOGGER, on_mhd_log, srv, MHD_OPTION_LISTEN_SOCKET,
      listen_fd, MHD_OPTION_THREAD_POOL_SIZE, threads,
      MHD_OPTION_NOTIFY_COMPLETED, on_completed, srv,
      MHD_OPTION_NOTIFY_CONNECTION, fg_http_conn_notify, srv,
      MHD_OPTION_UNESCAPE_CALLBACK, fg_http_unescape, srv,
      /* until a request's headers are in; conns.c raises it after */
      MHD_OPTION_CONNECTION_TIMEOUT, (unsigned int)FG_HTTP_HEADER_TIMEOUT_S,
      MHD_OPTION_CONNECTION_LIMIT,
      (unsigned int)(srv->cfg.max_connections + FG_HTTP_CONNECTIONS_OVERFLOW),
      MHD_OPTION_PER_IP_CONNECTION_LIMIT,
      (unsigned int)(srv->cfg.max_connections_per_client +
                     FG_HTTP_CONNECTIONS_OVERFLOW),
      MHD_OPTION_CONNECTION_MEMORY_LIMIT, (size_t)FG_HTTP_CONN_MEMORY,
      MHD_OPTION_ARRAY, tls_key ? tls_opts : no_opts, MHD_OPTION_END);
  if (!srv->daemon) {
    fg_log_msg(FG_LOG_ERROR, "start_failed",
               "the HTTP daemon did not start on %s%s", address,
               tls_key ? " (check that --tls-cert and --tls-key are a PEM "
                         "certificate and its matching private key)"
                       : "");
    goto cleanup;
  }
  listen_fd = -1; /* the daemon owns it until quiesce hands it back */

  cJSON *ev = cJSON_CreateObject();
  if (ev) {
    cJSON_AddStringToObject(ev, "event", "listening");
    cJSON_AddStringToObject(ev, "address", address);
    cJSON_AddStringToObject(ev, "store", store_shown);
    cJSON_AddNumberToObject(ev, "workers", srv->cfg.workers);
    cJSON_AddNumberToObject(ev, "http_threads", threads);
    cJSON_AddStringToObject(ev, "event_loop", epoll ? "epoll" : "poll");
    cJSON_AddBoolToObject(ev, "tls", tls_key != NULL);
    cJSON_AddNumberToObject(ev, "keys", fg_keyring_live(srv->keys));
    cJSON_AddNumberToObject(ev, "pid", (double)getpid());
    /* Written whatever --log-level says: clients wait for this line. */
    fg_log_force(FG_LOG_INFO, ev);
  }
  if (faults) /* after "listening": clients read that line first */
    fg_log_msg(FG_LOG_WARN, "fault_seam",
               "this is a test build with the fault seam compiled in");
  if (interrupted > 0)
    fg_log_msg(FG_LOG_WARN, "interrupted_checks",
               "%d check(s) left running by an earlier process are now "
               "marked interrupted",
               interrupted);

  int sig = 0;
  while (sigwait(&stop_signals, &sig) != 0) {
  }
  fg_log_msg(FG_LOG_INFO, "stopping",
             "signal %d: no new connections; "
             "finishing requests in flight",
             sig);
  atomic_store(&srv->stopping, true);
  MHD_socket lfd = MHD_quiesce_daemon(srv->daemon);
  if (lfd != MHD_INVALID_SOCKET) close(lfd);
  /* Requests in flight get --grace (one waiting for its check is
   * answered when the check ends); then the checks still running are
   * cancelled -- the engine ends each within FG_STUCK_WORKER_S whatever
   * its workers do -- which answers the requests waiting for them. So a
   * stop takes --grace plus a few seconds at most. */
  double t_stop = fg_time_monotonic();
  if (wait_inflight(srv, srv->cfg.grace_s, false) > 0) {
    fg_registry_cancel_all(srv->registry);
    wait_inflight(srv, FG_HTTP_STOP_ANSWER_S, true);
  }
  /* Requests still waiting are answered now (as timed out); the daemon
   * must not stop with a suspended connection. */
  fg_waiter_stop(srv);
  wait_inflight(srv, FG_HTTP_STOP_ANSWER_S, true);
  MHD_stop_daemon(srv->daemon);
  srv->daemon = NULL;
  double grace_left = srv->cfg.grace_s - (fg_time_monotonic() - t_stop);
  fg_registry_shutdown(srv->registry, grace_left > 0 ? grace_left : 0);
  status = 0;

cleanup:
  fg_waiter_stop(srv);
  if (srv->daemon) MHD_stop_daemon(srv->daemon);
  fg_waiter_free(srv);
  fg_http_conns_free(srv);
  if (listen_fd >= 0) close(listen_fd);
  fg_registry_free(srv->registry);
  if (srv->pool) fg_pool_free(srv->pool);
  if (srv->cache) fg_model_cache_free(srv->cache);
  fg_keyring_free(srv->keys);
  fg_store_close(srv->store);
  fg_http_free_pem(tls_key);
  fg_http_free_pem(tls_cert);
  if (status == 0) fg_log_msg(FG_LOG_INFO, "stopped", "clean stop");
  pthread_cond_destroy(&srv->inflight_cv);
  pthread_mutex_destroy(&srv->inflight_lock);
  free(srv);
  /* The stop signals stay blocked: a second SIGTERM arriving now must not
   * turn a clean stop into a killed process. */
  return status;
}
