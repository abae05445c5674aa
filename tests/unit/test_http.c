/*
 * tests/unit/test_http.c -- the HTTP layer's pure parts: routing (path and
 * method to handler, captures, 404 and 405 with Allow, each route's least
 * role), query parameters into slots, and `feasgate serve` settings with
 * their ranges, environment twins and messages.
 *
 * No daemon is started: fg_route works on a bare request, the query slots
 * on given pairs (fg_http_query_pairs, what each libmicrohttpd parameter
 * goes through), and fg_http_config_parse on an argv. The API tests
 * (tests/api/) exercise the same code over sockets.
 */
#include "check.h"
#include "http/http_internal.h"
#include "http/metrics.h"

#include <stdarg.h>
#include <stdlib.h>
#include <string.h>

/* ---- routing ---- */

static fg_handler *route(const char *method, const char *path, fg_req *r,
                         fg_resp *out) {
  memset(r, 0, sizeof *r);
  memset(out, 0, sizeof *out);
  snprintf(r->method, sizeof r->method, "%s", method);
  snprintf(r->path, sizeof r->path, "%s", path);
  return fg_route(r, out);
}

static void test_routes(void) {
  fg_req *r = calloc(1, sizeof *r);
  fg_resp out;
  CHECK(route("GET", "/v1/models", r, &out) == fg_h_models_list);
  CHECK(r->role == FG_ROLE_READER);
  CHECK(route("POST", "/v1/models", r, &out) == fg_h_models_register);
  CHECK(r->role == FG_ROLE_AUTHOR);
  /* HEAD goes wherever GET goes, with GET's role. */
  CHECK(route("HEAD", "/v1/checks", r, &out) == fg_h_checks_list);
  CHECK(r->role == FG_ROLE_READER);
  /* Captures, in order. */
  CHECK(route("GET", "/v1/checks/chk_12/scenarios/7", r, &out) ==
        fg_h_check_scenario);
  CHECK_INT(r->nparams, 2);
  CHECK(strcmp(r->params[0], "chk_12") == 0);
  CHECK(strcmp(r->params[1], "7") == 0);
  CHECK(strcmp(r->route, "/v1/checks/{id}/scenarios/{index}") == 0);
  CHECK(route("POST", "/v1/models/depot/versions/3/checks", r, &out) ==
        fg_h_checks_create);
  CHECK_INT(r->nparams, 2);
  CHECK(strcmp(r->params[0], "depot") == 0 && strcmp(r->params[1], "3") == 0);
  CHECK(r->role == FG_ROLE_CHECKER);
  /* Open routes and the page. */
  CHECK(route("GET", "/v1/health", r, &out) == fg_h_health);
  CHECK(r->role == FG_ROLE_NONE);
  CHECK(route("GET", "/", r, &out) == fg_h_page);
  CHECK(r->role == FG_ROLE_NONE);
  CHECK(route("GET", "/metrics", r, &out) == fg_h_metrics);
  CHECK(r->role == FG_ROLE_NONE);
  /* An empty segment matches no capture. */
  CHECK(route("GET", "/v1/models//versions/1", r, &out) == NULL);
  CHECK_INT(out.status, 404);
  free(out.body);
  /* Trailing slash: another path. */
  CHECK(route("GET", "/v1/models/", r, &out) == NULL);
  CHECK_INT(out.status, 404);
  free(out.body);
  CHECK(route("GET", "/nothing/here", r, &out) == NULL);
  CHECK_INT(out.status, 404);
  CHECK(strcmp(r->route, "(unknown)") == 0);
  free(out.body);
  /* 405 with every method of the path in Allow (and HEAD beside GET). */
  CHECK(route("PUT", "/v1/checks/chk_1", r, &out) == NULL);
  CHECK_INT(out.status, 405);
  CHECK(strcmp(out.allow, "GET, HEAD, DELETE") == 0);
  CHECK(out.body && strstr(out.body, "PUT is not allowed") != NULL);
  free(out.body);
  CHECK(route("DELETE", "/v1/health", r, &out) == NULL);
  CHECK_INT(out.status, 405);
  CHECK(strcmp(out.allow, "GET, HEAD") == 0);
  free(out.body);
  /* A path too long to keep is a 404 without matching. */
  memset(r, 0, sizeof *r);
  memset(&out, 0, sizeof out);
  snprintf(r->method, sizeof r->method, "GET");
  r->path_too_long = true;
  CHECK(fg_route(r, &out) == NULL);
  CHECK_INT(out.status, 404);
  free(out.body);
  free(r);
}

