/*
 * estimate/hist.c -- mergeable histogram of positive values.
 *
 * Design: the bucket of x is read straight off its IEEE-754 bits: the
 * binary exponent selects the octave, the top FG_HIST_SUB_BITS mantissa
 * bits the linear sub-bucket. No logarithm or libm call on the hot path
 * (fg_hist_add_many takes a whole block's values of one row), and two
 * histograms merge exactly by adding counts, so a result does not depend on
 * how samples were split into chunks. Only the touched range [lo, hi] is
 * cleared and merged, which keeps per-chunk cost small for rows that are
 * rarely violated.
 *
 * Invariant: total == sum of counts; min/max are the exact extremes of the
 * values added (NAN/INF are never added: the caller filters them).
 * Thread use: one histogram per thread; merge under the caller's lock.
 */
#include "estimate/estimate.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

fg_status fg_hist_init(fg_hist *h) {
  h->counts = calloc(FG_HIST_BUCKETS, sizeof *h->counts);
  if (!h->counts) return FG_ENOMEM;
  h->total = 0;
  h->lo = FG_HIST_BUCKETS;
  h->hi = -1;
  h->min = INFINITY;
  h->max = -INFINITY;
  return FG_OK;
}

void fg_hist_free(fg_hist *h) {
  free(h->counts);
  h->counts = NULL;
}

void fg_hist_reset(fg_hist *h) {
  if (h->hi >= h->lo)
    memset(h->counts + h->lo, 0, (size_t)(h->hi - h->lo + 1) * sizeof(uint64_t));
  h->total = 0;
  h->lo = FG_HIST_BUCKETS;
  h->hi = -1;
  h->min = INFINITY;
  h->max = -INFINITY;
}

/* The exponent and top mantissa bits are read off the IEEE-754 bits: for a
 * normal x = (1 + f) 2^e, f's top FG_HIST_SUB_BITS bits are
 * floor(f * FG_HIST_SUB); subnormals have e < FG_HIST_EXP_MIN and land in
 * bucket 0. (The same buckets as frexp would give, without a libm call.) */
static inline int bucket_of(double x) {
  if (!(x > 0)) return 0;
  uint64_t bits;
  memcpy(&bits, &x, sizeof bits);
  int e = (int)((bits >> 52) & 0x7ff) - 1023;
  if (e < FG_HIST_EXP_MIN) return 0;
  if (e >= FG_HIST_EXP_MAX) return FG_HIST_BUCKETS - 1;
  int sub = (int)((bits >> (52 - FG_HIST_SUB_BITS)) & (FG_HIST_SUB - 1));
  return 1 + (e - FG_HIST_EXP_MIN) * FG_HIST_SUB + sub;
}

int fg_hist_bucket(double x) {
  return bucket_of(x);
}

/* Midpoint of bucket b (b in 1 .. FG_HIST_BUCKETS-2). */
static double bucket_mid(int b) {
  int e = (b - 1) / FG_HIST_SUB + FG_HIST_EXP_MIN;
  int sub = (b - 1) % FG_HIST_SUB;
  return ldexp(1.0 + (sub + 0.5) / FG_HIST_SUB, e);
}

void fg_hist_add(fg_hist *h, double x) {
  int b = bucket_of(x);
  h->counts[b]++;
  h->total++;
  if (b < h->lo) h->lo = b;
  if (b > h->hi) h->hi = b;
  if (x < h->min) h->min = x;
  if (x > h->max) h->max = x;
}

/* bucket_of without branches, for the batch below: t = the biased exponent
 * and top mantissa bits of a positive x as one integer, so the bucket is
 * t's offset from the first bucketed octave, clamped; the same buckets as
 * bucket_of for every x (NaN and x <= 0 included). */
static inline int bucket_flat(double x) {
  enum {
    T_LO = (1023 + FG_HIST_EXP_MIN) * FG_HIST_SUB,
    T_HI = (1023 + FG_HIST_EXP_MAX) * FG_HIST_SUB
  };
  uint64_t bits;
  memcpy(&bits, &x, sizeof bits);
  int t = (int)((bits >> (52 - FG_HIST_SUB_BITS)) & 0x1ffff);
  int b = t - T_LO + 1;
  b = t < T_LO ? 0 : b;
  b = t >= T_HI ? FG_HIST_BUCKETS - 1 : b;
  return x > 0 ? b : 0;
}

