/*
 * expr/interp.c -- the batched interpreter.
 *
 * Design: a register is `stride` consecutive doubles (FG_BLOCK in the
 * block stream, 1 in the setup stream); one instruction is one switch
 * dispatch followed by a tight loop over lanes [0, n) on restrict
 * pointers, which the C compiler can vectorise. The dispatch cost is paid
 * once per instruction and block, not per sample. The loop bodies call
 * libm directly (no function pointers) and nothing here allocates, locks
 * or fails: IEEE arithmetic gives infinities and NaN where the maths has
 * no answer, and the rows treat NaN as violated.
 *
 * Invariants (guaranteed by program.c, see opcodes.h): the destination
 * never aliases a source, so the restrict qualifiers are truthful; every
 * register read was written before.
 *
 * The same loop evaluates constant folding at compile time (stride 1, one
 * lane), so folded and run-time results are bit-identical.
 *
 * Thread use: any thread; a program is read-only here and each thread
 * brings its own registers.
 */
#include "expr/expr_internal.h"

#include <math.h>
#include <string.h>

void fg_expr_run(const fg_insn *insns, int count, double *regs, size_t stride,
                 int lanes) {
  const int n = lanes;
  for (int k = 0; k < count; k++) {
    const fg_insn *in = &insns[k];
    double *restrict d = regs + (size_t)in->d * stride;
    const double *restrict a = regs + (size_t)in->a * stride;
    const double *restrict b = regs + (size_t)in->b * stride;
    const double *restrict c = regs + (size_t)in->c * stride;
    switch ((fg_opcode)in->op) {
    case FG_OP_CONST: {
      double v = in->imm;
      for (int i = 0; i < n; i++)
        d[i] = v;
      break;
    }
    case FG_OP_NEG:
      for (int i = 0; i < n; i++)
        d[i] = -a[i];
      break;
    case FG_OP_NOT:
      for (int i = 0; i < n; i++)
        d[i] = a[i] == 0.0 ? 1.0 : 0.0;
      break;
    case FG_OP_ABS:
      for (int i = 0; i < n; i++)
        d[i] = fabs(a[i]);
      break;
    case FG_OP_SQRT:
      for (int i = 0; i < n; i++)
        d[i] = sqrt(a[i]);
      break;
    case FG_OP_EXP:
      for (int i = 0; i < n; i++)
        d[i] = exp(a[i]);
      break;
    case FG_OP_LOG:
      for (int i = 0; i < n; i++)
        d[i] = log(a[i]);
      break;
    case FG_OP_LOG10:
      for (int i = 0; i < n; i++)
        d[i] = log10(a[i]);
      break;
    case FG_OP_FLOOR:
      for (int i = 0; i < n; i++)
        d[i] = floor(a[i]);
      break;
    case FG_OP_CEIL:
      for (int i = 0; i < n; i++)
        d[i] = ceil(a[i]);
      break;
    case FG_OP_ROUND:
      for (int i = 0; i < n; i++)
        d[i] = round(a[i]);
      break;
    case FG_OP_POS:
      for (int i = 0; i < n; i++)
        d[i] = a[i] < 0.0 ? 0.0 : a[i];
      break;
    case FG_OP_ADD:
      for (int i = 0; i < n; i++)
        d[i] = a[i] + b[i];
      break;
    case FG_OP_SUB:
      for (int i = 0; i < n; i++)
        d[i] = a[i] - b[i];
      break;
    case FG_OP_MUL:
      for (int i = 0; i < n; i++)
        d[i] = a[i] * b[i];
      break;
    case FG_OP_DIV:
      for (int i = 0; i < n; i++)
        d[i] = a[i] / b[i];
      break;
    case FG_OP_POW:
      for (int i = 0; i < n; i++)
        d[i] = pow(a[i], b[i]);
      break;
    case FG_OP_MIN:
      for (int i = 0; i < n; i++) {
        double m = a[i] < b[i] ? a[i] : b[i]; /* b when b is NaN */
        d[i] = a[i] != a[i] ? a[i] : m;
      }
      break;
    case FG_OP_MAX:
      for (int i = 0; i < n; i++) {
        double m = a[i] > b[i] ? a[i] : b[i];
        d[i] = a[i] != a[i] ? a[i] : m;
      }
      break;
    case FG_OP_LT:
      for (int i = 0; i < n; i++)
        d[i] = a[i] < b[i] ? 1.0 : 0.0;
      break;
    case FG_OP_LE:
      for (int i = 0; i < n; i++)
        d[i] = a[i] <= b[i] ? 1.0 : 0.0;
      break;
    case FG_OP_GT:
      for (int i = 0; i < n; i++)
        d[i] = a[i] > b[i] ? 1.0 : 0.0;
      break;
    case FG_OP_GE:
      for (int i = 0; i < n; i++)
        d[i] = a[i] >= b[i] ? 1.0 : 0.0;
      break;
    case FG_OP_EQ:
      for (int i = 0; i < n; i++)
        d[i] = a[i] == b[i] ? 1.0 : 0.0;
      break;
    case FG_OP_NE:
      for (int i = 0; i < n; i++)
        d[i] = a[i] != b[i] ? 1.0 : 0.0;
      break;
    case FG_OP_AND:
      for (int i = 0; i < n; i++)
        d[i] = ((a[i] != 0.0) & (b[i] != 0.0)) ? 1.0 : 0.0;
      break;
    case FG_OP_OR:
      for (int i = 0; i < n; i++)
        d[i] = ((a[i] != 0.0) | (b[i] != 0.0)) ? 1.0 : 0.0;
      break;
    case FG_OP_SELECT:
      for (int i = 0; i < n; i++)
        d[i] = a[i] != 0.0 ? b[i] : c[i];
      break;
    case FG_OP_CLAMP:
      for (int i = 0; i < n; i++) {
        double lo = a[i] > b[i] ? a[i] : b[i];
        lo = a[i] != a[i] ? a[i] : lo;
        double hi = lo < c[i] ? lo : c[i];
        d[i] = lo != lo ? lo : hi;
      }
      break;
    case FG_OP_MULADD:
      for (int i = 0; i < n; i++) {
        double prod = a[i] * b[i];
        d[i] = prod + c[i];
      }
      break;
    case FG_OP_COUNT: break;
    }
  }
}

void fg_program_run_setup(const fg_program *prog, double *regs) {
  fg_expr_run(prog->setup, prog->info.nsetup_insns, regs, 1, 1);
}

void fg_program_broadcast(const fg_program *prog, const double *setup_regs,
                          double *block_regs) {
  for (int k = 0; k < prog->nbcast; k++) {
    int r = prog->bcast[k];
    double v = setup_regs[r];
    double *restrict d = block_regs + (size_t)r * FG_BLOCK;
    for (int i = 0; i < FG_BLOCK; i++)
      d[i] = v;
  }
}

void fg_program_run_block(const fg_program *prog, double *block_regs, int n) {
  if (n <= 0) return;
  if (n > FG_BLOCK) n = FG_BLOCK;
  fg_expr_run(prog->block, prog->info.nblock_insns, block_regs, FG_BLOCK, n);
}
