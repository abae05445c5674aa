/*
 * tests/unit/store/test_models.c -- model versions in the store
 * (store/store.h), on SQLite and on PostgreSQL.
 *
 * Covers: opening (parent folders created), idempotent registration of
 * the same digest, a new version on change, latest and specific versions,
 * not found, the list of latest versions by name, retiring and reviving.
 * The expected values follow from the store's rules in store/store.h (no
 * outside reference applies); both backends must give the same answers.
 */
#include "store_testutil.h"

static void test_versions(fg_store *s) {
  fg_problem p;
  fg_store_version v;
  bool created = false;
  const char *d1 = "sha256:1111111111111111111111111111111111111111111111111111"
                   "111111111111";
  const char *d2 = "sha256:2222222222222222222222222222222222222222222222222222"
                   "222222222222";

  fg_problem_init(&p);
  CHECK_INT(fg_store_put_version(s, "alpha", d1, "{\"a\":1}", "Alpha", &v,
                                 &created, &p),
            FG_OK);
  CHECK(created);
  CHECK_INT(v.version, 1);
  CHECK_STR(v.digest, d1);
  CHECK_STR(v.title, "Alpha");
  CHECK_STR(v.document, "{\"a\":1}");
  CHECK(strlen(v.created_at) == 20);
  fg_store_version_clear(&v);

  /* same digest again: the same version, not created */
  fg_problem_init(&p);
  CHECK_INT(fg_store_put_version(s, "alpha", d1, "{\"a\":1}", "Alpha", &v,
                                 &created, &p),
            FG_OK);
  CHECK(!created);
  CHECK_INT(v.version, 1);
  fg_store_version_clear(&v);

  /* changed document: version 2 */
  fg_problem_init(&p);
  CHECK_INT(
      fg_store_put_version(s, "alpha", d2, "{\"a\":2}", NULL, &v, &created, &p),
      FG_OK);
  CHECK(created);
  CHECK_INT(v.version, 2);
  CHECK(v.title == NULL);
  fg_store_version_clear(&v);

  /* a second model */
  fg_problem_init(&p);
  CHECK_INT(fg_store_put_version(s, "beta", d1, "{\"b\":1}", "Beta", &v,
                                 &created, &p),
            FG_OK);
  CHECK_INT(v.version, 1);
  fg_store_version_clear(&v);

  /* latest and specific */
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_version(s, "alpha", 0, &v, &p), FG_OK);
  CHECK_INT(v.version, 2);
  CHECK_STR(v.document, "{\"a\":2}");
  CHECK(!v.retired);
  fg_store_version_clear(&v);
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_version(s, "alpha", 1, &v, &p), FG_OK);
  CHECK_INT(v.version, 1);
  CHECK_STR(v.digest, d1);
  CHECK_STR(v.document, "{\"a\":1}");
  fg_store_version_clear(&v);

  /* not found */
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_version(s, "alpha", 3, &v, &p), FG_ENOTFOUND);
  CHECK(strstr(p.detail, "alpha") != NULL);
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_version(s, "nobody", 0, &v, &p), FG_ENOTFOUND);
  fg_problem_init(&p);
  CHECK_INT(fg_store_retire_model(s, "nobody", &p), FG_ENOTFOUND);

  /* list: latest of each, by name */
  fg_store_version *list = NULL;
  int n = 0;
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_models(s, &list, &n, &p), FG_OK);
  CHECK_INT(n, 2);
  if (n == 2) {
    CHECK_STR(list[0].name, "alpha");
    CHECK_INT(list[0].version, 2);
    CHECK(list[0].document == NULL);
    CHECK_STR(list[1].name, "beta");
    CHECK_STR(list[1].title, "Beta");
  }
  fg_store_versions_free(list, n);

  /* retire beta: gone from the list, still readable, retired flag set */
  fg_problem_init(&p);
  CHECK_INT(fg_store_retire_model(s, "beta", &p), FG_OK);
  fg_problem_init(&p);
  CHECK_INT(fg_store_retire_model(s, "beta", &p), FG_OK); /* idempotent */
  fg_problem_init(&p);
  CHECK_INT(fg_store_list_models(s, &list, &n, &p), FG_OK);
  CHECK_INT(n, 1);
  fg_store_versions_free(list, n);
  fg_problem_init(&p);
  CHECK_INT(fg_store_get_version(s, "beta", 0, &v, &p), FG_OK);
  CHECK(v.retired);
  fg_store_version_clear(&v);

  /* a new registration revives it */
  fg_problem_init(&p);
  CHECK_INT(fg_store_put_version(s, "beta", d2, "{\"b\":2}", "Beta", &v,
                                 &created, &p),
            FG_OK);
  CHECK(created);
  CHECK_INT(v.version, 2);
  CHECK(!v.retired);
  fg_store_version_clear(&v);
  fg_problem_init(&p);
  CHECK_INT(fg_store_retire_model(s, "beta", &p), FG_OK);
}

int main(void) {
  if (!sqlite_scratch()) return 1;
  bool ok = run_section(url, NULL, test_versions);
  if (pg_scratch()) {
    ok &= run_section(pg_url, NULL, test_versions);
    pg_scratch_drop();
  }
  sqlite_scratch_remove();
  return fg_test_finish() || !ok;
}
