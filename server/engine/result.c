/*
 * engine/result.c -- the result body of a check (http-api.md "Checks").
 *
 * Design: one function writes the body for the API, the store and the
 * offline command alike, so the three never drift. Numbers that have no
 * value yet (a running check's verdict, the objective of a model without
 * one) are JSON null, never NaN. Rows are listed worst first (highest
 * violation probability, ties by mean excess).
 *
 * Thread use: any thread, without a lock: a running check's figures come
 * from its published progress snapshot (the interval computed here, by
 * the reader), an ended check's from its final figures, published before
 * its end state (engine_internal.h).
 */
#include "engine/engine_internal.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

static void add_num(cJSON *o, const char *k, double v) {
  if (isfinite(v)) cJSON_AddNumberToObject(o, k, v);
  else cJSON_AddNullToObject(o, k);
}

/* Whole numbers beyond 10^15 (seeds go to 2^53) would print in exponent
 * form through cJSON's %.15g; write them as integer text. */
static void add_u64(cJSON *o, const char *k, uint64_t v) {
  char buf[32];
  snprintf(buf, sizeof buf, "%llu", (unsigned long long)v);
  cJSON_AddRawToObject(o, k, buf);
}

static cJSON *interval_json(fg_interval iv, const char *method) {
  cJSON *o = cJSON_CreateObject();
  add_num(o, "lower", iv.lower);
  add_num(o, "upper", iv.upper);
  if (method) cJSON_AddStringToObject(o, "method", method);
  return o;
}

/* A running check: the joint figures of the chunks merged so far (a
 * Clopper-Pearson interval; no verdict yet) and the same figures as
 * "progress", with how far it has come. */
static void add_running(cJSON *o, struct fg_check *c) {
  uint64_t n, k;
  fg_check_progress(c, &n, &k);
  double pr = n ? (double)k / (double)n : NAN;
  fg_interval iv = fg_check_live_interval(c, k, n);
  cJSON *j = cJSON_AddObjectToObject(o, "joint");
  cJSON_AddNumberToObject(j, "samples", (double)n);
  cJSON_AddNumberToObject(j, "satisfied", (double)k);
  add_num(j, "probability", pr);
  add_num(j, "std_error", n ? sqrt(pr * (1 - pr) / (double)n) : NAN);
  cJSON_AddItemToObject(j, "interval", interval_json(iv, "clopper_pearson"));
  cJSON_AddArrayToObject(o, "constraints");
  cJSON *p = cJSON_AddObjectToObject(o, "progress");
  cJSON_AddNumberToObject(p, "samples_done", (double)n);
  cJSON_AddNumberToObject(p, "samples_total", (double)c->req.samples);
  if (n > 0) {
    cJSON_AddNumberToObject(p, "probability", pr);
    cJSON_AddItemToObject(p, "interval", interval_json(iv, "clopper_pearson"));
  } else {
    cJSON_AddNullToObject(p, "probability");
    cJSON_AddNullToObject(p, "interval");
  }
}

/* The interval method a check reports: the request's binomial interval
 * for Monte Carlo, the confidence sequence when stopping early, Student-t
 * intervals for coupled designs. */
static const char *method_of(const struct fg_check *c) {
  if (c->req.exact == FG_EXACT_ONLY) return "exact_error_bound";
  if (c->req.stop_early) return "confidence_sequence";
  if (c->design == FG_DESIGN_ANTITHETIC) return "antithetic_pairs_t";
  if (c->design != FG_DESIGN_MONTE_CARLO) return "replicates_t";
  return fg_interval_method_name(c->req.interval);
}

/* joint.exact (exact.c): the exact joint probability, or why there is
 * none (not_applicable: the model does not qualify here; stopped: the
 * check ended before the computation did); absent with "exact": "off".
 * Read once the check has ended (its task wrote it before the end). */
static void add_exact(cJSON *j, struct fg_check *c) {
  if (c->req.exact == FG_EXACT_OFF) return;
  cJSON *e = cJSON_AddObjectToObject(j, "exact");
  if (!c->exact.qualifies) {
    cJSON_AddNullToObject(e, "probability");
    cJSON_AddStringToObject(e, "not_applicable", c->exact.why);
    return;
  }
  if (!atomic_load(&c->exact_whole)) {
    cJSON_AddNullToObject(e, "probability");
    cJSON_AddStringToObject(e, "stopped",
                            "the check ended before the exact computation "
                            "finished");
    return;
  }
  add_num(e, "probability", c->exact.probability);
  add_num(e, "error", c->exact.error);
  cJSON_AddStringToObject(e, "method", c->exact.method);
  cJSON_AddNumberToObject(e, "rank", c->exact.rank);
  cJSON_AddNumberToObject(e, "points", (double)c->exact.points);
  cJSON_AddNumberToObject(e, "rounds", c->exact.rounds);
  cJSON_AddBoolToObject(e, "converged", c->exact.converged);
  add_num(e, "elapsed_ms", c->exact.elapsed_ms);
}

