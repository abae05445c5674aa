/*
 * http/config.c -- `feasgate serve` settings: defaults, environment twins,
 * flags, range checks.
 *
 * Design: one table (`options`) lists every setting with its flag, its
 * environment twin, its kind and its bounds; the environment is applied
 * first and the flags after, so a flag wins over its twin. A value is
 * checked when it is read, against the bounds in the table, and the
 * message names where it came from ("--workers" or "FEASGATE_WORKERS"),
 * what was expected and what was found. New settings go into the table.
 *
 * Thread use: main thread, before anything starts.
 */
#include "http/http.h"
#include "store/store.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

typedef enum opt_kind {
  OPT_LISTEN,
  OPT_STRING,
  OPT_INT,
  OPT_U64,
  OPT_BYTES,
  OPT_SECONDS,
  OPT_LEVEL,
  OPT_BOOL /* a flag alone is true; --flag=V and the twin take a value */
} opt_kind;

typedef struct opt_def {
  const char *flag;
  const char *env;
  opt_kind kind;
  size_t offset; /* into fg_http_config */
  double min, max;
  const char *help;
} opt_def;

#define OFF(field) offsetof(fg_http_config, field)

static const opt_def options[] = {
    {"--listen", "FEASGATE_LISTEN", OPT_LISTEN, 0, 0, 65535,
     "HOST:PORT to listen on (port 0: any free port)"},
    {"--store", "FEASGATE_STORE", OPT_STRING, OFF(store), 1, FG_HTTP_URL_MAX,
     "store URL, sqlite:PATH or postgresql://..."},
    {"--workers", "FEASGATE_WORKERS", OPT_INT, OFF(workers), 1, FG_WORKERS_MAX,
     "simulation worker threads"},
    {"--chunk", "FEASGATE_CHUNK", OPT_INT, OFF(chunk), FG_CHUNK_MIN,
     FG_CHUNK_MAX, "samples per worker task (a multiple of 256)"},
    {"--queue", "FEASGATE_QUEUE", OPT_INT, OFF(queue), 1, FG_HTTP_QUEUE_MAX,
     "checks waiting for a worker at most"},
    {"--max-body", "FEASGATE_MAX_BODY", OPT_BYTES, OFF(max_body), 1,
     (double)FG_MAX_BODY_HARD, "largest request body in bytes (K, M, G ok)"},
    {"--max-samples", "FEASGATE_MAX_SAMPLES", OPT_U64, OFF(limits.max_samples),
     1, (double)FG_MAX_SAMPLES_HARD, "most samples one check may ask for"},
    {"--max-scenarios", "FEASGATE_MAX_SCENARIOS", OPT_U64,
     OFF(limits.max_scenarios), 1, (double)FG_HTTP_MAX_SCENARIOS_HARD,
     "most scenarios one request may ask for"},
    {"--max-wait", "FEASGATE_MAX_WAIT", OPT_SECONDS, OFF(limits.max_wait_s), 0,
     FG_HTTP_WAIT_MAX_S, "longest wait_s a request may ask for (seconds)"},
    {"--grace", "FEASGATE_GRACE", OPT_SECONDS, OFF(grace_s), 0,
     FG_HTTP_WAIT_MAX_S, "seconds running checks get at shutdown"},
    {"--log-level", "FEASGATE_LOG_LEVEL", OPT_LEVEL, OFF(log_level), 0, 0,
     "debug, info, warn or error"},
    {"--max-check-time", "FEASGATE_MAX_CHECK_TIME", OPT_SECONDS,
     OFF(max_check_s), 0.001, FG_HTTP_CHECK_TIME_MAX_S,
     "seconds a check may run before it ends timed_out"},
    {"--tls-cert", "FEASGATE_TLS_CERT", OPT_STRING, OFF(tls_cert), 1,
     FG_HTTP_URL_MAX, "PEM certificate (chain) file: serve HTTPS"},
    {"--tls-key", "FEASGATE_TLS_KEY", OPT_STRING, OFF(tls_key), 1,
     FG_HTTP_URL_MAX, "PEM private key file of --tls-cert"},
    {"--max-connections", "FEASGATE_MAX_CONNECTIONS", OPT_INT,
     OFF(max_connections), 1, FG_HTTP_CONNECTIONS_HARD,
     "open connections at most (more get a 503)"},
    {"--max-connections-per-client", "FEASGATE_MAX_CONNECTIONS_PER_CLIENT",
     OPT_INT, OFF(max_connections_per_client), 1, FG_HTTP_CONNECTIONS_HARD,
     "open connections from one address at most"},
    {"--allow-keyless", "FEASGATE_ALLOW_KEYLESS", OPT_BOOL, OFF(allow_keyless),
     0, 0, "allow a non-loopback --listen while the store holds no key"},
};

