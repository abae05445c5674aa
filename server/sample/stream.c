/*
 * sample/stream.c -- counter-based random streams (Philox4x32-10) and the
 * per-block uniform and normal generators on them.
 *
 * Design: every random number feasgate uses is Philox4x32-10 applied to
 *   key     = { seed & 0xffffffff, (seed >> 32) | (stream << 24) }
 *   counter = { i & 0xffffffff, i >> 32, slot, draw }
 * for sample i. Two ways of reading these blocks exist:
 *
 *  - Per block of samples, in this file (the hot path). fg_stream_philox
 *    evaluates the cipher for all lanes of a block at once over lane
 *    arrays, 4, 8 or 16 lanes per instruction (SSE2, or AVX2 / AVX-512F
 *    chosen at run time for this integer code only; every path gives the
 *    same words), with no function pointers and no state. On top of it:
 *      fg_stream_u01s     one 53-bit uniform per lane from draw 0, words 3
 *                         and 2 -- the very words Random123's GSL adaptor
 *                         handed out first, so inverse-CDF families drew
 *                         the same numbers before the per-block path;
 *      fg_stream_normals  one standard normal per lane by the ziggurat
 *                         below.
 *  - Through GSL (fg_stream_rng_new / fg_stream_reset): a GSL generator
 *    type made with Random123's adaptor (GSL_MICRORNG), reset to
 *    { i lo, i hi, slot, 0 } per (sample, slot); the adaptor puts its call
 *    count into the fourth word (the draw number) and hands out words 3,
 *    2, 1, 0 of each block. GSL's samplers (gamma, beta, t, poisson,
 *    binomial, Walker tables) draw from it, one function-pointer call per
 *    32-bit word; they are rarer and keep their streams that way.
 *
 * The normal generator (a ziggurat of 256 layers, Marsaglia & Tsang 2000,
 * J. Stat. Softw. 5(8), in this file's own formulation): f(x) = e^{-x^2/2}
 * on x >= 0 is covered by 256 horizontal slabs of equal area v. Slab 0 is
 * the rectangle [0, X0] x [0, f(r)] with X0 = v / f(r), whose part beyond
 * r stands for the tail; slab i >= 1 is [0, X_i] x [f(X_i), f(X_{i+1})]
 * with X_1 = r, X_{i+1} = f^-1(f(X_i) + v / X_i) and X_256 = 0. An attempt
 * takes one 64-bit word: bits 0-7 pick the slab, bit 8 the sign, bits
 * 11-63 a uniform u in (0, 1), x = u X_i. When x < X_{i+1} (u below the
 * slab's ratio, about 99% of attempts) x lies under the curve and is the
 * answer; otherwise the wedge (slab i >= 1: accept when a uniform height
 * in the slab falls under f(x)) or the tail (slab 0: Marsaglia's
 * exponential method beyond r) decide, drawing further words, and a
 * rejected attempt starts over with a new word. r and v solve the slab
 * recursion so that slab 255 ends at f(0) = 1 exactly in double precision
 * (bisection at first use, pthread_once; the tables depend only on libm's
 * exp, log, erfc and sqrt, like every other result of feasgate).
 * The method is exact: accepted points are uniform under the curve.
 *
 * Word order of a normal on (sample, slot): draw 0 gives w0 = word0 |
 * word1 << 32 (the first attempt) and w1 = word2 | word3 << 32; draws 1,
 * 2, ... give two more each. The fast path reads w0 only and the rare
 * slow path continues with w1, then the next draws, so all four words of
 * the block serve one normal's attempts. Deliberately not done: packing
 * the normals of two slots into one block (halving the cipher work) would
 * make one dimension's fallback words depend on another's. (With the
 * row plans the cipher is still the largest cost of affine models, about
 * 36% of a worker with the AVX2 arrangement below, measured with perf; a
 * change of stream would be needed to halve it.)
 * The fast path runs in 8 lanes with AVX-512F + DQ, 4 with AVX2 (an exact
 * 53-bit conversion in two halves) and per lane otherwise, each with the
 * scalar lane's operations, so every path gives the same normals.
 *
 * Invariants: the values of (seed, stream, slot, sample) never depend on
 * what was drawn before, on the block position of the sample, or on n;
 * seeds must be below 2^56 for the stream bits to stay apart (feasgate's
 * seeds are at most 2^53).
 *
 * Thread use: everything is pure except the one-time table set-up (guarded
 * by pthread_once); a gsl_rng made here belongs to one thread's scratch.
 */
#include "sample/sample_internal.h"

#include "feasgate/limits.h"

#include <Random123/gsl_microrng.h>
#include <Random123/philox.h>

#include <gsl/gsl_randist.h>

#include <math.h>
#include <pthread.h>
#include <string.h>

GSL_MICRORNG(fg_philox_micro, philox4x32);

fg_stream_key fg_stream_key_make(uint64_t seed, fg_stream stream) {
  fg_stream_key k = {
      .k0 = (uint32_t)(seed & 0xffffffffu),
      .k1 = (uint32_t)((seed >> 32) | ((uint64_t)stream << 24)),
  };
  return k;
}

