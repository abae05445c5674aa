/*
 * tests/unit/estimate/test_estimate.c -- intervals, verdicts, histogram, tallies.
 *
 * Outside references here are closed forms; the full grid against
 * statsmodels lives in tests/reference/test_intervals.py.
 */
#include "check.h"
#include "estimate/estimate.h"

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

static int cmp_double(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return x < y ? -1 : x > y;
}

static void test_clopper_pearson_closed_forms(void) {
  /* Closed forms of the Clopper-Pearson interval at the edges: with k = 0
   * the upper end solves (1-p)^n = a/2, with k = n the lower end solves
   * p^n = a/2 (from the binomial tail P(X = 0) and P(X = n)). */
  int ns[] = {1, 10, 1000, 1000000};
  for (size_t i = 0; i < sizeof ns / sizeof *ns; i++) {
    double n = ns[i];
    fg_interval a = fg_interval_clopper_pearson(0, (uint64_t)n, 0.95);
    CHECK_NEAR(a.lower, 0.0, 0.0);
    CHECK_NEAR(a.upper, -expm1(log(0.025) / n), 1e-12 * a.upper);
    fg_interval b = fg_interval_clopper_pearson((uint64_t)n, (uint64_t)n, 0.95);
    CHECK_NEAR(b.upper, 1.0, 0.0);
    CHECK_NEAR(b.lower, pow(0.025, 1.0 / n), 1e-12);
  }
  /* k = 1 of n = 1: lower solves p = a/2 exactly. */
  fg_interval c = fg_interval_clopper_pearson(1, 1, 0.9);
  CHECK_NEAR(c.lower, 0.05, 1e-14);
  /* Symmetry: the interval for k of n mirrors the one for n-k. */
  fg_interval d = fg_interval_clopper_pearson(37, 120, 0.99);
  fg_interval e = fg_interval_clopper_pearson(83, 120, 0.99);
  CHECK_NEAR(d.lower, 1.0 - e.upper, 1e-13);
  CHECK_NEAR(d.upper, 1.0 - e.lower, 1e-13);
  /* Rule of three (common practice; Hanley & Lippman-Hand 1983): zero
   * events in n gives a one-sided 95% upper bound near 3/n, i.e. the
   * two-sided 90% Clopper-Pearson upper end: -ln(0.05)/n = 2.9957/n. */
  fg_interval r = fg_interval_clopper_pearson(0, 100000, 0.90);
  CHECK_NEAR(r.upper * 100000, 3.0, 0.01);
  /* Large n: stays finite and brackets the estimate. */
  fg_interval big = fg_interval_clopper_pearson(930000000, 1000000000, 0.95);
  CHECK(big.lower < 0.93 && big.upper > 0.93);
  CHECK(big.upper - big.lower < 4e-5 && big.upper - big.lower > 2e-5);
}

static void test_other_intervals(void) {
  /* Wilson at k = 0: lower 0, upper z^2/(n+z^2) (closed form of the score
   * interval at the edge, Wilson 1927). */
  double z = 1.959963984540054;
  fg_interval w = fg_interval_wilson(0, 50, 0.95);
  CHECK_NEAR(w.lower, 0.0, 1e-15);
  CHECK_NEAR(w.upper, z * z / (50 + z * z), 1e-12);
  /* Jeffreys at k = 0 has lower 0; its upper end is below Clopper-Pearson's
   * (it is not conservative). */
  fg_interval j = fg_interval_jeffreys(0, 50, 0.95);
  fg_interval cp = fg_interval_clopper_pearson(0, 50, 0.95);
  CHECK_NEAR(j.lower, 0.0, 0.0);
  CHECK(j.upper < cp.upper);
  /* Beta quantile against a closed form: Beta(1, b) has CDF
   * 1 - (1-x)^b, so B^-1(q; 1, b) = 1 - (1-q)^(1/b). */
  CHECK_NEAR(fg_beta_quantile(0.3, 1.0, 7.5), 1 - pow(0.7, 1 / 7.5), 1e-14);
  CHECK_NEAR(fg_beta_quantile(0.3, 1.0, 2e8), -expm1(log1p(-0.3) / 2e8),
             1e-9 * 1.8e-9);
}

