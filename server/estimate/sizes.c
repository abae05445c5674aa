/*
 * estimate/sizes.c -- how many samples or scenarios a question needs.
 *
 * Four calculations behind GET /v1/sample-size and `feasgate sample-size`:
 *   normal_half_width   n = ceil(z^2 p(1-p) / h^2), z = z_{1-a/2}, p = 1/2
 *                       when unknown (normal approximation to the
 *                       binomial, common practice);
 *   normal_power        n = ceil(((z_{1-a/2} sqrt(t(1-t)) +
 *                       z_power sqrt(p(1-p))) / (p - t))^2): samples for the
 *                       lower end of the interval to clear t with
 *                       probability `power` when the true value is p > t;
 *   campi_garatti_2008  a convex design problem with d decision variables
 *                       solved on N scenarios violates more than eps with
 *                       probability at most sum_{i<d} C(N,i) eps^i
 *                       (1-eps)^(N-i) (Campi & Garatti 2008, SIAM J. Optim.
 *                       19:1211);
 *   campi_garatti_2011  with k scenarios discarded, at most C(k+d-1, k)
 *                       sum_{i<=k+d-1} C(N,i) eps^i (1-eps)^(N-i) (Campi &
 *                       Garatti 2011, J. Optim. Theory Appl. 148:257).
 *
 * Design: the scenario bound is evaluated in log space. Its binomial terms
 * rise up to the binomial mode and fall after it, so the sum starts at the
 * largest term in [0, k+d-1] (the mode, or k+d-1 when the mode lies beyond
 * it), whose logarithm comes from fg_log_beta (log C(N,i) =
 * -log(N+1) - log B(N-i+1, i+1), no cancellation for large N), and walks
 * outwards by the exact term ratios until the terms no longer change the
 * sum. The bound falls strictly as N grows (for N > k+d-1) and as eps
 * grows, so the inverse problems are bisections: over whole N after a
 * doubling search for a bracket, and over eps after a halving search.
 *
 * Invariants: every answer satisfies its bound (bound(N) <= beta <
 * bound(N-1); bound(eps) <= beta); inputs are range-checked against the
 * named limits of feasgate/limits.h before any work.
 *
 * Thread use: pure functions.
 */
#include "estimate/estimate.h"

#include <errno.h>
#include <gsl/gsl_cdf.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static double z_upper(double tail) {
  /* The quantile with `tail` above it; Qinv keeps accuracy for small
   * tails. */
  return gsl_cdf_ugaussian_Qinv(tail);
}

static bool open_unit(double x) {
  return x > 0 && x < 1;
}

/* The limit `which` (of value max) exceeded by parameter `param` = v. */
static fg_status over_limit(fg_problem *pr, fg_limit which, const char *param,
                            uint64_t v, uint64_t max) {
  return fg_problem_limit(
      pr, "", which, (double)max, "%s %llu exceeds %s = %llu", param,
      (unsigned long long)v, fg_limit_name(which), (unsigned long long)max);
}

/* ceil(n), at least 1, or the sample_size_samples limit naming `what`. */
static fg_status whole_samples(double n, const char *what, double *samples,
                               fg_problem *pr) {
  n = ceil(n);
  if (n < 1) n = 1;
  if (!(n <= (double)FG_SIZE_SAMPLES_MAX))
    return fg_problem_limit(pr, "", FG_LIMIT_SAMPLE_SIZE_SAMPLES,
                            (double)FG_SIZE_SAMPLES_MAX,
                            "%s needs %.3g samples, more than %s = %.0f", what,
                            n, fg_limit_name(FG_LIMIT_SAMPLE_SIZE_SAMPLES),
                            (double)FG_SIZE_SAMPLES_MAX);
  *samples = n;
  return FG_OK;
}

