/*
 * estimate/estimate.h -- the statistics of a check (prefixes fg_interval_,
 * fg_hist_, fg_tally_).
 *
 * interval.c  binomial intervals (Clopper-Pearson, Wilson, Jeffreys), the
 *             verdict rule and the samples-to-settle estimate;
 * hist.c      a mergeable histogram of positive values with logarithmic
 *             buckets (bounded relative error) for excess quantiles;
 * tally.c     per-chunk counts: joint, per row, sole cause, excess sums,
 *             first failing scenarios; merged in chunk order.
 * mvnprob.c   multivariate normal probabilities of polyhedra (Genz), for
 *             the exact path of jointly normal affine models.
 *
 * Nothing here knows of HTTP, threads or storage. Functions are pure or act
 * on caller-owned structs; any thread may call them on its own data.
 */
#ifndef FG_ESTIMATE_H
#define FG_ESTIMATE_H

#include "core/quantile.h"
#include "feasgate/limits.h"
#include "feasgate/status.h"

#include <stdbool.h>
#include <stdint.h>

typedef struct fg_interval {
  double lower, upper;
} fg_interval;

/* Two-sided intervals at level `confidence` (0 < confidence < 1) for k
 * successes in n > 0 trials. Clopper & Pearson (1934): lower =
 * B^-1(a/2; k, n-k+1), upper = B^-1(1-a/2; k+1, n-k), with lower 0 at k = 0
 * and upper 1 at k = n. */
fg_interval fg_interval_clopper_pearson(uint64_t k, uint64_t n,
                                        double confidence);
/* Wilson (1927) score interval. */
fg_interval fg_interval_wilson(uint64_t k, uint64_t n, double confidence);
/* Jeffreys: quantiles of Beta(k+1/2, n-k+1/2), lower 0 at k = 0, upper 1
 * at k = n (Brown, Cai & DasGupta 2001). */
fg_interval fg_interval_jeffreys(uint64_t k, uint64_t n, double confidence);

/* The same with the quantile solver's work counters added into *cnt
 * (core/quantile.h; tests assert the caps). */
fg_interval fg_interval_clopper_pearson_count(uint64_t k, uint64_t n,
                                              double confidence,
                                              fg_qcount *cnt);
fg_interval fg_interval_jeffreys_count(uint64_t k, uint64_t n,
                                       double confidence, fg_qcount *cnt);

/* Beta quantile B^-1(q; a, b) for q in [0, 1], a, b > 0 (core/quantile.c:
 * bounded work at any a, b). */
double fg_beta_quantile(double q, double a, double b);

/* log B(a, b), without cancellation for large arguments. */
double fg_log_beta(double a, double b);

/* ---- confidence sequence (cs.c) ----
 * The beta-binomial mixture martingale (Robbins 1970; Howard, Ramdas,
 * McAuliffe & Sekhon 2021): with a Beta(a0, b0) mixing prior,
 *   M_n(p) = [B(a0 + k, b0 + n - k) / B(a0, b0)] / [p^k (1 - p)^(n - k)],
 * and CS_n = { p : M_n(p) < 2 / alpha } holds the true p at every n at once
 * with probability at least 1 - alpha/2 (Ville's inequality), so each of
 * the two wrong verdicts has probability at most alpha/2, as with the
 * fixed-n interval. The prior is centred on the target with strength
 * FG_CS_PRIOR_STRENGTH pseudo-samples (limits.h), which keeps the
 * sequence tight where the verdict is decided. Accurate
 * (tests/reference/test_sequence.py) for prior means up to 1 - 1e-15 and
 * n up to FG_MAX_SAMPLES_HARD; ends are rounded outwards. The engine
 * reports it widened to contain the Clopper-Pearson interval of the same
 * counts (engine/check.c). */
fg_interval fg_cs_interval(uint64_t k, uint64_t n, double confidence,
                           double prior_mean);

/* The verdict rule: 0 pass when lower >= target, 1 fail when upper <
 * target or a deterministic problem exists, else 2 inconclusive (the
 * values of fg_verdict in feasgate/engine.h). */
int fg_verdict_rule(fg_interval iv, double target, bool deterministic_problem);

/* Samples at which the interval would clear the target if the estimate
 * held: z^2 p(1-p)/(p-t)^2, z the 1-a/2 normal quantile. Returns 0 when
 * p == t (no finite answer) or p is 0 or 1 (the formula gives 0). */
double fg_samples_to_settle(uint64_t k, uint64_t n, double target,
                            double confidence);

