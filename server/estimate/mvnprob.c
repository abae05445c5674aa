/*
 * estimate/mvnprob.c -- P(H e <= b) for e ~ N(0, I_n): the multivariate
 * normal probability of a polyhedron, by Genz's method.
 *
 * Method (Genz 1992, "Numerical computation of multivariate normal
 * probabilities", J. Comput. Graph. Stat. 1:141-149; Genz & Bretz 2009,
 * "Computation of Multivariate Normal and t Probabilities", Springer,
 * ch. 4): separation of variables over a lower-triangular factor, the
 * integrand evaluated at randomly shifted rank-1 lattice points, the error
 * estimated from the spread of independent shifts.
 *
 *   1. Rows with (relatively) zero coefficients are decided at once: they
 *      hold for every e when b_i >= 0, else the probability is 0 exactly.
 *      Rows with b_i = +inf always hold and are dropped.
 *   2. Each row is scaled to unit norm. A pivoted Gram-Schmidt reduction
 *      writes H = C Q^T with Q orthonormal (n x r) and C (m x r) in
 *      "step" form: every row i has a last column l(i) with C[i][l(i)] !=
 *      0 and zeros after. y = Q^T e is again N(0, I_r), so the question is
 *      P(C y <= b). The pivot at each step is the remaining row with the
 *      smallest conditional probability given the expected values of the
 *      earlier variables (Genz & Bretz 2009, sec. 4.1.3, variable
 *      prioritisation). A row whose residual falls below FG_MVN_TOL after
 *      a step depends on the columns so far (a singular row covariance:
 *      more rows than inputs, or dependent rows) and becomes a further
 *      bound -- upper or lower by the sign of its coefficient -- on the
 *      variable of that step. The rank r is at most min(m, n).
 *   3. Separation of variables: with w in [0,1)^(r-1),
 *        f(w) = prod_k (Phi(hi_k) - Phi(lo_k)),
 *        y_k = Phi^-1(Phi(lo_k) + w_k (Phi(hi_k) - Phi(lo_k))),
 *      lo_k, hi_k the intersection of the bounds of the rows ending at k
 *      given y_0 .. y_(k-1). E f(w) = P(C y <= b).
 *   4. Points: Richtmyer's lattice w_i = frac(i sqrt(p_j) + s_j) with the
 *      first r-1 primes p_j, the baker's (tent) transform |2w - 1|, and
 *      each point used with its antithetic 1 - w; FG_EXACT_SHIFTS
 *      independent uniform shifts s (splitmix64 from the caller's seed).
 *      The estimate is the mean over shifts; the error is
 *      FG_EXACT_ERROR_FACTOR standard errors of that mean.
 *   5. Rounds: FG_EXACT_POINTS_FIRST points per shift (fewer, down to
 *      FG_EXACT_POINTS_MIN, when one round would pass the work bound),
 *      doubling each round
 *      (fresh shifts each round) until half the previous round's error
 *      is at most the target, at most FG_EXACT_ROUNDS_MAX rounds, and
 *      never past FG_EXACT_WORK_MAX work units in all (see step_cost). The answer is
 *      the last round's; the stopping rule looks only at earlier rounds,
 *      so the reported error is not selected for being small.
 *      r <= 1 needs no points: the answer is a difference of two normal
 *      CDFs, error 0 (rounding only).
 *
 * Accuracy: residuals below FG_MVN_TOL (1e-10 of a unit row) are dropped,
 * which moves the probability by far less than the target error.
 *
 * Stopping from outside (fg_mvn_probability_poll): the caller's poll is
 * asked before every pivot step of the reduction and every
 * FG_EXACT_POLL_WORK work units of lattice points, so a cancel is seen
 * within a few milliseconds whatever the size; a stopped computation
 * returns FG_ECANCELLED and no figures.
 *
 * Thread use: pure function of its arguments; any thread.
 */
#include "estimate/estimate.h"

#include <gsl/gsl_cdf.h>

#include <math.h>
#include <stdlib.h>
#include <string.h>

