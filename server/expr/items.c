/*
 * expr/items.c -- compiling the handed-over expressions in document order
 * (definitions, constraint rows, the objective) and fg_expr_finish.
 *
 * Design: fg_expr_finish creates the input registers (decisions, then
 * uncertain inputs, as expr.h lays them out), compiles every item in the
 * order it was handed over, and passes the instruction list to program.c.
 * Each expression is parsed again into a private arena that is freed right
 * after it is compiled (parsing is microseconds; keeping every tree would
 * cost memory for nothing).
 *
 * A definition's compiled elements are kept (symbol `val`) for the
 * expressions after it; their total is bounded by FG_PROGRAM_MAX_REGS so
 * that aliasing one long vector under many names cannot exhaust memory.
 *
 * Thread use: the compiling thread only.
 */
#include "expr/expr_internal.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct parsed {
  fg_arena arena;
  fg_node *node;
} parsed;

static bool parse_again(fg_expr_compiler *c, const fg_item *it, int i,
                        parsed *out) {
  out->arena = (fg_arena){0};
  fg_parse_error err;
  c->pointer = c->pointers[it->src_ids[i]];
  c->src_id = it->src_ids[i];
  out->node = fg_expr_parse(it->srcs[i], it->kind == FG_ITEM_CONSTRAINT,
                            &out->arena, &err);
  if (!out->node) { /* cannot happen: the text parsed before */
    fg_expr_arena_free(&out->arena);
    if (err.nomem)
      fg_expr_nomem(c);
    else
      fg_problem_add(c->p, FG_EINTERNAL, c->pointer, err.col, "%s", err.msg);
    return false;
  }
  return true;
}

static bool keep_elements(fg_expr_compiler *c, fg_sym *s, int count) {
  c->def_elements += count;
  if (c->def_elements > FG_PROGRAM_MAX_REGS) {
    fg_problem_limit(
        c->p, c->pointer, FG_LIMIT_PROGRAM_REGISTERS, FG_PROGRAM_MAX_REGS,
        "definitions hold more than %d elements in total "
        "(limit %s)",
        FG_PROGRAM_MAX_REGS, fg_limit_name(FG_LIMIT_PROGRAM_REGISTERS));
    return false;
  }
  s->val = malloc(sizeof *s->val * (size_t)count);
  if (!s->val) {
    fg_expr_nomem(c);
    return false;
  }
  return true;
}

static bool compile_define(fg_expr_compiler *c, const fg_item *it) {
  parsed ps;
  if (!parse_again(c, it, 0, &ps)) return false;
  fg_value v;
  c->self_sym = it->sym;
  c->self_k = -1;
  bool ok = fg_expr_compile_node(c, ps.node, &v);
  fg_expr_arena_free(&ps.arena);
  if (!ok) return false;
  int count = v.n ? v.n : 1;
  fg_sym *s = &c->syms[it->sym];
  if (keep_elements(c, s, count)) {
    for (int i = 0; i < count; i++)
      s->val[i] = fg_value_at(&v, i);
    s->size = v.n;
  } else {
    ok = false;
  }
  fg_expr_value_free(&v);
  return ok;
}

static bool compile_elements(fg_expr_compiler *c, const fg_item *it) {
  fg_sym *s = &c->syms[it->sym];
  c->pointer = c->pointers[it->src_ids[0]];
  if (!keep_elements(c, s, it->nsrc)) return false;
  c->self_sym = it->sym;
  for (int k = 0; k < it->nsrc; k++) {
    parsed ps;
    if (!parse_again(c, it, k, &ps)) return false;
    fg_value v;
    c->self_k = k;
    bool ok = fg_expr_compile_node(c, ps.node, &v);
    fg_expr_arena_free(&ps.arena);
    if (!ok) return false;
    if (v.n != 0) {
      fg_problem_add(c->p, FG_EINVAL, c->pointer, 1,
                     "expected element %d of '%s' to be a scalar but it is a "
                     "vector of %d elements",
                     k, s->name, v.n);
      fg_expr_value_free(&v);
      return false;
    }
    s->val[k] = v.s;
  }
  return true;
}