gsl_rng *fg_stream_rng_new(void) {
  return gsl_rng_alloc(gsl_rng_fg_philox_micro);
}

void fg_stream_reset(gsl_rng *r, fg_stream_key key, uint64_t sample,
                     uint32_t slot) {
  philox4x32_ctr_t c = {
      {(uint32_t)(sample & 0xffffffffu), (uint32_t)(sample >> 32), slot, 0}};
  philox4x32_key_t k = {{key.k0, key.k1}};
  fg_philox_micro_reset(r, c, k);
}

/* ---- the cipher, lane-parallel ---------------------------------------- */

/* Philox4x32 constants (Salmon et al., SC'11): round multipliers and the
 * Weyl increments of the key. */
#define PHILOX_M0 UINT32_C(0xD2511F53)
#define PHILOX_M1 UINT32_C(0xCD9E8D57)
#define PHILOX_W0 UINT32_C(0x9E3779B9)
#define PHILOX_W1 UINT32_C(0xBB67AE85)

/* Ten rounds on one counter: the scalar form (lanes left over by the SSE2
 * path, other processors, and single draws). */
static inline void philox10(uint32_t c[4], uint32_t k0, uint32_t k1) {
  uint32_t x0 = c[0], x1 = c[1], x2 = c[2], x3 = c[3];
  for (int r = 0; r < 10; r++) {
    uint64_t p0 = (uint64_t)PHILOX_M0 * x0;
    uint64_t p1 = (uint64_t)PHILOX_M1 * x2;
    uint32_t y0 = (uint32_t)(p1 >> 32) ^ x1 ^ k0;
    uint32_t y2 = (uint32_t)(p0 >> 32) ^ x3 ^ k1;
    x1 = (uint32_t)p1;
    x3 = (uint32_t)p0;
    x0 = y0;
    x2 = y2;
    k0 += PHILOX_W0;
    k1 += PHILOX_W1;
  }
  c[0] = x0;
  c[1] = x1;
  c[2] = x2;
  c[3] = x3;
}

#if defined(__SSE2__)
/* Four lanes per step with SSE2, which every x86-64 processor has (so no
 * -march is needed and all machines compute the same integers). The
 * unsigned 32 x 32 -> 64-bit multiply (pmuludq) takes lanes 0 and 2;
 * lanes 1 and 3 are shifted down first; the halves are then regrouped
 * into a vector of low words and one of high words. */
#include <emmintrin.h>

static inline void mulhilo4(__m128i a, __m128i m, __m128i *hi, __m128i *lo) {
  const __m128i low = _mm_set_epi32(0, -1, 0, -1);
  __m128i p02 = _mm_mul_epu32(a, m);
  __m128i p13 = _mm_mul_epu32(_mm_srli_epi64(a, 32), m);
  *lo = _mm_or_si128(_mm_and_si128(p02, low), _mm_slli_epi64(p13, 32));
  *hi = _mm_or_si128(_mm_srli_epi64(p02, 32), _mm_andnot_si128(low, p13));
}

static void philox_sse2(uint32_t *w0, uint32_t *w1, uint32_t *w2, uint32_t *w3,
                        int n, fg_stream_key key) {
  const __m128i m0 = _mm_set1_epi32((int)PHILOX_M0);
  const __m128i m1 = _mm_set1_epi32((int)PHILOX_M1);
  for (int t = 0; t + 4 <= n; t += 4) {
    __m128i x0 = _mm_loadu_si128((const __m128i *)(w0 + t));
    __m128i x1 = _mm_loadu_si128((const __m128i *)(w1 + t));
    __m128i x2 = _mm_loadu_si128((const __m128i *)(w2 + t));
    __m128i x3 = _mm_loadu_si128((const __m128i *)(w3 + t));
    uint32_t k0 = key.k0, k1 = key.k1;
    for (int r = 0; r < 10; r++) {
      __m128i hi0, lo0, hi1, lo1;
      mulhilo4(x0, m0, &hi0, &lo0);
      mulhilo4(x2, m1, &hi1, &lo1);
      x0 = _mm_xor_si128(_mm_xor_si128(hi1, x1), _mm_set1_epi32((int)k0));
      x2 = _mm_xor_si128(_mm_xor_si128(hi0, x3), _mm_set1_epi32((int)k1));
      x1 = lo1;
      x3 = lo0;
      k0 += PHILOX_W0;
      k1 += PHILOX_W1;
    }
    _mm_storeu_si128((__m128i *)(w0 + t), x0);
    _mm_storeu_si128((__m128i *)(w1 + t), x1);
    _mm_storeu_si128((__m128i *)(w2 + t), x2);
    _mm_storeu_si128((__m128i *)(w3 + t), x3);
  }
}
#endif

#if defined(__x86_64__) && defined(__GNUC__)
/* The same rounds eight lanes at a time where the processor has AVX2,
 * chosen at run time (fg_stream_init), and sixteen with AVX-512F. Only
 * these integer functions are compiled for those extensions: their output is
 * the same bits on every path (the unit test compares all paths' words with
 * Random123's), so results still agree across machines; no floating-point code
 * is compiled for a particular processor. */
