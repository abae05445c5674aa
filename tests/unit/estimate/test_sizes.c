/*
 * tests/unit/estimate/test_sizes.c -- sample sizes and the paired-difference
 * interval (estimate/sizes.c, estimate/paired.c).
 *
 * References here are closed forms: the normal quantiles z_0.975 =
 * 1.959963984540054 and z_0.9 = 1.2815515655446004 (standard normal table
 * values, recalled from memory), the scenario bound for d = 1 and d = 2
 * where the binomial tail has one or two terms (Campi & Garatti 2008, SIAM
 * J. Optim. 19:1211; with discarded scenarios Campi & Garatti 2011, J.
 * Optim. Theory Appl. 148:257), and Newcombe's method 10 (Newcombe 1998,
 * Statistics in Medicine 17:2635) evaluated from its definition with the
 * Wilson (1927) limits in closed form. The full comparison with SciPy lives
 * in tests/reference/test_sizes.py and test_paired.py.
 */
#include "check.h"
#include "estimate/estimate.h"

#include <stdint.h>
#include <stdlib.h>

#define Z975 1.959963984540054
#define Z90 1.2815515655446004

static void test_normal_forms(void) {
  fg_problem p;
  fg_problem_init(&p);
  double n;
  /* Worst case p = 1/2: ceil(z^2 / 4 / h^2). */
  CHECK(fg_size_half_width(0.002, 0.95, -1, &n, &p) == FG_OK);
  CHECK_NEAR(n, ceil(Z975 * Z975 * 0.25 / (0.002 * 0.002)), 0);
  CHECK_NEAR(n, 240092, 0);
  CHECK(fg_size_half_width(0.01, 0.95, 0.9, &n, &p) == FG_OK);
  CHECK_NEAR(n, ceil(Z975 * Z975 * 0.09 / 1e-4), 0); /* 3458 */
  /* Power: target 0.9, true 0.93, 95%, power 0.9. */
  CHECK(fg_size_power(0.9, 0.93, 0.95, 0.9, &n, &p) == FG_OK);
  double r = (Z975 * sqrt(0.09) + Z90 * sqrt(0.93 * 0.07)) / 0.03;
  CHECK_NEAR(n, ceil(r * r), 0);
  CHECK_NEAR(n, 931, 0);
  /* Power 1/2: z_power = 0, the half-width form at h = p - t with the
   * target's variance. */
  CHECK(fg_size_power(0.9, 0.95, 0.95, 0.5, &n, &p) == FG_OK);
  CHECK_NEAR(n, ceil(Z975 * Z975 * 0.09 / 0.0025), 1);
  CHECK(p.status == FG_OK);

  const double bad[][4] = {
      {0, 0.95, -1, 0}, {1, 0.95, -1, 0}, {0.01, 1, -1, 0}, {0.01, 0.95, 1, 0}};
  for (size_t i = 0; i < sizeof bad / sizeof *bad; i++) {
    fg_problem_init(&p);
    CHECK(fg_size_half_width(bad[i][0], bad[i][1], bad[i][2], &n, &p) ==
          FG_EINVAL);
    CHECK(isnan(n));
  }
  fg_problem_init(&p);
  CHECK(fg_size_power(0.9, 0.85, 0.95, 0.9, &n, &p) == FG_EINVAL);
  CHECK(strstr(p.detail, "probability") != NULL);
  fg_problem_init(&p);
  CHECK(fg_size_power(0.9, 0.95, 0.95, 0.3, &n, &p) == FG_EINVAL);
  fg_problem_init(&p);
  CHECK(fg_size_half_width(1e-9, 0.95, -1, &n, &p) == FG_ELIMIT);
  CHECK_STR(p.limit_name, "sample_size_samples");
}

/* The bound for d = 1, k = 0 is (1-eps)^N; for d = 2, k = 0 and for
 * d = 1, k = 1 it is (1-eps)^N + N eps (1-eps)^(N-1). */
static double bound_two_terms(double n, double eps) {
  return exp(n * log1p(-eps)) + n * eps * exp((n - 1) * log1p(-eps));
}

