/*
 * feasgate/limits.h -- every limit feasgate enforces, in one place.
 *
 * Each limit is a named constant with the reason it exists. A limit that a
 * client can reach is reported through fg_problem_limit (core/problem.c)
 * with its fg_limit, so the error always names the limit and its value,
 * and GET /v1/limits reports them all (see FG_LIMITS_TABLE below). Every value
 * may be overridden at compile time with -DFG_...=N; runtime settings
 * (--max-body, --max-samples, ...) are range-checked against the hard
 * bounds given here.
 */
#ifndef FEASGATE_LIMITS_H
#define FEASGATE_LIMITS_H

/* Samples per interpreter block. Each register holds FG_BLOCK doubles, so an
 * instruction is a tight loop of this length; 256 doubles = 2 KiB keeps a
 * few dozen live registers inside L1/L2. Must be a power of two. */
#ifndef FG_BLOCK
#define FG_BLOCK 256
#endif

/* Default samples per chunk handed to a worker; a multiple of FG_BLOCK.
 * Large enough that queue traffic is negligible, small enough that
 * cancellation and progress are seen several times a second. */
#ifndef FG_CHUNK_DEFAULT
#define FG_CHUNK_DEFAULT 16384
#endif
#define FG_CHUNK_MIN FG_BLOCK
#define FG_CHUNK_MAX (1 << 24)

/* Bytes of one model document or request body. 16 MiB holds a scenario
 * table of about a million numbers; larger bodies are refused before they
 * are buffered whole. */
#ifndef FG_MAX_BODY_DEFAULT
#define FG_MAX_BODY_DEFAULT (16u * 1024u * 1024u)
#endif
#define FG_MAX_BODY_HARD (256u * 1024u * 1024u)

/* Characters of one identifier (model document names and model names). */
#define FG_NAME_MAX 64

/* Characters of one expression: long enough for generated constraint
 * rows, short enough that a parse is microseconds. */
#ifndef FG_EXPR_MAX_LENGTH
#define FG_EXPR_MAX_LENGTH 16384
#endif

/* Nesting depth of one expression (parentheses, calls, unary chains):
 * bounds the recursive-descent parser's stack. */
#ifndef FG_EXPR_MAX_DEPTH
#define FG_EXPR_MAX_DEPTH 64
#endif

/* Elements of one vector value (decision, input, definition or literal). */
#ifndef FG_VECTOR_MAX
#define FG_VECTOR_MAX 100000
#endif

/* Total registers of one compiled program. Each costs FG_BLOCK doubles per
 * worker (2 KiB), so 200k registers is 400 MiB a worker at worst. */
#ifndef FG_PROGRAM_MAX_REGS
#define FG_PROGRAM_MAX_REGS 200000
#endif

/* Instructions of one compiled program. */
#ifndef FG_PROGRAM_MAX_INSNS
#define FG_PROGRAM_MAX_INSNS 2000000
#endif

/* Total decision elements of one model. */
#ifndef FG_DECISION_DIMS_MAX
#define FG_DECISION_DIMS_MAX 100000
#endif

/* Total uncertain dimensions of one model (sum of input sizes). */
#ifndef FG_UNCERTAIN_DIMS_MAX
#define FG_UNCERTAIN_DIMS_MAX 10000
#endif

/* Constraint rows of one model (vector constraints count each element). */
#ifndef FG_ROWS_MAX
#define FG_ROWS_MAX 10000
#endif

/* Entries in decisions, uncertain, definitions, constraints (each). */
#ifndef FG_MEMBERS_MAX
#define FG_MEMBERS_MAX 10000
#endif

/* Values in one parameter array (discrete values, empirical data,
 * scenario table cells). */
#ifndef FG_TABLE_CELLS_MAX
#define FG_TABLE_CELLS_MAX 2000000
#endif

/* Nesting depth of a JSON body: cJSON itself stops at CJSON_NESTING_LIMIT
 * (1000); documents are shallow, so we refuse anything deeper than this. */
#define FG_JSON_MAX_DEPTH 32

/* Samples of one check: default cap and hard bound. */
#ifndef FG_MAX_SAMPLES_DEFAULT
#define FG_MAX_SAMPLES_DEFAULT 1000000000ull
#endif
#define FG_MAX_SAMPLES_HARD 100000000000ull
#define FG_SAMPLES_DEFAULT 100000ull

