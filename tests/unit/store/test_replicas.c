/*
 * tests/unit/store/test_replicas.c -- what only a shared store has.
 *
 * Covers, on PostgreSQL: two stores (two replicas) registering one name
 * at once count versions without a gap or duplicate; a replica's running
 * check is left alone while it beats and marked interrupted once it is
 * gone; a cancel asked through one reaches the other's requests (unknown
 * and ended checks refused); a connection the server dropped (with
 * PostgreSQL's pg_terminate_backend) is re-established. On SQLite, a
 * store that is not shared has nobody to ask for a cancel. Expected
 * values follow from the store's rules (no outside reference applies).
 *
 * Threads: two registrar threads, one per replica's fg_store.
 */
#include "store_testutil.h"

#include <pthread.h>

/* A store that is not shared has nobody to ask for a cancel. */
static void test_sqlite_not_shared(void) {
  fg_store *s = NULL;
  fg_problem p;
  fg_problem_init(&p);
  CHECK_INT(fg_store_open(url, &s, &p), FG_OK);
  if (!s) return;
  CHECK(!fg_store_shared(s));
  CHECK_STR(fg_store_scheme(s), "sqlite");
  fg_problem_init(&p);
  CHECK_INT(fg_store_request_cancel(s, "chk_x", &p), FG_EUNSUPPORTED);
  char ids[2][40];
  int n = -1;
  fg_problem_init(&p);
  CHECK_INT(fg_store_cancel_requests(s, ids, 2, &n, &p), FG_OK);
  CHECK_INT(n, 0);
  fg_store_close(s);
}

typedef struct reg_arg {
  fg_store *s;
  int index, failures, created;
} reg_arg;

/* Ten registrations of distinct documents under one name. */
static void *registrar(void *arg) {
  reg_arg *a = arg;
  for (int i = 0; i < 10; i++) {
    char digest[80], doc[64];
    snprintf(digest, sizeof digest, "sha256:%064d", a->index * 100 + i);
    snprintf(doc, sizeof doc, "{\"r\":%d}", a->index * 100 + i);
    fg_store_version v;
    bool created = false;
    fg_problem p;
    fg_problem_init(&p);
    if (fg_store_put_version(a->s, "shared", digest, doc, NULL, &v, &created,
                             &p) != FG_OK) {
      fprintf(stderr, "registrar %d: %s\n", a->index, p.detail);
      a->failures++;
    }
    a->created += created;
    fg_store_version_clear(&v);
  }
  return NULL;
}

/* The record the replica section refuses to cancel: check 2 of the
 * check sections, finished (on alpha version 2). False, saying why, when
 * it cannot be written. */
static bool put_finished_check(fg_store *s) {
  fg_store_check c;
  fg_problem p;
  make_check(&c, "chk_00000000000000000000000002", "alpha", 2,
             "sha256:2222222222222222222222222222222222222222222222222222"
             "222222222222",
             "2026-01-01T00:00:02Z", "even");
  fg_problem_init(&p);
  bool ok = fg_store_put_check(s, &c, &p) == FG_OK;
  snprintf(c.status, sizeof c.status, "done");
  snprintf(c.verdict, sizeof c.verdict, "pass");
  snprintf(c.finished_at, sizeof c.finished_at, "2026-01-01T00:01:00Z");
  c.result = (char *)"{\"status\":\"done\"}";
  if (ok) ok = fg_store_finish_check(s, &c, &p) == FG_OK;
  if (!ok) fprintf(stderr, "fixture: finished check: %s\n", p.detail);
  return ok;
}

