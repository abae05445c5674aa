/*
 * tests/unit/sample/test_families.c -- the moments of every family.
 *
 * Covers: sample mean and variance of 200k draws of each family against
 * the family's closed-form moments (tolerance 5 standard errors, the
 * standard error of the variance estimated from the sample's own fourth
 * central moment), and truncated normals inside their bounds with the
 * closed-form mean of the truncated normal law. The closed forms are named
 * beside each check. The draws are deterministic for the fixed seeds used.
 */
#include "sample_testutil.h"

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

int main(void) {
  test_moments();
  test_truncated();
  return fg_test_finish();
}
