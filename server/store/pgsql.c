/*
 * store/pgsql.c -- the PostgreSQL backend of store/store.h
 * ("postgresql://..." or "postgres://...", read by libpq).
 *
 * Why: several feasgate replicas behind a load balancer share one
 * PostgreSQL database, so a model registered through one is checked
 * through any, and the check log is one log.
 *
 * Design
 *   A pool of up to FG_PG_POOL libpq connections per fg_store: a call takes
 *   a free one for its whole duration (libpq connections are not to be
 *   shared between threads at once), waiting when all are in use, and
 *   gives it back; connections open when first needed. Every statement is prepared once per
 *   connection (the table `stmt_sql`, names "fgN"); no SQL text is built at
 *   run time, and values always travel as parameters. A write of several
 *   statements runs inside BEGIN ... COMMIT (ROLLBACK on any failure); a
 *   write of one statement is its own transaction (autocommit). When the
 *   connection is found broken at the start of a call it is reset once and
 *   the statements prepared again (after a failed reset, calls on it fail
 *   at once for FG_PG_RETRY_MS); a call that fails on a broken
 *   connection reports FG_EIO and the next call tries again.
 *
 *   The schema is made when missing, under a transaction-scoped advisory
 *   lock so that replicas starting together do not race on it;
 *   `schema_version` holds FG_PG_SCHEMA_VERSION and a newer one is
 *   refused. Times are RFC 3339 text as in the SQLite backend (so ordering
 *   and cursors behave the same); NaN probabilities are NULL.
 *
 *   Registration: the model row is upserted first, which locks it, and only
 *   then is the latest version read, so two replicas registering the same
 *   name at once take turns and count versions 1, 2, ... without a gap or
 *   a duplicate.
 *
 * Replicas and interrupted checks
 *   Each daemon is an *instance* (a random id made at open, with host and
 *   pid): fg_store_mark_interrupted registers it in `instances` and starts
 *   an upkeep thread that refreshes the instance's heartbeat every
 *   FG_PG_HEARTBEAT_MS (the database's clock, so replicas' clocks do not
 *   matter) and every FG_PG_SWEEP_MS marks `interrupted` the running checks
 *   whose owner's heartbeat is older than FG_PG_STALE_S (a replica that
 *   died or lost the database). Every check records its owner. A cancel
 *   asked through another replica sets the check's `cancel_requested`;
 *   the owner reads its requests every second (fg_store_cancel_requests)
 *   and cancels. A daemon
 *   that stops cleanly removes its instance row. Tools that only open the
 *   store (`feasgate keys`) are no instance.
 *
 * Errors: libpq failures become FG_EIO naming the operation and the
 * server's message; a unique violation (SQLSTATE 23505) is FG_ECONFLICT,
 * a serialization failure, deadlock, lock time-out or statement time-out
 * (40001, 40P01, 55P03, 57014) FG_EBUSY. Every session has a statement and
 * a lock time-out, and connecting has a time-out (FG_PG_*_TIMEOUT_*).
 *
 * Test seam: as in the SQLite backend, fg_store_inject_write_fault makes
 * the n-th data write from then on fail inside its transaction.
 *
 * Thread use: any thread (the pool above; the store's lock guards only
 * the pool's flags, the fault seam and the upkeep flags); the upkeep
 * thread takes a connection from the pool for each beat.
 */
#include "store/backend.h"

#include <libpq-fe.h>
#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/random.h>
#include <time.h>
#include <unistd.h>

/* The schema this file writes and understands. */
#define FG_PG_SCHEMA_VERSION 1
/* How often a daemon says it is alive, how often it looks for checks of
 * replicas that stopped doing so, and how long a silent replica counts as
 * alive: a few missed beats (a database failover, a long pause) must not
 * interrupt a replica's checks, and a dead replica's checks should not stay
 * `running` for long. */
#define FG_PG_HEARTBEAT_MS 2000
#define FG_PG_SWEEP_MS 5000
#define FG_PG_STALE_S 10
/* Instance rows older than this are removed by the sweep. */
#define FG_PG_INSTANCE_KEEP_S 86400
/* Connections per daemon: calls from several request threads run at once
 * up to this many; the rest wait for one to be given back. Opened when
 * first needed. */
#define FG_PG_POOL 4
/* Longest store URL kept (libpq reads the URL itself). */
#define FG_PG_URL_MAX 4096
/* How long one statement, one wait for a row lock, and one connection
 * attempt may take: a database that hangs must not hold the store's mutex
 * (and so every request) for ever. A URL's own connect_timeout wins. */
#define FG_PG_STATEMENT_TIMEOUT_MS 30000
#define FG_PG_LOCK_TIMEOUT_MS 10000
#define FG_PG_CONNECT_TIMEOUT_S "10"
/* After a failed reconnection, calls fail at once for this long instead of
 * each trying again (and waiting out the connect time-out) under the
 * store's mutex. */
#define FG_PG_RETRY_MS 1000
/* The advisory lock key held while creating the schema ("fgst"). */
#define FG_PG_SCHEMA_LOCK 0x66677374

static const char *const schema_sql =
    "CREATE TABLE IF NOT EXISTS schema_version ("
    "  version INTEGER NOT NULL);"
    "CREATE TABLE IF NOT EXISTS models ("
    "  name TEXT PRIMARY KEY,"
    "  retired BOOLEAN NOT NULL DEFAULT false,"
    "  created_at TEXT NOT NULL);"
    "CREATE TABLE IF NOT EXISTS versions ("
    "  name TEXT NOT NULL REFERENCES models(name),"
    "  version INTEGER NOT NULL CHECK (version >= 1),"
    "  digest TEXT NOT NULL,"
    "  document TEXT NOT NULL,"
    "  title TEXT,"
    "  created_at TEXT NOT NULL,"
    "  PRIMARY KEY (name, version));"
    "CREATE TABLE IF NOT EXISTS checks ("
    "  id TEXT PRIMARY KEY,"
    "  model TEXT NOT NULL,"
    "  version INTEGER NOT NULL,"
    "  digest TEXT NOT NULL,"
    "  status TEXT NOT NULL,"
    "  verdict TEXT NOT NULL DEFAULT '',"
    "  seed BIGINT NOT NULL,"
    "  request TEXT NOT NULL,"
    "  result TEXT,"
    "  created_at TEXT NOT NULL,"
    "  finished_at TEXT NOT NULL DEFAULT '',"
    "  elapsed_ms DOUBLE PRECISION,"
    "  label TEXT NOT NULL DEFAULT '',"
    "  key TEXT NOT NULL DEFAULT '',"
    "  probability DOUBLE PRECISION,"
    "  lower DOUBLE PRECISION,"
    "  upper DOUBLE PRECISION,"
    "  owner TEXT NOT NULL DEFAULT '',"
    "  cancel_requested BOOLEAN NOT NULL DEFAULT false,"
    "  FOREIGN KEY (model, version) REFERENCES versions(name, version));"
    "ALTER TABLE checks ADD COLUMN IF NOT EXISTS replay_of TEXT NOT NULL"
    "  DEFAULT '';"
    "CREATE INDEX IF NOT EXISTS checks_by_time ON checks(created_at, id);"
    "CREATE INDEX IF NOT EXISTS checks_by_model ON checks(model, created_at);"
    "CREATE INDEX IF NOT EXISTS checks_by_status ON checks(status);"
    "CREATE TABLE IF NOT EXISTS keys ("
    "  name TEXT PRIMARY KEY,"
    "  role TEXT NOT NULL,"
    "  salt BYTEA NOT NULL,"
    "  hash BYTEA NOT NULL,"
    "  created_at TEXT NOT NULL,"
    "  revoked_at TEXT NOT NULL DEFAULT '');"
    "CREATE TABLE IF NOT EXISTS comparisons ("
    "  id TEXT PRIMARY KEY,"
    "  model TEXT NOT NULL,"
    "  version INTEGER NOT NULL,"
    "  digest TEXT NOT NULL,"
    "  status TEXT NOT NULL,"
    "  created_at TEXT NOT NULL,"
    "  finished_at TEXT NOT NULL DEFAULT '',"
    "  key TEXT NOT NULL DEFAULT '',"
    "  checks TEXT NOT NULL,"
    "  result TEXT,"
    "  owner TEXT NOT NULL DEFAULT '',"
    "  FOREIGN KEY (model, version) REFERENCES versions(name, version));"
    "CREATE TABLE IF NOT EXISTS instances ("
    "  id TEXT PRIMARY KEY,"
    "  host TEXT NOT NULL,"
    "  pid INTEGER NOT NULL,"
    "  started_at TEXT NOT NULL,"
    "  heartbeat_at TIMESTAMPTZ NOT NULL);";

