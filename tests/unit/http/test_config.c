/*
 * tests/unit/http/test_config.c -- `feasgate serve` settings: defaults,
 * both flag spellings, ranges at and beyond their edges, environment
 * twins (and the flag winning over its twin), pairs that must agree, and
 * messages that name the flag or variable (http/config.c).
 */
#include "check.h"
#include "http/http.h"

#include <stdarg.h>
#include <stdlib.h>
#include <string.h>

/* ---- serve settings ---- */

static int parse(fg_http_config *cfg, char *err, size_t cap, ...) {
  char *argv[32];
  int argc = 0;
  argv[argc++] = "serve";
  va_list ap;
  va_start(ap, cap);
  for (char *a; (a = va_arg(ap, char *)) != NULL && argc < 31;)
    argv[argc++] = a;
  va_end(ap);
  argv[argc] = NULL;
  return fg_http_config_parse(argc, argv, cfg, err, cap);
}

static void test_config(void) {
  static const char *twins[] = {"FEASGATE_WORKERS", "FEASGATE_LISTEN",
                                "FEASGATE_CHUNK", "FEASGATE_MAX_CHECK_TIME",
                                "FEASGATE_ALLOW_KEYLESS"};
  for (size_t i = 0; i < sizeof twins / sizeof *twins; i++) unsetenv(twins[i]);
  fg_http_config cfg;
  char err[512];

  /* Defaults. */
  CHECK_INT(parse(&cfg, err, sizeof err, NULL), 0);
  CHECK(strcmp(cfg.host, "127.0.0.1") == 0);
  CHECK_INT(cfg.port, 8080);
  CHECK(strcmp(cfg.store, "sqlite:var/feasgate.db") == 0);
  CHECK(cfg.workers >= 1 && cfg.workers <= FG_WORKERS_MAX);
  CHECK_INT(cfg.chunk, FG_CHUNK_DEFAULT);
  CHECK(!cfg.allow_keyless);

  /* Both spellings of a flag; IPv6 listen. */
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers", "3", "--listen=[::1]:0",
                  NULL),
            0);
  CHECK_INT(cfg.workers, 3);
  CHECK(strcmp(cfg.host, "::1") == 0);
  CHECK_INT(cfg.port, 0);

  /* Ranges: the edges are taken, one beyond is refused by name. */
  char buf[32];
  snprintf(buf, sizeof buf, "%d", FG_WORKERS_MAX);
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers", buf, NULL), 0);
  CHECK_INT(cfg.workers, FG_WORKERS_MAX);
  snprintf(buf, sizeof buf, "%d", FG_WORKERS_MAX + 1);
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers", buf, NULL), -1);
  CHECK_MSG(strstr(err, "--workers") != NULL, "%s", err);
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers", "0", NULL), -1);
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers", "2x", NULL), -1);
  CHECK_MSG(strstr(err, "'2x'") != NULL, "%s", err);
  CHECK_INT(parse(&cfg, err, sizeof err, "--listen", "127.0.0.1:65536", NULL),
            -1);
  CHECK_INT(parse(&cfg, err, sizeof err, "--listen", "::1:80", NULL), -1);
  CHECK_INT(parse(&cfg, err, sizeof err, "--max-check-time", "0", NULL), -1);
  CHECK_MSG(strstr(err, "--max-check-time") != NULL, "%s", err);
  CHECK_INT(parse(&cfg, err, sizeof err, "--unknown-flag", NULL), -1);
  CHECK_MSG(strstr(err, "'--unknown-flag'") != NULL, "%s", err);
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers", NULL), -1);
  CHECK_MSG(strstr(err, "needs a value") != NULL, "%s", err);
  /* Pairs that must agree. */
  CHECK_INT(parse(&cfg, err, sizeof err, "--max-connections", "4",
                  "--max-connections-per-client", "5", NULL),
            -1);
  CHECK_INT(parse(&cfg, err, sizeof err, "--tls-cert", "c.pem", NULL), -1);
  CHECK_MSG(strstr(err, "--tls-key") != NULL, "%s", err);

  /* Environment twins: applied, named in errors, and beaten by the flag
   * (even a twin that would not parse is not read then). */
  setenv("FEASGATE_WORKERS", "5", 1);
  CHECK_INT(parse(&cfg, err, sizeof err, NULL), 0);
  CHECK_INT(cfg.workers, 5);
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers=2", NULL), 0);
  CHECK_INT(cfg.workers, 2);
  setenv("FEASGATE_WORKERS", "many", 1);
  CHECK_INT(parse(&cfg, err, sizeof err, NULL), -1);
  CHECK_MSG(strstr(err, "FEASGATE_WORKERS") != NULL, "%s", err);
  CHECK_INT(parse(&cfg, err, sizeof err, "--workers", "2", NULL), 0);
  unsetenv("FEASGATE_WORKERS");
  /* A boolean flag alone is true; its twin takes a value. */
  CHECK_INT(parse(&cfg, err, sizeof err, "--allow-keyless", NULL), 0);
  CHECK(cfg.allow_keyless);
  setenv("FEASGATE_ALLOW_KEYLESS", "true", 1);
  CHECK_INT(parse(&cfg, err, sizeof err, NULL), 0);
  CHECK(cfg.allow_keyless);
  unsetenv("FEASGATE_ALLOW_KEYLESS");
}

int main(void) {
  test_config();
  return fg_test_finish();
}
