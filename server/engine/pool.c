/*
 * engine/pool.c -- the fixed worker pool and the scheduling of chunks.
 *
 * Design: N worker threads share one mutex (pool->mu) and one condition
 * variable. Checks wait in arrival order in a list; a worker takes the next
 * chunk of the first check that has one it may claim, runs it without any
 * lock, then merges it. A check's sample range is cut into chunks of
 * pool->chunk samples; chunk c covers samples [c*chunk, (c+1)*chunk).
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
 * check, and pool->busy/stopping. A worker holds no lock while it simulates;
 * it tests the check's cancel and timeout flags (atomics) once per block.
 * Workers touch no HTTP or store state.
 */
#include "engine/engine_internal.h"

#include <stdlib.h>
#include <string.h>
#include <unistd.h>

fg_status fg_eval_ctx_prepare(fg_eval_ctx *e, const struct fg_check *c) {
  size_t need = (size_t)c->info.nregs * FG_BLOCK;
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
  e->excess = calloc((size_t)c->info.nrows + 1, sizeof *e->excess);
  e->scratch = calloc(2 * FG_BLOCK, sizeof *e->scratch);
  fg_sample_scratch_free(e->sscratch);
  e->sscratch = fg_sample_scratch_new(c->model->sampler);
  if (!e->excess || !e->scratch || !e->sscratch) return FG_ENOMEM;
  memset(e->regs, 0, need * sizeof(double));
  fg_program_broadcast(c->model->program, c->setup_regs, e->regs);
  for (int r = 0; r < c->info.nrows; r++)
    e->excess[r] = e->regs + (size_t)c->info.rows[r].excess_reg * FG_BLOCK;
  e->for_check = c;
  return FG_OK;
}

void fg_eval_ctx_free(fg_eval_ctx *e) {
  free(e->regs);
  free(e->excess);
  free(e->scratch);
  fg_sample_scratch_free(e->sscratch);
  memset(e, 0, sizeof *e);
}

