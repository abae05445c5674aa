/*
 * engine/finalize.c -- a check's figures: the looks of the confidence
 * sequence while it runs (fg_check_look_locked), and at its end the
 * intervals (Clopper-Pearson and the other binomial intervals, Student t
 * over design replicates), the verdict, per-row figures (sole causes,
 * slack to target from the excess histogram, drivers) and the exact-only
 * figures (fg_check_finish, called once by the thread that ends the
 * check, no shared lock held; figures are written under the check's own
 * merge_mu). check.c holds the rest of a check's life.
 *
 * A NaN row rules out a pass and a non-finite draw any verdict but
 * inconclusive (numeric_verdict). With stop_early the reported interval
 * is never narrower than Clopper-Pearson's for the same counts
 * (cs_reported).
 *
 * Thread use: as check.c; fields follow the rule in engine_internal.h.
 */
#include "engine/engine_internal.h"

#include "core/quantile.h"

#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Student-t interval from m independent unit estimates with the given
 * sum and sum of squares; falls back to Clopper-Pearson on the pooled
 * count when the units agree exactly (a zero spread says nothing about
 * the width). */
static fg_interval t_interval(double m, double sum, double sumsq, uint64_t k,
                              uint64_t n, double conf, double *se) {
  double mean = sum / m;
  double var = (sumsq - m * mean * mean) / (m - 1);
  if (var < 0) var = 0;
  *se = sqrt(var / m);
  if (!(var > 0)) return fg_interval_clopper_pearson(k, n, conf);
  double tq = fg_q_t_inv(1 - (1 - conf) / 2, (1 - conf) / 2, m - 1, NULL);
  fg_interval iv = {mean - tq * *se, mean + tq * *se};
  if (iv.lower < 0) iv.lower = 0;
  if (iv.upper > 1) iv.upper = 1;
  return iv;
}

/* Joint (row < 0) or row interval for a coupled design. */
static fg_interval design_interval(struct fg_check *c, int row, double *se) {
  const fg_tally *t = &c->total;
  uint64_t n = t->n;
  if (c->design == FG_DESIGN_ANTITHETIC) {
    double m = (double)(n / 2);
    uint64_t both = row < 0 ? t->pair_both : t->rows[row].pair_both;
    uint64_t one = row < 0 ? t->pair_one : t->rows[row].pair_one;
    uint64_t k = row < 0 ? t->satisfied : t->rows[row].violated;
    /* pair means are 1, 1/2 or 0 */
    return t_interval(m, (double)both + 0.5 * (double)one,
                      (double)both + 0.25 * (double)one, k, n,
                      c->req.confidence, se);
  }
  double sum = 0, sumsq = 0, rs = (double)c->rep_size;
  for (int r = 0; r < c->nrep; r++) {
    uint64_t k = row < 0 ? c->rep_sat[r]
                         : c->rep_viol[(uint64_t)r * (uint64_t)c->info.nrows +
                                       (uint64_t)row];
    double pr = (double)k / rs;
    sum += pr;
    sumsq += pr * pr;
  }
  uint64_t k = row < 0 ? t->satisfied : t->rows[row].violated;
  return t_interval((double)c->nrep, sum, sumsq, k, n, c->req.confidence, se);
}

/* The sequence's interval as reported for the counts merged so far: the
 * running intersection widened to hold the Clopper-Pearson interval of
 * the same counts at the same level, so an early stop never claims more
 * than the fixed-n interval of its own counts would (the widening only
 * adds coverage). */
static fg_interval cs_reported(const struct fg_check *c) {
  const fg_tally *t = &c->total;
  if (t->n == 0) return (fg_interval){0.0, 1.0};
  fg_interval cp =
      fg_interval_clopper_pearson(t->satisfied, t->n, c->req.confidence);
  fg_interval iv = c->cs;
  if (!(cp.lower >= iv.lower)) iv.lower = cp.lower < iv.lower ? cp.lower : 0;
  if (!(cp.upper <= iv.upper)) iv.upper = cp.upper > iv.upper ? cp.upper : 1;
  return iv;
}

/* Did any row evaluate to NaN in the counts merged so far? */
static bool nan_rows(const fg_tally *t) {
  for (int r = 0; r < t->nrows; r++)
    if (t->rows[r].nonfinite > 0) return true;
  return false;
}

