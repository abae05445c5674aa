/*
 * sample/family_laws.c -- the continuous families: normal (optionally
 * truncated), lognormal, uniform, triangular, pert, beta, exponential,
 * gamma, weibull, student_t. Each is its parser, its inverse CDF, and its
 * draw: a per-block path (ziggurat normals, tight inverse loops), GSL's
 * sampler per sample, or neither (the inverse CDF of the block's
 * uniforms); family.c's table lists them.
 *
 * Parameter layout (in->par[k][e]):
 *   normal       mean, sd, a = (lower-mean)/sd, b = (upper-mean)/sd,
 *                Phi(a), Q(b) = 1 - Phi(b), w = Phi(b) - Phi(a)
 *   lognormal    meanlog, sdlog (converted from mean, sd when given so)
 *   uniform      low, high
 *   triangular   low, mode, high, F(mode)
 *   pert, beta   low, high - low, alpha, beta (the beta law on [low,high])
 *   exponential  mean
 *   gamma        shape, scale
 *   weibull      shape, scale
 *   student_t    df, location, scale
 *
 * Thread use: parsing runs in the building thread; draws and inverse
 * CDFs only read the input and may run in any number of threads at once.
 */
#include "sample/sample_internal.h"

#include "core/quantile.h"
#include "feasgate/limits.h"

#include <cjson/cJSON.h>
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_randist.h>

#include <math.h>
#include <stdbool.h>
#include <stdlib.h>

static void parse_normal(fg_input *in, fg_params *c) {
  double **v = in->par;
  int m = fg_param_read(c, in, 0, "mean", 1, 0);
  int s = fg_param_read(c, in, 1, "sd", 1, 0);
  int lo = fg_param_read(c, in, 2, "lower", 0, -INFINITY);
  int hi = fg_param_read(c, in, 3, "upper", 0, INFINITY);
  if (s > 0) fg_param_positive(c, "sd", v[1], 1);
  if (lo > 0 && hi > 0) fg_param_less(c, "lower", v[2], "upper", v[3], 1);
  if (m < 0 || s < 0 || lo < 0 || hi < 0 || c->st != FG_OK) return;
  in->truncated = lo > 0 || hi > 0;
  for (int e = 0; e < in->size && in->truncated; e++) {
    double a = (v[2][e] - v[0][e]) / v[1][e];
    double b = (v[3][e] - v[0][e]) / v[1][e];
    double pa = gsl_cdf_ugaussian_P(a), qb = gsl_cdf_ugaussian_Q(b);
    double w;
    if (a > 0)
      w = gsl_cdf_ugaussian_Q(a) - qb;
    else if (b < 0)
      w = gsl_cdf_ugaussian_P(b) - pa;
    else
      w = 1.0 - pa - qb;
    v[2][e] = a;
    v[3][e] = b;
    v[4][e] = pa;
    v[5][e] = qb;
    v[6][e] = w;
    if (!(w > 0)) {
      fg_family_param_error(c, FG_EINVAL, lo > 0 ? "lower" : "upper", e,
                            "expected bounds holding positive probability "
                            "under the untruncated normal, found "
                            "[%.15g, %.15g] with probability 0 in double "
                            "precision",
                            a * v[1][e] + v[0][e], b * v[1][e] + v[0][e]);
      if (!fg_param_is_array(c, "lower") && !fg_param_is_array(c, "upper")) break;
    }
  }
}

