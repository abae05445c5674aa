/*
 * engine/compare.c -- several candidates on common random numbers.
 *
 * Design: a comparison is a set of ordinary checks that share everything
 * but the decision and the label: the same seed, so the same validation
 * scenarios (sample i depends only on seed, stream, dimension and i), and
 * the same sample count. Each check keeps one joint-outcome bit per sample
 * (keep_outcomes); a pair is then counted by popcount over the two
 * bitmaps: both = |A and B|, a_only = |A and not B|, b_only = |B and not A|,
 * neither = n - the rest. The difference (a_only - b_only)/n equals the
 * difference of the two joint estimates exactly, and its interval is
 * Newcombe's for paired proportions (estimate/paired.c).
 *
 * Parsing reuses fg_request_parse: each candidate becomes a check request
 * body made of the shared members plus its own "decision" and "label"
 * (cJSON references, nothing copied), and the faults found are moved under
 * /candidates/i when they concern the candidate; faults in shared members
 * are reported once.
 *
 * Invariants: every candidate of a parsed request has keep_outcomes set,
 * stop_early off and samples <= FG_COMPARE_SAMPLES_MAX; labels are
 * distinct and non-empty.
 *
 * Thread use: parsing and counting are pure (counting reads checks that
 * have ended, which no longer change); fg_compare_run_sync blocks.
 */
#include "engine/engine_internal.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static const char *const shared_members[] = {
    "samples",  "seed",       "target",        "confidence", "interval",
    "sampling", "stop_early", "expect_digest", "in_sample",  "wait_s",
    "explain"};
#define NSHARED (sizeof shared_members / sizeof *shared_members)

static bool is_shared(const char *name) {
  for (size_t i = 0; i < NSHARED; i++)
    if (strcmp(shared_members[i], name) == 0) return true;
  return false;
}

/* True when `ptr` is "/<member>" or below it. */
static bool under(const char *ptr, const char *member) {
  size_t n = strlen(member);
  return strncmp(ptr, member, n) == 0 && (ptr[n] == '\0' || ptr[n] == '/');
}

/* Move the faults of one candidate's request into `dst`: candidate faults
 * (decision, label) under `prefix` (dropped when NULL: the candidate's
 * shape was already reported), shared ones only when `shared`. */
static void merge_problem(fg_problem *dst, const fg_problem *src,
                          const char *prefix, bool shared) {
  if (src->status == FG_OK) return;
  if (src->nitems == 0) {
    if (shared || dst->status == FG_OK)
      fg_problem_set(dst, src->status, "%s", src->detail);
    return;
  }
  for (int i = 0; i < src->nitems; i++) {
    const fg_problem_item *it = &src->items[i];
    bool mine = under(it->pointer, "/decision") || under(it->pointer, "/label");
    if (mine ? !prefix : !shared) continue;
    char ptr[FG_POINTER_MAX];
    snprintf(ptr, sizeof ptr, "%s%s", mine ? prefix : "", it->pointer);
    fg_problem_add(dst, src->status, ptr, it->column, "%s", it->message);
  }
  if (!dst->limit_name && src->limit_name) {
    dst->limit_name = src->limit_name;
    dst->limit_value = src->limit_value;
  }
  dst->dropped += shared ? src->dropped : 0;
}

/* Check the shape of candidate i; true when it may be parsed. */
static bool candidate_shape(const cJSON *cand, int i, fg_problem *p) {
  char base[FG_POINTER_MAX], ptr[FG_POINTER_MAX];
  fg_pointer_index(base, sizeof base, "/candidates", i);
  if (!cJSON_IsObject(cand)) {
    fg_problem_add(p, FG_EINVAL, base, 0,
                   "a candidate must be an object {\"label\", \"decision\"}");
    return false;
  }
  bool ok = true;
  for (const cJSON *it = cand->child; it; it = it->next) {
    if (strcmp(it->string, "label") == 0 || strcmp(it->string, "decision") == 0)
      continue;
    fg_pointer_join(ptr, sizeof ptr, base, it->string);
    fg_problem_add(p, FG_EINVAL, ptr, 0,
                   "unknown member '%s' of a candidate (known: label, "
                   "decision)",
                   it->string);
    ok = false;
  }
  const cJSON *label = cJSON_GetObjectItemCaseSensitive(cand, "label");
  fg_pointer_join(ptr, sizeof ptr, base, "label");
  if (!label) {
    fg_problem_add(p, FG_EINVAL, ptr, 0,
                   "every candidate needs a \"label\" naming it in the pairs");
    ok = false;
  } else if (cJSON_IsString(label) && label->valuestring[0] == '\0') {
    fg_problem_add(p, FG_EINVAL, ptr, 0, "label must not be empty");
    ok = false;
  }
  return ok;
}