/* Scenarios handed out by one scenarios request, and in_sample count. */
#ifndef FG_MAX_SCENARIOS_DEFAULT
#define FG_MAX_SCENARIOS_DEFAULT 100000ull
#endif

/* Scenarios a scenarios request returns when it names no count (never
 * more than the configured cap). */
#define FG_SCENARIOS_COUNT_DEFAULT 100ull

/* Values (scenarios x columns) in one scenarios response: about 25 bytes
 * each printed, so the longest body stays near 100 MB. The body is
 * streamed (FG_SCENARIO_STREAM_BYTES below), so this bounds the length of
 * an answer, not the memory it takes. */
#define FG_SCENARIO_CELLS_MAX 4000000ull

/* Bytes of drawn values one streamed scenarios response holds: rows are
 * drawn this many bytes at a time (at most FG_BLOCK rows, at least one),
 * so a response takes this plus its header and a 16 KiB window of text
 * and one row, whatever its count (8 concurrent 100,000-row answers of a
 * 40-column model stay within a few MB together). */
#ifndef FG_SCENARIO_STREAM_BYTES
#define FG_SCENARIO_STREAM_BYTES (256u * 1024u)
#endif

/* Failing scenarios reported per check by default. */
#define FG_FAILING_SCENARIOS 5
/* Failing scenarios a request may ask for (failing_scenarios_count): each
 * kept record is ~80 bytes in every chunk tally of a running check, so
 * 100 keeps a tally's records under 8 kB and a result body small, while
 * giving enough scenarios to explain one by one. */
#define FG_FAILING_SCENARIOS_MAX 100

/* Drivers ("explain": true): one accumulator per constraint row (and the
 * joint) and uncertain input component, in every chunk tally of a running
 * check. 65536 cells keep a tally's sums at 512 kB, so a check's window of
 * tallies stays within tens of MB on the largest pool, and the per-sample
 * cost at rows x components / 16 mask tests plus one addition per
 * violation and component (estimate/tally.c). */
#define FG_EXPLAIN_CELLS_MAX 65536
/* Drivers listed per row: the components with the largest |shift|. */
#define FG_DRIVERS_LISTED 5

/* Largest seed accepted: seeds travel as JSON numbers, which are exact
 * integers up to 2^53. */
#define FG_SEED_MAX 9007199254740991ull

/* Checks listed by one GET /v1/checks page. */
#define FG_LIST_LIMIT_DEFAULT 50
#define FG_LIST_LIMIT_MAX 1000

/* Characters of a check label. */
#define FG_LABEL_MAX 256

/* Worker threads. */
#define FG_WORKERS_MAX 256

/* Seconds a check that was told to stop (cancelled, out of time, shutting
 * down) waits for its workers before it ends without them: workers test
 * the flags once per block (milliseconds), so a worker still busy after
 * this is stuck in one long call; its late result is discarded. */
#define FG_STUCK_WORKER_S 1.0
/* How often the pool's clock looks for deadlines and stuck workers. */
#define FG_POOL_CLOCK_MS 20
/* Seconds fg_pool_free waits for its workers to leave before it leaves
 * the stuck ones behind (after FG_STUCK_WORKER_S has ended their checks). */
#define FG_POOL_EXIT_WAIT_S (FG_STUCK_WORKER_S + 0.5)

/* Sample-size calculations (GET /v1/sample-size): decision variables and
 * discarded scenarios of a scenario-approach query (each term of the
 * binomial tail is summed, so the cost grows with decisions + discarded),
 * scenarios searched or given (the bound is evaluated in double precision,
 * which stays exact for whole numbers far beyond this), and the largest
 * sample count reported (beyond it the answer is no practical plan). */
#define FG_SIZE_DECISIONS_MAX 1000000ull
#define FG_SIZE_DISCARDED_MAX 1000000ull
#define FG_SIZE_SCENARIOS_MAX 1000000000000ull
#define FG_SIZE_SAMPLES_MAX 1000000000000000ull

/* Candidates of one comparison: pairs grow as the square (16 give 120). */
#define FG_COMPARE_CANDIDATES_MAX 16
/* Samples of one comparison: every candidate keeps one outcome bit per
 * sample until the pairs are counted, samples/8 bytes each (25 MB at this
 * cap, 400 MB for 16 candidates). */
