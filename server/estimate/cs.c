/*
 * estimate/cs.c -- the anytime-valid confidence sequence used to stop a
 * check early (see estimate.h for the martingale and its guarantee).
 *
 * Design: log M_n(p) is convex in p with its minimum (< 0) at the sample
 * proportion, so each endpoint is the single root of
 * log M_n(p) = log(2 / alpha) on one side of it, found by bisection (60
 * halvings reach double precision on [0, 1]). At k = 0 the lower end is 0
 * and at k = n the upper end is 1 when M stays below the threshold there.
 *
 * Thread use: pure.
 */
#include "estimate/estimate.h"

#include <math.h>

static double log_m(double p, double k, double n, double a0, double b0) {
  double lp = k > 0 ? k * log(p) : 0.0;
  double lq = n - k > 0 ? (n - k) * log1p(-p) : 0.0;
  return fg_log_beta(a0 + k, b0 + n - k) - fg_log_beta(a0, b0) - lp - lq;
}

fg_interval fg_cs_interval(uint64_t k, uint64_t n, double confidence,
                           double prior_mean) {
  fg_interval iv = {0.0, 1.0};
  if (n == 0) return iv;
  double dk = (double)k, dn = (double)n;
  double a0 = FG_CS_PRIOR_STRENGTH * prior_mean;
  double b0 = FG_CS_PRIOR_STRENGTH * (1.0 - prior_mean);
  double thr = log(2.0 / (1.0 - confidence));
  double phat = dk / dn;
  /* lower end: log M decreases on (0, phat] */
  if (k > 0) {
    double lo = 0.0, hi = phat;
    if (log_m(hi, dk, dn, a0, b0) >= thr) {
      iv.lower = phat; /* cannot happen for a proper prior; be safe */
    } else {
      for (int i = 0; i < 200 && hi - lo > 1e-17; i++) {
        double mid = 0.5 * (lo + hi);
        if (mid <= 0) break;
        if (log_m(mid, dk, dn, a0, b0) >= thr) lo = mid;
        else hi = mid;
      }
      iv.lower = lo;
    }
  }
  if (k < n) {
    double lo = phat, hi = 1.0;
    if (log_m(lo, dk, dn, a0, b0) >= thr) {
      iv.upper = phat;
    } else {
      for (int i = 0; i < 200 && hi - lo > 1e-17; i++) {
        double mid = 0.5 * (lo + hi);
        if (mid >= 1) break;
        if (log_m(mid, dk, dn, a0, b0) >= thr) hi = mid;
        else lo = mid;
      }
      iv.upper = hi;
    }
  }
  return iv;
}
