/*
 * model/validate.c -- member-by-member validation of a format-1 document.
 *
 * Every member is checked on its own and every fault is reported with the
 * JSON Pointer of the member and a message saying what was expected and
 * what was found, so one registration attempt lists all of a document's
 * structural mistakes (up to the problem's item cap). Unknown members are
 * refused at the top level and inside the objects this file owns
 * (decisions, uncertain entries, definitions, constraints, objective,
 * target): a misspelt "uper" silently ignored would change what a check
 * means. Distribution objects and dependence entries belong to the sampler
 * (sample/), which validates their contents itself.
 *
 * Bounded work: an array longer than FG_MEMBERS_MAX is reported and not
 * walked; names are checked for uniqueness by sorting (n log n).
 *
 * The result is an fg_model_plan whose strings point into the document.
 * plan->names_ok says whether expressions may be compiled (every name and
 * shape is sound); plan->sampler_ok whether the sampler may be built.
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

/* Refuse members of obj not in `allowed` (NULL-terminated). */
static bool check_members(const cJSON *obj, const char *base, const char *what,
                          const char *const *allowed, const char *expected,
                          fg_model_ctx *cx) {
  bool ok = true;
  for (const cJSON *c = obj->child; c; c = c->next) {
    if (member_is_known(c->string, allowed)) continue;
    char ptr[FG_POINTER_MAX], q[64];
    fg_pointer_join(ptr, sizeof ptr, base, c->string);
    fg_model_quote(q, sizeof q, c->string);
    fg_model_error(cx, ptr, "unknown member '%s' in %s (expected %s)", q,
                   what, expected);
    ok = false;
  }
  return ok;
}

static bool is_alpha_(char c) {
  return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || c == '_';
}
static bool is_digit(char c) { return c >= '0' && c <= '9'; }

/* [A-Za-z_][A-Za-z0-9_]{0,63} */
static bool is_identifier(const char *s) {
  if (!is_alpha_(s[0])) return false;
  size_t n = 1;
  for (; s[n]; n++)
    if (!is_alpha_(s[n]) && !is_digit(s[n])) return false;
  return n <= FG_NAME_MAX;
}

