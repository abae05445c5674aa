/*
 * expr/compile.c -- from syntax tree to values: names, shapes, operators
 * and functions.
 *
 * Design: compiling a node yields an fg_value, the list of operands
 * (virtual registers or constants) of its elements. Vectors are therefore
 * handled element by element at compile time: indexing and slicing cost no
 * instruction, element-wise operators emit one instruction per element,
 * and reductions become a left-to-right chain (so the order of additions
 * is fixed and documented: ((e0 + e1) + e2) + ...). Scalars broadcast;
 * two vectors must have the same length.
 *
 * Invariants: one error per expression -- a function that returns false
 * has either reported the error or is propagating one already reported (a
 * failed earlier definition is not reported again). Values returned are
 * owned by the caller, who frees them with fg_expr_value_free; borrowed
 * arrays (symbol elements) are never freed here.
 *
 * Recursion follows the tree, whose depth the parser bounds.
 *
 * Thread use: the compiling thread only.
 */
#include "expr/expr_internal.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static bool fail(fg_expr_compiler *c, int col, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

static bool fail(fg_expr_compiler *c, int col, const char *fmt, ...) {
  char msg[FG_MESSAGE_MAX];
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(msg, sizeof msg, fmt, ap);
  va_end(ap);
  fg_problem_add(c->p, FG_EINVAL, c->pointer, col, "%s", msg);
  return false;
}

void fg_expr_value_free(fg_value *v) {
  if (v->owned) free(v->e);
  v->e = NULL;
  v->owned = false;
}

static fg_value scalar(fg_operand o) {
  return (fg_value){.n = 0, .s = o};
}

static fg_value constant(double k) {
  return scalar((fg_operand){.reg = -1, .k = k});
}

static bool alloc_vec(fg_expr_compiler *c, fg_value *v, int n) {
  *v = (fg_value){.n = n, .owned = true};
  v->e = malloc(sizeof *v->e * (size_t)n);
  if (!v->e) {
    fg_expr_nomem(c);
    return false;
  }
  return true;
}

int fg_expr_broadcast_shape(fg_expr_compiler *c, const fg_value *const *vs,
                            int nv, int col) {
  int n = 0;
  for (int i = 0; i < nv; i++) {
    if (vs[i]->n == 0) continue;
    if (n && vs[i]->n != n) {
      fail(c, col, "vector lengths differ: %d and %d", n, vs[i]->n);
      return -1;
    }
    n = vs[i]->n;
  }
  return n;
}

/* Element-wise op over 1..3 values with broadcasting. */
static bool map(fg_expr_compiler *c, int op, const fg_value *const *args,
                int col, fg_value *out) {
  int nargs = fg_opcode_table[op].nsrc;
  int n = fg_expr_broadcast_shape(c, args, nargs, col);
  if (n < 0) return false;
  fg_operand zero = {.reg = -1, .k = 0};
  fg_operand o[3] = {zero, zero, zero};
  if (n == 0) {
    for (int j = 0; j < nargs; j++)
      o[j] = args[j]->s;
    *out = (fg_value){0};
    return fg_expr_emit(c, op, &o[0], &o[1], &o[2], col, &out->s);
  }
  if (!alloc_vec(c, out, n)) return false;
  for (int i = 0; i < n; i++) {
    for (int j = 0; j < nargs; j++)
      o[j] = fg_value_at(args[j], i);
    if (!fg_expr_emit(c, op, &o[0], &o[1], &o[2], col, &out->e[i])) {
      fg_expr_value_free(out);
      return false;
    }
  }
  return true;
}

bool fg_expr_map2(fg_expr_compiler *c, int op, fg_value *a, fg_value *b,
                  int col, fg_value *out) {
  const fg_value *args[2] = {a, b};
  bool ok = map(c, op, args, col, out);
  fg_expr_value_free(a);
  fg_expr_value_free(b);
  return ok;
}

bool fg_expr_map1(fg_expr_compiler *c, int op, fg_value *a, int col,
                  fg_value *out) {
  const fg_value *args[1] = {a};
  bool ok = map(c, op, args, col, out);
  fg_expr_value_free(a);
  return ok;
}

/* Folds a vector with `op` left to right into a scalar (consumes v). */
static bool reduce(fg_expr_compiler *c, int op, fg_value *v, int col,
                   fg_value *out) {
  if (v->n == 0) {
    *out = *v;
    return true;
  }
  fg_operand acc = v->e[0];
  for (int i = 1; i < v->n; i++) {
    if (!fg_expr_emit(c, op, &acc, &v->e[i], NULL, col, &acc)) {
      fg_expr_value_free(v);
      return false;
    }
  }
  fg_expr_value_free(v);
  *out = scalar(acc);
  return true;
}