static double phi_cdf(double x) { return 0.5 * erfc(-x / M_SQRT2); }
static double phi_sf(double x) { return 0.5 * erfc(x / M_SQRT2); }
static double phi_pdf(double x) {
  return isinf(x) ? 0.0 : exp(-0.5 * x * x) / sqrt(2.0 * M_PI);
}

/* Phi(hi) - Phi(lo), from the accurate tail. */
static double width(double lo, double hi) {
  if (!(hi > lo)) return 0.0;
  return lo > 0 ? phi_sf(lo) - phi_sf(hi) : phi_cdf(hi) - phi_cdf(lo);
}

/* A point of (lo, hi) at relative position w of the probability mass. */
static double place(double lo, double hi, double w) {
  double x;
  if (lo > 0) { /* upper tail: work with survival values */
    double ql = phi_sf(lo), qh = phi_sf(hi);
    double q = qh + (1.0 - w) * (ql - qh);
    if (!(q > 0)) return hi;
    x = gsl_cdf_ugaussian_Qinv(q);
  } else {
    double pl = phi_cdf(lo), ph = phi_cdf(hi);
    double u = pl + w * (ph - pl);
    if (u >= 1.0) return isinf(hi) ? lo : hi;
    if (!(u > 0)) return lo;
    x = u < 0.5 ? gsl_cdf_ugaussian_Pinv(u) : gsl_cdf_ugaussian_Qinv(1.0 - u);
  }
  if (x < lo) x = lo;
  if (x > hi) x = hi;
  return x;
}

/* Expected value of a standard normal truncated to [lo, hi]. */
static double trunc_mean(double lo, double hi) {
  double p = width(lo, hi);
  if (p > 1e-300) return (phi_pdf(lo) - phi_pdf(hi)) / p;
  if (isfinite(lo) && isfinite(hi)) return 0.5 * (lo + hi);
  return isfinite(lo) ? lo : (isfinite(hi) ? hi : 0.0);
}

static uint64_t splitmix64(uint64_t *s) {
  uint64_t z = (*s += UINT64_C(0x9e3779b97f4a7c15));
  z = (z ^ (z >> 30)) * UINT64_C(0xbf58476d1ce4e5b9);
  z = (z ^ (z >> 27)) * UINT64_C(0x94d049bb133111eb);
  return z ^ (z >> 31);
}

typedef struct mvn_sys {
  int m, r;
  double *C;   /* m x r, row-major, rows ordered by last column */
  double *b;   /* m */
  int *start;  /* r + 1: rows of column k are [start[k], start[k+1]) */
} mvn_sys;

/* The bounds on y_k from the rows ending at k, given y[0..k-1]. False
 * when a zero-coefficient row fails. */
static bool bounds(const mvn_sys *s, int k, const double *y, double *plo,
                   double *phi) {
  double lo = -INFINITY, hi = INFINITY;
  for (int i = s->start[k]; i < s->start[k + 1]; i++) {
    const double *ci = s->C + (size_t)i * (size_t)s->r;
    double t = s->b[i];
    for (int j = 0; j < k; j++) t -= ci[j] * y[j];
    double c = ci[k];
    if (c > FG_MVN_ZERO) {
      if (t / c < hi) hi = t / c;
    } else if (c < -FG_MVN_ZERO) {
      if (t / c > lo) lo = t / c;
    } else if (t < 0) {
      return false;
    }
  }
  *plo = lo, *phi = hi;
  return true;
}

static double integrand(const mvn_sys *s, const double *w, double *y) {
  double f = 1.0;
  for (int k = 0; k < s->r; k++) {
    double lo, hi;
    if (!bounds(s, k, y, &lo, &hi)) return 0.0;
    double p = width(lo, hi);
    if (!(p > 0)) return 0.0;
    f *= p;
    if (k + 1 < s->r) y[k] = place(lo, hi, w[k]);
  }
  return f;
}