void fg_compare_request_free(fg_compare_request *r) {
  for (int i = 0; i < r->ncandidates; i++)
    fg_request_free(&r->candidates[i]);
  r->ncandidates = 0;
}

void fg_compare_set_seed(fg_compare_request *r, uint64_t seed) {
  for (int i = 0; i < r->ncandidates; i++) {
    r->candidates[i].seed = seed;
    r->candidates[i].seed_given = true;
  }
}

fg_status fg_compare_parse(const fg_model *m, const cJSON *body,
                           const fg_request_limits *lim,
                           fg_compare_request *out, fg_problem *p) {
  memset(out, 0, sizeof *out);
  if (!cJSON_IsObject(body))
    return fg_problem_add(p, FG_EINVAL, "", 0,
                          "a comparison request must be a JSON object "
                          "{\"candidates\": [...], ...}");
  int before = p->nitems;
  for (const cJSON *it = body->child; it; it = it->next) {
    if (strcmp(it->string, "candidates") == 0 || is_shared(it->string))
      continue;
    fg_problem_unknown_member(p, it->string,
                              "candidates, samples, seed, target, "
                              "confidence, interval, sampling, stop_early, "
                              "expect_digest, in_sample, wait_s, explain; "
                              "labels and decisions go in each candidate");
  }
  const cJSON *samples = cJSON_GetObjectItemCaseSensitive(body, "samples");
  if (cJSON_IsNumber(samples) &&
      samples->valuedouble > (double)FG_COMPARE_SAMPLES_MAX &&
      samples->valuedouble <= (double)lim->max_samples)
    fg_problem_limit(p, "/samples", FG_LIMIT_COMPARISON_SAMPLES,
                     (double)FG_COMPARE_SAMPLES_MAX,
                     "samples %.0f exceeds comparison_samples = %llu (each "
                     "candidate keeps one bit per sample)",
                     samples->valuedouble,
                     (unsigned long long)FG_COMPARE_SAMPLES_MAX);
  const cJSON *stop = cJSON_GetObjectItemCaseSensitive(body, "stop_early");
  if (cJSON_IsTrue(stop))
    fg_problem_add(p, FG_EINVAL, "/stop_early", 0,
                   "a comparison runs every candidate on the same full set of "
                   "scenarios; stop_early must be false");

  const cJSON *cands = cJSON_GetObjectItemCaseSensitive(body, "candidates");
  int ncand = 0;
  if (!cands) {
    fg_problem_add(p, FG_EINVAL, "/candidates", 0,
                   "'candidates' is required: an array of 2 to %d objects "
                   "{\"label\", \"decision\"}",
                   FG_COMPARE_CANDIDATES_MAX);
  } else if (!cJSON_IsArray(cands)) {
    fg_problem_add(p, FG_EINVAL, "/candidates", 0,
                   "candidates must be an array of 2 to %d objects "
                   "{\"label\", \"decision\"}",
                   FG_COMPARE_CANDIDATES_MAX);
  } else {
    ncand = cJSON_GetArraySize(cands);
    if (ncand > FG_COMPARE_CANDIDATES_MAX) {
      fg_problem_limit(p, "/candidates", FG_LIMIT_COMPARISON_CANDIDATES,
                       FG_COMPARE_CANDIDATES_MAX,
                       "%d candidates exceed comparison_candidates = %d", ncand,
                       FG_COMPARE_CANDIDATES_MAX);
      ncand = 0;
    } else if (ncand < 2) {
      fg_problem_add(p, FG_EINVAL, "/candidates", 0,
                     "a comparison needs at least 2 candidates, found %d",
                     ncand);
      ncand = 0;
    }
  }

  /* One request per candidate (or one without a decision, to report the
   * shared members when there are no candidates to parse). */
  int rounds = ncand > 0 ? ncand : 1;
  const cJSON *cand = ncand > 0 ? cands->child : NULL;
  bool shared_reported = false;
  for (int i = 0; i < rounds; i++, cand = cand ? cand->next : NULL) {
    bool usable = cand && candidate_shape(cand, i, p);
    cJSON *o = cJSON_CreateObject();
    if (!o) {
      fg_problem_set(p, FG_ENOMEM, "out of memory reading the comparison");
      break;
    }
    for (cJSON *it = body->child; it; it = it->next)
      if (is_shared(it->string) && strcmp(it->string, "stop_early") != 0 &&
          !(strcmp(it->string, "samples") == 0 && cJSON_IsNumber(it) &&
            it->valuedouble > (double)FG_COMPARE_SAMPLES_MAX &&
            it->valuedouble <= (double)lim->max_samples))
        cJSON_AddItemReferenceToObject(o, it->string, it);
    if (usable) {
      cJSON *c = (cJSON *)cand;
      cJSON *dec = cJSON_GetObjectItemCaseSensitive(c, "decision");
      cJSON *lab = cJSON_GetObjectItemCaseSensitive(c, "label");
      if (dec) cJSON_AddItemReferenceToObject(o, "decision", dec);
      if (lab) cJSON_AddItemReferenceToObject(o, "label", lab);
    }
    fg_problem sub;
    fg_problem_init(&sub);
    fg_check_request req;
    fg_status st = fg_request_parse(m, o, lim, &req, &sub);
    cJSON_Delete(o);
    char prefix[FG_POINTER_MAX];
    fg_pointer_index(prefix, sizeof prefix, "/candidates", i);
    if (st != FG_OK) {
      merge_problem(p, &sub, usable ? prefix : NULL, !shared_reported);
      shared_reported = true;
      continue;
    }
    /* Paired counts need independent scenarios: Newcombe's interval
     * assumes them, and coupled designs (antithetic pairs, Latin
     * hypercube and Sobol replicates) break it, so they are refused here
     * where the request becomes a comparison (fg_request_parse cannot
     * tell a candidate from a check). */
    if (req.sampling != FG_SAMPLING_MONTE_CARLO) {
      if (!shared_reported)
        fg_problem_add(p, FG_EINVAL, "/sampling", 0,
                       "comparisons use sampling monte_carlo: the paired "
                       "interval needs independent scenarios, and sampling "
                       "%s couples them",
                       fg_sampling_name(req.sampling));
      shared_reported = true;
      fg_request_free(&req);
      continue;
    }
    shared_reported = true;
    if (!usable) {
      fg_request_free(&req);
      continue;
    }
    req.keep_outcomes = true;
    req.exact = FG_EXACT_OFF; /* comparisons report no exact answer */
    req.stop_early = false;
    for (int j = 0; j < out->ncandidates; j++)
      if (strcmp(out->candidates[j].label, req.label) == 0) {
        char ptr[FG_POINTER_MAX];
        fg_pointer_join(ptr, sizeof ptr, prefix, "label");
        fg_problem_add(p, FG_EINVAL, ptr, 0,
                       "label '%.64s' is already used by candidate %d; "
                       "labels name the candidates in the pairs",
                       req.label, j);
      }
    out->candidates[out->ncandidates++] = req;
  }
  if (p->nitems > before || p->status != FG_OK) {
    fg_compare_request_free(out);
    return p->status != FG_OK ? p->status : FG_EINVAL;
  }
  return FG_OK;
}

