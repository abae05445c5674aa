/*
 * tests/unit/core/test_problem.c -- the problem collector, JSON Pointers
 * and the limits' names (core/problem.c, core/limits.c).
 * Pointer escaping follows RFC 6901 section 3 (~ as ~0, / as ~1).
 */
#include "check.h"
#include "feasgate/status.h"

#include <string.h>

/* The names of the limits (core/limits.c): one per fg_limit, non-empty,
 * distinct, lower case with underscores (as GET /v1/limits shows them). */
static void test_limit_names(void) {
  for (int i = 0; i < FG_LIMIT_COUNT; i++) {
    const char *a = fg_limit_name((fg_limit)i);
    CHECK(a && a[0] && strcmp(a, "?") != 0);
    CHECK(strspn(a, "abcdefghijklmnopqrstuvwxyz_") == strlen(a));
    for (int j = 0; j < i; j++)
      CHECK_MSG(strcmp(a, fg_limit_name((fg_limit)j)) != 0,
                "limit name %s twice", a);
  }
  CHECK_STR(fg_limit_name(FG_LIMIT_TABLE_CELLS), "table_cells");
  CHECK_STR(fg_limit_name(FG_LIMIT_MAX_BODY), "max_body");
  CHECK_STR(fg_limit_name(FG_LIMIT_COUNT), "?");
}

int main(void) {
  test_limit_names();
  char buf[FG_POINTER_MAX];
  fg_pointer_join(buf, sizeof buf, "/constraints", "a/b~c");
  CHECK_STR(buf, "/constraints/a~1b~0c");
  fg_pointer_index(buf, sizeof buf, "/constraints", 12);
  CHECK_STR(buf, "/constraints/12");
  fg_pointer_join(buf, sizeof buf, "", "decision");
  CHECK_STR(buf, "/decision");
  char tiny[8];
  fg_pointer_join(tiny, sizeof tiny, "/abcdef", "ghij"); /* truncates safely */
  CHECK(strlen(tiny) < sizeof tiny);

  fg_problem p;
  fg_problem_init(&p);
  CHECK(p.status == FG_OK && p.byte_offset == -1);
  CHECK(fg_problem_add(&p, FG_EINVAL, "/x", 3, "bad %s", "thing") == FG_EINVAL);
  CHECK_INT(p.nitems, 1);
  CHECK_INT(p.items[0].column, 3);
  CHECK_STR(p.items[0].message, "bad thing");
  CHECK_STR(p.detail, "bad thing at /x");
  CHECK_STR(p.title, "invalid input");
  /* A later fault keeps the first status and detail. */
  fg_problem_limit(&p, "/y", FG_LIMIT_VECTOR_LENGTH, 100, "too long");
  CHECK(p.status == FG_EINVAL);
  CHECK_STR(p.limit_name, "vector_length");
  CHECK_STR(p.detail, "bad thing at /x");
  for (int i = 0; i < FG_PROBLEM_MAX_ITEMS + 5; i++)
    fg_problem_add(&p, FG_EINVAL, "/z", 0, "more");
  CHECK_INT(p.nitems, FG_PROBLEM_MAX_ITEMS);
  CHECK_INT(p.dropped, 7);
  CHECK_INT(fg_status_http(FG_ENOTFOUND), 404);
  CHECK_INT(fg_status_http(FG_EBUSY), 503);
  CHECK_INT(fg_status_http(FG_ECONFLICT), 409);
  CHECK_INT(fg_status_http(FG_EGONE), 410);
  fg_problem_init(&p);
  CHECK(fg_problem_unknown_member(&p, "a/b", "x, y") == FG_EINVAL);
  CHECK_STR(p.items[0].pointer, "/a~1b");
  CHECK_STR(p.items[0].message, "unknown member 'a/b' (known: x, y)");
  fg_problem_init(&p);
  fg_problem_set(&p, FG_ENOTFOUND, "no model '%s'", "x");
  CHECK_STR(p.detail, "no model 'x'");
  CHECK_INT(p.nitems, 0);
  return fg_test_finish();
}
