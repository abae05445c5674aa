/*
 * model/names.c -- the checks every member of a document shares: the
 * opening of an object member (an object, no unknown members), required
 * members, names, sizes, expression strings, member
 * arrays, and the one namespace of decisions, uncertain inputs, definitions
 * and constraints.
 *
 * Messages say what was expected and what was found; a found string is
 * quoted through fg_model_quote, so it is short and valid UTF-8.
 * Uniqueness is checked by sorting (n log n over up to 4 * FG_MEMBERS_MAX
 * names) and reported in document order, each repeat pointing at the
 * member that used the name first.
 *
 * Thread use: reentrant.
 */
#include "model_internal.h"

#include <cJSON.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- small checks ---- */

static bool member_is_known(const char *key, const char *const *allowed) {
  for (; *allowed; allowed++)
    if (strcmp(key, *allowed) == 0) return true;
  return false;
}

fg_model_opened fg_model_open_object(const cJSON *v, const char *base,
                                     const fg_model_object *o,
                                     fg_model_ctx *cx) {
  if (!cJSON_IsObject(v)) {
    fg_model_error(cx, base, "expected %s, found %s", o->shape,
                   fg_json_kind(v));
    return FG_MODEL_NOT_OBJECT;
  }
  fg_model_opened res = FG_MODEL_OBJECT_OK;
  for (const cJSON *c = v->child; c; c = c->next) {
    if (member_is_known(c->string, o->allowed)) continue;
    char ptr[FG_POINTER_MAX], q[64];
    fg_pointer_join(ptr, sizeof ptr, base, c->string);
    fg_model_quote(q, sizeof q, c->string);
    fg_model_error(cx, ptr, "unknown member '%s' in %s (expected %s)", q,
                   o->what, o->expected);
    res = FG_MODEL_UNKNOWN_MEMBERS;
  }
  return res;
}

static bool is_alpha_(char c) {
  return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || c == '_';
}
static bool is_digit(char c) {
  return c >= '0' && c <= '9';
}

/* [A-Za-z_][A-Za-z0-9_]{0,63} */
static bool is_identifier(const char *s) {
  if (!is_alpha_(s[0])) return false;
  size_t n = 1;
  for (; s[n]; n++)
    if (!is_alpha_(s[n]) && !is_digit(s[n])) return false;
  return n <= FG_NAME_MAX;
}

/* [a-z0-9][a-z0-9_.-]{0,63} */
bool fg_model_is_model_name(const char *s) {
  if (!((s[0] >= 'a' && s[0] <= 'z') || is_digit(s[0]))) return false;
  size_t n = 1;
  for (; s[n]; n++) {
    char c = s[n];
    if (!((c >= 'a' && c <= 'z') || is_digit(c) || c == '_' || c == '.' ||
          c == '-'))
      return false;
  }
  return n <= FG_NAME_MAX;
}

void fg_model_missing(fg_model_ctx *cx, const char *base, const char *key,
                      const char *expected) {
  char ptr[FG_POINTER_MAX];
  fg_pointer_join(ptr, sizeof ptr, base, key);
  fg_model_error(cx, ptr, "missing required member '%s' (expected %s)", key,
                 expected);
}

/* A member name of one of the four namespaced arrays. Returns the name or
 * NULL after reporting. */
const char *fg_model_member_name(const cJSON *obj, const char *base,
                                 fg_model_ctx *cx) {
  char ptr[FG_POINTER_MAX], q[64];
  const cJSON *n = cJSON_GetObjectItemCaseSensitive(obj, "name");
  if (!n) {
    fg_model_missing(cx, base, "name", "a name such as \"start\"");
    return NULL;
  }
  fg_pointer_join(ptr, sizeof ptr, base, "name");
  if (!cJSON_IsString(n)) {
    fg_model_error(cx, ptr, "expected a name string, found %s",
                   fg_json_kind(n));
    return NULL;
  }
  fg_model_quote(q, sizeof q, n->valuestring);
  if (strlen(n->valuestring) > FG_NAME_MAX && is_alpha_(n->valuestring[0])) {
    fg_model_limit(cx, ptr, FG_LIMIT_NAME_LENGTH, FG_NAME_MAX,
                   "name '%s' is %zu characters long; the limit is %d", q,
                   strlen(n->valuestring), FG_NAME_MAX);
    return NULL;
  }
  if (!is_identifier(n->valuestring)) {
    fg_model_error(cx, ptr,
                   "expected a name of letters, digits and '_' not starting "
                   "with a digit ([A-Za-z_][A-Za-z0-9_]{0,63}), found '%s'",
                   q);
    return NULL;
  }
  if (fg_expr_is_function_name(n->valuestring)) {
    fg_model_error(cx, ptr,
                   "'%s' is a function of the expression language and "
                   "cannot name a member",
                   q);
    return NULL;
  }
  return n->valuestring;
}

/* Optional "size": absent -> 0 (scalar). Returns false after reporting. */
bool fg_model_member_size(const cJSON *obj, const char *base, int *size,
                          fg_model_ctx *cx) {
  *size = 0;
  const cJSON *s = cJSON_GetObjectItemCaseSensitive(obj, "size");
  if (!s) return true;
  char ptr[FG_POINTER_MAX];
  fg_pointer_join(ptr, sizeof ptr, base, "size");
  if (!cJSON_IsNumber(s)) {
    fg_model_error(cx, ptr, "expected an integer size from 1 to %d, found %s",
                   FG_VECTOR_MAX, fg_json_kind(s));
    return false;
  }
  double v = s->valuedouble;
  if (v != floor(v) || v < 1) {
    fg_model_error(cx, ptr, "expected an integer size from 1 to %d, found %g",
                   FG_VECTOR_MAX, v);
    return false;
  }
  if (v > FG_VECTOR_MAX) {
    fg_model_limit(cx, ptr, FG_LIMIT_VECTOR_LENGTH, FG_VECTOR_MAX,
                   "size %g exceeds the vector length limit %d", v,
                   FG_VECTOR_MAX);
    return false;
  }
  *size = (int)v;
  return true;
}

