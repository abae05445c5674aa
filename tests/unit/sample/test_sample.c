/*
 * tests/unit/sample/test_sample.c -- the sample/ module: streams, families,
 * multivariate normal, Gaussian copula, parameter errors.
 *
 * What is shown:
 *   - determinism: bulk draws equal one-at-a-time draws and draws in other
 *     chunkings and offsets; a sample regenerated alone equals its bulk
 *     value; design and validation streams differ; the seed matters;
 *   - every family's parameter errors, with the JSON Pointer of the fault;
 *   - sample moments of 200k draws against closed-form moments (tolerance
 *     5 standard errors, the standard error of the variance estimated from
 *     the sample's own fourth central moment);
 *   - truncated normals inside their bounds with the closed-form mean;
 *   - multivariate normal sample covariance against the declared one;
 *   - Gaussian copula rank correlation and preserved marginals;
 *   - sampling designs: determinism under any chunking, antithetic
 *     mirrors, one sample per Latin hypercube stratum, Sobol points equal
 *     to GSL's and stratified after shifting, marginal means far closer
 *     to closed forms than Monte Carlo gets;
 *   - the per-block cipher against Random123's, the ziggurat's law.
 * The draws are deterministic for the fixed seeds used, so a pass is a
 * pass on every run.
 */
#include "sample/sample.h"
#include "sample/sample_internal.h"

#include <Random123/philox.h>

#include "feasgate/limits.h"
#include "feasgate/status.h"

#include "check.h"

#include <cjson/cJSON.h>
#include <gsl/gsl_qrng.h>

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define NBIG 200000
#define PI 3.14159265358979323846

/* ---- helpers ------------------------------------------------------------ */

static fg_sampler *build(const char *uncertain, const char *dependence,
                         fg_problem *p) {
  cJSON *u = cJSON_Parse(uncertain);
  cJSON *d = dependence ? cJSON_Parse(dependence) : NULL;
  if (!u || (dependence && !d)) {
    fprintf(stderr, "test JSON does not parse: %s\n", uncertain);
    cJSON_Delete(u);
    cJSON_Delete(d);
    return NULL;
  }
  fg_sampler *s = NULL;
  fg_problem_init(p);
  fg_status st = fg_sampler_build(u, d, &s, p);
  cJSON_Delete(u);
  cJSON_Delete(d);
  if (st != FG_OK) {
    fg_sampler_free(s);
    return NULL;
  }
  return s;
}

static fg_sampler *build_ok(const char *uncertain, const char *dependence) {
  fg_problem p;
  fg_sampler *s = build(uncertain, dependence, &p);
  CHECK_MSG(s != NULL, "build failed: %s (%s)", p.detail, uncertain);
  return s;
}

/* The build must fail with status st and an item at `pointer` whose
 * message contains `text`. */
static void expect_error(const char *uncertain, const char *dependence,
                         fg_status st, const char *pointer, const char *text) {
  fg_problem p;
  fg_sampler *s = build(uncertain, dependence, &p);
  CHECK_MSG(s == NULL, "build succeeded, expected an error at %s", pointer);
  fg_sampler_free(s);
  CHECK_MSG(p.status == st, "status %d, expected %d for %s", (int)p.status,
            (int)st, pointer);
  int found = 0;
  for (int i = 0; i < p.nitems; i++)
    if (strcmp(p.items[i].pointer, pointer) == 0 &&
        strstr(p.items[i].message, text))
      found = 1;
  CHECK_MSG(found, "no item at %s containing \"%s\"; first item: %s: %s",
            pointer, text, p.nitems ? p.items[0].pointer : "(none)",
            p.nitems ? p.items[0].message : "");
}

/* Draw samples [first, first + n) in chunks of `chunk` into a dims x n
 * array (dimension j at out[j * n + t]). */
static double *draw_range(const fg_sampler *s, uint64_t seed, fg_stream st,
                          uint64_t first, int n, int chunk) {
  int d = fg_sampler_dims(s);
  double *out = malloc((size_t)d * (size_t)n * sizeof *out);
  double *tmp = malloc((size_t)d * FG_BLOCK * sizeof *tmp);
  fg_sample_scratch *w = fg_sample_scratch_new(s);
  if (!out || !tmp || !w) abort();
  for (int t0 = 0; t0 < n; t0 += chunk) {
    int m = n - t0 < chunk ? n - t0 : chunk;
    fg_sampler_draw(s, w, seed, st, first + (uint64_t)t0, m, tmp, FG_BLOCK);
    for (int j = 0; j < d; j++)
      memcpy(out + (size_t)j * (size_t)n + (size_t)t0,
             tmp + (size_t)j * FG_BLOCK, (size_t)m * sizeof *out);
  }
  fg_sample_scratch_free(w);
  free(tmp);
  return out;
}

static double *draw_big(const fg_sampler *s, uint64_t seed) {
  return draw_range(s, seed, FG_STREAM_DESIGN, 0, NBIG, FG_BLOCK);
}

typedef struct moments {
  double mean, var, m4;
} moments;

static moments moments_of(const double *x, int n) {
  moments m = {0, 0, 0};
  for (int i = 0; i < n; i++)
    m.mean += x[i];
  m.mean /= n;
  for (int i = 0; i < n; i++) {
    double d = x[i] - m.mean, d2 = d * d;
    m.var += d2;
    m.m4 += d2 * d2;
  }
  m.var /= n;
  m.m4 /= n;
  return m;
}

/* Sample mean and variance within 5 standard errors of mu and var. */
static void check_moments(const double *x, int n, double mu, double var,
                          const char *what) {
  moments m = moments_of(x, n);
  double se_mean = sqrt(m.var / n);
  double se_var = sqrt(fmax(m.m4 - m.var * m.var, 0) / n);
  CHECK_MSG(fabs(m.mean - mu) <= 5 * se_mean + 1e-12,
            "%s: mean %.6g, expected %.6g (se %.3g)", what, m.mean, mu,
            se_mean);
  CHECK_MSG(fabs(m.var - var) <= 5 * se_var + 1e-12,
            "%s: variance %.6g, expected %.6g (se %.3g)", what, m.var, var,
            se_var);
}

static double covariance_of(const double *x, const double *y, int n) {
  double mx = 0, my = 0, s = 0;
  for (int i = 0; i < n; i++) {
    mx += x[i];
    my += y[i];
  }
  mx /= n;
  my /= n;
  for (int i = 0; i < n; i++)
    s += (x[i] - mx) * (y[i] - my);
  return s / n;
}

static double correlation_of(const double *x, const double *y, int n) {
  return covariance_of(x, y, n) /
         sqrt(covariance_of(x, x, n) * covariance_of(y, y, n));
}

static double phi(double z) {
  return exp(-0.5 * z * z) / sqrt(2 * PI);
}
static double Phi(double z) {
  return 0.5 * erfc(-z / sqrt(2));
}

/* ---- determinism ----------------------------------------------------------
 */

static const char *MIXED =
    "[{\"name\":\"dur\",\"size\":4,\"distribution\":{\"family\":\"normal\","
    "\"mean\":[10,20,30,40],\"sd\":2}},"
    "{\"name\":\"urgent\",\"distribution\":{\"family\":\"poisson\",\"mean\":"
    "0.6}},"
    "{\"name\":\"g\",\"size\":2,\"distribution\":{\"family\":\"gamma\","
    "\"shape\":[0.4,3],\"scale\":2}},"
    "{\"name\":\"tn\",\"distribution\":{\"family\":\"normal\",\"mean\":0,"
    "\"sd\":1,\"lower\":-0.5,\"upper\":2}},"
    "{\"name\":\"pick\",\"distribution\":{\"family\":\"discrete\","
    "\"values\":[1,2,5],\"weights\":[1,1,2]}},"
    "{\"name\":\"mv\",\"size\":3,\"distribution\":{\"family\":"
    "\"multivariate_normal\",\"mean\":[0,1,2],\"covariance\":"
    "[[1,0.5,0.2],[0.5,2,0.3],[0.2,0.3,1.5]]}},"
    "{\"name\":\"ln\",\"size\":2,\"distribution\":{\"family\":\"lognormal\","
    "\"meanlog\":1,\"sdlog\":0.4}},"
    "{\"name\":\"cnt\",\"distribution\":{\"family\":\"poisson\",\"mean\":4}},"
    "{\"name\":\"tab\",\"size\":2,\"distribution\":{\"family\":"
    "\"scenario_table\",\"rows\":[[1,2],[3,4],[5,6]],\"weights\":[1,2,3]}},"
    "{\"name\":\"b\",\"distribution\":{\"family\":\"beta\",\"a\":0.5,\"b\":"
    "0.7}},"
    "{\"name\":\"t\",\"distribution\":{\"family\":\"student_t\",\"df\":3}}]";
static const char *MIXED_DEP =
    "[{\"kind\":\"gaussian_copula\",\"members\":[\"ln\",\"cnt\"],"
    "\"correlation\":{\"equal\":0.5}}]";

static int same(const double *a, const double *b, size_t n) {
  return memcmp(a, b, n * sizeof *a) == 0;
}

