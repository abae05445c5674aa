/*
 * model/inputs.c -- validation of what a check is about: decisions (names,
 * sizes, bounds, integrality) and the random inputs and dependence arrays,
 * as far as model/ owns them (distribution objects and dependence entries
 * are validated by the sampler).
 *
 * Decision bounds are filled into the plan's fg_decision entries: absent
 * bounds are -INFINITY / +INFINITY, a scalar bound of a vector decision is
 * repeated over its elements. Dimension totals are checked against
 * FG_DECISION_DIMS_MAX and FG_UNCERTAIN_DIMS_MAX only when every entry was
 * sound (a broken size would make the total meaningless).
 *
 * Thread use: reentrant.
 */
#include "model_internal.h"

#include <cJSON.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- decisions ---- */

/* "lower" or "upper": a number, or an array of `size` numbers. Fills
 * out[count]; returns false after reporting. */
static bool decision_bound(const cJSON *obj, const char *base, const char *key,
                           int size, double *out, fg_model_ctx *cx) {
  const cJSON *b = cJSON_GetObjectItemCaseSensitive(obj, key);
  if (!b) return true;
  char ptr[FG_POINTER_MAX];
  fg_pointer_join(ptr, sizeof ptr, base, key);
  int count = size > 0 ? size : 1;
  if (cJSON_IsNumber(b)) {
    for (int k = 0; k < count; k++)
      out[k] = b->valuedouble;
    return true;
  }
  if (!cJSON_IsArray(b) || size == 0) {
    if (size == 0)
      fg_model_error(cx, ptr,
                     "expected a number (the decision is a scalar), "
                     "found %s",
                     fg_json_kind(b));
    else
      fg_model_error(cx, ptr,
                     "expected a number or an array of %d numbers, "
                     "found %s",
                     size, fg_json_kind(b));
    return false;
  }
  int n = cJSON_GetArraySize(b);
  if (n != size) {
    fg_model_error(cx, ptr,
                   "expected an array of %d numbers (the decision's "
                   "size), found %d",
                   size, n);
    return false;
  }
  bool ok = true;
  int k = 0;
  for (const cJSON *e = b->child; e; e = e->next, k++) {
    if (cJSON_IsNumber(e)) {
      out[k] = e->valuedouble;
      continue;
    }
    char eptr[FG_POINTER_MAX];
    fg_pointer_index(eptr, sizeof eptr, ptr, k);
    fg_model_error(cx, eptr, "expected a number, found %s", fg_json_kind(e));
    ok = false;
  }
  return ok;
}

static const char *const decision_members[] = {"name",  "size",    "lower",
                                               "upper", "integer", NULL};
static const fg_model_object decision_object = {
    "a decision object {\"name\", \"size\"?, \"lower\"?, \"upper\"?, "
    "\"integer\"?}",
    "a decision", decision_members, "name, size, lower, upper, integer"};

static bool validate_decision(const cJSON *d, const char *base,
                              fg_decision *out, fg_model_ctx *cx) {
  fg_model_opened opened = fg_model_open_object(d, base, &decision_object, cx);
  if (opened == FG_MODEL_NOT_OBJECT) return false;
  bool ok = opened == FG_MODEL_OBJECT_OK;
  const char *name = fg_model_member_name(d, base, cx);
  if (name)
    snprintf(out->name, sizeof out->name, "%s", name);
  else
    ok = false;

  const cJSON *integer = cJSON_GetObjectItemCaseSensitive(d, "integer");
  if (integer && !cJSON_IsBool(integer)) {
    char ptr[FG_POINTER_MAX];
    fg_pointer_join(ptr, sizeof ptr, base, "integer");
    fg_model_error(cx, ptr, "expected true or false, found %s",
                   fg_json_kind(integer));
    ok = false;
  }
  out->integer = cJSON_IsTrue(integer);

  int size;
  if (!fg_model_member_size(d, base, &size, cx)) return false;
  out->size = size;
  out->count = size > 0 ? size : 1;
  out->lower = malloc((size_t)out->count * sizeof(double));
  out->upper = malloc((size_t)out->count * sizeof(double));
  if (!out->lower || !out->upper) {
    fg_model_note(cx, FG_ENOMEM);
    return false;
  }
  for (int k = 0; k < out->count; k++) {
    out->lower[k] = -INFINITY;
    out->upper[k] = INFINITY;
  }
  bool lower_ok = decision_bound(d, base, "lower", size, out->lower, cx);
  bool upper_ok = decision_bound(d, base, "upper", size, out->upper, cx);
  if (!lower_ok || !upper_ok) return false;
  for (int k = 0; k < out->count; k++) {
    if (out->lower[k] <= out->upper[k]) continue;
    char ptr[FG_POINTER_MAX];
    fg_pointer_join(ptr, sizeof ptr, base, "upper");
    const cJSON *u = cJSON_GetObjectItemCaseSensitive(d, "upper");
    if (cJSON_IsArray(u)) fg_pointer_index(ptr, sizeof ptr, ptr, k);
    if (size > 0)
      fg_model_error(cx, ptr,
                     "expected upper >= lower, found upper %g below "
                     "lower %g (element %d)",
                     out->upper[k], out->lower[k], k);
    else
      fg_model_error(cx, ptr,
                     "expected upper >= lower, found upper %g below "
                     "lower %g",
                     out->upper[k], out->lower[k]);
    ok = false;
    break;
  }
  return ok;
}

