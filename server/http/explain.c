/*
 * http/explain.c -- one scenario of a logged check, explained, over HTTP
 * and offline.
 *
 *   GET /v1/checks/{id}/scenarios/{index}     (role: reader)
 *   feasgate explain MODEL.json REQUEST.json --index I
 *
 * Answers {"check", "index", "seed", "stream", "sampling", "inputs",
 * "definitions", "rows": [{"name", "excess", "holds"}], "holds"}
 * (engine/explain.c computes everything but "check"). The HTTP handler
 * reads the check's stored request and model version from the store, so
 * the scenario is recomputed from exactly what the check ran: the stored
 * request carries the seed that was drawn. A check that is still running
 * can be explained too (its request is recorded before it starts).
 *
 * Errors: an index that is not a whole number or not below the check's
 * samples (those it counted, when it stopped early), 400 naming /index; an unknown check, 404; a Latin hypercube or
 * Sobol check, 422 (its samples are drawn replicate by replicate).
 *
 * Thread use: handlers on connection threads; one block of samples is
 * evaluated on the connection thread, no lock held.
 */
#include "http/http_internal.h"

#include <ctype.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static bool parse_index(const char *s, uint64_t *out) {
  if (!s || !*s || strlen(s) > 20) return false;
  for (const char *t = s; *t; t++)
    if (!isdigit((unsigned char)*t)) return false;
  errno = 0;
  char *end = NULL;
  unsigned long long v = strtoull(s, &end, 10);
  if (errno || *end) return false;
  *out = v;
  return true;
}

/* Limits for re-reading a request that the server once accepted: the
 * hard caps, so a request logged under a larger --max-samples still
 * parses after a restart with a smaller one. */
static void replay_limits(fg_request_limits *lim) {
  fg_request_limits_default(lim);
  lim->max_samples = FG_MAX_SAMPLES_HARD;
  lim->max_scenarios = FG_HTTP_MAX_SCENARIOS_HARD;
  lim->max_wait_s = 1e9;
}