static void parse_lognormal(fg_input *in, fg_params *c) {
  double **v = in->par;
  int logform = fg_family_param_present(c, "meanlog") ||
                fg_family_param_present(c, "sdlog");
  int natform =
      fg_family_param_present(c, "mean") || fg_family_param_present(c, "sd");
  if (logform && natform) {
    fg_problem_add(c->p, FG_EINVAL, c->ptr, 0,
                   "expected either meanlog and sdlog or mean and sd (of "
                   "the variable itself), found both forms");
    c->st = c->st ? c->st : FG_EINVAL;
    return;
  }
  if (!natform) {
    int a = fg_param_read(c, in, 0, "meanlog", 1, 0);
    int b = fg_param_read(c, in, 1, "sdlog", 1, 0);
    if (b > 0) fg_param_positive(c, "sdlog", v[1], 1);
    (void)a;
    return;
  }
  int a = fg_param_read(c, in, 2, "mean", 1, 0);
  int b = fg_param_read(c, in, 3, "sd", 1, 0);
  if (a > 0) fg_param_positive(c, "mean", v[2], 1);
  if (b > 0) fg_param_positive(c, "sd", v[3], 1);
  if (c->st != FG_OK) return;
  /* exact conversion: sdlog^2 = log(1 + sd^2/mean^2),
   * meanlog = log(mean) - sdlog^2 / 2 */
  for (int e = 0; e < in->size; e++) {
    double r = v[3][e] / v[2][e];
    double s2 = log1p(r * r);
    v[0][e] = log(v[2][e]) - 0.5 * s2;
    v[1][e] = sqrt(s2);
    if (!(v[1][e] > 0) || !isfinite(v[0][e])) {
      fg_family_param_error(c, FG_EINVAL, "sd", e,
                            "expected sd/mean giving a representable "
                            "lognormal, found sd = %.15g, mean = %.15g",
                            v[3][e], v[2][e]);
      if (!fg_param_is_array(c, "sd") && !fg_param_is_array(c, "mean")) break;
    }
  }
}

static void parse_uniform(fg_input *in, fg_params *c) {
  int a = fg_param_read(c, in, 0, "low", 1, 0);
  int b = fg_param_read(c, in, 1, "high", 1, 0);
  if (a > 0 && b > 0) fg_param_less(c, "low", in->par[0], "high", in->par[1], 1);
}

static void parse_triangular(fg_input *in, fg_params *c) {
  double **v = in->par;
  int a = fg_param_read(c, in, 0, "low", 1, 0);
  int m = fg_param_read(c, in, 1, "mode", 1, 0);
  int b = fg_param_read(c, in, 2, "high", 1, 0);
  if (a <= 0 || m <= 0 || b <= 0) return;
  fg_param_less(c, "low", v[0], "high", v[2], 1);
  fg_param_less(c, "low", v[0], "mode", v[1], 0);
  fg_param_less(c, "mode", v[1], "high", v[2], 0);
  if (c->st != FG_OK) return;
  for (int e = 0; e < in->size; e++)
    v[3][e] = (v[1][e] - v[0][e]) / (v[2][e] - v[0][e]);
}

/* pert: beta on [low, high] with alpha = 1 + shape (mode-low)/(high-low),
 * beta = 1 + shape (high-mode)/(high-low). */
static void parse_pert(fg_input *in, fg_params *c) {
  double **v = in->par;
  int a = fg_param_read(c, in, 4, "low", 1, 0);
  int m = fg_param_read(c, in, 5, "mode", 1, 0);
  int b = fg_param_read(c, in, 6, "high", 1, 0);
  int s = fg_param_read(c, in, 7, "shape", 0, 4.0);
  if (s > 0) {
    fg_param_positive(c, "shape", v[7], 1);
    fg_param_at_most(c, "shape", v[7], FG_SHAPE_PARAM_MAX);
  }
  if (a <= 0 || m <= 0 || b <= 0 || s < 0) return;
  fg_param_less(c, "low", v[4], "high", v[6], 1);
  fg_param_less(c, "low", v[4], "mode", v[5], 0);
  fg_param_less(c, "mode", v[5], "high", v[6], 0);
  if (c->st != FG_OK) return;
  for (int e = 0; e < in->size; e++) {
    double range = v[6][e] - v[4][e];
    v[0][e] = v[4][e];
    v[1][e] = range;
    v[2][e] = 1.0 + v[7][e] * (v[5][e] - v[4][e]) / range;
    v[3][e] = 1.0 + v[7][e] * (v[6][e] - v[5][e]) / range;
  }
}

