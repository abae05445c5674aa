/*
 * store/backend.h -- the seam between the store's operations and a database
 * backend (internal to store/).
 *
 * Design: every operation of store/store.h is written once, in the store's
 * own files (models.c, checks.c, keys.c, replicas.c), against the small
 * interface below; a backend (sqlite.c, pgsql.c) supplies only what differs
 * between databases:
 *   - connections: open/close of its handle, acquire/release of one
 *     connection for the whole of one call (SQLite: its one connection
 *     under a mutex; PostgreSQL: one of a pool);
 *   - transactions: begin/commit/rollback, and whether one write statement
 *     on its own is already atomic (PostgreSQL's autocommit) or is wrapped
 *     in a transaction by the store (SQLite's BEGIN IMMEDIATE);
 *   - statements: the store names them by `fg_sql` id; their text is
 *     written once in sql.c with ?N placeholders (PostgreSQL turns ?N into
 *     $N when it prepares them); values travel as `fg_arg`s;
 *   - row reading: next row and typed column accessors;
 *   - its dialect's words in the shared schema (sql.c, {word} slots) and
 *     a few schema steps of its own (a lock while the schema is made, an
 *     upgrade of old files).
 * The rules (versioning, retiring, keys, paging, interrupted checks,
 * progress notes, the write-fault seam) live only in the store's files.
 *
 * Contracts of a backend's functions:
 *   - one statement at a time per connection: query ... next ... done, or
 *     exec; `done` may be called after a failed query;
 *   - failures fill the problem (which may be NULL) naming `what` and the
 *     database's message, and map the database's codes onto fg_status:
 *     FG_ECONFLICT for a constraint the database enforces (SQLite: any
 *     constraint; PostgreSQL: a unique violation), FG_EBUSY for a lock or
 *     time-out, FG_ENOMEM, otherwise FG_EIO;
 *   - text columns read back as NULL when NULL; real columns as NAN.
 *
 * Thread use: a connection belongs to the call that acquired it until it
 * is released; acquire waits while none is free.
 */
#ifndef FG_STORE_BACKEND_H
#define FG_STORE_BACKEND_H

#include "store/store.h"

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

/* Every statement the store runs (text in sql.c). From SQL_SHARED_FIRST on
 * they use the columns and tables only a shared store has (owner,
 * cancel_requested, instances): a backend that is not shared does not
 * prepare them. */
typedef enum fg_sql {
  SQL_PING,
  SQL_LATEST,
  SQL_MODEL_UPSERT,
  SQL_VERSION_INSERT,
  SQL_VERSION_GET,
  SQL_MODELS_LIST,
  SQL_RETIRE,
  SQL_CHECK_INSERT,
  SQL_CHECK_FINISH,
  SQL_CHECK_GET,
  SQL_CHECK_PROGRESS,
  SQL_CHECK_CURSOR,
  SQL_CHECKS_LIST,
  SQL_CMP_INSERT,
  SQL_CMP_FINISH,
  SQL_CMP_GET,
  SQL_KEY_EXISTS,
  SQL_KEY_INSERT,
  SQL_KEYS_LIST,
  SQL_KEY_REVOKE,
  SQL_MARK_RUNNING,
  SQL_MARK_CMP_RUNNING,
  SQL_CHECK_INSERT_OWNED,
  SQL_CMP_INSERT_OWNED,
  SQL_CANCEL_ASK,
  SQL_CANCEL_STATUS,
  SQL_CANCEL_ASKED,
  SQL_MARK_STALE,
  SQL_MARK_CMP_STALE,
  SQL_INSTANCE_UPSERT,
  SQL_INSTANCE_BEAT,
  SQL_INSTANCE_PRUNE,
  SQL_INSTANCE_END,
  SQL_COUNT
} fg_sql;
#define SQL_SHARED_FIRST SQL_CHECK_INSERT_OWNED

/* Statement texts by id, ?N placeholders, standard SQL both databases
 * read (CAST rather than ::). */
extern const char *const fg_sql_text[SQL_COUNT];

/* A statement's parameter. NULL text and NaN reals travel as SQL NULL. */
typedef enum {
  FG_ARG_NULL,
  FG_ARG_TEXT,
  FG_ARG_INT,
  FG_ARG_REAL,
  FG_ARG_BYTES
} fg_arg_kind;
typedef struct fg_arg {
  fg_arg_kind kind;
  const char *text;
  long long i;
  double r;
  const uint8_t *bytes;
  int len;
} fg_arg;

