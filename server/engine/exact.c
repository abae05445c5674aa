/*
 * engine/exact.c -- the exact path: when every row of a check is affine in
 * uncertain inputs that are jointly normal, the joint probability
 * P(all rows hold) is a multivariate normal probability of a polyhedron,
 * computed by Genz's method (estimate/mvnprob.c), beside the simulation
 * ("exact": "auto") or instead of it ("only").
 *
 * Reduction: the rows at the check's decisions as half-rows c + g . u <= 0
 * (expr/affine.c). Every input with a non-zero coefficient must be jointly
 * normal (sample/gaussian.c: untruncated `normal`, `multivariate_normal`,
 * or a Gaussian copula member with a normal margin), u_j = mean_j +
 * sum_k L_jk e_k with e_k the independent standard normal of sampler
 * dimension k. Then half-row h is
 *   (g L) e <= -(c + g . mean),
 * and P(H e <= b) is what fg_mvn_probability_poll computes -- singular row
 * covariances (more rows than inputs, dependent rows, the two halves of a
 * range row) included. Per row, the same with that row's half-rows alone;
 * one half-row is a single normal CDF (closed form).
 *
 * Two steps, on two threads:
 *   fg_exact_prepare  on the thread that starts the check (and in
 *                     fg_request_parse for "only", so a model that does
 *                     not qualify is a 400 before anything is recorded):
 *                     the half-rows, the qualification of every input
 *                     used, the means and factor rows L. Bounded by the
 *                     size limits: FG_EXACT_FORM_WORK_MAX operations and
 *                     FG_EXACT_FORM_CELLS_MAX cells of forms, dims^2 for L
 *                     (FG_EXACT_DIMS_MAX^2 = 262,144).
 *   fg_exact_task     the check's first task on the worker pool: H = G L
 *                     (half-rows x dims^2, up to 1.3e8 multiply-adds) and
 *                     the Genz computation, looking at the check's cancel
 *                     flag and deadline every FG_EXACT_POLL_WORK work units
 *                     (one half-row of H, one pivot step, a run of lattice
 *                     points). No lock is held while it computes; its
 *                     answer is stored under the check's merge_mu unless
 *                     the check is already ending. The answer depends on
 *                     the model, the decisions and the seed only -- never
 *                     on the number of workers.
 *
 * Thread use: prepare and task write only the check they are given (or
 * caller memory); any thread.
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

void fg_exact_prep_free(fg_exact_prep *p) {
  free(p->form), free(p->row_of), free(p->mean), free(p->L);
  memset(p, 0, sizeof *p);
}

static void set_limit(fg_exact_result *out, fg_limit which, double value,
                      const char *what) {
  out->over_limit = true;
  out->limit = which;
  out->limit_value = value;
  snprintf(out->why, sizeof out->why, "%s, beyond the limit %s = %.0f", what,
           fg_limit_name(which), value);
  snprintf(out->where, sizeof out->where, "/exact");
}

/* Why row k is not affine at these decisions: the term where it stops
 * being affine (structural), or coefficients that are not finite here. */
static void not_affine(const fg_model *m, const fg_program_info *info, int k,
                       fg_exact_result *out) {
  const fg_row *row = &info->rows[k];
  const char *ptr = NULL, *op = NULL;
  int col = 0;
  out->bad_row = k;
  if (!fg_program_affine(m->program, k).in_inputs &&
      fg_program_affine_origin(m->program, k, &ptr, &col, &op) && ptr[0]) {
    snprintf(out->where, sizeof out->where, "%s", ptr);
    out->where_col = col;
    snprintf(out->why, sizeof out->why,
             "row %s is not affine in the uncertain inputs: the operation "
             "'%s' at column %d of the model's %s combines terms that "
             "depend on uncertain inputs non-linearly",
             row->name, op, col, ptr);
    return;
  }
  snprintf(out->where, sizeof out->where, "/constraints/%d/require",
           row->constraint);
  if (!fg_program_affine(m->program, k).in_inputs)
    snprintf(out->why, sizeof out->why,
             "row %s is not affine in the uncertain inputs", row->name);
  else
    snprintf(out->why, sizeof out->why,
             "row %s has coefficients that are not finite at this decision",
             row->name);
}