static void test_scenario_bound(void) {
  const double eps[] = {0.3, 0.05, 1e-3, 1e-6};
  const double ns[] = {1, 2, 10, 100, 1000, 1e5, 1e7};
  double worst = 0;
  for (size_t i = 0; i < sizeof eps / sizeof *eps; i++)
    for (size_t j = 0; j < sizeof ns / sizeof *ns; j++) {
      double e = eps[i], n = ns[j];
      double one = fg_scenario_log_bound(n, e, 1, 0);
      double want = n * log1p(-e);
      double err = fabs(one - want) / fmax(1, fabs(want));
      if (err > worst) worst = err;
      CHECK_MSG(err < 1e-12, "d=1 N=%g eps=%g: %.17g vs %.17g", n, e, one,
                want);
      if (n >= 2) {
        double two = fg_scenario_log_bound(n, e, 2, 0);
        double w2 = log(bound_two_terms(n, e));
        if (isfinite(w2)) {
          CHECK_MSG(fabs(two - w2) < 1e-11 * fmax(1, fabs(w2)),
                    "d=2 N=%g eps=%g: %.17g vs %.17g", n, e, two, w2);
          /* One discarded scenario with d = 1: C(1,1) = 1, same tail. */
          CHECK_NEAR(fg_scenario_log_bound(n, e, 1, 1), two,
                     1e-12 * fmax(1, fabs(w2)));
          /* d = 2, k = 1: C(2,1) = 2 times the three-term tail. */
          double t3 = bound_two_terms(n, e) +
                      n * (n - 1) / 2 * e * e * exp((n - 2) * log1p(-e));
          double w3 = log(2 * t3);
          if (isfinite(w3))
            CHECK_NEAR(fg_scenario_log_bound(n, e, 2, 1), w3,
                       1e-11 * fmax(1, fabs(w3)));
        }
      }
    }
  printf("scenario bound d=1: worst relative error of the log %.2e\n", worst);
  /* N <= k+d-1: the tail is 1, the bound C(k+d-1, k). */
  CHECK_NEAR(fg_scenario_log_bound(3, 0.1, 3, 2), log(6.0), 1e-13); /* C(4,2) */
  CHECK_NEAR(fg_scenario_log_bound(1, 0.1, 2, 0), 0.0, 0);
}

static void test_scenario_inverse(void) {
  fg_problem p;
  fg_problem_init(&p);
  uint64_t n;
  /* d = 1: smallest N with (1-eps)^N <= beta is ceil(log beta / log(1-eps)). */
  const double eps[] = {0.05, 0.01, 1e-4};
  const double betas[] = {1e-3, 1e-6, 1e-12, 1e-100};
  for (size_t i = 0; i < 3; i++)
    for (size_t j = 0; j < 4; j++) {
      double want = ceil(log(betas[j]) / log1p(-eps[i]));
      CHECK(fg_scenario_size(eps[i], betas[j], 1, 0, &n, &p) == FG_OK);
      CHECK_MSG((double)n == want, "eps %g beta %g: N %llu, want %.0f", eps[i],
                betas[j], (unsigned long long)n, want);
      /* The inverse: eps = 1 - beta^(1/N). */
      double e;
      CHECK(fg_scenario_epsilon(n, betas[j], 1, 0, &e, &p) == FG_OK);
      double ew = -expm1(log(betas[j]) / (double)n);
      CHECK_MSG(fabs(e - ew) <= 2e-12 * ew,
                "N %llu beta %g: eps %.17g want "
                "%.17g",
                (unsigned long long)n, betas[j], e, ew);
      CHECK(e <= eps[i] * (1 + 1e-12));
    }
  /* Minimality with more decisions and discarded scenarios. */
  const uint64_t ds[] = {2, 12, 100}, ks[] = {0, 5, 200};
  for (size_t i = 0; i < 3; i++)
    for (size_t j = 0; j < 3; j++) {
      CHECK(fg_scenario_size(0.05, 1e-6, ds[i], ks[j], &n, &p) == FG_OK);
      CHECK(fg_scenario_log_bound((double)n, 0.05, ds[i], ks[j]) <= log(1e-6));
      CHECK(fg_scenario_log_bound((double)n - 1, 0.05, ds[i], ks[j]) >
            log(1e-6));
    }
  CHECK(p.status == FG_OK);

  fg_problem_init(&p);
  CHECK(fg_scenario_size(0, 1e-6, 2, 0, &n, &p) == FG_EINVAL);
  fg_problem_init(&p);
  CHECK(fg_scenario_size(0.05, 1, 2, 0, &n, &p) == FG_EINVAL);
  fg_problem_init(&p);
  CHECK(fg_scenario_size(0.05, 1e-6, 0, 0, &n, &p) == FG_EINVAL);
  fg_problem_init(&p);
  CHECK(fg_scenario_size(0.05, 1e-6, FG_SIZE_DECISIONS_MAX + 1, 0, &n, &p) ==
        FG_ELIMIT);
  CHECK_STR(p.limit_name, "sample_size_decisions");
  fg_problem_init(&p);
  CHECK(fg_scenario_size(0.05, 1e-6, 1, FG_SIZE_DISCARDED_MAX + 1, &n, &p) ==
        FG_ELIMIT);
  CHECK_STR(p.limit_name, "sample_size_discarded");
  fg_problem_init(&p);
  CHECK(fg_scenario_size(1e-12, 1e-6, 10, 0, &n, &p) == FG_ELIMIT);
  CHECK_STR(p.limit_name, "sample_size_scenarios");
  double e;
  fg_problem_init(&p);
  CHECK(fg_scenario_epsilon(11, 1e-6, 12, 0, &e, &p) == FG_EINVAL);
  CHECK(strstr(p.detail, "scenarios") != NULL);
}