/* ---- counting ---- */

fg_status fg_compare_count(fg_check *a, fg_check *b, double confidence,
                           fg_compare_pair *out, fg_problem *p) {
  memset(out, 0, sizeof *out);
  if (fg_check_get_state(a) != FG_CHECK_DONE ||
      fg_check_get_state(b) != FG_CHECK_DONE)
    return fg_problem_set(p, FG_EINVAL,
                          "a pair can only be counted once both checks have "
                          "run to the end");
  uint64_t na, nb;
  const uint64_t *wa = fg_check_outcomes(a, &na);
  const uint64_t *wb = fg_check_outcomes(b, &nb);
  if (!wa || !wb)
    return fg_problem_set(p, FG_EINTERNAL,
                          "a compared check did not keep its outcomes "
                          "(keep_outcomes)");
  if (na != nb || na == 0)
    return fg_problem_set(p, FG_EINTERNAL,
                          "compared checks ran on %llu and %llu samples; a "
                          "pair needs the same scenarios",
                          (unsigned long long)na, (unsigned long long)nb);
  uint64_t words = (na + 63) / 64, both = 0, a_only = 0, b_only = 0;
  for (uint64_t w = 0; w < words; w++) {
    uint64_t mask = ~0ull;
    if (w == words - 1 && na % 64) mask = (1ull << (na % 64)) - 1;
    uint64_t x = wa[w] & mask, y = wb[w] & mask;
    both += (uint64_t)__builtin_popcountll(x & y);
    a_only += (uint64_t)__builtin_popcountll(x & ~y);
    b_only += (uint64_t)__builtin_popcountll(y & ~x);
  }
  out->n = na;
  out->both = both;
  out->a_only = a_only;
  out->b_only = b_only;
  out->neither = na - both - a_only - b_only;
  out->difference = ((double)a_only - (double)b_only) / (double)na;
  fg_interval iv =
      fg_newcombe_paired(both, a_only, b_only, out->neither, confidence);
  out->lower = iv.lower;
  out->upper = iv.upper;
  return FG_OK;
}