fg_status fg_exact_prepare(const fg_model *m, const double *setup_regs,
                           fg_exact_prep *prep, fg_exact_result *out) {
  memset(prep, 0, sizeof *prep);
  memset(out, 0, sizeof *out);
  out->bad_row = -1;
  fg_program_info info;
  fg_program_get_info(m->program, &info);
  int nu = info.nuncertain, w = nu + 1, cap = 2 * info.nrows;
  if (cap > FG_EXACT_ROWS_MAX) {
    set_limit(out, FG_LIMIT_EXACT_ROWS, FG_EXACT_ROWS_MAX,
              "the rows give more half-rows than the exact path takes");
    return FG_OK;
  }
  if (nu > FG_EXACT_DIMS_MAX) {
    set_limit(out, FG_LIMIT_EXACT_DIMS, FG_EXACT_DIMS_MAX,
              "the model has more uncertain dimensions than the exact path "
              "takes");
    return FG_OK;
  }
  if ((double)info.nblock_insns * (double)w > FG_EXACT_FORM_WORK_MAX) {
    set_limit(out, FG_LIMIT_EXACT_FORM_WORK, FG_EXACT_FORM_WORK_MAX,
              "reading the coefficients (block instructions x (inputs + 1)) "
              "would take more work than the exact path allows");
    return FG_OK;
  }
  prep->nu = nu;
  prep->form = malloc((size_t)(cap > 0 ? cap : 1) * (size_t)w * sizeof(double));
  prep->row_of = malloc((size_t)(cap > 0 ? cap : 1) * sizeof(int));
  prep->mean = calloc((size_t)w, sizeof(double));
  prep->L = calloc((size_t)nu * (size_t)nu + 1, sizeof(double));
  bool *used = calloc((size_t)w, sizeof(bool));
  fg_status st = FG_OK;
  if (!prep->form || !prep->row_of || !prep->mean || !prep->L || !used) {
    st = FG_ENOMEM;
    goto fail;
  }
  int bad = -1;
  int nh = fg_program_affine_halfrows(m->program, setup_regs, prep->form,
                                      prep->row_of, cap, &bad);
  if (nh == -3) { st = FG_ENOMEM; goto fail; }
  if (nh == -2) {
    set_limit(out, FG_LIMIT_EXACT_FORM_CELLS, FG_EXACT_FORM_CELLS_MAX,
              "the program's affine forms need more cells than the exact "
              "path keeps");
    goto fail;
  }
  if (nh < 0) {
    not_affine(m, &info, bad, out);
    goto fail;
  }
  prep->nh = nh;
  /* every input a half-row uses must be jointly normal; the first one
   * that is not is named with the first row using it */
  for (int h = 0; h < nh; h++)
    for (int j = 0; j < nu; j++)
      if (prep->form[(size_t)h * w + 1 + j] != 0 && !used[j]) {
        used[j] = true;
        int input;
        const char *why;
        if (!fg_sampler_gaussian_row(m->sampler, j, &prep->mean[j],
                                     prep->L + (size_t)j * nu, &input, &why)) {
          int k = prep->row_of[h];
          out->bad_row = k;
          snprintf(out->where, sizeof out->where, "/uncertain/%d/distribution",
                   input);
          snprintf(out->why, sizeof out->why,
                   "row %s depends on %s, which is not jointly normal: %s",
                   info.rows[k].name, fg_sampler_column(m->sampler, j), why);
          goto fail;
        }
      }
  free(used);
  out->qualifies = true;
  return FG_OK;
fail:
  free(used);
  fg_exact_prep_free(prep);
  return st;
}

fg_status fg_exact_run(const fg_model *m, const fg_exact_prep *prep,
                       uint64_t seed, const fg_mvn_poll *poll,
                       fg_exact_result *out) {
  fg_program_info info;
  fg_program_get_info(m->program, &info);
  int nu = prep->nu, w = nu + 1, nh = prep->nh;
  fg_status st = FG_OK;
  double *H = malloc((size_t)(nh > 0 ? nh : 1) * (size_t)(nu > 0 ? nu : 1) *
                     sizeof(double));
  double *b = malloc((size_t)(nh > 0 ? nh : 1) * sizeof(double));
  out->row_probability = calloc((size_t)info.nrows + 1, sizeof(double));
  out->row_error = calloc((size_t)info.nrows + 1, sizeof(double));
  if (!H || !b || !out->row_probability || !out->row_error) {
    st = FG_ENOMEM;
    goto done;
  }
  /* H = G L, b = -(c + G mean): a look at the poll per half-row (at most
   * FG_EXACT_DIMS_MAX^2 = 262,144 multiply-adds each) */
  for (int h = 0; h < nh; h++) {
    if (poll && poll->stop && poll->stop(poll->ctx)) {
      st = FG_ECANCELLED;
      goto done;
    }
    const double *f = prep->form + (size_t)h * w;
    double rhs = -f[0];
    for (int j = 0; j < nu; j++) rhs -= f[1 + j] * prep->mean[j];
    b[h] = rhs;
    double *hr = H + (size_t)h * nu;
    for (int k = 0; k < nu; k++) hr[k] = 0;
    for (int j = 0; j < nu; j++) {
      double g = f[1 + j];
      if (g == 0) continue;
      const double *lj = prep->L + (size_t)j * nu;
      for (int k = 0; k < nu; k++) hr[k] += g * lj[k];
    }
  }
  fg_mvn_result r;
  st = fg_mvn_probability_poll(H, b, nh, nu, FG_EXACT_TARGET_ERROR, seed, poll,
                               &r);
  if (st != FG_OK) goto done;
  out->probability = r.probability;
  out->error = r.error;
  out->rank = r.rank;
  out->points = r.points;
  out->rounds = r.rounds;
  out->converged = r.converged;
  out->method = r.method;
  /* per row: its own half-rows (one or two) */
  for (int h = 0; h < nh;) {
    int k = prep->row_of[h], e = h;
    while (e < nh && prep->row_of[e] == k) e++;
    fg_mvn_result rr;
    st = fg_mvn_probability_poll(H + (size_t)h * nu, b + h, e - h, nu,
                                 FG_EXACT_TARGET_ERROR, seed + (uint64_t)k + 1,
                                 poll, &rr);
    if (st != FG_OK) goto done;
    out->row_probability[k] = 1.0 - rr.probability; /* violation */
    out->row_error[k] = rr.error;
    h = e;
  }
done:
  free(H), free(b);
  return st;
}