static void test_verdict(void) {
  fg_interval iv = {0.91, 0.93};
  CHECK_INT(fg_verdict_rule(iv, 0.90, false), 0);
  CHECK_INT(fg_verdict_rule(iv, 0.91, false), 0); /* lower >= target */
  CHECK_INT(fg_verdict_rule(iv, 0.92, false), 2);
  CHECK_INT(fg_verdict_rule(iv, 0.95, false), 1);
  CHECK_INT(fg_verdict_rule(iv, 0.90, true), 1);
  /* samples to settle: z^2 p(1-p)/(p-t)^2 */
  double s = fg_samples_to_settle(915, 1000, 0.9, 0.95);
  double z = 1.959963984540054;
  CHECK_NEAR(s, z * z * 0.915 * 0.085 / (0.015 * 0.015), 1e-6);
  CHECK_NEAR(fg_samples_to_settle(900, 1000, 0.9, 0.95), 0.0, 0.0);
}

static void test_hist(void) {
  fg_hist h, a, b;
  CHECK(fg_hist_init(&h) == FG_OK);
  CHECK(fg_hist_init(&a) == FG_OK);
  CHECK(fg_hist_init(&b) == FG_OK);
  enum { N = 20000 };
  static double v[N];
  srand(7);
  for (int i = 0; i < N; i++) {
    double u = (rand() + 1.0) / (RAND_MAX + 2.0);
    v[i] = exp(10 * (u - 0.5)); /* spans e^-5 .. e^5 */
    fg_hist_add(&h, v[i]);
    fg_hist_add(i % 3 ? &a : &b, v[i]);
  }
  qsort(v, N, sizeof *v, cmp_double);
  double qs[] = {0.01, 0.25, 0.5, 0.95, 0.999, 1.0};
  for (size_t i = 0; i < sizeof qs / sizeof *qs; i++) {
    size_t rank = (size_t)ceil(qs[i] * N);
    double exact = v[rank - 1];
    double est = fg_hist_quantile(&h, qs[i]);
    CHECK_MSG(fabs(est - exact) <= FG_HIST_REL_ERROR * exact * 1.0000001,
              "q=%g exact %.9g est %.9g", qs[i], exact, est);
  }
  fg_hist_merge(&a, &b);
  CHECK_INT(a.total, h.total);
  CHECK_NEAR(fg_hist_quantile(&a, 0.95), fg_hist_quantile(&h, 0.95), 0.0);
  CHECK_NEAR(h.max, v[N - 1], 0.0);
  CHECK_NEAR(fg_hist_quantile(&h, 1.0), v[N - 1], 0.0);
  fg_hist_reset(&h);
  CHECK_INT(h.total, 0);
  CHECK(isnan(fg_hist_quantile(&h, 0.5)));
  CHECK_INT(fg_hist_bucket(1e-300), 0);
  CHECK_INT(fg_hist_bucket(1e300), FG_HIST_BUCKETS - 1);
  fg_hist_free(&h);
  fg_hist_free(&a);
  fg_hist_free(&b);
}

