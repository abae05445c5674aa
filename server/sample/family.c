/*
 * sample/family.c -- the distribution families: table, parameter checks,
 * element-wise draws and inverse CDFs.
 *
 * Design: each family has a parser that reads its parameters into the
 * input's per-element arrays par[0..], checks every element and derives
 * what the draw needs (so the draw never re-validates), and a case in
 * fg_family_draw and fg_family_icdf. Parameter layout by family:
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
 *   poisson      mean
 *   binomial     trials, p
 *   discrete     values/weights tables (shared by all elements)
 *   empirical    data table (shared by all elements)
 *   scenario_table  rows (nvalues x size), optional weights
 * multivariate_normal lives in mvn.c.
 *
 * Draw methods (documented choice), per block of samples
 * (fg_family_draw_block): plain normals and lognormals use stream.c's
 * ziggurat (53-bit abscissa, exact), several times cheaper than an inverse
 * CDF; truncated normals, uniform, triangular, exponential and weibull use
 * their inverse CDF on one 53-bit uniform; gamma, beta/pert, student_t,
 * poisson and binomial use GSL's samplers through the Random123 adaptor;
 * discrete and weighted scenario tables use Walker's alias table
 * (gsl_ran_discrete). Copula members go through fg_family_icdf of Phi(x),
 * except untruncated normal and lognormal members, whose F^-1(Phi(x)) is
 * the affine map of x itself (fg_family_from_normal).
 *
 * Domain choices: poisson accepts mean >= 0 (0 is the point mass at 0);
 * counts must fit GSL's unsigned int, hence the caps below.
 *
 * Thread use: parsing runs in the building thread; draw and icdf only
 * read the input and may run in any number of threads at once.
 */
#include "sample/sample_internal.h"

#include "core/quantile.h"
#include "feasgate/limits.h"

#include <cjson/cJSON.h>
#include <gsl/gsl_cdf.h>

#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Largest poisson mean and binomial trials: draws are GSL unsigned ints,
 * and inverse-CDF searches stay short below this. */
#define FG_COUNT_PARAM_MAX 1e9

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
static const char *const p_poisson[] = {"mean", NULL};
static const char *const p_binomial[] = {"trials", "p", NULL};
static const char *const p_discrete[] = {"values", "weights", NULL};
static const char *const p_empirical[] = {"data", NULL};
static const char *const p_mvn[] = {"mean", "covariance", "sd", "correlation",
                                    NULL};
static const char *const p_scenario[] = {"rows", "weights", NULL};

static const fg_family_def families[] = {
    {"normal", FG_FAM_NORMAL, p_normal, 1, 1},
    {"lognormal", FG_FAM_LOGNORMAL, p_lognormal, 1, 1},
    {"uniform", FG_FAM_UNIFORM, p_uniform, 1, 1},
    {"triangular", FG_FAM_TRIANGULAR, p_triangular, 1, 1},
    {"pert", FG_FAM_PERT, p_pert, 1, 1},
    {"exponential", FG_FAM_EXPONENTIAL, p_exponential, 1, 1},
    {"gamma", FG_FAM_GAMMA, p_gamma, 1, 1},
    {"beta", FG_FAM_BETA, p_beta, 1, 1},
    {"weibull", FG_FAM_WEIBULL, p_weibull, 1, 1},
    {"student_t", FG_FAM_STUDENT_T, p_student_t, 1, 1},
    {"poisson", FG_FAM_POISSON, p_poisson, 1, 1},
    {"binomial", FG_FAM_BINOMIAL, p_binomial, 1, 1},
    {"discrete", FG_FAM_DISCRETE, p_discrete, 1, 1},
    {"empirical", FG_FAM_EMPIRICAL, p_empirical, 1, 0},
    {"multivariate_normal", FG_FAM_MVN, p_mvn, 1, 0},
    {"scenario_table", FG_FAM_SCENARIO_TABLE, p_scenario, 1, 0},
};
#define NFAMILIES ((int)(sizeof families / sizeof families[0]))

const fg_family_def *fg_family_find(const char *name) {
  for (int i = 0; i < NFAMILIES; i++)
    if (strcmp(families[i].name, name) == 0) return &families[i];
  return NULL;
}

void fg_family_names(char *buf, size_t cap) {
  size_t len = 0;
  if (cap) buf[0] = '\0';
  for (int i = 0; i < NFAMILIES && len < cap; i++)
    len += (size_t)snprintf(buf + len, cap - len, "%s%s", i ? ", " : "",
                            families[i].name);
}

/* ---- checks ----------------------------------------------------------- */

static int is_array(const fg_params *c, const char *name) {
  return cJSON_IsArray(cJSON_GetObjectItemCaseSensitive(c->dist, name));
}

