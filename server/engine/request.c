/*
 * engine/request.c -- validating a check request body against a model.
 *
 * Design: every member is checked in one pass and every fault is recorded
 * with its JSON Pointer, so a client sees all its mistakes at once: unknown
 * members, wrong types, out-of-range numbers, and in "decision" each
 * missing, extra, mis-sized or non-finite entry by name. Caps (samples,
 * in-sample count, wait) are limits and named as such.
 *
 * Thread use: pure; any thread.
 */
#include "engine/engine_internal.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

void fg_request_limits_default(fg_request_limits *l) {
  l->max_samples = FG_MAX_SAMPLES_DEFAULT;
  l->max_scenarios = FG_MAX_SCENARIOS_DEFAULT;
  l->max_wait_s = 60.0;
}

static const char *const known_members[] = {
    "decision", "samples",     "seed",          "target",
    "confidence", "interval",  "stop_early",    "sampling",
    "expect_digest", "in_sample", "label",      "wait_s",
    "failing_scenarios_count", "explain", "exact"};

static bool is_known(const char *name) {
  for (size_t i = 0; i < sizeof known_members / sizeof *known_members; i++)
    if (strcmp(known_members[i], name) == 0) return true;
  return false;
}

/* A JSON number that is a whole number in [lo, hi]. */
static bool get_whole(const cJSON *v, double lo, double hi, uint64_t *out) {
  if (!cJSON_IsNumber(v)) return false;
  double d = v->valuedouble;
  if (!isfinite(d) || d != floor(d) || d < lo || d > hi) return false;
  *out = (uint64_t)d;
  return true;
}

static void parse_decision(const fg_model *m, const cJSON *dec,
                           fg_check_request *out, fg_problem *p) {
  char ptr[FG_POINTER_MAX];
  if (!cJSON_IsObject(dec)) {
    fg_problem_add(p, FG_EINVAL, "/decision", 0,
                   "expected an object mapping each decision name to its "
                   "value, found %s",
                   cJSON_IsArray(dec) ? "an array" : "another type");
    return;
  }
  for (const cJSON *it = dec->child; it; it = it->next) {
    bool declared = false;
    for (int d = 0; d < m->ndecisions; d++)
      if (strcmp(m->decisions[d].name, it->string) == 0) declared = true;
    if (!declared) {
      fg_pointer_join(ptr, sizeof ptr, "/decision", it->string);
      fg_problem_add(p, FG_EINVAL, ptr, 0,
                     "'%s' is not a decision of model '%s'", it->string,
                     m->name);
    }
  }
  for (int d = 0; d < m->ndecisions; d++) {
    const fg_decision *dd = &m->decisions[d];
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(dec, dd->name);
    fg_pointer_join(ptr, sizeof ptr, "/decision", dd->name);
    if (!v) {
      fg_problem_add(p, FG_EINVAL, ptr, 0, "decision '%s' is missing",
                     dd->name);
      continue;
    }
    if (dd->size == 0) {
      if (!cJSON_IsNumber(v)) {
        fg_problem_add(p, FG_EINVAL, ptr, 0,
                       "decision '%s' is a scalar: expected a number", dd->name);
        continue;
      }
      if (!isfinite(v->valuedouble)) {
        fg_problem_add(p, FG_EINVAL, ptr, 0,
                       "decision '%s' must be a finite number", dd->name);
        continue;
      }
      out->decision[dd->offset] = v->valuedouble;
      continue;
    }
    if (!cJSON_IsArray(v)) {
      fg_problem_add(p, FG_EINVAL, ptr, 0,
                     "decision '%s' has size %d: expected an array of %d "
                     "numbers",
                     dd->name, dd->size, dd->size);
      continue;
    }
    int n = cJSON_GetArraySize(v);
    if (n != dd->size) {
      fg_problem_add(p, FG_EINVAL, ptr, 0,
                     "decision '%s' has size %d, found an array of %d",
                     dd->name, dd->size, n);
      continue;
    }
    int i = 0;
    for (const cJSON *e = v->child; e; e = e->next, i++) {
      if (!cJSON_IsNumber(e) || !isfinite(e->valuedouble)) {
        char eptr[FG_POINTER_MAX];
        fg_pointer_index(eptr, sizeof eptr, ptr, i);
        fg_problem_add(p, FG_EINVAL, eptr, 0,
                       "element %d of decision '%s' must be a finite number",
                       i, dd->name);
        continue;
      }
      out->decision[dd->offset + i] = e->valuedouble;
    }
  }
}

static bool parse_probability(const cJSON *v, const char *ptr, const char *what,
                              double *out, fg_problem *p) {
  if (!cJSON_IsNumber(v) || !(v->valuedouble > 0 && v->valuedouble < 1)) {
    fg_problem_add(p, FG_EINVAL, ptr, 0,
                   "%s must be a number strictly between 0 and 1", what);
    return false;
  }
  *out = v->valuedouble;
  return true;
}

