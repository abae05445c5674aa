/*
 * http/listen.c -- what `feasgate serve` needs before libmicrohttpd
 * starts: the listening socket (bound by us, so that port 0 resolves to
 * the address actually bound, logged as the first line), whether it is
 * loopback (a keyless daemon may only listen there), and the TLS files
 * read into memory (at most FG_HTTP_TLS_FILE_MAX bytes each, the key
 * wiped when freed).
 *
 * Thread use: the main thread, at start-up.
 */
#include "http/http_internal.h"

#include <arpa/inet.h>
#include <errno.h>
#include <netdb.h>
#include <netinet/in.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <unistd.h>

int fg_http_bind_listener(const fg_http_config *cfg, char *addr, size_t cap,
                         char *err, size_t errcap) {
  struct addrinfo hints = {.ai_family = AF_UNSPEC,
                           .ai_socktype = SOCK_STREAM,
                           .ai_flags = AI_PASSIVE | AI_NUMERICSERV};
  struct addrinfo *res = NULL;
  char port[8];
  snprintf(port, sizeof port, "%u", cfg->port);
  int rc = getaddrinfo(cfg->host, port, &hints, &res);
  if (rc != 0) {
    snprintf(err, errcap, "--listen %s:%u: cannot resolve the host: %s",
             cfg->host, cfg->port, gai_strerror(rc));
    return -1;
  }
  int fd = -1, saved = 0;
  for (struct addrinfo *ai = res; ai; ai = ai->ai_next) {
    fd = socket(ai->ai_family, ai->ai_socktype | SOCK_CLOEXEC, ai->ai_protocol);
    if (fd < 0) {
      saved = errno;
      continue;
    }
    int one = 1;
    setsockopt(fd, SOL_SOCKET, SO_REUSEADDR, &one, sizeof one);
    if (bind(fd, ai->ai_addr, ai->ai_addrlen) == 0 && listen(fd, 128) == 0)
      break;
    saved = errno;
    close(fd);
    fd = -1;
  }
  freeaddrinfo(res);
  if (fd < 0) {
    snprintf(err, errcap, "--listen %s:%u: cannot listen: %s", cfg->host,
             cfg->port, strerror(saved));
    return -1;
  }
  struct sockaddr_storage ss;
  socklen_t len = sizeof ss;
  char host[INET6_ADDRSTRLEN] = "?";
  unsigned bound = 0;
  if (getsockname(fd, (struct sockaddr *)&ss, &len) == 0) {
    if (ss.ss_family == AF_INET) {
      struct sockaddr_in *in = (struct sockaddr_in *)&ss;
      inet_ntop(AF_INET, &in->sin_addr, host, sizeof host);
      bound = ntohs(in->sin_port);
      snprintf(addr, cap, "%s:%u", host, bound);
    } else if (ss.ss_family == AF_INET6) {
      struct sockaddr_in6 *in6 = (struct sockaddr_in6 *)&ss;
      inet_ntop(AF_INET6, &in6->sin6_addr, host, sizeof host);
      bound = ntohs(in6->sin6_port);
      snprintf(addr, cap, "[%s]:%u", host, bound);
    }
  }
  return fd;
}

/* True when the socket is bound to a loopback address (127.0.0.0/8, ::1,
 * or ::ffff:127.x.y.z). */
bool fg_http_bound_to_loopback(int fd) {
  struct sockaddr_storage ss;
  socklen_t len = sizeof ss;
  if (getsockname(fd, (struct sockaddr *)&ss, &len) != 0) return false;
  if (ss.ss_family == AF_INET) {
    const struct sockaddr_in *in = (const struct sockaddr_in *)&ss;
    return (ntohl(in->sin_addr.s_addr) >> 24) == 127;
  }
  if (ss.ss_family == AF_INET6) {
    const struct in6_addr *a = &((const struct sockaddr_in6 *)&ss)->sin6_addr;
    if (IN6_IS_ADDR_LOOPBACK(a)) return true;
    return IN6_IS_ADDR_V4MAPPED(a) && a->s6_addr[12] == 127;
  }
  return false;
}

/* A whole PEM file as a NUL-terminated string; NULL with err set. */
char *fg_http_read_pem(const char *flag, const char *path, char *err,
                      size_t errcap) {
  FILE *f = fopen(path, "rb");
  if (!f) {
    snprintf(err, errcap, "%s %s: cannot read it: %s", flag, path,
             strerror(errno));
    return NULL;
  }
  char *buf = malloc(FG_HTTP_TLS_FILE_MAX + 1);
  size_t n = buf ? fread(buf, 1, FG_HTTP_TLS_FILE_MAX + 1, f) : 0;
  bool bad = ferror(f) != 0;
  fclose(f);
  if (!buf || bad || n == 0 || n > FG_HTTP_TLS_FILE_MAX) {
    snprintf(err, errcap, "%s %s: %s", flag, path,
             !buf  ? "out of memory"
             : bad ? "read error"
             : n == 0
                 ? "the file is empty; expected PEM text"
                 : "larger than FG_HTTP_TLS_FILE_MAX (1 MiB); expected PEM");
    free(buf);
    return NULL;
  }
  buf[n] = '\0';
  if (!strstr(buf, "-----BEGIN ")) {
    snprintf(err, errcap, "%s %s: no PEM block (-----BEGIN ...) in it",
             flag, path);
    free(buf);
    return NULL;
  }
  return buf;
}

/* Free PEM text after wiping it (the key is a secret). */
void fg_http_free_pem(char *pem) {
  if (!pem) return;
  volatile char *v = pem;
  while (*v)
    *v++ = '\0';
  free(pem);
}