/* The first n primes into p (n <= FG_EXACT_DIMS_MAX). */
static void primes(int n, int *p) {
  int c = 0;
  for (int x = 2; c < n; x++) {
    bool prime = true;
    for (int d = 2; d * d <= x; d++)
      if (x % d == 0) { prime = false; break; }
    if (prime) p[c++] = x;
  }
}

/* Reduce (steps 1-2). Returns 0 when the system is ready, 1 when the
 * probability is decided (*decided), -1 out of memory, -2 stopped by the
 * poll (asked once per pivot step: at most about 6 m n multiply-adds,
 * 1.6e6 at the size limits). */
static bool stopped(const fg_mvn_poll *poll) {
  return poll && poll->stop && poll->stop(poll->ctx);
}

static int reduce(const double *H, const double *b, int m, int n,
                  mvn_sys *s, double *decided, const fg_mvn_poll *poll) {
  double maxnorm = 0;
  for (int i = 0; i < m; i++) {
    double q = 0;
    for (int j = 0; j < n; j++) q += H[(size_t)i * n + j] * H[(size_t)i * n + j];
    if (sqrt(q) > maxnorm) maxnorm = sqrt(q);
  }
  double *R = malloc((size_t)m * (size_t)(n > 0 ? n : 1) * sizeof(double));
  double *bb = malloc((size_t)(m > 0 ? m : 1) * sizeof(double));
  double *Cfull = calloc((size_t)(m > 0 ? m : 1) * (size_t)(n > 0 ? n : 1),
                         sizeof(double));
  double *res = malloc((size_t)(m > 0 ? m : 1) * sizeof(double));
  int *last = malloc((size_t)(m > 0 ? m : 1) * sizeof(int));
  double *ybar = malloc((size_t)(n > 0 ? n : 1) * sizeof(double));
  int *order = malloc((size_t)(m > 0 ? m : 1) * sizeof(int));
  int rc = 0, mm = 0;
  if (!R || !bb || !Cfull || !res || !last || !ybar || !order) { rc = -1; goto out; }
  for (int i = 0; i < m; i++) {
    const double *h = H + (size_t)i * n;
    double q = 0;
    for (int j = 0; j < n; j++) q += h[j] * h[j];
    double nr = sqrt(q);
    if (isinf(b[i]) && b[i] > 0) continue;
    if (!(nr > FG_MVN_ZERO * maxnorm) || nr == 0) {
      if (!(b[i] >= 0)) { *decided = 0.0; rc = 1; goto out; }
      continue;
    }
    if (isinf(b[i])) { *decided = 0.0; rc = 1; goto out; } /* b = -inf */
    for (int j = 0; j < n; j++) R[(size_t)mm * n + j] = h[j] / nr;
    bb[mm] = b[i] / nr;
    res[mm] = 1.0;
    last[mm] = -1;
    mm++;
  }
  if (mm == 0) { *decided = 1.0; rc = 1; goto out; }
  int r = 0;
  for (int k = 0; k < n; k++) {
    if (stopped(poll)) { rc = -2; goto out; }
    int piv = -1;
    double best = INFINITY;
    for (int i = 0; i < mm; i++) {
      if (last[i] >= 0) continue;
      double shift = 0;
      for (int j = 0; j < k; j++) shift += Cfull[(size_t)i * n + j] * ybar[j];
      double pr = phi_cdf((bb[i] - shift) / res[i]);
      if (pr < best || piv < 0) best = pr, piv = i;
    }
    if (piv < 0) break;
    double q[FG_EXACT_DIMS_MAX];
    const double *rp = R + (size_t)piv * n;
    for (int j = 0; j < n; j++) q[j] = rp[j] / res[piv];
    for (int i = 0; i < mm; i++) {
      if (last[i] >= 0) continue;
      double *ri = R + (size_t)i * n;
      double c = 0;
      for (int j = 0; j < n; j++) c += ri[j] * q[j];
      for (int j = 0; j < n; j++) ri[j] -= c * q[j];
      /* second pass (re-orthogonalisation) for stability */
      double c2 = 0;
      for (int j = 0; j < n; j++) c2 += ri[j] * q[j];
      for (int j = 0; j < n; j++) ri[j] -= c2 * q[j];
      Cfull[(size_t)i * n + k] = c + c2;
      double s2 = 0;
      for (int j = 0; j < n; j++) s2 += ri[j] * ri[j];
      res[i] = sqrt(s2);
    }
    last[piv] = k;
    Cfull[(size_t)piv * n + k] = fabs(Cfull[(size_t)piv * n + k]);
    for (int i = 0; i < mm; i++)
      if (last[i] < 0 && res[i] <= FG_MVN_TOL) last[i] = k;
    r = k + 1;
    /* expected value of y_k for the next pivot choice */
    double lo = -INFINITY, hi = INFINITY;
    for (int i = 0; i < mm; i++) {
      if (last[i] != k) continue;
      double t = bb[i], c = Cfull[(size_t)i * n + k];
      for (int j = 0; j < k; j++) t -= Cfull[(size_t)i * n + j] * ybar[j];
      if (c > FG_MVN_ZERO) hi = fmin(hi, t / c);
      else if (c < -FG_MVN_ZERO) lo = fmax(lo, t / c);
    }
    ybar[k] = hi > lo ? trunc_mean(lo, hi) : (isfinite(hi) ? hi : lo);
    bool left = false;
    for (int i = 0; i < mm; i++)
      if (last[i] < 0) left = true;
    if (!left) break;
  }
  /* rows left unassigned (n exhausted) have residual ~0 by rank */
  for (int i = 0; i < mm; i++)
    if (last[i] < 0) last[i] = r - 1;
  s->m = mm, s->r = r;
  s->C = malloc((size_t)mm * (size_t)r * sizeof(double));
  s->b = malloc((size_t)mm * sizeof(double));
  s->start = calloc((size_t)r + 1, sizeof(int));
  if (!s->C || !s->b || !s->start) { rc = -1; goto out; }
  int c = 0;
  for (int k = 0; k < r; k++) {
    s->start[k] = c;
    for (int i = 0; i < mm; i++) {
      if (last[i] != k) continue;
      for (int j = 0; j < r; j++)
        s->C[(size_t)c * r + j] = j <= k ? Cfull[(size_t)i * n + j] : 0.0;
      s->b[c] = bb[i];
      c++;
    }
  }
  s->start[r] = c;
  (void)order;
out:
  free(R), free(bb), free(Cfull), free(res), free(last), free(ybar), free(order);
  return rc;
}

