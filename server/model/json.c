/*
 * model/json.c -- fg_json_parse: JSON with feasgate's rules, on top of cJSON.
 *
 * cJSON builds the tree; it is more lenient than RFC 8259 in a few places,
 * so a byte scan (scan_text) runs over the part cJSON accepted and refuses:
 *   - bytes that are not UTF-8 (overlong forms, surrogates, > U+10FFFF,
 *     truncated sequences), checked here because cJSON copies bytes blindly;
 *   - raw control characters inside strings, and control characters other
 *     than the four JSON white-space ones outside them (cJSON skips every
 *     byte <= 0x20 as white space);
 *   - the escape \u0000, which cannot live in a C string;
 *   - numbers outside the JSON grammar (cJSON hands "01", "1." and "-01" to
 *     strtod);
 *   - nesting deeper than FG_JSON_MAX_DEPTH (counted at the brackets, so
 *     the error has a byte offset and cJSON is never asked to go deep).
 * Then the tree is walked for what only the tree shows: duplicate keys in
 * any object (named by JSON Pointer) and numbers that overflowed to an
 * infinity.
 *
 * Error offsets: cJSON reports where it stopped through the end pointer of
 * cJSON_ParseWithLengthOpts (the global error pointer is never read, it is
 * shared by all threads). The scan reports the first offending byte; when
 * both fail, the earlier offset wins, so the message names the first fault
 * in the text. The scan's view of "inside a string" is exact over any
 * prefix that cJSON accepted, which is the only part whose errors are used.
 *
 * A UTF-8 byte order mark at the start is ignored (cJSON skips it; RFC 8259
 * allows a parser to). A NULL return from cJSON caused by running out of
 * memory is indistinguishable from a syntax error and reported as one.
 *
 * Thread use: reentrant; no global state is read or written here.
 */
#include "model_internal.h"

#include <cJSON.h>

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct scan_error {
  size_t offset; /* SIZE_MAX when none */
  fg_status status;
  char message[160];
} scan_error;

static void scan_fail(scan_error *e, size_t at, fg_status st, const char *msg) {
  if (at < e->offset) {
    e->offset = at;
    e->status = st;
    snprintf(e->message, sizeof e->message, "%s", msg);
  }
}

/* Length of the valid UTF-8 sequence at s[i] (lead byte >= 0x80), or 0. */
static size_t utf8_sequence(const unsigned char *s, size_t i, size_t len) {
  unsigned char c = s[i];
  size_t n;
  uint32_t cp, min;
  if (c >= 0xc2 && c <= 0xdf) {
    n = 2, cp = c & 0x1fu, min = 0x80;
  } else if (c >= 0xe0 && c <= 0xef) {
    n = 3, cp = c & 0x0fu, min = 0x800;
  } else if (c >= 0xf0 && c <= 0xf4) {
    n = 4, cp = c & 0x07u, min = 0x10000;
  } else {
    return 0;
  }
  if (len - i < n) return 0;
  for (size_t k = 1; k < n; k++) {
    if ((s[i + k] & 0xc0u) != 0x80u) return 0;
    cp = (cp << 6) | (s[i + k] & 0x3fu);
  }
  if (cp < min || cp > 0x10ffff || (cp >= 0xd800 && cp <= 0xdfff)) return 0;
  return n;
}

static bool is_digit(unsigned char c) { return c >= '0' && c <= '9'; }

/* Check the number token starting at s[i] against the JSON grammar
 *   -? (0 | [1-9][0-9]*) (. [0-9]+)? ([eE] [+-]? [0-9]+)?
 * Returns the offset just past it; on a fault records it and returns the
 * offset of the fault. */
static size_t scan_number(const unsigned char *s, size_t i, size_t len,
                          scan_error *e) {
  if (s[i] == '-') i++;
  if (i >= len || !is_digit(s[i])) {
    scan_fail(e, i, FG_EINVAL, "malformed number: expected a digit");
    return i;
  }
  if (s[i] == '0') {
    i++;
    if (i < len && is_digit(s[i])) {
      scan_fail(e, i, FG_EINVAL,
                "malformed number: leading zeros are not allowed");
      return i;
    }
  } else {
    while (i < len && is_digit(s[i])) i++;
  }
  if (i < len && s[i] == '.') {
    i++;
    if (i >= len || !is_digit(s[i])) {
      scan_fail(e, i, FG_EINVAL,
                "malformed number: expected a digit after the decimal point");
      return i;
    }
    while (i < len && is_digit(s[i])) i++;
  }
  if (i < len && (s[i] == 'e' || s[i] == 'E')) {
    i++;
    if (i < len && (s[i] == '+' || s[i] == '-')) i++;
    if (i >= len || !is_digit(s[i])) {
      scan_fail(e, i, FG_EINVAL,
                "malformed number: expected a digit in the exponent");
      return i;
    }
    while (i < len && is_digit(s[i])) i++;
  }
  if (i < len && (s[i] == '.' || s[i] == '+' || s[i] == '-' ||
                  s[i] == 'e' || s[i] == 'E')) {
    scan_fail(e, i, FG_EINVAL, "malformed number");
    return i;
  }
  return i;
}