bool fg_check_look_locked(struct fg_check *c) {
  uint64_t n = c->total.n;
  if (c->next_look == 0 || n < c->next_look) return false;
  /* A look point (or the end) was reached: tighten the running
   * intersection and see whether it lies wholly on one side. */
  fg_interval iv = fg_cs_interval(c->total.satisfied, n, c->req.confidence,
                                  c->req.target);
  if (iv.lower > c->cs.lower) c->cs.lower = iv.lower;
  if (iv.upper < c->cs.upper) c->cs.upper = iv.upper;
  c->next_look = n >= c->req.samples ? 0 : (n * 2 < c->req.samples ? n * 2
                                                                    : c->req.samples);
  fg_interval rep = cs_reported(c);
  /* numeric trouble rules a verdict out (numeric_verdict): keep sampling
   * rather than stop on one that would not stand */
  bool nan = nan_rows(&c->total), bad_draws = c->total.bad_draws > 0;
  return (rep.lower >= c->req.target && !nan && !bad_draws) ||
         (rep.upper < c->req.target && !bad_draws) || c->ndet > 0;
}

/* IEEE semantics at the verdict: a row that evaluated to NaN neither
 * held nor was exceeded by a number, so the counts cannot support a pass
 * (NaN does not hold, so a fail stands); a non-finite draw of an
 * uncertain input makes its samples say nothing about the plan, so
 * neither pass nor fail is claimed. Deterministic problems fail as
 * always. The result body lists each under "numeric" (result.c). */
static fg_verdict numeric_verdict(const struct fg_check *c, fg_verdict v) {
  if (c->ndet > 0) return v;
  if (c->total.bad_draws > 0) return FG_VERDICT_INCONCLUSIVE;
  if (nan_rows(&c->total) && v == FG_VERDICT_PASS)
    return FG_VERDICT_INCONCLUSIVE;
  return v;
}

static fg_interval interval_of(fg_interval_method m, uint64_t k, uint64_t n,
                               double conf) {
  switch (m) {
  case FG_INTERVAL_WILSON: return fg_interval_wilson(k, n, conf);
  case FG_INTERVAL_JEFFREYS: return fg_interval_jeffreys(k, n, conf);
  default: return fg_interval_clopper_pearson(k, n, conf);
  }
}

/* Rows worst first: highest violation count, ties by mean excess, then by
 * row order so the listing is stable. */
static int row_cmp(const void *pa, const void *pb) {
  const fg_row_result *a = pa, *b = pb;
  if (a->violated != b->violated) return a->violated > b->violated ? -1 : 1;
  /* (exact only: no counts; the exact violation probability decides) */
  if (a->probability > b->probability) return -1;
  if (a->probability < b->probability) return 1;
  if (a->excess_mean != b->excess_mean)
    return a->excess_mean > b->excess_mean ? -1 : 1;
  return a->row - b->row;
}

/* Slack to target of one row: the smallest s >= 0 with
 *   #(excess <= s) >= ceil(target * n).
 * The rows that hold (n - violated) count at s = 0; the rest must come
 * from the finite positive excesses, whose histogram gives the value of
 * rank `need` within FG_HIST_REL_ERROR relative (hist.c). NaN and +inf
 * excesses never hold, so when too many of them remain no finite slack
 * exists (NAN). */
static double slack_to_target(const fg_row_tally *rt, uint64_t n,
                              double target) {
  if (n == 0) return NAN;
  uint64_t holds = n - rt->violated;
  /* ceil(target * n), the product's rounding kept from adding a sample */
  double want = ceil(target * (double)n * (1 - 4 * DBL_EPSILON));
  if ((double)holds >= want) return 0;
  uint64_t finite = rt->violated - rt->nonfinite - rt->infinite;
  double need = want - (double)holds; /* >= 1 */
  if (need > (double)finite || finite == 0) return NAN;
  /* rank ceil(q * finite) == need exactly with q = (need - 1/2) / finite */
  return fg_hist_quantile(&rt->hist, (need - 0.5) / (double)finite);
}

/* Drivers from the driver sums of `t` (tally.c's layout), block `slot`
 * (a row, or nrows for the joint) and its violation count: shift_j =
 * (mean of x_j over the violating samples - mean over all) / sd over all
 * (population sd); components with no spread are skipped. Top
 * FG_DRIVERS_LISTED by |shift|, ties to the lower column. */
