/*
 * store/store.c -- the public store handle: picks the backend by the URL's
 * scheme and forwards each call of store/store.h to it.
 *
 *   sqlite:PATH                 sqlite.c (embedded, one daemon per file)
 *   postgresql://... or
 *   postgres://...              pgsql.c (shared by several replicas)
 *
 * Thread use: any thread; the backends serialise their connections.
 */
#include "feasgate/clock.h"
#include "store/backend.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

struct fg_store {
  const fg_store_ops *ops;
  void *impl;
};

void fg_store_now_rfc3339(char buf[32]) {
  fg_time_now_rfc3339(buf, 32);
}

fg_status fg_store_open(const char *url, fg_store **out, fg_problem *p) {
  *out = NULL;
  const fg_store_ops *ops = NULL;
  if (url && strncmp(url, "sqlite:", 7) == 0)
    ops = &fg_store_sqlite_ops;
  else if (url && (strncmp(url, "postgresql://", 13) == 0 ||
                   strncmp(url, "postgres://", 11) == 0))
    ops = &fg_store_pgsql_ops;
  if (!ops)
    return fg_problem_set(p, FG_EINVAL,
                          "store URL '%s': expected sqlite:PATH or "
                          "postgresql://[user[:password]@]host[:port]/database",
                          url ? url : "(null)");
  fg_store *s = calloc(1, sizeof *s);
  if (!s) return fg_problem_set(p, FG_ENOMEM, "store: out of memory");
  s->ops = ops;
  fg_status st = ops->open(url, &s->impl, p);
  if (st != FG_OK) {
    free(s);
    return st;
  }
  *out = s;
  return FG_OK;
}

void fg_store_close(fg_store *s) {
  if (!s) return;
  s->ops->close(s->impl);
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
  return s->ops->scheme;
}

fg_status fg_store_ping(fg_store *s, fg_problem *p) {
  return s->ops->ping(s->impl, p);
}

fg_status fg_store_put_version(fg_store *s, const char *name,
                               const char *digest, const char *canonical,
                               const char *title, fg_store_version *out,
                               bool *created, fg_problem *p) {
  return s->ops->put_version(s->impl, name, digest, canonical, title, out,
                             created, p);
}

fg_status fg_store_get_version(fg_store *s, const char *name, int version,
                               fg_store_version *out, fg_problem *p) {
  if (version < 0) {
    memset(out, 0, sizeof *out);
    return fg_problem_set(p, FG_ENOTFOUND, "model '%s' has no version %d", name,
                          version);
  }
  return s->ops->get_version(s->impl, name, version, out, p);
}

fg_status fg_store_list_models(fg_store *s, fg_store_version **out, int *n,
                               fg_problem *p) {
  return s->ops->list_models(s->impl, out, n, p);
}

fg_status fg_store_retire_model(fg_store *s, const char *name, fg_problem *p) {
  return s->ops->retire_model(s->impl, name, p);
}

fg_status fg_store_put_check(fg_store *s, const fg_store_check *c,
                             fg_problem *p) {
  /* both backends keep seeds as signed 64-bit integers */
  if (c->seed > (uint64_t)INT64_MAX)
    return fg_problem_set(p, FG_EINVAL, "store: seed %llu out of range",
                          (unsigned long long)c->seed);
  return s->ops->put_check(s->impl, c, p);
}

fg_status fg_store_finish_check(fg_store *s, const fg_store_check *c,
                                fg_problem *p) {
  return s->ops->finish_check(s->impl, c, p);
}

fg_status fg_store_get_check(fg_store *s, const char *id, fg_store_check *out,
                             fg_problem *p) {
  return s->ops->get_check(s->impl, id, out, p);
}

fg_status fg_store_note_progress(fg_store *s, const char *id, const char *body,
                                 fg_problem *p) {
  return s->ops->note_progress(s->impl, id, body, p);
}

void fg_store_comparison_clear(fg_store_comparison *c) {
  if (!c) return;
  free(c->checks);
  free(c->result);
  c->checks = c->result = NULL;
}

fg_status fg_store_put_comparison(fg_store *s, const fg_store_comparison *c,
                                  fg_problem *p) {
  return s->ops->put_comparison(s->impl, c, p);
}

fg_status fg_store_finish_comparison(fg_store *s,
                                     const fg_store_comparison *c,
                                     fg_problem *p) {
  return s->ops->finish_comparison(s->impl, c, p);
}

fg_status fg_store_get_comparison(fg_store *s, const char *id,
                                  fg_store_comparison *out, fg_problem *p) {
  return s->ops->get_comparison(s->impl, id, out, p);
}

bool fg_store_shared(const fg_store *s) {
  return s->ops->shared;
}

fg_status fg_store_request_cancel(fg_store *s, const char *id, fg_problem *p) {
  if (!s->ops->request_cancel)
    return fg_problem_set(p, FG_EUNSUPPORTED,
                          "store: the %s store has no other replicas to ask",
                          s->ops->scheme);
  return s->ops->request_cancel(s->impl, id, p);
}

fg_status fg_store_cancel_requests(fg_store *s, char (*ids)[40], int cap,
                                   int *n, fg_problem *p) {
  *n = 0;
  if (!s->ops->cancel_requests) return FG_OK;
  return s->ops->cancel_requests(s->impl, ids, cap, n, p);
}

fg_status fg_store_list_checks(fg_store *s, const fg_check_filter *f,
                               fg_store_check **out, int *n, char next[40],
                               fg_problem *p) {
  *out = NULL;
  *n = 0;
  next[0] = '\0';
  fg_check_filter g = *f;
  if (g.limit <= 0) g.limit = FG_LIST_LIMIT_DEFAULT;
  if (g.limit > FG_LIST_LIMIT_MAX) g.limit = FG_LIST_LIMIT_MAX;
  fg_store_check *arr = NULL;
  int count = 0;
  fg_status st = s->ops->list_checks(s->impl, &g, &arr, &count, p);
  if (st != FG_OK) return st;
  /* the backend read one more than a page: it tells whether more remain */
  if (count > g.limit) {
    fg_store_check_clear(&arr[g.limit]);
    count = g.limit;
    snprintf(next, 40, "%s", arr[g.limit - 1].id);
  }
  *out = arr;
  *n = count;
  return FG_OK;
}

fg_status fg_store_mark_interrupted(fg_store *s, int *count, fg_problem *p) {
  return s->ops->mark_interrupted(s->impl, count, p);
}

void fg_store_inject_write_fault(fg_store *s, int nth) {
  s->ops->inject_write_fault(s->impl, nth);
}

fg_status fg_store_put_key(fg_store *s, const fg_store_key *k, fg_problem *p) {
  fg_store_key full = *k;
  if (!full.created_at[0]) fg_store_now_rfc3339(full.created_at);
  return s->ops->put_key(s->impl, &full, p);
}

fg_status fg_store_list_keys(fg_store *s, bool live_only, fg_store_key **out,
                             int *n, fg_problem *p) {
  return s->ops->list_keys(s->impl, live_only, out, n, p);
}

fg_status fg_store_revoke_key(fg_store *s, const char *name, fg_problem *p) {
  return s->ops->revoke_key(s->impl, name, p);
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
