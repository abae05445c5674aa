/*
 * tests/fuzz/fuzz_model.c -- libFuzzer target: the model document path on
 * arbitrary bytes.
 *
 * Each input goes through fg_json_parse (the strict parser: UTF-8, depth,
 * trailing garbage), its canonical form and digest when it parses, and
 * fg_model_compile (validation with pointers, the expression compiler, the
 * sampler). Invariants checked beyond "no crash, no leak, no UB": a
 * refused document leaves a problem with a status and a message, and an
 * accepted one yields a model with a summary. Violations abort so that
 * libFuzzer records the input.
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

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
  const char *text = (const char *)data;
  fg_problem p;
  fg_problem_init(&p);
  cJSON *json = NULL;
  if (fg_json_parse(text, size, &json, &p) == FG_OK) {
    size_t n = 0;
    char *canon = fg_json_canonical(json, &n);
    if (canon) {
      char hex[65];
      fg_sha256_hex(canon, n, hex);
      free(canon);
    }
    cJSON_Delete(json);
  } else if (p.status == FG_OK || !p.detail[0]) {
    fprintf(stderr, "fg_json_parse refused without a status or detail\n");
    abort();
  }
  fg_problem_init(&p);
  fg_model *m = NULL;
  if (fg_model_compile(text, size, &m, &p) == FG_OK) {
    if (!m) abort();
    cJSON *s = fg_model_summary_json(m);
    if (!s) abort();
    cJSON_Delete(s);
    fg_model_unref(m);
  } else if (p.status == FG_OK || m) {
    fprintf(stderr, "fg_model_compile refused without a status\n");
    abort();
  }
  return 0;
}
