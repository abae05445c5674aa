/*
 * http/sizes.c -- GET /v1/sample-size.
 *
 *   ?half_width=0.002&confidence=0.95[&probability=0.9]
 *   ?target=0.9&probability=0.93&confidence=0.95&power=0.9
 *   ?epsilon=0.05&beta=1e-6&decisions=12[&discarded=k]
 *   ?scenarios=N&beta=1e-6&decisions=12[&discarded=k]
 *
 * Design: pure calculation (estimate/sizes.c chooses the form and
 * computes, estimate/sizes_json.c writes the answer, the same body
 * `feasgate sample-size` prints); this file only gathers the query's
 * parameters. Every fault in the query is a 400 problem naming the
 * parameter.
 *
 * Thread use: any thread; no state.
 */
#include "estimate/estimate.h"
#include "http/http_internal.h"

#include <stdio.h>
#include <string.h>

typedef struct size_args {
  int n;
  bool overflow;
  const char *names[FG_HTTP_SIZE_QUERY_PARAMS_MAX];
  const char *values[FG_HTTP_SIZE_QUERY_PARAMS_MAX];
} size_args;

static enum MHD_Result collect(void *cls, enum MHD_ValueKind kind,
                               const char *key, const char *value) {
  size_args *a = cls;
  if (a->n >= FG_HTTP_SIZE_QUERY_PARAMS_MAX) {
    a->overflow = true;
    return MHD_YES;
  }
  a->names[a->n] = key ? key : "";
  a->values[a->n] = value ? value : "";
  a->n++;
  return MHD_YES;
}

void fg_h_sample_size(fg_req *r, fg_resp *out) {
  size_args a;
  memset(&a, 0, sizeof a);
  MHD_get_connection_values(r->conn, MHD_GET_ARGUMENT_KIND, collect, &a);
  fg_problem p;
  fg_problem_init(&p);
  if (a.overflow) {
    fg_problem_set(&p, FG_EINVAL,
                   "more than %d query parameters; the calculation uses at "
                   "most 4",
                   FG_HTTP_SIZE_QUERY_PARAMS_MAX);
    fg_resp_problem(out, &p, 400);
    return;
  }
  cJSON *body = NULL;
  if (fg_sample_size_json(a.n, a.names, a.values, &body, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    return;
  }
  fg_resp_json(out, 200, body);
}
