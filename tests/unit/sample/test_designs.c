/*
 * tests/unit/sample/test_designs.c -- the sampling designs.
 *
 * Covers: determinism of every design under any chunking, antithetic
 * mirrors, one sample per Latin hypercube stratum, Sobol points equal to
 * GSL's gsl_qrng_sobol sequence (the outside reference) and stratified
 * after shifting, and marginal means far closer to the families'
 * closed-form means than Monte Carlo gets (the Monte Carlo standard error
 * sd / sqrt(n) as the yardstick).
 */
#include "sample_testutil.h"

#include <gsl/gsl_qrng.h>

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

int main(void) {
  test_design_determinism();
  test_antithetic();
  test_lhs_strata();
  test_sobol();
  test_design_means();
  return fg_test_finish();
}
