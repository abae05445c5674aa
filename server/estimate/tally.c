/*
 * estimate/tally.c -- the counts one chunk of samples produces, and their
 * merge.
 *
 * Design: a block of samples arrives as one array of excess values per row
 * (lane t = sample first + t). Rows are walked one at a time over all lanes
 * (contiguous reads), each turned into a bit mask of its violated lanes;
 * the masks accumulate which lanes failed at least once and at least
 * twice, and only violated lanes are visited for the sums, histograms and
 * which row failed last; the accumulated masks then give the joint count,
 * sole-cause counts, pair counts and failing-scenario records. A row fails
 * when its excess is not <= 0, so NaN fails (counted apart as
 * non-finite, with the first sample index where it happened: the minimum
 * over chunks when merging, so it does not depend on workers or chunk
 * sizes); a +infinity excess is a violation like any other but stays out
 * of the excess sum and histogram (counted as `infinite`). Driver sums
 * ("explain": true) are added per block after the tally, over each row's
 * violating lanes only (fg_tally_drivers_block).
 *
 * Merging: counts add; sums add in merge order (the engine merges chunks in
 * chunk order, so sums do not depend on the number of workers); failing
 * scenarios keep the first FG_FAILING_SCENARIOS by sample index, which is
 * merge order too.
 *
 * Thread use: a tally belongs to one thread until it is merged under the
 * engine's lock.
 */
#include "estimate/estimate.h"

#include "feasgate/limits.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

fg_status fg_tally_init(fg_tally *t, int nrows) {
  memset(t, 0, sizeof *t);
  t->nrows = nrows;
  t->fail_keep = FG_FAILING_SCENARIOS;
  t->rows = calloc(nrows > 0 ? (size_t)nrows : 1, sizeof *t->rows);
  if (!t->rows) return FG_ENOMEM;
  t->bad_draw_first = FG_INDEX_NONE;
  for (int r = 0; r < nrows; r++) {
    t->rows[r].first_nonfinite = FG_INDEX_NONE;
    if (fg_hist_init(&t->rows[r].hist) != FG_OK) {
      fg_tally_free(t);
      return FG_ENOMEM;
    }
  }
  return FG_OK;
}

void fg_tally_free(fg_tally *t) {
  free(t->drv);
  t->drv = NULL;
  if (!t->rows) return;
  for (int r = 0; r < t->nrows; r++) fg_hist_free(&t->rows[r].hist);
  free(t->rows);
  t->rows = NULL;
}

void fg_tally_reset(fg_tally *t) {
  t->n = t->satisfied = 0;
  t->pair_both = t->pair_one = 0;
  t->objective_sum = 0;
  t->nfail = 0;
  t->bad_draws = 0;
  t->bad_draw_first = FG_INDEX_NONE;
  t->bad_draw_column = 0;
  for (int r = 0; r < t->nrows; r++) {
    fg_row_tally *rt = &t->rows[r];
    rt->violated = rt->sole = rt->nonfinite = rt->infinite = 0;
    rt->first_nonfinite = FG_INDEX_NONE;
    rt->pair_both = rt->pair_one = 0;
    rt->excess_sum = 0;
    fg_hist_reset(&rt->hist);
  }
  if (t->drv)
    memset(t->drv, 0,
           sizeof *t->drv * (size_t)t->drv_dims * (size_t)(t->nrows + 3));
}

fg_status fg_tally_drivers_init(fg_tally *t, int dims, const double *centre) {
  free(t->drv);
  t->drv = NULL;
  t->drv_dims = 0;
  t->drv_centre = centre;
  if (dims <= 0) return FG_OK;
  t->drv = calloc((size_t)dims * (size_t)(t->nrows + 3), sizeof *t->drv);
  if (!t->drv) return FG_ENOMEM;
  t->drv_dims = dims;
  return FG_OK;
}