/* v[e] > 0 (strict) or >= 0 for every element; one report for a scalar. */
static void need_positive(fg_params *c, const char *name, const double *v,
                          int strict) {
  for (int e = 0; e < c->size; e++) {
    if (strict ? v[e] > 0 : v[e] >= 0) continue;
    fg_family_param_error(c, FG_EINVAL, name, e,
                          "expected %s %s 0, found %.15g", name,
                          strict ? ">" : ">=", v[e]);
    if (!is_array(c, name)) break;
  }
}

static void need_less(fg_params *c, const char *lo_name, const double *lo,
                      const char *hi_name, const double *hi, int strict) {
  for (int e = 0; e < c->size; e++) {
    if (strict ? lo[e] < hi[e] : lo[e] <= hi[e]) continue;
    fg_family_param_error(c, FG_EINVAL, hi_name, e,
                          "expected %s %s %s, found %s = %.15g, %s = %.15g",
                          lo_name, strict ? "<" : "<=", hi_name, lo_name, lo[e],
                          hi_name, hi[e]);
    if (!is_array(c, lo_name) && !is_array(c, hi_name)) break;
  }
}

static void need_at_most(fg_params *c, const char *name, const double *v,
                         double max) {
  for (int e = 0; e < c->size; e++) {
    if (v[e] <= max) continue;
    fg_family_param_error(c, FG_EINVAL, name, e,
                          "expected %s <= %.15g, found %.15g", name, max, v[e]);
    if (!is_array(c, name)) break;
  }
}

static void need_integer(fg_params *c, const char *name, const double *v) {
  for (int e = 0; e < c->size; e++) {
    if (v[e] == floor(v[e])) continue;
    fg_family_param_error(c, FG_EINVAL, name, e,
                          "expected an integer %s, found %.15g", name, v[e]);
    if (!is_array(c, name)) break;
  }
}

/* lo <= v[e] <= hi for every element; the message names the range and
 * why it exists. */
static void need_range(fg_params *c, const char *name, const double *v,
                       double lo, double hi, const char *why) {
  for (int e = 0; e < c->size; e++) {
    if (v[e] >= lo && v[e] <= hi) continue;
    fg_family_param_error(c, FG_EINVAL, name, e,
                          "expected %s in [%.15g, %.15g] (%s), found %.15g",
                          name, lo, hi, why, v[e]);
    if (!is_array(c, name)) break;
  }
}

/* |loc| + scale * qmax must stay below a quarter of the largest double,
 * qmax being the standard quantile at FG_ICDF_P_MIN for element e. */
static void need_finite_scale(fg_params *c, const char *name,
                              const double *scale, const double *loc,
                              const double *qmax) {
  for (int e = 0; e < c->size; e++) {
    double room = DBL_MAX / 4 - (loc ? fabs(loc[e]) : 0);
    double bound = room / qmax[e];
    if (scale[e] <= bound) continue;
    fg_family_param_error(c, FG_EINVAL, name, e,
                          "expected %s <= %.6g so that every quantile down "
                          "to probability %g stays finite (the standard "
                          "quantile there is at most %.6g), found %.15g",
                          name, bound, FG_ICDF_P_MIN, qmax[e], scale[e]);
    if (!is_array(c, name)) break;
  }
}

#define SHAPE_WHY "the range where draws and quantiles keep their accuracy"

static int integral(double v) {
  return v == floor(v) && fabs(v) < 9007199254740992.0;
}

static int read_vec(fg_params *c, fg_input *in, int slot, const char *name,
                    int required, double dflt) {
  return fg_family_param_vec(c, name, in->par[slot], required, dflt);
}

static void set_integer(fg_input *in, int value) {
  memset(in->integer, value ? 1 : 0, (size_t)in->size);
}

/* ---- parsers ---------------------------------------------------------- */

static void parse_normal(fg_input *in, fg_params *c) {
  double **v = in->par;
  int m = read_vec(c, in, 0, "mean", 1, 0);
  int s = read_vec(c, in, 1, "sd", 1, 0);
  int lo = read_vec(c, in, 2, "lower", 0, -INFINITY);
  int hi = read_vec(c, in, 3, "upper", 0, INFINITY);
  if (s > 0) need_positive(c, "sd", v[1], 1);
  if (lo > 0 && hi > 0) need_less(c, "lower", v[2], "upper", v[3], 1);
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
      if (!is_array(c, "lower") && !is_array(c, "upper")) break;
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
    int a = read_vec(c, in, 0, "meanlog", 1, 0);
    int b = read_vec(c, in, 1, "sdlog", 1, 0);
    if (b > 0) need_positive(c, "sdlog", v[1], 1);
    (void)a;
    return;
  }
  int a = read_vec(c, in, 2, "mean", 1, 0);
  int b = read_vec(c, in, 3, "sd", 1, 0);
  if (a > 0) need_positive(c, "mean", v[2], 1);
  if (b > 0) need_positive(c, "sd", v[3], 1);
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
      if (!is_array(c, "sd") && !is_array(c, "mean")) break;
    }
  }
}

