/*
 * store/store.c -- the public store handle: picks the backend by the URL's
 * scheme, and the calls of store/store.h that are no database operation
 * (URL display, ping, the fault seam, freeing result structs).
 *
 *   sqlite:PATH                 sqlite.c (embedded, one daemon per file)
 *   postgresql://... or
 *   postgres://...              pgsql.c (shared by several replicas)
 *
 * Where the rest is: models.c (versions, retiring), checks.c (checks,
 * paging, progress notes, comparisons), keys.c (API keys), replicas.c
 * (interrupted checks, heartbeat, sweep, cancel requests), sql.c (every
 * statement and the schema), db.c (the helpers they share).
 *
 * Thread use: any thread; the backends hand each call its own connection.
 */
#include "feasgate/clock.h"
#include "store/db.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

void fg_store_now_rfc3339(char buf[32]) {
  fg_time_now_rfc3339(buf, 32);
}

fg_status fg_store_open(const char *url, fg_store **out, fg_problem *p) {
  *out = NULL;
  const fg_backend *b = NULL;
  if (url && strncmp(url, "sqlite:", 7) == 0)
    b = &fg_store_sqlite_backend;
  else if (url && (strncmp(url, "postgresql://", 13) == 0 ||
                   strncmp(url, "postgres://", 11) == 0))
    b = &fg_store_pgsql_backend;
  if (!b)
    return fg_problem_set(p, FG_EINVAL,
                          "store URL '%s': expected sqlite:PATH or "
                          "postgresql://[user[:password]@]host[:port]/database",
                          url ? url : "(null)");
  fg_store *s = calloc(1, sizeof *s);
  if (!s) return fg_problem_set(p, FG_ENOMEM, "store: out of memory");
  s->b = b;
  pthread_mutex_init(&s->lock, NULL);
  pthread_cond_init(&s->stop_cv, NULL);
  fg_status st = b->shared ? fg_replica_init(s, p) : FG_OK;
  if (st == FG_OK) st = b->open(url, &s->db, p);
  if (st != FG_OK) {
    pthread_cond_destroy(&s->stop_cv);
    pthread_mutex_destroy(&s->lock);
    free(s);
    return st;
  }
  *out = s;
  return FG_OK;
}

void fg_store_close(fg_store *s) {
  if (!s) return;
  fg_replica_stop(s);
  s->b->close(s->db);
  pthread_cond_destroy(&s->stop_cv);
  pthread_mutex_destroy(&s->lock);
  free(s);
}

void fg_store_url_display(const char *url, char *out, size_t cap) {
  if (cap == 0) return;
  out[0] = '\0';
  if (!url) return;
  size_t o = 0;
  const char *auth = strstr(url, "://");
  const char *auth_end = NULL, *at = NULL, *colon = NULL;
  if (auth && strncmp(url, "sqlite:", 7) != 0) {
    auth += 3;
    auth_end = auth + strcspn(auth, "/?#");
    for (const char *q = auth; q < auth_end; q++)
      if (*q == '@') at = q;
    if (at)
      for (const char *q = auth; q < at; q++)
        if (*q == ':') {
          colon = q;
          break;
        }
  }
  for (const char *q = url; *q && o + 1 < cap;) {
    if (colon && q == colon + 1) { /* user:PASSWORD@ */
      for (const char *m = "***"; *m && o + 1 < cap; m++)
        out[o++] = *m;
      q = at;
      continue;
    }
    if (auth_end && q >= auth_end && strncmp(q, "password=", 9) == 0 &&
        (q[-1] == '?' || q[-1] == '&')) {
      for (const char *m = "password=***"; *m && o + 1 < cap; m++)
        out[o++] = *m;
      q += strcspn(q, "&#");
      continue;
    }
    out[o++] = *q++;
  }
  out[o] = '\0';
}

const char *fg_store_scheme(const fg_store *s) {
  return s->b->scheme;
}

bool fg_store_shared(const fg_store *s) {
  return s->b->shared;
}

fg_status fg_store_ping(fg_store *s, fg_problem *p) {
  fg_conn *c;
  fg_status res = fg_db_enter(s, &c, p);
  if (res != FG_OK) return res;
  bool row = false;
  res = fg_db_first(c, SQL_PING, NULL, 0, "ping", &row, p);
  fg_db_done(c);
  if (res == FG_OK && !row)
    res = fg_problem_set(p, FG_EIO, "store ping: no answer");
  fg_db_leave(c);
  return res;
}

void fg_store_inject_write_fault(fg_store *s, int nth) {
  pthread_mutex_lock(&s->lock);
  s->fail_countdown = nth > 0 ? nth : 0;
  pthread_mutex_unlock(&s->lock);
}

/* ---- result structs ---- */

void fg_store_version_clear(fg_store_version *v) {
  if (!v) return;
  free(v->title);
  free(v->document);
  memset(v, 0, sizeof *v);
}

void fg_store_versions_free(fg_store_version *v, int n) {
  if (!v) return;
  for (int i = 0; i < n; i++)
    fg_store_version_clear(&v[i]);
  free(v);
}

void fg_store_check_clear(fg_store_check *c) {
  if (!c) return;
  free(c->request);
  free(c->result);
  memset(c, 0, sizeof *c);
  c->probability = c->lower = c->upper = NAN;
}

void fg_store_checks_free(fg_store_check *c, int n) {
  if (!c) return;
  for (int i = 0; i < n; i++)
    fg_store_check_clear(&c[i]);
  free(c);
}

void fg_store_comparison_clear(fg_store_comparison *c) {
  if (!c) return;
  free(c->checks);
  free(c->result);
  c->checks = c->result = NULL;
}
