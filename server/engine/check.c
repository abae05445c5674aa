/*
 * engine/check.c -- one check: set-up, deterministic problems, chunks and
 * progress, waiting and cancelling (its figures: finalize.c).
 *
 * Life of a check: fg_check_start() copies the request, runs the setup
 * stream once (decision arithmetic, deterministic rows: no sampling),
 * records decision bound and integrality problems, prepares the exact
 * path (exact.c), and queues the check on the pool (state QUEUED) with
 * its exact computation (when the model qualifies) and its in-sample
 * evaluation (if asked) as the first tasks. With "exact": "only" there are
 * no chunks: the exact task alone makes the figures (finalize.c).
 * Workers move it to RUNNING and merge chunk tallies,
 * publishing a progress snapshot at each merge; when the last chunk is
 * merged, or the check was cancelled or ran out of time and no worker is
 * on it (or its worker is stuck, pool.c), the thread that ends it calls
 * fg_check_finish() with no shared lock held: it computes the end figures
 * under the check's own merge_mu, then publishes the end state and
 * signals done_cv.
 *
 * What "joint" counts: a sample is satisfied when every constraint row
 * holds in it, deterministic rows included (they hold in all samples or in
 * none). Decision bound and integrality problems do not change the counts;
 * like failing deterministic rows they are listed under "deterministic" and
 * make the verdict fail. A row that evaluated to NaN does not hold (IEEE)
 * but rules out a pass; a non-finite draw of an uncertain input rules out
 * any verdict but inconclusive (numeric_verdict; result.c lists both under
 * "numeric"). With stop_early the reported interval is never narrower
 * than Clopper-Pearson's for the same counts (cs_reported).
 *
 * Thread use: any thread; fields follow the rule in engine_internal.h.
 * Readers (state, progress, outcome, result body) never block on a worker.
 */
#include "engine/engine_internal.h"

#include "core/quantile.h"

#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

static bool is_end(fg_check_state s) {
  return s != FG_CHECK_QUEUED && s != FG_CHECK_RUNNING;
}

bool fg_check_state_is_end(fg_check_state s) {
  return is_end(s);
}

fg_check_state fg_check_state_parse(const char *s) {
  /* QUEUED reads as "running" too: RUNNING is the one a name gives. */
  static const fg_check_state all[] = {
      FG_CHECK_RUNNING, FG_CHECK_DONE,
      FG_CHECK_CANCELLED, FG_CHECK_TIMED_OUT, FG_CHECK_FAILED,
      FG_CHECK_INTERRUPTED};
  for (size_t i = 0; s && i < sizeof all / sizeof *all; i++)
    if (strcmp(s, fg_check_state_name(all[i])) == 0) return all[i];
  return (fg_check_state)-1;
}

void fg_check_publish_progress(struct fg_check *c) {
  unsigned s = atomic_load_explicit(&c->snap_seq, memory_order_relaxed);
  atomic_store_explicit(&c->snap_seq, s + 1, memory_order_relaxed);
  atomic_thread_fence(memory_order_release);
  atomic_store_explicit(&c->snap_n, c->total.n, memory_order_relaxed);
  atomic_store_explicit(&c->snap_sat, c->total.satisfied,
                        memory_order_relaxed);
  atomic_store_explicit(&c->snap_seq, s + 2, memory_order_release);
}

void fg_check_progress(fg_check *c, uint64_t *done, uint64_t *satisfied) {
  /* The writer's section is four stores, so a retry is rare and short;
   * the bound keeps the loop finite whatever happens (the last read is
   * then used: n and k from two neighbouring merges at worst). */
  for (int tries = 0; tries < 1000; tries++) {
    unsigned s1 = atomic_load_explicit(&c->snap_seq, memory_order_acquire);
    *done = atomic_load_explicit(&c->snap_n, memory_order_relaxed);
    *satisfied = atomic_load_explicit(&c->snap_sat, memory_order_relaxed);
    atomic_thread_fence(memory_order_acquire);
    unsigned s2 = atomic_load_explicit(&c->snap_seq, memory_order_relaxed);
    if (s1 == s2 && !(s1 & 1)) return;
  }
  if (*satisfied > *done) *satisfied = *done;
}

fg_interval fg_check_live_interval(const struct fg_check *c, uint64_t k,
                                   uint64_t n) {
  fg_fault_slow_interval(c->req.seed);
  return n ? fg_interval_clopper_pearson(k, n, c->req.confidence)
           : (fg_interval){0.0, 1.0};
}

