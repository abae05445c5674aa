/*
 * engine/engine_internal.h -- what the engine's files share.
 *
 * check.c owns the fg_check's statistics, waiting and cancelling;
 * pool.c owns the worker threads, the scheduling of chunks and the pool's
 * clock (deadlines, stuck workers); request.c parses requests; result.c
 * writes result bodies; fault.c is the test-only fault seam.
 *
 * The locking rule (no lock a reader needs is held across work):
 *   (pool)  fields are read and written only under pool->mu, which guards
 *           scheduling bookkeeping alone: claiming a chunk, counting
 *           workers, deciding that a check ends. Nothing is computed
 *           under it.
 *   (merge) fields are read and written only under the check's merge_mu,
 *           by the workers of that check (merging tallies in chunk order,
 *           looks at the confidence sequence) and by the thread that
 *           finalises it. No reader, probe or metric ever takes merge_mu.
 *   (atomic) fields are read without a lock: the progress snapshot (a
 *           seqlock written at each merge), the state (an end state is
 *           stored with release order after every final figure is
 *           written, so a reader that loads it with acquire order reads
 *           the final figures without a lock), flags.
 *   The rest is set before the check is queued and never changes.
 * Lock order: merge_mu and pool->mu are never held together; end_mu only
 * guards the wait for the end (done_cv) and is taken with no other lock.
 */
#ifndef FG_ENGINE_INTERNAL_H
#define FG_ENGINE_INTERNAL_H

#include "estimate/estimate.h"
#include "expr/expr.h"
#include "feasgate/engine.h"
#include "sample/sample.h"

#include <pthread.h>
#include <stdatomic.h>

typedef struct fg_rowplan fg_rowplan; /* rowplan.c */

typedef struct fg_det_problem {
  char name[FG_ROW_NAME_MAX];
  char message[192];
} fg_det_problem;

/* Drivers of one row (or the joint): the input components whose mean
 * over the violating samples is furthest from their overall mean, in
 * overall standard deviations, largest |shift| first. known is false
 * when no sample violated (the result shows null). */
typedef struct fg_drivers {
  bool known;
  int n;
  int col[FG_DRIVERS_LISTED]; /* sampler column */
  double shift[FG_DRIVERS_LISTED];
} fg_drivers;

/* Per-row figures computed when a check ends. */
typedef struct fg_row_result {
  int row; /* index into the program's rows */
  uint64_t violated, sole, nonfinite, infinite;
  double probability; /* violation probability */
  fg_interval interval;
  double excess_mean, excess_mean_if_violated, excess_p95, excess_max;
  /* The least loosening of this row's limit that makes it alone hold in
   * a fraction >= target of the samples: 0 when it already does; NAN
   * when no finite loosening can (NaN or +inf excess in too many). */
  double slack_to_target;
  fg_drivers drivers; /* with req.explain */
} fg_row_result;

/* exact.c: the exact path's answer for one check. */
typedef struct fg_exact_result {
  bool qualifies;       /* the model qualifies here; with the task done,
                           the figures below are set */
  char why[320];        /* why not (or why no answer), else "" */
  char where[FG_POINTER_MAX]; /* pointer into the model (or "/exact" for a
                                 limit) of what does not qualify */
  int where_col;        /* column in that expression; 0 none */
  bool over_limit;      /* a size limit was passed: */
  fg_limit limit;       /* which one */
  double limit_value;
  int bad_row;          /* first non-qualifying row, or -1 */
  double probability, error;
  int rank, rounds;
  uint64_t points;
  bool converged;
  const char *method;
  double *row_probability; /* per row: exact violation probability */
  double *row_error;
  double elapsed_ms; /* time the computation took (its pool task) */
} fg_exact_result;

/* What fg_exact_prepare leaves for the pool task: nh half-rows of
 * (c, g) over nu inputs, their rows, the inputs' means and factor rows
 * (nu x nu, row j: u_j's coefficients on e). */
typedef struct fg_exact_prep {
  int nh, nu;
  double *form;
  int *row_of;
  double *mean, *L;
} fg_exact_prep;

const char *fg_exact_mode_name(fg_exact_mode m);
/* The calling thread's part (see exact.c): FG_OK also when the model does
 * not qualify (out->qualifies false, why / where / limit set; prep left
 * empty). */
fg_status fg_exact_prepare(const fg_model *m, const double *setup_regs,
                           fg_exact_prep *prep, fg_exact_result *out);
void fg_exact_prep_free(fg_exact_prep *p);
/* The computation from a prepared system into out's figures; FG_ECANCELLED
 * when the poll stopped it. */
fg_status fg_exact_run(const fg_model *m, const fg_exact_prep *prep,
                       uint64_t seed, const fg_mvn_poll *poll,
                       fg_exact_result *out);
/* The check's exact task on the pool (no lock held): false when the
 * check's cancel flag or deadline stopped it. */