/* The violators' sums in tiles of DRV_TILE components: the tile's
 * deviations d = x - centre are laid out sample-major (dt[s][jt]), each
 * row's violating lanes are listed once per tile, and the sums run over
 * those lanes only, the tile's components side by side (independent
 * chains, so the compiler may put them in vector lanes). Every sum is
 * still formed in sample order, one rounding per addend, from +0: the
 * same bits as summing w[s] * d[s] over all lanes with w in {0, 1} (a
 * +-0 addend changes no partial sum, which is never -0 in round to
 * nearest), except where a d is non-finite, and then the component's own
 * sums are non-finite and check.c skips it. Cost: per tile the rows'
 * masks (rows x n) plus one addition per violation and component, where
 * the mask-weighted form paid rows x components x n dependent additions. */
enum { DRV_TILE = 16 };

void fg_tally_drivers_block(fg_tally *t, const double *x, size_t stride,
                            const double *const *excess, const int *failed,
                            int n) {
  if (!t->drv || n <= 0) return;
  if (n > FG_BLOCK) n = FG_BLOCK;
  int D = t->drv_dims, R = t->nrows;
  double dt[FG_BLOCK][DRV_TILE];
  int idx[FG_BLOCK];
  for (int j0 = 0; j0 < D; j0 += DRV_TILE) {
    int jn = D - j0 < DRV_TILE ? D - j0 : DRV_TILE;
    for (int jt = 0; jt < jn; jt++) {
      int j = j0 + jt;
      const double *xj = x + (size_t)j * stride;
      double c = t->drv_centre[j], s1 = 0, s2 = 0;
      for (int s = 0; s < n; s++) {
        double d = xj[s] - c;
        dt[s][jt] = d;
        s1 += d;
        s2 += d * d;
      }
      t->drv[j] += s1;
      t->drv[D + j] += s2;
    }
    /* a last, partial tile: its unused columns summed (fixed width) but
     * never stored */
    for (int s = 0; s < n && jn < DRV_TILE; s++)
      for (int jt = jn; jt < DRV_TILE; jt++) dt[s][jt] = 0;
    for (int r = 0; r <= R; r++) {
      int m = 0;
      if (r < R) {
        const double *e = excess[r];
        for (int s = 0; s < n; s++) {
          idx[m] = s;
          m += !(e[s] <= 0); /* NaN counts as violated, as in the tally */
        }
      } else {
        for (int s = 0; s < n; s++) {
          idx[m] = s;
          m += failed[s] != 0;
        }
      }
      if (m == 0) continue;
      double acc[DRV_TILE] = {0};
      for (int k = 0; k < m; k++) {
        const double *dk = dt[idx[k]];
        for (int jt = 0; jt < DRV_TILE; jt++) acc[jt] += dk[jt];
      }
      double *out = t->drv + (size_t)(2 + r) * (size_t)D + (size_t)j0;
      for (int jt = 0; jt < jn; jt++) out[jt] += acc[jt];
    }
  }
}

void fg_tally_merge(fg_tally *dst, const fg_tally *src) {
  dst->n += src->n;
  dst->satisfied += src->satisfied;
  dst->pair_both += src->pair_both;
  dst->pair_one += src->pair_one;
  dst->objective_sum += src->objective_sum;
  for (int r = 0; r < dst->nrows; r++) {
    fg_row_tally *d = &dst->rows[r];
    const fg_row_tally *s = &src->rows[r];
    d->violated += s->violated;
    d->pair_both += s->pair_both;
    d->pair_one += s->pair_one;
    d->sole += s->sole;
    d->nonfinite += s->nonfinite;
    d->infinite += s->infinite;
    if (s->first_nonfinite < d->first_nonfinite)
      d->first_nonfinite = s->first_nonfinite;
    d->excess_sum += s->excess_sum;
    fg_hist_merge(&d->hist, &s->hist);
  }
  if (dst->drv && src->drv && dst->drv_dims == src->drv_dims) {
    size_t m = (size_t)dst->drv_dims * (size_t)(dst->nrows + 3);
    for (size_t i = 0; i < m; i++) dst->drv[i] += src->drv[i];
  }
  for (int i = 0; i < src->nfail && dst->nfail < dst->fail_keep; i++)
    dst->fail[dst->nfail++] = src->fail[i];
  dst->bad_draws += src->bad_draws;
  if (src->bad_draw_first < dst->bad_draw_first ||
      (src->bad_draw_first == dst->bad_draw_first &&
       src->bad_draw_first != FG_INDEX_NONE &&
       src->bad_draw_column < dst->bad_draw_column)) {
    dst->bad_draw_first = src->bad_draw_first;
    dst->bad_draw_column = src->bad_draw_column;
  }
}

