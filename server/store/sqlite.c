/*
 * store/sqlite.c -- the SQLite backend of store/store.h ("sqlite:PATH").
 *
 * Design
 *   One connection per fg_store, opened with SQLITE_OPEN_NOMUTEX and
 *   guarded by our own mutex: every public function takes the mutex for its
 *   whole duration, so a read never sees half of a write and statements are
 *   never shared between two threads at once. Every statement is prepared
 *   once at open time (the table `stmt_sql` below, persistent) and reset
 *   after use; no SQL text is built at run time. Every write runs inside
 *   BEGIN IMMEDIATE ... COMMIT (ROLLBACK on any failure), so a crash leaves
 *   either the old or the new record, never half of one.
 *
 *   One daemon per file: fg_store_mark_interrupted, which only `serve`
 *   calls, first takes a write lock (fcntl) on <path>.lock and refuses
 *   with FG_EBUSY, naming the holder's pid, when another process holds
 *   it; so a second daemon never marks the first one's running checks.
 *   Commands that only open the store (keys, offline check) take no lock.
 *
 *   The database runs in WAL mode with foreign keys on and a busy timeout
 *   (FG_STORE_BUSY_MS), so a second process reading the same file (a CLI
 *   listing checks) does not block the daemon. The schema is created when
 *   missing; `schema_version` holds one row with FG_STORE_SCHEMA_VERSION,
 *   and a file with a newer version is refused rather than misread.
 *
 * Schema (version 2; version 1 lacked `keys`)
 *   models   (name PK, retired, created_at)
 *   versions (name -> models, version, digest, document, title, created_at;
 *             PK (name, version))
 *   checks   (id PK, (model, version) -> versions, digest, status, verdict,
 *             seed, request, result, created_at, finished_at, elapsed_ms,
 *             label, key, probability, lower, upper, replay_of = the id
 *             of the check it replays or ''; a file made before that
 *             column is given it with ALTER TABLE at open, old rows '')
 *   keys     (name PK, role, salt BLOB, hash BLOB = SHA-256(salt || key),
 *             created_at, revoked_at '' while live)
 *   comparisons (id PK, (model, version) -> versions, digest, status,
 *             created_at, finished_at, key, checks = JSON array of the
 *             candidates' check ids, result; added to version 2 without
 *             a new number: only a table more, made when missing)
 *   Migration: every CREATE is IF NOT EXISTS, so opening a version-1 file
 *   adds the missing tables and raises schema_version to 2 in the same
 *   transaction; no existing row changes.
 *   NaN probabilities are stored as NULL (SQLite itself would turn a NaN
 *   into NULL; we do it explicitly) and read back as NAN.
 *
 * Ordering of checks: newest first by (created_at, id). Ids are
 * time-sortable, so within one second of created_at the id decides. The
 * list cursor `after` is the id of the last item seen; the next page holds
 * the checks strictly older than it in that order.
 *
 * Errors: SQLite failures become FG_EIO (FG_EBUSY when the file stayed
 * locked past the busy timeout, FG_ENOMEM when SQLite ran out of memory)
 * with a detail naming the operation and SQLite's message. Absent records
 * are FG_ENOTFOUND, an unknown cursor FG_EINVAL.
 *
 * Test seam: fg_store_inject_write_fault() makes the n-th data write from
 * then on fail as an I/O error inside its transaction, so tests can show
 * that a failed write leaves no half-written record.
 *
 * Thread use: any thread; see the mutex above.
 */
#include "store/backend.h"

#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <pthread.h>
#include <sqlite3.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

/* The schema this file writes and understands. */
#define FG_STORE_SCHEMA_VERSION 2
/* How long a statement waits for a lock held by another connection before
 * giving up with FG_EBUSY: long enough to ride out a checkpoint or a CLI
 * reader, short enough that an HTTP request does not hang. */
#define FG_STORE_BUSY_MS 5000
/* Characters of a store path ("sqlite:" prefix removed). */
#define FG_STORE_PATH_MAX 4096

static const char *const schema_sql =
    "CREATE TABLE IF NOT EXISTS schema_version ("
    "  version INTEGER NOT NULL);"
    "CREATE TABLE IF NOT EXISTS models ("
    "  name TEXT PRIMARY KEY,"
    "  retired INTEGER NOT NULL DEFAULT 0,"
    "  created_at TEXT NOT NULL);"
    "CREATE TABLE IF NOT EXISTS versions ("
    "  name TEXT NOT NULL REFERENCES models(name),"
    "  version INTEGER NOT NULL CHECK (version >= 1),"
    "  digest TEXT NOT NULL,"
    "  document TEXT NOT NULL,"
    "  title TEXT,"
    "  created_at TEXT NOT NULL,"
    "  PRIMARY KEY (name, version));"
    "CREATE TABLE IF NOT EXISTS checks ("
    "  id TEXT PRIMARY KEY,"
    "  model TEXT NOT NULL,"
    "  version INTEGER NOT NULL,"
    "  digest TEXT NOT NULL,"
    "  status TEXT NOT NULL,"
    "  verdict TEXT NOT NULL DEFAULT '',"
    "  seed INTEGER NOT NULL,"
    "  request TEXT NOT NULL,"
    "  result TEXT,"
    "  created_at TEXT NOT NULL,"
    "  finished_at TEXT NOT NULL DEFAULT '',"
    "  elapsed_ms REAL,"
    "  label TEXT NOT NULL DEFAULT '',"
    "  key TEXT NOT NULL DEFAULT '',"
    "  probability REAL,"
    "  lower REAL,"
    "  upper REAL,"
    "  replay_of TEXT NOT NULL DEFAULT '',"
    "  FOREIGN KEY (model, version) REFERENCES versions(name, version));"
    "CREATE INDEX IF NOT EXISTS checks_by_time ON checks(created_at, id);"
    "CREATE INDEX IF NOT EXISTS checks_by_model ON checks(model, created_at);"
    "CREATE INDEX IF NOT EXISTS checks_by_status ON checks(status);"
    "CREATE TABLE IF NOT EXISTS keys ("
    "  name TEXT PRIMARY KEY,"
    "  role TEXT NOT NULL,"
    "  salt BLOB NOT NULL,"
    "  hash BLOB NOT NULL,"
    "  created_at TEXT NOT NULL,"
    "  revoked_at TEXT NOT NULL DEFAULT '');"
    "CREATE TABLE IF NOT EXISTS comparisons ("
    "  id TEXT PRIMARY KEY,"
    "  model TEXT NOT NULL,"
    "  version INTEGER NOT NULL,"
    "  digest TEXT NOT NULL,"
    "  status TEXT NOT NULL,"
    "  created_at TEXT NOT NULL,"
    "  finished_at TEXT NOT NULL DEFAULT '',"
    "  key TEXT NOT NULL DEFAULT '',"
    "  checks TEXT NOT NULL,"
    "  result TEXT,"
    "  FOREIGN KEY (model, version) REFERENCES versions(name, version));";

