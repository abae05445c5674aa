/*
 * expr/expr_internal.h -- types shared by the files of the expression
 * compiler; nothing outside server/expr/ includes this.
 *
 * The pipeline and who owns what:
 *   lexer.c    text -> tokens (fg_token), one at a time, no allocation;
 *   parser.c   tokens -> syntax tree (fg_node) in an arena owned by the
 *              caller; the parser never emits instructions;
 *   compile.c  syntax tree -> values (arrays of operands), asking emit.c
 *              for every instruction;
 *   emit.c     virtual registers, constants, constant folding, emission;
 *   compiler.c the public entry points: symbol table, names, handing
 *              over expressions (length and syntax checked at once);
 *   items.c    fg_expr_finish: every expression compiled in document
 *              order, definitions kept, constraint rows, the objective;
 *   program.c  finishing: dead code removal, setup/block split, register
 *              allocation, limits, listing;
 *   interp.c   the batched interpreter (also used by the folder).
 *   fuse.c     multiply-add chains of the block stream, run as dense
 *              products by interp.c.
 *   affine.c   which rows are affine in the inputs / decisions, and the
 *              rows' coefficients at fixed decisions (exact path).
 *
 * Thread use: everything here runs on the one thread that compiles, except
 * the interpreter, which any thread may run on its own registers.
 */
#ifndef FG_EXPR_INTERNAL_H
#define FG_EXPR_INTERNAL_H

#include "expr/expr.h"
#include "expr/opcodes.h"

#include <stdbool.h>
#include <stddef.h>

/* ---- tokens (lexer.c) ---- */
typedef enum fg_tok_kind {
  FG_TOK_END = 0,
  FG_TOK_NUM,
  FG_TOK_NAME,
  FG_TOK_PLUS,
  FG_TOK_MINUS,
  FG_TOK_STAR,
  FG_TOK_SLASH,
  FG_TOK_CARET,
  FG_TOK_LPAREN,
  FG_TOK_RPAREN,
  FG_TOK_LBRACK,
  FG_TOK_RBRACK,
  FG_TOK_COMMA,
  FG_TOK_COLON,
  FG_TOK_QUESTION,
  FG_TOK_LT,
  FG_TOK_LE,
  FG_TOK_GT,
  FG_TOK_GE,
  FG_TOK_EQ,
  FG_TOK_NE,
  FG_TOK_AND,
  FG_TOK_OR,
  FG_TOK_NOT
} fg_tok_kind;

typedef struct fg_token {
  fg_tok_kind kind;
  int col;           /* 1-based byte column of the first character */
  const char *start; /* into the source text */
  int len;
  double num; /* FG_TOK_NUM: its value (finite) */
} fg_token;

typedef struct fg_lexer {
  const char *src;
  size_t pos;
} fg_lexer;

/* Reads the next token. On a lexical error returns false and writes the
 * column and message; the lexer must not be used afterwards. */
bool fg_expr_lex(fg_lexer *lx, fg_token *tok, int *err_col, char *err,
                 size_t errcap);
/* "')'", "end of expression", "name 'x'", "number '2.5'" */
void fg_expr_token_describe(const fg_token *tok, char *buf, size_t cap);
/* The operator's spelling ("<=", "&&", ...). */
const char *fg_expr_tok_spelling(fg_tok_kind k);

/* ---- syntax tree (parser.c) ---- */
typedef enum fg_func {
  FG_FN_ABS = 0,
  FG_FN_SQRT,
  FG_FN_EXP,
  FG_FN_LOG,
  FG_FN_LOG10,
  FG_FN_FLOOR,
  FG_FN_CEIL,
  FG_FN_ROUND,
  FG_FN_ABOVE_ZERO,
  FG_FN_MIN,
  FG_FN_MAX,
  FG_FN_SUM,
  FG_FN_MEAN,
  FG_FN_DOT,
  FG_FN_LENGTH,
  FG_FN_RUNNING_SUM,
  FG_FN_CLAMP,
  FG_FN_COUNT
} fg_func;


