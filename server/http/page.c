/*
 * http/page.c -- GET /, /page/app.js, /page/app.css: the page a person
 * looks at (models, check history, one check, run, compare).
 *
 * Design: the three files under server/http/page/ are embedded at build
 * time (server/http/embed.cmake, like the OpenAPI document), so the daemon
 * reads no file at run time and the page loads nothing from any other
 * host. The page is static text built only on the documented /v1 API; the
 * key a person types in stays in the browser (sessionStorage) and is sent
 * as Authorization: Bearer with each API call, so these routes are open
 * (keys.c policy) while every call the page makes is checked as usual.
 *
 * Content-Security-Policy: nothing inline (no script or style in the
 * HTML, no style attributes: the script sets sizes through the CSSOM and
 * SVG attributes, which the policy allows), scripts and styles only from
 * the daemon itself, requests only to the daemon, no frames, no forms
 * posted anywhere, no plugins.
 *
 * Thread use: any connection thread; the embedded arrays are constant.
 */
#include "http/http_internal.h"

#include <stdlib.h>
#include <string.h>

extern const unsigned char fg_page_html[];
extern const size_t fg_page_html_len;
extern const unsigned char fg_page_js[];
extern const size_t fg_page_js_len;
extern const unsigned char fg_page_css[];
extern const size_t fg_page_css_len;

#define FG_PAGE_CSP                                                          \
  "default-src 'none'; script-src 'self'; style-src 'self'; "                \
  "connect-src 'self'; img-src 'self'; base-uri 'none'; "                    \
  "form-action 'none'; frame-ancestors 'none'; object-src 'none'"

void fg_page_headers(struct MHD_Response *mr) {
  MHD_add_response_header(mr, "Content-Security-Policy", FG_PAGE_CSP);
  MHD_add_response_header(mr, "X-Content-Type-Options", "nosniff");
  MHD_add_response_header(mr, "Referrer-Policy", "no-referrer");
  MHD_add_response_header(mr, "X-Frame-Options", "DENY");
}

bool fg_resp_embedded(fg_resp *out, const unsigned char *doc, size_t len,
                      const char *type) {
  char *body = malloc(len + 1);
  if (!body) {
    fg_resp_error(out, 503, FG_ENOMEM, "out of memory copying a document");
    return false;
  }
  memcpy(body, doc, len);
  body[len] = '\0';
  out->status = 200;
  out->body = body;
  out->len = len;
  out->content_type = type;
  return true;
}

/* The page's own files carry the browser headers (fg_page_headers). */
static void send_copy(fg_resp *out, const unsigned char *doc, size_t len,
                      const char *type) {
  if (fg_resp_embedded(out, doc, len, type)) out->page = true;
}

void fg_h_page(fg_req *r, fg_resp *out) {
  (void)r;
  send_copy(out, fg_page_html, fg_page_html_len, "text/html; charset=utf-8");
}

void fg_h_page_js(fg_req *r, fg_resp *out) {
  (void)r;
  send_copy(out, fg_page_js, fg_page_js_len,
            "text/javascript; charset=utf-8");
}

void fg_h_page_css(fg_req *r, fg_resp *out) {
  (void)r;
  send_copy(out, fg_page_css, fg_page_css_len, "text/css; charset=utf-8");
}
