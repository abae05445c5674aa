/*
 * tests/unit/model/test_compile.c -- compiling valid model documents.
 *
 * Covers: the end-to-end compile of a small valid model (with the real
 * expr/ and sample/ modules): its members, rows, summary and digest, the
 * same digest for the same document written another way, a minimal model
 * without random inputs, and the affine-structure counts of the summary.
 * Expected counts are worked out by hand, row by row, beside each check
 * (no outside reference applies: the document format is the project's).
 */
#include "model_testutil.h"

/* The same document: other key order, other spacing, other spellings of
 * the same numbers. */
static const char *valid_model_shuffled =
    "{\"target\":{\"probability\":8e-1},\"objective\":{\"minimize\":\"total\"},"
    "\"constraints\":[{\"require\":\"acc <= 50\",\"name\":\"cap\"},"
    "{\"require\":\"total + y <= 100\",\"name\":\"budget\"}],"
    "\"definitions\":[{\"elements\":[\"x[0] + z\",\"acc[0] + x[1]\","
    "\"acc[1] + x[2]\"],\"name\":\"acc\"},{\"value\":\"sum(x) + k\","
    "\"name\":\"total\"}],\"uncertain\":[{\"distribution\":{\"sd\":1.0,"
    "\"mean\":-0,\"family\":\"normal\"},\"name\":\"z\"}],"
    "\"decisions\":[{\"upper\":[1e1,20,30.0],\"lower\":0,\"size\":3,"
    "\"name\":\"x\"},{\"integer\":true,\"upper\":5,\"lower\":0,\"name\":\"k\"},"
    "{\"name\":\"y\"}],\"description\":\"used by test_model\","
    "\"title\":\"Unit demo\",\"name\":\"unit-demo.v1\",\"format\":1.0}";

static void test_compile_valid(void) {
  fg_problem p;
  fg_model *m = NULL;
  fg_status st = compile(valid_model, &p, &m);
  CHECK_MSG(st == FG_OK, "valid model refused (status %d)", st);
  if (st != FG_OK || !m) {
    dump_problem(&p);
    return;
  }
  CHECK_STR(m->name, "unit-demo.v1");
  CHECK_STR(m->title, "Unit demo");
  CHECK_INT(m->refs, 1);
  CHECK(m->document != NULL && m->program != NULL && m->sampler != NULL);

  CHECK_INT(m->ndecisions, 3);
  CHECK_INT(m->decision_dims, 5);
  CHECK_STR(m->decisions[0].name, "x");
  CHECK_INT(m->decisions[0].size, 3);
  CHECK_INT(m->decisions[0].offset, 0);
  CHECK_INT(m->decisions[0].count, 3);
  CHECK(!m->decisions[0].integer);
  CHECK_NEAR(m->decisions[0].lower[2], 0, 0);
  CHECK_NEAR(m->decisions[0].upper[0], 10, 0);
  CHECK_NEAR(m->decisions[0].upper[2], 30, 0);
  CHECK_STR(m->decisions[1].name, "k");
  CHECK_INT(m->decisions[1].size, 0);
  CHECK_INT(m->decisions[1].offset, 3);
  CHECK_INT(m->decisions[1].count, 1);
  CHECK(m->decisions[1].integer);
  CHECK_NEAR(m->decisions[1].upper[0], 5, 0);
  CHECK_INT(m->decisions[2].offset, 4);
  CHECK(isinf(m->decisions[2].lower[0]) && m->decisions[2].lower[0] < 0);
  CHECK(isinf(m->decisions[2].upper[0]) && m->decisions[2].upper[0] > 0);

  CHECK_NEAR(m->target_probability, 0.8, 0);
  CHECK_NEAR(m->target_confidence, 0.95, 0);

  const fg_model_summary *s = &m->summary;
  CHECK_INT(s->decisions, 3);
  CHECK_INT(s->decision_dims, 5);
  CHECK_INT(s->uncertain, 1);
  CHECK_INT(s->uncertain_dims, 1);
  CHECK_INT(s->definitions, 2);
  CHECK_INT(s->constraints, 2);
  CHECK_INT(s->rows, 4);               /* cap[0..2] and budget */
  CHECK_INT(s->deterministic_rows, 1); /* budget has no random input */
  CHECK(s->objective);

  cJSON *sj = fg_model_summary_json(m);
  CHECK(sj != NULL);
  if (sj) {
    cJSON *rows = cJSON_GetObjectItemCaseSensitive(sj, "rows");
    CHECK(cJSON_IsNumber(rows) && rows->valuedouble == 4);
    CHECK(
        cJSON_IsNumber(cJSON_GetObjectItemCaseSensitive(sj, "decision_dims")));
    CHECK(
        cJSON_IsNumber(cJSON_GetObjectItemCaseSensitive(sj, "uncertain_dims")));
    CHECK(cJSON_IsNumber(
        cJSON_GetObjectItemCaseSensitive(sj, "deterministic_rows")));
    CHECK(cJSON_IsTrue(cJSON_GetObjectItemCaseSensitive(sj, "objective")));
    cJSON_Delete(sj);
  }

  /* digest: "sha256:" + the hash of the canonical text */
  CHECK(strncmp(m->digest, "sha256:", 7) == 0);
  CHECK_INT(strlen(m->digest), 7 + 64);
  char hex[65];
  fg_sha256_hex(m->canonical, m->canonical_len, hex);
  CHECK_STR(m->digest + 7, hex);
  CHECK_INT(strlen(m->canonical), m->canonical_len);
  CHECK(strncmp(m->canonical, "{\"constraints\":[{\"name\":\"cap\",", 30) == 0);

  /* same document, other order and spacing: same digest and text */
  fg_model *m2 = NULL;
  st = compile(valid_model_shuffled, &p, &m2);
  CHECK(st == FG_OK);
  if (st != FG_OK) dump_problem(&p);
  if (m2) {
    CHECK_STR(m2->digest, m->digest);
    CHECK_STR(m2->canonical, m->canonical);
    fg_model_unref(m2);
  }
  /* one number changed: another digest */
  char *changed = strdup(valid_model);
  char *at = strstr(changed, "[10, 20, 30]");
  CHECK(at != NULL);
  if (at) {
    at[10] = '1'; /* 30 -> 31 */
    fg_model *m3 = NULL;
    st = compile(changed, &p, &m3);
    CHECK(st == FG_OK);
    if (m3) {
      CHECK(strcmp(m3->digest, m->digest) != 0);
      CHECK_NEAR(m3->decisions[0].upper[2], 31, 0);
      fg_model_unref(m3);
    }
  }
  free(changed);

  /* references */
  CHECK(fg_model_ref(m) == m);
  CHECK_INT(m->refs, 2);
  fg_model_unref(m);
  CHECK_INT(m->refs, 1);
  fg_model_unref(m);
  fg_model_unref(NULL);
}

