/*
 * core/quantile.c -- regularised incomplete beta and gamma functions and
 * the beta, gamma and Student t quantiles, each with a stated bound on its
 * work and no NaN for valid parameters.
 *
 * Design.
 *  - Densities and prefactors x^a (1-x)^b / B(a, b) and x^a e^-x /
 *    Gamma(a+1) come from Loader's saddle-point form ("Fast and accurate
 *    computation of binomial probabilities", 2000: Stirling-error and
 *    deviance terms), which has no cancellation at large parameters.
 *  - I_x(a, b): the continued fraction (modified Lentz) on the side of the
 *    mean where it converges (x < (a+1)/(a+b+2), else the complement
 *    1 - I_y(b, a)); it needs about sqrt(min(a, b))/2 terms near the mean
 *    (measured: 741 at min(a, b) just below 2e6). The complement with one
 *    parameter q much larger than the other p is the series in incomplete
 *    gammas of beta_gexp (the fraction would lose about eps q/p there).
 *    From min(a, b) >= FG_Q_ASYM_MIN on, Temme's uniform asymptotic
 *    expansion (N. M. Temme, "Special functions: an introduction to the
 *    classical functions of mathematical physics", Wiley 1996, ch. 11;
 *    citation from memory; the form below is derived in the code's terms):
 *    I_x = erfc(-eta sqrt(r/2)) / 2 - exp(-r eta^2/2) / sqrt(2 pi r) c0
 *    with r = a + b, eta the signed root of the deviance and
 *    c0 = s/t - 1/eta (t = x - a/r, s^2 = ab/r^2), the first term of the
 *    correction series; c0 is formed without cancellation near the mean.
 *  - P(a, x), Q(a, x): the power series for x < a + 1, the continued
 *    fraction for Q otherwise (each about 8 sqrt(a) terms at x near a,
 *    measured: 11246 at a just below 2e6), Temme's expansion Q = erfc(eta sqrt(a/2))/2 +
 *    exp(-a eta^2/2) / sqrt(2 pi a) (1/mu - 1/eta), mu = x/a - 1, for
 *    a >= FG_Q_ASYM_MIN (DiDonato & Morris, ACM TOMS 12, 1986, use the same
 *    expansion for large a; citation from memory).
 *  - Every series and fraction stops at FG_Q_TERMS_MAX terms; the
 *    thresholds keep the terms needed well below that (tests assert it).
 *  - Quantiles: the root of F(x) - u (or uc - Q(x), whichever tail is the
 *    smaller, so tiny tails keep relative precision) by Newton steps
 *    inside a bracket [lo, hi] kept from the signs seen; a step leaving
 *    the bracket or not shrinking to half the step two before (rtsafe's
 *    rule) is replaced by a bisection (geometric, sqrt(lo) sqrt(hi), while
 *    hi/lo > 4); a bisection is also forced when log(hi/lo) has not halved
 *    in 8 steps. log(hi/lo) starts at most about 710 and reaches the 2^-52
 *    relative width within 62 halvings, so FG_Q_STEPS_MAX = 512 steps
 *    always suffice; stopping: a step below 2 ulp, f = 0 or a bracket 4
 *    ulp wide, or F within 4 ulp of the target (its own rounding level).
 *  - The beta quantile is solved in whichever of x and 1 - x is below 1/2
 *    at the root (decided by I_{1/2}(a, b)), so both x and 1 - x come back
 *    with full relative precision (the t quantile needs 1 - x).
 *  - Student t: 2 min(u, uc) = I_x(df/2, 1/2) with x = df/(df + t^2)
 *    (Abramowitz & Stegun 26.7.1 / 26.5.27), t = sqrt(df (1-x)/x); where x
 *    is below 1e-280 t comes from the leading term x^a / (a B(a, 1/2)) in
 *    logs; for df >= FG_Q_T_EXPANSION_DF the Cornish-Fisher expansion of the
 *    normal quantile (Abramowitz & Stegun 26.7.5, four terms).
 *
 * Accuracy (checked by tests/reference/test_quantiles.py and
 * test_intervals.py against SciPy and mpmath): quantiles within 1e-9
 * relative (typically 1e-14) for beta a, b in [0.05, 1e12], gamma shape in
 * [0.05, 1e12], t df in [1, 1e15], for u and uc down to 1e-300, except
 * that a result below the smallest normal double is returned as 0. The
 * interval sweep covers a, b up to 1e12 + 1 with a as small as 1/2.
 *
 * Thread use: pure functions; any number of threads at once.
 */
