/*
 * model/model_internal.h -- what the files of model/ share (not installed).
 *
 * Division of the module:
 *   json.c       fg_json_parse: strict RFC 8259 parsing on top of cJSON
 *   canonical.c  fg_json_canonical: the canonical text behind the digest
 *   sha256.c     fg_sha256_hex
 *   validate.c   member-by-member validation of a format-1 document into an
 *                fg_model_plan (no expression is compiled there), with
 *   names.c      the checks every member shares and the one namespace, and
 *   inputs.c     decisions, uncertain inputs, dependence
 *   document.c   fg_model_compile: parse, validate, build the sampler,
 *                compile the expressions, fill the fg_model
 *   model.c      reference counting, freeing, the summary as JSON
 *   cache.c      the digest-keyed LRU cache of compiled models
 *
 * Thread use: everything here works on data owned by one caller.
 */
#ifndef FG_MODEL_INTERNAL_H
#define FG_MODEL_INTERNAL_H

#include "expr/expr.h"
#include "feasgate/model.h"

#include <stdbool.h>
#include <stddef.h>

/* Collects the outcome of a validation or compile pass: every error goes to
 * the problem (which may be NULL), and the first status is kept here so the
 * caller does not depend on what the problem already held. */
typedef struct fg_model_ctx {
  fg_problem *p;
  fg_status first; /* FG_OK until the first error */
  int errors;
} fg_model_ctx;

void fg_model_note(fg_model_ctx *cx, fg_status st);
fg_status fg_model_error(fg_model_ctx *cx, const char *pointer, const char *fmt,
                         ...) __attribute__((format(printf, 3, 4)));
fg_status fg_model_limit(fg_model_ctx *cx, const char *pointer,
                         fg_limit which, double value, const char *fmt, ...)
    __attribute__((format(printf, 5, 6)));

/* "a string", "an array", "null", ... for messages ("found a string"). */
const char *fg_json_kind(const struct cJSON *v);

/* Copy `s` into dst for quoting in a message: at most about 48 bytes, never
 * splitting a UTF-8 sequence, control characters replaced by '?', "..."
 * appended when cut. */
void fg_model_quote(char *dst, size_t cap, const char *s);

typedef struct fg_plan_uncertain {
  const char *name;
  int size; /* 0 = scalar */
} fg_plan_uncertain;

typedef struct fg_plan_definition {
  const char *name;
  const char *value;     /* NULL when built from elements */
  const char **elements; /* nelements sources (malloc'd array) */
  int nelements;
} fg_plan_definition;

typedef struct fg_plan_constraint {
  const char *name;
  const char *require;
} fg_plan_constraint;

/* The validated content of a document. Strings point into the cJSON tree,
 * which must outlive the plan; arrays are owned by the plan. */
typedef struct fg_model_plan {
  const char *name;
  const char *title; /* NULL when absent */

  int ndecisions;
  fg_decision *decisions; /* bounds allocated; see fg_model_plan_free */
  int decision_dims;

  const struct cJSON *uncertain;  /* the array, for the sampler */
  const struct cJSON *dependence; /* NULL when absent */
  int nuncertain;
  fg_plan_uncertain *inputs;
  int uncertain_dims;

  int ndefinitions;
  fg_plan_definition *definitions;
  int nconstraints;
  fg_plan_constraint *constraints;

  fg_objective_sense sense; /* FG_OBJECTIVE_NONE when absent */
  const char *objective;
  const char *objective_pointer; /* "/objective/minimize" or ".../maximize" */

  double probability, confidence;

  /* What may run after validation: expressions need every member that
   * declares or names something to be sound; the sampler needs the
   * uncertain and dependence arrays to be. */
  bool names_ok;
  bool sampler_ok;
} fg_model_plan;

/* names.c: checks shared by every member. Each reports what it refuses
 * and returns false / NULL then. `base` is the member object's pointer. */

/* An object member of the document, as its opening check names it. */
typedef struct fg_model_object {
  const char *shape;          /* after "expected ": "a decision object {...}" */
  const char *what;           /* in unknown-member messages: "a decision" */
  const char *const *allowed; /* its member names, NULL-terminated */
  const char *expected;       /* the same as listed: "name, size, ..." */
} fg_model_object;

typedef enum fg_model_opened {
  FG_MODEL_NOT_OBJECT,      /* refused whole: read nothing from it */
  FG_MODEL_UNKNOWN_MEMBERS, /* an object; each unknown member refused */
  FG_MODEL_OBJECT_OK
} fg_model_opened;

/* The opening every object member shares: "expected <shape>, found <kind>"
 * for a value that is not an object, else "unknown member ..." for each
 * member not in `o->allowed`. */
fg_model_opened fg_model_open_object(const struct cJSON *v, const char *base,
                                     const fg_model_object *o,
                                     fg_model_ctx *cx);
void fg_model_missing(fg_model_ctx *cx, const char *base, const char *key,
                      const char *expected);
const char *fg_model_member_name(const struct cJSON *obj, const char *base,
                                 fg_model_ctx *cx);
bool fg_model_member_size(const struct cJSON *obj, const char *base, int *size,
                          fg_model_ctx *cx);
const char *fg_model_expression(const struct cJSON *v, const char *ptr,
                                fg_model_ctx *cx);
bool fg_model_members_array(const struct cJSON *v, const char *ptr,
                            const char *what, int *count, fg_model_ctx *cx);
bool fg_model_check_unique_names(const struct fg_model_plan *plan,
                                 fg_model_ctx *cx);

/* inputs.c: the decisions, uncertain and dependence arrays (arr may be
 * NULL when the member is absent). */
bool fg_model_validate_decisions(const struct cJSON *arr,
                                 struct fg_model_plan *plan, fg_model_ctx *cx);
bool fg_model_validate_uncertain(const struct cJSON *arr,
                                 struct fg_model_plan *plan, fg_model_ctx *cx);
bool fg_model_validate_dependence(const struct cJSON *arr,
                                  struct fg_model_plan *plan, fg_model_ctx *cx);

/* Validate every member of `doc` into `plan` (zeroed first). Returns FG_OK
 * or the first error status; errors are collected in cx. */
fg_status fg_model_validate(const struct cJSON *doc, fg_model_plan *plan,
                            fg_model_ctx *cx);
/* Free what the plan owns, including decision bounds it still holds. */
void fg_model_plan_free(fg_model_plan *plan);

/* Free a model regardless of its count (used by unref and on failure). */
void fg_model_destroy(fg_model *m);

#endif