static void parse_uniform(fg_input *in, fg_params *c) {
  int a = read_vec(c, in, 0, "low", 1, 0);
  int b = read_vec(c, in, 1, "high", 1, 0);
  if (a > 0 && b > 0) need_less(c, "low", in->par[0], "high", in->par[1], 1);
}

static void parse_triangular(fg_input *in, fg_params *c) {
  double **v = in->par;
  int a = read_vec(c, in, 0, "low", 1, 0);
  int m = read_vec(c, in, 1, "mode", 1, 0);
  int b = read_vec(c, in, 2, "high", 1, 0);
  if (a <= 0 || m <= 0 || b <= 0) return;
  need_less(c, "low", v[0], "high", v[2], 1);
  need_less(c, "low", v[0], "mode", v[1], 0);
  need_less(c, "mode", v[1], "high", v[2], 0);
  if (c->st != FG_OK) return;
  for (int e = 0; e < in->size; e++)
    v[3][e] = (v[1][e] - v[0][e]) / (v[2][e] - v[0][e]);
}

/* pert: beta on [low, high] with alpha = 1 + shape (mode-low)/(high-low),
 * beta = 1 + shape (high-mode)/(high-low). */
static void parse_pert(fg_input *in, fg_params *c) {
  double **v = in->par;
  int a = read_vec(c, in, 4, "low", 1, 0);
  int m = read_vec(c, in, 5, "mode", 1, 0);
  int b = read_vec(c, in, 6, "high", 1, 0);
  int s = read_vec(c, in, 7, "shape", 0, 4.0);
  if (s > 0) {
    need_positive(c, "shape", v[7], 1);
    need_at_most(c, "shape", v[7], FG_SHAPE_PARAM_MAX);
  }
  if (a <= 0 || m <= 0 || b <= 0 || s < 0) return;
  need_less(c, "low", v[4], "high", v[6], 1);
  need_less(c, "low", v[4], "mode", v[5], 0);
  need_less(c, "mode", v[5], "high", v[6], 0);
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
  int a = read_vec(c, in, 2, "a", 1, 0);
  int b = read_vec(c, in, 3, "b", 1, 0);
  int lo = read_vec(c, in, 4, "low", 0, 0.0);
  int hi = read_vec(c, in, 5, "high", 0, 1.0);
  if (a > 0)
    need_range(c, "a", v[2], FG_SHAPE_PARAM_MIN, FG_SHAPE_PARAM_MAX, SHAPE_WHY);
  if (b > 0)
    need_range(c, "b", v[3], FG_SHAPE_PARAM_MIN, FG_SHAPE_PARAM_MAX, SHAPE_WHY);
  if (lo >= 0 && hi >= 0) need_less(c, "low", v[4], "high", v[5], 1);
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
  int a = read_vec(c, in, 0, n0, 1, 0);
  int b = read_vec(c, in, 1, n1, 1, 0);
  if (a > 0) need_positive(c, n0, in->par[0], 1);
  if (b > 0) need_positive(c, n1, in->par[1], 1);
}

static void parse_gamma(fg_input *in, fg_params *c) {
  int a = read_vec(c, in, 0, "shape", 1, 0);
  int b = read_vec(c, in, 1, "scale", 1, 0);
  if (a > 0)
    need_range(c, "shape", in->par[0], FG_SHAPE_PARAM_MIN, FG_SHAPE_PARAM_MAX,
               SHAPE_WHY);
  if (b > 0) need_positive(c, "scale", in->par[1], 1);
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
  need_finite_scale(c, "scale", in->par[1], NULL, qmax);
  free(qmax);
}

static void parse_exponential(fg_input *in, fg_params *c) {
  if (read_vec(c, in, 0, "mean", 1, 0) > 0)
    need_positive(c, "mean", in->par[0], 1);
}

static void parse_student_t(fg_input *in, fg_params *c) {
  int d = read_vec(c, in, 0, "df", 1, 0);
  read_vec(c, in, 1, "location", 0, 0.0);
  int s = read_vec(c, in, 2, "scale", 0, 1.0);
  if (d > 0)
    need_range(c, "df", in->par[0], FG_T_DF_MIN, FG_T_DF_MAX, SHAPE_WHY);
  if (s > 0) need_positive(c, "scale", in->par[2], 1);
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
  need_finite_scale(c, "scale", in->par[2], in->par[1], qmax);
  free(qmax);
}

