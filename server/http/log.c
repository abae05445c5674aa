/*
 * http/log.c -- the daemon's log: one JSON object per line on stderr.
 *
 * Design: every line is built as a cJSON object, printed unformatted and
 * written with one fputs under the stdio lock (flockfile), so lines from
 * different threads never interleave. Each line carries "time" (RFC 3339
 * UTC with milliseconds) and "level". The level threshold is the one piece
 * of process-wide state here: it is set once at start-up, before any
 * thread is started, and only read afterwards.
 *
 * Strings from requests may hold any bytes: every line goes through
 * fg_json_utf8_fix (strict.c) so it is valid UTF-8 JSON whatever a client
 * sent; cJSON escapes quotes, backslashes and control characters.
 *
 * A line that cannot be built for lack of memory is dropped; logging never
 * fails its caller.
 *
 * Thread use: any thread.
 */
#include "http/http_internal.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

static fg_log_level threshold = FG_LOG_INFO;

static const char *level_name(fg_log_level l) {
  switch (l) {
  case FG_LOG_DEBUG: return "debug";
  case FG_LOG_INFO: return "info";
  case FG_LOG_WARN: return "warn";
  case FG_LOG_ERROR: return "error";
  }
  return "info";
}

void fg_log_set_level(fg_log_level level) {
  threshold = level;
}

bool fg_log_enabled(fg_log_level level) {
  return level >= threshold;
}


void fg_log_emit(fg_log_level level, cJSON *obj) {
  if (obj && !fg_log_enabled(level)) {
    cJSON_Delete(obj);
    return;
  }
  fg_log_force(level, obj);
}

void fg_log_force(fg_log_level level, cJSON *obj) {
  if (!obj) return;
  /* time and level first, so that the lines read well */
  char now[48];
  fg_time_now_rfc3339_ms(now, 48);
  cJSON *line = cJSON_CreateObject();
  if (!line) {
    cJSON_Delete(obj);
    return;
  }
  cJSON_AddStringToObject(line, "time", now);
  cJSON_AddStringToObject(line, "level", level_name(level));
  cJSON *item = obj->child;
  while (item) {
    cJSON *nextitem = item->next;
    cJSON_AddItemToObject(line, item->string,
                          cJSON_DetachItemViaPointer(obj, item));
    item = nextitem;
  }
  cJSON_Delete(obj);
  /* request text (a path, a parameter) may be any bytes */
  fg_json_utf8_fix(line);
  char *text = cJSON_PrintUnformatted(line);
  cJSON_Delete(line);
  if (!text) return;
  flockfile(stderr);
  fputs(text, stderr);
  fputc('\n', stderr);
  fflush(stderr);
  funlockfile(stderr);
  free(text);
}

void fg_log_msg(fg_log_level level, const char *event, const char *fmt, ...) {
  if (!fg_log_enabled(level)) return;
  char msg[1024];
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(msg, sizeof msg, fmt, ap);
  va_end(ap);
  cJSON *o = cJSON_CreateObject();
  if (!o) return;
  cJSON_AddStringToObject(o, "event", event);
  cJSON_AddStringToObject(o, "message", msg);
  fg_log_emit(level, o);
}