static void add_det(struct fg_check *c, const char *name, const char *fmt,
                    ...) __attribute__((format(printf, 3, 4)));
static void add_det(struct fg_check *c, const char *name, const char *fmt,
                    ...) {
  if (c->ndet >= FG_DET_PROBLEMS_MAX) {
    c->ndet_dropped++;
    return;
  }
  fg_det_problem *d = &c->det[c->ndet++];
  snprintf(d->name, sizeof d->name, "%s", name);
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(d->message, sizeof d->message, fmt, ap);
  va_end(ap);
}

/* Tolerance: FG_INTEGER_TOL (limits.h) absolute or relative, whichever is
 * larger. */
static double tol_of(double bound) {
  return fmax(FG_INTEGER_TOL, FG_INTEGER_TOL * fabs(bound));
}

static void check_decisions(struct fg_check *c) {
  const fg_model *m = c->model;
  for (int d = 0; d < m->ndecisions; d++) {
    const fg_decision *dd = &m->decisions[d];
    for (int i = 0; i < dd->count; i++) {
      double v = c->req.decision[dd->offset + i];
      char name[FG_ROW_NAME_MAX];
      if (dd->size == 0) snprintf(name, sizeof name, "%s", dd->name);
      else snprintf(name, sizeof name, "%s[%d]", dd->name, i);
      if (v < dd->lower[i] - tol_of(dd->lower[i]))
        add_det(c, name, "decision %s = %.17g is below its lower bound %.17g",
                name, v, dd->lower[i]);
      if (v > dd->upper[i] + tol_of(dd->upper[i]))
        add_det(c, name, "decision %s = %.17g is above its upper bound %.17g",
                name, v, dd->upper[i]);
      if (dd->integer && fabs(v - nearbyint(v)) > tol_of(v))
        add_det(c, name, "decision %s = %.17g must be an integer", name, v);
    }
  }
  for (int r = 0; r < c->info.nrows; r++) {
    const fg_row *row = &c->info.rows[r];
    if (!row->deterministic) continue;
    double e = c->setup_regs[row->excess_reg];
    if (!(e <= 0))
      add_det(c, row->name,
              "constraint row %s does not hold for this decision (excess "
              "%.6g)",
              row->name, e);
  }
}

void fg_check_chunk_range(const struct fg_check *c, uint64_t idx,
                          uint64_t *first, uint64_t *count) {
  if (c->bounds) {
    *first = c->bounds[idx];
    *count = c->bounds[idx + 1] - c->bounds[idx];
    return;
  }
  *first = idx * (uint64_t)c->chunk;
  *count = c->req.samples - *first;
  if (*count > (uint64_t)c->chunk) *count = (uint64_t)c->chunk;
}

/* Chunk bounds for a check that stops early or is drawn in replicates:
 * the regular chunk grid merged with extra points -- the look points
 * FG_CS_FIRST_ROUND * 2^j (doubling), or the replicate boundaries
 * r * rep_size -- so no chunk straddles one, whatever the chunk size. */
static bool build_bounds(struct fg_check *c, bool doubling, uint64_t first,
                         uint64_t every) {
  uint64_t n = c->req.samples, step = (uint64_t)c->chunk;
  uint64_t cap = n / step + 2 + (doubling ? 64 : (uint64_t)c->nrep + 1);
  c->bounds = malloc(cap * sizeof *c->bounds);
  if (!c->bounds) return false;
  uint64_t m = 0, grid = step, extra = first;
  c->bounds[m++] = 0;
  while (c->bounds[m - 1] < n && m < cap) {
    uint64_t next = grid < extra ? grid : extra;
    if (next >= n) next = n;
    if (next == grid) grid += step;
    if (next == extra) extra = doubling ? extra * 2 : extra + every;
    if (next > c->bounds[m - 1]) c->bounds[m++] = next;
  }
  c->nchunks = m - 1;
  return true;
}

void fg_check_merged_chunk_locked(struct fg_check *c, uint64_t idx,
                                  const fg_tally *t) {
  if (!c->rep_sat || c->rep_size == 0) return;
  uint64_t first, count;
  fg_check_chunk_range(c, idx, &first, &count);
  uint64_t r = first / c->rep_size;
  if (r >= (uint64_t)c->nrep) return;
  c->rep_sat[r] += t->satisfied;
  for (int i = 0; i < c->info.nrows; i++)
    c->rep_viol[r * (uint64_t)c->info.nrows + (uint64_t)i] += t->rows[i].violated;
}