fg_status fg_size_half_width(double h, double confidence, double p,
                             double *samples, fg_problem *pr) {
  *samples = NAN;
  if (!open_unit(h))
    return fg_problem_add(pr, FG_EINVAL, "", 0,
                          "half_width must be strictly between 0 and 1, "
                          "found %g",
                          h);
  if (!open_unit(confidence))
    return fg_problem_add(pr, FG_EINVAL, "", 0,
                          "confidence must be strictly between 0 and 1, "
                          "found %g",
                          confidence);
  if (p < 0)
    p = 0.5;
  else if (!open_unit(p))
    return fg_problem_add(pr, FG_EINVAL, "", 0,
                          "probability must be strictly between 0 and 1, "
                          "found %g",
                          p);
  double z = z_upper((1 - confidence) / 2);
  char what[64];
  snprintf(what, sizeof what, "half_width %g", h);
  return whole_samples(z * z * p * (1 - p) / (h * h), what, samples, pr);
}

fg_status fg_size_power(double target, double p, double confidence,
                        double power, double *samples, fg_problem *pr) {
  *samples = NAN;
  if (!open_unit(target))
    return fg_problem_add(pr, FG_EINVAL, "", 0,
                          "target must be strictly between 0 and 1, found %g",
                          target);
  if (!open_unit(p) || !(p > target))
    return fg_problem_add(pr, FG_EINVAL, "", 0,
                          "probability must lie strictly between target %g "
                          "and 1 (a pass is only possible above the target), "
                          "found %g",
                          target, p);
  if (!open_unit(confidence))
    return fg_problem_add(pr, FG_EINVAL, "", 0,
                          "confidence must be strictly between 0 and 1, "
                          "found %g",
                          confidence);
  if (!(power >= 0.5 && power < 1))
    return fg_problem_add(pr, FG_EINVAL, "", 0,
                          "power must be at least 0.5 and below 1, found %g",
                          power);
  double za = z_upper((1 - confidence) / 2), zp = z_upper(1 - power);
  double r = (za * sqrt(target * (1 - target)) + zp * sqrt(p * (1 - p))) /
             (p - target);
  char what[96];
  snprintf(what, sizeof what, "probability %g against target %g", p, target);
  return whole_samples(r * r, what, samples, pr);
}

/* ---- the scenario-approach bound ---- */

/* log C(N, i) + i log eps + (N-i) log(1-eps). */
static double log_term(double n, double i, double leps, double l1m) {
  return -log(n + 1) - fg_log_beta(n - i + 1, i + 1) + i * leps + (n - i) * l1m;
}

double fg_scenario_log_bound(double n, double eps, uint64_t d, uint64_t k) {
  double m = (double)(k + d - 1); /* the tail runs over i = 0..m */
  /* log C(k+d-1, k) = -log(k+d) - log B(d, k+1). */
  double log_c =
      k == 0 ? 0.0
             : -log((double)(k + d)) - fg_log_beta((double)d, (double)k + 1);
  if (n <= m) return log_c; /* the tail is 1 */
  double leps = log(eps), l1m = log1p(-eps);
  double mode = floor((n + 1) * eps);
  double j = mode < m ? mode : m;
  if (j > n) j = n;
  double odds = eps / (1 - eps); /* term(i+1)/term(i) = (n-i)/(i+1) odds */
  double sum = 1.0, t = 1.0;
  for (double i = j; i > 0;) { /* downwards: term(i-1) from term(i) */
    t *= i / ((n - i + 1) * odds);
    i -= 1;
    sum += t;
    if (t < FG_SIZE_TAIL_NEGLIGIBLE * sum) break;
  }
  t = 1.0;
  for (double i = j; i < m;) { /* upwards, to m */
    t *= (n - i) / (i + 1) * odds;
    i += 1;
    sum += t;
    if (t < FG_SIZE_TAIL_NEGLIGIBLE * sum) break;
  }
  return log_c + log_term(n, j, leps, l1m) + log(sum);
}