/* [a-z0-9][a-z0-9_.-]{0,63} */
static bool is_model_name(const char *s) {
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

static void missing(fg_model_ctx *cx, const char *base, const char *key,
                    const char *expected) {
  char ptr[FG_POINTER_MAX];
  fg_pointer_join(ptr, sizeof ptr, base, key);
  fg_model_error(cx, ptr, "missing required member '%s' (expected %s)", key,
                 expected);
}

/* A member name of one of the four namespaced arrays. Returns the name or
 * NULL after reporting. */
static const char *member_name(const cJSON *obj, const char *base,
                               fg_model_ctx *cx) {
  char ptr[FG_POINTER_MAX], q[64];
  const cJSON *n = cJSON_GetObjectItemCaseSensitive(obj, "name");
  if (!n) {
    missing(cx, base, "name", "a name such as \"start\"");
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
    fg_model_limit(cx, ptr, "name_length", FG_NAME_MAX,
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
static bool member_size(const cJSON *obj, const char *base, int *size,
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
    fg_model_limit(cx, ptr, "vector_length", FG_VECTOR_MAX,
                   "size %g exceeds the vector length limit %d", v,
                   FG_VECTOR_MAX);
    return false;
  }
  *size = (int)v;
  return true;
}

/* An expression string member; returns it or NULL after reporting. */
static const char *expression(const cJSON *v, const char *ptr,
                              fg_model_ctx *cx) {
  if (!cJSON_IsString(v)) {
    fg_model_error(cx, ptr, "expected an expression string, found %s",
                   fg_json_kind(v));
    return NULL;
  }
  size_t n = strlen(v->valuestring);
  if (n > FG_EXPR_MAX_LENGTH) {
    fg_model_limit(cx, ptr, "expression_length", FG_EXPR_MAX_LENGTH,
                   "expression is %zu characters long; the limit is %d", n,
                   FG_EXPR_MAX_LENGTH);
    return NULL;
  }
  return v->valuestring;
}

/* An array member that must not exceed FG_MEMBERS_MAX entries. */
static bool members_array(const cJSON *v, const char *ptr, const char *what,
                          int *count, fg_model_ctx *cx) {
  *count = 0;
  if (!cJSON_IsArray(v)) {
    fg_model_error(cx, ptr, "expected an array of %s, found %s", what,
                   fg_json_kind(v));
    return false;
  }
  int n = cJSON_GetArraySize(v);
  if (n > FG_MEMBERS_MAX) {
    fg_model_limit(cx, ptr, "members", FG_MEMBERS_MAX,
                   "%d entries; the limit is %d", n, FG_MEMBERS_MAX);
    return false;
  }
  *count = n;
  return true;
}

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
    for (int k = 0; k < count; k++) out[k] = b->valuedouble;
    return true;
  }
  if (!cJSON_IsArray(b) || size == 0) {
    if (size == 0)
      fg_model_error(cx, ptr, "expected a number (the decision is a scalar), "
                     "found %s", fg_json_kind(b));
    else
      fg_model_error(cx, ptr, "expected a number or an array of %d numbers, "
                     "found %s", size, fg_json_kind(b));
    return false;
  }
  int n = cJSON_GetArraySize(b);
  if (n != size) {
    fg_model_error(cx, ptr, "expected an array of %d numbers (the decision's "
                   "size), found %d", size, n);
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

static bool validate_decision(const cJSON *d, const char *base,
                              fg_decision *out, fg_model_ctx *cx) {
  if (!cJSON_IsObject(d)) {
    fg_model_error(cx, base, "expected a decision object {\"name\", "
                   "\"size\"?, \"lower\"?, \"upper\"?, \"integer\"?}, "
                   "found %s", fg_json_kind(d));
    return false;
  }
  bool ok = check_members(d, base, "a decision", decision_members,
                          "name, size, lower, upper, integer", cx);
  const char *name = member_name(d, base, cx);
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
  if (!member_size(d, base, &size, cx)) return false;
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
      fg_model_error(cx, ptr, "expected upper >= lower, found upper %g below "
                     "lower %g (element %d)", out->upper[k], out->lower[k], k);
    else
      fg_model_error(cx, ptr, "expected upper >= lower, found upper %g below "
                     "lower %g", out->upper[k], out->lower[k]);
    ok = false;
    break;
  }
  return ok;
}

static bool validate_decisions(const cJSON *arr, fg_model_plan *pl,
                               fg_model_ctx *cx) {
  int n;
  if (!arr) {
    missing(cx, "", "decisions", "an array of decision objects");
    return false;
  }
  if (!members_array(arr, "/decisions", "decision objects", &n, cx))
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
    fg_model_limit(cx, "/decisions", "decision_dimensions",
                   FG_DECISION_DIMS_MAX,
                   "decisions have %ld elements in all; the limit is %d", dims,
                   FG_DECISION_DIMS_MAX);
    ok = false;
  }
  pl->decision_dims = (int)(dims < FG_DECISION_DIMS_MAX ? dims
                                                        : FG_DECISION_DIMS_MAX);
  return ok;
}

/* ---- uncertain inputs and dependence ---- */

static const char *const uncertain_members[] = {"name", "size", "distribution",
                                                NULL};

static bool validate_uncertain(const cJSON *arr, fg_model_plan *pl,
                               fg_model_ctx *cx) {
  int n;
  if (!arr) {
    missing(cx, "", "uncertain", "an array of random inputs, maybe empty");
    return false;
  }
  if (!members_array(arr, "/uncertain", "random input objects", &n, cx))
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
    if (!cJSON_IsObject(u)) {
      fg_model_error(cx, base, "expected a random input object {\"name\", "
                     "\"size\"?, \"distribution\"}, found %s",
                     fg_json_kind(u));
      ok = false;
      continue;
    }
    if (!check_members(u, base, "a random input", uncertain_members,
                       "name, size, distribution", cx))
      ok = false;
    pl->inputs[i].name = member_name(u, base, cx);
    if (!pl->inputs[i].name) ok = false;
    int size;
    if (member_size(u, base, &size, cx)) {
      pl->inputs[i].size = size;
      dims += size > 0 ? size : 1;
    } else {
      ok = false;
    }
    const cJSON *dist = cJSON_GetObjectItemCaseSensitive(u, "distribution");
    if (!dist) {
      missing(cx, base, "distribution",
              "an object such as {\"family\": \"normal\", \"mean\": 0, "
              "\"sd\": 1}");
      ok = false;
    } else if (!cJSON_IsObject(dist)) {
      char ptr[FG_POINTER_MAX];
      fg_pointer_join(ptr, sizeof ptr, base, "distribution");
      fg_model_error(cx, ptr, "expected a distribution object with a "
                     "\"family\", found %s", fg_json_kind(dist));
      ok = false;
    }
  }
  if (ok && dims > FG_UNCERTAIN_DIMS_MAX) {
    fg_model_limit(cx, "/uncertain", "uncertain_dimensions",
                   FG_UNCERTAIN_DIMS_MAX,
                   "random inputs have %ld dimensions in all; the limit is %d",
                   dims, FG_UNCERTAIN_DIMS_MAX);
    ok = false;
  }
  pl->uncertain_dims = (int)(dims < FG_UNCERTAIN_DIMS_MAX
                                 ? dims
                                 : FG_UNCERTAIN_DIMS_MAX);
  return ok;
}

