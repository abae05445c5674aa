/*
 * sample/param.c -- reading distribution parameters from cJSON.
 *
 * Design: a parameter of an input with `size` n is a number (shared by all
 * elements) or an array of exactly n numbers (one per element); tables
 * (discrete values, empirical data) are arrays of any length up to
 * FG_TABLE_CELLS_MAX. Every value must be a finite number. Errors point at
 * the member, or at the element when the parameter is an array, and say
 * what was expected and what was found. Nothing here clamps or repairs.
 *
 * Thread use: called while building a sampler, by one thread.
 */
#include "sample/sample_internal.h"

#include "feasgate/limits.h"

#include <cjson/cJSON.h>

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

const char *fg_family_json_type(const cJSON *v) {
  if (!v) return "nothing";
  if (cJSON_IsNumber(v)) return "a number";
  if (cJSON_IsString(v)) return "a string";
  if (cJSON_IsArray(v)) return "an array";
  if (cJSON_IsObject(v)) return "an object";
  if (cJSON_IsBool(v)) return "a boolean";
  if (cJSON_IsNull(v)) return "null";
  return "an invalid value";
}

fg_status fg_family_expect_object(const cJSON *v, const char *ptr,
                                  const char *what, fg_problem *p) {
  if (cJSON_IsObject(v)) return FG_OK;
  return fg_problem_add(p, FG_EINVAL, ptr, 0, "expected %s, found %s", what,
                        fg_family_json_type(v));
}

static const cJSON *member(const fg_params *c, const char *name) {
  return cJSON_GetObjectItemCaseSensitive(c->dist, name);
}

int fg_family_param_present(const fg_params *c, const char *name) {
  return member(c, name) != NULL;
}

void fg_family_param_pointer(const fg_params *c, const char *name, int e,
                             char *buf, size_t cap) {
  fg_pointer_join(buf, cap, c->ptr, name);
  if (e >= 0 && cJSON_IsArray(member(c, name))) {
    char tmp[FG_POINTER_MAX];
    snprintf(tmp, sizeof tmp, "%s", buf);
    fg_pointer_index(buf, cap, tmp, e);
  }
}

void fg_family_param_error(fg_params *c, fg_status st, const char *name, int e,
                           const char *fmt, ...) {
  char ptr[FG_POINTER_MAX];
  char msg[FG_MESSAGE_MAX];
  va_list ap;
  fg_family_param_pointer(c, name, e, ptr, sizeof ptr);
  va_start(ap, fmt);
  vsnprintf(msg, sizeof msg, fmt, ap);
  va_end(ap);
  fg_problem_add(c->p, st, ptr, 0, "%s", msg);
  if (c->st == FG_OK) c->st = st;
}

/* Check one JSON value is a finite number; report at ptr otherwise. */
static int finite_number(fg_params *c, const cJSON *v, const char *ptr,
                         double *out) {
  if (!cJSON_IsNumber(v)) {
    fg_problem_add(c->p, FG_EINVAL, ptr, 0, "expected a number, found %s",
                   fg_family_json_type(v));
    if (c->st == FG_OK) c->st = FG_EINVAL;
    return -1;
  }
  if (!isfinite(v->valuedouble)) {
    fg_problem_add(c->p, FG_EINVAL, ptr, 0,
                   "expected a finite number, found one out of range");
    if (c->st == FG_OK) c->st = FG_EINVAL;
    return -1;
  }
  *out = v->valuedouble;
  return 0;
}

