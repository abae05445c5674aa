/*
 * model/document.c -- fg_model_compile: from the bytes of a model document
 * to an immutable, reference-counted fg_model.
 *
 * Stages, each collecting as many independent errors as it can:
 *   1. fg_json_parse (json.c): a malformed text stops here, with its byte
 *      offset.
 *   2. fg_model_validate (validate.c): every member, with JSON Pointers.
 *   3. the sampler (sample/), when the uncertain and dependence arrays are
 *      sound: it validates every distribution and dependence entry.
 *   4. the expressions (expr/), only when every name and declaration is
 *      sound (otherwise each use of a broken name would add a misleading
 *      "unknown name"): decisions, then uncertain inputs, in document order
 *      (the register layout depends on it), then definitions in order,
 *      constraints, the objective. A failing definition stops the
 *      definitions, constraints and objective (later text may use it);
 *      constraints are independent of each other, so one failing does not
 *      stop the next.
 *   5. fg_expr_finish, consistency of the sampler and program dimensions,
 *      the row limit, and the canonical text and digest.
 * Nothing is kept on failure: every stage's output is freed through the
 * one cleanup path.
 *
 * Thread use: any thread; compiling touches no shared state.
 */
#include "model_internal.h"

#include "sample/sample.h"

#include <cJSON.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* True for FG_OK; otherwise the status is noted in cx and false. */
static bool noted(fg_model_ctx *cx, fg_status st) {
  if (st == FG_OK) return true;
  fg_model_note(cx, st);
  return false;
}

static void compile_expressions(const fg_model_plan *pl, fg_expr_compiler *c,
                                fg_model_ctx *cx) {
  char ptr[FG_POINTER_MAX];
  bool declared = true;
  for (int i = 0; i < pl->ndecisions; i++) {
    fg_pointer_index(ptr, sizeof ptr, "/decisions", i);
    declared &= noted(cx, fg_expr_declare_decision(c, pl->decisions[i].name,
                                                   pl->decisions[i].size, ptr,
                                                   cx->p));
  }
  for (int i = 0; i < pl->nuncertain; i++) {
    fg_pointer_index(ptr, sizeof ptr, "/uncertain", i);
    declared &= noted(cx, fg_expr_declare_uncertain(c, pl->inputs[i].name,
                                                    pl->inputs[i].size, ptr,
                                                    cx->p));
  }
  if (!declared) return;

  for (int i = 0; i < pl->ndefinitions; i++) {
    const fg_plan_definition *d = &pl->definitions[i];
    fg_status st;
    fg_pointer_index(ptr, sizeof ptr, "/definitions", i);
    if (d->value) {
      fg_pointer_join(ptr, sizeof ptr, ptr, "value");
      st = fg_expr_define(c, d->name, d->value, ptr, cx->p);
    } else {
      fg_pointer_join(ptr, sizeof ptr, ptr, "elements");
      st = fg_expr_define_elements(c, d->name, d->elements, d->nelements, ptr,
                                   cx->p);
    }
    if (st != FG_OK) {
      fg_model_note(cx, st);
      return;
    }
  }
  for (int i = 0; i < pl->nconstraints; i++) {
    fg_pointer_index(ptr, sizeof ptr, "/constraints", i);
    fg_pointer_join(ptr, sizeof ptr, ptr, "require");
    fg_model_note(cx,
                  fg_expr_constraint(c, pl->constraints[i].name,
                                     pl->constraints[i].require, ptr, cx->p));
  }
  if (pl->sense != FG_OBJECTIVE_NONE)
    fg_model_note(cx, fg_expr_objective(c, pl->sense, pl->objective,
                                        pl->objective_pointer, cx->p));
}

/* The checks that tie the program, the sampler and the plan together. */
static void check_layout(const fg_model_plan *pl, const fg_program_info *info,
                         const fg_sampler *s, fg_model_ctx *cx) {
  int dims = fg_sampler_dims(s);
  if (dims != info->nuncertain || dims != pl->uncertain_dims) {
    fg_model_note(cx, FG_EINTERNAL);
    fg_problem_add(cx->p, FG_EINTERNAL, "/uncertain", 0,
                   "the sampler draws %d dimensions but the program reads %d "
                   "(the document declares %d)",
                   dims, info->nuncertain, pl->uncertain_dims);
    return;
  }
  if (info->ndecision != pl->decision_dims) {
    fg_model_note(cx, FG_EINTERNAL);
    fg_problem_add(cx->p, FG_EINTERNAL, "/decisions", 0,
                   "the program reads %d decision elements but the document "
                   "declares %d",
                   info->ndecision, pl->decision_dims);
    return;
  }
  if (info->nrows > FG_ROWS_MAX)
    fg_model_limit(cx, "/constraints", FG_LIMIT_CONSTRAINT_ROWS, FG_ROWS_MAX,
                   "constraints expand to %d rows; the limit is %d",
                   info->nrows, FG_ROWS_MAX);
}

