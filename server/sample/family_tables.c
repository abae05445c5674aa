/*
 * sample/family_tables.c -- the count and table families: poisson and
 * binomial (inverse CDFs by a bounded search on core/quantile.c's exact
 * CDFs), discrete (values with weights: Walker's alias table for draws,
 * sorted cumulative tables for the inverse CDF), empirical (equally
 * likely data) and scenario_table (whole rows, optionally weighted).
 *
 * Parameter layout: poisson mean; binomial trials, p; the tables keep
 * values/weights (and sorted, cdf_lo, cdf_hi) shared by all elements.
 * Domain choices: poisson accepts mean >= 0 (0 is the point mass at 0);
 * counts must fit GSL's unsigned int, hence FG_COUNT_PARAM_MAX.
 *
 * Thread use: parsing runs in the building thread; draws and inverse
 * CDFs only read the input and may run in any number of threads at once.
 */
#include "sample/sample_internal.h"

#include "core/quantile.h"
#include "feasgate/limits.h"

#include <cjson/cJSON.h>
#include <gsl/gsl_randist.h>

#include <math.h>
#include <stdlib.h>
#include <string.h>

static void parse_poisson(fg_input *in, fg_params *c) {
  if (fg_param_read(c, in, 0, "mean", 1, 0) > 0) {
    fg_param_positive(c, "mean", in->par[0], 0);
    fg_param_at_most(c, "mean", in->par[0], FG_COUNT_PARAM_MAX);
  }
  fg_param_set_integer(in, 1);
}

static void parse_binomial(fg_input *in, fg_params *c) {
  int n = fg_param_read(c, in, 0, "trials", 1, 0);
  int q = fg_param_read(c, in, 1, "p", 1, 0);
  if (n > 0) {
    fg_param_positive(c, "trials", in->par[0], 0);
    fg_param_integer(c, "trials", in->par[0]);
    fg_param_at_most(c, "trials", in->par[0], FG_COUNT_PARAM_MAX);
  }
  if (q > 0) {
    fg_param_positive(c, "p", in->par[1], 0);
    fg_param_at_most(c, "p", in->par[1], 1.0);
  }
  fg_param_set_integer(in, 1);
}

/* Weights: same count as `count`, each >= 0, not all zero; normalised
 * copy kept in in->weights and an alias table built. */
static int parse_weights(fg_input *in, fg_params *c, int count,
                         const char *what) {
  double *w = NULL;
  int nw = 0;
  int got = fg_family_param_list(c, "weights", 0, &w, &nw);
  if (got <= 0) return got;
  char ptr[FG_POINTER_MAX];
  fg_family_param_pointer(c, "weights", -1, ptr, sizeof ptr);
  if (nw != count) {
    fg_problem_add(c->p, FG_EINVAL, ptr, 0,
                   "expected an array of %d weights (one per %s), found %d",
                   count, what, nw);
    c->st = c->st ? c->st : FG_EINVAL;
    free(w);
    return -1;
  }
  double total = 0;
  for (int k = 0; k < nw; k++) {
    if (!(w[k] >= 0)) {
      fg_family_param_error(c, FG_EINVAL, "weights", k,
                            "expected a weight >= 0, found %.15g", w[k]);
      free(w);
      return -1;
    }
    total += w[k];
  }
  if (!(total > 0) || !isfinite(total)) {
    fg_problem_add(c->p, FG_EINVAL, ptr, 0,
                   total > 0 ? "expected weights with a finite sum, found "
                               "a sum that overflows"
                             : "expected at least one positive weight, "
                               "found all zero");
    c->st = c->st ? c->st : FG_EINVAL;
    free(w);
    return -1;
  }
  for (int k = 0; k < nw; k++)
    w[k] /= total;
  in->weights = w;
  in->alias = gsl_ran_discrete_preproc((size_t)nw, w);
  if (!in->alias) {
    fg_problem_set(c->p, FG_ENOMEM, "out of memory building a table");
    c->st = c->st ? c->st : FG_ENOMEM;
    return -1;
  }
  return 1;
}