enum stmt_id {
  ST_PING,
  ST_LATEST,
  ST_MODEL_UPSERT,
  ST_VERSION_INSERT,
  ST_VERSION_GET,
  ST_MODELS_LIST,
  ST_RETIRE,
  ST_CHECK_INSERT,
  ST_CHECK_FINISH,
  ST_CHECK_GET,
  ST_CHECK_PROGRESS,
  ST_CANCEL_ASK,
  ST_CANCEL_STATUS,
  ST_CANCEL_ASKED,
  ST_CHECK_CURSOR,
  ST_CHECKS_LIST,
  ST_MARK_STALE,
  ST_MARK_CMP_STALE,
  ST_CMP_INSERT,
  ST_CMP_FINISH,
  ST_CMP_GET,
  ST_INSTANCE_UPSERT,
  ST_INSTANCE_BEAT,
  ST_INSTANCE_PRUNE,
  ST_INSTANCE_END,
  ST_KEY_EXISTS,
  ST_KEY_INSERT,
  ST_KEYS_LIST,
  ST_KEY_REVOKE,
  ST_COUNT
};

#define CHECK_COLUMNS                                                          \
  "id, model, version, digest, status, verdict, seed, created_at,"             \
  " finished_at, elapsed_ms, label, key, probability, lower, upper,"        \
  " replay_of"

static const struct {
  const char *sql;
  int nparams;
} stmt_sql[ST_COUNT] = {
    [ST_PING] = {"SELECT count(*) FROM schema_version", 0},
    [ST_LATEST] = {"SELECT version, digest FROM versions WHERE name = $1"
                   " ORDER BY version DESC LIMIT 1",
                   1},
    [ST_MODEL_UPSERT] =
        {"INSERT INTO models(name, retired, created_at) VALUES ($1, false, $2)"
         " ON CONFLICT(name) DO UPDATE SET retired = false",
         2},
    [ST_VERSION_INSERT] =
        {"INSERT INTO versions(name, version, digest, document, title,"
         " created_at) VALUES ($1, $2::int, $3, $4, $5, $6)",
         6},
    [ST_VERSION_GET] =
        {"SELECT v.name, v.version, v.digest, v.created_at, v.title,"
         " v.document, m.retired::int FROM versions v JOIN models m"
         " ON m.name = v.name WHERE v.name = $1 AND v.version = CASE WHEN"
         " $2::int > 0 THEN $2::int ELSE (SELECT MAX(version) FROM versions"
         " WHERE name = $1) END",
         2},
    [ST_MODELS_LIST] =
        {"SELECT v.name, v.version, v.digest, v.created_at, v.title FROM"
         " versions v JOIN models m ON m.name = v.name WHERE NOT m.retired"
         " AND v.version = (SELECT MAX(version) FROM versions w WHERE w.name ="
         " v.name) ORDER BY v.name",
         0},
    [ST_RETIRE] = {"UPDATE models SET retired = true WHERE name = $1", 1},
    [ST_CHECK_INSERT] =
        {"INSERT INTO checks(id, model, version, digest, status, verdict, seed,"
         " created_at, finished_at, elapsed_ms, label, key, probability, lower,"
         " upper, request, result, owner, replay_of) VALUES ($1, $2, $3::int,"
         " $4, $5, $6, $7::bigint, $8, $9, $10::float8, $11, $12, $13::float8,"
         " $14::float8, $15::float8, $16, $17, $18, $19)",
         19},
    [ST_CHECK_FINISH] =
        {"UPDATE checks SET status = $2, verdict = $3, finished_at = $4,"
         " elapsed_ms = $5::float8, probability = $6::float8,"
         " lower = $7::float8, upper = $8::float8, result = $9 WHERE id = $1",
         9},
    [ST_CHECK_GET] = {"SELECT " CHECK_COLUMNS ", request, result FROM checks"
                      " WHERE id = $1",
                      1},
    [ST_CHECK_PROGRESS] = {"UPDATE checks SET result = $2 WHERE id = $1"
                           " AND status = 'running'",
                           2},
    [ST_CANCEL_ASK] = {"UPDATE checks SET cancel_requested = true WHERE id ="
                       " $1 AND status = 'running'",
                       1},
    [ST_CANCEL_STATUS] = {"SELECT status FROM checks WHERE id = $1", 1},
    [ST_CANCEL_ASKED] = {"SELECT id FROM checks WHERE owner = $1 AND"
                         " cancel_requested AND status = 'running'"
                         " ORDER BY id LIMIT $2::int",
                         2},
    [ST_CHECK_CURSOR] = {"SELECT created_at FROM checks WHERE id = $1", 1},
    [ST_CHECKS_LIST] = {"SELECT " CHECK_COLUMNS " FROM checks"
                        " WHERE ($1::text IS NULL OR model = $1)"
                        " AND ($2::text IS NULL OR verdict = $2)"
                        " AND ($3::text IS NULL OR created_at >= $3)"
                        " AND ($4::text IS NULL OR label = $4)"
                        " AND ($5::text IS NULL OR created_at < $5 OR"
                        " (created_at = $5 AND id < $6))"
                        " AND ($8::text IS NULL OR key = $8)"
                        " ORDER BY created_at DESC, id DESC LIMIT $7::int",
                        8},
    /* running checks of owners that are not this instance and have not
     * beaten within $3 seconds (or have no instance row at all) */
    [ST_MARK_STALE] =
        {"UPDATE checks SET status = 'interrupted', finished_at = $1,"
         " result = NULL WHERE status = 'running' AND owner <> $2 AND NOT "
         "EXISTS (SELECT 1"
         " FROM instances i WHERE i.id = checks.owner AND i.heartbeat_at >"
         " now() - make_interval(secs => $3::int))",
         3},
    /* comparisons of such owners, likewise */
    [ST_MARK_CMP_STALE] =
        {"UPDATE comparisons SET status = 'interrupted', finished_at = $1"
         " WHERE status = 'running' AND owner <> $2 AND NOT EXISTS (SELECT 1"
         " FROM instances i WHERE i.id = comparisons.owner AND"
         " i.heartbeat_at > now() - make_interval(secs => $3::int))",
         3},
    [ST_CMP_INSERT] =
        {"INSERT INTO comparisons(id, model, version, digest, status,"
         " created_at, finished_at, key, checks, result, owner) VALUES ($1,"
         " $2, $3::int, $4, $5, $6, $7, $8, $9, $10, $11)",
         11},
    [ST_CMP_FINISH] = {"UPDATE comparisons SET status = $2, finished_at = $3,"
                       " result = $4 WHERE id = $1",
                       4},
    [ST_CMP_GET] = {"SELECT id, model, version, digest, status, created_at,"
                    " finished_at, key, checks, result FROM comparisons"
                    " WHERE id = $1",
                    1},
    [ST_INSTANCE_UPSERT] =
        {"INSERT INTO instances(id, host, pid, started_at, heartbeat_at)"
         " VALUES ($1, $2, $3::int, $4, now()) ON CONFLICT(id) DO UPDATE SET"
         " heartbeat_at = now()",
         4},
    [ST_INSTANCE_BEAT] =
        {"UPDATE instances SET heartbeat_at = now() WHERE id = $1", 1},
    [ST_INSTANCE_PRUNE] = {"DELETE FROM instances WHERE heartbeat_at < now() -"
                           " make_interval(secs => $1::int)",
                           1},
    [ST_INSTANCE_END] = {"DELETE FROM instances WHERE id = $1", 1},
    [ST_KEY_EXISTS] = {"SELECT revoked_at FROM keys WHERE name = $1", 1},
    [ST_KEY_INSERT] = {"INSERT INTO keys(name, role, salt, hash, created_at)"
                       " VALUES ($1, $2, $3::bytea, $4::bytea, $5)",
                       5},
    [ST_KEYS_LIST] = {"SELECT name, role, salt, hash, created_at, revoked_at"
                      " FROM keys WHERE $1::int = 0 OR revoked_at = ''"
                      " ORDER BY name",
                      1},
    [ST_KEY_REVOKE] = {"UPDATE keys SET revoked_at = $2 WHERE name = $1"
                       " AND revoked_at = ''",
                       2},
};