static void parse_poisson(fg_input *in, fg_params *c) {
  if (read_vec(c, in, 0, "mean", 1, 0) > 0) {
    need_positive(c, "mean", in->par[0], 0);
    need_at_most(c, "mean", in->par[0], FG_COUNT_PARAM_MAX);
  }
  set_integer(in, 1);
}

static void parse_binomial(fg_input *in, fg_params *c) {
  int n = read_vec(c, in, 0, "trials", 1, 0);
  int q = read_vec(c, in, 1, "p", 1, 0);
  if (n > 0) {
    need_positive(c, "trials", in->par[0], 0);
    need_integer(c, "trials", in->par[0]);
    need_at_most(c, "trials", in->par[0], FG_COUNT_PARAM_MAX);
  }
  if (q > 0) {
    need_positive(c, "p", in->par[1], 0);
    need_at_most(c, "p", in->par[1], 1.0);
  }
  set_integer(in, 1);
}

/* Weights: same count as `count`, each >= 0, not all zero; normalised
 * copy kept in in->weights and an alias table built. */
static int parse_weights(fg_input *in, fg_params *c, int count,
                         const char *what) {
  double *w = NULL;
  int nw = 0;
  int got = fg_family_param_list(c, "weights", 0, &w, &nw);
  if (got <= 0) return got;
  char ptr[FG_POINTER_MAX];
  fg_family_param_pointer(c, "weights", -1, ptr, sizeof ptr);
  if (nw != count) {
    fg_problem_add(c->p, FG_EINVAL, ptr, 0,
                   "expected an array of %d weights (one per %s), found %d",
                   count, what, nw);
    c->st = c->st ? c->st : FG_EINVAL;
    free(w);
    return -1;
  }
  double total = 0;
  for (int k = 0; k < nw; k++) {
    if (!(w[k] >= 0)) {
      fg_family_param_error(c, FG_EINVAL, "weights", k,
                            "expected a weight >= 0, found %.15g", w[k]);
      free(w);
      return -1;
    }
    total += w[k];
  }
  if (!(total > 0) || !isfinite(total)) {
    fg_problem_add(c->p, FG_EINVAL, ptr, 0,
                   total > 0 ? "expected weights with a finite sum, found "
                               "a sum that overflows"
                             : "expected at least one positive weight, "
                               "found all zero");
    c->st = c->st ? c->st : FG_EINVAL;
    free(w);
    return -1;
  }
  for (int k = 0; k < nw; k++)
    w[k] /= total;
  in->weights = w;
  in->alias = gsl_ran_discrete_preproc((size_t)nw, w);
  if (!in->alias) {
    fg_problem_set(c->p, FG_ENOMEM, "out of memory building a table");
    c->st = c->st ? c->st : FG_ENOMEM;
    return -1;
  }
  return 1;
}

typedef struct vw_pair {
  double v, w;
} vw_pair;

static int cmp_pair(const void *a, const void *b) {
  double x = ((const vw_pair *)a)->v, y = ((const vw_pair *)b)->v;
  return (x > y) - (x < y);
}

static void parse_discrete(fg_input *in, fg_params *c) {
  if (fg_family_param_list(c, "values", 1, &in->values, &in->nvalues) < 0)
    return;
  if (!fg_family_param_present(c, "weights")) {
    fg_problem_add(c->p, FG_EINVAL, c->ptr, 0,
                   "family 'discrete' needs parameter 'weights' (an array "
                   "of numbers), found none");
    c->st = c->st ? c->st : FG_EINVAL;
    return;
  }
  if (parse_weights(in, c, in->nvalues, "value") < 0) return;
  int n = in->nvalues, allint = 1;
  vw_pair *pairs = malloc((size_t)n * sizeof *pairs);
  in->sorted = malloc((size_t)n * sizeof(double));
  in->cdf_lo = malloc((size_t)n * sizeof(double));
  in->cdf_hi = malloc((size_t)n * sizeof(double));
  if (!pairs || !in->sorted || !in->cdf_lo || !in->cdf_hi) {
    free(pairs);
    fg_problem_set(c->p, FG_ENOMEM, "out of memory building a table");
    c->st = c->st ? c->st : FG_ENOMEM;
    return;
  }
  for (int k = 0; k < n; k++) {
    pairs[k].v = in->values[k];
    pairs[k].w = in->weights[k];
    allint &= integral(in->values[k]);
  }
  qsort(pairs, (size_t)n, sizeof *pairs, cmp_pair);
  double acc = 0;
  for (int k = 0; k < n; k++) {
    in->sorted[k] = pairs[k].v;
    acc += pairs[k].w;
    in->cdf_lo[k] = acc;
  }
  acc = 0;
  for (int k = n - 1; k >= 0; k--) {
    in->cdf_hi[k] = acc; /* P(X > v_k) */
    acc += pairs[k].w;
  }
  in->cdf_lo[n - 1] = 1.0;
  free(pairs);
  set_integer(in, allint);
}

