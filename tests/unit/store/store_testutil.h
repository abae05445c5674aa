/*
 * tests/unit/store/store_testutil.h -- what the store/ unit tests share:
 * scratch stores, opening one for a test's sections, the check and key
 * records the tests write, and the model versions the check sections
 * build on.
 *
 * Every store test program runs its sections on a fresh SQLite file in a
 * fresh temporary folder (in a nested folder that does not exist yet, so
 * each program also shows that opening creates parent folders) and then,
 * when FG_TEST_PG_HOST, FG_TEST_PG_PORT and FG_TEST_PG_USER name a server
 * (tests/pg/cluster.sh starts one; deploy/test always does), on a fresh
 * PostgreSQL database made for the run and dropped after it. Without
 * those variables the PostgreSQL part is reported as not run.
 *
 * Header-only with static inline functions, like check.h, since every
 * test program is one file. Thread use: the test program's main thread;
 * make_check is also called from the writer threads of test_threads.c and
 * test_replicas.c (it touches only its argument).
 */
#ifndef FG_TEST_STORE_TESTUTIL_H
#define FG_TEST_STORE_TESTUTIL_H

#include "check.h"
#include "store/store.h"

#include <libpq-fe.h>
#include <math.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

static char dir[256], url[400], dbpath[320];

static char pg_url[600], pg_db[64];

static inline void make_check(fg_store_check *c, const char *id,
                              const char *model, int version,
                              const char *digest, const char *created,
                              const char *label) {
  memset(c, 0, sizeof *c);
  snprintf(c->id, sizeof c->id, "%s", id);
  snprintf(c->model, sizeof c->model, "%s", model);
  c->version = version;
  snprintf(c->digest, sizeof c->digest, "%s", digest);
  snprintf(c->status, sizeof c->status, "running");
  c->seed = 12345;
  snprintf(c->created_at, sizeof c->created_at, "%s", created);
  snprintf(c->label, sizeof c->label, "%s", label ? label : "");
  c->probability = c->lower = c->upper = NAN;
  c->elapsed_ms = NAN;
  c->request = (char *)"{\"decision\":{\"x\":1}}";
}

static inline void make_key(fg_store_key *k, const char *name, const char *role,
                            uint8_t fill) {
  memset(k, 0, sizeof *k);
  snprintf(k->name, sizeof k->name, "%s", name);
  snprintf(k->role, sizeof k->role, "%s", role);
  for (int i = 0; i < FG_STORE_KEY_SALT; i++)
    k->salt[i] = (uint8_t)(fill + i);
  for (int i = 0; i < FG_STORE_KEY_HASH; i++)
    k->hash[i] = (uint8_t)(fill ^ (i * 7));
}

/* A command on the server's maintenance database; false on failure. */
static inline bool pg_admin(const char *sql) {
  char conn[600];
  snprintf(conn, sizeof conn, "postgresql:///postgres?host=%s&port=%s&user=%s",
           getenv("FG_TEST_PG_HOST"), getenv("FG_TEST_PG_PORT"),
           getenv("FG_TEST_PG_USER"));
  PGconn *c = PQconnectdb(conn);
  bool ok = PQstatus(c) == CONNECTION_OK;
  if (ok) {
    PQclear(PQexec(c, "SET client_min_messages = warning"));
    PGresult *r = PQexec(c, sql);
    ok = PQresultStatus(r) == PGRES_COMMAND_OK ||
         PQresultStatus(r) == PGRES_TUPLES_OK;
    if (!ok) fprintf(stderr, "%s: %s", sql, PQerrorMessage(c));
    PQclear(r);
  } else {
    fprintf(stderr, "admin connection: %s", PQerrorMessage(c));
  }
  PQfinish(c);
  return ok;
}

/* A scratch SQLite store: a fresh folder `dir`, the file `dbpath` in a
 * nested folder that does not exist yet, its `url`; false when the folder
 * cannot be made. */