fg_status fg_request_parse(const fg_model *m, const cJSON *body,
                           const fg_request_limits *lim, fg_check_request *out,
                           fg_problem *p) {
  memset(out, 0, sizeof *out);
  out->samples = FG_SAMPLES_DEFAULT;
  out->target = m->target_probability;
  out->confidence = m->target_confidence;
  out->interval = FG_INTERVAL_CLOPPER_PEARSON;
  out->sampling = FG_SAMPLING_MONTE_CARLO;
  out->wait_s = 20.0;
  if (out->wait_s > lim->max_wait_s) out->wait_s = lim->max_wait_s;
  out->decision_dims = m->decision_dims;
  out->decision = calloc(m->decision_dims > 0 ? (size_t)m->decision_dims : 1,
                         sizeof(double));
  if (!out->decision)
    return fg_problem_set(p, FG_ENOMEM, "out of memory reading the request");

  if (!cJSON_IsObject(body)) {
    fg_problem_add(p, FG_EINVAL, "", 0,
                   "a check request must be a JSON object");
    goto fail;
  }
  int before = p->nitems;
  for (const cJSON *it = body->child; it; it = it->next) {
    if (!is_known(it->string))
      fg_problem_unknown_member(p, it->string,
                                "decision, samples, seed, target, "
                                "confidence, interval, stop_early, sampling, "
                                "expect_digest, in_sample, label, wait_s, "
                                "failing_scenarios_count, explain, exact");
  }
  const cJSON *v;
  v = cJSON_GetObjectItemCaseSensitive(body, "decision");
  if (!v) fg_problem_add(p, FG_EINVAL, "/decision", 0, "'decision' is required");
  else parse_decision(m, v, out, p);

  if ((v = cJSON_GetObjectItemCaseSensitive(body, "samples"))) {
    uint64_t n;
    if (!get_whole(v, 1, 1e300, &n))
      fg_problem_add(p, FG_EINVAL, "/samples", 0,
                     "samples must be a whole number of at least 1");
    else if (n > lim->max_samples)
      fg_problem_limit(
          p, "/samples", FG_LIMIT_MAX_SAMPLES, (double)lim->max_samples,
          "samples %llu exceeds this server's limit %s = %llu",
          (unsigned long long)n, fg_limit_name(FG_LIMIT_MAX_SAMPLES),
          (unsigned long long)lim->max_samples);
    else out->samples = n;
  }
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "seed"))) {
    if (!get_whole(v, 0, (double)FG_SEED_MAX, &out->seed))
      fg_problem_add(p, FG_EINVAL, "/seed", 0,
                     "seed must be a whole number from 0 to 2^53 - 1");
    else out->seed_given = true;
  }
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "target")))
    parse_probability(v, "/target", "target", &out->target, p);
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "confidence")))
    parse_probability(v, "/confidence", "confidence", &out->confidence, p);
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "interval"))) {
    const char *s = cJSON_GetStringValue(v);
    if (s && strcmp(s, "clopper_pearson") == 0)
      out->interval = FG_INTERVAL_CLOPPER_PEARSON;
    else if (s && strcmp(s, "wilson") == 0) out->interval = FG_INTERVAL_WILSON;
    else if (s && strcmp(s, "jeffreys") == 0)
      out->interval = FG_INTERVAL_JEFFREYS;
    else
      fg_problem_add(p, FG_EINVAL, "/interval", 0,
                     "interval must be one of clopper_pearson, wilson, "
                     "jeffreys");
  }
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "sampling"))) {
    const char *s = cJSON_GetStringValue(v);
    static const char *const names[] = {"monte_carlo", "antithetic",
                                        "latin_hypercube", "sobol"};
    int found = -1;
    for (int i = 0; s && i < 4; i++)
      if (strcmp(s, names[i]) == 0) found = i;
    if (found < 0)
      fg_problem_add(p, FG_EINVAL, "/sampling", 0,
                     "sampling must be one of monte_carlo, antithetic, "
                     "latin_hypercube, sobol");
    else {
      out->sampling = (fg_sampling)found;
      fg_sampler_design_check(m->sampler, (fg_design)found, p);
    }
  }
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "exact"))) {
    const char *s = cJSON_GetStringValue(v);
    if (s && strcmp(s, "auto") == 0) out->exact = FG_EXACT_AUTO;
    else if (s && strcmp(s, "off") == 0) out->exact = FG_EXACT_OFF;
    else if (s && strcmp(s, "only") == 0) out->exact = FG_EXACT_ONLY;
    else
      fg_problem_add(p, FG_EINVAL, "/exact", 0,
                     "exact must be one of auto, off, only");
  }
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "stop_early"))) {
    if (!cJSON_IsBool(v))
      fg_problem_add(p, FG_EINVAL, "/stop_early", 0,
                     "stop_early must be true or false");
    else out->stop_early = cJSON_IsTrue(v);
  }
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "expect_digest"))) {
    const char *s = cJSON_GetStringValue(v);
    /* A malformed digest can match no version: a 400, not a 409. */
    bool form = s && strlen(s) == 71 && strncmp(s, "sha256:", 7) == 0 &&
                strspn(s + 7, "0123456789abcdef") == 64;
    if (!form)
      fg_problem_add(p, FG_EINVAL, "/expect_digest", 0,
                     "expect_digest must be a string \"sha256:<64 lower-case "
                     "hex digits>\"");
    else snprintf(out->expect_digest, sizeof out->expect_digest, "%s", s);
  }
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "in_sample"))) {
    const cJSON *sd = cJSON_GetObjectItemCaseSensitive(v, "seed");
    const cJSON *ct = cJSON_GetObjectItemCaseSensitive(v, "count");
    if (!cJSON_IsObject(v) || !sd || !ct)
      fg_problem_add(p, FG_EINVAL, "/in_sample", 0,
                     "in_sample must be an object {\"seed\", \"count\"}");
    else {
      for (const cJSON *it = v->child; it; it = it->next)
        if (strcmp(it->string, "seed") && strcmp(it->string, "count")) {
          char ptr[FG_POINTER_MAX];
          fg_pointer_join(ptr, sizeof ptr, "/in_sample", it->string);
          fg_problem_add(p, FG_EINVAL, ptr, 0,
                         "unknown member '%s' (known: seed, count)",
                         it->string);
        }
      if (!get_whole(sd, 0, (double)FG_SEED_MAX, &out->in_sample_seed))
        fg_problem_add(p, FG_EINVAL, "/in_sample/seed", 0,
                       "seed must be a whole number from 0 to 2^53 - 1");
      uint64_t n = 0;
      if (!get_whole(ct, 1, 1e300, &n))
        fg_problem_add(p, FG_EINVAL, "/in_sample/count", 0,
                       "count must be a whole number of at least 1");
      else if (n > lim->max_scenarios)
        fg_problem_limit(p, "/in_sample/count", FG_LIMIT_MAX_SCENARIOS,
                         (double)lim->max_scenarios,
                         "in_sample count %llu exceeds max_scenarios = %llu",
                         (unsigned long long)n,
                         (unsigned long long)lim->max_scenarios);
      else {
        out->in_sample_count = n;
        out->has_in_sample = true;
      }
    }
  }
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "label"))) {
    const char *s = cJSON_GetStringValue(v);
    if (!s)
      fg_problem_add(p, FG_EINVAL, "/label", 0, "label must be a string");
    else if (strlen(s) > FG_LABEL_MAX)
      fg_problem_limit(p, "/label", FG_LIMIT_LABEL_LENGTH, FG_LABEL_MAX,
                       "label is %zu bytes, longer than label_length = %d",
                       strlen(s), FG_LABEL_MAX);
    else snprintf(out->label, sizeof out->label, "%s", s);
  }
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "failing_scenarios_count"))) {
    uint64_t k = 0;
    if (!get_whole(v, 1, 1e18, &k))
      fg_problem_add(p, FG_EINVAL, "/failing_scenarios_count", 0,
                     "failing_scenarios_count must be a whole number from 1 "
                     "to %d",
                     FG_FAILING_SCENARIOS_MAX);
    else if (k > FG_FAILING_SCENARIOS_MAX)
      fg_problem_limit(p, "/failing_scenarios_count",
                       FG_LIMIT_FAILING_SCENARIOS_COUNT,
                       FG_FAILING_SCENARIOS_MAX,
                       "failing_scenarios_count %llu exceeds "
                       "failing_scenarios_count = %d",
                       (unsigned long long)k, FG_FAILING_SCENARIOS_MAX);
    else out->failing_count = (int)k;
  }
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "explain"))) {
    if (!cJSON_IsBool(v)) {
      fg_problem_add(p, FG_EINVAL, "/explain", 0,
                     "explain must be true or false");
    } else if (cJSON_IsTrue(v)) {
      fg_program_info in;
      fg_program_get_info(m->program, &in);
      double cells = (double)(in.nrows + 1) * (double)in.nuncertain;
      if (cells > (double)FG_EXPLAIN_CELLS_MAX)
        fg_problem_limit(p, "/explain", FG_LIMIT_EXPLAIN_CELLS,
                         (double)FG_EXPLAIN_CELLS_MAX,
                         "explain needs (rows + 1) x uncertain components = "
                         "%d x %d = %.0f accumulators, more than "
                         "explain_cells = %d",
                         in.nrows + 1, in.nuncertain, cells,
                         FG_EXPLAIN_CELLS_MAX);
      else
        out->explain = true;
    }
  }
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "wait_s"))) {
    if (!cJSON_IsNumber(v) || !(v->valuedouble >= 0) ||
        !isfinite(v->valuedouble))
      fg_problem_add(p, FG_EINVAL, "/wait_s", 0,
                     "wait_s must be a number of seconds, 0 or more");
    else if (v->valuedouble > lim->max_wait_s)
      fg_problem_limit(p, "/wait_s", FG_LIMIT_MAX_WAIT, lim->max_wait_s,
                       "wait_s %g exceeds this server's limit %s = %g",
                       v->valuedouble, fg_limit_name(FG_LIMIT_MAX_WAIT),
                       lim->max_wait_s);
    else out->wait_s = v->valuedouble;
  }
  if (out->stop_early && out->sampling != FG_SAMPLING_MONTE_CARLO)
    fg_problem_add(p, FG_EINVAL, "/stop_early", 0,
                   "stop_early works with sampling monte_carlo only (its "
                   "confidence sequence needs independent samples)");
  if (out->sampling == FG_SAMPLING_LATIN_HYPERCUBE ||
      out->sampling == FG_SAMPLING_SOBOL) {
    if (out->samples < 2 * FG_DESIGN_REPLICATES)
      fg_problem_add(p, FG_EINVAL, "/samples", 0,
                     "sampling %s runs %d replicates: samples must be at "
                     "least %d",
                     fg_sampling_name(out->sampling), FG_DESIGN_REPLICATES,
                     2 * FG_DESIGN_REPLICATES);
  } else if (out->sampling == FG_SAMPLING_ANTITHETIC && out->samples < 4) {
    fg_problem_add(p, FG_EINVAL, "/samples", 0,
                   "sampling antithetic draws pairs: samples must be at "
                   "least 4");
  }
  if (p->nitems > before || p->status != FG_OK) goto fail;
  /* last, on an otherwise valid request: it runs the setup stream */
  if (out->exact == FG_EXACT_ONLY &&
      fg_exact_request_check(m, out, p) != FG_OK)
    goto fail;
  return FG_OK;
