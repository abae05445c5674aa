/*
 * tests/unit/sample/test_dependence.c -- multivariate normal inputs and the
 * Gaussian copula.
 *
 * Covers: the multivariate normal's sample covariance against the declared
 * one; the Gaussian copula's rank correlation and preserved marginals;
 * every continuous family as a copula member keeping its closed-form
 * moments. Outside references: the declared covariance itself, the
 * closed-form relation between a Gaussian copula's correlation and its
 * rank correlation (named beside the check), the families' closed-form
 * moments. The draws are deterministic for the fixed seeds used.
 */
#include "sample_testutil.h"

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

int main(void) {
  test_mvn();
  test_copula();
  test_copula_icdfs();
  return fg_test_finish();
}