static bool validate_dependence(const cJSON *arr, fg_model_plan *pl,
                                fg_model_ctx *cx) {
  int n;
  if (!arr) return true;
  if (!members_array(arr, "/dependence", "dependence objects", &n, cx))
    return false;
  pl->dependence = arr;
  bool ok = true;
  int i = 0;
  for (const cJSON *d = arr->child; d; d = d->next, i++) {
    if (cJSON_IsObject(d)) continue;
    char ptr[FG_POINTER_MAX];
    fg_pointer_index(ptr, sizeof ptr, "/dependence", i);
    fg_model_error(cx, ptr, "expected a dependence object {\"kind\", "
                   "\"members\", ...}, found %s", fg_json_kind(d));
    ok = false;
  }
  return ok;
}

/* ---- definitions, constraints, objective, target ---- */

static const char *const definition_members[] = {"name", "value", "elements",
                                                 NULL};

static bool validate_definition(const cJSON *d, const char *base,
                                fg_plan_definition *out, fg_model_ctx *cx) {
  if (!cJSON_IsObject(d)) {
    fg_model_error(cx, base, "expected a definition object {\"name\", "
                   "\"value\"} or {\"name\", \"elements\"}, found %s",
                   fg_json_kind(d));
    return false;
  }
  bool ok = check_members(d, base, "a definition", definition_members,
                          "name and one of value, elements", cx);
  out->name = member_name(d, base, cx);
  if (!out->name) ok = false;
  const cJSON *value = cJSON_GetObjectItemCaseSensitive(d, "value");
  const cJSON *elements = cJSON_GetObjectItemCaseSensitive(d, "elements");
  char ptr[FG_POINTER_MAX];
  if (value && elements) {
    fg_model_error(cx, base, "expected exactly one of 'value' and "
                   "'elements', found both");
    return false;
  }
  if (!value && !elements) {
    fg_model_error(cx, base, "expected one of 'value' (an expression) and "
                   "'elements' (an array of expressions), found neither");
    return false;
  }
  if (value) {
    fg_pointer_join(ptr, sizeof ptr, base, "value");
    out->value = expression(value, ptr, cx);
    return ok && out->value;
  }
  fg_pointer_join(ptr, sizeof ptr, base, "elements");
  if (!cJSON_IsArray(elements) || !elements->child) {
    fg_model_error(cx, ptr, "expected a non-empty array of expression "
                   "strings, found %s",
                   cJSON_IsArray(elements) ? "an empty array"
                                           : fg_json_kind(elements));
    return false;
  }
  int n = cJSON_GetArraySize(elements);
  if (n > FG_VECTOR_MAX) {
    fg_model_limit(cx, ptr, "vector_length", FG_VECTOR_MAX,
                   "%d elements; the limit is %d", n, FG_VECTOR_MAX);
    return false;
  }
  out->elements = calloc((size_t)n, sizeof *out->elements);
  if (!out->elements) {
    fg_model_note(cx, FG_ENOMEM);
    return false;
  }
  out->nelements = n;
  int k = 0;
  for (const cJSON *e = elements->child; e; e = e->next, k++) {
    char eptr[FG_POINTER_MAX];
    fg_pointer_index(eptr, sizeof eptr, ptr, k);
    out->elements[k] = expression(e, eptr, cx);
    if (!out->elements[k]) ok = false;
  }
  return ok;
}

