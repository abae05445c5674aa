/*
 * tests/unit/sample/test_exp.c -- fg_exp_lanes, the lane-wise exp of the
 * lognormal and other families.
 *
 * Covers: equality bit for bit with the C library's exp (the outside
 * reference: libm's own result for every argument) over lognormal-sized
 * and extreme arguments, for whichever entry and lane kernel was chosen.
 */
#include "sample_testutil.h"

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
  return fg_test_finish();
}
