/*
 * expr/program.c -- finishing a program: dead code removal, the setup /
 * block split, register allocation, program limits; and the finished
 * program's accessors and listing.
 *
 * Design, in passes over the SSA instruction list emit.c produced:
 *   1. a post-order walk from the roots (row excesses, the objective):
 *      instructions nobody needs are dropped (an unused definition, the
 *      argument of length()), the rest are ordered so that each value is
 *      computed close to its first use;
 *   2. split: deterministic instructions form the setup stream, the rest
 *      the block stream, each keeping the walk's order;
 *   3. last use of every virtual register over setup ++ block;
 *   4. linear scan: each instruction takes a free physical register for
 *      its result *before* its operands that die there are released, so a
 *      destination never aliases a source (interp.c's restrict contract).
 *      Input registers keep their fixed places [0, ndecision + nuncertain)
 *      and roots are never released, so rows and the objective stay
 *      readable after a run; nor is a setup value the block stream reads,
 *      since every block run needs the broadcast copy again. A setup
 *      register that dies inside setup may be reused by the block stream:
 *      broadcast copies it, the block stream writes it before reading it.
 * The result is a few live registers per vector pipeline rather than one
 * per element ever computed, which keeps the block register file
 * (nregs * FG_BLOCK doubles per worker) small.
 *
 * Thread use: building on the compiling thread; a finished program is
 * immutable and shared.
 */
#include "expr/expr_internal.h"

#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct alloc_state {
  int *phys;     /* virtual -> physical register */
  int *lastuse;  /* index in setup ++ block, INT_MAX for roots, -1 unused */
  int *freelist; /* stack of free physical registers */
  int nfree;
  int next; /* first never-used physical register */
} alloc_state;

static int srcs_of(const fg_insn *in, int out[3]) {
  int n = fg_opcode_table[in->op].nsrc;
  if (n > 0) out[0] = in->a;
  if (n > 1) out[1] = in->b;
  if (n > 2) out[2] = in->c;
  return n;
}

/* Passes 1 and 2: a post-order walk from the roots (rows in order, then
 * the objective) lists every needed instruction after the instructions it
 * reads; instructions the walk never reaches are dead. Walking from the
 * roots rather than keeping emission order interleaves element-wise
 * pipelines element by element (a vector expression is emitted operator by
 * operator), so temporaries die right after they are made. The list is
 * then split, stably, into setup (deterministic) and block instructions;
 * deterministic instructions read only deterministic ones, so both halves
 * stay in dependency order. The walk uses an explicit stack: a reduction
 * over a long vector is a chain as long as the vector. */
static bool schedule(fg_expr_compiler *c, int **order, int *norder,
                     int *nsetup) {
  unsigned char *state = calloc((size_t)c->ninsns + 1, 1);
  int *stack = malloc(sizeof *stack * (3 * (size_t)c->ninsns + 2));
  int *post = malloc(sizeof *post * ((size_t)c->ninsns + 1));
  int *ord = malloc(sizeof *ord * ((size_t)c->ninsns + 1));
  if (!state || !stack || !post || !ord) {
    free(state);
    free(stack);
    free(post);
    free(ord);
    return false;
  }
  int npost = 0;
  for (int root = 0; root <= c->nrows; root++) {
    int reg = root < c->nrows ? c->rows[root].excess_reg : c->objective.reg;
    if (reg < 0 || c->vregs[reg].def < 0) continue;
    int top = 0;
    stack[top++] = c->vregs[reg].def;
    while (top > 0) {
      int k = stack[top - 1];
      if (state[k] == 0) { /* first visit: operands first */
        state[k] = 1;
        int s[3], n = srcs_of(&c->insns[k], s);
        for (int j = n - 1; j >= 0; j--) {
          int d = c->vregs[s[j]].def;
          if (d >= 0 && state[d] == 0) stack[top++] = d;
        }
      } else {
        top--;
        if (state[k] == 1) { /* operands done */
          state[k] = 2;
          post[npost++] = k;
        }
      }
    }
  }
  int n = 0;
  for (int pass = 0; pass < 2; pass++) {
    for (int i = 0; i < npost; i++)
      if (c->vregs[c->insns[post[i]].d].uncertain == (pass == 1))
        ord[n++] = post[i];
    if (pass == 0) *nsetup = n;
  }
  free(state);
  free(stack);
  free(post);
  *order = ord;
  *norder = n;
  return true;
}

static int take_reg(alloc_state *as) {
  return as->nfree ? as->freelist[--as->nfree] : as->next++;
}

