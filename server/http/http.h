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

/* `feasgate keys add|list|revoke` (argv[0] = "keys"; keys_cli.c): 0 done,
 * 1 store or system fault, 3 usage, unknown or duplicate name. */
int fg_keys_command(int argc, char **argv);

/* `feasgate explain MODEL.json REQUEST.json --index I` (argv[0] =
 * "explain"; explain.c): 0 printed, 3 usage or invalid input. */
int fg_explain_command(int argc, char **argv);

/* `feasgate sample-model MODEL.json --scenarios S ...` (argv[0] =
 * "sample-model"; samplemodels.c): 0 written, 3 usage or invalid input. */
int fg_sample_model_command(int argc, char **argv);

/* `feasgate replay --store STORE ID` (argv[0] = "replay"; replay.c): 0
 * every count reproduced, 1 not, 3 usage or input faults. */
int fg_replay_command(int argc, char **argv);

/* `feasgate check --server URL [--key KEY] MODEL_NAME REQUEST.json`
 * (argv[0] = "check"; remote.c): the check run by a daemon, the result
 * printed; 0 pass, 1 fail, 2 inconclusive, 3 anything else. */
int fg_remote_check_command(int argc, char **argv);

/* The `check --summary` table of a result body, at most `max_rows` rows
 * and then how many were left out (summary.c). */
void fg_summary_print(FILE *f, const struct cJSON *res, int max_rows);

/* Line and column (1-based, columns in characters) of byte `offset` of
 * `text`, for malformed-JSON messages (summary.c). */
void fg_text_position(const char *text, size_t len, long long offset,
                      int *line, int *column);

/* The sample-size answer (GET /v1/sample-size, `feasgate sample-size`)
 * for `n` parameters given by name and text: the inputs echoed, "method"
 * and "samples" or "scenarios"/"epsilon" (http/sizes.c). Unknown,
 * repeated, ambiguous, missing or out-of-range parameters are named in
 * `p`. */
fg_status fg_sample_size_json(int n, const char *const *names,
                              const char *const *values, struct cJSON **out,
                              fg_problem *p);

#endif