typedef struct vw_pair {
  double v, w;
} vw_pair;

static int cmp_pair(const void *a, const void *b) {
  double x = ((const vw_pair *)a)->v, y = ((const vw_pair *)b)->v;
  return (x > y) - (x < y);
}

static void parse_discrete(fg_input *in, fg_params *c) {
  if (fg_family_param_list(c, "values", 1, &in->values, &in->nvalues) < 0)
    return;
  if (!fg_family_param_present(c, "weights")) {
    fg_problem_add(c->p, FG_EINVAL, c->ptr, 0,
                   "family 'discrete' needs parameter 'weights' (an array "
                   "of numbers), found none");
    c->st = c->st ? c->st : FG_EINVAL;
    return;
  }
  if (parse_weights(in, c, in->nvalues, "value") < 0) return;
  int n = in->nvalues, allint = 1;
  vw_pair *pairs = malloc((size_t)n * sizeof *pairs);
  in->sorted = malloc((size_t)n * sizeof(double));
  in->cdf_lo = malloc((size_t)n * sizeof(double));
  in->cdf_hi = malloc((size_t)n * sizeof(double));
  if (!pairs || !in->sorted || !in->cdf_lo || !in->cdf_hi) {
    free(pairs);
    fg_problem_set(c->p, FG_ENOMEM, "out of memory building a table");
    c->st = c->st ? c->st : FG_ENOMEM;
    return;
  }
  for (int k = 0; k < n; k++) {
    pairs[k].v = in->values[k];
    pairs[k].w = in->weights[k];
    allint &= fg_param_integral(in->values[k]);
  }
  qsort(pairs, (size_t)n, sizeof *pairs, cmp_pair);
  double acc = 0;
  for (int k = 0; k < n; k++) {
    in->sorted[k] = pairs[k].v;
    acc += pairs[k].w;
    in->cdf_lo[k] = acc;
  }
  acc = 0;
  for (int k = n - 1; k >= 0; k--) {
    in->cdf_hi[k] = acc; /* P(X > v_k) */
    acc += pairs[k].w;
  }
  in->cdf_lo[n - 1] = 1.0;
  free(pairs);
  fg_param_set_integer(in, allint);
}

static void parse_empirical(fg_input *in, fg_params *c) {
  if (fg_family_param_list(c, "data", 1, &in->values, &in->nvalues) < 0) return;
  int allint = 1;
  for (int k = 0; k < in->nvalues; k++)
    allint &= fg_param_integral(in->values[k]);
  fg_param_set_integer(in, allint);
}