static void test_tally(void) {
  /* Two rows, 6 samples: excess values by hand. */
  double r0[6] = {-1, 2, 0, 3, NAN, -2};
  double r1[6] = {-1, -1, 1, 4, -1, -3};
  const double *ex[2] = {r0, r1};
  double obj[6] = {1, 2, 3, 4, 5, 6};
  int scratch[12];
  fg_tally whole, first, second;
  CHECK(fg_tally_init(&whole, 2) == FG_OK);
  CHECK(fg_tally_init(&first, 2) == FG_OK);
  CHECK(fg_tally_init(&second, 2) == FG_OK);
  fg_tally_block(&whole, ex, 6, 100, obj, scratch);
  CHECK_INT(whole.n, 6);
  CHECK_INT(whole.satisfied, 2); /* samples 0 and 5 */
  CHECK_INT(whole.rows[0].violated, 3); /* 2, 3, NaN */
  CHECK_INT(whole.rows[0].nonfinite, 1);
  CHECK_INT(whole.rows[1].violated, 2);
  CHECK_INT(whole.rows[0].sole, 2); /* samples 1 and 4 */
  CHECK_INT(whole.rows[1].sole, 1); /* sample 2 */
  CHECK_NEAR(whole.rows[0].excess_sum, 5.0, 0.0);
  CHECK_NEAR(whole.objective_sum, 21.0, 0.0);
  CHECK_INT(whole.nfail, 4);
  CHECK_INT(whole.fail[0].index, 101);
  CHECK_INT(whole.fail[2].index, 103);
  CHECK_INT(whole.fail[2].nrows, 2);
  /* The same samples in two blocks, merged in order, give the same. */
  const double *ex1[2] = {r0, r1}, *ex2[2] = {r0 + 3, r1 + 3};
  fg_tally_block(&first, ex1, 3, 100, obj, scratch);
  fg_tally_block(&second, ex2, 3, 103, obj + 3, scratch);
  fg_tally_merge(&first, &second);
  CHECK_INT(first.satisfied, whole.satisfied);
  CHECK_INT(first.rows[0].violated, whole.rows[0].violated);
  CHECK_INT(first.rows[1].sole, whole.rows[1].sole);
  CHECK_INT(first.nfail, whole.nfail);
  CHECK_INT(first.fail[3].index, whole.fail[3].index);
  CHECK_NEAR(fg_hist_quantile(&first.rows[0].hist, 0.95),
             fg_hist_quantile(&whole.rows[0].hist, 0.95), 0.0);
  fg_tally_reset(&first);
  CHECK_INT(first.n, 0);
  CHECK_INT(first.rows[0].hist.total, 0);
  fg_tally_free(&whole);
  fg_tally_free(&first);
  fg_tally_free(&second);
}

/* The violation masks' AVX-512F path (where present) and the SSE2 /
 * scalar path tally the same: a full block and a short one of 9 rows with
 * random excess and every special value (NaN, infinities, signed zeros,
 * subnormals), every count, sum and histogram compared, and the joint and
 * per-row counts against a lane-by-lane count made here. */
static void test_tally_paths(void) {
  enum { ROWS = 9 };
  static double e[ROWS][FG_BLOCK];
  const double special[] = {NAN, INFINITY, -INFINITY, 0.0, -0.0, 5e-324,
                            -5e-324, 1e300, -1e300};
  gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(g, 4242);
  for (int r = 0; r < ROWS; r++)
    for (int s = 0; s < FG_BLOCK; s++) {
      double u = gsl_rng_uniform(g);
      e[r][s] = u < 0.1 ? special[gsl_rng_uniform_int(g, 9)]
                        : gsl_ran_gaussian(g, 1.0) - 1.2 + 0.2 * r;
    }
  gsl_rng_free(g);
  const double *ex[ROWS];
  for (int r = 0; r < ROWS; r++) ex[r] = e[r];
  int scratch[2 * FG_BLOCK], scratch2[2 * FG_BLOCK];
  const int lens[2] = {FG_BLOCK, FG_BLOCK - 37};
  for (int li = 0; li < 2; li++) {
    int n = lens[li];
    fg_tally a, b;
    CHECK(fg_tally_init(&a, ROWS) == FG_OK);
    CHECK(fg_tally_init(&b, ROWS) == FG_OK);
    fg_tally_force_portable(0);
    fg_tally_block(&a, ex, n, 0, NULL, scratch);
    fg_tally_force_portable(1);
    fg_tally_block(&b, ex, n, 0, NULL, scratch2);
    fg_tally_force_portable(0);
    uint64_t held = 0;
    for (int s = 0; s < n; s++) {
      int ok = 1;
      for (int r = 0; r < ROWS; r++) ok &= e[r][s] <= 0;
      held += (uint64_t)ok;
      CHECK(scratch[s] == !ok && scratch2[s] == !ok);
    }
    CHECK_INT(a.satisfied, held);
    CHECK_INT(b.satisfied, held);
    CHECK_INT(a.nfail, b.nfail);
    for (int f = 0; f < a.nfail; f++) CHECK_INT(a.fail[f].index, b.fail[f].index);
    for (int r = 0; r < ROWS; r++) {
      uint64_t v = 0;
      for (int s = 0; s < n; s++) v += !(e[r][s] <= 0);
      CHECK_INT(a.rows[r].violated, v);
      CHECK_INT(b.rows[r].violated, v);
      CHECK_INT(a.rows[r].sole, b.rows[r].sole);
      CHECK_INT(a.rows[r].nonfinite, b.rows[r].nonfinite);
      /* NaN lanes are the non-finite ones, +inf lanes the infinite ones
       * (IEEE 754: NaN is unordered, so NaN <= 0 is false) */
      uint64_t nnan = 0, ninf = 0, first = FG_INDEX_NONE;
      for (int s = 0; s < n; s++) {
        if (isnan(e[r][s])) {
          nnan++;
          if (first == FG_INDEX_NONE) first = (uint64_t)s;
        }
        ninf += e[r][s] == INFINITY;
      }
      CHECK_INT(a.rows[r].nonfinite, nnan);
      CHECK_INT(a.rows[r].infinite, ninf);
      CHECK_INT(b.rows[r].infinite, ninf);
      CHECK(a.rows[r].first_nonfinite == first &&
            b.rows[r].first_nonfinite == first);
      CHECK(memcmp(&a.rows[r].excess_sum, &b.rows[r].excess_sum,
                   sizeof(double)) == 0);
      CHECK_INT(a.rows[r].hist.total, b.rows[r].hist.total);
      CHECK(memcmp(a.rows[r].hist.counts, b.rows[r].hist.counts,
                   FG_HIST_BUCKETS * sizeof(uint64_t)) == 0);
    }
    fg_tally_free(&a);
    fg_tally_free(&b);
  }
}

