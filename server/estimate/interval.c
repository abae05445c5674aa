/*
 * estimate/interval.c -- binomial intervals, the verdict rule and the
 * samples-to-settle estimate.
 *
 * Design: every interval endpoint is a beta quantile. GSL's
 * gsl_cdf_beta_Pinv returns NaN once the parameters pass about 1e5 (its
 * continued fraction gives up), and checks run up to 1e9 samples, so the
 * quantile is computed here: the regularised incomplete beta I_x(a, b) by
 * its continued fraction (modified Lentz), with the prefactor
 * x^a (1-x)^b / B(a, b) taken from a beta density evaluated without
 * cancellation (Loader's saddle-point form, "Fast and accurate computation
 * of binomial probabilities", 2000: Stirling-error and deviance terms), then
 * safeguarded Newton steps on [0, 1]. The continued fraction needs about
 * sqrt(min(a, b)) terms near the mean, which stays cheap at 1e9.
 *
 * Thread use: pure functions.
 */
#include "estimate/estimate.h"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_sf_gamma.h>
#include <math.h>

/* GSL's default error handler aborts the process; feasgate checks every
 * result itself, so the handler is switched off as soon as this library
 * is loaded. */
__attribute__((constructor)) static void estimate_gsl_quiet(void) {
  gsl_set_error_handler_off();
}

#define LN_2PI 1.837877066409345483560659472811
#define LN_SQRT_2PI 0.918938533204672741780329736406

/* log(x!) - log(sqrt(2 pi x) (x/e)^x): the error of Stirling's formula. */
static double stirlerr(double x) {
  const double s0 = 1.0 / 12, s1 = 1.0 / 360, s2 = 1.0 / 1260,
               s3 = 1.0 / 1680, s4 = 1.0 / 1188;
  if (x <= 15.0)
    return lgamma(x + 1.0) - (x + 0.5) * log(x) + x - LN_SQRT_2PI;
  double xx = x * x;
  if (x > 500) return (s0 - s1 / xx) / x;
  if (x > 80) return (s0 - (s1 - s2 / xx) / xx) / x;
  if (x > 35) return (s0 - (s1 - (s2 - s3 / xx) / xx) / xx) / x;
  return (s0 - (s1 - (s2 - (s3 - s4 / xx) / xx) / xx) / xx) / x;
}

/* x log(x / m) + m - x, without cancellation when x is near m. */
static double bd0(double x, double m) {
  if (fabs(x - m) < 0.1 * (x + m)) {
    double v = (x - m) / (x + m), s = (x - m) * v, ej = 2 * x * v;
    v *= v;
    for (int j = 1; j < 1000; j++) {
      ej *= v;
      double s1 = s + ej / (2 * j + 1);
      if (s1 == s) return s1;
      s = s1;
    }
    return s;
  }
  return x * log(x / m) + m - x;
}

/* log of the binomial density at real x in [0, n] with success p, q = 1-p. */
static double log_dbinom_raw(double x, double n, double p, double q) {
  if (p == 0) return x == 0 ? 0 : -INFINITY;
  if (q == 0) return x == n ? 0 : -INFINITY;
  if (x == 0) {
    if (n == 0) return 0;
    return p < 0.1 ? -bd0(n, n * q) - n * p : n * log(q);
  }
  if (x == n) return q < 0.1 ? -bd0(n, n * p) - n * q : n * log(p);
  if (x < 0 || x > n) return -INFINITY;
  double lc = stirlerr(n) - stirlerr(x) - stirlerr(n - x) - bd0(x, n * p) -
              bd0(n - x, n * q);
  double lf = LN_2PI + log(x) + log1p(-x / n);
  return lc - 0.5 * lf;
}

/* log B(a, b), accurate when one or both arguments are large. */
double fg_log_beta(double a, double b) {
  double p = fmin(a, b), q = fmax(a, b);
  if (p >= 16) {
    /* lgamma(x) = (x - 0.5) log x - x + log sqrt(2 pi) + c(x), where
     * c(x) = stirlerr(x) for x > 15 (the same correction series). */
    double c = stirlerr(p) + stirlerr(q) - stirlerr(p + q);
    return -0.5 * log(q) + LN_SQRT_2PI + c + (p - 0.5) * log(p / (p + q)) +
           q * log1p(-p / (p + q));
  }
  if (q >= 16) {
    double c = stirlerr(q) - stirlerr(p + q);
    return lgamma(p) + c + p - p * log(p + q) +
           (q - 0.5) * log1p(-p / (p + q));
  }
  return lgamma(p) + lgamma(q) - lgamma(p + q);
}

/* log of the Beta(a, b) density at x in (0, 1), given x and y = 1 - x
 * separately, with lx = log x and ly = log y computed from whichever of the
 * two is exact (forming 1 - x loses the digits of a small x). */
