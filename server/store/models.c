/*
 * store/models.c -- model versions: register, read, list, retire.
 *
 * Rules
 *   - Versions count 1, 2, ... per name. Registering the digest of the
 *     latest version again changes nothing and answers that version
 *     (created = false); any other digest adds version latest + 1.
 *   - The model row is upserted before the latest version is read, inside
 *     the same transaction: on PostgreSQL that locks the row, so two
 *     replicas registering one name at once take turns and count versions
 *     without a gap or a duplicate (SQLite's BEGIN IMMEDIATE already lets
 *     one writer in at a time). The upsert also revives a retired name,
 *     also when the document is the same as its latest version.
 *   - Retiring hides a model from the list; its versions stay readable and
 *     retiring twice is no error (rows matched, not rows changed).
 *
 * Thread use: any thread (db.h).
 */
#include "store/db.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define VERSION_COL(kind, member) FG_DB_COLUMN(kind, fg_store_version, member)
/* SQL_VERSION_GET's columns; SQL_MODELS_LIST has the first five. */
static const fg_db_column version_columns[] = {
    VERSION_COL(FG_DB_TEXT, name),         VERSION_COL(FG_DB_INT, version),
    VERSION_COL(FG_DB_TEXT, digest),       VERSION_COL(FG_DB_TEXT, created_at),
    VERSION_COL(FG_DB_DUP, title),         VERSION_COL(FG_DB_DUP_SET, document),
    VERSION_COL(FG_DB_FLAG, retired)};
enum { VERSION_LISTED = 5 };
#undef VERSION_COL

/* A row of SQL_VERSION_GET (with document and retired) or SQL_MODELS_LIST
 * into *out; false when out of memory. */
static bool read_version_row(fg_conn *c, fg_store_version *out,
                             bool with_document) {
  memset(out, 0, sizeof *out);
  return fg_db_read_columns(c, version_columns,
                            with_document ? FG_DB_NCOLS(version_columns)
                                          : VERSION_LISTED,
                            out);
}

static bool read_version_full(fg_conn *c, void *out) {
  if (read_version_row(c, out, true)) return true;
  fg_store_version_clear(out);
  return false;
}

/* Version `version` of `name` (0 = latest) on a connection held. */
static fg_status read_version(fg_conn *c, const char *name, int version,
                              fg_store_version *out, fg_problem *p) {
  char missing[FG_NAME_MAX + 64];
  if (version > 0)
    snprintf(missing, sizeof missing, "model '%%s' has no version %d", version);
  else
    snprintf(missing, sizeof missing, "no model named '%%s'");
  fg_arg a[] = {fg_text(name), fg_int(version)};
  return fg_db_read_one(c, SQL_VERSION_GET, FG_ARGS(a),
                        "reading a model version", missing, name,
                        read_version_full, out, p);
}

fg_status fg_store_put_version(fg_store *s, const char *name,
                               const char *digest, const char *canonical,
                               const char *title, fg_store_version *out,
                               bool *created, fg_problem *p) {
  memset(out, 0, sizeof *out);
  *created = false;
  char now[32];
  fg_store_now_rfc3339(now);
  fg_conn *c;
  fg_status res = fg_db_enter_tx(s, &c, "register model", p);
  if (res != FG_OK) return res;
  fg_arg upsert[] = {fg_text(name), fg_text(now)};
  res = fg_db_write(s, c, SQL_MODEL_UPSERT, FG_ARGS(upsert),
                    "writing the model", NULL, p);
  /* the latest version and its digest */
  int latest = 0;
  bool same = false, row = false;
  if (res == FG_OK) {
    fg_arg a[] = {fg_text(name)};
    res = fg_db_first(c, SQL_LATEST, FG_ARGS(a), "reading the latest version",
                      &row, p);
    if (res == FG_OK && row) {
      latest = (int)fg_db_int(c, 0);
      const char *d = c->b->text(c, 1);
      same = d && strcmp(d, digest) == 0;
    }
    fg_db_done(c);
  }
  if (res == FG_OK && !same) {
    fg_arg a[] = {fg_text(name),      fg_int(latest + 1), fg_text(digest),
                  fg_text(canonical), fg_text(title),     fg_text(now)};
    res = fg_db_write(s, c, SQL_VERSION_INSERT, FG_ARGS(a),
                      "writing the version", NULL, p);
  }
  if (res == FG_OK)
    res = read_version(c, name, same ? latest : latest + 1, out, p);
  res = fg_db_end_tx(c, res, "commit (register model)", p);
  fg_db_leave(c);
  if (res == FG_OK)
    *created = !same;
  else
    fg_store_version_clear(out);
  return res;
}

fg_status fg_store_get_version(fg_store *s, const char *name, int version,
                               fg_store_version *out, fg_problem *p) {
  memset(out, 0, sizeof *out);
  if (version < 0)
    return fg_problem_set(p, FG_ENOTFOUND, "model '%s' has no version %d", name,
                          version);
  fg_conn *c;
  fg_status res = fg_db_enter(s, &c, p);
  if (res != FG_OK) return res;
  res = read_version(c, name, version, out, p);
  fg_db_leave(c);
  return res;
}

static int read_listed_version(fg_conn *c, void *elem) {
  return read_version_row(c, elem, false) ? 1 : -1;
}

fg_status fg_store_list_models(fg_store *s, fg_store_version **out, int *n,
                               fg_problem *p) {
  *out = NULL;
  *n = 0;
  fg_conn *c;
  fg_status res = fg_db_enter(s, &c, p);
  if (res != FG_OK) return res;
  void *arr = NULL;
  int count = 0;
  res = fg_db_rows(c, SQL_MODELS_LIST, NULL, 0, "listing models", sizeof **out,
                   0, read_listed_version, &arr, &count, p);
  fg_db_leave(c);
  if (res != FG_OK) {
    fg_store_versions_free(arr, count);
    return res;
  }
  *out = arr;
  *n = count;
  return FG_OK;
}

fg_status fg_store_retire_model(fg_store *s, const char *name, fg_problem *p) {
  fg_conn *c;
  fg_status res = fg_db_enter(s, &c, p);
  if (res != FG_OK) return res;
  fg_arg a[] = {fg_text(name)};
  res = fg_db_write_alone(s, c, SQL_RETIRE, FG_ARGS(a), "retiring a model",
                          "no model named '%s'", name, p);
  fg_db_leave(c);
  return res;
}