static void test_determinism(void) {
  fg_sampler *s = build_ok(MIXED, MIXED_DEP);
  if (!s) return;
  int d = fg_sampler_dims(s);
  CHECK_INT(d, 4 + 1 + 2 + 1 + 1 + 3 + 2 + 1 + 2 + 1 + 1);
  const int n = 1000;
  const uint64_t seed = 12345;
  size_t cells = (size_t)d * n;
  double *bulk = draw_range(s, seed, FG_STREAM_DESIGN, 0, n, FG_BLOCK);
  double *one = draw_range(s, seed, FG_STREAM_DESIGN, 0, n, 1);
  double *c37 = draw_range(s, seed, FG_STREAM_DESIGN, 0, n, 37);
  double *c200 = draw_range(s, seed, FG_STREAM_DESIGN, 0, n, 200);
  CHECK(same(bulk, one, cells));
  CHECK(same(bulk, c37, cells));
  CHECK(same(bulk, c200, cells));

  /* a different chunk offset: samples [300, 1000) drawn on their own
   * equal the tail of the bulk draw, dimension by dimension */
  double *tail = draw_range(s, seed, FG_STREAM_DESIGN, 300, n - 300, 77);
  int tail_ok = 1;
  for (int j = 0; j < d; j++)
    tail_ok &= same(tail + (size_t)j * (n - 300), bulk + (size_t)j * n + 300,
                    (size_t)(n - 300));
  CHECK(tail_ok);

  /* sample 777 regenerated alone */
  double *alone = draw_range(s, seed, FG_STREAM_DESIGN, 777, 1, 1);
  int alone_ok = 1;
  for (int j = 0; j < d; j++)
    alone_ok &= alone[j] == bulk[(size_t)j * n + 777];
  CHECK(alone_ok);

  /* design vs validation, and another seed: (almost) no value repeats
   * except in the discrete/count/table dimensions */
  double *val = draw_range(s, seed, FG_STREAM_VALIDATION, 0, n, FG_BLOCK);
  double *seed2 = draw_range(s, seed + 1, FG_STREAM_DESIGN, 0, n, FG_BLOCK);
  double *hi =
      draw_range(s, seed, FG_STREAM_DESIGN, UINT64_C(1) << 40, n, FG_BLOCK);
  int eq_val = 0, eq_seed = 0, eq_hi = 0;
  for (int t = 0; t < n; t++) { /* dimension 0 is a continuous normal */
    eq_val += val[t] == bulk[t];
    eq_seed += seed2[t] == bulk[t];
    eq_hi += hi[t] == bulk[t];
  }
  CHECK_INT(eq_val, 0);
  CHECK_INT(eq_seed, 0);
  CHECK_INT(eq_hi, 0);
  CHECK(!same(val, bulk, cells));
  CHECK(!same(seed2, bulk, cells));

  /* drawing twice with the same scratch, or a fresh sampler, repeats */
  fg_sampler *s2 = build_ok(MIXED, MIXED_DEP);
  if (s2) {
    double *again = draw_range(s2, seed, FG_STREAM_DESIGN, 0, n, 64);
    CHECK(same(bulk, again, cells));
    free(again);
    fg_sampler_free(s2);
  }

  /* dimension order: the values of one input do not move when another
   * input is added after it */
  fg_sampler *s3 = build_ok(
      "[{\"name\":\"dur\",\"size\":4,\"distribution\":{\"family\":\"normal\","
      "\"mean\":[10,20,30,40],\"sd\":2}}]",
      NULL);
  if (s3) {
    double *first4 = draw_range(s3, seed, FG_STREAM_DESIGN, 0, n, FG_BLOCK);
    CHECK(same(first4, bulk, (size_t)4 * n));
    free(first4);
    fg_sampler_free(s3);
  }

  free(bulk);
  free(one);
  free(c37);
  free(c200);
  free(tail);
  free(alone);
  free(val);
  free(seed2);
  free(hi);
  fg_sampler_free(s);
}

static void test_columns(void) {
  fg_sampler *s = build_ok(MIXED, MIXED_DEP);
  if (!s) return;
  CHECK_STR(fg_sampler_column(s, 0), "dur[0]");
  CHECK_STR(fg_sampler_column(s, 3), "dur[3]");
  CHECK_STR(fg_sampler_column(s, 4), "urgent");
  CHECK_STR(fg_sampler_column(s, 5), "g[0]");
  CHECK_STR(fg_sampler_column(s, 7), "tn");
  CHECK_STR(fg_sampler_column(s, 9), "mv[0]");
  CHECK(fg_sampler_column(s, -1) == NULL);
  CHECK(fg_sampler_column(s, fg_sampler_dims(s)) == NULL);
  CHECK(!fg_sampler_integer_valued(s, 0));
  CHECK(fg_sampler_integer_valued(s, 4));   /* poisson */
  CHECK(fg_sampler_integer_valued(s, 8));   /* discrete, integer values */
  CHECK(!fg_sampler_integer_valued(s, 9));  /* mvn */
  CHECK(fg_sampler_integer_valued(s, 14));  /* poisson copula member */
  CHECK(fg_sampler_integer_valued(s, 15));  /* scenario table of integers */
  CHECK(!fg_sampler_integer_valued(s, 17)); /* beta */
  CHECK_STR(fg_sampler_column(s, 16), "tab[1]");
  fg_sampler_free(s);

  fg_sampler *e = build_ok("[]", NULL);
  if (e) {
    CHECK_INT(fg_sampler_dims(e), 0);
    fg_sample_scratch *w = fg_sample_scratch_new(e);
    CHECK(w != NULL);
    double dummy = 0;
    if (w) fg_sampler_draw(e, w, 1, FG_STREAM_DESIGN, 0, 4, &dummy, 4);
    fg_sample_scratch_free(w);
    fg_sampler_free(e);
  }
  fg_sampler *one = build_ok(
      "[{\"name\":\"x\",\"size\":1,\"distribution\":{\"family\":\"uniform\","
      "\"low\":0,\"high\":1}}]",
      NULL);
  if (one) {
    CHECK_STR(fg_sampler_column(one, 0), "x[0]");
    fg_sampler_free(one);
  }
}

/* ---- parameter errors ------------------------------------------------------
 */

/* One input named x of `size` (0 = scalar) with distribution `dist`. */
static char *input1(int size, const char *dist) {
  static char buf[4096];
  if (size > 0)
    snprintf(buf, sizeof buf,
             "[{\"name\":\"x\",\"size\":%d,\"distribution\":%s}]", size, dist);
  else
    snprintf(buf, sizeof buf, "[{\"name\":\"x\",\"distribution\":%s}]", dist);
  return buf;
}

#define D "/uncertain/0/distribution"

