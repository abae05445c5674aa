/*
 * store/sqlite.c -- the SQLite backend ("sqlite:PATH"): connection,
 * transactions, statements and rows for the store's operations
 * (backend.h; the operations themselves are in models.c, checks.c,
 * keys.c, replicas.c).
 *
 * Design
 *   One connection per store, opened with SQLITE_OPEN_NOMUTEX and guarded
 *   by our own mutex: acquire takes it for the whole of one store call, so
 *   a read never sees half of a write and statements are never shared
 *   between two threads at once (one writer, one reader at a time). Every
 *   statement of sql.c is prepared once at open (persistent) and reset
 *   after use. Writes run inside BEGIN IMMEDIATE ... COMMIT, a lone write
 *   too (lone_write_atomic is false), so the write lock is taken up front.
 *
 *   One daemon per file: `claim`, which fg_store_mark_interrupted calls
 *   and only `serve` does, takes a write lock (fcntl) on <path>.lock and
 *   refuses with FG_EBUSY, naming the holder's pid, when another process
 *   holds it. Commands that only open the store take no lock.
 *
 *   The database runs in WAL mode with foreign keys on and a busy timeout
 *   (FG_SQLITE_BUSY_MS), so a second process reading the file (a CLI
 *   listing checks) does not block the daemon. The schema (sql.c) is made
 *   at open; schema_version 2 (1 lacked `keys`); a file made before
 *   checks.replay_of existed is given the column (old rows '').
 *
 * Errors: SQLite failures become FG_EIO (FG_EBUSY when the file stayed
 * locked past the busy timeout, FG_ENOMEM when SQLite ran out of memory,
 * FG_ECONFLICT for a constraint: duplicate id, unknown model version) with
 * a detail naming the operation and SQLite's message.
 *
 * Thread use: any thread; see the mutex above.
 */
#include "feasgate/limits.h"
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
#include <unistd.h>

enum { TX_BEGIN, TX_COMMIT, TX_ROLLBACK, TX_COUNT };
static const char *const tx_sql[TX_COUNT] = {"BEGIN IMMEDIATE", "COMMIT",
                                             "ROLLBACK"};

typedef struct sq_db {
  fg_conn base;         /* the one connection */
  pthread_mutex_t lock; /* held from acquire to release */
  sqlite3 *db;
  sqlite3_stmt *stmt[SQL_COUNT]; /* NULL: shared stores only */
  sqlite3_stmt *tx[TX_COUNT];
  sqlite3_stmt *cur; /* the query being read */
  const char *what;  /* its name, for a failure while stepping */
  char path[FG_SQLITE_PATH_MAX];
  int lock_fd; /* <path>.lock, write-locked by the serving daemon */
} sq_db;

static fg_status fault(sq_db *s, fg_problem *p, const char *what, int rc) {
  fg_status st = FG_EIO;
  int primary = rc & 0xff;
  if (primary == SQLITE_BUSY || primary == SQLITE_LOCKED) st = FG_EBUSY;
  if (primary == SQLITE_NOMEM) st = FG_ENOMEM;
  if (primary == SQLITE_CONSTRAINT) st = FG_ECONFLICT;
  return fg_problem_set(p, st, "store %s: %s (%s)", what,
                        s->db ? sqlite3_errmsg(s->db) : "no connection",
                        sqlite3_errstr(rc));
}

static fg_status acquire(void *b, fg_conn **c, fg_problem *p) {
  (void)p;
  sq_db *s = b;
  pthread_mutex_lock(&s->lock);
  *c = &s->base;
  return FG_OK;
}

static void release(fg_conn *c) {
  pthread_mutex_unlock(&((sq_db *)c)->lock);
}

/* Runs a statement that returns no rows, and resets it. */
static int step_done(sqlite3_stmt *st) {
  int rc = sqlite3_step(st);
  sqlite3_reset(st);
  sqlite3_clear_bindings(st);
  return rc == SQLITE_DONE || rc == SQLITE_ROW ? SQLITE_OK : rc;
}

static fg_status tx(fg_conn *c, int which, const char *what, fg_problem *p) {
  sq_db *s = (sq_db *)c;
  int rc = step_done(s->tx[which]);
  return rc == SQLITE_OK ? FG_OK : fault(s, p, what, rc);
}

static fg_status begin(fg_conn *c, const char *what, fg_problem *p) {
  return tx(c, TX_BEGIN, what, p);
}

static fg_status commit(fg_conn *c, const char *what, fg_problem *p) {
  return tx(c, TX_COMMIT, what, p);
}

static void rollback(fg_conn *c) {
  if (!sqlite3_get_autocommit(((sq_db *)c)->db))
    tx(c, TX_ROLLBACK, "rollback", NULL);
}