static void parse_empirical(fg_input *in, fg_params *c) {
  if (fg_family_param_list(c, "data", 1, &in->values, &in->nvalues) < 0) return;
  int allint = 1;
  for (int k = 0; k < in->nvalues; k++)
    allint &= integral(in->values[k]);
  set_integer(in, allint);
}

static void parse_scenario_table(fg_input *in, fg_params *c) {
  const cJSON *rows = cJSON_GetObjectItemCaseSensitive(c->dist, "rows");
  char ptr[FG_POINTER_MAX];
  fg_pointer_join(ptr, sizeof ptr, c->ptr, "rows");
  if (!rows) {
    fg_problem_add(c->p, FG_EINVAL, c->ptr, 0,
                   "family 'scenario_table' needs parameter 'rows' (an "
                   "array of arrays of %d numbers), found none",
                   in->size);
    c->st = c->st ? c->st : FG_EINVAL;
    return;
  }
  int nrows = cJSON_IsArray(rows) ? cJSON_GetArraySize(rows) : 0;
  if (nrows < 1) {
    fg_problem_add(
        c->p, FG_EINVAL, ptr, 0, "expected a non-empty array of rows, found %s",
        cJSON_IsArray(rows) ? "an empty array" : fg_family_json_type(rows));
    c->st = c->st ? c->st : FG_EINVAL;
    return;
  }
  if ((double)nrows * in->size > FG_TABLE_CELLS_MAX) {
    fg_problem_limit(c->p, ptr, FG_LIMIT_TABLE_CELLS, FG_TABLE_CELLS_MAX,
                     "expected at most %d cells, found %d rows of %d",
                     FG_TABLE_CELLS_MAX, nrows, in->size);
    c->st = c->st ? c->st : FG_ELIMIT;
    return;
  }
  in->values = malloc((size_t)nrows * (size_t)in->size * sizeof(double));
  if (!in->values) {
    fg_problem_set(c->p, FG_ENOMEM, "out of memory reading %s", ptr);
    c->st = c->st ? c->st : FG_ENOMEM;
    return;
  }
  in->nvalues = nrows;
  memset(in->integer, 1, (size_t)in->size);
  int r = 0;
  for (const cJSON *row = rows->child; row; row = row->next, r++) {
    char rptr[FG_POINTER_MAX];
    double *dst = in->values + (size_t)r * (size_t)in->size;
    fg_pointer_index(rptr, sizeof rptr, ptr, r);
    if (!in->is_vector && cJSON_IsNumber(row)) {
      if (!isfinite(row->valuedouble)) goto not_finite;
      dst[0] = row->valuedouble;
      in->integer[0] &= (unsigned char)integral(dst[0]);
      continue;
    }
    if (!cJSON_IsArray(row) || cJSON_GetArraySize(row) != in->size) {
      if (cJSON_IsArray(row))
        fg_problem_add(c->p, FG_EINVAL, rptr, 0,
                       "expected a row of %d numbers (the input's size), "
                       "found an array of %d",
                       in->size, cJSON_GetArraySize(row));
      else
        fg_problem_add(c->p, FG_EINVAL, rptr, 0,
                       "expected a row of %d numbers (the input's size), "
                       "found %s",
                       in->size, fg_family_json_type(row));
      c->st = c->st ? c->st : FG_EINVAL;
      return;
    }
    int e = 0;
    for (const cJSON *x = row->child; x; x = x->next, e++) {
      if (!cJSON_IsNumber(x) || !isfinite(x->valuedouble)) {
        char eptr[FG_POINTER_MAX];
        fg_pointer_index(eptr, sizeof eptr, rptr, e);
        fg_problem_add(
            c->p, FG_EINVAL, eptr, 0, "expected a finite number, found %s",
            cJSON_IsNumber(x) ? "one out of range" : fg_family_json_type(x));
        c->st = c->st ? c->st : FG_EINVAL;
        return;
      }
      dst[e] = x->valuedouble;
      in->integer[e] &= (unsigned char)integral(dst[e]);
    }
    continue;
  not_finite:
    fg_problem_add(c->p, FG_EINVAL, rptr, 0,
                   "expected a finite number, found one out of range");
    c->st = c->st ? c->st : FG_EINVAL;
    return;
  }
  parse_weights(in, c, nrows, "row");
}