static void parse_beta(fg_input *in, fg_params *c) {
  double **v = in->par;
  int a = fg_param_read(c, in, 2, "a", 1, 0);
  int b = fg_param_read(c, in, 3, "b", 1, 0);
  int lo = fg_param_read(c, in, 4, "low", 0, 0.0);
  int hi = fg_param_read(c, in, 5, "high", 0, 1.0);
  if (a > 0)
    fg_param_range(c, "a", v[2], FG_SHAPE_PARAM_MIN, FG_SHAPE_PARAM_MAX, FG_PARAM_SHAPE_WHY);
  if (b > 0)
    fg_param_range(c, "b", v[3], FG_SHAPE_PARAM_MIN, FG_SHAPE_PARAM_MAX, FG_PARAM_SHAPE_WHY);
  if (lo >= 0 && hi >= 0) fg_param_less(c, "low", v[4], "high", v[5], 1);
  if (c->st != FG_OK) return;
  for (int e = 0; e < in->size; e++) {
    v[0][e] = v[4][e];
    v[1][e] = v[5][e] - v[4][e];
    if (!isfinite(v[1][e])) {
      fg_family_param_error(c, FG_EINVAL, "high", e,
                            "expected high - low to be finite, found "
                            "overflow");
      break;
    }
  }
}

static void parse_two_positive(fg_input *in, fg_params *c, const char *n0,
                               const char *n1) {
  int a = fg_param_read(c, in, 0, n0, 1, 0);
  int b = fg_param_read(c, in, 1, n1, 1, 0);
  if (a > 0) fg_param_positive(c, n0, in->par[0], 1);
  if (b > 0) fg_param_positive(c, n1, in->par[1], 1);
}

static void parse_gamma(fg_input *in, fg_params *c) {
  int a = fg_param_read(c, in, 0, "shape", 1, 0);
  int b = fg_param_read(c, in, 1, "scale", 1, 0);
  if (a > 0)
    fg_param_range(c, "shape", in->par[0], FG_SHAPE_PARAM_MIN, FG_SHAPE_PARAM_MAX,
               FG_PARAM_SHAPE_WHY);
  if (b > 0) fg_param_positive(c, "scale", in->par[1], 1);
  if (a <= 0 || b <= 0 || c->st != FG_OK) return;
  double *qmax = malloc((size_t)in->size * sizeof *qmax);
  if (!qmax) {
    fg_problem_set(c->p, FG_ENOMEM, "out of memory reading %s", c->ptr);
    c->st = c->st ? c->st : FG_ENOMEM;
    return;
  }
  /* Q(a, a + 40 sqrt(a) + 750) < 1e-300 for every a > 0 (the bracket of
   * fg_q_gamma_inv): a bound on the standard quantile at FG_ICDF_P_MIN
   * that costs nothing per element. */
  for (int e = 0; e < in->size; e++) {
    double sh = in->par[0][e];
    qmax[e] = sh + 40 * sqrt(sh) + 750;
  }
  fg_param_finite_scale(c, "scale", in->par[1], NULL, qmax);
  free(qmax);
}

static void parse_exponential(fg_input *in, fg_params *c) {
  if (fg_param_read(c, in, 0, "mean", 1, 0) > 0)
    fg_param_positive(c, "mean", in->par[0], 1);
}

static void parse_student_t(fg_input *in, fg_params *c) {
  int d = fg_param_read(c, in, 0, "df", 1, 0);
  fg_param_read(c, in, 1, "location", 0, 0.0);
  int s = fg_param_read(c, in, 2, "scale", 0, 1.0);
  if (d > 0)
    fg_param_range(c, "df", in->par[0], FG_T_DF_MIN, FG_T_DF_MAX, FG_PARAM_SHAPE_WHY);
  if (s > 0) fg_param_positive(c, "scale", in->par[2], 1);
  if (d <= 0 || c->st != FG_OK) return;
  double *qmax = malloc((size_t)in->size * sizeof *qmax);
  if (!qmax) {
    fg_problem_set(c->p, FG_ENOMEM, "out of memory reading %s", c->ptr);
    c->st = c->st ? c->st : FG_ENOMEM;
    return;
  }
  /* the t quantile at FG_ICDF_P_MIN, once per distinct df in a row
   * (a vector input usually repeats one df) */
  for (int e = 0; e < in->size; e++)
    qmax[e] = e > 0 && in->par[0][e] == in->par[0][e - 1]
                  ? qmax[e - 1]
                  : fg_q_t_inv(1.0, FG_ICDF_P_MIN, in->par[0][e], NULL);
  fg_param_finite_scale(c, "scale", in->par[2], in->par[1], qmax);
  free(qmax);
}

