/*
 * tests/unit/sample/sample_testutil.h -- what the sample/ unit tests share:
 * building a sampler from JSON text, drawing ranges of samples, sample
 * moments and correlations, the standard normal density and distribution
 * function (closed forms), and the mixed input list several tests draw.
 *
 * Header-only with static inline functions, like check.h, since every
 * test program is one file. Thread use: the test program's main thread.
 */
#ifndef FG_TEST_SAMPLE_TESTUTIL_H
#define FG_TEST_SAMPLE_TESTUTIL_H

#include "sample/sample.h"
#include "sample/sample_internal.h"

#include "feasgate/limits.h"
#include "feasgate/status.h"

#include "check.h"

#include <cjson/cJSON.h>

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define NBIG 200000

#define PI 3.14159265358979323846

static inline fg_sampler *build(const char *uncertain, const char *dependence,
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

static inline fg_sampler *build_ok(const char *uncertain,
                                   const char *dependence) {
  fg_problem p;
  fg_sampler *s = build(uncertain, dependence, &p);
  CHECK_MSG(s != NULL, "build failed: %s (%s)", p.detail, uncertain);
  return s;
}

/* Draw samples [first, first + n) in chunks of `chunk` into a dims x n
 * array (dimension j at out[j * n + t]). */
static inline double *draw_range(const fg_sampler *s, uint64_t seed,
                                 fg_stream st, uint64_t first, int n,
                                 int chunk) {
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

static inline double *draw_big(const fg_sampler *s, uint64_t seed) {
  return draw_range(s, seed, FG_STREAM_DESIGN, 0, NBIG, FG_BLOCK);
}

typedef struct moments {
  double mean, var, m4;
} moments;

static inline moments moments_of(const double *x, int n) {
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
static inline void check_moments(const double *x, int n, double mu, double var,
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

static inline double covariance_of(const double *x, const double *y, int n) {
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

static inline double correlation_of(const double *x, const double *y, int n) {
  return covariance_of(x, y, n) /
         sqrt(covariance_of(x, x, n) * covariance_of(y, y, n));
}

static inline double phi(double z) {
  return exp(-0.5 * z * z) / sqrt(2 * PI);
}

static inline double Phi(double z) {
  return 0.5 * erfc(-z / sqrt(2));
}

/* The mixed input list (every family, a copula, a table) of the
 * determinism tests of the plain and the design streams. */
static const char *const MIXED =
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

static const char *const MIXED_DEP =
    "[{\"kind\":\"gaussian_copula\",\"members\":[\"ln\",\"cnt\"],"
    "\"correlation\":{\"equal\":0.5}}]";

static inline int same(const double *a, const double *b, size_t n) {
  return memcmp(a, b, n * sizeof *a) == 0;
}

/* One input named x of `size` (0 = scalar) with distribution `dist`. */
static inline char *input1(int size, const char *dist) {
  static char buf[4096];
  if (size > 0)
    snprintf(buf, sizeof buf,
             "[{\"name\":\"x\",\"size\":%d,\"distribution\":%s}]", size, dist);
  else
    snprintf(buf, sizeof buf, "[{\"name\":\"x\",\"distribution\":%s}]", dist);
  return buf;
}

#endif
