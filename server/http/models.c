/*
 * http/models.c -- registering, reading, listing and retiring models.
 *
 *   POST   /v1/models                      201 new version (Location), 200
 *                                          when the same digest is already
 *                                          the latest version
 *   GET    /v1/models                      latest version of each live model
 *   GET    /v1/models/{name}               latest version with document
 *   GET    /v1/models/{name}/versions/{n}  that version with document
 *   DELETE /v1/models/{name}               204; retired (checks get 410)
 *
 * Design: the store keeps the canonical text; the compiled form lives only
 * in memory, in the cache keyed by digest, and is rebuilt from the stored
 * canonical text on a miss (fg_http_load_model), so a restarted daemon
 * serves the same models without re-registration. A retired model stays
 * readable and says so ("retired": true).
 *
 * Thread use: handlers on libmicrohttpd's threads.
 */
#include "http/http_internal.h"

#include <errno.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int fg_http_parse_version(const char *s) {
  if (!s || *s < '1' || *s > '9') return -1;
  errno = 0;
  char *end = NULL;
  long v = strtol(s, &end, 10);
  if (errno || *end || v < 1 || v > INT_MAX) return -1;
  return (int)v;
}

fg_status fg_http_load_model(fg_server *srv, const char *name, int version,
                             fg_store_version *v, fg_model **m, fg_problem *p) {
  *m = NULL;
  fg_status st = fg_store_get_version(srv->store, name, version, v, p);
  if (st != FG_OK) return st;
  fg_model *cached = fg_model_cache_get(srv->cache, v->digest);
  if (cached) {
    *m = cached;
    return FG_OK;
  }
  fg_problem cp;
  fg_problem_init(&cp);
  st = fg_model_compile(v->document, strlen(v->document), m, &cp);
  if (st != FG_OK) {
    /* A stored document that no longer compiles is our fault, not the
     * client's: say which one and why. */
    fg_store_version_clear(v);
    return fg_problem_set(p, FG_EINTERNAL,
                          "stored model %s version %d does not compile: %s",
                          name, version, cp.detail);
  }
  fg_model_cache_put(srv->cache, *m);
  return FG_OK;
}

static void version_location(char *buf, size_t cap, const char *name,
                             int version) {
  snprintf(buf, cap, "/v1/models/%s/versions/%d", name, version);
}

/* {name, version, digest, created_at, summary} */
static cJSON *registration_body(const fg_store_version *v, const fg_model *m) {
  cJSON *o = cJSON_CreateObject();
  if (!o) return NULL;
  cJSON_AddStringToObject(o, "name", v->name);
  cJSON_AddNumberToObject(o, "version", v->version);
  cJSON_AddStringToObject(o, "digest", v->digest);
  cJSON_AddStringToObject(o, "created_at", v->created_at);
  cJSON *summary = fg_model_summary_json(m);
  if (summary)
    cJSON_AddItemToObject(o, "summary", summary);
  else
    cJSON_AddNullToObject(o, "summary");
  return o;
}

