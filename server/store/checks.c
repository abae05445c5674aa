/*
 * store/checks.c -- checks and comparisons: record, finish, read, list,
 * progress notes.
 *
 * Rules
 *   - A check is recorded when accepted (status running) and finished
 *     once; finishing an unknown id is FG_ENOTFOUND. Seeds are kept as
 *     signed 64-bit integers by both databases, so a larger one is refused.
 *   - On a shared store every check and comparison records its owner, the
 *     instance of the daemon running it ("" before the daemon registered,
 *     e.g. a tool that only opened the store), so a replica's sweep and
 *     cancel requests can find them (replicas.c).
 *   - A progress note replaces the result body only while the check is
 *     running, so a late note never hides the final record.
 *   - Paging: newest first by (created_at, id); the cursor `after` is the
 *     id of the last item seen, an unknown one FG_EINVAL. One row more
 *     than a page is read to tell whether more remain; then *next is the
 *     page's last id.
 *   - A comparison is one row beside its candidates' checks (each a check
 *     of its own); finishing keeps its list of check ids.
 *
 * Thread use: any thread (db.h).
 */
#include "store/db.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* The columns a check's and a comparison's rows both begin with: id,
 * model, version, digest, status. */
#define RUN_HEAD(type)                                                         \
  FG_DB_COLUMN(FG_DB_TEXT, type, id), FG_DB_COLUMN(FG_DB_TEXT, type, model),   \
      FG_DB_COLUMN(FG_DB_INT, type, version),                                  \
      FG_DB_COLUMN(FG_DB_TEXT, type, digest),                                  \
      FG_DB_COLUMN(FG_DB_TEXT, type, status)

#define COL(kind, member) FG_DB_COLUMN(kind, fg_store_check, member)
/* CHECK_COLUMNS (sql.c, 0..15), then SQL_CHECK_GET's request and result. */
static const fg_db_column check_columns[] = {
    RUN_HEAD(fg_store_check),     COL(FG_DB_TEXT, verdict),
    COL(FG_DB_U64, seed),         COL(FG_DB_TEXT, created_at),
    COL(FG_DB_TEXT, finished_at), COL(FG_DB_REAL, elapsed_ms),
    COL(FG_DB_TEXT, label),       COL(FG_DB_TEXT, key),
    COL(FG_DB_REAL, probability), COL(FG_DB_REAL, lower),
    COL(FG_DB_REAL, upper),       COL(FG_DB_TEXT, replay_of),
    COL(FG_DB_DUP_SET, request),  COL(FG_DB_DUP, result)};
enum { CHECK_LISTED = 16 }; /* the columns of a list's rows */
#undef COL

#define COL(kind, member) FG_DB_COLUMN(kind, fg_store_comparison, member)
/* SQL_CMP_GET's columns. */
static const fg_db_column comparison_columns[] = {
    RUN_HEAD(fg_store_comparison), COL(FG_DB_TEXT, created_at),
    COL(FG_DB_TEXT, finished_at),  COL(FG_DB_TEXT, key),
    COL(FG_DB_DUP_SET, checks),    COL(FG_DB_DUP, result)};
#undef COL

/* One write alone on a connection of its own. */
static fg_status write_alone(fg_store *s, fg_sql id, const fg_arg *a, int n,
                             const char *what, const char *missing,
                             const char *key, fg_problem *p) {
  fg_conn *c;
  fg_status res = fg_db_enter(s, &c, p);
  if (res != FG_OK) return res;
  res = fg_db_write_alone(s, c, id, a, n, what, missing, key, p);
  fg_db_leave(c);
  return res;
}

/* Records a new check or comparison alone; a shared store also records
 * its owner, appended as the last value (`a` has room for it). */
static fg_status put_row(fg_store *s, fg_sql plain, fg_sql owned, fg_arg *a,
                         int n, const char *what, const char *id,
                         fg_problem *p) {
  if (!s->b->shared) return write_alone(s, plain, a, n, what, NULL, id, p);
  char owner[33];
  a[n] = fg_text(fg_replica_owner(s, owner));
  return write_alone(s, owned, a, n + 1, what, NULL, id, p);
}

fg_status fg_store_put_check(fg_store *s, const fg_store_check *c,
                             fg_problem *p) {
  if (c->seed > (uint64_t)INT64_MAX)
    return fg_problem_set(p, FG_EINVAL, "store: seed %llu out of range",
                          (unsigned long long)c->seed);
  fg_arg a[19] = {fg_text(c->id),
                  fg_text(c->model),
                  fg_int(c->version),
                  fg_text(c->digest),
                  fg_text(c->status[0] ? c->status : "running"),
                  fg_text(c->verdict),
                  fg_int((long long)c->seed),
                  fg_text(c->created_at),
                  fg_text(c->finished_at),
                  fg_real(c->elapsed_ms),
                  fg_text(c->label),
                  fg_text(c->key),
                  fg_real(c->probability),
                  fg_real(c->lower),
                  fg_real(c->upper),
                  fg_text(c->request ? c->request : "{}"),
                  fg_text(c->result),
                  fg_text(c->replay_of)};
  return put_row(s, SQL_CHECK_INSERT, SQL_CHECK_INSERT_OWNED, a, 18,
                 "recording check", c->id, p);
}

