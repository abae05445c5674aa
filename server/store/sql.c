/*
 * store/sql.c -- every statement and the schema, written once for both
 * backends.
 *
 * Design: statements use ?N placeholders (PostgreSQL's backend turns them
 * into $N when it prepares) and only SQL both databases read: CAST(x AS
 * INTEGER) where a parameter's type must be stated (PostgreSQL infers the
 * others from the column they meet), true/false for flags (SQLite reads
 * them as 1/0). No SQL text is built at run time beyond the schema's
 * dialect words below; values always travel as parameters.
 *
 * Schema (SQLite writes schema_version 2, PostgreSQL 1; SQLite's version 1
 * lacked `keys`):
 *   models   (name PK, retired flag, created_at)
 *   versions (name -> models, version >= 1, digest, document, title,
 *             created_at; PK (name, version))
 *   checks   (id PK, (model, version) -> versions, digest, status, verdict,
 *             seed, request, result, created_at, finished_at, elapsed_ms,
 *             label, key, probability, lower, upper, replay_of = the id of
 *             the check it replays or ''; shared stores add owner (the
 *             instance running it) and cancel_requested)
 *   keys     (name PK, role, salt, hash = SHA-256(salt || key), created_at,
 *             revoked_at '' while live)
 *   comparisons (id PK, (model, version) -> versions, digest, status,
 *             created_at, finished_at, key, checks = JSON array of the
 *             candidates' check ids, result; shared stores add owner)
 *   instances (shared stores: id PK, host, pid, started_at, heartbeat_at
 *             on the database's clock)
 * Every CREATE is IF NOT EXISTS, so opening an older store adds what it
 * lacks; no existing row changes. Times are RFC 3339 text, so ordering and
 * cursors behave the same on both; NaN probabilities are NULL.
 *
 * Ordering of checks: newest first by (created_at, id). Ids are
 * time-sortable, so within one second of created_at the id decides. The
 * list cursor is the id of the last item seen; the next page holds the
 * checks strictly older than it in that order.
 *
 * Thread use: constant data and a pure function.
 */
#include "store/backend.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define CHECK_COLUMNS                                                          \
  "id, model, version, digest, status, verdict, seed, created_at,"             \
  " finished_at, elapsed_ms, label, key, probability, lower, upper,"           \
  " replay_of"

/* A shared store's inserts add the owner column as their last value. */
#define CHECK_INSERT(more_cols, more_vals)                                     \
  "INSERT INTO checks(id, model, version, digest, status, verdict, seed,"      \
  " created_at, finished_at, elapsed_ms, label, key, probability, lower,"      \
  " upper, request, result, replay_of" more_cols ") VALUES (?1, ?2, ?3, ?4,"   \
  " ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17, ?18" more_vals \
  ")"
#define CMP_INSERT(more_cols, more_vals)                                       \
  "INSERT INTO comparisons(id, model, version, digest, status, created_at,"    \
  " finished_at, key, checks, result" more_cols ") VALUES (?1, ?2, ?3, ?4,"    \
  " ?5, ?6, ?7, ?8, ?9, ?10" more_vals ")"
/* running rows of owners other than ?2 that have not beaten within ?3
 * seconds (or have no instance row at all) */
#define STALE_OWNER(table)                                                     \
  " WHERE status = 'running' AND owner <> ?2 AND NOT EXISTS (SELECT 1 FROM"    \
  " instances i WHERE i.id = " table ".owner AND i.heartbeat_at > now() -"     \
  " make_interval(secs => CAST(?3 AS INTEGER)))"

