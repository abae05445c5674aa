/*
 * expr/emit.c -- virtual registers, constants, constant folding and
 * instruction emission.
 *
 * Design: the compiler produces SSA-style code: every instruction writes a
 * fresh virtual register, defined exactly once, in one list in source
 * order. A virtual register is marked `uncertain` when any of its operands
 * is; program.c later moves the deterministic instructions into the setup
 * stream (which keeps their relative order, and no deterministic
 * instruction reads an uncertain register, so moving them first is safe).
 *
 * Constant folding: when every operand is a constant, the instruction is
 * evaluated at once by the interpreter itself (so folding and run time can
 * never disagree). The result replaces the instruction only when it is
 * finite; anything that would produce an infinity or NaN (division by
 * zero, log of zero or a negative, sqrt of a negative, overflow) is left
 * as a run-time instruction with IEEE results. Constants that instructions
 * read live in registers set by FG_OP_CONST in the setup stream, one
 * register per distinct bit pattern.
 *
 * Every instruction counts against FG_PROGRAM_MAX_INSNS as it is emitted,
 * so a hostile expression (a long product of long vectors) stops at the
 * limit instead of consuming memory.
 *
 * Thread use: the compiling thread only.
 */
#include "expr/expr_internal.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

void fg_expr_nomem(fg_expr_compiler *c) {
  if (!c->nomem) fg_problem_set(c->p, FG_ENOMEM, "out of memory");
  c->nomem = true;
}

static bool grow(fg_expr_compiler *c, void **arr, int *cap, int need,
                 size_t elem) {
  if (need <= *cap) return true;
  int ncap = *cap ? *cap : 64;
  while (ncap < need)
    ncap *= 2;
  void *p = realloc(*arr, (size_t)ncap * elem);
  if (!p) {
    fg_expr_nomem(c);
    return false;
  }
  *arr = p;
  *cap = ncap;
  return true;
}

int fg_expr_new_vreg(fg_expr_compiler *c, bool uncertain) {
  if (!grow(c, (void **)&c->vregs, &c->capvregs, c->nvregs + 1,
            sizeof *c->vregs))
    return -1;
  c->vregs[c->nvregs] = (fg_vreg){.def = -1, .uncertain = uncertain};
  return c->nvregs++;
}

bool fg_expr_operand_uncertain(const fg_expr_compiler *c, fg_operand o) {
  return o.reg >= 0 && c->vregs[o.reg].uncertain;
}

/* Appends one instruction writing a new virtual register. */
static bool push_insn(fg_expr_compiler *c, fg_insn in, bool uncertain, int col,
                      int *reg) {
  if (c->ninsns >= FG_PROGRAM_MAX_INSNS) {
    if (!c->limit_hit)
      fg_problem_limit(c->p, c->pointer, FG_LIMIT_PROGRAM_INSTRUCTIONS,
                       FG_PROGRAM_MAX_INSNS,
                       "the program needs more than %d instructions (limit "
                       "program_instructions)",
                       FG_PROGRAM_MAX_INSNS);
    c->limit_hit = true;
    return false;
  }
  if (c->ninsns == c->capinsns) {
    /* instructions and their spans grow together */
    int ncap = c->capinsns ? c->capinsns * 2 : 256;
    fg_insn *ni = realloc(c->insns, (size_t)ncap * sizeof *ni);
    if (!ni) {
      fg_expr_nomem(c);
      return false;
    }
    c->insns = ni;
    fg_span *ns = realloc(c->spans, (size_t)ncap * sizeof *ns);
    if (!ns) {
      fg_expr_nomem(c);
      return false;
    }
    c->spans = ns;
    c->capinsns = ncap;
  }
  int v = fg_expr_new_vreg(c, uncertain);
  if (v < 0) return false;
  in.d = v;
  c->vregs[v].def = c->ninsns;
  c->spans[c->ninsns] = (fg_span){.src = c->src_id, .col = col};
  c->insns[c->ninsns++] = in;
  *reg = v;
  return true;
}

static uint64_t bits_of(double k) {
  uint64_t u;
  memcpy(&u, &k, sizeof u);
  return u;
}

static size_t hash_bits(uint64_t u) {
  u ^= u >> 33;
  u *= 0xff51afd7ed558ccdULL;
  u ^= u >> 33;
  return (size_t)u;
}

static bool ctab_grow(fg_expr_compiler *c) {
  int ncap = c->capctab ? c->capctab * 2 : 256;
  int *t = malloc(sizeof *t * (size_t)ncap);
  if (!t) {
    fg_expr_nomem(c);
    return false;
  }
  for (int i = 0; i < ncap; i++)
    t[i] = -1;
  for (int i = 0; i < c->capctab; i++) {
    int v = c->ctab[i];
    if (v < 0) continue;
    size_t h = hash_bits(bits_of(c->insns[c->vregs[v].def].imm));
    while (t[h & (size_t)(ncap - 1)] >= 0)
      h++;
    t[h & (size_t)(ncap - 1)] = v;
  }
  free(c->ctab);
  c->ctab = t;
  c->capctab = ncap;
  return true;
}

bool fg_expr_as_reg(fg_expr_compiler *c, fg_operand o, int col, int *reg) {
  if (o.reg >= 0) {
    *reg = o.reg;
    return true;
  }
  if (2 * (c->nconsts + 1) > c->capctab && !ctab_grow(c)) return false;
  uint64_t bits = bits_of(o.k);
  size_t mask = (size_t)c->capctab - 1, h = hash_bits(bits) & mask;
  while (c->ctab[h] >= 0) {
    int v = c->ctab[h];
    if (bits_of(c->insns[c->vregs[v].def].imm) == bits) {
      *reg = v;
      return true;
    }
    h = (h + 1) & mask;
  }
  fg_insn in = {.op = FG_OP_CONST, .imm = o.k};
  if (!push_insn(c, in, false, col, reg)) return false;
  c->ctab[h] = *reg;
  c->nconsts++;
  return true;
}

bool fg_expr_emit(fg_expr_compiler *c, int op, const fg_operand *a,
                  const fg_operand *b, const fg_operand *x, int col,
                  fg_operand *out) {
  const fg_operand *src[3] = {a, b, x};
  int nsrc = fg_opcode_table[op].nsrc;
  bool all_const = true, uncertain = false;
  for (int i = 0; i < nsrc; i++) {
    if (src[i]->reg >= 0) all_const = false;
    if (fg_expr_operand_uncertain(c, *src[i])) uncertain = true;
  }
  if (all_const) {
    double regs[4] = {0, 0, 0, 0};
    for (int i = 0; i < nsrc; i++)
      regs[i] = src[i]->k;
    fg_insn in = {.op = op, .d = 3, .a = 0, .b = 1, .c = 2};
    fg_expr_run(&in, 1, regs, 1, 1);
    if (isfinite(regs[3])) {
      *out = (fg_operand){.reg = -1, .k = regs[3]};
      return true;
    }
  }
  int r[3] = {0, 0, 0};
  for (int i = 0; i < nsrc; i++)
    if (!fg_expr_as_reg(c, *src[i], col, &r[i])) return false;
  fg_insn in = {.op = op, .a = r[0], .b = r[1], .c = r[2]};
  int d;
  if (!push_insn(c, in, uncertain, col, &d)) return false;
  *out = (fg_operand){.reg = d, .k = 0};
  return true;
}