static const char *const constraint_members[] = {"name", "require", NULL};

static bool validate_constraint(const cJSON *c, const char *base,
                                fg_plan_constraint *out, fg_model_ctx *cx) {
  if (!cJSON_IsObject(c)) {
    fg_model_error(cx, base, "expected a constraint object {\"name\", "
                   "\"require\"}, found %s", fg_json_kind(c));
    return false;
  }
  bool ok = check_members(c, base, "a constraint", constraint_members,
                          "name, require", cx);
  out->name = member_name(c, base, cx);
  if (!out->name) ok = false;
  const cJSON *req = cJSON_GetObjectItemCaseSensitive(c, "require");
  if (!req) {
    missing(cx, base, "require", "a comparison such as \"x <= 10\"");
    return false;
  }
  char ptr[FG_POINTER_MAX];
  fg_pointer_join(ptr, sizeof ptr, base, "require");
  out->require = expression(req, ptr, cx);
  return ok && out->require;
}

static bool validate_objective(const cJSON *o, fg_model_plan *pl,
                               fg_model_ctx *cx) {
  static const char *const allowed[] = {"minimize", "maximize", NULL};
  if (!o) return true;
  if (!cJSON_IsObject(o)) {
    fg_model_error(cx, "/objective", "expected {\"minimize\": expression} or "
                   "{\"maximize\": expression}, found %s", fg_json_kind(o));
    return false;
  }
  bool ok = check_members(o, "/objective", "the objective", allowed,
                          "minimize or maximize", cx);
  const cJSON *mn = cJSON_GetObjectItemCaseSensitive(o, "minimize");
  const cJSON *mx = cJSON_GetObjectItemCaseSensitive(o, "maximize");
  if (mn && mx) {
    fg_model_error(cx, "/objective", "expected one of 'minimize' and "
                   "'maximize', found both");
    return false;
  }
  if (!mn && !mx) {
    if (ok)
      fg_model_error(cx, "/objective", "expected 'minimize' or 'maximize', "
                     "found neither");
    return false;
  }
  pl->sense = mn ? FG_OBJECTIVE_MINIMIZE : FG_OBJECTIVE_MAXIMIZE;
  pl->objective_pointer = mn ? "/objective/minimize" : "/objective/maximize";
  pl->objective = expression(mn ? mn : mx, pl->objective_pointer, cx);
  if (!pl->objective) pl->sense = FG_OBJECTIVE_NONE;
  return ok && pl->objective;
}

static bool target_value(const cJSON *t, const char *key, double *out,
                         fg_model_ctx *cx) {
  const cJSON *v = cJSON_GetObjectItemCaseSensitive(t, key);
  if (!v) return true;
  char ptr[FG_POINTER_MAX];
  fg_pointer_join(ptr, sizeof ptr, "/target", key);
  if (!cJSON_IsNumber(v)) {
    fg_model_error(cx, ptr, "expected a number strictly between 0 and 1, "
                   "found %s", fg_json_kind(v));
    return false;
  }
  if (!(v->valuedouble > 0 && v->valuedouble < 1)) {
    fg_model_error(cx, ptr, "expected a number strictly between 0 and 1, "
                   "found %g", v->valuedouble);
    return false;
  }
  *out = v->valuedouble;
  return true;
}