typedef struct pg_store pg_store;

/* One connection of the pool. `busy` (under the store's lock) says a call
 * has it; everything else is that call's alone meanwhile. */
typedef struct pg_conn {
  pg_store *store;
  PGconn *conn;  /* NULL until first needed */
  bool prepared; /* the statements exist on this connection */
  bool busy;
  struct timespec reset_failed; /* last failed (re)connection (monotonic) */
  bool reset_failed_set;
} pg_conn;

struct pg_store {
  pthread_mutex_t lock; /* the pool's busy flags and the fields below */
  pthread_cond_t free_cv; /* a connection was given back */
  pg_conn pool[FG_PG_POOL];
  char url[FG_PG_URL_MAX];
  int fail_countdown; /* test seam: > 0 = writes until an injected fault */
  char instance[33];  /* random hex id of this process's instance */
  /* the upkeep thread (started by mark_interrupted) */
  pthread_t upkeep;
  bool upkeep_started, stopping;
  pthread_cond_t stop_cv;
};

/* ---- parameters ---- */

/* Up to 20 parameters of one statement, as text (bytea as binary). */
typedef struct params {
  int n;
  const char *v[20];
  int len[20], fmt[20];
  char num[20][40]; /* formatted numbers */
} params;

static void par_text(params *q, const char *v) {
  int i = q->n++;
  q->v[i] = v;
  q->len[i] = 0;
  q->fmt[i] = 0;
}

/* Empty strings as NULL: optional filters. */
static void par_filter(params *q, const char *v) {
  par_text(q, (v && v[0]) ? v : NULL);
}

static void par_int(params *q, long long v) {
  int i = q->n;
  snprintf(q->num[i], sizeof q->num[i], "%lld", v);
  par_text(q, q->num[i]);
}

/* Shortest text that reads back as the same double; NaN as NULL. */
static void par_real(params *q, double v) {
  int i = q->n;
  if (isnan(v)) {
    par_text(q, NULL);
    return;
  }
  snprintf(q->num[i], sizeof q->num[i], "%.17g", v);
  par_text(q, q->num[i]);
}

static void par_bytes(params *q, const uint8_t *b, int n) {
  int i = q->n++;
  q->v[i] = (const char *)b;
  q->len[i] = n;
  q->fmt[i] = 1;
}

/* ---- errors ---- */

static fg_status pg_fault(pg_conn *s, fg_problem *p, const char *what,
                          const PGresult *r) {
  const char *state = r ? PQresultErrorField(r, PG_DIAG_SQLSTATE) : NULL;
  fg_status st = FG_EIO;
  if (state && strcmp(state, "23505") == 0) st = FG_ECONFLICT;
  /* serialization failure, deadlock, lock or statement time-out */
  if (state && (strcmp(state, "40001") == 0 || strcmp(state, "40P01") == 0 ||
                strcmp(state, "55P03") == 0 || strcmp(state, "57014") == 0))
    st = FG_EBUSY;
  const char *msg = r ? PQresultErrorMessage(r) : NULL;
  if (!msg || !msg[0])
    msg = s->conn ? PQerrorMessage(s->conn) : "no connection";
  /* libpq's messages end in a newline */
  char buf[512];
  snprintf(buf, sizeof buf, "%s", msg);
  size_t n = strlen(buf);
  while (n > 0 && (buf[n - 1] == '\n' || buf[n - 1] == ' '))
    buf[--n] = '\0';
  return fg_problem_set(p, st, "store %s: %s%s%s%s", what, buf,
                        state ? " (SQLSTATE " : "", state ? state : "",
                        state ? ")" : "");
}

/* ---- connection and statements ---- */

static bool prepare_all(pg_conn *s, fg_problem *p) {
  for (int i = 0; i < ST_COUNT; i++) {
    char name[16];
    snprintf(name, sizeof name, "fg%d", i);
    PGresult *r =
        PQprepare(s->conn, name, stmt_sql[i].sql, stmt_sql[i].nparams, NULL);
    bool ok = PQresultStatus(r) == PGRES_COMMAND_OK;
    if (!ok) pg_fault(s, p, "preparing a statement", r);
    PQclear(r);
    if (!ok) return false;
  }
  s->prepared = true;
  return true;
}

static bool command(pg_conn *s, const char *sql, const char *what,
                    fg_problem *p);

/* Settings of every (re)made session: quieter notices ("relation exists,
 * skipping" is not ours to log) and the time limits above. */
static void set_session(pg_conn *s) {
  char sql[160];
  snprintf(sql, sizeof sql,
           "SET client_min_messages = warning; SET statement_timeout = %d;"
           " SET lock_timeout = %d",
           FG_PG_STATEMENT_TIMEOUT_MS, FG_PG_LOCK_TIMEOUT_MS);
  command(s, sql, NULL, NULL);
}

/* A usable connection with the statements prepared, or FG_EIO. */
static double since_s(const struct timespec *t) {
  struct timespec now;
  clock_gettime(CLOCK_MONOTONIC, &now);
  return (double)(now.tv_sec - t->tv_sec) + (now.tv_nsec - t->tv_nsec) * 1e-9;
}

/* Opens the connection of slot `s` (keywords before "dbname" are defaults
 * the URL may override). */
