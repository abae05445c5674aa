/*
 * tests/unit/model/test_model.c -- the model module: strict JSON parsing, the
 * canonical text, SHA-256, document validation with JSON Pointers, the
 * end-to-end compile (with the real expr/ and sample/ modules), reference
 * counting and the digest cache.
 */
#include "feasgate/model.h"

#include "check.h"

#include <cJSON.h>

#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- helpers ---- */

static fg_status parse(const char *text, fg_problem *p, cJSON **out) {
  fg_problem_init(p);
  return fg_json_parse(text, strlen(text), out, p);
}

/* Parse `text`, expect failure; returns the problem's byte offset. */
static long long parse_fails(const char *text, fg_status want, fg_problem *p) {
  cJSON *v = NULL;
  fg_status st = parse(text, p, &v);
  CHECK_MSG(st == want, "parse of '%s': status %d, wanted %d", text, st, want);
  CHECK(v == NULL);
  if (v) cJSON_Delete(v);
  return p->byte_offset;
}

static void parse_ok(const char *text) {
  fg_problem p;
  cJSON *v = NULL;
  fg_status st = parse(text, &p, &v);
  CHECK_MSG(st == FG_OK, "parse of '%s' failed: %s", text,
            p.nitems ? p.items[0].message : p.detail);
  cJSON_Delete(v);
}

static char *canonical_of(const char *text) {
  fg_problem p;
  cJSON *v = NULL;
  if (parse(text, &p, &v) != FG_OK) return NULL;
  char *s = fg_json_canonical(v, NULL);
  cJSON_Delete(v);
  return s;
}

static void check_canonical(const char *text, const char *want) {
  char *got = canonical_of(text);
  CHECK_STR(got, want);
  free(got);
}

/* Index of the first item at `pointer`, or -1. */
static int find_item(const fg_problem *p, const char *pointer) {
  for (int i = 0; i < p->nitems; i++)
    if (strcmp(p->items[i].pointer, pointer) == 0) return i;
  return -1;
}

static void dump_problem(const fg_problem *p) {
  for (int i = 0; i < p->nitems; i++)
    fprintf(stderr, "    %s (col %d): %s\n", p->items[i].pointer,
            p->items[i].column, p->items[i].message);
}

static fg_status compile(const char *text, fg_problem *p, fg_model **m) {
  fg_problem_init(p);
  return fg_model_compile(text, strlen(text), m, p);
}

/* Compile `text`, expect failure with an item at `pointer`; returns the
 * item's index (or -1) so callers can look at its column and message. */
static int compile_fails(const char *text, fg_status want, const char *pointer,
                         fg_problem *p) {
  fg_model *m = NULL;
  fg_status st = compile(text, p, &m);
  CHECK_MSG(st == want, "status %d, wanted %d, for pointer %s", st, want,
            pointer);
  CHECK(m == NULL);
  fg_model_unref(m);
  int i = find_item(p, pointer);
  CHECK_MSG(i >= 0, "no error at %s", pointer);
  if (i < 0) dump_problem(p);
  return i;
}

/* ---- SHA-256 ---- */