static void test_errors(void) {
  /* normal */
  expect_error(input1(0, "{\"family\":\"normal\",\"mean\":0,\"sd\":-1}"), NULL,
               FG_EINVAL, D "/sd", "expected sd > 0, found -1");
  expect_error(input1(3, "{\"family\":\"normal\",\"mean\":0,\"sd\":[1,-2,3]}"),
               NULL, FG_EINVAL, D "/sd/1", "expected sd > 0, found -2");
  expect_error(input1(3, "{\"family\":\"normal\",\"mean\":[1,2],\"sd\":1}"),
               NULL, FG_EINVAL, D "/mean", "array of 3 numbers");
  expect_error(input1(0, "{\"family\":\"normal\",\"mean\":0}"), NULL, FG_EINVAL,
               D, "needs parameter 'sd'");
  expect_error(input1(0, "{\"family\":\"normal\",\"mean\":\"0\",\"sd\":1}"),
               NULL, FG_EINVAL, D "/mean", "found a string");
  expect_error(input1(2, "{\"family\":\"normal\",\"mean\":[0,null],\"sd\":1}"),
               NULL, FG_EINVAL, D "/mean/1", "expected a number, found null");
  expect_error(input1(0, "{\"family\":\"normal\",\"mean\":1e999,\"sd\":1}"),
               NULL, FG_EINVAL, D "/mean", "finite");
  expect_error(input1(0, "{\"family\":\"normal\",\"mean\":0,\"sd\":1,"
                         "\"lower\":2,\"upper\":2}"),
               NULL, FG_EINVAL, D "/upper", "expected lower < upper");
  expect_error(input1(0, "{\"family\":\"normal\",\"mean\":0,\"sd\":1,"
                         "\"lower\":100}"),
               NULL, FG_EINVAL, D "/lower", "positive probability");
  expect_error(input1(0, "{\"family\":\"normal\",\"mean\":0,\"sd\":1,"
                         "\"sdd\":2}"),
               NULL, FG_EINVAL, D "/sdd", "unknown parameter 'sdd'");
  /* lognormal */
  expect_error(
      input1(0, "{\"family\":\"lognormal\",\"meanlog\":0,\"sdlog\":0}"), NULL,
      FG_EINVAL, D "/sdlog", "expected sdlog > 0, found 0");
  expect_error(input1(0, "{\"family\":\"lognormal\",\"meanlog\":0,\"sd\":1}"),
               NULL, FG_EINVAL, D, "found both forms");
  expect_error(input1(0, "{\"family\":\"lognormal\",\"mean\":-3,\"sd\":1}"),
               NULL, FG_EINVAL, D "/mean", "expected mean > 0, found -3");
  /* uniform, triangular, pert */
  expect_error(input1(0, "{\"family\":\"uniform\",\"low\":2,\"high\":2}"), NULL,
               FG_EINVAL, D "/high",
               "expected low < high, found low = 2, high = 2");
  expect_error(input1(2, "{\"family\":\"uniform\",\"low\":[0,5],\"high\":4}"),
               NULL, FG_EINVAL, D "/high", "found low = 5, high = 4");
  expect_error(input1(0, "{\"family\":\"triangular\",\"low\":0,\"mode\":5,"
                         "\"high\":4}"),
               NULL, FG_EINVAL, D "/high", "expected mode <= high");
  expect_error(input1(0, "{\"family\":\"triangular\",\"low\":1,\"mode\":1,"
                         "\"high\":1}"),
               NULL, FG_EINVAL, D "/high", "expected low < high");
  expect_error(input1(0, "{\"family\":\"pert\",\"low\":0,\"mode\":-1,"
                         "\"high\":4}"),
               NULL, FG_EINVAL, D "/mode", "expected low <= mode");
  expect_error(input1(0, "{\"family\":\"pert\",\"low\":0,\"mode\":1,"
                         "\"high\":4,\"shape\":0}"),
               NULL, FG_EINVAL, D "/shape", "expected shape > 0");
  /* exponential, gamma, beta, weibull, student_t */
  expect_error(input1(0, "{\"family\":\"exponential\",\"mean\":0}"), NULL,
               FG_EINVAL, D "/mean", "expected mean > 0, found 0");
  expect_error(input1(0, "{\"family\":\"gamma\",\"shape\":-1,\"scale\":1}"),
               NULL, FG_EINVAL, D "/shape",
               "expected shape in [0.05, 1000000000000] (the range where "
               "draws and quantiles keep their accuracy), found -1");
  /* the stated ranges (include/feasgate/limits.h): first values outside */
  expect_error(input1(0, "{\"family\":\"gamma\",\"shape\":0.0499,\"scale\":1}"),
               NULL, FG_EINVAL, D "/shape", "expected shape in [0.05, 1000000000000]");
  expect_error(input1(0, "{\"family\":\"beta\",\"a\":1.0001e12,\"b\":1}"), NULL,
               FG_EINVAL, D "/a", "expected a in [0.05, 1000000000000]");
  expect_error(input1(0, "{\"family\":\"student_t\",\"df\":0.999}"), NULL,
               FG_EINVAL, D "/df", "expected df in [1, 1000000000000]");
  expect_error(input1(0, "{\"family\":\"student_t\",\"df\":1,\"scale\":2e8}"),
               NULL, FG_EINVAL, D "/scale", "expected scale <= 1.4119e+08");
  expect_error(input1(0, "{\"family\":\"gamma\",\"shape\":1,\"scale\":1e306}"),
               NULL, FG_EINVAL, D "/scale", "stays finite");
  expect_error(input1(0, "{\"family\":\"beta\",\"a\":1,\"b\":0}"), NULL,
               FG_EINVAL, D "/b", "expected b in [0.05, 1000000000000]");
  expect_error(input1(0, "{\"family\":\"beta\",\"a\":1,\"b\":1,\"low\":3,"
                         "\"high\":1}"),
               NULL, FG_EINVAL, D "/high", "expected low < high");
  expect_error(input1(0, "{\"family\":\"weibull\",\"shape\":1,\"scale\":0}"),
               NULL, FG_EINVAL, D "/scale", "expected scale > 0");
  expect_error(input1(0, "{\"family\":\"student_t\",\"df\":0}"), NULL,
               FG_EINVAL, D "/df", "expected df in [1, 1000000000000]");
  /* poisson, binomial */
  expect_error(input1(0, "{\"family\":\"poisson\",\"mean\":-0.5}"), NULL,
               FG_EINVAL, D "/mean", "expected mean >= 0, found -0.5");
  expect_error(input1(0, "{\"family\":\"binomial\",\"trials\":2.5,\"p\":0.5}"),
               NULL, FG_EINVAL, D "/trials", "expected an integer trials");
  expect_error(input1(0, "{\"family\":\"binomial\",\"trials\":4,\"p\":1.5}"),
               NULL, FG_EINVAL, D "/p", "expected p <= 1, found 1.5");
  /* discrete, empirical, scenario_table */
  expect_error(input1(0, "{\"family\":\"discrete\",\"values\":[1,2],"
                         "\"weights\":[0,0]}"),
               NULL, FG_EINVAL, D "/weights", "found all zero");
  expect_error(input1(0, "{\"family\":\"discrete\",\"values\":[1,2],"
                         "\"weights\":[1,-1]}"),
               NULL, FG_EINVAL, D "/weights/1", "expected a weight >= 0");
  expect_error(input1(0, "{\"family\":\"discrete\",\"values\":[1,2,3],"
                         "\"weights\":[1,1]}"),
               NULL, FG_EINVAL, D "/weights", "3 weights (one per value)");
  expect_error(input1(0, "{\"family\":\"discrete\",\"values\":[1,2]}"), NULL,
               FG_EINVAL, D, "needs parameter 'weights'");
  expect_error(input1(0, "{\"family\":\"empirical\",\"data\":[]}"), NULL,
               FG_EINVAL, D "/data", "empty array");
  expect_error(input1(2, "{\"family\":\"scenario_table\",\"rows\":[[1,2],"
                         "[3]]}"),
               NULL, FG_EINVAL, D "/rows/1", "row of 2 numbers");
  expect_error(input1(2, "{\"family\":\"scenario_table\",\"rows\":[[1,2],"
                         "[3,4]],\"weights\":[0,0]}"),
               NULL, FG_EINVAL, D "/weights", "found all zero");
  /* multivariate normal */
  expect_error(input1(3, "{\"family\":\"multivariate_normal\",\"mean\":0,"
                         "\"covariance\":[[1,0.9,0.9],[0.9,1,-0.9],"
                         "[0.9,-0.9,1]]}"),
               NULL, FG_EINVAL, D "/covariance",
               "covariance is not positive definite: leading minor 3 is "
               "not positive");
  expect_error(input1(2, "{\"family\":\"multivariate_normal\",\"mean\":0,"
                         "\"covariance\":[[-1,0],[0,1]]}"),
               NULL, FG_EINVAL, D "/covariance", "leading minor 1 is not");
  expect_error(input1(2, "{\"family\":\"multivariate_normal\",\"mean\":0,"
                         "\"covariance\":[[1,0.5],[0.4,1]]}"),
               NULL, FG_EINVAL, D "/covariance/0/1", "expected a symmetric");
  expect_error(input1(2, "{\"family\":\"multivariate_normal\",\"mean\":0,"
                         "\"covariance\":[[1,0],[0,1],[0,0]]}"),
               NULL, FG_EINVAL, D "/covariance", "found 3 rows");
  expect_error(input1(2, "{\"family\":\"multivariate_normal\",\"mean\":0,"
                         "\"sd\":[1,2],\"correlation\":[[1,1.2],[1.2,1]]}"),
               NULL, FG_EINVAL, D "/correlation/0/1", "in [-1, 1]");
  expect_error(input1(2, "{\"family\":\"multivariate_normal\",\"mean\":0,"
                         "\"sd\":[1,2],\"correlation\":[[1,1],[1,1]]}"),
               NULL, FG_EINVAL, D "/correlation",
               "correlation is not positive definite: leading minor 2");
  expect_error(input1(2, "{\"family\":\"multivariate_normal\",\"mean\":0,"
                         "\"sd\":[1,-2],\"correlation\":[[1,0],[0,1]]}"),
               NULL, FG_EINVAL, D "/sd/1", "expected sd > 0");
  expect_error(input1(0, "{\"family\":\"multivariate_normal\",\"mean\":0,"
                         "\"covariance\":[[1]]}"),
               NULL, FG_EINVAL, D, "vector input");
  expect_error(input1(2, "{\"family\":\"multivariate_normal\",\"mean\":0,"
                         "\"sd\":1}"),
               NULL, FG_EINVAL, D, "found only sd");
  expect_error(input1(2000, "{\"family\":\"multivariate_normal\",\"mean\":0,"
                            "\"covariance\":[]}"),
               NULL, FG_ELIMIT, D "/covariance", "at most 2000000 cells");
  /* outer structure, family names */
  expect_error(input1(0, "{\"family\":\"gauss\",\"mean\":0}"), NULL, FG_EINVAL,
               D "/family", "unknown family 'gauss' (expected one of: normal");
  expect_error(input1(0, "{\"mean\":0}"), NULL, FG_EINVAL, D,
               "expected a family name");
  expect_error("[5]", NULL, FG_EINVAL, "/uncertain/0",
               "expected an uncertain-input object, found a number");
  expect_error("[{\"name\":\"x\",\"size\":0,\"distribution\":{}}]", NULL,
               FG_EINVAL, "/uncertain/0/size", "expected an integer size");
  expect_error("[{\"name\":\"x\"}]", NULL, FG_EINVAL, "/uncertain/0",
               "expected a distribution object, found none");
  expect_error("{}", NULL, FG_EINVAL, "/uncertain", "expected an array");
  {
    char doc[512];
    snprintf(doc, sizeof doc,
             "[{\"name\":\"a\",\"size\":%d,\"distribution\":{\"family\":"
             "\"uniform\",\"low\":0,\"high\":1}},"
             "{\"name\":\"b\",\"size\":2,\"distribution\":{\"family\":"
             "\"uniform\",\"low\":0,\"high\":1}}]",
             FG_UNCERTAIN_DIMS_MAX - 1);
    fg_problem p;
    fg_sampler *s = build(doc, NULL, &p);
    CHECK(s == NULL);
    CHECK_INT(p.status, FG_ELIMIT);
    CHECK(p.limit_name && strcmp(p.limit_name, "uncertain_dimensions") == 0);
    CHECK_STR(p.items[0].pointer, "/uncertain/1/size");
  }
  /* errors in two inputs are both reported */
  {
    fg_problem p;
    fg_sampler *s = build(
        "[{\"name\":\"a\",\"distribution\":{\"family\":\"normal\",\"mean\":0,"
        "\"sd\":-1}},{\"name\":\"b\",\"distribution\":{\"family\":"
        "\"exponential\",\"mean\":-2}}]",
        NULL, &p);
    CHECK(s == NULL);
    CHECK_INT(p.nitems, 2);
    CHECK_STR(p.items[0].pointer, "/uncertain/0/distribution/sd");
    CHECK_STR(p.items[1].pointer, "/uncertain/1/distribution/mean");
  }
  /* dependence */
  const char *two =
      "[{\"name\":\"a\",\"size\":2,\"distribution\":{\"family\":\"normal\","
      "\"mean\":0,\"sd\":1}},{\"name\":\"b\",\"distribution\":{\"family\":"
      "\"empirical\",\"data\":[1,2,3]}},{\"name\":\"c\",\"distribution\":{"
      "\"family\":\"gamma\",\"shape\":2,\"scale\":1}}]";
  expect_error(two,
               "[{\"kind\":\"gaussian_copula\",\"members\":[\"a\",\"c\"],"
               "\"correlation\":{\"equal\":-0.6}}]",
               FG_EINVAL, "/dependence/0/correlation",
               "correlation is not positive definite: leading minor 3 is "
               "not positive");
  expect_error(two,
               "[{\"kind\":\"gaussian_copula\",\"members\":[\"a\",\"zz\"],"
               "\"correlation\":{\"equal\":0.3}}]",
               FG_EINVAL, "/dependence/0/members/1", "found 'zz'");
  expect_error(two,
               "[{\"kind\":\"gaussian_copula\",\"members\":[\"a\",\"b\"],"
               "\"correlation\":{\"equal\":0.3}}]",
               FG_EINVAL, "/dependence/0/members/1", "family 'empirical'");
  expect_error(two,
               "[{\"kind\":\"gaussian_copula\",\"members\":[\"a\"],"
               "\"correlation\":{\"ar1\":0.3}},{\"kind\":\"gaussian_copula\","
               "\"members\":[\"c\",\"a\"],\"correlation\":{\"ar1\":0.3}}]",
               FG_EINVAL, "/dependence/1/members/1", "at most one");
  expect_error(two,
               "[{\"kind\":\"gaussian_copula\",\"members\":[\"a\",\"c\"],"
               "\"correlation\":{\"ar1\":1}}]",
               FG_EINVAL, "/dependence/0/correlation", "leading minor 2");
  expect_error(two,
               "[{\"kind\":\"gaussian_copula\",\"members\":[\"a\",\"c\"],"
               "\"correlation\":[[1,0.2,0.3],[0.2,1,0.4],[0.3,0.1,1]]}]",
               FG_EINVAL, "/dependence/0/correlation/1/2",
               "expected a symmetric");
  expect_error(two,
               "[{\"kind\":\"gaussian_copula\",\"members\":[\"a\",\"c\"],"
               "\"correlation\":[[1,0.2],[0.2,1]]}]",
               FG_EINVAL, "/dependence/0/correlation", "found 2 rows");
  expect_error(two,
               "[{\"kind\":\"t_copula\",\"members\":[\"a\"],\"df\":4,"
               "\"correlation\":{\"equal\":0.3}}]",
               FG_EUNSUPPORTED, "/dependence/0/kind",
               "dependence kind 't_copula' is not yet supported");
  expect_error(two, "[{\"kind\":\"clayton\"}]", FG_EINVAL, "/dependence/0/kind",
               "unknown dependence kind 'clayton'");
  expect_error(two,
               "[{\"kind\":\"gaussian_copula\",\"members\":[\"a\"],"
               "\"correlation\":{\"equal\":0.3},\"rho\":1}]",
               FG_EINVAL, "/dependence/0/rho", "unknown member 'rho'");
}