bool fg_engine_run_range(const struct fg_check *c, fg_sample_scratch *w,
                         double *regs, const double **excess, int *scratch,
                         uint64_t seed, fg_stream stream, uint64_t first,
                         uint64_t count,
                         fg_tally *t, atomic_bool *cancel,
                         atomic_bool *timeout, uint64_t *outcomes) {
  const fg_program_info *in = &c->info;
  double *ureg = regs + (size_t)in->uncertain_base * FG_BLOCK;
  const double *obj = NULL;
  if (in->objective_reg >= 0 && !in->objective_deterministic)
    obj = regs + (size_t)in->objective_reg * FG_BLOCK;
  for (uint64_t done = 0; done < count;) {
    if (cancel && atomic_load_explicit(cancel, memory_order_relaxed))
      return false;
    if (timeout) {
      if (atomic_load_explicit(timeout, memory_order_relaxed)) return false;
      if (c->deadline > 0 && fg_time_monotonic() > c->deadline) {
        atomic_store(timeout, true);
        return false;
      }
    }
    int n = (count - done) < FG_BLOCK ? (int)(count - done) : FG_BLOCK;
    if (in->nuncertain > 0) {
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
    fg_program_run_block(c->model->program, regs, n);
    fg_tally_block(t, excess, n, first + done, obj, scratch);
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

/* The first check with a chunk that may be claimed now, or NULL. */
static struct fg_check *next_claimable(fg_pool *pool) {
  for (struct fg_check *c = pool->head; c; c = c->next_in_pool) {
    if (c->stop) continue;
    if (c->next_chunk < c->nchunks &&
        c->next_chunk < c->merged_chunks + (uint64_t)c->window)
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
  pool->nchecks--;
}

/* Called under pool->mu when a check may have ended. */
static void maybe_end(fg_pool *pool, struct fg_check *c) {
  bool all = c->merged_chunks == c->nchunks;
  if (c->frozen && c->active > 0) return; /* wait for the last workers */
  if (!(all || (c->stop && c->active == 0))) return;
  if (c->state != FG_CHECK_QUEUED && c->state != FG_CHECK_RUNNING) return;
  if (all || c->frozen) c->state = FG_CHECK_DONE;
  else if (atomic_load(&c->timeout_flag)) c->state = FG_CHECK_TIMED_OUT;
  else c->state = FG_CHECK_CANCELLED;
  fg_check_finalize_locked(c);
  unlink_check(pool, c);
  pthread_cond_broadcast(&c->done_cv);
  fg_check_unref(c); /* the pool's reference */
}

void fg_pool_check_ended_locked(fg_pool *pool, struct fg_check *c) {
  maybe_end(pool, c);
}

static void *worker_main(void *arg) {
  fg_pool *pool = arg;
  fg_eval_ctx ctx = {0};
  struct fg_check *cur = NULL; /* check ctx was prepared for (ref held) */
  pthread_mutex_lock(&pool->mu);
  for (;;) {
    struct fg_check *c;
    while (!(c = next_claimable(pool)) && !pool->stopping)
      pthread_cond_wait(&pool->work_cv, &pool->mu);
    if (!c) break;
    uint64_t idx = c->next_chunk++;
    c->active++;
    if (c->state == FG_CHECK_QUEUED) c->state = FG_CHECK_RUNNING;
    pool->busy++;
    atomic_fetch_add(&c->refs, 1);
    pthread_mutex_unlock(&pool->mu);

    bool ok = true;
    if (cur != c) {
      if (cur) fg_check_unref(cur);
      cur = c;
      atomic_fetch_add(&c->refs, 1);
      ok = fg_eval_ctx_prepare(&ctx, c) == FG_OK;
    }
    int slot = (int)(idx % (uint64_t)c->window);
    fg_tally *t = &c->slots[slot];
    fg_tally_reset(t);
    uint64_t first, count;
    fg_check_chunk_range(c, idx, &first, &count);
    if (ok)
      ok = fg_engine_run_range(c, ctx.sscratch, ctx.regs, ctx.excess,
                               ctx.scratch, c->req.seed, FG_STREAM_VALIDATION,
                               first, count,
                               t, &c->cancel_flag, &c->timeout_flag,
                               c->outcomes);

    pthread_mutex_lock(&pool->mu);
    pool->busy--;
    c->active--;
    if (ok) {
      c->ready[slot] = true;
      while (c->merged_chunks < c->nchunks && !c->frozen) {
        int s = (int)(c->merged_chunks % (uint64_t)c->window);
        if (!c->ready[s]) break;
        fg_tally_merge(&c->total, &c->slots[s]);
        fg_check_merged_chunk_locked(c, c->merged_chunks, &c->slots[s]);
        c->ready[s] = false;
        c->merged_chunks++;
        if (c->req.stop_early && fg_check_look_locked(c)) {
          c->frozen = true;
          c->stop = true;
          c->stopped_early = c->merged_chunks < c->nchunks;
        }
      }
    } else {
      c->stop = true;
    }
    maybe_end(pool, c);
    pthread_cond_broadcast(&pool->work_cv);
    if (c->state != FG_CHECK_QUEUED && c->state != FG_CHECK_RUNNING &&
        cur == c) {
      /* Ended: let its memory go now rather than at the next switch. */
      fg_check_unref(cur);
      cur = NULL;
    }
    fg_check_unref(c); /* the chunk's reference */
  }
  pthread_mutex_unlock(&pool->mu);
  if (cur) fg_check_unref(cur);
  fg_eval_ctx_free(&ctx);
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
  pool->nworkers = workers;
  pool->chunk = chunk;
  pool->queue_cap = queue;
  pool->threads = calloc((size_t)workers, sizeof *pool->threads);
  if (!pool->threads) {
    fg_pool_free(pool);
    return fg_problem_set(p, FG_ENOMEM, "out of memory");
  }
  for (int i = 0; i < workers; i++) {
    if (pthread_create(&pool->threads[i], NULL, worker_main, pool) != 0) {
      fg_pool_free(pool);
      return fg_problem_set(p, FG_EIO, "cannot start worker thread %d", i);
    }
    pool->nthreads_started++;
  }
  *out = pool;
  return FG_OK;
}

void fg_pool_free(fg_pool *pool) {
  if (!pool) return;
  pthread_mutex_lock(&pool->mu);
  pool->stopping = true;
  for (struct fg_check *c = pool->head; c; c = c->next_in_pool) {
    atomic_store(&c->cancel_flag, true);
    c->stop = true;
  }
  /* Checks nobody works on end now; the others end when their worker
   * returns. */
  for (struct fg_check *c = pool->head, *n; c; c = n) {
    n = c->next_in_pool;
    maybe_end(pool, c);
  }
  pthread_cond_broadcast(&pool->work_cv);
  pthread_mutex_unlock(&pool->mu);
  for (int i = 0; i < pool->nthreads_started; i++)
    pthread_join(pool->threads[i], NULL);
  free(pool->threads);
  pthread_cond_destroy(&pool->work_cv);
  pthread_mutex_destroy(&pool->mu);
  free(pool);
}

int fg_pool_workers(const fg_pool *pool) {
  return pool->nworkers;
}

int fg_pool_busy(const fg_pool *pool) {
  fg_pool *pp = (fg_pool *)pool;
  pthread_mutex_lock(&pp->mu);
  int b = pp->busy;
  pthread_mutex_unlock(&pp->mu);
  return b;
}

int fg_pool_queued(const fg_pool *pool) {
  fg_pool *pp = (fg_pool *)pool;
  pthread_mutex_lock(&pp->mu);
  int n = pp->nchecks;
  pthread_mutex_unlock(&pp->mu);
  return n;
}
