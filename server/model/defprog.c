/*
 * model/defprog.c -- a program that exposes a model's definitions, for
 * explaining one scenario (engine/explain.c).
 *
 * Design: the model's own program keeps no register per definition (the
 * allocator reuses registers), so the value of a definition in a scenario
 * is not readable from it. This file compiles a second program from the
 * same validated document: the same decisions, uncertain inputs and
 * definitions in the same order (so the register layout of decisions and
 * uncertain inputs is the same as the model's), and, instead of the
 * model's constraints, one row "#k <= 0" per definition k. A row's excess
 * is EXCESS(d, 0) = d exactly (d - 0 is exact, and 0 where d == 0), so
 * row values read back the definition's elements; row->constraint is the
 * definition's index and row->element its element (-1 for a scalar).
 * The rows are named PREFIX + k with a prefix that no declared name
 * starts with (prefix_free: at most one extension per declared name), so
 * they never clash with the model's own names.
 *
 * Invariants: the program reads the same uncertain layout as the model's
 * (checked: nuncertain and ndecision must agree, else FG_EINTERNAL).
 *
 * Thread use: any thread; the model is only read.
 */
#include "model_internal.h"

#include "expr/expr.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* True when no decision, input or definition name starts with `pre`. */
static bool prefix_free(const fg_model_plan *pl, const char *pre) {
  size_t n = strlen(pre);
  for (int i = 0; i < pl->ndecisions; i++)
    if (strncmp(pl->decisions[i].name, pre, n) == 0) return false;
  for (int i = 0; i < pl->nuncertain; i++)
    if (strncmp(pl->inputs[i].name, pre, n) == 0) return false;
  for (int i = 0; i < pl->ndefinitions; i++)
    if (strncmp(pl->definitions[i].name, pre, n) == 0) return false;
  return true;
}

fg_status fg_model_definitions_program(const fg_model *m,
                                       struct fg_program **out,
                                       fg_problem *p) {
  *out = NULL;
  fg_model_ctx cx = {.p = p};
  fg_model_plan plan;
  fg_model_validate(m->document, &plan, &cx);
  fg_status st = cx.first;
  fg_expr_compiler *c = NULL;
  if (st != FG_OK) goto done;
  c = fg_expr_compiler_new();
  if (!c) {
    st = fg_problem_set(p, FG_ENOMEM, "out of memory");
    goto done;
  }
  char ptr[FG_POINTER_MAX];
  for (int i = 0; i < plan.ndecisions && st == FG_OK; i++) {
    fg_pointer_index(ptr, sizeof ptr, "/decisions", i);
    st = fg_expr_declare_decision(c, plan.decisions[i].name,
                                  plan.decisions[i].size, ptr, p);
  }
  for (int i = 0; i < plan.nuncertain && st == FG_OK; i++) {
    fg_pointer_index(ptr, sizeof ptr, "/uncertain", i);
    st = fg_expr_declare_uncertain(c, plan.inputs[i].name,
                                   plan.inputs[i].size, ptr, p);
  }
  for (int i = 0; i < plan.ndefinitions && st == FG_OK; i++) {
    const fg_plan_definition *d = &plan.definitions[i];
    fg_pointer_index(ptr, sizeof ptr, "/definitions", i);
    if (d->value)
      st = fg_expr_define(c, d->name, d->value, ptr, p);
    else
      st = fg_expr_define_elements(c, d->name, d->elements, d->nelements,
                                   ptr, p);
  }
  /* A prefix no name starts with: each extension rules out at least the
   * names it now differs from, so the loop ends within the name count. */
  char pre[24] = "row";
  int bound = plan.ndecisions + plan.nuncertain + plan.ndefinitions + 1;
  for (int k = 0; k < bound && !prefix_free(&plan, pre); k++)
    snprintf(pre, sizeof pre, "q%d_", k);
  for (int i = 0; i < plan.ndefinitions && st == FG_OK; i++) {
    char name[48], src[FG_NAME_MAX + 8];
    snprintf(name, sizeof name, "%s%d", pre, i);
    snprintf(src, sizeof src, "%s <= 0", plan.definitions[i].name);
    fg_pointer_index(ptr, sizeof ptr, "/definitions", i);
    st = fg_expr_constraint(c, name, src, ptr, p);
  }
  if (st == FG_OK) st = fg_expr_finish(c, out, p);
  if (st == FG_OK) {
    fg_program_info a, b;
    fg_program_get_info(m->program, &a);
    fg_program_get_info(*out, &b);
    if (a.nuncertain != b.nuncertain || a.ndecision != b.ndecision) {
      fg_program_free(*out);
      *out = NULL;
      st = fg_problem_set(p, FG_EINTERNAL,
                          "the definitions program reads another layout");
    }
  }
done:
  if (c) fg_expr_compiler_free(c);
  fg_model_plan_free(&plan);
  return st;
}
