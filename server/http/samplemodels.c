/*
 * http/samplemodels.c -- the scenario model for a team's own solver:
 *
 *   POST /v1/models/{name}/sample-models
 *        {"scenarios": 200, "seed": 7, "form": "indicator", "target": 0.9}
 *   feasgate sample-model MODEL.json --scenarios S --seed N [--form all]
 *
 * Both build it with fg_sample_model_build (engine/samplemodel.c) on the
 * same design scenarios GET .../scenarios hands out for the seed, so the
 * daemon and the offline command write the same text. The daemon answers
 * the JSON {"format": "mps", "text", "columns", "rows", "scenarios",
 * "seed", "form", "big_m", "guarantee", ...} or, when the Accept header
 * prefers text/plain, the MPS text alone; the command prints the text
 * (or with --json the JSON answer) and a one-line summary on standard
 * error.
 *
 * Errors: 400 for a malformed body (JSON Pointer named) or a size limit
 * (sample_model_*, in GET /v1/limits); 422 when the model cannot be
 * written as a mixed-integer program: a row not affine in the decisions
 * (the row and its term named), a decision without the bound a big-M
 * needs, a model without decisions; 404 / 410 for an unknown or retired
 * model.
 *
 * Thread use: the handler builds on the request's own libmicrohttpd
 * thread, bounded by the sample_model_* limits (about a second of work at
 * most), holding no lock; the command is single-threaded.
 */
#include "feasgate/samplemodel.h"
#include "http/http_internal.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define FG_CT_TEXT "text/plain; charset=utf-8"