/* Non-finite values: a row's first NaN sample is the smallest index
 * whatever the blocks and their merge order; fg_tally_inputs finds every
 * non-finite draw (NaN and both infinities, not the largest finite or
 * subnormal values) and keeps the first by index, then column. */
static void test_tally_numeric(void) {
  static double r0[FG_BLOCK], cols[3][FG_BLOCK];
  for (int s = 0; s < FG_BLOCK; s++) {
    r0[s] = -1.0;
    for (int j = 0; j < 3; j++) cols[j][s] = s % 2 ? 1.7976931348623157e308
                                                   : -4.9e-324;
  }
  r0[200] = NAN;
  r0[77] = NAN;
  r0[5] = INFINITY;
  const double *ex[1] = {r0};
  int scratch[2 * FG_BLOCK];
  fg_tally whole, lo, hi;
  CHECK(fg_tally_init(&whole, 1) == FG_OK);
  CHECK(fg_tally_init(&lo, 1) == FG_OK);
  CHECK(fg_tally_init(&hi, 1) == FG_OK);
  fg_tally_block(&whole, ex, FG_BLOCK, 1000, NULL, scratch);
  CHECK_INT(whole.rows[0].nonfinite, 2);
  CHECK_INT(whole.rows[0].infinite, 1);
  CHECK_INT(whole.rows[0].violated, 3);
  CHECK_INT(whole.rows[0].first_nonfinite, 1077);
  CHECK_INT(whole.rows[0].hist.total, 0);
  /* two halves merged either way round */
  const double *exh[1] = {r0 + 128};
  fg_tally_block(&lo, ex, 128, 1000, NULL, scratch);
  fg_tally_block(&hi, exh, 128, 1128, NULL, scratch);
  CHECK_INT(hi.rows[0].first_nonfinite, 1200);
  fg_tally_merge(&hi, &lo);
  CHECK_INT(hi.rows[0].first_nonfinite, 1077);
  CHECK_INT(hi.rows[0].nonfinite, 2);
  /* draws */
  fg_tally_inputs(&whole, &cols[0][0], 3, FG_BLOCK, FG_BLOCK, 1000);
  CHECK_INT(whole.bad_draws, 0);
  CHECK(whole.bad_draw_first == FG_INDEX_NONE);
  cols[2][9] = -INFINITY;
  cols[1][9] = NAN;
  cols[0][40] = INFINITY;
  fg_tally_inputs(&whole, &cols[0][0], 3, FG_BLOCK, FG_BLOCK, 1000);
  CHECK_INT(whole.bad_draws, 3);
  CHECK_INT(whole.bad_draw_first, 1009);
  CHECK_INT(whole.bad_draw_column, 1);
  /* a short block does not look past its lanes */
  fg_tally_reset(&lo);
  fg_tally_inputs(&lo, &cols[0][0], 3, FG_BLOCK, 9, 0);
  CHECK_INT(lo.bad_draws, 0);
  fg_tally_inputs(&lo, &cols[0][0], 3, FG_BLOCK, 41, 0);
  CHECK_INT(lo.bad_draws, 3);
  fg_tally_reset(&hi);
  fg_tally_inputs(&hi, &cols[0][0] + 40, 1, FG_BLOCK, 1, 40);
  fg_tally_merge(&hi, &lo);
  CHECK_INT(hi.bad_draw_first, 9);
  CHECK_INT(hi.bad_draw_column, 1);
  fg_tally_free(&whole);
  fg_tally_free(&lo);
  fg_tally_free(&hi);
}