static fg_status check_scenario_inputs(double beta, uint64_t d, uint64_t k,
                                       fg_problem *pr) {
  if (!open_unit(beta))
    return fg_problem_add(pr, FG_EINVAL, "", 0,
                          "beta must be strictly between 0 and 1, found %g",
                          beta);
  if (d < 1)
    return fg_problem_add(pr, FG_EINVAL, "", 0,
                          "decisions must be at least 1, found %llu",
                          (unsigned long long)d);
  if (d > FG_SIZE_DECISIONS_MAX)
    return over_limit(pr, FG_LIMIT_SAMPLE_SIZE_DECISIONS, "decisions", d,
                      FG_SIZE_DECISIONS_MAX);
  if (k > FG_SIZE_DISCARDED_MAX)
    return over_limit(pr, FG_LIMIT_SAMPLE_SIZE_DISCARDED, "discarded", k,
                      FG_SIZE_DISCARDED_MAX);
  return FG_OK;
}

fg_status fg_scenario_size(double eps, double beta, uint64_t d, uint64_t k,
                           uint64_t *n, fg_problem *pr) {
  *n = 0;
  if (!open_unit(eps))
    return fg_problem_add(pr, FG_EINVAL, "", 0,
                          "epsilon must be strictly between 0 and 1, found %g",
                          eps);
  fg_status st = check_scenario_inputs(beta, d, k, pr);
  if (st != FG_OK) return st;
  double lb = log(beta);
  uint64_t max = FG_SIZE_SCENARIOS_MAX;
  /* lo fails (bound >= 1 > beta at N = k+d-1), hi passes. */
  uint64_t lo = k + d - 1, hi = lo + 1;
  while (fg_scenario_log_bound((double)hi, eps, d, k) > lb) {
    lo = hi;
    if (hi >= max)
      return fg_problem_limit(pr, "", FG_LIMIT_SAMPLE_SIZE_SCENARIOS,
                              (double)max,
                              "epsilon %g and beta %g need more than "
                              "sample_size_scenarios = %llu scenarios",
                              eps, beta, (unsigned long long)max);
    hi = hi > max / 2 ? max : hi * 2;
  }
  for (int it = 0; hi - lo > 1 && it < FG_SIZE_BISECT_MAX; it++) {
    uint64_t mid = lo + (hi - lo) / 2;
    if (fg_scenario_log_bound((double)mid, eps, d, k) > lb)
      lo = mid;
    else
      hi = mid;
  }
  *n = hi;
  return FG_OK;
}

fg_status fg_scenario_epsilon(uint64_t n, double beta, uint64_t d, uint64_t k,
                              double *eps, fg_problem *pr) {
  *eps = NAN;
  fg_status st = check_scenario_inputs(beta, d, k, pr);
  if (st != FG_OK) return st;
  if (n > FG_SIZE_SCENARIOS_MAX)
    return over_limit(pr, FG_LIMIT_SAMPLE_SIZE_SCENARIOS, "scenarios", n,
                      FG_SIZE_SCENARIOS_MAX);
  if (n <= k + d - 1)
    return fg_problem_add(pr, FG_EINVAL, "", 0,
                          "scenarios must exceed decisions + discarded - 1 = "
                          "%llu for any epsilon below 1, found %llu",
                          (unsigned long long)(k + d - 1),
                          (unsigned long long)n);
  double lb = log(beta), nn = (double)n;
  /* Bracket: hi passes, lo fails. The bound tends to 0 as eps -> 1 and is
   * at least 1 as eps -> 0. */
  double hi = 0.5, lo;
  if (fg_scenario_log_bound(nn, hi, d, k) > lb) {
    lo = hi;
    hi = 1.0;
    /* Approach 1 from below by halving the distance. */
    for (int it = 0; it < FG_SIZE_BISECT_MAX; it++) {
      double cand = 1 - (1 - lo) / 2;
      if (cand >= 1) break;
      if (fg_scenario_log_bound(nn, cand, d, k) <= lb) {
        hi = cand;
        break;
      }
      lo = cand;
    }
    if (hi >= 1)
      return fg_problem_add(pr, FG_EINVAL, "", 0,
                            "no epsilon below 1 reaches beta %g with %llu "
                            "scenarios",
                            beta, (unsigned long long)n);
  } else {
    lo = hi / 2;
    for (int it = 0;
         it < FG_SIZE_BISECT_MAX && fg_scenario_log_bound(nn, lo, d, k) <= lb;
         it++) {
      hi = lo;
      lo /= 2;
      if (lo == 0) break;
    }
  }
  for (int it = 0;
       it < FG_SIZE_BISECT_MAX && hi - lo > FG_SIZE_EPS_REL_PRECISION * hi;
       it++) {
    double mid = lo + (hi - lo) / 2;
    if (fg_scenario_log_bound(nn, mid, d, k) > lb)
      lo = mid;
    else
      hi = mid;
  }
  *eps = hi;
  return FG_OK;
}

