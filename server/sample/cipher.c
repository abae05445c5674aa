/*
 * sample/cipher.c -- Philox4x32-10 (Salmon et al., SC'11) over the lanes of
 * a block: the hot path under every per-block random number (stream.c
 * describes the keys, the counters and what is drawn from the words).
 *
 * Design: fg_stream_philox evaluates the cipher for all lanes of a block at
 * once, 16 lanes per step with AVX-512F, 8 with AVX2, 4 with SSE2 (which
 * every x86-64 processor has) and one at a time otherwise; the extensions
 * are chosen at run time (fg_cipher_select) for this integer code only, so
 * no floating-point code is compiled for a particular processor. Every
 * path gives the same words: the unit test (tests/unit/sample/
 * test_streams.c) compares each with Random123's reference implementation,
 * including a block whose sample index crosses 2^32. No state, no
 * function pointers on the hot path.
 *
 * Thread use: pure, apart from the path flags, written once at start-up
 * (under stream.c's pthread_once) or by tests between runs.
 */
#include "sample/sample_internal.h"

#include <stdint.h>

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

/* Which cipher path runs: set once by fg_stream_init (fg_cipher_select),
 * read by all. Tests may force the narrower paths
 * (fg_stream_force_portable). */
static int use_avx2, use_avx512;

void fg_cipher_select(int level) {
#if defined(FG_HAVE_AVX2_PATH)
  __builtin_cpu_init();
  use_avx2 = level < 2 && __builtin_cpu_supports("avx2");
  use_avx512 = level < 1 && __builtin_cpu_supports("avx512f");
#else
  (void)level;
#endif
}

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

void fg_stream_philox_one(fg_stream_key key, uint64_t sample, uint32_t slot,
                       uint32_t draw, uint32_t out[4]) {
  out[0] = (uint32_t)sample;
  out[1] = (uint32_t)(sample >> 32);
  out[2] = slot;
  out[3] = draw;
  philox10(out, key.k0, key.k1);
}
