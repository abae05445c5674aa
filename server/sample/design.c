/*
 * sample/design.c -- sampling designs: antithetic pairs, Latin hypercube,
 * randomly shifted Sobol points (the contract is in sample.h).
 *
 * Design: a draw has two phases.
 *   1. Uniforms. Every *coordinate* gets one uniform per sample. The
 *      coordinates are the sampler's dimensions in order, except that a
 *      scenario table uses one coordinate (for its row) however wide it
 *      is, so coordinate numbers are dense (Sobol quality is best in the
 *      low coordinates). A uniform is kept in the output cell of the
 *      coordinate's dimension as one double that holds both tails
 *      exactly: u when u < 1/2, otherwise -(1 - u) (see enc/dec).
 *   2. Mapping, input by input, in place: element-wise families through
 *      fg_family_icdf; empirical data by index into the sorted data;
 *      scenario tables by the row whose cumulative-weight interval holds
 *      the uniform; multivariate normals as mean + L Phi^-1(u) and
 *      Gaussian copula members as F^-1(Phi(L Phi^-1(u))), with the
 *      factors L that mvn.c and copula.c made at build.
 *      Marginals and dependence are therefore exactly the declared ones.
 *
 * Uniform sources. All are Philox4x32-10 under the stream's key
 * (fg_stream_key_make), with counter { idx lo, idx hi, slot, 0 } and
 *   slot = 0x80000000 | purpose << 24 | coordinate        (coordinate < 2^24)
 * Monte Carlo slots are sampler dimensions (< FG_UNCERTAIN_DIMS_MAX, far
 * below 2^31), so no design counter equals a Monte Carlo one. Purposes:
 *   1 antithetic pair uniform, idx = pair m = i / 2
 *   2 Latin hypercube jitter, idx = sample i
 *   3 Latin hypercube permutation key, idx = replicate r
 *   4 Sobol digital shift, idx = replicate r
 * A 53-bit uniform is made from two words as in stream.c:
 * u = (2m + 1) 2^-54, 1 - u = (2^54 - 2m - 1) 2^-54.
 *
 *   Antithetic: sample 2m uses (u, 1-u), sample 2m+1 uses (1-u, u) of pair
 *   m's draw, by global index (rep_size plays no part; replicates are
 *   independent of each other when rep_size is even).
 *
 *   Latin hypercube (McKay, Beckman & Conover 1979): replicate r = i / N,
 *   position q = i mod N (N = rep_size); stratum k = pi_{r,c}(q) with
 *   pi a permutation of [0, N) computed on the fly: an alternating
 *   (unbalanced) Feistel network on the b = ceil(log2 N) bit domain,
 *   six rounds keyed by Philox words of (r, c), with cycle-walking until
 *   the value falls inside [0, N) (Black & Rogaway 2002, "Ciphers with
 *   arbitrary finite domains"). Each round xors one part with a keyed
 *   mix of the other, so the network is a bijection and cycle-walking
 *   stops. u = (k + v) / N with jitter v from purpose 2; the tail nearer
 *   the stratum is computed directly, (k + v)/N or (N - 1 - k + (1-v))/N.
 *
 *   Sobol (Sobol 1967) with a random digital shift: point q = i mod N in
 *   coordinate c, as 53-bit integers x_q = xor of V_c[b] over the set
 *   bits b of the Gray code q ^ (q >> 1), so any index is direct;
 *   consecutive indices step by one xor (Antonov & Saleev 1979). The
 *   point is xored with a 53-bit shift per (r, c) and centred:
 *   u = (2y + 1) 2^-54, never 0 or 1.
 *   Direction numbers are read out of GSL's gsl_qrng_sobol at first use
 *   (pthread_once): GSL returns points 1, 2, ... in Gray-code order with
 *   30-bit numerators, so point k xor point k-1 is the direction number of
 *   bit ctz(k); the first 2^16 points give m_0 .. m_15 of every GSL
 *   dimension (about 30 ms, once). Higher m_k (needed from 2^16 points
 *   per replicate on) come from the Sobol recurrence of Bratley & Fox
 *   1988 (ACM TOMS 14:88),
 *     m_k = 2 a_1 m_{k-1} ^ 4 a_2 m_{k-2} ^ ... ^ 2^s m_{k-s} ^ m_{k-s},
 *   whose degree s and coefficients a are recovered as the lowest-degree
 *   recurrence that reproduces every recovered m_k; coordinate 0 is the
 *   van der Corput sequence (all m_k = 1). A coordinate whose numbers do
 *   not fit is not offered (fg_design_sobol_max_dims stops before it).
 *   The unit test compares these points with gsl_qrng_get's sequence.
 *   Indices are taken modulo 2^53.
 *
 * Invariants: every value is a pure function of (seed, stream, design,
 * rep_size, global index, dimension); rep_size 0 is read as 1. A call
 * that spans a replicate boundary is split at it, so any chunking gives
 * the same numbers. Sobol coordinates beyond the limit give NaN (callers
 * check with fg_sampler_design_check first); an unknown design draws
 * Monte Carlo.
 *
 * Thread use: the direction table is built once under pthread_once and
 * then only read; draws use the caller's scratch and are otherwise pure.
 */