static void open_conn(pg_conn *s) {
  const char *const keys[] = {"connect_timeout", "application_name", "dbname",
                              NULL};
  const char *const vals[] = {FG_PG_CONNECT_TIMEOUT_S, "feasgate", s->store->url,
                              NULL};
  s->conn = PQconnectdbParams(keys, vals, 1);
  s->prepared = false;
}

static fg_status ready(pg_conn *s, fg_problem *p) {
  if (!s->conn || PQstatus(s->conn) != CONNECTION_OK) {
    if (s->reset_failed_set &&
        since_s(&s->reset_failed) < FG_PG_RETRY_MS / 1000.0)
      return fg_problem_set(p, FG_EIO,
                            "store postgresql: connection lost; trying again "
                            "at most every %d ms",
                            FG_PG_RETRY_MS);
    if (s->conn)
      PQreset(s->conn);
    else
      open_conn(s);
    s->prepared = false;
    if (!s->conn || PQstatus(s->conn) != CONNECTION_OK) {
      clock_gettime(CLOCK_MONOTONIC, &s->reset_failed);
      s->reset_failed_set = true;
      return pg_fault(s, p, "connection lost and not re-established", NULL);
    }
    s->reset_failed_set = false;
    set_session(s);
  }
  if (!s->prepared && !prepare_all(s, p)) return p ? p->status : FG_EIO;
  return FG_OK;
}

static PGresult *run(pg_conn *s, int id, const params *q) {
  char name[16];
  snprintf(name, sizeof name, "fg%d", id);
  return PQexecPrepared(s->conn, name, q ? q->n : 0, q ? q->v : NULL,
                        q ? q->len : NULL, q ? q->fmt : NULL, 0);
}

/* A plain command (BEGIN, COMMIT, ROLLBACK, DDL). */
static bool command(pg_conn *s, const char *sql, const char *what,
                    fg_problem *p) {
  PGresult *r = PQexec(s->conn, sql);
  bool ok = PQresultStatus(r) == PGRES_COMMAND_OK ||
            PQresultStatus(r) == PGRES_TUPLES_OK;
  if (!ok && what) pg_fault(s, p, what, r);
  PQclear(r);
  return ok;
}

static void rollback(pg_conn *s) {
  if (PQtransactionStatus(s->conn) != PQTRANS_IDLE)
    command(s, "ROLLBACK", NULL, NULL);
}

/* A data write inside the open transaction; NULL result with *fault set
 * when the test seam strikes. Returns rows changed, or -1 with *p set. */
static long write_stmt(pg_conn *s, int id, const params *q, const char *what,
                       fg_problem *p) {
  pthread_mutex_lock(&s->store->lock);
  bool strike = s->store->fail_countdown > 0 && --s->store->fail_countdown == 0;
  pthread_mutex_unlock(&s->store->lock);
  if (strike) {
    fg_problem_set(p, FG_EIO, "store %s: injected write fault", what);
    return -1;
  }
  PGresult *r = run(s, id, q);
  if (PQresultStatus(r) != PGRES_COMMAND_OK) {
    pg_fault(s, p, what, r);
    PQclear(r);
    return -1;
  }
  long n = atol(PQcmdTuples(r));
  PQclear(r);
  return n;
}

/* COMMIT when res is FG_OK, else ROLLBACK; the outcome of the write. */
static fg_status finish_tx(pg_conn *s, fg_status res, const char *what,
                           fg_problem *p) {
  if (res == FG_OK && !command(s, "COMMIT", what, p))
    res = p ? p->status : FG_EIO;
  if (res != FG_OK) rollback(s);
  return res;
}

/* Takes a connection of the pool (waiting while all are in use), ready
 * for statements; on failure gives it back. */
static fg_status enter(pg_store *st, pg_conn **out, fg_problem *p) {
  *out = NULL;
  pthread_mutex_lock(&st->lock);
  pg_conn *c;
  for (;;) {
    c = NULL;
    for (int i = 0; i < FG_PG_POOL; i++) {
      pg_conn *k = &st->pool[i];
      if (k->busy) continue;
      if (k->conn) { /* an open one first */
        c = k;
        break;
      }
      if (!c) c = k;
    }
    if (c) break;
    pthread_cond_wait(&st->free_cv, &st->lock);
  }
  c->busy = true;
  pthread_mutex_unlock(&st->lock);
  fg_status res = ready(c, p);
  if (res != FG_OK) {
    pthread_mutex_lock(&st->lock);
    c->busy = false;
    pthread_cond_signal(&st->free_cv);
    pthread_mutex_unlock(&st->lock);
    return res;
  }
  *out = c;
  return FG_OK;
}

/* Gives the connection back and passes `res` on. The argument is evaluated
 * first, so a problem quoting the connection's message is written while
 * the connection is still this call's. */
static fg_status leave(pg_conn *c, fg_status res) {
  pg_store *st = c->store;
  pthread_mutex_lock(&st->lock);
  c->busy = false;
  pthread_cond_signal(&st->free_cv);
  pthread_mutex_unlock(&st->lock);
  return res;
}

static fg_status begin(pg_conn *s, const char *what, fg_problem *p) {
  return command(s, "BEGIN", what, p) ? FG_OK : (p ? p->status : FG_EIO);
}

/* enter() and BEGIN together; on failure nothing is held. */
static fg_status enter_tx(pg_store *st, pg_conn **out, const char *what,
                          fg_problem *p) {
  fg_status res = enter(st, out, p);
  if (res != FG_OK) return res;
  res = begin(*out, what, p);
  if (res != FG_OK) {
    leave(*out, res);
    *out = NULL;
  }
  return res;
}

/* ---- text of result cells ---- */

static void copy_cell(char *dst, size_t cap, const PGresult *r, int row,
                      int col) {
  snprintf(dst, cap, "%s",
           PQgetisnull(r, row, col) ? "" : PQgetvalue(r, row, col));
}

static char *dup_cell(const PGresult *r, int row, int col) {
  if (PQgetisnull(r, row, col)) return NULL;
  return strdup(PQgetvalue(r, row, col));
}

static double real_cell(const PGresult *r, int row, int col) {
  if (PQgetisnull(r, row, col)) return NAN;
  return strtod(PQgetvalue(r, row, col), NULL);
}

static long long int_cell(const PGresult *r, int row, int col) {
  return strtoll(PQgetvalue(r, row, col), NULL, 10);
}

/* ---- open / close ---- */

static fg_status setup_schema(pg_conn *s, fg_problem *p) {
  char sql[160];
  if (!command(s, "BEGIN", "creating the schema", p)) return p->status;
  snprintf(sql, sizeof sql, "SELECT pg_advisory_xact_lock(%d)",
           FG_PG_SCHEMA_LOCK);
  if (!command(s, sql, "creating the schema", p) ||
      !command(s, schema_sql, "creating the schema", p)) {
    rollback(s);
    return p->status;
  }
  PGresult *r = PQexec(s->conn, "SELECT MAX(version) FROM schema_version");
  if (PQresultStatus(r) != PGRES_TUPLES_OK) {
    fg_status st = pg_fault(s, p, "reading the schema version", r);
    PQclear(r);
    rollback(s);
    return st;
  }
  long long have = PQgetisnull(r, 0, 0) ? -1 : int_cell(r, 0, 0);
  PQclear(r);
  if (have > FG_PG_SCHEMA_VERSION) {
    rollback(s);
    return fg_problem_set(p, FG_EIO,
                          "store: schema version %lld is newer than this "
                          "build understands (%d)",
                          have, FG_PG_SCHEMA_VERSION);
  }
  if (have < 0) {
    snprintf(sql, sizeof sql, "INSERT INTO schema_version VALUES (%d)",
             FG_PG_SCHEMA_VERSION);
    if (!command(s, sql, "writing the schema version", p)) {
      rollback(s);
      return p->status;
    }
  }
  return finish_tx(s, FG_OK, "creating the schema", p);
}

