/*
 * tests/unit/store/test_checks.c -- check and comparison records in the
 * store (store/store.h), on SQLite and on PostgreSQL.
 *
 * Covers: checks (put, finish, get, list newest first with every filter
 * and with paging through the cursor, a duplicate id and an unknown model
 * version refused), marking running checks interrupted, comparisons kept
 * beside their candidates' checks, and closing and reopening: on SQLite
 * the file keeps everything, a comparison left running is marked
 * interrupted, and SQLite's own PRAGMA integrity_check (the outside
 * reference) finds the file sound in WAL mode; on PostgreSQL reopening
 * finds the records (the schema is not made twice). Expected values
 * otherwise follow from the store's rules (no outside reference applies).
 */
#include "store_testutil.h"

#include <sqlite3.h>

static void test_checks(fg_store *s) {
  fg_problem p;
  fg_store_check c;
  const char *d2 = "sha256:2222222222222222222222222222222222222222222222222222"
                   "222222222222";
  /* ten checks: ids and times increasing; two share one second */
  static const char *times[10] = {
      "2026-01-01T00:00:00Z", "2026-01-01T00:00:01Z", "2026-01-01T00:00:02Z",
      "2026-01-01T00:00:02Z", "2026-01-01T00:00:04Z", "2026-01-01T00:00:05Z",
      "2026-01-01T00:00:06Z", "2026-01-01T00:00:07Z", "2026-01-01T00:00:08Z",
      "2026-01-01T00:00:09Z"};
  for (int i = 0; i < 10; i++) {
    char id[40];
    snprintf(id, sizeof id, "chk_%026d", i);
    make_check(&c, id, "alpha", 2, d2, times[i], i % 2 ? "odd" : "even");
    /* checks 1, 4, 7 were made with the key "ci" */
    if (i % 3 == 1) snprintf(c.key, sizeof c.key, "ci");
    fg_problem_init(&p);
    CHECK_INT(fg_store_put_check(s, &c, &p), FG_OK);
  }
  /* duplicate id is refused, nothing half-written */
  make_check(&c, "chk_00000000000000000000000000", "alpha", 2, d2, times[0],
             NULL);
  fg_problem_init(&p);
  CHECK(fg_store_put_check(s, &c, &p) != FG_OK);
  /* unknown model version is refused by the foreign key */
  make_check(&c, "chk_x", "alpha", 9, d2, times[0], NULL);
  fg_problem_init(&p);
  CHECK(fg_store_put_check(s, &c, &p) != FG_OK);

  /* get a running one */
  fg_store_check g;
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_check(s, "chk_00000000000000000000000003", &g, &p),
            FG_OK);
  CHECK_STR(g.status, "running");
  CHECK_STR(g.verdict, "");
  CHECK_STR(g.finished_at, "");
  CHECK(isnan(g.probability));
  CHECK(g.result == NULL);
  CHECK_STR(g.request, "{\"decision\":{\"x\":1}}");
  CHECK(g.seed == 12345);
  CHECK_STR(g.label, "odd");
  fg_store_check_clear(&g);

  /* finish checks 0..7: even ones pass, odd ones fail */
  for (int i = 0; i < 8; i++) {
    char id[40];
    snprintf(id, sizeof id, "chk_%026d", i);
    make_check(&c, id, "alpha", 2, d2, times[i], NULL);
    snprintf(c.status, sizeof c.status, "done");
    snprintf(c.verdict, sizeof c.verdict, "%s", i % 2 ? "fail" : "pass");
    snprintf(c.finished_at, sizeof c.finished_at, "2026-01-01T00:01:00Z");
    c.elapsed_ms = 12.5;
    c.probability = 0.9 + 0.001 * i;
    c.lower = c.probability - 0.01;
    c.upper = c.probability + 0.01;
    c.result = (char *)"{\"status\":\"done\"}";
    fg_problem_init(&p);
    CHECK_INT(fg_store_finish_check(s, &c, &p), FG_OK);
  }
  fg_problem_init(&p);
  CHECK_INT(fg_store_finish_check(s, &(fg_store_check){.id = "chk_none"}, &p),
            FG_ENOTFOUND);

  fg_problem_init(&p);
  CHECK_INT(fg_store_get_check(s, "chk_00000000000000000000000002", &g, &p),
            FG_OK);
  CHECK_STR(g.status, "done");
  CHECK_STR(g.verdict, "pass");
  CHECK_NEAR(g.probability, 0.902, 1e-12);
  CHECK_NEAR(g.lower, 0.892, 1e-12);
  CHECK_NEAR(g.elapsed_ms, 12.5, 1e-12);
  CHECK_STR(g.result, "{\"status\":\"done\"}");
  CHECK_STR(g.finished_at, "2026-01-01T00:01:00Z");
  fg_store_check_clear(&g);
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_check(s, "chk_nothing", &g, &p), FG_ENOTFOUND);

  /* list all: newest first */
  fg_store_check *list = NULL;
  int n = 0;
  char next[40];
  fg_check_filter f = {.limit = 100};
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_checks(s, &f, &list, &n, next, &p), FG_OK);
  CHECK_INT(n, 10);
  CHECK_STR(next, "");
  if (n == 10) {
    CHECK_STR(list[0].id, "chk_00000000000000000000000009");
    CHECK_STR(list[9].id, "chk_00000000000000000000000000");
    /* same second: the larger id first */
    CHECK_STR(list[6].id, "chk_00000000000000000000000003");
    CHECK_STR(list[7].id, "chk_00000000000000000000000002");
    CHECK(list[0].request == NULL && list[0].result == NULL);
    CHECK_NEAR(list[9].probability, 0.9, 1e-12);
  }
  fg_store_checks_free(list, n);

  /* paging by 3: 9 8 7 | 6 5 4 | 3 2 1 | 0 */
  const char *after = NULL;
  char cursor[40] = "";
  int pages = 0, seen = 0, expect = 9;
  for (;;) {
    f = (fg_check_filter){.limit = 3, .after = after};
    fg_problem_init(&p);
    if (fg_store_list_checks(s, &f, &list, &n, next, &p) != FG_OK) {
      CHECK(!"paging failed");
      break;
    }
    pages++;
    for (int i = 0; i < n; i++) {
      char id[40];
      snprintf(id, sizeof id, "chk_%026d", expect--);
      CHECK_STR(list[i].id, id);
      seen++;
    }
    fg_store_checks_free(list, n);
    if (!next[0]) break;
    snprintf(cursor, sizeof cursor, "%s", next);
    after = cursor;
    if (pages > 10) break;
  }
  CHECK_INT(pages, 4);
  CHECK_INT(seen, 10);

  /* filters */
  f = (fg_check_filter){.verdict = "pass", .limit = 100};
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_checks(s, &f, &list, &n, next, &p), FG_OK);
  CHECK_INT(n, 4); /* 0 2 4 6 */
  fg_store_checks_free(list, n);
  f = (fg_check_filter){.label = "odd", .limit = 100};
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_checks(s, &f, &list, &n, next, &p), FG_OK);
  CHECK_INT(n, 5);
  fg_store_checks_free(list, n);
  f = (fg_check_filter){.since = "2026-01-01T00:00:05Z", .limit = 100};
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_checks(s, &f, &list, &n, next, &p), FG_OK);
  CHECK_INT(n, 5);
  fg_store_checks_free(list, n);
  f = (fg_check_filter){.key = "ci", .limit = 100};
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_checks(s, &f, &list, &n, next, &p), FG_OK);
  CHECK_INT(n, 3);
  if (n == 3) {
    CHECK_STR(list[0].id, "chk_00000000000000000000000007");
    CHECK_STR(list[2].id, "chk_00000000000000000000000001");
    CHECK_STR(list[1].key, "ci");
  }
  fg_store_checks_free(list, n);
  f = (fg_check_filter){.key = "ci", .label = "even", .limit = 100};
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_checks(s, &f, &list, &n, next, &p), FG_OK);
  CHECK_INT(n, 1); /* 4 */
  fg_store_checks_free(list, n);
  f = (fg_check_filter){.model = "beta", .limit = 100};
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_checks(s, &f, &list, &n, next, &p), FG_OK);
  CHECK_INT(n, 0);
  fg_store_checks_free(list, n);
  f = (fg_check_filter){
      .model = "alpha", .verdict = "fail", .label = "odd", .limit = 2};
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_checks(s, &f, &list, &n, next, &p), FG_OK);
  CHECK_INT(n, 2);
  if (n == 2) {
    CHECK_STR(list[0].id, "chk_00000000000000000000000007");
    CHECK_STR(next, "chk_00000000000000000000000005");
  }
  fg_store_checks_free(list, n);
  f = (fg_check_filter){.after = "chk_unknown", .limit = 2};
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_checks(s, &f, &list, &n, next, &p), FG_EINVAL);

  /* two still running: 8 and 9 */
  int count = -1;
  fg_problem_init(&p);
  CHECK_INT(fg_store_mark_interrupted(s, &count, &p), FG_OK);
  CHECK_INT(count, 2);
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_check(s, "chk_00000000000000000000000009", &g, &p),
            FG_OK);
  CHECK_STR(g.status, "interrupted");
  CHECK(g.finished_at[0] != '\0');
  fg_store_check_clear(&g);
  fg_problem_init(&p);
  CHECK_INT(fg_store_mark_interrupted(s, &count, &p), FG_OK);
  CHECK_INT(count, 0);
}