static bool is_hex(unsigned char c) {
  return is_digit(c) || (c >= 'a' && c <= 'f') || (c >= 'A' && c <= 'F');
}

/* Where a scan ended, for telling a truncated text from a wrong byte. */
typedef struct scan_end {
  int depth;           /* containers still open */
  bool in_string;      /* inside a string */
  size_t string_start; /* offset of that string's opening quote */
} scan_end;

/* Scan s[0, len) for the faults listed at the top; only faults before
 * `limit` matter to the caller, so the scan stops there. */
static void scan_text(const unsigned char *s, size_t len, size_t limit,
                      scan_error *e, scan_end *end) {
  int depth = 0;
  bool in_string = false;
  size_t string_start = 0;
  size_t i = 0;
  while (i < len && i < limit && i < e->offset) {
    unsigned char c = s[i];
    if (c >= 0x80) {
      size_t n = utf8_sequence(s, i, len);
      if (n == 0) {
        scan_fail(e, i, FG_EINVAL, "invalid UTF-8");
        break;
      }
      i += n;
      continue;
    }
    if (in_string) {
      if (c == '"') {
        in_string = false;
      } else if (c == '\\') {
        if (i + 1 < len && s[i + 1] == 'u') {
          if (i + 5 < len && s[i + 2] == '0' && s[i + 3] == '0' &&
              s[i + 4] == '0' && s[i + 5] == '0') {
            scan_fail(e, i, FG_EINVAL,
                      "the escape \\u0000 is not allowed in a string");
            break;
          }
          size_t k = i + 2;
          while (k < len && k < i + 6 && is_hex(s[k])) k++;
          i = k;
          continue;
        }
        i += 2;
        continue;
      } else if (c < 0x20) {
        char msg[96];
        snprintf(msg, sizeof msg,
                 "unescaped control character U+%04X in a string", c);
        scan_fail(e, i, FG_EINVAL, msg);
        break;
      }
      i++;
      continue;
    }
    if (c == '"') {
      in_string = true;
      string_start = i;
    } else if (c == '[' || c == '{') {
      if (++depth > FG_JSON_MAX_DEPTH) {
        char msg[96];
        snprintf(msg, sizeof msg, "nesting deeper than %d levels",
                 FG_JSON_MAX_DEPTH);
        scan_fail(e, i, FG_ELIMIT, msg);
        break;
      }
    } else if (c == ']' || c == '}') {
      depth--;
    } else if (c == '-' || is_digit(c)) {
      size_t next = scan_number(s, i, len, e);
      if (e->offset != SIZE_MAX) break;
      i = next;
      continue;
    } else if (c < 0x20 && c != '\t' && c != '\n' && c != '\r') {
      char msg[96];
      snprintf(msg, sizeof msg, "unexpected control character U+%04X", c);
      scan_fail(e, i, FG_EINVAL, msg);
      break;
    }
    i++;
  }
  *end = (scan_end){depth, in_string, string_start};
}

static void describe_byte(char *buf, size_t cap, const unsigned char *s,
                          size_t len, size_t at) {
  if (at >= len)
    snprintf(buf, cap, "the end of the input");
  else if (s[at] >= 0x21 && s[at] < 0x7f)
    snprintf(buf, cap, "'%c'", s[at]);
  else
    snprintf(buf, cap, "byte 0x%02x", s[at]);
}

/* ---- the tree walk: duplicate keys and infinities ---- */

typedef struct key_ref {
  const char *key;
  int index;
} key_ref;

static int key_ref_cmp(const void *a, const void *b) {
  const key_ref *x = a, *y = b;
  int c = strcmp(x->key, y->key);
  if (c) return c;
  return (x->index > y->index) - (x->index < y->index);
}

static void report_duplicate(fg_model_ctx *cx, const char *base,
                             const char *key) {
  char ptr[FG_POINTER_MAX], q[64];
  fg_pointer_join(ptr, sizeof ptr, base, key);
  fg_model_quote(q, sizeof q, key);
  fg_model_error(cx, ptr, "duplicate key '%s' in one object", q);
}

/* Objects are usually tiny, so pairs are compared directly; beyond a few
 * members the keys are sorted, so a hostile object of many keys costs
 * n log n, not n^2. */