static void validate_target(const cJSON *t, fg_model_plan *pl,
                            fg_model_ctx *cx) {
  static const char *const allowed[] = {"probability", "confidence", NULL};
  pl->probability = 0.9;
  pl->confidence = 0.95;
  if (!t) return;
  if (!cJSON_IsObject(t)) {
    fg_model_error(cx, "/target", "expected an object {\"probability\"?, "
                   "\"confidence\"?}, found %s", fg_json_kind(t));
    return;
  }
  check_members(t, "/target", "the target", allowed,
                "probability, confidence", cx);
  target_value(t, "probability", &pl->probability, cx);
  target_value(t, "confidence", &pl->confidence, cx);
}

/* ---- one namespace ---- */

typedef struct name_ref {
  const char *name;
  const char *section; /* "/decisions", ... */
  int index;           /* within the section */
  int order;           /* document order over all sections */
  bool duplicate;
  int first;           /* order of the first holder when duplicate */
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
  refs[*n] = (name_ref){.name = name, .section = section, .index = index,
                        .order = *n};
  (*n)++;
}

static bool check_unique_names(const fg_model_plan *pl, fg_model_ctx *cx) {
  int total = pl->ndecisions + pl->nuncertain + pl->ndefinitions +
              pl->nconstraints;
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
    refs[i].first = refs[i - 1].duplicate ? refs[i - 1].first
                                          : refs[i - 1].order;
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
      fg_pointer_index(ptr, sizeof ptr, by_order[i].section,
                       by_order[i].index);
      fg_pointer_join(ptr, sizeof ptr, ptr, "name");
      fg_pointer_index(fptr, sizeof fptr, first->section, first->index);
      fg_pointer_join(fptr, sizeof fptr, fptr, "name");
      fg_model_quote(q, sizeof q, by_order[i].name);
      fg_model_error(cx, ptr, "expected a unique name, found '%s' already "
                     "used at %s", q, fptr);
    }
    free(by_order);
  }
  free(refs);
  return ok;
}

/* ---- the document ---- */

static const char *const top_members[] = {
    "format",      "name",        "title",     "description",
    "decisions",   "uncertain",   "dependence", "definitions",
    "constraints", "objective",   "target",    NULL};

static void validate_header(const cJSON *doc, fg_model_plan *pl,
                            fg_model_ctx *cx) {
  const cJSON *f = cJSON_GetObjectItemCaseSensitive(doc, "format");
  if (!f)
    missing(cx, "", "format", "the integer 1");
  else if (!cJSON_IsNumber(f))
    fg_model_error(cx, "/format", "expected the integer 1, found %s",
                   fg_json_kind(f));
  else if (f->valuedouble != 1)
    fg_model_error(cx, "/format", "expected the integer 1 (the only format "
                   "this server reads), found %g", f->valuedouble);

  const cJSON *n = cJSON_GetObjectItemCaseSensitive(doc, "name");
  if (!n) {
    missing(cx, "", "name", "a model name such as \"theatre-week-12\"");
  } else if (!cJSON_IsString(n)) {
    fg_model_error(cx, "/name", "expected a model name string, found %s",
                   fg_json_kind(n));
  } else if (!is_model_name(n->valuestring)) {
    char q[64];
    fg_model_quote(q, sizeof q, n->valuestring);
    fg_model_error(cx, "/name", "expected a model name of lower-case "
                   "letters, digits, '_', '.' and '-' starting with a letter "
                   "or digit, at most %d characters "
                   "([a-z0-9][a-z0-9_.-]{0,63}), found '%s'",
                   FG_NAME_MAX, q);
  } else {
    pl->name = n->valuestring;
  }

  static const char *const texts[] = {"title", "description"};
  for (int i = 0; i < 2; i++) {
    const cJSON *t = cJSON_GetObjectItemCaseSensitive(doc, texts[i]);
    if (!t) continue;
    char ptr[FG_POINTER_MAX];
    fg_pointer_join(ptr, sizeof ptr, "", texts[i]);
    if (!cJSON_IsString(t))
      fg_model_error(cx, ptr, "expected a string, found %s", fg_json_kind(t));
    else if (i == 0)
      pl->title = t->valuestring;
  }
}