/* Comparisons: the row kept beside its candidates' checks. */
static void test_comparisons(fg_store *s) {
  fg_problem p;
  const char *d2 = "sha256:2222222222222222222222222222222222222222222222222222"
                   "222222222222";
  fg_store_comparison c;
  memset(&c, 0, sizeof c);
  snprintf(c.id, sizeof c.id, "cmp_00000000000000000000000001");
  snprintf(c.model, sizeof c.model, "alpha");
  c.version = 2;
  snprintf(c.digest, sizeof c.digest, "%s", d2);
  snprintf(c.status, sizeof c.status, "running");
  snprintf(c.created_at, sizeof c.created_at, "2026-01-02T00:00:00Z");
  snprintf(c.key, sizeof c.key, "ci");
  c.checks = (char *)"[\"chk_00000000000000000000000001\","
                     "\"chk_00000000000000000000000002\"]";
  fg_problem_init(&p);
  CHECK_INT(fg_store_put_comparison(s, &c, &p), FG_OK);
  /* the same id again is refused */
  fg_problem_init(&p);
  CHECK(fg_store_put_comparison(s, &c, &p) != FG_OK);
  fg_store_comparison g;
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_comparison(s, c.id, &g, &p), FG_OK);
  CHECK_STR(g.status, "running");
  CHECK_STR(g.model, "alpha");
  CHECK_INT(g.version, 2);
  CHECK_STR(g.key, "ci");
  CHECK_STR(g.finished_at, "");
  CHECK_STR(g.checks, c.checks);
  CHECK(g.result == NULL);
  fg_store_comparison_clear(&g);
  /* its end */
  fg_store_comparison fin = c;
  snprintf(fin.status, sizeof fin.status, "done");
  snprintf(fin.finished_at, sizeof fin.finished_at, "2026-01-02T00:00:05Z");
  fin.checks = NULL;
  fin.result = (char *)"{\"status\":\"done\",\"pairs\":[]}";
  fg_problem_init(&p);
  CHECK_INT(fg_store_finish_comparison(s, &fin, &p), FG_OK);
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_comparison(s, c.id, &g, &p), FG_OK);
  CHECK_STR(g.status, "done");
  CHECK_STR(g.finished_at, "2026-01-02T00:00:05Z");
  CHECK_STR(g.result, fin.result);
  CHECK_STR(g.checks, c.checks); /* kept */
  fg_store_comparison_clear(&g);
  /* unknown ids, an unknown model version */
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_comparison(s, "cmp_nope", &g, &p), FG_ENOTFOUND);
  snprintf(fin.id, sizeof fin.id, "cmp_nope");
  fg_problem_init(&p);
  CHECK_INT(fg_store_finish_comparison(s, &fin, &p), FG_ENOTFOUND);
  snprintf(c.id, sizeof c.id, "cmp_00000000000000000000000002");
  c.version = 9;
  fg_problem_init(&p);
  CHECK(fg_store_put_comparison(s, &c, &p) != FG_OK);
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_comparison(s, c.id, &g, &p), FG_ENOTFOUND);
  /* one left running: the next start-up marks it interrupted */
  c.version = 2;
  snprintf(c.id, sizeof c.id, "cmp_00000000000000000000000003");
  fg_problem_init(&p);
  CHECK_INT(fg_store_put_comparison(s, &c, &p), FG_OK);
}

