/*
 * tests/unit/sample/test_errors.c -- every family's parameter errors.
 *
 * Covers: each distribution family and dependence form refuses invalid
 * parameters with status FG_EINVAL, a problem item at the JSON Pointer of
 * the fault (RFC 6901) and a message naming what was expected and found.
 * The valid parameter ranges are the families' definitions (closed forms
 * of each law) and the named limits of include/feasgate/limits.h.
 */
#include "sample_testutil.h"

#define D "/uncertain/0/distribution"

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

int main(void) {
  test_errors();
  return fg_test_finish();
}