#ifndef FG_COMPARE_SAMPLES_MAX
#define FG_COMPARE_SAMPLES_MAX 200000000ull
#endif

/* Dimensions of a Sobol design: GSL's gsl_qrng_sobol carries direction
 * numbers for 40 (sample/design.c recovers them from it). */
#define FG_SOBOL_DIMS_MAX 40

/* ---- family parameter domains (sample/family.c) ----
 * The ranges inside which a family's draws (GSL's samplers on the Monte
 * Carlo path) and quantiles (core/quantile.c, used by the designs and
 * copula members) are finite and meet the quantile module's stated
 * accuracy (1e-9 relative, checked against SciPy and mpmath by
 * tests/reference/test_quantiles.py at both edges). A model outside them is
 * refused at registration (400, the pointer names the parameter, the
 * message gives the range). Not in FG_LIMITS_TABLE: they are domains of
 * the mathematics, not resource limits. */

/* Inverse-CDF probabilities are clamped into [FG_ICDF_P_MIN,
 * 1 - FG_ICDF_P_MIN]: no sampler hands out a smaller one except a
 * copula normal beyond -37 standard deviations (probability below
 * 1e-300), and every quantile below is finite there. */
#define FG_ICDF_P_MIN 1e-300

/* Beta a and b, gamma shape. For shape a < 1 GSL draws Gamma(1 + a)
 * U^(1/a) with a 32-bit U (Random123's GSL adaptor), whose smallest value
 * 2^(-32/a) leaves the normal doubles below a = 0.031 (a beta draw
 * X / (X + Y) could then become 0/0); 0.05 keeps a margin, and the
 * quantiles near u^(1/a) stay normal doubles for u >= 1e-15 there. Above 1e12, a + b nears the range where a/(a+b) no
 * longer carries the parameters' digits, and the references the tests use
 * (mpmath quadrature) were run to here. */
#define FG_SHAPE_PARAM_MIN 0.05
#define FG_SHAPE_PARAM_MAX 1e12

/* Student t degrees of freedom. Below 1 the quantile at FG_ICDF_P_MIN
 * (about u^(-1/df)) overflows a double; above 1e12 the law is the normal
 * to 1e-12 and the expansion used for large df was checked to here. The
 * scale is further bounded so that location + scale t stays finite at
 * FG_ICDF_P_MIN (the message gives the bound for the df given), and the
 * gamma scale so that scale x stays finite. */
#define FG_T_DF_MIN 1.0
#define FG_T_DF_MAX 1e12

/* ---- the scenario model export (engine/samplemodel.c, engine/mps.c) ----
 * The export runs on the request's own thread (like a scenarios answer),
 * so everything it does is bounded here. */
/* Scenarios of one export: the indicator form has one binary each, and
 * mixed-integer solvers stall long before this many. */
#define FG_SAMPLE_MODEL_SCENARIOS_MAX 100000
/* Scenario rows of one export (scenarios x half-rows per scenario): the
 * matrix is gathered in memory (about (decisions + 1) x 12 bytes per row)
 * before it is written column by column. */
#define FG_SAMPLE_MODEL_ROWS_MAX 1000000
/* Bytes of MPS text of one export: the text is held whole and then sent
 * in a JSON string (escaped once more), so a request stays near 200 MB. */
#define FG_SAMPLE_MODEL_TEXT_MAX (64u * 1024 * 1024)
/* Cells of the affine forms in the decisions (registers x (decision
 * components + 1)), four copies kept: 1 Mi cells is 32 MiB. */
#define FG_SAMPLE_MODEL_FORM_CELLS_MAX (1u * 1024 * 1024)
/* Work of reading the coefficients out of the program, in cell updates:
 * scenarios x (broadcast registers + block instructions) x (decision
 * components + 1); 3e8 is about a second on one core of the test machine. */
#define FG_SAMPLE_MODEL_WORK_MAX 300000000.0

/* Largest poisson mean and binomial trials: draws are GSL unsigned ints,
 * and inverse-CDF searches stay short below this. */
#define FG_COUNT_PARAM_MAX 1e9

/* The limits a client can run into, as (ID, name, value): GET /v1/limits
 * lists them and a 400/413 names the one reached (fg_problem_limit with
 * FG_LIMIT_<ID>). The enum fg_limit below is generated from these two
 * tables, so a limit's name is written here and nowhere else. The values
 * of the table's last six are defined further down (http/). */