fg_status fg_store_finish_check(fg_store *s, const fg_store_check *c,
                                fg_problem *p) {
  fg_arg a[] = {
      fg_text(c->id),          fg_text(c->status),     fg_text(c->verdict),
      fg_text(c->finished_at), fg_real(c->elapsed_ms), fg_real(c->probability),
      fg_real(c->lower),       fg_real(c->upper),      fg_text(c->result)};
  return write_alone(s, SQL_CHECK_FINISH, FG_ARGS(a), "finishing check",
                     "no check with id '%s'", c->id, p);
}

fg_status fg_store_note_progress(fg_store *s, const char *id, const char *body,
                                 fg_problem *p) {
  fg_arg a[] = {fg_text(id), fg_text(body)};
  return write_alone(s, SQL_CHECK_PROGRESS, FG_ARGS(a),
                     "noting progress of check", NULL, id, p);
}

/* A row of SQL_CHECK_GET: the listed columns, request and result. */
static bool read_check_full(fg_conn *c, void *out) {
  if (fg_db_read_columns(c, check_columns, FG_DB_NCOLS(check_columns), out))
    return true;
  fg_store_check_clear(out);
  return false;
}

fg_status fg_store_get_check(fg_store *s, const char *id, fg_store_check *out,
                             fg_problem *p) {
  memset(out, 0, sizeof *out);
  fg_arg a[] = {fg_text(id)};
  return fg_db_get_one(s, SQL_CHECK_GET, FG_ARGS(a), "reading a check",
                       "no check with id '%s'", id, read_check_full, out, p);
}

static int read_listed_check(fg_conn *c, void *elem) {
  fg_db_read_columns(c, check_columns, CHECK_LISTED, elem); /* no copies */
  return 1;
}

fg_status fg_store_list_checks(fg_store *s, const fg_check_filter *f,
                               fg_store_check **out, int *n, char next[40],
                               fg_problem *p) {
  *out = NULL;
  *n = 0;
  next[0] = '\0';
  int limit = f->limit;
  if (limit <= 0) limit = FG_LIST_LIMIT_DEFAULT;
  if (limit > FG_LIST_LIMIT_MAX) limit = FG_LIST_LIMIT_MAX;
  fg_conn *c;
  fg_status res = fg_db_enter(s, &c, p);
  if (res != FG_OK) return res;
  char cursor_time[32] = "";
  if (f->after && f->after[0]) { /* the created_at of the cursor's check */
    fg_arg a[] = {fg_text(f->after)};
    bool row = false;
    res = fg_db_first(c, SQL_CHECK_CURSOR, FG_ARGS(a),
                      "reading the list cursor", &row, p);
    if (res == FG_OK && !row)
      res =
          fg_problem_set(p, FG_EINVAL, "cursor '%s' names no check", f->after);
    else if (res == FG_OK)
      fg_db_copy(c, 0, cursor_time, sizeof cursor_time);
    fg_db_done(c);
  }
  void *arr = NULL;
  int count = 0;
  if (res == FG_OK) {
    fg_arg a[] = {fg_filter(f->model),    fg_filter(f->verdict),
                  fg_filter(f->since),    fg_filter(f->label),
                  fg_filter(cursor_time), fg_filter(f->after),
                  fg_int(limit + 1), /* one more tells if more remain */
                  fg_filter(f->key)};
    res =
        fg_db_rows(c, SQL_CHECKS_LIST, FG_ARGS(a), "listing checks",
                   sizeof **out, limit + 1, read_listed_check, &arr, &count, p);
  }
  fg_db_leave(c);
  fg_store_check *list = arr;
  if (res != FG_OK) {
    fg_store_checks_free(list, count);
    return res;
  }
  if (count > limit) {
    fg_store_check_clear(&list[limit]);
    count = limit;
    snprintf(next, 40, "%s", list[limit - 1].id);
  }
  *out = list;
  *n = count;
  return FG_OK;
}

/* ---- comparisons ---- */

fg_status fg_store_put_comparison(fg_store *s, const fg_store_comparison *c,
                                  fg_problem *p) {
  fg_arg a[11] = {fg_text(c->id),
                  fg_text(c->model),
                  fg_int(c->version),
                  fg_text(c->digest),
                  fg_text(c->status[0] ? c->status : "running"),
                  fg_text(c->created_at),
                  fg_text(c->finished_at),
                  fg_text(c->key),
                  fg_text(c->checks ? c->checks : "[]"),
                  fg_text(c->result)};
  return put_row(s, SQL_CMP_INSERT, SQL_CMP_INSERT_OWNED, a, 10,
                 "recording comparison", c->id, p);
}

fg_status fg_store_finish_comparison(fg_store *s, const fg_store_comparison *c,
                                     fg_problem *p) {
  fg_arg a[] = {fg_text(c->id), fg_text(c->status), fg_text(c->finished_at),
                fg_text(c->result)};
  return write_alone(s, SQL_CMP_FINISH, FG_ARGS(a), "finishing comparison",
                     "no comparison with id '%s'", c->id, p);
}

static bool read_comparison(fg_conn *c, void *out) {
  if (fg_db_read_columns(c, comparison_columns, FG_DB_NCOLS(comparison_columns),
                         out))
    return true;
  fg_store_comparison_clear(out);
  return false;
}

fg_status fg_store_get_comparison(fg_store *s, const char *id,
                                  fg_store_comparison *out, fg_problem *p) {
  memset(out, 0, sizeof *out);
  fg_arg a[] = {fg_text(id)};
  return fg_db_get_one(s, SQL_CMP_GET, FG_ARGS(a), "reading a comparison",
                       "no comparison with id '%s'", id, read_comparison, out,
                       p);
}
