/*
 * engine/pool.c -- the fixed worker pool, the scheduling of chunks and the
 * pool's clock.
 *
 * Design: N worker threads share one mutex (pool->mu) and one condition
 * variable. Checks wait in arrival order in a list; a worker takes the next
 * task of the first check that has one it may claim (its exact
 * computation first (exact.c), then its in-sample evaluation, then its
 * chunks), runs it without any lock, merges it
 * under the check's own merge_mu, and only then takes pool->mu again to
 * count itself out. A check's sample range is cut into chunks of
 * pool->chunk samples; chunk c covers samples [c*chunk, (c+1)*chunk).
 *
 * Ending: the thread that finds a check over (its last chunk merged, or
 * told to stop with no worker on it) marks it `ending` and unlinks it
 * under pool->mu, then finalises it (fg_check_finish: intervals, verdict,
 * rows) with no shared lock held. The clock thread looks every
 * FG_POOL_CLOCK_MS: a check past its deadline gets its timeout flag and
 * stops; a check told to stop whose workers have not come back within
 * FG_STUCK_WORKER_S ends without them (`forced`): its merged counts are
 * final, and the late worker, holding its own references, finds the check
 * ending and discards its result. So a deadline or a cancel holds even
 * when a worker is stuck in one long call.
 *
 * Order of merging: chunk results are merged strictly in chunk order. A
 * finished chunk waits in one of `window` slots until all earlier chunks
 * are merged; a worker may claim chunk c only while c < merged + window, so
 * the slots never overflow and memory stays bounded whatever the number of
 * samples. Because merging is in order, floating-point sums do not depend
 * on the number of workers, and counts depend on neither workers nor chunk
 * size.
 *
 * Locking rule: pool->mu guards the check list, every (pool) field of every
 * check, and the pool's counters (atomics, so probes read them without
 * it); nothing is computed under it. A worker holds no lock while it
 * simulates; it tests the check's cancel and timeout flags (atomics) once
 * per block (the exact task every FG_EXACT_POLL_WORK work units). Workers touch no HTTP or store state.
 *
 * Exit: fg_pool_free waits FG_POOL_EXIT_WAIT_S for the workers to leave;
 * a worker still stuck then is detached and the pool's memory is left to
 * it (kept reachable), so a stuck thread never blocks the process's exit.
 */
#include "engine/engine_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

fg_status fg_eval_ctx_prepare(fg_eval_ctx *e, const struct fg_check *c) {
  size_t need =
      ((size_t)c->info.nregs + (size_t)fg_rowplan_extra_regs(c->plan)) *
      FG_BLOCK;
  if (need == 0) need = FG_BLOCK;
  if (need > e->regs_cap) {
    free(e->regs);
    e->regs = NULL;
    e->regs_cap = 0;
    void *mem = NULL;
    if (posix_memalign(&mem, 64, need * sizeof(double)) != 0) return FG_ENOMEM;
    e->regs = mem;
    e->regs_cap = need;
  }
  free(e->excess);
  free(e->scratch);
  free(e->plan_ptrs);
  e->plan_ptrs = NULL;
  e->excess = calloc((size_t)c->info.nrows + 1, sizeof *e->excess);
  e->scratch = calloc(2 * FG_BLOCK, sizeof *e->scratch);
  fg_sample_scratch_free(e->sscratch);
  e->sscratch = fg_sample_scratch_new(c->model->sampler);
  if (!e->excess || !e->scratch || !e->sscratch) return FG_ENOMEM;
  memset(e->regs, 0, need * sizeof(double));
  fg_program_broadcast(c->model->program, c->setup_regs, e->regs);
  for (int r = 0; r < c->info.nrows; r++)
    e->excess[r] = e->regs + (size_t)c->info.rows[r].excess_reg * FG_BLOCK;
  if (c->plan) {
    e->plan_ptrs = malloc((size_t)fg_rowplan_nptrs(c->plan) * sizeof(double *));
    if (!e->plan_ptrs) return FG_ENOMEM;
    fg_rowplan_bind(c->plan,
                    e->regs + (size_t)c->info.uncertain_base * FG_BLOCK,
                    e->regs, e->plan_ptrs);
  }
  e->for_check = c;
  return FG_OK;
}