/* The confidence sequence where targets sit near 1: with every sample
 * held, its lower end stays below the Clopper-Pearson lower end
 * (alpha/2)^(1/n) (the closed form at k = n; Clopper & Pearson 1934) up
 * to rounding, so no target above that can pass; the old form lost the
 * prior's weight 10 (1 - t) in (b0 + n) - k and gave [1, 1] at 2^24
 * samples for t = 1 - 1e-10. Ends are ordered and inside [0, 1] for
 * every count at n up to the hard cap. (tests/reference/test_sequence.py
 * compares every end with a 50-digit evaluation.) */
static void test_cs_extreme(void) {
  const double alpha = 0.05;
  const uint64_t ns[] = {4096, 1u << 24, 1000000000ull, FG_MAX_SAMPLES_HARD};
  for (int j = 1; j <= 15; j++) {
    double t = 1 - pow(10.0, -j);
    for (size_t i = 0; i < sizeof ns / sizeof ns[0]; i++) {
      uint64_t n = ns[i];
      fg_interval iv = fg_cs_interval(n, n, 1 - alpha, t);
      double cp = exp(log(alpha / 2) / (double)n);
      CHECK_MSG(iv.upper == 1 && iv.lower <= cp * (1 + 1e-15) && iv.lower > 0,
                "cs t=1-1e-%d n=%llu: [%.17g, %.17g], Clopper-Pearson lower "
                "%.17g",
                j, (unsigned long long)n, iv.lower, iv.upper, cp);
      CHECK_MSG(!((double)n < log(alpha / 2) / log(t)) || iv.lower < t,
                "cs t=1-1e-%d n=%llu: lower %.17g clears the target before "
                "log(alpha/2)/log(t) samples",
                j, (unsigned long long)n, iv.lower);
      const uint64_t ks[] = {0, 1, n / 2, n - 1000, n - 1};
      for (size_t q = 0; q < sizeof ks / sizeof ks[0]; q++) {
        fg_interval w = fg_cs_interval(ks[q], n, 1 - alpha, t);
        double ph = (double)ks[q] / (double)n;
        CHECK_MSG(w.lower >= 0 && w.lower <= ph && ph <= w.upper &&
                      w.upper <= 1,
                  "cs t=1-1e-%d k=%llu n=%llu: [%.17g, %.17g]", j,
                  (unsigned long long)ks[q], (unsigned long long)n, w.lower,
                  w.upper);
      }
    }
  }
}

/* fg_hist_add_many (batched, branch-free buckets) and fg_hist_add (one
 * value at a time) build the same histogram: every count, the touched
 * range, min and max, over random values of all magnitudes and the special
 * values, including the clamped ends. */