static void test_pg_replicas(void) {
  fg_store *a = NULL, *b = NULL;
  fg_problem p;
  fg_problem_init(&p);
  CHECK_INT(fg_store_open(pg_url, &a, &p), FG_OK);
  fg_problem_init(&p);
  CHECK_INT(fg_store_open(pg_url, &b, &p), FG_OK);
  if (!a || !b) return;
  CHECK_STR(fg_store_scheme(a), "postgresql");

  /* two replicas registering one name at once, 10 documents each */
  pthread_t t[2];
  reg_arg args[2] = {{.s = a, .index = 1}, {.s = b, .index = 2}};
  for (int i = 0; i < 2; i++) pthread_create(&t[i], NULL, registrar, &args[i]);
  for (int i = 0; i < 2; i++) pthread_join(t[i], NULL);
  CHECK_INT(args[0].failures + args[1].failures, 0);
  CHECK_INT(args[0].created + args[1].created, 20);
  bool all = true;
  for (int v = 1; v <= 20; v++) {
    fg_store_version got;
    fg_problem_init(&p);
    all &= fg_store_get_version(b, "shared", v, &got, &p) == FG_OK;
    fg_store_version_clear(&got);
  }
  CHECK(all);
  fg_store_version latest;
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_version(a, "shared", 0, &latest, &p), FG_OK);
  CHECK_INT(latest.version, 20);
  fg_store_version_clear(&latest);

  /* replica a serves (instance with a heartbeat) and records a running
   * check; replica b starting up leaves it alone */
  int count = -1;
  fg_problem_init(&p);
  CHECK_INT(fg_store_mark_interrupted(a, &count, &p), FG_OK);
  fg_store_check c;
  make_check(&c, "chk_pg_replica_running", "shared", 1,
             "sha256:0000000000000000000000000000000000000000000000000000000000000100",
             "2026-04-01T00:00:00Z", "replica");
  fg_problem_init(&p);
  CHECK_INT(fg_store_put_check(a, &c, &p), FG_OK);
  fg_problem_init(&p);
  CHECK_INT(fg_store_mark_interrupted(b, &count, &p), FG_OK);
  CHECK_INT(count, 0);
  fg_store_check g;
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_check(b, c.id, &g, &p), FG_OK);
  CHECK_STR(g.status, "running");
  fg_store_check_clear(&g);
  /* a cancel asked through b reaches a's list of requests; unknown and
   * ended checks are refused */
  fg_problem_init(&p);
  CHECK_INT(fg_store_request_cancel(b, c.id, &p), FG_OK);
  char asked[4][40];
  int nasked = -1;
  fg_problem_init(&p);
  CHECK_INT(fg_store_cancel_requests(a, asked, 4, &nasked, &p), FG_OK);
  CHECK_INT(nasked, 1);
  if (nasked == 1) CHECK_STR(asked[0], c.id);
  fg_problem_init(&p);
  CHECK_INT(fg_store_cancel_requests(b, asked, 4, &nasked, &p), FG_OK);
  CHECK_INT(nasked, 0); /* not b's check */
  fg_problem_init(&p);
  CHECK_INT(fg_store_request_cancel(b, "chk_no_such_check", &p), FG_ENOTFOUND);
  fg_problem_init(&p);
  CHECK_INT(fg_store_request_cancel(b, "chk_00000000000000000000000002", &p),
            FG_ECONFLICT);
  CHECK(strstr(p.detail, "not running") != NULL);
  /* a is gone: b's next sweep marks its check */
  fg_store_close(a);
  fg_problem_init(&p);
  CHECK_INT(fg_store_mark_interrupted(b, &count, &p), FG_OK);
  CHECK_INT(count, 1);
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_check(b, c.id, &g, &p), FG_OK);
  CHECK_STR(g.status, "interrupted");
  fg_store_check_clear(&g);

  /* the server drops b's connection: at most one call fails, then b
   * reconnects by itself */
  char sql[200];
  snprintf(sql, sizeof sql,
           "SELECT pg_terminate_backend(pid) FROM pg_stat_activity WHERE "
           "datname = '%s' AND pid <> pg_backend_pid()",
           pg_db);
  CHECK(pg_admin(sql));
  fg_problem_init(&p);
  fg_status first = fg_store_ping(b, &p);
  CHECK(first == FG_OK || first == FG_EIO);
  fg_problem_init(&p);
  CHECK_INT(fg_store_ping(b, &p), FG_OK);
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_version(b, "shared", 3, &latest, &p), FG_OK);
  CHECK_INT(latest.version, 3);
  fg_store_version_clear(&latest);
  fg_store_close(b);
}

int main(void) {
  if (!sqlite_scratch()) return 1;
  test_sqlite_not_shared();
  bool ok = true;
  if (pg_scratch()) {
    fg_store *s = open_store(pg_url);
    if (s) {
      ok = put_alpha(s) && put_finished_check(s);
      fg_store_close(s);
      if (ok) test_pg_replicas();
    }
    pg_scratch_drop();
  }
  sqlite_scratch_remove();
  return fg_test_finish() || !ok;
}
