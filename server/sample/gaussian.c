/*
 * sample/gaussian.c -- which sampler dimensions are coordinates of one
 * jointly normal vector, and their factor rows (for the exact path,
 * engine/exact.c).
 *
 * Design: every sampler dimension k has its own standard normal e_k (the
 * one the draw code takes from the slot of dimension k). A dimension j is
 * jointly normal when x_j = mean_j + sum_k row_k e_k for a fixed row:
 *   - an untruncated `normal` element: row = sd at k = j;
 *   - an element of a `multivariate_normal` input: its row of the input's
 *     lower Cholesky factor over the input's own dimensions;
 *   - a Gaussian copula member whose margin is an untruncated `normal`:
 *     the copula draws z = L e over its members' dimensions (copula.c) and
 *     maps z_i through F^-1(Phi(z_i)) = mean + sd z_i for a normal margin,
 *     so row = sd times row i of L (a full matrix's factor, or the
 *     {"equal": r} and {"ar1": r} recursions written out). Such members
 *     are jointly normal among themselves with correlation C restricted to
 *     them, whatever the other members' margins (those have their own
 *     e_k, used only through L).
 * Different inputs and copulas use disjoint e_k, so they are independent,
 * as the sampler draws them.
 *
 * Thread use: reads the built (immutable) sampler; any thread.
 */
#include "sample/sample_internal.h"

#include <math.h>
#include <string.h>

/* Row i of a copula's factor into row[dims[k]] (k <= i), times sd. */
static void copula_row(const fg_copula *cop, int i, double sd, double *row) {
  switch (cop->form) {
  case FG_CORR_FULL:
    for (int k = 0; k <= i; k++)
      row[cop->dims[k]] = sd * cop->chol[(size_t)i * (size_t)cop->d + (size_t)k];
    break;
  case FG_CORR_EQUAL:
    /* x_i = sum_{k<i} c_k z_k + dd_i z_i (copula.c) */
    for (int k = 0; k < i; k++) row[cop->dims[k]] = sd * cop->c[k];
    row[cop->dims[i]] = sd * cop->dd[i];
    break;
  case FG_CORR_AR1: {
    /* x_0 = z_0, x_i = r x_(i-1) + rc z_i: coefficient of z_k is
     * r^(i-k) times (1 for k = 0, rc otherwise) */
    double p = 1;
    for (int k = i; k >= 0; k--) {
      row[cop->dims[k]] = sd * p * (k == 0 ? 1.0 : cop->rc);
      p *= cop->r;
    }
    break;
  }
  }
}

int fg_sampler_gaussian_row(const fg_sampler *s, int j, double *mean,
                            double *row, int *input, const char **why) {
  int ninputs, ncop;
  const fg_input *inputs = fg_sampler_inputs(s, &ninputs);
  const fg_copula *cops = fg_sampler_copulas(s, &ncop);
  *input = -1;
  *why = "not an uncertain dimension";
  memset(row, 0, (size_t)fg_sampler_dims(s) * sizeof *row);
  for (int k = 0; k < ninputs; k++) {
    const fg_input *in = &inputs[k];
    if (j < in->base || j >= in->base + in->size) continue;
    int e = j - in->base;
    *input = k;
    if (in->kind == FG_FAM_NORMAL && in->truncated) {
      *why = "a truncated normal is not normal";
      return 0;
    }
    if (in->kind == FG_FAM_MVN) {
      *mean = in->par[0][e];
      for (int t = 0; t <= e; t++)
        row[in->base + t] = in->chol[(size_t)e * (size_t)in->size + (size_t)t];
      return 1;
    }
    if (in->kind != FG_FAM_NORMAL) {
      *why = "only normal (untruncated) and multivariate_normal inputs, and "
             "Gaussian copula members with normal margins, are jointly normal";
      return 0;
    }
    double mu = in->par[0][e], sd = in->par[1][e];
    *mean = mu;
    if (in->copula < 0 || in->copula >= ncop) {
      row[j] = sd;
      return 1;
    }
    const fg_copula *cop = &cops[in->copula];
    for (int i = 0; i < cop->d; i++)
      if (cop->dims[i] == j) {
        copula_row(cop, i, sd, row);
        return 1;
      }
    *why = "internal: copula member not found";
    return 0;
  }
  return 0;
}