fg_status fg_family_parse(fg_input *in, const fg_family_def *def,
                          const cJSON *dist, const char *ptr, fg_problem *p) {
  fg_params c = {.dist = dist,
                 .ptr = ptr,
                 .size = in->size,
                 .family = def->name,
                 .p = p,
                 .st = FG_OK};
  in->kind = def->kind;
  in->family = def->name;
  in->parbuf =
      calloc((size_t)FG_FAMILY_NPAR * (size_t)in->size, sizeof(double));
  in->integer = calloc((size_t)in->size, 1);
  if (!in->parbuf || !in->integer)
    return fg_problem_set(p, FG_ENOMEM, "out of memory reading %s", ptr);
  for (int k = 0; k < FG_FAMILY_NPAR; k++)
    in->par[k] = in->parbuf + (size_t)k * (size_t)in->size;
  fg_family_param_unknown(&c, def->params);
  switch (def->kind) {
  case FG_FAM_NORMAL: parse_normal(in, &c); break;
  case FG_FAM_LOGNORMAL: parse_lognormal(in, &c); break;
  case FG_FAM_UNIFORM: parse_uniform(in, &c); break;
  case FG_FAM_TRIANGULAR: parse_triangular(in, &c); break;
  case FG_FAM_PERT: parse_pert(in, &c); break;
  case FG_FAM_EXPONENTIAL: parse_exponential(in, &c); break;
  case FG_FAM_GAMMA: parse_gamma(in, &c); break;
  case FG_FAM_BETA: parse_beta(in, &c); break;
  case FG_FAM_WEIBULL: parse_two_positive(in, &c, "shape", "scale"); break;
  case FG_FAM_STUDENT_T: parse_student_t(in, &c); break;
  case FG_FAM_POISSON: parse_poisson(in, &c); break;
  case FG_FAM_BINOMIAL: parse_binomial(in, &c); break;
  case FG_FAM_DISCRETE: parse_discrete(in, &c); break;
  case FG_FAM_EMPIRICAL: parse_empirical(in, &c); break;
  case FG_FAM_MVN: fg_family_mvn_parse(in, &c); break;
  case FG_FAM_SCENARIO_TABLE: parse_scenario_table(in, &c); break;
  }
  return c.st;
}

void fg_family_free(fg_input *in) {
  free(in->name);
  free(in->parbuf);
  free(in->values);
  free(in->weights);
  if (in->alias) gsl_ran_discrete_free(in->alias);
  free(in->sorted);
  free(in->cdf_lo);
  free(in->cdf_hi);
  free(in->chol);
  free(in->integer);
  memset(in, 0, sizeof *in);
}

/* ---- inverse CDFs ----------------------------------------------------- */

/* Standard normal quantile from whichever tail is exact. */
static double std_quantile(double u, double uc) {
  return u < 0.5 ? gsl_cdf_ugaussian_Pinv(u) : gsl_cdf_ugaussian_Qinv(uc);
}

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

/* Integer laws: the smallest k in [0, kmax] with F(k) >= u, decided from
 * the upper tail Q(k) = 1 - F(k) <= uc when u >= 1/2 so both tails keep
 * their precision. The CDFs are core/quantile.c's incomplete gamma and beta
 * (bounded work at any mean or trials): poisson F(k) = Q(k+1, mean),
 * binomial F(k) = I_{1-p}(n-k, k+1). The search starts at the
 * Cornish-Fisher point, gallops (steps 1, 2, 4, ...) until the answer is
 * bracketed, then bisects, so it evaluates the CDF at most about
 * 2 log2(kmax) + 2 times (66 for kmax = 2e9) whatever the start. */
static int count_ok(const fg_input *in, int e, double k, double u, double uc) {
  double lo, up; /* P(X <= k), P(X > k) */
  if (in->kind == FG_FAM_POISSON) {
    fg_q_igamma(k + 1, in->par[0][e], &up, &lo, NULL);
  } else {
    double n = in->par[0][e], p = in->par[1][e];
    if (k >= n) return 1;
    fg_q_ibeta(1 - p, p, n - k, k + 1, &lo, &up, NULL);
  }
  return u < 0.5 ? lo >= u : up <= uc;
}

static double count_icdf(const fg_input *in, int e, double mean, double sd,
                         double skew, double kmax, double u, double uc) {
  if (!(sd > 0)) return floor(mean); /* point mass */
  double z = std_quantile(u, uc);
  double start = floor(mean + sd * (z + skew * (z * z - 1) / 6));
  if (!(start >= 0)) start = 0;
  if (start > kmax) start = kmax;
  /* invariant: ok(hi); lo < hi and not ok(lo) (lo = -1 stands for "none") */
  double lo, hi, step = 1;
  if (count_ok(in, e, start, u, uc)) {
    hi = start;
    lo = hi - step;
    while (lo >= 0 && count_ok(in, e, lo, u, uc)) {
      hi = lo;
      step *= 2;
      lo = hi - step;
    }
    if (lo < 0) lo = -1;
  } else {
    lo = start;
    hi = lo + step;
    while (hi < kmax && !count_ok(in, e, hi, u, uc)) {
      lo = hi;
      step *= 2;
      hi = lo + step;
    }
    if (hi > kmax) hi = kmax;
  }
  while (hi - lo > 1) {
    double mid = floor(lo + (hi - lo) / 2);
    if (count_ok(in, e, mid, u, uc)) hi = mid;
    else lo = mid;
  }
  return hi;
}

