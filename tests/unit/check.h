/*
 * tests/unit/check.h -- the small assertion header of the unit tests.
 *
 * CHECK(cond) and the CHECK_* forms record a failure with file and line and
 * go on; fg_test_finish() prints the closing line "N passed, N failed" and
 * returns the exit status (non-zero when anything failed). A test program
 * that checks nothing fails: fg_test_finish refuses a run of zero checks.
 */
#ifndef FG_TEST_CHECK_H
#define FG_TEST_CHECK_H

#include <math.h>
#include <stdio.h>
#include <string.h>

static int fg_test_passed, fg_test_failed;

#define CHECK(cond)                                                            \
  do {                                                                         \
    if (cond) {                                                                \
      fg_test_passed++;                                                        \
    } else {                                                                   \
      fg_test_failed++;                                                        \
      fprintf(stderr, "%s:%d: check failed: %s\n", __FILE__, __LINE__, #cond); \
    }                                                                          \
  } while (0)

#define CHECK_MSG(cond, ...)                                                   \
  do {                                                                         \
    if (cond) {                                                                \
      fg_test_passed++;                                                        \
    } else {                                                                   \
      fg_test_failed++;                                                        \
      fprintf(stderr, "%s:%d: check failed: %s: ", __FILE__, __LINE__, #cond); \
      fprintf(stderr, __VA_ARGS__);                                            \
      fputc('\n', stderr);                                                     \
    }                                                                          \
  } while (0)

/* |a - b| <= tol (absolute), NaN never passes unless both are NaN. */
#define CHECK_NEAR(a, b, tol)                                                  \
  do {                                                                         \
    double fg_a_ = (double)(a), fg_b_ = (double)(b);                           \
    int fg_ok_ = (isnan(fg_a_) && isnan(fg_b_)) ||                             \
                 fabs(fg_a_ - fg_b_) <= (double)(tol);                         \
    CHECK_MSG(fg_ok_, "%s = %.17g, %s = %.17g, tol %g", #a, fg_a_, #b, fg_b_, \
              (double)(tol));                                                  \
  } while (0)

#define CHECK_INT(a, b)                                                        \
  do {                                                                         \
    long long fg_a_ = (long long)(a), fg_b_ = (long long)(b);                  \
    CHECK_MSG(fg_a_ == fg_b_, "%s = %lld, %s = %lld", #a, fg_a_, #b, fg_b_);   \
  } while (0)

#define CHECK_STR(a, b)                                                        \
  do {                                                                         \
    const char *fg_a_ = (a), *fg_b_ = (b);                                     \
    CHECK_MSG(fg_a_ && fg_b_ && strcmp(fg_a_, fg_b_) == 0, "%s = \"%s\", "     \
              "%s = \"%s\"", #a, fg_a_ ? fg_a_ : "(null)", #b,                 \
              fg_b_ ? fg_b_ : "(null)");                                       \
  } while (0)

static inline int fg_test_finish(void) {
  printf("%d passed, %d failed\n", fg_test_passed, fg_test_failed);
  if (fg_test_passed + fg_test_failed == 0) {
    fprintf(stderr, "no checks ran\n");
    return 1;
  }
  return fg_test_failed ? 1 : 0;
}

#endif
