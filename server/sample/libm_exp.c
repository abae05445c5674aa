/*
 * sample/libm_exp.c -- libm's exp over an array of lanes: libm's values
 * bit for bit, several lanes per instruction where that is proven to give
 * them.
 *
 * Why: a lognormal draw is one exp per lane, and exp is the largest single
 * cost of lognormal-heavy checks.
 *
 * The scalar entry. On x86-64 glibc the public `exp` is a small wrapper
 * (it sets errno on overflow and underflow) around an internal,
 * processor-selected implementation, reached through a second PLT
 * indirection. glibc exports that very implementation as `__exp_finite`
 * (symbol version GLIBC_2.15, kept for binary compatibility): the wrapper
 * calls it and returns its result unchanged. Calling it directly skips the
 * wrapper and one indirection and gives the same bits. It is looked up at
 * run time (dlvsym, by name and version), never linked against, and
 * compared with `exp` bit for bit on a spread of arguments before use; any
 * difference, and `exp` itself is the scalar entry.
 *
 * The lane kernels. glibc's exp since 2.28 (Szabolcs Nagy's, also in Arm's
 * optimized-routines) reduces x = k ln2/128 + r with k = round(128 x/ln2)
 * found by adding 1.5 * 2^52, looks 2^(k/128) up as a pair (H_k, T_k) of
 * doubles (exp_table.h, made by gen_exp_table.py), and evaluates
 *   exp(x) = s + s (T_k + r + r^2 (c2 + c3 r) + r^4 (c4 + c5 r)),
 *   s = H_k 2^floor(k/128),
 * where the four coefficients are those glibc publishes. On processors
 * with FMA glibc runs a build of that code in which the compiler fused
 * each a*b + c into one rounding; kernel_avx512 and kernel_avx2 below make
 * the same operations in the same order with the same fusions, 8 or 4
 * lanes at a time (the table read as one 16-byte load per lane, which
 * measured faster than gathers on the benchmark machine), so every rounding is the same and so is the result.
 * Lanes outside glibc's main path (|x| < 2^-54, |x| >= 512, inf, NaN) go
 * to the scalar entry instead.
 *
 * Safety. A kernel is used only after it has agreed with the scalar entry
 * bit for bit on about 50,000 arguments at first use (the lognormal range
 * densely, the whole double range, both edges of the main path, the
 * special values); a libm whose exp is built differently (no FMA, another
 * algorithm, another table) fails that and the scalar entry is used, so
 * values are libm's in every case. tests/unit/sample/test_exp.c compares the
 * kernels with `exp` over several million further arguments.
 *
 * The kernels' arithmetic is written as intrinsics, one operation each:
 * none is a product feeding a separate addition, so no compiler can fuse
 * or reassociate it differently (and no -ffast-math is ever used).
 *
 * Thread use: the choice is made once (pthread_once); afterwards
 * read-only, except fg_exp_lanes_force, which tests call between runs.
 */
#define _GNU_SOURCE 1

#include "sample/sample_internal.h"

#include "sample/exp_table.h"

#include <dlfcn.h>
#include <math.h>
#include <pthread.h>
#include <stdint.h>
#include <string.h>

typedef double (*exp_fn)(double);

static exp_fn chosen_exp = exp;
static pthread_once_t exp_once = PTHREAD_ONCE_INIT;

/* Which lane kernel runs: 0 none (scalar entry per lane), 1 AVX2 + FMA,
 * 2 AVX-512F; kernel_max is what the start-up check allowed. */
static int kernel_max, kernel_use;

/* glibc's constants: 128/ln2, the rounding shift, -ln2/128 as a high part
 * with trailing zeros and a low part, and the coefficients c2..c5. */
