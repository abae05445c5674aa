/*
 * tests/unit/engine/test_compare.c -- comparisons in the engine (engine/compare.c):
 * parsing with pointers under /candidates/i, common random numbers, pair
 * counts by popcount against the candidates' own counts, independence of
 * workers and chunk size, sample counts that are not whole words, and
 * refusals.
 *
 * The model has one standard normal input u and candidates "u <= x": the
 * candidate with the larger x holds wherever the smaller one does, so on
 * common scenarios b_only = 0 and both = the smaller one's count exactly.
 */
#include "check.h"
#include "feasgate/engine.h"
#include "feasgate/model.h"
#include "modelcheck.h"

#include <cjson/cJSON.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static const char *MODEL =
    "{\"format\":1,\"name\":\"compare-test\","
    "\"decisions\":[{\"name\":\"x\",\"lower\":-10,\"upper\":10}],"
    "\"uncertain\":[{\"name\":\"u\",\"distribution\":"
    "{\"family\":\"normal\",\"mean\":0,\"sd\":1}}],"
    "\"constraints\":[{\"name\":\"c\",\"require\":\"u <= x\"}]}";

static fg_status parse(fg_model *m, const char *json, fg_compare_request *r,
                       fg_problem *p) {
  fg_problem_init(p);
  cJSON *body = cJSON_Parse(json);
  CHECK_MSG(body != NULL, "test JSON: %s", json);
  fg_request_limits lim;
  fg_request_limits_default(&lim);
  fg_status st = fg_compare_parse(m, body, &lim, r, p);
  cJSON_Delete(body);
  return st;
}