/* ---- the query ---- */

static const char *const param_names[FG_SZ_NPARAMS] = {
    "half_width", "confidence", "probability", "target",    "power",
    "epsilon",    "beta",       "decisions",   "discarded", "scenarios"};

const char *fg_size_param_name(int param) {
  return param >= 0 && param < FG_SZ_NPARAMS ? param_names[param] : NULL;
}

const char *fg_size_method_name(fg_size_method m) {
  switch (m) {
  case FG_SIZE_NORMAL_HALF_WIDTH: return "normal_half_width";
  case FG_SIZE_NORMAL_POWER: return "normal_power";
  case FG_SIZE_CAMPI_GARATTI_2008: return "campi_garatti_2008";
  case FG_SIZE_CAMPI_GARATTI_2011: return "campi_garatti_2011";
  }
  return "unknown";
}

static bool is_whole_param(int i) {
  return i == FG_SZ_DECISIONS || i == FG_SZ_DISCARDED || i == FG_SZ_SCENARIOS;
}

fg_status fg_size_query_set(fg_size_query *q, const char *name,
                            const char *text, fg_problem *p) {
  int idx = -1;
  for (int i = 0; i < FG_SZ_NPARAMS; i++)
    if (strcmp(name, param_names[i]) == 0) idx = i;
  if (idx < 0)
    return fg_problem_add(p, FG_EINVAL, "", 0,
                          "unknown parameter '%.64s' (known: half_width, "
                          "confidence, probability, target, power, epsilon, "
                          "beta, decisions, discarded, scenarios)",
                          name);
  if (q->given[idx])
    return fg_problem_add(p, FG_EINVAL, "", 0,
                          "parameter '%s' is given more than once", name);
  char *end = NULL;
  errno = 0;
  double v = text && *text ? strtod(text, &end) : NAN;
  if (!text || !*text || *end || errno == ERANGE || !isfinite(v))
    return fg_problem_add(p, FG_EINVAL, "", 0,
                          "parameter '%s': expected a finite decimal number, "
                          "found '%.40s'",
                          name, text ? text : "");
  if (is_whole_param(idx) &&
      (v != floor(v) || v < 0 || v > 9.007199254740991e15))
    return fg_problem_add(p, FG_EINVAL, "", 0,
                          "parameter '%s': expected a whole number of at "
                          "least 0, found '%.40s'",
                          name, text);
  q->given[idx] = true;
  q->value[idx] = v;
  return FG_OK;
}

/* The forms: the parameter that selects one, those it needs, those it may
 * have. */
typedef struct size_form {
  int selector;
  int required[4];
  int nrequired;
  int optional; /* -1 when none */
} size_form;

static const size_form forms[] = {
    {FG_SZ_HALF_WIDTH,
     {FG_SZ_HALF_WIDTH, FG_SZ_CONFIDENCE},
     2,
     FG_SZ_PROBABILITY},
    {FG_SZ_TARGET,
     {FG_SZ_TARGET, FG_SZ_PROBABILITY, FG_SZ_CONFIDENCE, FG_SZ_POWER},
     4,
     -1},
    {FG_SZ_EPSILON,
     {FG_SZ_EPSILON, FG_SZ_BETA, FG_SZ_DECISIONS},
     3,
     FG_SZ_DISCARDED},
    {FG_SZ_SCENARIOS,
     {FG_SZ_SCENARIOS, FG_SZ_BETA, FG_SZ_DECISIONS},
     3,
     FG_SZ_DISCARDED},
};
#define NFORMS (sizeof forms / sizeof *forms)

