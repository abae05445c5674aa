/*
 * tests/unit/modelcheck.h -- what the engine-level unit tests share
 * (engine/test_check.c, engine/test_compare.c): compiling the test's model document and
 * looking for a JSON Pointer among the problems a request left.
 *
 * Header-only with static inline functions, like check.h, since every
 * test program is one file; a compile failure is recorded as a failed
 * check. Thread use: the test program's main thread.
 */
#ifndef FG_TEST_MODELCHECK_H
#define FG_TEST_MODELCHECK_H

#include "check.h"
#include "feasgate/model.h"

#include <stdbool.h>
#include <string.h>

/* The compiled model of `doc` (NULL, with a failed check, when it does
 * not compile); the caller unrefs it. */
static inline fg_model *fg_test_model(const char *doc) {
  fg_problem p;
  fg_problem_init(&p);
  fg_model *m = NULL;
  fg_status st = fg_model_compile(doc, strlen(doc), &m, &p);
  CHECK_MSG(st == FG_OK, "compile: %s", p.detail);
  return m;
}

/* True when one of the problems collected in `p` points at `ptr`. */
static inline bool fg_test_has_pointer(const fg_problem *p, const char *ptr) {
  for (int i = 0; i < p->nitems; i++)
    if (strcmp(p->items[i].pointer, ptr) == 0) return true;
  return false;
}

#endif
