/*
 * http/metrics.c -- counters of the daemon and GET /metrics.
 *
 * What is exposed (Prometheus text exposition format 0.0.4):
 *   feasgate_http_requests_total{method,route,status}   counter
 *   feasgate_http_requests_unlabelled_total             counter (overflow)
 *   feasgate_checks_total{status}                       counter, final status
 *   feasgate_check_verdicts_total{verdict}              counter
 *   feasgate_samples_simulated_total                    counter
 *   feasgate_check_duration_seconds                     histogram
 *   feasgate_queue_depth, feasgate_workers_busy,
 *   feasgate_workers, feasgate_checks_detached,
 *   feasgate_checks_unrecorded, feasgate_store_info      gauges (read live)
 *   feasgate_http_connections, feasgate_http_requests_waiting  gauges
 *   feasgate_http_connections_refused_total             counter (conns.c)
 *   process_start_time_seconds                          gauge
 *
 * Design: one mutex guards every counter. A request takes it once to bump
 * one series (a linear scan of at most FG_METRICS_SERIES_MAX entries keyed
 * by interned pointers: routes are the router's string literals, methods
 * are folded to a fixed table, so the scan compares pointers and ints),
 * which costs nothing next to an HTTP round trip; a scrape copies the
 * table under the lock and formats outside it. Samples are counted when a
 * check ends (the samples it merged, also for a cancelled check), so the
 * counter steps at check ends rather than growing while a check runs.
 *
 * Invariants: counters only grow; histogram buckets are stored per bucket
 * and made cumulative when printed; every label value printed is escaped
 * (backslash, double quote, new line) even though ours never need it.
 *
 * Thread use: any thread (see metrics.h); fg_metrics_start before the
 * daemon's threads start.
 */
#include "http/metrics.h"
#include "core/buf.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

/* Upper bounds (seconds) of the check-duration histogram: 5 ms (a tiny
 * check on a warm cache) to 600 s; longer ones land in +Inf only. */
static const double duration_bounds[] = {0.005, 0.01, 0.025, 0.05, 0.1, 0.25,
                                         0.5,   1,    2.5,   5,    10,  30,
                                         60,    120,  300,   600};
#define NBOUNDS (sizeof duration_bounds / sizeof *duration_bounds)

/* Methods kept as labels; any other is counted as "other", so a client
 * cannot create series by inventing methods. */
static const char *const methods[] = {"GET",    "HEAD",    "POST",  "PUT",
                                      "DELETE", "OPTIONS", "PATCH", "other"};
#define NMETHODS (sizeof methods / sizeof *methods)

/* Final statuses and verdicts of checks: the engine's and store's names
 * (engine.h); an unexpected one is counted as "other". */
static const char *const statuses[] = {"done",   "cancelled",   "timed_out",
                                       "failed", "interrupted", "other"};
#define NSTATUSES (sizeof statuses / sizeof *statuses)
static const char *const verdicts[] = {"pass", "fail", "inconclusive"};
#define NVERDICTS (sizeof verdicts / sizeof *verdicts)

typedef struct series {
  int method; /* index into methods */
  const char *route;
  int status;
  unsigned long long count;
} series;

static pthread_mutex_t lock = PTHREAD_MUTEX_INITIALIZER;
static double start_time_s;
static series table[FG_METRICS_SERIES_MAX];
static int nseries;
static unsigned long long unlabelled;
static unsigned long long checks_by_status[NSTATUSES];
static unsigned long long checks_by_verdict[NVERDICTS];
static unsigned long long samples_total;
static unsigned long long duration_buckets[NBOUNDS + 1]; /* last: +Inf */
static unsigned long long duration_count;
static double duration_sum;

void fg_metrics_start(void) {
  double now = floor(fg_time_wall() * 1000.0) / 1000.0;
  pthread_mutex_lock(&lock);
  start_time_s = now;
  pthread_mutex_unlock(&lock);
}

static int method_index(const char *m) {
  for (size_t i = 0; i + 1 < NMETHODS; i++)
    if (m && strcmp(methods[i], m) == 0) return (int)i;
  return (int)NMETHODS - 1;
}

static int name_index(const char *const *names, size_t n, const char *s) {
  for (size_t i = 0; i < n; i++)
    if (s && strcmp(names[i], s) == 0) return (int)i;
  return -1;
}

void fg_metrics_request(const char *method, const char *route, int status) {
  int mi = method_index(method);
  if (!route) route = "(none)";
  pthread_mutex_lock(&lock);
  int i = 0;
  for (; i < nseries; i++) {
    const series *s = &table[i];
    if (s->method == mi && s->status == status &&
        (s->route == route || strcmp(s->route, route) == 0))
      break;
  }
  if (i < nseries) {
    table[i].count++;
  } else if (nseries < FG_METRICS_SERIES_MAX) {
    table[nseries++] =
        (series){.method = mi, .route = route, .status = status, .count = 1};
  } else {
    unlabelled++;
  }
  pthread_mutex_unlock(&lock);
}