/* ---- histogram of positive values ----
 * Bucket of x > 0: its binary exponent and the top FG_HIST_SUB_BITS bits of
 * its mantissa, i.e. FG_HIST_SUB = 64 linear sub-buckets per octave. A
 * bucket [lo, lo(1 + 1/64)) is represented by its midpoint, so a quantile
 * read back is within 1/128 < 0.8% relative of a value in the bucket.
 * Values below 2^FG_HIST_EXP_MIN (about 9e-13) fall in bucket 0, above
 * 2^FG_HIST_EXP_MAX (about 1.2e18) in the last one; the histogram also
 * keeps the exact minimum and maximum, and quantiles are clamped to them. */
#define FG_HIST_SUB_BITS 6
#define FG_HIST_SUB (1 << FG_HIST_SUB_BITS)
#define FG_HIST_EXP_MIN (-40)
#define FG_HIST_EXP_MAX 60
#define FG_HIST_BUCKETS ((FG_HIST_EXP_MAX - FG_HIST_EXP_MIN) * FG_HIST_SUB + 2)
#define FG_HIST_REL_ERROR (1.0 / (2.0 * FG_HIST_SUB))

typedef struct fg_hist {
  uint64_t *counts; /* FG_HIST_BUCKETS */
  uint64_t total;
  int lo, hi;       /* touched bucket range [lo, hi], lo > hi when empty */
  double min, max;
} fg_hist;

fg_status fg_hist_init(fg_hist *h);
void fg_hist_free(fg_hist *h);
void fg_hist_reset(fg_hist *h);
int fg_hist_bucket(double x);
void fg_hist_add(fg_hist *h, double x);
/* fg_hist_add of x[0..m) in turn, in one pass (the tallies' hot path). */
void fg_hist_add_many(fg_hist *h, const double *x, int m);
void fg_hist_merge(fg_hist *dst, const fg_hist *src);
/* The value of rank ceil(q * total) (1-based) in sorted order, within
 * FG_HIST_REL_ERROR relative; NAN when empty. */
double fg_hist_quantile(const fg_hist *h, double q);

/* ---- tallies ---- */
typedef struct fg_row_tally {
  uint64_t pair_both, pair_one; /* paired tallies: pairs with 2 / 1 violations */
  uint64_t violated;  /* samples where the row does not hold */
  uint64_t sole;      /* ... and is the only row that does not */
  uint64_t nonfinite; /* violations whose excess was NaN */
  uint64_t first_nonfinite; /* smallest sample index of those, or
                               FG_INDEX_NONE */
  uint64_t infinite;  /* violations whose excess was +infinity (not in
                         the sum or the histogram) */
  double excess_sum;  /* sum of finite positive excess */
  fg_hist hist;       /* positive finite excess values */
  uint64_t block_mask[(FG_BLOCK + 63) / 64]; /* fg_tally_block's scratch */
} fg_row_tally;

typedef struct fg_fail_record {
  uint64_t index;    /* sample index in its stream */
  int nrows;         /* rows violated (may exceed FG_FAIL_ROWS_MAX) */
  int rows[FG_FAIL_ROWS_MAX];
} fg_fail_record;

/* "No sample": the first index of an event that has not happened. */
#define FG_INDEX_NONE UINT64_MAX

typedef struct fg_tally {
  /* Paired tallies (antithetic sampling): lanes 2m and 2m+1 of a block are
   * one pair; pair_both / pair_one count pairs in which both / exactly one
   * sample held, so the variance of pair means is known exactly. */
  bool pairs;
  uint64_t pair_both, pair_one;
  uint64_t n, satisfied;
  int nrows;
  fg_row_tally *rows;
  double objective_sum;
  int nfail;
  int fail_keep; /* records kept, 0..FG_FAILING_SCENARIOS_MAX (init:
                    FG_FAILING_SCENARIOS); kept by reset */
  fg_fail_record fail[FG_FAILING_SCENARIOS_MAX];
  /* Non-finite draws of uncertain inputs (fg_tally_inputs): how many
   * values, and the first by sample index (ties: the lower column). */
  uint64_t bad_draws;
  uint64_t bad_draw_first; /* FG_INDEX_NONE when there are none */
  int bad_draw_column;
  /* Drivers (NULL when not asked): sums over the samples of d_j = x_j -
   * centre_j for every input component j < drv_dims, laid out as
   *   [0, D)                 sum of d_j over all samples
   *   [D, 2D)                sum of d_j^2 over all samples
   *   [(2 + r) D, (3 + r) D) sum of d_j over the samples violating row r
   *   [(2 + R) D, (3 + R) D) sum of d_j over the samples violating any
   * (D = drv_dims, R = nrows). Plain sums, merged by addition in chunk
   * order like every other tally. drv_centre (not owned) is fixed per
   * check, so the sums stay well scaled whatever the inputs' means. */
  double *drv;
  int drv_dims;
  const double *drv_centre;
} fg_tally;