#include "sample/sample_internal.h"

#include "feasgate/limits.h"

#include <Random123/philox.h>
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_qrng.h>

#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define SLOT_DESIGN 0x80000000u
#define SLOT_ANTITHETIC (SLOT_DESIGN | 1u << 24)
#define SLOT_LHS_JITTER (SLOT_DESIGN | 2u << 24)
#define SLOT_LHS_KEY (SLOT_DESIGN | 3u << 24)
#define SLOT_SOBOL_SHIFT (SLOT_DESIGN | 4u << 24)

_Static_assert(FG_UNCERTAIN_DIMS_MAX < (1 << 24),
               "coordinates must fit the low 24 bits of a design slot");

#define SOBOL_BITS 53     /* bits of a point and of the shift */
#define SOBOL_READ 16     /* m_k read from GSL directly: 2^16 points */
#define SOBOL_GSL_BITS 30 /* GSL's numerators are multiples of 2^-30 */
#define SOBOL_DEG_MAX 8   /* largest degree tried (<= SOBOL_READ / 2) */
#define SOBOL_DIMS_CAP 64

/* ---- Philox words and uniforms ---------------------------------------- */

static void words(fg_stream_key key, uint64_t idx, uint32_t slot, uint32_t draw,
                  uint32_t w[4]) {
  philox4x32_ctr_t c = {
      {(uint32_t)(idx & 0xffffffffu), (uint32_t)(idx >> 32), slot, draw}};
  philox4x32_key_t k = {{key.k0, key.k1}};
  philox4x32_ctr_t r = philox4x32(c, k);
  memcpy(w, r.v, 4 * sizeof w[0]);
}

static uint64_t bits53(uint32_t hi, uint32_t lo) {
  return ((uint64_t)hi << 21) | ((uint64_t)lo >> 11);
}

/* u = (2m + 1) 2^-54 and its complement; each exact in its own half. */
static void unit53(uint64_t m, double *u, double *uc) {
  const double scale = 1.0 / 18014398509481984.0; /* 2^-54 */
  *u = (double)(2 * m + 1) * scale;
  *uc = (double)((UINT64_C(1) << 54) - 2 * m - 1) * scale;
}

/* One double for (u, 1 - u): u itself below 1/2, else -(1 - u). Both
 * tails stay exact; 0 never occurs since u, 1 - u > 0. */
static double enc(double u, double uc) {
  return u < 0.5 ? u : -uc;
}

static void dec(double v, double *u, double *uc) {
  if (v > 0) {
    *u = v;
    *uc = 1 - v;
  } else {
    *uc = -v;
    *u = 1 + v;
  }
}

static double std_quantile(double u, double uc) {
  return u < 0.5 ? gsl_cdf_ugaussian_Pinv(u) : gsl_cdf_ugaussian_Qinv(uc);
}

/* ---- Sobol direction numbers ------------------------------------------ */

static uint64_t sobol_v[SOBOL_DIMS_CAP][SOBOL_BITS];
static int sobol_dims;
static pthread_once_t sobol_once = PTHREAD_ONCE_INIT;

/* The lowest-degree recurrence reproducing m[0..n); extends m to
 * SOBOL_BITS entries. Returns 0, or -1 when none of degree <= max fits. */
