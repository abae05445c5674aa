/*
 * store/pgsql.c -- the PostgreSQL backend ("postgresql://..." or
 * "postgres://...", read by libpq): connections, transactions, statements
 * and rows for the store's operations (backend.h; the operations
 * themselves, with the replicas' upkeep, are in models.c, checks.c,
 * keys.c, replicas.c).
 *
 * Why: several feasgate replicas behind a load balancer share one
 * PostgreSQL database, so a model registered through one is checked
 * through any, and the check log is one log.
 *
 * Design
 *   A pool of up to FG_PG_POOL libpq connections per store: acquire takes
 *   a free one for the whole of one store call (libpq connections are not
 *   to be shared between threads at once), waiting when all are in use;
 *   release gives it back. Connections open when first needed. Every
 *   statement of sql.c is prepared once per connection (names "fgN", ?N
 *   turned into $N); values travel as text parameters (bytes as binary).
 *   A lone write is its own transaction (autocommit), so the store sends
 *   it without BEGIN and COMMIT.
 *
 *   When a connection is found broken at acquire it is reset once and the
 *   statements prepared again; after a failed reset, calls on it fail at
 *   once for FG_PG_RETRY_MS. A call that fails on a broken connection
 *   reports FG_EIO and the next call tries again. Every session has a
 *   statement and a lock time-out, and connecting has a time-out.
 *
 *   The schema is made at open under a transaction-scoped advisory lock,
 *   so replicas starting together do not race on it; schema_version 1.
 *   A connection failure at open names the server's reason, never the URL
 *   (it may carry a password).
 *
 * Errors: libpq failures become FG_EIO naming the operation and the
 * server's message; a unique violation (SQLSTATE 23505) is FG_ECONFLICT,
 * a serialization failure, deadlock, lock time-out or statement time-out
 * (40001, 40P01, 55P03, 57014) FG_EBUSY.
 *
 * Thread use: any thread; the store's lock guards only the pool's flags.
 */
#include "feasgate/clock.h"
#include "feasgate/limits.h"
#include "store/backend.h"

#include <libpq-fe.h>
#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* The advisory lock key held while creating the schema ("fgst"). */
#define FG_PG_SCHEMA_LOCK "1718055796" /* 0x66677374 */
/* Parameters of one statement at most. */
#define FG_PG_PARAMS_MAX 20

typedef struct pg_store pg_store;

/* One connection of the pool. `busy` (under the store's lock) says a call
 * has it; everything else is that call's alone meanwhile. */
typedef struct pg_conn {
  fg_conn base;
  pg_store *store;
  PGconn *conn;  /* NULL until first needed */
  bool prepared; /* the statements exist on this connection */
  bool busy;
  double reset_failed; /* last failed (re)connection, fg_time_monotonic */
  bool reset_failed_set;
  PGresult *res; /* the query being read, and its row */
  int row;
} pg_conn;

struct pg_store {
  pthread_mutex_t lock;   /* the pool's busy flags */
  pthread_cond_t free_cv; /* a connection was given back */
  pg_conn pool[FG_PG_POOL];
  char url[FG_PG_URL_MAX];
};

static fg_status fault(pg_conn *s, fg_problem *p, const char *what,
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
  /* libpq's messages end in a newline and may span lines */
  char buf[512];
  snprintf(buf, sizeof buf, "%s", msg);
  for (char *k = buf; *k; k++)
    if (*k == '\n' || *k == '\t') *k = ' ';
  for (size_t n = strlen(buf); n > 0 && buf[n - 1] == ' '; n--)
    buf[n - 1] = '\0';
  return fg_problem_set(p, st, "store %s: %s%s%s%s", what, buf,
                        state ? " (SQLSTATE " : "", state ? state : "",
                        state ? ")" : "");
}

/* A plain command (BEGIN, COMMIT, ROLLBACK, DDL, settings). */
static fg_status command(pg_conn *s, const char *sql, const char *what,
                         fg_problem *p) {
  PGresult *r = PQexec(s->conn, sql);
  ExecStatusType rs = PQresultStatus(r);
  fg_status st = rs == PGRES_COMMAND_OK || rs == PGRES_TUPLES_OK
                     ? FG_OK
                     : fault(s, p, what, r);
  PQclear(r);
  return st;
}

