/*
 * http/strict.c -- what the daemon refuses before any handler sees a
 * request, and the UTF-8 rule for request text that it echoes.
 *
 * Design
 *   Framing: a request with more than one Content-Length header (equal
 *   values included), or with Content-Length and Transfer-Encoding both,
 *   is refused with a 400 problem on the access handler's first call:
 *   two readers of such a request (a proxy and this daemon) may disagree
 *   on where its body ends (RFC 9112 section 6.3). A single header with a
 *   list value ("2, 2") never reaches us: libmicrohttpd answers it with
 *   its own 400 and closes the connection.
 *
 *   NUL bytes: libmicrohttpd percent-decodes the path and the query
 *   (MHD_http_unescape), and "%00" becomes a NUL that silently cuts the
 *   path or a value short. fg_http_unescape is our unescape callback
 *   (MHD_OPTION_UNESCAPE_CALLBACK): it decodes exactly as libmicrohttpd
 *   does and, when an escape decodes to NUL, marks the connection (its
 *   fg_conn, the socket context set up by fg_http_conn_notify). The first
 *   call of the access handler reads and clears the mark and answers 400.
 *   The callback runs for the request line and its query, all before the
 *   first call of the access handler of the same request.
 *   (An fg_conn is made per connection by conns.c.)
 *
 *   Echoed text: request text (the path, parameter values, names) can
 *   reach a problem document or a log line. cJSON escapes the characters
 *   JSON requires (quote, backslash, controls) but passes other bytes
 *   through, so an invalid UTF-8 sequence from a path would make the
 *   output invalid JSON text. fg_json_utf8_fix rewrites every string of
 *   a cJSON tree (names included) with each maximal invalid subpart
 *   (Unicode 15, section 3.9, "U+FFFD substitution of maximal subparts")
 *   replaced by U+FFFD; valid text is untouched.
 *
 * Thread use: the callbacks run on libmicrohttpd's threads; an fg_conn is
 * touched only by the thread serving its connection.
 */
#include "http/http_internal.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

/* ---- per-connection state (the fg_conn comes from conns.c) ---- */

fg_conn *fg_http_conn_of(struct MHD_Connection *conn) {
  const union MHD_ConnectionInfo *ci =
      MHD_get_connection_info(conn, MHD_CONNECTION_INFO_SOCKET_CONTEXT);
  return ci ? ci->socket_context : NULL;
}

static int hex_value(char ch) {
  if (ch >= '0' && ch <= '9') return ch - '0';
  if (ch >= 'a' && ch <= 'f') return ch - 'a' + 10;
  if (ch >= 'A' && ch <= 'F') return ch - 'A' + 10;
  return -1;
}

size_t fg_http_unescape(void *cls, struct MHD_Connection *conn, char *s) {
  /* An escape decodes to NUL exactly when it is '%' and two hex digits of
   * value 0; MHD_http_unescape decodes every "%HH" and leaves the rest. */
  for (const char *q = s; *q; q++) {
    if (q[0] != '%') continue;
    int hi = hex_value(q[1]);
    int lo = hi < 0 ? -1 : hex_value(q[2]);
    if (hi < 0 || lo < 0) continue;
    if (hi == 0 && lo == 0) {
      fg_conn *c = fg_http_conn_of(conn);
      if (c) c->nul_seen = true;
      break;
    }
    q += 2;
  }
  return MHD_http_unescape(s);
}

/* ---- framing headers ---- */

typedef struct framing {
  int content_length, transfer_encoding;
} framing;

static enum MHD_Result count_header(void *cls, enum MHD_ValueKind kind,
                                    const char *key, const char *value) {
  framing *f = cls;
  if (key && strcasecmp(key, MHD_HTTP_HEADER_CONTENT_LENGTH) == 0)
    f->content_length++;
  if (key && strcasecmp(key, MHD_HTTP_HEADER_TRANSFER_ENCODING) == 0)
    f->transfer_encoding++;
  return MHD_YES;
}