static bool add_row(fg_expr_compiler *c, const fg_item *it, int element,
                    fg_row_kind kind, fg_operand excess, int col) {
  if (c->nrows == c->caprows) {
    int ncap = c->caprows ? c->caprows * 2 : 64;
    fg_row *nr = realloc(c->rows, sizeof *nr * (size_t)ncap);
    if (!nr) {
      fg_expr_nomem(c);
      return false;
    }
    c->rows = nr;
    c->caprows = ncap;
  }
  int reg;
  if (!fg_expr_as_reg(c, excess, col, &reg)) return false;
  fg_row *r = &c->rows[c->nrows++];
  memset(r, 0, sizeof *r);
  const char *name = c->syms[it->sym].name;
  if (element < 0)
    snprintf(r->name, sizeof r->name, "%s", name);
  else
    snprintf(r->name, sizeof r->name, "%s[%d]", name, element);
  r->constraint = it->constraint;
  r->element = element;
  r->kind = kind;
  r->excess_reg = reg; /* a virtual register until program.c maps it */
  r->deterministic = !c->vregs[reg].uncertain;
  return true;
}

static bool any_uncertain(const fg_expr_compiler *c, const fg_value *v) {
  for (int i = 0; i < (v->n ? v->n : 1); i++)
    if (fg_expr_operand_uncertain(c, fg_value_at(v, i))) return true;
  return false;
}

static bool is_less(fg_tok_kind k) {
  return k == FG_TOK_LT || k == FG_TOK_LE;
}
static bool is_greater(fg_tok_kind k) {
  return k == FG_TOK_GT || k == FG_TOK_GE;
}

/* Builds the excess value of a constraint (consumes the sides). */
static bool excess_of(fg_expr_compiler *c, const fg_node *n, fg_value *v,
                      fg_row_kind *kind, fg_value *ex) {
  const fg_value *args[3] = {&v[0], &v[1], &v[2]};
  int col = n->opcols[0];
  fg_tok_kind op0 = n->ops[0];
  if (n->nkids == 2) {
    if (op0 == FG_TOK_NE) {
      fg_problem_add(c->p, FG_EINVAL, c->pointer, col,
                     "'!=' cannot be a constraint: expected <=, >= or a "
                     "range lo <= e <= hi");
      return false;
    }
    if (op0 == FG_TOK_EQ &&
        (any_uncertain(c, &v[0]) || any_uncertain(c, &v[1]))) {
      fg_problem_add(c->p, FG_EINVAL, c->pointer, col,
                     "'==' on an uncertain quantity is refused: it holds "
                     "with probability zero for continuous inputs; use a "
                     "range lo <= e <= hi instead");
      return false;
    }
    if (fg_expr_broadcast_shape(c, args, 2, col) < 0) return false;
    const fg_value *a[2] = {&v[0], &v[1]};
    if (is_greater(op0)) { /* e1 >= e2: excess e2 - e1 */
      a[0] = &v[1];
      a[1] = &v[0];
    }
    *kind = is_less(op0) ? FG_ROW_LE : is_greater(op0) ? FG_ROW_GE : FG_ROW_EQ;
    fg_value d;
    fg_value a0 = *a[0], a1 = *a[1];
    a0.owned = a1.owned = false; /* the caller frees v */
    if (!fg_expr_map2(c, FG_OP_EXCESS, &a0, &a1, col, &d)) return false;
    if (*kind != FG_ROW_EQ) {
      *ex = d;
      return true;
    }
    return fg_expr_map1(c, FG_OP_ABS, &d, col, ex);
  }
  fg_tok_kind op1 = n->ops[1];
  const fg_value *lo, *hi, *e = &v[1];
  if (is_less(op0) && is_less(op1)) {
    lo = &v[0];
    hi = &v[2];
  } else if (is_greater(op0) && is_greater(op1)) {
    hi = &v[0];
    lo = &v[2];
  } else {
    fg_problem_add(c->p, FG_EINVAL, c->pointer, n->opcols[1],
                   "a range must read lo <= e <= hi or hi >= e >= lo but "
                   "found '%s' then '%s'",
                   fg_expr_tok_spelling(op0), fg_expr_tok_spelling(op1));
    return false;
  }
  if (fg_expr_broadcast_shape(c, args, 3, col) < 0) return false;
  fg_value l = *lo, h = *hi, e1 = *e, e2 = *e, below, above;
  l.owned = h.owned = e1.owned = e2.owned = false;
  if (!fg_expr_map2(c, FG_OP_EXCESS, &l, &e1, col, &below)) return false;
  if (!fg_expr_map2(c, FG_OP_EXCESS, &e2, &h, n->opcols[1], &above)) {
    fg_expr_value_free(&below);
    return false;
  }
  *kind = FG_ROW_RANGE;
  return fg_expr_map2(c, FG_OP_MAX, &below, &above, col, ex);
}

