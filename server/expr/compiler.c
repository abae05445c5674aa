/*
 * expr/compiler.c -- the compiler's public entry points: symbols,
 * definitions, constraints (rows) and the objective.
 *
 * Design: declarations enter the symbol table at once (names are checked
 * when they are declared, against the one namespace of the document).
 * Each expression is checked for length and syntax when it is handed over,
 * so syntax errors are reported in document order, but compiled only by
 * fg_expr_finish, in document order: by then every definition's name is
 * known, so a reference to a later definition can be told apart from a
 * typo. Every expression is compiled even after an earlier one failed, so
 * one registration reports as many independent errors as possible (one per
 * expression); a reference to a definition that itself failed is not
 * reported again.
 *
 * Rows: a constraint's sides broadcast to a common shape; element i of its
 * excess (see expr.h) is row `name[i]` (or `name` for a scalar). Equality
 * is accepted only when neither side depends on an uncertain input.
 *
 * Invariants: decisions are declared before uncertain inputs (the register
 * layout depends on it); a symbol's `val` is set once it is compiled.
 *
 * Thread use: one thread per compiler.
 */
#include "expr/expr_internal.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

fg_expr_compiler *fg_expr_compiler_new(void) {
  fg_expr_compiler *c = calloc(1, sizeof *c);
  if (!c) return NULL;
  c->self_sym = -1;
  c->objective.reg = -1;
  return c;
}

static void free_item(fg_item *it) {
  for (int i = 0; i < it->nsrc; i++)
    free(it->srcs[i]);
  free(it->srcs);
  free(it->src_ids);
}

void fg_expr_compiler_free(fg_expr_compiler *c) {
  if (!c) return;
  for (int i = 0; i < c->nsyms; i++)
    free(c->syms[i].val);
  free(c->syms);
  free(c->slots);
  for (int i = 0; i < c->nitems; i++)
    free_item(&c->items[i]);
  free(c->items);
  for (int i = 0; i < c->npointers; i++)
    free(c->pointers[i]);
  free(c->pointers);
  free(c->vregs);
  free(c->insns);
  free(c->spans);
  free(c->ctab);
  free(c->rows);
  free(c);
}

/* ---- symbol table: open addressing on the name ---- */
static size_t hash_name(const char *s, size_t len) {
  size_t h = 1469598103934665603ULL;
  for (size_t i = 0; i < len; i++)
    h = (h ^ (unsigned char)s[i]) * 1099511628211ULL;
  return h;
}

int fg_expr_sym_find(const fg_expr_compiler *c, const char *name, size_t len) {
  if (!c->capslots || len > FG_NAME_MAX) return -1;
  size_t mask = (size_t)c->capslots - 1, h = hash_name(name, len) & mask;
  while (c->slots[h] >= 0) {
    const fg_sym *s = &c->syms[c->slots[h]];
    if (strlen(s->name) == len && memcmp(s->name, name, len) == 0)
      return c->slots[h];
    h = (h + 1) & mask;
  }
  return -1;
}

static bool slots_insert(fg_expr_compiler *c, int si) {
  if (2 * (c->nsyms + 1) > c->capslots) {
    int ncap = c->capslots ? c->capslots * 2 : 64;
    int *t = malloc(sizeof *t * (size_t)ncap);
    if (!t) return false;
    for (int i = 0; i < ncap; i++)
      t[i] = -1;
    free(c->slots);
    c->slots = t;
    c->capslots = ncap;
    for (int i = 0; i < si; i++) {
      size_t h = hash_name(c->syms[i].name, strlen(c->syms[i].name));
      while (t[h & (size_t)(ncap - 1)] >= 0)
        h++;
      t[h & (size_t)(ncap - 1)] = i;
    }
  }
  size_t mask = (size_t)c->capslots - 1;
  size_t h = hash_name(c->syms[si].name, strlen(c->syms[si].name)) & mask;
  while (c->slots[h] >= 0)
    h = (h + 1) & mask;
  c->slots[h] = si;
  return true;
}

static const char *kind_name(fg_sym_kind k) {
  switch (k) {
  case FG_SYM_DECISION: return "a decision";
  case FG_SYM_UNCERTAIN: return "an uncertain input";
  case FG_SYM_DEFINITION: return "a definition";
  case FG_SYM_CONSTRAINT: return "a constraint";
  }
  return "a member";
}

static bool valid_name(const char *s) {
  if (!((s[0] >= 'A' && s[0] <= 'Z') || (s[0] >= 'a' && s[0] <= 'z') ||
        s[0] == '_'))
    return false;
  for (const char *q = s; *q; q++)
    if (!((*q >= 'A' && *q <= 'Z') || (*q >= 'a' && *q <= 'z') ||
          (*q >= '0' && *q <= '9') || *q == '_'))
      return false;
  return true;
}