#define FG_LIMITS_TABLE(X)                                                     \
  X(NAME_LENGTH, "name_length", FG_NAME_MAX)                                   \
  X(EXPRESSION_LENGTH, "expression_length", FG_EXPR_MAX_LENGTH)                \
  X(EXPRESSION_DEPTH, "expression_depth", FG_EXPR_MAX_DEPTH)                   \
  X(VECTOR_LENGTH, "vector_length", FG_VECTOR_MAX)                             \
  X(PROGRAM_REGISTERS, "program_registers", FG_PROGRAM_MAX_REGS)               \
  X(PROGRAM_INSTRUCTIONS, "program_instructions", FG_PROGRAM_MAX_INSNS)        \
  X(DECISION_DIMENSIONS, "decision_dimensions", FG_DECISION_DIMS_MAX)          \
  X(UNCERTAIN_DIMENSIONS, "uncertain_dimensions", FG_UNCERTAIN_DIMS_MAX)       \
  X(CONSTRAINT_ROWS, "constraint_rows", FG_ROWS_MAX)                           \
  X(MEMBERS, "members", FG_MEMBERS_MAX)                                        \
  X(TABLE_CELLS, "table_cells", FG_TABLE_CELLS_MAX)                            \
  X(JSON_DEPTH, "json_depth", FG_JSON_MAX_DEPTH)                               \
  X(LABEL_LENGTH, "label_length", FG_LABEL_MAX)                                \
  X(SAMPLE_SIZE_DECISIONS, "sample_size_decisions", FG_SIZE_DECISIONS_MAX)     \
  X(SAMPLE_SIZE_DISCARDED, "sample_size_discarded", FG_SIZE_DISCARDED_MAX)     \
  X(SAMPLE_SIZE_SCENARIOS, "sample_size_scenarios", FG_SIZE_SCENARIOS_MAX)     \
  X(SAMPLE_SIZE_SAMPLES, "sample_size_samples", FG_SIZE_SAMPLES_MAX)           \
  X(COMPARISON_CANDIDATES, "comparison_candidates", FG_COMPARE_CANDIDATES_MAX) \
  X(COMPARISON_SAMPLES, "comparison_samples", FG_COMPARE_SAMPLES_MAX)          \
  X(FAILING_SCENARIOS, "failing_scenarios", FG_FAILING_SCENARIOS)              \
  X(FAILING_SCENARIOS_COUNT, "failing_scenarios_count",                        \
    FG_FAILING_SCENARIOS_MAX)                                                  \
  X(EXPLAIN_CELLS, "explain_cells", FG_EXPLAIN_CELLS_MAX)                      \
  X(EXACT_ROWS, "exact_rows", FG_EXACT_ROWS_MAX)                               \
  X(EXACT_DIMS, "exact_dims", FG_EXACT_DIMS_MAX)                               \
  X(EXACT_FORM_CELLS, "exact_form_cells", FG_EXACT_FORM_CELLS_MAX)             \
  X(EXACT_FORM_WORK, "exact_form_work", FG_EXACT_FORM_WORK_MAX)                \
  X(SOBOL_DIMENSIONS, "sobol_dimensions", FG_SOBOL_DIMS_MAX)                   \
  X(SCENARIO_CELLS, "scenario_cells", FG_SCENARIO_CELLS_MAX)                   \
  X(SAMPLE_MODEL_SCENARIOS, "sample_model_scenarios",                          \
    FG_SAMPLE_MODEL_SCENARIOS_MAX)                                             \
  X(SAMPLE_MODEL_ROWS, "sample_model_rows", FG_SAMPLE_MODEL_ROWS_MAX)          \
  X(SAMPLE_MODEL_TEXT_BYTES, "sample_model_text_bytes",                        \
    FG_SAMPLE_MODEL_TEXT_MAX)                                                  \
  X(SAMPLE_MODEL_FORM_CELLS, "sample_model_form_cells",                        \
    FG_SAMPLE_MODEL_FORM_CELLS_MAX)                                            \
  X(SAMPLE_MODEL_WORK, "sample_model_work", FG_SAMPLE_MODEL_WORK_MAX)          \
  X(SAMPLES_DEFAULT, "samples_default", FG_SAMPLES_DEFAULT)                    \
  X(SEED_MAX, "seed_max", FG_SEED_MAX)                                         \
  X(LIST_LIMIT, "list_limit", FG_LIST_LIMIT_MAX)                               \
  X(CONNECTION_OVERFLOW, "connection_overflow", FG_HTTP_CONNECTIONS_OVERFLOW)  \
  X(HEADER_TIMEOUT, "header_timeout", FG_HTTP_HEADER_TIMEOUT_S)                \
  X(IDLE_TIMEOUT, "idle_timeout", FG_HTTP_IDLE_TIMEOUT_S)

