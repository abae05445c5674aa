/*
 * feasgate/engine.h -- checking a candidate decision against a compiled
 * model (prefixes fg_pool_, fg_check_, fg_request_).
 *
 * The HTTP handlers and the offline command use exactly this interface:
 *   1. fg_request_parse()  -- validate a check request body against a model;
 *   2. fg_check_start()    -- queue the simulation on the worker pool;
 *   3. fg_check_wait()     -- wait (bounded) for it to end;
 *   4. fg_check_result_json() -- the API's result body.
 * A check runs its samples in chunks on the pool's fixed workers; chunk
 * tallies are merged in chunk order, so counts are independent of the
 * number of workers and of the chunk size, and floating-point sums are
 * independent of the number of workers.
 *
 * Thread use: every function may be called from any thread. A fg_check is
 * reference counted (the pool holds one reference while it runs, and a
 * worker one per task, so a worker that is late -- stuck in one long call
 * after its check ended -- still writes to valid memory). Reading a
 * check's state, progress, outcome or result body never waits for a
 * worker: progress is a snapshot the workers publish at each merge, and
 * end figures are published once, before the end state.
 */
#ifndef FEASGATE_ENGINE_H
#define FEASGATE_ENGINE_H

#include "feasgate/clock.h"
#include "feasgate/model.h"
#include "feasgate/status.h"

#include <stdbool.h>
#include <stdint.h>

struct cJSON;

typedef enum fg_interval_method {
  FG_INTERVAL_CLOPPER_PEARSON = 0,
  FG_INTERVAL_WILSON,
  FG_INTERVAL_JEFFREYS
} fg_interval_method;

typedef enum fg_sampling {
  FG_SAMPLING_MONTE_CARLO = 0,
  FG_SAMPLING_ANTITHETIC,
  FG_SAMPLING_LATIN_HYPERCUBE,
  FG_SAMPLING_SOBOL
} fg_sampling;

/* The exact path (engine/exact.c): "auto" computes it beside the
 * simulation when the model qualifies, "off" never, "only" instead of the
 * simulation (the request is refused when the model does not qualify). */
typedef enum fg_exact_mode {
  FG_EXACT_AUTO = 0,
  FG_EXACT_OFF,
  FG_EXACT_ONLY
} fg_exact_mode;

typedef enum fg_verdict {
  FG_VERDICT_PASS = 0,
  FG_VERDICT_FAIL = 1,
  FG_VERDICT_INCONCLUSIVE = 2
} fg_verdict;

typedef enum fg_check_state {
  FG_CHECK_QUEUED = 0,
  FG_CHECK_RUNNING,
  FG_CHECK_DONE,
  FG_CHECK_CANCELLED,
  FG_CHECK_TIMED_OUT,
  FG_CHECK_FAILED,     /* internal fault */
  FG_CHECK_INTERRUPTED /* found running at start-up (store only) */
} fg_check_state;

const char *fg_verdict_name(fg_verdict v);
const char *fg_check_state_name(fg_check_state s);
const char *fg_interval_method_name(fg_interval_method m);
const char *fg_sampling_name(fg_sampling s);

/* Server-side caps a request is checked against. */
typedef struct fg_request_limits {
  uint64_t max_samples;   /* --max-samples */
  uint64_t max_scenarios; /* --max-scenarios (in_sample count) */
  double max_wait_s;      /* --max-wait */
} fg_request_limits;

void fg_request_limits_default(fg_request_limits *l);

typedef struct fg_check_request {
  double *decision; /* model->decision_dims values, flattened */
  int decision_dims;
  uint64_t samples;
  uint64_t seed;
  bool seed_given; /* false: the caller must draw one (fg_seed_draw) */
  double target, confidence;
  fg_interval_method interval;
  fg_sampling sampling;
  bool stop_early;
  fg_exact_mode exact;
  char expect_digest[FG_DIGEST_MAX]; /* "" when absent */
  bool has_in_sample;
  uint64_t in_sample_seed, in_sample_count;
  char label[FG_LABEL_MAX + 1]; /* "" when absent */
  double wait_s;
  bool explain; /* "explain": drivers per row and for the joint */
  int failing_count; /* failing scenarios listed, 1..FG_FAILING_SCENARIOS_MAX;
                        0 (absent) means FG_FAILING_SCENARIOS */
  /* Not part of the request body: set by callers that need every sample's
   * joint outcome afterwards (comparisons). Costs samples/8 bytes. */
  bool keep_outcomes;
  /* Not part of the body either: the server's deadline (--max-check-time).
   * Seconds from fg_check_start after which the check ends `timed_out`
   * with its partial counts; 0 = no deadline. */
  double max_seconds;
} fg_check_request;

/* Validate `body` (a JSON object) against model `m`. Missing, extra,
 * mis-sized or non-finite decision entries are each named. */
fg_status fg_request_parse(const fg_model *m, const struct cJSON *body,
                           const fg_request_limits *lim, fg_check_request *out,
                           fg_problem *p);