bool fg_model_validate_decisions(const cJSON *arr, fg_model_plan *pl,
                                 fg_model_ctx *cx) {
  int n;
  if (!arr) {
    fg_model_missing(cx, "", "decisions", "an array of decision objects");
    return false;
  }
  if (!fg_model_members_array(arr, "/decisions", "decision objects", &n, cx))
    return false;
  pl->decisions = calloc((size_t)(n > 0 ? n : 1), sizeof *pl->decisions);
  if (!pl->decisions) {
    fg_model_note(cx, FG_ENOMEM);
    return false;
  }
  pl->ndecisions = n;
  bool ok = true;
  long dims = 0;
  int i = 0;
  for (const cJSON *d = arr->child; d; d = d->next, i++) {
    char base[FG_POINTER_MAX];
    fg_pointer_index(base, sizeof base, "/decisions", i);
    if (!validate_decision(d, base, &pl->decisions[i], cx))
      ok = false;
    else
      pl->decisions[i].offset = (int)dims;
    dims += pl->decisions[i].count;
  }
  if (ok && dims > FG_DECISION_DIMS_MAX) {
    fg_model_limit(cx, "/decisions", FG_LIMIT_DECISION_DIMENSIONS,
                   FG_DECISION_DIMS_MAX,
                   "decisions have %ld elements in all; the limit is %d", dims,
                   FG_DECISION_DIMS_MAX);
    ok = false;
  }
  pl->decision_dims =
      (int)(dims < FG_DECISION_DIMS_MAX ? dims : FG_DECISION_DIMS_MAX);
  return ok;
}

/* ---- uncertain inputs and dependence ---- */

static const char *const uncertain_members[] = {"name", "size", "distribution",
                                                NULL};
static const fg_model_object uncertain_object = {
    "a random input object {\"name\", \"size\"?, \"distribution\"}",
    "a random input", uncertain_members, "name, size, distribution"};

bool fg_model_validate_uncertain(const cJSON *arr, fg_model_plan *pl,
                                 fg_model_ctx *cx) {
  int n;
  if (!arr) {
    fg_model_missing(cx, "", "uncertain",
                     "an array of random inputs, maybe empty");
    return false;
  }
  if (!fg_model_members_array(arr, "/uncertain", "random input objects", &n,
                              cx))
    return false;
  pl->uncertain = arr;
  pl->inputs = calloc((size_t)(n > 0 ? n : 1), sizeof *pl->inputs);
  if (!pl->inputs) {
    fg_model_note(cx, FG_ENOMEM);
    return false;
  }
  pl->nuncertain = n;
  bool ok = true;
  long dims = 0;
  int i = 0;
  for (const cJSON *u = arr->child; u; u = u->next, i++) {
    char base[FG_POINTER_MAX];
    fg_pointer_index(base, sizeof base, "/uncertain", i);
    fg_model_opened opened =
        fg_model_open_object(u, base, &uncertain_object, cx);
    if (opened != FG_MODEL_OBJECT_OK) ok = false;
    if (opened == FG_MODEL_NOT_OBJECT) continue;
    pl->inputs[i].name = fg_model_member_name(u, base, cx);
    if (!pl->inputs[i].name) ok = false;
    int size;
    if (fg_model_member_size(u, base, &size, cx)) {
      pl->inputs[i].size = size;
      dims += size > 0 ? size : 1;
    } else {
      ok = false;
    }
    const cJSON *dist = cJSON_GetObjectItemCaseSensitive(u, "distribution");
    if (!dist) {
      fg_model_missing(
          cx, base, "distribution",
          "an object such as {\"family\": \"normal\", \"mean\": 0, "
          "\"sd\": 1}");
      ok = false;
    } else if (!cJSON_IsObject(dist)) {
      char ptr[FG_POINTER_MAX];
      fg_pointer_join(ptr, sizeof ptr, base, "distribution");
      fg_model_error(cx, ptr,
                     "expected a distribution object with a "
                     "\"family\", found %s",
                     fg_json_kind(dist));
      ok = false;
    }
  }
  if (ok && dims > FG_UNCERTAIN_DIMS_MAX) {
    fg_model_limit(cx, "/uncertain", FG_LIMIT_UNCERTAIN_DIMENSIONS,
                   FG_UNCERTAIN_DIMS_MAX,
                   "random inputs have %ld dimensions in all; the limit is %d",
                   dims, FG_UNCERTAIN_DIMS_MAX);
    ok = false;
  }
  pl->uncertain_dims =
      (int)(dims < FG_UNCERTAIN_DIMS_MAX ? dims : FG_UNCERTAIN_DIMS_MAX);
  return ok;
}

bool fg_model_validate_dependence(const cJSON *arr, fg_model_plan *pl,
                                  fg_model_ctx *cx) {
  int n;
  if (!arr) return true;
  if (!fg_model_members_array(arr, "/dependence", "dependence objects", &n, cx))
    return false;
  pl->dependence = arr;
  bool ok = true;
  int i = 0;
  for (const cJSON *d = arr->child; d; d = d->next, i++) {
    if (cJSON_IsObject(d)) continue;
    char ptr[FG_POINTER_MAX];
    fg_pointer_index(ptr, sizeof ptr, "/dependence", i);
    fg_model_error(cx, ptr,
                   "expected a dependence object {\"kind\", "
                   "\"members\", ...}, found %s",
                   fg_json_kind(d));
    ok = false;
  }
  return ok;
}