/* ---- connections ---- */

static bool prepare_all(pg_conn *s, fg_problem *p) {
  for (int i = 0; i < SQL_COUNT; i++) {
    char name[16], *sql = strdup(fg_sql_text[i]);
    if (!sql) {
      fg_problem_set(p, FG_ENOMEM, "store: out of memory");
      return false;
    }
    for (char *q = sql; *q; q++) /* ?N -> $N */
      if (*q == '?') *q = '$';
    snprintf(name, sizeof name, "fg%d", i);
    PGresult *r = PQprepare(s->conn, name, sql, 0, NULL);
    free(sql);
    bool ok = PQresultStatus(r) == PGRES_COMMAND_OK;
    if (!ok) fault(s, p, "preparing a statement", r);
    PQclear(r);
    if (!ok) return false;
  }
  s->prepared = true;
  return true;
}

/* Settings of every (re)made session: quieter notices ("relation exists,
 * skipping" is not ours to log) and the time limits above. */
static void set_session(pg_conn *s) {
  char sql[160];
  snprintf(sql, sizeof sql,
           "SET client_min_messages = warning; SET statement_timeout = %d;"
           " SET lock_timeout = %d",
           FG_PG_STATEMENT_TIMEOUT_MS, FG_PG_LOCK_TIMEOUT_MS);
  command(s, sql, "session settings", NULL);
}

/* Opens the connection of slot `s` (keywords before "dbname" are defaults
 * the URL may override). */
static void open_conn(pg_conn *s) {
  const char *const keys[] = {"connect_timeout", "application_name", "dbname",
                              NULL};
  const char *const vals[] = {FG_PG_CONNECT_TIMEOUT_S, "feasgate",
                              s->store->url, NULL};
  s->conn = PQconnectdbParams(keys, vals, 1);
  s->prepared = false;
}

/* A usable connection with the statements prepared, or FG_EIO. */
static fg_status ready(pg_conn *s, fg_problem *p) {
  if (!s->conn || PQstatus(s->conn) != CONNECTION_OK) {
    if (s->reset_failed_set &&
        fg_time_monotonic() - s->reset_failed < FG_PG_RETRY_MS / 1000.0)
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
      s->reset_failed = fg_time_monotonic();
      s->reset_failed_set = true;
      return fault(s, p, "connection lost and not re-established", NULL);
    }
    s->reset_failed_set = false;
    set_session(s);
  }
  if (!s->prepared && !prepare_all(s, p)) return p ? p->status : FG_EIO;
  return FG_OK;
}

static void give_back(pg_conn *c) {
  pg_store *st = c->store;
  pthread_mutex_lock(&st->lock);
  c->busy = false;
  pthread_cond_signal(&st->free_cv);
  pthread_mutex_unlock(&st->lock);
}

/* Takes a connection of the pool (an open one first), waiting while all
 * are in use, ready for statements; on failure gives it back. */