/* ---- moments of every family ------------------------------------------------
 */

/* Build `doc` (one input, any size), draw NBIG samples and check element e
 * against the given mean and variance. */
static void family_moments(const char *doc, int e, double mu, double var,
                           const char *what) {
  fg_sampler *s = build_ok(doc, NULL);
  if (!s) return;
  double *x = draw_big(s, 2024);
  check_moments(x + (size_t)e * NBIG, NBIG, mu, var, what);
  free(x);
  fg_sampler_free(s);
}

static void test_moments(void) {
  /* closed-form moments of the normal law */
  family_moments(input1(0, "{\"family\":\"normal\",\"mean\":3,\"sd\":2}"), 0, 3,
                 4, "normal");
  /* closed-form moments of the lognormal law: exp(m + s^2/2) and
   * (exp(s^2) - 1) exp(2m + s^2) */
  {
    double m = 1, sl = 0.5;
    family_moments(input1(0, "{\"family\":\"lognormal\",\"meanlog\":1,"
                             "\"sdlog\":0.5}"),
                   0, exp(m + sl * sl / 2),
                   expm1(sl * sl) * exp(2 * m + sl * sl), "lognormal");
    /* given as mean and sd of the variable itself */
    family_moments(input1(0, "{\"family\":\"lognormal\",\"mean\":10,"
                             "\"sd\":3}"),
                   0, 10, 9, "lognormal(mean, sd)");
  }
  /* uniform: (a+b)/2, (b-a)^2/12 */
  family_moments(input1(0, "{\"family\":\"uniform\",\"low\":-1,\"high\":5}"), 0,
                 2, 3, "uniform");
  /* triangular: (a+b+c)/3, (a^2+b^2+c^2-ab-ac-bc)/18 */
  {
    double a = 1, c = 2, b = 7;
    family_moments(input1(0, "{\"family\":\"triangular\",\"low\":1,\"mode\":2,"
                             "\"high\":7}"),
                   0, (a + b + c) / 3,
                   (a * a + b * b + c * c - a * b - a * c - b * c) / 18,
                   "triangular");
  }
  /* pert: mean (a + s m + b)/(s + 2), variance (mu-a)(b-mu)/(s + 3) */
  {
    double a = 2, m = 3, b = 10, sh = 4, mu = (a + sh * m + b) / (sh + 2);
    family_moments(input1(0, "{\"family\":\"pert\",\"low\":2,\"mode\":3,"
                             "\"high\":10}"),
                   0, mu, (mu - a) * (b - mu) / (sh + 3), "pert");
    sh = 2;
    mu = (a + sh * m + b) / (sh + 2);
    family_moments(input1(0, "{\"family\":\"pert\",\"low\":2,\"mode\":3,"
                             "\"high\":10,\"shape\":2}"),
                   0, mu, (mu - a) * (b - mu) / (sh + 3), "pert shape 2");
  }
  /* exponential: mean m, variance m^2 */
  family_moments(input1(0, "{\"family\":\"exponential\",\"mean\":2.5}"), 0, 2.5,
                 6.25, "exponential");
  /* closed-form moments of the gamma law: k theta, k theta^2 (element 0
   * has shape < 1, element 1 shape > 1) */
  {
    const char *g =
        input1(2, "{\"family\":\"gamma\",\"shape\":[0.5,4],\"scale\":[2,0.5]}");
    char doc[4096]; /* as large as input1's buffer */
    snprintf(doc, sizeof doc, "%s", g);
    family_moments(doc, 0, 1.0, 2.0, "gamma shape 0.5");
    family_moments(doc, 1, 2.0, 1.0, "gamma shape 4");
  }
  /* beta on [low, high]: low + w a/(a+b), w^2 ab/((a+b)^2 (a+b+1)) */
  {
    double a = 2, b = 5, lo = 10, w = 20;
    family_moments(input1(0, "{\"family\":\"beta\",\"a\":2,\"b\":5,\"low\":10,"
                             "\"high\":30}"),
                   0, lo + w * a / (a + b),
                   w * w * a * b / ((a + b) * (a + b) * (a + b + 1)), "beta");
    a = 0.5;
    b = 0.5;
    family_moments(input1(0, "{\"family\":\"beta\",\"a\":0.5,\"b\":0.5}"), 0,
                   0.5, a * b / ((a + b) * (a + b) * (a + b + 1)),
                   "beta(0.5, 0.5)");
  }
  /* weibull: l G(1 + 1/k), l^2 (G(1 + 2/k) - G(1 + 1/k)^2) */
  {
    double k = 1.5, l = 3;
    double g1 = tgamma(1 + 1 / k), g2 = tgamma(1 + 2 / k);
    family_moments(input1(0, "{\"family\":\"weibull\",\"shape\":1.5,"
                             "\"scale\":3}"),
                   0, l * g1, l * l * (g2 - g1 * g1), "weibull");
  }
  /* student t: location, scale^2 df/(df - 2) */
  family_moments(input1(0, "{\"family\":\"student_t\",\"df\":10,"
                           "\"location\":1,\"scale\":2}"),
                 0, 1, 4 * 10.0 / 8.0, "student_t");
  /* poisson: mean = variance = mu; binomial: np, np(1-p) */
  family_moments(input1(0, "{\"family\":\"poisson\",\"mean\":3.5}"), 0, 3.5,
                 3.5, "poisson");
  family_moments(input1(0, "{\"family\":\"poisson\",\"mean\":250}"), 0, 250,
                 250, "poisson large mean");
  family_moments(input1(0, "{\"family\":\"binomial\",\"trials\":20,"
                           "\"p\":0.3}"),
                 0, 6, 4.2, "binomial");
  /* discrete: sum w v / sum w, and the second moment likewise */
  {
    const double v[] = {1, 2.5, 10}, w[] = {2, 1, 1};
    double m = 0, m2 = 0;
    for (int i = 0; i < 3; i++) {
      m += w[i] * v[i] / 4;
      m2 += w[i] * v[i] * v[i] / 4;
    }
    family_moments(input1(0, "{\"family\":\"discrete\",\"values\":[1,2.5,10],"
                             "\"weights\":[2,1,1]}"),
                   0, m, m2 - m * m, "discrete");
  }
  /* empirical: the data's mean and population variance */
  {
    double data[] = {3, 1, 4, 1, 5, 9, 2, 6};
    moments dm = moments_of(data, 8);
    family_moments(input1(0, "{\"family\":\"empirical\",\"data\":"
                             "[3,1,4,1,5,9,2,6]}"),
                   0, dm.mean, dm.var, "empirical");
  }
  /* scenario table: whole rows, weights 1:3 */
  {
    fg_sampler *s = build_ok(
        input1(2, "{\"family\":\"scenario_table\",\"rows\":[[1,10],[2,20]],"
                  "\"weights\":[1,3]}"),
        NULL);
    if (s) {
      double *x = draw_big(s, 7);
      check_moments(x, NBIG, 1.75, 0.1875, "scenario_table column 0");
      int rows_whole = 1;
      for (int t = 0; t < NBIG; t++)
        rows_whole &= x[NBIG + t] == 10 * x[t];
      CHECK(rows_whole);
      free(x);
      fg_sampler_free(s);
    }
    family_moments("[{\"name\":\"x\",\"distribution\":{\"family\":"
                   "\"scenario_table\",\"rows\":[1,2,3,4]}}]",
                   0, 2.5, 1.25, "scenario_table scalar");
  }
}

/* ---- truncated normal
 * --------------------------------------------------------- */

/* Mean of normal(mu, s) truncated to [l, u]:
 * mu + s (phi(a) - phi(b)) / (Phi(b) - Phi(a)), a, b standardised. */
static void truncated_case(double mu, double sd, double lo, double hi,
                           const char *spec) {
  fg_sampler *s = build_ok(input1(0, spec), NULL);
  if (!s) return;
  double *x = draw_big(s, 99);
  int inside = 1;
  for (int t = 0; t < NBIG; t++)
    inside &= x[t] >= lo && x[t] <= hi;
  CHECK_MSG(inside, "truncated normal outside [%g, %g]", lo, hi);
  double a = (lo - mu) / sd, b = (hi - mu) / sd;
  double pa = isinf(a) ? 0 : phi(a), pb = isinf(b) ? 0 : phi(b);
  double mass = Phi(b) - Phi(a);
  if (a > 0) mass = 0.5 * erfc(a / sqrt(2)) - 0.5 * erfc(b / sqrt(2));
  double mean = mu + sd * (pa - pb) / mass;
  double aphi = isinf(a) ? 0 : a * pa, bphi = isinf(b) ? 0 : b * pb;
  double var =
      sd * sd *
      (1 + (aphi - bphi) / mass - ((pa - pb) / mass) * ((pa - pb) / mass));
  check_moments(x, NBIG, mean, var, spec);
  free(x);
  fg_sampler_free(s);
}

static void test_truncated(void) {
  truncated_case(0, 1, -0.5, 2,
                 "{\"family\":\"normal\",\"mean\":0,\"sd\":1,\"lower\":-0.5,"
                 "\"upper\":2}");
  truncated_case(5, 2, 5, INFINITY,
                 "{\"family\":\"normal\",\"mean\":5,\"sd\":2,\"lower\":5}");
  truncated_case(0, 1, -INFINITY, -1,
                 "{\"family\":\"normal\",\"mean\":0,\"sd\":1,\"upper\":-1}");
  /* far in the upper tail: [mean + 8 sd, mean + 9 sd]; computed from the
   * upper tail's complement, which Phi itself cannot resolve here */
  truncated_case(10, 1, 18, 19,
                 "{\"family\":\"normal\",\"mean\":10,\"sd\":1,\"lower\":18,"
                 "\"upper\":19}");
  truncated_case(0, 1, 12, INFINITY,
                 "{\"family\":\"normal\",\"mean\":0,\"sd\":1,\"lower\":12}");
  truncated_case(0, 1, -INFINITY, -12,
                 "{\"family\":\"normal\",\"mean\":0,\"sd\":1,\"upper\":-12}");
}

/* ---- multivariate normal and copula
 * -------------------------------------------- */