static void check_duplicates(const cJSON *obj, const char *base,
                             fg_model_ctx *cx) {
  int n = 0;
  for (const cJSON *c = obj->child; c; c = c->next) n++;
  if (n < 2) return;
  if (n <= 16) {
    int i = 0;
    for (const cJSON *a = obj->child; a; a = a->next, i++) {
      bool seen_before = false;
      for (const cJSON *b = obj->child; b != a; b = b->next)
        if (a->string && b->string && strcmp(a->string, b->string) == 0) {
          seen_before = true;
          break;
        }
      if (!seen_before) continue;
      /* report each repeated key once: at its second occurrence */
      int count = 0;
      for (const cJSON *b = obj->child; b != a; b = b->next)
        if (b->string && strcmp(a->string, b->string) == 0) count++;
      if (count == 1) report_duplicate(cx, base, a->string);
    }
    return;
  }
  key_ref *refs = malloc((size_t)n * sizeof *refs);
  if (!refs) {
    fg_model_note(cx, FG_ENOMEM);
    return;
  }
  int m = 0;
  for (const cJSON *c = obj->child; c; c = c->next, m++)
    refs[m] = (key_ref){c->string ? c->string : "", m};
  qsort(refs, (size_t)n, sizeof *refs, key_ref_cmp);
  for (int i = 1; i < n; i++)
    if (strcmp(refs[i].key, refs[i - 1].key) == 0 &&
        (i < 2 || strcmp(refs[i].key, refs[i - 2].key) != 0))
      report_duplicate(cx, base, refs[i].key);
  free(refs);
}

static void walk(const cJSON *v, char *ptr, fg_model_ctx *cx) {
  if (cJSON_IsNumber(v) && !isfinite(v->valuedouble)) {
    fg_model_error(cx, ptr,
                   "number out of range: expected a finite number that "
                   "fits a double");
    return;
  }
  if (!cJSON_IsArray(v) && !cJSON_IsObject(v)) return;
  if (cJSON_IsObject(v)) check_duplicates(v, ptr, cx);
  size_t keep = strlen(ptr);
  long i = 0;
  for (const cJSON *c = v->child; c; c = c->next, i++) {
    if (cJSON_IsObject(v))
      fg_pointer_join(ptr, FG_POINTER_MAX, ptr, c->string ? c->string : "");
    else
      fg_pointer_index(ptr, FG_POINTER_MAX, ptr, i);
    walk(c, ptr, cx);
    ptr[keep] = '\0';
  }
}

fg_status fg_json_parse(const char *text, size_t len, cJSON **out,
                        fg_problem *p) {
  *out = NULL;
  const unsigned char *s = (const unsigned char *)text;
  if (!text || len == 0) {
    if (p) p->byte_offset = 0;
    return fg_problem_add(p, FG_EINVAL, "", 0,
                          "empty body: expected a JSON value");
  }

  const char *end = text;
  cJSON *root = cJSON_ParseWithLengthOpts(text, len, &end, 0);
  size_t stop = (size_t)(end - text); /* where cJSON stopped */
  if (stop > len) stop = len;

  scan_error e = {.offset = SIZE_MAX};
  scan_end se;
  scan_text(s, len, root ? stop : len, &e, &se);
  if (e.offset != SIZE_MAX && (root || e.offset <= stop)) {
    cJSON_Delete(root);
    if (p) p->byte_offset = (long long)e.offset;
    if (e.status == FG_ELIMIT)
      return fg_problem_limit(p, "", "json_depth", FG_JSON_MAX_DEPTH,
                              "%s at byte %zu", e.message, e.offset);
    return fg_problem_add(p, FG_EINVAL, "", 0, "malformed JSON: %s at byte %zu",
                          e.message, e.offset);
  }
  if (!root) {
    /* cJSON points at the last byte when it ran out of input, and at the
     * opening quote's successor for a string that never closes; the full
     * scan (which found nothing) tells those cases apart. */
    size_t at = stop;
    if (e.offset == SIZE_MAX && se.in_string && se.string_start <= stop) {
      if (p) p->byte_offset = (long long)len;
      return fg_problem_add(p, FG_EINVAL, "", 0,
                            "malformed JSON at byte %zu: the end of the input "
                            "inside the string that starts at byte %zu",
                            len, se.string_start);
    }
    if (e.offset == SIZE_MAX && at + 1 >= len && se.depth > 0) at = len;
    char what[32];
    describe_byte(what, sizeof what, s, len, at);
    if (p) p->byte_offset = (long long)at;
    return fg_problem_add(p, FG_EINVAL, "", 0,
                          "malformed JSON at byte %zu: unexpected %s", at,
                          what);
  }
  size_t k = stop;
  while (k < len && (s[k] == ' ' || s[k] == '\t' || s[k] == '\n' ||
                     s[k] == '\r'))
    k++;
  if (k < len) {
    cJSON_Delete(root);
    char what[32];
    describe_byte(what, sizeof what, s, len, k);
    if (p) p->byte_offset = (long long)k;
    return fg_problem_add(p, FG_EINVAL, "", 0,
                          "malformed JSON at byte %zu: expected the end of "
                          "the input after the value, found %s",
                          k, what);
  }

  fg_model_ctx cx = {.p = p};
  char ptr[FG_POINTER_MAX] = "";
  walk(root, ptr, &cx);
  if (cx.first != FG_OK) {
    cJSON_Delete(root);
    return cx.first;
  }
  *out = root;
  return FG_OK;
}
