/*
 * http/keys.c -- API keys: making and hashing them, the daemon's cache of
 * live keys, and who may call what (roles).
 *
 * Keys
 *   A key is FG_KEY_PREFIX followed by FG_KEY_BYTES random bytes
 *   (getrandom) in unpadded base64url, e.g. "fgk_Q2x...". The store keeps
 *   only a random FG_STORE_KEY_SALT-byte salt and SHA-256(salt || key)
 *   (GnuTLS), so a copy of the store file gives nobody a working key. A
 *   presented key is hashed with every live key's salt and compared in
 *   constant time (gnutls_memcmp), over all live keys without stopping at
 *   a match, so timing tells nothing about which bytes were right. That is
 *   one SHA-256 of ~70 bytes per live key per request: cheap up to
 *   thousands of keys.
 *
 * Roles nest: reader < checker < author < admin (http-api.md "Access").
 *   open     GET/HEAD /v1/health, /v1/ready, /metrics, /v1/openapi.json,
 *            and the page (/, /page/app.js, /page/app.css: static text;
 *            the API calls it makes carry the key a person types in)
 *   reader   every other GET/HEAD
 *   checker  POST checks and comparisons, GET scenarios, DELETE a check
 *            or a comparison
 *   author   POST /v1/models, DELETE /v1/models/{name}
 *   admin    everything else
 *   Each route's least role is a column of router.c's one route table.
 *
 * Enforcement: keys are required as soon as the store holds a live key,
 *   and always when the daemon listens on a non-loopback address without
 *   --allow-keyless (then an empty key table locks everything but the open
 *   routes instead of opening them). The live keys are cached: the cache
 *   is reloaded from the store when older than FG_KEYS_REFRESH_S, or on a
 *   presented key that matches none when the last reload is older than
 *   FG_KEYS_MISS_REFRESH_S, so keys added or revoked while the daemon runs
 *   take effect within a second. When a reload fails the previous cache
 *   stays in use (logged); a cache never loaded fails closed (503).
 *
 * Thread use: fg_key_* anywhere; the keyring is guarded by its own mutex
 * (held across a reload, which is one indexed read of a small table);
 * fg_auth_request on libmicrohttpd's threads.
 */
#include "http/http_internal.h"

#include <gnutls/crypto.h>
#include <gnutls/gnutls.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/random.h>

/* ---- roles ---- */

const char *fg_role_name(fg_role r) {
  switch (r) {
  case FG_ROLE_NONE: return "none";
  case FG_ROLE_READER: return "reader";
  case FG_ROLE_CHECKER: return "checker";
  case FG_ROLE_AUTHOR: return "author";
  case FG_ROLE_ADMIN: return "admin";
  }
  return "none";
}

fg_role fg_role_parse(const char *s) {
  for (int r = FG_ROLE_READER; r <= FG_ROLE_ADMIN; r++)
    if (s && strcmp(s, fg_role_name((fg_role)r)) == 0) return (fg_role)r;
  return FG_ROLE_NONE;
}

bool fg_key_role_valid(const char *s) {
  return fg_role_parse(s) != FG_ROLE_NONE;
}

/* ---- keys ---- */

bool fg_key_name_valid(const char *s) {
  size_t n = strlen(s);
  if (n == 0 || n > FG_NAME_MAX) return false;
  for (size_t i = 0; i < n; i++) {
    char ch = s[i];
    bool ok = (ch >= 'a' && ch <= 'z') || (ch >= 'A' && ch <= 'Z') ||
              (ch >= '0' && ch <= '9') ||
              (i > 0 && (ch == '_' || ch == '.' || ch == '-'));
    if (!ok) return false;
  }
  return true;
}

static const char b64url[] =
    "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789-_";

/* Unpadded base64url of n bytes into out (cap >= 4 * n / 3 + 2). */
static void encode_b64url(const uint8_t *in, size_t n, char *out) {
  size_t o = 0;
  for (size_t i = 0; i < n; i += 3) {
    uint32_t v = (uint32_t)in[i] << 16;
    if (i + 1 < n) v |= (uint32_t)in[i + 1] << 8;
    if (i + 2 < n) v |= in[i + 2];
    out[o++] = b64url[(v >> 18) & 63];
    out[o++] = b64url[(v >> 12) & 63];
    if (i + 1 < n) out[o++] = b64url[(v >> 6) & 63];
    if (i + 2 < n) out[o++] = b64url[v & 63];
  }
  out[o] = '\0';
}

/* All n bytes from the kernel's generator, or false. */
static bool random_bytes(uint8_t *buf, size_t n) {
  size_t got = 0;
  while (got < n) {
    ssize_t r = getrandom(buf + got, n - got, 0);
    if (r <= 0) return false;
    got += (size_t)r;
  }
  return true;
}