#define NOPTIONS (sizeof options / sizeof *options)

static void defaults(fg_http_config *cfg) {
  memset(cfg, 0, sizeof *cfg);
  snprintf(cfg->host, sizeof cfg->host, "127.0.0.1");
  cfg->port = 8080;
  snprintf(cfg->store, sizeof cfg->store, "sqlite:var/feasgate.db");
  long cores = sysconf(_SC_NPROCESSORS_ONLN);
  if (cores < 1) cores = 1;
  if (cores > FG_WORKERS_MAX) cores = FG_WORKERS_MAX;
  cfg->workers = (int)cores;
  cfg->chunk = FG_CHUNK_DEFAULT;
  cfg->queue = FG_HTTP_QUEUE_DEFAULT;
  cfg->max_body = FG_MAX_BODY_DEFAULT;
  fg_request_limits_default(&cfg->limits);
  cfg->grace_s = FG_HTTP_GRACE_DEFAULT;
  cfg->log_level = FG_LOG_INFO;
  cfg->max_check_s = FG_HTTP_CHECK_TIME_DEFAULT;
  cfg->max_connections = FG_HTTP_CONNECTIONS_DEFAULT;
  cfg->max_connections_per_client = FG_HTTP_CONNECTIONS_PER_CLIENT_DEFAULT;
}

static int fail(char *err, size_t cap, const char *where, const char *value,
                const char *expected) {
  snprintf(err, cap, "%s: expected %s, found '%s'", where, expected, value);
  return -1;
}

/* HOST:PORT, [V6]:PORT. */
static int set_listen(fg_http_config *cfg, const char *where, const char *v,
                      char *err, size_t cap) {
  const char *expected = "HOST:PORT with PORT from 0 to 65535 (e.g. "
                         "127.0.0.1:8080, [::1]:8080)";
  const char *host = v, *colon;
  size_t hlen;
  if (v[0] == '[') {
    const char *close = strchr(v, ']');
    if (!close || close[1] != ':') return fail(err, cap, where, v, expected);
    host = v + 1;
    hlen = (size_t)(close - host);
    colon = close + 1;
  } else {
    colon = strrchr(v, ':');
    if (!colon) return fail(err, cap, where, v, expected);
    hlen = (size_t)(colon - v);
    if (memchr(v, ':', hlen)) return fail(err, cap, where, v, expected);
  }
  if (hlen == 0 || hlen > FG_HTTP_HOST_MAX)
    return fail(err, cap, where, v, expected);
  char *end = NULL;
  errno = 0;
  long port = strtol(colon + 1, &end, 10);
  if (!colon[1] || *end || errno || port < 0 || port > 65535)
    return fail(err, cap, where, v, expected);
  memcpy(cfg->host, host, hlen);
  cfg->host[hlen] = '\0';
  cfg->port = (unsigned)port;
  return 0;
}

