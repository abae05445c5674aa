/*
 * tests/unit/core/test_clock.c -- the one clock and seed source and its
 * seam for tests (core/clock.c).
 */
#include "check.h"
#include "feasgate/clock.h"
#include "feasgate/limits.h"

#include <stdint.h>

/* A test's source replaces the system's for readings, timestamps and
 * seeds, and NULL restores it. The epoch second 1796236800 is
 * 2026-12-02T18:40:00Z (Python's datetime). */
static double fake_mono(void *ctx) { return *(double *)ctx; }
static double fake_wall(void *ctx) { (void)ctx; return 1796236800.25; }
static uint64_t fake_seed(void *ctx) { (void)ctx; return ~0ull; }

static void test_clock_seam(void) {
  double t = 42.5;
  fg_clock_source src = {.monotonic = fake_mono, .wall = fake_wall,
                         .seed = fake_seed, .ctx = &t};
  fg_clock_use(&src);
  CHECK_NEAR(fg_time_monotonic(), 42.5, 0);
  t = 43.0;
  CHECK_NEAR(fg_time_monotonic(), 43.0, 0);
  CHECK_NEAR(fg_time_wall(), 1796236800.25, 0);
  char buf[48];
  fg_time_now_rfc3339(buf, sizeof buf);
  CHECK_STR(buf, "2026-12-02T18:40:00Z");
  fg_time_now_rfc3339_ms(buf, sizeof buf);
  CHECK_STR(buf, "2026-12-02T18:40:00.250Z");
  CHECK(fg_seed_draw() == FG_SEED_MAX); /* masked to the seed range */
  fg_clock_use(NULL);
  double a = fg_time_monotonic(), b = fg_time_monotonic();
  CHECK(b >= a && a != 43.0);
  CHECK(fg_time_wall() > 1.7e9); /* after 2023: the system's clock */
  CHECK(fg_seed_draw() <= FG_SEED_MAX);
  /* A member left NULL keeps the system's. */
  fg_clock_source only_seed = {.seed = fake_seed};
  fg_clock_use(&only_seed);
  CHECK(fg_time_wall() > 1.7e9);
  CHECK(fg_seed_draw() == FG_SEED_MAX);
  fg_clock_use(NULL);
}

int main(void) {
  test_clock_seam();
  return fg_test_finish();
}