static void test_roles(void) {
  /* The role column, read back by (method, pattern). */
  CHECK(fg_route_role("GET", "/v1/ready") == FG_ROLE_NONE);
  CHECK(fg_route_role("HEAD", "/v1/ready") == FG_ROLE_NONE);
  CHECK(fg_route_role("GET", "/v1/models/{name}/scenarios") ==
        FG_ROLE_CHECKER);
  CHECK(fg_route_role("DELETE", "/v1/checks/{id}") == FG_ROLE_CHECKER);
  CHECK(fg_route_role("DELETE", "/v1/models/{name}") == FG_ROLE_AUTHOR);
  CHECK(fg_route_role("POST", "/v1/checks/{id}/replay") == FG_ROLE_CHECKER);
  /* Not a route: the strictest role (fail closed). */
  CHECK(fg_route_role("PATCH", "/v1/models") == FG_ROLE_ADMIN);
  CHECK(fg_route_role("GET", "/v1/not-a-route") == FG_ROLE_ADMIN);
  /* Every route answers with its own role through fg_route too. */
  fg_req *r = calloc(1, sizeof *r);
  fg_resp out;
  const char *paths[][3] = {
      {"GET", "/v1/models/m/scenarios", "/v1/models/{name}/scenarios"},
      {"POST", "/v1/models/m/comparisons", "/v1/models/{name}/comparisons"},
      {"GET", "/v1/comparisons/cmp_1", "/v1/comparisons/{id}"},
      {"GET", "/v1/sample-size", "/v1/sample-size"},
  };
  for (size_t i = 0; i < sizeof paths / sizeof *paths; i++) {
    CHECK(route(paths[i][0], paths[i][1], r, &out) != NULL);
    CHECK(strcmp(r->route, paths[i][2]) == 0);
    CHECK(r->role == fg_route_role(paths[i][0], paths[i][2]));
  }
  free(r);
}

/* ---- query parameters ---- */

static void test_query(void) {
  const char *names[] = {"limit", "after", "model"};
  const char *limit, *after, *model;
  const char **slots[] = {&limit, &after, &model};
  char unknown[FG_HTTP_PARAM_NAME_MAX];

  const char *k1[] = {"limit", "model", "limit"};
  const char *v1[] = {"10", "depot", "99"};
  CHECK(fg_http_query_pairs(k1, v1, 3, names, slots, 3, unknown));
  CHECK(limit && strcmp(limit, "10") == 0); /* the first occurrence wins */
  CHECK(model && strcmp(model, "depot") == 0);
  CHECK(after == NULL); /* absent */
  CHECK(unknown[0] == '\0');

  /* A value-less parameter is the empty string, not absent. */
  const char *k2[] = {"after"};
  const char *v2[] = {NULL};
  CHECK(fg_http_query_pairs(k2, v2, 1, names, slots, 3, unknown));
  CHECK(after && after[0] == '\0');
  CHECK(limit == NULL); /* slots are cleared on each call */

  /* A misspelt name is reported (the first one), not ignored. */
  const char *k3[] = {"limit", "modle", "x"};
  const char *v3[] = {"5", "depot", "1"};
  CHECK(!fg_http_query_pairs(k3, v3, 3, names, slots, 3, unknown));
  CHECK(strcmp(unknown, "modle") == 0);
  CHECK(limit && strcmp(limit, "5") == 0);

  /* An empty name is reported as "". */
  const char *k4[] = {NULL};
  const char *v4[] = {"1"};
  strcpy(unknown, "stale");
  CHECK(!fg_http_query_pairs(k4, v4, 1, names, slots, 3, unknown));
  CHECK(unknown[0] == '\0');

  /* A long unknown name is cut to the kept length. */
  char longname[200];
  memset(longname, 'q', sizeof longname - 1);
  longname[sizeof longname - 1] = '\0';
  const char *k5[] = {longname};
  const char *v5[] = {"1"};
  CHECK(!fg_http_query_pairs(k5, v5, 1, names, slots, 3, unknown));
  CHECK_INT((long)strlen(unknown), FG_HTTP_PARAM_NAME_MAX - 1);
}

/* ---- serve settings ---- */

static int parse(fg_http_config *cfg, char *err, size_t cap, ...) {
  char *argv[32];
  int argc = 0;
  argv[argc++] = "serve";
  va_list ap;
  va_start(ap, cap);
  for (char *a; (a = va_arg(ap, char *)) != NULL && argc < 31;)
    argv[argc++] = a;
  va_end(ap);
  argv[argc] = NULL;
  return fg_http_config_parse(argc, argv, cfg, err, cap);
}