/* Every statement the backend runs, prepared once at open. */
enum stmt_id {
  ST_BEGIN,
  ST_COMMIT,
  ST_ROLLBACK,
  ST_PING,
  ST_LATEST,
  ST_MODEL_UPSERT,
  ST_VERSION_INSERT,
  ST_VERSION_GET,
  ST_MODELS_LIST,
  ST_RETIRE,
  ST_CHECK_INSERT,
  ST_CHECK_FINISH,
  ST_CHECK_GET,
  ST_CHECK_PROGRESS,
  ST_CHECK_CURSOR,
  ST_CHECKS_LIST,
  ST_MARK_INTERRUPTED,
  ST_MARK_CMP_INTERRUPTED,
  ST_CMP_INSERT,
  ST_CMP_FINISH,
  ST_CMP_GET,
  ST_KEY_EXISTS,
  ST_KEY_INSERT,
  ST_KEYS_LIST,
  ST_KEY_REVOKE,
  ST_COUNT
};

#define CHECK_COLUMNS                                                          \
  "id, model, version, digest, status, verdict, seed, created_at,"             \
  " finished_at, elapsed_ms, label, key, probability, lower, upper,"        \
  " replay_of"

static const char *const stmt_sql[ST_COUNT] = {
    [ST_BEGIN] = "BEGIN IMMEDIATE",
    [ST_COMMIT] = "COMMIT",
    [ST_ROLLBACK] = "ROLLBACK",
    [ST_PING] = "SELECT count(*) FROM sqlite_schema",
    [ST_LATEST] = "SELECT version, digest FROM versions WHERE name = ?1"
                  " ORDER BY version DESC LIMIT 1",
    [ST_MODEL_UPSERT] =
        "INSERT INTO models(name, retired, created_at) VALUES (?1, 0, ?2)"
        " ON CONFLICT(name) DO UPDATE SET retired = 0",
    [ST_VERSION_INSERT] =
        "INSERT INTO versions(name, version, digest, document, title,"
        " created_at) VALUES (?1, ?2, ?3, ?4, ?5, ?6)",
    /* ?2 = 0 selects the latest version. */
    [ST_VERSION_GET] =
        "SELECT v.name, v.version, v.digest, v.created_at, v.title,"
        " v.document, m.retired FROM versions v JOIN models m"
        " ON m.name = v.name WHERE v.name = ?1 AND v.version = CASE WHEN ?2"
        " > 0 THEN ?2 ELSE (SELECT MAX(version) FROM versions WHERE name ="
        " ?1) END",
    [ST_MODELS_LIST] =
        "SELECT v.name, v.version, v.digest, v.created_at, v.title FROM"
        " versions v JOIN models m ON m.name = v.name WHERE m.retired = 0"
        " AND v.version = (SELECT MAX(version) FROM versions w WHERE w.name ="
        " v.name) ORDER BY v.name",
    [ST_RETIRE] = "UPDATE models SET retired = 1 WHERE name = ?1",
    [ST_CHECK_INSERT] =
        "INSERT INTO checks(id, model, version, digest, status, verdict, seed,"
        " created_at, finished_at, elapsed_ms, label, key, probability, lower,"
        " upper, request, result, replay_of) VALUES (?1, ?2, ?3, ?4, ?5, ?6,"
        " ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17, ?18)",
    [ST_CHECK_FINISH] =
        "UPDATE checks SET status = ?2, verdict = ?3, finished_at = ?4,"
        " elapsed_ms = ?5, probability = ?6, lower = ?7, upper = ?8,"
        " result = ?9 WHERE id = ?1",
    [ST_CHECK_GET] = "SELECT " CHECK_COLUMNS ", request, result FROM checks"
                     " WHERE id = ?1",
    [ST_CHECK_PROGRESS] = "UPDATE checks SET result = ?2 WHERE id = ?1"
                          " AND status = 'running'",
    [ST_CHECK_CURSOR] = "SELECT created_at FROM checks WHERE id = ?1",
    /* Filters are NULL when unused; ?5/?6 = cursor (created_at, id). */
    [ST_CHECKS_LIST] =
        "SELECT " CHECK_COLUMNS " FROM checks"
        " WHERE (?1 IS NULL OR model = ?1) AND (?2 IS NULL OR verdict = ?2)"
        " AND (?3 IS NULL OR created_at >= ?3) AND (?4 IS NULL OR label = ?4)"
        " AND (?5 IS NULL OR created_at < ?5 OR (created_at = ?5 AND id < ?6))"
        " AND (?8 IS NULL OR key = ?8)"
        " ORDER BY created_at DESC, id DESC LIMIT ?7",
    [ST_MARK_INTERRUPTED] =
        "UPDATE checks SET status = 'interrupted', finished_at = ?1,"
        " result = NULL WHERE status = 'running'",
    [ST_MARK_CMP_INTERRUPTED] =
        "UPDATE comparisons SET status = 'interrupted', finished_at = ?1"
        " WHERE status = 'running'",
    [ST_CMP_INSERT] =
        "INSERT INTO comparisons(id, model, version, digest, status,"
        " created_at, finished_at, key, checks, result) VALUES (?1, ?2, ?3,"
        " ?4, ?5, ?6, ?7, ?8, ?9, ?10)",
    [ST_CMP_FINISH] = "UPDATE comparisons SET status = ?2, finished_at = ?3,"
                      " result = ?4 WHERE id = ?1",
    [ST_CMP_GET] = "SELECT id, model, version, digest, status, created_at,"
                   " finished_at, key, checks, result FROM comparisons"
                   " WHERE id = ?1",
    [ST_KEY_EXISTS] = "SELECT revoked_at FROM keys WHERE name = ?1",
    [ST_KEY_INSERT] = "INSERT INTO keys(name, role, salt, hash, created_at)"
                      " VALUES (?1, ?2, ?3, ?4, ?5)",
    /* ?1 = 1: live keys only. */
    [ST_KEYS_LIST] = "SELECT name, role, salt, hash, created_at, revoked_at"
                     " FROM keys WHERE ?1 = 0 OR revoked_at = ''"
                     " ORDER BY name",
    [ST_KEY_REVOKE] = "UPDATE keys SET revoked_at = ?2 WHERE name = ?1"
                      " AND revoked_at = ''",
};