static bool sym_value(fg_expr_compiler *c, const fg_sym *s, fg_value *out) {
  if (s->size == 0)
    *out = scalar(s->val[0]);
  else
    *out = (fg_value){.n = s->size, .e = s->val, .owned = false};
  return true;
}

/* Finds the symbol a NAME node refers to, checking it is usable here.
 * Returns -1 on error (reported unless the symbol failed earlier). */
static int resolve(fg_expr_compiler *c, const fg_node *n, bool indexed) {
  int len = n->namelen > 64 ? 64 : n->namelen;
  int si = fg_expr_sym_find(c, n->name, (size_t)n->namelen);
  if (si < 0) {
    char buf[FG_NAME_MAX + 1];
    snprintf(buf, sizeof buf, "%.*s", len, n->name);
    if (fg_expr_is_function_name(buf))
      fail(c, n->col, "'%s' is a function: expected '(' after it", buf);
    else
      fail(c, n->col, "unknown name '%.*s'%s", len, n->name,
           n->namelen > FG_NAME_MAX ? "..." : "");
    return -1;
  }
  fg_sym *s = &c->syms[si];
  if (s->kind == FG_SYM_CONSTRAINT) {
    fail(c, n->col, "'%s' is a constraint, not a value", s->name);
    return -1;
  }
  if (si == c->self_sym && !indexed) {
    if (c->self_k < 0)
      fail(c, n->col, "'%s' cannot refer to itself", s->name);
    else
      fail(c, n->col,
           "'%s' can be used here only element by element, as %s[j] with "
           "j < %d",
           s->name, s->name, c->self_k);
    return -1;
  }
  if (si == c->self_sym) return si;
  if (s->failed) return -1; /* already reported */
  if (!s->compiled) {
    fail(c, n->col,
         "'%s' is defined later (definition %d); a definition may use only "
         "decisions, uncertain inputs and earlier definitions",
         s->name, s->order);
    return -1;
  }
  return si;
}

/* Elements of the elements definition being built: only j < k exist. */
static bool self_elements(fg_expr_compiler *c, const fg_node *n,
                          const fg_sym *s, fg_value *out) {
  int hi = n->kind == FG_N_SLICE ? n->i1 : n->i0 + 1;
  if (n->kind == FG_N_SLICE && n->i0 >= n->i1)
    return fail(c, n->col, "empty slice [%d:%d]: expected start < end", n->i0,
                n->i1);
  if (hi > c->self_k) {
    if (c->self_k == 0)
      return fail(c, n->col,
                  "element 0 of '%s' cannot use elements of '%s' (only "
                  "earlier elements are available)",
                  s->name, s->name);
    return fail(c, n->col,
                "element %d of '%s' may use only %s[0] to %s[%d] but found "
                "%s[%d]",
                c->self_k, s->name, s->name, s->name, c->self_k - 1, s->name,
                hi - 1);
  }
  if (n->kind == FG_N_INDEX)
    *out = scalar(s->val[n->i0]);
  else
    *out = (fg_value){.n = n->i1 - n->i0, .e = s->val + n->i0};
  return true;
}

static bool compile_index(fg_expr_compiler *c, const fg_node *n,
                          fg_value *out) {
  const fg_node *base = n->kids[0];
  char what[FG_NAME_MAX + 16] = "a vector";
  if (base->kind == FG_N_NAME) {
    int si = resolve(c, base, true);
    if (si < 0) return false;
    if (si == c->self_sym) return self_elements(c, n, &c->syms[si], out);
    snprintf(what, sizeof what, "'%s'", c->syms[si].name);
  }
  fg_value v;
  if (!fg_expr_compile_node(c, base, &v)) return false;
  if (v.n == 0) {
    fg_expr_value_free(&v);
    return fail(c, n->col, "%s is a scalar and cannot be indexed",
                base->kind == FG_N_NAME ? what : "this operand");
  }
  bool ok = true;
  if (n->kind == FG_N_INDEX) {
    if (n->i0 >= v.n)
      ok = fail(c, n->col, "index %d out of range for %s (size %d)", n->i0,
                what, v.n);
    else
      *out = scalar(v.e[n->i0]);
    fg_expr_value_free(&v);
    return ok;
  }
  if (n->i0 >= n->i1 || n->i1 > v.n) {
    fg_expr_value_free(&v);
    return fail(c, n->col,
                "slice [%d:%d] out of range for %s (size %d): expected "
                "0 <= start < end <= %d",
                n->i0, n->i1, what, v.n, v.n);
  }
  int len = n->i1 - n->i0;
  if (!v.owned) {
    *out = (fg_value){.n = len, .e = v.e + n->i0};
    return true;
  }
  if (alloc_vec(c, out, len))
    memcpy(out->e, v.e + n->i0, sizeof *out->e * (size_t)len);
  else
    ok = false;
  fg_expr_value_free(&v);
  return ok;
}