#define EXP_INVLN2N 0x1.71547652b82fep7
#define EXP_SHIFT 0x1.8p52
#define EXP_NEGLN2HI -0x1.62e42fefa0000p-8
#define EXP_NEGLN2LO -0x1.cf79abc9e3b3ap-47
#define EXP_C2 0x1.ffffffffffdbdp-2
#define EXP_C3 0x1.555555555543cp-3
#define EXP_C4 0x1.55555cf172b91p-5
#define EXP_C5 0x1.1111167a4d017p-7
/* the main path: biased exponent of |x| in [top(2^-54), top(512)) */
#define EXP_TOP_LO 0x3c9
#define EXP_TOP_HI 0x408

static int same_bits(double a, double b) {
  if (isnan(a) && isnan(b)) return 1;
  return memcmp(&a, &b, sizeof a) == 0;
}

#if defined(__x86_64__) && defined(__GNUC__)
#include <immintrin.h>
#define FG_HAVE_EXP_KERNELS 1

__attribute__((target("avx512f"))) static void
kernel_avx512(double *x, int n, exp_fn f, const double *mu, const double *sd) {
  const __m512d muv = _mm512_set1_pd(mu ? *mu : 0.0);
  const __m512d sdv = _mm512_set1_pd(mu ? *sd : 1.0);
  const __m512d inv = _mm512_set1_pd(EXP_INVLN2N);
  const __m512d shift = _mm512_set1_pd(EXP_SHIFT);
  const __m512d nhi = _mm512_set1_pd(EXP_NEGLN2HI);
  const __m512d nlo = _mm512_set1_pd(EXP_NEGLN2LO);
  const __m512d c2 = _mm512_set1_pd(EXP_C2), c3 = _mm512_set1_pd(EXP_C3);
  const __m512d c4 = _mm512_set1_pd(EXP_C4), c5 = _mm512_set1_pd(EXP_C5);
  const __m512i k127 = _mm512_set1_epi64(127);
  const __m512i top_lo = _mm512_set1_epi64(EXP_TOP_LO);
  const __m512i top_span = _mm512_set1_epi64(EXP_TOP_HI - EXP_TOP_LO);
  const __m512i top_mask = _mm512_set1_epi64(0x7ff);
  int t = 0;
  for (; t + 8 <= n; t += 8) {
    __m512d v = _mm512_loadu_pd(x + t);
    if (mu) v = _mm512_add_pd(muv, _mm512_mul_pd(sdv, v));
    __m512i top = _mm512_and_si512(
        _mm512_srli_epi64(_mm512_castpd_si512(v), 52), top_mask);
    __mmask8 main = _mm512_cmplt_epu64_mask(_mm512_sub_epi64(top, top_lo),
                                            top_span);
    __m512d kd = _mm512_fmadd_pd(inv, v, shift);
    __m512i ki = _mm512_castpd_si512(kd);
    kd = _mm512_sub_pd(kd, shift);
    __m512d r = _mm512_fmadd_pd(kd, nlo, _mm512_fmadd_pd(kd, nhi, v));
    __m512i idx = _mm512_slli_epi64(_mm512_and_si512(ki, k127), 1);
    /* The table: each lane's pair {T, H} is one 16-byte load; even lanes
     * fill one vector, odd lanes another, and unpacking them gives the T
     * and H vectors in lane order (faster than two gathers here). */
    /* indices from registers, not through a stack array: a vector store
     * to a local may be made an aligned one, which is not safe on every
     * stack (AddressSanitizer's detached frames, for one) */
    const __m128i q0 = _mm512_castsi512_si128(idx);
    const __m128i q1 = _mm512_extracti32x4_epi32(idx, 1);
    const __m128i q2 = _mm512_extracti32x4_epi32(idx, 2);
    const __m128i q3 = _mm512_extracti32x4_epi32(idx, 3);
    const uint64_t at[8] = {
        (uint64_t)_mm_cvtsi128_si64(q0), (uint64_t)_mm_extract_epi64(q0, 1),
        (uint64_t)_mm_cvtsi128_si64(q1), (uint64_t)_mm_extract_epi64(q1, 1),
        (uint64_t)_mm_cvtsi128_si64(q2), (uint64_t)_mm_extract_epi64(q2, 1),
        (uint64_t)_mm_cvtsi128_si64(q3), (uint64_t)_mm_extract_epi64(q3, 1)};
#define PAIR(j) _mm_loadu_pd((const double *)(const void *)(fg_exp_table + at[j]))
    __m512d ev = _mm512_insertf64x4(
        _mm512_castpd256_pd512(
            _mm256_insertf128_pd(_mm256_castpd128_pd256(PAIR(0)), PAIR(2), 1)),
        _mm256_insertf128_pd(_mm256_castpd128_pd256(PAIR(4)), PAIR(6), 1), 1);
    __m512d od = _mm512_insertf64x4(
        _mm512_castpd256_pd512(
            _mm256_insertf128_pd(_mm256_castpd128_pd256(PAIR(1)), PAIR(3), 1)),
        _mm256_insertf128_pd(_mm256_castpd128_pd256(PAIR(5)), PAIR(7), 1), 1);
    __m512d tail = _mm512_unpacklo_pd(ev, od);
    __m512i sbits = _mm512_add_epi64(_mm512_castpd_si512(_mm512_unpackhi_pd(ev, od)),
                                     _mm512_slli_epi64(ki, 45));
    __m512d r2 = _mm512_mul_pd(r, r);
    __m512d a = _mm512_fmadd_pd(r2, _mm512_fmadd_pd(r, c3, c2),
                                _mm512_add_pd(tail, r));
    __m512d tmp = _mm512_fmadd_pd(_mm512_mul_pd(r2, r2),
                                  _mm512_fmadd_pd(r, c5, c4), a);
    __m512d s = _mm512_castsi512_pd(sbits);
    if (main == 0xff) {
      _mm512_storeu_pd(x + t, _mm512_fmadd_pd(s, tmp, s));
    } else { /* rare lanes: the argument again, by the same operations */
      double in[8];
      for (int j = 0; j < 8; j++)
        in[j] = mu ? *mu + *sd * x[t + j] : x[t + j];
      _mm512_storeu_pd(x + t, _mm512_fmadd_pd(s, tmp, s));
      for (int j = 0; j < 8; j++)
        if (!(main >> j & 1)) x[t + j] = f(in[j]);
    }
  }
  for (; t < n; t++)
    x[t] = f(mu ? *mu + *sd * x[t] : x[t]);
}

