/*
 * cli/remote.c -- the remote gate: `feasgate check --server URL ...`.
 *
 *   feasgate check --server URL [--key KEY] [--timeout S] [--cacert FILE]
 *                  [--summary] [--rows N] MODEL_NAME REQUEST.json
 *
 * Submits REQUEST.json (the body of POST /v1/models/{name}/checks, sent
 * as it is) to a running daemon with libcurl. A 201 carries the result; a
 * 202 (the check outlived its wait_s) is followed by polling
 * GET /v1/checks/{id}, every FG_REMOTE_POLL_FIRST_S growing to
 * FG_REMOTE_POLL_MAX_S, until the check has ended or --timeout seconds
 * (default FG_REMOTE_TIMEOUT_DEFAULT_S, one hour, counted from the start)
 * have passed; then the check is cancelled (DELETE, best effort) so that
 * it does not run on for nobody. The result body is printed on standard
 * output, or with --summary the table of summary.c. REQUEST.json is parsed
 * here first, so malformed JSON is reported by line and column before
 * anything is sent.
 *
 * Exit status, as the offline `check`: 0 pass, 1 fail, 2 inconclusive,
 * 3 anything else -- usage, an unreadable request file, an HTTP error
 * (the problem's detail is printed), a transport error, a check that
 * ended cancelled, timed_out or failed, or the timeout.
 *
 * Twins: FEASGATE_KEY for --key, FEASGATE_CACERT for --cacert. Redirects
 * are not followed (the key must not travel to another host) and only
 * http and https URLs are accepted. Polls that fail for transport reasons
 * or with 503 are retried up to FG_REMOTE_POLL_RETRIES times in a row.
 *
 * Thread use: main thread (a command top level); libcurl's global state
 * is set up and torn down here.
 */
#include "cli/cli.h"

#include <curl/curl.h>
#include <errno.h>
#include <math.h>
#include <cjson/cJSON.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#define EXIT_ERROR 3

typedef struct remote {
  CURL *curl;
  char base[FG_HTTP_URL_MAX + 1]; /* server URL without a trailing '/' */
  char auth[FG_KEY_TEXT_MAX + 32]; /* "Authorization: Bearer ..." or "" */
  const char *cacert;
  double t_end; /* monotonic deadline of the whole command */
} remote;

typedef struct answer {
  long status; /* HTTP status; 0 on a transport error */
  char *body;
  size_t len;
  bool too_big;
  char error[CURL_ERROR_SIZE];
} answer;

static size_t on_data(char *data, size_t size, size_t n, void *ctx) {
  answer *a = ctx;
  size_t add = size * n;
  if (a->len + add > FG_REMOTE_BODY_MAX) {
    a->too_big = true;
    return 0; /* libcurl stops with a write error */
  }
  char *grown = realloc(a->body, a->len + add + 1);
  if (!grown) return 0;
  a->body = grown;
  memcpy(a->body + a->len, data, add);
  a->len += add;
  a->body[a->len] = '\0';
  return add;
}

static void answer_clear(answer *a) {
  free(a->body);
  memset(a, 0, sizeof *a);
}

