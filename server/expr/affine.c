/*
 * expr/affine.c -- which constraint rows are affine, in the uncertain
 * inputs and in the decisions, and the coefficients of the rows affine in
 * the inputs at given decisions.
 *
 * API (expr.h; used by the exact path and the scenario-model export):
 *   fg_program_affine(prog, row)   structural flags of a row, computed once
 *                                  when the program is built:
 *     in_inputs     the row's excess is affine in the uncertain inputs,
 *                   its coefficients may depend on decisions;
 *     in_decisions  affine in the decisions, coefficients may depend on the
 *                   uncertain inputs.
 *     A range row (max of two excesses) and a deterministic equality
 *     (|excess|) count as affine when both sides are: the row is then the
 *     intersection of two affine half-rows.
 *   fg_program_affine_counts(prog, &in_inputs, &in_decisions, &both)
 *   fg_program_affine_halfrows(prog, setup_regs, ...)
 *                                  numeric coefficients at fixed decisions:
 *     every row as one or two half-rows  c + g . u <= 0  over the
 *     flattened uncertain vector u (register uncertain_base + j is u_j).
 *   fg_decision_forms_new / _rows / _free
 *                                  numeric coefficients in the decisions at
 *     one scenario: every row as half-rows  c + g . x <= 0  over the
 *     flattened decision vector x, and the objective's form. The setup
 *     stream (no uncertain input) is walked once with the decisions as the
 *     variables; each scenario then walks the block stream from the
 *     registers broadcast from setup, with the scenario's uncertain values
 *     as free values. A value that stops being affine remembers the
 *     instruction where it did, so a row that is not affine is reported
 *     with the JSON Pointer, column and operation of that term.
 *
 * Design: both analyses walk the finished instruction list in execution
 * order (setup stream, then block stream) -- the list fuse.c leaves
 * untouched -- keeping per register a tag (0: free of the variables,
 * 1: affine, 2: not affine) or, numerically, an affine form
 * (c, g_0 .. g_(nu-1)). Registers are reused by the allocator, so a
 * register's tag is its current content's; a row's excess register is
 * written last by the row's own instruction. Rules: + - and excess keep
 * affinity; a product is affine when one factor is free; a quotient when
 * the divisor is free; MULADD combines both; any other operation is free
 * when all its operands are, else not affine. Decision elements are the
 * variables for in_decisions, uncertain elements for in_inputs.
 *
 * Numerically, operations on free values are run through the interpreter
 * (fg_expr_run on a four-register scratch), so they round exactly as the
 * simulation does; affine forms are combined coefficient by coefficient.
 * The forms are bounded by FG_EXACT_FORM_CELLS_MAX cells (inputs) and
 * FG_SAMPLE_MODEL_FORM_CELLS_MAX (decisions).
 *
 * Thread use: the structural pass runs once at build; halfrows reads the
 * immutable program and writes only caller memory, so any thread may call
 * it. An fg_decision_forms is scratch of one caller: one thread at a time.
 */
#include "expr/expr_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static int mul_tag(int ta, int tb) {
  if (ta == 0) return tb;
  if (tb == 0) return ta;
  return 2;
}

static int max2(int a, int b) { return a > b ? a : b; }

/* Tag of insn's result from operand tags (t indexed by register). pair:
 * the row-level tag when the result is the max of two excesses or the
 * absolute value of one. */
static int insn_tag(const fg_insn *in, const unsigned char *t, int *pair) {
  int n = fg_opcode_table[in->op].nsrc;
  int ta = n > 0 ? t[in->a] : 0, tb = n > 1 ? t[in->b] : 0,
      tc = n > 2 ? t[in->c] : 0;
  int r;
  switch (in->op) {
  case FG_OP_CONST: r = 0; break;
  case FG_OP_NEG: r = ta; break;
  case FG_OP_ADD:
  case FG_OP_SUB:
  case FG_OP_EXCESS: r = max2(ta, tb); break;
  case FG_OP_MUL: r = mul_tag(ta, tb); break;
  case FG_OP_DIV: r = tb == 0 ? ta : 2; break;
  case FG_OP_MULADD: r = max2(mul_tag(ta, tb), tc); break;
  default: r = max2(max2(ta, tb), tc) == 0 ? 0 : 2; break;
  }
  *pair = r;
  if (in->op == FG_OP_MAX) *pair = max2(ta, tb);
  if (in->op == FG_OP_ABS) *pair = ta;
  return r;
}