void fg_request_free(fg_check_request *r);
/* For "exact": "only" (fg_request_parse calls it): members that need a
 * simulation are refused, and so is a model that does not qualify at the
 * request's decision -- a 400 whose item points into the model at the
 * first term or input that does not qualify (a limit: at /exact). */
fg_status fg_exact_request_check(const fg_model *m,
                                 const fg_check_request *req, fg_problem *p);
/* The request as it will be replayed (seed filled in), for the log. */
struct cJSON *fg_request_json(const fg_model *m, const fg_check_request *r);

/* ---- worker pool ---- */
typedef struct fg_pool fg_pool;
/* workers: 1..FG_WORKERS_MAX; chunk: samples per task (multiple of
 * FG_BLOCK, FG_CHUNK_MIN..FG_CHUNK_MAX); queue: checks waiting at most. */
fg_status fg_pool_new(int workers, int chunk, int queue, fg_pool **out,
                      fg_problem *p);
/* Cancels what still runs, joins the workers, frees. */
void fg_pool_free(fg_pool *pool);
int fg_pool_workers(const fg_pool *pool);
int fg_pool_busy(const fg_pool *pool);
int fg_pool_queued(const fg_pool *pool);

/* ---- checks ---- */
typedef struct fg_check fg_check;

/* Queue a check. Takes its own reference to the model and copies the
 * request. FG_EBUSY when the queue is full. */
fg_status fg_check_start(fg_pool *pool, fg_model *m,
                         const fg_check_request *req, fg_check **out,
                         fg_problem *p);
/* Wait until the check ends or `timeout_s` passes (< 0: forever). True when
 * it has ended. */
bool fg_check_wait(fg_check *c, double timeout_s);
/* Ask a running check to stop; workers see it within one block. */
void fg_check_cancel(fg_check *c);
fg_check_state fg_check_get_state(fg_check *c);
/* True once the check is in an end state (never blocks). */
bool fg_check_ended(fg_check *c);
fg_check_state fg_check_state_parse(const char *s); /* -1 when unknown */
bool fg_check_state_is_end(fg_check_state s);
fg_verdict fg_check_get_verdict(fg_check *c); /* valid once ended */
/* Samples merged so far and satisfied among them (the published
 * snapshot; never blocks). */
void fg_check_progress(fg_check *c, uint64_t *done, uint64_t *satisfied);

/* What a check that ended comes to: everything the check log, the metrics
 * and the log line need, without reading the result body. */
typedef struct fg_check_outcome {
  fg_check_state state;
  bool has_verdict; /* state == FG_CHECK_DONE */
  fg_verdict verdict;
  uint64_t samples, satisfied;
  double probability, lower, upper; /* NAN when unknown */
  double elapsed_ms;
  bool stopped_early;
  bool forced; /* ended while a worker was stuck (its result discarded) */
} fg_check_outcome;
/* False while the check runs; else fills *out. */
bool fg_check_get_outcome(fg_check *c, fg_check_outcome *out);

/* The test-only fault seam (engine/fault.c): arms the faults named in the
 * environment. True in builds made with -DFG_FAULTS=ON, false (nothing
 * armed) otherwise. Call once at start-up before any pool exists. */
bool fg_faults_init(void);
void fg_check_unref(fg_check *c);
/* Take another reference (returns c). */
fg_check *fg_check_ref(fg_check *c);
/* With req.keep_outcomes: bit i of the returned words is 1 when sample i
 * satisfied every row; *n is the number of samples merged. Valid once the
 * check has ended; NULL otherwise. */
const uint64_t *fg_check_outcomes(fg_check *c, uint64_t *n);

/* Identity and timing the caller attaches to the result body. */
typedef struct fg_check_meta {
  const char *id;          /* "chk_..."; NULL offline */
  int model_version;       /* 0 offline */
  const char *created_at;  /* RFC 3339 UTC */
  const char *finished_at; /* NULL while running */
  const char *key;         /* key name; NULL when none */
  const char *replay_of;   /* id of the check this one replays; NULL none */
} fg_check_meta;

/* The result body of http-api.md (status, verdict, joint, constraints,
 * deterministic, objective, failing_scenarios, ...). While running it
 * carries "progress". */
struct cJSON *fg_check_result_json(fg_check *c, const fg_check_meta *meta);

/* Run a check to the end on a private pool (offline command, tests). */
fg_status fg_check_run_sync(fg_model *m, const fg_check_request *req,
                            int workers, int chunk, fg_check **out,
                            fg_problem *p);


/* ---- scenarios (scenarios.c) ---- */
/* Scenarios start .. start+count-1 of (seed, stream) as text: the JSON
 * body {"columns", "rows", "seed", "stream", "start"} or RFC 4180 CSV with
 * a header row. Scenario i is the same whatever start and count select it;
 * the design and validation streams never share a scenario. */
typedef struct fg_scenarios_params {
  uint64_t seed;   /* <= FG_SEED_MAX */
  bool validation; /* false: the design stream */
  uint64_t start;  /* first scenario index */
  uint64_t count;  /* start + count <= FG_SEED_MAX + 1 */
  bool csv;
} fg_scenarios_params;

