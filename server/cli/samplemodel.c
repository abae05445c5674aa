/*
 * cli/samplemodel.c -- `feasgate sample-model MODEL.json --scenarios S
 * [--seed N] [--form indicator|all] [--target T] [--confidence C]
 * [--json]`: the scenario program for a team's own solver, the text POST
 * /v1/models/{name}/sample-models answers (both built by
 * engine/samplemodel.c), on standard output; a one-line summary (big-M,
 * or the all form's guaranteed violation level) on standard error.
 *
 * Thread use: the main thread.
 */
#include "cli/cli.h"
#include "feasgate/samplemodel.h"

#include <cjson/cJSON.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static void sample_model_usage(FILE *f) {
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
  if (!body) return FG_EXIT_USAGE;
  int rc = FG_EXIT_USAGE;
  for (int i = 1; i < argc; i++) {
    const char *a = argv[i], *v = i + 1 < argc ? argv[i + 1] : NULL;
    if (strcmp(a, "--help") == 0) {
      sample_model_usage(stdout);
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
      sample_model_usage(stderr);
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
    sample_model_usage(stderr);
    goto out;
  }
  size_t len = 0;
  char *text = NULL;
  cJSON *answer = NULL;
  fg_problem p;
  fg_problem_init(&p);
  fg_sample_model_request q;
  fg_model *m = fg_cli_load_model(file);
  if (!m) goto out;
  if (fg_sample_model_parse(m, body, &q, &p) != FG_OK) {
    fg_cli_print_problem("sample-model: options", &p, NULL, 0);
  } else {
    if (!seeded) {
      q.seed = fg_seed_draw();
      fprintf(stderr, "feasgate sample-model: seed %llu\n",
              (unsigned long long)q.seed);
    }
    if (fg_sample_model_build(m, &q, &answer, &text, &len, &p) != FG_OK) {
      fg_cli_print_problem("sample-model", &p, NULL, 0);
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
  fg_model_unref(m);
out:
  cJSON_Delete(body);
  return rc;
}