/* ---- inverse CDFs (u and uc = 1 - u, both >= FG_ICDF_P_MIN) ---- */

/* Truncated standard normal on [a, b]: the point whose untruncated CDF is
 * Phi(a) + u w, computed from the lower tail when that is at most 1/2 and
 * otherwise from the upper tail Q(b) + (1 - u) w, so bounds far out in
 * either tail keep full relative precision. */
static double trunc_std(const fg_input *in, int e, double u, double uc) {
  double a = in->par[2][e], b = in->par[3][e];
  double pa = in->par[4][e], qb = in->par[5][e], w = in->par[6][e];
  double pt = pa + u * w;
  double z = pt <= 0.5 ? gsl_cdf_ugaussian_Pinv(pt)
                       : gsl_cdf_ugaussian_Qinv(qb + uc * w);
  /* rounding guard: the quantile of a point inside [Phi(a), Phi(b)] */
  if (z < a) z = a;
  if (z > b) z = b;
  return z;
}

static double normal_icdf(const fg_input *in, int e, double u, double uc) {
  double *const *v = in->par;
  if (in->truncated) return v[0][e] + v[1][e] * trunc_std(in, e, u, uc);
  return v[0][e] + v[1][e] * fg_family_std_quantile(u, uc);
}

static double lognormal_icdf(const fg_input *in, int e, double u,
                             double uc) {
  double *const *v = in->par;
  return exp(v[0][e] + v[1][e] * fg_family_std_quantile(u, uc));
}

static double uniform_icdf(const fg_input *in, int e, double u, double uc) {
  double *const *v = in->par;
  return u < 0.5 ? v[0][e] + (v[1][e] - v[0][e]) * u
                 : v[1][e] - (v[1][e] - v[0][e]) * uc;
}

static double triangular_icdf(const fg_input *in, int e, double u,
                              double uc) {
  double *const *v = in->par;
  double a = v[0][e], m = v[1][e], b = v[2][e];
  if (u < v[3][e]) return a + sqrt(u * (b - a) * (m - a));
  return b - sqrt(uc * (b - a) * (b - m));
}

/* pert and beta: the beta law on [low, low + range]. */
static double beta_icdf(const fg_input *in, int e, double u, double uc) {
  double *const *v = in->par;
  double x = fg_q_beta_inv(u, uc, v[2][e], v[3][e], NULL, NULL);
  return v[0][e] + v[1][e] * x;
}

static double exponential_icdf(const fg_input *in, int e, double u,
                               double uc) {
  return in->par[0][e] * (u < 0.5 ? -log1p(-u) : -log(uc));
}

static double gamma_icdf(const fg_input *in, int e, double u, double uc) {
  double *const *v = in->par;
  return v[1][e] * fg_q_gamma_inv(u, uc, v[0][e], NULL);
}

static double weibull_icdf(const fg_input *in, int e, double u, double uc) {
  double *const *v = in->par;
  return v[1][e] * pow(u < 0.5 ? -log1p(-u) : -log(uc), 1.0 / v[0][e]);
}

static double student_t_icdf(const fg_input *in, int e, double u,
                             double uc) {
  double *const *v = in->par;
  return v[1][e] + v[2][e] * fg_q_t_inv(u, uc, v[0][e], NULL);
}

/* ---- draws through GSL's samplers (one sample, its own sub-stream) ---- */

static double beta_draw(const fg_input *in, int e, gsl_rng *r) {
  double *const *v = in->par;
  return v[0][e] + v[1][e] * gsl_ran_beta(r, v[2][e], v[3][e]);
}

static double gamma_draw(const fg_input *in, int e, gsl_rng *r) {
  return gsl_ran_gamma(r, in->par[0][e], in->par[1][e]);
}

static double student_t_draw(const fg_input *in, int e, gsl_rng *r) {
  double *const *v = in->par;
  return v[1][e] + v[2][e] * gsl_ran_tdist(r, v[0][e]);
}

/* ---- per-block paths ---- */

/* Plain normals: the block's ziggurat normals, then one affine pass.
 * Truncated normals decline (inverse CDF of the block's uniforms). */