/* Limits set when the daemon starts (--max-body, --max-samples, ...): the
 * names here, the values from the running configuration (http/ops.c). */
#define FG_SETTINGS_LIMITS_TABLE(X)                                            \
  X(MAX_BODY, "max_body")                                                      \
  X(MAX_SAMPLES, "max_samples")                                                \
  X(MAX_SCENARIOS, "max_scenarios")                                            \
  X(MAX_WAIT, "max_wait")                                                      \
  X(MAX_CHECK_TIME, "max_check_time")                                          \
  X(WORKERS, "workers")                                                        \
  X(CHUNK, "chunk")                                                            \
  X(QUEUE, "queue")                                                            \
  X(MAX_CONNECTIONS, "max_connections")                                        \
  X(MAX_CONNECTIONS_PER_CLIENT, "max_connections_per_client")

typedef enum fg_limit {
#define FG_LIMIT_ENUM3_(id, name, value) FG_LIMIT_##id,
#define FG_LIMIT_ENUM2_(id, name) FG_LIMIT_##id,
  FG_LIMITS_TABLE(FG_LIMIT_ENUM3_) FG_SETTINGS_LIMITS_TABLE(FG_LIMIT_ENUM2_)
#undef FG_LIMIT_ENUM3_
#undef FG_LIMIT_ENUM2_
  FG_LIMIT_COUNT
} fg_limit;

/* The limit's name as clients see it ("table_cells", "max_body"). */
const char *fg_limit_name(fg_limit which);

/* ---- operating the daemon and the remote client (http/) ----
 * Settings with a flag (--queue, --max-wait, --grace, --max-check-time,
 * --max-scenarios) are range-checked against these at start-up. */

/* Checks waiting for a worker at most: enough to absorb a burst of
 * pipeline jobs, small enough that a queued check starts within minutes. */
#define FG_HTTP_QUEUE_DEFAULT 64

#define FG_HTTP_QUEUE_MAX 65536

/* Longest --max-wait and --grace: an HTTP client holding a request open
 * for more than an hour is a misconfiguration, not a use. */
#define FG_HTTP_WAIT_MAX_S 3600.0

/* Running checks, and the requests waiting for them, get this long to
 * finish at shutdown before the checks are cancelled and recorded as
 * cancelled (the stop then takes a few seconds more at most). */
#define FG_HTTP_GRACE_DEFAULT 30.0

/* Hard bound of --max-scenarios: a scenario table of 10^8 rows is already
 * gigabytes of JSON. */
#define FG_HTTP_MAX_SCENARIOS_HARD 100000000ull

/* --max-check-time: default one hour; at most a week, beyond which a
 * check is a batch job, not a gate. */
#define FG_HTTP_CHECK_TIME_DEFAULT 3600.0

#define FG_HTTP_CHECK_TIME_MAX_S (7 * 86400.0)

/* Characters of --listen and --store values (and of file paths). */
#define FG_HTTP_HOST_MAX 255

#define FG_HTTP_URL_MAX 4096

/* Compiled models kept in memory (by digest). Compiling is milliseconds;
 * this only spares repeated checks of the same few models. */
#define FG_HTTP_MODEL_CACHE 64

/* Characters of a request path we route (longer ones are 404s). */
#define FG_HTTP_PATH_MAX 1024

/* Seconds a client is told to wait after a 503. */
#define FG_HTTP_RETRY_AFTER_S 2

/* Longest Authorization token looked at; longer ones are malformed. */
#define FG_KEY_TEXT_MAX 128

/* Distinct (method, route, status) request series kept at most. Routes
 * are the router's templates (never raw paths) and methods are folded to
 * a fixed set, so real traffic stays far below this; requests beyond it
 * are counted in feasgate_http_requests_unlabelled_total. */
#define FG_METRICS_SERIES_MAX 512