static void test_compile_minimal(void) {
  /* no random input at all, no definitions, defaults for the target */
  const char *doc =
      "{\"format\":1,\"name\":\"0det\",\"decisions\":[{\"name\":\"a\"}],"
      "\"uncertain\":[],\"constraints\":[{\"name\":\"c\","
      "\"require\":\"a <= 1\"}]}";
  fg_problem p;
  fg_model *m = NULL;
  fg_status st = compile(doc, &p, &m);
  CHECK(st == FG_OK);
  if (!m) {
    dump_problem(&p);
    return;
  }
  CHECK(m->title == NULL);
  CHECK_NEAR(m->target_probability, 0.9, 0);
  CHECK_NEAR(m->target_confidence, 0.95, 0);
  CHECK_INT(m->summary.uncertain, 0);
  CHECK_INT(m->summary.uncertain_dims, 0);
  CHECK_INT(m->summary.rows, 1);
  CHECK_INT(m->summary.deterministic_rows, 1);
  CHECK(!m->summary.objective);
  fg_model_unref(m);
}

/* The affine structure of rows (expr/affine.c), counted in the summary:
 * by hand, row by row. */
static void test_affine_summary(void) {
  const char *doc =
      "{\"format\":1,\"name\":\"aff\",\"decisions\":[{\"name\":\"x\","
      "\"size\":2}],\"uncertain\":[{\"name\":\"z\",\"size\":2,"
      "\"distribution\":{\"family\":\"normal\",\"mean\":0,\"sd\":1}}],"
      "\"constraints\":["
      /* affine in z (coefficient x0) and in x (coefficient z0): both */
      "{\"name\":\"a\",\"require\":\"x[0]*z[0] + 2*z[1] <= 5 - x[1]\"},"
      /* z0*z1: in neither z (product) nor... x-free, so affine in x */
      "{\"name\":\"b\",\"require\":\"z[0]*z[1] <= 3\"},"
      /* x0*x1: affine in z, not in x */
      "{\"name\":\"c\",\"require\":\"1 <= x[0]*x[1] + z[0] <= 9\"},"
      /* division by an input: not affine in z; affine in x */
      "{\"name\":\"d\",\"require\":\"x[0] / z[1] <= 2\"},"
      /* max of inputs: not affine in z */
      "{\"name\":\"e\",\"require\":\"max(z[0], z[1]) <= x[0]\"},"
      /* deterministic: affine in z (no z), and in x */
      "{\"name\":\"f\",\"require\":\"x[0] + x[1] <= 4\"}]}";
  fg_problem p;
  fg_model *m = NULL;
  CHECK(compile(doc, &p, &m) == FG_OK);
  if (!m) {
    dump_problem(&p);
    return;
  }
  /* in inputs: a, c, f; in decisions: a, b, d, e, f; both: a, f */
  CHECK_INT(m->summary.affine_in_inputs, 3);
  CHECK_INT(m->summary.affine_in_decisions, 5);
  CHECK_INT(m->summary.affine_in_both, 2);
  fg_model_unref(m);
}

int main(void) {
  test_compile_valid();
  test_compile_minimal();
  test_affine_summary();
  return fg_test_finish();
}
