/*
 * tests/unit/test_core.c -- the problem collector and JSON Pointers, the
 * limits' names, and closed forms of the quantile module (core/quantile.c).
 * Pointer escaping follows RFC 6901 section 3 (~ as ~0, / as ~1).
 * Quantile closed forms (Abramowitz & Stegun 26.7.1 and 6.5; the sweeps
 * against SciPy and mpmath are tests/reference/test_quantiles.py):
 * t with 1 df is Cauchy, tan(pi (u - 1/2)); t with 2 df is
 * (2u - 1)/sqrt(2u(1-u)); gamma with shape 1 is -log(1 - u); beta(a, 1)
 * is u^(1/a); I_x(a, b) + I_{1-x}(b, a) = 1.
 */
#include "check.h"
#include "core/quantile.h"
#include "feasgate/clock.h"
#include "feasgate/status.h"

#include <math.h>
#include <stdint.h>
#include <string.h>

/* Closed forms and work caps of core/quantile.c. */
static void test_quantile(void) {
  fg_qcount cnt = {0, 0};
  CHECK_NEAR(fg_q_t_inv(0.2, 0.8, 1, &cnt), tan(M_PI * (0.2 - 0.5)), 1e-14);
  CHECK_NEAR(fg_q_t_inv(0.9, 0.1, 2, &cnt), 0.8 / sqrt(2 * 0.9 * 0.1), 1e-13);
  CHECK(fg_q_t_inv(0.5, 0.5, 7, &cnt) == 0);
  CHECK_NEAR(fg_q_gamma_inv(0.3, 0.7, 1, &cnt), -log1p(-0.3), 1e-14);
  /* the upper tail at 1e-300: -log(1e-300), where 1 - uc is exactly 1 */
  CHECK_NEAR(fg_q_gamma_inv(1.0, 1e-300, 1, &cnt) / (300 * log(10)), 1, 1e-14);
  CHECK_NEAR(fg_q_beta_inv(0.3, 0.7, 2.5, 1, NULL, &cnt), pow(0.3, 1 / 2.5), 1e-14);
  double y, x = fg_q_beta_inv(1e-9, 1 - 1e-9, 3, 4, &y, &cnt);
  double lo, up;
  fg_q_ibeta(x, y, 3, 4, &lo, &up, &cnt);
  CHECK_NEAR(lo / 1e-9, 1, 1e-12);
  /* very large parameters end and stay inside (0, 1) (the asymptotic
   * form; GSL's inverse did not return here) */
  x = fg_q_beta_inv(0.5, 0.5, 1e6, 1e6, &y, &cnt);
  CHECK(fabs(x - 0.5) < 1e-6 && isfinite(y));
  x = fg_q_beta_inv(0.025, 0.975, 9009382, 990619, NULL, &cnt);
  CHECK(x > 0.9 && x < 0.901);
  double l1, u1, l2, u2;
  fg_q_ibeta(0.3, 0.7, 2.5, 7.5, &l1, &u1, &cnt);
  fg_q_ibeta(0.7, 0.3, 7.5, 2.5, &l2, &u2, &cnt);
  CHECK_NEAR(l1, u2, 1e-15);
  CHECK(cnt.steps > 0 && cnt.terms > 0 && cnt.terms <= FG_Q_TERMS_MAX);
}

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

/* The clock seam (core/clock.c): a test's source replaces the system's
 * for readings, timestamps and seeds, and NULL restores it. The epoch
 * second 1796236800 is 2026-12-02T18:40:00Z (Python's datetime). */
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
  test_quantile();
  test_clock_seam();
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
  fg_problem_set(&p, FG_ENOTFOUND, "no model '%s'", "x");
  CHECK_STR(p.detail, "no model 'x'");
  CHECK_INT(p.nitems, 0);
  return fg_test_finish();
}