/* One structural pass: variables are registers [base, base + count). */
static bool analyse(fg_program *prog, int base, int count, unsigned char *out) {
  int nregs = prog->info.nregs;
  unsigned char *t = calloc((size_t)nregs + 1, 1);
  unsigned char *tp = calloc((size_t)nregs + 1, 1);
  if (!t || !tp) {
    free(t), free(tp);
    return false;
  }
  for (int r = base; r < base + count; r++) t[r] = tp[r] = 1;
  const fg_insn *streams[2] = {prog->setup, prog->block};
  int counts[2] = {prog->info.nsetup_insns, prog->info.nblock_insns};
  for (int s = 0; s < 2; s++)
    for (int i = 0; i < counts[s]; i++) {
      const fg_insn *in = &streams[s][i];
      int pair;
      t[in->d] = (unsigned char)insn_tag(in, t, &pair);
      tp[in->d] = (unsigned char)pair;
    }
  for (int k = 0; k < prog->info.nrows; k++) {
    const fg_row *row = &prog->rows[k];
    int tag = (row->kind == FG_ROW_RANGE || row->kind == FG_ROW_EQ)
                  ? tp[row->excess_reg]
                  : t[row->excess_reg];
    out[k] = tag <= 1;
  }
  free(t), free(tp);
  return true;
}

bool fg_expr_affine_analyse(fg_program *prog) {
  int n = prog->info.nrows;
  prog->affine = calloc((size_t)n + 1, sizeof *prog->affine);
  unsigned char *u = calloc((size_t)n + 1, 1), *d = calloc((size_t)n + 1, 1);
  bool ok = prog->affine && u && d &&
            analyse(prog, prog->info.uncertain_base, prog->info.nuncertain,
                    u) &&
            analyse(prog, prog->info.decision_base, prog->info.ndecision, d);
  if (ok)
    for (int k = 0; k < n; k++) {
      prog->affine[k].in_inputs = u[k] != 0;
      prog->affine[k].in_decisions = d[k] != 0;
    }
  free(u), free(d);
  return ok;
}

fg_affine_row fg_program_affine(const fg_program *prog, int row) {
  return prog->affine[row];
}

void fg_program_affine_counts(const fg_program *prog, int *in_inputs,
                              int *in_decisions, int *both) {
  int a = 0, b = 0, c = 0;
  for (int k = 0; k < prog->info.nrows; k++) {
    a += prog->affine[k].in_inputs;
    b += prog->affine[k].in_decisions;
    c += prog->affine[k].in_inputs && prog->affine[k].in_decisions;
  }
  *in_inputs = a, *in_decisions = b, *both = c;
}

/* ---- numeric forms ---- */

typedef struct forms {
  int w;             /* variables + 1 */
  double *f;         /* nregs x w: (c, g) */
  double *f2;        /* nregs x w: second half of a pair */
  unsigned char *t;  /* 0 free, 1 affine, 2 not, 3 pair of halves */
  double *tmp;       /* w doubles */
  int *why;          /* NULL, or per register the instruction (setup i, or
                        nsetup + i of the block) where a value of tag 2 or
                        3 stopped being affine */
} forms;

static double *F(const forms *s, int r) { return s->f + (size_t)r * s->w; }
static double *F2(const forms *s, int r) { return s->f2 + (size_t)r * s->w; }

/* Run one instruction on free scalar operands. */
static double eval_free(const forms *s, const fg_insn *in) {
  double regs[4] = {0, 0, 0, 0};
  fg_insn one = *in;
  int n = fg_opcode_table[in->op].nsrc;
  if (n > 0) regs[1] = F(s, in->a)[0], one.a = 1;
  if (n > 1) regs[2] = F(s, in->b)[0], one.b = 2;
  if (n > 2) regs[3] = F(s, in->c)[0], one.c = 3;
  one.d = 0;
  fg_expr_run(&one, 1, regs, 1, 1);
  return regs[0];
}

/* Instruction `id` gives a value that is not affine: its origin is the
 * first operand's that is not, else this instruction. */