static void test_reopen(void) {
  fg_store *s = NULL;
  fg_problem p;
  fg_problem_init(&p);
  CHECK_INT(fg_store_open(url, &s, &p), FG_OK);
  if (!s) return;
  fg_store_version v;
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_version(s, "alpha", 0, &v, &p), FG_OK);
  CHECK_INT(v.version, 2);
  CHECK_STR(v.document, "{\"a\":2}");
  fg_store_version_clear(&v);
  fg_store_check g;
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_check(s, "chk_00000000000000000000000004", &g, &p),
            FG_OK);
  CHECK_STR(g.verdict, "pass");
  fg_store_check_clear(&g);
  fg_problem_init(&p);
  CHECK_INT(fg_store_ping(s, &p), FG_OK);
  fg_store_comparison gc;
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_comparison(s, "cmp_00000000000000000000000001", &gc,
                                    &p),
            FG_OK);
  CHECK_STR(gc.status, "done");
  fg_store_comparison_clear(&gc);
  /* a comparison left running by a process that is gone: interrupted */
  int left = 0;
  fg_problem_init(&p);
  CHECK_INT(fg_store_mark_interrupted(s, &left, &p), FG_OK);
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_comparison(s, "cmp_00000000000000000000000003", &gc,
                                    &p),
            FG_OK);
  CHECK_STR(gc.status, "interrupted");
  fg_store_comparison_clear(&gc);
  fg_store_close(s);

  /* SQLite's own verdict on the file */
  sqlite3 *db = NULL;
  CHECK_INT(sqlite3_open_v2(dbpath, &db, SQLITE_OPEN_READONLY, NULL),
            SQLITE_OK);
  sqlite3_stmt *st = NULL;
  CHECK_INT(sqlite3_prepare_v2(db, "PRAGMA integrity_check", -1, &st, NULL),
            SQLITE_OK);
  CHECK_INT(sqlite3_step(st), SQLITE_ROW);
  CHECK_STR((const char *)sqlite3_column_text(st, 0), "ok");
  sqlite3_finalize(st);
  CHECK_INT(sqlite3_prepare_v2(db, "SELECT version FROM schema_version", -1,
                               &st, NULL),
            SQLITE_OK);
  CHECK_INT(sqlite3_step(st), SQLITE_ROW);
  CHECK_INT(sqlite3_column_int(st, 0), 2);
  sqlite3_finalize(st);
  CHECK_INT(sqlite3_prepare_v2(db, "PRAGMA journal_mode", -1, &st, NULL),
            SQLITE_OK);
  CHECK_INT(sqlite3_step(st), SQLITE_ROW);
  CHECK_STR((const char *)sqlite3_column_text(st, 0), "wal");
  sqlite3_finalize(st);
  sqlite3_close(db);
}

/* Checks, then comparisons, on one store. */
static void checks_and_comparisons(fg_store *s) {
  test_checks(s);
  test_comparisons(s);
}

/* Reopening the PostgreSQL store finds everything (the schema is not
 * made twice). */
static void test_pg_reopen(void) {
  fg_store *s = NULL;
  fg_problem p;
  /* reopening finds everything (the schema is not made twice) */
  fg_problem_init(&p);
  CHECK_INT(fg_store_open(pg_url, &s, &p), FG_OK);
  if (s) {
    fg_store_check g;
    fg_problem_init(&p);
    CHECK_INT(fg_store_get_check(s, "chk_00000000000000000000000009", &g, &p),
              FG_OK);
    CHECK_STR(g.status, "interrupted");
    fg_store_check_clear(&g);
    fg_store_close(s);
  }
}

int main(void) {
  if (!sqlite_scratch()) return 1;
  bool ok = run_section(url, put_alpha, checks_and_comparisons);
  test_reopen();
  if (pg_scratch()) {
    ok &= run_section(pg_url, put_alpha, checks_and_comparisons);
    test_pg_reopen();
    pg_scratch_drop();
  }
  sqlite_scratch_remove();
  return fg_test_finish() || !ok;
}
