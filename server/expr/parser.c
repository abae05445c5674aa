/*
 * expr/parser.c -- recursive-descent parser from tokens to a syntax tree.
 *
 * Design: one function per grammar rule (the rule is the comment above
 * it); the binary operators are parsed by one function driven by the
 * precedence table below. Left-associative runs of one level (a + b - c)
 * become a single FG_N_CHAIN node with a list of operands, so the tree's
 * depth -- and with it every later recursive walk -- is bounded by the
 * nesting depth, which the parser limits to FG_EXPR_MAX_DEPTH. The parser
 * knows the function names and their arities but nothing about symbols or
 * shapes; it never emits instructions.
 *
 * Invariants: nodes live in the caller's arena (no frees on error paths);
 * the first error stops the parse; columns are those of the lexer.
 *
 * Thread use: any thread, one parser per text.
 */
#include "expr/expr_internal.h"

#include <limits.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- arena ---- */
struct fg_arena_block {
  struct fg_arena_block *next;
  size_t used, cap;
  _Alignas(16) unsigned char data[];
};

void *fg_expr_arena_alloc(fg_arena *a, size_t size) {
  size = (size + 15) & ~(size_t)15;
  fg_arena_block *b = a->head;
  if (!b || b->cap - b->used < size) {
    size_t cap = size > 16384 ? size : 16384;
    b = malloc(sizeof *b + cap);
    if (!b) return NULL;
    b->next = a->head;
    b->used = 0;
    b->cap = cap;
    a->head = b;
  }
  void *p = b->data + b->used;
  b->used += size;
  memset(p, 0, size);
  return p;
}

void fg_expr_arena_free(fg_arena *a) {
  while (a->head) {
    fg_arena_block *next = a->head->next;
    free(a->head);
    a->head = next;
  }
}

/* ---- functions of the language ---- */
static const struct {
  const char *name;
  fg_func fn;
  int min_args, max_args; /* max -1: any number */
} functions[] = {
    {"abs", FG_FN_ABS, 1, 1},       {"sqrt", FG_FN_SQRT, 1, 1},
    {"exp", FG_FN_EXP, 1, 1},       {"log", FG_FN_LOG, 1, 1},
    {"log10", FG_FN_LOG10, 1, 1},   {"floor", FG_FN_FLOOR, 1, 1},
    {"ceil", FG_FN_CEIL, 1, 1},     {"round", FG_FN_ROUND, 1, 1},
    {"above_zero", FG_FN_ABOVE_ZERO, 1, 1}, {"min", FG_FN_MIN, 1, -1},
    {"max", FG_FN_MAX, 1, -1},      {"sum", FG_FN_SUM, 1, 1},
    {"mean", FG_FN_MEAN, 1, 1},     {"dot", FG_FN_DOT, 2, 2},
    {"length", FG_FN_LENGTH, 1, 1}, {"running_sum", FG_FN_RUNNING_SUM, 1, 1},
    {"clamp", FG_FN_CLAMP, 3, 3},
};
_Static_assert(sizeof functions / sizeof functions[0] == FG_FN_COUNT,
               "every fg_func needs a row in the function table");

static int function_index(const char *name, size_t len) {
  for (size_t i = 0; i < sizeof functions / sizeof functions[0]; i++)
    if (strlen(functions[i].name) == len &&
        memcmp(functions[i].name, name, len) == 0)
      return (int)i;
  return -1;
}

bool fg_expr_is_function_name(const char *name) {
  return name && function_index(name, strlen(name)) >= 0;
}

/* ---- precedence of the binary operators (higher binds tighter) ---- */
enum { LEVEL_OR = 1, LEVEL_AND, LEVEL_CMP, LEVEL_ADD, LEVEL_MUL, LEVEL_TOP };

static const struct {
  fg_tok_kind tok;
  int level;
} binops[] = {
    {FG_TOK_OR, LEVEL_OR},    {FG_TOK_AND, LEVEL_AND},
    {FG_TOK_LT, LEVEL_CMP},   {FG_TOK_LE, LEVEL_CMP},
    {FG_TOK_GT, LEVEL_CMP},   {FG_TOK_GE, LEVEL_CMP},
    {FG_TOK_EQ, LEVEL_CMP},   {FG_TOK_NE, LEVEL_CMP},
    {FG_TOK_PLUS, LEVEL_ADD}, {FG_TOK_MINUS, LEVEL_ADD},
    {FG_TOK_STAR, LEVEL_MUL}, {FG_TOK_SLASH, LEVEL_MUL},
};