static void test_config(void) {
  static const char *twins[] = {"FEASGATE_WORKERS", "FEASGATE_LISTEN",
                                "FEASGATE_CHUNK", "FEASGATE_MAX_CHECK_TIME",
                                "FEASGATE_ALLOW_KEYLESS"};
  for (size_t i = 0; i < sizeof twins / sizeof *twins; i++) unsetenv(twins[i]);
  fg_http_config cfg;
  char err[512];

  /* Defaults. */
  CHECK_INT(parse(&cfg, err, sizeof err, NULL), 0);
  CHECK(strcmp(cfg.host, "127.0.0.1") == 0);
  CHECK_INT(cfg.port, 8080);
  CHECK(strcmp(cfg.store, "sqlite:var/feasgate.db") == 0);
  CHECK(cfg.workers >= 1 && cfg.workers <= FG_WORKERS_MAX);
  CHECK_INT(cfg.chunk, FG_CHUNK_DEFAULT);
  CHECK(!cfg.allow_keyless);

  /* Both spellings of a flag; IPv6 listen. */
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers", "3", "--listen=[::1]:0",
                  NULL),
            0);
  CHECK_INT(cfg.workers, 3);
  CHECK(strcmp(cfg.host, "::1") == 0);
  CHECK_INT(cfg.port, 0);

  /* Ranges: the edges are taken, one beyond is refused by name. */
  char buf[32];
  snprintf(buf, sizeof buf, "%d", FG_WORKERS_MAX);
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers", buf, NULL), 0);
  CHECK_INT(cfg.workers, FG_WORKERS_MAX);
  snprintf(buf, sizeof buf, "%d", FG_WORKERS_MAX + 1);
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers", buf, NULL), -1);
  CHECK_MSG(strstr(err, "--workers") != NULL, "%s", err);
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers", "0", NULL), -1);
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers", "2x", NULL), -1);
  CHECK_MSG(strstr(err, "'2x'") != NULL, "%s", err);
  CHECK_INT(parse(&cfg, err, sizeof err, "--listen", "127.0.0.1:65536", NULL),
            -1);
  CHECK_INT(parse(&cfg, err, sizeof err, "--listen", "::1:80", NULL), -1);
  CHECK_INT(parse(&cfg, err, sizeof err, "--max-check-time", "0", NULL), -1);
  CHECK_MSG(strstr(err, "--max-check-time") != NULL, "%s", err);
  CHECK_INT(parse(&cfg, err, sizeof err, "--unknown-flag", NULL), -1);
  CHECK_MSG(strstr(err, "'--unknown-flag'") != NULL, "%s", err);
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers", NULL), -1);
  CHECK_MSG(strstr(err, "needs a value") != NULL, "%s", err);
  /* Pairs that must agree. */
  CHECK_INT(parse(&cfg, err, sizeof err, "--max-connections", "4",
                  "--max-connections-per-client", "5", NULL),
            -1);
  CHECK_INT(parse(&cfg, err, sizeof err, "--tls-cert", "c.pem", NULL), -1);
  CHECK_MSG(strstr(err, "--tls-key") != NULL, "%s", err);

  /* Environment twins: applied, named in errors, and beaten by the flag
   * (even a twin that would not parse is not read then). */
  setenv("FEASGATE_WORKERS", "5", 1);
  CHECK_INT(parse(&cfg, err, sizeof err, NULL), 0);
  CHECK_INT(cfg.workers, 5);
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers=2", NULL), 0);
  CHECK_INT(cfg.workers, 2);
  setenv("FEASGATE_WORKERS", "many", 1);
  CHECK_INT(parse(&cfg, err, sizeof err, NULL), -1);
  CHECK_MSG(strstr(err, "FEASGATE_WORKERS") != NULL, "%s", err);
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers", "2", NULL), 0);
  unsetenv("FEASGATE_WORKERS");
  /* A boolean flag alone is true; its twin takes a value. */
  CHECK_INT(parse(&cfg, err, sizeof err, "--allow-keyless", NULL), 0);
  CHECK(cfg.allow_keyless);
  setenv("FEASGATE_ALLOW_KEYLESS", "true", 1);
  CHECK_INT(parse(&cfg, err, sizeof err, NULL), 0);
  CHECK(cfg.allow_keyless);
  unsetenv("FEASGATE_ALLOW_KEYLESS");
}

int main(void) {
  test_routes();
  test_roles();
  test_query();
  test_config();
  return fg_test_finish();
}