static bool compile_constraint(fg_expr_compiler *c, const fg_item *it) {
  parsed ps;
  if (!parse_again(c, it, 0, &ps)) return false;
  c->self_sym = -1;
  const fg_node *n = ps.node;
  fg_value v[3] = {{0}, {0}, {0}};
  bool ok = true;
  for (int i = 0; ok && i < n->nkids; i++)
    ok = fg_expr_compile_node(c, n->kids[i], &v[i]);
  fg_row_kind kind = FG_ROW_LE;
  fg_value ex = {0};
  if (ok) {
    int shape = 0;
    for (int i = 0; i < n->nkids; i++)
      if (v[i].n) shape = v[i].n;
    if (c->nrows + (shape ? shape : 1) > FG_ROWS_MAX) {
      fg_problem_limit(c->p, c->pointer, FG_LIMIT_CONSTRAINT_ROWS, FG_ROWS_MAX,
                       "the constraints expand to more than %d rows (limit "
                       "constraint_rows)",
                       FG_ROWS_MAX);
      ok = false;
    }
  }
  if (ok) ok = excess_of(c, n, v, &kind, &ex);
  int col = n->opcols[0];
  fg_expr_arena_free(&ps.arena);
  for (int i = 0; i < 3; i++)
    fg_expr_value_free(&v[i]);
  if (!ok) return false;
  for (int i = 0; ok && i < (ex.n ? ex.n : 1); i++)
    ok = add_row(c, it, ex.n ? i : -1, kind, fg_value_at(&ex, i), col);
  fg_expr_value_free(&ex);
  return ok;
}

static bool compile_objective(fg_expr_compiler *c, const fg_item *it) {
  parsed ps;
  if (!parse_again(c, it, 0, &ps)) return false;
  c->self_sym = -1;
  fg_value v;
  bool ok = fg_expr_compile_node(c, ps.node, &v);
  fg_expr_arena_free(&ps.arena);
  if (!ok) return false;
  if (v.n != 0) {
    fg_problem_add(c->p, FG_EINVAL, c->pointer, 1,
                   "expected a scalar objective but found a vector of %d "
                   "elements",
                   v.n);
    fg_expr_value_free(&v);
    return false;
  }
  int reg;
  if (!fg_expr_as_reg(c, v.s, 1, &reg)) return false;
  c->objective = (fg_operand){.reg = reg};
  return true;
}

/* Input registers and their symbols' elements. */
static bool make_inputs(fg_expr_compiler *c) {
  for (int i = 0; i < c->ndecision + c->nuncertain; i++)
    if (fg_expr_new_vreg(c, i >= c->ndecision) < 0) return false;
  for (int si = 0; si < c->nsyms; si++) {
    fg_sym *s = &c->syms[si];
    if (s->kind != FG_SYM_DECISION && s->kind != FG_SYM_UNCERTAIN) continue;
    int count = s->size ? s->size : 1;
    int first = s->base + (s->kind == FG_SYM_UNCERTAIN ? c->ndecision : 0);
    free(s->val);
    s->val = malloc(sizeof *s->val * (size_t)count);
    if (!s->val) {
      fg_expr_nomem(c);
      return false;
    }
    for (int i = 0; i < count; i++)
      s->val[i] = (fg_operand){.reg = first + i};
    s->compiled = true;
  }
  return true;
}

fg_status fg_expr_finish(fg_expr_compiler *c, fg_program **out, fg_problem *p) {
  *out = NULL;
  fg_problem local;
  if (!p) {
    fg_problem_init(&local);
    p = &local;
  }
  c->p = p;
  c->pointer = "";
  c->src_id = 0;
  bool failed = false;
  for (int i = 0; i < c->nitems; i++)
    if (c->items[i].parse_failed) failed = true;
  if (!make_inputs(c)) return FG_ENOMEM;
  for (int i = 0; i < c->nitems && !c->nomem && !c->limit_hit; i++) {
    fg_item *it = &c->items[i];
    if (it->parse_failed) continue;
    bool ok = false;
    switch (it->kind) {
    case FG_ITEM_DEFINE: ok = compile_define(c, it); break;
    case FG_ITEM_ELEMENTS: ok = compile_elements(c, it); break;
    case FG_ITEM_CONSTRAINT: ok = compile_constraint(c, it); break;
    case FG_ITEM_OBJECTIVE: ok = compile_objective(c, it); break;
    }
    c->self_sym = -1;
    if (it->sym >= 0) {
      c->syms[it->sym].compiled = ok;
      c->syms[it->sym].failed = !ok;
    }
    if (!ok) failed = true;
  }
  if (failed || c->nomem || c->limit_hit)
    return p->status != FG_OK ? p->status : FG_EINVAL;
  return fg_expr_build_program(c, out, p);
}
