/*
 * estimate/interval.c -- binomial intervals, the verdict rule and the
 * samples-to-settle estimate.
 *
 * Design: every Clopper-Pearson and Jeffreys endpoint is a beta quantile
 * from core/quantile.c (bounded work, accurate from either tail for any
 * n; GSL's gsl_cdf_beta_Pinv returns NaN or does not return for parameters
 * in the millions, so it is not used). Wilson is closed form.
 *
 * Thread use: pure functions.
 */
#include "estimate/estimate.h"

#include "core/quantile.h"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <math.h>
#include <stddef.h>

/* GSL's default error handler aborts the process; feasgate checks every
 * result itself, so the handler is switched off as soon as this library
 * is loaded. */
__attribute__((constructor)) static void estimate_gsl_quiet(void) {
  gsl_set_error_handler_off();
}

double fg_log_beta(double a, double b) { return fg_q_log_beta(a, b); }

double fg_beta_quantile(double q, double a, double b) {
  return fg_q_beta_inv(q, 1 - q, a, b, NULL, NULL);
}

static double z_of(double confidence) {
  return gsl_cdf_ugaussian_Qinv((1.0 - confidence) / 2.0);
}

/* Both tails of the interval's beta quantiles: the lower endpoint is the
 * alpha/2 quantile, the upper the 1 - alpha/2 one, passed as (u, uc) pairs
 * so neither is formed as 1 - small. */
fg_interval fg_interval_clopper_pearson_count(uint64_t k, uint64_t n,
                                              double confidence,
                                              fg_qcount *cnt) {
  double a = 1.0 - confidence, dk = (double)k, dn = (double)n;
  fg_interval iv = {0.0, 1.0};
  if (n == 0) return iv;
  if (k > 0) iv.lower = fg_q_beta_inv(a / 2, 1 - a / 2, dk, dn - dk + 1, NULL, cnt);
  if (k < n) iv.upper = fg_q_beta_inv(1 - a / 2, a / 2, dk + 1, dn - dk, NULL, cnt);
  return iv;
}

fg_interval fg_interval_clopper_pearson(uint64_t k, uint64_t n,
                                        double confidence) {
  return fg_interval_clopper_pearson_count(k, n, confidence, NULL);
}

fg_interval fg_interval_jeffreys_count(uint64_t k, uint64_t n,
                                       double confidence, fg_qcount *cnt) {
  double a = 1.0 - confidence, dk = (double)k, dn = (double)n;
  fg_interval iv = {0.0, 1.0};
  if (n == 0) return iv;
  if (k > 0)
    iv.lower = fg_q_beta_inv(a / 2, 1 - a / 2, dk + 0.5, dn - dk + 0.5, NULL, cnt);
  if (k < n)
    iv.upper = fg_q_beta_inv(1 - a / 2, a / 2, dk + 0.5, dn - dk + 0.5, NULL, cnt);
  return iv;
}

fg_interval fg_interval_jeffreys(uint64_t k, uint64_t n, double confidence) {
  return fg_interval_jeffreys_count(k, n, confidence, NULL);
}

fg_interval fg_interval_wilson(uint64_t k, uint64_t n, double confidence) {
  fg_interval iv = {0.0, 1.0};
  if (n == 0) return iv;
  double z = z_of(confidence), dn = (double)n, p = (double)k / dn;
  double z2 = z * z, denom = 1 + z2 / dn;
  double centre = (p + z2 / (2 * dn)) / denom;
  double half = z / denom * sqrt(p * (1 - p) / dn + z2 / (4 * dn * dn));
  /* At the edges the score interval touches 0 (k = 0) or 1 (k = n)
   * exactly; computing it would leave rounding noise of either sign. */
  iv.lower = k == 0 ? 0.0 : fmax(0.0, centre - half);
  iv.upper = k == n ? 1.0 : fmin(1.0, centre + half);
  return iv;
}

int fg_verdict_rule(fg_interval iv, double target, bool deterministic_problem) {
  if (deterministic_problem) return 1;
  if (iv.lower >= target) return 0;
  if (iv.upper < target) return 1;
  return 2;
}

double fg_samples_to_settle(uint64_t k, uint64_t n, double target,
                            double confidence) {
  if (n == 0) return 0;
  double p = (double)k / (double)n, z = z_of(confidence);
  if (p == target) return 0;
  return z * z * p * (1 - p) / ((p - target) * (p - target));
}
