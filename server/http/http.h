/*
 * http/http.h -- the HTTP daemon: `feasgate serve` (prefix fg_serve_,
 * fg_http_).
 *
 * main.c hands the whole `serve` subcommand to fg_serve_command(); all the
 * rest of the HTTP side (libmicrohttpd daemon, routing, problem documents,
 * handlers, the log) is internal to this folder (http_internal.h).
 *
 * Configuration: every setting has a flag and an environment twin; the
 * twin is read first and the flag wins. Every value is range-checked before
 * anything starts, and a bad one ends the command with exit status 3 and a
 * message naming the flag (or variable), what was expected and what was
 * found.
 *
 *   flag             twin                     default
 *   --listen H:P     FEASGATE_LISTEN          127.0.0.1:8080 (port 0: any)
 *   --store URL      FEASGATE_STORE           sqlite:var/feasgate.db
 *   --workers N      FEASGATE_WORKERS         online cores (1..FG_WORKERS_MAX)
 *   --chunk N        FEASGATE_CHUNK           FG_CHUNK_DEFAULT
 *   --queue N        FEASGATE_QUEUE           FG_HTTP_QUEUE_DEFAULT
 *   --max-body B     FEASGATE_MAX_BODY        FG_MAX_BODY_DEFAULT (K/M/G ok)
 *   --max-samples N  FEASGATE_MAX_SAMPLES     FG_MAX_SAMPLES_DEFAULT
 *   --max-scenarios  FEASGATE_MAX_SCENARIOS   FG_MAX_SCENARIOS_DEFAULT
 *   --max-wait S     FEASGATE_MAX_WAIT        60 seconds
 *   --grace S        FEASGATE_GRACE           FG_HTTP_GRACE_DEFAULT seconds
 *   --log-level L    FEASGATE_LOG_LEVEL       info (debug, info, warn, error)
 *   --max-check-time FEASGATE_MAX_CHECK_TIME  3600 seconds (deadline of a check)
 *   --tls-cert FILE  FEASGATE_TLS_CERT        none (PEM; HTTPS with --tls-key)
 *   --tls-key FILE   FEASGATE_TLS_KEY         none (PEM private key)
 *   --allow-keyless  FEASGATE_ALLOW_KEYLESS   off (allow a non-loopback
 *                                             listener with no key)
 *   --max-connections N             FEASGATE_MAX_CONNECTIONS
 *                                   FG_HTTP_CONNECTIONS_DEFAULT
 *   --max-connections-per-client N  FEASGATE_MAX_CONNECTIONS_PER_CLIENT
 *                                   FG_HTTP_CONNECTIONS_PER_CLIENT_DEFAULT
 *                                   (at most --max-connections)
 *
 * Exit status of fg_serve_command: 0 after a clean stop (SIGINT/SIGTERM),
 * 3 for bad usage or a bad setting (an unreadable TLS file included, and
 * a non-loopback --listen while the store holds no live key and
 * --allow-keyless is not given), 1 when start-up fails for another
 * reason (address in use, store cannot be opened, a SQLite store that
 * another daemon serves).
 *
 * Thread use: fg_serve_command runs on the main thread and owns the
 * process's signal mask while it runs.
 */
#ifndef FG_HTTP_H
#define FG_HTTP_H

#include "feasgate/engine.h"
#include "feasgate/limits.h"
#include "store/store.h"

#include <stdbool.h>
#include <stddef.h>
#include <stdio.h>
#include <stdint.h>


typedef enum fg_log_level {
  FG_LOG_DEBUG = 0,
  FG_LOG_INFO,
  FG_LOG_WARN,
  FG_LOG_ERROR
} fg_log_level;

typedef struct fg_http_config {
  char host[FG_HTTP_HOST_MAX + 1]; /* without IPv6 brackets */
  unsigned port;                   /* 0: the kernel picks one */
  char store[FG_HTTP_URL_MAX + 1];
  int workers, chunk, queue;
  uint64_t max_body;
  fg_request_limits limits; /* max_samples, max_scenarios, max_wait_s */
  double grace_s;
  fg_log_level log_level;
  double max_check_s;                 /* --max-check-time */
  char tls_cert[FG_HTTP_URL_MAX + 1]; /* "" = plain HTTP */
  char tls_key[FG_HTTP_URL_MAX + 1];
  bool allow_keyless; /* --allow-keyless */
  int max_connections;            /* --max-connections */
  int max_connections_per_client; /* --max-connections-per-client */
} fg_http_config;

/* Defaults, then environment twins, then flags (argv[0] is the subcommand
 * name and is skipped). Returns 0 when the configuration is complete, 1 when
 * --help was asked (usage printed to stdout), -1 on a bad value (message
 * in err). */
int fg_http_config_parse(int argc, char **argv, fg_http_config *cfg, char *err,
                         size_t errcap);

/* The whole `feasgate serve` subcommand (argv[0] = "serve"). */
int fg_serve_command(int argc, char **argv);

/* ---- for the command line (cli/) ---- */
/* Limits for re-reading a request that was accepted once: the hard caps,
 * so a request logged under a larger --max-samples still parses after a
 * restart with a smaller one (replay.c). */
void fg_replay_limits(fg_request_limits *lim);
/* False, with a 409 problem, when a stored check has no counts to compare
 * a replay with (still running, interrupted, or no result) (replay.c). */
bool fg_replay_has_counts(const struct fg_store_check *c, fg_problem *p);
/* The replay answer {"check", "replay", "reproduced", "differences",
 * "result"}; takes rep_body (replay.c). */
struct cJSON *fg_replay_answer(const char *orig_id, const char *replay_id,
                               const struct cJSON *orig_body,
                               struct cJSON *rep_body, bool ended);
/* What a replay of a logged check runs: the stored check and its
 * original result, the model version, the stored request parsed with
 * the hard caps and the seed it ran with (replay.c). */
typedef struct fg_replay_source {
  fg_store_check check;
  bool have_check, have_req;
  fg_store_version version;
  fg_model *model;
  struct cJSON *orig, *body;
  fg_check_request req;
} fg_replay_source;
/* Load it for check `id` from `st`; the model through srv's cache, or
 * compiled from the stored document when srv is NULL (offline). 404 for
 * an unknown check, 409 when it has no counts (fg_replay_has_counts). */
struct fg_server;
fg_status fg_replay_load(struct fg_server *srv, fg_store *st,
                         const char *id, fg_replay_source *src,
                         fg_problem *p);
void fg_replay_source_clear(fg_replay_source *src);
/* A sample index: digits only, at most 20 of them (explain.c). */
bool fg_explain_parse_index(const char *s, uint64_t *out);
struct fg_store_key;
/* [A-Za-z0-9][A-Za-z0-9_.-]{0,63} (keys.c). */
bool fg_key_name_valid(const char *s);
/* reader, checker, author or admin (keys.c). */
bool fg_key_role_valid(const char *s);
/* A new key's text (cap >= 64) and its salt and hash in *k (keys.c). */
fg_status fg_key_generate(char *text, size_t cap, struct fg_store_key *k,
                          fg_problem *p);

#endif