#include <immintrin.h>

/* One round on eight lanes kept as even and odd 64-bit slots (see
 * philox_avx2): the AVX2 form of PHILOX512_ROUND. */
#define PHILOX256_ROUND(e0, e1, e2, e3, o0, o1, o2, o3, kk0, kk1)               \
  do {                                                                         \
    /* the key enters off the multiplies' critical path */                    \
    __m256i ke1 = _mm256_xor_si256(e1, kk0), ke3 = _mm256_xor_si256(e3, kk1);  \
    __m256i ko1 = _mm256_xor_si256(o1, kk0), ko3 = _mm256_xor_si256(o3, kk1);  \
    __m256i pe0 = _mm256_mul_epu32(e0, m0), pe1 = _mm256_mul_epu32(e2, m1);    \
    __m256i po0 = _mm256_mul_epu32(o0, m0), po1 = _mm256_mul_epu32(o2, m1);    \
    e0 = _mm256_xor_si256(_mm256_srli_epi64(pe1, 32), ke1);                    \
    e2 = _mm256_xor_si256(_mm256_srli_epi64(pe0, 32), ke3);                    \
    o0 = _mm256_xor_si256(_mm256_srli_epi64(po1, 32), ko1);                    \
    o2 = _mm256_xor_si256(_mm256_srli_epi64(po0, 32), ko3);                    \
    e1 = pe1;                                                                  \
    e3 = pe0;                                                                  \
    o1 = po1;                                                                  \
    o3 = po0;                                                                  \
  } while (0)

/* Eight lanes at a time where the processor has AVX2 (and not AVX-512F):
 * the arrangement of philox_avx512 on four 64-bit slots a vector. The even
 * lanes t, t+2, t+4, t+6 and the odd lanes each live in the low 32 bits of
 * one vector's slots, so the unsigned 32 x 32 -> 64-bit multiply needs no
 * regrouping (its low half is the next word in place, its high half one
 * shift away; the high 32 bits of a slot carry junk that never reaches a
 * low half). The even and odd vectors are two independent chains of
 * multiplies, which hides the multiplier's latency. The counters are made
 * in registers and the words blended back into lane order on the way out:
 * 16 vector operations per round for 8 lanes instead of 22, no counter
 * arrays written and read back; the same words (the unit test compares
 * every path with Random123's). */
__attribute__((target("avx2"))) static void
philox_avx2(fg_stream_key key, uint64_t first, int n, uint32_t slot,
            uint32_t draw, fg_stream_words *w) {
  const __m256i m0 = _mm256_set1_epi64x(PHILOX_M0);
  const __m256i m1 = _mm256_set1_epi64x(PHILOX_M1);
  const __m256i even = _mm256_set_epi64x(6, 4, 2, 0);
  const __m256i odd = _mm256_set_epi64x(7, 5, 3, 1);
  const __m256i sl = _mm256_set1_epi64x(slot), dr = _mm256_set1_epi64x(draw);
  for (int t = 0; t + 8 <= n; t += 8) {
    __m256i base = _mm256_set1_epi64x((long long)(first + (uint64_t)t));
    __m256i ce = _mm256_add_epi64(base, even), co = _mm256_add_epi64(base, odd);
    __m256i e0 = ce, e1 = _mm256_srli_epi64(ce, 32), e2 = sl, e3 = dr;
    __m256i o0 = co, o1 = _mm256_srli_epi64(co, 32), o2 = sl, o3 = dr;
    uint32_t k0 = key.k0, k1 = key.k1;
    for (int r = 0; r < 10; r++) {
      const __m256i kk0 = _mm256_set1_epi32((int)k0);
      const __m256i kk1 = _mm256_set1_epi32((int)k1);
      PHILOX256_ROUND(e0, e1, e2, e3, o0, o1, o2, o3, kk0, kk1);
      k0 += PHILOX_W0;
      k1 += PHILOX_W1;
    }
    /* lane 2j from the even slot j's low half, lane 2j+1 from the odd */
    _mm256_storeu_si256(
        (__m256i *)(w->w[0] + t),
        _mm256_blend_epi32(e0, _mm256_slli_epi64(o0, 32), 0xaa));
    _mm256_storeu_si256(
        (__m256i *)(w->w[1] + t),
        _mm256_blend_epi32(e1, _mm256_slli_epi64(o1, 32), 0xaa));
    _mm256_storeu_si256(
        (__m256i *)(w->w[2] + t),
        _mm256_blend_epi32(e2, _mm256_slli_epi64(o2, 32), 0xaa));
    _mm256_storeu_si256(
        (__m256i *)(w->w[3] + t),
        _mm256_blend_epi32(e3, _mm256_slli_epi64(o3, 32), 0xaa));
  }
}

