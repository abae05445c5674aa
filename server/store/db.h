/*
 * store/db.h -- what the store's operation files share (internal to
 * store/): the fg_store handle and small helpers over backend.h.
 *
 * Design: an operation is written as
 *     fg_conn *c; enter (or enter_tx) -> query/next/column or write ->
 *     end_tx -> leave
 * and never names a database. The helpers add the store-wide rules that
 * no backend repeats: the write-fault test seam (every data write goes
 * through fg_db_write), a lone write wrapped in a transaction where the
 * backend needs one, "no row changed" as FG_ENOTFOUND, and reading
 * columns into fixed buffers or malloc'd strings, one by one or a whole
 * row by a table of its columns (fg_db_read_columns).
 *
 * Thread use: a connection is the calling thread's between enter and
 * leave; the store's `lock` guards only the fault seam and the upkeep
 * fields (replicas.c), never a database call.
 */
#ifndef FG_STORE_DB_H
#define FG_STORE_DB_H

#include "store/backend.h"

#include <math.h>
#include <pthread.h>
#include <stddef.h>

struct fg_store {
  const fg_backend *b;
  void *db;
  pthread_mutex_t lock; /* fail_countdown and the upkeep fields */
  int fail_countdown;   /* test seam: > 0 = writes until an injected fault */
  /* replicas.c: this daemon's instance on a shared store */
  char instance[33]; /* random hex id */
  pthread_t upkeep;
  bool upkeep_started, stopping;
  pthread_cond_t stop_cv;
};

/* ---- parameters ---- */

static inline fg_arg fg_text(const char *v) {
  return v ? (fg_arg){.kind = FG_ARG_TEXT, .text = v}
           : (fg_arg){.kind = FG_ARG_NULL};
}
/* Empty strings as NULL: optional filters. */
static inline fg_arg fg_filter(const char *v) {
  return fg_text(v && v[0] ? v : NULL);
}
static inline fg_arg fg_int(long long v) {
  return (fg_arg){.kind = FG_ARG_INT, .i = v};
}
static inline fg_arg fg_real(double v) {
  return isnan(v) ? (fg_arg){.kind = FG_ARG_NULL}
                  : (fg_arg){.kind = FG_ARG_REAL, .r = v};
}
static inline fg_arg fg_bytes(const uint8_t *v, int n) {
  return (fg_arg){.kind = FG_ARG_BYTES, .bytes = v, .len = n};
}
/* An array of fg_arg and its length, for the calls below. */
#define FG_ARGS(a) (a), (int)(sizeof(a) / sizeof((a)[0]))

/* ---- connections and transactions ---- */

fg_status fg_db_enter(fg_store *s, fg_conn **c, fg_problem *p);
void fg_db_leave(fg_conn *c);
/* enter and BEGIN ("begin (what)" in a problem); nothing held on failure */
fg_status fg_db_enter_tx(fg_store *s, fg_conn **c, const char *what,
                         fg_problem *p);
/* COMMIT when res is FG_OK (its failure named `what`), else ROLLBACK;
 * the outcome of the whole write. */
fg_status fg_db_end_tx(fg_conn *c, fg_status res, const char *what,
                       fg_problem *p);

/* ---- statements ---- */

/* A data write inside the caller's transaction (or alone where the
 * backend's lone writes are atomic); the fault seam strikes here. */
fg_status fg_db_write(fg_store *s, fg_conn *c, fg_sql id, const fg_arg *a,
                      int n, const char *what, long *changed, fg_problem *p);
/* One write statement as its own transaction. When `missing` is set, no
 * row changed is FG_ENOTFOUND with `missing` as the message (its %s
 * `key`). */
fg_status fg_db_write_alone(fg_store *s, fg_conn *c, fg_sql id, const fg_arg *a,
                            int n, const char *what, const char *missing,
                            const char *key, fg_problem *p);
fg_status fg_db_query(fg_conn *c, fg_sql id, const fg_arg *a, int n,
                      const char *what, fg_problem *p);
/* *row set when one more row came (its columns then readable) */
fg_status fg_db_next(fg_conn *c, bool *row, fg_problem *p);
/* fg_db_query and the first fg_db_next together */
fg_status fg_db_first(fg_conn *c, fg_sql id, const fg_arg *a, int n,
                      const char *what, bool *row, fg_problem *p);
