/*
 * model/json.c -- fg_json_parse: JSON with feasgate's rules, on top of cJSON.
 *
 * Two passes. First a recognizer (scan_text) reads the bytes against the
 * RFC 8259 grammar and refuses, with the exact byte offset of the fault:
 *   - any syntax error, including text after the value;
 *   - bytes that are not UTF-8 (overlong forms, surrogates, > U+10FFFF,
 *     truncated sequences): cJSON copies string bytes blindly;
 *   - raw control characters in strings, control characters other than the
 *     four JSON white-space ones outside them (cJSON skips every byte
 *     <= 0x20), lone surrogate escapes, and \u0000 (a C string cannot
 *     hold it);
 *   - numbers outside the JSON grammar ("01", "1.", "-01" would reach
 *     strtod through cJSON);
 *   - nesting deeper than FG_JSON_MAX_DEPTH (FG_ELIMIT, limit json_depth).
 * The recognizer keeps its containers on a fixed stack, so hostile input
 * costs one linear pass and no recursion. cJSON then builds the tree from
 * text already known to be valid; it reports where it stopped through the
 * end pointer of cJSON_ParseWithLengthOpts (the global error pointer is
 * shared by all threads and never read), which only matters when it runs
 * out of memory or meets a number longer than its internal buffer.
 * Last, the tree is walked for what only the tree shows: duplicate keys in
 * any object (each named once by JSON Pointer) and numbers that overflow a
 * double ("1e999"), also named by pointer.
 *
 * A UTF-8 byte order mark at the very start is ignored (RFC 8259 allows a
 * parser to; cJSON skips it too). Body size is the HTTP layer's concern.
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

static bool is_digit(unsigned char c) {
  return c >= '0' && c <= '9';
}

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
    while (i < len && is_digit(s[i]))
      i++;
  }
  if (i < len && s[i] == '.') {
    i++;
    if (i >= len || !is_digit(s[i])) {
      scan_fail(e, i, FG_EINVAL,
                "malformed number: expected a digit after the decimal point");
      return i;
    }
    while (i < len && is_digit(s[i]))
      i++;
  }
  if (i < len && (s[i] == 'e' || s[i] == 'E')) {
    i++;
    if (i < len && (s[i] == '+' || s[i] == '-')) i++;
    if (i >= len || !is_digit(s[i])) {
      scan_fail(e, i, FG_EINVAL,
                "malformed number: expected a digit in the exponent");
      return i;
    }
    while (i < len && is_digit(s[i]))
      i++;
  }
  if (i < len && (s[i] == '.' || s[i] == '+' || s[i] == '-' || s[i] == 'e' ||
                  s[i] == 'E')) {
    scan_fail(e, i, FG_EINVAL, "malformed number");
    return i;
  }
  return i;
}

static bool is_hex(unsigned char c) {
  return is_digit(c) || (c >= 'a' && c <= 'f') || (c >= 'A' && c <= 'F');
}

static unsigned hex4(const unsigned char *s) {
  unsigned v = 0;
  for (int k = 0; k < 4; k++) {
    unsigned char c = s[k];
    v = v * 16u + (unsigned)(is_digit(c) ? c - '0' : (c | 0x20) - 'a' + 10);
  }
  return v;
}

/* The string whose opening quote is at s[i]. Returns the offset past the
 * closing quote, or SIZE_MAX after recording the fault. */