static void mark_why(forms *s, const fg_insn *in, int id) {
  if (!s->why) return;
  int n = fg_opcode_table[in->op].nsrc, origin = id;
  int ops[3] = {in->a, in->b, in->c};
  for (int k = 0; k < n; k++)
    if (s->t[ops[k]] >= 2) {
      origin = s->why[ops[k]];
      break;
    }
  s->why[in->d] = origin;
}

static void step(forms *s, const fg_insn *in, int id) {
  int w = s->w, n = fg_opcode_table[in->op].nsrc;
  int ta = n > 0 ? s->t[in->a] : 0, tb = n > 1 ? s->t[in->b] : 0,
      tc = n > 2 ? s->t[in->c] : 0;
  double *tmp = s->tmp;
  double *d = F(s, in->d);
  if (ta == 3 || tb == 3 || tc == 3) {
    mark_why(s, in, id);
    s->t[in->d] = 2;
    return;
  }
  if (ta == 0 && tb == 0 && tc == 0) {
    double v = eval_free(s, in);
    memset(d, 0, (size_t)w * sizeof *d);
    d[0] = v;
    s->t[in->d] = 0;
    return;
  }
  const double *A = n > 0 ? F(s, in->a) : NULL, *B = n > 1 ? F(s, in->b) : NULL,
               *Cc = n > 2 ? F(s, in->c) : NULL;
  int r = 2;
  switch (in->op) {
  case FG_OP_NEG:
    for (int j = 0; j < w; j++) tmp[j] = -A[j];
    r = ta;
    break;
  case FG_OP_ADD:
    for (int j = 0; j < w; j++) tmp[j] = A[j] + B[j];
    r = max2(ta, tb);
    break;
  case FG_OP_SUB:
  case FG_OP_EXCESS:
    for (int j = 0; j < w; j++) tmp[j] = A[j] - B[j];
    r = max2(ta, tb);
    break;
  case FG_OP_MUL:
  case FG_OP_MULADD:
    if (ta == 0 || tb == 0) {
      double k = ta == 0 ? A[0] : B[0];
      const double *v = ta == 0 ? B : A;
      for (int j = 0; j < w; j++) tmp[j] = k * v[j];
      r = mul_tag(ta, tb);
      if (in->op == FG_OP_MULADD) {
        for (int j = 0; j < w; j++) tmp[j] += Cc[j];
        r = max2(r, tc);
      }
    }
    break;
  case FG_OP_DIV:
    if (tb == 0) {
      for (int j = 0; j < w; j++) tmp[j] = A[j] / B[0];
      r = ta;
    }
    break;
  case FG_OP_MAX:
    if (ta <= 1 && tb <= 1) {
      double *d2 = F2(s, in->d);
      memcpy(tmp, A, (size_t)w * sizeof *tmp);
      memcpy(d2, B, (size_t)w * sizeof *d2);
      r = 3;
    }
    break;
  case FG_OP_ABS:
    if (ta <= 1) {
      double *d2 = F2(s, in->d);
      for (int j = 0; j < w; j++) tmp[j] = A[j], d2[j] = -A[j];
      r = 3;
    }
    break;
  default: break;
  }
  if (r == 2) mark_why(s, in, id);
  else if (r == 3 && s->why) s->why[in->d] = id;
  s->t[in->d] = (unsigned char)r;
  if (r != 2) memcpy(d, tmp, (size_t)w * sizeof *d);
}

static bool finite_form(const double *f, int w) {
  for (int j = 0; j < w; j++)
    if (!isfinite(f[j])) return false;
  return true;
}

