/*
 * sample/stream.c -- counter-based random streams (Philox4x32-10).
 *
 * Design: every random number feasgate uses is Philox4x32-10 applied to
 *   key     = { seed & 0xffffffff, (seed >> 32) | (stream << 24) }
 *   counter = { i & 0xffffffff, i >> 32, slot, draw }
 * for sample i. A GSL generator type made with Random123's GSL adaptor
 * (GSL_MICRORNG) is reset to { i lo, i hi, slot, 0 } before the values of
 * one (sample, slot) are drawn; the adaptor itself puts its call count into
 * the fourth word, which is the `draw` number, and hands out the four
 * 32-bit words of each block in turn. So GSL's samplers (ziggurat normals,
 * gamma, beta, Walker tables, rejection samplers) draw as many uniforms as
 * they need from a sub-stream that belongs to that sample and slot alone.
 *
 * Invariants: the values of (seed, stream, slot, sample) never depend on
 * what was drawn before; seeds must be below 2^56 for the stream bits to
 * stay apart (feasgate's seeds are at most 2^53).
 *
 * Thread use: the key functions are pure; a gsl_rng made here belongs to
 * one thread's scratch.
 */
#include "sample/sample_internal.h"

#include <Random123/gsl_microrng.h>
#include <Random123/philox.h>

#include <gsl/gsl_randist.h>

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

void fg_stream_u01(gsl_rng *r, double *u, double *uc) {
  /* 53 bits m from two words; u = (2m + 1) / 2^54 lies in (0, 1). The
   * numerator of u (2m + 1) or of 1 - u (2^54 - 2m - 1) is below 2^53 in
   * the half where that value is below 1/2, so each is exact there. */
  uint64_t hi = (uint64_t)gsl_rng_get(r) & 0xffffffffu;
  uint64_t lo = (uint64_t)gsl_rng_get(r) & 0xffffffffu;
  uint64_t m = (hi << 21) | (lo >> 11);
  const double scale = 1.0 / 18014398509481984.0; /* 2^-54 */
  *u = (double)(2 * m + 1) * scale;
  *uc = (double)((UINT64_C(1) << 54) - 2 * m - 1) * scale;
}

double fg_stream_normal(gsl_rng *r) {
  return gsl_ran_gaussian_ziggurat(r, 1.0);
}