void fg_eval_ctx_free(fg_eval_ctx *e) {
  free(e->regs);
  free(e->excess);
  free(e->scratch);
  free(e->plan_ptrs);
  fg_sample_scratch_free(e->sscratch);
  memset(e, 0, sizeof *e);
}

bool fg_engine_run_range(const struct fg_check *c, fg_sample_scratch *w,
                         double *regs, const double **excess, int *scratch,
                         double *const *plan_ptrs, uint64_t seed, fg_stream stream, uint64_t first,
                         uint64_t count,
                         fg_tally *t, atomic_bool *cancel,
                         atomic_bool *timeout, uint64_t *outcomes) {
  const fg_program_info *in = &c->info;
  double *ureg = regs + (size_t)in->uncertain_base * FG_BLOCK;
  const double *obj = NULL;
  if (in->objective_reg >= 0 && !in->objective_deterministic)
    obj = regs + (size_t)in->objective_reg * FG_BLOCK;
  /* The row plan (rowplan.c) serves Monte Carlo draws: the folded inputs
   * are drawn raw, the rows come from one dense product, and the inputs'
   * values are finished only when the drivers read them. */
  bool plan = plan_ptrs && c->plan &&
              (c->design == FG_DESIGN_MONTE_CARLO ||
               stream != FG_STREAM_VALIDATION);
  const unsigned char *raw = plan ? fg_rowplan_raw(c->plan) : NULL;
  for (uint64_t done = 0; done < count;) {
    if (cancel && atomic_load_explicit(cancel, memory_order_relaxed))
      return false;
    if (stream == FG_STREAM_VALIDATION)
      (void)fg_fault_stall(seed, first + done,
                           (count - done) < FG_BLOCK ? (int)(count - done)
                                                     : FG_BLOCK);
    if (timeout) {
      if (atomic_load_explicit(timeout, memory_order_relaxed)) return false;
      if (c->deadline > 0 && fg_time_monotonic() > c->deadline) {
        atomic_store(timeout, true);
        return false;
      }
    }
    int n = (count - done) < FG_BLOCK ? (int)(count - done) : FG_BLOCK;
    if (plan) {
      fg_sampler_draw_raw(c->model->sampler, w, seed, stream, first + done, n,
                          raw, ureg, FG_BLOCK);
      fg_tally_inputs(t, ureg, in->nuncertain, FG_BLOCK, n, first + done);
      fg_rowplan_rows(c->plan, plan_ptrs, n);
      if (t->drv)
        fg_sampler_finish_raw(c->model->sampler, w, n, raw, ureg, FG_BLOCK);
    } else if (in->nuncertain > 0) {
      if (c->design == FG_DESIGN_MONTE_CARLO || stream != FG_STREAM_VALIDATION)
        fg_sampler_draw(c->model->sampler, w, seed, stream,
                        first + done, n, ureg, FG_BLOCK);
      else
        fg_sampler_draw_design(c->model->sampler, w, seed, stream,
                               c->design, c->rep_size, first + done, n, ureg,
                               FG_BLOCK);
      /* a non-finite draw is reported, never judged (check.c) */
      fg_tally_inputs(t, ureg, in->nuncertain, FG_BLOCK, n, first + done);
    }
    if (!plan) fg_program_run_block(c->model->program, regs, n);
    fg_tally_block(t, excess, n, first + done, obj, scratch);
    if (t->drv)
      fg_tally_drivers_block(t, ureg, FG_BLOCK, excess, scratch, n);
    if (outcomes) {
      /* Blocks start on multiples of 64 samples (chunk bounds are
       * multiples of FG_BLOCK), so each block owns whole words and
       * concurrent chunks never write the same word. */
      uint64_t base = first + done;
      for (int s = 0; s < n; s++)
        if (scratch[s] == 0)
          outcomes[(base + (uint64_t)s) >> 6] |= 1ull << ((base + (uint64_t)s) & 63);
    }
    done += (uint64_t)n;
  }
  return true;
}