/* One request; false on a transport error (a->error says what). */
static bool call(remote *rm, const char *method, const char *path,
                 const char *body, size_t len, answer *a) {
  memset(a, 0, sizeof *a);
  double left = rm->t_end - fg_time_monotonic();
  if (left < 1) left = 1;
  char url[FG_HTTP_URL_MAX + FG_HTTP_PATH_MAX + 2];
  snprintf(url, sizeof url, "%s%s", rm->base, path);
  CURL *c = rm->curl;
  curl_easy_reset(c);
  struct curl_slist *hdrs = NULL;
  hdrs = curl_slist_append(hdrs, "Accept: application/json");
  if (body) hdrs = curl_slist_append(hdrs, "Content-Type: application/json");
  if (rm->auth[0]) hdrs = curl_slist_append(hdrs, rm->auth);
  curl_easy_setopt(c, CURLOPT_URL, url);
#if LIBCURL_VERSION_NUM >= 0x075500
  curl_easy_setopt(c, CURLOPT_PROTOCOLS_STR, "http,https");
#else
  curl_easy_setopt(c, CURLOPT_PROTOCOLS, CURLPROTO_HTTP | CURLPROTO_HTTPS);
#endif
  curl_easy_setopt(c, CURLOPT_FOLLOWLOCATION, 0L);
  curl_easy_setopt(c, CURLOPT_NOSIGNAL, 1L);
  curl_easy_setopt(c, CURLOPT_CONNECTTIMEOUT, (long)FG_REMOTE_CONNECT_S);
  curl_easy_setopt(c, CURLOPT_TIMEOUT_MS, (long)(left * 1000));
  curl_easy_setopt(c, CURLOPT_HTTPHEADER, hdrs);
  curl_easy_setopt(c, CURLOPT_WRITEFUNCTION, on_data);
  curl_easy_setopt(c, CURLOPT_WRITEDATA, a);
  curl_easy_setopt(c, CURLOPT_ERRORBUFFER, a->error);
  curl_easy_setopt(c, CURLOPT_USERAGENT, "feasgate-check/0.1");
  if (rm->cacert) curl_easy_setopt(c, CURLOPT_CAINFO, rm->cacert);
  if (strcmp(method, "POST") == 0) {
    curl_easy_setopt(c, CURLOPT_POST, 1L);
    curl_easy_setopt(c, CURLOPT_POSTFIELDS, body);
    curl_easy_setopt(c, CURLOPT_POSTFIELDSIZE_LARGE, (curl_off_t)len);
  } else if (strcmp(method, "GET") != 0) {
    curl_easy_setopt(c, CURLOPT_CUSTOMREQUEST, method);
  }
  CURLcode rc = curl_easy_perform(c);
  curl_slist_free_all(hdrs);
  if (rc != CURLE_OK) {
    if (a->too_big)
      snprintf(a->error, sizeof a->error,
               "the answer is larger than %u bytes", FG_REMOTE_BODY_MAX);
    else if (!a->error[0])
      snprintf(a->error, sizeof a->error, "%s", curl_easy_strerror(rc));
    a->status = 0;
    return false;
  }
  curl_easy_getinfo(c, CURLINFO_RESPONSE_CODE, &a->status);
  return true;
}

/* Print what an unwanted answer says (a problem's detail if it has one). */
static void report(const char *what, const answer *a) {
  if (a->status == 0) {
    fprintf(stderr, "feasgate check: %s: %s\n", what, a->error);
    return;
  }
  cJSON *o = a->body ? cJSON_Parse(a->body) : NULL;
  const char *detail = cJSON_GetStringValue(cJSON_GetObjectItem(o, "detail"));
  fprintf(stderr, "feasgate check: %s: HTTP %ld: %s\n", what, a->status,
          detail ? detail : (a->body && a->len ? a->body : "(no body)"));
  const cJSON *e;
  cJSON_ArrayForEach(e, cJSON_GetObjectItem(o, "errors")) {
    fprintf(stderr, "  %s: %s\n",
            cJSON_GetStringValue(cJSON_GetObjectItem(e, "pointer")),
            cJSON_GetStringValue(cJSON_GetObjectItem(e, "message")));
  }
  cJSON_Delete(o);
}

static void sleep_s(double s) {
  if (s <= 0) return;
  struct timespec ts = {(time_t)s, (long)((s - floor(s)) * 1e9)};
  while (nanosleep(&ts, &ts) != 0 && errno == EINTR) {
  }
}

/* The key goes into a header: printable ASCII without spaces only. */
static bool valid_key_text(const char *s) {
  size_t n = strlen(s);
  if (n == 0 || n > FG_KEY_TEXT_MAX) return false;
  for (size_t i = 0; i < n; i++)
    if (s[i] <= ' ' || s[i] > '~') return false;
  return true;
}

