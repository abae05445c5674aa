/*
 * http/sizes.c -- GET /v1/sample-size and the body `feasgate sample-size`
 * prints.
 *
 *   ?half_width=0.002&confidence=0.95[&probability=0.9]
 *   ?target=0.9&probability=0.93&confidence=0.95&power=0.9
 *   ?epsilon=0.05&beta=1e-6&decisions=12[&discarded=k]
 *   ?scenarios=N&beta=1e-6&decisions=12[&discarded=k]
 *
 * Design: pure calculation (estimate/sizes.c chooses the form and
 * computes); this file only gathers the parameters and writes the answer:
 * the inputs as given (whole-number inputs as integers), "method" naming
 * the formula, then "samples" (normal forms) or "scenarios" / "epsilon"
 * with the "bound" reached (scenario forms). Without "probability" the
 * half-width form assumes 1/2 and says so ("probability_assumed").
 * Every fault in the query is a 400 problem naming the parameter.
 *
 * Thread use: any thread; no state.
 */
#include "estimate/estimate.h"
#include "http/http_internal.h"

#include <stdio.h>
#include <string.h>

/* Query parameters read at most: more than the calculation can use. */
#define SIZE_QUERY_PARAMS_MAX 32

static void add_whole(cJSON *o, const char *k, double v) {
  char buf[40];
  snprintf(buf, sizeof buf, "%.0f", v);
  cJSON_AddRawToObject(o, k, buf);
}

fg_status fg_sample_size_json(int n, const char *const *names,
                              const char *const *values, cJSON **out,
                              fg_problem *p) {
  *out = NULL;
  fg_size_query q;
  memset(&q, 0, sizeof q);
  for (int i = 0; i < n; i++)
    fg_size_query_set(&q, names[i], values[i], p);
  if (p->status != FG_OK) return p->status;
  fg_size_answer a;
  fg_status st = fg_size_query_solve(&q, &a, p);
  if (st != FG_OK) return st;
  cJSON *o = cJSON_CreateObject();
  if (!o) return fg_problem_set(p, FG_ENOMEM, "out of memory");
  for (int i = 0; i < FG_SZ_NPARAMS; i++) {
    if (!q.given[i]) continue;
    if (i == FG_SZ_DECISIONS || i == FG_SZ_DISCARDED || i == FG_SZ_SCENARIOS)
      add_whole(o, fg_size_param_name(i), q.value[i]);
    else
      cJSON_AddNumberToObject(o, fg_size_param_name(i), q.value[i]);
  }
  if (a.method == FG_SIZE_NORMAL_HALF_WIDTH && !q.given[FG_SZ_PROBABILITY]) {
    cJSON_AddNumberToObject(o, "probability", 0.5);
    cJSON_AddBoolToObject(o, "probability_assumed", true);
  }
  cJSON_AddStringToObject(o, "method", fg_size_method_name(a.method));
  switch (a.method) {
  case FG_SIZE_NORMAL_HALF_WIDTH:
  case FG_SIZE_NORMAL_POWER: add_whole(o, "samples", a.samples); break;
  default:
    if (a.gives_epsilon)
      cJSON_AddNumberToObject(o, "epsilon", a.epsilon);
    else
      add_whole(o, "scenarios", (double)a.scenarios);
    cJSON_AddNumberToObject(o, "bound", a.bound);
    break;
  }
  *out = o;
  return FG_OK;
}

typedef struct size_args {
  int n;
  bool overflow;
  const char *names[SIZE_QUERY_PARAMS_MAX];
  const char *values[SIZE_QUERY_PARAMS_MAX];
} size_args;

static enum MHD_Result collect(void *cls, enum MHD_ValueKind kind,
                               const char *key, const char *value) {
  size_args *a = cls;
  if (a->n >= SIZE_QUERY_PARAMS_MAX) {
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
                   SIZE_QUERY_PARAMS_MAX);
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
