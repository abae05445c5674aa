/*
 * store/store.h -- the one storage interface (prefix fg_store_).
 *
 * Backends (store.c picks one by the URL's scheme; each operation below is
 * written once, in models.c, checks.c, keys.c and replicas.c, over the
 * seam in backend.h):
 *   SQLite (sqlite.c, "sqlite:PATH", the embedded default; WAL, foreign
 *   keys on, every statement prepared, every write inside a transaction;
 *   one daemon per file);
 *   PostgreSQL (pgsql.c, "postgresql://..." or "postgres://...", libpq;
 *   shared by several daemons behind a load balancer, each registered as
 *   an instance with a heartbeat).
 *
 * What is kept:
 *   models    -- name, retired flag
 *   versions  -- (name, version) -> digest, canonical document, title,
 *                created_at; versions count 1, 2, ... per name
 *   checks    -- id, model name/version/digest, status, verdict, seed,
 *                request JSON, result JSON, created_at, finished_at,
 *                elapsed_ms, label, key name, joint probability and
 *                interval (for list summaries)
 *   keys      -- API keys: name, role, salt, SHA-256(salt || key),
 *                created_at, revoked_at; never the key itself
 *   comparisons -- id, model name/version/digest, status, key name, the
 *                candidates' check ids (JSON array), result JSON,
 *                created_at, finished_at (each candidate is also a check)
 *
 * Thread use: one fg_store may be used by several threads; each call holds
 * a connection of its own for its duration (SQLite: the one connection,
 * guarded by a mutex; PostgreSQL: one of a small pool).
 * Strings returned inside result structs are malloc'd and freed by the
 * matching _clear / _free function.
 */
#ifndef FG_STORE_H
#define FG_STORE_H

#include "feasgate/model.h"
#include "feasgate/status.h"

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

typedef struct fg_store fg_store;

/* url: "sqlite:PATH" (PATH created if missing, parent folders too) or a
 * libpq URL "postgresql://[user[:password]@]host[:port]/database[?...]"
 * (the database must exist; the tables are made when missing). */
fg_status fg_store_open(const char *url, fg_store **out, fg_problem *p);
void fg_store_close(fg_store *s);
/* "sqlite" or "postgresql". */
const char *fg_store_scheme(const fg_store *s);
/* The URL as it may be logged or shown: a password (user:PASSWORD@ or a
 * password= parameter) replaced by ***. */
void fg_store_url_display(const char *url, char *out, size_t cap);
/* Health probe: a trivial query. */
fg_status fg_store_ping(fg_store *s, fg_problem *p);

typedef struct fg_store_version {
  char name[FG_NAME_MAX + 1];
  int version;
  char digest[FG_DIGEST_MAX];
  char created_at[32];
  char *title;    /* may be NULL */
  char *document; /* canonical text; NULL in list results */
  bool retired;
} fg_store_version;

void fg_store_version_clear(fg_store_version *v);

/* Register: when the latest version of `name` has the same digest, fill
 * *out with it and set *created = false; otherwise add version latest+1
 * (1 for a new name), fill *out, *created = true. A retired name is
 * revived by a new registration. */
fg_status fg_store_put_version(fg_store *s, const char *name,
                               const char *digest, const char *canonical,
                               const char *title, fg_store_version *out,
                               bool *created, fg_problem *p);
/* version 0 = latest. FG_ENOTFOUND when absent. */
fg_status fg_store_get_version(fg_store *s, const char *name, int version,
                               fg_store_version *out, fg_problem *p);
/* Latest version of every model not retired, by name. *out is an array of
 * *n entries (document NULL); free with fg_store_versions_free. */
fg_status fg_store_list_models(fg_store *s, fg_store_version **out, int *n,
                               fg_problem *p);
void fg_store_versions_free(fg_store_version *v, int n);
fg_status fg_store_retire_model(fg_store *s, const char *name, fg_problem *p);

typedef struct fg_store_check {
  char id[40];
  char model[FG_NAME_MAX + 1];
  int version;
  char digest[FG_DIGEST_MAX];
  char
      status[16]; /* running, done, cancelled, timed_out, failed, interrupted */
  char verdict[16]; /* pass, fail, inconclusive, or "" */
  uint64_t seed;
  char created_at[32];
  char finished_at[32]; /* "" while running */
  double elapsed_ms;
  char label[FG_LABEL_MAX + 1];
  char key[FG_NAME_MAX + 1];
  double probability, lower, upper; /* NAN while unknown */
  char replay_of[40]; /* the check this one replays; "" when none */
  char *request;                    /* JSON text */
  char *result; /* JSON text of the result body; may be NULL */
} fg_store_check;

void fg_store_check_clear(fg_store_check *c);

/* Record a check when accepted (status running, result may be NULL). */
fg_status fg_store_put_check(fg_store *s, const fg_store_check *c,
                             fg_problem *p);
/* Update status, verdict, finished_at, elapsed, probability/interval and
 * result of an existing check. */
fg_status fg_store_finish_check(fg_store *s, const fg_store_check *c,
                                fg_problem *p);