static void pg_close(void *b);

static fg_status pg_open(const char *url, void **out, fg_problem *p) {
  *out = NULL;
  if (strlen(url) >= FG_PG_URL_MAX)
    return fg_problem_set(p, FG_EINVAL, "store URL longer than %d characters",
                          FG_PG_URL_MAX - 1);
  pg_store *s = calloc(1, sizeof *s);
  if (!s) return fg_problem_set(p, FG_ENOMEM, "store: out of memory");
  pthread_mutex_init(&s->lock, NULL);
  pthread_cond_init(&s->stop_cv, NULL);
  pthread_cond_init(&s->free_cv, NULL);
  for (int i = 0; i < FG_PG_POOL; i++) s->pool[i].store = s;
  snprintf(s->url, sizeof s->url, "%s", url);
  uint8_t rnd[16];
  if (getrandom(rnd, sizeof rnd, 0) != (ssize_t)sizeof rnd) {
    pg_close(s);
    return fg_problem_set(p, FG_EIO, "store: no random bytes for an id");
  }
  for (int i = 0; i < 16; i++)
    snprintf(s->instance + 2 * i, 3, "%02x", rnd[i]);
  /* the first connection now: it checks the URL and makes the schema
   * (before any statement that names its tables is prepared) */
  pg_conn *c = &s->pool[0];
  open_conn(c);
  if (PQstatus(c->conn) != CONNECTION_OK) {
    /* the URL may carry a password: name the server's reason, not the URL */
    char why[512];
    snprintf(why, sizeof why, "%s", PQerrorMessage(c->conn));
    for (char *k = why; *k; k++) /* libpq's message spans lines */
      if (*k == '\n' || *k == '\t') *k = ' ';
    for (size_t n = strlen(why); n > 0 && why[n - 1] == ' '; n--)
      why[n - 1] = '\0';
    fg_status st = fg_problem_set(p, FG_EIO,
                                  "store postgresql: cannot connect: %s", why);
    pg_close(s);
    return st;
  }
  set_session(c);
  fg_status st = setup_schema(c, p);
  if (st == FG_OK && !prepare_all(c, p)) st = p->status ? p->status : FG_EIO;
  if (st != FG_OK) {
    pg_close(s);
    return st;
  }
  *out = s;
  return FG_OK;
}

static void pg_close(void *b) {
  pg_store *s = b;
  if (!s) return;
  if (s->upkeep_started) {
    pthread_mutex_lock(&s->lock);
    s->stopping = true;
    pthread_cond_broadcast(&s->stop_cv);
    pthread_mutex_unlock(&s->lock);
    pthread_join(s->upkeep, NULL);
    /* a clean stop: this instance's row goes (its checks have ended) */
    pg_conn *c = NULL;
    if (enter(s, &c, NULL) == FG_OK) {
      params q = {0};
      par_text(&q, s->instance);
      PQclear(run(c, ST_INSTANCE_END, &q));
      leave(c, FG_OK);
    }
  }
  for (int i = 0; i < FG_PG_POOL; i++)
    if (s->pool[i].conn) PQfinish(s->pool[i].conn);
  pthread_cond_destroy(&s->free_cv);
  pthread_cond_destroy(&s->stop_cv);
  pthread_mutex_destroy(&s->lock);
  free(s);
}

static fg_status pg_ping(void *b, fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  PGresult *r = run(s, ST_PING, NULL);
  if (PQresultStatus(r) != PGRES_TUPLES_OK) res = pg_fault(s, p, "ping", r);
  PQclear(r);
  return leave(s, res);
}

/* ---- versions ---- */

static bool read_version_row(const PGresult *r, int row, fg_store_version *out,
                             bool with_document) {
  memset(out, 0, sizeof *out);
  copy_cell(out->name, sizeof out->name, r, row, 0);
  out->version = (int)int_cell(r, row, 1);
  copy_cell(out->digest, sizeof out->digest, r, row, 2);
  copy_cell(out->created_at, sizeof out->created_at, r, row, 3);
  out->title = dup_cell(r, row, 4);
  if (!PQgetisnull(r, row, 4) && !out->title) return false;
  if (with_document) {
    out->document = dup_cell(r, row, 5);
    if (!out->document) return false;
    out->retired = int_cell(r, row, 6) != 0;
  }
  return true;
}

static fg_status get_version_locked(pg_conn *s, const char *name, int version,
                                    fg_store_version *out, fg_problem *p) {
  params q = {0};
  par_text(&q, name);
  par_int(&q, version);
  PGresult *r = run(s, ST_VERSION_GET, &q);
  fg_status res = FG_OK;
  if (PQresultStatus(r) != PGRES_TUPLES_OK) {
    res = pg_fault(s, p, "reading a model version", r);
  } else if (PQntuples(r) == 0) {
    if (version > 0)
      res = fg_problem_set(p, FG_ENOTFOUND, "model '%s' has no version %d",
                           name, version);
    else
      res = fg_problem_set(p, FG_ENOTFOUND, "no model named '%s'", name);
  } else if (!read_version_row(r, 0, out, true)) {
    fg_store_version_clear(out);
    res = fg_problem_set(p, FG_ENOMEM, "store: out of memory reading %s", name);
  }
  PQclear(r);
  return res;
}

static fg_status pg_put_version(void *b, const char *name, const char *digest,
                                const char *canonical, const char *title,
                                fg_store_version *out, bool *created,
                                fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  memset(out, 0, sizeof *out);
  *created = false;
  char now[32];
  fg_store_now_rfc3339(now);
  fg_status res = enter_tx(st, &s, "begin (register model)", p);
  if (res != FG_OK) return res;
  /* the upsert first: it locks the model row (and revives a retired name,
   * also when the document is the same as its latest version) */
  params q = {0};
  par_text(&q, name);
  par_text(&q, now);
  int latest = 0;
  bool same = false;
  if (write_stmt(s, ST_MODEL_UPSERT, &q, "writing the model", p) < 0) {
    res = p->status;
    goto end;
  }
  q = (params){0};
  par_text(&q, name);
  PGresult *r = run(s, ST_LATEST, &q);
  if (PQresultStatus(r) != PGRES_TUPLES_OK) {
    res = pg_fault(s, p, "reading the latest version", r);
    PQclear(r);
    goto end;
  }
  if (PQntuples(r) > 0) {
    latest = (int)int_cell(r, 0, 0);
    same = strcmp(PQgetvalue(r, 0, 1), digest) == 0;
  }
  PQclear(r);
  if (!same) {
    q = (params){0};
    par_text(&q, name);
    par_int(&q, latest + 1);
    par_text(&q, digest);
    par_text(&q, canonical);
    par_text(&q, title);
    par_text(&q, now);
    if (write_stmt(s, ST_VERSION_INSERT, &q, "writing the version", p) < 0) {
      res = p->status;
      goto end;
    }
  }
  res = get_version_locked(s, name, same ? latest : latest + 1, out, p);
end:
  res = finish_tx(s, res, "commit (register model)", p);
  if (res == FG_OK)
    *created = !same;
  else
    fg_store_version_clear(out);
  return leave(s, res);
}