fail:
  fg_request_free(out);
  return p->status != FG_OK ? p->status : FG_EINVAL;
}

void fg_request_free(fg_check_request *r) {
  free(r->decision);
  r->decision = NULL;
}

cJSON *fg_request_json(const fg_model *m, const fg_check_request *r) {
  cJSON *o = cJSON_CreateObject();
  if (!o) return NULL;
  cJSON *dec = cJSON_AddObjectToObject(o, "decision");
  for (int d = 0; d < m->ndecisions && dec; d++) {
    const fg_decision *dd = &m->decisions[d];
    if (dd->size == 0) {
      cJSON_AddNumberToObject(dec, dd->name, r->decision[dd->offset]);
    } else {
      cJSON *a = cJSON_AddArrayToObject(dec, dd->name);
      for (int i = 0; a && i < dd->size; i++)
        cJSON_AddItemToArray(a, cJSON_CreateNumber(r->decision[dd->offset + i]));
    }
  }
  cJSON_AddNumberToObject(o, "samples", (double)r->samples);
  char seed[32];
  snprintf(seed, sizeof seed, "%llu", (unsigned long long)r->seed);
  cJSON_AddRawToObject(o, "seed", seed);
  cJSON_AddNumberToObject(o, "target", r->target);
  cJSON_AddNumberToObject(o, "confidence", r->confidence);
  cJSON_AddStringToObject(o, "interval", fg_interval_method_name(r->interval));
  cJSON_AddBoolToObject(o, "stop_early", r->stop_early);
  cJSON_AddStringToObject(o, "exact", fg_exact_mode_name(r->exact));
  cJSON_AddStringToObject(o, "sampling", fg_sampling_name(r->sampling));
  if (r->expect_digest[0])
    cJSON_AddStringToObject(o, "expect_digest", r->expect_digest);
  if (r->has_in_sample) {
    cJSON *is = cJSON_AddObjectToObject(o, "in_sample");
    snprintf(seed, sizeof seed, "%llu", (unsigned long long)r->in_sample_seed);
    cJSON_AddRawToObject(is, "seed", seed);
    cJSON_AddNumberToObject(is, "count", (double)r->in_sample_count);
  }
  if (r->label[0]) cJSON_AddStringToObject(o, "label", r->label);
  if (r->explain) cJSON_AddBoolToObject(o, "explain", true);
  if (r->failing_count > 0 && r->failing_count != FG_FAILING_SCENARIOS)
    cJSON_AddNumberToObject(o, "failing_scenarios_count", r->failing_count);
  return o;
}