fg_status fg_store_get_check(fg_store *s, const char *id, fg_store_check *out,
                             fg_problem *p);
/* While a check runs: its current result body (status running, with
 * progress), so that another replica sharing the store can answer a GET
 * for it. No change once the check has ended (status no longer running),
 * so a late note never hides the final record. */
fg_status fg_store_note_progress(fg_store *s, const char *id, const char *body,
                                 fg_problem *p);
/* true when other processes may serve the same store at once
 * (PostgreSQL); they then need fg_store_note_progress. */
bool fg_store_shared(const fg_store *s);
/* Shared stores: ask the replica running check `id` to cancel it (it looks
 * every second, fg_store_cancel_requests). FG_ENOTFOUND for an unknown
 * id, FG_ECONFLICT when the check is not running; FG_EUNSUPPORTED on a
 * store that is not shared. */
fg_status fg_store_request_cancel(fg_store *s, const char *id, fg_problem *p);
/* Shared stores: ids of this daemon's running checks whose cancel another
 * replica asked for (at most `cap`, into ids[i][40]); *n how many. */
fg_status fg_store_cancel_requests(fg_store *s, char (*ids)[40], int cap,
                                   int *n, fg_problem *p);

/* A comparison of candidates (each also a check of its own). */
typedef struct fg_store_comparison {
  char id[40];
  char model[FG_NAME_MAX + 1];
  int version;
  char digest[FG_DIGEST_MAX];
  char status[16]; /* running, done, cancelled, timed_out, failed */
  char created_at[32];
  char finished_at[32]; /* "" while running */
  char key[FG_NAME_MAX + 1];
  char *checks; /* JSON array of the candidates' check ids, in order */
  char *result; /* JSON text of the final body; NULL while running */
} fg_store_comparison;

void fg_store_comparison_clear(fg_store_comparison *c);
/* Record a comparison when accepted (status running). */
fg_status fg_store_put_comparison(fg_store *s, const fg_store_comparison *c,
                                  fg_problem *p);
/* Its end: status, finished_at and result. FG_ENOTFOUND when absent. */
fg_status fg_store_finish_comparison(fg_store *s,
                                     const fg_store_comparison *c,
                                     fg_problem *p);
fg_status fg_store_get_comparison(fg_store *s, const char *id,
                                  fg_store_comparison *out, fg_problem *p);

typedef struct fg_check_filter {
  const char *model;   /* NULL = any */
  const char *verdict; /* NULL = any */
  const char *since;   /* RFC 3339; NULL = any */
  const char *label;   /* exact; NULL = any */
  const char *key;     /* name of the API key that ran it; NULL = any */
  const char *after;   /* cursor: list checks older than this id */
  int limit;
} fg_check_filter;

/* Newest first (by created_at, then id). request/result are NULL in the
 * listed entries. *next is set to a cursor when more remain ("" if not). */
fg_status fg_store_list_checks(fg_store *s, const fg_check_filter *f,
                               fg_store_check **out, int *n, char next[40],
                               fg_problem *p);
void fg_store_checks_free(fg_store_check *c, int n);

/* Called once by a daemon at start-up: checks left "running" by a process
 * that is gone become "interrupted"; *count says how many. SQLite: every
 * running check (one daemon per file). PostgreSQL: this registers the
 * daemon as an instance and starts its heartbeat; running checks of
 * instances silent for FG_REPLICA_STALE_S (limits.h) are marked now and by a
 * sweep every few seconds for as long as the store is open. */
fg_status fg_store_mark_interrupted(fg_store *s, int *count, fg_problem *p);

/* Test seam: the n-th data write from now on (1 = the next) fails as an
 * I/O error inside its transaction, which is rolled back; 0 disarms. */
void fg_store_inject_write_fault(fg_store *s, int nth);


/* ---- API keys (http/keys.c decides what a role may do) ---- */

/* Bytes of a key's salt and of its hash (SHA-256). */
#define FG_STORE_KEY_SALT 16
#define FG_STORE_KEY_HASH 32

typedef struct fg_store_key {
  char name[FG_NAME_MAX + 1];
  char role[16]; /* reader, checker, author, admin */
  char created_at[32];
  char revoked_at[32]; /* "" while live */
  uint8_t salt[FG_STORE_KEY_SALT];
  uint8_t hash[FG_STORE_KEY_HASH];
} fg_store_key;

/* Add a live key. FG_ECONFLICT when a key of that name exists, revoked or
 * not: names are never reused, so the check log's key names stay
 * unambiguous. created_at is set by the store when empty. */
fg_status fg_store_put_key(fg_store *s, const fg_store_key *k, fg_problem *p);
/* Every key by name (live_only: only those not revoked). *out is a malloc'd
 * array of *n entries (free()); NULL when there are none. */
fg_status fg_store_list_keys(fg_store *s, bool live_only, fg_store_key **out,
                             int *n, fg_problem *p);
/* Mark a key revoked now. FG_ENOTFOUND when no key has that name,
 * FG_ECONFLICT when it was revoked already. */
fg_status fg_store_revoke_key(fg_store *s, const char *name, fg_problem *p);

#endif