/* The first check with a task that may be claimed now, or NULL. */
static struct fg_check *next_claimable(fg_pool *pool) {
  for (struct fg_check *c = pool->head; c; c = c->next_in_pool) {
    if (c->stop) continue;
    if (c->exact_task == 1 || c->in_sample_task == 1) return c;
    uint64_t merged = atomic_load(&c->merged_chunks);
    if (c->next_chunk < c->nchunks &&
        c->next_chunk < merged + (uint64_t)c->window)
      return c;
  }
  return NULL;
}

static void unlink_check(fg_pool *pool, struct fg_check *c) {
  struct fg_check **pp = &pool->head, *prev = NULL;
  while (*pp && *pp != c) {
    prev = *pp;
    pp = &(*pp)->next_in_pool;
  }
  if (!*pp) return;
  *pp = c->next_in_pool;
  if (pool->tail == c) pool->tail = prev;
  c->next_in_pool = NULL;
  atomic_fetch_sub(&pool->nchecks, 1);
}

static void set_stop(struct fg_check *c) {
  if (c->stop) return;
  c->stop = true;
  c->stop_at = fg_time_monotonic();
}

/* Under pool->mu: decide whether check c ends now; when it does, mark it
 * ending and unlink it, and the caller must call fg_check_finish(c)
 * after releasing pool->mu (the pool's reference passes to that call).
 * `force`: end it even with workers still on it (they are stuck). */
static bool claim_end(fg_pool *pool, struct fg_check *c, bool force) {
  if (atomic_load(&c->ending)) return false;
  bool all = atomic_load(&c->merged_chunks) == c->nchunks &&
             (c->in_sample_task == 0 || c->in_sample_task == 3) &&
             (c->exact_task == 0 || c->exact_task == 3);
  bool frozen = atomic_load(&c->frozen);
  if (!force) {
    if (frozen && c->active > 0) return false; /* wait for the last workers */
    if (!(all || frozen || (c->stop && c->active == 0))) return false;
  }
  c->forced = force && c->active > 0;
  set_stop(c);
  atomic_store(&c->ending, true);
  unlink_check(pool, c);
  return true;
}

void fg_pool_stop_check(fg_pool *pool, struct fg_check *c) {
  pthread_mutex_lock(&pool->mu);
  bool fin = false;
  if (!atomic_load(&c->ending)) {
    atomic_store(&c->cancel_flag, true);
    set_stop(c);
    fin = claim_end(pool, c, false);
    pthread_cond_signal(&pool->clock_cv);
  }
  pthread_mutex_unlock(&pool->mu);
  if (fin) fg_check_finish(c);
}

/* Run the in-sample evaluation of c (the design stream of its in-sample
 * seed) under its cancel flag and deadline; false when stopped. */
static bool run_in_sample(fg_eval_ctx *ctx, struct fg_check *c) {
  fg_tally t;
  if (fg_tally_init(&t, c->info.nrows) != FG_OK) return false;
  bool ok = fg_engine_run_range(c, ctx->sscratch, ctx->regs, ctx->excess,
                                ctx->scratch, ctx->plan_ptrs, c->req.in_sample_seed,
                                FG_STREAM_DESIGN, 0, c->req.in_sample_count,
                                &t, &c->cancel_flag, &c->timeout_flag, NULL);
  pthread_mutex_lock(&c->merge_mu);
  if (!atomic_load(&c->ending)) { /* else: late, discarded */
    c->in_sample_bad_draws = t.bad_draws;
    c->in_sample_bad_first = t.bad_draw_first;
    c->in_sample_bad_column = t.bad_draw_column;
    atomic_store(&c->in_sample_satisfied, t.satisfied);
    atomic_store(&c->in_sample_count, t.n);
    atomic_store(&c->in_sample_whole, ok);
  }
  pthread_mutex_unlock(&c->merge_mu);
  fg_tally_free(&t);
  return ok;
}