/* Adds a symbol; returns its index or -1 (reported). */
static int add_sym(fg_expr_compiler *c, const char *name, fg_sym_kind kind,
                   int size, const char *pointer, fg_problem *p) {
  if (!name) name = "";
  size_t len = strlen(name);
  if (len > FG_NAME_MAX) {
    fg_problem_limit(p, pointer, FG_LIMIT_NAME_LENGTH, FG_NAME_MAX,
                     "name longer than %d characters (limit %s)",
                     FG_NAME_MAX, fg_limit_name(FG_LIMIT_NAME_LENGTH));
    return -1;
  }
  if (!valid_name(name)) {
    fg_problem_add(p, FG_EINVAL, pointer, 0,
                   "expected a name of letters, digits and '_' not starting "
                   "with a digit but found '%s'",
                   name);
    return -1;
  }
  if (fg_expr_is_function_name(name)) {
    fg_problem_add(p, FG_EINVAL, pointer, 0,
                   "'%s' is a function of the expression language and "
                   "cannot name a member",
                   name);
    return -1;
  }
  int old = fg_expr_sym_find(c, name, len);
  if (old >= 0) {
    fg_problem_add(p, FG_EINVAL, pointer, 0,
                   "duplicate name '%s': already used by %s", name,
                   kind_name(c->syms[old].kind));
    return -1;
  }
  if (size < 0) {
    fg_problem_add(p, FG_EINVAL, pointer, 0,
                   "expected a size of at least 1 but found %d", size);
    return -1;
  }
  if (size > FG_VECTOR_MAX) {
    fg_problem_limit(p, pointer, FG_LIMIT_VECTOR_LENGTH, FG_VECTOR_MAX,
                     "'%s' has %d elements, more than %d (limit "
                     "vector_length)",
                     name, size, FG_VECTOR_MAX);
    return -1;
  }
  if (c->nsyms == c->capsyms) {
    int ncap = c->capsyms ? c->capsyms * 2 : 32;
    fg_sym *ns = realloc(c->syms, sizeof *ns * (size_t)ncap);
    if (!ns) goto nomem;
    c->syms = ns;
    c->capsyms = ncap;
  }
  fg_sym *s = &c->syms[c->nsyms];
  *s = (fg_sym){.kind = kind, .size = size, .order = -1};
  memcpy(s->name, name, len + 1);
  if (!slots_insert(c, c->nsyms)) goto nomem;
  return c->nsyms++;
nomem:
  fg_problem_set(p, FG_ENOMEM, "out of memory");
  return -1;
}

static fg_status declare(fg_expr_compiler *c, const char *name, int size,
                         const char *pointer, fg_problem *p, fg_sym_kind kind) {
  if (kind == FG_SYM_DECISION && c->seen_uncertain)
    return fg_problem_add(p, FG_EINTERNAL, pointer, 0,
                          "decision '%s' declared after an uncertain input",
                          name ? name : "");
  int si = add_sym(c, name, kind, size, pointer, p);
  if (si < 0) return p ? p->status : FG_EINVAL;
  int count = size ? size : 1;
  if (kind == FG_SYM_DECISION) {
    c->syms[si].base = c->ndecision;
    c->ndecision += count;
  } else {
    c->seen_uncertain = true;
    c->syms[si].base = c->nuncertain;
    c->nuncertain += count;
  }
  return FG_OK;
}

fg_status fg_expr_declare_decision(fg_expr_compiler *c, const char *name,
                                   int size, const char *pointer,
                                   fg_problem *p) {
  return declare(c, name, size, pointer, p, FG_SYM_DECISION);
}

fg_status fg_expr_declare_uncertain(fg_expr_compiler *c, const char *name,
                                    int size, const char *pointer,
                                    fg_problem *p) {
  return declare(c, name, size, pointer, p, FG_SYM_UNCERTAIN);
}

/* ---- handing over expressions ---- */
static int add_pointer(fg_expr_compiler *c, const char *pointer) {
  if (c->npointers == c->cappointers) {
    int ncap = c->cappointers ? c->cappointers * 2 : 32;
    char **np = realloc(c->pointers, sizeof *np * (size_t)ncap);
    if (!np) return -1;
    c->pointers = np;
    c->cappointers = ncap;
  }
  char *dup = strdup(pointer ? pointer : "");
  if (!dup) return -1;
  c->pointers[c->npointers] = dup;
  return c->npointers++;
}