/* A double is finite iff its exponent bits are not all ones, i.e. iff
 * (bits & EXP_MASK) - EXP_MASK borrows (bit 63 set): integer and, subtract,
 * shift and and-reduce, which the compiler vectorises with SSE2 and AVX2
 * (a compare-to-bool form and isfinite() it leaves scalar). */
#define EXP_MASK UINT64_C(0x7ff0000000000000)

static uint64_t all_finite(const double *x, size_t m) {
  uint64_t fin = 1;
  for (size_t s = 0; s < m; s++) {
    uint64_t u;
    memcpy(&u, &x[s], sizeof u);
    fin &= ((u & EXP_MASK) - EXP_MASK) >> 63;
  }
  return fin;
}

/* (built for AVX2 and the baseline like the interpreter's loops: integer
 * code, the same answer either way) */
#if defined(__x86_64__) && defined(__GNUC__) && !defined(__clang__) && \
    !defined(__SANITIZE_THREAD__)
__attribute__((target_clones("avx2", "default")))
#endif
void fg_tally_inputs(fg_tally *t, const double *x, int ncols, size_t stride,
                     int n, uint64_t first) {
  /* a full block of contiguous columns is one array: one pass */
  if (ncols <= 0 ||
      ((size_t)n == stride && all_finite(x, (size_t)ncols * stride)))
    return;
  for (int j = 0; j < ncols; j++) {
    const double *col = x + (size_t)j * stride;
    if (all_finite(col, n > 0 ? (size_t)n : 0)) continue;
    for (int s = 0; s < n; s++) {
      if (isfinite(col[s])) continue;
      t->bad_draws++;
      uint64_t idx = first + (uint64_t)s;
      if (idx < t->bad_draw_first ||
          (idx == t->bad_draw_first && j < t->bad_draw_column)) {
        t->bad_draw_first = idx;
        t->bad_draw_column = j;
      }
    }
  }
}

/* One row over a block as a bit mask: bit s of m[s / 64] is set where
 * lane s is violated (excess not <= 0, NaN included); lanes >= n stay
 * clear. With SSE2, sixteen lanes per step: the compare masks are packed
 * down to one byte per lane and read with one movemask, with no branch on
 * the data (the plain loop does not vectorise: the compiler will not turn
 * double compares into int masks without AVX). Rows are violated in a
 * good share of lanes in every block, so there is nothing to skip; the
 * mask makes the rest of the tally work per violated lane, not per lane. */
#if defined(__SSE2__)
#include <emmintrin.h>
#endif

#define MASK_WORDS ((FG_BLOCK + 63) / 64)

#if defined(__x86_64__) && defined(__GNUC__)
#include <immintrin.h>
/* Sixty-four lanes per word as eight AVX-512F compares, each giving eight
 * mask bits directly; the predicate is the SSE2 path's (not <= 0, so NaN
 * counts as violated). Returns the lanes done. */
__attribute__((target("avx512f"))) static int
row_mask_avx512(const double *e, int n, uint64_t *m) {
  const __m512d zero = _mm512_setzero_pd();
  int s = 0;
  for (; s + 64 <= n; s += 64) {
    uint64_t bits = 0;
    for (int k = 0; k < 8; k++)
      bits |= (uint64_t)_mm512_cmp_pd_mask(_mm512_loadu_pd(e + s + 8 * k), zero,
                                           _CMP_NLE_UQ)
              << (8 * k);
    m[s >> 6] = bits;
  }
  return s;
}

#define FG_HAVE_ROW_MASK_AVX512 1
#endif

/* The excess values of the violated lanes of one row, in lane order, into
 * vals; returns how many. (An AVX-512 form, masked loads and compresses
 * per eight lanes, measured slower than this on the benchmark machine.) */
