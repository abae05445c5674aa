/*
 * estimate/tally.c -- the counts one chunk of samples produces, and their
 * merge.
 *
 * Design: a block of samples arrives as one array of excess values per row
 * (lane t = sample first + t). Rows are walked one at a time over all lanes
 * (contiguous reads), counting per lane how many rows failed and which one
 * failed last; a second pass over lanes turns those into the joint count,
 * sole-cause counts and failing-scenario records. A row fails when its
 * excess is not <= 0, so NaN fails (counted apart as non-finite).
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
  t->rows = calloc(nrows > 0 ? (size_t)nrows : 1, sizeof *t->rows);
  if (!t->rows) return FG_ENOMEM;
  for (int r = 0; r < nrows; r++) {
    if (fg_hist_init(&t->rows[r].hist) != FG_OK) {
      fg_tally_free(t);
      return FG_ENOMEM;
    }
  }
  return FG_OK;
}

void fg_tally_free(fg_tally *t) {
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
  for (int r = 0; r < t->nrows; r++) {
    fg_row_tally *rt = &t->rows[r];
    rt->violated = rt->sole = rt->nonfinite = 0;
    rt->pair_both = rt->pair_one = 0;
    rt->excess_sum = 0;
    fg_hist_reset(&rt->hist);
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
    d->excess_sum += s->excess_sum;
    fg_hist_merge(&d->hist, &s->hist);
  }
  for (int i = 0; i < src->nfail && dst->nfail < FG_FAILING_SCENARIOS; i++)
    dst->fail[dst->nfail++] = src->fail[i];
}

/* One row over a block: nviol[s] += 1 and last[s] = r where the row is
 * violated (excess not <= 0, NaN included), and the violated lanes listed
 * in idx in increasing order; returns how many. With SSE2, four lanes per
 * step by compare masks, with no branch on the data (a row violated about
 * half the time would mispredict a branch every other lane, and the plain
 * loop does not vectorise: the compiler will not turn double compares
 * into int masks without AVX). */
#if defined(__SSE2__)
#include <emmintrin.h>
#endif

static int row_pass(const double *e, int n, int r, int *nviol, int *last,
                    int *idx) {
  int nv = 0, s = 0;
#if defined(__SSE2__)
  const __m128d zero = _mm_setzero_pd();
  const __m128i rv = _mm_set1_epi32(r);
  for (; s + 4 <= n; s += 4) {
    __m128d m0 = _mm_cmpnle_pd(_mm_loadu_pd(e + s), zero);
    __m128d m1 = _mm_cmpnle_pd(_mm_loadu_pd(e + s + 2), zero);
    int bits = _mm_movemask_pd(m0) | (_mm_movemask_pd(m1) << 2);
    __m128i m = _mm_castps_si128(_mm_shuffle_ps(
        _mm_castpd_ps(m0), _mm_castpd_ps(m1), _MM_SHUFFLE(2, 0, 2, 0)));
    __m128i *pv = (__m128i *)(nviol + s), *pl = (__m128i *)(last + s);
    _mm_storeu_si128(pv, _mm_sub_epi32(_mm_loadu_si128(pv), m));
    _mm_storeu_si128(pl, _mm_or_si128(_mm_andnot_si128(m, _mm_loadu_si128(pl)),
                                      _mm_and_si128(m, rv)));
    idx[nv] = s; /* listed without branches, as in the scalar loop */
    nv += bits & 1;
    idx[nv] = s + 1;
    nv += (bits >> 1) & 1;
    idx[nv] = s + 2;
    nv += (bits >> 2) & 1;
    idx[nv] = s + 3;
    nv += (bits >> 3) & 1;
  }
#endif
  for (; s < n; s++) {
    int viol = !(e[s] <= 0);
    nviol[s] += viol;
    last[s] = viol ? r : last[s];
    idx[nv] = s;
    nv += viol;
  }
  return nv;
}

void fg_tally_block(fg_tally *t, const double *const *excess, int n,
                    uint64_t first, const double *objective, int *scratch) {
  int *nviol = scratch, *last = scratch + n;
  memset(nviol, 0, (size_t)n * sizeof *nviol);
  /* Per row: a branch-free pass over the lanes (a row violated about
   * half the time would mispredict a branch every other lane) that counts,
   * marks and lists the violated lanes; then the listed lanes' excess, in
   * lane order, into the sum and the histogram. */
  int idx[FG_BLOCK];
  double vals[FG_BLOCK];
  if (n > FG_BLOCK) n = FG_BLOCK; /* the engine's blocks never are */
  for (int r = 0; r < t->nrows; r++) {
    const double *e = excess[r];
    fg_row_tally *rt = &t->rows[r];
    int nv = row_pass(e, n, r, nviol, last, idx);
    double sum = 0;
    int m = 0;
    for (int k = 0; k < nv; k++) {
      double x = e[idx[k]];
      if (isfinite(x)) {
        sum += x;
        vals[m++] = x;
      } else {
        rt->nonfinite++;
      }
    }
    fg_hist_add_many(&rt->hist, vals, m);
    rt->violated += (uint64_t)nv;
    rt->excess_sum += sum;
  }
  if (t->pairs) {
    /* Blocks start on even sample indices, so lanes (2m, 2m+1) are a pair;
     * an odd last lane has no partner and is not paired. */
    for (int r = 0; r < t->nrows; r++) {
      const double *e = excess[r];
      uint64_t both = 0, one = 0;
      for (int s = 0; s + 1 < n; s += 2) {
        int v = !(e[s] <= 0) + !(e[s + 1] <= 0);
        both += v == 2;
        one += v == 1;
      }
      t->rows[r].pair_both += both;
      t->rows[r].pair_one += one;
    }
    for (int s = 0; s + 1 < n; s += 2) {
      int h = (nviol[s] == 0) + (nviol[s + 1] == 0);
      t->pair_both += h == 2;
      t->pair_one += h == 1;
    }
  }
  uint64_t sat = 0;
  for (int s = 0; s < n; s++) {
    if (nviol[s] == 0) {
      sat++;
      continue;
    }
    if (nviol[s] == 1) t->rows[last[s]].sole++;
    if (t->nfail < FG_FAILING_SCENARIOS) {
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
  t->satisfied += sat;
  t->n += (uint64_t)n;
  if (objective) {
    double os = 0;
    for (int s = 0; s < n; s++) os += objective[s];
    t->objective_sum += os;
  }
}