const uint64_t *fg_check_outcomes(fg_check *c, uint64_t *n) {
  if (!fg_check_ended(c)) {
    *n = 0;
    return NULL;
  }
  *n = c->total.n;
  return c->outcomes;
}

void fg_check_free_internal(struct fg_check *c) {
  free(c->bounds);
  free(c->outcomes);
  free(c->rep_sat);
  free(c->rep_viol);
  if (c->slots) {
    for (int i = 0; i < c->window; i++) fg_tally_free(&c->slots[i]);
    free(c->slots);
  }
  free(c->ready);
  fg_tally_free(&c->total);
  free(c->rows);
  free(c->drv_centre);
  free(c->setup_regs);
  fg_rowplan_free(c->plan);
  fg_exact_result_free(&c->exact);
  fg_exact_prep_free(&c->exact_prep);
  fg_request_free(&c->req);
  pthread_cond_destroy(&c->done_cv);
  pthread_mutex_destroy(&c->end_mu);
  pthread_mutex_destroy(&c->merge_mu);
  if (c->model) fg_model_unref(c->model);
  free(c);
}

fg_check *fg_check_ref(fg_check *c) {
  if (c) atomic_fetch_add(&c->refs, 1);
  return c;
}

void fg_check_unref(fg_check *c) {
  if (!c) return;
  if (atomic_fetch_sub(&c->refs, 1) == 1) fg_check_free_internal(c);
}

bool fg_check_get_outcome(fg_check *c, fg_check_outcome *o) {
  fg_check_state s = atomic_load_explicit(&c->state, memory_order_acquire);
  if (!is_end(s)) return false;
  memset(o, 0, sizeof *o);
  o->state = s;
  o->has_verdict = s == FG_CHECK_DONE;
  o->verdict = c->verdict;
  o->samples = c->total.n;
  o->satisfied = c->total.satisfied;
  o->probability = c->probability;
  o->lower = c->interval.lower;
  o->upper = c->interval.upper;
  if (!(o->samples > 0) &&
      !(c->req.exact == FG_EXACT_ONLY && isfinite(c->probability)))
    o->lower = o->upper = NAN;
  o->elapsed_ms = c->elapsed_ms;
  o->stopped_early = atomic_load(&c->stopped_early);
  o->forced = c->forced;
  return true;
}