static char *read_request(const char *path, size_t *len) {
  FILE *f = strcmp(path, "-") == 0 ? stdin : fopen(path, "rb");
  if (!f) {
    fprintf(stderr, "feasgate check: cannot open %s: %s\n", path,
            strerror(errno));
    return NULL;
  }
  char *buf = malloc(FG_REMOTE_REQUEST_MAX + 1);
  size_t n = buf ? fread(buf, 1, FG_REMOTE_REQUEST_MAX + 1, f) : 0;
  bool bad = ferror(f) != 0;
  if (f != stdin) fclose(f);
  if (!buf || bad || n > FG_REMOTE_REQUEST_MAX) {
    fprintf(stderr, "feasgate check: %s: %s\n", path,
            !buf  ? "out of memory"
            : bad ? "read error"
                  : "larger than 16 MiB");
    free(buf);
    return NULL;
  }
  buf[n] = '\0';
  *len = n;
  return buf;
}

/* The exit status of an ended check's result body. */
static int verdict_status(const cJSON *res) {
  const char *status = cJSON_GetStringValue(cJSON_GetObjectItem(res, "status"));
  const char *verdict =
      cJSON_GetStringValue(cJSON_GetObjectItem(res, "verdict"));
  if (fg_check_state_parse(status) != FG_CHECK_DONE || !verdict) {
    fprintf(stderr, "feasgate check: the check ended %s without a verdict\n",
            status ? status : "(no status)");
    return EXIT_ERROR;
  }
  if (strcmp(verdict, "pass") == 0) return 0;
  if (strcmp(verdict, "fail") == 0) return 1;
  if (strcmp(verdict, "inconclusive") == 0) return 2;
  fprintf(stderr, "feasgate check: unknown verdict '%s'\n", verdict);
  return EXIT_ERROR;
}

static void print_result(const cJSON *res, int summary_rows) {
  if (summary_rows > 0) {
    fg_summary_print(stdout, res, summary_rows);
  } else {
    char *s = cJSON_Print(res);
    if (s) puts(s);
    free(s);
  }
  fflush(stdout);
}

static void remote_usage(FILE *f) {
  fprintf(f, "usage: feasgate check --server URL [--key KEY] [--timeout S] "
             "[--cacert FILE]\n"
             "                      [--summary] [--rows N] MODEL_NAME "
             "REQUEST.json\n"
             "Runs the check on a feasgate daemon (POST "
             "/v1/models/MODEL_NAME/checks),\nwaits for it and prints the "
             "result (with --summary as a table of at most\n--rows N rows, "
             "default %d). Exit status: 0 pass, 1 fail, 2 inconclusive,\n"
             "3 error. --key defaults to $FEASGATE_KEY, --cacert to "
             "$FEASGATE_CACERT,\n--timeout to %g seconds.\n",
          FG_SUMMARY_ROWS_DEFAULT, FG_REMOTE_TIMEOUT_DEFAULT_S);
}

/* Poll until the check `id` has ended; the ended body or NULL. */
static cJSON *poll_check(remote *rm, const char *id) {
  char path[96];
  snprintf(path, sizeof path, "/v1/checks/%s", id);
  double wait = FG_REMOTE_POLL_FIRST_S;
  int failures = 0;
  for (;;) {
    double left = rm->t_end - fg_time_monotonic();
    if (left <= 0) break;
    sleep_s(wait < left ? wait : left);
    wait = fmin(wait * 1.5, FG_REMOTE_POLL_MAX_S);
    answer a;
    bool ok = call(rm, "GET", path, NULL, 0, &a);
    if (!ok || a.status == 503) {
      if (++failures > FG_REMOTE_POLL_RETRIES) {
        report("polling the check", &a);
        answer_clear(&a);
        return NULL;
      }
      answer_clear(&a);
      continue;
    }
    failures = 0;
    if (a.status != 200) {
      report("polling the check", &a);
      answer_clear(&a);
      return NULL;
    }
    cJSON *res = cJSON_Parse(a.body ? a.body : "");
    answer_clear(&a);
    const char *st = cJSON_GetStringValue(cJSON_GetObjectItem(res, "status"));
    if (!st) {
      fprintf(stderr, "feasgate check: polling %s: the answer is not a check "
                      "result\n", path);
      cJSON_Delete(res);
      return NULL;
    }
    if (fg_check_state_parse(st) != FG_CHECK_RUNNING) return res;
    cJSON_Delete(res);
  }
  fprintf(stderr, "feasgate check: check %s still running after the "
                  "--timeout; cancelling it\n", id);
  rm->t_end = fg_time_monotonic() + FG_REMOTE_CONNECT_S;
  answer a;
  call(rm, "DELETE", path, NULL, 0, &a);
  answer_clear(&a);
  return NULL;
}