/* Under merge_mu: merge every chunk result that is next in order. */
static void merge_ready(struct fg_check *c) {
  uint64_t merged = atomic_load(&c->merged_chunks);
  while (merged < c->nchunks && !atomic_load(&c->frozen)) {
    int s = (int)(merged % (uint64_t)c->window);
    if (!c->ready[s]) break;
    fg_tally_merge(&c->total, &c->slots[s]);
    fg_check_merged_chunk_locked(c, merged, &c->slots[s]);
    c->ready[s] = false;
    merged++;
    atomic_store(&c->merged_chunks, merged);
    if (c->req.stop_early && fg_check_look_locked(c)) {
      atomic_store(&c->stopped_early, merged < c->nchunks);
      atomic_store(&c->frozen, true);
    }
  }
  fg_check_publish_progress(c);
}

static void *worker_main(void *arg) {
  fg_pool *pool = arg;
  int me = -1;
  fg_eval_ctx ctx = {0};
  struct fg_check *cur = NULL; /* check ctx was prepared for (ref held) */
  pthread_mutex_lock(&pool->mu);
  for (int i = 0; i < pool->nworkers; i++)
    if (pthread_equal(pool->threads[i], pthread_self())) me = i;
  for (;;) {
    struct fg_check *c;
    while (!(c = next_claimable(pool)) && !pool->stopping)
      pthread_cond_wait(&pool->work_cv, &pool->mu);
    if (!c) break;
    /* a check's exact task first, then its in-sample evaluation, then
     * its chunks */
    bool exact = c->exact_task == 1;
    bool in_sample = !exact && c->in_sample_task == 1;
    uint64_t idx = 0;
    if (exact)
      c->exact_task = 2;
    else if (in_sample)
      c->in_sample_task = 2;
    else
      idx = c->next_chunk++;
    c->active++;
    int expect = FG_CHECK_QUEUED;
    atomic_compare_exchange_strong(&c->state, &expect, FG_CHECK_RUNNING);
    atomic_fetch_add(&pool->busy, 1);
    atomic_fetch_add(&c->refs, 1);
    pthread_mutex_unlock(&pool->mu);

    bool ok = true;
    if (cur != c && !exact) {
      if (cur) fg_check_unref(cur);
      cur = c;
      atomic_fetch_add(&c->refs, 1);
      ok = fg_eval_ctx_prepare(&ctx, c) == FG_OK;
    }
    if (exact) {
      ok = fg_exact_task(c); /* exact.c; no lock held */
    } else if (in_sample) {
      if (ok) ok = run_in_sample(&ctx, c);
    } else {
      int slot = (int)(idx % (uint64_t)c->window);
      fg_tally *t = &c->slots[slot];
      fg_tally_reset(t);
      uint64_t first, count;
      fg_check_chunk_range(c, idx, &first, &count);
      if (ok)
        ok = fg_engine_run_range(c, ctx.sscratch, ctx.regs, ctx.excess,
                                 ctx.scratch, ctx.plan_ptrs, c->req.seed,
                                 FG_STREAM_VALIDATION, first, count, t,
                                 &c->cancel_flag, &c->timeout_flag,
                                 c->outcomes);
      if (ok) {
        pthread_mutex_lock(&c->merge_mu);
        if (!atomic_load(&c->ending)) { /* else: late, discarded */
          c->ready[slot] = true;
          merge_ready(c);
        }
        pthread_mutex_unlock(&c->merge_mu);
      }
    }

    pthread_mutex_lock(&pool->mu);
    atomic_fetch_sub(&pool->busy, 1);
    c->active--;
    if (in_sample) c->in_sample_task = 3;
    if (exact) c->exact_task = 3;
    if (!ok || atomic_load(&c->frozen)) set_stop(c);
    bool fin = claim_end(pool, c, false);
    pthread_cond_broadcast(&pool->work_cv);
    if (fin) {
      pthread_mutex_unlock(&pool->mu);
      fg_check_finish(c);
      pthread_mutex_lock(&pool->mu);
    }
    if (atomic_load(&c->ending) && cur == c) {
      /* Ended: let its memory go now rather than at the next switch. */
      pthread_mutex_unlock(&pool->mu);
      fg_check_unref(cur);
      cur = NULL;
      fg_check_unref(c); /* the task's reference */
      pthread_mutex_lock(&pool->mu);
      continue;
    }
    pthread_mutex_unlock(&pool->mu);
    fg_check_unref(c); /* the task's reference */
    pthread_mutex_lock(&pool->mu);
  }
  if (me >= 0) pool->exited[me] = true;
  pthread_cond_broadcast(&pool->exit_cv);
  pthread_mutex_unlock(&pool->mu);
  if (cur) fg_check_unref(cur);
  fg_eval_ctx_free(&ctx);
  return NULL;
}