static fg_status query(const char *const *kv, fg_size_answer *a,
                       fg_problem *p) {
  fg_size_query q;
  memset(&q, 0, sizeof q);
  fg_problem_init(p);
  for (int i = 0; kv[i]; i += 2)
    fg_size_query_set(&q, kv[i], kv[i + 1], p);
  if (p->status != FG_OK) return p->status;
  return fg_size_query_solve(&q, a, p);
}

static void test_query(void) {
  fg_size_answer a;
  fg_problem p;
  const char *hw[] = {"half_width", "0.002", "confidence", "0.95", NULL};
  CHECK(query(hw, &a, &p) == FG_OK);
  CHECK(a.method == FG_SIZE_NORMAL_HALF_WIDTH && a.samples == 240092);
  CHECK_STR(fg_size_method_name(a.method), "normal_half_width");
  const char *sc[] = {"epsilon",   "0.05", "beta", "1e-6",
                      "decisions", "12",   NULL};
  CHECK(query(sc, &a, &p) == FG_OK);
  CHECK(a.method == FG_SIZE_CAMPI_GARATTI_2008 && !a.gives_epsilon);
  CHECK(a.bound <= 1e-6 && a.scenarios > 12);
  const char *sk[] = {"scenarios", "1000",      "beta", "1e-6", "decisions",
                      "12",        "discarded", "3",    NULL};
  CHECK(query(sk, &a, &p) == FG_OK);
  CHECK(a.method == FG_SIZE_CAMPI_GARATTI_2011 && a.gives_epsilon);
  CHECK(a.epsilon > 0 && a.epsilon < 1 && a.bound <= 1e-6);

  const char *amb[] = {"half_width", "0.01", "epsilon", "0.05", NULL};
  CHECK(query(amb, &a, &p) == FG_EINVAL);
  CHECK(strstr(p.detail, "ambiguous") && strstr(p.detail, "half_width") &&
        strstr(p.detail, "epsilon"));
  const char *miss[] = {"target", "0.9", "confidence", "0.95", NULL};
  CHECK(query(miss, &a, &p) == FG_EINVAL);
  CHECK_INT(p.nitems, 2); /* probability and power */
  const char *stray[] = {"half_width", "0.01", "confidence", "0.95",
                         "beta",       "0.1",  NULL};
  CHECK(query(stray, &a, &p) == FG_EINVAL);
  CHECK(strstr(p.detail, "beta") != NULL);
  const char *twice[] = {"beta", "0.1", "beta", "0.2", NULL};
  CHECK(query(twice, &a, &p) == FG_EINVAL);
  CHECK(strstr(p.detail, "more than once") != NULL);
  const char *unk[] = {"alpha", "0.1", NULL};
  CHECK(query(unk, &a, &p) == FG_EINVAL);
  CHECK(strstr(p.detail, "alpha") != NULL);
  const char *nan[] = {"half_width", "nan", "confidence", "0.95", NULL};
  CHECK(query(nan, &a, &p) == FG_EINVAL);
  const char *frac[] = {"epsilon",   "0.05", "beta", "0.1",
                        "decisions", "1.5",  NULL};
  CHECK(query(frac, &a, &p) == FG_EINVAL);
  const char *none[] = {NULL};
  CHECK(query(none, &a, &p) == FG_EINVAL);
  CHECK(strstr(p.detail, "missing") != NULL);
}