fg_status fg_check_start(fg_pool *pool, fg_model *m,
                         const fg_check_request *req, fg_check **out,
                         fg_problem *p) {
  *out = NULL;
  if (req->decision_dims != m->decision_dims)
    return fg_problem_set(p, FG_EINTERNAL,
                          "request was parsed for another model");
  struct fg_check *c = calloc(1, sizeof *c);
  if (!c) return fg_problem_set(p, FG_ENOMEM, "out of memory");
  atomic_init(&c->refs, 1);
  atomic_init(&c->cancel_flag, false);
  atomic_init(&c->timeout_flag, false);
  atomic_init(&c->ending, false);
  atomic_init(&c->frozen, false);
  atomic_init(&c->stopped_early, false);
  atomic_init(&c->merged_chunks, 0);
  atomic_init(&c->snap_seq, 0);
  atomic_init(&c->snap_n, 0);
  atomic_init(&c->snap_sat, 0);
  atomic_init(&c->in_sample_count, 0);
  atomic_init(&c->in_sample_satisfied, 0);
  atomic_init(&c->in_sample_whole, false);
  atomic_init(&c->exact_whole, false);
  atomic_init(&c->state, FG_CHECK_QUEUED);
  pthread_cond_init(&c->done_cv, NULL);
  pthread_mutex_init(&c->end_mu, NULL);
  pthread_mutex_init(&c->merge_mu, NULL);
  c->pool = pool;
  c->model = fg_model_ref(m);
  fg_program_get_info(m->program, &c->info);
  c->req = *req;
  c->req.decision =
      calloc(m->decision_dims > 0 ? (size_t)m->decision_dims : 1, sizeof(double));
  c->setup_regs = calloc(c->info.nregs > 0 ? (size_t)c->info.nregs : 1,
                         sizeof(double));
  if (!c->req.decision || !c->setup_regs) goto oom;
  if (m->decision_dims > 0)
    memcpy(c->req.decision, req->decision,
           (size_t)m->decision_dims * sizeof(double));
  c->chunk = pool->chunk;
  c->nchunks = (req->samples + (uint64_t)c->chunk - 1) / (uint64_t)c->chunk;
  c->cs.lower = 0.0;
  c->cs.upper = 1.0;
  c->design = (fg_design)req->sampling;
  c->samples_requested = req->samples;
  if (req->exact == FG_EXACT_ONLY) {
    /* no simulation: no chunks (fg_exact_request_check refused every
     * member that would need one) */
    c->req.samples = 0;
    c->samples_requested = 0;
    c->nchunks = 0;
    c->req.keep_outcomes = false;
  }
  if (c->design == FG_DESIGN_ANTITHETIC) {
    c->req.samples = req->samples & ~1ull; /* whole pairs */
    c->nchunks = (c->req.samples + (uint64_t)c->chunk - 1) / (uint64_t)c->chunk;
  } else if (c->design != FG_DESIGN_MONTE_CARLO) {
    /* Whole replicates, each a multiple of FG_BLOCK samples when the
     * request is large enough (so blocks never straddle a replicate). */
    c->nrep = FG_DESIGN_REPLICATES;
    uint64_t per = req->samples / (uint64_t)c->nrep;
    if (per >= FG_BLOCK) per -= per % FG_BLOCK;
    c->rep_size = per;
    c->req.samples = per * (uint64_t)c->nrep;
    c->rep_sat = calloc((size_t)c->nrep, sizeof *c->rep_sat);
    c->rep_viol = calloc((size_t)c->nrep * ((size_t)c->info.nrows + 1),
                         sizeof *c->rep_viol);
    if (!c->rep_sat || !c->rep_viol) goto oom;
    if (!build_bounds(c, false, per, per)) goto oom;
  }
  if (req->stop_early) {
    if (!build_bounds(c, true, FG_CS_FIRST_ROUND, 0)) goto oom;
    c->next_look = FG_CS_FIRST_ROUND < c->req.samples ? FG_CS_FIRST_ROUND
                                                      : c->req.samples;
  }
  if (req->keep_outcomes) {
    c->outcomes = calloc((size_t)((req->samples + 63) / 64) + 1, sizeof(uint64_t));
    if (!c->outcomes) goto oom;
  }
  c->window = 2 * pool->nworkers + 2;
  if ((uint64_t)c->window > c->nchunks) c->window = (int)c->nchunks;
  if (c->window < 1) c->window = 1;
  c->slots = calloc((size_t)c->window, sizeof *c->slots);
  c->ready = calloc((size_t)c->window, sizeof *c->ready);
  if (!c->slots || !c->ready) goto oom;
  for (int i = 0; i < c->window; i++)
    if (fg_tally_init(&c->slots[i], c->info.nrows) != FG_OK) goto oom;
  if (fg_tally_init(&c->total, c->info.nrows) != FG_OK) goto oom;
  if (c->req.failing_count > 0) {
    int keep = c->req.failing_count < FG_FAILING_SCENARIOS_MAX
                   ? c->req.failing_count
                   : FG_FAILING_SCENARIOS_MAX;
    c->total.fail_keep = keep;
    for (int i = 0; i < c->window; i++) c->slots[i].fail_keep = keep;
  }
  if (req->explain && c->info.nuncertain > 0) {
    /* The sums' centre: sample 0 of the validation stream, a fixed point
     * near the inputs' bulk whatever the chunking. */
    int D = c->info.nuncertain;
    c->drv_centre = calloc((size_t)D, sizeof *c->drv_centre);
    double *buf = calloc((size_t)D * FG_BLOCK, sizeof *buf);
    fg_sample_scratch *w = fg_sample_scratch_new(m->sampler);
    if (c->drv_centre && buf && w) {
      fg_sampler_draw(m->sampler, w, req->seed, FG_STREAM_VALIDATION, 0, 1,
                      buf, FG_BLOCK);
      for (int j = 0; j < D; j++) {
        double v = buf[(size_t)j * FG_BLOCK];
        c->drv_centre[j] = isfinite(v) ? v : 0;
      }
    }
    fg_sample_scratch_free(w);
    free(buf);
    if (!c->drv_centre || fg_tally_drivers_init(&c->total, D, c->drv_centre))
      goto oom;
    for (int i = 0; i < c->window; i++)
      if (fg_tally_drivers_init(&c->slots[i], D, c->drv_centre)) goto oom;
  }
  if (c->design == FG_DESIGN_ANTITHETIC) {
    c->total.pairs = true;
    for (int i = 0; i < c->window; i++) c->slots[i].pairs = true;
  }
  c->t_start = fg_time_monotonic();
  if (req->max_seconds > 0) c->deadline = c->t_start + req->max_seconds;

  /* Setup stream: decisions in, deterministic values out. */
  for (int i = 0; i < c->info.ndecision; i++)
    c->setup_regs[c->info.decision_base + i] = c->req.decision[i];
  fg_program_run_setup(m->program, c->setup_regs);
  check_decisions(c);

  /* The exact path (exact.c): prepared here (half-rows, qualification,
   * factor rows: bounded by the size limits), computed by the check's
   * first task on the pool under its cancel flag and deadline. */
  c->exact.bad_row = -1;
  if (c->req.exact != FG_EXACT_OFF) {
    if (fg_exact_prepare(m, c->setup_regs, &c->exact_prep, &c->exact) != FG_OK)
      goto oom;
    if (c->exact.qualifies) {
      c->has_exact = true;
      c->exact_task = 1;
    } else if (c->req.exact == FG_EXACT_ONLY) {
      /* fg_request_parse refuses this first; a caller that skipped it */
      fg_status st = fg_exact_refusal(m, &c->exact, p);
      fg_check_free_internal(c);
      return st;
    }
  }

  /* The row plan (rowplan.c): affine rows in jointly normal inputs folded
   * with the inputs' factors, once, at these decisions. */
  bool plan_oom = false;
  c->plan = fg_rowplan_build(m, c->setup_regs, &plan_oom);
  if (plan_oom) goto oom;

  /* The in-sample evaluation is the check's first task on the pool, under
   * its cancel flag and deadline (never on the caller's thread). */
  c->has_in_sample = req->has_in_sample;
  c->in_sample_task = req->has_in_sample ? 1 : 0;

  pthread_mutex_lock(&pool->mu);
  if (pool->stopping || atomic_load(&pool->nchecks) >= pool->queue_cap) {
    bool stopping = pool->stopping;
    pthread_mutex_unlock(&pool->mu);
    fg_check_free_internal(c);
    return fg_problem_set(p, FG_EBUSY,
                          stopping ? "the server is shutting down"
                                   : "the check queue is full (%d checks); "
                                     "try again shortly",
                          pool->queue_cap);
  }
  atomic_fetch_add(&c->refs, 1); /* the pool's reference */
  if (pool->tail) pool->tail->next_in_pool = c;
  else pool->head = c;
  pool->tail = c;
  atomic_fetch_add(&pool->nchecks, 1);
  pthread_cond_broadcast(&pool->work_cv);
  pthread_mutex_unlock(&pool->mu);
  *out = c;
  return FG_OK;
oom:
  fg_check_free_internal(c);
  return fg_problem_set(p, FG_ENOMEM,
                        "out of memory setting up the check (%d rows, %d "
                        "registers)",
                        c->info.nrows, c->info.nregs);
}


