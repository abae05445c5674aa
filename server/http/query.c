/*
 * http/query.c -- the query string of a request: named parameters into
 * slots, and the 400 problem for a bad one.
 *
 * Design: a handler lists the names it knows and a slot for each; every
 * parameter of the request (libmicrohttpd hands them over decoded) goes to
 * the slot of its name, the first occurrence winning, and the first name
 * not listed -- or a parameter with an empty name -- is reported, so the
 * handler answers 400 rather than ignoring a misspelt filter.
 *
 * Thread use: libmicrohttpd's threads, each on its own request.
 */
#include "http/http_internal.h"

#include <stdarg.h>
#include <stdio.h>
#include <string.h>

typedef struct query_walk {
  const char *const *names;
  const char **const *slots;
  int n;
  char *unknown; /* FG_HTTP_PARAM_NAME_MAX bytes */
  bool bad;
} query_walk;

/* One parameter (key may be NULL: an empty name) into its slot. */
static void take_one(query_walk *w, const char *key, const char *value) {
  const char *k = key ? key : "";
  for (int i = 0; i < w->n; i++) {
    if (strcmp(k, w->names[i]) != 0) continue;
    if (!*w->slots[i]) *w->slots[i] = value ? value : "";
    return;
  }
  if (!w->bad) {
    w->bad = true;
    snprintf(w->unknown, FG_HTTP_PARAM_NAME_MAX, "%s", k);
  }
}

static enum MHD_Result take(void *cls, enum MHD_ValueKind kind,
                            const char *key, const char *value) {
  (void)kind;
  take_one(cls, key, value);
  return MHD_YES;
}

static void walk_init(query_walk *w, const char *const *names,
                      const char **const *slots, int n,
                      char unknown[FG_HTTP_PARAM_NAME_MAX]) {
  unknown[0] = '\0';
  for (int i = 0; i < n; i++) *slots[i] = NULL;
  *w = (query_walk){.names = names, .slots = slots, .n = n, .unknown = unknown};
}

bool fg_http_query_args(fg_req *r, const char *const *names,
                        const char **const *slots, int n,
                        char unknown[FG_HTTP_PARAM_NAME_MAX]) {
  query_walk w;
  walk_init(&w, names, slots, n, unknown);
  MHD_get_connection_values(r->conn, MHD_GET_ARGUMENT_KIND, take, &w);
  return !w.bad;
}

bool fg_http_query_pairs(const char *const *keys, const char *const *values,
                         int npairs, const char *const *names,
                         const char **const *slots, int n,
                         char unknown[FG_HTTP_PARAM_NAME_MAX]) {
  query_walk w;
  walk_init(&w, names, slots, n, unknown);
  for (int i = 0; i < npairs; i++) take_one(&w, keys[i], values[i]);
  return !w.bad;
}

void fg_resp_bad_param(fg_resp *out, const char *name, const char *fmt, ...) {
  char msg[FG_MESSAGE_MAX];
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(msg, sizeof msg, fmt, ap);
  va_end(ap);
  fg_problem p;
  fg_problem_init(&p);
  fg_problem_set(&p, FG_EINVAL, "query parameter '%s': %s", name, msg);
  fg_resp_problem(out, &p, 400);
}