static void test_hist_batch(void) {
  enum { N = 5000 };
  static double x[N];
  const double special[] = {NAN, INFINITY, -INFINITY, 0.0, -0.0, 5e-324,
                            1e-300, 1e300, 0x1p-40, 0x1p60, 0x1.fffffffffffffp59,
                            0x1.fffffffffffffp-41, -1.0};
  gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(g, 777);
  for (int i = 0; i < N; i++)
    x[i] = i < 13 ? special[i]
                  : (gsl_rng_uniform(g) < 0.5 ? 1 : -0.01) *
                        pow(2.0, -60.0 + 130.0 * gsl_rng_uniform(g));
  gsl_rng_free(g);
  fg_hist a, b;
  CHECK(fg_hist_init(&a) == FG_OK);
  CHECK(fg_hist_init(&b) == FG_OK);
  for (int i = 0; i < N; i++) fg_hist_add(&a, x[i]);
  fg_hist_add_many(&b, x, 300);
  fg_hist_add_many(&b, x + 300, N - 300);
  CHECK(memcmp(a.counts, b.counts, FG_HIST_BUCKETS * sizeof(uint64_t)) == 0);
  CHECK_INT(a.total, b.total);
  CHECK_INT(a.lo, b.lo);
  CHECK_INT(a.hi, b.hi);
  CHECK(a.min == b.min && a.max == b.max);
  CHECK(a.counts[0] > 0 && a.counts[FG_HIST_BUCKETS - 1] > 0);
  fg_hist_free(&a);
  fg_hist_free(&b);
}

/* Early stopping must keep its error rate: simulate many Bernoulli streams,
 * look at the confidence sequence at the engine's look points
 * (FG_CS_FIRST_ROUND, then every doubling) and stop when it clears the
 * target. Ville's inequality bounds each wrong verdict by (1-c)/2. */
typedef struct cs_sim {
  int pass, fail, undecided;
  double mean_samples;
} cs_sim;

static cs_sim simulate_cs(gsl_rng *r, double p, double target, double conf,
                          uint64_t max_n, int streams) {
  cs_sim out = {0};
  for (int s = 0; s < streams; s++) {
    uint64_t n = 0, k = 0, look = FG_CS_FIRST_ROUND;
    fg_interval run = {0, 1};
    int verdict = 2;
    while (n < max_n) {
      uint64_t to = look < max_n ? look : max_n;
      k += gsl_ran_binomial(r, p, (unsigned)(to - n));
      n = to;
      fg_interval iv = fg_cs_interval(k, n, conf, target);
      if (iv.lower > run.lower) run.lower = iv.lower;
      if (iv.upper < run.upper) run.upper = iv.upper;
      verdict = fg_verdict_rule(run, target, false);
      if (verdict != 2) break;
      look *= 2;
    }
    if (verdict == 0) out.pass++;
    else if (verdict == 1) out.fail++;
    else out.undecided++;
    out.mean_samples += (double)n / streams;
  }
  return out;
}

static void test_confidence_sequence(void) {
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 12345);
  const double t = 0.9, conf = 0.95, bound = (1 - conf) / 2;
  const uint64_t max_n = 1u << 21;
  const int streams = 1500;
  /* Binomial tolerance on the observed rate: bound + 3 sd of a rate of
   * `bound` over `streams` trials. */
  double tol = bound + 3 * sqrt(bound * (1 - bound) / streams);
  double deltas[] = {-0.002, 0.0, 0.002};
  for (int i = 0; i < 3; i++) {
    double p = t + deltas[i];
    cs_sim sim = simulate_cs(r, p, t, conf, max_n, streams);
    /* wrong verdicts: pass when p < t, fail when p >= t */
    int wrong = p < t ? sim.pass : sim.fail;
    double rate = (double)wrong / streams;
    printf("confidence sequence at p = t%+.3f: pass %d, fail %d, undecided %d; "
           "wrong-verdict rate %.4f (bound %.3f)\n",
           deltas[i], sim.pass, sim.fail, sim.undecided, rate, bound);
    CHECK_MSG(rate <= tol, "wrong-verdict rate %.4f above %.4f at p=%g", rate,
              tol, p);
  }
  /* Clear cases stop long before the requested samples. */
  double clear[] = {0.93, 0.86};
  for (int i = 0; i < 2; i++) {
    cs_sim sim = simulate_cs(r, clear[i], t, conf, max_n, 300);
    printf("clear case p = %.2f: mean samples used %.0f of %llu (%.1f%% saved), "
           "right verdicts %d/300\n",
           clear[i], sim.mean_samples, (unsigned long long)max_n,
           100.0 * (1 - sim.mean_samples / (double)max_n),
           clear[i] > t ? sim.pass : sim.fail);
    CHECK(sim.mean_samples < 0.1 * (double)max_n);
    CHECK((clear[i] > t ? sim.pass : sim.fail) == 300);
  }
  /* The sequence always contains the sample proportion and is wider than
   * the fixed-n Clopper-Pearson interval at the same n (it pays for
   * looking many times). */
  fg_interval cs = fg_cs_interval(9300, 10000, 0.95, 0.9);
  fg_interval cp = fg_interval_clopper_pearson(9300, 10000, 0.95);
  CHECK(cs.lower < 0.93 && cs.upper > 0.93);
  CHECK(cs.lower < cp.lower && cs.upper > cp.upper);
  fg_interval z = fg_cs_interval(0, 5000, 0.95, 0.9);
  CHECK_NEAR(z.lower, 0.0, 0.0);
  /* with the prior centred far away (0.9) the sequence pays for it at the
   * opposite edge, but stays informative */
  CHECK(z.upper > 0 && z.upper < 0.02);
  gsl_rng_free(r);
}