#include "core/quantile.h"

#include <float.h>
#include <gsl/gsl_cdf.h>
#include <math.h>

#define LN_2PI 1.837877066409345483560659472811
#define LN_SQRT_2PI 0.918938533204672741780329736406
#define SQRT_2PI 2.506628274631000502415765284811

/* lgamma without the global signgam that lgamma() writes (a data race
 * when workers call it at once); every argument here is positive. */
static double lgam(double x) {
  int sign;
  return lgamma_r(x, &sign);
}

static void note_terms(fg_qcount *c, int n) {
  if (c && n > c->terms) c->terms = n;
}

/* ---- Loader's pieces --------------------------------------------------- */

/* log(x!) - log(sqrt(2 pi x) (x/e)^x): the error of Stirling's formula. */
static double stirlerr(double x) {
  const double s0 = 1.0 / 12, s1 = 1.0 / 360, s2 = 1.0 / 1260,
               s3 = 1.0 / 1680, s4 = 1.0 / 1188;
  if (x <= 15.0)
    return lgam(x + 1.0) - (x + 0.5) * log(x) + x - LN_SQRT_2PI;
  double xx = x * x;
  if (x > 500) return (s0 - s1 / xx) / x;
  if (x > 80) return (s0 - (s1 - s2 / xx) / xx) / x;
  if (x > 35) return (s0 - (s1 - (s2 - s3 / xx) / xx) / xx) / x;
  return (s0 - (s1 - (s2 - (s3 - s4 / xx) / xx) / xx) / xx) / x;
}

/* x log(x / m) + m - x, without cancellation when x is near m. The series
 * ratio is below (0.1/1.9)^2, so 20 terms pass 1e-17. */
