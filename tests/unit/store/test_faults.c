/*
 * tests/unit/store/test_faults.c -- injected write faults
 * (fg_store_inject_write_fault), on SQLite and on PostgreSQL.
 *
 * Covers: a registration whose second write fails leaves no model row; a
 * failed check record is absent; a failed finish keeps the check running;
 * once disarmed the same calls succeed. All-or-nothing writes are the
 * store's rule (transactions, common practice); no outside reference
 * applies.
 */
#include "store_testutil.h"

/* Injected write faults: each failed call leaves the store as it was. */
static void test_faults(fg_store *s) {
  fg_problem p;
  fg_store_version v;
  bool created = true;
  const char *d3 = "sha256:33333333333333333333333333333333333333333333333333"
                   "33333333333333";
  /* the second write of a registration (the version row) fails: the model
   * row written just before is rolled back with it */
  fg_store_inject_write_fault(s, 2);
  fg_problem_init(&p);
  CHECK_INT(
      fg_store_put_version(s, "gamma", d3, "{\"g\":1}", NULL, &v, &created, &p),
      FG_EIO);
  CHECK(!created);
  CHECK(strstr(p.detail, "store") != NULL);
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_version(s, "gamma", 0, &v, &p), FG_ENOTFOUND);
  fg_store_version *list = NULL;
  int n = 0;
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_models(s, &list, &n, &p), FG_OK);
  for (int i = 0; i < n; i++)
    CHECK(strcmp(list[i].name, "gamma") != 0);
  fg_store_versions_free(list, n);

  /* a failed check record is absent; a failed finish keeps "running" */
  fg_store_check c;
  make_check(&c, "chk_fault_1", "alpha", 1,
             "sha256:111111111111111111111111111111111111111111111111111111"
             "1111111111",
             "2026-03-01T00:00:00Z", NULL);
  fg_store_inject_write_fault(s, 1);
  fg_problem_init(&p);
  CHECK_INT(fg_store_put_check(s, &c, &p), FG_EIO);
  fg_store_check g;
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_check(s, "chk_fault_1", &g, &p), FG_ENOTFOUND);
  fg_problem_init(&p);
  CHECK_INT(fg_store_put_check(s, &c, &p), FG_OK);
  snprintf(c.status, sizeof c.status, "done");
  snprintf(c.verdict, sizeof c.verdict, "pass");
  c.result = (char *)"{}";
  fg_store_inject_write_fault(s, 1);
  fg_problem_init(&p);
  CHECK_INT(fg_store_finish_check(s, &c, &p), FG_EIO);
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_check(s, "chk_fault_1", &g, &p), FG_OK);
  CHECK_STR(g.status, "running");
  CHECK(g.result == NULL);
  fg_store_check_clear(&g);
  /* disarmed: the same calls succeed again */
  fg_store_inject_write_fault(s, 0);
  fg_problem_init(&p);
  CHECK_INT(fg_store_finish_check(s, &c, &p), FG_OK);
  fg_problem_init(&p);
  CHECK_INT(
      fg_store_put_version(s, "gamma", d3, "{\"g\":1}", NULL, &v, &created, &p),
      FG_OK);
  CHECK(created);
  CHECK_INT(v.version, 1);
  fg_store_version_clear(&v);
  fg_problem_init(&p);
  CHECK_INT(fg_store_retire_model(s, "gamma", &p), FG_OK);
}

int main(void) {
  if (!sqlite_scratch()) return 1;
  bool ok = run_section(url, put_alpha, test_faults);
  if (pg_scratch()) {
    ok &= run_section(pg_url, put_alpha, test_faults);
    pg_scratch_drop();
  }
  sqlite_scratch_remove();
  return fg_test_finish() || !ok;
}
