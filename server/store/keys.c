/*
 * store/keys.c -- API keys: add, list, revoke (http/keys.c decides what a
 * role may do and makes the salt and hash).
 *
 * Rules
 *   - Only the salt and SHA-256(salt || key) are kept, never the key.
 *   - Names are never reused, also after revocation, so the check log's
 *     key names stay unambiguous: adding a name that exists (revoked or
 *     not) is FG_ECONFLICT. The lookup and the insert share a transaction;
 *     should a replica add the same name in between, the database's
 *     unique key refuses the insert, with the same answer.
 *   - A row whose salt or hash has the wrong size can match no key: it is
 *     left out of lists, so it neither lets anyone in nor counts as live.
 *   - Revoking sets revoked_at once: FG_ENOTFOUND for no such name,
 *     FG_ECONFLICT when it was revoked already.
 *
 * Thread use: any thread (db.h).
 */
#include "store/db.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Whether a key named `name` exists (revoked or not). */
static fg_status key_exists(fg_conn *c, const char *name, bool *exists,
                            fg_problem *p) {
  fg_arg a[] = {fg_text(name)};
  fg_status res =
      fg_db_first(c, SQL_KEY_EXISTS, FG_ARGS(a), "looking up a key", exists, p);
  fg_db_done(c);
  return res;
}

fg_status fg_store_put_key(fg_store *s, const fg_store_key *k, fg_problem *p) {
  char now[32];
  snprintf(now, sizeof now, "%s", k->created_at);
  if (!now[0]) fg_store_now_rfc3339(now);
  fg_conn *c;
  fg_status res = fg_db_enter_tx(s, &c, "add key", p);
  if (res != FG_OK) return res;
  bool exists = false;
  res = key_exists(c, k->name, &exists, p);
  if (res == FG_OK && !exists) {
    fg_arg a[] = {fg_text(k->name), fg_text(k->role),
                  fg_bytes(k->salt, FG_STORE_KEY_SALT),
                  fg_bytes(k->hash, FG_STORE_KEY_HASH), fg_text(now)};
    fg_problem q; /* a unique violation is answered like `exists` */
    fg_problem_init(&q);
    res = fg_db_write(s, c, SQL_KEY_INSERT, FG_ARGS(a), "writing a key", NULL,
                      &q);
    exists = res == FG_ECONFLICT;
    if (res != FG_OK && !exists) fg_problem_set(p, res, "%s", q.detail);
  }
  if (exists)
    res = fg_problem_set(p, FG_ECONFLICT,
                         "a key named '%s' exists already; names are never "
                         "reused, also after revocation",
                         k->name);
  res = fg_db_end_tx(c, res, "commit (add key)", p);
  fg_db_leave(c);
  return res;
}

#define KEY_COL(kind, member) FG_DB_COLUMN(kind, fg_store_key, member)
/* SQL_KEYS_LIST's columns. */
static const fg_db_column key_columns[] = {
    KEY_COL(FG_DB_TEXT, name),       KEY_COL(FG_DB_TEXT, role),
    KEY_COL(FG_DB_BYTES, salt),      KEY_COL(FG_DB_BYTES, hash),
    KEY_COL(FG_DB_TEXT, created_at), KEY_COL(FG_DB_TEXT, revoked_at)};
#undef KEY_COL

/* A damaged row (salt or hash of the wrong size) is left out. */
static int read_key(fg_conn *c, void *elem) {
  return fg_db_read_columns(c, key_columns, FG_DB_NCOLS(key_columns), elem);
}

fg_status fg_store_list_keys(fg_store *s, bool live_only, fg_store_key **out,
                             int *n, fg_problem *p) {
  *out = NULL;
  *n = 0;
  fg_conn *c;
  fg_status res = fg_db_enter(s, &c, p);
  if (res != FG_OK) return res;
  fg_arg a[] = {fg_int(live_only ? 1 : 0)};
  void *arr = NULL;
  int count = 0;
  res = fg_db_rows(c, SQL_KEYS_LIST, FG_ARGS(a), "listing keys", sizeof **out,
                   0, read_key, &arr, &count, p);
  fg_db_leave(c);
  if (res != FG_OK) {
    free(arr);
    return res;
  }
  *out = arr;
  *n = count;
  return FG_OK;
}

fg_status fg_store_revoke_key(fg_store *s, const char *name, fg_problem *p) {
  char now[32];
  fg_store_now_rfc3339(now);
  fg_conn *c;
  fg_status res = fg_db_enter_tx(s, &c, "revoke key", p);
  if (res != FG_OK) return res;
  fg_arg a[] = {fg_text(name), fg_text(now)};
  long changed = 0;
  res = fg_db_write(s, c, SQL_KEY_REVOKE, FG_ARGS(a), "revoking a key",
                    &changed, p);
  bool exists = false;
  if (res == FG_OK && changed == 0) res = key_exists(c, name, &exists, p);
  if (res == FG_OK && changed == 0)
    res = exists ? fg_problem_set(p, FG_ECONFLICT,
                                  "key '%s' is revoked already", name)
                 : fg_problem_set(p, FG_ENOTFOUND, "no key named '%s'", name);
  res = fg_db_end_tx(c, res, "commit (revoke key)", p);
  fg_db_leave(c);
  return res;
}