/* One round on one group of 16 lanes (see philox_avx512). */
#define PHILOX512_ROUND(e0, e1, e2, e3, o0, o1, o2, o3, kk0, kk1)               \
  do {                                                                         \
    __m512i pe0 = _mm512_mul_epu32(e0, m0), pe1 = _mm512_mul_epu32(e2, m1);    \
    __m512i po0 = _mm512_mul_epu32(o0, m0), po1 = _mm512_mul_epu32(o2, m1);    \
    /* 0x96: a ^ b ^ c */                                                      \
    e0 = _mm512_ternarylogic_epi32(_mm512_srli_epi64(pe1, 32), e1, kk0, 0x96); \
    e2 = _mm512_ternarylogic_epi32(_mm512_srli_epi64(pe0, 32), e3, kk1, 0x96); \
    o0 = _mm512_ternarylogic_epi32(_mm512_srli_epi64(po1, 32), o1, kk0, 0x96); \
    o2 = _mm512_ternarylogic_epi32(_mm512_srli_epi64(po0, 32), o3, kk1, 0x96); \
    e1 = pe1;                                                                  \
    e3 = pe0;                                                                  \
    o1 = po1;                                                                  \
    o3 = po0;                                                                  \
  } while (0)

/* Sixteen lanes at a time where AVX-512F exists: the same rounds, in a
 * cheaper arrangement. The lanes are kept as two vectors of eight 64-bit
 * slots (even lanes, odd lanes) whose low 32 bits hold the word, so the
 * unsigned 32 x 32 -> 64-bit multiply needs no regrouping: the product's
 * low half is already the next word in place and its high half one shift
 * away; the three-way XOR is one ternary-logic instruction. The high 32
 * bits of a slot carry junk that never reaches a low half (the multiply
 * reads low halves only, the shift takes the product's high half). The
 * counters are made in registers ({i lo, i hi, slot, draw}, i = first + t)
 * and the words are interleaved back on the way out. About 12 vector
 * operations per round for 16 lanes instead of 22; same words. Two groups
 * of 16 lanes go through the rounds together: one group's rounds are a
 * chain of dependent multiplies, and a second, independent chain fills
 * the multiplier's latency (about 10% faster on the benchmark machine). */
__attribute__((target("avx512f"))) static void
philox_avx512(fg_stream_key key, uint64_t first, int n, uint32_t slot,
              uint32_t draw, fg_stream_words *w) {
  const __m512i m0 = _mm512_set1_epi64(PHILOX_M0);
  const __m512i m1 = _mm512_set1_epi64(PHILOX_M1);
  const __m512i even = _mm512_set_epi64(14, 12, 10, 8, 6, 4, 2, 0);
  const __m512i odd = _mm512_set_epi64(15, 13, 11, 9, 7, 5, 3, 1);
  const __m512i sixteen = _mm512_set1_epi64(16);
  /* dword j of the result: even slot j / 2 for even j, odd slot for odd j */
  const __m512i weave = _mm512_set_epi32(30, 14, 28, 12, 26, 10, 24, 8, 22, 6,
                                         20, 4, 18, 2, 16, 0);
  const __m512i sl = _mm512_set1_epi64(slot), dr = _mm512_set1_epi64(draw);
  int t = 0;
  for (; t + 32 <= n; t += 32) {
    __m512i base = _mm512_set1_epi64((long long)(first + (uint64_t)t));
    __m512i ce = _mm512_add_epi64(base, even), co = _mm512_add_epi64(base, odd);
    __m512i de = _mm512_add_epi64(ce, sixteen), dq = _mm512_add_epi64(co, sixteen);
    __m512i e0 = ce, e1 = _mm512_srli_epi64(ce, 32), e2 = sl, e3 = dr;
    __m512i o0 = co, o1 = _mm512_srli_epi64(co, 32), o2 = sl, o3 = dr;
    __m512i f0 = de, f1 = _mm512_srli_epi64(de, 32), f2 = sl, f3 = dr;
    __m512i q0 = dq, q1 = _mm512_srli_epi64(dq, 32), q2 = sl, q3 = dr;
    uint32_t k0 = key.k0, k1 = key.k1;
    for (int r = 0; r < 10; r++) {
      const __m512i kk0 = _mm512_set1_epi32((int)k0);
      const __m512i kk1 = _mm512_set1_epi32((int)k1);
      PHILOX512_ROUND(e0, e1, e2, e3, o0, o1, o2, o3, kk0, kk1);
      PHILOX512_ROUND(f0, f1, f2, f3, q0, q1, q2, q3, kk0, kk1);
      k0 += PHILOX_W0;
      k1 += PHILOX_W1;
    }
    uint32_t *const out[4] = {w->w[0] + t, w->w[1] + t, w->w[2] + t,
                              w->w[3] + t};
    _mm512_storeu_si512((void *)out[0], _mm512_permutex2var_epi32(e0, weave, o0));
    _mm512_storeu_si512((void *)out[1], _mm512_permutex2var_epi32(e1, weave, o1));
    _mm512_storeu_si512((void *)out[2], _mm512_permutex2var_epi32(e2, weave, o2));
    _mm512_storeu_si512((void *)out[3], _mm512_permutex2var_epi32(e3, weave, o3));
    _mm512_storeu_si512((void *)(out[0] + 16),
                        _mm512_permutex2var_epi32(f0, weave, q0));
    _mm512_storeu_si512((void *)(out[1] + 16),
                        _mm512_permutex2var_epi32(f1, weave, q1));
    _mm512_storeu_si512((void *)(out[2] + 16),
                        _mm512_permutex2var_epi32(f2, weave, q2));
    _mm512_storeu_si512((void *)(out[3] + 16),
                        _mm512_permutex2var_epi32(f3, weave, q3));
  }
  for (; t + 16 <= n; t += 16) {
    __m512i base = _mm512_set1_epi64((long long)(first + (uint64_t)t));
    __m512i ce = _mm512_add_epi64(base, even), co = _mm512_add_epi64(base, odd);
    __m512i e0 = ce, e1 = _mm512_srli_epi64(ce, 32), e2 = sl, e3 = dr;
    __m512i o0 = co, o1 = _mm512_srli_epi64(co, 32), o2 = sl, o3 = dr;
    uint32_t k0 = key.k0, k1 = key.k1;
    for (int r = 0; r < 10; r++) {
      const __m512i kk0 = _mm512_set1_epi32((int)k0);
      const __m512i kk1 = _mm512_set1_epi32((int)k1);
      PHILOX512_ROUND(e0, e1, e2, e3, o0, o1, o2, o3, kk0, kk1);
      k0 += PHILOX_W0;
      k1 += PHILOX_W1;
    }
    _mm512_storeu_si512((void *)(w->w[0] + t),
                        _mm512_permutex2var_epi32(e0, weave, o0));
    _mm512_storeu_si512((void *)(w->w[1] + t),
                        _mm512_permutex2var_epi32(e1, weave, o1));
    _mm512_storeu_si512((void *)(w->w[2] + t),
                        _mm512_permutex2var_epi32(e2, weave, o2));
    _mm512_storeu_si512((void *)(w->w[3] + t),
                        _mm512_permutex2var_epi32(e3, weave, o3));
  }
}
#define FG_HAVE_AVX2_PATH 1
#endif

