/*
 * tests/reference/tools/ref_tool.c -- exposes estimate/ functions to the
 * reference scripts, which compare them with SciPy and statsmodels.
 *
 *   ref_tool interval METHOD   reads "k n level" lines, prints "lower upper"
 *                              (METHOD: clopper_pearson, wilson, jeffreys)
 *   ref_tool quantile          reads "q a b" lines, prints B^-1(q; a, b)
 *   ref_tool cs                reads "k n level prior_mean" lines, prints
 *                              the confidence sequence's "lower upper"
 *
 * Numbers are printed with 17 significant digits so nothing is lost.
 */
#include "estimate/estimate.h"

#include <stdio.h>
#include <string.h>

int main(int argc, char **argv) {
  if (argc >= 3 && strcmp(argv[1], "interval") == 0) {
    unsigned long long k, n;
    double level;
    while (scanf("%llu %llu %lf", &k, &n, &level) == 3) {
      fg_interval iv;
      if (strcmp(argv[2], "wilson") == 0) iv = fg_interval_wilson(k, n, level);
      else if (strcmp(argv[2], "jeffreys") == 0)
        iv = fg_interval_jeffreys(k, n, level);
      else iv = fg_interval_clopper_pearson(k, n, level);
      printf("%.17g %.17g\n", iv.lower, iv.upper);
    }
    return 0;
  }
  if (argc >= 2 && strcmp(argv[1], "quantile") == 0) {
    double q, a, b;
    while (scanf("%lf %lf %lf", &q, &a, &b) == 3)
      printf("%.17g\n", fg_beta_quantile(q, a, b));
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
  fprintf(stderr,
          "usage: ref_tool interval METHOD | ref_tool quantile | ref_tool cs\n");
  return 3;
}