static fg_status pg_get_version(void *b, const char *name, int version,
                                fg_store_version *out, fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  memset(out, 0, sizeof *out);
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  return leave(s, get_version_locked(s, name, version, out, p));
}

static fg_status pg_list_models(void *b, fg_store_version **out, int *n,
                                fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  *out = NULL;
  *n = 0;
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  PGresult *r = run(s, ST_MODELS_LIST, NULL);
  if (PQresultStatus(r) != PGRES_TUPLES_OK) {
    res = pg_fault(s, p, "listing models", r);
    PQclear(r);
    return leave(s, res);
  }
  int rows = PQntuples(r);
  fg_store_version *arr = calloc(rows > 0 ? (size_t)rows : 1, sizeof *arr);
  int count = 0;
  if (!arr)
    res = fg_problem_set(p, FG_ENOMEM, "store: out of memory listing models");
  for (int i = 0; arr && i < rows; i++) {
    if (!read_version_row(r, i, &arr[count++], false)) {
      res = fg_problem_set(p, FG_ENOMEM, "store: out of memory listing models");
      break;
    }
  }
  PQclear(r);
  leave(s, res);
  if (res != FG_OK) {
    fg_store_versions_free(arr, count);
    return res;
  }
  if (count == 0) {
    free(arr);
    arr = NULL;
  }
  *out = arr;
  *n = count;
  return FG_OK;
}

/* One write statement in its own transaction. must_change: no row changed
 * is FG_ENOTFOUND with `missing` as the message (its %s the id). */
static fg_status write_alone(pg_conn *s, int id, const params *q,
                             const char *what, const char *missing,
                             const char *key, fg_problem *p) {
  /* One statement is its own transaction in PostgreSQL (autocommit): all
   * of it or none, without a BEGIN and a COMMIT round trip. */
  long n = write_stmt(s, id, q, what, p);
  if (n < 0) return p->status;
  if (missing && n == 0)
    return fg_problem_set(p, FG_ENOTFOUND, missing, key);
  return FG_OK;
}

static fg_status pg_retire_model(void *b, const char *name, fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  params q = {0};
  par_text(&q, name);
  return leave(s, write_alone(s, ST_RETIRE, &q, "retiring a model",
                              "no model named '%s'", name, p));
}

/* ---- checks ---- */

static void read_check_row(const PGresult *r, int row, fg_store_check *out) {
  memset(out, 0, sizeof *out);
  copy_cell(out->id, sizeof out->id, r, row, 0);
  copy_cell(out->model, sizeof out->model, r, row, 1);
  out->version = (int)int_cell(r, row, 2);
  copy_cell(out->digest, sizeof out->digest, r, row, 3);
  copy_cell(out->status, sizeof out->status, r, row, 4);
  copy_cell(out->verdict, sizeof out->verdict, r, row, 5);
  out->seed = (uint64_t)int_cell(r, row, 6);
  copy_cell(out->created_at, sizeof out->created_at, r, row, 7);
  copy_cell(out->finished_at, sizeof out->finished_at, r, row, 8);
  out->elapsed_ms = real_cell(r, row, 9);
  copy_cell(out->label, sizeof out->label, r, row, 10);
  copy_cell(out->key, sizeof out->key, r, row, 11);
  out->probability = real_cell(r, row, 12);
  out->lower = real_cell(r, row, 13);
  out->upper = real_cell(r, row, 14);
  copy_cell(out->replay_of, sizeof out->replay_of, r, row, 15);
}

static fg_status pg_put_check(void *b, const fg_store_check *c, fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  params q = {0};
  par_text(&q, c->id);
  par_text(&q, c->model);
  par_int(&q, c->version);
  par_text(&q, c->digest);
  par_text(&q, c->status[0] ? c->status : "running");
  par_text(&q, c->verdict);
  par_int(&q, (long long)c->seed);
  par_text(&q, c->created_at);
  par_text(&q, c->finished_at);
  par_real(&q, c->elapsed_ms);
  par_text(&q, c->label);
  par_text(&q, c->key);
  par_real(&q, c->probability);
  par_real(&q, c->lower);
  par_real(&q, c->upper);
  par_text(&q, c->request ? c->request : "{}");
  par_text(&q, c->result);
  par_text(&q, s->store->upkeep_started ? s->store->instance : "");
  par_text(&q, c->replay_of);
  res = write_alone(s, ST_CHECK_INSERT, &q, "recording check", NULL, c->id, p);
  return leave(s, res);
}

static fg_status pg_finish_check(void *b, const fg_store_check *c,
                                 fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  params q = {0};
  par_text(&q, c->id);
  par_text(&q, c->status);
  par_text(&q, c->verdict);
  par_text(&q, c->finished_at);
  par_real(&q, c->elapsed_ms);
  par_real(&q, c->probability);
  par_real(&q, c->lower);
  par_real(&q, c->upper);
  par_text(&q, c->result);
  res = write_alone(s, ST_CHECK_FINISH, &q, "finishing check",
                    "no check with id '%s'", c->id, p);
  return leave(s, res);
}

static fg_status pg_get_check(void *b, const char *id, fg_store_check *out,
                              fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  memset(out, 0, sizeof *out);
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  params q = {0};
  par_text(&q, id);
  PGresult *r = run(s, ST_CHECK_GET, &q);
  if (PQresultStatus(r) != PGRES_TUPLES_OK) {
    res = pg_fault(s, p, "reading a check", r);
  } else if (PQntuples(r) == 0) {
    res = fg_problem_set(p, FG_ENOTFOUND, "no check with id '%s'", id);
  } else {
    read_check_row(r, 0, out);
    out->request = dup_cell(r, 0, 16);
    out->result = dup_cell(r, 0, 17);
    if (!out->request || (!PQgetisnull(r, 0, 17) && !out->result)) {
      fg_store_check_clear(out);
      res = fg_problem_set(p, FG_ENOMEM, "store: out of memory reading %s", id);
    }
  }
  PQclear(r);
  return leave(s, res);
}

/* ---- comparisons ---- */

static fg_status pg_put_comparison(void *b, const fg_store_comparison *c,
                                   fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  params q = {0};
  par_text(&q, c->id);
  par_text(&q, c->model);
  par_int(&q, c->version);
  par_text(&q, c->digest);
  par_text(&q, c->status[0] ? c->status : "running");
  par_text(&q, c->created_at);
  par_text(&q, c->finished_at);
  par_text(&q, c->key);
  par_text(&q, c->checks ? c->checks : "[]");
  par_text(&q, c->result);
  par_text(&q, s->store->upkeep_started ? s->store->instance : "");
  res = write_alone(s, ST_CMP_INSERT, &q, "recording comparison", NULL, c->id,
                    p);
  return leave(s, res);
}

static fg_status pg_finish_comparison(void *b, const fg_store_comparison *c,
                                      fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  params q = {0};
  par_text(&q, c->id);
  par_text(&q, c->status);
  par_text(&q, c->finished_at);
  par_text(&q, c->result);
  res = write_alone(s, ST_CMP_FINISH, &q, "finishing comparison",
                    "no comparison with id '%s'", c->id, p);
  return leave(s, res);
}

