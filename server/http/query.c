/*
 * http/query.c -- the query string of a request: named parameters into
 * slots, and the 400 problem for a bad one.
 *
 * Design: a handler lists the names it knows and a slot for each; every
 * parameter of the request (libmicrohttpd hands them over decoded) goes to
 * the slot of its name, the first occurrence winning, and the first name
 * not listed -- or a parameter with an empty name -- is reported, so the
 * handler answers 400 rather than ignoring a misspelt filter.
 * fg_http_accept_prefers reads the Accept header for the handlers that
 * answer in two media types (scenarios as CSV, a sample model as text).
 *
 * Thread use: libmicrohttpd's threads, each on its own request.
 */
#include "http/http_internal.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

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

void fg_http_query_expected(const char *const *names, int n, char *buf,
                            size_t cap) {
  size_t len = 0;
  if (cap) buf[0] = '\0';
  for (int i = 0; i < n && len < cap; i++)
    len += (size_t)snprintf(buf + len, cap - len, "%s%s",
                            i == 0 ? "" : i == n - 1 ? " or " : ", ",
                            names[i]);
}

bool fg_http_query_args(fg_req *r, const char *const *names,
                        const char **const *slots, int n, fg_resp *out) {
  char unknown[FG_HTTP_PARAM_NAME_MAX];
  query_walk w;
  walk_init(&w, names, slots, n, unknown);
  MHD_get_connection_values(r->conn, MHD_GET_ARGUMENT_KIND, take, &w);
  if (!w.bad) return true;
  char expected[256];
  fg_http_query_expected(names, n, expected, sizeof expected);
  fg_resp_bad_param(out, unknown, "unknown parameter; expected %s", expected);
  return false;
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

/* The q value of one media range's parameters ("; q=0.5"); 1 when absent,
 * 0 when malformed. */
static double quality(const char *params, size_t len) {
  const char *t = params, *end = params + len;
  while (t < end) {
    const char *semi = memchr(t, ';', (size_t)(end - t));
    const char *pe = semi ? semi : end;
    while (t < pe && (*t == ' ' || *t == '\t')) t++;
    if (pe - t >= 2 && (t[0] == 'q' || t[0] == 'Q') && t[1] == '=') {
      char num[16];
      size_t n = (size_t)(pe - t - 2);
      if (n == 0 || n >= sizeof num) return 0;
      memcpy(num, t + 2, n);
      num[n] = '\0';
      char *e = NULL;
      double q = strtod(num, &e);
      while (*e == ' ' || *e == '\t') e++;
      return (*e || !(q >= 0 && q <= 1)) ? 0 : q;
    }
    t = semi ? semi + 1 : end;
  }
  return 1;
}

bool fg_http_accept_prefers(const char *accept, const char *type) {
  if (!accept) return false;
  size_t type_len = strlen(type);
  double q_csv = -1, q_json = -1;
  const char *t = accept;
  while (*t) {
    const char *comma = strchr(t, ',');
    size_t len = comma ? (size_t)(comma - t) : strlen(t);
    const char *s = t;
    while (len && (*s == ' ' || *s == '\t')) s++, len--;
    const char *semi = memchr(s, ';', len);
    size_t tlen = semi ? (size_t)(semi - s) : len;
    while (tlen && (s[tlen - 1] == ' ' || s[tlen - 1] == '\t')) tlen--;
    double q = semi ? quality(semi + 1, len - (size_t)(semi + 1 - s)) : 1;
    if (tlen == type_len && strncasecmp(s, type, type_len) == 0) {
      if (q > q_csv) q_csv = q;
    } else if ((tlen == 16 && strncasecmp(s, "application/json", 16) == 0) ||
               (tlen == 3 && strncmp(s, "*/*", 3) == 0) ||
               (tlen == 13 && strncasecmp(s, "application/*", 13) == 0)) {
      if (q > q_json) q_json = q;
    }
    t = comma ? comma + 1 : t + strlen(t);
  }
  return q_csv > 0 && q_csv > q_json;
}