static int set_value(fg_http_config *cfg, const opt_def *o, const char *where,
                     const char *v, char *err, size_t cap) {
  char expected[160];
  char *field = (char *)cfg + o->offset;
  char *end = NULL;
  errno = 0;
  switch (o->kind) {
  case OPT_LISTEN: return set_listen(cfg, where, v, err, cap);
  case OPT_STRING:
    if (!v[0] || strlen(v) > (size_t)o->max) {
      snprintf(expected, sizeof expected, "a value of 1 to %.0f characters",
               o->max);
      return fail(err, cap, where, v, expected);
    }
    snprintf(field, (size_t)o->max + 1, "%s", v);
    if (strcmp(o->flag, "--store") == 0 && strncmp(v, "sqlite:", 7) != 0 &&
        strncmp(v, "postgresql://", 13) != 0 &&
        strncmp(v, "postgres://", 11) != 0) {
      char shown[sizeof cfg->store];
      fg_store_url_display(v, shown, sizeof shown);
      return fail(err, cap, where, shown,
                  "a store URL sqlite:PATH or postgresql://...");
    }
    return 0;
  case OPT_INT: {
    long n = strtol(v, &end, 10);
    snprintf(expected, sizeof expected, "a whole number from %.0f to %.0f",
             o->min, o->max);
    if (!v[0] || *end || errno || n < (long)o->min || n > (long)o->max)
      return fail(err, cap, where, v, expected);
    if (o->offset == OFF(chunk) && n % FG_BLOCK != 0) {
      snprintf(expected, sizeof expected, "a multiple of %d from %.0f to %.0f",
               FG_BLOCK, o->min, o->max);
      return fail(err, cap, where, v, expected);
    }
    *(int *)(void *)field = (int)n;
    return 0;
  }
  case OPT_U64:
  case OPT_BYTES: {
    snprintf(expected, sizeof expected, "a whole number from %.0f to %.0f%s",
             o->min, o->max,
             o->kind == OPT_BYTES ? " (suffix K, M or G for "
                                    "KiB, MiB, GiB)"
                                  : "");
    if (!v[0] || v[0] == '-') return fail(err, cap, where, v, expected);
    unsigned long long n = strtoull(v, &end, 10);
    if (errno || end == v) return fail(err, cap, where, v, expected);
    unsigned long long mult = 1;
    if (o->kind == OPT_BYTES && *end) {
      if (*end == 'K' || *end == 'k')
        mult = 1ull << 10;
      else if (*end == 'M' || *end == 'm')
        mult = 1ull << 20;
      else if (*end == 'G' || *end == 'g')
        mult = 1ull << 30;
      else
        return fail(err, cap, where, v, expected);
      end++;
    }
    if (*end || n > (unsigned long long)o->max / mult ||
        (double)(n * mult) < o->min || (double)(n * mult) > o->max)
      return fail(err, cap, where, v, expected);
    *(uint64_t *)(void *)field = (uint64_t)(n * mult);
    return 0;
  }
  case OPT_SECONDS: {
    double d = strtod(v, &end);
    snprintf(expected, sizeof expected, "a number of seconds from %g to %g",
             o->min, o->max);
    if (!v[0] || *end || errno || !isfinite(d) || d < o->min || d > o->max)
      return fail(err, cap, where, v, expected);
    *(double *)(void *)field = d;
    return 0;
  }
  case OPT_LEVEL: {
    static const char *const names[] = {"debug", "info", "warn", "error"};
    for (int i = 0; i < 4; i++) {
      if (strcmp(v, names[i]) == 0) {
        *(fg_log_level *)(void *)field = (fg_log_level)i;
        return 0;
      }
    }
    return fail(err, cap, where, v, "one of debug, info, warn, error");
  }
  case OPT_BOOL:
    if (!strcmp(v, "1") || !strcmp(v, "true") || !strcmp(v, "yes")) {
      *(bool *)(void *)field = true;
      return 0;
    }
    if (!strcmp(v, "0") || !strcmp(v, "false") || !strcmp(v, "no")) {
      *(bool *)(void *)field = false;
      return 0;
    }
    return fail(err, cap, where, v, "1, true, yes, 0, false or no");
  }
  return fail(err, cap, where, v, "a known setting");
}