static fg_status pg_get_comparison(void *b, const char *id,
                                   fg_store_comparison *out, fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  memset(out, 0, sizeof *out);
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  params q = {0};
  par_text(&q, id);
  PGresult *r = run(s, ST_CMP_GET, &q);
  if (PQresultStatus(r) != PGRES_TUPLES_OK) {
    res = pg_fault(s, p, "reading a comparison", r);
  } else if (PQntuples(r) == 0) {
    res = fg_problem_set(p, FG_ENOTFOUND, "no comparison with id '%s'", id);
  } else {
    copy_cell(out->id, sizeof out->id, r, 0, 0);
    copy_cell(out->model, sizeof out->model, r, 0, 1);
    out->version = (int)int_cell(r, 0, 2);
    copy_cell(out->digest, sizeof out->digest, r, 0, 3);
    copy_cell(out->status, sizeof out->status, r, 0, 4);
    copy_cell(out->created_at, sizeof out->created_at, r, 0, 5);
    copy_cell(out->finished_at, sizeof out->finished_at, r, 0, 6);
    copy_cell(out->key, sizeof out->key, r, 0, 7);
    out->checks = dup_cell(r, 0, 8);
    out->result = dup_cell(r, 0, 9);
    if (!out->checks || (!PQgetisnull(r, 0, 9) && !out->result)) {
      fg_store_comparison_clear(out);
      res = fg_problem_set(p, FG_ENOMEM, "store: out of memory reading %s", id);
    }
  }
  PQclear(r);
  return leave(s, res);
}

static fg_status pg_note_progress(void *b, const char *id, const char *body,
                                  fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  params q = {0};
  par_text(&q, id);
  par_text(&q, body);
  return leave(s, write_alone(s, ST_CHECK_PROGRESS, &q,
                              "noting progress of check", NULL, id, p));
}

static fg_status pg_request_cancel(void *b, const char *id, fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  params q = {0};
  par_text(&q, id);
  long n = write_stmt(s, ST_CANCEL_ASK, &q, "asking for a cancel", p);
  if (n < 0) return leave(s, p->status);
  if (n == 0) {
    PGresult *r = run(s, ST_CANCEL_STATUS, &q);
    if (PQresultStatus(r) != PGRES_TUPLES_OK)
      res = pg_fault(s, p, "reading a check's status", r);
    else if (PQntuples(r) == 0)
      res = fg_problem_set(p, FG_ENOTFOUND, "no check with id '%s'", id);
    else
      res = fg_problem_set(p, FG_ECONFLICT,
                           "check %s is not running: it ended %s", id,
                           PQgetvalue(r, 0, 0));
    PQclear(r);
  }
  return leave(s, res);
}

static fg_status pg_cancel_requests(void *b, char (*ids)[40], int cap, int *n,
                                    fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  *n = 0;
  if (!st->upkeep_started) return FG_OK; /* no instance, no checks of ours */
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  params q = {0};
  par_text(&q, s->store->instance);
  par_int(&q, cap);
  PGresult *r = run(s, ST_CANCEL_ASKED, &q);
  if (PQresultStatus(r) != PGRES_TUPLES_OK) {
    res = pg_fault(s, p, "reading cancel requests", r);
  } else {
    for (int i = 0; i < PQntuples(r) && *n < cap; i++)
      copy_cell(ids[(*n)++], 40, r, i, 0);
  }
  PQclear(r);
  return leave(s, res);
}

static fg_status pg_list_checks(void *b, const fg_check_filter *f,
                                fg_store_check **out, int *n, fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  const int limit = f->limit;
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  char cursor_time[32] = "";
  if (f->after && f->after[0]) {
    params c = {0};
    par_text(&c, f->after);
    PGresult *r = run(s, ST_CHECK_CURSOR, &c);
    if (PQresultStatus(r) != PGRES_TUPLES_OK)
      res = pg_fault(s, p, "reading the list cursor", r);
    else if (PQntuples(r) == 0)
      res =
          fg_problem_set(p, FG_EINVAL, "cursor '%s' names no check", f->after);
    else
      copy_cell(cursor_time, sizeof cursor_time, r, 0, 0);
    PQclear(r);
  }
  fg_store_check *arr = NULL;
  int count = 0;
  if (res == FG_OK) {
    params q = {0};
    par_filter(&q, f->model);
    par_filter(&q, f->verdict);
    par_filter(&q, f->since);
    par_filter(&q, f->label);
    par_filter(&q, cursor_time);
    par_filter(&q, f->after);
    par_int(&q, limit + 1); /* one more tells if more remain */
    par_filter(&q, f->key);
    PGresult *r = run(s, ST_CHECKS_LIST, &q);
    if (PQresultStatus(r) != PGRES_TUPLES_OK) {
      res = pg_fault(s, p, "listing checks", r);
    } else {
      int rows = PQntuples(r);
      arr = calloc((size_t)limit + 1, sizeof *arr);
      if (!arr) res = fg_problem_set(p, FG_ENOMEM, "store: out of memory");
      for (int i = 0; arr && i < rows && i <= limit; i++)
        read_check_row(r, i, &arr[count++]);
    }
    PQclear(r);
  }
  leave(s, res);
  if (res != FG_OK) {
    fg_store_checks_free(arr, count);
    return res;
  }
  *out = arr;
  *n = count;
  return FG_OK;
}

/* ---- instances: heartbeat and sweep ---- */

/* Marks checks of silent owners interrupted, on a connection the caller
 * holds. */
static fg_status sweep_stale(pg_conn *s, int *count, fg_problem *p) {
  char now[32];
  fg_store_now_rfc3339(now);
  fg_status res = begin(s, "marking interrupted checks", p);
  if (res != FG_OK) return res;
  params q = {0};
  par_text(&q, now);
  par_text(&q, s->store->instance);
  par_int(&q, FG_PG_STALE_S);
  long n = write_stmt(s, ST_MARK_STALE, &q, "marking interrupted checks", p);
  if (n < 0) res = p->status;
  if (res == FG_OK &&
      write_stmt(s, ST_MARK_CMP_STALE, &q, "marking interrupted comparisons",
                 p) < 0)
    res = p->status;
  if (res == FG_OK) {
    q = (params){0};
    par_int(&q, FG_PG_INSTANCE_KEEP_S);
    if (write_stmt(s, ST_INSTANCE_PRUNE, &q, "pruning instances", p) < 0)
      res = p->status;
  }
  res = finish_tx(s, res, "marking interrupted checks", p);
  if (count) *count = res == FG_OK ? (int)n : 0;
  return res;
}

static fg_status beat_once(pg_conn *s, fg_problem *p) {
  params q = {0};
  par_text(&q, s->store->instance);
  PGresult *r = run(s, ST_INSTANCE_BEAT, &q);
  fg_status res = PQresultStatus(r) == PGRES_COMMAND_OK
                      ? FG_OK
                      : pg_fault(s, p, "heartbeat", r);
  PQclear(r);
  return res;
}