static size_t scan_string(const unsigned char *s, size_t i, size_t len,
                          scan_error *e) {
  size_t open = i++;
  char msg[112];
  while (i < len) {
    unsigned char c = s[i];
    if (c == '"') return i + 1;
    if (c >= 0x80) {
      size_t n = utf8_sequence(s, i, len);
      if (n == 0) {
        scan_fail(e, i, FG_EINVAL, "invalid UTF-8");
        return SIZE_MAX;
      }
      i += n;
      continue;
    }
    if (c < 0x20) {
      snprintf(msg, sizeof msg,
               "unescaped control character U+%04X in a string", c);
      scan_fail(e, i, FG_EINVAL, msg);
      return SIZE_MAX;
    }
    if (c != '\\') {
      i++;
      continue;
    }
    if (i + 1 >= len) break;
    unsigned char x = s[i + 1];
    if (strchr("\"\\/bfnrt", x) && x != '\0') {
      i += 2;
      continue;
    }
    if (x != 'u') {
      scan_fail(e, i, FG_EINVAL,
                "invalid escape in a string (expected one of \\\" \\\\ \\/ "
                "\\b \\f \\n \\r \\t \\uXXXX)");
      return SIZE_MAX;
    }
    if (len - i < 6 || !is_hex(s[i + 2]) || !is_hex(s[i + 3]) ||
        !is_hex(s[i + 4]) || !is_hex(s[i + 5])) {
      scan_fail(e, i, FG_EINVAL, "invalid \\u escape: expected 4 hex digits");
      return SIZE_MAX;
    }
    unsigned u = hex4(s + i + 2);
    if (u == 0) {
      scan_fail(e, i, FG_EINVAL,
                "the escape \\u0000 is not allowed in a string");
      return SIZE_MAX;
    }
    if (u >= 0xdc00 && u <= 0xdfff) {
      scan_fail(e, i, FG_EINVAL,
                "invalid \\u escape: a low surrogate without a high one");
      return SIZE_MAX;
    }
    if (u >= 0xd800 && u <= 0xdbff) {
      if (len - i < 12 || s[i + 6] != '\\' || s[i + 7] != 'u' ||
          !is_hex(s[i + 8]) || !is_hex(s[i + 9]) || !is_hex(s[i + 10]) ||
          !is_hex(s[i + 11]) || hex4(s + i + 8) < 0xdc00 ||
          hex4(s + i + 8) > 0xdfff) {
        scan_fail(e, i, FG_EINVAL,
                  "invalid \\u escape: a high surrogate must be followed by "
                  "a \\u low surrogate");
        return SIZE_MAX;
      }
      i += 12;
      continue;
    }
    i += 6;
  }
  snprintf(msg, sizeof msg,
           "the end of the input inside the string that starts at byte %zu",
           open);
  scan_fail(e, len, FG_EINVAL, msg);
  return SIZE_MAX;
}

/* What the recognizer expects next. */
typedef enum scan_state {
  EXPECT_VALUE,          /* top level, after ':' or after ',' in an array */
  EXPECT_VALUE_OR_CLOSE, /* after '[' */
  EXPECT_KEY_OR_CLOSE,   /* after '{' */
  EXPECT_KEY,            /* after ',' in an object */
  EXPECT_COLON,
  EXPECT_COMMA_OR_CLOSE, /* after a value inside a container */
  EXPECT_END             /* after the top-level value */
} scan_state;

static void unexpected(scan_error *e, const unsigned char *s, size_t len,
                       size_t at, const char *expected) {
  char msg[112];
  if (at >= len)
    snprintf(msg, sizeof msg, "expected %s, found the end of the input",
             expected);
  else if (s[at] >= 0x21 && s[at] < 0x7f)
    snprintf(msg, sizeof msg, "expected %s, found '%c'", expected, s[at]);
  else
    snprintf(msg, sizeof msg, "expected %s, found byte 0x%02x", expected,
             s[at]);
  scan_fail(e, at, FG_EINVAL, msg);
}

/* Recognize s[0, len) as exactly one JSON value (RFC 8259) with the rules
 * listed at the top, recording the first fault and its offset. Containers
 * are kept on a stack of FG_JSON_MAX_DEPTH entries, so the scan uses no
 * recursion and bounded memory whatever the input. */