void fg_h_models_register(fg_req *r, fg_resp *out) {
  fg_server *srv = r->srv;
  fg_problem p;
  fg_problem_init(&p);
  if (!r->body || r->len == 0) {
    fg_problem_add(&p, FG_EINVAL, "", 0,
                   "expected a model document as the request body, found an "
                   "empty body");
    fg_resp_problem(out, &p, 0);
    return;
  }
  fg_model *m = NULL;
  if (fg_model_compile(r->body, r->len, &m, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    return;
  }
  fg_store_version v;
  bool created = false;
  if (fg_store_put_version(srv->store, m->name, m->digest, m->canonical,
                           m->title, &v, &created, &p) != FG_OK) {
    fg_model_unref(m);
    fg_resp_problem(out, &p, 0);
    return;
  }
  fg_model_cache_put(srv->cache, m);
  cJSON *body = registration_body(&v, m);
  version_location(out->location, sizeof out->location, v.name, v.version);
  fg_log_level lvl = FG_LOG_INFO;
  cJSON *ev = cJSON_CreateObject();
  if (ev) {
    cJSON_AddStringToObject(ev, "event",
                            created ? "model_registered" : "model_unchanged");
    cJSON_AddStringToObject(ev, "model", v.name);
    cJSON_AddNumberToObject(ev, "version", v.version);
    cJSON_AddStringToObject(ev, "digest", v.digest);
    fg_log_emit(lvl, ev);
  }
  fg_store_version_clear(&v);
  fg_model_unref(m);
  fg_resp_json(out, created ? 201 : 200, body);
}

void fg_h_models_list(fg_req *r, fg_resp *out) {
  fg_problem p;
  fg_problem_init(&p);
  fg_store_version *list = NULL;
  int n = 0;
  if (fg_store_list_models(r->srv->store, &list, &n, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    return;
  }
  cJSON *o = cJSON_CreateObject();
  cJSON *arr = o ? cJSON_AddArrayToObject(o, "models") : NULL;
  for (int i = 0; arr && i < n; i++) {
    cJSON *e = cJSON_CreateObject();
    if (!e) break;
    cJSON_AddStringToObject(e, "name", list[i].name);
    cJSON_AddNumberToObject(e, "version", list[i].version);
    cJSON_AddStringToObject(e, "digest", list[i].digest);
    cJSON_AddStringToObject(e, "created_at", list[i].created_at);
    if (list[i].title)
      cJSON_AddStringToObject(e, "title", list[i].title);
    else
      cJSON_AddNullToObject(e, "title");
    cJSON_AddItemToArray(arr, e);
  }
  fg_store_versions_free(list, n);
  fg_resp_json(out, 200, o);
}

/* GET of one version: {name, version, digest, created_at, title, retired,
 * document, summary}. */
static void respond_version(fg_req *r, fg_resp *out, int version) {
  fg_problem p;
  fg_problem_init(&p);
  fg_store_version v;
  fg_model *m = NULL;
  if (fg_http_load_model(r->srv, r->params[0], version, &v, &m, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    return;
  }
  cJSON *o = cJSON_CreateObject();
  if (o) {
    cJSON_AddStringToObject(o, "name", v.name);
    cJSON_AddNumberToObject(o, "version", v.version);
    cJSON_AddStringToObject(o, "digest", v.digest);
    cJSON_AddStringToObject(o, "created_at", v.created_at);
    if (v.title)
      cJSON_AddStringToObject(o, "title", v.title);
    else
      cJSON_AddNullToObject(o, "title");
    cJSON_AddBoolToObject(o, "retired", v.retired);
    cJSON *doc = cJSON_Parse(v.document);
    if (doc)
      cJSON_AddItemToObject(o, "document", doc);
    else
      cJSON_AddNullToObject(o, "document");
    cJSON *summary = fg_model_summary_json(m);
    if (summary)
      cJSON_AddItemToObject(o, "summary", summary);
    else
      cJSON_AddNullToObject(o, "summary");
  }
  fg_model_unref(m);
  fg_store_version_clear(&v);
  fg_resp_json(out, 200, o);
}

void fg_h_model_get(fg_req *r, fg_resp *out) {
  respond_version(r, out, 0);
}

void fg_h_model_version_get(fg_req *r, fg_resp *out) {
  int n = fg_http_parse_version(r->params[1]);
  if (n < 1) {
    fg_resp_error(out, 404, FG_ENOTFOUND,
                  "model '%.64s' has no version '%.32s': versions are "
                  "numbered 1, 2, ...",
                  r->params[0], r->params[1]);
    return;
  }
  respond_version(r, out, n);
}

void fg_h_model_retire(fg_req *r, fg_resp *out) {
  fg_problem p;
  fg_problem_init(&p);
  if (fg_store_retire_model(r->srv->store, r->params[0], &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    return;
  }
  fg_log_msg(FG_LOG_INFO, "model_retired", "%.64s", r->params[0]);
  out->status = 204;
  out->content_type = NULL;
}