typedef struct sq_store {
  pthread_mutex_t lock; /* held for the whole of every public call */
  sqlite3 *db;
  sqlite3_stmt *stmt[ST_COUNT];
  char path[FG_STORE_PATH_MAX];
  int fail_countdown; /* test seam: > 0 = writes until an injected fault */
  int lock_fd;        /* <path>.lock, write-locked by the serving daemon */
} sq_store;

/* ---- small helpers ---- */

static fg_status db_fault(sq_store *s, fg_problem *p, const char *what,
                          int rc) {
  fg_status st = FG_EIO;
  int primary = rc & 0xff;
  if (primary == SQLITE_BUSY || primary == SQLITE_LOCKED) st = FG_EBUSY;
  if (primary == SQLITE_NOMEM) st = FG_ENOMEM;
  return fg_problem_set(p, st, "store %s: %s (%s)", what,
                        s && s->db ? sqlite3_errmsg(s->db) : "no connection",
                        sqlite3_errstr(rc));
}

static void copy_text(char *dst, size_t cap, sqlite3_stmt *st, int col) {
  const unsigned char *t = sqlite3_column_text(st, col);
  snprintf(dst, cap, "%s", t ? (const char *)t : "");
}

static char *dup_text(sqlite3_stmt *st, int col) {
  if (sqlite3_column_type(st, col) == SQLITE_NULL) return NULL;
  const unsigned char *t = sqlite3_column_text(st, col);
  int n = sqlite3_column_bytes(st, col);
  char *out = malloc((size_t)n + 1);
  if (!out) return NULL;
  memcpy(out, t ? (const void *)t : "", (size_t)n);
  out[n] = '\0';
  return out;
}

static double column_real(sqlite3_stmt *st, int col) {
  if (sqlite3_column_type(st, col) == SQLITE_NULL) return NAN;
  return sqlite3_column_double(st, col);
}

static int bind_text(sqlite3_stmt *st, int i, const char *v) {
  if (!v) return sqlite3_bind_null(st, i);
  return sqlite3_bind_text(st, i, v, -1, SQLITE_TRANSIENT);
}

/* Empty strings bind as NULL: used for optional filters. */
static int bind_filter(sqlite3_stmt *st, int i, const char *v) {
  return bind_text(st, i, (v && v[0]) ? v : NULL);
}

static int bind_real(sqlite3_stmt *st, int i, double v) {
  if (isnan(v)) return sqlite3_bind_null(st, i);
  return sqlite3_bind_double(st, i, v);
}

static void done_stmt(sqlite3_stmt *st) {
  sqlite3_reset(st);
  sqlite3_clear_bindings(st);
}

/* Run a statement that returns no rows. */
static int exec_stmt(sqlite3_stmt *st) {
  int rc = sqlite3_step(st);
  done_stmt(st);
  return rc == SQLITE_DONE ? SQLITE_OK : rc;
}

/* A data write (never BEGIN/COMMIT/ROLLBACK): where an injected fault
 * strikes, as an I/O error inside the open transaction. */
static int write_step(sq_store *s, sqlite3_stmt *st) {
  if (s->fail_countdown > 0 && --s->fail_countdown == 0) {
    done_stmt(st);
    return SQLITE_IOERR;
  }
  return exec_stmt(st);
}

static int tx_begin(sq_store *s) {
  return exec_stmt(s->stmt[ST_BEGIN]);
}

static int tx_commit(sq_store *s) {
  return exec_stmt(s->stmt[ST_COMMIT]);
}

static void tx_rollback(sq_store *s) {
  if (!sqlite3_get_autocommit(s->db)) exec_stmt(s->stmt[ST_ROLLBACK]);
}

/* Ends the open write transaction: COMMIT when `res` is FG_OK (its failure
 * reported as `what`), ROLLBACK when `res` is a failure or the commit
 * failed. Returns the outcome of the whole write. */
static fg_status tx_end(sq_store *s, fg_status res, const char *what,
                        fg_problem *p) {
  if (res == FG_OK) {
    int rc = tx_commit(s);
    if (rc != SQLITE_OK) res = db_fault(s, p, what, rc);
  }
  if (res != FG_OK) tx_rollback(s);
  return res;
}

/* Releases the lock of a public call and passes `res` on. The argument is
 * evaluated first, so a problem that quotes the connection's message is
 * written while the lock is still held. */
static fg_status unlock_with(sq_store *s, fg_status res) {
  pthread_mutex_unlock(&s->lock);
  return res;
}

/* Takes the lock of a public call and opens its write transaction; on
 * failure releases the lock again. `what` names the call in the problem. */
static fg_status lock_tx(sq_store *s, const char *what, fg_problem *p) {
  pthread_mutex_lock(&s->lock);
  int rc = tx_begin(s);
  if (rc == SQLITE_OK) return FG_OK;
  char where[64];
  snprintf(where, sizeof where, "begin (%s)", what);
  return unlock_with(s, db_fault(s, p, where, rc));
}

/* mkdir -p of the folder holding `path`. */
static int make_parents(const char *path) {
  char buf[FG_STORE_PATH_MAX];
  snprintf(buf, sizeof buf, "%s", path);
  char *slash = strrchr(buf, '/');
  if (!slash || slash == buf) return 0;
  *slash = '\0';
  for (char *q = buf + 1; *q; q++) {
    if (*q != '/') continue;
    *q = '\0';
    if (mkdir(buf, 0755) != 0 && errno != EEXIST) return -1;
    *q = '/';
  }
  if (mkdir(buf, 0755) != 0 && errno != EEXIST) return -1;
  return 0;
}

/* ---- open / close ---- */