static inline bool sqlite_scratch(void) {
  snprintf(dir, sizeof dir, "/tmp/fg_store_test_XXXXXX");
  if (!mkdtemp(dir)) {
    perror("mkdtemp");
    return false;
  }
  /* a nested folder that does not exist yet */
  snprintf(dbpath, sizeof dbpath, "%s/a/b/t.db", dir);
  snprintf(url, sizeof url, "sqlite:%s", dbpath);
  return true;
}

static inline void sqlite_scratch_remove(void) {
  char cmd[512];
  snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
  if (system(cmd) != 0) fprintf(stderr, "could not remove %s\n", dir);
}

/* A fresh PostgreSQL database for this run (`pg_db`, `pg_url`); false,
 * saying so, when no server is named. */
static inline bool pg_scratch(void) {
  if (!getenv("FG_TEST_PG_HOST") || !getenv("FG_TEST_PG_PORT") ||
      !getenv("FG_TEST_PG_USER")) {
    printf("PostgreSQL part not run: FG_TEST_PG_HOST, FG_TEST_PG_PORT and "
           "FG_TEST_PG_USER are not set (tests/pg/cluster.sh)\n");
    return false;
  }
  snprintf(pg_db, sizeof pg_db, "fgunit_%d", (int)getpid());
  char sql[120];
  snprintf(sql, sizeof sql, "DROP DATABASE IF EXISTS %s", pg_db);
  pg_admin(sql);
  snprintf(sql, sizeof sql, "CREATE DATABASE %s", pg_db);
  CHECK(pg_admin(sql));
  snprintf(pg_url, sizeof pg_url, "postgresql:///%s?host=%s&port=%s&user=%s",
           pg_db, getenv("FG_TEST_PG_HOST"), getenv("FG_TEST_PG_PORT"),
           getenv("FG_TEST_PG_USER"));
  return true;
}

static inline void pg_scratch_drop(void) {
  char sql[120];
  snprintf(sql, sizeof sql, "DROP DATABASE IF EXISTS %s WITH (FORCE)", pg_db);
  CHECK(pg_admin(sql));
  printf("PostgreSQL part run on database %s\n", pg_db);
}

/* The store at `u` for a test's sections; NULL, with a failed check, when
 * it does not open. */
static inline fg_store *open_store(const char *u) {
  fg_store *s = NULL;
  fg_problem p;
  fg_problem_init(&p);
  CHECK_INT(fg_store_open(u, &s, &p), FG_OK);
  if (!s) fprintf(stderr, "open %s failed: %s\n", u, p.detail);
  return s;
}

/* The model versions the check sections build on, as test_models.c's
 * section leaves them: alpha version 1 (digest 1...1, titled "Alpha") and
 * version 2 (digest 2...2, the document {"a":2}). False, saying why, when
 * they cannot be written. */
static inline bool put_alpha(fg_store *s) {
  static const char *const docs[2][3] = {
      {"sha256:111111111111111111111111111111111111111111111111111111111111"
       "1111",
       "{\"a\":1}", "Alpha"},
      {"sha256:222222222222222222222222222222222222222222222222222222222222"
       "2222",
       "{\"a\":2}", NULL}};
  for (int i = 0; i < 2; i++) {
    fg_store_version v;
    bool created = false;
    fg_problem p;
    fg_problem_init(&p);
    if (fg_store_put_version(s, "alpha", docs[i][0], docs[i][1], docs[i][2], &v,
                             &created, &p) != FG_OK) {
      fprintf(stderr, "fixture: alpha version %d: %s\n", i + 1, p.detail);
      return false;
    }
    fg_store_version_clear(&v);
  }
  return true;
}

/* Opens a fresh store at `u`, writes `fixture`'s records (when given),
 * runs `section` and closes the store. False when the fixture could not
 * be written (the section is then not run); a store that does not open
 * is a failed check already. */
static inline bool run_section(const char *u, bool (*fixture)(fg_store *),
                               void (*section)(fg_store *)) {
  fg_store *s = open_store(u);
  if (!s) return true;
  bool ok = !fixture || fixture(s);
  if (ok) section(s);
  fg_store_close(s);
  return ok;
}

#endif