typedef enum fg_node_kind {
  FG_N_NUM,       /* num */
  FG_N_NAME,      /* name, namelen */
  FG_N_VEC,       /* [kids...] */
  FG_N_INDEX,     /* kids[0][i0] */
  FG_N_SLICE,     /* kids[0][i0:i1] */
  FG_N_NEG,       /* -kids[0] */
  FG_N_NOT,       /* !kids[0] */
  FG_N_POW,       /* kids[0] ^ kids[1] */
  FG_N_CHAIN,     /* kids[0] ops[0] kids[1] ops[1] ... (left to right) */
  FG_N_TERNARY,   /* kids[0] ? kids[1] : kids[2] */
  FG_N_CALL,      /* fn(kids...) */
  FG_N_CONSTRAINT /* top of a constraint: kids[0] ops[0] kids[1] [ops[1]
                     kids[2]] with comparison operators */
} fg_node_kind;

typedef struct fg_node {
  fg_node_kind kind;
  int col; /* column of the token that names the node (operator, name...) */
  int nkids;
  struct fg_node **kids;
  fg_tok_kind *ops; /* CHAIN, CONSTRAINT: nkids - 1 operators */
  int *opcols;      /* their columns */
  double num;
  const char *name; /* into the source text (not NUL-terminated) */
  int namelen;
  int i0, i1;
  fg_func fn;
} fg_node;

typedef struct fg_arena_block fg_arena_block;
typedef struct fg_arena {
  fg_arena_block *head;
} fg_arena;
void *fg_expr_arena_alloc(fg_arena *a, size_t size);
void fg_expr_arena_free(fg_arena *a);

typedef struct fg_parse_error {
  int col;
  bool limited;   /* a named limit was reached: `limit` */
  fg_limit limit;
  double limit_value;
  bool nomem;
  char msg[FG_MESSAGE_MAX];
} fg_parse_error;

/* Parses a whole expression (or, with `constraint`, a constraint's top
 * level). NULL on failure with *err filled in. The tree lives in `arena`
 * and points into `src`, which must outlive it. */
fg_node *fg_expr_parse(const char *src, bool constraint, fg_arena *arena,
                       fg_parse_error *err);

/* ---- values (compile.c, emit.c) ---- */

/* An operand is a virtual register (reg >= 0) or a constant (reg < 0). */
typedef struct fg_operand {
  int reg;
  double k;
} fg_operand;

/* A compile-time value: a scalar (n == 0, in s) or n elements in e. When
 * `owned` is false, e points into storage owned by someone else (a symbol's
 * elements) and must not be freed. */
typedef struct fg_value {
  int n;
  fg_operand s;
  fg_operand *e;
  bool owned;
} fg_value;

static inline fg_operand fg_value_at(const fg_value *v, int i) {
  return v->n == 0 ? v->s : v->e[i];
}

/* ---- the compiler ---- */
typedef enum fg_sym_kind {
  FG_SYM_DECISION,
  FG_SYM_UNCERTAIN,
  FG_SYM_DEFINITION,
  FG_SYM_CONSTRAINT
} fg_sym_kind;

typedef struct fg_sym {
  char name[FG_NAME_MAX + 1];
  fg_sym_kind kind;
  int size;        /* 0 scalar */
  int order;       /* definitions: index in document order */
  int base;        /* inputs: first element's offset within its kind */
  fg_operand *val; /* definitions, once compiled: max(size, 1) operands */
  bool compiled, failed;
} fg_sym;

typedef enum fg_item_kind {
  FG_ITEM_DEFINE,
  FG_ITEM_ELEMENTS,
  FG_ITEM_CONSTRAINT,
  FG_ITEM_OBJECTIVE
} fg_item_kind;

/* An expression handed over and compiled by fg_expr_finish. */
typedef struct fg_item {
  fg_item_kind kind;
  int sym;        /* definition or constraint symbol; -1 for the objective */
  int constraint; /* constraint index in document order */
  int nsrc;
  char **srcs;
  int *src_ids; /* index into the compiler's pointer table, per source */
  bool parse_failed;
} fg_item;

typedef struct fg_insn {
  int op;
  int d, a, b, c;
  double imm;
} fg_insn;

typedef struct fg_span {
  int src; /* index into the pointer table */
  int col;
} fg_span;

typedef struct fg_vreg {
  int def;        /* defining instruction, -1 for inputs */
  bool uncertain; /* depends on an uncertain input */
} fg_vreg;

struct fg_expr_compiler {
  fg_sym *syms;
  int nsyms, capsyms;
  int *slots; /* open-addressing hash of symbol indices, -1 empty */
  int capslots;
  bool seen_uncertain;
  int ndecision, nuncertain; /* flattened elements */

