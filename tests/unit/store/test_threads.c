/*
 * tests/unit/store/test_threads.c -- several threads writing to one store
 * at once (store/store.h), on SQLite and on PostgreSQL.
 *
 * Covers: four writer threads registering checks and reading versions
 * through one fg_store (its lock on SQLite, its connection pool on
 * PostgreSQL): no call fails and every record is there afterwards. The
 * expected count is the number of records written (no outside reference
 * applies).
 */
#include "store_testutil.h"

#include <pthread.h>

/* Several threads registering and recording at once. */
typedef struct writer_arg {
  fg_store *s;
  int index;
  int failures;
} writer_arg;

static void *writer(void *arg) {
  writer_arg *w = arg;
  for (int i = 0; i < 25; i++) {
    fg_problem p;
    fg_store_check c;
    char id[40];
    snprintf(id, sizeof id, "chk_t%d_%03d", w->index, i);
    make_check(&c, id, "alpha", 1,
               "sha256:11111111111111111111111111111111111111111111111111111"
               "11111111111",
               "2026-02-01T00:00:00Z", "thread");
    fg_problem_init(&p);
    if (fg_store_put_check(w->s, &c, &p) != FG_OK) w->failures++;
    fg_store_version v;
    fg_problem_init(&p);
    if (fg_store_get_version(w->s, "alpha", 0, &v, &p) != FG_OK) w->failures++;
    fg_store_version_clear(&v);
  }
  return NULL;
}

static void test_threads(fg_store *s) {
  pthread_t t[4];
  writer_arg args[4];
  for (int i = 0; i < 4; i++) {
    args[i] = (writer_arg){.s = s, .index = i};
    pthread_create(&t[i], NULL, writer, &args[i]);
  }
  int failures = 0;
  for (int i = 0; i < 4; i++) {
    pthread_join(t[i], NULL);
    failures += args[i].failures;
  }
  CHECK_INT(failures, 0);
  fg_store_check *list = NULL;
  int n = 0;
  char next[40];
  fg_problem p;
  fg_problem_init(&p);
  fg_check_filter f = {.label = "thread", .limit = 1000};
  CHECK_INT(fg_store_list_checks(s, &f, &list, &n, next, &p), FG_OK);
  CHECK_INT(n, 100);
  fg_store_checks_free(list, n);
}

int main(void) {
  if (!sqlite_scratch()) return 1;
  bool ok = run_section(url, put_alpha, test_threads);
  if (pg_scratch()) {
    ok &= run_section(pg_url, put_alpha, test_threads);
    pg_scratch_drop();
  }
  sqlite_scratch_remove();
  return fg_test_finish() || !ok;
}
