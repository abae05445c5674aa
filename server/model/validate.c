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
 * walked. The shared checks live in names.c, decisions and random inputs
 * in inputs.c; this file holds definitions, constraints, objective, target
 * and the document as a whole.
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

/* ---- definitions, constraints, objective, target ---- */

static const char *const definition_members[] = {"name", "value", "elements",
                                                 NULL};
static const fg_model_object definition_object = {
    "a definition object {\"name\", \"value\"} or {\"name\", \"elements\"}",
    "a definition", definition_members, "name and one of value, elements"};

static bool validate_definition(const cJSON *d, const char *base,
                                fg_plan_definition *out, fg_model_ctx *cx) {
  fg_model_opened opened =
      fg_model_open_object(d, base, &definition_object, cx);
  if (opened == FG_MODEL_NOT_OBJECT) return false;
  bool ok = opened == FG_MODEL_OBJECT_OK;
  out->name = fg_model_member_name(d, base, cx);
  if (!out->name) ok = false;
  const cJSON *value = cJSON_GetObjectItemCaseSensitive(d, "value");
  const cJSON *elements = cJSON_GetObjectItemCaseSensitive(d, "elements");
  char ptr[FG_POINTER_MAX];
  if (value && elements) {
    fg_model_error(cx, base,
                   "expected exactly one of 'value' and "
                   "'elements', found both");
    return false;
  }
  if (!value && !elements) {
    fg_model_error(cx, base,
                   "expected one of 'value' (an expression) and "
                   "'elements' (an array of expressions), found neither");
    return false;
  }
  if (value) {
    fg_pointer_join(ptr, sizeof ptr, base, "value");
    out->value = fg_model_expression(value, ptr, cx);
    return ok && out->value;
  }
  fg_pointer_join(ptr, sizeof ptr, base, "elements");
  if (!cJSON_IsArray(elements) || !elements->child) {
    fg_model_error(cx, ptr,
                   "expected a non-empty array of expression "
                   "strings, found %s",
                   cJSON_IsArray(elements) ? "an empty array"
                                           : fg_json_kind(elements));
    return false;
  }
  int n = cJSON_GetArraySize(elements);
  if (n > FG_VECTOR_MAX) {
    fg_model_limit(cx, ptr, FG_LIMIT_VECTOR_LENGTH, FG_VECTOR_MAX,
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
    out->elements[k] = fg_model_expression(e, eptr, cx);
    if (!out->elements[k]) ok = false;
  }
  return ok;
}

static const char *const constraint_members[] = {"name", "require", NULL};
static const fg_model_object constraint_object = {
    "a constraint object {\"name\", \"require\"}", "a constraint",
    constraint_members, "name, require"};

static bool validate_constraint(const cJSON *c, const char *base,
                                fg_plan_constraint *out, fg_model_ctx *cx) {
  fg_model_opened opened =
      fg_model_open_object(c, base, &constraint_object, cx);
  if (opened == FG_MODEL_NOT_OBJECT) return false;
  bool ok = opened == FG_MODEL_OBJECT_OK;
  out->name = fg_model_member_name(c, base, cx);
  if (!out->name) ok = false;
  const cJSON *req = cJSON_GetObjectItemCaseSensitive(c, "require");
  if (!req) {
    fg_model_missing(cx, base, "require", "a comparison such as \"x <= 10\"");
    return false;
  }
  char ptr[FG_POINTER_MAX];
  fg_pointer_join(ptr, sizeof ptr, base, "require");
  out->require = fg_model_expression(req, ptr, cx);
  return ok && out->require;
}

static bool validate_objective(const cJSON *o, fg_model_plan *pl,
                               fg_model_ctx *cx) {
  static const char *const allowed[] = {"minimize", "maximize", NULL};
  static const fg_model_object objective = {
      "{\"minimize\": expression} or {\"maximize\": expression}",
      "the objective", allowed, "minimize or maximize"};
  if (!o) return true;
  fg_model_opened opened = fg_model_open_object(o, "/objective", &objective, cx);
  if (opened == FG_MODEL_NOT_OBJECT) return false;
  bool ok = opened == FG_MODEL_OBJECT_OK;
  const cJSON *mn = cJSON_GetObjectItemCaseSensitive(o, "minimize");
  const cJSON *mx = cJSON_GetObjectItemCaseSensitive(o, "maximize");
  if (mn && mx) {
    fg_model_error(cx, "/objective",
                   "expected one of 'minimize' and "
                   "'maximize', found both");
    return false;
  }
  if (!mn && !mx) {
    if (ok)
      fg_model_error(cx, "/objective",
                     "expected 'minimize' or 'maximize', "
                     "found neither");
    return false;
  }
  pl->sense = mn ? FG_OBJECTIVE_MINIMIZE : FG_OBJECTIVE_MAXIMIZE;
  pl->objective_pointer = mn ? "/objective/minimize" : "/objective/maximize";
  pl->objective = fg_model_expression(mn ? mn : mx, pl->objective_pointer, cx);
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
    fg_model_error(cx, ptr,
                   "expected a number strictly between 0 and 1, "
                   "found %s",
                   fg_json_kind(v));
    return false;
  }
  if (!(v->valuedouble > 0 && v->valuedouble < 1)) {
    fg_model_error(cx, ptr,
                   "expected a number strictly between 0 and 1, "
                   "found %g",
                   v->valuedouble);
    return false;
  }
  *out = v->valuedouble;
  return true;
}