/* Receives the text piece by piece; false stops the writer (FG_EIO). */
typedef bool fg_text_sink(void *ctx, const char *text, size_t len);

/* A stream of that text, read piece by piece: fg_scenarios_open checks
 * the parameters, takes a reference to `m`, allocates everything it will
 * need (memory bounded by FG_SCENARIO_STREAM_BYTES, the header and one
 * row, whatever count is) and prints the header; so every error comes
 * before the first byte. fg_scenarios_read copies up to `cap` bytes and
 * returns 0 only at the end. */
typedef struct fg_scenarios_stream fg_scenarios_stream;
fg_status fg_scenarios_open(fg_model *m, const fg_scenarios_params *q,
                            fg_scenarios_stream **out, fg_problem *p);
size_t fg_scenarios_read(fg_scenarios_stream *s, char *buf, size_t cap);
/* True when the stream stopped for lack of memory (the text is cut). */
bool fg_scenarios_failed(const fg_scenarios_stream *s);
void fg_scenarios_close(fg_scenarios_stream *s);
/* The cells a request of `count` scenarios holds: FG_ELIMIT (limit
 * scenario_cells) beyond FG_SCENARIO_CELLS_MAX. */
fg_status fg_scenarios_size_check(const fg_model *m, uint64_t count,
                                  fg_problem *p);
/* Stream the text to `sink` (offline command: no size limit). */
fg_status fg_scenarios_write(const fg_model *m, const fg_scenarios_params *q,
                             fg_text_sink *sink, void *ctx, fg_problem *p);
/* The whole text in one malloc'd, NUL-terminated buffer (*out, *len);
 * FG_ELIMIT beyond FG_SCENARIO_CELLS_MAX values. */
fg_status fg_scenarios_render(const fg_model *m, const fg_scenarios_params *q,
                              char **out, size_t *len, fg_problem *p);

/* ---- one scenario explained (explain.c) ----
 * Sample `index` of the check that `req` (seed filled in) describes, on
 * model `m`: {"index", "seed", "stream", "sampling", "inputs",
 * "definitions", "rows": [{"name", "excess", "holds"}], "holds"}, exactly
 * the values the check counted. FG_EUNSUPPORTED for Latin hypercube and
 * Sobol checks; FG_EINVAL (pointer /index) for an index beyond samples. */
fg_status fg_explain_scenario(const fg_model *m, const fg_check_request *req,
                              uint64_t index, struct cJSON **out,
                              fg_problem *p);

/* ---- comparisons (compare.c) ----
 * Several candidates judged on the same scenarios (common random numbers:
 * one seed on the validation stream for all), then every pair compared
 * scenario by scenario from the per-sample outcome bits. */
typedef struct fg_compare_request {
  int ncandidates; /* 2..FG_COMPARE_CANDIDATES_MAX */
  /* One check request per candidate: its decision and label, the shared
   * members (samples, seed, target, ...) and keep_outcomes set. */
  fg_check_request candidates[FG_COMPARE_CANDIDATES_MAX];
} fg_compare_request;

/* Validate a comparison body {"candidates": [{"label", "decision"}, ...],
 * "samples", "seed", "target", "confidence", "interval", ...} against `m`.
 * Faults in a candidate are reported at /candidates/i/...; samples are
 * capped by FG_COMPARE_SAMPLES_MAX as well as by lim->max_samples. */
fg_status fg_compare_parse(const fg_model *m, const struct cJSON *body,
                           const fg_request_limits *lim,
                           fg_compare_request *out, fg_problem *p);
void fg_compare_request_free(fg_compare_request *r);
/* Give every candidate the same seed (the caller draws one when none was
 * given). */
void fg_compare_set_seed(fg_compare_request *r, uint64_t seed);

/* Scenario-by-scenario counts of two candidates' joint outcomes. */
typedef struct fg_compare_pair {
  uint64_t n, both, a_only, b_only, neither;
  double difference; /* (a_only - b_only) / n */
  double lower, upper; /* Newcombe (1998) method 10 at `confidence` */
} fg_compare_pair;

/* Count a pair by popcount over the outcome bitmaps. Both checks must have
 * ended `done` with keep_outcomes on the same number of samples. */
fg_status fg_compare_count(fg_check *a, fg_check *b, double confidence,
                           fg_compare_pair *out, fg_problem *p);
/* The "pairs" array of the comparison body: every pair (i, j), i < j in
 * list order, as {"a", "b", "a_only", "b_only", "both", "neither",
 * "difference", "interval": {"lower", "upper", "method"}}. */
fg_status fg_compare_pairs_json(fg_check *const *checks,
                                const char *const *labels, int n,
                                double confidence, struct cJSON **out,
                                fg_problem *p);
/* Run every candidate to the end on one private pool (tests, offline);
 * out[] receives r->ncandidates checks, detached like fg_check_run_sync's. */
fg_status fg_compare_run_sync(fg_model *m, const fg_compare_request *r,
                              int workers, int chunk, fg_check **out,
                              fg_problem *p);

#endif
