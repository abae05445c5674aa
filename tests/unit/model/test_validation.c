/*
 * tests/unit/model/test_validation.c -- model documents the compiler
 * refuses.
 *
 * Covers: malformed JSON, expression errors, every validation rule of the
 * document, each refusal with its status and a problem item at the JSON
 * Pointer (RFC 6901) of the fault, and the limits on counts and dimensions
 * (FG_ELIMIT naming the limit of include/feasgate/limits.h). The rules are
 * the project's own document format; expected pointers and messages are
 * worked out by hand beside each check.
 */
#include "model_testutil.h"

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

int main(void) {
  test_compile_errors();
  test_limits();
  return fg_test_finish();
}
