/*
 * feasgate/tuning.h -- the tuning constants, each with its reason: how
 * often, how many at once, how precise. Not limits a client reaches (those
 * are in limits.h, which includes this file at its end, so every user of
 * limits.h sees these too); grouped by the subsystem that uses it.
 */
#ifndef FEASGATE_TUNING_H
#define FEASGATE_TUNING_H

/* ---- engine: pool, checks, scenarios ---- */
/* Checks the clock ends in one round, at most (the rest wait a round). */
#define FG_POOL_CLOCK_BATCH 64
/* Pools left to stuck workers at exit: kept reachable on purpose (a
 * stuck thread may still touch its pool); freed by the process's end. */
#define FG_POOL_ABANDONED_MAX 8
/* Non-finite values noted per check at most (numeric.problems lists the
 * first, by row or input, stream and sample index): one per row or input
 * of any model that fits the row limit's common use, bounded memory. */
#define FG_DET_PROBLEMS_MAX 64
/* Independent replicates of a Latin hypercube or Sobol design: the
 * Student-t interval on their estimates has R - 1 degrees of freedom;
 * 16 keeps the t quantile within 7% of the normal one while each
 * replicate stays a large design. */
#define FG_DESIGN_REPLICATES 16
/* Bytes of text produced per refill: rows are appended while the text
 * holds less than this, so a refill is a few hundred rows of a narrow
 * model and at least one row of any width. */
#define FG_SCENARIO_STAGE_BYTES 16384
/* Tolerance of a decision's bounds and integrality (engine/check.c): 1e-6
 * absolute or relative to the value, whichever is larger, so a solver's
 * 2.9999999 is the integer 3 and a bound met to rounding is met (common
 * practice: solvers' default feasibility and integrality tolerances are
 * of this order). */
#define FG_INTEGER_TOL 1e-6

/* ---- estimate: the confidence sequence, sample sizes, tallies ---- */
/* Strength, in pseudo-samples, of the confidence sequence's Beta prior
 * centred on the target (estimate/cs.c): small enough that the data
 * dominate after a few thousand samples, large enough to keep the
 * sequence tight where the verdict is decided. */
#define FG_CS_PRIOR_STRENGTH 10.0
/* First look after this many samples, then after every doubling. */
#define FG_CS_FIRST_ROUND 4096
/* The sequence's bounds are found by bisection to a relative width of
 * FG_CS_REL_TOL, or after FG_CS_BISECT_MAX halvings: from a bracket as
 * wide as the doubles allow, 1200 halvings reach any width a double has. */
#define FG_CS_BISECT_MAX 1200
/* Relative width at which the bisection above stops. */
#define FG_CS_REL_TOL 0x1p-50
/* Terms smaller than this fraction of the running sum are dropped: they
 * cannot change a double. */
#define FG_SIZE_TAIL_NEGLIGIBLE 1e-18
/* Relative precision of the epsilon bisection. */
#define FG_SIZE_EPS_REL_PRECISION 1e-12
/* Iterations of any bisection at most (each halves the bracket). */
#define FG_SIZE_BISECT_MAX 4000
/* Violated rows kept per failing scenario: enough to show which rows a
 * scenario breaks; the scenario endpoint recomputes all of them. */
#define FG_FAIL_ROWS_MAX 16
/* The exact multivariate-normal path (estimate/mvnprob.c): a row whose
 * residual falls below FG_MVN_TOL (of a unit row) after a reduction step
 * depends on the columns so far and becomes a bound on that step's
 * variable (the dropped residual moves the probability by far less than
 * FG_EXACT_TARGET_ERROR); a coefficient smaller than FG_MVN_ZERO
 * relative to 1 counts as zero (a few hundred ulps of 1, so rounding
 * noise never decides a bound's sign). */
#define FG_MVN_TOL 1e-10
#define FG_MVN_ZERO 1e-13
/* Work units of a normal CDF or quantile (erfc, GSL's inverse) against
 * one multiply-add, from the measured cost of one lattice point (common
 * practice: a rough, machine-dependent ratio; only the work bound
 * FG_EXACT_WORK_MAX uses it). */
#define FG_MVN_PHI_COST 30.0

/* ---- expr: the interpreter's multiply-add chains and lane passes ---- */
/* Chains shorter than this many multiply-adds stay in the plain
 * instruction loop (expr/fuse.c): they gain too little to leave it. */
#define FG_CHAIN_MIN 4
/* How far ahead a chain term's destination's next use is looked for;
 * beyond it the store is kept (a bound on compile time for huge
 * programs). */
#define FG_CHAIN_SCAN 4096
/* Lanes per pass when a chain-heavy block stream runs in lane tiles
 * (expr/interp.c): 32 lanes of a register are 256 bytes, so the inputs of
 * a wide dense row (say 50 of them, 12.8 KiB) stay in L1 while every row
 * reads them, where whole 2 KiB registers would be fetched from L2 once
 * per row. Any value gives the same bits (no instruction reads another
 * lane). */
#define FG_LANE_PASS 32

/* ---- core: the dense kernels ---- */
/* Columns a dense tile copies into a contiguous buffer (core/dense.c,
 * dense_tile.h): 128 columns x 16 lanes x 8 bytes = 16 KiB of stack at
 * the widest path; wider maps read their columns in place. */
