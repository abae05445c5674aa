/*
 * estimate/sizes_json.c -- the sample-size answer as JSON: the body of
 * GET /v1/sample-size and what `feasgate sample-size` prints.
 *
 * Design: estimate/sizes.c chooses the form and computes; this file
 * writes the inputs as given (whole-number inputs as integers), "method"
 * naming the formula, then "samples" (normal forms) or "scenarios" /
 * "epsilon" with the "bound" reached (scenario forms). Without
 * "probability" the half-width form assumes 1/2 and says so
 * ("probability_assumed").
 *
 * Thread use: any thread; no state.
 */
#include "estimate/estimate.h"

#include <cjson/cJSON.h>
#include <stdio.h>
#include <string.h>

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
