/*
 * http/metrics.h -- the daemon's counters and the operational documents it
 * serves without a store (prefix fg_metrics_, fg_h_).
 *
 *   GET /metrics          Prometheus text exposition, format 0.0.4
 *   GET /v1/openapi.json  schemas/openapi.json, embedded at build time
 *
 * The counters are process-wide (one daemon per process), like the log
 * threshold (log.c) and the check-id generator (checks.c): every counter
 * starts at zero with the process, and fg_metrics_start() stamps the start
 * time once, on the main thread, before any other thread runs.
 *
 * Hooks (one call each, so other code stays as it is):
 *   server.c  fg_metrics_request() where the request log line is written;
 *   lifecycle.c fg_metrics_check_ended() where a check's end is recorded.
 *
 * Thread use: fg_metrics_request, fg_metrics_check_ended and the handlers
 * from any thread; fg_metrics_start on the main thread at start-up.
 */
#ifndef FG_HTTP_METRICS_H
#define FG_HTTP_METRICS_H

#include "http/http_internal.h"


/* Stamp the process start time (Unix seconds) shown by /metrics. */
void fg_metrics_start(void);

/* One answered request. `route` is the matched template or a fixed
 * pseudo-route such as "(unknown)"; NULL counts as "(none)". The string
 * must outlive the process (the router's literals do). */
void fg_metrics_request(const char *method, const char *route, int status);

/* One check ended: its final status ("done", "cancelled", ...), verdict
 * ("" or NULL when none), samples simulated (NaN or < 0: not known) and
 * duration in seconds (NaN: not known, e.g. never started). */
void fg_metrics_check_ended(const char *status, const char *verdict,
                            double samples, double seconds);

/* The exposition text (malloc'd, NUL-terminated, *len bytes) with the
 * gauges read from `srv`; NULL when out of memory. */
char *fg_metrics_render(fg_server *srv, size_t *len);

void fg_h_metrics(fg_req *r, fg_resp *out);
void fg_h_openapi(fg_req *r, fg_resp *out);

/* The embedded OpenAPI document (generated from schemas/openapi.json by
 * server/http/embed.cmake at build time). */
extern const unsigned char fg_openapi_doc[];
extern const size_t fg_openapi_doc_len;

#endif