static sqlite3_stmt *bind(sq_db *s, fg_sql id, const fg_arg *a, int n) {
  sqlite3_stmt *st = s->stmt[id];
  for (int i = 0; st && i < n; i++) {
    switch (a[i].kind) {
    case FG_ARG_NULL: sqlite3_bind_null(st, i + 1); break;
    case FG_ARG_TEXT:
      sqlite3_bind_text(st, i + 1, a[i].text, -1, SQLITE_TRANSIENT);
      break;
    case FG_ARG_INT: sqlite3_bind_int64(st, i + 1, a[i].i); break;
    case FG_ARG_REAL: sqlite3_bind_double(st, i + 1, a[i].r); break;
    case FG_ARG_BYTES:
      sqlite3_bind_blob(st, i + 1, a[i].bytes, a[i].len, SQLITE_TRANSIENT);
      break;
    }
  }
  return st;
}

static fg_status exec(fg_conn *c, fg_sql id, const fg_arg *a, int n,
                      const char *what, long *changed, fg_problem *p) {
  sq_db *s = (sq_db *)c;
  sqlite3_stmt *st = bind(s, id, a, n);
  if (!st)
    return fg_problem_set(p, FG_EINTERNAL, "store %s: no statement", what);
  int rc = step_done(st);
  if (rc != SQLITE_OK) return fault(s, p, what, rc);
  if (changed) *changed = sqlite3_changes(s->db);
  return FG_OK;
}

static fg_status query(fg_conn *c, fg_sql id, const fg_arg *a, int n,
                       const char *what, fg_problem *p) {
  sq_db *s = (sq_db *)c;
  s->cur = bind(s, id, a, n);
  s->what = what;
  return s->cur
             ? FG_OK
             : fg_problem_set(p, FG_EINTERNAL, "store %s: no statement", what);
}

static fg_status next(fg_conn *c, bool *row, fg_problem *p) {
  sq_db *s = (sq_db *)c;
  int rc = sqlite3_step(s->cur);
  *row = rc == SQLITE_ROW;
  return rc == SQLITE_ROW || rc == SQLITE_DONE ? FG_OK
                                               : fault(s, p, s->what, rc);
}

static void done(fg_conn *c) {
  sq_db *s = (sq_db *)c;
  if (!s->cur) return;
  sqlite3_reset(s->cur);
  sqlite3_clear_bindings(s->cur);
  s->cur = NULL;
}

static const char *text(fg_conn *c, int col) {
  sqlite3_stmt *st = ((sq_db *)c)->cur;
  if (sqlite3_column_type(st, col) == SQLITE_NULL) return NULL;
  return (const char *)sqlite3_column_text(st, col);
}

static long long integer(fg_conn *c, int col) {
  return sqlite3_column_int64(((sq_db *)c)->cur, col);
}

static double real(fg_conn *c, int col) {
  sqlite3_stmt *st = ((sq_db *)c)->cur;
  if (sqlite3_column_type(st, col) == SQLITE_NULL) return NAN;
  return sqlite3_column_double(st, col);
}

static bool bytes(fg_conn *c, int col, uint8_t *dst, size_t n) {
  sqlite3_stmt *st = ((sq_db *)c)->cur;
  const void *b = sqlite3_column_blob(st, col);
  if (!b || (size_t)sqlite3_column_bytes(st, col) != n) return false;
  memcpy(dst, b, n);
  return true;
}

static fg_status script(fg_conn *c, const char *sql, const char *what,
                        fg_problem *p) {
  sq_db *s = (sq_db *)c;
  int rc = sqlite3_exec(s->db, sql, NULL, NULL, NULL);
  return rc == SQLITE_OK ? FG_OK : fault(s, p, what, rc);
}

static fg_status scalar(fg_conn *c, const char *sql, long long *out,
                        const char *what, fg_problem *p) {
  sq_db *s = (sq_db *)c;
  sqlite3_stmt *st = NULL;
  *out = -1;
  int rc = sqlite3_prepare_v2(s->db, sql, -1, &st, NULL);
  if (rc == SQLITE_OK) rc = sqlite3_step(st);
  if (rc == SQLITE_ROW && sqlite3_column_type(st, 0) != SQLITE_NULL)
    *out = sqlite3_column_int64(st, 0);
  sqlite3_finalize(st);
  return rc == SQLITE_ROW || rc == SQLITE_DONE ? FG_OK : fault(s, p, what, rc);
}

/* A file made before checks.replay_of existed: add the column (every old
 * row gets '', "not a replay"). SQLite has no ADD COLUMN IF NOT EXISTS. */
static fg_status upgrade(fg_conn *c, fg_problem *p) {
  long long has = 0;
  fg_status res = scalar(c,
                         "SELECT count(*) FROM pragma_table_info('checks')"
                         " WHERE name = 'replay_of'",
                         &has, "creating the schema", p);
  if (res == FG_OK && has <= 0)
    res = script(c,
                 "ALTER TABLE checks ADD COLUMN replay_of TEXT NOT NULL"
                 " DEFAULT ''",
                 "creating the schema", p);
  return res;
}