static void *upkeep_main(void *arg) {
  pg_store *s = arg;
  long since_sweep = 0;
  pthread_mutex_lock(&s->lock);
  while (!s->stopping) {
    struct timespec until;
    clock_gettime(CLOCK_REALTIME, &until);
    until.tv_sec += FG_PG_HEARTBEAT_MS / 1000;
    until.tv_nsec += (FG_PG_HEARTBEAT_MS % 1000) * 1000000L;
    if (until.tv_nsec >= 1000000000L) {
      until.tv_sec++;
      until.tv_nsec -= 1000000000L;
    }
    while (!s->stopping &&
           pthread_cond_timedwait(&s->stop_cv, &s->lock, &until) == 0) {
    }
    if (s->stopping) break;
    /* Failures are retried at the next beat: a lost database shows in
     * /v1/ready, and a long silence lets other replicas take over. The
     * store's lock is not held while a connection is used. */
    pthread_mutex_unlock(&s->lock);
    fg_problem p;
    fg_problem_init(&p);
    pg_conn *c = NULL;
    if (enter(s, &c, &p) == FG_OK) {
      beat_once(c, &p);
      since_sweep += FG_PG_HEARTBEAT_MS;
      if (since_sweep >= FG_PG_SWEEP_MS) {
        since_sweep = 0;
        fg_problem_init(&p);
        sweep_stale(c, NULL, &p);
      }
      leave(c, FG_OK);
    }
    pthread_mutex_lock(&s->lock);
  }
  pthread_mutex_unlock(&s->lock);
  return NULL;
}

static fg_status pg_mark_interrupted(void *b, int *count, fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  *count = 0;
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  if (!s->store->upkeep_started) {
    char now[32], host[256] = "";
    fg_store_now_rfc3339(now);
    if (gethostname(host, sizeof host - 1) != 0)
      snprintf(host, sizeof host, "?");
    params q = {0};
    par_text(&q, s->store->instance);
    par_text(&q, host);
    par_int(&q, (long long)getpid());
    par_text(&q, now);
    res = begin(s, "registering this instance", p);
    if (res == FG_OK && write_stmt(s, ST_INSTANCE_UPSERT, &q,
                                   "registering this instance", p) < 0)
      res = p->status;
    res = finish_tx(s, res, "registering this instance", p);
    if (res != FG_OK) return leave(s, res);
  }
  res = sweep_stale(s, count, p);
  if (res == FG_OK && !s->store->upkeep_started) {
    if (pthread_create(&st->upkeep, NULL, upkeep_main, st) != 0)
      res =
          fg_problem_set(p, FG_EIO, "store: cannot start the heartbeat thread");
    else
      s->store->upkeep_started = true;
  }
  return leave(s, res);
}

static void pg_inject_write_fault(void *b, int nth) {
  pg_store *s = b;
  pthread_mutex_lock(&s->lock);
  s->fail_countdown = nth > 0 ? nth : 0;
  pthread_mutex_unlock(&s->lock);
}

/* ---- keys ---- */

static fg_status pg_put_key(void *b, const fg_store_key *k, fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  const char *now = k->created_at; /* store.c fills it when empty */
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  params q = {0};
  par_text(&q, k->name);
  par_text(&q, k->role);
  par_bytes(&q, k->salt, FG_STORE_KEY_SALT);
  par_bytes(&q, k->hash, FG_STORE_KEY_HASH);
  par_text(&q, now);
  res = write_alone(s, ST_KEY_INSERT, &q, "writing a key", NULL, k->name, p);
  if (res == FG_ECONFLICT)
    res = fg_problem_set(p, FG_ECONFLICT,
                         "a key named '%s' exists already; names are never "
                         "reused, also after revocation",
                         k->name);
  return leave(s, res);
}

/* A bytea cell (hex text) into a fixed buffer; false unless `n` bytes. */
static bool copy_bytes(uint8_t *dst, size_t n, const PGresult *r, int row,
                       int col) {
  size_t len = 0;
  unsigned char *raw =
      PQunescapeBytea((const unsigned char *)PQgetvalue(r, row, col), &len);
  bool ok = raw && len == n;
  if (ok) memcpy(dst, raw, n);
  PQfreemem(raw);
  return ok;
}

static fg_status pg_list_keys(void *b, bool live_only, fg_store_key **out,
                              int *n, fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  *out = NULL;
  *n = 0;
  fg_status res = enter(st, &s, p);
  if (res != FG_OK) return res;
  params q = {0};
  par_int(&q, live_only ? 1 : 0);
  PGresult *r = run(s, ST_KEYS_LIST, &q);
  fg_store_key *arr = NULL;
  int count = 0;
  if (PQresultStatus(r) != PGRES_TUPLES_OK) {
    res = pg_fault(s, p, "listing keys", r);
  } else if (PQntuples(r) > 0) {
    arr = calloc((size_t)PQntuples(r), sizeof *arr);
    if (!arr)
      res = fg_problem_set(p, FG_ENOMEM, "store: out of memory listing keys");
    for (int i = 0; arr && i < PQntuples(r); i++) {
      fg_store_key *k = &arr[count];
      memset(k, 0, sizeof *k);
      copy_cell(k->name, sizeof k->name, r, i, 0);
      copy_cell(k->role, sizeof k->role, r, i, 1);
      copy_cell(k->created_at, sizeof k->created_at, r, i, 4);
      copy_cell(k->revoked_at, sizeof k->revoked_at, r, i, 5);
      /* a damaged row (salt or hash of the wrong size) can match no key:
       * it is left out, so it neither lets anyone in nor counts as live */
      if (copy_bytes(k->salt, sizeof k->salt, r, i, 2) &&
          copy_bytes(k->hash, sizeof k->hash, r, i, 3))
        count++;
    }
  }
  PQclear(r);
  leave(s, res);
  if (res != FG_OK || count == 0) {
    free(arr);
    return res;
  }
  *out = arr;
  *n = count;
  return FG_OK;
}

static fg_status pg_revoke_key(void *b, const char *name, fg_problem *p) {
  pg_store *st = b;
  pg_conn *s = NULL;
  char now[32];
  fg_store_now_rfc3339(now);
  fg_status res = enter_tx(st, &s, "begin (revoke key)", p);
  if (res != FG_OK) return res;
  params q = {0};
  par_text(&q, name);
  par_text(&q, now);
  long changed = write_stmt(s, ST_KEY_REVOKE, &q, "revoking a key", p);
  if (changed < 0) {
    res = p->status;
  } else if (changed == 0) {
    q = (params){0};
    par_text(&q, name);
    PGresult *r = run(s, ST_KEY_EXISTS, &q);
    if (PQresultStatus(r) != PGRES_TUPLES_OK)
      res = pg_fault(s, p, "looking up a key", r);
    else if (PQntuples(r) > 0)
      res =
          fg_problem_set(p, FG_ECONFLICT, "key '%s' is revoked already", name);
    else
      res = fg_problem_set(p, FG_ENOTFOUND, "no key named '%s'", name);
    PQclear(r);
  }
  return leave(s, finish_tx(s, res, "commit (revoke key)", p));
}

const fg_store_ops fg_store_pgsql_ops = {
    .scheme = "postgresql",
    .shared = true,
    .open = pg_open,
    .close = pg_close,
    .ping = pg_ping,
    .put_version = pg_put_version,
    .get_version = pg_get_version,
    .list_models = pg_list_models,
    .retire_model = pg_retire_model,
    .put_check = pg_put_check,
    .finish_check = pg_finish_check,
    .get_check = pg_get_check,
    .note_progress = pg_note_progress,
    .request_cancel = pg_request_cancel,
    .cancel_requests = pg_cancel_requests,
    .list_checks = pg_list_checks,
    .mark_interrupted = pg_mark_interrupted,
    .put_comparison = pg_put_comparison,
    .finish_comparison = pg_finish_comparison,
    .get_comparison = pg_get_comparison,
    .inject_write_fault = pg_inject_write_fault,
    .put_key = pg_put_key,
    .list_keys = pg_list_keys,
    .revoke_key = pg_revoke_key,
};