static void validate_target(const cJSON *t, fg_model_plan *pl,
                            fg_model_ctx *cx) {
  static const char *const allowed[] = {"probability", "confidence", NULL};
  static const fg_model_object target = {
      "an object {\"probability\"?, \"confidence\"?}", "the target", allowed,
      "probability, confidence"};
  pl->probability = 0.9;
  pl->confidence = 0.95;
  if (!t) return;
  if (fg_model_open_object(t, "/target", &target, cx) == FG_MODEL_NOT_OBJECT)
    return;
  target_value(t, "probability", &pl->probability, cx);
  target_value(t, "confidence", &pl->confidence, cx);
}

/* ---- the document ---- */

static const char *const top_members[] = {
    "format",      "name",      "title",      "description",
    "decisions",   "uncertain", "dependence", "definitions",
    "constraints", "objective", "target",     NULL};
static const fg_model_object document_object = {
    "a model document (a JSON object with \"format\": 1)", "a model document",
    top_members,
    "format, name, title, description, decisions, uncertain, "
    "dependence, definitions, constraints, objective, target"};

static void validate_header(const cJSON *doc, fg_model_plan *pl,
                            fg_model_ctx *cx) {
  const cJSON *f = cJSON_GetObjectItemCaseSensitive(doc, "format");
  if (!f)
    fg_model_missing(cx, "", "format", "the integer 1");
  else if (!cJSON_IsNumber(f))
    fg_model_error(cx, "/format", "expected the integer 1, found %s",
                   fg_json_kind(f));
  else if (f->valuedouble != 1)
    fg_model_error(cx, "/format",
                   "expected the integer 1 (the only format "
                   "this server reads), found %g",
                   f->valuedouble);

  const cJSON *n = cJSON_GetObjectItemCaseSensitive(doc, "name");
  if (!n) {
    fg_model_missing(cx, "", "name",
                     "a model name such as \"theatre-week-12\"");
  } else if (!cJSON_IsString(n)) {
    fg_model_error(cx, "/name", "expected a model name string, found %s",
                   fg_json_kind(n));
  } else if (!fg_model_is_model_name(n->valuestring)) {
    char q[64];
    fg_model_quote(q, sizeof q, n->valuestring);
    fg_model_error(cx, "/name",
                   "expected a model name of lower-case "
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
  if (fg_model_open_object(doc, "", &document_object, cx) ==
      FG_MODEL_NOT_OBJECT)
    return cx->first;
  validate_header(doc, pl, cx);

  bool names = true;
  if (!fg_model_validate_decisions(
          cJSON_GetObjectItemCaseSensitive(doc, "decisions"), pl, cx))
    names = false;
  bool inputs = fg_model_validate_uncertain(
      cJSON_GetObjectItemCaseSensitive(doc, "uncertain"), pl, cx);
  bool dependence = fg_model_validate_dependence(
      cJSON_GetObjectItemCaseSensitive(doc, "dependence"), pl, cx);

  const cJSON *defs = cJSON_GetObjectItemCaseSensitive(doc, "definitions");
  int n = 0;
  if (defs && !fg_model_members_array(defs, "/definitions",
                                      "definition objects", &n, cx))
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
      if (!validate_definition(d, base, &pl->definitions[i], cx)) names = false;
    }
  }

  const cJSON *cons = cJSON_GetObjectItemCaseSensitive(doc, "constraints");
  n = 0;
  if (!cons) {
    fg_model_missing(cx, "", "constraints",
                     "an array of at least one constraint");
    names = false;
  } else if (!fg_model_members_array(cons, "/constraints", "constraint objects",
                                     &n, cx)) {
    names = false;
  } else if (n == 0) {
    fg_model_error(cx, "/constraints",
                   "expected at least one constraint, "
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
      if (!validate_constraint(c, base, &pl->constraints[i], cx)) names = false;
    }
  }

  if (!validate_objective(cJSON_GetObjectItemCaseSensitive(doc, "objective"),
                          pl, cx))
    names = false;
  validate_target(cJSON_GetObjectItemCaseSensitive(doc, "target"), pl, cx);

  bool unique = fg_model_check_unique_names(pl, cx);
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