static void test_parse(fg_model *m) {
  fg_compare_request r;
  fg_problem p;
  CHECK(parse(m,
              "{\"candidates\":[{\"label\":\"a\",\"decision\":{\"x\":1}},"
              "{\"label\":\"b\",\"decision\":{\"x\":0.5}}],"
              "\"samples\":5000,\"seed\":9,\"confidence\":0.9}",
              &r, &p) == FG_OK);
  CHECK_INT(r.ncandidates, 2);
  CHECK_STR(r.candidates[1].label, "b");
  CHECK_NEAR(r.candidates[1].decision[0], 0.5, 0);
  for (int i = 0; i < r.ncandidates; i++) {
    CHECK(r.candidates[i].keep_outcomes);
    CHECK(r.candidates[i].seed_given && r.candidates[i].seed == 9);
    CHECK_INT(r.candidates[i].samples, 5000);
    CHECK_NEAR(r.candidates[i].confidence, 0.9, 0);
  }
  fg_compare_request_free(&r);

  CHECK(parse(m,
              "{\"candidates\":[{\"label\":\"a\",\"decision\":{\"x\":1}},"
              "{\"label\":\"a\",\"decision\":{\"x\":\"no\"}},"
              "{\"decision\":{\"x\":1},\"extra\":1}],"
              "\"confidence\":3,\"label\":\"z\"}",
              &r, &p) == FG_EINVAL);
  CHECK(fg_test_has_pointer(&p, "/candidates/1/decision/x"));
  CHECK(fg_test_has_pointer(&p, "/candidates/2/label"));
  CHECK(fg_test_has_pointer(&p, "/candidates/2/extra"));
  CHECK(fg_test_has_pointer(&p, "/confidence"));
  CHECK(fg_test_has_pointer(&p, "/label"));
  /* A shared fault is reported once, not once per candidate. */
  int conf = 0;
  for (int i = 0; i < p.nitems; i++)
    conf += strcmp(p.items[i].pointer, "/confidence") == 0;
  CHECK_INT(conf, 1);
  CHECK_INT(r.ncandidates, 0);

  CHECK(parse(m,
              "{\"candidates\":[{\"label\":\"a\",\"decision\":{\"x\":1}},"
              "{\"label\":\"a\",\"decision\":{\"x\":2}}]}",
              &r, &p) == FG_EINVAL);
  CHECK(fg_test_has_pointer(&p, "/candidates/1/label"));
  CHECK(parse(m, "{\"candidates\":[{\"label\":\"a\",\"decision\":{\"x\":1}}]}",
              &r, &p) == FG_EINVAL);
  CHECK(fg_test_has_pointer(&p, "/candidates"));
  CHECK(parse(m, "{\"samples\":10}", &r, &p) == FG_EINVAL);
  CHECK(fg_test_has_pointer(&p, "/candidates"));
  CHECK(parse(m,
              "{\"candidates\":[{\"label\":\"a\",\"decision\":{\"x\":1}},"
              "{\"label\":\"b\",\"decision\":{\"x\":2}}],\"stop_early\":true}",
              &r, &p) == FG_EINVAL);
  CHECK(fg_test_has_pointer(&p, "/stop_early"));
  /* Coupled designs break the independence Newcombe's paired interval
   * assumes (Newcombe 1998, Statistics in Medicine 17:2635): refused,
   * once, naming /sampling. */
  static const char *const coupled[] = {"antithetic", "latin_hypercube",
                                        "sobol"};
  for (size_t i = 0; i < sizeof coupled / sizeof coupled[0]; i++) {
    char body[256];
    snprintf(body, sizeof body,
             "{\"candidates\":[{\"label\":\"a\",\"decision\":{\"x\":1}},"
             "{\"label\":\"b\",\"decision\":{\"x\":2}}],"
             "\"samples\":4096,\"sampling\":\"%s\"}",
             coupled[i]);
    CHECK(parse(m, body, &r, &p) == FG_EINVAL);
    CHECK(fg_test_has_pointer(&p, "/sampling"));
    int ns = 0;
    for (int j = 0; j < p.nitems; j++)
      ns += strcmp(p.items[j].pointer, "/sampling") == 0;
    CHECK_INT(ns, 1);
    CHECK_INT(r.ncandidates, 0);
  }
  CHECK(parse(m,
              "{\"candidates\":[{\"label\":\"a\",\"decision\":{\"x\":1}},"
              "{\"label\":\"b\",\"decision\":{\"x\":2}}],"
              "\"samples\":300000000}",
              &r, &p) == FG_ELIMIT);
  CHECK_STR(p.limit_name, "comparison_samples");
  CHECK(fg_test_has_pointer(&p, "/samples"));

  char big[4096] = "{\"candidates\":[";
  for (int i = 0; i <= FG_COMPARE_CANDIDATES_MAX; i++) {
    size_t n = strlen(big);
    snprintf(big + n, sizeof big - n,
             "%s{\"label\":\"c%d\",\"decision\":{\"x\":1}}", i ? "," : "", i);
  }
  strcat(big, "]}");
  CHECK(parse(m, big, &r, &p) == FG_ELIMIT);
  CHECK_STR(p.limit_name, "comparison_candidates");
}

static uint64_t popcount_bits(const uint64_t *w, uint64_t n) {
  uint64_t k = 0;
  for (uint64_t i = 0; i < n; i++)
    k += (w[i >> 6] >> (i & 63)) & 1;
  return k;
}