fg_status fg_tally_init(fg_tally *t, int nrows);
void fg_tally_free(fg_tally *t);
void fg_tally_reset(fg_tally *t);
/* Add `src` after `dst` (src's samples come later in the stream). */
void fg_tally_merge(fg_tally *dst, const fg_tally *src);

/* Tally a block: `excess[r]` points at row r's n excess values (lane t is
 * sample first + t); `objective` at n values or NULL. `scratch` holds at
 * least 2n ints; afterwards scratch[s] is 0 exactly where sample
 * first + s satisfied every row. */
void fg_tally_block(fg_tally *t, const double *const *excess, int n,
                    uint64_t first, const double *objective, int *scratch);
/* Look at a block's draws: `ncols` columns of n values, column j at
 * x + j * stride, lane t = sample first + t. Non-finite values are
 * counted in bad_draws and the first (smallest sample index, then
 * column) kept. Cheap when all are finite: one branch-free pass per
 * column. */
void fg_tally_inputs(fg_tally *t, const double *x, int ncols, size_t stride,
                     int n, uint64_t first);
/* Give `t` driver sums for `dims` input components about `centre`
 * (dims values, kept by pointer); FG_ENOMEM when they cannot be had. */
fg_status fg_tally_drivers_init(fg_tally *t, int dims, const double *centre);
/* After fg_tally_block on the same block: add the block's draws (`x`,
 * column j at x + j * stride) to the driver sums; `excess` as for
 * fg_tally_block; `failed[s]` nonzero where sample s failed some row
 * (fg_tally_block's scratch). No-op without driver sums. */
void fg_tally_drivers_block(fg_tally *t, const double *x, size_t stride,
                            const double *const *excess, const int *failed,
                            int n);
/* Tests: 1 makes fg_tally_block use its SSE2 / scalar violation masks
 * even where AVX-512F exists, 0 lets it choose again. */
void fg_tally_force_portable(int on);

/* ---- sample sizes (sizes.c) ----
 * Normal-approximation sizes for a binomial proportion and the
 * scenario-approach bounds for convex design problems (Campi & Garatti
 * 2008, SIAM J. Optim. 19:1211; with discarded scenarios, Campi & Garatti
 * 2011, J. Optim. Theory Appl. 148:257). Each returns FG_EINVAL (or
 * FG_ELIMIT with the limit's name) for inputs outside its domain, naming
 * the parameter. Results are whole numbers held in doubles. */

/* Samples for a two-sided interval of half-width h at level `confidence`:
 * ceil(z^2 p(1-p) / h^2), z the 1-a/2 normal quantile; p < 0 means
 * unknown (p = 1/2, the worst case). */
fg_status fg_size_half_width(double h, double confidence, double p,
                             double *samples, fg_problem *pr);
/* Samples for a pass with probability `power` when the true value is
 * p > target: ceil(((z_{1-a/2} sqrt(t(1-t)) + z_power sqrt(p(1-p))) /
 * (p - t))^2). */
fg_status fg_size_power(double target, double p, double confidence,
                        double power, double *samples, fg_problem *pr);

/* log of the scenario-approach bound with N scenarios, violation level
 * eps, d decision variables and k discarded scenarios:
 *   C(k+d-1, k) * sum_{i <= k+d-1} C(N, i) eps^i (1-eps)^(N-i)
 * (for k = 0 the 2008 bound sum_{i<d} ...). The tail is summed in log
 * space from its largest terms, so tiny bounds (1e-300 and below) keep
 * their relative accuracy. Needs d >= 1, 0 < eps < 1; when N <= k+d-1
 * the tail is 1 and the result is log C(k+d-1, k) >= 0. */
double fg_scenario_log_bound(double n, double eps, uint64_t d, uint64_t k);
/* Smallest N <= FG_SIZE_SCENARIOS_MAX with bound(N) <= beta. */
fg_status fg_scenario_size(double eps, double beta, uint64_t d, uint64_t k,
                           uint64_t *n, fg_problem *pr);
/* Smallest eps (to 1e-12 relative) with bound(N, eps) <= beta. */
fg_status fg_scenario_epsilon(uint64_t n, double beta, uint64_t d, uint64_t k,
                              double *eps, fg_problem *pr);

/* The GET /v1/sample-size query and `feasgate sample-size`: parameters by
 * name, then one of four forms chosen by which parameters are present. */