static double bd0(double x, double m) {
  if (fabs(x - m) < 0.1 * (x + m)) {
    double v = (x - m) / (x + m), s = (x - m) * v, ej = 2 * x * v;
    v *= v;
    for (int j = 1; j < 40; j++) {
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

double fg_q_log_beta(double a, double b) {
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
    return lgam(p) + c + p - p * log(p + q) +
           (q - 0.5) * log1p(-p / (p + q));
  }
  return lgam(p) + lgam(q) - lgam(p + q);
}

/* log of the Beta(a, b) density at x in (0, 1), given x and y = 1 - x
 * separately with lx = log x and ly = log y. */
static double log_dbeta(double x, double y, double lx, double ly, double a,
                        double b) {
  if (a <= 2 || b <= 2) return (a - 1) * lx + (b - 1) * ly - fg_q_log_beta(a, b);
  return log(a + b - 1) + log_dbinom_raw(a - 1, a + b - 2, x, y);
}

/* log(x^a e^-x / Gamma(a + 1)) for a > 0, x > 0. */
static double log_gamma_front(double a, double x) {
  return -stirlerr(a) - bd0(a, x) - 0.5 * (LN_2PI + log(a));
}

/* u - log(1 + u) - u^2/2 for u > -1; the series for |u| < 0.1 (at most
 * 17 terms to 1e-17). */
static double log1pmx_rest(double u) {
  if (fabs(u) < 0.1) {
    /* sum_{k >= 3} (-1)^k u^k / k */
    double sum = 0, pw = u * u;
    for (int k = 3; k < 40; k++) {
      pw *= u;
      double t = (k % 2 ? -pw : pw) / k;
      sum += t;
      if (fabs(t) <= 1e-17 * fabs(sum)) break;
    }
    return sum;
  }
  return u - log1p(u) - 0.5 * u * u;
}

/* u - log(1 + u) (>= 0) without cancellation. */
static double log1pmx(double u) {
  if (fabs(u) < 0.1) return 0.5 * u * u + log1pmx_rest(u);
  return u - log1p(u);
}

/* ---- incomplete beta -------------------------------------------------- */

/* Continued fraction of the incomplete beta (modified Lentz). */
static double beta_cf(double a, double b, double x, fg_qcount *cnt) {
  const double tiny = 1e-300, eps = 1e-16;
  double qab = a + b, qap = a + 1, qam = a - 1;
  double c = 1, d = 1 - qab * x / qap;
  if (fabs(d) < tiny) d = tiny;
  d = 1 / d;
  double h = d;
  int m;
  for (m = 1; m <= FG_Q_TERMS_MAX; m++) {
    double m2 = 2.0 * m, dm = m;
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
  note_terms(cnt, m);
  return h;
}

/* Temme's expansion for min(a, b) >= FG_Q_ASYM_MIN. */
static void beta_asym(double x, double y, double a, double b, double *lower,
                      double *upper) {
  double r = a + b, x0 = a / r, y0 = b / r, s = sqrt(x0 * y0);
  double t = x <= 0.5 ? x - x0 : y0 - y;
  double u1 = t / x0, u2 = -t / y0;
  double dev = x0 * log1pmx(u1) + y0 * log1pmx(u2);
  double eta = sqrt(2 * dev);
  if (t < 0) eta = -eta;
  double c0;
  if (t == 0)
    c0 = -(y0 - x0) / (3 * s);
  else if (fabs(u1) < 0.1 && fabs(u2) < 0.1) {
    /* s/t - 1/eta = (s eta - t)/(t eta) = 2 s^2 Psi / ((s eta + t) eta t)
     * with Psi = dev - t^2/(2 s^2), taken from the series directly. */
    double psi = x0 * log1pmx_rest(u1) + y0 * log1pmx_rest(u2);
    c0 = 2 * s * s * psi / ((s * eta + t) * eta * t);
  } else
    c0 = s / t - 1 / eta;
  double w = eta * sqrt(0.5 * r);
  double corr = exp(-r * dev) / (SQRT_2PI * sqrt(r)) * c0;
  *lower = 0.5 * erfc(-w) - corr;
  *upper = 0.5 * erfc(w) + corr;
}

/* 1 - I_t(p, q) for q large, p small against sqrt(q), t on the upper side
 * of the mean: the expansion in incomplete gammas (the idea of DiDonato &
 * Morris's BGRAT, ACM TOMS 18, 1992, citation from memory; derived here as
 * follows). With
 * s = -log(1 - t), 1 - I_t(p, q) = (1/B(p, q)) int_{s0}^inf
 * s^(p-1) g(s) e^(-q s) ds, g(s) = ((1 - e^-s)/s)^(p-1) = sum_j c_j s^j,
 * log((1 - e^-s)/s) = -s/2 + sum_k B_2k s^2k / (2k (2k)!) (Bernoulli
 * numbers; Abramowitz & Stegun 23.1), so
 * 1 - I_t = Gamma(p+q)/(Gamma(q) q^p) sum_j c_j
 * [Gamma(p+j)/Gamma(p)] q^-j Q(p+j, q s0). Term j is about
 * (p^2/(2q))^j / j!, so GEXP_TERMS terms reach 1e-17 when
 * (p + GEXP_TERMS)^2 <= q / GEXP_RATIO. The continued fraction would lose
 * about eps q / p here (its first denominators cancel to 1 - O(1/q)). */
#define GEXP_TERMS 10
#define GEXP_RATIO 50.0
#define GEXP_Q_MIN 1e5

static int gexp_fits(double p, double q) {
  return q >= GEXP_Q_MIN && (p + GEXP_TERMS) * (p + GEXP_TERMS) <= q / GEXP_RATIO;
}

static double beta_gexp(double p, double q, double t, double tc,
                        fg_qcount *cnt) {
  /* coefficients of log((1 - e^-s)/s): -s/2 + s^2/24 - s^4/2880 +
   * s^6/181440 - s^8/9676800 (+ O(s^10), not needed below j = 10) */
  static const double l[GEXP_TERMS] = {
      0, -0.5, 1.0 / 24, 0, -1.0 / 2880, 0, 1.0 / 181440, 0, -1.0 / 9676800, 0};
  double c[GEXP_TERMS];
  c[0] = 1;
  for (int n = 1; n < GEXP_TERMS; n++) {
    double acc = 0;
    for (int k = 1; k <= n; k++)
      acc += k * (p - 1) * l[k] * c[n - k];
    c[n] = acc / n;
  }
  double s0 = t <= 0.5 ? -log1p(-t) : -log(tc), z = q * s0;
  double lo, qj;
  fg_q_igamma(p, z, &lo, &qj, cnt);
  /* log K = lgamma(p+q) - lgamma(q) - p log q, without cancellation */
  double logk = -q * log1pmx(p / q) + (p - 0.5) * log1p(p / q) +
                stirlerr(p + q) - stirlerr(q);
  double sum = 0, r = 1;
  for (int j = 0; j < GEXP_TERMS; j++) {
    sum += c[j] * r * qj;
    /* Q(p+j+1, z) = Q(p+j, z) + z^(p+j) e^-z / Gamma(p+j+1) */
    qj += exp(log_gamma_front(p + j, z));
    r *= (p + j) / q;
  }
  return exp(logk) * sum;
}

void fg_q_ibeta(double x, double y, double a, double b, double *lower,
                double *upper, fg_qcount *cnt) {
  if (x <= 0) {
    *lower = 0, *upper = 1;
    return;
  }
  if (y <= 0) {
    *lower = 1, *upper = 0;
    return;
  }
  if (fmin(a, b) >= FG_Q_ASYM_MIN) {
    beta_asym(x, y, a, b, lower, upper);
    note_terms(cnt, 1);
    return;
  }
  /* the smaller parameter p with its variable t; beyond the switch point
   * (p+1)/(p+q+2) and with q large, the gamma expansion */
  int swap = a > b;
  double p = swap ? b : a, q = swap ? a : b, t = swap ? y : x,
         tc = swap ? x : y;
  if (t >= (p + 1) / (p + q + 2) && gexp_fits(p, q)) {
    double up = beta_gexp(p, q, t, tc, cnt);
    *(swap ? lower : upper) = up;
    *(swap ? upper : lower) = 1 - up;
    return;
  }
  double lx = x <= 0.5 ? log(x) : log1p(-y), ly = y <= 0.5 ? log(y) : log1p(-x);
  if (x < (a + 1) / (a + b + 2)) {
    double front = exp(log_dbeta(x, y, lx, ly, a, b) + lx + ly) / a;
    *lower = front * beta_cf(a, b, x, cnt);
    *upper = 1 - *lower;
  } else {
    double front = exp(log_dbeta(y, x, ly, lx, b, a) + lx + ly) / b;
    *upper = front * beta_cf(b, a, y, cnt);
    *lower = 1 - *upper;
  }
}

/* ---- incomplete gamma ------------------------------------------------- */

static void gamma_asym(double a, double x, double *lower, double *upper) {
  double mu = (x - a) / a;
  double dev = log1pmx(mu);
  double eta = sqrt(2 * dev);
  if (mu < 0) eta = -eta;
  double c0;
  if (mu == 0)
    c0 = -1.0 / 3;
  else if (fabs(mu) < 0.1)
    c0 = 2 * log1pmx_rest(mu) / ((eta + mu) * mu * eta);
  else
    c0 = 1 / mu - 1 / eta;
  double w = eta * sqrt(0.5 * a);
  double corr = exp(-a * dev) / (SQRT_2PI * sqrt(a)) * c0;
  *upper = 0.5 * erfc(w) + corr;
  *lower = 0.5 * erfc(-w) - corr;
}

void fg_q_igamma(double a, double x, double *lower, double *upper,
                 fg_qcount *cnt) {
  if (!(x > 0)) {
    *lower = 0, *upper = 1;
    return;
  }
  if (isinf(x)) {
    *lower = 1, *upper = 0;
    return;
  }
  if (a >= FG_Q_ASYM_MIN) {
    gamma_asym(a, x, lower, upper);
    note_terms(cnt, 1);
    return;
  }
  double front = exp(log_gamma_front(a, x));
  if (x < a + 1) {
    /* P = front * sum_n x^n / ((a+1)...(a+n)) */
    double sum = 1, term = 1;
    int n;
    for (n = 1; n <= FG_Q_TERMS_MAX; n++) {
      term *= x / (a + n);
      sum += term;
      if (term <= 1e-17 * sum) break;
    }
    note_terms(cnt, n);
    *lower = front * sum;
    *upper = 1 - *lower;
    return;
  }
  /* Q = a front / x ... as the continued fraction
   * 1/(x+1-a- 1(1-a)/(x+3-a- 2(2-a)/(x+5-a- ...))) times x^a e^-x/Gamma(a) */
  const double tiny = 1e-300;
  double bb = x + 1 - a, c = 1 / tiny, d = 1 / bb, h = d;
  int i;
  for (i = 1; i <= FG_Q_TERMS_MAX; i++) {
    double an = -i * (i - a);
    bb += 2;
    d = an * d + bb;
    if (fabs(d) < tiny) d = tiny;
    c = bb + an / c;
    if (fabs(c) < tiny) c = tiny;
    d = 1 / d;
    double del = d * c;
    h *= del;
    if (fabs(del - 1) < 1e-16) break;
  }
  note_terms(cnt, i);
  *upper = a * front * h;
  *lower = 1 - *upper;
}

/* ---- root finding ----------------------------------------------------- */

/* f(x) = F(x) - target, increasing in x, with F'(x) = dens(x). */
typedef struct {
  int kind; /* 0 beta, 1 gamma */
  double a, b, u, uc;
  int use_lower;
  fg_qcount *cnt;
} qprob;

static double qf(const qprob *q, double x, double *dens) {
  double lo, up;
  if (q->kind == 0) {
    fg_q_ibeta(x, 1 - x, q->a, q->b, &lo, &up, q->cnt);
    *dens = exp(log_dbeta(x, 1 - x, log(x), log1p(-x), q->a, q->b));
  } else {
    fg_q_igamma(q->a, x, &lo, &up, q->cnt);
    *dens = exp(log_gamma_front(q->a, x)) * q->a / x;
  }
  return q->use_lower ? lo - q->u : q->uc - up;
}

/* The bisection point: geometric while hi/lo > 4 (sqrt of each factor,
 * as lo * hi may underflow), arithmetic after. */
static double mid_point(double lo, double hi) {
  return hi > 4 * lo ? sqrt(lo) * sqrt(hi) : lo + 0.5 * (hi - lo);
}

/* Root in (lo, hi) from the start x; f(lo) < 0 <= f(hi) is assumed.
 * A Newton step is taken when it stays inside the bracket and is at most
 * half the step two before (Numerical Recipes' rtsafe rule), else the
 * bisection point; and every SOLVE_WINDOW steps the bracket's log(hi/lo)
 * must have halved, else the next step is a bisection. So log(hi/lo)
 * halves at least once per SOLVE_WINDOW steps: from at most about 710 to
 * the 2^-52 relative width within 62 halvings, 8 x 62 < FG_Q_STEPS_MAX. */
#define SOLVE_WINDOW 8

static double solve(const qprob *q, double lo, double hi, double x) {
  double dx = hi - lo, dxold = dx, mark = log(hi / lo);
  double xprev = x, fprev = INFINITY;
  int steps = 0, newton = 0;
  if (!(x > lo && x < hi)) x = mid_point(lo, hi);
  while (steps < FG_Q_STEPS_MAX) {
    steps++;
    double dens, f = qf(q, x, &dens);
    /* at the CDF's own rounding level (a few ulp of the target) */
    if (fabs(f) <= 4 * DBL_EPSILON * (q->use_lower ? q->u : q->uc)) break;
    /* a Newton step of under 1e-10 relative that did not halve |f| has
     * reached the CDF's rounding floor (its relative error grows like
     * eps |log F|): keep the better of the two points */
    if (newton && fabs(x - xprev) <= 1e-10 * x && fabs(f) > 0.5 * fabs(fprev)) {
      if (fabs(fprev) < fabs(f)) x = xprev;
      break;
    }
    xprev = x;
    fprev = f;
    if (f < 0) lo = x;
    else hi = x;
    if (hi - lo <= 4 * DBL_EPSILON * hi) {
      x = f < 0 ? hi : x;
      break;
    }
    int force = 0;
    if (steps % SOLVE_WINDOW == 0) {
      double m = log(hi / lo);
      force = m > 0.5 * mark;
      mark = m;
    }
    double step = (dens > 0 && isfinite(dens)) ? f / dens : NAN;
    double nx = x - step;
    if (fabs(step) <= 2 * DBL_EPSILON * x) { /* converged */
      x = nx > lo && nx < hi ? nx : x;
      break;
    }
    if (force || !(nx > lo && nx < hi) || !(fabs(step) <= 0.5 * fabs(dxold))) {
      nx = mid_point(lo, hi);
      dxold = dx;
      dx = nx - x;
      newton = 0;
    } else {
      dxold = dx;
      dx = -step;
      newton = 1;
    }
    if (fabs(nx - x) <= 2 * DBL_EPSILON * x) {
      x = nx;
      break;
    }
    x = nx;
  }
  if (q->cnt) q->cnt->steps += steps;
  return x;
}

/* Starting normal quantile (only a start: any value in the bracket works). */
static double zq(double u, double uc) {
  return u < uc ? gsl_cdf_ugaussian_Pinv(u) : gsl_cdf_ugaussian_Qinv(uc);
}

/* Root z in (0, 1/2] of I_z(a, b) = u, knowing I_{1/2}(a, b) >= u. */
static double beta_small_root(double u, double uc, double a, double b,
                              fg_qcount *cnt) {
  qprob q = {0, a, b, u, uc, u <= uc, cnt};
  double dens;
  if (cnt) cnt->steps++;
  if (qf(&q, DBL_MIN, &dens) >= 0) return 0; /* below the normal range */
  double r = a + b, m = a / r, sd = sqrt(a * b / (r * r * (r + 1)));
  double x = m + zq(u, uc) * sd;
  if (a < 5 || b < 5 || !(x > 0 && x < 0.5)) {
    /* I_z ~ z^a / (a B(a, b)) for small z */
    double lp = (log(u) + log(a) + fg_q_log_beta(a, b)) / a;
    double xp = exp(lp);
    if (xp > 0 && xp < 0.5) x = xp;
  }
  return solve(&q, DBL_MIN, 0.5, x);
}

double fg_q_beta_inv(double u, double uc, double a, double b, double *xc,
                     fg_qcount *cnt) {
  double x, y;
  if (!(a > 0 && b > 0) || isnan(u) || isnan(uc)) {
    x = y = NAN; /* invalid parameters: refused before any caller gets here */
  } else if (!(u > 0)) {
    x = 0, y = 1;
  } else if (!(uc > 0)) {
    x = 1, y = 0;
  } else if (a == 1) { /* I_x(1, b) = 1 - (1-x)^b: log(1-x) = log(uc)/b */
    double l = (u < uc ? log1p(-u) : log(uc)) / b;
    y = exp(l);
    x = -expm1(l);
  } else if (b == 1) { /* I_x(a, 1) = x^a */
    double l = (u < uc ? log(u) : log1p(-uc)) / a;
    x = exp(l);
    y = -expm1(l);
  } else {
    double lo5, up5;
    fg_q_ibeta(0.5, 0.5, a, b, &lo5, &up5, cnt);
    int small = u <= uc ? u <= lo5 : uc >= up5;
    if (small) {
      x = beta_small_root(u, uc, a, b, cnt);
      y = 1 - x;
    } else {
      y = beta_small_root(uc, u, b, a, cnt);
      x = 1 - y;
    }
  }
  if (xc) *xc = y;
  return x;
}

double fg_q_gamma_inv(double u, double uc, double a, fg_qcount *cnt) {
  if (!(a > 0) || isnan(u) || isnan(uc)) return NAN; /* invalid parameters */
  if (!(u > 0)) return 0;
  if (!(uc > 0)) return INFINITY;
  qprob q = {1, a, 0, u, uc, u <= uc, cnt};
  double dens;
  if (cnt) cnt->steps += 2;
  if (qf(&q, DBL_MIN, &dens) >= 0) return 0; /* below the normal range */
  /* Q(a, hi) < 1e-300 for every a > 0 (hi = a + 40 sqrt(a) + 750) */
  double hi = a + 40 * sqrt(a) + 750;
  if (qf(&q, hi, &dens) < 0) return hi;
  double z = zq(u, uc), c = 1 / (9 * a);
  double x = a * pow(1 - c + z * sqrt(c), 3); /* Wilson-Hilferty */
  if (a < 1 || !(x > 0)) {
    double xp = exp((log(u) + lgam(a + 1)) / a); /* P ~ x^a / Gamma(a+1) */
    if (xp > 0 && xp < hi) x = xp;
  }
  return solve(&q, DBL_MIN, hi, x);
}

double fg_q_t_inv(double u, double uc, double df, fg_qcount *cnt) {
  if (!(df > 0) || isnan(u) || isnan(uc)) return NAN; /* invalid parameters */
  if (!(u > 0)) return -INFINITY;
  if (!(uc > 0)) return INFINITY;
  if (u == uc) return 0;
  double p = fmin(u, uc), sign = u < uc ? -1 : 1;
  if (df >= FG_Q_T_EXPANSION_DF) {
    double z = gsl_cdf_ugaussian_Pinv(p), z2 = z * z, v = 1 / df;
    double g1 = (z2 + 1) * z / 4;
    double g2 = ((5 * z2 + 16) * z2 + 3) * z / 96;
    double g3 = (((3 * z2 + 19) * z2 + 17) * z2 - 15) * z / 384;
    double g4 =
        ((((79 * z2 + 776) * z2 + 1482) * z2 - 1920) * z2 - 945) * z / 92160;
    double t = z + (g1 + (g2 + (g3 + g4 * v) * v) * v) * v;
    return sign * fabs(t);
  }
  double a = 0.5 * df, y;
  double x = fg_q_beta_inv(2 * p, u < uc ? uc - u : u - uc, a, 0.5, &y, cnt);
  double t;
  if (x > 1e-280)
    t = sqrt(df * (y / x));
  else {
    /* I_x(a, 1/2) = x^a / (a B(a, 1/2)) (1 + O(x)) */
    double lx = (log(2 * p) + log(a) + fg_q_log_beta(a, 0.5)) / a;
    t = exp(0.5 * (log(df) - lx));
  }
  return sign * t;
}