static void drivers_of(const fg_tally *t, int slot, uint64_t nviol,
                       fg_drivers *out) {
  memset(out, 0, sizeof *out);
  if (!t->drv || t->n == 0 || nviol == 0) return;
  out->known = true;
  int D = t->drv_dims;
  double n = (double)t->n, nv = (double)nviol;
  const double *sv = t->drv + (size_t)(2 + slot) * (size_t)D;
  for (int j = 0; j < D; j++) {
    double mean = t->drv[j] / n;
    double var = t->drv[D + j] / n - mean * mean;
    if (!(var > 0) || !isfinite(var)) continue;
    double shift = (sv[j] / nv - mean) / sqrt(var);
    if (!isfinite(shift)) continue;
    int k = out->n < FG_DRIVERS_LISTED ? out->n : FG_DRIVERS_LISTED - 1;
    if (out->n == FG_DRIVERS_LISTED && !(fabs(shift) > fabs(out->shift[k])))
      continue;
    /* insertion: strictly larger |shift| moves ahead (stable on ties) */
    while (k > 0 && fabs(shift) > fabs(out->shift[k - 1])) {
      out->shift[k] = out->shift[k - 1];
      out->col[k] = out->col[k - 1];
      k--;
    }
    out->shift[k] = shift;
    out->col[k] = j;
    if (out->n < FG_DRIVERS_LISTED) out->n++;
  }
}

/* Exact only: the figures come from the exact path. The joint
 * probability is the exact one and the interval [p - error, p + error]
 * (clipped to [0, 1]), so the verdict rule reads as stated for "only":
 * pass when p - error >= target, fail when p + error < target (or a
 * deterministic problem), else inconclusive. No sample, so no standard
 * error, excess, slack or failing scenario. */
static void finalize_exact_only(struct fg_check *c) {
  const fg_exact_result *e = &c->exact;
  bool have = e->qualifies && atomic_load(&c->exact_whole);
  c->probability = have ? e->probability : NAN;
  c->std_error = NAN;
  /* without an answer (cancelled, timed out) the interval says nothing:
   * [0, 1], as for a simulation that merged no sample */
  c->interval.lower = have ? fmax(0.0, e->probability - e->error) : 0.0;
  c->interval.upper = have ? fmin(1.0, e->probability + e->error) : 1.0;
  if (c->ndet > 0)
    c->verdict = FG_VERDICT_FAIL;
  else if (!have)
    c->verdict = FG_VERDICT_INCONCLUSIVE;
  else
    c->verdict = (fg_verdict)fg_verdict_rule(c->interval, c->req.target, false);
  c->samples_to_settle = 0;
  c->total.nfail = 0;
  c->rows = calloc((size_t)c->info.nrows + 1, sizeof *c->rows);
  if (c->rows) {
    for (int r = 0; r < c->info.nrows; r++) {
      fg_row_result *rr = &c->rows[r];
      rr->row = r;
      double p = have ? e->row_probability[r] : NAN;
      double er = have ? e->row_error[r] : NAN;
      rr->probability = p;
      rr->interval.lower = fmax(0.0, p - er);
      rr->interval.upper = fmin(1.0, p + er);
      if (!have) rr->interval.lower = 0.0, rr->interval.upper = 1.0;
      rr->excess_mean = rr->excess_mean_if_violated = NAN;
      rr->excess_p95 = rr->excess_max = NAN;
      rr->slack_to_target = NAN;
    }
    qsort(c->rows, (size_t)c->info.nrows, sizeof *c->rows, row_cmp);
  }
  c->has_objective = c->info.objective_reg >= 0;
  c->objective = c->has_objective && c->info.objective_deterministic
                     ? c->setup_regs[c->info.objective_reg]
                     : NAN;
}

