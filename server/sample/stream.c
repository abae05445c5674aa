/*
 * sample/stream.c -- counter-based random streams (Philox4x32-10, the
 * cipher itself in cipher.c) and the per-block uniform and normal
 * generators on them.
 *
 * Design: every random number feasgate uses is Philox4x32-10 applied to
 *   key     = { seed & 0xffffffff, (seed >> 32) | (stream << 24) }
 *   counter = { i & 0xffffffff, i >> 32, slot, draw }
 * for sample i. Two ways of reading these blocks exist:
 *
 *  - Per block of samples (the hot path). fg_stream_philox (cipher.c)
 *    evaluates the cipher for all lanes of a block at once, 4, 8 or 16
 *    lanes per instruction (SSE2, or AVX2 / AVX-512F chosen at run time
 *    for that integer code only; every path gives the same words), with
 *    no function pointers and no state. On top of it, in this file:
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
 * Word order of a normal on (sample, slot): its first attempt is half of
 * the pair block {(sample >> 1) | FG_STREAM_PAIR, slot, 0} -- words 0 and
 * 1 (word0 | word1 << 32) for an even sample, words 2 and 3 for the odd
 * one after it -- so one cipher block serves two samples' first attempts
 * (the cipher was the largest cost of a normal). The rare slow path goes
 * on with the sample's own blocks {sample, slot, draw}, draws 0, 1, ...,
 * two words each, so no sample's later words depend on another's. The
 * pair blocks are told apart from the own blocks by FG_STREAM_PAIR, bit
 * 63 of the counter's sample (bit 31 of its second word), which a sample
 * index below 2^53 never has; a block of samples starting at an odd
 * index uses the second half of its first pair block only.
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

#if defined(__SSE2__)
#include <emmintrin.h>
#endif
#if defined(__x86_64__) && defined(__GNUC__)
#include <immintrin.h>
#define FG_HAVE_AVX2_PATH 1
#endif

/* Which ziggurat path runs (set with the cipher's by fg_stream_init;
 * tests may force the narrower ones, fg_stream_force_portable). */
static int use_avx2, use_zig_avx512;

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

/* The cipher's and the ziggurat's code paths, widest first: level 0 the
 * widest present, 1 at most AVX2, 2 only SSE2 and scalar code. */
static void choose_paths(int level) {
  fg_cipher_select(level);
#if defined(FG_HAVE_AVX2_PATH)
  __builtin_cpu_init();
  use_avx2 = level < 2 && __builtin_cpu_supports("avx2");
  use_zig_avx512 = level < 1 && __builtin_cpu_supports("avx512f") &&
                   __builtin_cpu_supports("avx512dq");
#endif
}

static void zig_init(void) {
  choose_paths(0);
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
  choose_paths(level);
}

/* u in (0, 1) from the top 53 bits of a word. */
static inline double u53(uint64_t w) {
  return ((double)(int64_t)(w >> 11) + 0.5) * (1.0 / 9007199254740992.0);
}

/* One 64-bit attempt word from two cipher words (lo first). */
static inline uint64_t word64(uint32_t lo, uint32_t hi) {
  return (uint64_t)lo | ((uint64_t)hi << 32);
}

/* The words after a normal's first attempt: the sample's own blocks
 * {sample, slot, draw} for draws 0, 1, 2, ..., two words each. */
typedef struct zig_cursor {
  fg_stream_key key;
  uint64_t sample;
  uint32_t slot, draw; /* draw: the next block to make */
  uint32_t buf[4];
  int half; /* next 64-bit half of buf to hand out; 2 = empty */
} zig_cursor;