fg_status fg_size_query_solve(const fg_size_query *q, fg_size_answer *a,
                              fg_problem *p) {
  memset(a, 0, sizeof *a);
  a->samples = a->epsilon = a->bound = NAN;
  const size_form *f = NULL;
  char chosen[128] = "";
  int nsel = 0;
  for (size_t i = 0; i < NFORMS; i++) {
    if (!q->given[forms[i].selector]) continue;
    nsel++;
    size_t len = strlen(chosen);
    snprintf(chosen + len, sizeof chosen - len, "%s%s", len ? ", " : "",
             param_names[forms[i].selector]);
    f = &forms[i];
  }
  if (nsel == 0)
    return fg_problem_add(p, FG_EINVAL, "", 0,
                          "missing parameters: give half_width (with "
                          "confidence), target (with probability, confidence "
                          "and power), epsilon or scenarios (with beta and "
                          "decisions)");
  if (nsel > 1)
    return fg_problem_add(p, FG_EINVAL, "", 0,
                          "ambiguous parameters: %s each select a different "
                          "calculation; give only one of them",
                          chosen);
  fg_status st = FG_OK;
  for (int r = 0; r < f->nrequired; r++)
    if (!q->given[f->required[r]])
      st = fg_problem_add(
          p, FG_EINVAL, "", 0, "missing parameter '%s' (needed with '%s')",
          param_names[f->required[r]], param_names[f->selector]);
  for (int i = 0; i < FG_SZ_NPARAMS; i++) {
    if (!q->given[i] || i == f->optional) continue;
    bool needed = false;
    for (int r = 0; r < f->nrequired; r++)
      if (f->required[r] == i) needed = true;
    if (!needed)
      st = fg_problem_add(p, FG_EINVAL, "", 0,
                          "parameter '%s' does not belong with '%s'",
                          param_names[i], param_names[f->selector]);
  }
  if (st != FG_OK) return st;
  const double *v = q->value;
  switch (f->selector) {
  case FG_SZ_HALF_WIDTH:
    a->method = FG_SIZE_NORMAL_HALF_WIDTH;
    return fg_size_half_width(v[FG_SZ_HALF_WIDTH], v[FG_SZ_CONFIDENCE],
                              q->given[FG_SZ_PROBABILITY] ? v[FG_SZ_PROBABILITY]
                                                          : -1,
                              &a->samples, p);
  case FG_SZ_TARGET:
    a->method = FG_SIZE_NORMAL_POWER;
    return fg_size_power(v[FG_SZ_TARGET], v[FG_SZ_PROBABILITY],
                         v[FG_SZ_CONFIDENCE], v[FG_SZ_POWER], &a->samples, p);
  default: break;
  }
  uint64_t d = (uint64_t)v[FG_SZ_DECISIONS];
  uint64_t k = q->given[FG_SZ_DISCARDED] ? (uint64_t)v[FG_SZ_DISCARDED] : 0;
  a->method = q->given[FG_SZ_DISCARDED] ? FG_SIZE_CAMPI_GARATTI_2011
                                        : FG_SIZE_CAMPI_GARATTI_2008;
  if (f->selector == FG_SZ_EPSILON) {
    st = fg_scenario_size(v[FG_SZ_EPSILON], v[FG_SZ_BETA], d, k, &a->scenarios,
                          p);
    if (st == FG_OK)
      a->bound = exp(
          fg_scenario_log_bound((double)a->scenarios, v[FG_SZ_EPSILON], d, k));
    return st;
  }
  a->gives_epsilon = true;
  double n = v[FG_SZ_SCENARIOS];
  if (n > (double)FG_SIZE_SCENARIOS_MAX)
    return fg_problem_limit(p, "", FG_LIMIT_SAMPLE_SIZE_SCENARIOS,
                            (double)FG_SIZE_SCENARIOS_MAX,
                            "scenarios %.0f exceeds sample_size_scenarios = "
                            "%llu",
                            n, (unsigned long long)FG_SIZE_SCENARIOS_MAX);
  st = fg_scenario_epsilon((uint64_t)n, v[FG_SZ_BETA], d, k, &a->epsilon, p);
  if (st == FG_OK) a->bound = exp(fg_scenario_log_bound(n, a->epsilon, d, k));
  return st;
}