/* Wilson (1927) limits in closed form. */
static void wilson(double k, double n, double z, double *lo, double *hi) {
  double ph = k / n, z2 = z * z;
  double c = (ph + z2 / (2 * n)) / (1 + z2 / n);
  double w = z / (1 + z2 / n) * sqrt(ph * (1 - ph) / n + z2 / (4 * n * n));
  *lo = c - w;
  *hi = c + w;
}

/* Method 10 from its definition, for the unit check. */
static fg_interval newcombe_def(double e, double f, double g, double h,
                                double z) {
  double n = e + f + g + h, p1 = (e + f) / n, p2 = (e + g) / n;
  double l1, u1, l2, u2;
  wilson(e + f, n, z, &l1, &u1);
  wilson(e + g, n, z, &l2, &u2);
  double den = (e + f) * (g + h) * (e + g) * (f + h);
  double phi = den > 0 ? (e * h - f * g) / sqrt(den) : 0;
  double d = (f - g) / n;
  fg_interval iv;
  iv.lower = d - sqrt((p1 - l1) * (p1 - l1) - 2 * phi * (p1 - l1) * (u2 - p2) +
                      (u2 - p2) * (u2 - p2));
  iv.upper = d + sqrt((u1 - p1) * (u1 - p1) - 2 * phi * (u1 - p1) * (p2 - l2) +
                      (p2 - l2) * (p2 - l2));
  return iv;
}

static void test_newcombe(void) {
  const uint64_t tables[][4] = {
      {800, 100, 50, 50}, {10, 3, 1, 6}, {0, 5, 5, 0},
      {50, 0, 0, 50},     {1, 0, 0, 0},  {930000, 12000, 8000, 50000}};
  for (size_t i = 0; i < sizeof tables / sizeof *tables; i++) {
    const uint64_t *t = tables[i];
    fg_interval iv = fg_newcombe_paired(t[0], t[1], t[2], t[3], 0.95);
    fg_interval want = newcombe_def((double)t[0], (double)t[1], (double)t[2],
                                    (double)t[3], Z975);
    CHECK_NEAR(iv.lower, fmax(-1, want.lower), 1e-9);
    CHECK_NEAR(iv.upper, fmin(1, want.upper), 1e-9);
    double d =
        ((double)t[1] - (double)t[2]) / (double)(t[0] + t[1] + t[2] + t[3]);
    CHECK(iv.lower <= d + 1e-15 && d <= iv.upper + 1e-15);
    /* Swapping A and B mirrors the interval. */
    fg_interval sw = fg_newcombe_paired(t[0], t[2], t[1], t[3], 0.95);
    CHECK_NEAR(sw.lower, -iv.upper, 1e-13);
    CHECK_NEAR(sw.upper, -iv.lower, 1e-13);
  }
  /* Identical candidates (no discordant scenarios): the interval still has
   * width and contains 0. */
  fg_interval same = fg_newcombe_paired(70, 0, 0, 30, 0.95);
  CHECK(same.lower < 0 && same.upper > 0);
  /* Higher confidence widens it. */
  fg_interval a = fg_newcombe_paired(800, 100, 50, 50, 0.9);
  fg_interval b = fg_newcombe_paired(800, 100, 50, 50, 0.99);
  CHECK(b.lower < a.lower && b.upper > a.upper);
  fg_interval empty = fg_newcombe_paired(0, 0, 0, 0, 0.95);
  CHECK(isnan(empty.lower) && isnan(empty.upper));
}

int main(void) {
  test_normal_forms();
  test_scenario_bound();
  test_scenario_inverse();
  test_query();
  test_newcombe();
  return fg_test_finish();
}