static fg_status setup_schema(sq_store *s, fg_problem *p) {
  char *err = NULL;
  int rc = sqlite3_exec(s->db,
                        "PRAGMA journal_mode = WAL;"
                        "PRAGMA foreign_keys = ON;"
                        "PRAGMA synchronous = NORMAL;",
                        NULL, NULL, &err);
  if (rc != SQLITE_OK) {
    fg_problem_set(p, FG_EIO, "store %s: setting pragmas: %s", s->path,
                   err ? err : sqlite3_errstr(rc));
    sqlite3_free(err);
    return FG_EIO;
  }
  rc = sqlite3_exec(s->db, "BEGIN IMMEDIATE", NULL, NULL, &err);
  if (rc == SQLITE_OK) rc = sqlite3_exec(s->db, schema_sql, NULL, NULL, &err);
  if (rc == SQLITE_OK) {
    /* A file made before checks.replay_of existed: add the column (every
     * old row gets '', "not a replay"). */
    sqlite3_stmt *q = NULL;
    bool has = false;
    int qrc = sqlite3_prepare_v2(s->db,
                                 "SELECT count(*) FROM pragma_table_info("
                                 "'checks') WHERE name = 'replay_of'",
                                 -1, &q, NULL);
    if (qrc == SQLITE_OK && sqlite3_step(q) == SQLITE_ROW)
      has = sqlite3_column_int(q, 0) > 0;
    sqlite3_finalize(q);
    if (qrc != SQLITE_OK) rc = qrc;
    else if (!has)
      rc = sqlite3_exec(s->db,
                        "ALTER TABLE checks ADD COLUMN replay_of TEXT NOT "
                        "NULL DEFAULT ''",
                        NULL, NULL, &err);
  }
  if (rc != SQLITE_OK) {
    fg_problem_set(p, rc == SQLITE_BUSY ? FG_EBUSY : FG_EIO,
                   "store %s: creating the schema: %s", s->path,
                   err ? err : sqlite3_errstr(rc));
    sqlite3_free(err);
    sqlite3_exec(s->db, "ROLLBACK", NULL, NULL, NULL);
    return p && p->status ? p->status : FG_EIO;
  }
  /* One row in schema_version: insert it for a new file, refuse a newer. */
  sqlite3_stmt *st = NULL;
  long long have = -1;
  rc = sqlite3_prepare_v2(s->db, "SELECT MAX(version) FROM schema_version", -1,
                          &st, NULL);
  if (rc == SQLITE_OK && sqlite3_step(st) == SQLITE_ROW &&
      sqlite3_column_type(st, 0) != SQLITE_NULL)
    have = sqlite3_column_int64(st, 0);
  sqlite3_finalize(st);
  if (rc == SQLITE_OK && have < 0) {
    char sql[96];
    snprintf(sql, sizeof sql, "INSERT INTO schema_version VALUES (%d)",
             FG_STORE_SCHEMA_VERSION);
    rc = sqlite3_exec(s->db, sql, NULL, NULL, NULL);
  }
  if (rc == SQLITE_OK && have >= 1 && have < FG_STORE_SCHEMA_VERSION) {
    /* An older file: the CREATEs above added what it lacked. */
    char sql[96];
    snprintf(sql, sizeof sql, "UPDATE schema_version SET version = %d",
             FG_STORE_SCHEMA_VERSION);
    rc = sqlite3_exec(s->db, sql, NULL, NULL, NULL);
  }
  if (rc == SQLITE_OK && have > FG_STORE_SCHEMA_VERSION) {
    sqlite3_exec(s->db, "ROLLBACK", NULL, NULL, NULL);
    return fg_problem_set(p, FG_EIO,
                          "store %s: schema version %lld is newer than this "
                          "build understands (%d)",
                          s->path, have, FG_STORE_SCHEMA_VERSION);
  }
  if (rc == SQLITE_OK) rc = sqlite3_exec(s->db, "COMMIT", NULL, NULL, NULL);
  if (rc != SQLITE_OK) {
    fg_status st2 = db_fault(s, p, "schema version", rc);
    sqlite3_exec(s->db, "ROLLBACK", NULL, NULL, NULL);
    return st2;
  }
  return FG_OK;
}

static void sq_close(void *b);

static fg_status sq_open(const char *url, void **out, fg_problem *p) {
  *out = NULL;
  if (!url || strncmp(url, "sqlite:", 7) != 0 || url[7] == '\0')
    return fg_problem_set(p, FG_EINVAL, "store URL '%s': expected sqlite:PATH",
                          url ? url : "(null)");
  const char *path = url + 7;
  if (strlen(path) >= FG_STORE_PATH_MAX)
    return fg_problem_set(p, FG_EINVAL, "store path longer than %d characters",
                          FG_STORE_PATH_MAX - 1);
  sq_store *s = calloc(1, sizeof *s);
  if (!s) return fg_problem_set(p, FG_ENOMEM, "store: out of memory");
  snprintf(s->path, sizeof s->path, "%s", path);
  s->lock_fd = -1;
  pthread_mutex_init(&s->lock, NULL);

  fg_status st = FG_OK;
  int rc;
  if (strcmp(path, ":memory:") != 0 && make_parents(path) != 0) {
    st = fg_problem_set(p, FG_EIO, "store %s: cannot create its folder: %s",
                        path, strerror(errno));
    goto fail;
  }
  rc = sqlite3_open_v2(
      path, &s->db,
      SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE | SQLITE_OPEN_NOMUTEX, NULL);
  if (rc != SQLITE_OK) {
    st = db_fault(s, p, "open", rc);
    goto fail;
  }
  sqlite3_extended_result_codes(s->db, 1);
  sqlite3_busy_timeout(s->db, FG_STORE_BUSY_MS);
  st = setup_schema(s, p);
  if (st != FG_OK) goto fail;
  for (int i = 0; i < ST_COUNT; i++) {
    rc = sqlite3_prepare_v3(s->db, stmt_sql[i], -1, SQLITE_PREPARE_PERSISTENT,
                            &s->stmt[i], NULL);
    if (rc != SQLITE_OK) {
      st = db_fault(s, p, "prepare", rc);
      goto fail;
    }
  }
  *out = s;
  return FG_OK;

fail:
  sq_close(s);
  return st;
}

static void sq_close(void *b) {
  sq_store *s = b;
  if (!s) return;
  for (int i = 0; i < ST_COUNT; i++)
    sqlite3_finalize(s->stmt[i]);
  if (s->db) sqlite3_close(s->db);
  if (s->lock_fd >= 0) close(s->lock_fd); /* releases the daemon's lock */
  pthread_mutex_destroy(&s->lock);
  free(s);
}

static fg_status sq_ping(void *b, fg_problem *p) {
  sq_store *s = b;
  pthread_mutex_lock(&s->lock);
  sqlite3_stmt *st = s->stmt[ST_PING];
  int rc = sqlite3_step(st);
  done_stmt(st);
  fg_status out = rc == SQLITE_ROW ? FG_OK : db_fault(s, p, "ping", rc);
  pthread_mutex_unlock(&s->lock);
  return out;
}

/* ---- versions ---- */

/* Read the version row of ST_VERSION_GET / ST_MODELS_LIST into *out. */
static bool read_version_row(sqlite3_stmt *st, fg_store_version *out,
                             bool with_document) {
  memset(out, 0, sizeof *out);
  copy_text(out->name, sizeof out->name, st, 0);
  out->version = sqlite3_column_int(st, 1);
  copy_text(out->digest, sizeof out->digest, st, 2);
  copy_text(out->created_at, sizeof out->created_at, st, 3);
  out->title = dup_text(st, 4);
  if (sqlite3_column_type(st, 4) != SQLITE_NULL && !out->title) return false;
  if (with_document) {
    out->document = dup_text(st, 5);
    if (!out->document) return false;
    out->retired = sqlite3_column_int(st, 6) != 0;
  }
  return true;
}