/* Under merge_mu, once the end is decided: the end-of-run figures. */
static void finalize(struct fg_check *c) {
  fg_fault_slow_interval(c->req.seed);
  if (c->req.exact == FG_EXACT_ONLY) {
    c->elapsed_ms = (fg_time_monotonic() - c->t_start) * 1000.0;
    finalize_exact_only(c);
    return;
  }
  const fg_tally *t = &c->total;
  uint64_t n = t->n, k = t->satisfied;
  c->elapsed_ms = (fg_time_monotonic() - c->t_start) * 1000.0;
  c->probability = n ? (double)k / (double)n : NAN;
  c->std_error = n ? sqrt(c->probability * (1 - c->probability) / (double)n)
                   : NAN;
  if (c->req.stop_early) {
    fg_check_look_locked(c); /* a last look at the final count */
    c->interval = cs_reported(c);
  } else if (c->design != FG_DESIGN_MONTE_CARLO && n > 2) {
    c->interval = design_interval(c, -1, &c->std_error);
  } else {
    c->interval = interval_of(c->req.interval, k, n, c->req.confidence);
  }
  c->verdict = numeric_verdict(
      c, (fg_verdict)fg_verdict_rule(c->interval, c->req.target, c->ndet > 0));
  /* Coupled designs' sample indices are not scenarios of the validation
   * stream that GET .../scenarios could hand out: report none. */
  if (c->design != FG_DESIGN_MONTE_CARLO) c->total.nfail = 0;
  c->samples_to_settle = 0;
  /* more samples do not settle what NaN left open */
  bool numeric_ok = t->bad_draws == 0 && !nan_rows(t);
  if (c->verdict == FG_VERDICT_INCONCLUSIVE && n > 0 && numeric_ok) {
    double s = fg_samples_to_settle(k, n, c->req.target, c->req.confidence);
    if (s > 0 && isfinite(s)) c->samples_to_settle = ceil(s);
  }
  c->rows = calloc((size_t)c->info.nrows + 1, sizeof *c->rows);
  if (c->rows) {
    for (int r = 0; r < c->info.nrows; r++) {
      const fg_row_tally *rt = &t->rows[r];
      fg_row_result *rr = &c->rows[r];
      rr->row = r;
      rr->violated = rt->violated;
      rr->sole = rt->sole;
      rr->nonfinite = rt->nonfinite;
      rr->infinite = rt->infinite;
      rr->probability = n ? (double)rt->violated / (double)n : NAN;
      double se_row;
      if (c->design != FG_DESIGN_MONTE_CARLO && n > 2 && !c->req.stop_early)
        rr->interval = design_interval(c, r, &se_row);
      else
        rr->interval = interval_of(c->req.interval, rt->violated, n,
                                   c->req.confidence);
      rr->excess_mean = n ? rt->excess_sum / (double)n : 0;
      uint64_t finite = rt->violated - rt->nonfinite - rt->infinite;
      rr->excess_mean_if_violated = finite ? rt->excess_sum / (double)finite : 0;
      rr->excess_p95 = finite ? fg_hist_quantile(&rt->hist, 0.95) : 0;
      rr->excess_max = finite ? rt->hist.max : 0;
      rr->slack_to_target = slack_to_target(rt, n, c->req.target);
      drivers_of(t, r, rt->violated, &rr->drivers);
    }
    qsort(c->rows, (size_t)c->info.nrows, sizeof *c->rows, row_cmp);
  }
  drivers_of(t, c->info.nrows, n - k, &c->joint_drivers);
  c->has_objective = c->info.objective_reg >= 0;
  if (c->has_objective) {
    if (c->info.objective_deterministic)
      c->objective = c->setup_regs[c->info.objective_reg];
    else
      c->objective = n ? t->objective_sum / (double)n : NAN;
  }
}

void fg_check_finish(struct fg_check *c) {
  pthread_mutex_lock(&c->merge_mu);
  bool all = atomic_load(&c->merged_chunks) == c->nchunks &&
             (!c->has_in_sample || atomic_load(&c->in_sample_whole)) &&
             (!c->has_exact || atomic_load(&c->exact_whole));
  fg_check_state end;
  if (all || atomic_load(&c->frozen))
    end = FG_CHECK_DONE;
  else if (atomic_load(&c->timeout_flag))
    end = FG_CHECK_TIMED_OUT;
  else
    end = FG_CHECK_CANCELLED;
  finalize(c);
  fg_check_publish_progress(c);
  pthread_mutex_unlock(&c->merge_mu);
  /* Publish: every figure above is written before the end state. */
  pthread_mutex_lock(&c->end_mu);
  atomic_store_explicit(&c->state, end, memory_order_release);
  pthread_cond_broadcast(&c->done_cv);
  pthread_mutex_unlock(&c->end_mu);
  fg_check_unref(c); /* the pool's reference */
}