/* "drivers" of a row or the joint (with "explain": true): null when no
 * sample violated, else up to FG_DRIVERS_LISTED {"input", "shift"},
 * largest |shift| first (check.c drivers_of). */
static void add_drivers(cJSON *o, const struct fg_check *c,
                        const fg_drivers *d) {
  if (!c->req.explain) return;
  if (!d->known) {
    cJSON_AddNullToObject(o, "drivers");
    return;
  }
  cJSON *a = cJSON_AddArrayToObject(o, "drivers");
  for (int i = 0; a && i < d->n; i++) {
    cJSON *e = cJSON_CreateObject();
    cJSON_AddStringToObject(e, "input",
                            fg_sampler_column(c->model->sampler, d->col[i]));
    cJSON_AddNumberToObject(e, "shift", d->shift[i]);
    cJSON_AddItemToArray(a, e);
  }
}

static void add_rows(cJSON *o, struct fg_check *c) {
  cJSON *arr = cJSON_AddArrayToObject(o, "constraints");
  if (!c->rows) return;
  const char *method = method_of(c);
  for (int i = 0; i < c->info.nrows; i++) {
    const fg_row_result *rr = &c->rows[i];
    const fg_row *row = &c->info.rows[rr->row];
    cJSON *r = cJSON_CreateObject();
    cJSON_AddStringToObject(r, "name", row->name);
    cJSON_AddNumberToObject(r, "violated", (double)rr->violated);
    add_num(r, "probability", rr->probability);
    cJSON_AddItemToObject(r, "interval", interval_json(rr->interval, method));
    if (c->exact.qualifies && atomic_load(&c->exact_whole)) {
      cJSON *e = cJSON_AddObjectToObject(r, "exact");
      add_num(e, "probability", c->exact.row_probability[rr->row]);
      add_num(e, "error", c->exact.row_error[rr->row]);
    }
    cJSON *ex = cJSON_AddObjectToObject(r, "excess");
    add_num(ex, "mean", rr->excess_mean); /* null with exact only */
    /* Given violation: undefined (null) for a row never violated. The
     * 95th percentile comes from the log histogram, within
     * FG_HIST_REL_ERROR (1/128) relative; mean and maximum are exact. */
    bool any = rr->violated > rr->nonfinite + rr->infinite;
    add_num(ex, "mean_if_violated", any ? rr->excess_mean_if_violated : NAN);
    add_num(ex, "p95", any ? rr->excess_p95 : NAN);
    add_num(ex, "max", any ? rr->excess_max : NAN);
    /* Per row only: loosening every row by its own slack does not by
     * itself bring the joint probability to the target. */
    add_num(r, "slack_to_target", rr->slack_to_target);
    add_drivers(r, c, &rr->drivers);
    cJSON_AddNumberToObject(r, "sole_cause", (double)rr->sole);
    cJSON_AddNumberToObject(r, "nonfinite", (double)rr->nonfinite);
    cJSON_AddBoolToObject(r, "deterministic", row->deterministic);
    cJSON_AddItemToArray(arr, r);
  }
}

/* One numeric.problems entry for a non-finite draw of input `col`. */
static void add_input_problem(cJSON *probs, const char *col,
                              const char *stream, uint64_t first,
                              uint64_t count, const char *msg) {
  cJSON *pr = cJSON_CreateObject();
  cJSON_AddStringToObject(pr, "name", col ? col : "?");
  cJSON_AddStringToObject(pr, "kind", "input");
  cJSON_AddStringToObject(pr, "stream", stream);
  add_u64(pr, "index", first);
  add_u64(pr, "count", count);
  cJSON_AddStringToObject(pr, "message", msg);
  cJSON_AddItemToArray(probs, pr);
}

/* "numeric": what IEEE arithmetic left undecided, in the style of
 * "deterministic": non-finite draws of an uncertain input (the first by
 * sample index, which does not depend on workers or chunk sizes), those of
 * the in-sample evaluation (design stream; they do not touch the
 * verdict), then rows that evaluated to NaN, in row order; at most
 * FG_DET_PROBLEMS_MAX row entries. Empty while a check runs (the counts
 * are not final). */