/* The version row (name, version) inside the current lock. */
static fg_status get_version_locked(sq_store *s, const char *name, int version,
                                    fg_store_version *out, fg_problem *p) {
  sqlite3_stmt *st = s->stmt[ST_VERSION_GET];
  bind_text(st, 1, name);
  sqlite3_bind_int(st, 2, version);
  int rc = sqlite3_step(st);
  fg_status res = FG_OK;
  if (rc == SQLITE_ROW) {
    if (!read_version_row(st, out, true)) {
      fg_store_version_clear(out);
      res =
          fg_problem_set(p, FG_ENOMEM, "store: out of memory reading %s", name);
    }
  } else if (rc == SQLITE_DONE) {
    if (version > 0)
      res = fg_problem_set(p, FG_ENOTFOUND, "model '%s' has no version %d",
                           name, version);
    else
      res = fg_problem_set(p, FG_ENOTFOUND, "no model named '%s'", name);
  } else {
    res = db_fault(s, p, "reading a model version", rc);
  }
  done_stmt(st);
  return res;
}

static fg_status sq_put_version(void *b, const char *name, const char *digest,
                                const char *canonical, const char *title,
                                fg_store_version *out, bool *created,
                                fg_problem *p) {
  sq_store *s = b;
  memset(out, 0, sizeof *out);
  *created = false;
  char now[32];
  fg_store_now_rfc3339(now);
  fg_status res = lock_tx(s, "register model", p);
  if (res != FG_OK) return res;
  int rc;
  /* Latest version and its digest. */
  sqlite3_stmt *st = s->stmt[ST_LATEST];
  bind_text(st, 1, name);
  int latest = 0;
  bool same = false;
  rc = sqlite3_step(st);
  if (rc == SQLITE_ROW) {
    latest = sqlite3_column_int(st, 0);
    const unsigned char *d = sqlite3_column_text(st, 1);
    same = d && strcmp((const char *)d, digest) == 0;
    rc = SQLITE_OK;
  } else if (rc == SQLITE_DONE) {
    rc = SQLITE_OK;
  }
  done_stmt(st);
  if (rc != SQLITE_OK) {
    res = db_fault(s, p, "reading the latest version", rc);
    goto end;
  }
  /* The upsert revives a retired name, also when the document is the same
   * as its latest version. */
  st = s->stmt[ST_MODEL_UPSERT];
  bind_text(st, 1, name);
  bind_text(st, 2, now);
  rc = write_step(s, st);
  if (rc != SQLITE_OK) {
    res = db_fault(s, p, "writing the model", rc);
    goto end;
  }
  if (!same) {
    st = s->stmt[ST_VERSION_INSERT];
    bind_text(st, 1, name);
    sqlite3_bind_int(st, 2, latest + 1);
    bind_text(st, 3, digest);
    bind_text(st, 4, canonical);
    bind_text(st, 5, title);
    bind_text(st, 6, now);
    rc = write_step(s, st);
    if (rc != SQLITE_OK) {
      res = db_fault(s, p, "writing the version", rc);
      goto end;
    }
  }
  res = get_version_locked(s, name, same ? latest : latest + 1, out, p);
end:
  res = tx_end(s, res, "commit (register model)", p);
  if (res == FG_OK)
    *created = !same;
  else
    fg_store_version_clear(out);
  return unlock_with(s, res);
}

static fg_status sq_get_version(void *b, const char *name, int version,
                                fg_store_version *out, fg_problem *p) {
  sq_store *s = b;
  memset(out, 0, sizeof *out);
  pthread_mutex_lock(&s->lock);
  fg_status res = get_version_locked(s, name, version, out, p);
  pthread_mutex_unlock(&s->lock);
  return res;
}

static fg_status sq_list_models(void *b, fg_store_version **out, int *n,
                                fg_problem *p) {
  sq_store *s = b;
  *out = NULL;
  *n = 0;
  fg_store_version *arr = NULL;
  int count = 0, cap = 0;
  fg_status res = FG_OK;
  pthread_mutex_lock(&s->lock);
  sqlite3_stmt *st = s->stmt[ST_MODELS_LIST];
  int rc;
  while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
    if (count == cap) {
      int ncap = cap ? cap * 2 : 16;
      fg_store_version *grown = realloc(arr, (size_t)ncap * sizeof *arr);
      if (!grown) {
        res = fg_problem_set(p, FG_ENOMEM,
                             "store: out of memory listing "
                             "models");
        break;
      }
      arr = grown;
      cap = ncap;
    }
    if (!read_version_row(st, &arr[count++], false)) {
      res = fg_problem_set(p, FG_ENOMEM, "store: out of memory listing models");
      break;
    }
  }
  if (res == FG_OK && rc != SQLITE_DONE)
    res = db_fault(s, p, "listing models", rc);
  done_stmt(st);
  pthread_mutex_unlock(&s->lock);
  if (res != FG_OK) {
    fg_store_versions_free(arr, count);
    return res;
  }
  *out = arr;
  *n = count;
  return FG_OK;
}

static fg_status sq_retire_model(void *b, const char *name, fg_problem *p) {
  sq_store *s = b;
  fg_status res = lock_tx(s, "retire model", p);
  if (res != FG_OK) return res;
  sqlite3_stmt *st = s->stmt[ST_RETIRE];
  bind_text(st, 1, name);
  int rc = write_step(s, st);
  /* Rows matched, also when already retired: retiring twice is no error. */
  if (rc != SQLITE_OK)
    res = db_fault(s, p, "retiring a model", rc);
  else if (sqlite3_changes(s->db) == 0)
    res = fg_problem_set(p, FG_ENOTFOUND, "no model named '%s'", name);
  return unlock_with(s, tx_end(s, res, "commit (retire model)", p));
}

/* ---- checks ---- */

/* Columns CHECK_COLUMNS (0..15) into *out. */
static void read_check_row(sqlite3_stmt *st, fg_store_check *out) {
  memset(out, 0, sizeof *out);
  copy_text(out->id, sizeof out->id, st, 0);
  copy_text(out->model, sizeof out->model, st, 1);
  out->version = sqlite3_column_int(st, 2);
  copy_text(out->digest, sizeof out->digest, st, 3);
  copy_text(out->status, sizeof out->status, st, 4);
  copy_text(out->verdict, sizeof out->verdict, st, 5);
  out->seed = (uint64_t)sqlite3_column_int64(st, 6);
  copy_text(out->created_at, sizeof out->created_at, st, 7);
  copy_text(out->finished_at, sizeof out->finished_at, st, 8);
  out->elapsed_ms = column_real(st, 9);
  copy_text(out->label, sizeof out->label, st, 10);
  copy_text(out->key, sizeof out->key, st, 11);
  out->probability = column_real(st, 12);
  out->lower = column_real(st, 13);
  out->upper = column_real(st, 14);
  copy_text(out->replay_of, sizeof out->replay_of, st, 15);
}