const char *const fg_sql_text[SQL_COUNT] = {
    [SQL_PING] = "SELECT count(*) FROM schema_version",
    [SQL_LATEST] = "SELECT version, digest FROM versions WHERE name = ?1"
                   " ORDER BY version DESC LIMIT 1",
    [SQL_MODEL_UPSERT] =
        "INSERT INTO models(name, retired, created_at) VALUES (?1, false, ?2)"
        " ON CONFLICT(name) DO UPDATE SET retired = false",
    [SQL_VERSION_INSERT] =
        "INSERT INTO versions(name, version, digest, document, title,"
        " created_at) VALUES (?1, ?2, ?3, ?4, ?5, ?6)",
    /* ?2 = 0 selects the latest version */
    [SQL_VERSION_GET] =
        "SELECT v.name, v.version, v.digest, v.created_at, v.title,"
        " v.document, CAST(m.retired AS INTEGER) FROM versions v JOIN models m"
        " ON m.name = v.name WHERE v.name = ?1 AND v.version = CASE WHEN"
        " CAST(?2 AS INTEGER) > 0 THEN CAST(?2 AS INTEGER) ELSE (SELECT"
        " MAX(version) FROM versions WHERE name = ?1) END",
    [SQL_MODELS_LIST] =
        "SELECT v.name, v.version, v.digest, v.created_at, v.title FROM"
        " versions v JOIN models m ON m.name = v.name WHERE NOT m.retired"
        " AND v.version = (SELECT MAX(version) FROM versions w WHERE w.name ="
        " v.name) ORDER BY v.name",
    [SQL_RETIRE] = "UPDATE models SET retired = true WHERE name = ?1",
    [SQL_CHECK_INSERT] = CHECK_INSERT("", ""),
    [SQL_CHECK_FINISH] =
        "UPDATE checks SET status = ?2, verdict = ?3, finished_at = ?4,"
        " elapsed_ms = ?5, probability = ?6, lower = ?7, upper = ?8,"
        " result = ?9 WHERE id = ?1",
    [SQL_CHECK_GET] = "SELECT " CHECK_COLUMNS ", request, result FROM checks"
                      " WHERE id = ?1",
    [SQL_CHECK_PROGRESS] = "UPDATE checks SET result = ?2 WHERE id = ?1"
                           " AND status = 'running'",
    [SQL_CHECK_CURSOR] = "SELECT created_at FROM checks WHERE id = ?1",
    /* filters are NULL when unused; ?5/?6 = cursor (created_at, id) */
    [SQL_CHECKS_LIST] = "SELECT " CHECK_COLUMNS " FROM checks"
                        " WHERE (CAST(?1 AS TEXT) IS NULL OR model = ?1)"
                        " AND (CAST(?2 AS TEXT) IS NULL OR verdict = ?2)"
                        " AND (CAST(?3 AS TEXT) IS NULL OR created_at >= ?3)"
                        " AND (CAST(?4 AS TEXT) IS NULL OR label = ?4)"
                        " AND (CAST(?5 AS TEXT) IS NULL OR created_at < ?5 OR"
                        " (created_at = ?5 AND id < ?6))"
                        " AND (CAST(?8 AS TEXT) IS NULL OR key = ?8)"
                        " ORDER BY created_at DESC, id DESC LIMIT ?7",
    [SQL_CMP_INSERT] = CMP_INSERT("", ""),
    [SQL_CMP_FINISH] = "UPDATE comparisons SET status = ?2, finished_at = ?3,"
                       " result = ?4 WHERE id = ?1",
    [SQL_CMP_GET] = "SELECT id, model, version, digest, status, created_at,"
                    " finished_at, key, checks, result FROM comparisons"
                    " WHERE id = ?1",
    [SQL_KEY_EXISTS] = "SELECT revoked_at FROM keys WHERE name = ?1",
    [SQL_KEY_INSERT] = "INSERT INTO keys(name, role, salt, hash, created_at)"
                       " VALUES (?1, ?2, ?3, ?4, ?5)",
    /* ?1 = 1: live keys only */
    [SQL_KEYS_LIST] = "SELECT name, role, salt, hash, created_at, revoked_at"
                      " FROM keys WHERE CAST(?1 AS INTEGER) = 0"
                      " OR revoked_at = '' ORDER BY name",
    [SQL_KEY_REVOKE] = "UPDATE keys SET revoked_at = ?2 WHERE name = ?1"
                       " AND revoked_at = ''",
    [SQL_MARK_RUNNING] =
        "UPDATE checks SET status = 'interrupted', finished_at = ?1,"
        " result = NULL WHERE status = 'running'",
    [SQL_MARK_CMP_RUNNING] =
        "UPDATE comparisons SET status = 'interrupted', finished_at = ?1"
        " WHERE status = 'running'",
    /* ---- shared stores only ---- */
    [SQL_CHECK_INSERT_OWNED] = CHECK_INSERT(", owner", ", ?19"),
    [SQL_CMP_INSERT_OWNED] = CMP_INSERT(", owner", ", ?11"),
    [SQL_CANCEL_ASK] = "UPDATE checks SET cancel_requested = true WHERE id ="
                       " ?1 AND status = 'running'",
    [SQL_CANCEL_STATUS] = "SELECT status FROM checks WHERE id = ?1",
    [SQL_CANCEL_ASKED] = "SELECT id FROM checks WHERE owner = ?1 AND"
                         " cancel_requested AND status = 'running'"
                         " ORDER BY id LIMIT ?2",
    [SQL_MARK_STALE] =
        "UPDATE checks SET status = 'interrupted', finished_at = ?1,"
        " result = NULL" STALE_OWNER("checks"),
    [SQL_MARK_CMP_STALE] = "UPDATE comparisons SET status = 'interrupted', "
                           "finished_at = ?1" STALE_OWNER("comparisons"),
    [SQL_INSTANCE_UPSERT] =
        "INSERT INTO instances(id, host, pid, started_at, heartbeat_at)"
        " VALUES (?1, ?2, ?3, ?4, now()) ON CONFLICT(id) DO UPDATE SET"
        " heartbeat_at = now()",
    [SQL_INSTANCE_BEAT] =
        "UPDATE instances SET heartbeat_at = now() WHERE id = ?1",
    [SQL_INSTANCE_PRUNE] = "DELETE FROM instances WHERE heartbeat_at < now()"
                           " - make_interval(secs => CAST(?1 AS INTEGER))",
    [SQL_INSTANCE_END] = "DELETE FROM instances WHERE id = ?1",
};