static void test_counts(fg_model *m) {
  fg_compare_request r;
  fg_problem p;
  /* 20037 samples: not a whole number of 64-bit words nor of blocks. */
  CHECK(parse(m,
              "{\"candidates\":[{\"label\":\"wide\",\"decision\":{\"x\":1}},"
              "{\"label\":\"narrow\",\"decision\":{\"x\":0}},"
              "{\"label\":\"mid\",\"decision\":{\"x\":0.5}}],"
              "\"samples\":20037,\"seed\":4242}",
              &r, &p) == FG_OK);
  fg_check *c2[FG_COMPARE_CANDIDATES_MAX], *c1[FG_COMPARE_CANDIDATES_MAX];
  CHECK(fg_compare_run_sync(m, &r, 2, FG_CHUNK_DEFAULT, c2, &p) == FG_OK);
  CHECK(fg_compare_run_sync(m, &r, 1, 1024, c1, &p) == FG_OK);
  uint64_t k[3];
  for (int i = 0; i < 3; i++) {
    uint64_t done, sat, n1;
    fg_check_progress(c2[i], &done, &sat);
    k[i] = sat;
    CHECK_INT(done, 20037);
    const uint64_t *bits = fg_check_outcomes(c2[i], &n1);
    CHECK(bits != NULL && n1 == 20037);
    if (bits) CHECK_INT(popcount_bits(bits, n1), sat);
    /* The bits do not depend on workers or chunk size. */
    uint64_t n2;
    const uint64_t *bits1 = fg_check_outcomes(c1[i], &n2);
    CHECK(bits1 && bits && n2 == n1 &&
          memcmp(bits, bits1, (size_t)((n1 + 63) / 64) * 8) == 0);
    /* The same check alone (without outcome bits) counts the same. */
    fg_check_request alone = r.candidates[i];
    alone.keep_outcomes = false;
    fg_check *c;
    CHECK(fg_check_run_sync(m, &alone, 2, 4096, &c, &p) == FG_OK);
    uint64_t d3, s3;
    fg_check_progress(c, &d3, &s3);
    CHECK_INT(s3, sat);
    if (i == 0) {
      /* No outcome bits kept: a pair cannot be counted with it. */
      fg_compare_pair pr;
      fg_problem q;
      fg_problem_init(&q);
      CHECK(fg_compare_count(c2[0], c, 0.95, &pr, &q) == FG_EINTERNAL);
    }
    fg_check_unref(c);
  }
  /* P(u <= 1) = 0.8413, P(u <= 0) = 1/2 (normal CDF, common knowledge):
   * loose sanity bands, 6 standard errors. */
  CHECK(fabs((double)k[0] / 20037 - 0.841345) < 6 * 0.0026);
  CHECK(fabs((double)k[1] / 20037 - 0.5) < 6 * 0.0036);
  fg_compare_pair pr;
  CHECK(fg_compare_count(c2[0], c2[1], 0.95, &pr, &p) == FG_OK);
  CHECK_INT(pr.n, 20037);
  CHECK_INT(pr.b_only, 0); /* u <= 0 implies u <= 1 */
  CHECK_INT(pr.both, k[1]);
  CHECK_INT(pr.a_only, k[0] - k[1]);
  CHECK_INT(pr.neither, 20037 - k[0]);
  CHECK_NEAR(pr.difference, ((double)k[0] - (double)k[1]) / 20037, 1e-15);
  CHECK(pr.lower < pr.difference && pr.difference < pr.upper);
  CHECK(fg_compare_count(c2[1], c2[0], 0.95, &pr, &p) == FG_OK);
  CHECK_INT(pr.a_only, 0);
  CHECK_INT(pr.b_only, k[0] - k[1]);

  const char *labels[] = {"wide", "narrow", "mid"};
  cJSON *pairs = NULL;
  CHECK(fg_compare_pairs_json(c2, labels, 3, 0.95, &pairs, &p) == FG_OK);
  CHECK_INT(cJSON_GetArraySize(pairs), 3);
  const char *order[3][2] = {
      {"wide", "narrow"}, {"wide", "mid"}, {"narrow", "mid"}};
  int i = 0;
  const cJSON *it;
  cJSON_ArrayForEach(it, pairs) {
    CHECK_STR(cJSON_GetStringValue(cJSON_GetObjectItem(it, "a")), order[i][0]);
    CHECK_STR(cJSON_GetStringValue(cJSON_GetObjectItem(it, "b")), order[i][1]);
    const cJSON *iv = cJSON_GetObjectItem(it, "interval");
    CHECK_STR(cJSON_GetStringValue(cJSON_GetObjectItem(iv, "method")),
              "newcombe_paired");
    i++;
  }
  char *text = cJSON_PrintUnformatted(pairs);
  CHECK(text && strstr(text, "\"b_only\":0") != NULL);
  free(text);
  cJSON_Delete(pairs);
  for (int j = 0; j < 3; j++) {
    fg_check_unref(c1[j]);
    fg_check_unref(c2[j]);
  }
  fg_compare_request_free(&r);
}

int main(void) {
  fg_model *m = fg_test_model(MODEL);
  if (m) {
    test_parse(m);
    test_counts(m);
    fg_model_unref(m);
  }
  return fg_test_finish();
}