static void add_numeric(cJSON *o, struct fg_check *c, bool ended) {
  const fg_tally *t = &c->total;
  bool any = ended && (t->bad_draws > 0 || c->in_sample_bad_draws > 0);
  for (int r = 0; ended && r < t->nrows && !any; r++)
    any = t->rows[r].nonfinite > 0;
  cJSON *num = cJSON_AddObjectToObject(o, "numeric");
  cJSON_AddBoolToObject(num, "ok", !any);
  cJSON *probs = cJSON_AddArrayToObject(num, "problems");
  int listed = 0, dropped = 0;
  char msg[320];
  /* Non-finite draws: the check's own samples, then the in-sample
   * evaluation's design scenarios. */
  const struct {
    uint64_t count, first;
    int column;
    const char *stream, *where, *consequence;
  } draws[] = {
      {t->bad_draws, t->bad_draw_first, t->bad_draw_column, "validation",
       "sample", "such samples say nothing about the plan, so the verdict "
                 "is inconclusive"},
      {c->in_sample_bad_draws, c->in_sample_bad_first,
       c->in_sample_bad_column, "design", "design scenario",
       "its in_sample figures say nothing about the plan"},
  };
  for (size_t d = 0; ended && d < sizeof draws / sizeof *draws; d++) {
    if (draws[d].count == 0) continue;
    const char *col = fg_sampler_column(c->model->sampler, draws[d].column);
    snprintf(msg, sizeof msg,
             "uncertain input %s drew a non-finite value at %s %llu%s (%llu "
             "non-finite values in all); %s",
             col ? col : "?", draws[d].where,
             (unsigned long long)draws[d].first,
             d == 1 ? " of the in-sample evaluation" : "",
             (unsigned long long)draws[d].count, draws[d].consequence);
    add_input_problem(probs, col, draws[d].stream, draws[d].first,
                      draws[d].count, msg);
    listed++;
  }
  for (int r = 0; ended && r < t->nrows; r++) {
    const fg_row_tally *rt = &t->rows[r];
    if (rt->nonfinite == 0) continue;
    if (listed >= FG_DET_PROBLEMS_MAX) {
      dropped++;
      continue;
    }
    const char *name = c->info.rows[r].name;
    snprintf(msg, sizeof msg,
             "constraint row %s evaluated to NaN at sample %llu (%llu "
             "samples in all): a NaN comparison does not hold, and the "
             "verdict cannot be pass",
             name, (unsigned long long)rt->first_nonfinite,
             (unsigned long long)rt->nonfinite);
    cJSON *pr = cJSON_CreateObject();
    cJSON_AddStringToObject(pr, "name", name);
    cJSON_AddStringToObject(pr, "kind", "row");
    cJSON_AddStringToObject(pr, "stream", "validation");
    add_u64(pr, "index", rt->first_nonfinite);
    add_u64(pr, "count", rt->nonfinite);
    cJSON_AddStringToObject(pr, "message", msg);
    cJSON_AddItemToArray(probs, pr);
    listed++;
  }
  if (dropped) cJSON_AddNumberToObject(num, "problems_not_listed", dropped);
}