static bool allocate(fg_expr_compiler *c, const int *order, int norder,
                     int nsetup, alloc_state *as) {
  int nin = c->ndecision + c->nuncertain;
  as->phys = malloc(sizeof *as->phys * ((size_t)c->nvregs + 1));
  as->lastuse = malloc(sizeof *as->lastuse * ((size_t)c->nvregs + 1));
  as->freelist = malloc(sizeof *as->freelist * ((size_t)c->nvregs + 1));
  if (!as->phys || !as->lastuse || !as->freelist) return false;
  for (int v = 0; v < c->nvregs; v++) {
    as->phys[v] = v < nin ? v : -1;
    as->lastuse[v] = -1;
  }
  for (int i = 0; i < norder; i++) {
    int s[3], n = srcs_of(&c->insns[order[i]], s);
    for (int j = 0; j < n; j++)
      as->lastuse[s[j]] = i;
  }
  for (int i = 0; i < c->nrows; i++)
    as->lastuse[c->rows[i].excess_reg] = INT_MAX;
  if (c->objective.reg >= 0) as->lastuse[c->objective.reg] = INT_MAX;
  for (int v = 0; v < nin; v++)
    as->lastuse[v] = INT_MAX;
  /* Inputs keep their places for good (above). A setup value the
   * block stream reads must survive every run of the block stream, so it
   * is never released either: the block stream runs once per block, and a
   * reuse would overwrite the broadcast value before the next block reads
   * it. */
  for (int i = 0; i < nsetup; i++) {
    int d = c->insns[order[i]].d;
    if (as->lastuse[d] >= nsetup) as->lastuse[d] = INT_MAX;
  }
  as->nfree = 0;
  as->next = nin;
  for (int i = 0; i < norder; i++) {
    const fg_insn *in = &c->insns[order[i]];
    as->phys[in->d] = take_reg(as);
    int s[3], n = srcs_of(in, s);
    for (int j = 0; j < n; j++) {
      bool dup = false;
      for (int q = 0; q < j; q++)
        dup |= s[q] == s[j];
      if (!dup && as->lastuse[s[j]] == i)
        as->freelist[as->nfree++] = as->phys[s[j]];
    }
  }
  return true;
}

static fg_status build(fg_expr_compiler *c, fg_program *prog, const int *order,
                       int norder, int nsetup, const alloc_state *as,
                       fg_problem *p) {
  fg_program_info *info = &prog->info;
  info->nregs = as->next;
  if (info->nregs > FG_PROGRAM_MAX_REGS)
    return fg_problem_limit(p, "", FG_LIMIT_PROGRAM_REGISTERS,
                            FG_PROGRAM_MAX_REGS,
                            "the program needs %d registers, more than %d "
                            "(limit %s)",
                            info->nregs, FG_PROGRAM_MAX_REGS,
                            fg_limit_name(FG_LIMIT_PROGRAM_REGISTERS));
  info->decision_base = 0;
  info->ndecision = c->ndecision;
  info->uncertain_base = c->ndecision;
  info->nuncertain = c->nuncertain;
  info->nsetup_insns = nsetup;
  info->nblock_insns = norder - nsetup;
  size_t nins = (size_t)norder + 1;
  prog->setup = malloc(sizeof(fg_insn) * nins);
  prog->setup_span = malloc(sizeof(fg_span) * nins);
  prog->rows = malloc(sizeof(fg_row) * ((size_t)c->nrows + 1));
  bool *written = calloc((size_t)info->nregs + 1, sizeof *written);
  prog->bcast = malloc(sizeof(int) * ((size_t)info->nregs + 1));
  if (!prog->setup || !prog->setup_span || !prog->rows || !written ||
      !prog->bcast) {
    free(written);
    return fg_problem_set(p, FG_ENOMEM, "out of memory");
  }
  /* one allocation for both streams: block follows setup */
  prog->block = prog->setup + nsetup;
  prog->block_span = prog->setup_span + nsetup;
  for (int i = 0; i < norder; i++) {
    fg_insn in = c->insns[order[i]];
    int s[3], n = srcs_of(&in, s);
    in.d = as->phys[in.d];
    in.a = n > 0 ? as->phys[s[0]] : 0;
    in.b = n > 1 ? as->phys[s[1]] : 0;
    in.c = n > 2 ? as->phys[s[2]] : 0;
    prog->setup[i] = in;
    prog->setup_span[i] = c->spans[order[i]];
    if (i < nsetup) written[in.d] = true;
  }
  for (int r = 0; r < c->ndecision; r++)
    written[r] = true;
  prog->nbcast = 0;
  for (int r = 0; r < info->nregs; r++)
    if (written[r]) prog->bcast[prog->nbcast++] = r;
  free(written);
  info->ndeterministic_rows = 0;
  for (int i = 0; i < c->nrows; i++) {
    prog->rows[i] = c->rows[i];
    prog->rows[i].excess_reg = as->phys[c->rows[i].excess_reg];
    if (prog->rows[i].deterministic) info->ndeterministic_rows++;
  }
  info->nrows = c->nrows;
  info->rows = prog->rows;
  info->objective_sense = c->has_objective ? c->sense : FG_OBJECTIVE_NONE;
  info->objective_reg = -1;
  if (c->has_objective && c->objective.reg >= 0) {
    info->objective_reg = as->phys[c->objective.reg];
    info->objective_deterministic = !c->vregs[c->objective.reg].uncertain;
  }
  prog->pointers = c->pointers;
  prog->npointers = c->npointers;
  c->pointers = NULL;
  c->npointers = c->cappointers = 0;
  return FG_OK;
}