/* The tables of both stores; {word} slots are the dialect's (backend.h). */
static const char *const schema_template =
    "CREATE TABLE IF NOT EXISTS schema_version ("
    "  version INTEGER NOT NULL);"
    "CREATE TABLE IF NOT EXISTS models ("
    "  name TEXT PRIMARY KEY,"
    "  retired {flag},"
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
    "  seed {int64} NOT NULL,"
    "  request TEXT NOT NULL,"
    "  result TEXT,"
    "  created_at TEXT NOT NULL,"
    "  finished_at TEXT NOT NULL DEFAULT '',"
    "  elapsed_ms {real},"
    "  label TEXT NOT NULL DEFAULT '',"
    "  key TEXT NOT NULL DEFAULT '',"
    "  probability {real},"
    "  lower {real},"
    "  upper {real},"
    "  replay_of TEXT NOT NULL DEFAULT '',{check_shared}"
    "  FOREIGN KEY (model, version) REFERENCES versions(name, version));"
    "CREATE INDEX IF NOT EXISTS checks_by_time ON checks(created_at, id);"
    "CREATE INDEX IF NOT EXISTS checks_by_model ON checks(model, created_at);"
    "CREATE INDEX IF NOT EXISTS checks_by_status ON checks(status);"
    "CREATE TABLE IF NOT EXISTS keys ("
    "  name TEXT PRIMARY KEY,"
    "  role TEXT NOT NULL,"
    "  salt {bytes} NOT NULL,"
    "  hash {bytes} NOT NULL,"
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
    "  result TEXT,{cmp_shared}"
    "  FOREIGN KEY (model, version) REFERENCES versions(name, version));"
    "{tail}";

static const char *const word_names[FG_W_COUNT] = {
    [FG_W_FLAG] = "flag",
    [FG_W_INT64] = "int64",
    [FG_W_REAL] = "real",
    [FG_W_BYTES] = "bytes",
    [FG_W_CHECK_SHARED] = "check_shared",
    [FG_W_CMP_SHARED] = "cmp_shared",
    [FG_W_TAIL] = "tail",
};

/* The schema with the dialect's words filled in (malloc'd; NULL when out of
 * memory). Two passes: the length, then the text. */
static char *render_schema(const char *const *words) {
  char *out = NULL;
  for (int pass = 0; pass < 2; pass++) {
    size_t n = 0;
    for (const char *q = schema_template; *q;) {
      const char *w = NULL;
      size_t skip = 1;
      if (*q == '{') {
        for (int i = 0; i < FG_W_COUNT; i++) {
          size_t len = strlen(word_names[i]);
          if (strncmp(q + 1, word_names[i], len) == 0 && q[1 + len] == '}') {
            w = words[i] ? words[i] : "";
            skip = len + 2;
          }
        }
      }
      size_t len = w ? strlen(w) : 1;
      if (out) memcpy(out + n, w ? w : q, len);
      n += len;
      q += skip;
    }
    if (out) {
      out[n] = '\0';
      break;
    }
    out = malloc(n + 1);
    if (!out) return NULL;
  }
  return out;
}

fg_status fg_schema_setup(fg_conn *c, const char *where, fg_problem *p) {
  const fg_backend *b = c->b;
  char *schema = render_schema(b->words);
  if (!schema) return fg_problem_set(p, FG_ENOMEM, "store: out of memory");
  fg_status res = b->begin(c, "creating the schema", p);
  if (res != FG_OK) {
    free(schema);
    return res;
  }
  if (b->schema_lock) res = b->schema_lock(c, p);
  if (res == FG_OK) res = b->script(c, schema, "creating the schema", p);
  free(schema);
  if (res == FG_OK && b->upgrade) res = b->upgrade(c, p);
  /* one row in schema_version: inserted for a new store, raised for an
   * older one (the CREATEs above added what it lacked), a newer refused */
  long long have = -1;
  if (res == FG_OK)
    res = b->scalar(c, "SELECT MAX(version) FROM schema_version", &have,
                    "reading the schema version", p);
  if (res == FG_OK && have > b->schema_version)
    res = fg_problem_set(p, FG_EIO,
                         "store %s: schema version %lld is newer than this "
                         "build understands (%d)",
                         where, have, b->schema_version);
  char sql[96] = "";
  if (res == FG_OK && have < 0)
    snprintf(sql, sizeof sql, "INSERT INTO schema_version VALUES (%d)",
             b->schema_version);
  else if (res == FG_OK && have < b->schema_version)
    snprintf(sql, sizeof sql, "UPDATE schema_version SET version = %d",
             b->schema_version);
  if (sql[0]) res = b->script(c, sql, "writing the schema version", p);
  if (res == FG_OK) return b->commit(c, "creating the schema", p);
  b->rollback(c);
  return res;
}