int fg_family_cdf_index(const fg_input *in, double u, double uc) {
  int lo = 0, hi = in->nvalues - 1;
  while (lo < hi) {
    int mid = lo + (hi - lo) / 2;
    int enough = u < 0.5 ? in->cdf_lo[mid] >= u : in->cdf_hi[mid] <= uc;
    if (enough)
      hi = mid;
    else
      lo = mid + 1;
  }
  return lo;
}

/* Discrete table: the value at fg_family_cdf_index. */
static double discrete_icdf(const fg_input *in, double u, double uc) {
  return in->sorted[fg_family_cdf_index(in, u, uc)];
}

double fg_family_icdf(const fg_input *in, int e, double u, double uc) {
  double *const *v = in->par;
  /* FG_ICDF_P_MIN: only a copula normal beyond -37 sd gets here */
  if (!(u >= FG_ICDF_P_MIN)) u = FG_ICDF_P_MIN, uc = 1 - u;
  if (!(uc >= FG_ICDF_P_MIN)) uc = FG_ICDF_P_MIN, u = 1 - uc;
  switch (in->kind) {
  case FG_FAM_NORMAL:
    if (in->truncated) return v[0][e] + v[1][e] * trunc_std(in, e, u, uc);
    return v[0][e] + v[1][e] * std_quantile(u, uc);
  case FG_FAM_LOGNORMAL: return exp(v[0][e] + v[1][e] * std_quantile(u, uc));
  case FG_FAM_UNIFORM:
    return u < 0.5 ? v[0][e] + (v[1][e] - v[0][e]) * u
                   : v[1][e] - (v[1][e] - v[0][e]) * uc;
  case FG_FAM_TRIANGULAR: {
    double a = v[0][e], m = v[1][e], b = v[2][e];
    if (u < v[3][e]) return a + sqrt(u * (b - a) * (m - a));
    return b - sqrt(uc * (b - a) * (b - m));
  }
  case FG_FAM_PERT:
  case FG_FAM_BETA: {
    double x = fg_q_beta_inv(u, uc, v[2][e], v[3][e], NULL, NULL);
    return v[0][e] + v[1][e] * x;
  }
  case FG_FAM_EXPONENTIAL: return v[0][e] * (u < 0.5 ? -log1p(-u) : -log(uc));
  case FG_FAM_GAMMA: return v[1][e] * fg_q_gamma_inv(u, uc, v[0][e], NULL);
  case FG_FAM_WEIBULL:
    return v[1][e] * pow(u < 0.5 ? -log1p(-u) : -log(uc), 1.0 / v[0][e]);
  case FG_FAM_STUDENT_T:
    return v[1][e] + v[2][e] * fg_q_t_inv(u, uc, v[0][e], NULL);
  case FG_FAM_POISSON: {
    double mu = v[0][e];
    return count_icdf(in, e, mu, sqrt(mu), mu > 0 ? 1 / sqrt(mu) : 0,
                      FG_COUNT_PARAM_MAX * 2, u, uc);
  }
  case FG_FAM_BINOMIAL: {
    double n = v[0][e], q = v[1][e], sd = sqrt(n * q * (1 - q));
    return count_icdf(in, e, n * q, sd, sd > 0 ? (1 - 2 * q) / sd : 0, n, u,
                      uc);
  }
  case FG_FAM_DISCRETE: return discrete_icdf(in, u, uc);
  case FG_FAM_EMPIRICAL:
  case FG_FAM_MVN:
  case FG_FAM_SCENARIO_TABLE: break;
  }
  return NAN; /* not a copula member: refused at build */
}

/* ---- independent draws ------------------------------------------------ */

/* One draw of element e through GSL's samplers on the (sample, slot)
 * sub-stream r was reset to: the families without a per-block path. */