static void test_mvn(void) {
  const double cov[3][3] = {{4, 1.2, -0.8}, {1.2, 1, 0.3}, {-0.8, 0.3, 2}};
  const double mean[3] = {1, -2, 0.5};
  const char *covdoc =
      "[{\"name\":\"m\",\"size\":3,\"distribution\":{\"family\":"
      "\"multivariate_normal\",\"mean\":[1,-2,0.5],\"covariance\":"
      "[[4,1.2,-0.8],[1.2,1,0.3],[-0.8,0.3,2]]}}]";
  /* the same law given as sd and correlation */
  char cordoc[1024];
  snprintf(cordoc, sizeof cordoc,
           "[{\"name\":\"m\",\"size\":3,\"distribution\":{\"family\":"
           "\"multivariate_normal\",\"mean\":[1,-2,0.5],\"sd\":[2,1,%.17g],"
           "\"correlation\":[[1,%.17g,%.17g],[%.17g,1,%.17g],[%.17g,%.17g,"
           "1]]}}]",
           sqrt(2.0), 0.6, -0.8 / (2 * sqrt(2.0)), 0.6, 0.3 / sqrt(2.0),
           -0.8 / (2 * sqrt(2.0)), 0.3 / sqrt(2.0));
  const char *docs[2] = {covdoc, cordoc};
  for (int k = 0; k < 2; k++) {
    fg_sampler *s = build_ok(docs[k], NULL);
    if (!s) continue;
    double *x = draw_big(s, 31 + (uint64_t)k);
    for (int i = 0; i < 3; i++) {
      check_moments(x + (size_t)i * NBIG, NBIG, mean[i], cov[i][i],
                    k ? "mvn (sd, correlation)" : "mvn (covariance)");
      for (int j = 0; j < i; j++) {
        /* standard error of a normal sample covariance:
         * sqrt((s_ii s_jj + s_ij^2) / n) */
        double se =
            sqrt((cov[i][i] * cov[j][j] + cov[i][j] * cov[i][j]) / NBIG);
        double c =
            covariance_of(x + (size_t)i * NBIG, x + (size_t)j * NBIG, NBIG);
        CHECK_MSG(fabs(c - cov[i][j]) <= 5 * se,
                  "cov[%d][%d] = %g, expected "
                  "%g",
                  i, j, c, cov[i][j]);
      }
    }
    free(x);
    fg_sampler_free(s);
  }
}

static void test_copula(void) {
  /* uniform marginals: their Pearson correlation is the Spearman rank
   * correlation of the Gaussian copula, (6/pi) asin(r/2) */
  const char *forms[3] = {"{\"equal\":0.6}", "{\"ar1\":0.6}",
                          "[[1,0.6,0.36],[0.6,1,0.6],[0.36,0.6,1]]"};
  for (int f = 0; f < 3; f++) {
    char dep[256];
    snprintf(dep, sizeof dep,
             "[{\"kind\":\"gaussian_copula\",\"members\":[\"u\",\"v\"],"
             "\"correlation\":%s}]",
             forms[f]);
    fg_sampler *s = build_ok(
        "[{\"name\":\"u\",\"size\":2,\"distribution\":{\"family\":"
        "\"uniform\",\"low\":0,\"high\":1}},"
        "{\"name\":\"v\",\"distribution\":{\"family\":\"uniform\",\"low\":0,"
        "\"high\":1}}]",
        dep);
    if (!s) continue;
    double *x = draw_big(s, 5);
    double r01 = 0.6, r02 = f == 0 ? 0.6 : 0.36;
    double rho01 = correlation_of(x, x + NBIG, NBIG);
    double rho02 = correlation_of(x, x + 2 * NBIG, NBIG);
    /* tolerance: 5 / sqrt(n) bounds 5 standard errors of a correlation */
    CHECK_NEAR(rho01, 6 / PI * asin(r01 / 2), 5 / sqrt((double)NBIG));
    CHECK_NEAR(rho02, 6 / PI * asin(r02 / 2), 5 / sqrt((double)NBIG));
    for (int j = 0; j < 3; j++)
      check_moments(x + (size_t)j * NBIG, NBIG, 0.5, 1.0 / 12,
                    "copula uniform marginal");
    free(x);
    fg_sampler_free(s);
  }
  /* marginals stay as declared: gamma, poisson, discrete, truncated normal
   * and triangular members of one copula */
  fg_sampler *s = build_ok(
      "[{\"name\":\"g\",\"distribution\":{\"family\":\"gamma\",\"shape\":2,"
      "\"scale\":3}},"
      "{\"name\":\"k\",\"distribution\":{\"family\":\"poisson\",\"mean\":4}},"
      "{\"name\":\"d\",\"distribution\":{\"family\":\"discrete\",\"values\":"
      "[0,1,5],\"weights\":[1,2,1]}},"
      "{\"name\":\"n\",\"distribution\":{\"family\":\"normal\",\"mean\":0,"
      "\"sd\":1,\"lower\":0}},"
      "{\"name\":\"b\",\"distribution\":{\"family\":\"binomial\",\"trials\":"
      "10,\"p\":0.4}}]",
      "[{\"kind\":\"gaussian_copula\",\"members\":[\"g\",\"k\",\"d\",\"n\","
      "\"b\"],\"correlation\":{\"equal\":0.7}}]");
  if (s) {
    double *x = draw_big(s, 11);
    check_moments(x, NBIG, 6, 18, "copula gamma member");
    check_moments(x + NBIG, NBIG, 4, 4, "copula poisson member");
    /* E X = 0.5 + 1.25, E X^2 = 0.5 + 6.25 */
    check_moments(x + 2 * NBIG, NBIG, 1.75, 6.75 - 1.75 * 1.75,
                  "copula discrete member");
    check_moments(x + 3 * NBIG, NBIG, sqrt(2 / PI), 1 - 2 / PI,
                  "copula half-normal member");
    check_moments(x + 4 * NBIG, NBIG, 4, 2.4, "copula binomial member");
    double c = correlation_of(x, x + NBIG, NBIG);
    CHECK_MSG(c > 0.5, "gamma-poisson correlation %g, expected strong", c);
    free(x);
    fg_sampler_free(s);
  }
}

/* The other continuous families as copula members: their inverse CDFs
 * keep the closed-form moments used in test_moments. */
static void test_copula_icdfs(void) {
  fg_sampler *s = build_ok(
      "[{\"name\":\"p\",\"distribution\":{\"family\":\"pert\",\"low\":2,"
      "\"mode\":3,\"high\":10}},"
      "{\"name\":\"w\",\"distribution\":{\"family\":\"weibull\",\"shape\":"
      "1.5,\"scale\":3}},"
      "{\"name\":\"t\",\"distribution\":{\"family\":\"student_t\",\"df\":10,"
      "\"location\":1,\"scale\":2}},"
      "{\"name\":\"l\",\"distribution\":{\"family\":\"lognormal\","
      "\"meanlog\":1,\"sdlog\":0.5}},"
      "{\"name\":\"r\",\"distribution\":{\"family\":\"triangular\",\"low\":"
      "1,\"mode\":2,\"high\":7}},"
      "{\"name\":\"e\",\"distribution\":{\"family\":\"exponential\","
      "\"mean\":2.5}},"
      "{\"name\":\"b\",\"distribution\":{\"family\":\"beta\",\"a\":0.5,"
      "\"b\":0.5}}]",
      "[{\"kind\":\"gaussian_copula\",\"members\":[\"p\",\"w\",\"t\",\"l\","
      "\"r\",\"e\",\"b\"],\"correlation\":{\"ar1\":0.5}}]");
  if (!s) return;
  double *x = draw_big(s, 77);
  double mu = (2 + 4 * 3 + 10) / 6.0;
  check_moments(x, NBIG, mu, (mu - 2) * (10 - mu) / 7, "copula pert");
  double g1 = tgamma(1 + 1 / 1.5), g2 = tgamma(1 + 2 / 1.5);
  check_moments(x + NBIG, NBIG, 3 * g1, 9 * (g2 - g1 * g1), "copula weibull");
  check_moments(x + 2 * NBIG, NBIG, 1, 5, "copula student_t");
  check_moments(x + 3 * NBIG, NBIG, exp(1.125), expm1(0.25) * exp(2.25),
                "copula lognormal");
  check_moments(x + 4 * NBIG, NBIG, 10 / 3.0, (1 + 49 + 4 - 7 - 2 - 14) / 18.0,
                "copula triangular");
  check_moments(x + 5 * NBIG, NBIG, 2.5, 6.25, "copula exponential");
  check_moments(x + 6 * NBIG, NBIG, 0.5, 0.125, "copula beta(0.5, 0.5)");
  free(x);
  fg_sampler_free(s);
  fg_sampler *b =
      build_ok("[{\"name\":\"n\",\"distribution\":{\"family\":\"binomial\","
               "\"trials\":5,\"p\":0.5}},{\"name\":\"e\",\"distribution\":{"
               "\"family\":\"empirical\",\"data\":[1,2.5]}},{\"name\":\"f\","
               "\"distribution\":{\"family\":\"empirical\",\"data\":[1,2]}}]",
               NULL);
  if (b) {
    CHECK(fg_sampler_integer_valued(b, 0));
    CHECK(!fg_sampler_integer_valued(b, 1));
    CHECK(fg_sampler_integer_valued(b, 2));
    fg_sampler_free(b);
  }
}

/* The slot rules, pinned by equalities that hold only if they are kept:
 * standard normal k of a multivariate normal and of a copula comes from
 * the slot of its own dimension, so an identity covariance (or a zero
 * correlation with normal members) reproduces independent normals drawn
 * at the same dimensions; and the structured correlation forms are the
 * exact Cholesky factor of the matrix they stand for. */