static int sobol_extend(uint64_t *m, int n) {
  int all_one = 1;
  for (int k = 0; k < n; k++)
    all_one &= m[k] == 1;
  if (all_one) {
    for (int k = n; k < SOBOL_BITS; k++)
      m[k] = 1;
    return 0;
  }
  for (int s = 1; s <= SOBOL_DEG_MAX; s++)
    for (uint32_t a = 0; a < (1u << (s - 1)); a++) {
      int fits = 1;
      for (int k = s; k < SOBOL_BITS && fits; k++) {
        uint64_t v = m[k - s] ^ (m[k - s] << s);
        for (int t = 1; t < s; t++)
          if ((a >> (t - 1)) & 1u) v ^= m[k - t] << t;
        if (k < n)
          fits = v == m[k];
        else
          m[k] = v;
      }
      if (fits) return 0;
    }
  return -1;
}

static void sobol_init(void) {
  unsigned dmax = gsl_qrng_sobol->max_dimension;
  if (dmax > SOBOL_DIMS_CAP) dmax = SOBOL_DIMS_CAP;
  gsl_qrng *q = dmax ? gsl_qrng_alloc(gsl_qrng_sobol, dmax) : NULL;
  double *x = malloc((size_t)(dmax ? dmax : 1) * sizeof *x);
  uint32_t *prev = calloc((size_t)(dmax ? dmax : 1), sizeof *prev);
  uint64_t(*m)[SOBOL_BITS] = calloc(SOBOL_DIMS_CAP, sizeof *m);
  int ok = q && x && prev && m;
  for (uint64_t k = 1; ok && k < (UINT64_C(1) << SOBOL_READ); k++) {
    if (gsl_qrng_get(q, x) != 0) {
      ok = 0;
      break;
    }
    int b = __builtin_ctzll(k);
    for (unsigned d = 0; d < dmax; d++) {
      double s = x[d] * (double)(UINT64_C(1) << SOBOL_GSL_BITS);
      if (!(s >= 0 && s < (double)(UINT64_C(1) << SOBOL_GSL_BITS)) ||
          s != floor(s)) {
        ok = 0;
        break;
      }
      uint32_t now = (uint32_t)s, diff = now ^ prev[d];
      prev[d] = now;
      uint64_t mk = (uint64_t)diff >> (SOBOL_GSL_BITS - 1 - b);
      /* direction number of bit b: odd m_b < 2^(b+1), nothing below */
      if (((uint64_t)diff & ((UINT64_C(1) << (SOBOL_GSL_BITS - 1 - b)) - 1)) ||
          !(mk & 1) || mk >> (b + 1) || (m[d][b] && m[d][b] != mk))
        ok = 0;
      m[d][b] = mk;
    }
  }
  int dims = 0;
  while (ok && dims < (int)dmax && sobol_extend(m[dims], SOBOL_READ) == 0) {
    for (int b = 0; b < SOBOL_BITS; b++)
      sobol_v[dims][b] = m[dims][b] << (SOBOL_BITS - 1 - b);
    dims++;
  }
  sobol_dims = dims;
  if (q) gsl_qrng_free(q);
  free(x);
  free(prev);
  free(m);
}

int fg_design_sobol_max_dims(void) {
  pthread_once(&sobol_once, sobol_init);
  return sobol_dims;
}

uint64_t fg_design_sobol_point(int c, uint64_t q) {
  pthread_once(&sobol_once, sobol_init);
  uint64_t g = q ^ (q >> 1), x = 0;
  for (int b = 0; g && b < SOBOL_BITS; b++, g >>= 1)
    if (g & 1) x ^= sobol_v[c][b];
  return x;
}

/* ---- Latin hypercube permutation -------------------------------------- */

typedef struct lhs_perm {
  uint64_t n;  /* domain [0, n) */
  int lo_bits; /* the b-bit word is (hi: b - lo_bits bits, lo: lo_bits) */
  int hi_bits;
  uint64_t key[6];
} lhs_perm;

/* A multiply-xorshift mixer of (x, key) (common practice). */
static uint64_t mix(uint64_t x, uint64_t key) {
  x ^= key;
  x ^= x >> 31;
  x *= UINT64_C(0xd6e8feb86659fd93);
  x ^= x >> 29;
  x *= UINT64_C(0xa3b195354a39b70d);
  x ^= x >> 32;
  return x;
}