__attribute__((target("avx2,fma"))) static void
kernel_avx2(double *x, int n, exp_fn f, const double *mu, const double *sd) {
  const __m256d muv = _mm256_set1_pd(mu ? *mu : 0.0);
  const __m256d sdv = _mm256_set1_pd(mu ? *sd : 1.0);
  const __m256d inv = _mm256_set1_pd(EXP_INVLN2N);
  const __m256d shift = _mm256_set1_pd(EXP_SHIFT);
  const __m256d nhi = _mm256_set1_pd(EXP_NEGLN2HI);
  const __m256d nlo = _mm256_set1_pd(EXP_NEGLN2LO);
  const __m256d c2 = _mm256_set1_pd(EXP_C2), c3 = _mm256_set1_pd(EXP_C3);
  const __m256d c4 = _mm256_set1_pd(EXP_C4), c5 = _mm256_set1_pd(EXP_C5);
  const __m256i k127 = _mm256_set1_epi64x(127);
  const __m256i below = _mm256_set1_epi64x(EXP_TOP_LO - 1);
  const __m256i above = _mm256_set1_epi64x(EXP_TOP_HI);
  const __m256i top_mask = _mm256_set1_epi64x(0x7ff);
  int t = 0;
  for (; t + 4 <= n; t += 4) {
    __m256d v = _mm256_loadu_pd(x + t);
    if (mu) v = _mm256_add_pd(muv, _mm256_mul_pd(sdv, v));
    __m256i top = _mm256_and_si256(
        _mm256_srli_epi64(_mm256_castpd_si256(v), 52), top_mask);
    /* top and the bounds are small non-negative integers: signed
     * compares suffice */
    __m256i in_main = _mm256_and_si256(_mm256_cmpgt_epi64(top, below),
                                       _mm256_cmpgt_epi64(above, top));
    int main = _mm256_movemask_pd(_mm256_castsi256_pd(in_main));
    __m256d kd = _mm256_fmadd_pd(inv, v, shift);
    __m256i ki = _mm256_castpd_si256(kd);
    kd = _mm256_sub_pd(kd, shift);
    __m256d r = _mm256_fmadd_pd(kd, nlo, _mm256_fmadd_pd(kd, nhi, v));
    __m256i idx = _mm256_slli_epi64(_mm256_and_si256(ki, k127), 1);
    const __m128i q0 = _mm256_castsi256_si128(idx);
    const __m128i q1 = _mm256_extracti128_si256(idx, 1);
    const uint64_t at[4] = {
        (uint64_t)_mm_cvtsi128_si64(q0), (uint64_t)_mm_extract_epi64(q0, 1),
        (uint64_t)_mm_cvtsi128_si64(q1), (uint64_t)_mm_extract_epi64(q1, 1)};
    __m256d ev = _mm256_insertf128_pd(_mm256_castpd128_pd256(PAIR(0)), PAIR(2), 1);
    __m256d od = _mm256_insertf128_pd(_mm256_castpd128_pd256(PAIR(1)), PAIR(3), 1);
    __m256d tail = _mm256_unpacklo_pd(ev, od);
    __m256i sbits = _mm256_add_epi64(_mm256_castpd_si256(_mm256_unpackhi_pd(ev, od)),
                                     _mm256_slli_epi64(ki, 45));
    __m256d r2 = _mm256_mul_pd(r, r);
    __m256d a = _mm256_fmadd_pd(r2, _mm256_fmadd_pd(r, c3, c2),
                                _mm256_add_pd(tail, r));
    __m256d tmp = _mm256_fmadd_pd(_mm256_mul_pd(r2, r2),
                                  _mm256_fmadd_pd(r, c5, c4), a);
    __m256d s = _mm256_castsi256_pd(sbits);
    if (main == 0xf) {
      _mm256_storeu_pd(x + t, _mm256_fmadd_pd(s, tmp, s));
    } else {
      double in[4];
      for (int j = 0; j < 4; j++)
        in[j] = mu ? *mu + *sd * x[t + j] : x[t + j];
      _mm256_storeu_pd(x + t, _mm256_fmadd_pd(s, tmp, s));
      for (int j = 0; j < 4; j++)
        if (!(main >> j & 1)) x[t + j] = f(in[j]);
    }
  }
  for (; t < n; t++)
    x[t] = f(mu ? *mu + *sd * x[t] : x[t]);
}
#undef PAIR
#endif