/* The words a dialect fills into the shared schema (sql.c): the text in
 * braces, e.g. {int64}, is looked up here. */
typedef enum fg_schema_word {
  FG_W_FLAG,         /* a boolean column that defaults to false */
  FG_W_INT64,        /* a signed 64-bit integer */
  FG_W_REAL,         /* a double */
  FG_W_BYTES,        /* raw bytes */
  FG_W_CHECK_SHARED, /* extra columns of checks in a shared store */
  FG_W_CMP_SHARED,   /* extra columns of comparisons in a shared store */
  FG_W_TAIL,         /* statements after the tables (upgrades, instances) */
  FG_W_COUNT
} fg_schema_word;

/* One connection held by one call. A backend's connection struct starts
 * with this. */
typedef struct fg_conn {
  const struct fg_backend *b;
} fg_conn;

typedef struct fg_backend {
  const char *scheme;       /* "sqlite", "postgresql" */
  bool shared;              /* several daemons may serve one store */
  bool lone_write_atomic;   /* one write statement needs no BEGIN/COMMIT */
  int schema_version;       /* what this backend's schema_version row holds */
  const char *const *words; /* [FG_W_COUNT] */
  /* the whole URL (sqlite: "sqlite:PATH"; postgresql: read by libpq); the
   * backend makes the schema (fg_schema_setup) before it prepares */
  fg_status (*open)(const char *url, void **db, fg_problem *p);
  void (*close)(void *db);
  fg_status (*acquire)(void *db, fg_conn **c, fg_problem *p);
  void (*release)(fg_conn *c);
  fg_status (*begin)(fg_conn *c, const char *what, fg_problem *p);
  fg_status (*commit)(fg_conn *c, const char *what, fg_problem *p);
  void (*rollback)(fg_conn *c); /* no-op outside a transaction */
  /* a statement returning no rows; *changed = rows it changed */
  fg_status (*exec)(fg_conn *c, fg_sql id, const fg_arg *a, int n,
                    const char *what, long *changed, fg_problem *p);
  /* a statement returning rows; next sets *row when one more came */
  fg_status (*query)(fg_conn *c, fg_sql id, const fg_arg *a, int n,
                     const char *what, fg_problem *p);
  fg_status (*next)(fg_conn *c, bool *row, fg_problem *p);
  void (*done)(fg_conn *c);
  const char *(*text)(fg_conn *c, int col);
  long long (*integer)(fg_conn *c, int col);
  double (*real)(fg_conn *c, int col);
  /* a bytes column into dst; false unless it holds exactly n bytes */
  bool (*bytes)(fg_conn *c, int col, uint8_t *dst, size_t n);
  /* schema set-up, on the connection the backend is opening: SQL text run
   * as is (several statements), and a single integer (-1 for NULL) */
  fg_status (*script)(fg_conn *c, const char *sql, const char *what,
                      fg_problem *p);
  fg_status (*scalar)(fg_conn *c, const char *sql, long long *out,
                      const char *what, fg_problem *p);
  /* optional: run inside the schema transaction before / after the
   * tables are made (a lock against replicas racing; adding a column) */
  fg_status (*schema_lock)(fg_conn *c, fg_problem *p);
  fg_status (*upgrade)(fg_conn *c, fg_problem *p);
  /* optional: a store of one daemon claims its file before it marks
   * running checks interrupted */
  fg_status (*claim)(void *db, fg_problem *p);
} fg_backend;

/* The members of a backend's table that a backend file fills with static
 * functions of the same names (sqlite.c, pgsql.c), so each table lists
 * only what sets it apart. */
#define FG_BACKEND_FUNCTIONS                                                   \
  .acquire = acquire, .release = release, .begin = begin, .commit = commit,    \
  .rollback = rollback, .exec = exec, .query = query, .next = next,            \
  .done = done, .text = text, .integer = integer, .real = real,                \
  .bytes = bytes, .script = script, .scalar = scalar

extern const fg_backend fg_store_sqlite_backend;
extern const fg_backend fg_store_pgsql_backend;

/* The schema in the backend's dialect, made or checked on connection `c`
 * inside one transaction (sql.c): tables made when missing, upgrades,
 * schema_version inserted for a new store, raised for an older one, a
 * newer one refused. `where` names the store in problems. */
fg_status fg_schema_setup(fg_conn *c, const char *where, fg_problem *p);

/* The current UTC time as RFC 3339 with 'Z'. */
void fg_store_now_rfc3339(char buf[32]);

#endif