static fg_status acquire(void *b, fg_conn **out, fg_problem *p) {
  pg_store *st = b;
  pthread_mutex_lock(&st->lock);
  pg_conn *c;
  for (;;) {
    c = NULL;
    for (int i = 0; i < FG_PG_POOL; i++) {
      pg_conn *k = &st->pool[i];
      if (k->busy) continue;
      if (k->conn) {
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
    give_back(c);
    return res;
  }
  *out = &c->base;
  return FG_OK;
}

static void release(fg_conn *c) {
  give_back((pg_conn *)c);
}

/* ---- transactions and statements ---- */

static fg_status begin(fg_conn *c, const char *what, fg_problem *p) {
  return command((pg_conn *)c, "BEGIN", what, p);
}

static fg_status commit(fg_conn *c, const char *what, fg_problem *p) {
  return command((pg_conn *)c, "COMMIT", what, p);
}

static void rollback(fg_conn *c) {
  pg_conn *s = (pg_conn *)c;
  if (PQtransactionStatus(s->conn) != PQTRANS_IDLE)
    command(s, "ROLLBACK", "rollback", NULL);
}

/* Runs prepared statement `id` with the values as text (bytes binary;
 * reals in the shortest form that reads back as the same double). */
static PGresult *run(pg_conn *s, fg_sql id, const fg_arg *a, int n) {
  const char *v[FG_PG_PARAMS_MAX];
  int len[FG_PG_PARAMS_MAX], fmt[FG_PG_PARAMS_MAX];
  char num[FG_PG_PARAMS_MAX][40];
  if (n > FG_PG_PARAMS_MAX) n = FG_PG_PARAMS_MAX;
  for (int i = 0; i < n; i++) {
    v[i] = NULL;
    len[i] = fmt[i] = 0;
    switch (a[i].kind) {
    case FG_ARG_NULL: break;
    case FG_ARG_TEXT: v[i] = a[i].text; break;
    case FG_ARG_INT:
      snprintf(num[i], sizeof num[i], "%lld", a[i].i);
      v[i] = num[i];
      break;
    case FG_ARG_REAL:
      snprintf(num[i], sizeof num[i], "%.17g", a[i].r);
      v[i] = num[i];
      break;
    case FG_ARG_BYTES:
      v[i] = (const char *)a[i].bytes;
      len[i] = a[i].len;
      fmt[i] = 1;
      break;
    }
  }
  char name[16];
  snprintf(name, sizeof name, "fg%d", (int)id);
  return PQexecPrepared(s->conn, name, n, v, len, fmt, 0);
}

static fg_status exec(fg_conn *c, fg_sql id, const fg_arg *a, int n,
                      const char *what, long *changed, fg_problem *p) {
  pg_conn *s = (pg_conn *)c;
  PGresult *r = run(s, id, a, n);
  fg_status st =
      PQresultStatus(r) == PGRES_COMMAND_OK ? FG_OK : fault(s, p, what, r);
  if (st == FG_OK && changed) *changed = atol(PQcmdTuples(r));
  PQclear(r);
  return st;
}

static fg_status query(fg_conn *c, fg_sql id, const fg_arg *a, int n,
                       const char *what, fg_problem *p) {
  pg_conn *s = (pg_conn *)c;
  PQclear(s->res);
  s->res = run(s, id, a, n);
  s->row = -1;
  if (PQresultStatus(s->res) == PGRES_TUPLES_OK) return FG_OK;
  fg_status st = fault(s, p, what, s->res);
  PQclear(s->res);
  s->res = NULL;
  return st;
}

static fg_status next(fg_conn *c, bool *row, fg_problem *p) {
  (void)p;
  pg_conn *s = (pg_conn *)c;
  *row = s->res && ++s->row < PQntuples(s->res);
  return FG_OK;
}

static void done(fg_conn *c) {
  pg_conn *s = (pg_conn *)c;
  PQclear(s->res);
  s->res = NULL;
}

static const char *text(fg_conn *c, int col) {
  pg_conn *s = (pg_conn *)c;
  if (PQgetisnull(s->res, s->row, col)) return NULL;
  return PQgetvalue(s->res, s->row, col);
}

static long long integer(fg_conn *c, int col) {
  const char *t = text(c, col);
  return t ? strtoll(t, NULL, 10) : 0;
}

static double real(fg_conn *c, int col) {
  const char *t = text(c, col);
  return t ? strtod(t, NULL) : NAN;
}

/* A bytea cell (hex text) into a fixed buffer; false unless `n` bytes. */
static bool bytes(fg_conn *c, int col, uint8_t *dst, size_t n) {
  const char *t = text(c, col);
  size_t len = 0;
  unsigned char *raw =
      t ? PQunescapeBytea((const unsigned char *)t, &len) : NULL;
  bool ok = raw && len == n;
  if (ok) memcpy(dst, raw, n);
  PQfreemem(raw);
  return ok;
}

/* ---- schema ---- */

static fg_status script(fg_conn *c, const char *sql, const char *what,
                        fg_problem *p) {
  return command((pg_conn *)c, sql, what, p);
}

static fg_status scalar(fg_conn *c, const char *sql, long long *out,
                        const char *what, fg_problem *p) {
  pg_conn *s = (pg_conn *)c;
  *out = -1;
  PGresult *r = PQexec(s->conn, sql);
  fg_status st =
      PQresultStatus(r) == PGRES_TUPLES_OK ? FG_OK : fault(s, p, what, r);
  if (st == FG_OK && PQntuples(r) > 0 && !PQgetisnull(r, 0, 0))
    *out = strtoll(PQgetvalue(r, 0, 0), NULL, 10);
  PQclear(r);
  return st;
}

static fg_status schema_lock(fg_conn *c, fg_problem *p) {
  return script(c, "SELECT pg_advisory_xact_lock(" FG_PG_SCHEMA_LOCK ")",
                "creating the schema", p);
}

/* ---- open / close ---- */

static void pg_close(void *b) {
  pg_store *s = b;
  if (!s) return;
  for (int i = 0; i < FG_PG_POOL; i++)
    if (s->pool[i].conn) PQfinish(s->pool[i].conn);
  pthread_cond_destroy(&s->free_cv);
  pthread_mutex_destroy(&s->lock);
  free(s);
}

static fg_status pg_open(const char *url, void **out, fg_problem *p) {
  *out = NULL;
  if (strlen(url) >= FG_PG_URL_MAX)
    return fg_problem_set(p, FG_EINVAL, "store URL longer than %d characters",
                          FG_PG_URL_MAX - 1);
  pg_store *s = calloc(1, sizeof *s);
  if (!s) return fg_problem_set(p, FG_ENOMEM, "store: out of memory");
  pthread_mutex_init(&s->lock, NULL);
  pthread_cond_init(&s->free_cv, NULL);
  for (int i = 0; i < FG_PG_POOL; i++) {
    s->pool[i].base.b = &fg_store_pgsql_backend;
    s->pool[i].store = s;
  }
  snprintf(s->url, sizeof s->url, "%s", url);
  /* the first connection now: it checks the URL and makes the schema
   * (before any statement that names its tables is prepared) */
  pg_conn *c = &s->pool[0];
  open_conn(c);
  if (PQstatus(c->conn) != CONNECTION_OK) {
    /* the URL may carry a password: name the server's reason, not the URL */
    fault(c, p, "postgresql: cannot connect", NULL);
    pg_close(s);
    return FG_EIO;
  }
  set_session(c);
  fg_status st = fg_schema_setup(&c->base, "postgresql", p);
  if (st == FG_OK && !prepare_all(c, p))
    st = p && p->status ? p->status : FG_EIO;
  if (st != FG_OK) {
    pg_close(s);
    return st;
  }
  *out = s;
  return FG_OK;
}

static const char *const words[FG_W_COUNT] = {
    [FG_W_FLAG] = "BOOLEAN NOT NULL DEFAULT false",
    [FG_W_INT64] = "BIGINT",
    [FG_W_REAL] = "DOUBLE PRECISION",
    [FG_W_BYTES] = "BYTEA",
    [FG_W_CHECK_SHARED] = "  owner TEXT NOT NULL DEFAULT '',"
                          "  cancel_requested BOOLEAN NOT NULL DEFAULT false,",
    [FG_W_CMP_SHARED] = "  owner TEXT NOT NULL DEFAULT '',",
    /* a store made before checks.replay_of existed is given the column */
    [FG_W_TAIL] = "ALTER TABLE checks ADD COLUMN IF NOT EXISTS replay_of TEXT"
                  "  NOT NULL DEFAULT '';"
                  "CREATE TABLE IF NOT EXISTS instances ("
                  "  id TEXT PRIMARY KEY,"
                  "  host TEXT NOT NULL,"
                  "  pid INTEGER NOT NULL,"
                  "  started_at TEXT NOT NULL,"
                  "  heartbeat_at TIMESTAMPTZ NOT NULL);",
};

const fg_backend fg_store_pgsql_backend = {
    .scheme = "postgresql",
    .shared = true,
    .lone_write_atomic = true,
    .schema_version = 1,
    .words = words,
    .open = pg_open,
    .close = pg_close,
    FG_BACKEND_FUNCTIONS,
    .schema_lock = schema_lock,
};