/* The exact path's stop poll (mvnprob.c): a poll that never stops
 * changes nothing (the same bits as without one); the polls come often
 * enough that the lattice work per poll is at most FG_EXACT_POLL_WORK units
 * on average (mvnprob.c bounds each stretch by construction); a poll that says stop ends the
 * computation at that poll with FG_ECANCELLED. */
typedef struct poll_count {
  long calls, stop_at;
} poll_count;

static bool count_poll(void *ctx) {
  poll_count *pc = ctx;
  pc->calls++;
  return pc->stop_at > 0 && pc->calls >= pc->stop_at;
}

static void test_mvn_poll(void) {
  enum { M = 120, N = 40 };
  static double H[M * N], b[M];
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 17);
  for (int i = 0; i < M; i++) {
    for (int j = 0; j < N; j++) H[i * N + j] = gsl_ran_gaussian(r, 1.0);
    b[i] = 3.0 * sqrt((double)N) * 0.5 + gsl_rng_uniform(r);
  }
  gsl_rng_free(r);
  fg_mvn_result plain, polled, stopped;
  CHECK(fg_mvn_probability(H, b, M, N, 2e-5, 99, &plain) == FG_OK);
  poll_count pc = {0, 0};
  fg_mvn_poll poll = {count_poll, &pc};
  CHECK(fg_mvn_probability_poll(H, b, M, N, 2e-5, 99, &poll, &polled) ==
        FG_OK);
  CHECK(memcmp(&plain.probability, &polled.probability, sizeof(double)) == 0);
  CHECK(memcmp(&plain.error, &polled.error, sizeof(double)) == 0);
  CHECK(plain.points == polled.points && plain.rank == polled.rank);
  /* work of the lattice rounds, as mvnprob.c counts it */
  double step = (double)polled.rows * polled.rank + 30.0 * polled.rank;
  double work = 0;
  for (uint64_t pts = polled.points;
       pts >= 2u * FG_EXACT_SHIFTS * FG_EXACT_POINTS_FIRST; pts /= 2)
    work += (double)pts * step;
  CHECK_MSG(work / (double)pc.calls <= FG_EXACT_POLL_WORK,
            "%.3g work units per poll (%ld polls)", work / (double)pc.calls,
            pc.calls);
  poll_count stop = {0, 7};
  fg_mvn_poll sp = {count_poll, &stop};
  CHECK(fg_mvn_probability_poll(H, b, M, N, 2e-5, 99, &sp, &stopped) ==
        FG_ECANCELLED);
  CHECK(stop.calls == 7);
}

int main(void) {
  test_mvn_poll();
  test_confidence_sequence();
  test_tally_numeric();
  test_cs_extreme();
  test_clopper_pearson_closed_forms();
  test_other_intervals();
  test_verdict();
  test_hist();
  test_tally();
  test_tally_paths();
  test_hist_batch();
  return fg_test_finish();
}