typedef enum fg_size_param {
  FG_SZ_HALF_WIDTH = 0,
  FG_SZ_CONFIDENCE,
  FG_SZ_PROBABILITY,
  FG_SZ_TARGET,
  FG_SZ_POWER,
  FG_SZ_EPSILON,
  FG_SZ_BETA,
  FG_SZ_DECISIONS,
  FG_SZ_DISCARDED,
  FG_SZ_SCENARIOS,
  FG_SZ_NPARAMS
} fg_size_param;

typedef struct fg_size_query {
  bool given[FG_SZ_NPARAMS];
  double value[FG_SZ_NPARAMS];
} fg_size_query;

typedef enum fg_size_method {
  FG_SIZE_NORMAL_HALF_WIDTH = 0,
  FG_SIZE_NORMAL_POWER,
  FG_SIZE_CAMPI_GARATTI_2008,
  FG_SIZE_CAMPI_GARATTI_2011
} fg_size_method;

typedef struct fg_size_answer {
  fg_size_method method;
  bool gives_epsilon; /* scenario form with `scenarios` given */
  double samples;     /* normal forms */
  uint64_t scenarios; /* scenario form, epsilon given */
  double epsilon;     /* scenario form, scenarios given */
  double bound;       /* scenario forms: the bound at the answer */
} fg_size_answer;

/* "half_width", "confidence", ... ; NULL out of range. */
const char *fg_size_param_name(int param);
const char *fg_size_method_name(fg_size_method m);
/* Set parameter `name` from its text (a decimal number); an unknown name,
 * a repeated one or an unreadable value is recorded in `p`. */
fg_status fg_size_query_set(fg_size_query *q, const char *name,
                            const char *text, fg_problem *p);
/* Choose the form and compute it; ambiguous, missing or stray parameters
 * are named in `p`. */
fg_status fg_size_query_solve(const fg_size_query *q, fg_size_answer *a,
                              fg_problem *p);

/* ---- paired proportions (paired.c) ----
 * Two candidates judged on the same n scenarios: `both` hold in both,
 * `a_only` only A, `b_only` only B, `neither`. The interval for
 * P(A holds) - P(B holds) is Newcombe's hybrid score interval (Newcombe
 * 1998, Statistics in Medicine 17:2635, method 10): Wilson limits for
 * each marginal combined with the phi correlation of the 2x2 table. */
fg_interval fg_newcombe_paired(uint64_t both, uint64_t a_only, uint64_t b_only,
                               uint64_t neither, double confidence);


/* ---- mvnprob.c: multivariate normal probabilities (Genz's method) ----
 * P(H e <= b) for e ~ N(0, I_n), H m x n row-major (m <= FG_EXACT_ROWS_MAX,
 * n <= FG_EXACT_DIMS_MAX), b_i may be +-inf. Singular systems (m > n,
 * dependent rows, zero rows) are reduced first (see mvnprob.c). Stops when
 * error <= target_error or at the work bound FG_EXACT_WORK_MAX; the
 * shifts are drawn from `seed`. FG_ELIMIT beyond the size limits. */
typedef struct fg_mvn_result {
  double probability, error; /* error: FG_EXACT_ERROR_FACTOR std errors */
  int rank, rows;            /* variables and rows after the reduction */
  uint64_t points;           /* integrand evaluations of the last round */
  int rounds;
  bool converged;            /* error <= target_error */
  const char *method;        /* "genz_lattice" or "closed_form" */
} fg_mvn_result;

fg_status fg_mvn_probability(const double *H, const double *b, int m, int n,
                             double target_error, uint64_t seed,
                             fg_mvn_result *out);

/* Asked between steps of at most FG_EXACT_POLL_WORK work units (one
 * pivot of the reduction, a run of lattice points): true stops the
 * computation, which then returns FG_ECANCELLED. The answer of a
 * computation that is not stopped does not depend on the polling. */
typedef struct fg_mvn_poll {
  bool (*stop)(void *ctx);
  void *ctx;
} fg_mvn_poll;

/* fg_mvn_probability with a stop poll (poll may be NULL). */
fg_status fg_mvn_probability_poll(const double *H, const double *b, int m,
                                  int n, double target_error, uint64_t seed,
                                  const fg_mvn_poll *poll, fg_mvn_result *out);

/* The sample-size answer (GET /v1/sample-size, `feasgate sample-size`)
 * for `n` parameters given by name and text: the inputs echoed, "method"
 * and "samples" or "scenarios"/"epsilon" (sizes_json.c). Unknown,
 * repeated, ambiguous, missing or out-of-range parameters are named in
 * `p`. */
struct cJSON;
fg_status fg_sample_size_json(int n, const char *const *names,
                              const char *const *values, struct cJSON **out,
                              fg_problem *p);

#endif
