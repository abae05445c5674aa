/*
 * tests/unit/core/test_quantile.c -- closed forms and work caps of the
 * quantile module (core/quantile.c).
 * Quantile closed forms (Abramowitz & Stegun 26.7.1 and 6.5; the sweeps
 * against SciPy and mpmath are tests/reference/test_quantiles.py):
 * t with 1 df is Cauchy, tan(pi (u - 1/2)); t with 2 df is
 * (2u - 1)/sqrt(2u(1-u)); gamma with shape 1 is -log(1 - u); beta(a, 1)
 * is u^(1/a); I_x(a, b) + I_{1-x}(b, a) = 1.
 */
#include "check.h"
#include "core/quantile.h"

#include <math.h>

/* Closed forms and work caps of core/quantile.c. */
static void test_quantile(void) {
  fg_qcount cnt = {0, 0};
  CHECK_NEAR(fg_q_t_inv(0.2, 0.8, 1, &cnt), tan(M_PI * (0.2 - 0.5)), 1e-14);
  CHECK_NEAR(fg_q_t_inv(0.9, 0.1, 2, &cnt), 0.8 / sqrt(2 * 0.9 * 0.1), 1e-13);
  CHECK(fg_q_t_inv(0.5, 0.5, 7, &cnt) == 0);
  CHECK_NEAR(fg_q_gamma_inv(0.3, 0.7, 1, &cnt), -log1p(-0.3), 1e-14);
  /* the upper tail at 1e-300: -log(1e-300), where 1 - uc is exactly 1 */
  CHECK_NEAR(fg_q_gamma_inv(1.0, 1e-300, 1, &cnt) / (300 * log(10)), 1, 1e-14);
  CHECK_NEAR(fg_q_beta_inv(0.3, 0.7, 2.5, 1, NULL, &cnt), pow(0.3, 1 / 2.5), 1e-14);
  double y, x = fg_q_beta_inv(1e-9, 1 - 1e-9, 3, 4, &y, &cnt);
  double lo, up;
  fg_q_ibeta(x, y, 3, 4, &lo, &up, &cnt);
  CHECK_NEAR(lo / 1e-9, 1, 1e-12);
  /* very large parameters end and stay inside (0, 1) (the asymptotic
   * form; GSL's inverse did not return here) */
  x = fg_q_beta_inv(0.5, 0.5, 1e6, 1e6, &y, &cnt);
  CHECK(fabs(x - 0.5) < 1e-6 && isfinite(y));
  x = fg_q_beta_inv(0.025, 0.975, 9009382, 990619, NULL, &cnt);
  CHECK(x > 0.9 && x < 0.901);
  double l1, u1, l2, u2;
  fg_q_ibeta(0.3, 0.7, 2.5, 7.5, &l1, &u1, &cnt);
  fg_q_ibeta(0.7, 0.3, 7.5, 2.5, &l2, &u2, &cnt);
  CHECK_NEAR(l1, u2, 1e-15);
  CHECK(cnt.steps > 0 && cnt.terms > 0 && cnt.terms <= FG_Q_TERMS_MAX);
}

int main(void) {
  test_quantile();
  return fg_test_finish();
}
