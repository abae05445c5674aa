/*
 * tests/unit/model/model_testutil.h -- what the model/ unit tests share:
 * compiling a document and expecting a problem at a JSON Pointer, and the
 * small valid model (with `edit`, a copy of it with one text replaced)
 * that the compile, validation and cache tests start from.
 *
 * Header-only with static inline functions, like check.h, since every
 * test program is one file. Thread use: the test program's main thread.
 */
#ifndef FG_TEST_MODEL_TESTUTIL_H
#define FG_TEST_MODEL_TESTUTIL_H

#include "feasgate/model.h"

#include "check.h"

#include <cJSON.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Index of the first item at `pointer`, or -1. */
static inline int find_item(const fg_problem *p, const char *pointer) {
  for (int i = 0; i < p->nitems; i++)
    if (strcmp(p->items[i].pointer, pointer) == 0) return i;
  return -1;
}

static inline void dump_problem(const fg_problem *p) {
  for (int i = 0; i < p->nitems; i++)
    fprintf(stderr, "    %s (col %d): %s\n", p->items[i].pointer,
            p->items[i].column, p->items[i].message);
}

static inline fg_status compile(const char *text, fg_problem *p, fg_model **m) {
  fg_problem_init(p);
  return fg_model_compile(text, strlen(text), m, p);
}

/* Compile `text`, expect failure with an item at `pointer`; returns the
 * item's index (or -1) so callers can look at its column and message. */
static inline int compile_fails(const char *text, fg_status want,
                                const char *pointer, fg_problem *p) {
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

/* A small valid model: a scalar normal input, a vector decision with an
 * array bound, a definition built element by element (recursion), a vector
 * constraint, a deterministic constraint and an objective. */
static const char *const valid_model =
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

/* Build a document from the valid one with `from` replaced by `to`. */
static inline char *edit(const char *from, const char *to) {
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

#endif