static int run(remote *rm, const char *model, const char *body, size_t len,
               int summary_rows) {
  char path[FG_NAME_MAX + 32];
  snprintf(path, sizeof path, "/v1/models/%s/checks", model);
  answer a;
  if (!call(rm, "POST", path, body, len, &a) ||
      (a.status != 201 && a.status != 202)) {
    report("submitting the check", &a);
    answer_clear(&a);
    return EXIT_ERROR;
  }
  cJSON *res = cJSON_Parse(a.body ? a.body : "");
  long status = a.status;
  answer_clear(&a);
  if (!res) {
    fprintf(stderr, "feasgate check: the server's answer is not JSON\n");
    return EXIT_ERROR;
  }
  if (status == 202) {
    const char *id = cJSON_GetStringValue(cJSON_GetObjectItem(res, "id"));
    if (!id || strlen(id) > 40) {
      fprintf(stderr, "feasgate check: a 202 answer without a check id\n");
      cJSON_Delete(res);
      return EXIT_ERROR;
    }
    char idbuf[48];
    snprintf(idbuf, sizeof idbuf, "%s", id);
    cJSON_Delete(res);
    res = poll_check(rm, idbuf);
    if (!res) return EXIT_ERROR;
  }
  print_result(res, summary_rows);
  int rc = verdict_status(res);
  cJSON_Delete(res);
  return rc;
}