int fg_program_affine_halfrows(const fg_program *prog, const double *setup_regs,
                               double *out, int *row_of, int cap,
                               int *bad_row) {
  const fg_program_info *in = &prog->info;
  int nu = in->nuncertain, w = nu + 1;
  *bad_row = -1;
  if (nu > FG_EXACT_DIMS_MAX ||
      (double)in->nregs * (double)w * 2.0 > (double)FG_EXACT_FORM_CELLS_MAX)
    return -2;
  forms s = {w, calloc((size_t)in->nregs * (size_t)w, sizeof(double)),
             calloc((size_t)in->nregs * (size_t)w, sizeof(double)),
             calloc((size_t)in->nregs, 1), calloc((size_t)w, sizeof(double)),
             NULL};
  int nh = -3;
  if (!s.f || !s.f2 || !s.t || !s.tmp) goto out;
  for (int r = 0; r < in->nregs; r++) F(&s, r)[0] = setup_regs[r];
  for (int j = 0; j < nu; j++) {
    double *f = F(&s, in->uncertain_base + j);
    f[0] = 0, f[1 + j] = 1;
    s.t[in->uncertain_base + j] = 1;
  }
  for (int i = 0; i < in->nblock_insns; i++) step(&s, &prog->block[i], i);
  nh = 0;
  for (int k = 0; k < in->nrows; k++) {
    const fg_row *row = &prog->rows[k];
    int reg = row->excess_reg;
    if (row->deterministic) {
      if (nh >= cap) { nh = -2; goto out; }
      double *o = out + (size_t)nh * w;
      memset(o, 0, (size_t)w * sizeof *o);
      o[0] = setup_regs[reg];
      if (!isfinite(o[0]) && !(o[0] < 0)) { *bad_row = k; nh = -1; goto out; }
      row_of[nh++] = k;
      continue;
    }
    int t = s.t[reg];
    bool two = t == 3 && (row->kind == FG_ROW_RANGE || row->kind == FG_ROW_EQ);
    if (t == 2 || (t == 3 && !two)) { *bad_row = k; nh = -1; goto out; }
    for (int h = 0; h < (two ? 2 : 1); h++) {
      const double *f = h == 0 ? F(&s, reg) : F2(&s, reg);
      if (!finite_form(f, w)) { *bad_row = k; nh = -1; goto out; }
      if (nh >= cap) { nh = -2; goto out; }
      memcpy(out + (size_t)nh * w, f, (size_t)w * sizeof *out);
      row_of[nh++] = k;
    }
  }
out:
  free(s.f), free(s.f2), free(s.t), free(s.tmp);
  return nh;
}

/* ---- forms in the decisions, scenario by scenario ---- */

struct fg_decision_forms {
  const fg_program *prog;
  forms s;                /* the working state of one scenario */
  double *base, *base2;   /* the state after setup: f, f2 ... */
  unsigned char *base_t;  /* ... t ... */
  int *base_why;          /* ... why */
};

void fg_decision_forms_free(fg_decision_forms *df) {
  if (!df) return;
  free(df->s.f), free(df->s.f2), free(df->s.t), free(df->s.tmp);
  free(df->s.why);
  free(df->base), free(df->base2), free(df->base_t), free(df->base_why);
  free(df);
}

fg_decision_forms *fg_decision_forms_new(const fg_program *prog, int *err) {
  const fg_program_info *in = &prog->info;
  int w = in->ndecision + 1;
  *err = 0;
  if ((double)in->nregs * (double)w > (double)FG_SAMPLE_MODEL_FORM_CELLS_MAX) {
    *err = -2;
    return NULL;
  }
  *err = -3;
  fg_decision_forms *df = calloc(1, sizeof *df);
  if (!df) return NULL;
  size_t cells = (size_t)in->nregs * (size_t)w, nr = (size_t)in->nregs + 1;
  df->prog = prog;
  df->s.w = w;
  df->s.f = calloc(cells + 1, sizeof(double));
  df->s.f2 = calloc(cells + 1, sizeof(double));
  df->s.t = calloc(nr, 1);
  df->s.tmp = calloc((size_t)w, sizeof(double));
  df->s.why = calloc(nr, sizeof(int));
  df->base = calloc(cells + 1, sizeof(double));
  df->base2 = calloc(cells + 1, sizeof(double));
  df->base_t = calloc(nr, 1);
  df->base_why = calloc(nr, sizeof(int));
  if (!df->s.f || !df->s.f2 || !df->s.t || !df->s.tmp || !df->s.why ||
      !df->base || !df->base2 || !df->base_t || !df->base_why) {
    fg_decision_forms_free(df);
    return NULL;
  }
  forms *s = &df->s;
  for (int j = 0; j < in->ndecision; j++) {
    F(s, in->decision_base + j)[1 + j] = 1;
    s->t[in->decision_base + j] = 1;
  }
  for (int i = 0; i < in->nsetup_insns; i++) step(s, &prog->setup[i], i);
  memcpy(df->base, s->f, cells * sizeof(double));
  memcpy(df->base2, s->f2, cells * sizeof(double));
  memcpy(df->base_t, s->t, (size_t)in->nregs);
  memcpy(df->base_why, s->why, (size_t)in->nregs * sizeof(int));
  *err = 0;
  return df;
}

