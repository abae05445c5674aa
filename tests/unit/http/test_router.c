/*
 * tests/unit/http/test_router.c -- routing: path and method to handler,
 * captures, 404 and 405 with Allow, and each route's least role
 * (http/router.c). fg_route works on a bare request: no daemon runs. The
 * API tests (tests/api/test_auth.py) exercise the roles over sockets.
 */
#include "check.h"
#include "http/http_internal.h"
#include "http/metrics.h"

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

int main(void) {
  test_routes();
  test_roles();
  return fg_test_finish();
}