static void test_slots(void) {
  const int n = 2000;
  fg_sampler *ind = build_ok(
      "[{\"name\":\"z\",\"size\":3,\"distribution\":{\"family\":\"normal\","
      "\"mean\":0,\"sd\":1}}]",
      NULL);
  fg_sampler *mv = build_ok(
      "[{\"name\":\"z\",\"size\":3,\"distribution\":{\"family\":"
      "\"multivariate_normal\",\"mean\":0,\"covariance\":[[1,0,0],[0,1,0],"
      "[0,0,1]]}}]",
      NULL);
  fg_sampler *cop = build_ok(
      "[{\"name\":\"z\",\"size\":3,\"distribution\":{\"family\":\"normal\","
      "\"mean\":0,\"sd\":1}}]",
      "[{\"kind\":\"gaussian_copula\",\"members\":[\"z\"],\"correlation\":"
      "{\"equal\":0}}]");
  if (ind && mv && cop) {
    double *a = draw_range(ind, 8, FG_STREAM_VALIDATION, 500, n, FG_BLOCK);
    double *b = draw_range(mv, 8, FG_STREAM_VALIDATION, 500, n, FG_BLOCK);
    double *c = draw_range(cop, 8, FG_STREAM_VALIDATION, 500, n, FG_BLOCK);
    double dmv = 0, dcop = 0;
    for (int i = 0; i < 3 * n; i++) {
      dmv = fmax(dmv, fabs(a[i] - b[i]));
      dcop = fmax(dcop, fabs(a[i] - c[i]));
    }
    CHECK_NEAR(dmv, 0, 0);
    CHECK_NEAR(dcop, 0, 1e-9); /* through Phi and its inverse */
    free(a);
    free(b);
    free(c);
  }
  fg_sampler_free(ind);
  fg_sampler_free(mv);
  fg_sampler_free(cop);

  const char *in4 = "[{\"name\":\"w\",\"size\":4,\"distribution\":{\"family\":"
                    "\"exponential\",\"mean\":2}}]";
  const char *pairs[2][2] = {
      {"{\"equal\":0.4}", "[[1,0.4,0.4,0.4],[0.4,1,0.4,0.4],[0.4,0.4,1,0.4],"
                          "[0.4,0.4,0.4,1]]"},
      {"{\"ar1\":-0.5}", "[[1,-0.5,0.25,-0.125],[-0.5,1,-0.5,0.25],"
                         "[0.25,-0.5,1,-0.5],[-0.125,0.25,-0.5,1]]"}};
  for (int k = 0; k < 2; k++) {
    char d1[256], d2[256];
    snprintf(d1, sizeof d1,
             "[{\"kind\":\"gaussian_copula\",\"members\":[\"w\"],"
             "\"correlation\":%s}]",
             pairs[k][0]);
    snprintf(d2, sizeof d2,
             "[{\"kind\":\"gaussian_copula\",\"members\":[\"w\"],"
             "\"correlation\":%s}]",
             pairs[k][1]);
    fg_sampler *s1 = build_ok(in4, d1), *s2 = build_ok(in4, d2);
    if (s1 && s2) {
      double *a = draw_range(s1, 3, FG_STREAM_DESIGN, 0, n, FG_BLOCK);
      double *b = draw_range(s2, 3, FG_STREAM_DESIGN, 0, n, FG_BLOCK);
      double diff = 0;
      for (int i = 0; i < 4 * n; i++)
        diff = fmax(diff, fabs(a[i] - b[i]) / (1 + fabs(a[i])));
      CHECK_NEAR(diff, 0, 1e-9);
      free(a);
      free(b);
    }
    fg_sampler_free(s1);
    fg_sampler_free(s2);
  }
}

/* ---- the per-block streams (stream.c) -------------------------------- */

/* The lane-parallel cipher equals Random123's Philox4x32-10 (the
 * reference implementation of Salmon et al.), including a block whose
 * sample index crosses 2^32; the block's u01 equals the GSL adaptor's
 * first uniform; a normal regenerated alone equals its block value; and
 * the ziggurat's law: the empirical CDF of 2^21 normals at eleven points
 * within 5 binomial standard errors of Phi (values of Phi from the
 * standard normal table, erfc here), the fourth moment 3 within 5
 * standard errors, and values in the tail beyond the base slab appear at
 * their expected rate. */
static void test_block_streams(void) {
  fg_stream_key key = fg_stream_key_make(987654321987ull, FG_STREAM_VALIDATION);
  static fg_stream_words w;
  const uint64_t firsts[2] = {12345, (UINT64_C(1) << 32) - 100};
  int same_cipher = 1;
  /* every code path (AVX-512F, AVX2 where present, SSE2, scalar), and
   * lane counts that leave lanes over for the narrower paths */
  for (int f = 0; f < 12; f++) {
    fg_stream_force_portable(f % 3);
    int n = (f / 3) % 2 ? FG_BLOCK - 5 : FG_BLOCK;
    fg_stream_philox(key, firsts[f / 6], n, 77, 3, &w);
    for (int t = 0; t < n; t++) {
      uint64_t i = firsts[f / 6] + (uint64_t)t;
      philox4x32_ctr_t c = {{(uint32_t)i, (uint32_t)(i >> 32), 77, 3}};
      philox4x32_key_t k = {{key.k0, key.k1}};
      philox4x32_ctr_t r = philox4x32(c, k);
      for (int j = 0; j < 4; j++) same_cipher &= r.v[j] == w.w[j][t];
    }
  }
  fg_stream_force_portable(0);
  CHECK(same_cipher);

  double u[FG_BLOCK], uc[FG_BLOCK];
  fg_stream_u01s(key, 5000, 100, 9, &w, u, uc);
  gsl_rng *g = fg_stream_rng_new();
  int same_u = 1;
  for (int t = 0; t < 100; t++) {
    double a, b;
    fg_stream_reset(g, key, 5000 + (uint64_t)t, 9);
    fg_stream_u01(g, &a, &b);
    same_u &= a == u[t] && b == uc[t];
  }
  gsl_rng_free(g);
  CHECK(same_u);

  const int n = 1 << 21;
  double *z = malloc((size_t)n * sizeof *z);
  if (!z) abort();
  for (int t0 = 0; t0 < n; t0 += FG_BLOCK)
    fg_stream_normals(key, (uint64_t)t0, FG_BLOCK, 4, &w, z + t0);
  int alone = 1;
  for (int i = 0; i < n; i += 9973)
    alone &= fg_stream_normal_one(key, (uint64_t)i, 4) == z[i];
  CHECK(alone);
  /* the ziggurat's vector fast path (AVX-512F + DQ) and the scalar lanes
   * give the same bits: the first 2^18 normals again on the narrower
   * paths, in blocks that leave lanes over */
  int same_normals = 1;
  for (int level = 1; level <= 2; level++) {
    fg_stream_force_portable(level);
    static double zz[FG_BLOCK];
    const int blk = FG_BLOCK - 3;
    for (int t0 = 0; t0 + blk <= (1 << 18); t0 += blk) {
      fg_stream_normals(key, (uint64_t)t0, blk, 4, &w, zz);
      same_normals &= memcmp(zz, z + t0, (size_t)blk * sizeof *zz) == 0;
    }
  }
  fg_stream_force_portable(0);
  CHECK(same_normals);
  const double at[11] = {-4, -3, -2, -1.5, -0.5, 0, 0.3, 1, 2.2, 3.3, 3.9};
  int cdf_ok = 1;
  for (int a = 0; a < 11; a++) {
    long below = 0;
    for (int i = 0; i < n; i++) below += z[i] <= at[a];
    double p = 0.5 * erfc(-at[a] / sqrt(2.0));
    double se = sqrt(p * (1 - p) / n);
    double got = (double)below / n;
    if (fabs(got - p) > 5 * se + 1e-12) {
      cdf_ok = 0;
      printf("normal CDF at %g: %.7f, expected %.7f (se %.2g)\n", at[a], got, p,
             se);
    }
  }
  CHECK(cdf_ok);
  double m4 = 0, m8 = 0;
  long tail = 0;
  for (int i = 0; i < n; i++) {
    double q = z[i] * z[i];
    m4 += q * q;
    m8 += q * q * q * q;
    tail += fabs(z[i]) > 3.7;
  }
  m4 /= n;
  m8 /= n;
  CHECK_NEAR(m4, 3.0, 5 * sqrt((m8 - m4 * m4) / n));
  double pt = erfc(3.7 / sqrt(2.0)); /* P(|Z| > 3.7) */
  CHECK_NEAR((double)tail / n, pt, 5 * sqrt(pt / n));
  free(z);
}

/* ---- sampling designs --------------------------------------------------- */

/* Like draw_range, for design d with replicates of rep samples. */
static double *draw_design(const fg_sampler *s, uint64_t seed, fg_stream st,
                           fg_design d, uint64_t rep, uint64_t first, int n,
                           int chunk) {
  int dims = fg_sampler_dims(s);
  double *out = malloc((size_t)dims * (size_t)n * sizeof *out);
  double *tmp = malloc((size_t)dims * FG_BLOCK * sizeof *tmp);
  fg_sample_scratch *w = fg_sample_scratch_new(s);
  if (!out || !tmp || !w) abort();
  for (int t0 = 0; t0 < n; t0 += chunk) {
    int m = n - t0 < chunk ? n - t0 : chunk;
    fg_sampler_draw_design(s, w, seed, st, d, rep, first + (uint64_t)t0, m, tmp,
                           FG_BLOCK);
    for (int j = 0; j < dims; j++)
      memcpy(out + (size_t)j * (size_t)n + (size_t)t0,
             tmp + (size_t)j * FG_BLOCK, (size_t)m * sizeof *out);
  }
  fg_sample_scratch_free(w);
  free(tmp);
  return out;
}

static const fg_design DESIGNS[] = {FG_DESIGN_ANTITHETIC,
                                    FG_DESIGN_LATIN_HYPERCUBE, FG_DESIGN_SOBOL};
static const char *const DESIGN_NAMES[] = {"antithetic", "latin_hypercube",
                                           "sobol"};

/* Every design is a pure function of (seed, stream, rep_size, index, dim):
 * bulk = one at a time = odd chunks = split calls inside a replicate;
 * sample 777 alone; design and validation streams differ, and differ
 * from Monte Carlo. All families of MIXED, its copula and table. */