fg_status fg_key_hash(const char *text, const uint8_t *salt, uint8_t *hash,
                      fg_problem *p) {
  size_t n = strlen(text);
  if (n > FG_KEY_TEXT_MAX)
    return fg_problem_set(p, FG_EINVAL, "key longer than %d characters",
                          FG_KEY_TEXT_MAX);
  uint8_t buf[FG_STORE_KEY_SALT + FG_KEY_TEXT_MAX];
  memcpy(buf, salt, FG_STORE_KEY_SALT);
  memcpy(buf + FG_STORE_KEY_SALT, text, n);
  int rc = gnutls_hash_fast(GNUTLS_DIG_SHA256, buf, FG_STORE_KEY_SALT + n,
                            hash);
  gnutls_memset(buf, 0, sizeof buf);
  if (rc != 0)
    return fg_problem_set(p, FG_EINTERNAL, "hashing a key (SHA-256): %s",
                          gnutls_strerror(rc));
  return FG_OK;
}

fg_status fg_key_generate(char *text, size_t cap, fg_store_key *k,
                          fg_problem *p) {
  uint8_t secret[FG_KEY_BYTES];
  char enc[FG_KEY_BYTES * 4 / 3 + 4];
  if (cap < sizeof FG_KEY_PREFIX + sizeof enc)
    return fg_problem_set(p, FG_EINTERNAL, "key buffer too small");
  if (!random_bytes(secret, sizeof secret) ||
      !random_bytes(k->salt, sizeof k->salt))
    return fg_problem_set(p, FG_EIO,
                          "the kernel's random generator (getrandom) gave "
                          "no bytes");
  encode_b64url(secret, sizeof secret, enc);
  snprintf(text, cap, "%s%s", FG_KEY_PREFIX, enc);
  gnutls_memset(secret, 0, sizeof secret);
  gnutls_memset(enc, 0, sizeof enc);
  return fg_key_hash(text, k->salt, k->hash, p);
}

/* ---- the keyring (the daemon's cache of live keys) ---- */

struct fg_keyring {
  fg_store *store;
  pthread_mutex_t lock;
  fg_store_key *keys; /* live keys; salt and hash only are used */
  int n;
  bool loaded;
  double loaded_at; /* monotonic seconds of the last reload attempt */
};

/* Reload under lock. False when the store could not be read (the old
 * cache stays). */
static bool reload_locked(fg_keyring *k) {
  fg_problem p;
  fg_problem_init(&p);
  fg_store_key *keys = NULL;
  int n = 0;
  k->loaded_at = fg_time_monotonic();
  if (fg_store_list_keys(k->store, true, &keys, &n, &p) != FG_OK) {
    fg_log_msg(FG_LOG_WARN, "keys_unreadable",
               "reading the live keys: %s; %s", p.detail,
               k->loaded ? "the previous list stays in use"
                         : "keyed routes answer 503 until it can be read");
    return false;
  }
  free(k->keys);
  k->keys = keys;
  k->n = n;
  k->loaded = true;
  return true;
}

fg_status fg_keyring_new(fg_store *store, fg_keyring **out, fg_problem *p) {
  *out = NULL;
  fg_keyring *k = calloc(1, sizeof *k);
  if (!k) return fg_problem_set(p, FG_ENOMEM, "keys: out of memory");
  k->store = store;
  pthread_mutex_init(&k->lock, NULL);
  fg_status st = fg_store_list_keys(store, true, &k->keys, &k->n, p);
  if (st != FG_OK) {
    fg_keyring_free(k);
    return st;
  }
  k->loaded = true;
  k->loaded_at = fg_time_monotonic();
  *out = k;
  return FG_OK;
}

void fg_keyring_free(fg_keyring *k) {
  if (!k) return;
  free(k->keys);
  pthread_mutex_destroy(&k->lock);
  free(k);
}

int fg_keyring_live(fg_keyring *k) {
  pthread_mutex_lock(&k->lock);
  if (fg_time_monotonic() - k->loaded_at >= FG_KEYS_REFRESH_S) reload_locked(k);
  int n = k->loaded ? k->n : -1;
  pthread_mutex_unlock(&k->lock);
  return n;
}

/* Index of the live key matching `text`, -1 when none. Under lock. Looks
 * at every key whatever matches, so its time depends only on the count. */
static int match_locked(fg_keyring *k, const char *text) {
  int found = -1;
  for (int i = 0; i < k->n; i++) {
    uint8_t h[FG_STORE_KEY_HASH];
    fg_problem p;
    fg_problem_init(&p);
    if (fg_key_hash(text, k->keys[i].salt, h, &p) != FG_OK) continue;
    if (gnutls_memcmp(h, k->keys[i].hash, sizeof h) == 0) found = i;
  }
  return found;
}

fg_auth_result fg_keyring_check(fg_keyring *k, const char *text,
                                char name[FG_NAME_MAX + 1], fg_role *role) {
  name[0] = '\0';
  *role = FG_ROLE_NONE;
  pthread_mutex_lock(&k->lock);
  double age = fg_time_monotonic() - k->loaded_at;
  if (age >= FG_KEYS_REFRESH_S) reload_locked(k);
  if (!k->loaded) {
    pthread_mutex_unlock(&k->lock);
    return FG_AUTH_UNAVAILABLE;
  }
  int i = match_locked(k, text);
  if (i < 0 && age < FG_KEYS_REFRESH_S &&
      fg_time_monotonic() - k->loaded_at >= FG_KEYS_MISS_REFRESH_S &&
      reload_locked(k))
    i = match_locked(k, text); /* perhaps added since the last reload */
  fg_auth_result res = FG_AUTH_WRONG;
  if (i >= 0) {
    snprintf(name, FG_NAME_MAX + 1, "%s", k->keys[i].name);
    *role = fg_role_parse(k->keys[i].role);
    res = FG_AUTH_OK;
  }
  pthread_mutex_unlock(&k->lock);
  return res;
}