/* Which cipher path runs: set once by fg_stream_init, read by all. Tests
 * may force the narrower paths (fg_stream_force_portable). */
static int use_avx2, use_avx512, use_zig_avx512;

void fg_stream_philox(fg_stream_key key, uint64_t first, int n, uint32_t slot,
                      uint32_t draw, fg_stream_words *w) {
  int t0 = 0;
#if defined(FG_HAVE_AVX2_PATH)
  if (use_avx512) { /* counters made in registers, see philox_avx512 */
    philox_avx512(key, first, n, slot, draw, w);
    t0 = n & ~15;
  } else if (use_avx2) { /* the same, eight lanes a step */
    philox_avx2(key, first, n, slot, draw, w);
    t0 = n & ~7;
  }
#endif
  /* counters first, in place; the rounds then run over the arrays */
  for (int t = t0; t < n; t++) {
    uint64_t i = first + (uint64_t)t;
    w->w[0][t] = (uint32_t)i;
    w->w[1][t] = (uint32_t)(i >> 32);
    w->w[2][t] = slot;
    w->w[3][t] = draw;
  }
#if defined(__SSE2__)
  if (t0 == 0) {
    philox_sse2(w->w[0], w->w[1], w->w[2], w->w[3], n, key);
    t0 = n & ~3;
  }
#endif
  for (int t = t0; t < n; t++) {
    uint32_t c[4] = {w->w[0][t], w->w[1][t], w->w[2][t], w->w[3][t]};
    philox10(c, key.k0, key.k1);
    w->w[0][t] = c[0];
    w->w[1][t] = c[1];
    w->w[2][t] = c[2];
    w->w[3][t] = c[3];
  }
}

/* One block for one (sample, slot, draw): the scalar form, for the slow
 * paths. */
static void philox_one(fg_stream_key key, uint64_t sample, uint32_t slot,
                       uint32_t draw, uint32_t out[4]) {
  out[0] = (uint32_t)sample;
  out[1] = (uint32_t)(sample >> 32);
  out[2] = slot;
  out[3] = draw;
  philox10(out, key.k0, key.k1);
}

/* ---- uniforms --------------------------------------------------------- */

/* 53 bits m from (hi, lo); u = (2m + 1) / 2^54 lies in (0, 1). The
 * numerator of u (2m + 1) or of 1 - u (2^54 - 2m - 1) is below 2^53 in the
 * half where that value is below 1/2, so each is exact there. */
static inline void u01_of(uint32_t hi, uint32_t lo, double *u, double *uc) {
  uint64_t m = ((uint64_t)hi << 21) | (lo >> 11);
  const double scale = 1.0 / 18014398509481984.0; /* 2^-54 */
  *u = (double)(int64_t)(2 * m + 1) * scale;
  *uc = (double)(int64_t)((UINT64_C(1) << 54) - 2 * m - 1) * scale;
}

void fg_stream_u01(gsl_rng *r, double *u, double *uc) {
  uint32_t hi = (uint32_t)gsl_rng_get(r);
  uint32_t lo = (uint32_t)gsl_rng_get(r);
  u01_of(hi, lo, u, uc);
}