/* The pool's clock: deadlines and stuck workers. */
static void *clock_main(void *arg) {
  fg_pool *pool = arg;
  pthread_mutex_lock(&pool->mu);
  while (!pool->clock_stop) {
    struct fg_check *end[FG_POOL_CLOCK_BATCH];
    int nend = 0;
    double now = fg_time_monotonic();
    for (struct fg_check *c = pool->head, *n; c && nend < FG_POOL_CLOCK_BATCH;
         c = n) {
      n = c->next_in_pool;
      if (c->deadline > 0 && now > c->deadline &&
          !atomic_load(&c->timeout_flag) && !atomic_load(&c->cancel_flag)) {
        atomic_store(&c->timeout_flag, true);
        set_stop(c);
      }
      if (!c->stop) continue;
      bool stuck = c->active > 0 && now - c->stop_at >= FG_STUCK_WORKER_S;
      if (claim_end(pool, c, stuck)) end[nend++] = c;
    }
    if (nend > 0) {
      pthread_cond_broadcast(&pool->work_cv);
      pthread_mutex_unlock(&pool->mu);
      for (int i = 0; i < nend; i++) fg_check_finish(end[i]);
      pthread_mutex_lock(&pool->mu);
      continue;
    }
    struct timespec ts;
    fg_clock_abs_deadline(&ts, FG_POOL_CLOCK_MS / 1000.0);
    pthread_cond_timedwait(&pool->clock_cv, &pool->mu, &ts);
  }
  pthread_mutex_unlock(&pool->mu);
  return NULL;
}

fg_status fg_pool_new(int workers, int chunk, int queue, fg_pool **out,
                      fg_problem *p) {
  *out = NULL;
  if (workers < 1 || workers > FG_WORKERS_MAX)
    return fg_problem_set(p, FG_EINVAL, "workers must be 1 to %d, found %d",
                          FG_WORKERS_MAX, workers);
  if (chunk < FG_CHUNK_MIN || chunk > FG_CHUNK_MAX || chunk % FG_BLOCK != 0)
    return fg_problem_set(p, FG_EINVAL,
                          "chunk must be a multiple of %d from %d to %d, "
                          "found %d",
                          FG_BLOCK, FG_CHUNK_MIN, FG_CHUNK_MAX, chunk);
  if (queue < 1)
    return fg_problem_set(p, FG_EINVAL, "queue must be at least 1, found %d",
                          queue);
  fg_pool *pool = calloc(1, sizeof *pool);
  if (!pool) return fg_problem_set(p, FG_ENOMEM, "out of memory");
  pthread_mutex_init(&pool->mu, NULL);
  pthread_cond_init(&pool->work_cv, NULL);
  pthread_cond_init(&pool->exit_cv, NULL);
  pthread_cond_init(&pool->clock_cv, NULL);
  atomic_init(&pool->nchecks, 0);
  atomic_init(&pool->busy, 0);
  pool->nworkers = workers;
  pool->chunk = chunk;
  pool->queue_cap = queue;
  pool->threads = calloc((size_t)workers, sizeof *pool->threads);
  pool->exited = calloc((size_t)workers, sizeof *pool->exited);
  if (!pool->threads || !pool->exited) {
    fg_pool_free(pool);
    return fg_problem_set(p, FG_ENOMEM, "out of memory");
  }
  /* Workers look themselves up in pool->threads: start them under mu. */
  pthread_mutex_lock(&pool->mu);
  for (int i = 0; i < workers; i++) {
    if (pthread_create(&pool->threads[i], NULL, worker_main, pool) != 0) {
      pthread_mutex_unlock(&pool->mu);
      fg_pool_free(pool);
      return fg_problem_set(p, FG_EIO, "cannot start worker thread %d", i);
    }
    pool->nthreads_started++;
  }
  pthread_mutex_unlock(&pool->mu);
  if (pthread_create(&pool->clock, NULL, clock_main, pool) != 0) {
    fg_pool_free(pool);
    return fg_problem_set(p, FG_EIO, "cannot start the pool's clock thread");
  }
  pool->clock_started = true;
  *out = pool;
  return FG_OK;
}