bool fg_check_ended(fg_check *c) {
  return is_end(atomic_load_explicit(&c->state, memory_order_acquire));
}

bool fg_check_wait(fg_check *c, double timeout_s) {
  if (fg_check_ended(c)) return true;
  pthread_mutex_lock(&c->end_mu);
  if (timeout_s < 0) {
    while (!fg_check_ended(c)) pthread_cond_wait(&c->done_cv, &c->end_mu);
  } else {
    struct timespec ts;
    fg_clock_abs_deadline(&ts, timeout_s);
    while (!fg_check_ended(c))
      if (pthread_cond_timedwait(&c->done_cv, &c->end_mu, &ts) != 0) break;
  }
  pthread_mutex_unlock(&c->end_mu);
  return fg_check_ended(c);
}

void fg_check_cancel(fg_check *c) {
  fg_pool *pool = c->pool;
  if (!pool || fg_check_ended(c)) return;
  fg_pool_stop_check(pool, c);
}

fg_check_state fg_check_get_state(fg_check *c) {
  return (fg_check_state)atomic_load_explicit(&c->state, memory_order_acquire);
}

fg_verdict fg_check_get_verdict(fg_check *c) {
  return fg_check_ended(c) ? c->verdict : FG_VERDICT_INCONCLUSIVE;
}

fg_status fg_check_run_sync(fg_model *m, const fg_check_request *req,
                            int workers, int chunk, fg_check **out,
                            fg_problem *p) {
  fg_pool *pool;
  *out = NULL;
  fg_status st = fg_pool_new(workers, chunk, 1, &pool, p);
  if (st != FG_OK) return st;
  fg_check *c;
  st = fg_check_start(pool, m, req, &c, p);
  if (st == FG_OK) {
    fg_check_wait(c, -1);
    *out = c;
  }
  fg_pool_free(pool);
  /* The check outlives its pool; its state is final, so detach it. */
  if (*out) (*out)->pool = NULL;
  return st;
}