bool fg_http_request_strict(fg_req *r, fg_resp *out) {
  framing f = {0};
  MHD_get_connection_values(r->conn, MHD_HEADER_KIND, count_header, &f);
  if (f.content_length > 1) {
    r->route = "(bad framing)";
    fg_resp_error(out, 400, FG_EINVAL,
                  "the request has %d Content-Length headers; send one",
                  f.content_length);
    return false;
  }
  if (f.content_length > 0 && f.transfer_encoding > 0) {
    r->route = "(bad framing)";
    fg_resp_error(out, 400, FG_EINVAL,
                  "the request has both Content-Length and "
                  "Transfer-Encoding; send one of them");
    return false;
  }
  fg_conn *c = fg_http_conn_of(r->conn);
  if (c && c->nul_seen) {
    c->nul_seen = false;
    r->route = "(NUL in request)";
    fg_resp_error(out, 400, FG_EINVAL,
                  "the path or a query parameter contains a NUL byte "
                  "(%%00); no name or value may hold one");
    return false;
  }
  return true;
}

/* ---- UTF-8 of echoed text ---- */

/* Length of the valid UTF-8 sequence at s (lead byte >= 0x80), or 0; when
 * 0, *bad receives the length of the maximal invalid subpart (>= 1). */
static size_t utf8_valid(const unsigned char *s, size_t *bad) {
  unsigned char c = s[0];
  size_t n;
  unsigned char lo = 0x80, hi = 0xbf; /* allowed range of the 2nd byte */
  if (c >= 0xc2 && c <= 0xdf) {
    n = 2;
  } else if (c >= 0xe0 && c <= 0xef) {
    n = 3;
    if (c == 0xe0) lo = 0xa0;          /* no overlong forms */
    if (c == 0xed) hi = 0x9f;          /* no surrogates */
  } else if (c >= 0xf0 && c <= 0xf4) {
    n = 4;
    if (c == 0xf0) lo = 0x90;          /* no overlong forms */
    if (c == 0xf4) hi = 0x8f;          /* nothing above U+10FFFF */
  } else {
    *bad = 1;
    return 0;
  }
  for (size_t k = 1; k < n; k++) {
    unsigned char b = s[k];
    bool ok = k == 1 ? (b >= lo && b <= hi) : (b & 0xc0u) == 0x80u;
    if (!ok) {
      *bad = k; /* the lead and the good continuation bytes so far */
      return 0;
    }
  }
  return n;
}

bool fg_utf8_valid(const char *s) {
  const unsigned char *p = (const unsigned char *)s;
  while (*p) {
    if (*p < 0x80) {
      p++;
      continue;
    }
    size_t bad = 0, n = utf8_valid(p, &bad);
    if (n == 0) return false;
    p += n;
  }
  return true;
}

char *fg_utf8_fix(const char *s) {
  size_t len = strlen(s);
  /* each invalid byte at most becomes 3 bytes (U+FFFD) */
  char *out = malloc(3 * len + 1);
  if (!out) return NULL;
  const unsigned char *p = (const unsigned char *)s;
  size_t o = 0;
  while (*p) {
    if (*p < 0x80) {
      out[o++] = (char)*p++;
      continue;
    }
    size_t bad = 0, n = utf8_valid(p, &bad);
    if (n > 0) {
      memcpy(out + o, p, n);
      o += n;
      p += n;
    } else {
      memcpy(out + o, "\xef\xbf\xbd", 3);
      o += 3;
      p += bad;
    }
  }
  out[o] = '\0';
  return out;
}

void fg_json_utf8_fix(cJSON *item) {
  for (; item; item = item->next) {
    if (item->string && !fg_utf8_valid(item->string)) {
      char *fixed = fg_utf8_fix(item->string);
      if (fixed && !(item->type & cJSON_StringIsConst)) {
        cJSON_free(item->string);
        item->string = fixed;
      } else {
        free(fixed);
      }
    }
    if (cJSON_IsString(item) && item->valuestring &&
        !fg_utf8_valid(item->valuestring)) {
      char *fixed = fg_utf8_fix(item->valuestring);
      if (fixed) {
        cJSON_free(item->valuestring);
        item->valuestring = fixed;
      }
    }
    if (item->child) fg_json_utf8_fix(item->child);
  }
}