void fg_exact_result_free(fg_exact_result *r) {
  free(r->row_probability);
  free(r->row_error);
  r->row_probability = r->row_error = NULL;
}

/* The poll of a check's exact task: its cancel flag, its timeout flag
 * (set by the pool's clock) and its deadline. */
static bool check_stop(void *ctx) {
  struct fg_check *c = ctx;
  if (atomic_load_explicit(&c->cancel_flag, memory_order_relaxed) ||
      atomic_load_explicit(&c->timeout_flag, memory_order_relaxed))
    return true;
  if (c->deadline > 0 && fg_time_monotonic() > c->deadline) {
    atomic_store(&c->timeout_flag, true);
    return true;
  }
  return false;
}

bool fg_exact_task(struct fg_check *c) {
  double t0 = fg_time_monotonic();
  fg_exact_result r = c->exact; /* the prepared figures; no arrays yet */
  r.row_probability = r.row_error = NULL;
  fg_mvn_poll poll = {check_stop, c};
  fg_status st =
      fg_exact_run(c->model, &c->exact_prep, c->req.seed, &poll, &r);
  if (st == FG_ECANCELLED) {
    fg_exact_result_free(&r);
    return false;
  }
  if (st != FG_OK) { /* out of memory: no exact answer, the check goes on */
    fg_exact_result_free(&r);
    r.qualifies = false;
    snprintf(r.why, sizeof r.why, "out of memory computing the exact path");
  }
  r.elapsed_ms = (fg_time_monotonic() - t0) * 1000.0;
  pthread_mutex_lock(&c->merge_mu);
  if (!atomic_load(&c->ending)) { /* else: late, discarded */
    fg_exact_result_free(&c->exact);
    c->exact = r;
    r.row_probability = r.row_error = NULL;
    atomic_store(&c->exact_whole, true);
  }
  pthread_mutex_unlock(&c->merge_mu);
  fg_exact_result_free(&r);
  return true;
}

fg_status fg_exact_refusal(const fg_model *m, const fg_exact_result *e,
                           fg_problem *p) {
  fg_status st;
  if (e->over_limit)
    st = fg_problem_limit(p, "/exact", e->limit, e->limit_value,
                          "exact \"only\": %s", e->why);
  else
    st = fg_problem_add(p, FG_EINVAL, e->where, e->where_col,
                        "exact \"only\": %s (pointer and column are in "
                        "model '%s')",
                        e->why, m->name);
  snprintf(p->detail, sizeof p->detail,
           "exact \"only\" needs every constraint row affine in jointly "
           "normal uncertain inputs at this decision; model '%s' does not "
           "qualify: %s",
           m->name, e->why);
  return st;
}

fg_status fg_exact_request_check(const fg_model *m,
                                 const fg_check_request *req, fg_problem *p) {
  int before = p->nitems;
  static const char *const tail =
      "with exact \"only\" no samples are drawn";
  if (req->stop_early)
    fg_problem_add(p, FG_EINVAL, "/stop_early", 0,
                   "stop_early needs a simulation; %s", tail);
  if (req->sampling != FG_SAMPLING_MONTE_CARLO)
    fg_problem_add(p, FG_EINVAL, "/sampling", 0,
                   "sampling %s needs a simulation; %s",
                   fg_sampling_name(req->sampling), tail);
  if (req->has_in_sample)
    fg_problem_add(p, FG_EINVAL, "/in_sample", 0,
                   "in_sample evaluates design scenarios by simulation; %s",
                   tail);
  if (req->explain)
    fg_problem_add(p, FG_EINVAL, "/explain", 0,
                   "explain reads drivers from simulated samples; %s", tail);
  if (req->failing_count > 0)
    fg_problem_add(p, FG_EINVAL, "/failing_scenarios_count", 0,
                   "failing scenarios are simulated samples; %s", tail);
  if (p->nitems > before) return FG_EINVAL;
  fg_program_info info;
  fg_program_get_info(m->program, &info);
  double *regs = calloc(info.nregs > 0 ? (size_t)info.nregs : 1, sizeof *regs);
  if (!regs) return fg_problem_set(p, FG_ENOMEM, "out of memory");
  for (int i = 0; i < info.ndecision; i++)
    regs[info.decision_base + i] = req->decision[i];
  fg_program_run_setup(m->program, regs);
  fg_exact_prep prep;
  fg_exact_result e;
  fg_status st = fg_exact_prepare(m, regs, &prep, &e);
  free(regs);
  fg_exact_prep_free(&prep);
  if (st != FG_OK) return fg_problem_set(p, st, "out of memory");
  if (!e.qualifies) return fg_exact_refusal(m, &e, p);
  return FG_OK;
}