void fg_metrics_check_ended(const char *status, const char *verdict,
                            double samples, double seconds) {
  int si = name_index(statuses, NSTATUSES, status);
  if (si < 0) si = (int)NSTATUSES - 1;
  int vi =
      verdict && verdict[0] ? name_index(verdicts, NVERDICTS, verdict) : -1;
  pthread_mutex_lock(&lock);
  checks_by_status[si]++;
  if (vi >= 0) checks_by_verdict[vi]++;
  if (isfinite(samples) && samples > 0)
    samples_total += (unsigned long long)samples;
  if (isfinite(seconds) && seconds >= 0) {
    size_t b = 0;
    while (b < NBOUNDS && seconds > duration_bounds[b])
      b++;
    duration_buckets[b]++;
    duration_count++;
    duration_sum += seconds;
  }
  pthread_mutex_unlock(&lock);
}

/* ---- rendering ---- */

typedef struct text {
  char *s;
  size_t len, cap;
  bool failed;
} text;

static void put(text *t, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));

static void put(text *t, const char *fmt, ...) {
  if (t->failed) return;
  for (;;) {
    va_list ap;
    va_start(ap, fmt);
    size_t room = t->cap - t->len;
    int n = vsnprintf(t->s ? t->s + t->len : NULL, t->s ? room : 0, fmt, ap);
    va_end(ap);
    if (n < 0) {
      t->failed = true;
      return;
    }
    if (t->s && (size_t)n < room) {
      t->len += (size_t)n;
      return;
    }
    if (!fg_buf_grow(&t->s, &t->cap, t->len + (size_t)n + 1, 4096, 0)) {
      t->failed = true;
      return;
    }
  }
}

/* A label value with \, " and new line escaped as the format requires. */
static void put_label(text *t, const char *v) {
  for (const char *c = v; *c; c++) {
    if (*c == '\\')
      put(t, "\\\\");
    else if (*c == '"')
      put(t, "\\\"");
    else if (*c == '\n')
      put(t, "\\n");
    else
      put(t, "%c", *c);
  }
}

static void head(text *t, const char *name, const char *type,
                 const char *help) {
  put(t, "# HELP %s %s\n# TYPE %s %s\n", name, help, name, type);
}

/* A float as the format reads it: integers without a fraction, others in
 * the shortest of 15 or 17 significant digits that reads back exactly. */
static void put_number(text *t, double v) {
  char buf[40];
  if (isinf(v)) {
    put(t, v > 0 ? "+Inf" : "-Inf");
    return;
  }
  if (v == floor(v) && fabs(v) < 1e15) {
    put(t, "%.0f", v);
    return;
  }
  snprintf(buf, sizeof buf, "%.15g", v);
  if (strtod(buf, NULL) != v) snprintf(buf, sizeof buf, "%.17g", v);
  put(t, "%s", buf);
}

static int by_route(const void *a, const void *b) {
  const series *x = a, *y = b;
  int c = strcmp(x->route, y->route);
  if (c) return c;
  if (x->method != y->method) return x->method - y->method;
  return x->status - y->status;
}