/* The fault of a value of register reg in state (t, why), row `row`. */
static void fault_at(const fg_program *prog, const unsigned char *t,
                     const int *why, int reg, int row, bool nonfinite,
                     fg_affine_fault *fault) {
  fault->row = row;
  fault->nonfinite = nonfinite;
  fault->pointer = "";
  fault->column = 0;
  fault->op = NULL;
  if (nonfinite || t[reg] < 2) return;
  int id = why[reg], ns = prog->info.nsetup_insns;
  if (id < 0 || id >= ns + prog->info.nblock_insns) return;
  const fg_span *sp = id < ns ? &prog->setup_span[id] : &prog->block_span[id - ns];
  const fg_insn *insn = id < ns ? &prog->setup[id] : &prog->block[id - ns];
  if (sp->src >= 0 && sp->src < prog->npointers)
    fault->pointer = prog->pointers[sp->src];
  fault->column = sp->col;
  fault->op = fg_opcode_table[insn->op].name;
}

int fg_decision_forms_rows(fg_decision_forms *df, const double *u,
                           double *out, int *row_of, int cap, double *obj,
                           int *obj_state, fg_affine_fault *fault) {
  const fg_program *prog = df->prog;
  const fg_program_info *in = &prog->info;
  forms *s = &df->s;
  int w = s->w;
  size_t wb = (size_t)w * sizeof(double);
  /* the block stream reads the registers broadcast from setup, the
   * uncertain inputs and its own results */
  for (int k = 0; k < prog->nbcast; k++) {
    int r = prog->bcast[k];
    memcpy(F(s, r), df->base + (size_t)r * w, wb);
    if (df->base_t[r] == 3) memcpy(F2(s, r), df->base2 + (size_t)r * w, wb);
    s->t[r] = df->base_t[r];
    s->why[r] = df->base_why[r];
  }
  for (int j = 0; j < in->nuncertain; j++) {
    double *f = F(s, in->uncertain_base + j);
    memset(f, 0, wb);
    f[0] = u[j];
    s->t[in->uncertain_base + j] = 0;
  }
  for (int i = 0; i < in->nblock_insns; i++)
    step(s, &prog->block[i], in->nsetup_insns + i);
  *obj_state = 0;
  if (in->objective_reg >= 0) {
    int reg = in->objective_reg;
    bool det = in->objective_deterministic;
    const unsigned char *t = det ? df->base_t : s->t;
    const double *f = det ? df->base + (size_t)reg * w : F(s, reg);
    if (t[reg] <= 1 && finite_form(f, w)) {
      memcpy(obj, f, wb);
      *obj_state = 1;
    } else {
      *obj_state = 2;
      fault_at(prog, t, det ? df->base_why : s->why, reg, -1, t[reg] <= 1,
               fault);
    }
  }
  int nh = 0;
  for (int k = 0; k < in->nrows; k++) {
    const fg_row *row = &prog->rows[k];
    int reg = row->excess_reg;
    bool det = row->deterministic;
    const unsigned char *t = det ? df->base_t : s->t;
    const int *why = det ? df->base_why : s->why;
    int tag = t[reg];
    bool two = tag == 3 && (row->kind == FG_ROW_RANGE || row->kind == FG_ROW_EQ);
    if (tag == 2 || (tag == 3 && !two)) {
      fault_at(prog, t, why, reg, k, false, fault);
      return -1;
    }
    for (int h = 0; h < (two ? 2 : 1); h++) {
      const double *f = det ? (h == 0 ? df->base : df->base2) + (size_t)reg * w
                            : (h == 0 ? F(s, reg) : F2(s, reg));
      if (!finite_form(f, w)) {
        fault_at(prog, t, why, reg, k, true, fault);
        return -1;
      }
      if (nh >= cap) return -2;
      memcpy(out + (size_t)nh * w, f, wb);
      row_of[nh++] = k;
    }
  }
  return nh;
}
