/*
 * model/model.c -- the life of a compiled model: references, freeing, the
 * summary as JSON, and the small helpers the other files of model/ share.
 *
 * Invariant: a compiled fg_model is never written after fg_model_compile
 * returns it, except for `refs`, which only the atomic builtins below touch.
 * fg_model_unref frees the model when the count reaches zero; the release
 * ordering on the decrement and the acquire fence before freeing make every
 * thread's reads of the model happen before the free.
 *
 * Thread use: ref/unref/summary from any thread; the helpers are reentrant.
 */
#include "model_internal.h"

#include "sample/sample.h"

#include <cJSON.h>

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

void fg_model_note(fg_model_ctx *cx, fg_status st) {
  if (st == FG_OK) return;
  if (cx->first == FG_OK) cx->first = st;
  cx->errors++;
}

fg_status fg_model_error(fg_model_ctx *cx, const char *pointer, const char *fmt,
                         ...) {
  char msg[FG_MESSAGE_MAX];
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(msg, sizeof msg, fmt, ap);
  va_end(ap);
  fg_model_note(cx, FG_EINVAL);
  return fg_problem_add(cx->p, FG_EINVAL, pointer, 0, "%s", msg);
}

fg_status fg_model_limit(fg_model_ctx *cx, const char *pointer,
                         fg_limit which, double value, const char *fmt, ...) {
  char msg[FG_MESSAGE_MAX];
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(msg, sizeof msg, fmt, ap);
  va_end(ap);
  fg_model_note(cx, FG_ELIMIT);
  return fg_problem_limit(cx->p, pointer, which, value, "%s", msg);
}

const char *fg_json_kind(const cJSON *v) {
  if (!v) return "nothing";
  if (cJSON_IsNull(v)) return "null";
  if (cJSON_IsTrue(v)) return "true";
  if (cJSON_IsFalse(v)) return "false";
  if (cJSON_IsNumber(v)) return "a number";
  if (cJSON_IsString(v)) return "a string";
  if (cJSON_IsArray(v)) return "an array";
  if (cJSON_IsObject(v)) return "an object";
  return "an invalid value";
}

void fg_model_quote(char *dst, size_t cap, const char *s) {
  const size_t max = 48;
  size_t n = 0, i = 0;
  if (cap == 0) return;
  if (!s) s = "";
  const unsigned char *u = (const unsigned char *)s;
  while (u[i] && n + 4 < cap && i < max) {
    unsigned char c = u[i];
    size_t seq = c < 0x80 ? 1 : c >= 0xf0 ? 4 : c >= 0xe0 ? 3 : 2;
    if (i + seq > max || n + seq + 4 > cap) break;
    if (c < 0x20 || c == 0x7f) {
      dst[n++] = '?';
      i++;
      continue;
    }
    for (size_t k = 0; k < seq && u[i]; k++)
      dst[n++] = (char)u[i++];
  }
  if (u[i] && n + 3 < cap) {
    memcpy(dst + n, "...", 3);
    n += 3;
  }
  dst[n] = '\0';
}

void fg_model_destroy(fg_model *m) {
  if (!m) return;
  for (int i = 0; i < m->ndecisions; i++) {
    free(m->decisions[i].lower);
    free(m->decisions[i].upper);
  }
  free(m->decisions);
  free(m->title);
  free(m->canonical);
  cJSON_Delete(m->document);
  if (m->program) fg_program_free(m->program);
  if (m->sampler) fg_sampler_free(m->sampler);
  free(m);
}

fg_model *fg_model_ref(fg_model *m) {
  if (m) __atomic_fetch_add(&m->refs, 1, __ATOMIC_RELAXED);
  return m;
}

void fg_model_unref(fg_model *m) {
  if (!m) return;
  if (__atomic_sub_fetch(&m->refs, 1, __ATOMIC_RELEASE) == 0) {
    __atomic_thread_fence(__ATOMIC_ACQUIRE);
    fg_model_destroy(m);
  }
}

cJSON *fg_model_summary_json(const fg_model *m) {
  cJSON *o = cJSON_CreateObject();
  if (!o) return NULL;
  const fg_model_summary *s = &m->summary;
  struct {
    const char *key;
    int value;
  } counts[] = {{"decisions", s->decisions},
                {"decision_dims", s->decision_dims},
                {"uncertain", s->uncertain},
                {"uncertain_dims", s->uncertain_dims},
                {"definitions", s->definitions},
                {"constraints", s->constraints},
                {"rows", s->rows},
                {"deterministic_rows", s->deterministic_rows},
                {"affine_in_inputs", s->affine_in_inputs},
                {"affine_in_decisions", s->affine_in_decisions},
                {"affine_in_both", s->affine_in_both}};
  for (size_t i = 0; i < sizeof counts / sizeof counts[0]; i++)
    if (!cJSON_AddNumberToObject(o, counts[i].key, counts[i].value)) {
      cJSON_Delete(o);
      return NULL;
    }
  if (!cJSON_AddBoolToObject(o, "objective", s->objective)) {
    cJSON_Delete(o);
    return NULL;
  }
  return o;
}