static lhs_perm lhs_perm_make(fg_stream_key key, uint64_t n, uint64_t r,
                              uint32_t c) {
  lhs_perm p = {.n = n};
  int b = 0;
  while (b < 64 && (UINT64_C(1) << b) < n)
    b++;
  p.lo_bits = (b + 1) / 2;
  p.hi_bits = b - p.lo_bits;
  uint32_t w[8];
  words(key, r, SLOT_LHS_KEY | c, 0, w);
  words(key, r, SLOT_LHS_KEY | c, 1, w + 4);
  for (int t = 0; t < 6; t++)
    p.key[t] = ((uint64_t)w[t] << 32) | (w[(t + 6) % 8] ^ (uint64_t)t);
  return p;
}

static uint64_t low_mask(int bits) {
  return bits >= 64 ? ~UINT64_C(0) : (UINT64_C(1) << bits) - 1;
}

static uint64_t lhs_perm_apply(const lhs_perm *p, uint64_t q) {
  uint64_t ml = low_mask(p->lo_bits), mh = low_mask(p->hi_bits);
  uint64_t x = q;
  do {
    uint64_t lo = x & ml, hi = p->hi_bits ? x >> p->lo_bits : 0;
    for (int t = 0; t < 6; t++) {
      if (t & 1)
        lo ^= mix(hi, p->key[t]) & ml;
      else
        hi ^= mix(lo, p->key[t]) & mh;
    }
    x = p->hi_bits ? (hi << p->lo_bits) | lo : lo;
  } while (x >= p->n);
  return x;
}

/* ---- phase 1: uniforms of one coordinate over a run ------------------- */

typedef struct run {
  fg_stream_key key;
  fg_design design;
  uint64_t rep; /* rep_size (>= 1) */
  uint64_t first, r, q0;
  int n;
} run;

static void uniforms(const run *R, uint32_t c, double *col) {
  double u, uc;
  uint32_t w[4];
  switch (R->design) {
  case FG_DESIGN_ANTITHETIC:
    for (int t = 0; t < R->n; t++) {
      uint64_t i = R->first + (uint64_t)t;
      words(R->key, i >> 1, SLOT_ANTITHETIC | c, 0, w);
      unit53(bits53(w[0], w[1]), &u, &uc);
      col[t] = (i & 1) ? enc(uc, u) : enc(u, uc);
    }
    break;
  case FG_DESIGN_LATIN_HYPERCUBE: {
    lhs_perm p = lhs_perm_make(R->key, R->rep, R->r, c);
    double nd = (double)R->rep;
    for (int t = 0; t < R->n; t++) {
      uint64_t k = lhs_perm_apply(&p, R->q0 + (uint64_t)t);
      double v, vc;
      words(R->key, R->first + (uint64_t)t, SLOT_LHS_JITTER | c, 0, w);
      unit53(bits53(w[0], w[1]), &v, &vc);
      if (k < R->rep - k) { /* stratum in the lower half */
        u = ((double)k + v) / nd;
        uc = 1 - u;
      } else {
        uc = ((double)(R->rep - 1 - k) + vc) / nd;
        u = 1 - uc;
      }
      col[t] = enc(u, uc);
    }
    break;
  }
  case FG_DESIGN_SOBOL: {
    if ((int)c >= fg_design_sobol_max_dims()) {
      for (int t = 0; t < R->n; t++)
        col[t] = NAN;
      break;
    }
    words(R->key, R->r, SLOT_SOBOL_SHIFT | c, 0, w);
    uint64_t shift = bits53(w[0], w[1]);
    const uint64_t mask = (UINT64_C(1) << SOBOL_BITS) - 1;
    uint64_t q = R->q0 & mask;
    uint64_t x = fg_design_sobol_point((int)c, q);
    for (int t = 0; t < R->n; t++) {
      if (t > 0) {
        q = (q + 1) & mask;
        x = q ? x ^ sobol_v[c][__builtin_ctzll(q)] : 0;
      }
      unit53(x ^ shift, &u, &uc);
      col[t] = enc(u, uc);
    }
    break;
  }
  case FG_DESIGN_MONTE_CARLO: break;
  }
}

/* ---- phase 2: mapping ------------------------------------------------- */

/* Column k of the block (n lanes) turned in place from uniforms into
 * standard normals; its pointer kept in cols[k]. */
static void normal_column(double *col, int n, double **slot) {
  double u, uc;
  for (int t = 0; t < n; t++) {
    dec(col[t], &u, &uc);
    col[t] = std_quantile(u, uc);
  }
  *slot = col;
}