static bool compile_vector(fg_expr_compiler *c, const fg_node *n,
                           fg_value *out) {
  if (!alloc_vec(c, out, n->nkids)) return false;
  for (int i = 0; i < n->nkids; i++) {
    fg_value item;
    if (!fg_expr_compile_node(c, n->kids[i], &item)) {
      fg_expr_value_free(out);
      return false;
    }
    if (item.n != 0) {
      fg_expr_value_free(&item);
      fg_expr_value_free(out);
      return fail(c, n->kids[i]->col,
                  "expected a scalar vector item but item %d is a vector of "
                  "%d elements",
                  i, item.n);
    }
    out->e[i] = item.s;
  }
  return true;
}

static int chain_opcode(fg_tok_kind k) {
  switch (k) {
  case FG_TOK_PLUS: return FG_OP_ADD;
  case FG_TOK_MINUS: return FG_OP_SUB;
  case FG_TOK_STAR: return FG_OP_MUL;
  case FG_TOK_SLASH: return FG_OP_DIV;
  case FG_TOK_LT: return FG_OP_LT;
  case FG_TOK_LE: return FG_OP_LE;
  case FG_TOK_GT: return FG_OP_GT;
  case FG_TOK_GE: return FG_OP_GE;
  case FG_TOK_EQ: return FG_OP_EQ;
  case FG_TOK_NE: return FG_OP_NE;
  case FG_TOK_AND: return FG_OP_AND;
  case FG_TOK_OR: return FG_OP_OR;
  default: return -1;
  }
}

static bool compile_chain(fg_expr_compiler *c, const fg_node *n,
                          fg_value *out) {
  fg_value acc;
  if (!fg_expr_compile_node(c, n->kids[0], &acc)) return false;
  for (int i = 1; i < n->nkids; i++) {
    fg_value rhs, res;
    if (!fg_expr_compile_node(c, n->kids[i], &rhs)) {
      fg_expr_value_free(&acc);
      return false;
    }
    int op = chain_opcode(n->ops[i - 1]);
    if (!fg_expr_map2(c, op, &acc, &rhs, n->opcols[i - 1], &res)) return false;
    acc = res;
  }
  *out = acc;
  return true;
}

/* c ? a : b, lane-wise; a constant condition selects at compile time. */
static bool compile_ternary(fg_expr_compiler *c, const fg_node *n,
                            fg_value *out) {
  fg_value v[3];
  int got = 0;
  for (; got < 3; got++)
    if (!fg_expr_compile_node(c, n->kids[got], &v[got])) break;
  bool ok = got == 3;
  const fg_value *args[3] = {&v[0], &v[1], &v[2]};
  int shape = ok ? fg_expr_broadcast_shape(c, args, 3, n->col) : -1;
  if (ok && shape >= 0 && v[0].n == 0 && v[0].s.reg < 0) {
    fg_value *pick = v[0].s.k != 0.0 ? &v[1] : &v[2];
    if (pick->n == shape) {
      *out = *pick;
      pick->owned = false; /* ownership moved to *out */
    } else if (alloc_vec(c, out, shape)) {
      for (int i = 0; i < shape; i++)
        out->e[i] = pick->s;
    } else {
      ok = false;
    }
  } else if (ok && shape >= 0) {
    ok = map(c, FG_OP_SELECT, args, n->col, out);
  } else {
    ok = false;
  }
  for (int i = 0; i < got; i++)
    fg_expr_value_free(&v[i]);
  return ok;
}

static const int elementwise_op[FG_FN_COUNT] = {
    [FG_FN_ABS] = FG_OP_ABS,     [FG_FN_SQRT] = FG_OP_SQRT,
    [FG_FN_EXP] = FG_OP_EXP,     [FG_FN_LOG] = FG_OP_LOG,
    [FG_FN_LOG10] = FG_OP_LOG10, [FG_FN_FLOOR] = FG_OP_FLOOR,
    [FG_FN_CEIL] = FG_OP_CEIL,   [FG_FN_ROUND] = FG_OP_ROUND,
    [FG_FN_ABOVE_ZERO] = FG_OP_ABOVE_ZERO,
};

static bool running_sum(fg_expr_compiler *c, fg_value *v, int col,
                        fg_value *out) {
  if (v->n == 0) {
    *out = *v;
    return true;
  }
  bool ok = alloc_vec(c, out, v->n);
  if (ok) {
    out->e[0] = v->e[0];
    for (int i = 1; ok && i < v->n; i++)
      ok = fg_expr_emit(c, FG_OP_ADD, &out->e[i - 1], &v->e[i], NULL, col,
                        &out->e[i]);
    if (!ok) fg_expr_value_free(out);
  }
  fg_expr_value_free(v);
  return ok;
}