char *fg_metrics_render(fg_server *srv, size_t *len) {
  /* Copy under the lock, format outside it. */
  series *copy = malloc(sizeof table);
  if (!copy) return NULL;
  unsigned long long by_status[NSTATUSES], by_verdict[NVERDICTS];
  unsigned long long buckets[NBOUNDS + 1];
  pthread_mutex_lock(&lock);
  int n = nseries;
  memcpy(copy, table, (size_t)n * sizeof *table);
  unsigned long long over = unlabelled, samples = samples_total;
  unsigned long long dcount = duration_count;
  double dsum = duration_sum, started = start_time_s;
  memcpy(by_status, checks_by_status, sizeof by_status);
  memcpy(by_verdict, checks_by_verdict, sizeof by_verdict);
  memcpy(buckets, duration_buckets, sizeof buckets);
  pthread_mutex_unlock(&lock);
  qsort(copy, (size_t)n, sizeof *copy, by_route);

  text t = {0};
  head(&t, "feasgate_http_requests_total", "counter",
       "HTTP requests answered, by method, route template and status.");
  for (int i = 0; i < n; i++) {
    put(&t, "feasgate_http_requests_total{method=\"%s\",route=\"",
        methods[copy[i].method]);
    put_label(&t, copy[i].route);
    put(&t, "\",status=\"%d\"} %llu\n", copy[i].status, copy[i].count);
  }
  free(copy);
  head(&t, "feasgate_http_requests_unlabelled_total", "counter",
       "HTTP requests answered beyond the series limit of "
       "feasgate_http_requests_total.");
  put(&t, "feasgate_http_requests_unlabelled_total %llu\n", over);

  head(&t, "feasgate_checks_total", "counter",
       "Checks ended, by final status.");
  for (size_t i = 0; i < NSTATUSES; i++)
    put(&t, "feasgate_checks_total{status=\"%s\"} %llu\n", statuses[i],
        by_status[i]);
  head(&t, "feasgate_check_verdicts_total", "counter",
       "Checks ended with a verdict, by verdict.");
  for (size_t i = 0; i < NVERDICTS; i++)
    put(&t, "feasgate_check_verdicts_total{verdict=\"%s\"} %llu\n", verdicts[i],
        by_verdict[i]);
  head(&t, "feasgate_samples_simulated_total", "counter",
       "Samples simulated by checks that have ended.");
  put(&t, "feasgate_samples_simulated_total %llu\n", samples);

  head(&t, "feasgate_check_duration_seconds", "histogram",
       "Time from a check's start on the pool to its end.");
  unsigned long long cum = 0;
  for (size_t b = 0; b <= NBOUNDS; b++) {
    cum += buckets[b];
    put(&t, "feasgate_check_duration_seconds_bucket{le=\"");
    put_number(&t, b < NBOUNDS ? duration_bounds[b] : INFINITY);
    put(&t, "\"} %llu\n", cum);
  }
  put(&t, "feasgate_check_duration_seconds_sum ");
  put_number(&t, dsum);
  put(&t, "\nfeasgate_check_duration_seconds_count %llu\n", dcount);

  head(&t, "feasgate_queue_depth", "gauge",
       "Checks on the worker pool (waiting or running), as the queue limit "
       "counts them.");
  put(&t, "feasgate_queue_depth %d\n", fg_pool_queued(srv->pool));
  head(&t, "feasgate_workers_busy", "gauge", "Workers running a chunk now.");
  put(&t, "feasgate_workers_busy %d\n", fg_pool_busy(srv->pool));
  head(&t, "feasgate_workers", "gauge", "Workers of the pool.");
  put(&t, "feasgate_workers %d\n", fg_pool_workers(srv->pool));
  head(&t, "feasgate_checks_detached", "gauge",
       "Checks still running after their request was answered (202).");
  put(&t, "feasgate_checks_detached %d\n", fg_registry_count(srv->registry));
  head(&t, "feasgate_checks_unrecorded", "gauge",
       "Ended checks whose end the store has not taken yet (written again "
       "every second).");
  put(&t, "feasgate_checks_unrecorded %d\n",
      fg_registry_unsaved(srv->registry));
  head(&t, "feasgate_http_connections", "gauge",
       "Client connections open now.");
  put(&t, "feasgate_http_connections %d\n", fg_http_conns_open(srv));
  head(&t, "feasgate_http_connections_refused_total", "counter",
       "Connections answered 503 for being beyond --max-connections or "
       "--max-connections-per-client.");
  put(&t, "feasgate_http_connections_refused_total %llu\n",
      (unsigned long long)atomic_load(&srv->conns_refused));
  head(&t, "feasgate_http_requests_waiting", "gauge",
       "Requests suspended while they wait for a check (no thread held).");
  put(&t, "feasgate_http_requests_waiting %d\n", fg_waiter_count(srv));
  head(&t, "feasgate_store_info", "gauge",
       "The store backend this daemon uses (value always 1).");
  put(&t, "feasgate_store_info{backend=\"%s\"} 1\n",
      fg_store_scheme(srv->store));
  head(&t, "process_start_time_seconds", "gauge",
       "Start time of the process since the Unix epoch in seconds.");
  put(&t, "process_start_time_seconds ");
  put_number(&t, started);
  put(&t, "\n");

  if (t.failed) {
    free(t.s);
    return NULL;
  }
  *len = t.len;
  return t.s;
}

/* ---- handlers ---- */

#define FG_CT_METRICS "text/plain; version=0.0.4; charset=utf-8"

void fg_h_metrics(fg_req *r, fg_resp *out) {
  size_t len = 0;
  char *body = fg_metrics_render(r->srv, &len);
  if (!body) {
    fg_resp_error(out, 503, FG_ENOMEM, "out of memory rendering the metrics");
    return;
  }
  out->status = 200;
  out->body = body;
  out->len = len;
  out->content_type = FG_CT_METRICS;
}

void fg_h_openapi(fg_req *r, fg_resp *out) {
  (void)r;
  fg_resp_embedded(out, fg_openapi_doc, fg_openapi_doc_len, FG_CT_JSON);
}