void fg_h_model_sample_models(fg_req *r, fg_resp *out) {
  fg_server *srv = r->srv;
  fg_problem p;
  fg_problem_init(&p);
  fg_store_version v;
  fg_model *m = NULL;
  cJSON *body = NULL, *answer = NULL;
  char *text = NULL;
  size_t len = 0;
  if (fg_http_load_model(srv, r->params[0], 0, &v, &m, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    return;
  }
  fg_sample_model_request q;
  if (v.retired) {
    fg_resp_error(out, 410, FG_EGONE,
                  "model '%s' is retired; register it again to export its "
                  "scenario model",
                  v.name);
    goto done;
  }
  if (!r->body || r->len == 0) {
    fg_problem_add(&p, FG_EINVAL, "", 0,
                   "expected a sample-model request object with at least "
                   "\"scenarios\", found an empty body");
    fg_resp_problem(out, &p, 0);
    goto done;
  }
  if (fg_json_parse(r->body, r->len, &body, &p) != FG_OK ||
      fg_sample_model_parse(m, body, &q, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    goto done;
  }
  if (!q.seed_given) q.seed = fg_seed_draw();
  if (fg_sample_model_build(m, &q, &answer, &text, &len, &p) != FG_OK) {
    fg_resp_problem(out, &p, p.status == FG_EUNSUPPORTED ? 422 : 0);
    goto done;
  }
  if (fg_http_accept_prefers(
          MHD_lookup_connection_value(r->conn, MHD_HEADER_KIND, "Accept"),
          "text/plain")) {
    out->status = 200;
    out->content_type = FG_CT_TEXT;
    out->body = text;
    out->len = len;
    text = NULL;
  } else if (!cJSON_AddStringToObject(answer, "text", text)) {
    fg_resp_error(out, 503, FG_ENOMEM, "out of memory for the answer");
  } else {
    fg_resp_json(out, 200, answer);
    answer = NULL;
  }
done:
  free(text);
  cJSON_Delete(answer);
  cJSON_Delete(body);
  fg_store_version_clear(&v);
  fg_model_unref(m);
}

/* ---- feasgate sample-model ---- */

static void usage(FILE *f) {
  fprintf(f,
          "usage: feasgate sample-model MODEL.json --scenarios S [--seed N]\n"
          "                             [--form indicator|all] [--target T]\n"
          "                             [--confidence C] [--json]\n"
          "Writes the model's scenario program over design scenarios 0 .. "
          "S-1 of seed N\n(the scenarios `feasgate scenarios` prints) in "
          "free MPS on standard output:\n"
          "  indicator  one binary k<l> per scenario switches its rows off "
          "through the\n             tightest big-M; at least the target's "
          "share of scenarios is kept\n"
          "  all        every scenario enforced; standard error gives the "
          "violation level\n             the scenario approach guarantees "
          "(Campi & Garatti 2008)\n"
          "Decision component j is column x<j>; --json prints the whole "
          "answer of\nPOST /v1/models/{name}/sample-models instead (the "
          "column map, rows, big-M).\nWithout --seed a seed is drawn and "
          "printed on standard error. S is at most %d.\nExit status: 0 "
          "written, 3 usage, invalid input or a model that cannot be "
          "written.\n",
          FG_SAMPLE_MODEL_SCENARIOS_MAX);
}

static char *slurp(const char *path, size_t *len) {
  FILE *f = fopen(path, "rb");
  if (!f) {
    fprintf(stderr, "feasgate sample-model: cannot open %s: %s\n", path,
            strerror(errno));
    return NULL;
  }
  size_t cap = 65536, n = 0;
  char *buf = malloc(cap);
  while (buf) {
    n += fread(buf + n, 1, cap - n - 1, f);
    if (n + 1 < cap) break;
    char *b = cap < FG_MAX_BODY_HARD ? realloc(buf, cap * 2) : NULL;
    if (!b) free(buf);
    buf = b;
    cap *= 2;
  }
  fclose(f);
  if (!buf) {
    fprintf(stderr, "feasgate sample-model: %s is too large or memory ran "
                    "out\n", path);
    return NULL;
  }
  buf[n] = '\0';
  *len = n;
  return buf;
}

static void print_problem(const char *what, const fg_problem *p) {
  fprintf(stderr, "feasgate sample-model: %s: %s%s%s\n", what, p->title,
          p->detail[0] ? ": " : "", p->detail);
  for (int i = 0; i < p->nitems; i++)
    fprintf(stderr, "  %s: %s\n",
            p->items[i].pointer[0] ? p->items[i].pointer : "(request)",
            p->items[i].message);
}

/* A number option into the request body; false (reported) when not one. */
static bool number_option(cJSON *body, const char *flag, const char *member,
                          const char *text) {
  char *end = NULL;
  errno = 0;
  double d = strtod(text, &end);
  if (!*text || *end || errno || !isfinite(d)) {
    fprintf(stderr, "feasgate sample-model: %s: expected a number, found "
                    "'%s'\n", flag, text);
    return false;
  }
  cJSON_AddNumberToObject(body, member, d);
  return true;
}

int fg_sample_model_command(int argc, char **argv) {
  const char *file = NULL;
  bool json = false, seeded = false;
  cJSON *body = cJSON_CreateObject();
  if (!body) return 3;
  int rc = 3;
  for (int i = 1; i < argc; i++) {
    const char *a = argv[i], *v = i + 1 < argc ? argv[i + 1] : NULL;
    if (strcmp(a, "--help") == 0) {
      usage(stdout);
      rc = 0;
      goto out;
    } else if (strcmp(a, "--json") == 0) {
      json = true;
    } else if (strcmp(a, "--scenarios") == 0 && v) {
      if (!number_option(body, a, "scenarios", argv[++i])) goto out;
    } else if (strcmp(a, "--seed") == 0 && v) {
      if (!number_option(body, a, "seed", argv[++i])) goto out;
      seeded = true;
    } else if (strcmp(a, "--target") == 0 && v) {
      if (!number_option(body, a, "target", argv[++i])) goto out;
    } else if (strcmp(a, "--confidence") == 0 && v) {
      if (!number_option(body, a, "confidence", argv[++i])) goto out;
    } else if (strcmp(a, "--form") == 0 && v) {
      i++;
      if (strcmp(v, "indicator") && strcmp(v, "all")) {
        fprintf(stderr, "feasgate sample-model: --form: expected indicator "
                        "or all, found '%s'\n", v);
        goto out;
      }
      cJSON_AddStringToObject(body, "form", v);
    } else if (a[0] == '-' && a[1]) {
      fprintf(stderr, "feasgate sample-model: unknown or incomplete option "
                      "'%s'\n", a);
      usage(stderr);
      goto out;
    } else if (!file) {
      file = a;
    } else {
      fprintf(stderr, "feasgate sample-model: too many arguments ('%s')\n",
              a);
      goto out;
    }
  }
  if (!file || !cJSON_GetObjectItemCaseSensitive(body, "scenarios")) {
    fprintf(stderr, "feasgate sample-model: %s is required\n",
            file ? "--scenarios" : "a model file");
    usage(stderr);
    goto out;
  }
  size_t mlen = 0, len = 0;
  char *mtext = slurp(file, &mlen), *text = NULL;
  fg_model *m = NULL;
  cJSON *answer = NULL;
  fg_problem p;
  fg_problem_init(&p);
  fg_sample_model_request q;
  if (!mtext) goto out;
  if (fg_model_compile(mtext, mlen, &m, &p) != FG_OK) {
    print_problem(file, &p);
  } else if (fg_sample_model_parse(m, body, &q, &p) != FG_OK) {
    print_problem("options", &p);
  } else {
    if (!seeded) {
      q.seed = fg_seed_draw();
      fprintf(stderr, "feasgate sample-model: seed %llu\n",
              (unsigned long long)q.seed);
    }
    if (fg_sample_model_build(m, &q, &answer, &text, &len, &p) != FG_OK) {
      print_problem(m->name, &p);
    } else {
      char *s = NULL;
      if (json && cJSON_AddStringToObject(answer, "text", text))
        s = cJSON_Print(answer);
      bool ok = json ? s && puts(s) >= 0 : fwrite(text, 1, len, stdout) == len;
      free(s);
      const cJSON *bm = cJSON_GetObjectItemCaseSensitive(answer, "big_m");
      const cJSON *g = cJSON_GetObjectItemCaseSensitive(answer, "guarantee");
      const cJSON *eps = cJSON_GetObjectItemCaseSensitive(g, "epsilon");
      fprintf(stderr, "feasgate sample-model: %llu scenarios, form %s",
              (unsigned long long)q.scenarios,
              q.form == FG_SAMPLE_FORM_ALL ? "all" : "indicator");
      if (cJSON_IsObject(bm))
        fprintf(stderr, ", big-M max %.6g median %.6g",
                cJSON_GetObjectItemCaseSensitive(bm, "max")->valuedouble,
                cJSON_GetObjectItemCaseSensitive(bm, "median")->valuedouble);
      if (cJSON_IsNumber(eps))
        fprintf(stderr, ", violation at most %.6g with confidence %g",
                eps->valuedouble, q.confidence);
      fputc('\n', stderr);
      if (ok && fflush(stdout) == 0) rc = 0;
      else fprintf(stderr, "feasgate sample-model: standard output could "
                           "not be written\n");
    }
  }
  cJSON_Delete(answer);
  free(text);
  if (m) fg_model_unref(m);
  free(mtext);
out:
  cJSON_Delete(body);
  return rc;
}