/* Looks (2 ms apart) a GET of a check stored as running takes at the
 * registry of live checks before it answers from the store: covers the
 * moment between recording a check and listing it. */
#define FG_HTTP_LIVE_RETRIES 25

/* How long DELETE waits for a cancelled check to stop and be recorded:
 * workers test the cancel flag once per block, so this is generous. */
#define FG_HTTP_CANCEL_WAIT_S 10.0

/* The remote gate (feasgate check --server): how long it waits for a
 * check by default (--timeout), at most, and between polls at most. */
#define FG_REMOTE_TIMEOUT_DEFAULT_S 3600.0

/* A week: longer than any --max-check-time a daemon accepts. */
#define FG_REMOTE_TIMEOUT_MAX_S (7 * 86400.0)

/* Longest pause between two polls of a running check. */
#define FG_REMOTE_POLL_MAX_S 2.0

/* Bytes of an answer at most (a result body is kilobytes). */
#define FG_REMOTE_BODY_MAX (64u * 1024 * 1024)

/* Bytes of a request file at most. */
#define FG_REMOTE_REQUEST_MAX (16u * 1024 * 1024)

/* Rows the `check --summary` table prints by default (--rows N changes
 * it): a terminal page; the table then says how many it left out and the
 * JSON result lists every row. */
#define FG_SUMMARY_ROWS_DEFAULT 40

/* Seconds libmicrohttpd keeps an idle connection open once it has sent
 * the headers of a request (between keep-alive requests too). */
#define FG_HTTP_IDLE_TIMEOUT_S 120

/* Seconds a new connection gets to send its first request's headers
 * before it is closed: an idle or trickling socket holds a connection
 * slot only this long. A client on a slow link sends a header block of a
 * few hundred bytes well within it. */
#define FG_HTTP_HEADER_TIMEOUT_S 10

/* Open connections (--max-connections): default and hard bound. Event
 * loops serve them (no thread per connection), so each costs a socket
 * and a FG_HTTP_CONN_MEMORY buffer; the bound keeps the buffers under
 * 4 GiB and within common descriptor limits once raised. */
#define FG_HTTP_CONNECTIONS_DEFAULT 1024
#define FG_HTTP_CONNECTIONS_HARD 65536

/* Open connections from one client address (--max-connections-per-
 * client): default. A pipeline runner needs a handful; one client
 * should not hold every slot. Bounded by --max-connections. */
#define FG_HTTP_CONNECTIONS_PER_CLIENT_DEFAULT 64

/* Connections accepted beyond either limit, only to be answered 503
 * (Retry-After, Connection: close) on their first request; past these
 * libmicrohttpd closes new connections at once without an answer. */
#define FG_HTTP_CONNECTIONS_OVERFLOW 64

/* Event-loop threads serving the connections: the online cores, within
 * these bounds. Handlers never wait on them (a waiting request is
 * suspended), so a few threads carry any number of connections. */
#define FG_HTTP_THREADS_MIN 2
#define FG_HTTP_THREADS_MAX 8

/* Milliseconds between two looks of the waiter thread at suspended
 * requests (a check that has ended, a deadline that has passed): the
 * most a waiting request's answer lags its check's end. */
#define FG_HTTP_WAITER_TICK_MS 2

/* Bytes of libmicrohttpd's per-connection buffer (request line, headers):
 * limits header size. Bodies are ours and limited by --max-body. */
#define FG_HTTP_CONN_MEMORY (64 * 1024)

/* At shutdown, after --grace, the running checks are cancelled; seconds
 * the requests waiting for them then get to be answered: the engine ends
 * a cancelled check within FG_STUCK_WORKER_S, and its end is recorded. */
#define FG_HTTP_STOP_ANSWER_S (FG_STUCK_WORKER_S + 2.0)

/* Bytes of a refused body (beyond --max-body) read and thrown away so
 * that the client still gets its 413; past this the connection is closed.
 * Bounds the work an endless chunked upload can cause. */
#define FG_HTTP_DISCARD_MAX (8 * 1024 * 1024)

/* Initial body buffer; grows by doubling up to --max-body. */
#define FG_HTTP_BODY_INITIAL 4096

/* Bytes of a --tls-cert or --tls-key file at most: a long certificate
 * chain is a few tens of KiB. */
#define FG_HTTP_TLS_FILE_MAX (1024 * 1024)



/* ---- row plans: affine rows folded with the inputs' factors
 * (engine/rowplan.c) ---- */