void fg_stream_u01s(fg_stream_key key, uint64_t first, int n, uint32_t slot,
                    fg_stream_words *w, double *u, double *uc) {
  fg_stream_philox(key, first, n, slot, 0, w);
  /* the adaptor's first two words were 3 then 2 */
  for (int t = 0; t < n; t++)
    u01_of(w->w[3][t], w->w[2][t], &u[t], &uc[t]);
}

/* ---- the ziggurat ----------------------------------------------------- */

#define ZIG_LAYERS 256

static struct {
  double x[ZIG_LAYERS + 1]; /* X_i; x[0] = v / f(r) (slab 0 with tail) */
  double ratio[ZIG_LAYERS]; /* X_{i+1} / X_i: fast acceptance bound of u */
  double f[ZIG_LAYERS + 1]; /* f(X_i); f[0] = 0 (slab 0 starts at y = 0) */
  double pair[ZIG_LAYERS][2]; /* {x[i], ratio[i]}: one load in the vector path */
  double r;                 /* X_1, where the tail begins */
} zig;

static pthread_once_t zig_once = PTHREAD_ONCE_INIT;

static double zig_f(double x) {
  return exp(-0.5 * x * x);
}

/* Builds the slabs for a trial r; returns how far the last slab's top
 * misses f(0) = 1 in area: > 0 when r is too large (slabs too thin), < 0
 * when too small (the curve's top reached early). */
static double zig_build(double r) {
  const double sqrt_half_pi = 1.2533141373155002512; /* sqrt(pi / 2) */
  double v = r * zig_f(r) + sqrt_half_pi * erfc(r / 1.4142135623730950488);
  zig.r = r;
  zig.x[0] = v / zig_f(r);
  zig.f[0] = 0;
  zig.x[1] = r;
  zig.f[1] = zig_f(r);
  for (int i = 1; i < ZIG_LAYERS - 1; i++) {
    double y = zig.f[i] + v / zig.x[i];
    if (y >= 1) return -1.0 - (ZIG_LAYERS - i); /* ran out of curve */
    zig.x[i + 1] = sqrt(-2 * log(y));
    zig.f[i + 1] = zig_f(zig.x[i + 1]);
  }
  return zig.x[ZIG_LAYERS - 1] * (1 - zig.f[ZIG_LAYERS - 1]) - v;
}

static void zig_init(void) {
#if defined(FG_HAVE_AVX2_PATH)
  __builtin_cpu_init();
  use_avx2 = __builtin_cpu_supports("avx2");
  use_avx512 = __builtin_cpu_supports("avx512f");
  use_zig_avx512 = use_avx512 && __builtin_cpu_supports("avx512dq");
#endif
  double lo = 3.0, hi = 4.5; /* brackets r for 256 slabs */
  for (int it = 0; it < 200 && hi - lo > 0; it++) {
    double mid = 0.5 * (lo + hi);
    if (mid <= lo || mid >= hi) break;
    if (zig_build(mid) > 0)
      hi = mid;
    else
      lo = mid;
  }
  zig_build(lo); /* the largest r whose slabs still reach the top */
  zig.x[ZIG_LAYERS] = 0;
  zig.f[ZIG_LAYERS] = 1;
  for (int i = 0; i < ZIG_LAYERS; i++) {
    zig.ratio[i] = zig.x[i + 1] / zig.x[i];
    zig.pair[i][0] = zig.x[i];
    zig.pair[i][1] = zig.ratio[i];
  }
}

void fg_stream_init(void) {
  pthread_once(&zig_once, zig_init);
}

void fg_stream_force_portable(int level) {
  fg_stream_init();
#if defined(FG_HAVE_AVX2_PATH)
  use_avx2 = level < 2 && __builtin_cpu_supports("avx2");
  use_avx512 = level < 1 && __builtin_cpu_supports("avx512f");
  use_zig_avx512 = use_avx512 && __builtin_cpu_supports("avx512dq");
#else
  (void)level;
#endif
}

/* u in (0, 1) from the top 53 bits of a word. */
static inline double u53(uint64_t w) {
  return ((double)(int64_t)(w >> 11) + 0.5) * (1.0 / 9007199254740992.0);
}

/* The words after an attempt's first: w1 of draw 0, then draws 1, 2, ... */
typedef struct zig_cursor {
  fg_stream_key key;
  uint64_t sample;
  uint32_t slot, draw;
  uint32_t buf[4];
  int half; /* next 64-bit half of buf to hand out; 2 = empty */
} zig_cursor;

static uint64_t zig_next(zig_cursor *c) {
  if (c->half == 2) {
    philox_one(c->key, c->sample, c->slot, ++c->draw, c->buf);
    c->half = 0;
  }
  int h = c->half++;
  return (uint64_t)c->buf[2 * h] | ((uint64_t)c->buf[2 * h + 1] << 32);
}

/* The rest of one normal whose first attempt (word a) missed the fast
 * path. Rare (about 1 in 100), so plain scalar code. */
