/*
 * store/db.c -- the helpers every store operation runs through (db.h):
 * connections, transactions, writes with the fault seam, rows and columns
 * (one column at a time, or a row by its table of columns).
 *
 * Design: thin forwarding to the backend (backend.h) plus the rules that
 * belong to the store rather than to a database:
 *   - the test seam: fg_store_inject_write_fault(s, n) makes the n-th data
 *     write from then on fail as an I/O error inside its transaction,
 *     which is then rolled back, so tests can show that a failed write
 *     leaves no half-written record; BEGIN/COMMIT/ROLLBACK never count;
 *   - a lone write is its own transaction: wrapped in BEGIN ... COMMIT
 *     where the backend needs it, sent alone where the database makes one
 *     statement atomic anyway (one round trip fewer);
 *   - no row changed, where a row must change, is FG_ENOTFOUND.
 *
 * Thread use: any thread, each on the connection it holds.
 */
#include "store/db.h"

#include <assert.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

fg_status fg_db_enter(fg_store *s, fg_conn **c, fg_problem *p) {
  *c = NULL;
  return s->b->acquire(s->db, c, p);
}

void fg_db_leave(fg_conn *c) {
  if (c) c->b->release(c);
}

fg_status fg_db_enter_tx(fg_store *s, fg_conn **c, const char *what,
                         fg_problem *p) {
  fg_status res = fg_db_enter(s, c, p);
  if (res != FG_OK) return res;
  char where[80];
  snprintf(where, sizeof where, "begin (%s)", what);
  res = (*c)->b->begin(*c, where, p);
  if (res != FG_OK) {
    fg_db_leave(*c);
    *c = NULL;
  }
  return res;
}

fg_status fg_db_end_tx(fg_conn *c, fg_status res, const char *what,
                       fg_problem *p) {
  if (res == FG_OK) res = c->b->commit(c, what, p);
  if (res != FG_OK) c->b->rollback(c);
  return res;
}

fg_status fg_db_write(fg_store *s, fg_conn *c, fg_sql id, const fg_arg *a,
                      int n, const char *what, long *changed, fg_problem *p) {
  long dummy = 0;
  if (!changed) changed = &dummy;
  *changed = 0;
  pthread_mutex_lock(&s->lock);
  bool strike = s->fail_countdown > 0 && --s->fail_countdown == 0;
  pthread_mutex_unlock(&s->lock);
  if (strike)
    return fg_problem_set(p, FG_EIO, "store %s: injected write fault", what);
  return c->b->exec(c, id, a, n, what, changed, p);
}

fg_status fg_db_write_alone(fg_store *s, fg_conn *c, fg_sql id, const fg_arg *a,
                            int n, const char *what, const char *missing,
                            const char *key, fg_problem *p) {
  const bool wrap = !c->b->lone_write_atomic;
  fg_status res = wrap ? c->b->begin(c, what, p) : FG_OK;
  if (res != FG_OK) return res;
  long changed = 0;
  res = fg_db_write(s, c, id, a, n, what, &changed, p);
  if (res == FG_OK && missing && changed == 0)
    res = fg_problem_set(p, FG_ENOTFOUND, missing, key);
  if (wrap) res = fg_db_end_tx(c, res, what, p);
  return res;
}

fg_status fg_db_query(fg_conn *c, fg_sql id, const fg_arg *a, int n,
                      const char *what, fg_problem *p) {
  return c->b->query(c, id, a, n, what, p);
}

fg_status fg_db_next(fg_conn *c, bool *row, fg_problem *p) {
  *row = false;
  return c->b->next(c, row, p);
}

fg_status fg_db_first(fg_conn *c, fg_sql id, const fg_arg *a, int n,
                      const char *what, bool *row, fg_problem *p) {
  *row = false;
  fg_status res = fg_db_query(c, id, a, n, what, p);
  return res == FG_OK ? fg_db_next(c, row, p) : res;
}

void fg_db_done(fg_conn *c) {
  c->b->done(c);
}

fg_status fg_db_read_one(fg_conn *c, fg_sql id, const fg_arg *a, int n,
                         const char *what, const char *missing, const char *key,
                         fg_db_reader read, void *out, fg_problem *p) {
  bool row = false;
  fg_status res = fg_db_first(c, id, a, n, what, &row, p);
  if (res == FG_OK && !row)
    res = fg_problem_set(p, FG_ENOTFOUND, missing, key);
  else if (res == FG_OK && !read(c, out))
    res = fg_problem_set(p, FG_ENOMEM, "store: out of memory reading %s", key);
  fg_db_done(c);
  return res;
}