fg_status fg_mvn_probability(const double *H, const double *b, int m, int n,
                             double target_error, uint64_t seed,
                             fg_mvn_result *out) {
  return fg_mvn_probability_poll(H, b, m, n, target_error, seed, NULL, out);
}

fg_status fg_mvn_probability_poll(const double *H, const double *b, int m,
                                  int n, double target_error, uint64_t seed,
                                  const fg_mvn_poll *poll, fg_mvn_result *out) {
  memset(out, 0, sizeof *out);
  out->method = "genz_lattice";
  if (m < 0 || n < 0 || m > FG_EXACT_ROWS_MAX || n > FG_EXACT_DIMS_MAX)
    return FG_ELIMIT;
  mvn_sys s = {0};
  double decided = 0;
  int rc = reduce(H, b, m, n, &s, &decided, poll);
  if (rc < 0) {
    free(s.C), free(s.b), free(s.start);
    return rc == -2 ? FG_ECANCELLED : FG_ENOMEM;
  }
  if (rc == 1) {
    out->probability = decided;
    out->converged = true;
    out->method = "closed_form";
    return FG_OK;
  }
  out->rank = s.r;
  out->rows = s.m;
  fg_status st = FG_OK;
  double y[FG_EXACT_DIMS_MAX], w[FG_EXACT_DIMS_MAX], wa[FG_EXACT_DIMS_MAX];
  if (s.r <= 1) { /* one variable: a difference of normal CDFs */
    out->probability = integrand(&s, w, y);
    out->converged = true;
    out->method = "closed_form";
    goto done;
  }
  int dim = s.r - 1;
  int pr[FG_EXACT_DIMS_MAX];
  double alpha[FG_EXACT_DIMS_MAX];
  primes(dim, pr);
  for (int j = 0; j < dim; j++) {
    double a = sqrt((double)pr[j]);
    alpha[j] = a - floor(a);
  }
  /* one integrand evaluation: every row's running sum over the earlier
   * variables (m * r multiply-adds at most) and per variable two normal
   * CDFs and a quantile, counted as FG_MVN_PHI_COST each */
  double step_cost = (double)s.m * (double)s.r + FG_MVN_PHI_COST * (double)s.r;
  /* lattice points (each used twice, with its antithetic) between polls */
  double per = FG_EXACT_POLL_WORK / (2.0 * step_cost);
  uint64_t poll_every = per < 1 ? 1 : (uint64_t)per;
  double work = 0;
  uint64_t rng = seed ^ UINT64_C(0x6a09e667f3bcc909);
  /* The first round always runs; it is cut below FG_EXACT_POINTS_FIRST
   * when that many points would pass the work bound (large systems), so
   * the bound holds from the first round on, but never below
   * FG_EXACT_POINTS_MIN points per shift. */
  uint64_t npts = FG_EXACT_POINTS_FIRST;
  {
    double fit = FG_EXACT_WORK_MAX / (2.0 * FG_EXACT_SHIFTS * step_cost);
    if (fit < (double)npts)
      npts = fit > FG_EXACT_POINTS_MIN ? (uint64_t)fit : FG_EXACT_POINTS_MIN;
  }
  double prev_error = -1;
  for (int round = 0; round < FG_EXACT_ROUNDS_MAX; round++) {
    double round_work = (double)npts * 2.0 * FG_EXACT_SHIFTS * step_cost;
    if (round > 0 && work + round_work > FG_EXACT_WORK_MAX) break;
    double means[FG_EXACT_SHIFTS];
    for (int sh = 0; sh < FG_EXACT_SHIFTS; sh++) {
      double shift[FG_EXACT_DIMS_MAX];
      for (int j = 0; j < dim; j++)
        shift[j] = (double)(splitmix64(&rng) >> 11) * 0x1.0p-53;
      double sum = 0;
      for (uint64_t i = 1; i <= npts; i++) {
        if (i % poll_every == 0 && stopped(poll)) {
          st = FG_ECANCELLED;
          goto done;
        }
        for (int j = 0; j < dim; j++) {
          double x = fmod((double)i * alpha[j] + shift[j], 1.0);
          x = fabs(2.0 * x - 1.0);
          w[j] = x, wa[j] = 1.0 - x;
        }
        sum += 0.5 * (integrand(&s, w, y) + integrand(&s, wa, y));
      }
      means[sh] = sum / (double)npts;
    }
    work += round_work;
    double mean = 0, var = 0;
    for (int sh = 0; sh < FG_EXACT_SHIFTS; sh++) mean += means[sh];
    mean /= FG_EXACT_SHIFTS;
    for (int sh = 0; sh < FG_EXACT_SHIFTS; sh++)
      var += (means[sh] - mean) * (means[sh] - mean);
    var /= (double)FG_EXACT_SHIFTS * (FG_EXACT_SHIFTS - 1);
    out->probability = mean;
    out->error = FG_EXACT_ERROR_FACTOR * sqrt(var);
    out->points = (uint64_t)FG_EXACT_SHIFTS * 2u * npts;
    out->rounds = round + 1;
    out->converged = out->error <= target_error;
    /* Stop on what the previous, independent round predicts for this one
     * (half its error), never on this round's own error: stopping when
     * the reported error happens to be small would bias it low. */
    if (prev_error >= 0 && 0.5 * prev_error <= target_error) break;
    prev_error = out->error;
    npts *= 2;
  }
  if (out->probability < 0) out->probability = 0;
  if (out->probability > 1) out->probability = 1;
done:
  free(s.C), free(s.b), free(s.start);
  return st;
}