static void test_sha256(void) {
  char hex[65];
  fg_sha256_hex("abc", 3, hex);
  CHECK_STR(hex,
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  fg_sha256_hex("", 0, hex);
  CHECK_STR(hex,
            "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
  const char *m448 = "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";
  fg_sha256_hex(m448, strlen(m448), hex);
  CHECK_STR(hex,
            "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  const char *m896 =
      "abcdefghbcdefghicdefghijdefghijkefghijklfghijklmghijklmnhijklmno"
      "ijklmnopjklmnopqklmnopqrlmnopqrsmnopqrstnopqrstu";
  fg_sha256_hex(m896, strlen(m896), hex);
  CHECK_STR(hex,
            "cf5b16a778af8380036ce59e7b0492370b249b11e8f07a51afac45037afee9d1");
  size_t n = 1000000;
  char *a = malloc(n);
  CHECK(a != NULL);
  if (a) {
    memset(a, 'a', n);
    fg_sha256_hex(a, n, hex);
    CHECK_STR(hex, "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39cc"
                   "c7112cd0");
    free(a);
  }
  /* lengths around the padding boundary (55, 56, 63, 64 bytes) differ */
  char h55[65], h56[65], h64[65];
  char buf[64];
  memset(buf, 'x', sizeof buf);
  fg_sha256_hex(buf, 55, h55);
  fg_sha256_hex(buf, 56, h56);
  fg_sha256_hex(buf, 64, h64);
  CHECK(strcmp(h55, h56) != 0 && strcmp(h56, h64) != 0);
  CHECK_INT(strlen(h64), 64);
}

/* ---- fg_json_parse ---- */

static void test_parse(void) {
  fg_problem p;
  parse_ok("{\"a\": [1, 2.5, -0, 1e3, true, false, null, \"x\"]}");
  parse_ok("  \t\r\n[]  \n");
  parse_ok("\"caf\xc3\xa9 \xe2\x82\xac \xf0\x9f\x99\x82\"");
  parse_ok("\"\\ud83d\\ude42 \\u00e9 \\n\"");
  parse_ok("\xef\xbb\xbf{}"); /* byte order mark ignored */

  /* empty input, truncation */
  CHECK_INT(parse_fails("", FG_EINVAL, &p), 0);
  CHECK_INT(parse_fails("{\"a\": [1, 2", FG_EINVAL, &p), 11);
  CHECK_INT(parse_fails("{\"a\": \"abc", FG_EINVAL, &p), 10);
  CHECK(p.nitems == 1 && strstr(p.items[0].message, "end of the input"));
  /* a syntax error in the middle */
  CHECK_INT(parse_fails("{\"a\": 1,, \"b\": 2}", FG_EINVAL, &p), 8);
  CHECK(p.nitems == 1 && strstr(p.items[0].message, "byte 8"));
  CHECK_INT(parse_fails("[1, 2,]", FG_EINVAL, &p), 6);
  CHECK_INT(parse_fails("{\"a\" 1}", FG_EINVAL, &p), 5);
  CHECK(strstr(p.items[0].message, "':'") != NULL);
  CHECK_INT(parse_fails("{1: 2}", FG_EINVAL, &p), 1);
  CHECK_INT(parse_fails("{\"a\": 1}}", FG_EINVAL, &p), 8);
  CHECK_INT(parse_fails("{\"a\": 1,}", FG_EINVAL, &p), 8);
  CHECK_INT(parse_fails("[1 2]", FG_EINVAL, &p), 3);
  CHECK_INT(parse_fails("tru", FG_EINVAL, &p), 0);
  CHECK_INT(parse_fails("[truex]", FG_EINVAL, &p), 5);
  CHECK_INT(parse_fails("[", FG_EINVAL, &p), 1);
  CHECK_INT(parse_fails("\"abc", FG_EINVAL, &p), 4);
  CHECK(strstr(p.items[0].message, "starts at byte 0") != NULL);
  CHECK_INT(parse_fails("[\xc3\xa9]", FG_EINVAL, &p), 1);
  CHECK_INT(parse_fails("[\"\\x\"]", FG_EINVAL, &p), 2);
  CHECK_INT(parse_fails("[\"\\u12G4\"]", FG_EINVAL, &p), 2);
  CHECK_INT(parse_fails("[\"\\udc00\"]", FG_EINVAL, &p), 2);
  CHECK_INT(parse_fails("[\"\\ud800x\"]", FG_EINVAL, &p), 2);
  CHECK_INT(parse_fails("[\"\\ud800\\u0041\"]", FG_EINVAL, &p), 2);
  /* trailing garbage */
  CHECK_INT(parse_fails("{} x", FG_EINVAL, &p), 3);
  CHECK_INT(parse_fails("[1] [2]", FG_EINVAL, &p), 4);
  CHECK_INT(parse_fails("nullx", FG_EINVAL, &p), 4);
  {
    const char with_nul[] = "{}\0";
    cJSON *v = NULL;
    fg_problem_init(&p);
    CHECK(fg_json_parse(with_nul, sizeof with_nul - 1, &v, &p) == FG_EINVAL);
    CHECK_INT(p.byte_offset, 2);
  }

  /* invalid UTF-8: lone continuation, overlong, surrogate, truncated,
   * beyond U+10FFFF */
  CHECK_INT(parse_fails("[\"ab\x80\"]", FG_EINVAL, &p), 4);
  CHECK(strstr(p.items[0].message, "UTF-8") != NULL);
  CHECK_INT(parse_fails("[\"\xc0\xaf\"]", FG_EINVAL, &p), 2);
  CHECK_INT(parse_fails("[\"\xed\xa0\x80\"]", FG_EINVAL, &p), 2);
  CHECK_INT(parse_fails("[\"\xe2\x82\"]", FG_EINVAL, &p), 2);
  CHECK_INT(parse_fails("[\"\xf4\x90\x80\x80\"]", FG_EINVAL, &p), 2);
  CHECK_INT(parse_fails("{\"k\xff\": 1}", FG_EINVAL, &p), 3);

  /* control characters and \u0000 */
  CHECK_INT(parse_fails("[\"a\tb\"]", FG_EINVAL, &p), 3);
  CHECK_INT(parse_fails("[1,\x01 2]", FG_EINVAL, &p), 3);
  CHECK_INT(parse_fails("[\"a\\u0000b\"]", FG_EINVAL, &p), 3);

  /* numbers outside the grammar, and ones that overflow */
  CHECK_INT(parse_fails("[01]", FG_EINVAL, &p), 2);
  CHECK_INT(parse_fails("[-01]", FG_EINVAL, &p), 3);
  CHECK_INT(parse_fails("[1.]", FG_EINVAL, &p), 3);
  CHECK_INT(parse_fails("[1.e5]", FG_EINVAL, &p), 3);
  CHECK_INT(parse_fails("[-]", FG_EINVAL, &p), 2);
  CHECK_INT(parse_fails("[1e]", FG_EINVAL, &p), 3);
  CHECK_INT(parse_fails("[1.5.2]", FG_EINVAL, &p), 4);
  parse_fails("[NaN]", FG_EINVAL, &p);
  parse_fails("[Infinity]", FG_EINVAL, &p);
  parse_fails("[+1]", FG_EINVAL, &p);
  parse_fails("{\"a\": {\"b\": [0, 1e999]}}", FG_EINVAL, &p);
  CHECK(p.nitems == 1);
  CHECK_STR(p.items[0].pointer, "/a/b/1");
  parse_fails("[-1e400]", FG_EINVAL, &p);
  CHECK_STR(p.items[0].pointer, "/0");
  parse_ok("[1e-400, 0.5e-320, 1.7976931348623157e308]");

  /* depth: FG_JSON_MAX_DEPTH containers are fine, one more is not */
  char deep[2 * FG_JSON_MAX_DEPTH + 8];
  size_t k = 0;
  for (int i = 0; i < FG_JSON_MAX_DEPTH; i++)
    deep[k++] = '[';
  for (int i = 0; i < FG_JSON_MAX_DEPTH; i++)
    deep[k++] = ']';
  deep[k] = '\0';
  parse_ok(deep);
  k = 0;
  for (int i = 0; i < FG_JSON_MAX_DEPTH + 1; i++)
    deep[k++] = '[';
  for (int i = 0; i < FG_JSON_MAX_DEPTH + 1; i++)
    deep[k++] = ']';
  deep[k] = '\0';
  CHECK_INT(parse_fails(deep, FG_ELIMIT, &p), FG_JSON_MAX_DEPTH);
  CHECK_STR(p.limit_name, "json_depth");
  CHECK_NEAR(p.limit_value, FG_JSON_MAX_DEPTH, 0);
  /* far deeper than cJSON's own limit: still a clean refusal */
  size_t big = 5000;
  char *huge = malloc(big + 1);
  memset(huge, '[', big);
  huge[big] = '\0';
  parse_fails(huge, FG_ELIMIT, &p);
  free(huge);

  /* duplicate keys, in nested objects too, each named once */
  parse_fails("{\"a\": 1, \"b\": {\"c\": 1, \"c\": 2, \"c\": 3}, \"a\": 2}",
              FG_EINVAL, &p);
  CHECK_INT(p.nitems, 2);
  CHECK(find_item(&p, "/a") >= 0);
  CHECK(find_item(&p, "/b/c") >= 0);
  parse_fails("[{\"x/y\": 1, \"x/y\": 1}]", FG_EINVAL, &p);
  CHECK_STR(p.items[0].pointer, "/0/x~1y");
  /* many keys: the sorted path */
  char many[4096];
  k = (size_t)snprintf(many, sizeof many, "{");
  for (int i = 0; i < 40; i++)
    k += (size_t)snprintf(many + k, sizeof many - k, "\"k%d\": %d,", i, i);
  snprintf(many + k, sizeof many - k, "\"k17\": 0, \"k17\": 1}");
  parse_fails(many, FG_EINVAL, &p);
  CHECK_INT(p.nitems, 1);
  CHECK_STR(p.items[0].pointer, "/k17");
  many[k] = '\0';
  snprintf(many + k, sizeof many - k, "\"k40\": 0}");
  parse_ok(many);
}

/* ---- fg_json_canonical ---- */

static void test_canonical(void) {
  check_canonical(
      "{ \"b\" : 1 , \"a\" : [ 3 , { \"z\": null, \"y\": true } ] }",
      "{\"a\":[3,{\"y\":true,\"z\":null}],\"b\":1}");
  /* byte order, not locale order: upper case first, then '_', lower */
  check_canonical("{\"b\":0,\"_\":0,\"B\":0,\"a\":0,\"\xc3\xa9\":0}",
                  "{\"B\":0,\"_\":0,\"a\":0,\"b\":0,\"\xc3\xa9\":0}");
  /* numbers: integers plainly, others shortest round trip, -0 as 0 */
  check_canonical("[1.0, 1e0, 10E-1, -0, -0.0, 0.1, 100, -42, 2.5e-3]",
                  "[1,1,1,0,0,0.1,100,-42,0.0025]");
  check_canonical("[999999999999999, 1e15, 1e300, 123456789012345678]",
                  "[999999999999999,1e+15,1e+300,1.2345678901234568e+17]");
  check_canonical("[0.30000000000000004, 3.141592653589793, 1e-7]",
                  "[0.30000000000000004,3.141592653589793,1e-07]");
  check_canonical("[4.35, 0.1e1, 5e-324]", "[4.35,1,4.94065645841247e-324]");
  /* strings: minimal escapes; '/' and non-ASCII stay raw */
  check_canonical("[\"a\\\"b\\\\c\\/d\\u00e9\\u0001\\n\\t\\b\\f\\r\\u001F\"]",
                  "[\"a\\\"b\\\\c/d\xc3\xa9\\u0001\\n\\t\\b\\f\\r\\u001f\"]");
  check_canonical("[\"\\ud83d\\ude42\"]", "[\"\xf0\x9f\x99\x82\"]");
  check_canonical("{}", "{}");
  check_canonical("[]", "[]");
  check_canonical("\"\"", "\"\"");
  check_canonical("{\"a\":{},\"b\":[[]]}", "{\"a\":{},\"b\":[[]]}");

  /* every number printed reads back exactly */
  double xs[] = {1.0 / 3,
                 2.0 / 3,
                 1e-300,
                 123.456,
                 6.02214076e23,
                 -1e-5,
                 4503599627370497.0,
                 0.1 + 0.2};
  for (size_t i = 0; i < sizeof xs / sizeof xs[0]; i++) {
    cJSON *n = cJSON_CreateNumber(xs[i]);
    char *s = fg_json_canonical(n, NULL);
    CHECK(s && strtod(s, NULL) == xs[i]);
    free(s);
    cJSON_Delete(n);
  }

  size_t len = 0;
  cJSON *o = cJSON_CreateObject();
  cJSON_AddStringToObject(o, "k", "v");
  char *s = fg_json_canonical(o, &len);
  CHECK_STR(s, "{\"k\":\"v\"}");
  CHECK_INT(len, 9);
  free(s);
  cJSON_Delete(o);
}

/* ---- validation and compilation ---- */

/* A small valid model: a scalar normal input, a vector decision with an
 * array bound, a definition built element by element (recursion), a vector
 * constraint, a deterministic constraint and an objective. */
static const char *valid_model =
    "{\"format\": 1, \"name\": \"unit-demo.v1\", \"title\": \"Unit demo\",\n"
    " \"description\": \"used by test_model\",\n"
    " \"decisions\": [\n"
    "   {\"name\": \"x\", \"size\": 3, \"lower\": 0, \"upper\": [10, 20, "
    "30]},\n"
    "   {\"name\": \"k\", \"lower\": 0, \"upper\": 5, \"integer\": true},\n"
    "   {\"name\": \"y\"}],\n"
    " \"uncertain\": [\n"
    "   {\"name\": \"z\", \"distribution\": {\"family\": \"normal\", "
    "\"mean\": 0, \"sd\": 1}}],\n"
    " \"definitions\": [\n"
    "   {\"name\": \"acc\", \"elements\": [\"x[0] + z\", \"acc[0] + x[1]\", "
    "\"acc[1] + x[2]\"]},\n"
    "   {\"name\": \"total\", \"value\": \"sum(x) + k\"}],\n"
    " \"constraints\": [\n"
    "   {\"name\": \"cap\", \"require\": \"acc <= 50\"},\n"
    "   {\"name\": \"budget\", \"require\": \"total + y <= 100\"}],\n"
    " \"objective\": {\"minimize\": \"total\"},\n"
    " \"target\": {\"probability\": 0.8}}";

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

/* Build a document from the valid one with `from` replaced by `to`. */
static char *edit(const char *from, const char *to) {
  const char *at = strstr(valid_model, from);
  if (!at) {
    fprintf(stderr, "edit: '%s' not in the model\n", from);
    return strdup("{}");
  }
  size_t a = (size_t)(at - valid_model), b = strlen(from), c = strlen(to);
  size_t n = strlen(valid_model) - b + c;
  char *s = malloc(n + 1);
  memcpy(s, valid_model, a);
  memcpy(s + a, to, c);
  strcpy(s + a + c, at + b);
  return s;
}

static int edited_fails(const char *from, const char *to, fg_status want,
                        const char *pointer, fg_problem *p) {
  char *doc = edit(from, to);
  int i = compile_fails(doc, want, pointer, p);
  free(doc);
  return i;
}

static void test_compile_errors(void) {
  fg_problem p;
  int i;

  /* malformed JSON: the byte offset reaches the caller */
  compile_fails("{\"format\": 1,", FG_EINVAL, "", &p);
  CHECK(p.byte_offset >= 12);
  compile_fails("[1, 2]", FG_EINVAL, "", &p);

  /* expression errors carry the require pointer and a column */
  i = edited_fails("acc <= 50", "acc + nosuch <= 50", FG_EINVAL,
                   "/constraints/0/require", &p);
  if (i >= 0) {
    CHECK(p.items[i].column > 0);
    CHECK(strstr(p.items[i].message, "nosuch") != NULL);
  }
  /* both constraints are compiled and reported */
  {
    char *a = edit("acc <= 50", "acc + nosuch <= 50");
    char *b = strdup(a);
    char *at = strstr(b, "total + y <= 100");
    free(a);
    if (at) memcpy(at, "total + w", 9); /* y -> w, another unknown name */
    CHECK(compile_fails(b, FG_EINVAL, "/constraints/1/require", &p) >= 0);
    CHECK(find_item(&p, "/constraints/0/require") >= 0);
    free(b);
  }
  i = edited_fails("acc[1] + x[2]", "acc[1] + x[2] +", FG_EINVAL,
                   "/definitions/0/elements/2", &p);
  if (i >= 0) CHECK(p.items[i].column > 0);
  i = edited_fails("sum(x) + k", "sum(x) + q", FG_EINVAL,
                   "/definitions/1/value", &p);
  if (i >= 0) CHECK(p.items[i].column > 0);
  edited_fails("{\"minimize\": \"total\"}", "{\"maximize\": \"totl\"}",
               FG_EINVAL, "/objective/maximize", &p);

  /* duplicate names across the namespaces, pointing at the first holder */
  i = edited_fails("{\"name\": \"total\", \"value\"",
                   "{\"name\": \"x\", \"value\"", FG_EINVAL,
                   "/definitions/1/name", &p);
  if (i >= 0) CHECK(strstr(p.items[i].message, "/decisions/0/name") != NULL);
  edited_fails("{\"name\": \"budget\"", "{\"name\": \"z\"", FG_EINVAL,
               "/constraints/1/name", &p);

  /* reserved and malformed member names */
  edited_fails("{\"name\": \"y\"}", "{\"name\": \"sum\"}", FG_EINVAL,
               "/decisions/2/name", &p);
  edited_fails("{\"name\": \"y\"}", "{\"name\": \"9y\"}", FG_EINVAL,
               "/decisions/2/name", &p);
  edited_fails("{\"name\": \"y\"}", "{\"name\": 7}", FG_EINVAL,
               "/decisions/2/name", &p);
  edited_fails("{\"name\": \"y\"}", "{\"size\": 2}", FG_EINVAL,
               "/decisions/2/name", &p);
  char long_name[FG_NAME_MAX + 16];
  memset(long_name, 'y', FG_NAME_MAX + 3);
  long_name[0] = '"';
  long_name[FG_NAME_MAX + 2] = '"'; /* FG_NAME_MAX + 1 characters */
  long_name[FG_NAME_MAX + 3] = '\0';
  char member[FG_NAME_MAX + 32];
  snprintf(member, sizeof member, "\"name\": %s", long_name);
  edited_fails("\"name\": \"y\"", member, FG_ELIMIT, "/decisions/2/name", &p);
  CHECK_STR(p.limit_name, "name_length");
  /* the same 65 letters as a model name: too long */
  edited_fails("\"unit-demo.v1\"", long_name, FG_EINVAL, "/name", &p);
  long_name[FG_NAME_MAX + 1] = '"'; /* exactly FG_NAME_MAX: fine */
  long_name[FG_NAME_MAX + 2] = '\0';
  {
    char *doc = edit("\"unit-demo.v1\"", long_name);
    fg_model *m = NULL;
    CHECK(compile(doc, &p, &m) == FG_OK);
    fg_model_unref(m);
    free(doc);
  }

  /* format, name, title */
  i = edited_fails("\"format\": 1", "\"format\": 2", FG_EINVAL, "/format", &p);
  if (i >= 0) CHECK(strstr(p.items[i].message, "found 2") != NULL);
  edited_fails("\"format\": 1", "\"format\": \"1\"", FG_EINVAL, "/format", &p);
  edited_fails("\"format\": 1, ", "", FG_EINVAL, "/format", &p);
  i = edited_fails("\"unit-demo.v1\"", "\"Unit Demo\"", FG_EINVAL, "/name", &p);
  if (i >= 0) CHECK(strstr(p.items[i].message, "'Unit Demo'") != NULL);
  edited_fails("\"unit-demo.v1\"", "\"-lead\"", FG_EINVAL, "/name", &p);
  edited_fails("\"Unit demo\"", "[\"Unit demo\"]", FG_EINVAL, "/title", &p);
  edited_fails("\"used by test_model\"", "false", FG_EINVAL, "/description",
               &p);

  /* unknown members, top level and inside the objects model/ owns */
  i = edited_fails("\"format\": 1,", "\"format\": 1, \"extra\": 3,", FG_EINVAL,
                   "/extra", &p);
  if (i >= 0) CHECK(strstr(p.items[i].message, "'extra'") != NULL);
  edited_fails("\"upper\": 5,", "\"uper\": 5,", FG_EINVAL, "/decisions/1/uper",
               &p);
  edited_fails("\"require\": \"acc <= 50\"",
               "\"require\": \"acc <= 50\", \"note\": \"\"", FG_EINVAL,
               "/constraints/0/note", &p);
  edited_fails("\"probability\": 0.8", "\"probability\": 0.8, \"conf\": 0.9",
               FG_EINVAL, "/target/conf", &p);

  /* several independent errors in one document are all reported */
  {
    char *a = edit("\"format\": 1", "\"format\": 3");
    char *b = strdup(a);
    char *at = strstr(b, "unit-demo.v1");
    if (at) at[0] = 'U';
    char *c = NULL;
    at = strstr(b, "\"probability\": 0.8");
    if (at) {
      size_t off = (size_t)(at - b);
      c = malloc(strlen(b) + 8);
      memcpy(c, b, off);
      strcpy(c + off, "\"probability\": 1.5");
      strcpy(c + off + strlen("\"probability\": 1.5"),
             at + strlen("\"probability\": 0.8"));
    }
    if (c) {
      compile_fails(c, FG_EINVAL, "/format", &p);
      CHECK(find_item(&p, "/name") >= 0);
      CHECK(find_item(&p, "/target/probability") >= 0);
      CHECK_INT(p.nitems, 3);
      CHECK(p.status == FG_EINVAL);
    }
    free(a);
    free(b);
    free(c);
  }

  /* decisions */
  edited_fails("\"decisions\": [", "\"decisionz\": [", FG_EINVAL, "/decisions",
               &p);
  edited_fails("\"size\": 3, \"lower\": 0", "\"size\": 0, \"lower\": 0",
               FG_EINVAL, "/decisions/0/size", &p);
  edited_fails("\"size\": 3, \"lower\": 0", "\"size\": 2.5, \"lower\": 0",
               FG_EINVAL, "/decisions/0/size", &p);
  edited_fails("\"size\": 3, \"lower\": 0", "\"size\": 1e9, \"lower\": 0",
               FG_ELIMIT, "/decisions/0/size", &p);
  CHECK_STR(p.limit_name, "vector_length");
  edited_fails("[10, 20, 30]", "[10, 20]", FG_EINVAL, "/decisions/0/upper", &p);
  edited_fails("[10, 20, 30]", "[10, \"20\", 30]", FG_EINVAL,
               "/decisions/0/upper/1", &p);
  i = edited_fails("[10, 20, 30]", "[10, -1, 30]", FG_EINVAL,
                   "/decisions/0/upper/1", &p);
  if (i >= 0) CHECK(strstr(p.items[i].message, "lower") != NULL);
  edited_fails("\"lower\": 0, \"upper\": 5", "\"lower\": 6, \"upper\": 5",
               FG_EINVAL, "/decisions/1/upper", &p);
  edited_fails("\"lower\": 0, \"upper\": 5", "\"lower\": [0], \"upper\": 5",
               FG_EINVAL, "/decisions/1/lower", &p);
  edited_fails("\"integer\": true", "\"integer\": 1", FG_EINVAL,
               "/decisions/1/integer", &p);
  edited_fails("{\"name\": \"y\"}", "\"y\"", FG_EINVAL, "/decisions/2", &p);
  edited_fails("\"decisions\": [", "\"decisions\": {\"a\": [", FG_EINVAL, "",
               &p); /* breaks the JSON itself */

  /* uncertain inputs and dependence */
  edited_fails("\"uncertain\": [", "\"uncertainties\": [", FG_EINVAL,
               "/uncertain", &p);
  edited_fails("\"distribution\": {\"family\": \"normal\", \"mean\": 0, "
               "\"sd\": 1}",
               "\"distribution\": \"normal\"", FG_EINVAL,
               "/uncertain/0/distribution", &p);
  edited_fails("{\"name\": \"z\", \"distribution\"",
               "{\"name\": \"z\", \"size\": -1, \"distribution\"", FG_EINVAL,
               "/uncertain/0/size", &p);
  edited_fails("{\"name\": \"z\", \"distribution\"",
               "{\"name\": \"z\", \"size\": 20000, \"distribution\"", FG_ELIMIT,
               "/uncertain", &p);
  CHECK_STR(p.limit_name, "uncertain_dimensions");
  edited_fails("{\"name\": \"z\", \"distribution\"",
               "{\"name\": \"z\", \"size\": 200000, \"distribution\"",
               FG_ELIMIT, "/uncertain/0/size", &p);
  CHECK_STR(p.limit_name, "vector_length");
  edited_fails("{\"name\": \"z\", \"distribution\": {\"family\": \"normal\", "
               "\"mean\": 0, \"sd\": 1}}",
               "{\"name\": \"z\"}", FG_EINVAL, "/uncertain/0/distribution", &p);
  edited_fails("\"definitions\": [", "\"dependence\": [3], \"definitions\": [",
               FG_EINVAL, "/dependence/0", &p);
  edited_fails("\"definitions\": [", "\"dependence\": {}, \"definitions\": [",
               FG_EINVAL, "/dependence", &p);

  /* definitions */
  edited_fails("{\"name\": \"total\", \"value\": \"sum(x) + k\"}",
               "{\"name\": \"total\", \"value\": \"sum(x) + k\", "
               "\"elements\": [\"1\"]}",
               FG_EINVAL, "/definitions/1", &p);
  edited_fails("{\"name\": \"total\", \"value\": \"sum(x) + k\"}",
               "{\"name\": \"total\"}", FG_EINVAL, "/definitions/1", &p);
  edited_fails("\"value\": \"sum(x) + k\"", "\"value\": 3", FG_EINVAL,
               "/definitions/1/value", &p);
  edited_fails("[\"x[0] + z\", \"acc[0] + x[1]\"", "[\"x[0] + z\", 5",
               FG_EINVAL, "/definitions/0/elements/1", &p);
  edited_fails("\"elements\": [\"x[0] + z\", \"acc[0] + x[1]\", \"acc[1] + "
               "x[2]\"]",
               "\"elements\": []", FG_EINVAL, "/definitions/0/elements", &p);
  edited_fails("\"definitions\": [", "\"definitions\": 1, \"x_\": [", FG_EINVAL,
               "/definitions", &p);

  /* constraints */
  {
    const char *doc = "{\"format\":1,\"name\":\"m\",\"decisions\":[],"
                      "\"uncertain\":[]}";
    i = compile_fails(doc, FG_EINVAL, "/constraints", &p);
    if (i >= 0) CHECK(strstr(p.items[i].message, "missing") != NULL);
    doc = "{\"format\":1,\"name\":\"m\",\"decisions\":[],\"uncertain\":[],"
          "\"constraints\":[]}";
    i = compile_fails(doc, FG_EINVAL, "/constraints", &p);
    if (i >= 0) CHECK(strstr(p.items[i].message, "at least one") != NULL);
  }
  edited_fails("{\"name\": \"cap\", \"require\": \"acc <= 50\"}",
               "{\"name\": \"cap\"}", FG_EINVAL, "/constraints/0/require", &p);
  edited_fails("\"require\": \"acc <= 50\"", "\"require\": null", FG_EINVAL,
               "/constraints/0/require", &p);
  edited_fails("{\"name\": \"cap\", \"require\": \"acc <= 50\"}", "[]",
               FG_EINVAL, "/constraints/0", &p);

  /* objective */
  edited_fails("{\"minimize\": \"total\"}",
               "{\"minimize\": \"total\", \"maximize\": \"total\"}", FG_EINVAL,
               "/objective", &p);
  edited_fails("{\"minimize\": \"total\"}", "{}", FG_EINVAL, "/objective", &p);
  edited_fails("{\"minimize\": \"total\"}", "\"total\"", FG_EINVAL,
               "/objective", &p);
  edited_fails("{\"minimize\": \"total\"}", "{\"minimize\": 3}", FG_EINVAL,
               "/objective/minimize", &p);

  /* target */
  i = edited_fails("\"probability\": 0.8", "\"probability\": 1.5", FG_EINVAL,
                   "/target/probability", &p);
  if (i >= 0) CHECK(strstr(p.items[i].message, "1.5") != NULL);
  edited_fails("\"probability\": 0.8", "\"probability\": 1", FG_EINVAL,
               "/target/probability", &p);
  edited_fails("\"probability\": 0.8", "\"probability\": 0", FG_EINVAL,
               "/target/probability", &p);
  edited_fails("\"probability\": 0.8", "\"confidence\": \"high\"", FG_EINVAL,
               "/target/confidence", &p);
  edited_fails("{\"probability\": 0.8}", "0.8", FG_EINVAL, "/target", &p);

  /* not an object at all */
  compile_fails("[]", FG_EINVAL, "", &p);
  compile_fails("\"model\"", FG_EINVAL, "", &p);
}

/* ---- limits on counts and dimensions ---- */

static void test_limits(void) {
  fg_problem p;
  /* FG_MEMBERS_MAX + 1 constraints: refused by count, entries not walked */
  size_t cap = (size_t)(FG_MEMBERS_MAX + 1) * 40 + 256;
  char *doc = malloc(cap);
  size_t k = (size_t)snprintf(doc, cap,
                              "{\"format\":1,\"name\":\"big\",\"decisions\":"
                              "[{\"name\":\"a\"}],\"uncertain\":[],"
                              "\"constraints\":[");
  for (int i = 0; i <= FG_MEMBERS_MAX; i++)
    k += (size_t)snprintf(doc + k, cap - k,
                          "%s{\"name\":\"c%d\",\"require\":\"a<=1\"}",
                          i ? "," : "", i);
  snprintf(doc + k, cap - k, "]}");
  compile_fails(doc, FG_ELIMIT, "/constraints", &p);
  CHECK_STR(p.limit_name, "members");
  CHECK_NEAR(p.limit_value, FG_MEMBERS_MAX, 0);
  CHECK_INT(p.nitems, 1);
  free(doc);

  /* decision elements in all */
  char text[512];
  snprintf(text, sizeof text,
           "{\"format\":1,\"name\":\"wide\",\"decisions\":["
           "{\"name\":\"a\",\"size\":%d},{\"name\":\"b\",\"size\":%d}],"
           "\"uncertain\":[],\"constraints\":[{\"name\":\"c\","
           "\"require\":\"sum(a) <= 1\"}]}",
           FG_DECISION_DIMS_MAX / 2 + 1, FG_DECISION_DIMS_MAX / 2);
  compile_fails(text, FG_ELIMIT, "/decisions", &p);
  CHECK_STR(p.limit_name, "decision_dimensions");

  /* an expression longer than FG_EXPR_MAX_LENGTH */
  size_t n = FG_EXPR_MAX_LENGTH + 1;
  char *expr = malloc(n + 1);
  memset(expr, ' ', n);
  memcpy(expr, "a", 1);
  memcpy(expr + n - 4, "<=1", 3);
  expr[n] = '\0';
  doc = malloc(n + 256);
  snprintf(doc, n + 256,
           "{\"format\":1,\"name\":\"long\",\"decisions\":[{\"name\":"
           "\"a\"}],\"uncertain\":[],\"constraints\":[{\"name\":\"c\","
           "\"require\":\"%s\"}]}",
           expr);
  compile_fails(doc, FG_ELIMIT, "/constraints/0/require", &p);
  CHECK_STR(p.limit_name, "expression_length");
  free(doc);
  free(expr);
}

/* ---- the cache ---- */

static fg_model *model_named(const char *name) {
  char *doc = edit("\"unit-demo.v1\"", name);
  fg_problem p;
  fg_model *m = NULL;
  compile(doc, &p, &m);
  free(doc);
  CHECK(m != NULL);
  return m;
}

static void test_cache(void) {
  fg_model *a = model_named("\"a\""), *b = model_named("\"b\""),
           *c = model_named("\"c\"");
  if (!a || !b || !c) {
    fg_model_unref(a);
    fg_model_unref(b);
    fg_model_unref(c);
    return;
  }
  CHECK(strcmp(a->digest, b->digest) != 0);
  fg_model_cache *cache = fg_model_cache_new(2);
  CHECK(cache != NULL);
  CHECK(fg_model_cache_get(cache, a->digest) == NULL);
  fg_model_cache_put(cache, a);
  CHECK_INT(a->refs, 2);
  fg_model_cache_put(cache, a); /* again: no second reference */
  CHECK_INT(a->refs, 2);
  fg_model_cache_put(cache, b);
  fg_model *got = fg_model_cache_get(cache, a->digest); /* a is now newest */
  CHECK(got == a);
  CHECK_INT(a->refs, 3);
  fg_model_unref(got);
  fg_model_cache_put(cache, c); /* evicts b, the least recently used */
  CHECK_INT(b->refs, 1);
  CHECK(fg_model_cache_get(cache, b->digest) == NULL);
  got = fg_model_cache_get(cache, c->digest);
  CHECK(got == c);
  fg_model_unref(got);
  /* the cache's reference keeps a model alive after its owner lets go */
  char digest[FG_DIGEST_MAX];
  snprintf(digest, sizeof digest, "%s", c->digest);
  fg_model_unref(c);
  got = fg_model_cache_get(cache, digest);
  CHECK(got != NULL && strcmp(got->name, "c") == 0);
  fg_model_unref(got);
  fg_model_cache_free(cache);
  CHECK_INT(a->refs, 1);
  fg_model_unref(a);
  fg_model_unref(b);

  fg_model_cache *none = fg_model_cache_new(0);
  fg_model *d = model_named("\"d\"");
  fg_model_cache_put(none, d);
  CHECK(fg_model_cache_get(none, d ? d->digest : "") == NULL);
  fg_model_cache_free(none);
  fg_model_unref(d);
}

/* Several threads getting, putting and dropping the same few models: the
 * counts must come back exactly (run under the sanitizer build too). */
typedef struct cache_job {
  fg_model_cache *cache;
  fg_model *models[3];
} cache_job;

static void *cache_worker(void *arg) {
  cache_job *job = arg;
  for (int i = 0; i < 20000; i++) {
    fg_model *m = job->models[i % 3];
    if (i % 4 == 0) {
      fg_model_cache_put(job->cache, m);
    } else {
      fg_model *got = fg_model_cache_get(job->cache, m->digest);
      if (got && got != m) return (void *)1;
      fg_model_unref(got);
    }
  }
  return NULL;
}

static void test_cache_threads(void) {
  cache_job job = {
      fg_model_cache_new(2),
      {model_named("\"t1\""), model_named("\"t2\""), model_named("\"t3\"")}};
  if (!job.cache || !job.models[0] || !job.models[1] || !job.models[2]) return;
  pthread_t th[4];
  for (int i = 0; i < 4; i++)
    CHECK(pthread_create(&th[i], NULL, cache_worker, &job) == 0);
  for (int i = 0; i < 4; i++) {
    void *r = NULL;
    pthread_join(th[i], &r);
    CHECK(r == NULL);
  }
  fg_model_cache_free(job.cache);
  for (int i = 0; i < 3; i++) {
    CHECK_INT(job.models[i]->refs, 1);
    fg_model_unref(job.models[i]);
  }
}

int main(void) {
  test_sha256();
  test_parse();
  test_canonical();
  test_compile_valid();
  test_compile_minimal();
  test_affine_summary();
  test_compile_errors();
  test_limits();
  test_cache();
  test_cache_threads();
  return fg_test_finish();
}