fg_status fg_expr_build_program(fg_expr_compiler *c, fg_program **out,
                                fg_problem *p) {
  fg_program *prog = calloc(1, sizeof *prog);
  int *order = NULL, norder = 0, nsetup = 0;
  alloc_state as = {0};
  fg_status st = FG_OK;
  if (!prog || !schedule(c, &order, &norder, &nsetup) ||
      !allocate(c, order, norder, nsetup, &as)) {
    st = fg_problem_set(p, FG_ENOMEM, "out of memory");
    goto done;
  }
  st = build(c, prog, order, norder, nsetup, &as, p);
  if (st == FG_OK && !fg_expr_fuse(prog))
    st = fg_problem_set(p, FG_ENOMEM, "out of memory");
  if (st == FG_OK && !fg_expr_affine_analyse(prog))
    st = fg_problem_set(p, FG_ENOMEM, "out of memory");
done:
  free(order);
  free(as.phys);
  free(as.lastuse);
  free(as.freelist);
  if (st != FG_OK) {
    fg_program_free(prog);
    return st;
  }
  *out = prog;
  return FG_OK;
}

void fg_program_free(fg_program *prog) {
  if (!prog) return;
  free(prog->setup);
  free(prog->setup_span);
  free(prog->rows);
  free(prog->bcast);
  free(prog->segs);
  free(prog->terms);
  free(prog->affine);
  for (int i = 0; i < prog->npointers; i++)
    free(prog->pointers[i]);
  free(prog->pointers);
  free(prog);
}

void fg_program_get_info(const fg_program *prog, fg_program_info *info) {
  *info = prog->info;
}

static void dump_stream(const fg_program *prog, FILE *f, const char *title,
                        const fg_insn *insns, const fg_span *spans, int n) {
  fprintf(f, "%s: %d instruction%s\n", title, n, n == 1 ? "" : "s");
  for (int i = 0; i < n; i++) {
    const fg_insn *in = &insns[i];
    char ops[96];
    int ns = fg_opcode_table[in->op].nsrc;
    if (in->op == FG_OP_CONST)
      snprintf(ops, sizeof ops, "%.17g", in->imm);
    else if (ns == 1)
      snprintf(ops, sizeof ops, "r%d", in->a);
    else if (ns == 2)
      snprintf(ops, sizeof ops, "r%d, r%d", in->a, in->b);
    else
      snprintf(ops, sizeof ops, "r%d, r%d, r%d", in->a, in->b, in->c);
    const fg_span *sp = &spans[i];
    const char *ptr = sp->src >= 0 && sp->src < prog->npointers
                          ? prog->pointers[sp->src]
                          : "";
    fprintf(f, "  %5d  r%-6d = %-6s %-28s ; %s col %d\n", i, in->d,
            fg_opcode_table[in->op].name, ops, ptr, sp->col);
  }
}

void fg_program_dump(const fg_program *prog, void *file) {
  FILE *f = file;
  const fg_program_info *info = &prog->info;
  fprintf(f,
          "program: %d registers; decisions r%d..r%d, uncertain r%d..r%d; "
          "%d rows (%d deterministic)\n",
          info->nregs, info->decision_base,
          info->decision_base + info->ndecision - 1, info->uncertain_base,
          info->uncertain_base + info->nuncertain - 1, info->nrows,
          info->ndeterministic_rows);
  dump_stream(prog, f, "setup", prog->setup, prog->setup_span,
              info->nsetup_insns);
  dump_stream(prog, f, "block", prog->block, prog->block_span,
              info->nblock_insns);
  static const char *const kinds[] = {"<=", ">=", "range", "=="};
  for (int i = 0; i < info->nrows; i++) {
    const fg_row *r = &prog->rows[i];
    fprintf(f, "row %-24s %-5s excess r%d%s\n", r->name, kinds[r->kind],
            r->excess_reg, r->deterministic ? " (setup)" : "");
  }
  if (info->objective_reg >= 0)
    fprintf(f, "objective %s r%d%s\n",
            info->objective_sense == FG_OBJECTIVE_MAXIMIZE ? "maximize"
                                                           : "minimize",
            info->objective_reg,
            info->objective_deterministic ? " (setup)" : "");
}
