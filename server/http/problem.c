/*
 * http/problem.c -- JSON responses and RFC 9457 problem documents.
 *
 * A problem document carries:
 *   type    "urn:feasgate:problem:<kind>" (kind from the fg_status, e.g.
 *           invalid-input, limit-exceeded, not-found), or "about:blank"
 *           for plain HTTP outcomes (unknown route, wrong method);
 *   title   the short name of the status;
 *   status  the HTTP status code;
 *   detail  one sentence for humans;
 *   errors  [{pointer, column (only when > 0), message}] when the fault is
 *           inside the body, plus "errors_dropped" when more were found
 *           than kept;
 *   limit   {name, value} when a named limit was exceeded;
 *   offset  the byte offset where parsing stopped, for malformed JSON.
 *
 * Text a detail or message quotes from a request may be any bytes: each
 * document passes through fg_json_utf8_fix (strict.c), so invalid UTF-8
 * comes out as U+FFFD and the document stays valid JSON text.
 *
 * Building a response never fails its caller: when memory runs out the
 * body falls back to a fixed text.
 *
 * Thread use: any thread; no shared state.
 */
#include "http/http_internal.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static const char *problem_kind(fg_status st) {
  switch (st) {
  case FG_OK: return "ok";
  case FG_EINVAL: return "invalid-input";
  case FG_ELIMIT: return "limit-exceeded";
  case FG_ENOTFOUND: return "not-found";
  case FG_ECONFLICT: return "conflict";
  case FG_EGONE: return "gone";
  case FG_EBUSY: return "busy";
  case FG_ECANCELLED: return "cancelled";
  case FG_ETIMEOUT: return "timed-out";
  case FG_EUNSUPPORTED: return "unsupported";
  case FG_ENOMEM: return "out-of-memory";
  case FG_EIO: return "storage-error";
  case FG_EINTERNAL: return "internal-error";
  }
  return "internal-error";
}

/* Standard reason phrases for the statuses feasgate answers with a
 * problem that has no fg_status of its own. */
static const char *reason_phrase(int http_status) {
  switch (http_status) {
  case 400: return "Bad Request";
  case 404: return "Not Found";
  case 405: return "Method Not Allowed";
  case 409: return "Conflict";
  case 410: return "Gone";
  case 413: return "Content Too Large";
  case 500: return "Internal Server Error";
  case 503: return "Service Unavailable";
  }
  return "Error";
}

cJSON *fg_problem_json(const fg_problem *p, int http_status) {
  int status = http_status ? http_status : fg_status_http(p->status);
  cJSON *o = cJSON_CreateObject();
  if (!o) return NULL;
  char type[96];
  if (p->status == FG_OK) {
    snprintf(type, sizeof type, "about:blank");
  } else {
    snprintf(type, sizeof type, "urn:feasgate:problem:%s",
             problem_kind(p->status));
  }
  cJSON_AddStringToObject(o, "type", type);
  cJSON_AddStringToObject(o, "title",
                          p->title[0] ? p->title : reason_phrase(status));
  cJSON_AddNumberToObject(o, "status", status);
  cJSON_AddStringToObject(o, "detail",
                          p->detail[0] ? p->detail : reason_phrase(status));
  if (p->nitems > 0) {
    cJSON *errs = cJSON_AddArrayToObject(o, "errors");
    for (int i = 0; errs && i < p->nitems; i++) {
      const fg_problem_item *it = &p->items[i];
      cJSON *e = cJSON_CreateObject();
      if (!e) break;
      cJSON_AddStringToObject(e, "pointer", it->pointer);
      if (it->column > 0) cJSON_AddNumberToObject(e, "column", it->column);
      cJSON_AddStringToObject(e, "message", it->message);
      cJSON_AddItemToArray(errs, e);
    }
    if (p->dropped > 0)
      cJSON_AddNumberToObject(o, "errors_dropped", p->dropped);
  }
  if (p->limit_name) {
    cJSON *lim = cJSON_AddObjectToObject(o, "limit");
    if (lim) {
      cJSON_AddStringToObject(lim, "name", p->limit_name);
      cJSON_AddNumberToObject(lim, "value", p->limit_value);
    }
  }
  if (p->byte_offset >= 0)
    cJSON_AddNumberToObject(o, "offset", (double)p->byte_offset);
  return o;
}

static void set_fallback(fg_resp *out, int status) {
  static const char text[] =
      "{\"type\":\"urn:feasgate:problem:out-of-memory\",\"title\":\"out of "
      "memory\",\"status\":503,\"detail\":\"the server ran out of memory "
      "building the response\"}";
  free(out->body);
  out->body = malloc(sizeof text);
  out->len = out->body ? sizeof text - 1 : 0;
  if (out->body) memcpy(out->body, text, sizeof text);
  out->status = status ? status : 503;
  out->content_type = FG_CT_PROBLEM;
}

void fg_resp_json(fg_resp *out, int status, cJSON *body) {
  char *text = body ? cJSON_PrintUnformatted(body) : NULL;
  cJSON_Delete(body);
  if (!text) {
    set_fallback(out, 503);
    return;
  }
  fg_resp_json_text(out, status, text);
}

void fg_resp_json_text(fg_resp *out, int status, char *text) {
  free(out->body);
  out->body = text;
  out->len = strlen(text);
  out->status = status;
  out->content_type = FG_CT_JSON;
}

void fg_resp_problem(fg_resp *out, const fg_problem *p, int http_status) {
  int status = http_status ? http_status : fg_status_http(p->status);
  if (status < 400) status = 500; /* a problem without a fault status */
  cJSON *o = fg_problem_json(p, status);
  /* a detail may quote a path or a parameter: any bytes */
  fg_json_utf8_fix(o);
  char *text = o ? cJSON_PrintUnformatted(o) : NULL;
  cJSON_Delete(o);
  if (!text) {
    set_fallback(out, status);
    return;
  }
  free(out->body);
  out->body = text;
  out->len = strlen(text);
  out->status = status;
  out->content_type = FG_CT_PROBLEM;
  if (status == 503 && out->retry_after == 0)
    out->retry_after = FG_HTTP_RETRY_AFTER_S;
}

void fg_resp_error(fg_resp *out, int http_status, fg_status st, const char *fmt,
                   ...) {
  fg_problem p;
  fg_problem_init(&p);
  p.status = st;
  if (st != FG_OK)
    snprintf(p.title, sizeof p.title, "%s", fg_status_name(st));
  else
    snprintf(p.title, sizeof p.title, "%s", reason_phrase(http_status));
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(p.detail, sizeof p.detail, fmt, ap);
  va_end(ap);
  fg_resp_problem(out, &p, http_status);
}