static fg_status fill_model(fg_model *m, fg_model_plan *pl, cJSON *doc,
                            const fg_program_info *info) {
  snprintf(m->name, sizeof m->name, "%s", pl->name);
  if (pl->title && !(m->title = strdup(pl->title))) return FG_ENOMEM;
  m->canonical = fg_json_canonical(doc, &m->canonical_len);
  if (!m->canonical) return FG_ENOMEM;
  char hex[65];
  fg_sha256_hex(m->canonical, m->canonical_len, hex);
  snprintf(m->digest, sizeof m->digest, "sha256:%s", hex);

  /* the decisions and their bounds move from the plan to the model */
  m->ndecisions = pl->ndecisions;
  m->decisions = pl->decisions;
  pl->decisions = NULL;
  pl->ndecisions = 0;
  m->decision_dims = pl->decision_dims;

  m->target_probability = pl->probability;
  m->target_confidence = pl->confidence;
  m->summary = (fg_model_summary){
      .decisions = m->ndecisions,
      .decision_dims = m->decision_dims,
      .uncertain = pl->nuncertain,
      .uncertain_dims = info->nuncertain,
      .definitions = pl->ndefinitions,
      .constraints = pl->nconstraints,
      .rows = info->nrows,
      .deterministic_rows = info->ndeterministic_rows,
      .objective = info->objective_sense != FG_OBJECTIVE_NONE,
  };
  fg_program_affine_counts(m->program, &m->summary.affine_in_inputs,
                           &m->summary.affine_in_decisions,
                           &m->summary.affine_in_both);
  m->document = doc;
  return FG_OK;
}

fg_status fg_model_compile(const char *json, size_t len, fg_model **out,
                           fg_problem *p) {
  *out = NULL;
  cJSON *doc = NULL;
  fg_status st = fg_json_parse(json, len, &doc, p);
  if (st != FG_OK) return st;

  fg_model_ctx cx = {.p = p};
  fg_model_plan plan;
  fg_sampler *sampler = NULL;
  fg_expr_compiler *compiler = NULL;
  fg_program *program = NULL;
  fg_model *m = NULL;

  fg_model_validate(doc, &plan, &cx);
  if (cx.first == FG_ENOMEM) goto done;

  if (plan.sampler_ok) {
    fg_status sst =
        fg_sampler_build(plan.uncertain, plan.dependence, &sampler, p);
    fg_model_note(&cx, sst);
    if (sst != FG_OK && sampler) {
      fg_sampler_free(sampler);
      sampler = NULL;
    }
  }
  if (plan.names_ok) {
    compiler = fg_expr_compiler_new();
    if (!compiler) {
      fg_model_note(&cx, FG_ENOMEM);
      goto done;
    }
    compile_expressions(&plan, compiler, &cx);
  }
  if (cx.first != FG_OK) goto done;
  if (!sampler) { /* validated without error yet not built: a bug */
    fg_model_note(&cx, FG_EINTERNAL);
    fg_problem_set(p, FG_EINTERNAL, "the sampler was not built");
    goto done;
  }

  st = fg_expr_finish(compiler, &program, p);
  fg_model_note(&cx, st);
  if (st != FG_OK) goto done;
  fg_program_info info;
  fg_program_get_info(program, &info);
  check_layout(&plan, &info, sampler, &cx);
  if (cx.first != FG_OK) goto done;

  m = calloc(1, sizeof *m);
  if (!m) {
    fg_model_note(&cx, FG_ENOMEM);
    goto done;
  }
  m->refs = 1;
  m->program = program;
  m->sampler = sampler;
  program = NULL;
  sampler = NULL;
  st = fill_model(m, &plan, doc, &info);
  if (st != FG_OK) {
    fg_model_note(&cx, st);
    goto done;
  }
  doc = NULL; /* owned by the model now */
  *out = m;
  m = NULL;

done:
  if (cx.first == FG_ENOMEM) fg_problem_set(p, FG_ENOMEM, "out of memory");
  fg_model_destroy(m);
  if (program) fg_program_free(program);
  if (compiler) fg_expr_compiler_free(compiler);
  if (sampler) fg_sampler_free(sampler);
  fg_model_plan_free(&plan);
  cJSON_Delete(doc);
  return cx.first;
}