int fg_family_param_vec(fg_params *c, const char *name, double *out,
                        int required, double dflt) {
  const cJSON *v = member(c, name);
  char ptr[FG_POINTER_MAX];
  fg_pointer_join(ptr, sizeof ptr, c->ptr, name);
  if (!v) {
    if (required) {
      fg_problem_add(c->p, FG_EINVAL, c->ptr, 0,
                     "family '%s' needs parameter '%s' (a number or an "
                     "array of %d numbers), found none",
                     c->family, name, c->size);
      if (c->st == FG_OK) c->st = FG_EINVAL;
      return -1;
    }
    for (int e = 0; e < c->size; e++)
      out[e] = dflt;
    return 0;
  }
  if (cJSON_IsNumber(v)) {
    double x;
    if (finite_number(c, v, ptr, &x) != 0) return -1;
    for (int e = 0; e < c->size; e++)
      out[e] = x;
    return 1;
  }
  if (!cJSON_IsArray(v)) {
    fg_problem_add(c->p, FG_EINVAL, ptr, 0,
                   "expected a number or an array of %d numbers, found %s",
                   c->size, fg_family_json_type(v));
    if (c->st == FG_OK) c->st = FG_EINVAL;
    return -1;
  }
  int n = cJSON_GetArraySize(v);
  if (n != c->size) {
    fg_problem_add(c->p, FG_EINVAL, ptr, 0,
                   "expected a number or an array of %d numbers (the "
                   "input's size), found an array of %d",
                   c->size, n);
    if (c->st == FG_OK) c->st = FG_EINVAL;
    return -1;
  }
  int e = 0, bad = 0;
  for (const cJSON *x = v->child; x; x = x->next, e++) {
    char eptr[FG_POINTER_MAX];
    fg_pointer_index(eptr, sizeof eptr, ptr, e);
    if (finite_number(c, x, eptr, &out[e]) != 0) bad = 1;
  }
  return bad ? -1 : 1;
}

int fg_family_param_list(fg_params *c, const char *name, int required,
                         double **out, int *nout) {
  const cJSON *v = member(c, name);
  char ptr[FG_POINTER_MAX];
  *out = NULL;
  *nout = 0;
  fg_pointer_join(ptr, sizeof ptr, c->ptr, name);
  if (!v) {
    if (!required) return 0;
    fg_problem_add(c->p, FG_EINVAL, c->ptr, 0,
                   "family '%s' needs parameter '%s' (an array of numbers), "
                   "found none",
                   c->family, name);
    if (c->st == FG_OK) c->st = FG_EINVAL;
    return -1;
  }
  if (!cJSON_IsArray(v)) {
    fg_problem_add(c->p, FG_EINVAL, ptr, 0,
                   "expected an array of numbers, found %s",
                   fg_family_json_type(v));
    if (c->st == FG_OK) c->st = FG_EINVAL;
    return -1;
  }
  int n = cJSON_GetArraySize(v);
  if (n < 1) {
    fg_problem_add(c->p, FG_EINVAL, ptr, 0,
                   "expected an array of at least one number, found an "
                   "empty array");
    if (c->st == FG_OK) c->st = FG_EINVAL;
    return -1;
  }
  if (n > FG_TABLE_CELLS_MAX) {
    fg_problem_limit(c->p, ptr, FG_LIMIT_TABLE_CELLS, FG_TABLE_CELLS_MAX,
                     "expected at most %d values, found %d", FG_TABLE_CELLS_MAX,
                     n);
    if (c->st == FG_OK) c->st = FG_ELIMIT;
    return -1;
  }
  double *a = malloc((size_t)n * sizeof *a);
  if (!a) {
    fg_problem_set(c->p, FG_ENOMEM, "out of memory reading %s", ptr);
    if (c->st == FG_OK) c->st = FG_ENOMEM;
    return -1;
  }
  int e = 0, bad = 0;
  for (const cJSON *x = v->child; x; x = x->next, e++) {
    char eptr[FG_POINTER_MAX];
    fg_pointer_index(eptr, sizeof eptr, ptr, e);
    if (finite_number(c, x, eptr, &a[e]) != 0) bad = 1;
  }
  if (bad) {
    free(a);
    return -1;
  }
  *out = a;
  *nout = n;
  return 1;
}

void fg_family_param_unknown(fg_params *c, const char *const *allowed) {
  for (const cJSON *m = c->dist->child; m; m = m->next) {
    const char *k = m->string ? m->string : "";
    if (strcmp(k, "family") == 0) continue;
    int known = 0;
    for (const char *const *a = allowed; *a; a++)
      if (strcmp(*a, k) == 0) known = 1;
    if (known) continue;
    char list[200] = "";
    size_t len = 0;
    for (const char *const *a = allowed; *a && len < sizeof list; a++)
      len += (size_t)snprintf(list + len, sizeof list - len, "%s%s",
                              a == allowed ? "" : ", ", *a);
    char ptr[FG_POINTER_MAX];
    fg_pointer_join(ptr, sizeof ptr, c->ptr, k);
    fg_problem_add(c->p, FG_EINVAL, ptr, 0,
                   "unknown parameter '%.64s' for family '%s' (expected "
                   "%s)",
                   k, c->family, list);
    if (c->st == FG_OK) c->st = FG_EINVAL;
  }
}