/* x[t] = exp(x[t]), or exp(mu + sd x[t]) when mu is not NULL (a multiply
 * then an add, each rounded, as the lognormal draw computes it). */
static void run_kernel(int k, double *x, int n, exp_fn f, const double *mu,
                       const double *sd) {
#if defined(FG_HAVE_EXP_KERNELS)
  if (k == 2) {
    kernel_avx512(x, n, f, mu, sd);
    return;
  }
  if (k == 1) {
    kernel_avx2(x, n, f, mu, sd);
    return;
  }
#endif
  for (int t = 0; t < n; t++)
    x[t] = f(mu ? *mu + *sd * x[t] : x[t]);
}

/* ---- the start-up check ---------------------------------------------- */

/* FG_EXP_PROBE_DENSE lognormal exponents in [-8, 16), FG_EXP_PROBE_WIDE
 * across the whole finite range [-750, 715) (limits.h), then these. */
static const double probe_special[] = {
    0.0,        -0.0,        1.0,         -1.0,      0.5,       1e-300,
    -1e-300,    709.78,      709.79,      710.0,     -708.4,    -745.13,
    -745.14,    -746.0,      -1074.0,     1e308,     -1e308,    INFINITY,
    -INFINITY,  NAN,         0x1p-54,     -0x1p-54,  0x1p-1022, 0x1.fffffffffffffp-55,
    0x1.0000000000001p-54,   511.99999999999994, 512.0, -511.99999999999994,
    -512.0,     88.72283905206835, -87.33654475055310, 1e-10, -1e-10,
    0.34657359027997264, -0.34657359027997264, 0.0027076061740622863};