  fg_item *items;
  int nitems, capitems;
  int nconstraints, ndefinitions;
  bool has_objective;

  char **pointers; /* source pointers; spans refer to these */
  int npointers, cappointers;

  /* filled while finishing */
  fg_vreg *vregs;
  int nvregs, capvregs;
  fg_insn *insns;
  fg_span *spans;
  int ninsns, capinsns;
  int *ctab; /* constant hash: vreg, -1 empty */
  int capctab, nconsts;
  fg_row *rows;
  int nrows, caprows;
  fg_objective_sense sense;
  fg_operand objective;
  int def_elements;

  /* the expression being compiled */
  fg_problem *p;
  const char *pointer;
  int src_id;
  int self_sym; /* elements definition being built, or -1 */
  int self_k;   /* its element being compiled */
  bool limit_hit;
  bool nomem;
};

/* compiler.c */
int fg_expr_sym_find(const fg_expr_compiler *c, const char *name, size_t len);

/* emit.c: all return false on a limit or out of memory (already
 * reported); operands may be constants. */
bool fg_expr_emit(fg_expr_compiler *c, int op, const fg_operand *a,
                  const fg_operand *b, const fg_operand *x, int col,
                  fg_operand *out);
/* A register holding operand o (materialises a constant). */
bool fg_expr_as_reg(fg_expr_compiler *c, fg_operand o, int col, int *reg);
int fg_expr_new_vreg(fg_expr_compiler *c, bool uncertain);
bool fg_expr_operand_uncertain(const fg_expr_compiler *c, fg_operand o);
void fg_expr_nomem(fg_expr_compiler *c);

/* compile.c */
bool fg_expr_compile_node(fg_expr_compiler *c, const fg_node *n, fg_value *out);
void fg_expr_value_free(fg_value *v);
/* Element-wise op over one or two values with broadcasting; consumes
 * (frees) the operands. */
bool fg_expr_map1(fg_expr_compiler *c, int op, fg_value *a, int col,
                  fg_value *out);
bool fg_expr_map2(fg_expr_compiler *c, int op, fg_value *a, fg_value *b,
                  int col, fg_value *out);
/* Broadcast shape of several values: -1 (reported at col) if vector
 * lengths differ. */
int fg_expr_broadcast_shape(fg_expr_compiler *c, const fg_value *const *vs,
                            int nv, int col);

/* program.c */
fg_status fg_expr_build_program(fg_expr_compiler *c, fg_program **out,
                                fg_problem *p);

/* interp.c: runs `n` instructions on registers at stride `stride` over
 * lanes [0, lanes). */
void fg_expr_run(const fg_insn *insns, int count, double *regs, size_t stride,
                 int lanes);

/* fuse.c: the block stream cut into plain runs and multiply-add chains
 * (see fuse.c). A chain's terms are in order: term q of a segment is
 * d <- K * V (+ previous d, or + addend for the first when >= 0), K a
 * uniform register. */
typedef struct fg_chain_term {
  int k, v, d;
  bool store; /* false: no one reads d afterwards, the kernel skips it */
} fg_chain_term;

typedef struct fg_segment {
  int start, count; /* block instructions [start, start + count) */
  bool chain;
  int term0;  /* chain: its first term in fg_program.terms */
  int addend; /* chain: the first instruction's addend register, or -1 */
} fg_segment;

/* Finds the chains of prog's block stream (sets segs, nsegs, terms; all
 * NULL / 0 when there is none). False when out of memory. */
bool fg_expr_fuse(fg_program *prog);

/* The finished program. */
struct fg_program {
  fg_program_info info;
  fg_row *rows;
  fg_insn *setup, *block;
  fg_span *setup_span, *block_span;
  int *bcast; /* registers broadcast from setup to block, ascending */
  int nbcast;
  char **pointers;
  int npointers;
  fg_segment *segs; /* NULL: run the block stream in one piece */
  int nsegs;
  fg_chain_term *terms;
  bool lane_tiled; /* chains hold most of the block stream: run it in
                      lane passes (interp.c) */
  fg_affine_row *affine; /* per row (affine.c) */
};

/* affine.c: the structural analysis, run once by fg_expr_build_program. */
bool fg_expr_affine_analyse(fg_program *prog);

#endif