int fg_remote_check_command(int argc, char **argv) {
  const char *server = NULL, *key = getenv("FEASGATE_KEY");
  const char *cacert = getenv("FEASGATE_CACERT");
  const char *args[2] = {NULL, NULL};
  int nargs = 0;
  double timeout = FG_REMOTE_TIMEOUT_DEFAULT_S;
  bool summary = false;
  int rows = FG_SUMMARY_ROWS_DEFAULT;
  for (int i = 1; i < argc; i++) {
    const char *a = argv[i], *v = i + 1 < argc ? argv[i + 1] : NULL;
    if (strncmp(a, "--server=", 9) == 0) {
      server = a + 9;
    } else if (strcmp(a, "--server") == 0 && v) {
      server = argv[++i];
    } else if (strcmp(a, "--key") == 0 && v) {
      key = argv[++i];
    } else if (strcmp(a, "--cacert") == 0 && v) {
      cacert = argv[++i];
    } else if (strcmp(a, "--timeout") == 0 && v) {
      char *end = NULL;
      errno = 0;
      timeout = strtod(argv[++i], &end);
      if (errno || !*v || *end || !(timeout > 0) ||
          timeout > FG_REMOTE_TIMEOUT_MAX_S) {
        fprintf(stderr, "feasgate check: --timeout: expected seconds above "
                        "0 and at most %g, found '%s'\n",
                FG_REMOTE_TIMEOUT_MAX_S, v);
        return EXIT_ERROR;
      }
    } else if (strcmp(a, "--summary") == 0) {
      summary = true;
    } else if (strcmp(a, "--rows") == 0 && v) {
      char *end = NULL;
      errno = 0;
      long n = strtol(argv[++i], &end, 10);
      if (errno || !*v || *end || n < 1 || n > 1000000) {
        fprintf(stderr, "feasgate check: --rows: expected a whole number "
                        "from 1 to 1000000, found '%s'\n", v);
        return EXIT_ERROR;
      }
      rows = (int)n;
    } else if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
      remote_usage(stdout);
      return 0;
    } else if (a[0] == '-' && a[1]) {
      bool known = !strcmp(a, "--server") || !strcmp(a, "--key") ||
                   !strcmp(a, "--cacert") || !strcmp(a, "--timeout") ||
                   !strcmp(a, "--rows");
      fprintf(stderr, "feasgate check: %s: %s (with --server)\n", a,
              known ? "expected a value after it" : "unknown option");
      remote_usage(stderr);
      return EXIT_ERROR;
    } else if (nargs < 2) {
      args[nargs++] = a;
    } else {
      fprintf(stderr, "feasgate check: too many arguments ('%s')\n", a);
      return EXIT_ERROR;
    }
  }
  if (!server || nargs != 2) {
    remote_usage(stderr);
    return EXIT_ERROR;
  }
  size_t slen = strlen(server);
  while (slen > 0 && server[slen - 1] == '/')
    slen--;
  if (slen == 0 || slen > FG_HTTP_URL_MAX ||
      !(strncmp(server, "http://", 7) == 0 ||
        strncmp(server, "https://", 8) == 0)) {
    fprintf(stderr, "feasgate check: --server expects an http:// or "
                    "https:// URL, found '%s'\n", server);
    return EXIT_ERROR;
  }
  if (!fg_model_is_model_name(args[0])) {
    fprintf(stderr, "feasgate check: expected a model name "
                    "([a-z0-9][a-z0-9_.-]{0,63}), found '%s'\n", args[0]);
    return EXIT_ERROR;
  }
  if (key && key[0] && !valid_key_text(key)) {
    fprintf(stderr, "feasgate check: --key (or FEASGATE_KEY) is not a key: "
                    "expected 1 to %d printable characters without spaces\n",
            FG_KEY_TEXT_MAX);
    return EXIT_ERROR;
  }
  size_t len = 0;
  char *body = read_request(args[1], &len);
  if (!body) return EXIT_ERROR;
  {
    fg_problem p;
    fg_problem_init(&p);
    cJSON *parsed = NULL;
    if (fg_json_parse(body, len, &parsed, &p) != FG_OK) {
      int line = 0, col = 0;
      fg_text_position(body, len, p.byte_offset, &line, &col);
      if (p.byte_offset >= 0)
        fprintf(stderr, "feasgate check: %s: line %d, column %d: %s\n",
                args[1], line, col, p.detail[0] ? p.detail : p.title);
      else
        fprintf(stderr, "feasgate check: %s: %s%s%s\n", args[1], p.title,
                p.detail[0] ? ": " : "", p.detail);
      free(body);
      return EXIT_ERROR;
    }
    cJSON_Delete(parsed);
  }

  remote rm;
  memset(&rm, 0, sizeof rm);
  memcpy(rm.base, server, slen);
  rm.base[slen] = '\0';
  if (key && key[0]) snprintf(rm.auth, sizeof rm.auth,
                              "Authorization: Bearer %s", key);
  rm.cacert = cacert && cacert[0] ? cacert : NULL;
  rm.t_end = fg_time_monotonic() + timeout;
  int rc = EXIT_ERROR;
  if (curl_global_init(CURL_GLOBAL_DEFAULT) != CURLE_OK) {
    fprintf(stderr, "feasgate check: libcurl did not initialise\n");
    free(body);
    return EXIT_ERROR;
  }
  rm.curl = curl_easy_init();
  if (!rm.curl) {
    fprintf(stderr, "feasgate check: libcurl: out of memory\n");
  } else {
    rc = run(&rm, args[0], body, len, summary ? rows : 0);
    curl_easy_cleanup(rm.curl);
  }
  curl_global_cleanup();
  memset(rm.auth, 0, sizeof rm.auth);
  free(body);
  return rc;
}
