/*
 * sample/family.c -- the distribution families: one table, and the
 * dispatch from an input to its family's functions.
 *
 * Design: a family is one entry of `families` (its name, kind, parameter
 * names and functions) plus its own functions in family_laws.c
 * (continuous laws), family_tables.c (counts and tables) or mvn.c
 * (multivariate_normal). An entry's functions:
 *   parse   reads the parameters into the input's per-element arrays
 *           par[0..], checks every element (family_check.c) and derives
 *           what the draw needs, so the draw never re-validates;
 *   icdf    F^-1(u) from whichever tail is exact (uc = 1 - u); NULL for
 *           a family that cannot be a Gaussian copula member;
 *   block   its own path for a block of samples (ziggurat normals, tight
 *           inverse loops), or NULL; it may decline (a truncated normal);
 *   draw    one sample through GSL's sampler on its own sub-stream, for
 *           the families without a block path.
 * A block is drawn by `block`, else per sample by `draw`, else as the
 * inverse CDF of the block's 53-bit uniforms. Adding a family: its
 * functions, its entry below, its kind in sample_internal.h, and the
 * model reference (schemas/model-language.md).
 *
 * Draw methods (documented choice): plain normals and lognormals use
 * stream.c's ziggurat (53-bit abscissa, exact), several times cheaper
 * than an inverse CDF; truncated normals, uniform, triangular,
 * exponential and weibull use their inverse CDF on one 53-bit uniform;
 * gamma, beta/pert, student_t, poisson and binomial use GSL's samplers
 * through the Random123 adaptor; discrete and weighted scenario tables
 * use Walker's alias table (gsl_ran_discrete). Copula members go through
 * fg_family_icdf of Phi(x), except untruncated normal and lognormal
 * members, whose F^-1(Phi(x)) is the affine map of x itself
 * (fg_family_from_normal).
 *
 * Thread use: parsing runs in the building thread; draw and icdf only
 * read the input and may run in any number of threads at once.
 */
#include "sample/sample_internal.h"

#include "feasgate/limits.h"

#include <cjson/cJSON.h>
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_randist.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* multivariate_normal: its parser is mvn.c's; it is drawn as a joint
 * block (sampler.c), never element-wise. */
static void parse_multivariate_normal(fg_input *in, fg_params *c) {
  fg_family_mvn_parse(in, c);
}
static const char *const p_multivariate_normal[] = {"mean", "covariance", "sd", "correlation",
                                    NULL};
FG_FAMILY(multivariate_normal, MVN, NULL, NULL, NULL);

/* Every family, indexed by its kind (in the order of fg_family_kind). */
static const fg_family_def *const families[] = {
    [FG_FAM_NORMAL] = &fg_family_normal,
    [FG_FAM_LOGNORMAL] = &fg_family_lognormal,
    [FG_FAM_UNIFORM] = &fg_family_uniform,
    [FG_FAM_TRIANGULAR] = &fg_family_triangular,
    [FG_FAM_PERT] = &fg_family_pert,
    [FG_FAM_EXPONENTIAL] = &fg_family_exponential,
    [FG_FAM_GAMMA] = &fg_family_gamma,
    [FG_FAM_BETA] = &fg_family_beta,
    [FG_FAM_WEIBULL] = &fg_family_weibull,
    [FG_FAM_STUDENT_T] = &fg_family_student_t,
    [FG_FAM_POISSON] = &fg_family_poisson,
    [FG_FAM_BINOMIAL] = &fg_family_binomial,
    [FG_FAM_DISCRETE] = &fg_family_discrete,
    [FG_FAM_EMPIRICAL] = &fg_family_empirical,
    [FG_FAM_MVN] = &fg_family_multivariate_normal,
    [FG_FAM_SCENARIO_TABLE] = &fg_family_scenario_table,
};
#define NFAMILIES ((int)(sizeof families / sizeof families[0]))

const fg_family_def *fg_family_find(const char *name) {
  for (int i = 0; i < NFAMILIES; i++)
    if (strcmp(families[i]->name, name) == 0) return families[i];
  return NULL;
}

void fg_family_names(char *buf, size_t cap) {
  size_t len = 0;
  if (cap) buf[0] = '\0';
  for (int i = 0; i < NFAMILIES && len < cap; i++)
    len += (size_t)snprintf(buf + len, cap - len, "%s%s", i ? ", " : "",
                            families[i]->name);
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
  def->parse(in, &c);
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

/* Standard normal quantile from whichever tail is exact. */
double fg_family_std_quantile(double u, double uc) {
  return u < 0.5 ? gsl_cdf_ugaussian_Pinv(u) : gsl_cdf_ugaussian_Qinv(uc);
}

double fg_family_icdf(const fg_input *in, int e, double u, double uc) {
  /* FG_ICDF_P_MIN: only a copula normal beyond -37 sd gets here */
  if (!(u >= FG_ICDF_P_MIN)) u = FG_ICDF_P_MIN, uc = 1 - u;
  if (!(uc >= FG_ICDF_P_MIN)) uc = FG_ICDF_P_MIN, u = 1 - uc;
  const fg_family_def *d = families[in->kind];
  return d->icdf ? d->icdf(in, e, u, uc) : NAN; /* NULL: refused at build */
}

/* The per-block paths are the families' own; the GSL samplers run per
 * sample (a reset and GSL's own function-pointer calls per word): those
 * samplers are not on the common path, and rewriting them would change
 * their streams for little gain. */
void fg_family_draw_block(const fg_input *in, int e, uint32_t slot,
                          const fg_draw_ctx *dc, double *out) {
  const fg_family_def *d = families[in->kind];
  const int n = dc->n;
  if (d->block && d->block(in, e, slot, dc, out)) return;
  if (d->draw) {
    for (int t = 0; t < n; t++) {
      fg_stream_reset(dc->rng, dc->key, dc->first + (uint64_t)t, slot);
      out[t] = d->draw(in, e, dc->rng);
    }
    return;
  }
  double *restrict u = dc->u, *restrict uc = dc->uc;
  fg_stream_u01s(dc->key, dc->first, n, slot, dc->words, u, uc);
  for (int t = 0; t < n; t++)
    out[t] = fg_family_icdf(in, e, u[t], uc[t]);
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
