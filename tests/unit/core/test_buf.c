/*
 * tests/unit/core/test_buf.c -- the growable byte buffer (core/buf.c):
 * the doubling rule, the upper bound, the NUL after appended text, and a
 * failed growth leaving the buffer as it was. The expected capacities are
 * the doubling rule worked by hand (common practice for growable arrays).
 */
#include "check.h"
#include "core/buf.h"

#include <stdint.h>
#include <stdlib.h>

static void test_grow(void) {
  char *d = NULL;
  size_t cap = 0;
  CHECK(fg_buf_grow(&d, &cap, 10, 16, 0));
  CHECK_INT(cap, 16); /* the first size when it fits */
  CHECK(fg_buf_grow(&d, &cap, 16, 16, 0));
  CHECK_INT(cap, 16); /* fits already: unchanged */
  CHECK(fg_buf_grow(&d, &cap, 17, 16, 0));
  CHECK_INT(cap, 32);
  CHECK(fg_buf_grow(&d, &cap, 100, 16, 0));
  CHECK_INT(cap, 128); /* 32 -> 64 -> 128 */
  /* Held to `most` where that still fits, never below the need. */
  CHECK(fg_buf_grow(&d, &cap, 129, 16, 200));
  CHECK_INT(cap, 200);
  CHECK(fg_buf_grow(&d, &cap, 300, 16, 250));
  CHECK_INT(cap, 400);
  /* A need no doubling reaches is refused, the buffer kept. */
  char *before = d;
  CHECK(!fg_buf_grow(&d, &cap, SIZE_MAX, 16, 0));
  CHECK(d == before && cap == 400);
  free(d);
}

static void test_append(void) {
  fg_buf b = {0};
  CHECK(fg_buf_append(&b, "ab", 2, 4));
  CHECK_INT(b.len, 2);
  CHECK_INT(b.cap, 4);
  CHECK_STR(b.data, "ab");
  CHECK(fg_buf_append(&b, "cdef", 4, 4));
  CHECK_INT(b.len, 6);
  CHECK_INT(b.cap, 8); /* 6 bytes and the NUL */
  CHECK_STR(b.data, "abcdef");
  CHECK(fg_buf_append(&b, "", 0, 4));
  CHECK_STR(b.data, "abcdef");
  CHECK(!fg_buf_append(&b, "x", SIZE_MAX - 3, 4)); /* len + n overflows */
  CHECK_INT(b.len, 6);
  free(b.data);
}

int main(void) {
  test_grow();
  test_append();
  return fg_test_finish();
}