/* ---- per request ---- */

/* The token of "Bearer <token>" (scheme case-insensitive), or NULL when
 * the header has another form. */
static const char *bearer_token(const char *h, char *buf, size_t cap) {
  while (*h == ' ' || *h == '\t')
    h++;
  if (strncasecmp(h, "Bearer", 6) != 0 || (h[6] != ' ' && h[6] != '\t'))
    return NULL;
  h += 6;
  while (*h == ' ' || *h == '\t')
    h++;
  size_t n = 0;
  while (h[n] && h[n] != ' ' && h[n] != '\t')
    n++;
  const char *rest = h + n;
  while (*rest == ' ' || *rest == '\t')
    rest++;
  if (n == 0 || n >= cap || *rest) return NULL;
  for (size_t i = 0; i < n; i++) {
    char ch = h[i];
    /* RFC 6750 token68 characters */
    bool ok = (ch >= 'a' && ch <= 'z') || (ch >= 'A' && ch <= 'Z') ||
              (ch >= '0' && ch <= '9') || strchr("-._~+/=", ch);
    if (!ok) return NULL;
  }
  memcpy(buf, h, n);
  buf[n] = '\0';
  return buf;
}

/* A 401 or 403 problem document. */
static void deny(fg_resp *out, int status, const char *kind, const char *fmt,
                 ...) __attribute__((format(printf, 4, 5)));
static void deny(fg_resp *out, int status, const char *kind, const char *fmt,
                 ...) {
  fg_problem p;
  fg_problem_init(&p);
  snprintf(p.title, sizeof p.title, "%s",
           status == 401 ? "unauthorized" : "forbidden");
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(p.detail, sizeof p.detail, fmt, ap);
  va_end(ap);
  cJSON *o = fg_problem_json(&p, status);
  char type[64];
  snprintf(type, sizeof type, "urn:feasgate:problem:%s", kind);
  if (o) cJSON_ReplaceItemInObject(o, "type", cJSON_CreateString(type));
  char *text = o ? cJSON_PrintUnformatted(o) : NULL;
  cJSON_Delete(o);
  free(out->body);
  out->body = text;
  out->len = text ? strlen(text) : 0;
  out->status = status;
  out->content_type = FG_CT_PROBLEM;
  if (status == 401)
    snprintf(out->www_authenticate, sizeof out->www_authenticate,
             "Bearer realm=\"feasgate\"");
}

bool fg_auth_request(fg_req *r, bool routed, fg_resp *out) {
  fg_server *srv = r->srv;
  r->key_name[0] = '\0';
  /* An unknown path or method needs some key, so that only key holders
   * learn which paths exist (404/405). */
  fg_role need =
      routed && r->route ? r->role : FG_ROLE_READER;
  if (need == FG_ROLE_NONE) return true;
  int live = fg_keyring_live(srv->keys);
  if (live < 0) {
    fg_resp_error(out, 503, FG_EIO,
                  "the server cannot read its keys from the store; try again "
                  "shortly");
    return false;
  }
  if (live == 0 && !srv->keys_required) return true; /* no keys: open */
  const char *h =
      MHD_lookup_connection_value(r->conn, MHD_HEADER_KIND, "Authorization");
  if (!h) {
    deny(out, 401, "unauthorized",
         "%s %.200s needs an API key: send Authorization: Bearer <key>",
         r->method, r->path);
    return false;
  }
  char buf[FG_KEY_TEXT_MAX + 1];
  const char *token = bearer_token(h, buf, sizeof buf);
  if (!token) {
    deny(out, 401, "unauthorized",
         "the Authorization header is not of the form 'Bearer <key>' with a "
         "key of at most %d characters",
         FG_KEY_TEXT_MAX);
    return false;
  }
  fg_role role;
  fg_auth_result res = fg_keyring_check(srv->keys, token, r->key_name, &role);
  gnutls_memset(buf, 0, sizeof buf);
  if (res == FG_AUTH_UNAVAILABLE) {
    fg_resp_error(out, 503, FG_EIO,
                  "the server cannot read its keys from the store; try again "
                  "shortly");
    return false;
  }
  if (res != FG_AUTH_OK) {
    deny(out, 401, "unauthorized",
         live == 0 ? "this server holds no live key; an administrator adds "
                     "one with feasgate keys add"
                   : "the key is not a live key of this server (wrong or "
                     "revoked)");
    return false;
  }
  if (role < need) {
    deny(out, 403, "forbidden",
         "key '%s' has role %s; %s %.200s needs role %s or above",
         r->key_name, fg_role_name(role), r->method, r->path,
         fg_role_name(need));
    return false; /* key_name stays: the log names who was refused */
  }
  return true;
}