static double zig_slow(zig_cursor *c, uint64_t a) {
  for (;;) {
    int i = (int)(a & (ZIG_LAYERS - 1));
    double sign = (a & ZIG_LAYERS) ? -1.0 : 1.0;
    double u = u53(a);
    double x = u * zig.x[i];
    if (u < zig.ratio[i]) return sign * x;
    if (i == 0) {
      /* the tail beyond r: x = r + e1/r with e1, e2 exponential, kept
       * when 2 e2 > (e1/r)^2 */
      double s, e;
      do {
        s = -log(u53(zig_next(c))) / zig.r;
        e = -log(u53(zig_next(c)));
      } while (e + e <= s * s);
      return sign * (zig.r + s);
    }
    double y = zig.f[i] + u53(zig_next(c)) * (zig.f[i + 1] - zig.f[i]);
    if (y < zig_f(x)) return sign * x;
    a = zig_next(c);
  }
}

/* The fast path of one lane: out = the candidate x with its sign; returns
 * 1 when the attempt missed (u at or above the slab's ratio). */
static inline int zig_fast(uint64_t a, double *out) {
  int i = (int)(a & (ZIG_LAYERS - 1));
  double u = u53(a);
  /* the sign as a bit flip, not a branch: a coin-flip branch would be
   * mispredicted every other lane */
  uint64_t bits;
  double x = u * zig.x[i];
  memcpy(&bits, &x, sizeof bits);
  bits ^= (a & ZIG_LAYERS) << (63 - 8);
  memcpy(out, &bits, sizeof bits);
  return !(u < zig.ratio[i]);
}

#if defined(FG_HAVE_AVX2_PATH)
/* zig_fast on eight lanes per step with AVX-512F and DQ (the exact
 * conversion of a 53-bit integer to double): the same operations in the
 * same order (convert, add 0.5, scale, multiply by X_i, flip the sign),
 * each one IEEE rounding, so the same bits as the scalar lanes (the unit
 * test compares them). Slow lanes are listed in slow[]; returns how many
 * lanes were done (a multiple of 8). */
__attribute__((target("avx512f,avx512dq"))) static int
zig_fast_avx512(const fg_stream_words *w, int n, double *out, int *slow,
                int *nslow) {
  const __m512i signbit = _mm512_set1_epi64(ZIG_LAYERS);
  const __m512d half = _mm512_set1_pd(0.5);
  const __m512d scale = _mm512_set1_pd(1.0 / 9007199254740992.0);
  int t = 0, ns = *nslow;
  for (; t + 8 <= n; t += 8) {
    __m512i lo = _mm512_cvtepu32_epi64(
        _mm256_loadu_si256((const __m256i *)(const void *)(w->w[0] + t)));
    __m512i hi = _mm512_cvtepu32_epi64(
        _mm256_loadu_si256((const __m256i *)(const void *)(w->w[1] + t)));
    __m512i a = _mm512_or_si512(lo, _mm512_slli_epi64(hi, 32));
    __m512d u = _mm512_mul_pd(
        _mm512_add_pd(_mm512_cvtepi64_pd(_mm512_srli_epi64(a, 11)), half),
        scale);
    /* each lane's {X_i, ratio_i} is one 16-byte load (faster than two
     * gathers here); even lanes fill one vector, odd lanes another, and
     * unpacking gives X and ratio in lane order */
#define ZPAIR(j) _mm_loadu_pd(zig.pair[w->w[0][t + (j)] & (ZIG_LAYERS - 1)])
    __m512d ev = _mm512_insertf64x4(
        _mm512_castpd256_pd512(
            _mm256_insertf128_pd(_mm256_castpd128_pd256(ZPAIR(0)), ZPAIR(2), 1)),
        _mm256_insertf128_pd(_mm256_castpd128_pd256(ZPAIR(4)), ZPAIR(6), 1), 1);
    __m512d od = _mm512_insertf64x4(
        _mm512_castpd256_pd512(
            _mm256_insertf128_pd(_mm256_castpd128_pd256(ZPAIR(1)), ZPAIR(3), 1)),
        _mm256_insertf128_pd(_mm256_castpd128_pd256(ZPAIR(5)), ZPAIR(7), 1), 1);
#undef ZPAIR
    __m512d x = _mm512_mul_pd(u, _mm512_unpacklo_pd(ev, od));
    __m512i sign = _mm512_slli_epi64(_mm512_and_si512(a, signbit), 63 - 8);
    _mm512_storeu_pd(out + t, _mm512_castsi512_pd(
                                  _mm512_xor_si512(_mm512_castpd_si512(x), sign)));
    __mmask8 ok = _mm512_cmp_pd_mask(u, _mm512_unpackhi_pd(ev, od), _CMP_LT_OQ);
    if (ok != 0xff) /* about one step in twelve */
      for (int j = 0; j < 8; j++)
        if (!(ok >> j & 1)) slow[ns++] = t + j;
  }
  *nslow = ns;
  return t;
}

/* zig_fast on four lanes per step with AVX2, the same operations as the
 * scalar lanes: AVX2 has no 64-bit integer to double conversion, so the
 * 53-bit integer m = a >> 11 is converted in two exact halves by the
 * exponent trick (m_lo + 2^52 and m_hi * 2^32 + 2^84 are doubles whose
 * low mantissa bits are the integers; subtracting the constant is exact)
 * and their sum, m itself, is exact too (m < 2^53). Then + 0.5, * 2^-53,
 * * X_i and the sign flip, each one IEEE rounding as in zig_fast: the same
 * bits (the unit test compares the paths). */