/* Cells of the half-row forms a row plan reads out of the program
 * (2 x rows x (inputs + 1)): 1 Mi doubles, 8 MiB while the check starts;
 * larger models keep the block stream. */
#define FG_ROWPLAN_CELLS_MAX (1024.0 * 1024.0)

/* A plan is kept when its dense product (half-rows x folded columns
 * multiply-adds per sample) is at most this many times the work it
 * replaces (block instructions plus the factors' multiply-adds): a
 * register-blocked multiply-add costs well under half of one interpreted
 * instruction per lane, so 2 keeps plans only where they clearly win,
 * and refuses sparse rows over a large factor, which folding would make
 * dense. */
#define FG_ROWPLAN_COST_FACTOR 2.0

/* ---- the exact path for jointly normal inputs (estimate/mvnprob.c,
 * engine/exact.c) ---- */

/* Half-rows (one-sided affine constraints; a range row gives two) one
 * exact computation takes at most: the pivoted Gram-Schmidt reduction
 * costs rows^2 * dims, 512^2 * 512 ~ 1.3e8 operations. */
#define FG_EXACT_ROWS_MAX 512

/* Jointly normal input dimensions the rows may involve at most (same
 * reason). */
#define FG_EXACT_DIMS_MAX 512

/* Cells of the affine forms kept while reading coefficients out of the
 * program (registers x (inputs + 1)): 4 Mi doubles, 32 MiB at most. */
#define FG_EXACT_FORM_CELLS_MAX (4u * 1024 * 1024)

/* Work of reading the coefficients out of the program: block instructions
 * x (inputs + 1), each a pass over one affine form. It runs on the thread
 * that starts the check (and again in the request's parse for exact
 * "only", to answer 400), so it is held to about 0.1 s: 64e6 allows e.g.
 * 125,000 instructions over 512 inputs. */
#define FG_EXACT_FORM_WORK_MAX 64000000.0

/* Work bound of one exact computation, in multiply-add units: lattice
 * points x (rows x rank + 30 x rank) over all rounds and shifts
 * (estimate/mvnprob.c). 3e8 units is about a second on one idle core of
 * the test machine: the exact path is one task of its check on the
 * worker pool (it holds one worker that long at most); past the bound it
 * answers with the error it reached (converged false). */
#define FG_EXACT_WORK_MAX 300000000.0

/* Work units between two looks at the check's cancel flag and deadline
 * during an exact computation (a run of lattice points, one pivot step of
 * the reduction at most 6 x rows x dims, one half-row of the coefficient
 * product): 1e6 units is about 3 ms on the test machine, so a DELETE or a
 * deadline ends an exact computation within a few milliseconds plus the
 * pool clock's round (FG_POOL_CLOCK_MS). */
#define FG_EXACT_POLL_WORK 1000000.0

/* Independent random shifts of the lattice; their spread gives the error
 * estimate (Genz 1992: a small number, 10 here, of randomisations). */
#define FG_EXACT_SHIFTS 10

/* Lattice points per shift in the first round; each later round doubles
 * them, at most FG_EXACT_ROUNDS_MAX rounds (so at most 1000 * 2^14
 * points per shift before the work bound). */
#define FG_EXACT_POINTS_FIRST 1000
/* The first round's points per shift at least, when FG_EXACT_POINTS_FIRST
 * would pass FG_EXACT_WORK_MAX (512 half-rows of rank 512: 64 points,
 * about 3.5e8 units): fewer would leave the shifts' spread too noisy to
 * be an error estimate. */
#define FG_EXACT_POINTS_MIN 64
#define FG_EXACT_ROUNDS_MAX 15

/* The error the exact path aims at (absolute, on the joint probability):
 * well inside the 1e-4 the project's tests hold it to. */
#define FG_EXACT_TARGET_ERROR 2e-5

/* Reported error = this many standard errors of the mean over the
 * FG_EXACT_SHIFTS shifts: with 9 degrees of freedom, Student's t puts
 * 99.3% inside 3.5 (two-sided), so the bound is conservative. */
#define FG_EXACT_ERROR_FACTOR 3.5

/* ==== tuning constants ====
 * Not limits a client reaches: how often, how many at once, how precise;
 * each with its reason, in their own header (kept apart so that each file
 * stays a readable size). */
#include "feasgate/tuning.h"

#endif