static uint64_t zig_next(zig_cursor *c) {
  if (c->half == 2) {
    fg_stream_philox_one(c->key, c->sample, c->slot, c->draw++, c->buf);
    c->half = 0;
  }
  int h = c->half++;
  return word64(c->buf[2 * h], c->buf[2 * h + 1]);
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

/* The normal of (sample, slot) whose first attempt a missed the fast
 * path: zig_slow with the sample's own blocks from draw 0. */
static double zig_finish(fg_stream_key key, uint64_t sample, uint32_t slot,
                         uint64_t a) {
  zig_cursor c = {
      .key = key, .sample = sample, .slot = slot, .draw = 0, .half = 2};
  return zig_slow(&c, a);
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
zig_fast_avx512(const uint64_t *att, int n, double *out, int *slow,
                int *nslow) {
  const __m512i signbit = _mm512_set1_epi64(ZIG_LAYERS);
  const __m512d half = _mm512_set1_pd(0.5);
  const __m512d scale = _mm512_set1_pd(1.0 / 9007199254740992.0);
  int t = 0, ns = *nslow;
  for (; t + 8 <= n; t += 8) {
    __m512i a = _mm512_loadu_si512((const void *)(att + t));
    __m512d u = _mm512_mul_pd(
        _mm512_add_pd(_mm512_cvtepi64_pd(_mm512_srli_epi64(a, 11)), half),
        scale);
    /* each lane's {X_i, ratio_i} is one 16-byte load (faster than two
     * gathers here); even lanes fill one vector, odd lanes another, and
     * unpacking gives X and ratio in lane order */
#define ZPAIR(j) _mm_loadu_pd(zig.pair[att[t + (j)] & (ZIG_LAYERS - 1)])
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
zig_fast_avx2(const uint64_t *att, int n, double *out, int *slow,
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
    __m256i a = _mm256_loadu_si256((const __m256i *)(const void *)(att + t));
    __m256i m = _mm256_srli_epi64(a, 11);
    __m256d dlo = _mm256_sub_pd(
        _mm256_castsi256_pd(_mm256_or_si256(_mm256_and_si256(m, low32), e52)),
        c52);
    __m256d dhi = _mm256_sub_pd(
        _mm256_castsi256_pd(_mm256_or_si256(_mm256_srli_epi64(m, 32), e84)),
        c84);
    __m256d u = _mm256_mul_pd(_mm256_add_pd(_mm256_add_pd(dhi, dlo), half),
                              scale);
#define ZPAIR(j) _mm_loadu_pd(zig.pair[att[t + (j)] & (ZIG_LAYERS - 1)])
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

/* The first attempts att[t] of samples first + t, t < n: sample i's is
 * half (i & 1) of the pair block {(i >> 1) | FG_STREAM_PAIR, slot, 0}.
 * The pair blocks are made for the pairs the samples touch; buf's word
 * k belongs to sample (first & ~1) + k, so att starts one word in when
 * first is odd. Returns att (inside buf). */
static const uint64_t *first_attempts(fg_stream_key key, uint64_t first,
                                      int n, uint32_t slot, fg_stream_words *w,
                                      uint64_t buf[FG_BLOCK + 2]) {
  int off = (int)(first & 1);
  int m = (off + n + 1) >> 1;
  fg_stream_philox(key, (first >> 1) | FG_STREAM_PAIR, m, slot, 0, w);
  int p = 0;
#if defined(__SSE2__)
  /* buf's words in memory are the block's words transposed (word0 of
   * pair p, word1, word2, word3, then pair p + 1): four pairs per step as
   * a 4 x 4 transpose of 32-bit words */
  for (; p + 4 <= m; p += 4) {
    __m128i r0 = _mm_loadu_si128((const __m128i *)(const void *)(w->w[0] + p));
    __m128i r1 = _mm_loadu_si128((const __m128i *)(const void *)(w->w[1] + p));
    __m128i r2 = _mm_loadu_si128((const __m128i *)(const void *)(w->w[2] + p));
    __m128i r3 = _mm_loadu_si128((const __m128i *)(const void *)(w->w[3] + p));
    __m128i e01 = _mm_unpacklo_epi32(r0, r1), e23 = _mm_unpackhi_epi32(r0, r1);
    __m128i o01 = _mm_unpacklo_epi32(r2, r3), o23 = _mm_unpackhi_epi32(r2, r3);
    __m128i *dst = (__m128i *)(void *)(buf + 2 * p);
    _mm_storeu_si128(dst, _mm_unpacklo_epi64(e01, o01));
    _mm_storeu_si128(dst + 1, _mm_unpackhi_epi64(e01, o01));
    _mm_storeu_si128(dst + 2, _mm_unpacklo_epi64(e23, o23));
    _mm_storeu_si128(dst + 3, _mm_unpackhi_epi64(e23, o23));
  }
#endif
  for (; p < m; p++) {
    buf[2 * p] = word64(w->w[0][p], w->w[1][p]);
    buf[2 * p + 1] = word64(w->w[2][p], w->w[3][p]);
  }
  return buf + off;
}

void fg_stream_normals(fg_stream_key key, uint64_t first, int n, uint32_t slot,
                       fg_stream_words *w, double *out) {
  fg_stream_init();
  uint64_t buf[FG_BLOCK + 2];
  const uint64_t *att = first_attempts(key, first, n, slot, w, buf);
  int slow[FG_BLOCK], nslow = 0, t = 0;
#if defined(FG_HAVE_AVX2_PATH)
  if (use_zig_avx512) t = zig_fast_avx512(att, n, out, slow, &nslow);
  else if (use_avx2) t = zig_fast_avx2(att, n, out, slow, &nslow);
#endif
  for (; t < n; t++) {
    slow[nslow] = t;
    nslow += zig_fast(att[t], &out[t]);
  }
  for (int k = 0; k < nslow; k++) {
    int j = slow[k];
    out[j] = zig_finish(key, first + (uint64_t)j, slot, att[j]);
  }
}

double fg_stream_normal_one(fg_stream_key key, uint64_t sample, uint32_t slot) {
  fg_stream_init();
  uint32_t blk[4];
  fg_stream_philox_one(key, (sample >> 1) | FG_STREAM_PAIR, slot, 0, blk);
  int h = 2 * (int)(sample & 1);
  return zig_finish(key, sample, slot, word64(blk[h], blk[h + 1]));
}
