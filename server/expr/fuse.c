/*
 * expr/fuse.c -- finding multiply-add chains in the block stream, so the
 * interpreter can run them as dense products (interp.c runs them).
 *
 * Why: an affine row dot([a_0, ..., a_m], z) compiles to
 *     t_0 = a_0 * z_0;  t_k = a_k * z_k + t_{k-1}  (k = 1 .. m)
 * where every a_k is a register broadcast from the setup stream. Run one
 * instruction at a time over whole registers, each multiply-add reads
 * three registers of FG_BLOCK doubles and writes one; for wide rows those
 * registers no longer fit in L1 and the row becomes a memory stream. Run
 * as a chain over a tile of lanes, the accumulator stays in a vector
 * register, a_k is one number, and each term costs one load of z_k.
 *
 * What is a chain here: consecutive block instructions j0 .. j1, at least
 * FG_CHAIN_MIN long, where j0 is MUL or MULADD and each later one is
 * MULADD whose addend is the previous destination; in every one, one
 * factor is *uniform* -- a register broadcast from setup that no block
 * instruction writes, so all its lanes hold the same value for the whole
 * check (decision-dependent coefficients qualify as well as literals) --
 * and the other factor is not the running sum.
 *
 * Semantics are unchanged, bit for bit: the kernel computes per lane the
 * same products and sums in the same order with the same roundings
 * (multiplication commutes exactly in IEEE arithmetic), and it still
 * stores every destination, so every register holds afterwards what the
 * instruction-at-a-time run leaves there. A lane-wise program may be run
 * tile by tile because no instruction reads another lane (opcodes.h).
 * The instruction list itself is untouched, so listings and the setup
 * stream do not change.
 *
 * Intermediate sums nobody reads (the usual case: the running sum of a dot
 * product lives in two registers in turn) are not stored at all.
 *
 * Deliberately not done: fusing other element-wise runs (max-plus
 * recursions and row comparisons are short and already one pass each).
 *
 * Thread use: runs once on the compiling thread; the result is immutable.
 */
#include "expr/expr_internal.h"

#include <stdbool.h>
#include <stdlib.h>

/* Which factor of insn `in` is uniform (0 for a, 1 for b), or -1. */
static int uniform_factor(const fg_insn *in, const bool *uniform, int prev_d) {
  if (in->op != FG_OP_MUL && in->op != FG_OP_MULADD) return -1;
  if (uniform[in->a] && in->b != prev_d) return 0;
  if (uniform[in->b] && in->a != prev_d) return 1;
  return -1;
}

static void fill_term(fg_chain_term *t, const fg_insn *in, int which) {
  t->k = which == 0 ? in->a : in->b;
  t->v = which == 0 ? in->b : in->a;
  t->d = in->d;
  t->store = true;
}

/* Must term q's destination reach memory? Not when it is no root and the
 * next reference to its register after the chain's next term (which takes
 * it in the accumulator) is a write, so no one could read the value. */
static bool needs_store(const fg_program *prog, const bool *root, int j, int q,
                        int len) {
  const int nb = prog->info.nblock_insns;
  int reg = prog->block[j + q].d;
  if (q == len - 1 || root[reg]) return true;
  for (int i = j + q + 1, seen = 0; i < nb && seen < FG_CHAIN_SCAN;
       i++, seen++) {
    const fg_insn *in = &prog->block[i];
    int ns = fg_opcode_table[in->op].nsrc;
    bool reads = (ns > 0 && in->a == reg) || (ns > 1 && in->b == reg) ||
                 (ns > 2 && in->c == reg && i != j + q + 1);
    if (reads) return true;
    if (in->d == reg) return false;
  }
  return true; /* read by the next block run, or not resolved: keep */
}

bool fg_expr_fuse(fg_program *prog) {
  const int nb = prog->info.nblock_insns, nregs = prog->info.nregs;
  prog->segs = NULL;
  prog->nsegs = 0;
  prog->terms = NULL;
  prog->lane_tiled = false;
  if (nb <= 0) return true;
  bool *uniform = calloc((size_t)nregs + 1, sizeof *uniform);
  bool *root = calloc((size_t)nregs + 1, sizeof *root);
  fg_segment *segs = malloc(sizeof *segs * ((size_t)nb + 1));
  fg_chain_term *terms = malloc(sizeof *terms * ((size_t)nb + 1));
  if (!uniform || !root || !segs || !terms) goto oom;
  for (int r = 0; r < prog->info.nrows; r++)
    root[prog->info.rows[r].excess_reg] = true;
  if (prog->info.objective_reg >= 0) root[prog->info.objective_reg] = true;
  for (int k = 0; k < prog->nbcast; k++)
    uniform[prog->bcast[k]] = true;
  for (int j = 0; j < nb; j++)
    uniform[prog->block[j].d] = false;

  int nsegs = 0, nterms = 0, plain_start = 0;
  for (int j = 0; j < nb;) {
    const fg_insn *head = &prog->block[j];
    int w = uniform_factor(head, uniform, -1);
    int len = 0;
    if (w >= 0) {
      len = 1;
      while (j + len < nb) {
        const fg_insn *nx = &prog->block[j + len];
        const fg_insn *pv = &prog->block[j + len - 1];
        if (nx->op != FG_OP_MULADD || nx->c != pv->d) break;
        if (uniform_factor(nx, uniform, pv->d) < 0) break;
        len++;
      }
    }
    if (len < FG_CHAIN_MIN) {
      j++;
      continue;
    }
    if (j > plain_start)
      segs[nsegs++] = (fg_segment){
          .start = plain_start, .count = j - plain_start, .chain = false};
    segs[nsegs++] =
        (fg_segment){.start = j,
                     .count = len,
                     .chain = true,
                     .term0 = nterms,
                     .addend = head->op == FG_OP_MULADD ? head->c : -1};
    for (int q = 0; q < len; q++) {
      const fg_insn *in = &prog->block[j + q];
      int prev_d = q ? prog->block[j + q - 1].d : -1;
      fill_term(&terms[nterms], in, uniform_factor(in, uniform, prev_d));
      terms[nterms++].store = needs_store(prog, root, j, q, len);
    }
    j += len;
    plain_start = j;
  }
  free(uniform);
  free(root);
  if (nterms == 0) { /* nothing to fuse: the plain path as before */
    free(segs);
    free(terms);
    return true;
  }
  if (plain_start < nb)
    segs[nsegs++] = (fg_segment){
        .start = plain_start, .count = nb - plain_start, .chain = false};
  prog->segs = segs;
  prog->nsegs = nsegs;
  prog->terms = terms;
  prog->lane_tiled = 2 * nterms >= nb;
  return true;
oom:
  free(uniform);
  free(root);
  free(segs);
  free(terms);
  return false;
}