/* Run one write statement (already bound) in its own transaction. When
 * `must_change` is set, no row changed is FG_ENOTFOUND. */
static fg_status write_one(sq_store *s, sqlite3_stmt *st, const char *what,
                           const char *id, bool must_change, fg_problem *p) {
  fg_status res = FG_OK;
  int rc = tx_begin(s);
  if (rc != SQLITE_OK) {
    done_stmt(st);
    return db_fault(s, p, what, rc);
  }
  rc = write_step(s, st);
  if (rc != SQLITE_OK) {
    if ((rc & 0xff) == SQLITE_CONSTRAINT)
      res = fg_problem_set(p, FG_ECONFLICT, "store %s %s: %s", what, id,
                           sqlite3_errmsg(s->db));
    else
      res = db_fault(s, p, what, rc);
  } else if (must_change && sqlite3_changes(s->db) == 0) {
    res = fg_problem_set(p, FG_ENOTFOUND, "no check with id '%s'", id);
  }
  return tx_end(s, res, what, p);
}

static fg_status sq_put_check(void *b, const fg_store_check *c, fg_problem *p) {
  sq_store *s = b;
  pthread_mutex_lock(&s->lock);
  sqlite3_stmt *st = s->stmt[ST_CHECK_INSERT];
  bind_text(st, 1, c->id);
  bind_text(st, 2, c->model);
  sqlite3_bind_int(st, 3, c->version);
  bind_text(st, 4, c->digest);
  bind_text(st, 5, c->status[0] ? c->status : "running");
  bind_text(st, 6, c->verdict);
  sqlite3_bind_int64(st, 7, (sqlite3_int64)c->seed);
  bind_text(st, 8, c->created_at);
  bind_text(st, 9, c->finished_at);
  bind_real(st, 10, c->elapsed_ms);
  bind_text(st, 11, c->label);
  bind_text(st, 12, c->key);
  bind_real(st, 13, c->probability);
  bind_real(st, 14, c->lower);
  bind_real(st, 15, c->upper);
  bind_text(st, 16, c->request ? c->request : "{}");
  bind_text(st, 17, c->result);
  bind_text(st, 18, c->replay_of);
  fg_status res = write_one(s, st, "recording check", c->id, false, p);
  pthread_mutex_unlock(&s->lock);
  return res;
}

static fg_status sq_finish_check(void *b, const fg_store_check *c,
                                 fg_problem *p) {
  sq_store *s = b;
  pthread_mutex_lock(&s->lock);
  sqlite3_stmt *st = s->stmt[ST_CHECK_FINISH];
  bind_text(st, 1, c->id);
  bind_text(st, 2, c->status);
  bind_text(st, 3, c->verdict);
  bind_text(st, 4, c->finished_at);
  bind_real(st, 5, c->elapsed_ms);
  bind_real(st, 6, c->probability);
  bind_real(st, 7, c->lower);
  bind_real(st, 8, c->upper);
  bind_text(st, 9, c->result);
  fg_status res = write_one(s, st, "finishing check", c->id, true, p);
  pthread_mutex_unlock(&s->lock);
  return res;
}

static fg_status sq_get_check(void *b, const char *id, fg_store_check *out,
                              fg_problem *p) {
  sq_store *s = b;
  memset(out, 0, sizeof *out);
  pthread_mutex_lock(&s->lock);
  sqlite3_stmt *st = s->stmt[ST_CHECK_GET];
  bind_text(st, 1, id);
  fg_status res = FG_OK;
  int rc = sqlite3_step(st);
  if (rc == SQLITE_ROW) {
    read_check_row(st, out);
    out->request = dup_text(st, 16);
    out->result = dup_text(st, 17);
    if (!out->request ||
        (sqlite3_column_type(st, 17) != SQLITE_NULL && !out->result)) {
      fg_store_check_clear(out);
      res = fg_problem_set(p, FG_ENOMEM, "store: out of memory reading %s", id);
    }
  } else if (rc == SQLITE_DONE) {
    res = fg_problem_set(p, FG_ENOTFOUND, "no check with id '%s'", id);
  } else {
    res = db_fault(s, p, "reading a check", rc);
  }
  done_stmt(st);
  pthread_mutex_unlock(&s->lock);
  return res;
}

static fg_status sq_note_progress(void *b, const char *id, const char *body,
                                  fg_problem *p) {
  sq_store *s = b;
  pthread_mutex_lock(&s->lock);
  sqlite3_stmt *st = s->stmt[ST_CHECK_PROGRESS];
  bind_text(st, 1, id);
  bind_text(st, 2, body);
  fg_status res = write_one(s, st, "noting progress of check", id, false, p);
  pthread_mutex_unlock(&s->lock);
  return res;
}

static fg_status sq_list_checks(void *b, const fg_check_filter *f,
                                fg_store_check **out, int *n, fg_problem *p) {
  sq_store *s = b;
  const int limit = f->limit;
  fg_store_check *arr = calloc((size_t)limit + 1, sizeof *arr);
  if (!arr) return fg_problem_set(p, FG_ENOMEM, "store: out of memory");

  fg_status res = FG_OK;
  int count = 0, rc;
  pthread_mutex_lock(&s->lock);
  char cursor_time[32] = "";
  if (f->after && f->after[0]) {
    sqlite3_stmt *cs = s->stmt[ST_CHECK_CURSOR];
    bind_text(cs, 1, f->after);
    rc = sqlite3_step(cs);
    if (rc == SQLITE_ROW)
      copy_text(cursor_time, sizeof cursor_time, cs, 0);
    else if (rc == SQLITE_DONE)
      res =
          fg_problem_set(p, FG_EINVAL, "cursor '%s' names no check", f->after);
    else
      res = db_fault(s, p, "reading the list cursor", rc);
    done_stmt(cs);
  }
  if (res == FG_OK) {
    sqlite3_stmt *st = s->stmt[ST_CHECKS_LIST];
    bind_filter(st, 1, f->model);
    bind_filter(st, 2, f->verdict);
    bind_filter(st, 3, f->since);
    bind_filter(st, 4, f->label);
    bind_filter(st, 5, cursor_time);
    bind_filter(st, 6, f->after);
    sqlite3_bind_int(st, 7, limit + 1); /* one more tells if more remain */
    bind_filter(st, 8, f->key);
    while ((rc = sqlite3_step(st)) == SQLITE_ROW)
      read_check_row(st, &arr[count++]);
    if (rc != SQLITE_DONE) res = db_fault(s, p, "listing checks", rc);
    done_stmt(st);
  }
  pthread_mutex_unlock(&s->lock);
  if (res != FG_OK) {
    fg_store_checks_free(arr, count);
    return res;
  }
  *out = arr;
  *n = count;
  return FG_OK;
}