/* Four lanes of doubles and of their comparison masks (GCC's and clang's
 * vector extensions: 256-bit instructions in the AVX2 clone, SSE2 pairs in
 * the baseline one). */
typedef double fg_v4d __attribute__((vector_size(32)));
typedef int64_t fg_v4i __attribute__((vector_size(32)));

/* First min / max, four lanes at a time with the scalar rule per lane
 * (x < min ? x : min, so NaN never enters), the lanes combined at the end
 * by the same rule: the extremes by `<` of all values, up to which of two
 * equal zeros is kept (the caller adds violations' finite excesses, which
 * are > 0). Then per batch the buckets and the touched range, in a loop
 * the compiler vectorises (also built for AVX2 where GCC's target_clones
 * can), and the counts. Integer results and min / max do not depend on
 * the build. */
/* (not under ThreadSanitizer: the loader runs the clone resolver before
 * its runtime is set up) */
#if defined(__x86_64__) && defined(__GNUC__) && !defined(__clang__) && \
    !defined(__SANITIZE_THREAD__)
__attribute__((target_clones("avx2", "default")))
#endif
void fg_hist_add_many(fg_hist *h, const double *x, int m) {
  if (m <= 0) return;
  enum { BATCH = 256 };
  int b[BATCH];
  int lo = h->lo, hi = h->hi;
  fg_v4d vmn = {h->min, h->min, h->min, h->min};
  fg_v4d vmx = {h->max, h->max, h->max, h->max};
  int m4 = m & ~3;
  for (int i = 0; i < m4; i += 4) {
    fg_v4d v;
    memcpy(&v, x + i, sizeof v);
    fg_v4i lt = v < vmn, gt = v > vmx;
    vmn = (fg_v4d)(((fg_v4i)v & lt) | ((fg_v4i)vmn & ~lt));
    vmx = (fg_v4d)(((fg_v4i)v & gt) | ((fg_v4i)vmx & ~gt));
  }
  double mn = h->min, mx = h->max;
  for (int j = 0; j < 4; j++) {
    mn = vmn[j] < mn ? vmn[j] : mn;
    mx = vmx[j] > mx ? vmx[j] : mx;
  }
  for (int i = m4; i < m; i++) {
    mn = x[i] < mn ? x[i] : mn;
    mx = x[i] > mx ? x[i] : mx;
  }
  for (int i0 = 0; i0 < m; i0 += BATCH) {
    int k = m - i0 < BATCH ? m - i0 : BATCH;
    const double *xs = x + i0;
    for (int i = 0; i < k; i++) {
      int bi = bucket_flat(xs[i]);
      b[i] = bi;
      lo = bi < lo ? bi : lo;
      hi = bi > hi ? bi : hi;
    }
    for (int i = 0; i < k; i++) h->counts[b[i]]++;
  }
  h->total += (uint64_t)m;
  h->lo = lo;
  h->hi = hi;
  h->min = mn;
  h->max = mx;
}

void fg_hist_merge(fg_hist *dst, const fg_hist *src) {
  if (src->total == 0) return;
  for (int b = src->lo; b <= src->hi; b++) dst->counts[b] += src->counts[b];
  dst->total += src->total;
  if (src->lo < dst->lo) dst->lo = src->lo;
  if (src->hi > dst->hi) dst->hi = src->hi;
  if (src->min < dst->min) dst->min = src->min;
  if (src->max > dst->max) dst->max = src->max;
}

double fg_hist_quantile(const fg_hist *h, double q) {
  if (h->total == 0) return NAN;
  double r = ceil(q * (double)h->total);
  uint64_t rank = r < 1 ? 1 : (uint64_t)r;
  if (rank > h->total) rank = h->total;
  uint64_t seen = 0;
  for (int b = h->lo; b <= h->hi; b++) {
    seen += h->counts[b];
    if (seen >= rank) {
      double v;
      if (b == 0) v = h->min;
      else if (b == FG_HIST_BUCKETS - 1) v = h->max;
      else v = bucket_mid(b);
      if (v < h->min) v = h->min;
      if (v > h->max) v = h->max;
      return v;
    }
  }
  return h->max;
}
