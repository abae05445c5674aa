/*
 * expr/affine_why.c -- where a row stops being affine in the uncertain
 * inputs: the first operation on its dependency path that combines
 * uncertain terms non-linearly, with its source pointer and column, so an
 * error can name the term (engine/exact.c, the 400 of "exact": "only").
 *
 * Design: the structural rules of affine.c (a product is affine when one
 * factor is free of the inputs, a quotient when the divisor is, + - and
 * excess keep affinity, anything else on an input is not affine) over the
 * block stream, keeping per register the instruction where its
 * non-affinity started: an operation whose operands are affine but whose
 * result is not is an origin; otherwise the origin is inherited from the
 * first non-affine operand. A range or equality row is affine when both
 * its sides are (the max of two excesses, the absolute value of one).
 *
 * Thread use: reads the immutable program; any thread.
 */
#include "expr/expr_internal.h"

#include <stdlib.h>

static int tag_of(const fg_insn *in, const unsigned char *t) {
  int n = fg_opcode_table[in->op].nsrc;
  int ta = n > 0 ? t[in->a] : 0, tb = n > 1 ? t[in->b] : 0,
      tc = n > 2 ? t[in->c] : 0;
  int any = ta > tb ? ta : tb;
  if (tc > any) any = tc;
  switch (in->op) {
  case FG_OP_CONST: return 0;
  case FG_OP_NEG: return ta;
  case FG_OP_ADD:
  case FG_OP_SUB:
  case FG_OP_EXCESS: return any;
  case FG_OP_MUL: return ta == 0 ? tb : (tb == 0 ? ta : 2);
  case FG_OP_DIV: return tb == 0 ? ta : 2;
  case FG_OP_MULADD: {
    int p = ta == 0 ? tb : (tb == 0 ? ta : 2);
    return p > tc ? p : tc;
  }
  default: return any == 0 ? 0 : 2;
  }
}

int fg_program_affine_origin(const fg_program *prog, int row,
                             const char **pointer, int *column,
                             const char **op) {
  const fg_program_info *info = &prog->info;
  if (row < 0 || row >= info->nrows || info->nregs <= 0) return 0;
  unsigned char *t = calloc((size_t)info->nregs, 1);
  int *origin = malloc((size_t)info->nregs * sizeof *origin);
  int found = -1;
  if (!t || !origin) goto out;
  for (int r = 0; r < info->nregs; r++) origin[r] = -1;
  for (int j = 0; j < info->nuncertain; j++) t[info->uncertain_base + j] = 1;
  const fg_row *rw = &prog->rows[row];
  bool pair = rw->kind == FG_ROW_RANGE || rw->kind == FG_ROW_EQ;
  int last = -1; /* the row's own instruction writes its register last */
  for (int i = 0; i < info->nblock_insns; i++)
    if (prog->block[i].d == rw->excess_reg) last = i;
  for (int i = 0; i < info->nblock_insns; i++) {
    const fg_insn *in = &prog->block[i];
    int n = fg_opcode_table[in->op].nsrc;
    int src[3] = {in->a, in->b, in->c};
    int inherited = -1;
    for (int k = 0; k < n && inherited < 0; k++)
      if (t[src[k]] == 2) inherited = origin[src[k]];
    int tag = tag_of(in, t);
    /* the row's own max / abs of affine sides is its pair, not a fault */
    bool row_pair = pair && i == last && inherited < 0 &&
                    (in->op == FG_OP_MAX || in->op == FG_OP_ABS);
    if (row_pair) tag = 1;
    origin[in->d] = tag == 2 ? (inherited >= 0 ? inherited : i) : -1;
    t[in->d] = (unsigned char)tag;
  }
  found = t[rw->excess_reg] == 2 ? origin[rw->excess_reg] : -1;
out:
  if (found >= 0) {
    const fg_span *sp = &prog->block_span[found];
    *pointer = sp->src >= 0 && sp->src < prog->npointers
                   ? prog->pointers[sp->src]
                   : "";
    *column = sp->col;
    *op = fg_opcode_table[prog->block[found].op].name;
  }
  free(t);
  free(origin);
  return found >= 0;
}