fg_status fg_db_get_one(fg_store *s, fg_sql id, const fg_arg *a, int n,
                        const char *what, const char *missing, const char *key,
                        fg_db_reader read, void *out, fg_problem *p) {
  fg_conn *c;
  fg_status res = fg_db_enter(s, &c, p);
  if (res != FG_OK) return res;
  res = fg_db_read_one(c, id, a, n, what, missing, key, read, out, p);
  fg_db_leave(c);
  return res;
}

fg_status fg_db_rows(fg_conn *c, fg_sql id, const fg_arg *a, int n,
                     const char *what, size_t size, int max,
                     fg_db_row_reader read, void **arr, int *count,
                     fg_problem *p) {
  char *out = NULL;
  int cap = 0;
  *count = 0;
  bool row = false;
  fg_status res = fg_db_first(c, id, a, n, what, &row, p);
  while (res == FG_OK && row && (max <= 0 || *count < max)) {
    if (*count == cap) {
      int ncap = cap ? cap * 2 : 16;
      if (max > 0 && ncap > max) ncap = max;
      char *grown = realloc(out, (size_t)ncap * size);
      if (!grown) {
        res = fg_problem_set(p, FG_ENOMEM, "store: out of memory %s", what);
        break;
      }
      out = grown;
      cap = ncap;
    }
    char *elem = out + (size_t)*count * size;
    memset(elem, 0, size);
    int got = read(c, elem);
    if (got != 0) ++*count;
    if (got < 0) {
      res = fg_problem_set(p, FG_ENOMEM, "store: out of memory %s", what);
      break;
    }
    res = fg_db_next(c, &row, p);
  }
  fg_db_done(c);
  if (*count == 0) {
    free(out);
    out = NULL;
  }
  *arr = out;
  return res;
}

void fg_db_copy(fg_conn *c, int col, char *dst, size_t cap) {
  const char *t = c->b->text(c, col);
  snprintf(dst, cap, "%s", t ? t : "");
}

char *fg_db_dup(fg_conn *c, int col) {
  const char *t = c->b->text(c, col);
  return t ? strdup(t) : NULL;
}

bool fg_db_dup_failed(fg_conn *c, int col, const char *got) {
  return !got && c->b->text(c, col) != NULL;
}

long long fg_db_int(fg_conn *c, int col) {
  return c->b->integer(c, col);
}

double fg_db_real(fg_conn *c, int col) {
  return c->b->real(c, col);
}

bool fg_db_bytes(fg_conn *c, int col, uint8_t *dst, size_t n) {
  return c->b->bytes(c, col, dst, n);
}

#ifndef NDEBUG
/* The member size of each kind that has one (text and bytes: any size). */
static const size_t kind_size[FG_DB_BYTES + 1] = {
    [FG_DB_INT] = sizeof(int),      [FG_DB_U64] = sizeof(uint64_t),
    [FG_DB_REAL] = sizeof(double),  [FG_DB_FLAG] = sizeof(bool),
    [FG_DB_DUP] = sizeof(char *),   [FG_DB_DUP_SET] = sizeof(char *)};
#endif

bool fg_db_read_columns(fg_conn *c, const fg_db_column *cols, int n,
                        void *out) {
  for (int i = 0; i < n; i++) {
    void *at = (char *)out + cols[i].offset;
    assert(!kind_size[cols[i].kind] || kind_size[cols[i].kind] == cols[i].size);
    switch (cols[i].kind) {
    case FG_DB_TEXT:
      fg_db_copy(c, i, at, cols[i].size);
      break;
    case FG_DB_INT:
      *(int *)at = (int)fg_db_int(c, i);
      break;
    case FG_DB_U64:
      *(uint64_t *)at = (uint64_t)fg_db_int(c, i);
      break;
    case FG_DB_REAL:
      *(double *)at = fg_db_real(c, i);
      break;
    case FG_DB_FLAG:
      *(bool *)at = fg_db_int(c, i) != 0;
      break;
    case FG_DB_DUP:
    case FG_DB_DUP_SET: {
      char *s = fg_db_dup(c, i);
      *(char **)at = s;
      if (cols[i].kind == FG_DB_DUP_SET ? !s : fg_db_dup_failed(c, i, s))
        return false;
      break;
    }
    case FG_DB_BYTES:
      if (!fg_db_bytes(c, i, at, cols[i].size)) return false;
      break;
    }
  }
  return true;
}