/* The daemon's claim on the file: a write lock (fcntl, whole file) on
 * <path>.lock, which holds the daemon's pid as text for people. The
 * kernel drops the lock when the process ends however it ends, so a
 * crashed daemon never blocks the next. A second claim from the same
 * store is a no-op. FG_EBUSY naming the holder's pid (F_GETLK) when
 * another process holds it. */
static fg_status claim_file(sq_store *s, fg_problem *p) {
  if (s->lock_fd >= 0 || strcmp(s->path, ":memory:") == 0) return FG_OK;
  char lpath[FG_STORE_PATH_MAX + 8];
  snprintf(lpath, sizeof lpath, "%s.lock", s->path);
  int fd = open(lpath, O_RDWR | O_CREAT | O_CLOEXEC, 0644);
  if (fd < 0)
    return fg_problem_set(p, FG_EIO, "store %s: cannot open its lock file %s: %s",
                          s->path, lpath, strerror(errno));
  struct flock fl = {.l_type = F_WRLCK, .l_whence = SEEK_SET};
  if (fcntl(fd, F_SETLK, &fl) != 0) {
    int err = errno;
    struct flock who = {.l_type = F_WRLCK, .l_whence = SEEK_SET};
    long pid = fcntl(fd, F_GETLK, &who) == 0 && who.l_type != F_UNLCK
                   ? (long)who.l_pid
                   : -1;
    close(fd);
    if (err != EACCES && err != EAGAIN)
      return fg_problem_set(p, FG_EIO, "store %s: cannot lock %s: %s", s->path,
                            lpath, strerror(err));
    return fg_problem_set(p, FG_EBUSY,
                          "store %s is served by another process (pid %ld "
                          "holds the lock on %s): one daemon per SQLite "
                          "file; stop it first, or use a PostgreSQL store "
                          "for several replicas",
                          s->path, pid, lpath);
  }
  char pid[32];
  int n = snprintf(pid, sizeof pid, "%ld\n", (long)getpid());
  if (ftruncate(fd, 0) != 0 || pwrite(fd, pid, (size_t)n, 0) != n) {
    /* the lock is what counts; the text is only a courtesy */
  }
  s->lock_fd = fd;
  return FG_OK;
}

static fg_status sq_mark_interrupted(void *b, int *count, fg_problem *p) {
  sq_store *s = b;
  *count = 0;
  /* Only the file's one daemon may call running checks interrupted: a
   * second daemon stops here, before it touches a check. */
  fg_status claimed = claim_file(s, p);
  if (claimed != FG_OK) return claimed;
  char now[32];
  fg_store_now_rfc3339(now);
  pthread_mutex_lock(&s->lock);
  fg_status res = FG_OK;
  int rc = tx_begin(s);
  if (rc == SQLITE_OK) {
    sqlite3_stmt *st = s->stmt[ST_MARK_INTERRUPTED];
    bind_text(st, 1, now);
    rc = write_step(s, st);
    if (rc == SQLITE_OK) *count = sqlite3_changes(s->db);
  }
  if (rc == SQLITE_OK) { /* comparisons left running end with them */
    sqlite3_stmt *st = s->stmt[ST_MARK_CMP_INTERRUPTED];
    bind_text(st, 1, now);
    rc = write_step(s, st);
  }
  if (rc != SQLITE_OK) res = db_fault(s, p, "marking interrupted checks", rc);
  res = tx_end(s, res, "marking interrupted checks", p);
  if (res != FG_OK) *count = 0;
  return unlock_with(s, res);
}

/* ---- comparisons ---- */

static fg_status sq_put_comparison(void *b, const fg_store_comparison *c,
                                   fg_problem *p) {
  sq_store *s = b;
  pthread_mutex_lock(&s->lock);
  sqlite3_stmt *st = s->stmt[ST_CMP_INSERT];
  bind_text(st, 1, c->id);
  bind_text(st, 2, c->model);
  sqlite3_bind_int(st, 3, c->version);
  bind_text(st, 4, c->digest);
  bind_text(st, 5, c->status[0] ? c->status : "running");
  bind_text(st, 6, c->created_at);
  bind_text(st, 7, c->finished_at);
  bind_text(st, 8, c->key);
  bind_text(st, 9, c->checks ? c->checks : "[]");
  bind_text(st, 10, c->result);
  fg_status res = write_one(s, st, "recording comparison", c->id, false, p);
  pthread_mutex_unlock(&s->lock);
  return res;
}

static fg_status sq_finish_comparison(void *b, const fg_store_comparison *c,
                                      fg_problem *p) {
  sq_store *s = b;
  pthread_mutex_lock(&s->lock);
  sqlite3_stmt *st = s->stmt[ST_CMP_FINISH];
  bind_text(st, 1, c->id);
  bind_text(st, 2, c->status);
  bind_text(st, 3, c->finished_at);
  bind_text(st, 4, c->result);
  fg_status res = write_one(s, st, "finishing comparison", c->id, true, p);
  if (res == FG_ENOTFOUND)
    fg_problem_set(p, FG_ENOTFOUND, "no comparison with id '%s'", c->id);
  pthread_mutex_unlock(&s->lock);
  return res;
}

static fg_status sq_get_comparison(void *b, const char *id,
                                   fg_store_comparison *out, fg_problem *p) {
  sq_store *s = b;
  memset(out, 0, sizeof *out);
  pthread_mutex_lock(&s->lock);
  sqlite3_stmt *st = s->stmt[ST_CMP_GET];
  bind_text(st, 1, id);
  fg_status res = FG_OK;
  int rc = sqlite3_step(st);
  if (rc == SQLITE_ROW) {
    copy_text(out->id, sizeof out->id, st, 0);
    copy_text(out->model, sizeof out->model, st, 1);
    out->version = sqlite3_column_int(st, 2);
    copy_text(out->digest, sizeof out->digest, st, 3);
    copy_text(out->status, sizeof out->status, st, 4);
    copy_text(out->created_at, sizeof out->created_at, st, 5);
    copy_text(out->finished_at, sizeof out->finished_at, st, 6);
    copy_text(out->key, sizeof out->key, st, 7);
    out->checks = dup_text(st, 8);
    out->result = dup_text(st, 9);
    if (!out->checks ||
        (sqlite3_column_type(st, 9) != SQLITE_NULL && !out->result)) {
      fg_store_comparison_clear(out);
      res = fg_problem_set(p, FG_ENOMEM, "store: out of memory reading %s", id);
    }
  } else if (rc == SQLITE_DONE) {
    res = fg_problem_set(p, FG_ENOTFOUND, "no comparison with id '%s'", id);
  } else {
    res = db_fault(s, p, "reading a comparison", rc);
  }
  done_stmt(st);
  pthread_mutex_unlock(&s->lock);
  return res;
}