/* Multivariate normal and copula factors are applied by the same block
 * functions the Monte Carlo draw uses (mvn.c, copula.c), so the factor
 * arithmetic lives in one place. */
static void map_input(const fg_input *in, double **cols, int n, double *out,
                      size_t stride) {
  double u, uc;
  switch (in->kind) {
  case FG_FAM_MVN:
    for (int k = 0; k < in->size; k++)
      normal_column(out + (size_t)(in->base + k) * stride, n, &cols[k]);
    fg_family_lower_apply(in->chol, in->par[0], in->size, n, cols);
    return;
  case FG_FAM_SCENARIO_TABLE:
    for (int t = 0; t < n; t++) {
      dec(out[(size_t)in->base * stride + (size_t)t], &u, &uc);
      const double *src =
          in->values + (size_t)fg_family_cdf_index(in, u, uc) * (size_t)in->size;
      for (int e = 0; e < in->size; e++)
        out[(size_t)(in->base + e) * stride + (size_t)t] = src[e];
    }
    return;
  case FG_FAM_EMPIRICAL:
    for (int e = 0; e < in->size; e++) {
      double *col = out + (size_t)(in->base + e) * stride;
      double nv = (double)in->nvalues;
      for (int t = 0; t < n; t++) {
        dec(col[t], &u, &uc);
        long k =
            u < 0.5 ? (long)(u * nv) : (long)in->nvalues - 1 - (long)(uc * nv);
        if (k < 0) k = 0;
        if (k >= in->nvalues) k = in->nvalues - 1;
        col[t] = in->sorted[k];
      }
    }
    return;
  default:
    for (int e = 0; e < in->size; e++) {
      double *col = out + (size_t)(in->base + e) * stride;
      for (int t = 0; t < n; t++) {
        dec(col[t], &u, &uc);
        col[t] = fg_family_icdf(in, e, u, uc);
      }
    }
    return;
  }
}

static void map_copula(const fg_copula *cop, const fg_input *inputs,
                       double **cols, double *tmp, int n, double *out,
                       size_t stride) {
  double u, uc;
  for (int k = 0; k < cop->d; k++)
    normal_column(out + (size_t)cop->dims[k] * stride, n, &cols[k]);
  fg_sampler_copula_correlate(cop, cols, n, tmp);
  for (int k = 0; k < cop->d; k++) {
    double *col = cols[k];
    for (int t = 0; t < n; t++) { /* Phi from the exact tail */
      if (col[t] < 0) {
        u = gsl_cdf_ugaussian_P(col[t]);
        uc = 1 - u;
      } else {
        uc = gsl_cdf_ugaussian_Q(col[t]);
        u = 1 - uc;
      }
      col[t] = fg_family_icdf(&inputs[cop->input[k]], cop->elem[k], u, uc);
    }
  }
}

static void draw_run(const fg_sampler *s, fg_sample_scratch *w, const run *R,
                     double *out, size_t stride) {
  int ninputs, ncop;
  const fg_input *inputs = fg_sampler_inputs(s, &ninputs);
  const fg_copula *cops = fg_sampler_copulas(s, &ncop);
  double **cols, *tmp;
  fg_sample_scratch_block(w, &cols, &tmp);
  uint32_t c = 0;
  for (int i = 0; i < ninputs; i++) {
    const fg_input *in = &inputs[i];
    int used = in->kind == FG_FAM_SCENARIO_TABLE ? 1 : in->size;
    for (int e = 0; e < used; e++, c++)
      uniforms(R, c, out + (size_t)(in->base + e) * stride);
  }
  for (int i = 0; i < ninputs; i++)
    if (inputs[i].copula < 0) map_input(&inputs[i], cols, R->n, out, stride);
  for (int k = 0; k < ncop; k++)
    map_copula(&cops[k], inputs, cols, tmp, R->n, out, stride);
}

