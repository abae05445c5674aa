/*
 * tests/unit/sample/test_streams.c -- the sample/ module's random streams.
 *
 * Covers: determinism (bulk draws equal one-at-a-time draws and draws in
 * other chunkings and offsets; a sample regenerated alone equals its bulk
 * value; design and validation streams differ; the seed matters), the
 * column layout and integer-valued columns, the slot rules of the
 * multivariate normal and copula members, and the per-block streams.
 *
 * Outside references: Random123's Philox4x32-10 (its reference
 * implementation, compiled here from the Debian package) and the GSL
 * adaptor's first uniform for the cipher; the standard normal distribution
 * function (erfc, values as in the standard normal table) and binomial
 * standard errors for the ziggurat's law. The draws are deterministic for
 * the fixed seeds used, so a pass is a pass on every run.
 */
#include "sample_testutil.h"

#include <Random123/philox.h>

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
  /* the third: a pair block's counter (FG_STREAM_PAIR, bit 31 of the
   * counter's second word) */
  const uint64_t firsts[3] = {12345, (UINT64_C(1) << 32) - 100,
                              FG_STREAM_PAIR | 6172};
  int same_cipher = 1;
  /* every code path (AVX-512F, AVX2 where present, SSE2, scalar), and
   * lane counts that leave lanes over for the narrower paths */
  for (int f = 0; f < 18; f++) {
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
  for (int i = 0; i < n; i += 9973) /* odd and even samples */
    alone &= fg_stream_normal_one(key, (uint64_t)i, 4) == z[i];
  CHECK(alone);
  /* a block may start at an odd sample (its first pair block is then half
   * used): the same normals on the widest path too */
  int odd_start = 1;
  for (int t0 = 1; t0 + FG_BLOCK <= 64 * FG_BLOCK; t0 += 2 * FG_BLOCK + 1) {
    static double zo[FG_BLOCK];
    fg_stream_normals(key, (uint64_t)t0, FG_BLOCK - 1, 4, &w, zo);
    odd_start &= memcmp(zo, z + t0, (size_t)(FG_BLOCK - 1) * sizeof *zo) == 0;
  }
  CHECK(odd_start);
  /* The first attempt of sample i is half (i & 1) of the pair block
   * {(i >> 1) | FG_STREAM_PAIR, slot, 0} (Random123's Philox here): a
   * normal takes its sign from bit 8 of its first attempt's word unless
   * that attempt is rejected in a wedge (about 1 in 100; a new attempt
   * then draws its own sign), so at most 2% of 4096 normals differ in
   * sign from that bit (the wrong block or half would give about half);
   * and neighbours sharing a pair block are uncorrelated (the sample
   * correlation of (z[2j], z[2j + 1]) within 5 / sqrt(pairs)) */
  int sign_off = 0;
  for (int i = 0; i < 4096; i++) {
    uint64_t j = ((uint64_t)i >> 1) | FG_STREAM_PAIR;
    philox4x32_ctr_t c = {{(uint32_t)j, (uint32_t)(j >> 32), 4, 0}};
    philox4x32_key_t k = {{key.k0, key.k1}};
    philox4x32_ctr_t r = philox4x32(c, k);
    uint32_t lo = r.v[2 * (i & 1)];
    sign_off += (z[i] < 0) != ((lo >> 8) & 1);
  }
  CHECK_MSG(sign_off <= 82, "%d of 4096 normals differ in sign from their "
            "first attempt's bit", sign_off);
  double sxy = 0, sxx = 0, syy = 0;
  for (int i = 0; i + 1 < n; i += 2) {
    sxy += z[i] * z[i + 1];
    sxx += z[i] * z[i];
    syy += z[i + 1] * z[i + 1];
  }
  CHECK_NEAR(sxy / sqrt(sxx * syy), 0.0, 5.0 / sqrt(n / 2.0));
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

int main(void) {
  test_determinism();
  test_columns();
  test_slots();
  test_block_streams();
  return fg_test_finish();
}
