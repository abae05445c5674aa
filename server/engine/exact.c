/*
 * engine/exact.c -- the exact path: when every row of a check is affine in
 * uncertain inputs that are jointly normal, the joint probability
 * P(all rows hold) is a multivariate normal probability of a polyhedron,
 * computed by Genz's method (estimate/mvnprob.c) beside the simulation.
 *
 * Reduction: the rows at the check's decisions as half-rows c + g . u <= 0
 * (expr/affine.c). Every input with a non-zero coefficient must be jointly
 * normal (sample/: untruncated `normal` or `multivariate_normal`, outside
 * any copula), u_j = mean_j + sum_k L_jk e_k with e standard normal over
 * the union of the inputs' blocks. Then half-row h is
 *   (g L) e <= -(c + g . mean),
 * and P(H e <= b) is what fg_mvn_probability computes -- singular row
 * covariances (more rows than inputs, dependent rows, the two halves of a
 * range row) included. Per row, the same with that row's half-rows alone;
 * one half-row is a single normal CDF (closed form).
 *
 * Where it runs: fg_check_start, on the calling thread, after the setup
 * stream and before the check is queued -- no lock is held, the check is
 * not yet visible to anyone. Its work is bounded by FG_EXACT_WORK_MAX and
 * the size limits FG_EXACT_ROWS_MAX, FG_EXACT_DIMS_MAX,
 * FG_EXACT_FORM_CELLS_MAX.
 *
 * Thread use: pure function of the (immutable) model and caller memory.
 */
#include "engine/engine_internal.h"
#include "estimate/estimate.h"
#include "expr/expr.h"
#include "sample/sample.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

const char *fg_exact_mode_name(fg_exact_mode m) {
  switch (m) {
  case FG_EXACT_OFF: return "off";
  case FG_EXACT_ONLY: return "only";
  default: return "auto";
  }
}

fg_status fg_exact_compute(const fg_model *m, const double *setup_regs,
                           uint64_t seed, fg_exact_result *out) {
  memset(out, 0, sizeof *out);
  fg_program_info info;
  fg_program_get_info(m->program, &info);
  int nu = info.nuncertain, w = nu + 1, cap = 2 * info.nrows;
  fg_status st = FG_OK;
  if (cap > FG_EXACT_ROWS_MAX || nu > FG_EXACT_DIMS_MAX) {
    snprintf(out->why, sizeof out->why, "beyond the limit %s",
             cap > FG_EXACT_ROWS_MAX ? "FG_EXACT_ROWS_MAX"
                                     : "FG_EXACT_DIMS_MAX");
    return FG_OK;
  }
  double *form = malloc((size_t)cap * (size_t)w * sizeof(double) + 8);
  int *row_of = malloc((size_t)cap * sizeof(int) + 8);
  double *mean = calloc((size_t)w, sizeof(double));
  double *L = calloc((size_t)nu * (size_t)w + 1, sizeof(double)); /* u_j row */
  double *H = malloc((size_t)cap * (size_t)w * sizeof(double) + 8);
  double *b = malloc((size_t)cap * sizeof(double) + 8);
  out->row_probability = calloc((size_t)info.nrows + 1, sizeof(double));
  out->row_error = calloc((size_t)info.nrows + 1, sizeof(double));
  if (!form || !row_of || !mean || !L || !H || !b || !out->row_probability ||
      !out->row_error) {
    st = FG_ENOMEM;
    goto done;
  }
  int bad = -1;
  int nh = fg_program_affine_halfrows(m->program, setup_regs, form, row_of,
                                      cap, &bad);
  if (nh == -3) { st = FG_ENOMEM; goto done; }
  if (nh == -2) {
    snprintf(out->why, sizeof out->why, "beyond the limit %s",
             "FG_EXACT_FORM_CELLS_MAX");
    goto done;
  }
  if (nh < 0) {
    out->bad_row = bad;
    snprintf(out->why, sizeof out->why,
             "row %s is not affine in the uncertain inputs at this decision",
             info.rows[bad].name);
    goto done;
  }
  /* the inputs' factor; e index = dimension index (blocks start at their
   * group's first dimension) */
  for (int h = 0; h < nh; h++)
    for (int j = 0; j < nu; j++) {
      if (form[(size_t)h * w + 1 + j] == 0) continue;
      double mu;
      int group, gsize;
      const double *lrow;
      if (!fg_sampler_gaussian(m->sampler, j, &mu, &group, &gsize, &lrow)) {
        out->bad_row = row_of[h];
        snprintf(out->why, sizeof out->why,
                 "row %s depends on %s, which is not jointly normal",
                 info.rows[row_of[h]].name, fg_sampler_column(m->sampler, j));
        goto done;
      }
    }
  for (int j = 0; j < nu; j++) {
    double mu;
    int group, gsize;
    const double *lrow;
    if (!fg_sampler_gaussian(m->sampler, j, &mu, &group, &gsize, &lrow))
      continue;
    mean[j] = mu;
    for (int k = 0; k <= j - group && k < gsize; k++)
      L[(size_t)j * nu + (size_t)(group + k)] = lrow[k];
  }
  for (int h = 0; h < nh; h++) {
    const double *f = form + (size_t)h * w;
    double rhs = -f[0];
    for (int j = 0; j < nu; j++) rhs -= f[1 + j] * mean[j];
    b[h] = rhs;
    for (int k = 0; k < nu; k++) {
      double s = 0;
      for (int j = 0; j < nu; j++)
        if (f[1 + j] != 0) s += f[1 + j] * L[(size_t)j * nu + k];
      H[(size_t)h * nu + k] = s;
    }
  }
  fg_mvn_result r;
  st = fg_mvn_probability(H, b, nh, nu, FG_EXACT_TARGET_ERROR, seed, &r);
  if (st != FG_OK) goto done;
  out->qualifies = true;
  out->probability = r.probability;
  out->error = r.error;
  out->rank = r.rank;
  out->points = r.points;
  out->rounds = r.rounds;
  out->converged = r.converged;
  out->method = r.method;
  /* per row: its own half-rows (one or two) */
  for (int h = 0; h < nh;) {
    int k = row_of[h], e = h;
    while (e < nh && row_of[e] == k) e++;
    fg_mvn_result rr;
    st = fg_mvn_probability(H + (size_t)h * nu, b + h, e - h, nu,
                            FG_EXACT_TARGET_ERROR, seed + (uint64_t)k + 1, &rr);
    if (st != FG_OK) goto done;
    out->row_probability[k] = 1.0 - rr.probability; /* violation */
    out->row_error[k] = rr.error;
    h = e;
  }
done:
  free(form), free(row_of), free(mean), free(L), free(H), free(b);
  return st;
}

void fg_exact_result_free(fg_exact_result *r) {
  free(r->row_probability);
  free(r->row_error);
  r->row_probability = r->row_error = NULL;
}