void fg_sampler_draw_design(const fg_sampler *s, fg_sample_scratch *w,
                            uint64_t seed, fg_stream stream, fg_design d,
                            uint64_t rep_size, uint64_t first, int n,
                            double *out, size_t stride) {
  if (d != FG_DESIGN_ANTITHETIC && d != FG_DESIGN_LATIN_HYPERCUBE &&
      d != FG_DESIGN_SOBOL) {
    fg_sampler_draw(s, w, seed, stream, first, n, out, stride);
    return;
  }
  run R = {.key = fg_stream_key_make(seed, stream),
           .design = d,
           .rep = rep_size ? rep_size : 1};
  for (int t0 = 0; t0 < n;) {
    R.first = first + (uint64_t)t0;
    R.r = R.first / R.rep;
    R.q0 = R.first % R.rep;
    uint64_t left = R.rep - R.q0;
    R.n = (uint64_t)(n - t0) < left ? n - t0 : (int)left;
    draw_run(s, w, &R, out + t0, stride);
    t0 += R.n;
  }
}

/* ---- checks and preparation ------------------------------------------- */

static const char *design_name(fg_design d) {
  switch (d) {
  case FG_DESIGN_MONTE_CARLO: return "monte_carlo";
  case FG_DESIGN_ANTITHETIC: return "antithetic";
  case FG_DESIGN_LATIN_HYPERCUBE: return "latin_hypercube";
  case FG_DESIGN_SOBOL: return "sobol";
  }
  return "unknown";
}

fg_status fg_sampler_design_check(const fg_sampler *s, fg_design d,
                                  fg_problem *p) {
  if (d == FG_DESIGN_MONTE_CARLO) return FG_OK;
  if (d != FG_DESIGN_ANTITHETIC && d != FG_DESIGN_LATIN_HYPERCUBE &&
      d != FG_DESIGN_SOBOL)
    return fg_problem_add(p, FG_EINVAL, "/sampling", 0,
                          "unknown sampling design %d", (int)d);
  int ninputs;
  const fg_input *inputs = fg_sampler_inputs(s, &ninputs);
  fg_status st = FG_OK;
  long coords = 0;
  for (int i = 0; i < ninputs; i++) {
    const fg_input *in = &inputs[i];
    coords += in->kind == FG_FAM_SCENARIO_TABLE ? 1 : in->size;
    if (in->kind == FG_FAM_MVN || in->kind == FG_FAM_EMPIRICAL ||
        in->kind == FG_FAM_SCENARIO_TABLE)
      continue;
    const fg_family_def *def = fg_family_find(in->family);
    if (def && def->icdf) continue;
    char ptr[FG_POINTER_MAX];
    snprintf(ptr, sizeof ptr, "/uncertain/%d/distribution/family", i);
    st = fg_problem_add(p, FG_EUNSUPPORTED, ptr, 0,
                        "input '%.64s' of family '%s' has no inverse CDF, "
                        "so the %s design cannot draw it",
                        in->name, in->family, design_name(d));
  }
  if (st != FG_OK) return st;
  int max = fg_design_sobol_max_dims();
  if (d == FG_DESIGN_SOBOL && coords > max)
    return fg_problem_limit(p, "/sampling", FG_LIMIT_SOBOL_DIMENSIONS, max,
                            "expected at most %d Sobol dimensions, found %ld "
                            "(one per uncertain element, one per scenario "
                            "table); use latin_hypercube",
                            max, coords);
  return FG_OK;
}

static int cmp_double(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

int fg_design_prepare_input(fg_input *in) {
  int n = in->nvalues;
  if (in->kind == FG_FAM_EMPIRICAL && n > 0 && !in->sorted) {
    in->sorted = malloc((size_t)n * sizeof(double));
    if (!in->sorted) return -1;
    memcpy(in->sorted, in->values, (size_t)n * sizeof(double));
    qsort(in->sorted, (size_t)n, sizeof(double), cmp_double);
  }
  if (in->kind == FG_FAM_SCENARIO_TABLE && n > 0 && !in->cdf_lo) {
    in->cdf_lo = malloc((size_t)n * sizeof(double));
    in->cdf_hi = malloc((size_t)n * sizeof(double));
    if (!in->cdf_lo || !in->cdf_hi) return -1;
    double acc = 0;
    for (int k = 0; k < n; k++) {
      acc += in->weights ? in->weights[k] : 1.0 / n;
      in->cdf_lo[k] = acc; /* P(row <= k) */
    }
    acc = 0;
    for (int k = n - 1; k >= 0; k--) {
      in->cdf_hi[k] = acc; /* P(row > k) */
      acc += in->weights ? in->weights[k] : 1.0 / n;
    }
    in->cdf_lo[n - 1] = 1.0;
  }
  return 0;
}
