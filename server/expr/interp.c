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
 * no answer; a row whose excess is NaN does not hold and is counted as
 * non-finite (estimate/tally.c), and NaN truth values propagate
 * (opcodes.h).
 *
 * Invariants (guaranteed by program.c, see opcodes.h): the destination
 * never aliases a source, so the restrict qualifiers are truthful; every
 * register read was written before.
 *
 * The same loop evaluates constant folding at compile time (stride 1, one
 * lane), so folded and run-time results are bit-identical. The block
 * stream's multiply-add chains found by fuse.c (affine rows) run through
 * run_chain instead, a tiled dense product with the same per-lane
 * arithmetic.
 *
 * Thread use: any thread; a program is read-only here and each thread
 * brings its own registers.
 */
#include "expr/expr_internal.h"

#include <math.h>
#include <stdint.h>
#include <string.h>

/* Compiled twice, for the baseline x86-64 and for AVX2, and chosen by the
 * loader on the processor at hand (GCC's and clang's target_clones): the
 * lane loops then move four doubles per instruction instead of two. Each
 * loop body is one IEEE operation per lane (add, multiply, compare, max,
 * a libm call), whatever the vector width, and the build forbids fused
 * multiply-adds (-ffp-contract=off; AVX2 alone has no FMA anyway), so both
 * builds give the same bits. (GCC only: clang's resolver does not
 * link in this static-library layout.) */
/* (not under ThreadSanitizer: the loader runs the clone resolver before
 * its runtime is set up) */
#if defined(__x86_64__) && defined(__GNUC__) && !defined(__clang__) && \
    !defined(__SANITIZE_THREAD__)
#define FG_INTERP_CLONES __attribute__((target_clones("avx2", "default")))
#else
#define FG_INTERP_CLONES
#endif