struct fg_check;
bool fg_exact_task(struct fg_check *c);
/* The 400 of "exact": "only" for a model that does not qualify. */
fg_status fg_exact_refusal(const fg_model *m, const fg_exact_result *e,
                           fg_problem *p);
void fg_exact_result_free(fg_exact_result *r);

struct fg_check {
  /* The exact path (exact.c): prepared by fg_check_start; the figures are
   * written by its pool task under merge_mu (read once ended). */
  fg_exact_result exact;
  fg_exact_prep exact_prep;
  bool has_exact;           /* the exact task exists (set before queueing) */
  int exact_task;           /* (pool) 0 none, 1 waiting, 2 running, 3 ended */
  atomic_bool exact_whole;  /* the task computed its answer */
  fg_rowplan *plan;         /* rowplan.c; NULL: the block stream */
  atomic_int refs;
  struct fg_pool *pool;
  fg_model *model;
  fg_program_info info;
  fg_check_request req; /* own copy; decision owned */
  int chunk;
  uint64_t nchunks;
  /* With stop_early, chunk c covers [bounds[c], bounds[c+1]): the regular
   * chunk grid with the look points FG_CS_FIRST_ROUND * 2^j added, so the
   * sequence is looked at in the same places whatever the chunk size.
   * NULL otherwise (chunk c covers [c*chunk, (c+1)*chunk)). */
  uint64_t *bounds;
  uint64_t next_look; /* (merge) next look point; 0 when none is left */
  uint64_t *outcomes; /* with keep_outcomes: one bit per sample */
  fg_design design;    /* how the inputs are drawn */
  uint64_t samples_requested; /* req.samples as asked; req.samples is what
                                 the design uses (pairs, whole replicates) */
  uint64_t rep_size;   /* samples per replicate (LHS, Sobol); 0 otherwise */
  int nrep;
  uint64_t *rep_sat;   /* (merge) satisfied per replicate */
  uint64_t *rep_viol;  /* (merge) violations per replicate and row */
  double *setup_regs; /* info.nregs values after the setup stream */

  int ndet;          /* deterministic problems (bounds, rows) */
  int ndet_dropped;
  fg_det_problem det[FG_DET_PROBLEMS_MAX];

  /* In-sample evaluation: one task on the pool, run before or beside the
   * chunks under the same cancel flag and deadline; its counts are
   * (atomic) so a running check's body can show them once written. */
  bool has_in_sample;
  int in_sample_task; /* (pool) 0 none, 1 waiting, 2 running, 3 ended */
  atomic_bool in_sample_whole; /* it evaluated every scenario asked for */
  _Atomic uint64_t in_sample_satisfied, in_sample_count;
  /* (merge) non-finite draws of the in-sample evaluation (design
   * stream), written by its task under merge_mu; read once ended */
  uint64_t in_sample_bad_draws, in_sample_bad_first;
  int in_sample_bad_column;

  double t_start, deadline; /* monotonic seconds; deadline 0 = none */

  /* (pool) scheduling */
  struct fg_check *next_in_pool;
  uint64_t next_chunk;
  int active;     /* workers on a task of this check now */
  bool stop;      /* no more tasks will be claimed */
  double stop_at; /* monotonic seconds stop was set */
  bool forced;    /* ended while a worker was still on it (stuck) */
  atomic_bool ending; /* (pool writes) the end is decided; set once */
  _Atomic uint64_t merged_chunks; /* (merge writes) read for claiming */
  atomic_bool frozen; /* (merge writes) decided early: no more merges */

  /* (merge) merging */
  pthread_mutex_t merge_mu;
  int window;   /* chunk results that may wait for merging */
  fg_tally *slots;
  bool *ready;
  fg_tally total;
  atomic_bool stopped_early;
  fg_interval cs; /* (merge) running intersection of the sequence */
  atomic_bool cancel_flag;
  atomic_bool timeout_flag;

  /* (atomic) progress snapshot: a seqlock over samples merged and
   * satisfied among them, written at each merge (odd seq: being written) */
  atomic_uint snap_seq;
  _Atomic uint64_t snap_n, snap_sat;

  /* (atomic) fg_check_state; end states published after the results */
  atomic_int state;
  pthread_mutex_t end_mu;
  pthread_cond_t done_cv;

  /* (merge) results, valid once state is an end state */
  double elapsed_ms;
  fg_verdict verdict;
  fg_interval interval;
  double probability, std_error;
  fg_row_result *rows; /* sorted worst first */
  double *drv_centre;  /* with req.explain: sample 0's draw, per column */
  fg_drivers joint_drivers;
  double objective;
  bool has_objective;
  double samples_to_settle;
};