static int violated_values(const double *e, const uint64_t *m, double *vals) {
  int k = 0;
  for (int w = 0; w < MASK_WORDS; w++)
    for (uint64_t bits = m[w]; bits; bits &= bits - 1)
      vals[k++] = e[64 * w + __builtin_ctzll(bits)];
  return k;
}

/* The first violated lane of one row whose excess is NaN (the caller
 * knows there is one). */
static int first_nan_lane(const double *e, const uint64_t *m) {
  for (int w = 0; w < MASK_WORDS; w++)
    for (uint64_t bits = m[w]; bits; bits &= bits - 1) {
      int s = 64 * w + __builtin_ctzll(bits);
      if (e[s] != e[s]) return s;
    }
  return 0;
}

/* 1 when tests have asked for the SSE2 / scalar masks only. */
static int portable_masks;

void fg_tally_force_portable(int on) {
  portable_masks = on;
}

static void row_mask(const double *e, int n, uint64_t *m) {
  for (int w = 0; w < MASK_WORDS; w++) m[w] = 0;
  int s = 0;
#if defined(FG_HAVE_ROW_MASK_AVX512)
  if (!portable_masks && __builtin_cpu_supports("avx512f"))
    s = row_mask_avx512(e, n, m);
#endif
#if defined(__SSE2__)
  const __m128d zero = _mm_setzero_pd();
  for (; s + 16 <= n; s += 16) {
    __m128 q[4];
    for (int k = 0; k < 4; k++) {
      __m128d c0 = _mm_cmpnle_pd(_mm_loadu_pd(e + s + 4 * k), zero);
      __m128d c1 = _mm_cmpnle_pd(_mm_loadu_pd(e + s + 4 * k + 2), zero);
      q[k] = _mm_shuffle_ps(_mm_castpd_ps(c0), _mm_castpd_ps(c1),
                            _MM_SHUFFLE(2, 0, 2, 0));
    }
    __m128i h0 = _mm_packs_epi32(_mm_castps_si128(q[0]), _mm_castps_si128(q[1]));
    __m128i h1 = _mm_packs_epi32(_mm_castps_si128(q[2]), _mm_castps_si128(q[3]));
    uint64_t bits = (uint64_t)(unsigned)_mm_movemask_epi8(_mm_packs_epi16(h0, h1));
    m[s >> 6] |= bits << (s & 63);
  }
#endif
  for (; s < n; s++)
    m[s >> 6] |= (uint64_t)!(e[s] <= 0) << (s & 63);
}

/* Pairs (2k, 2k+1) of a lane mask: how many have both bits, how many one. */
static void pair_counts(const uint64_t *m, uint64_t *both, uint64_t *one) {
  const uint64_t even = UINT64_C(0x5555555555555555);
  for (int w = 0; w < MASK_WORDS; w++) {
    uint64_t a = m[w] & even, b = (m[w] >> 1) & even;
    *both += (uint64_t)__builtin_popcountll(a & b);
    *one += (uint64_t)__builtin_popcountll(a ^ b);
  }
}

/* Built twice where GCC can (target_clones), for processors with the
 * POPCNT instruction and for the baseline, which counts bits through a
 * library call; the integer results are the same. */
/* (not under ThreadSanitizer: the loader runs the clone resolver before
 * its runtime is set up) */
#if defined(__x86_64__) && defined(__GNUC__) && !defined(__clang__) && \
    !defined(__SANITIZE_THREAD__)