/* dot(u, v): u0*v0, then acc = ui*vi + acc (consumes u and v). */
static bool dot(fg_expr_compiler *c, fg_value *u, fg_value *v, int col,
                fg_value *out) {
  const fg_value *args[2] = {u, v};
  int n = fg_expr_broadcast_shape(c, args, 2, col);
  bool ok = n >= 0;
  fg_operand acc = {.reg = -1, .k = 0};
  for (int i = 0; ok && i < (n ? n : 1); i++) {
    fg_operand a = fg_value_at(u, i), b = fg_value_at(v, i);
    ok = i == 0 ? fg_expr_emit(c, FG_OP_MUL, &a, &b, NULL, col, &acc)
                : fg_expr_emit(c, FG_OP_MULADD, &a, &b, &acc, col, &acc);
  }
  fg_expr_value_free(u);
  fg_expr_value_free(v);
  if (ok) *out = scalar(acc);
  return ok;
}

static bool compile_call(fg_expr_compiler *c, const fg_node *n, fg_value *out) {
  fg_value a[3], acc;
  int col = n->col;
  if (n->fn == FG_FN_MIN || n->fn == FG_FN_MAX) {
    int op = n->fn == FG_FN_MIN ? FG_OP_MIN : FG_OP_MAX;
    if (!fg_expr_compile_node(c, n->kids[0], &acc)) return false;
    if (n->nkids == 1) return reduce(c, op, &acc, col, out);
    for (int i = 1; i < n->nkids; i++) {
      fg_value rhs, res;
      if (!fg_expr_compile_node(c, n->kids[i], &rhs)) {
        fg_expr_value_free(&acc);
        return false;
      }
      if (!fg_expr_map2(c, op, &acc, &rhs, col, &res)) return false;
      acc = res;
    }
    *out = acc;
    return true;
  }
  for (int i = 0; i < n->nkids; i++) {
    if (!fg_expr_compile_node(c, n->kids[i], &a[i])) {
      while (i-- > 0)
        fg_expr_value_free(&a[i]);
      return false;
    }
  }
  switch (n->fn) {
  case FG_FN_SUM: return reduce(c, FG_OP_ADD, &a[0], col, out);
  case FG_FN_MEAN: {
    int len = a[0].n;
    if (!reduce(c, FG_OP_ADD, &a[0], col, &acc)) return false;
    if (len == 0) {
      *out = acc;
      return true;
    }
    fg_value k = constant((double)len);
    return fg_expr_map2(c, FG_OP_DIV, &acc, &k, col, out);
  }
  case FG_FN_LENGTH:
    *out = constant(a[0].n ? a[0].n : 1);
    fg_expr_value_free(&a[0]);
    return true;
  case FG_FN_RUNNING_SUM: return running_sum(c, &a[0], col, out);
  case FG_FN_DOT: return dot(c, &a[0], &a[1], col, out);
  case FG_FN_CLAMP: {
    const fg_value *args[3] = {&a[0], &a[1], &a[2]};
    bool ok = map(c, FG_OP_CLAMP, args, col, out);
    for (int i = 0; i < 3; i++)
      fg_expr_value_free(&a[i]);
    return ok;
  }
  default: return fg_expr_map1(c, elementwise_op[n->fn], &a[0], col, out);
  }
}

bool fg_expr_compile_node(fg_expr_compiler *c, const fg_node *n,
                          fg_value *out) {
  *out = (fg_value){0};
  switch (n->kind) {
  case FG_N_NUM: *out = constant(n->num); return true;
  case FG_N_NAME: {
    int si = resolve(c, n, false);
    return si >= 0 && sym_value(c, &c->syms[si], out);
  }
  case FG_N_VEC: return compile_vector(c, n, out);
  case FG_N_INDEX:
  case FG_N_SLICE: return compile_index(c, n, out);
  case FG_N_NEG:
  case FG_N_NOT: {
    fg_value v;
    if (!fg_expr_compile_node(c, n->kids[0], &v)) return false;
    return fg_expr_map1(c, n->kind == FG_N_NEG ? FG_OP_NEG : FG_OP_NOT, &v,
                        n->col, out);
  }
  case FG_N_POW: {
    fg_value a, b;
    if (!fg_expr_compile_node(c, n->kids[0], &a)) return false;
    if (!fg_expr_compile_node(c, n->kids[1], &b)) {
      fg_expr_value_free(&a);
      return false;
    }
    return fg_expr_map2(c, FG_OP_POW, &a, &b, n->col, out);
  }
  case FG_N_CHAIN: return compile_chain(c, n, out);
  case FG_N_TERNARY: return compile_ternary(c, n, out);
  case FG_N_CALL: return compile_call(c, n, out);
  case FG_N_CONSTRAINT: break;
  }
  return fail(c, n->col,
              "a comparison chain is allowed only at the top of "
              "a constraint");
}