/* The daemon's claim on the file: a write lock (fcntl, whole file) on
 * <path>.lock, which holds the daemon's pid as text for people. The
 * kernel drops the lock when the process ends however it ends, so a
 * crashed daemon never blocks the next. A second claim from the same
 * store is a no-op. */
static fg_status claim(void *b, fg_problem *p) {
  sq_db *s = b;
  if (s->lock_fd >= 0 || strcmp(s->path, ":memory:") == 0) return FG_OK;
  char lpath[FG_SQLITE_PATH_MAX + 8];
  snprintf(lpath, sizeof lpath, "%s.lock", s->path);
  int fd = open(lpath, O_RDWR | O_CREAT | O_CLOEXEC, 0644);
  if (fd < 0)
    return fg_problem_set(p, FG_EIO,
                          "store %s: cannot open its lock file %s: %s", s->path,
                          lpath, strerror(errno));
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

/* mkdir -p of the folder holding `path`. */
static int make_parents(const char *path) {
  char buf[FG_SQLITE_PATH_MAX];
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

static void sq_close(void *b) {
  sq_db *s = b;
  if (!s) return;
  for (int i = 0; i < SQL_COUNT; i++)
    sqlite3_finalize(s->stmt[i]);
  for (int i = 0; i < TX_COUNT; i++)
    sqlite3_finalize(s->tx[i]);
  if (s->db) sqlite3_close(s->db);
  if (s->lock_fd >= 0) close(s->lock_fd); /* releases the daemon's lock */
  pthread_mutex_destroy(&s->lock);
  free(s);
}

static fg_status prepare(sq_db *s, const char *sql, sqlite3_stmt **st,
                         fg_problem *p) {
  int rc =
      sqlite3_prepare_v3(s->db, sql, -1, SQLITE_PREPARE_PERSISTENT, st, NULL);
  return rc == SQLITE_OK ? FG_OK : fault(s, p, "prepare", rc);
}

static fg_status sq_open(const char *url, void **out, fg_problem *p) {
  *out = NULL;
  if (!url || strncmp(url, "sqlite:", 7) != 0 || url[7] == '\0')
    return fg_problem_set(p, FG_EINVAL, "store URL '%s': expected sqlite:PATH",
                          url ? url : "(null)");
  const char *path = url + 7;
  if (strlen(path) >= FG_SQLITE_PATH_MAX)
    return fg_problem_set(p, FG_EINVAL, "store path longer than %d characters",
                          FG_SQLITE_PATH_MAX - 1);
  sq_db *s = calloc(1, sizeof *s);
  if (!s) return fg_problem_set(p, FG_ENOMEM, "store: out of memory");
  s->base.b = &fg_store_sqlite_backend;
  snprintf(s->path, sizeof s->path, "%s", path);
  s->lock_fd = -1;
  pthread_mutex_init(&s->lock, NULL);

  fg_status st = FG_OK;
  if (strcmp(path, ":memory:") != 0 && make_parents(path) != 0) {
    st = fg_problem_set(p, FG_EIO, "store %s: cannot create its folder: %s",
                        path, strerror(errno));
    goto fail;
  }
  int rc = sqlite3_open_v2(
      path, &s->db,
      SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE | SQLITE_OPEN_NOMUTEX, NULL);
  if (rc != SQLITE_OK) {
    st = fault(s, p, "open", rc);
    goto fail;
  }
  sqlite3_extended_result_codes(s->db, 1);
  sqlite3_busy_timeout(s->db, FG_SQLITE_BUSY_MS);
  st = script(&s->base,
              "PRAGMA journal_mode = WAL; PRAGMA foreign_keys = ON;"
              " PRAGMA synchronous = NORMAL;",
              "setting pragmas", p);
  for (int i = 0; st == FG_OK && i < TX_COUNT; i++)
    st = prepare(s, tx_sql[i], &s->tx[i], p);
  if (st == FG_OK) st = fg_schema_setup(&s->base, s->path, p);
  for (int i = 0; st == FG_OK && i < SQL_SHARED_FIRST; i++)
    st = prepare(s, fg_sql_text[i], &s->stmt[i], p);
  if (st != FG_OK) goto fail;
  *out = s;
  return FG_OK;

fail:
  sq_close(s);
  return st;
}

static const char *const words[FG_W_COUNT] = {
    [FG_W_FLAG] = "INTEGER NOT NULL DEFAULT 0",
    [FG_W_INT64] = "INTEGER",
    [FG_W_REAL] = "REAL",
    [FG_W_BYTES] = "BLOB",
    [FG_W_CHECK_SHARED] = "",
    [FG_W_CMP_SHARED] = "",
    [FG_W_TAIL] = "",
};

const fg_backend fg_store_sqlite_backend = {
    .scheme = "sqlite",
    .shared = false,
    .lone_write_atomic = false,
    .schema_version = 2,
    .words = words,
    .open = sq_open,
    .close = sq_close,
    FG_BACKEND_FUNCTIONS,
    .upgrade = upgrade,
    .claim = claim,
};
