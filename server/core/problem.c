/*
 * core/problem.c -- the problem collector and JSON Pointer helpers.
 *
 * Design: fixed-size storage (no allocation) so that recording an error can
 * never fail; the first FG_PROBLEM_MAX_ITEMS items are kept in the order
 * found, later ones are only counted. Any thread may use its own fg_problem.
 */
#include "feasgate/status.h"

#include <stdio.h>
#include <string.h>

void fg_problem_init(fg_problem *p) {
  memset(p, 0, sizeof *p);
  p->byte_offset = -1;
}

const char *fg_status_name(fg_status st) {
  switch (st) {
  case FG_OK: return "ok";
  case FG_EINVAL: return "invalid input";
  case FG_ELIMIT: return "limit exceeded";
  case FG_ENOTFOUND: return "not found";
  case FG_ECONFLICT: return "conflict";
  case FG_EGONE: return "gone";
  case FG_EBUSY: return "service busy";
  case FG_ECANCELLED: return "cancelled";
  case FG_ETIMEOUT: return "timed out";
  case FG_EUNSUPPORTED: return "not yet supported";
  case FG_ENOMEM: return "out of memory";
  case FG_EIO: return "storage or system error";
  case FG_EINTERNAL: return "internal error";
  }
  return "unknown status";
}

int fg_status_http(fg_status st) {
  switch (st) {
  case FG_OK: return 200;
  case FG_EINVAL: return 400;
  case FG_ELIMIT: return 400;
  case FG_ENOTFOUND: return 404;
  case FG_ECONFLICT: return 409;
  case FG_EGONE: return 410;
  case FG_EBUSY: return 503;
  case FG_ECANCELLED: return 409;
  case FG_ETIMEOUT: return 504;
  case FG_EUNSUPPORTED: return 400;
  case FG_ENOMEM: return 503;
  case FG_EIO: return 500;
  case FG_EINTERNAL: return 500;
  }
  return 500;
}

static void set_first(fg_problem *p, fg_status st) {
  if (p->status == FG_OK) {
    p->status = st;
    snprintf(p->title, sizeof p->title, "%s", fg_status_name(st));
  }
}

static void add_item(fg_problem *p, const char *pointer, int column,
                     const char *fmt, va_list ap) {
  if (p->nitems >= FG_PROBLEM_MAX_ITEMS) {
    p->dropped++;
    return;
  }
  fg_problem_item *it = &p->items[p->nitems++];
  snprintf(it->pointer, sizeof it->pointer, "%s", pointer ? pointer : "");
  it->column = column;
  vsnprintf(it->message, sizeof it->message, fmt, ap);
  if (p->detail[0] == '\0') {
    /* detail = message, then " at pointer" when it fits */
    size_t n = (size_t)snprintf(p->detail, sizeof p->detail, "%s", it->message);
    if (it->pointer[0] && n + 4 + strlen(it->pointer) < sizeof p->detail) {
      strcat(p->detail, " at ");
      strcat(p->detail, it->pointer);
    }
  }
}

fg_status fg_problem_add(fg_problem *p, fg_status st, const char *pointer,
                         int column, const char *fmt, ...) {
  if (!p) return st;
  set_first(p, st);
  va_list ap;
  va_start(ap, fmt);
  add_item(p, pointer, column, fmt, ap);
  va_end(ap);
  return st;
}

fg_status fg_problem_limit(fg_problem *p, const char *pointer, fg_limit which,
                           double value, const char *fmt, ...) {
  if (!p) return FG_ELIMIT;
  set_first(p, FG_ELIMIT);
  if (!p->limit_name) {
    p->limit_name = fg_limit_name(which);
    p->limit_value = value;
  }
  va_list ap;
  va_start(ap, fmt);
  add_item(p, pointer, 0, fmt, ap);
  va_end(ap);
  return FG_ELIMIT;
}

fg_status fg_problem_set(fg_problem *p, fg_status st, const char *fmt, ...) {
  if (!p) return st;
  set_first(p, st);
  if (p->detail[0] == '\0') {
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(p->detail, sizeof p->detail, fmt, ap);
    va_end(ap);
  }
  return st;
}

void fg_pointer_join(char *buf, size_t cap, const char *base,
                     const char *token) {
  size_t n = 0;
  if (cap == 0) return;
  if (buf != base) {
    n = (size_t)snprintf(buf, cap, "%s", base ? base : "");
    if (n >= cap) return;
  } else {
    n = strlen(buf);
  }
  if (n + 1 >= cap) return;
  buf[n++] = '/';
  for (const char *t = token; *t && n + 1 < cap; t++) {
    if (*t == '~' || *t == '/') {
      if (n + 2 >= cap) break;
      buf[n++] = '~';
      buf[n++] = (*t == '~') ? '0' : '1';
    } else {
      buf[n++] = *t;
    }
  }
  buf[n] = '\0';
}

void fg_pointer_index(char *buf, size_t cap, const char *base, long index) {
  char tok[32];
  snprintf(tok, sizeof tok, "%ld", index);
  fg_pointer_join(buf, cap, base, tok);
}

fg_status fg_problem_unknown_member(fg_problem *p, const char *name,
                                    const char *known) {
  char ptr[FG_POINTER_MAX];
  fg_pointer_join(ptr, sizeof ptr, "", name);
  return fg_problem_add(p, FG_EINVAL, ptr, 0, "unknown member '%s' (known: %s)",
                        name, known);
}