void fg_h_check_scenario(fg_req *r, fg_resp *out) {
  const char *id = r->params[0];
  uint64_t index = 0;
  if (!parse_index(r->params[1], &index)) {
    fg_problem p;
    fg_problem_init(&p);
    fg_problem_add(&p, FG_EINVAL, "/index", 0,
                   "expected a sample index (a whole number from 0), found "
                   "'%.32s'",
                   r->params[1]);
    fg_resp_problem(out, &p, 400);
    return;
  }
  fg_problem p;
  fg_problem_init(&p);
  fg_store_check c;
  if (fg_store_get_check(r->srv->store, id, &c, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    return;
  }
  fg_store_version v;
  fg_model *m = NULL;
  memset(&v, 0, sizeof v);
  cJSON *body = NULL, *res = NULL;
  fg_check_request req;
  bool have_req = false;
  if (fg_http_load_model(r->srv, c.model, c.version, &v, &m, &p) != FG_OK)
    goto fail;
  if (!c.request ||
      fg_json_parse(c.request, strlen(c.request), &body, &p) != FG_OK) {
    if (!c.request)
      fg_problem_set(&p, FG_EINTERNAL, "check %s has no stored request", id);
    goto fail;
  }
  fg_request_limits lim;
  replay_limits(&lim);
  if (fg_request_parse(m, body, &lim, &req, &p) != FG_OK) goto fail;
  have_req = true;
  req.seed = c.seed; /* the seed the check ran with */
  /* A check that stopped early (or was cancelled) counted fewer samples
   * than it asked for: its scenarios end where its counts end. */
  cJSON *stored = c.result ? cJSON_Parse(c.result) : NULL;
  const cJSON *done = cJSON_GetObjectItemCaseSensitive(
      cJSON_GetObjectItemCaseSensitive(stored, "joint"), "samples");
  if (cJSON_IsNumber(done) && done->valuedouble >= 0 &&
      done->valuedouble < (double)req.samples)
    req.samples = (uint64_t)done->valuedouble;
  cJSON_Delete(stored);
  if (fg_explain_scenario(m, &req, index, &res, &p) != FG_OK) goto fail;
  cJSON_AddStringToObject(res, "check", c.id);
  fg_resp_json(out, 200, res);
  goto done;
fail:
  fg_resp_problem(out, &p, p.status == FG_EUNSUPPORTED ? 422 : 0);
done:
  if (have_req) fg_request_free(&req);
  cJSON_Delete(body);
  fg_store_version_clear(&v);
  if (m) fg_model_unref(m);
  fg_store_check_clear(&c);
}

/* ---- feasgate explain ---- */

static char *slurp(const char *path, size_t *len) {
  FILE *f = fopen(path, "rb");
  if (!f) {
    fprintf(stderr, "feasgate explain: cannot open %s: %s\n", path,
            strerror(errno));
    return NULL;
  }
  size_t cap = 65536, n = 0;
  char *buf = malloc(cap);
  while (buf) {
    size_t k = fread(buf + n, 1, cap - n - 1, f);
    n += k;
    if (n + 1 < cap) break;
    char *b = realloc(buf, cap * 2);
    if (!b) {
      free(buf);
      buf = NULL;
      break;
    }
    buf = b;
    cap *= 2;
  }
  fclose(f);
  if (!buf) {
    fprintf(stderr, "feasgate explain: out of memory reading %s\n", path);
    return NULL;
  }
  buf[n] = '\0';
  *len = n;
  return buf;
}

static void print_problem(const char *what, const fg_problem *p) {
  fprintf(stderr, "feasgate explain: %s: %s%s%s\n", what, p->title,
          p->detail[0] ? ": " : "", p->detail);
  for (int i = 0; i < p->nitems; i++)
    fprintf(stderr, "  %s: %s\n",
            p->items[i].pointer[0] ? p->items[i].pointer : "(body)",
            p->items[i].message);
}

int fg_explain_command(int argc, char **argv) {
  const char *files[2] = {NULL, NULL};
  int nfiles = 0;
  const char *index_text = NULL;
  for (int i = 1; i < argc; i++) {
    if (strcmp(argv[i], "--help") == 0) {
      printf("usage: feasgate explain MODEL.json REQUEST.json --index I\n"
             "Prints sample I of the check REQUEST.json describes (its "
             "\"seed\" is needed):\nthe inputs drawn, the definitions and "
             "every row's excess, as JSON.\n");
      return 0;
    }
    if (strcmp(argv[i], "--index") == 0 && i + 1 < argc) {
      index_text = argv[++i];
    } else if (argv[i][0] == '-' && argv[i][1]) {
      fprintf(stderr, "feasgate explain: unknown or incomplete option "
                      "'%s'\n", argv[i]);
      nfiles = -1;
      break;
    } else if (nfiles < 2) {
      files[nfiles++] = argv[i];
    } else {
      nfiles = -1;
      break;
    }
  }
  uint64_t index = 0;
  if (nfiles != 2 || !index_text || !parse_index(index_text, &index)) {
    fprintf(stderr,
            "usage: feasgate explain MODEL.json REQUEST.json --index I\n"
            "Prints sample I of the check REQUEST.json describes (its "
            "\"seed\" is needed):\nthe inputs drawn, the definitions and "
            "every row's excess, as JSON.\n");
    return 3;
  }
  int rc = 3;
  size_t mlen = 0, rlen = 0;
  char *mtext = slurp(files[0], &mlen), *rtext = NULL;
  fg_model *m = NULL;
  cJSON *body = NULL, *res = NULL;
  fg_check_request req;
  bool have_req = false;
  fg_problem p;
  fg_problem_init(&p);
  if (!mtext) goto out;
  if (fg_model_compile(mtext, mlen, &m, &p) != FG_OK) {
    print_problem(files[0], &p);
    goto out;
  }
  rtext = slurp(files[1], &rlen);
  if (!rtext) goto out;
  if (fg_json_parse(rtext, rlen, &body, &p) != FG_OK) {
    print_problem(files[1], &p);
    goto out;
  }
  fg_request_limits lim;
  replay_limits(&lim);
  if (fg_request_parse(m, body, &lim, &req, &p) != FG_OK) {
    print_problem(files[1], &p);
    goto out;
  }
  have_req = true;
  if (!req.seed_given) {
    fprintf(stderr, "feasgate explain: %s has no \"seed\"; a scenario is "
                    "defined by the seed the check ran with\n", files[1]);
    goto out;
  }
  if (fg_explain_scenario(m, &req, index, &res, &p) != FG_OK) {
    print_problem("explain", &p);
    goto out;
  }
  char *s = cJSON_Print(res);
  if (s) {
    puts(s);
    rc = 0;
  }
  free(s);
out:
  cJSON_Delete(res);
  if (have_req) fg_request_free(&req);
  cJSON_Delete(body);
  if (m) fg_model_unref(m);
  free(rtext);
  free(mtext);
  return rc;
}
