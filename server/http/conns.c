/*
 * http/conns.c -- connections: what the daemon keeps per connection, the
 * global and per-client limits, and the header timeout.
 *
 * Design
 *   libmicrohttpd tells us of every connection it accepts and closes
 *   (MHD_OPTION_NOTIFY_CONNECTION); fg_http_conn_notify makes an fg_conn
 *   (the connection's socket context) and counts the connection, in all
 *   and for its client address. A connection that finds either count
 *   already at its limit (--max-connections, --max-connections-per-client)
 *   is marked `over`: its first request is answered 503 with Retry-After
 *   and "Connection: close" (fg_http_conn_admit), so a client learns why
 *   instead of seeing a silent close. libmicrohttpd itself is given each
 *   limit plus FG_HTTP_CONNECTIONS_OVERFLOW (MHD_OPTION_CONNECTION_LIMIT,
 *   MHD_OPTION_PER_IP_CONNECTION_LIMIT): past those it closes new
 *   connections at accept time without an answer -- the only way left
 *   when even the room kept for answering 503 is taken.
 *
 *   Header timeout: libmicrohttpd's connection timeout
 *   (MHD_OPTION_CONNECTION_TIMEOUT, inactivity) is set to
 *   FG_HTTP_HEADER_TIMEOUT_S for every connection, and raised to
 *   FG_HTTP_IDLE_TIMEOUT_S for a connection once the headers of its first
 *   request are in (fg_http_conn_admit), so a socket that never sends a
 *   request (or trickles one slower than a byte per timeout) is closed
 *   after the short timeout.
 *
 *   Clients are counted in a small array of (address, count) searched
 *   linearly: one entry per distinct client address with open
 *   connections, at most --max-connections + FG_HTTP_CONNECTIONS_OVERFLOW.
 *
 * Thread use: the notify callback runs on libmicrohttpd's threads; the
 * counts are under srv->conn_lock (no other work is done under it).
 */
#include "http/http_internal.h"

#include <netinet/in.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>

/* The client address of `conn` as comparable bytes (IPv4-mapped IPv6 as
 * IPv4), length in *len; 0 when unknown. */
static void client_key(struct MHD_Connection *conn,
                       unsigned char key[FG_CLIENT_KEY], size_t *len) {
  *len = 0;
  const union MHD_ConnectionInfo *ci =
      MHD_get_connection_info(conn, MHD_CONNECTION_INFO_CLIENT_ADDRESS);
  const struct sockaddr *sa = ci ? ci->client_addr : NULL;
  if (!sa) return;
  if (sa->sa_family == AF_INET) {
    const struct sockaddr_in *in = (const struct sockaddr_in *)sa;
    memcpy(key, &in->sin_addr, 4);
    *len = 4;
  } else if (sa->sa_family == AF_INET6) {
    const struct sockaddr_in6 *in6 = (const struct sockaddr_in6 *)sa;
    if (IN6_IS_ADDR_V4MAPPED(&in6->sin6_addr)) {
      memcpy(key, in6->sin6_addr.s6_addr + 12, 4);
      *len = 4;
    } else {
      memcpy(key, in6->sin6_addr.s6_addr, 16);
      *len = 16;
    }
  }
}

static fg_client *find_client(fg_server *srv, const unsigned char *key,
                              size_t len) {
  for (int i = 0; i < srv->nclients; i++)
    if (srv->clients[i].len == len && memcmp(srv->clients[i].key, key, len) == 0)
      return &srv->clients[i];
  return NULL;
}

bool fg_http_conns_init(fg_server *srv) {
  pthread_mutex_init(&srv->conn_lock, NULL);
  srv->clients_cap =
      srv->cfg.max_connections + FG_HTTP_CONNECTIONS_OVERFLOW + 1;
  srv->clients = calloc((size_t)srv->clients_cap, sizeof *srv->clients);
  return srv->clients != NULL;
}

void fg_http_conns_free(fg_server *srv) {
  if (!srv->clients) return;
  free(srv->clients);
  srv->clients = NULL;
  pthread_mutex_destroy(&srv->conn_lock);
}

void fg_http_conn_notify(void *cls, struct MHD_Connection *conn,
                         void **socket_context,
                         enum MHD_ConnectionNotificationCode code) {
  fg_server *srv = cls;
  if (code == MHD_CONNECTION_NOTIFY_STARTED) {
    fg_conn *c = calloc(1, sizeof *c);
    *socket_context = c;
    if (!c) return; /* not counted; served as if within the limits */
    client_key(conn, c->key, &c->len);
    pthread_mutex_lock(&srv->conn_lock);
    fg_client *cl = find_client(srv, c->key, c->len);
    if (!cl && srv->nclients < srv->clients_cap) {
      cl = &srv->clients[srv->nclients++];
      memcpy(cl->key, c->key, c->len);
      cl->len = c->len;
      cl->count = 0;
    }
    if (srv->open >= srv->cfg.max_connections)
      c->over = FG_OVER_ALL;
    else if (cl && cl->count >= srv->cfg.max_connections_per_client)
      c->over = FG_OVER_CLIENT;
    srv->open++;
    if (cl) {
      cl->count++;
      c->counted = true;
    }
    pthread_mutex_unlock(&srv->conn_lock);
  } else if (code == MHD_CONNECTION_NOTIFY_CLOSED) {
    fg_conn *c = *socket_context;
    *socket_context = NULL;
    if (!c) return;
    pthread_mutex_lock(&srv->conn_lock);
    srv->open--;
    fg_client *cl = c->counted ? find_client(srv, c->key, c->len) : NULL;
    if (cl && --cl->count == 0) *cl = srv->clients[--srv->nclients];
    pthread_mutex_unlock(&srv->conn_lock);
    free(c);
  }
}

int fg_http_conns_open(fg_server *srv) {
  pthread_mutex_lock(&srv->conn_lock);
  int n = srv->open;
  pthread_mutex_unlock(&srv->conn_lock);
  return n;
}

bool fg_http_conn_admit(fg_req *r, fg_resp *out) {
  fg_conn *c = fg_http_conn_of(r->conn);
  if (c && c->over) {
    r->route = "(connection limit)";
    if (c->over == FG_OVER_ALL)
      fg_resp_error(out, 503, FG_EBUSY,
                    "the server has max_connections = %d connections open; "
                    "this one is closed, try again shortly",
                    r->srv->cfg.max_connections);
    else
      fg_resp_error(out, 503, FG_EBUSY,
                    "this client has max_connections_per_client = %d "
                    "connections open; this one is closed, reuse one of "
                    "them or try again shortly",
                    r->srv->cfg.max_connections_per_client);
    out->close = true;
    atomic_fetch_add(&r->srv->conns_refused, 1);
    return false;
  }
  /* Headers in: from now on the long idle timeout. */
  MHD_set_connection_option(r->conn, MHD_CONNECTION_OPTION_TIMEOUT,
                            (unsigned int)FG_HTTP_IDLE_TIMEOUT_S);
  return true;
}