cJSON *fg_check_result_json(fg_check *c, const fg_check_meta *meta) {
  cJSON *o = cJSON_CreateObject();
  if (!o) return NULL;
  /* One load of the state: the body is all running or all final. */
  fg_check_state state = fg_check_get_state(c);
  bool ended = fg_check_state_is_end(state);
  if (meta && meta->id) cJSON_AddStringToObject(o, "id", meta->id);
  if (meta && meta->replay_of && meta->replay_of[0])
    cJSON_AddStringToObject(o, "replay_of", meta->replay_of);
  cJSON_AddStringToObject(o, "status", fg_check_state_name(state));
  cJSON *mo = cJSON_AddObjectToObject(o, "model");
  cJSON_AddStringToObject(mo, "name", c->model->name);
  if (meta && meta->model_version > 0)
    cJSON_AddNumberToObject(mo, "version", meta->model_version);
  cJSON_AddStringToObject(mo, "digest", c->model->digest);
  if (ended && state == FG_CHECK_DONE)
    cJSON_AddStringToObject(o, "verdict", fg_verdict_name(c->verdict));
  else cJSON_AddNullToObject(o, "verdict");
  cJSON_AddNumberToObject(o, "target", c->req.target);
  cJSON_AddNumberToObject(o, "confidence", c->req.confidence);
  add_u64(o, "seed", c->req.seed);
  cJSON_AddStringToObject(o, "sampling", fg_sampling_name(c->req.sampling));
  cJSON_AddStringToObject(o, "exact", fg_exact_mode_name(c->req.exact));
  cJSON_AddNumberToObject(o, "samples_requested",
                          (double)(c->samples_requested ? c->samples_requested
                                                        : c->req.samples));

  if (ended) {
    cJSON *j = cJSON_AddObjectToObject(o, "joint");
    cJSON_AddNumberToObject(j, "samples", (double)c->total.n);
    cJSON_AddNumberToObject(j, "satisfied", (double)c->total.satisfied);
    add_num(j, "probability", c->probability);
    add_num(j, "std_error", c->std_error);
    cJSON_AddItemToObject(
        j, "interval",
        interval_json(c->interval, method_of(c)));
    if (c->nrep > 0) {
      cJSON_AddNumberToObject(j, "replicates", c->nrep);
      cJSON_AddNumberToObject(j, "replicate_size", (double)c->rep_size);
    }
    add_exact(j, c);
    add_drivers(j, c, &c->joint_drivers);
    add_rows(o, c);
  } else {
    add_running(o, c);
  }

  cJSON *det = cJSON_AddObjectToObject(o, "deterministic");
  cJSON_AddBoolToObject(det, "ok", c->ndet == 0);
  cJSON *probs = cJSON_AddArrayToObject(det, "problems");
  for (int i = 0; i < c->ndet; i++) {
    cJSON *pr = cJSON_CreateObject();
    cJSON_AddStringToObject(pr, "name", c->det[i].name);
    cJSON_AddStringToObject(pr, "message", c->det[i].message);
    cJSON_AddItemToArray(probs, pr);
  }
  if (c->ndet_dropped)
    cJSON_AddNumberToObject(det, "problems_not_listed", c->ndet_dropped);

  add_numeric(o, c, ended);

  if (ended && c->has_objective) add_num(o, "objective", c->objective);
  else cJSON_AddNullToObject(o, "objective");
  if (c->info.objective_sense != FG_OBJECTIVE_NONE)
    cJSON_AddStringToObject(o, "objective_sense",
                            c->info.objective_sense == FG_OBJECTIVE_MINIMIZE
                                ? "minimize"
                                : "maximize");

  cJSON *fs = cJSON_AddArrayToObject(o, "failing_scenarios");
  if (ended) {
    for (int i = 0; i < c->total.nfail; i++) {
      const fg_fail_record *f = &c->total.fail[i];
      cJSON *e = cJSON_CreateObject();
      cJSON_AddNumberToObject(e, "index", (double)f->index);
      cJSON *v = cJSON_AddArrayToObject(e, "violated");
      int shown = f->nrows < FG_FAIL_ROWS_MAX ? f->nrows : FG_FAIL_ROWS_MAX;
      for (int r = 0; r < shown; r++)
        cJSON_AddItemToArray(
            v, cJSON_CreateString(c->info.rows[f->rows[r]].name));
      if (f->nrows > shown)
        cJSON_AddNumberToObject(e, "rows_not_listed", f->nrows - shown);
      cJSON_AddItemToArray(fs, e);
    }
  }

  /* Shown once evaluated (it is the check's first task; a cancelled one
   * shows what was evaluated before the cancel). */
  if (c->has_in_sample && c->in_sample_count > 0) {
    cJSON *is = cJSON_AddObjectToObject(o, "in_sample");
    add_u64(is, "seed", c->req.in_sample_seed);
    cJSON_AddNumberToObject(is, "count", (double)c->in_sample_count);
    cJSON_AddNumberToObject(is, "satisfied", (double)c->in_sample_satisfied);
    add_num(is, "fraction", c->in_sample_count
                                ? (double)c->in_sample_satisfied /
                                      (double)c->in_sample_count
                                : NAN);
  } else {
    cJSON_AddNullToObject(o, "in_sample");
  }
  if (ended && c->samples_to_settle > 0)
    cJSON_AddNumberToObject(o, "samples_to_settle", c->samples_to_settle);
  else cJSON_AddNullToObject(o, "samples_to_settle");
  cJSON_AddBoolToObject(o, "stopped_early", c->stopped_early);
  if (meta && meta->created_at)
    cJSON_AddStringToObject(o, "created_at", meta->created_at);
  if (meta && meta->finished_at && ended)
    cJSON_AddStringToObject(o, "finished_at", meta->finished_at);
  else cJSON_AddNullToObject(o, "finished_at");
  double ms = ended ? c->elapsed_ms : (fg_time_monotonic() - c->t_start) * 1e3;
  cJSON_AddNumberToObject(o, "elapsed_ms", round(ms));
  if (c->req.label[0]) cJSON_AddStringToObject(o, "label", c->req.label);
  else cJSON_AddNullToObject(o, "label");
  if (meta && meta->key) cJSON_AddStringToObject(o, "key", meta->key);
  return o;
}