static void parse_scenario_table(fg_input *in, fg_params *c) {
  const cJSON *rows = cJSON_GetObjectItemCaseSensitive(c->dist, "rows");
  char ptr[FG_POINTER_MAX];
  fg_pointer_join(ptr, sizeof ptr, c->ptr, "rows");
  if (!rows) {
    fg_problem_add(c->p, FG_EINVAL, c->ptr, 0,
                   "family 'scenario_table' needs parameter 'rows' (an "
                   "array of arrays of %d numbers), found none",
                   in->size);
    c->st = c->st ? c->st : FG_EINVAL;
    return;
  }
  int nrows = cJSON_IsArray(rows) ? cJSON_GetArraySize(rows) : 0;
  if (nrows < 1) {
    fg_problem_add(
        c->p, FG_EINVAL, ptr, 0, "expected a non-empty array of rows, found %s",
        cJSON_IsArray(rows) ? "an empty array" : fg_family_json_type(rows));
    c->st = c->st ? c->st : FG_EINVAL;
    return;
  }
  if ((double)nrows * in->size > FG_TABLE_CELLS_MAX) {
    fg_problem_limit(c->p, ptr, FG_LIMIT_TABLE_CELLS, FG_TABLE_CELLS_MAX,
                     "expected at most %d cells, found %d rows of %d",
                     FG_TABLE_CELLS_MAX, nrows, in->size);
    c->st = c->st ? c->st : FG_ELIMIT;
    return;
  }
  in->values = malloc((size_t)nrows * (size_t)in->size * sizeof(double));
  if (!in->values) {
    fg_problem_set(c->p, FG_ENOMEM, "out of memory reading %s", ptr);
    c->st = c->st ? c->st : FG_ENOMEM;
    return;
  }
  in->nvalues = nrows;
  memset(in->integer, 1, (size_t)in->size);
  int r = 0;
  for (const cJSON *row = rows->child; row; row = row->next, r++) {
    char rptr[FG_POINTER_MAX];
    double *dst = in->values + (size_t)r * (size_t)in->size;
    fg_pointer_index(rptr, sizeof rptr, ptr, r);
    if (!in->is_vector && cJSON_IsNumber(row)) {
      if (!isfinite(row->valuedouble)) goto not_finite;
      dst[0] = row->valuedouble;
      in->integer[0] &= (unsigned char)fg_param_integral(dst[0]);
      continue;
    }
    if (!cJSON_IsArray(row) || cJSON_GetArraySize(row) != in->size) {
      if (cJSON_IsArray(row))
        fg_problem_add(c->p, FG_EINVAL, rptr, 0,
                       "expected a row of %d numbers (the input's size), "
                       "found an array of %d",
                       in->size, cJSON_GetArraySize(row));
      else
        fg_problem_add(c->p, FG_EINVAL, rptr, 0,
                       "expected a row of %d numbers (the input's size), "
                       "found %s",
                       in->size, fg_family_json_type(row));
      c->st = c->st ? c->st : FG_EINVAL;
      return;
    }
    int e = 0;
    for (const cJSON *x = row->child; x; x = x->next, e++) {
      if (!cJSON_IsNumber(x) || !isfinite(x->valuedouble)) {
        char eptr[FG_POINTER_MAX];
        fg_pointer_index(eptr, sizeof eptr, rptr, e);
        fg_problem_add(
            c->p, FG_EINVAL, eptr, 0, "expected a finite number, found %s",
            cJSON_IsNumber(x) ? "one out of range" : fg_family_json_type(x));
        c->st = c->st ? c->st : FG_EINVAL;
        return;
      }
      dst[e] = x->valuedouble;
      in->integer[e] &= (unsigned char)fg_param_integral(dst[e]);
    }
    continue;
  not_finite:
    fg_problem_add(c->p, FG_EINVAL, rptr, 0,
                   "expected a finite number, found one out of range");
    c->st = c->st ? c->st : FG_EINVAL;
    return;
  }
  parse_weights(in, c, nrows, "row");
}

/* ---- inverse CDFs ---- */

/* Integer laws: the smallest k in [0, kmax] with F(k) >= u, decided from
 * the upper tail Q(k) = 1 - F(k) <= uc when u >= 1/2 so both tails keep
 * their precision. The CDFs are core/quantile.c's incomplete gamma and beta
 * (bounded work at any mean or trials): poisson F(k) = Q(k+1, mean),
 * binomial F(k) = I_{1-p}(n-k, k+1). The search starts at the
 * Cornish-Fisher point, gallops (steps 1, 2, 4, ...) until the answer is
 * bracketed, then bisects, so it evaluates the CDF at most about
 * 2 log2(kmax) + 2 times (66 for kmax = 2e9) whatever the start. */
static int count_ok(const fg_input *in, int e, double k, double u, double uc) {
  double lo, up; /* P(X <= k), P(X > k) */
  if (in->kind == FG_FAM_POISSON) {
    fg_q_igamma(k + 1, in->par[0][e], &up, &lo, NULL);
  } else {
    double n = in->par[0][e], p = in->par[1][e];
    if (k >= n) return 1;
    fg_q_ibeta(1 - p, p, n - k, k + 1, &lo, &up, NULL);
  }
  return u < 0.5 ? lo >= u : up <= uc;
}

