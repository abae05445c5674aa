/*
 * model/canonical.c -- fg_json_canonical: one text per JSON value.
 *
 * The digest of a model is the SHA-256 of this text, so two documents that
 * differ only in spacing, key order or the spelling of a number ("1.0",
 * "1", "1e0") get the same digest. Rules:
 *   - objects: members sorted by key, bytewise (strcmp on the UTF-8 bytes;
 *     equal keys, which fg_json_parse refuses anyway, keep their order);
 *     arrays keep their order;
 *   - no white space outside strings;
 *   - strings: '"' and '\' escaped, \b \f \n \r \t in their short forms,
 *     other control characters as \u00xx (lower-case hex), everything else,
 *     '/' and non-ASCII included, as the raw UTF-8 bytes;
 *   - numbers: an integer-valued double with |x| < 1e15 as plain digits
 *     ("%.0f"), any other as the first of %.15g, %.16g, %.17g that reads
 *     back to the same double (%.17g always does);
 *   - negative zero is written "0": it compares equal to 0 in every check
 *     a model makes (bounds, parameters), so it should not split digests;
 *   - non-finite numbers (which fg_json_parse refuses) and invalid nodes
 *     are written "null", cJSON_Raw nodes verbatim.
 * The C library's printf is used with the "C" locale in effect (feasgate
 * never calls setlocale), so the decimal point is '.'.
 *
 * Thread use: reentrant.
 */
#include "model_internal.h"
#include "core/buf.h"

#include <cJSON.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct text_buf {
  fg_buf text;
  bool oom;
} text_buf;

static void put_bytes(text_buf *b, const char *s, size_t n) {
  if (!b->oom && !fg_buf_append(&b->text, s, n, 256)) b->oom = true;
}

static void put_str(text_buf *b, const char *s) {
  put_bytes(b, s, strlen(s));
}

static void put_string(text_buf *b, const char *s) {
  put_bytes(b, "\"", 1);
  const char *run = s; /* bytes copied as they are */
  for (const unsigned char *c = (const unsigned char *)s; *c; c++) {
    const char *esc = NULL;
    char hex[8];
    switch (*c) {
    case '"': esc = "\\\""; break;
    case '\\': esc = "\\\\"; break;
    case '\b': esc = "\\b"; break;
    case '\f': esc = "\\f"; break;
    case '\n': esc = "\\n"; break;
    case '\r': esc = "\\r"; break;
    case '\t': esc = "\\t"; break;
    default:
      if (*c < 0x20) {
        snprintf(hex, sizeof hex, "\\u%04x", *c);
        esc = hex;
      }
    }
    if (!esc) continue;
    put_bytes(b, run, (size_t)((const char *)c - run));
    put_str(b, esc);
    run = (const char *)c + 1;
  }
  put_str(b, run);
  put_bytes(b, "\"", 1);
}

static void put_number(text_buf *b, double x) {
  char tmp[48];
  if (!isfinite(x)) {
    put_str(b, "null");
    return;
  }
  if (x == 0) {
    put_str(b, "0");
    return;
  }
  if (x == floor(x) && fabs(x) < 1e15) {
    snprintf(tmp, sizeof tmp, "%.0f", x);
  } else {
    for (int prec = 15; prec <= 17; prec++) {
      snprintf(tmp, sizeof tmp, "%.*g", prec, x);
      if (strtod(tmp, NULL) == x) break;
    }
  }
  put_str(b, tmp);
}

typedef struct member_ref {
  const cJSON *item;
  int index;
} member_ref;

static int member_cmp(const void *a, const void *b) {
  const member_ref *x = a, *y = b;
  const char *kx = x->item->string ? x->item->string : "";
  const char *ky = y->item->string ? y->item->string : "";
  int c = strcmp(kx, ky);
  if (c) return c;
  return (x->index > y->index) - (x->index < y->index);
}

static void put_value(text_buf *b, const cJSON *v);

static void put_object(text_buf *b, const cJSON *v) {
  int n = 0;
  for (const cJSON *c = v->child; c; c = c->next)
    n++;
  put_bytes(b, "{", 1);
  if (n > 0) {
    member_ref *refs = malloc((size_t)n * sizeof *refs);
    if (!refs) {
      b->oom = true;
      return;
    }
    int i = 0;
    for (const cJSON *c = v->child; c; c = c->next, i++)
      refs[i] = (member_ref){c, i};
    qsort(refs, (size_t)n, sizeof *refs, member_cmp);
    for (i = 0; i < n && !b->oom; i++) {
      if (i) put_bytes(b, ",", 1);
      put_string(b, refs[i].item->string ? refs[i].item->string : "");
      put_bytes(b, ":", 1);
      put_value(b, refs[i].item);
    }
    free(refs);
  }
  put_bytes(b, "}", 1);
}

static void put_value(text_buf *b, const cJSON *v) {
  if (b->oom) return;
  if (cJSON_IsNull(v)) {
    put_str(b, "null");
  } else if (cJSON_IsTrue(v)) {
    put_str(b, "true");
  } else if (cJSON_IsFalse(v)) {
    put_str(b, "false");
  } else if (cJSON_IsNumber(v)) {
    put_number(b, v->valuedouble);
  } else if (cJSON_IsString(v)) {
    put_string(b, v->valuestring ? v->valuestring : "");
  } else if (cJSON_IsRaw(v)) {
    put_str(b, v->valuestring ? v->valuestring : "null");
  } else if (cJSON_IsArray(v)) {
    put_bytes(b, "[", 1);
    for (const cJSON *c = v->child; c && !b->oom; c = c->next) {
      if (c != v->child) put_bytes(b, ",", 1);
      put_value(b, c);
    }
    put_bytes(b, "]", 1);
  } else if (cJSON_IsObject(v)) {
    put_object(b, v);
  } else {
    put_str(b, "null");
  }
}

char *fg_json_canonical(const cJSON *v, size_t *len) {
  text_buf b = {0};
  if (v)
    put_value(&b, v);
  else
    put_str(&b, "null");
  if (b.oom) {
    free(b.text.data);
    return NULL;
  }
  if (len) *len = b.text.len;
  return b.text.data;
}