FG_INTERP_CLONES
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
        d[i] = a[i] == 0.0 ? 1.0 : a[i] != a[i] ? a[i] : 0.0;
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
    case FG_OP_ABOVE_ZERO:
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
      for (int i = 0; i < n; i++) {
        double t = ((a[i] != 0.0) & (b[i] != 0.0)) ? 1.0 : 0.0;
        t = b[i] != b[i] ? b[i] : t;
        d[i] = a[i] != a[i] ? a[i] : t;
      }
      break;
    case FG_OP_OR:
      for (int i = 0; i < n; i++) {
        double t = ((a[i] != 0.0) | (b[i] != 0.0)) ? 1.0 : 0.0;
        t = b[i] != b[i] ? b[i] : t;
        d[i] = a[i] != a[i] ? a[i] : t;
      }
      break;
    case FG_OP_SELECT:
      for (int i = 0; i < n; i++) {
        double t = a[i] != 0.0 ? b[i] : c[i];
        d[i] = a[i] != a[i] ? a[i] : t;
      }
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
    case FG_OP_EXCESS:
      /* a - b, and +0 where a == b (inf <= inf holds): the difference's
       * bits masked, so the loop has no branch and vectorises (a - b is
       * +0 already for equal finite operands) */
      for (int i = 0; i < n; i++) {
        double x = a[i] - b[i];
        uint64_t bits, keep = (uint64_t)0 - (uint64_t)(a[i] != b[i]);
        memcpy(&bits, &x, sizeof bits);
        bits &= keep;
        memcpy(&d[i], &bits, sizeof bits);
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

/* One multiply-add chain (fuse.c) over lanes [0, n): per lane
 *   acc = K_0 * V_0 (+ addend);  d_0 = acc;
 *   acc = K_q * V_q + acc;       d_q = acc   (q = 1 ..)
 * with the products and sums rounded one by one as MUL and MULADD do.
 * Lanes go in tiles of 8 whose accumulator stays in registers; each term
 * loads V_q's tile and stores d_q's when anyone reads it (fuse.c), in term
 * order, so a later term that reads an earlier destination finds it. Per lane
 * the operations and their order are those of the instruction-at-a-time loop
 * (SSE2's packed multiply and add are the same IEEE operations), so the results
 * are the same bits. */
#define CHAIN_TILE 16

#if defined(__SSE2__)
#include <emmintrin.h>
#endif

static void run_chain(const fg_chain_term *terms, int count, int addend,
                      double *regs, int n) {
  const size_t S = FG_BLOCK;
  int t0 = 0;
#if defined(__SSE2__)
  for (; t0 + CHAIN_TILE <= n; t0 += CHAIN_TILE) {
    __m128d acc[CHAIN_TILE / 2];
    const fg_chain_term *t = &terms[0];
    const double *v = regs + (size_t)t->v * S + t0;
    __m128d k = _mm_set1_pd(regs[(size_t)t->k * S]);
    for (int h = 0; h < CHAIN_TILE / 2; h++)
      acc[h] = _mm_mul_pd(k, _mm_loadu_pd(v + 2 * h));
    if (addend >= 0) {
      const double *c = regs + (size_t)addend * S + t0;
      for (int h = 0; h < CHAIN_TILE / 2; h++)
        acc[h] = _mm_add_pd(acc[h], _mm_loadu_pd(c + 2 * h));
    }
    for (int q = 0;;) {
      if (terms[q].store) {
        double *d = regs + (size_t)terms[q].d * S + t0;
        for (int h = 0; h < CHAIN_TILE / 2; h++)
          _mm_storeu_pd(d + 2 * h, acc[h]);
      }
      if (++q == count) break;
      t = &terms[q];
      v = regs + (size_t)t->v * S + t0;
      k = _mm_set1_pd(regs[(size_t)t->k * S]);
      for (int h = 0; h < CHAIN_TILE / 2; h++)
        acc[h] = _mm_add_pd(_mm_mul_pd(k, _mm_loadu_pd(v + 2 * h)), acc[h]);
    }
  }
#endif
  for (int i = t0; i < n; i++) { /* leftover lanes (or no SSE2) */
    const fg_chain_term *t = &terms[0];
    double acc = regs[(size_t)t->k * S] * regs[(size_t)t->v * S + i];
    if (addend >= 0) acc = acc + regs[(size_t)addend * S + i];
    if (t->store) regs[(size_t)t->d * S + i] = acc;
    for (int q = 1; q < count; q++) {
      t = &terms[q];
      double prod = regs[(size_t)t->k * S] * regs[(size_t)t->v * S + i];
      acc = prod + acc;
      if (t->store) regs[(size_t)t->d * S + i] = acc;
    }
  }
}

/* Lanes per pass when a chain-heavy block stream runs in lane tiles: 32
 * lanes of a register are 256 bytes, so the inputs of a wide dense row
 * (say 50 of them, 12.8 KiB) stay in L1 while every row reads them, where
 * whole 2 KiB registers would be fetched from L2 once per row. */
#define LANE_PASS 32

void fg_program_run_block(const fg_program *prog, double *block_regs, int n) {
  if (n <= 0) return;
  if (n > FG_BLOCK) n = FG_BLOCK;
  if (!prog->segs) {
    fg_expr_run(prog->block, prog->info.nblock_insns, block_regs, FG_BLOCK, n);
    return;
  }
  /* Chain-heavy streams (fuse.c says so) run the whole stream pass by pass
   * over LANE_PASS lanes, which is exact because no instruction reads
   * another lane; others run segment by segment over the whole block so
   * that plain instructions keep their long loops. */
  int pass = prog->lane_tiled ? LANE_PASS : n;
  for (int t0 = 0; t0 < n; t0 += pass) {
    int m = n - t0 < pass ? n - t0 : pass;
    double *regs = block_regs + t0;
    for (int s = 0; s < prog->nsegs; s++) {
      const fg_segment *sg = &prog->segs[s];
      if (sg->chain)
        run_chain(prog->terms + sg->term0, sg->count, sg->addend, regs, m);
      else
        fg_expr_run(prog->block + sg->start, sg->count, regs, FG_BLOCK, m);
    }
  }
}