static double log_dbeta(double x, double y, double lx, double ly, double a,
                        double b) {
  if (a <= 2 || b <= 2) return (a - 1) * lx + (b - 1) * ly - fg_log_beta(a, b);
  return log(a + b - 1) + log_dbinom_raw(a - 1, a + b - 2, x, y);
}

/* Continued fraction of the incomplete beta (modified Lentz). */
static double beta_cf(double a, double b, double x) {
  const double tiny = 1e-300, eps = 1e-16;
  double qab = a + b, qap = a + 1, qam = a - 1;
  double c = 1, d = 1 - qab * x / qap;
  if (fabs(d) < tiny) d = tiny;
  d = 1 / d;
  double h = d;
  for (long m = 1; m < 10000000; m++) {
    double m2 = 2.0 * (double)m, dm = (double)m;
    double aa = dm * (b - dm) * x / ((qam + m2) * (a + m2));
    d = 1 + aa * d;
    if (fabs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (fabs(c) < tiny) c = tiny;
    d = 1 / d;
    h *= d * c;
    aa = -(a + dm) * (qab + dm) * x / ((a + m2) * (qap + m2));
    d = 1 + aa * d;
    if (fabs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (fabs(c) < tiny) c = tiny;
    d = 1 / d;
    double del = d * c;
    h *= del;
    if (fabs(del - 1) < eps) break;
  }
  return h;
}

/* I_x(a, b) for x in [0, 1]. */
static double beta_inc(double x, double a, double b) {
  if (x <= 0) return 0;
  if (x >= 1) return 1;
  double y = 1 - x, lx = log(x), ly = log1p(-x);
  if (x < (a + 1) / (a + b + 2)) {
    double front = exp(log_dbeta(x, y, lx, ly, a, b) + lx + ly) / a;
    return front * beta_cf(a, b, x);
  }
  /* Complement: I_x(a, b) = 1 - I_y(b, a) with y = 1 - x. */
  double front = exp(log_dbeta(y, x, ly, lx, b, a) + lx + ly) / b;
  return 1 - front * beta_cf(b, a, y);
}

double fg_beta_quantile(double q, double a, double b) {
  if (!(q > 0)) return 0;
  if (!(q < 1)) return 1;
  /* Closed forms at the edges of Clopper-Pearson (k = 0 or k = n):
   * I_x(1, b) = 1 - (1-x)^b and I_x(a, 1) = x^a. */
  if (a == 1) return -expm1(log1p(-q) / b);
  if (b == 1) return exp(log(q) / a);
  double lo = 0, hi = 1;
  /* Start from GSL where it answers, else from the normal approximation. */
  double x = gsl_cdf_beta_Pinv(q, a, b);
  if (!(x > 0 && x < 1)) {
    double m = a / (a + b), v = a * b / ((a + b) * (a + b) * (a + b + 1));
    x = m + gsl_cdf_ugaussian_Pinv(q) * sqrt(v);
    if (!(x > 0 && x < 1)) x = m;
  }
  for (int it = 0; it < 200; it++) {
    double f = beta_inc(x, a, b) - q;
    if (f == 0) return x;
    if (f < 0) lo = x;
    else hi = x;
    double dens = exp(log_dbeta(x, 1 - x, log(x), log1p(-x), a, b));
    double nx = (dens > 0 && isfinite(dens)) ? x - f / dens : NAN;
    if (!(nx > lo && nx < hi)) nx = 0.5 * (lo + hi);
    if (fabs(nx - x) <= 1e-15 * fmax(x, 1e-300) || hi - lo <= 1e-300) {
      x = nx;
      break;
    }
    x = nx;
  }
  return x;
}

static double z_of(double confidence) {
  return gsl_cdf_ugaussian_Qinv((1.0 - confidence) / 2.0);
}

fg_interval fg_interval_clopper_pearson(uint64_t k, uint64_t n,
                                        double confidence) {
  double a = 1.0 - confidence, dk = (double)k, dn = (double)n;
  fg_interval iv = {0.0, 1.0};
  if (n == 0) return iv;
  if (k > 0) iv.lower = fg_beta_quantile(a / 2, dk, dn - dk + 1);
  if (k < n) iv.upper = fg_beta_quantile(1 - a / 2, dk + 1, dn - dk);
  return iv;
}

fg_interval fg_interval_jeffreys(uint64_t k, uint64_t n, double confidence) {
  double a = 1.0 - confidence, dk = (double)k, dn = (double)n;
  fg_interval iv = {0.0, 1.0};
  if (n == 0) return iv;
  if (k > 0) iv.lower = fg_beta_quantile(a / 2, dk + 0.5, dn - dk + 0.5);
  if (k < n) iv.upper = fg_beta_quantile(1 - a / 2, dk + 0.5, dn - dk + 0.5);
  return iv;
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