__attribute__((target("avx2"))) static int
zig_fast_avx2(const fg_stream_words *w, int n, double *out, int *slow,
              int *nslow) {
  const __m256i signbit = _mm256_set1_epi64x(ZIG_LAYERS);
  const __m256i low32 = _mm256_set1_epi64x(0xffffffffLL);
  const __m256i e52 = _mm256_set1_epi64x(0x4330000000000000LL); /* 2^52 */
  const __m256i e84 = _mm256_set1_epi64x(0x4530000000000000LL); /* 2^84 */
  const __m256d c52 = _mm256_set1_pd(4503599627370496.0);
  const __m256d c84 = _mm256_set1_pd(19342813113834066795298816.0);
  const __m256d half = _mm256_set1_pd(0.5);
  const __m256d scale = _mm256_set1_pd(1.0 / 9007199254740992.0);
  int t = 0, ns = *nslow;
  for (; t + 4 <= n; t += 4) {
    __m256i lo = _mm256_cvtepu32_epi64(
        _mm_loadu_si128((const __m128i *)(const void *)(w->w[0] + t)));
    __m256i hi = _mm256_cvtepu32_epi64(
        _mm_loadu_si128((const __m128i *)(const void *)(w->w[1] + t)));
    __m256i a = _mm256_or_si256(lo, _mm256_slli_epi64(hi, 32));
    __m256i m = _mm256_srli_epi64(a, 11);
    __m256d dlo = _mm256_sub_pd(
        _mm256_castsi256_pd(_mm256_or_si256(_mm256_and_si256(m, low32), e52)),
        c52);
    __m256d dhi = _mm256_sub_pd(
        _mm256_castsi256_pd(_mm256_or_si256(_mm256_srli_epi64(m, 32), e84)),
        c84);
    __m256d u = _mm256_mul_pd(_mm256_add_pd(_mm256_add_pd(dhi, dlo), half),
                              scale);
#define ZPAIR(j) _mm_loadu_pd(zig.pair[w->w[0][t + (j)] & (ZIG_LAYERS - 1)])
    __m256d ev = _mm256_insertf128_pd(_mm256_castpd128_pd256(ZPAIR(0)),
                                      ZPAIR(2), 1);
    __m256d od = _mm256_insertf128_pd(_mm256_castpd128_pd256(ZPAIR(1)),
                                      ZPAIR(3), 1);
#undef ZPAIR
    __m256d x = _mm256_mul_pd(u, _mm256_unpacklo_pd(ev, od));
    __m256i sign = _mm256_slli_epi64(_mm256_and_si256(a, signbit), 63 - 8);
    _mm256_storeu_pd(out + t, _mm256_castsi256_pd(_mm256_xor_si256(
                                  _mm256_castpd_si256(x), sign)));
    int ok = _mm256_movemask_pd(
        _mm256_cmp_pd(u, _mm256_unpackhi_pd(ev, od), _CMP_LT_OQ));
    if (ok != 0xf)
      for (int j = 0; j < 4; j++)
        if (!(ok >> j & 1)) slow[ns++] = t + j;
  }
  *nslow = ns;
  return t;
}
#endif

void fg_stream_normals(fg_stream_key key, uint64_t first, int n, uint32_t slot,
                       fg_stream_words *w, double *out) {
  fg_stream_init();
  fg_stream_philox(key, first, n, slot, 0, w);
  int slow[FG_BLOCK], nslow = 0, t = 0;
#if defined(FG_HAVE_AVX2_PATH)
  if (use_zig_avx512) t = zig_fast_avx512(w, n, out, slow, &nslow);
  else if (use_avx2) t = zig_fast_avx2(w, n, out, slow, &nslow);
#endif
  for (; t < n; t++) {
    slow[nslow] = t;
    nslow += zig_fast((uint64_t)w->w[0][t] | ((uint64_t)w->w[1][t] << 32),
                      &out[t]);
  }
  for (int k = 0; k < nslow; k++) {
    int j = slow[k];
    zig_cursor c = {.key = key,
                    .sample = first + (uint64_t)j,
                    .slot = slot,
                    .draw = 0,
                    .buf = {0, 0, w->w[2][j], w->w[3][j]},
                    .half = 1};
    out[j] = zig_slow(&c, (uint64_t)w->w[0][j] | ((uint64_t)w->w[1][j] << 32));
  }
}

double fg_stream_normal_one(fg_stream_key key, uint64_t sample, uint32_t slot) {
  fg_stream_init();
  uint32_t blk[4];
  philox_one(key, sample, slot, 0, blk);
  zig_cursor c = {.key = key,
                  .sample = sample,
                  .slot = slot,
                  .draw = 0,
                  .buf = {0, 0, blk[2], blk[3]},
                  .half = 1};
  return zig_slow(&c, (uint64_t)blk[0] | ((uint64_t)blk[1] << 32));
}