fg_status fg_model_validate(const cJSON *doc, fg_model_plan *pl,
                            fg_model_ctx *cx) {
  memset(pl, 0, sizeof *pl);
  pl->probability = 0.9;
  pl->confidence = 0.95;
  if (!cJSON_IsObject(doc)) {
    fg_model_error(cx, "", "expected a model document (a JSON object with "
                   "\"format\": 1), found %s", fg_json_kind(doc));
    return cx->first;
  }
  check_members(doc, "", "a model document", top_members,
                "format, name, title, description, decisions, uncertain, "
                "dependence, definitions, constraints, objective, target",
                cx);
  validate_header(doc, pl, cx);

  bool names = true;
  if (!validate_decisions(cJSON_GetObjectItemCaseSensitive(doc, "decisions"),
                          pl, cx))
    names = false;
  bool inputs = validate_uncertain(
      cJSON_GetObjectItemCaseSensitive(doc, "uncertain"), pl, cx);
  bool dependence = validate_dependence(
      cJSON_GetObjectItemCaseSensitive(doc, "dependence"), pl, cx);

  const cJSON *defs = cJSON_GetObjectItemCaseSensitive(doc, "definitions");
  int n = 0;
  if (defs && !members_array(defs, "/definitions", "definition objects", &n,
                             cx))
    names = false;
  if (n > 0) {
    pl->definitions = calloc((size_t)n, sizeof *pl->definitions);
    if (!pl->definitions) {
      fg_model_note(cx, FG_ENOMEM);
      return cx->first;
    }
    pl->ndefinitions = n;
    int i = 0;
    for (const cJSON *d = defs->child; d; d = d->next, i++) {
      char base[FG_POINTER_MAX];
      fg_pointer_index(base, sizeof base, "/definitions", i);
      if (!validate_definition(d, base, &pl->definitions[i], cx))
        names = false;
    }
  }

  const cJSON *cons = cJSON_GetObjectItemCaseSensitive(doc, "constraints");
  n = 0;
  if (!cons) {
    missing(cx, "", "constraints", "an array of at least one constraint");
    names = false;
  } else if (!members_array(cons, "/constraints", "constraint objects", &n,
                            cx)) {
    names = false;
  } else if (n == 0) {
    fg_model_error(cx, "/constraints", "expected at least one constraint, "
                   "found an empty array");
    names = false;
  }
  if (n > 0) {
    pl->constraints = calloc((size_t)n, sizeof *pl->constraints);
    if (!pl->constraints) {
      fg_model_note(cx, FG_ENOMEM);
      return cx->first;
    }
    pl->nconstraints = n;
    int i = 0;
    for (const cJSON *c = cons->child; c; c = c->next, i++) {
      char base[FG_POINTER_MAX];
      fg_pointer_index(base, sizeof base, "/constraints", i);
      if (!validate_constraint(c, base, &pl->constraints[i], cx))
        names = false;
    }
  }

  if (!validate_objective(cJSON_GetObjectItemCaseSensitive(doc, "objective"),
                          pl, cx))
    names = false;
  validate_target(cJSON_GetObjectItemCaseSensitive(doc, "target"), pl, cx);

  bool unique = check_unique_names(pl, cx);
  pl->sampler_ok = inputs && dependence && unique;
  pl->names_ok = names && inputs && unique;
  return cx->first;
}

void fg_model_plan_free(fg_model_plan *pl) {
  if (pl->decisions) {
    for (int i = 0; i < pl->ndecisions; i++) {
      free(pl->decisions[i].lower);
      free(pl->decisions[i].upper);
    }
    free(pl->decisions);
  }
  free(pl->inputs);
  if (pl->definitions)
    for (int i = 0; i < pl->ndefinitions; i++)
      free((void *)pl->definitions[i].elements);
  free(pl->definitions);
  free(pl->constraints);
  memset(pl, 0, sizeof *pl);
}