static bool normal_block(const fg_input *in, int e, uint32_t slot,
                         const fg_draw_ctx *dc, double *out) {
  if (in->truncated) return false;
  fg_stream_normals(dc->key, dc->first, dc->n, slot, dc->words, out);
  double m = in->par[0][e], sd = in->par[1][e];
  for (int t = 0; t < dc->n; t++)
    out[t] = m + sd * out[t];
  return true;
}

/* exp per lane is the largest cost of a lognormal draw. fg_exp_lanes
 * gives libm's values bit for bit: glibc's own algorithm in 8 or 4 lanes
 * where it is checked to agree, else libm per lane (libm_exp.c). An exp
 * of a different design (1 ulp from glibc's in 7% of lanes) was tried
 * earlier and not adopted: it would have changed lognormal values. */
static bool lognormal_block(const fg_input *in, int e, uint32_t slot,
                            const fg_draw_ctx *dc, double *out) {
  fg_stream_normals(dc->key, dc->first, dc->n, slot, dc->words, out);
  fg_exp_lanes_affine(out, dc->n, in->par[0][e], in->par[1][e]);
  return true;
}

static bool uniform_block(const fg_input *in, int e, uint32_t slot,
                          const fg_draw_ctx *dc, double *out) {
  double *restrict u = dc->u, *restrict uc = dc->uc;
  fg_stream_u01s(dc->key, dc->first, dc->n, slot, dc->words, u, uc);
  double lo = in->par[0][e], hi = in->par[1][e], w = hi - lo;
  for (int t = 0; t < dc->n; t++)
    out[t] = u[t] < 0.5 ? lo + w * u[t] : hi - w * uc[t];
  return true;
}

/* the products in triangular_icdf's order, so values stay identical */
static bool triangular_block(const fg_input *in, int e, uint32_t slot,
                             const fg_draw_ctx *dc, double *out) {
  double *restrict u = dc->u, *restrict uc = dc->uc;
  fg_stream_u01s(dc->key, dc->first, dc->n, slot, dc->words, u, uc);
  double *const *v = in->par;
  double a = v[0][e], m = v[1][e], b = v[2][e], fm = v[3][e];
  for (int t = 0; t < dc->n; t++)
    out[t] = u[t] < fm ? a + sqrt(u[t] * (b - a) * (m - a))
                       : b - sqrt(uc[t] * (b - a) * (b - m));
  return true;
}

/* ---- the laws ---- */

static void parse_weibull(fg_input *in, fg_params *c) {
  parse_two_positive(in, c, "shape", "scale");
}

static const char *const p_normal[] = {"mean", "sd", "lower", "upper", NULL};
static const char *const p_lognormal[] = {"meanlog", "sdlog", "mean", "sd",
                                          NULL};
static const char *const p_uniform[] = {"low", "high", NULL};
static const char *const p_triangular[] = {"low", "mode", "high", NULL};
static const char *const p_pert[] = {"low", "mode", "high", "shape", NULL};
static const char *const p_exponential[] = {"mean", NULL};
static const char *const p_gamma[] = {"shape", "scale", NULL};
static const char *const p_beta[] = {"a", "b", "low", "high", NULL};
static const char *const p_weibull[] = {"shape", "scale", NULL};
static const char *const p_student_t[] = {"df", "location", "scale", NULL};

FG_FAMILY(normal, NORMAL, normal_icdf, normal_block, NULL);
FG_FAMILY(lognormal, LOGNORMAL, lognormal_icdf, lognormal_block, NULL);
FG_FAMILY(uniform, UNIFORM, uniform_icdf, uniform_block, NULL);
FG_FAMILY(triangular, TRIANGULAR, triangular_icdf, triangular_block, NULL);
FG_FAMILY(pert, PERT, beta_icdf, NULL, beta_draw);
FG_FAMILY(exponential, EXPONENTIAL, exponential_icdf, NULL, NULL);
FG_FAMILY(gamma, GAMMA, gamma_icdf, NULL, gamma_draw);
FG_FAMILY(beta, BETA, beta_icdf, NULL, beta_draw);
FG_FAMILY(weibull, WEIBULL, weibull_icdf, NULL, NULL);
FG_FAMILY(student_t, STUDENT_T, student_t_icdf, NULL, student_t_draw);