static double count_icdf(const fg_input *in, int e, double mean, double sd,
                         double skew, double kmax, double u, double uc) {
  if (!(sd > 0)) return floor(mean); /* point mass */
  double z = fg_family_std_quantile(u, uc);
  double start = floor(mean + sd * (z + skew * (z * z - 1) / 6));
  if (!(start >= 0)) start = 0;
  if (start > kmax) start = kmax;
  /* invariant: ok(hi); lo < hi and not ok(lo) (lo = -1 stands for "none") */
  double lo, hi, step = 1;
  if (count_ok(in, e, start, u, uc)) {
    hi = start;
    lo = hi - step;
    while (lo >= 0 && count_ok(in, e, lo, u, uc)) {
      hi = lo;
      step *= 2;
      lo = hi - step;
    }
    if (lo < 0) lo = -1;
  } else {
    lo = start;
    hi = lo + step;
    while (hi < kmax && !count_ok(in, e, hi, u, uc)) {
      lo = hi;
      step *= 2;
      hi = lo + step;
    }
    if (hi > kmax) hi = kmax;
  }
  while (hi - lo > 1) {
    double mid = floor(lo + (hi - lo) / 2);
    if (count_ok(in, e, mid, u, uc)) hi = mid;
    else lo = mid;
  }
  return hi;
}

static double poisson_icdf(const fg_input *in, int e, double u, double uc) {
  double mu = in->par[0][e];
  return count_icdf(in, e, mu, sqrt(mu), mu > 0 ? 1 / sqrt(mu) : 0,
                    FG_COUNT_PARAM_MAX * 2, u, uc);
}

static double binomial_icdf(const fg_input *in, int e, double u,
                            double uc) {
  double n = in->par[0][e], q = in->par[1][e], sd = sqrt(n * q * (1 - q));
  return count_icdf(in, e, n * q, sd, sd > 0 ? (1 - 2 * q) / sd : 0, n, u,
                    uc);
}

int fg_family_cdf_index(const fg_input *in, double u, double uc) {
  int lo = 0, hi = in->nvalues - 1;
  while (lo < hi) {
    int mid = lo + (hi - lo) / 2;
    int enough = u < 0.5 ? in->cdf_lo[mid] >= u : in->cdf_hi[mid] <= uc;
    if (enough)
      hi = mid;
    else
      lo = mid + 1;
  }
  return lo;
}

/* Discrete table: the value at fg_family_cdf_index. */
static double discrete_icdf(const fg_input *in, int e, double u, double uc) {
  (void)e;
  return in->sorted[fg_family_cdf_index(in, u, uc)];
}

/* ---- draws through GSL's samplers ---- */

static double poisson_draw(const fg_input *in, int e, gsl_rng *r) {
  return (double)gsl_ran_poisson(r, in->par[0][e]);
}

static double binomial_draw(const fg_input *in, int e, gsl_rng *r) {
  return (double)gsl_ran_binomial(r, in->par[1][e],
                                  (unsigned int)in->par[0][e]);
}

static double discrete_draw(const fg_input *in, int e, gsl_rng *r) {
  (void)e;
  return in->values[gsl_ran_discrete(r, in->alias)];
}

static double empirical_draw(const fg_input *in, int e, gsl_rng *r) {
  (void)e;
  return in->values[gsl_rng_uniform_int(r, (unsigned long)in->nvalues)];
}

/* ---- the families ---- */

static const char *const p_poisson[] = {"mean", NULL};
static const char *const p_binomial[] = {"trials", "p", NULL};
static const char *const p_discrete[] = {"values", "weights", NULL};
static const char *const p_empirical[] = {"data", NULL};
static const char *const p_scenario_table[] = {"rows", "weights", NULL};

FG_FAMILY(poisson, POISSON, poisson_icdf, NULL, poisson_draw);
FG_FAMILY(binomial, BINOMIAL, binomial_icdf, NULL, binomial_draw);
FG_FAMILY(discrete, DISCRETE, discrete_icdf, NULL, discrete_draw);
/* empirical and scenario_table have no inverse CDF: not copula members */
FG_FAMILY(empirical, EMPIRICAL, NULL, NULL, empirical_draw);
/* a joint block: drawn row by row in sampler.c, not element-wise here */
FG_FAMILY(scenario_table, SCENARIO_TABLE, NULL, NULL, NULL);