/* An expression string member; returns it or NULL after reporting. */
const char *fg_model_expression(const cJSON *v, const char *ptr,
                                fg_model_ctx *cx) {
  if (!cJSON_IsString(v)) {
    fg_model_error(cx, ptr, "expected an expression string, found %s",
                   fg_json_kind(v));
    return NULL;
  }
  size_t n = strlen(v->valuestring);
  if (n > FG_EXPR_MAX_LENGTH) {
    fg_model_limit(cx, ptr, FG_LIMIT_EXPRESSION_LENGTH, FG_EXPR_MAX_LENGTH,
                   "expression is %zu characters long; the limit is %d", n,
                   FG_EXPR_MAX_LENGTH);
    return NULL;
  }
  return v->valuestring;
}

/* An array member that must not exceed FG_MEMBERS_MAX entries. */
bool fg_model_members_array(const cJSON *v, const char *ptr, const char *what,
                            int *count, fg_model_ctx *cx) {
  *count = 0;
  if (!cJSON_IsArray(v)) {
    fg_model_error(cx, ptr, "expected an array of %s, found %s", what,
                   fg_json_kind(v));
    return false;
  }
  int n = cJSON_GetArraySize(v);
  if (n > FG_MEMBERS_MAX) {
    fg_model_limit(cx, ptr, FG_LIMIT_MEMBERS, FG_MEMBERS_MAX,
                   "%d entries; the limit is %d", n, FG_MEMBERS_MAX);
    return false;
  }
  *count = n;
  return true;
}

/* ---- one namespace ---- */

typedef struct name_ref {
  const char *name;
  const char *section; /* "/decisions", ... */
  int index;           /* within the section */
  int order;           /* document order over all sections */
  bool duplicate;
  int first; /* order of the first holder when duplicate */
} name_ref;

static int name_ref_cmp(const void *a, const void *b) {
  const name_ref *x = a, *y = b;
  int c = strcmp(x->name, y->name);
  if (c) return c;
  return (x->order > y->order) - (x->order < y->order);
}

static int name_ref_order(const void *a, const void *b) {
  const name_ref *x = a, *y = b;
  return (x->order > y->order) - (x->order < y->order);
}

/* Names that failed their own check are skipped (NULL). */
static void add_name(name_ref *refs, int *n, const char *name,
                     const char *section, int index) {
  if (!name) return;
  refs[*n] =
      (name_ref){.name = name, .section = section, .index = index, .order = *n};
  (*n)++;
}

bool fg_model_check_unique_names(const fg_model_plan *pl, fg_model_ctx *cx) {
  int total =
      pl->ndecisions + pl->nuncertain + pl->ndefinitions + pl->nconstraints;
  if (total < 2) return true;
  name_ref *refs = calloc((size_t)total, sizeof *refs);
  if (!refs) {
    fg_model_note(cx, FG_ENOMEM);
    return false;
  }
  int n = 0;
  for (int i = 0; i < pl->ndecisions; i++)
    add_name(refs, &n, pl->decisions[i].name[0] ? pl->decisions[i].name : NULL,
             "/decisions", i);
  for (int i = 0; i < pl->nuncertain; i++)
    add_name(refs, &n, pl->inputs[i].name, "/uncertain", i);
  for (int i = 0; i < pl->ndefinitions; i++)
    add_name(refs, &n, pl->definitions[i].name, "/definitions", i);
  for (int i = 0; i < pl->nconstraints; i++)
    add_name(refs, &n, pl->constraints[i].name, "/constraints", i);
  qsort(refs, (size_t)n, sizeof *refs, name_ref_cmp);
  bool ok = true;
  for (int i = 1; i < n; i++) {
    if (strcmp(refs[i].name, refs[i - 1].name) != 0) continue;
    refs[i].duplicate = true;
    refs[i].first =
        refs[i - 1].duplicate ? refs[i - 1].first : refs[i - 1].order;
    ok = false;
  }
  if (!ok) {
    /* report in document order, each pointing at the first holder */
    name_ref *by_order = malloc((size_t)n * sizeof *by_order);
    if (!by_order) {
      free(refs);
      fg_model_note(cx, FG_ENOMEM);
      return false;
    }
    memcpy(by_order, refs, (size_t)n * sizeof *refs);
    qsort(by_order, (size_t)n, sizeof *by_order, name_ref_order);
    for (int i = 0; i < n; i++) {
      if (!by_order[i].duplicate) continue;
      const name_ref *first = &by_order[by_order[i].first];
      char ptr[FG_POINTER_MAX], fptr[FG_POINTER_MAX], q[64];
      fg_pointer_index(ptr, sizeof ptr, by_order[i].section, by_order[i].index);
      fg_pointer_join(ptr, sizeof ptr, ptr, "name");
      fg_pointer_index(fptr, sizeof fptr, first->section, first->index);
      fg_pointer_join(fptr, sizeof fptr, fptr, "name");
      fg_model_quote(q, sizeof q, by_order[i].name);
      fg_model_error(cx, ptr,
                     "expected a unique name, found '%s' already "
                     "used at %s",
                     q, fptr);
    }
    free(by_order);
  }
  free(refs);
  return ok;
}