/* Counts as integer text (cJSON prints numbers with %.15g). */
static void add_count(cJSON *o, const char *k, uint64_t v) {
  char buf[32];
  snprintf(buf, sizeof buf, "%llu", (unsigned long long)v);
  cJSON_AddRawToObject(o, k, buf);
}

/* A finite double in the shortest text that reads back as the same
 * double (cJSON's own printing may lose the last bit). */
static void add_exact(cJSON *o, const char *k, double v) {
  if (!isfinite(v)) {
    cJSON_AddNullToObject(o, k);
    return;
  }
  char buf[40];
  for (int digits = 15; digits <= 17; digits++) {
    snprintf(buf, sizeof buf, "%.*g", digits, v);
    if (strtod(buf, NULL) == v) break;
  }
  cJSON_AddRawToObject(o, k, buf);
}

fg_status fg_compare_pairs_json(fg_check *const *checks,
                                const char *const *labels, int n,
                                double confidence, cJSON **out, fg_problem *p) {
  *out = NULL;
  cJSON *arr = cJSON_CreateArray();
  if (!arr) return fg_problem_set(p, FG_ENOMEM, "out of memory");
  for (int i = 0; i < n; i++)
    for (int j = i + 1; j < n; j++) {
      fg_compare_pair pr;
      fg_status st = fg_compare_count(checks[i], checks[j], confidence, &pr, p);
      if (st != FG_OK) {
        cJSON_Delete(arr);
        return st;
      }
      cJSON *o = cJSON_CreateObject();
      if (!o) {
        cJSON_Delete(arr);
        return fg_problem_set(p, FG_ENOMEM, "out of memory");
      }
      cJSON_AddItemToArray(arr, o);
      cJSON_AddStringToObject(o, "a", labels[i]);
      cJSON_AddStringToObject(o, "b", labels[j]);
      add_count(o, "a_only", pr.a_only);
      add_count(o, "b_only", pr.b_only);
      add_count(o, "both", pr.both);
      add_count(o, "neither", pr.neither);
      add_exact(o, "difference", pr.difference);
      cJSON *iv = cJSON_AddObjectToObject(o, "interval");
      if (iv) {
        add_exact(iv, "lower", pr.lower);
        add_exact(iv, "upper", pr.upper);
        cJSON_AddStringToObject(iv, "method", "newcombe_paired");
      }
    }
  *out = arr;
  return FG_OK;
}

fg_status fg_compare_run_sync(fg_model *m, const fg_compare_request *r,
                              int workers, int chunk, fg_check **out,
                              fg_problem *p) {
  int n = r->ncandidates;
  for (int i = 0; i < n; i++)
    out[i] = NULL;
  fg_pool *pool;
  fg_status st = fg_pool_new(workers, chunk, n > 0 ? n : 1, &pool, p);
  if (st != FG_OK) return st;
  for (int i = 0; i < n && st == FG_OK; i++)
    st = fg_check_start(pool, m, &r->candidates[i], &out[i], p);
  for (int i = 0; i < n; i++)
    if (out[i]) fg_check_wait(out[i], -1);
  fg_pool_free(pool);
  /* The checks outlive the pool; their state is final, so detach them. */
  for (int i = 0; i < n; i++)
    if (out[i]) out[i]->pool = NULL;
  if (st != FG_OK) {
    for (int i = 0; i < n; i++) {
      fg_check_unref(out[i]);
      out[i] = NULL;
    }
  }
  return st;
}