/* Checks length and syntax now; errors are reported at `pointer`. */
static bool check_source(const char *src, const char *pointer, bool cons,
                         fg_problem *p) {
  size_t len = strlen(src);
  if (len > FG_EXPR_MAX_LENGTH) {
    fg_problem_limit(p, pointer, FG_LIMIT_EXPRESSION_LENGTH, FG_EXPR_MAX_LENGTH,
                     "expression of %zu characters is longer than %d "
                     "(limit %s)",
                     len, FG_EXPR_MAX_LENGTH,
                     fg_limit_name(FG_LIMIT_EXPRESSION_LENGTH));
    return false;
  }
  fg_arena arena = {0};
  fg_parse_error err;
  fg_node *n = fg_expr_parse(src, cons, &arena, &err);
  fg_expr_arena_free(&arena);
  if (n) return true;
  if (err.nomem)
    fg_problem_set(p, FG_ENOMEM, "out of memory");
  else if (err.limited)
    fg_problem_limit(p, pointer, err.limit, err.limit_value, "%s (column %d)",
                     err.msg, err.col);
  else
    fg_problem_add(p, FG_EINVAL, pointer, err.col, "%s", err.msg);
  return false;
}

/* Records an item with `n` sources; pointers[i] per source. */
static fg_status add_item(fg_expr_compiler *c, fg_item_kind kind, int sym,
                          const char *const *srcs, int n, const char *pointer,
                          fg_problem *p) {
  if (c->nitems == c->capitems) {
    int ncap = c->capitems ? c->capitems * 2 : 32;
    fg_item *ni = realloc(c->items, sizeof *ni * (size_t)ncap);
    if (!ni) return fg_problem_set(p, FG_ENOMEM, "out of memory");
    c->items = ni;
    c->capitems = ncap;
  }
  fg_item *it = &c->items[c->nitems++];
  *it = (fg_item){.kind = kind, .sym = sym, .constraint = -1};
  it->srcs = calloc((size_t)n, sizeof *it->srcs);
  it->src_ids = calloc((size_t)n, sizeof *it->src_ids);
  if (!it->srcs || !it->src_ids)
    return fg_problem_set(p, FG_ENOMEM, "out of memory");
  it->nsrc = n;
  fg_status st = FG_OK;
  for (int i = 0; i < n; i++) {
    char ptr[FG_POINTER_MAX];
    if (kind == FG_ITEM_ELEMENTS)
      fg_pointer_index(ptr, sizeof ptr, pointer, i);
    else
      snprintf(ptr, sizeof ptr, "%s", pointer ? pointer : "");
    it->src_ids[i] = add_pointer(c, ptr);
    const char *src = srcs[i] ? srcs[i] : "";
    it->srcs[i] = strdup(src);
    if (it->src_ids[i] < 0 || !it->srcs[i])
      return fg_problem_set(p, FG_ENOMEM, "out of memory");
    if (!check_source(src, ptr, kind == FG_ITEM_CONSTRAINT, p)) {
      it->parse_failed = true;
      st = p ? p->status : FG_EINVAL;
    }
  }
  if (st != FG_OK && sym >= 0) c->syms[sym].failed = true;
  return st;
}

fg_status fg_expr_define(fg_expr_compiler *c, const char *name, const char *src,
                         const char *pointer, fg_problem *p) {
  int si = add_sym(c, name, FG_SYM_DEFINITION, 0, pointer, p);
  if (si < 0) return p ? p->status : FG_EINVAL;
  c->syms[si].order = c->ndefinitions++;
  return add_item(c, FG_ITEM_DEFINE, si, &src, 1, pointer, p);
}

fg_status fg_expr_define_elements(fg_expr_compiler *c, const char *name,
                                  const char *const *srcs, int n,
                                  const char *pointer, fg_problem *p) {
  if (n <= 0)
    return fg_problem_add(p, FG_EINVAL, pointer, 0,
                          "expected at least one element but found none");
  int si = add_sym(c, name, FG_SYM_DEFINITION, n, pointer, p);
  if (si < 0) return p ? p->status : FG_EINVAL;
  c->syms[si].order = c->ndefinitions++;
  return add_item(c, FG_ITEM_ELEMENTS, si, srcs, n, pointer, p);
}

fg_status fg_expr_constraint(fg_expr_compiler *c, const char *name,
                             const char *src, const char *pointer,
                             fg_problem *p) {
  int si = add_sym(c, name, FG_SYM_CONSTRAINT, 0, pointer, p);
  if (si < 0) return p ? p->status : FG_EINVAL;
  fg_status st = add_item(c, FG_ITEM_CONSTRAINT, si, &src, 1, pointer, p);
  if (c->nitems > 0 && c->items[c->nitems - 1].sym == si)
    c->items[c->nitems - 1].constraint = c->nconstraints;
  c->nconstraints++;
  return st;
}

fg_status fg_expr_objective(fg_expr_compiler *c, fg_objective_sense sense,
                            const char *src, const char *pointer,
                            fg_problem *p) {
  if (c->has_objective)
    return fg_problem_add(p, FG_EINVAL, pointer, 0,
                          "expected one objective but found a second");
  c->has_objective = true;
  c->sense = sense;
  return add_item(c, FG_ITEM_OBJECTIVE, -1, &src, 1, pointer, p);
}