static void sq_inject_write_fault(void *b, int nth) {
  sq_store *s = b;
  pthread_mutex_lock(&s->lock);
  s->fail_countdown = nth > 0 ? nth : 0;
  pthread_mutex_unlock(&s->lock);
}

/* ---- keys ---- */

static fg_status sq_put_key(void *b, const fg_store_key *k, fg_problem *p) {
  sq_store *s = b;
  const char *now = k->created_at; /* store.c fills it when empty */
  fg_status res = lock_tx(s, "add key", p);
  if (res != FG_OK) return res;
  sqlite3_stmt *st = s->stmt[ST_KEY_EXISTS];
  bind_text(st, 1, k->name);
  int rc = sqlite3_step(st);
  done_stmt(st);
  if (rc == SQLITE_ROW) {
    res = fg_problem_set(p, FG_ECONFLICT,
                         "a key named '%s' exists already; names are never "
                         "reused, also after revocation",
                         k->name);
    goto end;
  }
  if (rc != SQLITE_DONE) {
    res = db_fault(s, p, "looking up a key", rc);
    goto end;
  }
  st = s->stmt[ST_KEY_INSERT];
  bind_text(st, 1, k->name);
  bind_text(st, 2, k->role);
  sqlite3_bind_blob(st, 3, k->salt, FG_STORE_KEY_SALT, SQLITE_TRANSIENT);
  sqlite3_bind_blob(st, 4, k->hash, FG_STORE_KEY_HASH, SQLITE_TRANSIENT);
  bind_text(st, 5, now);
  rc = write_step(s, st);
  if (rc != SQLITE_OK) res = db_fault(s, p, "writing a key", rc);
end:
  return unlock_with(s, tx_end(s, res, "commit (add key)", p));
}

/* A blob column into a fixed buffer; false when its size is not `n`. */
static bool copy_blob(uint8_t *dst, size_t n, sqlite3_stmt *st, int col) {
  const void *b = sqlite3_column_blob(st, col);
  if (!b || (size_t)sqlite3_column_bytes(st, col) != n) return false;
  memcpy(dst, b, n);
  return true;
}

static fg_status sq_list_keys(void *b, bool live_only, fg_store_key **out,
                              int *n, fg_problem *p) {
  sq_store *s = b;
  *out = NULL;
  *n = 0;
  fg_store_key *arr = NULL;
  int count = 0, cap = 0, rc;
  fg_status res = FG_OK;
  pthread_mutex_lock(&s->lock);
  sqlite3_stmt *st = s->stmt[ST_KEYS_LIST];
  sqlite3_bind_int(st, 1, live_only ? 1 : 0);
  while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
    if (count == cap) {
      int ncap = cap ? cap * 2 : 16;
      fg_store_key *grown = realloc(arr, (size_t)ncap * sizeof *arr);
      if (!grown) {
        res = fg_problem_set(p, FG_ENOMEM, "store: out of memory listing keys");
        break;
      }
      arr = grown;
      cap = ncap;
    }
    fg_store_key *k = &arr[count];
    memset(k, 0, sizeof *k);
    copy_text(k->name, sizeof k->name, st, 0);
    copy_text(k->role, sizeof k->role, st, 1);
    copy_text(k->created_at, sizeof k->created_at, st, 4);
    copy_text(k->revoked_at, sizeof k->revoked_at, st, 5);
    if (!copy_blob(k->salt, sizeof k->salt, st, 2) ||
        !copy_blob(k->hash, sizeof k->hash, st, 3)) {
      /* A damaged row (salt or hash of the wrong size) can match no key:
       * it is left out, so it neither lets anyone in nor counts as live. */
      continue;
    }
    count++;
  }
  if (res == FG_OK && rc != SQLITE_DONE)
    res = db_fault(s, p, "listing keys", rc);
  done_stmt(st);
  pthread_mutex_unlock(&s->lock);
  if (res != FG_OK) {
    free(arr);
    return res;
  }
  *out = arr;
  *n = count;
  return FG_OK;
}

static fg_status sq_revoke_key(void *b, const char *name, fg_problem *p) {
  sq_store *s = b;
  char now[32];
  fg_store_now_rfc3339(now);
  fg_status res = lock_tx(s, "revoke key", p);
  if (res != FG_OK) return res;
  sqlite3_stmt *st = s->stmt[ST_KEY_REVOKE];
  bind_text(st, 1, name);
  bind_text(st, 2, now);
  int rc = write_step(s, st);
  if (rc != SQLITE_OK) {
    res = db_fault(s, p, "revoking a key", rc);
    goto end;
  }
  if (sqlite3_changes(s->db) == 0) {
    st = s->stmt[ST_KEY_EXISTS];
    bind_text(st, 1, name);
    rc = sqlite3_step(st);
    done_stmt(st);
    if (rc == SQLITE_ROW)
      res =
          fg_problem_set(p, FG_ECONFLICT, "key '%s' is revoked already", name);
    else if (rc == SQLITE_DONE)
      res = fg_problem_set(p, FG_ENOTFOUND, "no key named '%s'", name);
    else
      res = db_fault(s, p, "looking up a key", rc);
  }
end:
  return unlock_with(s, tx_end(s, res, "commit (revoke key)", p));
}

const fg_store_ops fg_store_sqlite_ops = {
    .scheme = "sqlite",
    .shared = false,
    .open = sq_open,
    .close = sq_close,
    .ping = sq_ping,
    .put_version = sq_put_version,
    .get_version = sq_get_version,
    .list_models = sq_list_models,
    .retire_model = sq_retire_model,
    .put_check = sq_put_check,
    .finish_check = sq_finish_check,
    .get_check = sq_get_check,
    .note_progress = sq_note_progress,
    .list_checks = sq_list_checks,
    .mark_interrupted = sq_mark_interrupted,
    .put_comparison = sq_put_comparison,
    .finish_comparison = sq_finish_comparison,
    .get_comparison = sq_get_comparison,
    .inject_write_fault = sq_inject_write_fault,
    .put_key = sq_put_key,
    .list_keys = sq_list_keys,
    .revoke_key = sq_revoke_key,
};
