/*
 * tests/reference/tools/ref_tool.c -- exposes estimate/ and the quantile
 * module (core/quantile.c) to the reference scripts, which compare them
 * with SciPy, statsmodels and mpmath.
 *
 *   ref_tool interval METHOD   reads "k n level" lines, prints "lower upper"
 *                              (METHOD: clopper_pearson, wilson, jeffreys)
 *   ref_tool interval_count METHOD
 *                              the same, prints "lower upper steps terms"
 *                              (the quantile solver's work counters)
 *   ref_tool quantile          reads "q a b" lines, prints B^-1(q; a, b)
 *   ref_tool ibeta             reads "x a b", prints "I_x 1-I_x terms"
 *   ref_tool igamma            reads "a x", prints "P Q terms"
 *   ref_tool betainv           reads "u uc a b", prints "x 1-x steps terms"
 *   ref_tool gammainv          reads "u uc a", prints "x steps terms"
 *   ref_tool tinv              reads "u uc df", prints "t steps terms"
 *   ref_tool cs                reads "k n level prior_mean" lines, prints
 *                              the confidence sequence's "lower upper"
 *
 * u and uc are both read so that either tail is exact. Numbers are printed
 * with 17 significant digits so nothing is lost.
 */
#include "core/quantile.h"
#include "estimate/estimate.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int interval(const char *method, int counted) {
  unsigned long long k, n;
  double level;
  while (scanf("%llu %llu %lf", &k, &n, &level) == 3) {
    fg_interval iv;
    fg_qcount c = {0, 0};
    if (strcmp(method, "wilson") == 0) iv = fg_interval_wilson(k, n, level);
    else if (strcmp(method, "jeffreys") == 0)
      iv = fg_interval_jeffreys_count(k, n, level, &c);
    else iv = fg_interval_clopper_pearson_count(k, n, level, &c);
    if (counted)
      printf("%.17g %.17g %d %d\n", iv.lower, iv.upper, c.steps, c.terms);
    else
      printf("%.17g %.17g\n", iv.lower, iv.upper);
  }
  return 0;
}

/* mvn SEED TARGET: reads "m n", then H (m x n, row-major) and b (m) from
 * stdin; prints "probability error rank rounds converged". */
static int mvn(uint64_t seed, double target) {
  int m, n;
  if (scanf("%d %d", &m, &n) != 2 || m < 0 || n < 0 ||
      m > FG_EXACT_ROWS_MAX || n > FG_EXACT_DIMS_MAX)
    return 2;
  double *H = malloc(((size_t)m * n + 1) * sizeof(double));
  double *b = malloc(((size_t)m + 1) * sizeof(double));
  if (!H || !b) return 2;
  for (size_t i = 0; i < (size_t)m * n; i++)
    if (scanf("%lf", &H[i]) != 1) return 2;
  for (int i = 0; i < m; i++)
    if (scanf("%lf", &b[i]) != 1) return 2;
  fg_mvn_result r;
  if (fg_mvn_probability(H, b, m, n, target, seed, &r) != FG_OK) return 1;
  printf("%.17g %.17g %d %d %d\n", r.probability, r.error, r.rank, r.rounds,
         r.converged ? 1 : 0);
  free(H), free(b);
  return 0;
}

int main(int argc, char **argv) {
  const char *cmd = argc >= 2 ? argv[1] : "";
  double a, b, x, u, uc;
  if (argc >= 3 && strcmp(cmd, "interval") == 0) return interval(argv[2], 0);
  if (argc >= 3 && strcmp(cmd, "interval_count") == 0)
    return interval(argv[2], 1);
  if (argc >= 4 && strcmp(cmd, "mvn") == 0)
    return mvn(strtoull(argv[2], NULL, 10), strtod(argv[3], NULL));
  if (strcmp(cmd, "quantile") == 0) {
    while (scanf("%lf %lf %lf", &u, &a, &b) == 3)
      printf("%.17g\n", fg_beta_quantile(u, a, b));
    return 0;
  }
  if (strcmp(cmd, "ibeta") == 0) {
    while (scanf("%lf %lf %lf", &x, &a, &b) == 3) {
      fg_qcount c = {0, 0};
      double lo, up;
      fg_q_ibeta(x, 1 - x, a, b, &lo, &up, &c);
      printf("%.17g %.17g %d\n", lo, up, c.terms);
    }
    return 0;
  }
  if (strcmp(cmd, "igamma") == 0) {
    while (scanf("%lf %lf", &a, &x) == 2) {
      fg_qcount c = {0, 0};
      double lo, up;
      fg_q_igamma(a, x, &lo, &up, &c);
      printf("%.17g %.17g %d\n", lo, up, c.terms);
    }
    return 0;
  }
  if (argc >= 2 && strcmp(argv[1], "cs") == 0) {
    unsigned long long k, n;
    double level, prior;
    while (scanf("%llu %llu %lf %lf", &k, &n, &level, &prior) == 4) {
      fg_interval iv = fg_cs_interval(k, n, level, prior);
      printf("%.17g %.17g\n", iv.lower, iv.upper);
    }
    return 0;
  }
  if (strcmp(cmd, "betainv") == 0) {
    while (scanf("%lf %lf %lf %lf", &u, &uc, &a, &b) == 4) {
      fg_qcount c = {0, 0};
      double y, r = fg_q_beta_inv(u, uc, a, b, &y, &c);
      printf("%.17g %.17g %d %d\n", r, y, c.steps, c.terms);
    }
    return 0;
  }
  if (strcmp(cmd, "gammainv") == 0) {
    while (scanf("%lf %lf %lf", &u, &uc, &a) == 3) {
      fg_qcount c = {0, 0};
      double r = fg_q_gamma_inv(u, uc, a, &c);
      printf("%.17g %d %d\n", r, c.steps, c.terms);
    }
    return 0;
  }
  if (strcmp(cmd, "tinv") == 0) {
    while (scanf("%lf %lf %lf", &u, &uc, &a) == 3) {
      fg_qcount c = {0, 0};
      double r = fg_q_t_inv(u, uc, a, &c);
      printf("%.17g %d %d\n", r, c.steps, c.terms);
    }
    return 0;
  }
  fprintf(stderr, "usage: ref_tool interval[_count] METHOD | quantile | "
                  "ibeta | igamma | betainv | gammainv | tinv | cs\n");
  return 3;
}