static int binop_level(fg_tok_kind k) {
  for (size_t i = 0; i < sizeof binops / sizeof binops[0]; i++)
    if (binops[i].tok == k) return binops[i].level;
  return 0;
}

/* ---- parser state ---- */
typedef struct parser {
  fg_lexer lx;
  fg_token tok; /* the current (not yet consumed) token */
  fg_arena *arena;
  fg_parse_error *err;
  int depth;
  bool failed;
} parser;

static void fail(parser *ps, int col, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

static void fail(parser *ps, int col, const char *fmt, ...) {
  if (ps->failed) return;
  ps->failed = true;
  ps->err->col = col;
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(ps->err->msg, sizeof ps->err->msg, fmt, ap);
  va_end(ap);
}

static void fail_found(parser *ps, const char *expected) {
  char found[96];
  fg_expr_token_describe(&ps->tok, found, sizeof found);
  fail(ps, ps->tok.col, "expected %s but found %s", expected, found);
}

static void advance(parser *ps) {
  int col;
  char msg[FG_MESSAGE_MAX];
  if (ps->failed) return;
  if (!fg_expr_lex(&ps->lx, &ps->tok, &col, msg, sizeof msg)) {
    fail(ps, col, "%s", msg);
    ps->tok.kind = FG_TOK_END;
  }
}

static bool expect(parser *ps, fg_tok_kind k, const char *expected) {
  if (ps->failed) return false;
  if (ps->tok.kind != k) {
    fail_found(ps, expected);
    return false;
  }
  advance(ps);
  return !ps->failed;
}

static fg_node *new_node(parser *ps, fg_node_kind kind, int col) {
  fg_node *n = fg_expr_arena_alloc(ps->arena, sizeof *n);
  if (!n) {
    ps->err->nomem = true;
    fail(ps, col, "out of memory");
    return NULL;
  }
  n->kind = kind;
  n->col = col;
  return n;
}

/* Appends kid (and, for operator lists, op at opcol) to n, growing the
 * arrays inside the arena by doubling. */
static bool push_kid(parser *ps, fg_node *n, fg_node *kid, int *cap,
                     fg_tok_kind op, int opcol, bool with_op) {
  if (n->nkids == *cap) {
    int ncap = *cap ? *cap * 2 : 4;
    fg_node **kids = fg_expr_arena_alloc(ps->arena, sizeof *kids * ncap);
    fg_tok_kind *ops =
        with_op ? fg_expr_arena_alloc(ps->arena, sizeof *ops * ncap) : NULL;
    int *opcols =
        with_op ? fg_expr_arena_alloc(ps->arena, sizeof *opcols * ncap) : NULL;
    if (!kids || (with_op && (!ops || !opcols))) {
      ps->err->nomem = true;
      fail(ps, opcol, "out of memory");
      return false;
    }
    if (n->nkids) {
      memcpy(kids, n->kids, sizeof *kids * n->nkids);
      if (with_op) {
        memcpy(ops, n->ops, sizeof *ops * n->nkids);
        memcpy(opcols, n->opcols, sizeof *opcols * n->nkids);
      }
    }
    n->kids = kids;
    n->ops = ops;
    n->opcols = opcols;
    *cap = ncap;
  }
  if (with_op && n->nkids > 0) {
    n->ops[n->nkids - 1] = op;
    n->opcols[n->nkids - 1] = opcol;
  }
  n->kids[n->nkids++] = kid;
  return true;
}

static bool enter(parser *ps) {
  if (++ps->depth > FG_EXPR_MAX_DEPTH) {
    if (!ps->failed) {
      ps->err->limited = true;
      ps->err->limit = FG_LIMIT_EXPRESSION_DEPTH;
      ps->err->limit_value = FG_EXPR_MAX_DEPTH;
    }
    fail(ps, ps->tok.col,
         "expression nested deeper than %d levels (limit %s)",
         FG_EXPR_MAX_DEPTH, fg_limit_name(FG_LIMIT_EXPRESSION_DEPTH));
    return false;
  }
  return true;
}

static fg_node *parse_ternary(parser *ps);
static fg_node *parse_binary(parser *ps, int level);

/* index := '[' INT [ ':' INT ] ']'      (after the operand) */
static bool parse_int_index(parser *ps, int *out) {
  if (ps->tok.kind != FG_TOK_NUM ||
      strspn(ps->tok.start, "0123456789") != (size_t)ps->tok.len) {
    fail_found(ps, "an integer index (0-based)");
    return false;
  }
  *out = ps->tok.num > INT_MAX ? INT_MAX : (int)ps->tok.num;
  advance(ps);
  return !ps->failed;
}

/* primary := NUMBER | NAME | NAME '(' [ternary {',' ternary}] ')'
 *          | '(' ternary ')' | '[' ternary {',' ternary} ']' */
static fg_node *parse_primary(parser *ps) {
  fg_token t = ps->tok;
  switch (t.kind) {
  case FG_TOK_NUM: {
    fg_node *n = new_node(ps, FG_N_NUM, t.col);
    if (!n) return NULL;
    n->num = t.num;
    advance(ps);
    return ps->failed ? NULL : n;
  }
  case FG_TOK_NAME: {
    advance(ps);
    if (ps->failed) return NULL;
    if (ps->tok.kind != FG_TOK_LPAREN) {
      fg_node *n = new_node(ps, FG_N_NAME, t.col);
      if (!n) return NULL;
      n->name = t.start;
      n->namelen = t.len;
      return n;
    }
    int fi = function_index(t.start, (size_t)t.len);
    if (fi < 0) {
      fail(ps, t.col, "unknown function '%.*s'", t.len > 64 ? 64 : t.len,
           t.start);
      return NULL;
    }
    fg_node *n = new_node(ps, FG_N_CALL, t.col);
    if (!n) return NULL;
    n->fn = functions[fi].fn;
    n->name = t.start;
    n->namelen = t.len;
    int cap = 0;
    advance(ps); /* '(' */
    if (ps->tok.kind != FG_TOK_RPAREN) {
      for (;;) {
        fg_node *arg = parse_ternary(ps);
        if (!arg || !push_kid(ps, n, arg, &cap, FG_TOK_END, t.col, false))
          return NULL;
        if (ps->tok.kind != FG_TOK_COMMA) break;
        advance(ps);
      }
    }
    if (!expect(ps, FG_TOK_RPAREN, "',' or ')'")) return NULL;
    int lo = functions[fi].min_args, hi = functions[fi].max_args;
    if (n->nkids < lo || (hi >= 0 && n->nkids > hi)) {
      if (hi < 0)
        fail(ps, t.col, "'%s' takes at least %d argument%s but was given %d",
             functions[fi].name, lo, lo == 1 ? "" : "s", n->nkids);
      else
        fail(ps, t.col, "'%s' takes %d argument%s but was given %d",
             functions[fi].name, lo, lo == 1 ? "" : "s", n->nkids);
      return NULL;
    }
    return n;
  }
  case FG_TOK_LPAREN: {
    advance(ps);
    fg_node *n = parse_ternary(ps);
    if (!n || !expect(ps, FG_TOK_RPAREN, "')'")) return NULL;
    return n;
  }
  case FG_TOK_LBRACK: {
    fg_node *n = new_node(ps, FG_N_VEC, t.col);
    if (!n) return NULL;
    int cap = 0;
    advance(ps);
    for (;;) {
      if (ps->tok.kind == FG_TOK_RBRACK) {
        fail_found(ps, "a vector element");
        return NULL;
      }
      fg_node *item = parse_ternary(ps);
      if (!item || !push_kid(ps, n, item, &cap, FG_TOK_END, t.col, false))
        return NULL;
      if (ps->tok.kind != FG_TOK_COMMA) break;
      advance(ps);
    }
    if (!expect(ps, FG_TOK_RBRACK, "',' or ']'")) return NULL;
    if (n->nkids > FG_VECTOR_MAX) {
      ps->err->limited = true;
      ps->err->limit = FG_LIMIT_VECTOR_LENGTH;
      ps->err->limit_value = FG_VECTOR_MAX;
      fail(ps, t.col, "vector literal longer than %d elements", FG_VECTOR_MAX);
      return NULL;
    }
    return n;
  }
  default: fail_found(ps, "a number, a name, '(' or '['"); return NULL;
  }
}

/* postfix := primary { '[' INT [':' INT] ']' } */
static fg_node *parse_postfix(parser *ps) {
  fg_node *n = parse_primary(ps);
  if (!n) return NULL;
  while (ps->tok.kind == FG_TOK_LBRACK) {
    int col = ps->tok.col;
    advance(ps);
    /* the node's column is the index's own, where range errors point */
    fg_node *ix = ps->failed ? NULL : new_node(ps, FG_N_INDEX, ps->tok.col);
    if (!ix || !parse_int_index(ps, &ix->i0)) return NULL;
    if (ps->tok.kind == FG_TOK_COLON) {
      advance(ps);
      ix->kind = FG_N_SLICE;
      if (!parse_int_index(ps, &ix->i1)) return NULL;
    }
    if (!expect(ps, FG_TOK_RBRACK,
                ix->kind == FG_N_SLICE ? "']'" : "':' or ']'"))
      return NULL;
    ix->nkids = 1;
    ix->kids = fg_expr_arena_alloc(ps->arena, sizeof *ix->kids);
    if (!ix->kids) {
      ps->err->nomem = true;
      fail(ps, col, "out of memory");
      return NULL;
    }
    ix->kids[0] = n;
    n = ix;
  }
  return n;
}

static fg_node *unary_node(parser *ps, fg_node_kind kind, int col,
                           fg_node *kid) {
  if (!kid) return NULL;
  fg_node *n = new_node(ps, kind, col);
  if (!n) return NULL;
  n->kids = fg_expr_arena_alloc(ps->arena, sizeof *n->kids * 2);
  if (!n->kids) {
    ps->err->nomem = true;
    fail(ps, col, "out of memory");
    return NULL;
  }
  n->kids[0] = kid;
  n->nkids = 1;
  return n;
}

static fg_node *parse_power(parser *ps);

/* exponent := '-' exponent | '!' exponent | power
 * (so 2^-1 is allowed and means 2^(-1)) */
static fg_node *parse_exponent(parser *ps) {
  if (!enter(ps)) return NULL;
  fg_node *n;
  fg_token t = ps->tok;
  if (t.kind == FG_TOK_MINUS || t.kind == FG_TOK_NOT) {
    advance(ps);
    n = unary_node(ps, t.kind == FG_TOK_MINUS ? FG_N_NEG : FG_N_NOT, t.col,
                   parse_exponent(ps));
  } else {
    n = parse_power(ps);
  }
  ps->depth--;
  return n;
}

/* power := postfix [ '^' exponent ]        (right-associative) */
static fg_node *parse_power(parser *ps) {
  fg_node *base = parse_postfix(ps);
  if (!base || ps->tok.kind != FG_TOK_CARET) return base;
  int col = ps->tok.col;
  advance(ps);
  fg_node *n = unary_node(ps, FG_N_POW, col, base);
  if (!n) return NULL;
  fg_node *e = parse_exponent(ps);
  if (!e) return NULL;
  n->kids[1] = e;
  n->nkids = 2;
  return n;
}

/* unary := '-' unary | '!' unary | power
 * (^ binds tighter: -2^2 is -(2^2)) */
static fg_node *parse_unary(parser *ps) {
  fg_token t = ps->tok;
  if (t.kind != FG_TOK_MINUS && t.kind != FG_TOK_NOT) return parse_power(ps);
  if (!enter(ps)) return NULL;
  advance(ps);
  fg_node *n = unary_node(ps, t.kind == FG_TOK_MINUS ? FG_N_NEG : FG_N_NOT,
                          t.col, parse_unary(ps));
  ps->depth--;
  return n;
}

/* binary(L) := binary(L+1) { op(L) binary(L+1) }     for L < LEVEL_TOP
 * binary(LEVEL_TOP) := unary
 * Comparisons (LEVEL_CMP) do not chain: a < b < c is an error. */
static fg_node *parse_binary(parser *ps, int level) {
  if (level >= LEVEL_TOP) return parse_unary(ps);
  fg_node *first = parse_binary(ps, level + 1);
  if (!first || binop_level(ps->tok.kind) != level) return first;
  fg_node *chain = new_node(ps, FG_N_CHAIN, ps->tok.col);
  int cap = 0;
  if (!chain || !push_kid(ps, chain, first, &cap, FG_TOK_END, 0, true))
    return NULL;
  while (binop_level(ps->tok.kind) == level) {
    fg_token op = ps->tok;
    if (level == LEVEL_CMP && chain->nkids == 2) {
      fail(ps, op.col,
           "comparisons do not chain: expected an operator joining the "
           "comparison (such as '&&') but found '%s'",
           fg_expr_tok_spelling(op.kind));
      return NULL;
    }
    advance(ps);
    fg_node *kid = parse_binary(ps, level + 1);
    if (!kid || !push_kid(ps, chain, kid, &cap, op.kind, op.col, true))
      return NULL;
  }
  return chain;
}

/* ternary := binary(OR) [ '?' ternary ':' ternary ]   (right-associative) */
static fg_node *parse_ternary(parser *ps) {
  if (!enter(ps)) return NULL;
  fg_node *n = parse_binary(ps, LEVEL_OR);
  if (n && ps->tok.kind == FG_TOK_QUESTION) {
    int col = ps->tok.col;
    advance(ps);
    fg_node *a = parse_ternary(ps);
    fg_node *b =
        a && expect(ps, FG_TOK_COLON, "':'") ? parse_ternary(ps) : NULL;
    fg_node *t = b ? new_node(ps, FG_N_TERNARY, col) : NULL;
    fg_node **kids =
        t ? fg_expr_arena_alloc(ps->arena, sizeof *kids * 3) : NULL;
    if (kids) {
      kids[0] = n;
      kids[1] = a;
      kids[2] = b;
      t->kids = kids;
      t->nkids = 3;
      n = t;
    } else {
      if (t) {
        ps->err->nomem = true;
        fail(ps, col, "out of memory");
      }
      n = NULL;
    }
  }
  ps->depth--;
  return n;
}

static bool is_comparison(fg_tok_kind k) {
  return binop_level(k) == LEVEL_CMP;
}

/* constraint := binary(ADD) cmp binary(ADD) [ cmp binary(ADD) ] END */
static fg_node *parse_constraint(parser *ps) {
  fg_node *n = new_node(ps, FG_N_CONSTRAINT, 1);
  int cap = 0;
  fg_node *side = parse_binary(ps, LEVEL_ADD);
  if (!n || !side || !push_kid(ps, n, side, &cap, FG_TOK_END, 0, true))
    return NULL;
  if (!is_comparison(ps->tok.kind)) {
    char found[96];
    fg_expr_token_describe(&ps->tok, found, sizeof found);
    fail(ps, ps->tok.col,
         "a constraint must compare two sides (e1 <= e2, e1 >= e2 or "
         "lo <= e <= hi) but found %s",
         found);
    return NULL;
  }
  while (is_comparison(ps->tok.kind)) {
    fg_token op = ps->tok;
    if (n->nkids == 3) {
      fail(ps, op.col,
           "a constraint has at most two comparisons (lo <= e <= hi) but "
           "found a third '%s'",
           fg_expr_tok_spelling(op.kind));
      return NULL;
    }
    n->col = n->nkids == 1 ? op.col : n->col;
    advance(ps);
    side = parse_binary(ps, LEVEL_ADD);
    if (!side || !push_kid(ps, n, side, &cap, op.kind, op.col, true))
      return NULL;
  }
  if (ps->tok.kind == FG_TOK_AND || ps->tok.kind == FG_TOK_OR) {
    fail(ps, ps->tok.col,
         "expected end of constraint but found '%s': write one constraint "
         "per condition, or parenthesise a logical expression",
         fg_expr_tok_spelling(ps->tok.kind));
    return NULL;
  }
  return n;
}

fg_node *fg_expr_parse(const char *src, bool constraint, fg_arena *arena,
                       fg_parse_error *err) {
  parser ps = {.lx = {.src = src, .pos = 0}, .arena = arena, .err = err};
  memset(err, 0, sizeof *err);
  advance(&ps);
  fg_node *n = NULL;
  if (!ps.failed) n = constraint ? parse_constraint(&ps) : parse_ternary(&ps);
  if (n && !ps.failed && ps.tok.kind != FG_TOK_END)
    fail_found(&ps, "an operator or end of expression");
  return ps.failed ? NULL : n;
}