static void test_design_determinism(void) {
  fg_sampler *s = build_ok(MIXED, MIXED_DEP);
  if (!s) return;
  int dims = fg_sampler_dims(s);
  const int n = 1024;
  const uint64_t seed = 4242, rep = 512;
  size_t cells = (size_t)dims * n;
  fg_problem p;
  fg_problem_init(&p);
  CHECK(fg_sampler_design_check(s, FG_DESIGN_MONTE_CARLO, &p) == FG_OK);
  double *mc = draw_range(s, seed, FG_STREAM_DESIGN, 0, n, FG_BLOCK);
  double *mc2 = draw_design(s, seed, FG_STREAM_DESIGN, FG_DESIGN_MONTE_CARLO,
                            rep, 0, n, 100);
  CHECK(same(mc, mc2, cells));
  for (int k = 0; k < 3; k++) {
    fg_design d = DESIGNS[k];
    fg_problem_init(&p);
    CHECK_MSG(fg_sampler_design_check(s, d, &p) == FG_OK, "%s: %s",
              DESIGN_NAMES[k], p.detail);
    double *bulk =
        draw_design(s, seed, FG_STREAM_DESIGN, d, rep, 0, n, FG_BLOCK);
    double *one = draw_design(s, seed, FG_STREAM_DESIGN, d, rep, 0, n, 1);
    double *c37 = draw_design(s, seed, FG_STREAM_DESIGN, d, rep, 0, n, 37);
    double *c128 = draw_design(s, seed, FG_STREAM_DESIGN, d, rep, 0, n, 128);
    CHECK_MSG(same(bulk, one, cells), "%s: one at a time", DESIGN_NAMES[k]);
    CHECK_MSG(same(bulk, c37, cells), "%s: chunks of 37", DESIGN_NAMES[k]);
    CHECK_MSG(same(bulk, c128, cells), "%s: chunks of 128", DESIGN_NAMES[k]);
    /* [300, 1024) on its own, starting inside replicate 0 */
    double *tail =
        draw_design(s, seed, FG_STREAM_DESIGN, d, rep, 300, n - 300, 77);
    int tail_ok = 1;
    for (int j = 0; j < dims; j++)
      tail_ok &= same(tail + (size_t)j * (n - 300), bulk + (size_t)j * n + 300,
                      (size_t)(n - 300));
    CHECK_MSG(tail_ok, "%s: tail", DESIGN_NAMES[k]);
    double *alone = draw_design(s, seed, FG_STREAM_DESIGN, d, rep, 777, 1, 1);
    int alone_ok = 1, finite = 1;
    for (int j = 0; j < dims; j++)
      alone_ok &= alone[j] == bulk[(size_t)j * n + 777];
    for (size_t c = 0; c < cells; c++)
      finite &= isfinite(bulk[c]);
    CHECK_MSG(alone_ok, "%s: sample 777 alone", DESIGN_NAMES[k]);
    CHECK_MSG(finite, "%s: finite values", DESIGN_NAMES[k]);
    double *val =
        draw_design(s, seed, FG_STREAM_VALIDATION, d, rep, 0, n, FG_BLOCK);
    double *seed2 =
        draw_design(s, seed + 1, FG_STREAM_DESIGN, d, rep, 0, n, FG_BLOCK);
    int eq_val = 0, eq_seed = 0, eq_mc = 0;
    for (int t = 0; t < n; t++) { /* dimension 0 is a continuous normal */
      eq_val += val[t] == bulk[t];
      eq_seed += seed2[t] == bulk[t];
      eq_mc += mc[t] == bulk[t];
    }
    CHECK_INT(eq_val, 0);
    CHECK_INT(eq_seed, 0);
    CHECK_INT(eq_mc, 0);
    free(bulk);
    free(one);
    free(c37);
    free(c128);
    free(tail);
    free(alone);
    free(val);
    free(seed2);
  }
  fg_problem_init(&p);
  CHECK(fg_sampler_design_check(s, (fg_design)9, &p) == FG_EINVAL);
  free(mc);
  free(mc2);
  fg_sampler_free(s);
}

/* Antithetic pairs mirror exactly: a N(0, 1) input gives x and -x, a
 * uniform on [2, 5] gives x(2m) - 2 = 5 - x(2m+1) (to rounding), an
 * exponential gives quantiles at u and 1 - u. */
static void test_antithetic(void) {
  fg_sampler *s = build_ok(
      "[{\"name\":\"z\",\"distribution\":{\"family\":\"normal\",\"mean\":0,"
      "\"sd\":1}},"
      "{\"name\":\"w\",\"size\":2,\"distribution\":{\"family\":\"uniform\","
      "\"low\":2,\"high\":5}},"
      "{\"name\":\"e\",\"distribution\":{\"family\":\"exponential\","
      "\"mean\":3}}]",
      NULL);
  if (!s) return;
  const int n = 4096;
  double *x = draw_design(s, 99, FG_STREAM_VALIDATION, FG_DESIGN_ANTITHETIC,
                          1 << 12, 0, n, FG_BLOCK);
  int neg = 1, mirror = 1, expo = 1, distinct = 0;
  for (int m = 0; m < n / 2; m++) {
    double z0 = x[2 * m], z1 = x[2 * m + 1];
    neg &= z0 == -z1 && z0 != 0;
    for (int e = 1; e <= 2; e++) {
      double a = x[(size_t)e * n + 2 * m], b = x[(size_t)e * n + 2 * m + 1];
      mirror &= fabs((a - 2) - (5 - b)) <= 4e-15 * 5;
    }
    /* exponential: exp(-a/3) + exp(-b/3) = 1 */
    double a = x[(size_t)3 * n + 2 * m], b = x[(size_t)3 * n + 2 * m + 1];
    expo &= fabs(exp(-a / 3) + exp(-b / 3) - 1) <= 1e-13;
    distinct += m > 0 && x[2 * m] != x[2 * m - 2];
  }
  CHECK(neg);
  CHECK(mirror);
  CHECK(expo);
  CHECK_INT(distinct, n / 2 - 1);
  /* the two elements of w come from different coordinates */
  CHECK(x[(size_t)1 * n] != x[(size_t)2 * n]);
  free(x);
  fg_sampler_free(s);
}

/* Latin hypercube: in every dimension of each replicate of 1000 samples
 * every stratum [k/1000, (k+1)/1000) holds exactly one sample (uniform on
 * [0, 1] returns u itself); the permutations differ between dimensions
 * and replicates. */
static void test_lhs_strata(void) {
  fg_sampler *s = build_ok(
      "[{\"name\":\"u\",\"size\":3,\"distribution\":{\"family\":\"uniform\","
      "\"low\":0,\"high\":1}}]",
      NULL);
  if (!s) return;
  const int rep = 1000, n = 3 * rep;
  /* samples [1000, 4000): replicates 1, 2, 3, in chunks of 256 that
   * straddle replicate boundaries */
  double *x = draw_design(s, 7, FG_STREAM_DESIGN, FG_DESIGN_LATIN_HYPERCUBE,
                          rep, rep, n, FG_BLOCK);
  int ok = 1;
  for (int j = 0; j < 3; j++)
    for (int r = 0; r < 3; r++) {
      int count[1000] = {0};
      for (int q = 0; q < rep; q++) {
        double v = x[(size_t)j * n + (size_t)r * rep + (size_t)q];
        int k = (int)floor(v * rep);
        if (v > 0 && v < 1 && k >= 0 && k < rep) count[k]++;
      }
      for (int k = 0; k < rep; k++)
        ok &= count[k] == 1;
    }
  CHECK(ok);
  /* strata order: dimension 0 vs 1 and replicate 1 vs 2 not the same */
  int same01 = 0, same12 = 0;
  for (int q = 0; q < rep; q++) {
    same01 += floor(x[q] * rep) == floor(x[n + q] * rep);
    same12 += floor(x[q] * rep) == floor(x[rep + q] * rep);
  }
  CHECK(same01 < 10);
  CHECK(same12 < 10);
  /* a replicate size that is not a power of two nor even, and size 1 */
  double *y = draw_design(s, 7, FG_STREAM_DESIGN, FG_DESIGN_LATIN_HYPERCUBE, 37,
                          37 * 5, 37, 37);
  int ok37 = 1;
  for (int j = 0; j < 3; j++) {
    int count[37] = {0};
    for (int q = 0; q < 37; q++)
      count[(int)floor(y[(size_t)j * 37 + (size_t)q] * 37)]++;
    for (int k = 0; k < 37; k++)
      ok37 &= count[k] == 1;
  }
  CHECK(ok37);
  double *z = draw_design(s, 7, FG_STREAM_DESIGN, FG_DESIGN_LATIN_HYPERCUBE, 1,
                          0, 100, 100);
  int in01 = 1;
  for (int t = 0; t < 300; t++)
    in01 &= z[t] > 0 && z[t] < 1;
  CHECK(in01);
  free(x);
  free(y);
  free(z);
  fg_sampler_free(s);
}

/* Sobol: the skip-ahead points equal GSL's gsl_qrng_sobol sequence (points
 * 1 .. 2^20 - 1, beyond the 2^16 points the direction numbers were read
 * from: all of them in dimensions 0, 1, 2 and the last, every 61st in the
 * others); shifted points of a replicate of
 * 2^10 put exactly 2^(10-k) points in each dyadic interval of length 2^-k;
 * the dimension limit. */
static void test_sobol(void) {
  int max = fg_design_sobol_max_dims();
  CHECK_INT(max, (int)gsl_qrng_sobol->max_dimension);
  gsl_qrng *q = gsl_qrng_alloc(gsl_qrng_sobol, (unsigned)max);
  double g[64];
  int agree = 1;
  uint64_t bad_q = 0;
  for (uint64_t k = 1; q && k < (UINT64_C(1) << 20); k++) {
    gsl_qrng_get(q, g);
    for (int c = 0; c < max; c++) {
      if (k % 61 != 0 && c > 2 && c != max - 1) continue; /* keep it quick */
      uint64_t x = fg_design_sobol_point(c, k);
      uint64_t gsl = (uint64_t)(g[c] * 1073741824.0); /* 2^30 */
      if ((x >> 23) != gsl || (x & ((UINT64_C(1) << 23) - 1)) != 0) {
        if (agree) bad_q = k;
        agree = 0;
      }
    }
  }
  CHECK_MSG(agree, "first disagreement at point %llu",
            (unsigned long long)bad_q);
  CHECK_INT(fg_design_sobol_point(0, 0), 0);
  if (q) gsl_qrng_free(q);

  fg_sampler *s = build_ok(
      "[{\"name\":\"u\",\"size\":6,\"distribution\":{\"family\":\"uniform\","
      "\"low\":0,\"high\":1}}]",
      NULL);
  if (!s) return;
  const int rep = 1024;
  double *x = draw_design(s, 11, FG_STREAM_DESIGN, FG_DESIGN_SOBOL, rep,
                          3 * rep, 2 * rep, FG_BLOCK);
  int strat = 1;
  for (int j = 0; j < 6; j++)
    for (int r = 0; r < 2; r++)
      for (int k = 1; k <= 10; k++) {
        int count[1024] = {0}, cells = 1 << k;
        for (int t = 0; t < rep; t++) {
          double v = x[(size_t)j * 2 * rep + (size_t)r * rep + (size_t)t];
          strat &= v > 0 && v < 1;
          count[(int)floor(v * cells)]++;
        }
        for (int c = 0; c < cells; c++)
          strat &= count[c] == rep / cells;
      }
  CHECK(strat);
  /* pairs of dimensions too: 2^5 x 2^5 cells of a (t, 10, 2)-net hold
   * the points in equal numbers only up to 2^t; check the 4 x 4 grid */
  int grid[16] = {0}, grid_ok = 1;
  for (int t = 0; t < rep; t++)
    grid[(int)(x[t] * 4) * 4 + (int)(x[(size_t)2 * rep + t] * 4)]++;
  for (int c = 0; c < 16; c++)
    grid_ok &= grid[c] == rep / 16;
  CHECK(grid_ok);
  /* replicates differ in their shift */
  CHECK(x[0] != x[rep]);
  free(x);
  fg_sampler_free(s);

  fg_problem p;
  char doc[512];
  snprintf(doc, sizeof doc,
           "[{\"name\":\"n\",\"size\":%d,\"distribution\":{\"family\":"
           "\"normal\",\"mean\":0,\"sd\":1}}]",
           max + 1);
  fg_sampler *big = build_ok(doc, NULL);
  if (big) {
    fg_problem_init(&p);
    CHECK(fg_sampler_design_check(big, FG_DESIGN_SOBOL, &p) == FG_ELIMIT);
    CHECK_MSG(p.nitems > 0 && strcmp(p.items[0].pointer, "/sampling") == 0 &&
                  strstr(p.items[0].message, "Sobol"),
              "item %s: %s", p.nitems ? p.items[0].pointer : "(none)",
              p.nitems ? p.items[0].message : "");
    fg_problem_init(&p);
    CHECK(fg_sampler_design_check(big, FG_DESIGN_LATIN_HYPERCUBE, &p) == FG_OK);
    fg_sampler_free(big);
  }
  /* a scenario table is one Sobol coordinate however wide */
  char *wide = malloc((size_t)max * 4 + 512);
  if (!wide) abort();
  int len = sprintf(wide,
                    "[{\"name\":\"tab\",\"size\":%d,\"distribution\":"
                    "{\"family\":\"scenario_table\",\"rows\":[[",
                    max);
  for (int c = 0; c < max; c++)
    len += sprintf(wide + len, "%s%d", c ? "," : "", c);
  sprintf(wide + len, "]]}},{\"name\":\"z\",\"distribution\":{\"family\":"
                      "\"normal\",\"mean\":0,\"sd\":1}}]");
  fg_sampler *tab = build_ok(wide, NULL);
  if (tab) {
    CHECK_INT(fg_sampler_dims(tab), max + 1);
    fg_problem_init(&p);
    CHECK(fg_sampler_design_check(tab, FG_DESIGN_SOBOL, &p) == FG_OK);
    double *y = draw_design(tab, 3, FG_STREAM_DESIGN, FG_DESIGN_SOBOL, 256, 0,
                            256, FG_BLOCK);
    CHECK(y[(size_t)(max - 1) * 256 + 5] == max - 1 && isfinite(y[max * 256]));
    free(y);
    fg_sampler_free(tab);
  }
  free(wide);
}

