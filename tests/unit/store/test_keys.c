/*
 * tests/unit/store/test_keys.c -- API keys in the store (store/store.h),
 * on SQLite and on PostgreSQL, and the SQLite schema migration that
 * brought them.
 *
 * Covers: add, names never reused, list all or live, revoke, not found,
 * salt and hash kept byte for byte, an injected fault leaving no key; a
 * SQLite file written by schema 1 (no keys table) opened as schema 2, and
 * a newer schema refused. Expected values follow from the store's rules
 * (no outside reference applies).
 */
#include "store_testutil.h"

#include <sqlite3.h>

static void test_keys(fg_store *s) {
  fg_problem p;
  fg_store_key k, *list = NULL;
  int n = -1;
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_keys(s, false, &list, &n, &p), FG_OK);
  CHECK_INT(n, 0);
  free(list);
  make_key(&k, "zeta", "reader", 1);
  CHECK_INT(fg_store_put_key(s, &k, &p), FG_OK);
  make_key(&k, "alpha", "admin", 9);
  snprintf(k.created_at, sizeof k.created_at, "2026-12-01T00:00:00Z");
  CHECK_INT(fg_store_put_key(s, &k, &p), FG_OK);
  make_key(&k, "alpha", "reader", 3);
  fg_problem_init(&p);
  CHECK_INT(fg_store_put_key(s, &k, &p), FG_ECONFLICT);
  CHECK(strstr(p.detail, "alpha") != NULL);

  fg_problem_init(&p);
  CHECK_INT(fg_store_list_keys(s, true, &list, &n, &p), FG_OK);
  CHECK_INT(n, 2);
  if (n == 2) {
    CHECK_STR(list[0].name, "alpha"); /* by name */
    CHECK_STR(list[0].role, "admin");
    CHECK_STR(list[0].created_at, "2026-12-01T00:00:00Z");
    CHECK_STR(list[0].revoked_at, "");
    fg_store_key want;
    make_key(&want, "alpha", "admin", 9);
    CHECK(memcmp(list[0].salt, want.salt, sizeof want.salt) == 0);
    CHECK(memcmp(list[0].hash, want.hash, sizeof want.hash) == 0);
    CHECK_STR(list[1].name, "zeta");
    CHECK(list[1].created_at[0] != '\0');
  }
  free(list);

  fg_problem_init(&p);
  CHECK_INT(fg_store_revoke_key(s, "zeta", &p), FG_OK);
  fg_problem_init(&p);
  CHECK_INT(fg_store_revoke_key(s, "zeta", &p), FG_ECONFLICT);
  fg_problem_init(&p);
  CHECK_INT(fg_store_revoke_key(s, "nobody", &p), FG_ENOTFOUND);
  CHECK(strstr(p.detail, "nobody") != NULL);
  make_key(&k, "zeta", "admin", 5);
  fg_problem_init(&p);
  CHECK_INT(fg_store_put_key(s, &k, &p), FG_ECONFLICT); /* never reused */

  fg_problem_init(&p);
  CHECK_INT(fg_store_list_keys(s, true, &list, &n, &p), FG_OK);
  CHECK_INT(n, 1);
  if (n == 1) CHECK_STR(list[0].name, "alpha");
  free(list);
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_keys(s, false, &list, &n, &p), FG_OK);
  CHECK_INT(n, 2);
  if (n == 2) CHECK(list[1].revoked_at[0] != '\0');
  free(list);

  /* an injected fault leaves no key behind */
  make_key(&k, "faulty", "reader", 7);
  fg_store_inject_write_fault(s, 1);
  fg_problem_init(&p);
  CHECK_INT(fg_store_put_key(s, &k, &p), FG_EIO);
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_keys(s, false, &list, &n, &p), FG_OK);
  CHECK_INT(n, 2);
  free(list);
}

/* A file written by schema 1 (no keys table) opens as schema 2. */
static void test_migration(void) {
  char path[400], u[420];
  snprintf(path, sizeof path, "%s/old.db", dir);
  snprintf(u, sizeof u, "sqlite:%s", path);
  sqlite3 *db = NULL;
  CHECK_INT(sqlite3_open(path, &db), SQLITE_OK);
  CHECK_INT(sqlite3_exec(db,
                         "CREATE TABLE schema_version (version INTEGER NOT "
                         "NULL); INSERT INTO schema_version VALUES (1);",
                         NULL, NULL, NULL),
            SQLITE_OK);
  sqlite3_close(db);
  fg_store *s = NULL;
  fg_problem p;
  fg_problem_init(&p);
  CHECK_INT(fg_store_open(u, &s, &p), FG_OK);
  fg_store_key k;
  make_key(&k, "after", "checker", 2);
  CHECK_INT(fg_store_put_key(s, &k, &p), FG_OK);
  fg_store_close(s);
  CHECK_INT(sqlite3_open(path, &db), SQLITE_OK);
  sqlite3_stmt *st = NULL;
  CHECK_INT(sqlite3_prepare_v2(db, "SELECT version FROM schema_version", -1,
                               &st, NULL),
            SQLITE_OK);
  CHECK_INT(sqlite3_step(st), SQLITE_ROW);
  CHECK_INT(sqlite3_column_int(st, 0), 2);
  CHECK_INT(sqlite3_step(st), SQLITE_DONE); /* still one row */
  sqlite3_finalize(st);
  /* a newer schema is refused */
  CHECK_INT(sqlite3_exec(db, "UPDATE schema_version SET version = 3", NULL,
                         NULL, NULL),
            SQLITE_OK);
  sqlite3_close(db);
  fg_problem_init(&p);
  s = NULL;
  CHECK(fg_store_open(u, &s, &p) != FG_OK);
  CHECK(strstr(p.detail, "newer") != NULL);
  fg_store_close(s);
}

int main(void) {
  if (!sqlite_scratch()) return 1;
  bool ok = run_section(url, NULL, test_keys);
  test_migration();
  if (pg_scratch()) {
    ok &= run_section(pg_url, NULL, test_keys);
    pg_scratch_drop();
  }
  sqlite_scratch_remove();
  return fg_test_finish() || !ok;
}