/* xorshift64*: a fixed, cheap spread of arguments */
static double probe_u(uint64_t *s) {
  *s ^= *s >> 12;
  *s ^= *s << 25;
  *s ^= *s >> 27;
  return (double)((*s * UINT64_C(0x2545F4914F6CDD1D)) >> 11) * 0x1p-53;
}

/* Does f agree with exp, and kernel k (if k > 0) with f, on every probe?
 * Chunks of 256 keep the scratch on the stack. */
static int probes_agree(exp_fn f, int k) {
  enum { CH = 256 };
  double in[CH], out[CH];
  int nspecial = (int)(sizeof probe_special / sizeof probe_special[0]);
  uint64_t s = UINT64_C(0x9E3779B97F4A7C15);
  const int nprobe = FG_EXP_PROBE_DENSE + FG_EXP_PROBE_WIDE;
  for (int done = -nspecial; done < nprobe; done += CH) {
    int m = 0;
    for (int i = done; i < done + CH && i < nprobe; i++) {
      if (i < 0)
        in[m++] = probe_special[i + nspecial];
      else if (i < FG_EXP_PROBE_DENSE)
        in[m++] = -8.0 + 24.0 * probe_u(&s);
      else
        in[m++] = -750.0 + 1465.0 * probe_u(&s);
    }
    memcpy(out, in, sizeof(double) * (size_t)m);
    if (k > 0) run_kernel(k, out, m, f, NULL, NULL);
    for (int j = 0; j < m; j++) {
      double want = exp(in[j]);
      if (!same_bits(f(in[j]), want)) return 0;
      if (k > 0 && !same_bits(out[j], want)) return 0;
    }
  }
  return 1;
}

static void choose_exp(void) {
#if defined(__x86_64__) && defined(__GLIBC__)
  void *p = dlvsym(RTLD_DEFAULT, "__exp_finite", "GLIBC_2.15");
  if (p) {
    exp_fn f;
    memcpy(&f, &p, sizeof f); /* object to function pointer, as POSIX allows */
    if (probes_agree(f, 0)) chosen_exp = f;
  }
#endif
#if defined(FG_HAVE_EXP_KERNELS)
  __builtin_cpu_init();
  if (__builtin_cpu_supports("avx512f") && probes_agree(chosen_exp, 2))
    kernel_max = 2;
  else if (__builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma") &&
           probes_agree(chosen_exp, 1))
    kernel_max = 1;
#endif
  kernel_use = kernel_max;
}

void fg_exp_lanes(double *x, int n) {
  pthread_once(&exp_once, choose_exp);
  run_kernel(kernel_use, x, n, chosen_exp, NULL, NULL);
}

void fg_exp_lanes_affine(double *x, int n, double mu, double sd) {
  pthread_once(&exp_once, choose_exp);
  run_kernel(kernel_use, x, n, chosen_exp, &mu, &sd);
}

int fg_exp_lanes_direct(void) {
  pthread_once(&exp_once, choose_exp);
  return chosen_exp != exp;
}

int fg_exp_lanes_force(int level) {
  pthread_once(&exp_once, choose_exp);
  int k = 2 - level;
  if (k < 0) k = 0;
  if (k > kernel_max) k = kernel_max;
  if (k == 1 && kernel_max == 2) {
    /* AVX-512F passed its check; AVX2 is checked on demand for tests */
#if defined(FG_HAVE_EXP_KERNELS)
    if (!(__builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma") &&
          probes_agree(chosen_exp, 1)))
#endif
      k = 0;
  }
  kernel_use = k;
  return k;
}