/* Marginal means under each design against closed forms, on 2^14 samples
 * (16 replicates of 1024). |error| is compared with the Monte Carlo
 * standard error sd / sqrt(n) of the same sample count. Latin hypercube
 * must be far below it: 1/20 for element-wise inputs (over 200 seeds the
 * root mean square is about 1/80 for a normal), 1/4 for copula members,
 * whose marginals mix several stratified coordinates. Sobol with a
 * digital shift puts every point of a replicate at the same offset in
 * its 1/1024 stratum, so its error is heavier tailed (root mean square
 * about 1/14 for a normal over 200 seeds): 1/4. Monte Carlo and
 * antithetic within 5 of it. Closed forms:
 * normal mean; lognormal exp(m + s^2/2); gamma shape x scale; poisson
 * mean; discrete and empirical and table weighted sums; beta a/(a+b). */
static const char *MEANS =
    "[{\"name\":\"nrm\",\"distribution\":{\"family\":\"normal\",\"mean\":3,"
    "\"sd\":2}},"
    "{\"name\":\"lgn\",\"distribution\":{\"family\":\"lognormal\","
    "\"meanlog\":0.5,\"sdlog\":0.4}},"
    "{\"name\":\"gam\",\"distribution\":{\"family\":\"gamma\",\"shape\":2.5,"
    "\"scale\":1.5}},"
    "{\"name\":\"poi\",\"distribution\":{\"family\":\"poisson\",\"mean\":4}},"
    "{\"name\":\"dis\",\"distribution\":{\"family\":\"discrete\","
    "\"values\":[5,1,2],\"weights\":[0.3,0.2,0.5]}},"
    "{\"name\":\"emp\",\"distribution\":{\"family\":\"empirical\","
    "\"data\":[3,1,4,1,5,9,2,6]}},"
    "{\"name\":\"mvn\",\"size\":2,\"distribution\":{\"family\":"
    "\"multivariate_normal\",\"mean\":[1,-2],\"covariance\":[[1,0.6],"
    "[0.6,2]]}},"
    "{\"name\":\"tab\",\"size\":2,\"distribution\":{\"family\":"
    "\"scenario_table\",\"rows\":[[1,10],[2,20],[4,40]],\"weights\":[0.5,"
    "0.3,0.2]}},"
    "{\"name\":\"cg\",\"distribution\":{\"family\":\"gamma\",\"shape\":3,"
    "\"scale\":1}},"
    "{\"name\":\"cb\",\"distribution\":{\"family\":\"beta\",\"a\":2,\"b\":3}}]";
static const char *MEANS_DEP =
    "[{\"kind\":\"gaussian_copula\",\"members\":[\"cg\",\"cb\"],"
    "\"correlation\":[[1,0.7],[0.7,1]]}]";

static void test_design_means(void) {
  fg_sampler *s = build_ok(MEANS, MEANS_DEP);
  if (!s) return;
  enum { NDIM = 12 };
  CHECK_INT(fg_sampler_dims(s), NDIM);
  const double mu[NDIM] = {3, exp(0.58), 3.75, 4,  2.7, 31.0 / 8,
                           1, -2,        1.9,  19, 3,   0.4};
  const double var[NDIM] = {4,
                            (exp(0.16) - 1) * exp(1.16),
                            2.5 * 1.5 * 1.5,
                            4,
                            2.41,
                            173.0 / 8 - (31.0 / 8) * (31.0 / 8),
                            1,
                            2,
                            1.29,
                            129,
                            3,
                            0.04};
  const int copula_member[NDIM] = {0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 1, 1};
  const int n = 1 << 14;
  const uint64_t rep = 1024;
  for (int k = -1; k < 3; k++) {
    double *x = k < 0 ? draw_range(s, 31, FG_STREAM_VALIDATION, 0, n, FG_BLOCK)
                      : draw_design(s, 31, FG_STREAM_VALIDATION, DESIGNS[k],
                                    rep, 0, n, FG_BLOCK);
    const char *name = k < 0 ? "monte_carlo" : DESIGN_NAMES[k];
    char line[512];
    int len = snprintf(line, sizeof line, "  %-16s |error| / MC s.e.:", name);
    for (int j = 0; j < NDIM; j++) {
      double m = 0;
      for (int t = 0; t < n; t++)
        m += x[(size_t)j * n + (size_t)t];
      m /= n;
      double ratio = fabs(m - mu[j]) / sqrt(var[j] / n);
      len += snprintf(line + len, sizeof line - (size_t)len, " %.3g", ratio);
      double limit = k <= 0 ? 5.0 : k == 2 || copula_member[j] ? 0.25 : 0.05;
      CHECK_MSG(ratio <= limit,
                "%s: dimension %d mean %.10g, expected %.10g "
                "(error %.3g Monte Carlo standard errors, limit %g)",
                name, j, m, mu[j], ratio, limit);
    }
    printf("%s\n", line);
    free(x);
  }
  fg_sampler_free(s);
}

/* fg_exp_lanes gives libm's exp bit for bit, whichever entry and lane
 * kernel it chose, over lognormal-sized and extreme arguments: 4,000,000
 * pseudo-random arguments per kernel (the probes of the start-up check
 * are other ones), block lengths that leave lanes over, and a grid across
 * the whole range including the edges of the main path. */
static void test_exp_lanes(void) {
  enum { N = 4096, ROUNDS = 1000 };
  static double x[N], y[N];
  static const char *const names[3] = {"none", "AVX2+FMA", "AVX-512F"};
  uint64_t s = UINT64_C(0x0123456789ABCDEF);
  for (int level = 0; level < 3; level++) {
    int k = fg_exp_lanes_force(level);
    long bad = 0, lanes = 0;
    for (int round = 0; round < ROUNDS; round++) {
      for (int i = 0; i < N; i++) {
        s ^= s >> 12; /* xorshift64* */
        s ^= s << 25;
        s ^= s >> 27;
        double u = (double)((s * UINT64_C(0x2545F4914F6CDD1D)) >> 11) *
                   0x1p-53;
        if (round == 0)
          x[i] = i % 2 ? -20.0 + 40.0 * i / N : -760.0 + 1480.0 * i / N;
        else if (round % 4 == 1)
          x[i] = -750.0 + 1465.0 * u;
        else if (round % 4 == 2)
          x[i] = (u - 0.5) * 0x1p-50; /* around the lower edge, 2^-54 */
        else
          x[i] = -12.0 + 30.0 * u;
        if (round == 1 && i < 8) /* the upper edge, 512, both sides */
          x[i] = (i % 2 ? -1 : 1) * nextafter(512.0, i < 4 ? 0.0 : 1e3);
        y[i] = x[i];
      }
      int n = N - round % 8; /* lanes over for the kernels' tails */
      fg_exp_lanes(y, n);
      for (int i = 0; i < n; i++) {
        double e = exp(x[i]);
        bad += memcmp(&e, &y[i], sizeof e) != 0;
      }
      lanes += n;
    }
    /* the fused lognormal form: exp(mu + sd x), product and sum rounded */
    long bad_affine = 0;
    for (int i = 0; i < N; i++) y[i] = x[i] / 4;
    fg_exp_lanes_affine(y, N - 3, 3.7, 0.41);
    for (int i = 0; i < N - 3; i++) {
      double e = exp(3.7 + 0.41 * (x[i] / 4));
      bad_affine += memcmp(&e, &y[i], sizeof e) != 0;
    }
    CHECK_MSG(bad_affine == 0, "fg_exp_lanes_affine (kernel %s) differs in %ld lanes",
              names[k], bad_affine);
    CHECK_MSG(bad == 0, "fg_exp_lanes (kernel %s) differs from exp in %ld lanes",
              names[k], bad);
    printf("fg_exp_lanes, kernel %s: %ld lanes, %ld differ from exp\n",
           names[k], lanes, bad);
  }
  fg_exp_lanes_force(0);
  printf("fg_exp_lanes: %s\n",
         fg_exp_lanes_direct() ? "libm's implementation without its wrapper"
                               : "exp");
}

int main(void) {
  test_exp_lanes();
  test_determinism();
  test_columns();
  test_errors();
  test_moments();
  test_truncated();
  test_mvn();
  test_copula();
  test_slots();
  test_copula_icdfs();
  test_block_streams();
  test_design_determinism();
  test_antithetic();
  test_lhs_strata();
  test_sobol();
  test_design_means();
  return fg_test_finish();
}