static fg_pool *abandoned[FG_POOL_ABANDONED_MAX];
static atomic_int nabandoned;

void fg_pool_free(fg_pool *pool) {
  if (!pool) return;
  pthread_mutex_lock(&pool->mu);
  pool->stopping = true;
  struct fg_check *end[FG_POOL_CLOCK_BATCH];
  int nend = 0;
  for (struct fg_check *c = pool->head, *n; c; c = n) {
    n = c->next_in_pool;
    atomic_store(&c->cancel_flag, true);
    set_stop(c);
    /* Checks nobody works on end now; the others when their worker
     * returns, or by the clock when it is stuck. */
    if (nend < FG_POOL_CLOCK_BATCH && claim_end(pool, c, false))
      end[nend++] = c;
  }
  pthread_cond_broadcast(&pool->work_cv);
  pthread_cond_signal(&pool->clock_cv);
  pthread_mutex_unlock(&pool->mu);
  for (int i = 0; i < nend; i++) fg_check_finish(end[i]);

  /* Wait for the workers to leave, bounded. */
  pthread_mutex_lock(&pool->mu);
  struct timespec ts;
  fg_clock_abs_deadline(&ts, FG_POOL_EXIT_WAIT_S);
  int left;
  for (;;) {
    left = 0;
    for (int i = 0; i < pool->nthreads_started; i++) left += !pool->exited[i];
    if (left == 0) break;
    if (pthread_cond_timedwait(&pool->exit_cv, &pool->mu, &ts) != 0) break;
  }
  /* Whatever is still listed has a stuck worker: end it now. */
  nend = 0;
  for (struct fg_check *c = pool->head, *n; c && nend < FG_POOL_CLOCK_BATCH;
       c = n) {
    n = c->next_in_pool;
    if (claim_end(pool, c, true)) end[nend++] = c;
  }
  pool->clock_stop = true;
  pthread_cond_signal(&pool->clock_cv);
  bool exited[FG_WORKERS_MAX];
  for (int i = 0; i < pool->nthreads_started; i++) exited[i] = pool->exited[i];
  pthread_mutex_unlock(&pool->mu);
  for (int i = 0; i < nend; i++) fg_check_finish(end[i]);
  if (pool->clock_started) pthread_join(pool->clock, NULL);
  for (int i = 0; i < pool->nthreads_started; i++) {
    if (exited[i])
      pthread_join(pool->threads[i], NULL);
    else
      pthread_detach(pool->threads[i]);
  }
  if (left > 0) {
    int k = atomic_fetch_add(&nabandoned, 1);
    if (k < FG_POOL_ABANDONED_MAX) abandoned[k] = pool;
    return; /* the stuck workers keep the pool */
  }
  free(pool->threads);
  free(pool->exited);
  pthread_cond_destroy(&pool->work_cv);
  pthread_cond_destroy(&pool->exit_cv);
  pthread_cond_destroy(&pool->clock_cv);
  pthread_mutex_destroy(&pool->mu);
  free(pool);
}

int fg_pool_workers(const fg_pool *pool) {
  return pool->nworkers;
}

/* Probes and metrics: atomics, never the pool's lock. */
int fg_pool_busy(const fg_pool *pool) {
  return atomic_load(&((fg_pool *)pool)->busy);
}

int fg_pool_queued(const fg_pool *pool) {
  return atomic_load(&((fg_pool *)pool)->nchecks);
}