static double gsl_draw(const fg_input *in, int e, gsl_rng *r) {
  double *const *v = in->par;
  switch (in->kind) {
  case FG_FAM_PERT:
  case FG_FAM_BETA:
    return v[0][e] + v[1][e] * gsl_ran_beta(r, v[2][e], v[3][e]);
  case FG_FAM_GAMMA: return gsl_ran_gamma(r, v[0][e], v[1][e]);
  case FG_FAM_STUDENT_T: return v[1][e] + v[2][e] * gsl_ran_tdist(r, v[0][e]);
  case FG_FAM_POISSON: return (double)gsl_ran_poisson(r, v[0][e]);
  case FG_FAM_BINOMIAL:
    return (double)gsl_ran_binomial(r, v[1][e], (unsigned int)v[0][e]);
  case FG_FAM_DISCRETE: return in->values[gsl_ran_discrete(r, in->alias)];
  case FG_FAM_EMPIRICAL:
    return in->values[gsl_rng_uniform_int(r, (unsigned long)in->nvalues)];
  default: return NAN; /* per-block families and joint blocks: not here */
  }
}

/* The per-block paths: plain normals and lognormals from the block's
 * ziggurat normals, then one vectorisable affine (and exp) pass; the
 * inverse-CDF families from the block's uniforms, one switch per block
 * and a tight loop per family. Everything else goes through GSL per
 * sample (a reset and GSL's own function-pointer calls per word): those
 * samplers are not on the common path, and rewriting them would change
 * their streams for little gain. */
void fg_family_draw_block(const fg_input *in, int e, uint32_t slot,
                          const fg_draw_ctx *dc, double *out) {
  double *const *v = in->par;
  const int n = dc->n;
  double *restrict u = dc->u, *restrict uc = dc->uc;
  switch (in->kind) {
  case FG_FAM_NORMAL:
    if (in->truncated) break;
    fg_stream_normals(dc->key, dc->first, n, slot, dc->words, out);
    {
      double m = v[0][e], sd = v[1][e];
      for (int t = 0; t < n; t++)
        out[t] = m + sd * out[t];
    }
    return;
  case FG_FAM_LOGNORMAL:
    /* exp per lane is the largest cost of a lognormal draw. fg_exp_lanes
     * gives libm's values bit for bit: glibc's own algorithm in 8 or 4
     * lanes where it is checked to agree, else libm per lane
     * (libm_exp.c). An exp of a different design (1 ulp from glibc's in
     * 7% of lanes) was tried earlier and not adopted: it would have
     * changed lognormal values. */
    fg_stream_normals(dc->key, dc->first, n, slot, dc->words, out);
    fg_exp_lanes_affine(out, n, v[0][e], v[1][e]);
    return;
  case FG_FAM_UNIFORM:
  case FG_FAM_TRIANGULAR:
  case FG_FAM_EXPONENTIAL:
  case FG_FAM_WEIBULL: break;
  default:
    for (int t = 0; t < n; t++) {
      fg_stream_reset(dc->rng, dc->key, dc->first + (uint64_t)t, slot);
      out[t] = gsl_draw(in, e, dc->rng);
    }
    return;
  }
  fg_stream_u01s(dc->key, dc->first, n, slot, dc->words, u, uc);
  switch (in->kind) {
  case FG_FAM_UNIFORM: {
    double lo = v[0][e], hi = v[1][e], w = hi - lo;
    for (int t = 0; t < n; t++)
      out[t] = u[t] < 0.5 ? lo + w * u[t] : hi - w * uc[t];
    return;
  }
  case FG_FAM_TRIANGULAR: {
    /* the products in fg_family_icdf's order, so values stay identical */
    double a = v[0][e], m = v[1][e], b = v[2][e], fm = v[3][e];
    for (int t = 0; t < n; t++)
      out[t] = u[t] < fm ? a + sqrt(u[t] * (b - a) * (m - a))
                         : b - sqrt(uc[t] * (b - a) * (b - m));
    return;
  }
  default:
    for (int t = 0; t < n; t++)
      out[t] = fg_family_icdf(in, e, u[t], uc[t]);
    return;
  }
}

void fg_family_from_normal(const fg_input *in, int e, const fg_draw_ctx *dc,
                           double *col) {
  double *const *v = in->par;
  const int n = dc->n;
  /* Normal and lognormal members: F^-1(Phi(x)) is x itself, so the
   * affine map (and exp) gives the same law without two special-function
   * calls and their rounding. */
  if (in->kind == FG_FAM_NORMAL && !in->truncated) {
    double m = v[0][e], sd = v[1][e];
    for (int t = 0; t < n; t++)
      col[t] = m + sd * col[t];
    return;
  }
  if (in->kind == FG_FAM_LOGNORMAL) {
    fg_exp_lanes_affine(col, n, v[0][e], v[1][e]);
    return;
  }
  for (int t = 0; t < n; t++) {
    double x = col[t], u, uc;
    if (x < 0) {
      u = gsl_cdf_ugaussian_P(x);
      uc = 1 - u;
    } else {
      uc = gsl_cdf_ugaussian_Q(x);
      u = 1 - uc;
    }
    col[t] = fg_family_icdf(in, e, u, uc);
  }
}
