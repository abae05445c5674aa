/*
 * tests/unit/model/test_json.c -- the model module's JSON layer: SHA-256,
 * strict parsing and the canonical text.
 *
 * Covers: SHA-256 digests against the published examples of FIPS 180-2
 * ("abc", the empty string, the 448- and 896-bit messages, a million 'a';
 * the digests agree with coreutils' sha256sum) and lengths around the
 * padding boundary; strict JSON parsing (the grammar of RFC 8259, valid
 * UTF-8 and escapes; duplicate keys, which RFC 8259 only advises against,
 * refused by the project's rule) with the byte offset of the fault; the
 * canonical text (keys in byte order, numbers as the shortest text that
 * reads back to the same double), whose expected texts are worked out by
 * hand beside each check.
 */
#include "model_testutil.h"

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

int main(void) {
  test_sha256();
  test_parse();
  test_canonical();
  return fg_test_finish();
}