__attribute__((target_clones("popcnt", "default")))
#endif
void fg_tally_block(fg_tally *t, const double *const *excess, int n,
                    uint64_t first, const double *objective, int *scratch) {
  if (n > FG_BLOCK) n = FG_BLOCK; /* the engine's blocks never are */
  /* Per row: its violation mask (branch-free, see row_mask), kept in the
   * row's block_mask; then only the violated lanes' values, in lane order:
   * the finite ones into the sum (in lane order, so sums keep their bits)
   * and the histogram. any / many: lanes with at least one / two violated
   * rows, a bitwise counter that saturates at two; a row is the sole cause
   * where its mask is set and `many` is not. */
  uint64_t any[MASK_WORDS] = {0}, many[MASK_WORDS] = {0};
  double vals[FG_BLOCK];
  /* pairs need whole pairs: an odd last lane has no partner */
  uint64_t paired[MASK_WORDS];
  for (int w = 0; w < MASK_WORDS; w++) {
    int lo = 64 * w, ne = (n & ~1) - lo;
    paired[w] = ne >= 64 ? ~UINT64_C(0)
                : ne <= 0 ? 0
                          : (UINT64_C(1) << ne) - 1;
  }
  for (int r = 0; r < t->nrows; r++) {
    const double *e = excess[r];
    fg_row_tally *rt = &t->rows[r];
    uint64_t *m = rt->block_mask;
    row_mask(e, n, m);
    int nv = 0;
    for (int w = 0; w < MASK_WORDS; w++) {
      many[w] |= any[w] & m[w];
      any[w] |= m[w];
      nv += __builtin_popcountll(m[w]);
    }
    int k = violated_values(e, m, vals);
    double sum = 0;
    int kf = 0, nnan = 0;
    for (int j = 0; j < k; j++) {
      double x = vals[j];
      if (isfinite(x)) {
        sum += x;
        vals[kf++] = x;
      } else if (x > 0) {
        rt->infinite++;
      } else {
        nnan++; /* a violated lane's excess is > 0 or NaN */
      }
    }
    if (nnan) {
      rt->nonfinite += (uint64_t)nnan;
      uint64_t idx = first + (uint64_t)first_nan_lane(e, m);
      if (idx < rt->first_nonfinite) rt->first_nonfinite = idx;
    }
    fg_hist_add_many(&rt->hist, vals, kf);
    rt->violated += (uint64_t)nv;
    rt->excess_sum += sum;
    if (t->pairs) {
      uint64_t pm[MASK_WORDS];
      for (int w = 0; w < MASK_WORDS; w++) pm[w] = m[w] & paired[w];
      pair_counts(pm, &rt->pair_both, &rt->pair_one);
    }
  }
  uint64_t nany = 0;
  for (int w = 0; w < MASK_WORDS; w++)
    nany += (uint64_t)__builtin_popcountll(any[w]);
  /* sole cause: exactly one violated row */
  for (int r = 0; r < t->nrows; r++) {
    fg_row_tally *rt = &t->rows[r];
    for (int w = 0; w < MASK_WORDS; w++)
      rt->sole += (uint64_t)__builtin_popcountll(rt->block_mask[w] & ~many[w]);
  }
  if (t->pairs) {
    /* a pair's samples held where their lanes are clear in `any` */
    uint64_t held[MASK_WORDS];
    for (int w = 0; w < MASK_WORDS; w++) held[w] = ~any[w] & paired[w];
    pair_counts(held, &t->pair_both, &t->pair_one);
  }
  /* the caller's view: scratch[s] is 0 exactly where sample s held */
  for (int s = 0; s < n; s++)
    scratch[s] = (int)((any[s >> 6] >> (s & 63)) & 1);
  for (int w = 0; w < MASK_WORDS && t->nfail < t->fail_keep; w++) {
    for (uint64_t bits = any[w];
         bits && t->nfail < t->fail_keep; bits &= bits - 1) {
      int s = 64 * w + __builtin_ctzll(bits);
      fg_fail_record *f = &t->fail[t->nfail++];
      f->index = first + (uint64_t)s;
      f->nrows = 0;
      for (int r = 0; r < t->nrows; r++) {
        if (!(excess[r][s] <= 0)) {
          if (f->nrows < FG_FAIL_ROWS_MAX) f->rows[f->nrows] = r;
          f->nrows++;
        }
      }
    }
  }
  t->satisfied += (uint64_t)n - nany;
  t->n += (uint64_t)n;
  if (objective) {
    double os = 0;
    for (int s = 0; s < n; s++) os += objective[s];
    t->objective_sum += os;
  }
}