static void scan_text(const unsigned char *s, size_t len, scan_error *e) {
  char stack[FG_JSON_MAX_DEPTH];
  int depth = 0;
  scan_state st = EXPECT_VALUE;
  size_t i = 0;
  if (len >= 3 && s[0] == 0xef && s[1] == 0xbb && s[2] == 0xbf) i = 3;
  for (;;) {
    while (i < len &&
           (s[i] == ' ' || s[i] == '\t' || s[i] == '\n' || s[i] == '\r'))
      i++;
    if (i >= len) {
      if (st != EXPECT_END)
        unexpected(e, s, len, len,
                   st == EXPECT_COLON ? "':'"
                   : st == EXPECT_COMMA_OR_CLOSE
                       ? (stack[depth - 1] == '[' ? "',' or ']'" : "',' or '}'")
                   : st == EXPECT_KEY || st == EXPECT_KEY_OR_CLOSE
                       ? "a string key"
                       : "a value");
      return;
    }
    unsigned char c = s[i];
    if (c < 0x20) {
      char msg[96];
      snprintf(msg, sizeof msg, "unexpected control character U+%04X", c);
      scan_fail(e, i, FG_EINVAL, msg);
      return;
    }
    switch (st) {
    case EXPECT_END:
      unexpected(e, s, len, i, "the end of the input after the value");
      return;
    case EXPECT_COLON:
      if (c != ':') {
        unexpected(e, s, len, i, "':' after the key");
        return;
      }
      i++;
      st = EXPECT_VALUE;
      continue;
    case EXPECT_COMMA_OR_CLOSE: {
      char close = stack[depth - 1] == '[' ? ']' : '}';
      if (c == ',') {
        i++;
        st = close == ']' ? EXPECT_VALUE : EXPECT_KEY;
        continue;
      }
      if (c != (unsigned char)close) {
        unexpected(e, s, len, i, close == ']' ? "',' or ']'" : "',' or '}'");
        return;
      }
      i++;
      depth--;
      st = depth ? EXPECT_COMMA_OR_CLOSE : EXPECT_END;
      continue;
    }
    case EXPECT_KEY_OR_CLOSE:
    case EXPECT_KEY:
      if (c == '}' && st == EXPECT_KEY_OR_CLOSE) {
        i++;
        depth--;
        st = depth ? EXPECT_COMMA_OR_CLOSE : EXPECT_END;
        continue;
      }
      if (c != '"') {
        unexpected(e, s, len, i,
                   st == EXPECT_KEY ? "a string key" : "a string key or '}'");
        return;
      }
      i = scan_string(s, i, len, e);
      if (i == SIZE_MAX) return;
      st = EXPECT_COLON;
      continue;
    case EXPECT_VALUE_OR_CLOSE:
      if (c == ']') {
        i++;
        depth--;
        st = depth ? EXPECT_COMMA_OR_CLOSE : EXPECT_END;
        continue;
      }
      /* fall through */
    case EXPECT_VALUE: break;
    }
    /* a value */
    if (c == '[' || c == '{') {
      if (depth == FG_JSON_MAX_DEPTH) {
        char msg[96];
        snprintf(msg, sizeof msg, "nesting deeper than %d levels",
                 FG_JSON_MAX_DEPTH);
        scan_fail(e, i, FG_ELIMIT, msg);
        return;
      }
      stack[depth++] = (char)c;
      i++;
      st = c == '[' ? EXPECT_VALUE_OR_CLOSE : EXPECT_KEY_OR_CLOSE;
      continue;
    }
    if (c == '"') {
      i = scan_string(s, i, len, e);
      if (i == SIZE_MAX) return;
    } else if (c == '-' || is_digit(c)) {
      i = scan_number(s, i, len, e);
      if (e->offset != SIZE_MAX) return;
    } else if (len - i >= 4 && memcmp(s + i, "true", 4) == 0) {
      i += 4;
    } else if (len - i >= 5 && memcmp(s + i, "false", 5) == 0) {
      i += 5;
    } else if (len - i >= 4 && memcmp(s + i, "null", 4) == 0) {
      i += 4;
    } else {
      unexpected(e, s, len, i,
                 st == EXPECT_VALUE_OR_CLOSE ? "a value or ']'" : "a value");
      return;
    }
    st = depth ? EXPECT_COMMA_OR_CLOSE : EXPECT_END;
  }
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
  for (const cJSON *c = obj->child; c; c = c->next)
    n++;
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
  /* equal keys are adjacent now; report each run of them once */
  bool in_run = false;
  for (int i = 1; i < n; i++) {
    bool same = strcmp(refs[i].key, refs[i - 1].key) == 0;
    if (same && !in_run) report_duplicate(cx, base, refs[i].key);
    in_run = same;
  }
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

  scan_error e = {.offset = SIZE_MAX};
  scan_text(s, len, &e);
  if (e.offset != SIZE_MAX) {
    if (p) p->byte_offset = (long long)e.offset;
    if (e.status == FG_ELIMIT)
      return fg_problem_limit(p, "", FG_LIMIT_JSON_DEPTH, FG_JSON_MAX_DEPTH,
                              "%s at byte %zu", e.message, e.offset);
    return fg_problem_add(p, FG_EINVAL, "", 0, "malformed JSON at byte %zu: %s",
                          e.offset, e.message);
  }

  /* The text is valid JSON; cJSON only builds the tree. Should it still
   * stop early (out of memory, or a number longer than its 63-byte
   * buffer), the place it stopped is reported. */
  const char *end = text;
  cJSON *root = cJSON_ParseWithLengthOpts(text, len, &end, 0);
  size_t stop = end >= text ? (size_t)(end - text) : 0;
  size_t k = stop;
  while (root && k < len &&
         (s[k] == ' ' || s[k] == '\t' || s[k] == '\n' || s[k] == '\r'))
    k++;
  if (!root || k != len) {
    cJSON_Delete(root);
    if (p) p->byte_offset = (long long)stop;
    return fg_problem_add(p, FG_EINVAL, "", 0,
                          "JSON value could not be read at byte %zu (a "
                          "number too long, or out of memory)",
                          stop);
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