struct fg_pool {
  pthread_mutex_t mu;
  pthread_cond_t work_cv;
  pthread_cond_t exit_cv;  /* a worker left (fg_pool_free waits on it) */
  pthread_cond_t clock_cv; /* wakes the clock early (stopping) */
  int nworkers;
  pthread_t *threads;
  bool *exited; /* (pool) per worker: it has left its loop */
  int nthreads_started;
  pthread_t clock;
  bool clock_started;
  int chunk;
  int queue_cap;
  struct fg_check *head, *tail; /* checks not yet ending, in arrival order */
  /* (pool writes, read without the lock by probes and metrics) */
  atomic_int nchecks;
  atomic_int busy;
  bool stopping;
  bool clock_stop;
};

/* pool.c: ask check c to stop (cancel: the cancel flag; else the timeout
 * flag is already set) and end it at once when no worker is on it. Takes
 * pool->mu itself; finalises outside it. */
void fg_pool_stop_check(struct fg_pool *pool, struct fg_check *c);

/* check.c */
/* The end-of-run figures of a check whose end was decided: state from the
 * flags, intervals, verdict, rows. Called with no shared lock held (it
 * takes the check's merge_mu), then the end state is published and
 * done_cv broadcast. */
void fg_check_finish(struct fg_check *c);
void fg_check_free_internal(struct fg_check *c);
/* The seqlock snapshot: write (under merge_mu) and read (no lock). */
void fg_check_publish_progress(struct fg_check *c);
/* The interval a running check shows: Clopper-Pearson on the snapshot,
 * computed by the reader, outside any shared lock. */
fg_interval fg_check_live_interval(const struct fg_check *c, uint64_t k,
                                   uint64_t n);

/* fault.c: the test-only fault seam (FG_FAULTS builds; no-ops otherwise).
 * fg_fault_stall: true when the block at sample `first` of `seed` is the
 * one armed to stall (the caller then stalls forever, ignoring flags).
 * fg_fault_slow_interval: sleeps the armed time when `seed` is armed. */
bool fg_fault_stall(uint64_t seed, uint64_t first, int n);
void fg_fault_slow_interval(uint64_t seed);

/* Run samples [first, first + count) of (seed, stream) into `t` with a private
 * register file `regs` (info.nregs * FG_BLOCK doubles plus the row plan's
 * extra registers, already broadcast); `plan_ptrs`: the check's row plan
 * bound to `regs` (NULL: none). Stops early (returning false) when `cancel` or `timeout` becomes true or
 * the deadline passes. */
bool fg_engine_run_range(const struct fg_check *c, fg_sample_scratch *w,
                         double *regs, const double **excess, int *scratch,
                         double *const *plan_ptrs,
                         uint64_t seed, fg_stream stream, uint64_t first,
                         uint64_t count,
                         fg_tally *t, atomic_bool *cancel,
                         atomic_bool *timeout, uint64_t *outcomes);
/* Sample range of chunk idx. */
void fg_check_chunk_range(const struct fg_check *c, uint64_t idx,
                          uint64_t *first, uint64_t *count);
/* Under merge_mu after a merge: look at the confidence sequence if a look
 * point was reached; true when the check is decided. */
bool fg_check_look_locked(struct fg_check *c);
/* Under merge_mu when chunk idx is merged: per-replicate counts. */
void fg_check_merged_chunk_locked(struct fg_check *c, uint64_t idx,
                                  const fg_tally *t);

/* rowplan.c: a check's row plan (see its top comment). NULL when the
 * check does not qualify (or, with *oom set, out of memory). */
fg_rowplan *fg_rowplan_build(const fg_model *m, const double *setup_regs,
                             bool *oom);
void fg_rowplan_free(fg_rowplan *p);
/* Registers (FG_BLOCK doubles each) the plan needs after the program's
 * nregs, and pointers a binding takes. */
int fg_rowplan_extra_regs(const fg_rowplan *p);
int fg_rowplan_nptrs(const fg_rowplan *p);
/* Per dimension: drawn raw (pass to fg_sampler_draw_raw / finish_raw). */
const unsigned char *fg_rowplan_raw(const fg_rowplan *p);
/* Points ptrs (fg_rowplan_nptrs of them) at the raw draw `u` (dimension j
 * at u + j * FG_BLOCK) and the register file `regs` (nregs + extra
 * registers) of one thread. */
void fg_rowplan_bind(const fg_rowplan *p, const double *u, double *regs,
                     double **ptrs);
/* Every uncertain row's excess register for lanes [0, n). */
void fg_rowplan_rows(const fg_rowplan *p, double *const *ptrs, int n);
/* Tests: true makes fg_rowplan_build return NULL (the block stream). */
void fg_rowplan_force_off(bool off);

/* Per-thread evaluation state for one check. */
typedef struct fg_eval_ctx {
  double *regs;
  size_t regs_cap; /* doubles */
  const double **excess;
  int *scratch;
  fg_sample_scratch *sscratch;
  double **plan_ptrs; /* the check's row plan bound to regs, or NULL */
  const struct fg_check *for_check;
} fg_eval_ctx;

fg_status fg_eval_ctx_prepare(fg_eval_ctx *e, const struct fg_check *c);
void fg_eval_ctx_free(fg_eval_ctx *e);

#endif
