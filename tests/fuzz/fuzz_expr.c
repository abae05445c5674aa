/*
 * tests/fuzz/fuzz_expr.c -- libFuzzer target: the expression compiler on
 * an arbitrary string.
 *
 * The input is the `require` text of the one constraint of a fixed small
 * model (a scalar and a vector decision, a normal and a vector gamma
 * input, one definition), so every name and function of the language is
 * reachable. The document is built with cJSON (so any bytes, quotes and
 * control characters included, become one JSON string) and compiled with
 * fg_model_compile. Invariants beyond "no crash, no leak, no UB": a
 * refused expression carries a problem with a status and at least one
 * item pointing into the document; an accepted one compiles to a model.
 *
 * Build: -DFG_FUZZ=ON with clang (see DEVELOPERS.md). Thread use: one
 * thread, as libFuzzer calls it.
 */
#include "feasgate/model.h"
#include "feasgate/status.h"

#include <cjson/cJSON.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Longer inputs only repeat what shorter ones reach, and the model's own
 * expression-length limit refuses them anyway. */
#define FUZZ_EXPR_MAX 4096

static const char base_model[] =
    "{\"format\": 1, \"name\": \"fuzz-expr\","
    " \"decisions\": [{\"name\": \"x\", \"lower\": 0, \"upper\": 10},"
    "                 {\"name\": \"v\", \"size\": 3}],"
    " \"uncertain\": [{\"name\": \"u\", \"distribution\":"
    "                   {\"family\": \"normal\", \"mean\": 0, \"sd\": 1}},"
    "                 {\"name\": \"g\", \"size\": 3, \"distribution\":"
    "                   {\"family\": \"gamma\", \"shape\": 2, \"scale\": 1}}],"
    " \"definitions\": [{\"name\": \"d\", \"value\": \"v + g\"}],"
    " \"constraints\": [{\"name\": \"c\", \"require\": \"x <= 1\"}]}";

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
  if (size > FUZZ_EXPR_MAX) return 0;
  char *expr = malloc(size + 1);
  if (!expr) return 0;
  memcpy(expr, data, size);
  expr[size] = '\0'; /* an embedded NUL ends the string, as JSON text would */
  cJSON *doc = cJSON_Parse(base_model);
  if (!doc) abort();
  cJSON *c0 = cJSON_GetArrayItem(
      cJSON_GetObjectItemCaseSensitive(doc, "constraints"), 0);
  cJSON_ReplaceItemInObjectCaseSensitive(c0, "require",
                                         cJSON_CreateString(expr));
  free(expr);
  char *text = cJSON_PrintUnformatted(doc);
  cJSON_Delete(doc);
  if (!text) return 0;
  fg_problem p;
  fg_problem_init(&p);
  fg_model *m = NULL;
  if (fg_model_compile(text, strlen(text), &m, &p) == FG_OK) {
    if (!m) abort();
    fg_model_unref(m);
  } else if (p.status == FG_OK || m) {
    fprintf(stderr, "refused without a status\n");
    abort();
  }
  free(text);
  return 0;
}
