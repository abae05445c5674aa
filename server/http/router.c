/*
 * http/router.c -- method + path to handler.
 *
 * Design: one table of routes, matched in order segment by segment; a
 * pattern segment "{x}" matches any one non-empty segment and is captured
 * into r->params in order. A path that matches some route but not with
 * this method is a 405 with an Allow header listing the methods it has
 * (HEAD is allowed wherever GET is); a path that matches none is a 404.
 * New endpoints go into `routes` below and nowhere else: each line
 * carries the route's least role, so a route cannot exist without one.
 *
 * libmicrohttpd hands us the path already percent-decoded and without the
 * query string.
 *
 * Thread use: any thread; the table is constant.
 */
#include "http/http_internal.h"
#include "http/metrics.h"

#include <stdio.h>
#include <string.h>

typedef struct fg_route_entry {
  const char *method;
  const char *pattern;
  fg_handler *handler;
  fg_role role; /* the least role that may call it (keys.c enforces) */
} fg_route_entry;

/* Shorthands for the role column. Roles nest (keys.c): reader < checker
 * < author < admin; OPEN needs no key at all. */
#define OPEN FG_ROLE_NONE
#define READER FG_ROLE_READER
#define CHECKER FG_ROLE_CHECKER
#define AUTHOR FG_ROLE_AUTHOR
#define ADMIN FG_ROLE_ADMIN

/* Every endpoint, once: method, pattern, handler and least role. */
static const fg_route_entry routes[] = {
    {"POST", "/v1/models", fg_h_models_register, AUTHOR},
    {"GET", "/v1/models", fg_h_models_list, READER},
    {"GET", "/v1/models/{name}", fg_h_model_get, READER},
    {"DELETE", "/v1/models/{name}", fg_h_model_retire, AUTHOR},
    {"GET", "/v1/models/{name}/versions/{n}", fg_h_model_version_get, READER},
    {"GET", "/v1/models/{name}/scenarios", fg_h_model_scenarios, CHECKER},
    {"POST", "/v1/models/{name}/sample-models", fg_h_model_sample_models,
     CHECKER},
    {"POST", "/v1/models/{name}/checks", fg_h_checks_create, CHECKER},
    {"POST", "/v1/models/{name}/versions/{n}/checks", fg_h_checks_create,
     CHECKER},
    {"POST", "/v1/models/{name}/comparisons", fg_h_comparisons_create,
     CHECKER},
    {"GET", "/v1/comparisons/{id}", fg_h_comparison_get, READER},
    {"DELETE", "/v1/comparisons/{id}", fg_h_comparison_cancel, CHECKER},
    {"GET", "/v1/checks", fg_h_checks_list, READER},
    {"GET", "/v1/checks/{id}", fg_h_check_get, READER},
    {"GET", "/v1/checks/{id}/scenarios/{index}", fg_h_check_scenario, READER},
    {"POST", "/v1/checks/{id}/replay", fg_h_check_replay, CHECKER},
    {"DELETE", "/v1/checks/{id}", fg_h_check_cancel, CHECKER},
    {"GET", "/v1/checks/{id}/request", fg_h_check_request, READER},
    {"GET", "/v1/health", fg_h_health, OPEN},
    {"GET", "/v1/ready", fg_h_ready, OPEN},
    {"GET", "/v1/limits", fg_h_limits, READER},
    {"GET", "/v1/openapi.json", fg_h_openapi, OPEN},
    {"GET", "/metrics", fg_h_metrics, OPEN},
    {"GET", "/v1/sample-size", fg_h_sample_size, READER},
    /* the page: static text; the API calls it makes carry the key a
     * person types in */
    {"GET", "/", fg_h_page, OPEN},
    {"GET", "/page/app.js", fg_h_page_js, OPEN},
    {"GET", "/page/app.css", fg_h_page_css, OPEN},
};

#define NROUTES (sizeof routes / sizeof *routes)

/* Match `path` against `pattern`; captures go to params (when not NULL). */
static bool match(const char *pattern, const char *path, int *nparams,
                  char (*params)[FG_HTTP_PATH_MAX + 1]) {
  /* The root has no segment: it matches only itself. */
  if (strcmp(pattern, "/") == 0 || strcmp(path, "/") == 0) {
    if (strcmp(pattern, path) != 0) return false;
    if (nparams) *nparams = 0;
    return true;
  }
  const char *p = pattern, *s = path;
  int n = 0;
  while (*p && *s) {
    if (*p != '/' || *s != '/') return false;
    p++;
    s++;
    const char *pe = strchr(p, '/');
    const char *se = strchr(s, '/');
    size_t plen = pe ? (size_t)(pe - p) : strlen(p);
    size_t slen = se ? (size_t)(se - s) : strlen(s);
    if (slen == 0) return false;
    if (plen >= 2 && p[0] == '{' && p[plen - 1] == '}') {
      if (n >= FG_ROUTE_PARAMS) return false;
      if (params) {
        memcpy(params[n], s, slen);
        params[n][slen] = '\0';
      }
      n++;
    } else if (plen != slen || memcmp(p, s, slen) != 0) {
      return false;
    }
    p += plen;
    s += slen;
  }
  if (*p || *s) return false;
  if (nparams) *nparams = n;
  return true;
}

static bool method_is(const char *route_method, const char *method) {
  if (strcmp(route_method, method) == 0) return true;
  return strcmp(method, "HEAD") == 0 && strcmp(route_method, "GET") == 0;
}

fg_handler *fg_route(fg_req *r, fg_resp *out) {
  if (r->path_too_long) {
    fg_resp_error(out, 404, FG_ENOTFOUND, "no resource at a path this long");
    return NULL;
  }
  bool path_known = false;
  char allow[64] = "";
  for (size_t i = 0; i < NROUTES; i++) {
    if (!match(routes[i].pattern, r->path, NULL, NULL)) continue;
    if (method_is(routes[i].method, r->method)) {
      match(routes[i].pattern, r->path, &r->nparams, r->params);
      r->route = routes[i].pattern;
      r->role = routes[i].role;
      return routes[i].handler;
    }
    path_known = true;
    size_t n = strlen(allow);
    snprintf(allow + n, sizeof allow - n, "%s%s", n ? ", " : "",
             routes[i].method);
    if (strcmp(routes[i].method, "GET") == 0) {
      n = strlen(allow);
      snprintf(allow + n, sizeof allow - n, ", HEAD");
    }
  }
  if (path_known) {
    r->route = "(method not allowed)";
    fg_problem p;
    fg_problem_init(&p);
    snprintf(p.title, sizeof p.title, "method not allowed");
    snprintf(p.detail, sizeof p.detail,
             "%s is not allowed on %.200s; allowed: %s", r->method, r->path,
             allow);
    fg_resp_problem(out, &p, 405);
    snprintf(out->allow, sizeof out->allow, "%s", allow);
    return NULL;
  }
  r->route = "(unknown)";
  fg_problem p;
  fg_problem_init(&p);
  snprintf(p.title, sizeof p.title, "not found");
  snprintf(p.detail, sizeof p.detail, "no resource at %.200s", r->path);
  fg_resp_problem(out, &p, 404);
  return NULL;
}

fg_role fg_route_role(const char *method, const char *route) {
  for (size_t i = 0; i < NROUTES; i++)
    if (method_is(routes[i].method, method) &&
        strcmp(routes[i].pattern, route) == 0)
      return routes[i].role;
  return FG_ROLE_ADMIN; /* not a route: fail closed */
}