/* The default of one setting as text, for --help. */
static void show_default(const fg_http_config *d, const opt_def *o, char *out,
                         size_t cap) {
  const char *field = (const char *)d + o->offset;
  static const char *const levels[] = {"debug", "info", "warn", "error"};
  switch (o->kind) {
  case OPT_LISTEN: snprintf(out, cap, "%s:%u", d->host, d->port); return;
  case OPT_STRING:
    snprintf(out, cap, "%s", field[0] ? field : "(none)");
    return;
  case OPT_INT: snprintf(out, cap, "%d", *(const int *)(const void *)field);
    return;
  case OPT_U64:
  case OPT_BYTES:
    snprintf(out, cap, "%llu",
             (unsigned long long)*(const uint64_t *)(const void *)field);
    return;
  case OPT_SECONDS:
    snprintf(out, cap, "%g s", *(const double *)(const void *)field);
    return;
  case OPT_LEVEL: {
    int l = (int)*(const fg_log_level *)(const void *)field;
    snprintf(out, cap, "%s", l >= 0 && l < 4 ? levels[l] : "?");
    return;
  }
  case OPT_BOOL:
    snprintf(out, cap, "%s", *(const bool *)(const void *)field ? "on" : "off");
    return;
  }
  snprintf(out, cap, "?");
}

static void usage(FILE *f) {
  fg_http_config d;
  defaults(&d);
  fprintf(f, "usage: feasgate serve [options]\n\n"
             "  %-28s %-36s %-24s %s\n", "flag", "environment", "default",
          "meaning");
  for (size_t i = 0; i < NOPTIONS; i++) {
    char shown[FG_HTTP_URL_MAX + 32];
    show_default(&d, &options[i], shown, sizeof shown);
    fprintf(f, "  %-28s %-36s %-24s %s\n", options[i].flag, options[i].env,
            shown, options[i].help);
  }
  fprintf(f, "\nA flag wins over its environment variable; --workers "
             "defaults to the\nnumber of processors online.\n");
}

static bool flag_given(int argc, char **argv, const char *flag) {
  size_t n = strlen(flag);
  for (int a = 1; a < argc; a++)
    if (strncmp(argv[a], flag, n) == 0 &&
        (argv[a][n] == '\0' || argv[a][n] == '='))
      return true;
  return false;
}

int fg_http_config_parse(int argc, char **argv, fg_http_config *cfg, char *err,
                         size_t errcap) {
  defaults(cfg);
  err[0] = '\0';
  /* A twin is not even read when its flag is given: the flag wins, also
   * over a twin that would not parse. */
  for (size_t i = 0; i < NOPTIONS; i++) {
    const char *v = getenv(options[i].env);
    if (!v || flag_given(argc, argv, options[i].flag)) continue;
    char where[64];
    snprintf(where, sizeof where, "environment %s", options[i].env);
    if (set_value(cfg, &options[i], where, v, err, errcap) != 0) return -1;
  }
  for (int a = 1; a < argc; a++) {
    const char *arg = argv[a];
    if (strcmp(arg, "--help") == 0 || strcmp(arg, "-h") == 0) {
      usage(stdout);
      return 1;
    }
    const opt_def *o = NULL;
    const char *value = NULL;
    for (size_t i = 0; i < NOPTIONS && !o; i++) {
      size_t n = strlen(options[i].flag);
      if (strncmp(arg, options[i].flag, n) != 0) continue;
      if (arg[n] == '\0') {
        o = &options[i];
      } else if (arg[n] == '=') {
        o = &options[i];
        value = arg + n + 1;
      }
    }
    if (!o) {
      snprintf(err, errcap, "unknown option '%s' (try --help)", arg);
      return -1;
    }
    if (!value && o->kind == OPT_BOOL) value = "true";
    if (!value) {
      if (a + 1 >= argc) {
        snprintf(err, errcap, "%s needs a value: %s", o->flag, o->help);
        return -1;
      }
      value = argv[++a];
    }
    if (set_value(cfg, o, o->flag, value, err, errcap) != 0) return -1;
  }
  if (cfg->max_connections_per_client > cfg->max_connections) {
    snprintf(err, errcap,
             "--max-connections-per-client %d exceeds --max-connections %d: "
             "expected at most as many as the whole daemon takes",
             cfg->max_connections_per_client, cfg->max_connections);
    return -1;
  }
  if (!cfg->tls_cert[0] != !cfg->tls_key[0]) {
    snprintf(err, errcap, "%s needs %s as well: HTTPS takes a certificate "
             "and its private key",
             cfg->tls_cert[0] ? "--tls-cert" : "--tls-key",
             cfg->tls_cert[0] ? "--tls-key" : "--tls-cert");
    return -1;
  }
  return 0;
}