#define FG_DENSE_PACK_COLS 128

/* ---- sample: the exp kernels' start-up check ---- */
/* Pseudo-random arguments a lane kernel of exp must agree on with libm,
 * bit for bit, before it is used (sample/libm_exp.c): FG_EXP_PROBE_DENSE
 * lognormal exponents in [-8, 16) and FG_EXP_PROBE_WIDE across the whole
 * finite range [-750, 715), besides the special values; about 50,000 in
 * all, a few milliseconds once per process. */
#define FG_EXP_PROBE_DENSE 32768
#define FG_EXP_PROBE_WIDE 16384

/* ---- http: keys, registry, replicas, streaming, queries ---- */
/* Seconds the cache of live keys is used before it is reloaded. */
#define FG_KEYS_REFRESH_S 1.0
/* Least seconds between two reloads caused by unknown keys: bounds the
 * store reads a client sending wrong keys can cause. */
#define FG_KEYS_MISS_REFRESH_S 0.05
/* How often the watcher looks for ended checks: a 202'd check is recorded
 * at most this late. */
#define FG_REGISTRY_POLL_MS 50
/* How long cancelled checks get to be recorded at shutdown: the engine
 * ends a cancelled check within FG_STUCK_WORKER_S whatever its workers
 * do, and the store write follows. */
#define FG_REGISTRY_CANCEL_WAIT_S (FG_STUCK_WORKER_S + 2.0)
/* On a shared store (several replicas), how often the running checks'
 * bodies are written to the store so that another replica answers a GET
 * with progress at most this old. */
#define FG_REGISTRY_PROGRESS_MS 1000
/* How long after a failed store write of a check's end it is tried again
 * (the check stays listed, so GET still answers with its final body). */
#define FG_REGISTRY_RETRY_MS 1000
/* Entries one round of the watcher handles, at most (the rest wait for
 * the next round). */
#define FG_REGISTRY_BATCH 64
/* A DELETE of a check or comparison another replica runs waits
 * (suspended) for its record to end, reading the store this often (in
 * finish, on a libmicrohttpd thread; the waiter thread only keeps the
 * time). */
#define FG_HTTP_REPLICA_LOOK_S 0.05
/* Bytes libmicrohttpd asks a streamed body for at once. */
#define FG_HTTP_STREAM_BLOCK (32 * 1024)
/* Query parameters read at most: more than the calculation can use. */
#define FG_HTTP_SIZE_QUERY_PARAMS_MAX 32
/* Longest parameter name kept for a problem message. */
#define FG_HTTP_PARAM_NAME_MAX 64

/* ---- store: backends and replicas ---- */
/* SQLite: how long a statement waits for a lock held by another
 * connection before giving up with FG_EBUSY: long enough to ride out a
 * checkpoint or a CLI reader, short enough that an HTTP request does not
 * hang. */
#define FG_SQLITE_BUSY_MS 5000
/* Characters of a SQLite store path ("sqlite:" prefix removed). */
#define FG_SQLITE_PATH_MAX 4096
/* PostgreSQL connections per daemon: calls from several request threads
 * run at once up to this many; the rest wait for one to be given back.
 * Opened when first needed. */
#define FG_PG_POOL 4
/* Longest PostgreSQL store URL kept (libpq reads the URL itself). */
#define FG_PG_URL_MAX 4096
/* How long one statement, one wait for a row lock, and one connection
 * attempt may take: a database that hangs must not hold a connection (and
 * so, once all are taken, every request) for ever. A URL's own
 * connect_timeout wins. */
#define FG_PG_STATEMENT_TIMEOUT_MS 30000
#define FG_PG_LOCK_TIMEOUT_MS 10000
#define FG_PG_CONNECT_TIMEOUT_S "10"
/* After a failed reconnection, calls on that connection fail at once for
 * this long instead of each trying again (and waiting out the connect
 * time-out). */
#define FG_PG_RETRY_MS 1000
/* How often a daemon on a shared store says it is alive, how often it
 * looks for checks of replicas that stopped doing so, and how long a
 * silent replica counts as alive: a few missed beats (a database
 * failover, a long pause) must not interrupt a replica's checks, and a
 * dead replica's checks should not stay `running` for long. */
#define FG_REPLICA_HEARTBEAT_MS 2000
#define FG_REPLICA_SWEEP_MS 5000
#define FG_REPLICA_STALE_S 10
/* Instance rows silent this long are removed by the sweep. */
#define FG_REPLICA_KEEP_S 86400

/* ---- the command line ---- */
/* Parameters of one sample-size question at most (each --name value). */
#define FG_CLI_SIZE_ARGS_MAX 16
/* The remote gate (feasgate check --server, cli/remote.c): the first
 * pause between polls of a running check (growing to
 * FG_REMOTE_POLL_MAX_S), how many polls in a row may fail for transport
 * reasons or with 503 before it gives up, and the seconds to set up a
 * connection. */
#define FG_REMOTE_POLL_FIRST_S 0.2
#define FG_REMOTE_POLL_RETRIES 5
#define FG_REMOTE_CONNECT_S 10

#endif
