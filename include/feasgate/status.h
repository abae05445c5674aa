/*
 * feasgate/status.h -- the one status type and the problem collector.
 *
 * Every fallible function below main.c returns an fg_status and, where the
 * fault lies in something a client sent, adds one or more items to an
 * fg_problem: a JSON Pointer (RFC 6901) to the offending member, a 1-based
 * column inside an expression (0 when not in one) and a message saying what
 * was expected and what was found. The HTTP layer turns an fg_problem into
 * an RFC 9457 problem document; the offline command prints it.
 *
 * Expected outcomes (not found, conflict, busy) are kept apart from faults
 * (I/O, out of memory, internal). Nothing below main.c calls exit() or
 * abort() on bad input.
 *
 * Thread use: an fg_problem belongs to one request; it is not locked.
 */
#ifndef FEASGATE_STATUS_H
#define FEASGATE_STATUS_H

#include "feasgate/limits.h"

#include <stdarg.h>
#include <stddef.h>

typedef enum fg_status {
  FG_OK = 0,
  /* the client's input is wrong (HTTP 400) */
  FG_EINVAL,
  /* a named limit was exceeded (400, or 413 for the body size) */
  FG_ELIMIT,
  /* expected outcomes */
  FG_ENOTFOUND, /* 404 */
  FG_ECONFLICT, /* 409: digest mismatch and the like */
  FG_EGONE,     /* 410: retired model */
  FG_EBUSY,     /* 503: queue full, try again */
  FG_ECANCELLED,
  FG_ETIMEOUT,
  FG_EUNSUPPORTED, /* valid but not implemented yet (400) */
  /* faults */
  FG_ENOMEM,
  FG_EIO,
  FG_EINTERNAL
} fg_status;

/* Items kept per problem; further ones are counted in `dropped`. */
#define FG_PROBLEM_MAX_ITEMS 32
#define FG_POINTER_MAX 256
#define FG_MESSAGE_MAX 320

typedef struct fg_problem_item {
  char pointer[FG_POINTER_MAX];
  int column; /* 1-based column inside an expression; 0 = not in one */
  char message[FG_MESSAGE_MAX];
} fg_problem_item;

typedef struct fg_problem {
  fg_status status;  /* first non-OK status recorded */
  char title[128];   /* short summary; defaulted from status */
  char detail[512];  /* one sentence for humans */
  const char *limit_name; /* set for FG_ELIMIT */
  double limit_value;
  long long byte_offset; /* malformed JSON: where parsing stopped; -1 unset */
  int nitems;
  int dropped;
  fg_problem_item items[FG_PROBLEM_MAX_ITEMS];
} fg_problem;

void fg_problem_init(fg_problem *p);

/* Record one fault at `pointer` (may be "" for the whole body) and
 * `column` (0 when none). The first call also sets status and, if unset,
 * detail. Returns `st` so callers can `return fg_problem_add(...)`. */
fg_status fg_problem_add(fg_problem *p, fg_status st, const char *pointer,
                         int column, const char *fmt, ...)
    __attribute__((format(printf, 5, 6)));

/* Record that limit `which` (its value here `value`: a setting's may be
 * the running configuration's) was exceeded at `pointer`. */
fg_status fg_problem_limit(fg_problem *p, const char *pointer, fg_limit which,
                           double value, const char *fmt, ...)
    __attribute__((format(printf, 5, 6)));

/* 400 item at "/NAME" for an unknown top-level member `name` of a JSON
 * object: "unknown member 'NAME' (known: KNOWN)". */
fg_status fg_problem_unknown_member(fg_problem *p, const char *name,
                                    const char *known);

/* Set the status, title and detail without an item (whole-request faults:
 * not found, busy, I/O). */
fg_status fg_problem_set(fg_problem *p, fg_status st, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

/* The HTTP status a problem maps to (400 for EINVAL, 404, 409, ...). */
int fg_status_http(fg_status st);
/* A short English name ("invalid input", "not found", ...). */
const char *fg_status_name(fg_status st);

/* Append "/token" to a JSON Pointer in buf (escaping ~ and / as RFC 6901
 * says); fg_pointer_index appends "/N". Truncates safely at cap. */
void fg_pointer_join(char *buf, size_t cap, const char *base,
                     const char *token);
void fg_pointer_index(char *buf, size_t cap, const char *base, long index);

#endif
