/*
 * estimate/cs.c -- the anytime-valid confidence sequence used to stop a
 * check early (see estimate.h for the martingale and its guarantee).
 *
 * Design: log M_n(p) is convex in p with its minimum (<= 0) at the sample
 * proportion, so each endpoint is the single root of
 * log M_n(p) = log(2 / alpha) on one side of it, found by bisection. At
 * k = 0 the lower end is 0 and at k = n the upper end is 1.
 *
 * Accuracy where targets sit near 1: the prior's weight on the failure
 * side, b0 = FG_CS_PRIOR_STRENGTH * (1 - target), is as small as 1e-14
 * while n reaches 1e11. Three things keep every digit that matters:
 *   - counts are subtracted as integers before any prior weight is added
 *     (b0 + (n - k), never (b0 + n) - k, which rounds b0 away and turns
 *     B(., b0) into B(., 0) = infinity: the old false pass);
 *   - the sequence is computed on the side of the smaller proportion:
 *     M_n(p; k, n, a0, b0) = M_n(1 - p; n - k, n, b0, a0), so with
 *     k > n/2 the interval of the complement is found on [0, 1/2] and
 *     mapped back, where a double near 0 carries full relative precision
 *     and one near 1 would not (1 - 1e-12 holds only 4 digits of 1e-12);
 *   - log p and log(1 - p) come from log and log1p of that small side.
 * The mapping back, p = 1 - x, rounds each end outwards, so the reported
 * interval never shrinks through rounding.
 *
 * Iterations: each end is a bisection of [lo, hi] that stops when
 * hi - lo <= 2^-50 hi or after FG_CS_BISECT_MAX = 1200 halvings (from an
 * interval no wider than 1/2, 1200 halvings pass below the smallest
 * subnormal, so the cap is never the reason for stopping when the root is
 * a normal double).
 *
 * Thread use: pure.
 */
#include "estimate/estimate.h"

#include <math.h>

/* log M_n(x) for x in (0, 1) with k successes of n, m = n - k failures,
 * prior Beta(a, b); every argument is formed without cancellation. */
static double log_m(double x, uint64_t k, uint64_t m, double a, double b,
                    double lbeta0) {
  double dk = (double)k, dm = (double)m;
  double lp = k > 0 ? dk * log(x) : 0.0;
  double lq = m > 0 ? dm * log1p(-x) : 0.0;
  return fg_log_beta(a + dk, b + dm) - lbeta0 - lp - lq;
}

/* The sequence for k of n when k <= n - k (the proportion is at most 1/2),
 * prior Beta(a, b). */
static fg_interval cs_small_side(uint64_t k, uint64_t n, double a, double b,
                                 double thr) {
  fg_interval iv = {0.0, 1.0};
  uint64_t m = n - k;
  double lbeta0 = fg_log_beta(a, b);
  double phat = (double)k / (double)n;
  if (k > 0) {
    /* log M decreases on (0, phat]: lower end where it crosses thr */
    double lo = 0.0, hi = phat;
    if (!(log_m(hi, k, m, a, b, lbeta0) < thr)) {
      iv.lower = 0.0; /* the minimum is <= 0 in exact arithmetic; if
                         rounding says otherwise claim nothing */
    } else {
      for (int i = 0; i < FG_CS_BISECT_MAX && hi - lo > FG_CS_REL_TOL * hi;
           i++) {
        double mid = 0.5 * (lo + hi);
        if (!(mid > lo && mid < hi)) break;
        if (log_m(mid, k, m, a, b, lbeta0) >= thr) lo = mid;
        else hi = mid;
      }
      iv.lower = lo; /* M >= thr at lo (or lo = 0): outside or at the end */
    }
  }
  /* upper end: log M increases on [phat, 1) */
  double lo = phat, hi = 1.0;
  if (!(log_m(lo, k, m, a, b, lbeta0) < thr)) {
    iv.upper = 1.0;
  } else {
    for (int i = 0; i < FG_CS_BISECT_MAX && hi - lo > FG_CS_REL_TOL * hi; i++) {
      double mid = 0.5 * (lo + hi);
      if (!(mid > lo && mid < hi)) break;
      if (log_m(mid, k, m, a, b, lbeta0) >= thr) hi = mid;
      else lo = mid;
    }
    iv.upper = hi;
  }
  return iv;
}

fg_interval fg_cs_interval(uint64_t k, uint64_t n, double confidence,
                           double prior_mean) {
  fg_interval iv = {0.0, 1.0};
  if (n == 0 || k > n) return iv;
  /* 1 - prior_mean is exact for prior_mean in [1/2, 1] (Sterbenz) */
  double a0 = FG_CS_PRIOR_STRENGTH * prior_mean;
  double b0 = FG_CS_PRIOR_STRENGTH * (1.0 - prior_mean);
  if (!(a0 > 0) || !(b0 > 0)) return iv;
  double thr = log(2.0) - log1p(-confidence);
  if (k <= n - k) return cs_small_side(k, n, a0, b0, thr);
  /* the complement: failures of n under Beta(b0, a0) */
  fg_interval c = cs_small_side(n - k, n, b0, a0, thr);
  /* p = 1 - x, each end rounded outwards (1 - v is exact for v in
   * [1/2, 1], so the tests below see the true rounding error) */
  double lower = 1.0 - c.upper;
  if (c.upper < 0.5 && 1.0 - lower < c.upper) lower = nextafter(lower, 0.0);
  double upper = 1.0 - c.lower;
  if (c.lower < 0.5 && 1.0 - upper > c.lower) upper = nextafter(upper, 1.0);
  iv.lower = lower < 0 ? 0 : lower;
  iv.upper = upper > 1 ? 1 : upper;
  return iv;
}
