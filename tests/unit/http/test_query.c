/*
 * tests/unit/http/test_query.c -- query parameters into a handler's
 * slots (http/query.c), through fg_http_query_pairs, what each
 * parameter libmicrohttpd hands over goes through.
 */
#include "check.h"
#include "http/http_internal.h"

#include <string.h>

static void test_query(void) {
  const char *names[] = {"limit", "after", "model"};
  const char *limit, *after, *model;
  const char **slots[] = {&limit, &after, &model};
  char unknown[FG_HTTP_PARAM_NAME_MAX];

  const char *k1[] = {"limit", "model", "limit"};
  const char *v1[] = {"10", "depot", "99"};
  CHECK(fg_http_query_pairs(k1, v1, 3, names, slots, 3, unknown));
  CHECK(limit && strcmp(limit, "10") == 0); /* the first occurrence wins */
  CHECK(model && strcmp(model, "depot") == 0);
  CHECK(after == NULL); /* absent */
  CHECK(unknown[0] == '\0');

  /* A value-less parameter is the empty string, not absent. */
  const char *k2[] = {"after"};
  const char *v2[] = {NULL};
  CHECK(fg_http_query_pairs(k2, v2, 1, names, slots, 3, unknown));
  CHECK(after && after[0] == '\0');
  CHECK(limit == NULL); /* slots are cleared on each call */

  /* A misspelt name is reported (the first one), not ignored. */
  const char *k3[] = {"limit", "modle", "x"};
  const char *v3[] = {"5", "depot", "1"};
  CHECK(!fg_http_query_pairs(k3, v3, 3, names, slots, 3, unknown));
  CHECK(strcmp(unknown, "modle") == 0);
  CHECK(limit && strcmp(limit, "5") == 0);

  /* An empty name is reported as "". */
  const char *k4[] = {NULL};
  const char *v4[] = {"1"};
  strcpy(unknown, "stale");
  CHECK(!fg_http_query_pairs(k4, v4, 1, names, slots, 3, unknown));
  CHECK(unknown[0] == '\0');

  /* A long unknown name is cut to the kept length. */
  char longname[200];
  memset(longname, 'q', sizeof longname - 1);
  longname[sizeof longname - 1] = '\0';
  const char *k5[] = {longname};
  const char *v5[] = {"1"};
  CHECK(!fg_http_query_pairs(k5, v5, 1, names, slots, 3, unknown));
  CHECK_INT((long)strlen(unknown), FG_HTTP_PARAM_NAME_MAX - 1);
}

/* The list of expected names in the 400's message. */
static void test_expected(void) {
  const char *names[] = {"count", "seed", "start", "stream"};
  char buf[64];
  fg_http_query_expected(names, 4, buf, sizeof buf);
  CHECK(strcmp(buf, "count, seed, start or stream") == 0);
  fg_http_query_expected(names, 2, buf, sizeof buf);
  CHECK(strcmp(buf, "count or seed") == 0);
  fg_http_query_expected(names, 1, buf, sizeof buf);
  CHECK(strcmp(buf, "count") == 0);
  char tiny[8];
  fg_http_query_expected(names, 4, tiny, sizeof tiny); /* cut, terminated */
  CHECK(strlen(tiny) < sizeof tiny);
}

int main(void) {
  test_query();
  test_expected();
  return fg_test_finish();
}