/* Ends the statement; after every query, also a failed one. */
void fg_db_done(fg_conn *c);

/* One row: `read` takes it (false when out of memory: FG_ENOMEM, naming
 * `key`); no row is FG_ENOTFOUND with `missing` (its %s `key`).
 * fg_db_read_one runs on a connection held, fg_db_get_one on one of its
 * own. */
typedef bool (*fg_db_reader)(fg_conn *c, void *out);
fg_status fg_db_read_one(fg_conn *c, fg_sql id, const fg_arg *a, int n,
                         const char *what, const char *missing, const char *key,
                         fg_db_reader read, void *out, fg_problem *p);
fg_status fg_db_get_one(fg_store *s, fg_sql id, const fg_arg *a, int n,
                        const char *what, const char *missing, const char *key,
                        fg_db_reader read, void *out, fg_problem *p);
/* Every row of a query (at most `max`; 0 = no bound) into a malloc'd
 * array of elements of `size` bytes, on a connection held. `read` fills
 * the (zeroed) element: 1 keep it, 0 leave the row out, -1 out of memory
 * (the element is still counted, so the caller's free function sees it).
 * On failure *arr holds the *n elements read so far, for the caller to
 * free; with no row kept, *arr is NULL. */
typedef int (*fg_db_row_reader)(fg_conn *c, void *elem);
fg_status fg_db_rows(fg_conn *c, fg_sql id, const fg_arg *a, int n,
                     const char *what, size_t size, int max,
                     fg_db_row_reader read, void **arr, int *count,
                     fg_problem *p);

/* ---- columns of the current row ---- */

void fg_db_copy(fg_conn *c, int col, char *dst, size_t cap);
/* malloc'd copy; NULL for a NULL column (and, see fg_db_dup_failed, when
 * out of memory) */
char *fg_db_dup(fg_conn *c, int col);
/* true when fg_db_dup gave NULL for a column that was not NULL */
bool fg_db_dup_failed(fg_conn *c, int col, const char *got);
long long fg_db_int(fg_conn *c, int col);
double fg_db_real(fg_conn *c, int col);
bool fg_db_bytes(fg_conn *c, int col, uint8_t *dst, size_t n);

/* ---- a whole row into a struct ---- */

/* What a column goes into. */
typedef enum fg_db_kind {
  FG_DB_TEXT,     /* char[size]: fg_db_copy ("" for NULL, cut to fit) */
  FG_DB_INT,      /* int */
  FG_DB_U64,      /* uint64_t, kept as a signed 64-bit integer */
  FG_DB_REAL,     /* double */
  FG_DB_FLAG,     /* bool: the integer is not 0 */
  FG_DB_DUP,      /* char *: fg_db_dup (NULL for NULL) */
  FG_DB_DUP_SET,  /* char *: fg_db_dup, and the column must not be NULL */
  FG_DB_BYTES     /* uint8_t[size]: exactly size bytes (fg_db_bytes) */
} fg_db_kind;

typedef struct fg_db_column {
  fg_db_kind kind;
  size_t offset, size; /* of the member in the struct */
} fg_db_column;

#define FG_DB_COLUMN(kind, type, member)                                       \
  {(kind), offsetof(type, member), sizeof(((type *)0)->member)}
#define FG_DB_NCOLS(cols) (int)(sizeof(cols) / sizeof((cols)[0]))

/* Column i of the current row into `out` as cols[i] says, for i = 0 ..
 * n - 1, in order. Stops with false at the first column it cannot take:
 * a copy out of memory, a NULL FG_DB_DUP_SET, FG_DB_BYTES of another
 * size; copies made so far stay in *out for the caller's clear. */
bool fg_db_read_columns(fg_conn *c, const fg_db_column *cols, int n,
                        void *out);

/* ---- replicas.c ---- */

/* At open of a shared store: this daemon's random instance id. */
fg_status fg_replica_init(fg_store *s, fg_problem *p);
/* The owner a new check records: the instance once it has registered
 * (fg_store_mark_interrupted), "" before. Returns buf. */
const char *fg_replica_owner(fg_store *s, char buf[33]);
/* At close: stop the upkeep thread and remove this instance's row. */
void fg_replica_stop(fg_store *s);

#endif
