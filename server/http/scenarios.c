/*
 * http/scenarios.c -- a model's scenarios over HTTP.
 *
 *   GET /v1/models/{name}/scenarios?count=200&seed=7&start=0&stream=design
 *
 * Answers the JSON body {"columns", "rows", "seed", "stream", "start"}, or
 * RFC 4180 CSV with a header row when the client's Accept header prefers
 * text/csv. The text comes from engine/scenarios.c, the same writer as
 * `feasgate scenarios`, so the daemon and the offline command print the
 * same bytes for the same model, seed, stream and range.
 *
 * The body is streamed (chunked transfer coding): the handler checks the
 * parameters, the model and the size, opens a scenarios stream (which
 * allocates all it needs), and libmicrohttpd pulls rows from it as the
 * connection drains, so a request holds FG_SCENARIO_STREAM_BYTES of
 * draws plus a window of text, whatever its count. Every 4xx comes before
 * the first byte; running out of memory after it (the stream allocates
 * nothing more, so this does not happen) would close the connection.
 *
 * Parameters: count (1 .. --max-scenarios, above it a 400 naming the limit
 * max_scenarios; FG_SCENARIOS_COUNT_DEFAULT or the cap when absent), seed (0 .. 2^53-1; drawn and echoed when
 * absent), start (default 0; start + count <= 2^53), stream (design, the
 * default, or validation). An unknown, repeated-but-empty or malformed
 * parameter is a 400 naming it. The model must exist (404) and not be
 * retired (410). One response holds at most FG_SCENARIO_CELLS_MAX values
 * (scenario_cells).
 *
 * Thread use: handlers on libmicrohttpd's threads; drawing happens on the
 * connection's thread as libmicrohttpd asks for more of the body (it is bounded by the caps above and does no
 * simulation of constraints, so it does not go through the worker pool).
 */
#include "http/http_internal.h"

#include <ctype.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#define FG_CT_CSV "text/csv; charset=utf-8; header=present"

typedef struct scen_query {
  const char *count, *seed, *start, *stream;
} scen_query;

/* A plain decimal whole number (digits only) up to `max`. */
static bool parse_whole(const char *s, uint64_t max, uint64_t *out) {
  if (!s || !*s) return false;
  for (const char *t = s; *t; t++)
    if (!isdigit((unsigned char)*t)) return false;
  errno = 0;
  char *end = NULL;
  unsigned long long v = strtoull(s, &end, 10);
  if (errno || *end || v > max) return false;
  *out = v;
  return true;
}

/* libmicrohttpd's pull of the body: rows are drawn and printed as the
 * connection takes them. */
static ssize_t read_stream(void *cls, uint64_t pos, char *buf, size_t max) {
  fg_scenarios_stream *s = cls;
  size_t n = fg_scenarios_read(s, buf, max);
  if (fg_scenarios_failed(s)) {
    fg_log_msg(FG_LOG_ERROR, "scenarios_aborted",
               "out of memory after %llu bytes of a scenarios answer; "
               "connection closed",
               (unsigned long long)pos);
    return MHD_CONTENT_READER_END_WITH_ERROR;
  }
  return n > 0 ? (ssize_t)n : MHD_CONTENT_READER_END_OF_STREAM;
}

static void free_stream(void *cls) { fg_scenarios_close(cls); }

void fg_h_model_scenarios(fg_req *r, fg_resp *out) {
  fg_server *srv = r->srv;
  scen_query q;
  static const char *const names[] = {"count", "seed", "start", "stream"};
  const char **const slots[] = {&q.count, &q.seed, &q.start, &q.stream};
  if (!fg_http_query_args(r, names, slots, 4, out)) return;
  fg_scenarios_params sp = {0};
  char msg[FG_MESSAGE_MAX];
  uint64_t max = srv->cfg.limits.max_scenarios;
  if (!q.count) {
    sp.count = max < FG_SCENARIOS_COUNT_DEFAULT ? max
                                                : FG_SCENARIOS_COUNT_DEFAULT;
  } else if (!parse_whole(q.count, FG_SEED_MAX, &sp.count) || sp.count == 0) {
    snprintf(msg, sizeof msg,
             "expected a whole number from 1 to %llu, found '%.32s'",
             (unsigned long long)max, q.count);
    fg_resp_bad_param(out, "count", "%s", msg);
    return;
  }
  if (sp.count > max) {
    fg_problem p;
    fg_problem_init(&p);
    fg_problem_set(&p, FG_ELIMIT,
                   "query parameter 'count': %llu scenarios exceed "
                   "max_scenarios = %llu",
                   (unsigned long long)sp.count, (unsigned long long)max);
    p.limit_name = fg_limit_name(FG_LIMIT_MAX_SCENARIOS);
    p.limit_value = (double)max;
    fg_resp_problem(out, &p, 400);
    return;
  }
  if (q.seed) {
    if (!parse_whole(q.seed, FG_SEED_MAX, &sp.seed)) {
      snprintf(msg, sizeof msg,
               "expected a whole number from 0 to %llu, found '%.32s'",
               (unsigned long long)FG_SEED_MAX, q.seed);
      fg_resp_bad_param(out, "seed", "%s", msg);
      return;
    }
  } else {
    sp.seed = fg_seed_draw();
  }
  if (q.start) {
    if (!parse_whole(q.start, FG_SEED_MAX, &sp.start) ||
        sp.count > FG_SEED_MAX + 1 - sp.start) {
      snprintf(msg, sizeof msg,
               "expected a whole number from 0 with start + count at most "
               "2^53, found '%.32s'",
               q.start);
      fg_resp_bad_param(out, "start", "%s", msg);
      return;
    }
  }
  if (q.stream) {
    if (strcmp(q.stream, "design") == 0) {
      sp.validation = false;
    } else if (strcmp(q.stream, "validation") == 0) {
      sp.validation = true;
    } else {
      snprintf(msg, sizeof msg,
               "expected design or validation, found '%.32s'", q.stream);
      fg_resp_bad_param(out, "stream", "%s", msg);
      return;
    }
  }
  sp.csv = fg_http_accept_prefers(
      MHD_lookup_connection_value(r->conn, MHD_HEADER_KIND, "Accept"),
      "text/csv");

  fg_problem p;
  fg_problem_init(&p);
  fg_store_version v;
  fg_model *m = NULL;
  if (fg_http_load_model(srv, r->params[0], 0, &v, &m, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    return;
  }
  if (v.retired) {
    fg_resp_error(out, 410, FG_EGONE,
                  "model '%s' is retired; register it again to draw its "
                  "scenarios",
                  v.name);
  } else {
    fg_scenarios_stream *stream = NULL;
    if (fg_scenarios_size_check(m, sp.count, &p) != FG_OK ||
        fg_scenarios_open(m, &sp, &stream, &p) != FG_OK) {
      fg_resp_problem(out, &p, 0);
    } else {
      out->status = 200;
      out->content_type = sp.csv ? FG_CT_CSV : FG_CT_JSON;
      out->reader = read_stream;
      out->reader_ctx = stream;
      out->reader_free = free_stream;
    }
  }
  fg_store_version_clear(&v);
  fg_model_unref(m);
}
