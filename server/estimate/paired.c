/*
 * estimate/paired.c -- an interval for the difference of two paired
 * proportions.
 *
 * Two candidates A and B judged on the same n scenarios give a 2x2 table:
 * both hold (e), only A (f), only B (g), neither (h). The marginals are
 * p1 = (e+f)/n for A and p2 = (e+g)/n for B, the difference
 * D = p1 - p2 = (f-g)/n. Newcombe's hybrid score interval (Newcombe 1998,
 * Statistics in Medicine 17:2635, method 10) combines the Wilson score
 * limits (l1, u1) of p1 and (l2, u2) of p2 (Wilson 1927, JASA 22:209) with
 * the phi coefficient of the table,
 *   phi = (e h - f g) / sqrt((e+f)(g+h)(e+g)(f+h)),  0 when a margin is 0,
 * as
 *   lower = D - sqrt((p1-l1)^2 - 2 phi (p1-l1)(u2-p2) + (u2-p2)^2),
 *   upper = D + sqrt((u1-p1)^2 - 2 phi (u1-p1)(p2-l2) + (p2-l2)^2).
 * Method 10 is the form without continuity correction.
 *
 * Invariants: -1 <= lower <= D <= upper <= 1; a radicand that rounding
 * makes slightly negative counts as 0. Products of counts are taken in
 * long double, exact well past 1e9 per cell.
 *
 * Thread use: pure.
 */
#include "estimate/estimate.h"

#include <math.h>

fg_interval fg_newcombe_paired(uint64_t both, uint64_t a_only, uint64_t b_only,
                               uint64_t neither, double confidence) {
  fg_interval out = {NAN, NAN};
  uint64_t n = both + a_only + b_only + neither;
  if (n == 0 || !(confidence > 0 && confidence < 1)) return out;
  double dn = (double)n;
  double p1 = (double)(both + a_only) / dn, p2 = (double)(both + b_only) / dn;
  double diff = ((double)a_only - (double)b_only) / dn;
  fg_interval w1 = fg_interval_wilson(both + a_only, n, confidence);
  fg_interval w2 = fg_interval_wilson(both + b_only, n, confidence);

  long double e = (long double)both, f = (long double)a_only,
              g = (long double)b_only, h = (long double)neither;
  long double margins = (e + f) * (g + h) * (e + g) * (f + h);
  double phi = 0;
  if (margins > 0) phi = (double)((e * h - f * g) / sqrtl(margins));

  double dl1 = p1 - w1.lower, du1 = w1.upper - p1;
  double dl2 = p2 - w2.lower, du2 = w2.upper - p2;
  double r_lo = dl1 * dl1 - 2 * phi * dl1 * du2 + du2 * du2;
  double r_hi = du1 * du1 - 2 * phi * du1 * dl2 + dl2 * dl2;
  out.lower = diff - sqrt(r_lo > 0 ? r_lo : 0);
  out.upper = diff + sqrt(r_hi > 0 ? r_hi : 0);
  if (out.lower < -1) out.lower = -1;
  if (out.upper > 1) out.upper = 1;
  return out;
}
