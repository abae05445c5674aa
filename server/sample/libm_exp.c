/*
 * sample/libm_exp.c -- libm's exp over an array of lanes, called without
 * libm's errno wrapper where that is provably the same function.
 *
 * Why: a lognormal draw is one exp per lane, and exp is the largest single
 * cost of lognormal-heavy checks. On x86-64 glibc the public `exp` is a
 * small wrapper (it sets errno on overflow and underflow) around an
 * internal, processor-selected implementation, reached through a second
 * PLT indirection. glibc exports that very implementation as
 * `__exp_finite` (symbol version GLIBC_2.15, kept for binary
 * compatibility): the wrapper calls it and returns its result unchanged.
 * Calling it directly skips the wrapper and one indirection, about 30% of
 * the cost of a call on the benchmark machine, and gives the same bits.
 * feasgate never reads errno after a draw, so the wrapper's only effect is
 * not missed.
 *
 * Safety: the symbol is looked up at run time (dlvsym, by name and
 * version), never linked against, so a libm without it simply keeps
 * `exp`. When found, it is compared with `exp` bit for bit on a spread of
 * arguments (the whole double range, the ranges lognormal draws use, the
 * special values) before it is used; any difference, and `exp` is used.
 * Values are therefore those of libm's `exp` in every case.
 *
 * Thread use: the choice is made once (pthread_once); afterwards read-only.
 */
#define _GNU_SOURCE 1

#include "sample/sample_internal.h"

#include <dlfcn.h>
#include <math.h>
#include <pthread.h>
#include <stdint.h>
#include <string.h>

typedef double (*exp_fn)(double);

static exp_fn chosen_exp = exp;
static pthread_once_t exp_once = PTHREAD_ONCE_INIT;

static int same_bits(double a, double b) {
  if (isnan(a) && isnan(b)) return 1;
  return memcmp(&a, &b, sizeof a) == 0;
}

/* Does f agree with exp on every probe? */
static int agrees_with_exp(exp_fn f) {
  static const double special[] = {
      0.0,      -0.0,     1.0,        -1.0,     0.5,     1e-300, -1e-300,
      709.78,   709.79,   710.0,      -708.4,   -745.13, -745.14, -746.0,
      -1074.0,  1e308,    -1e308,     INFINITY, -INFINITY, NAN,  0x1p-54,
      -0x1p-54, 0x1p-1022, 88.72283905206835, -87.33654475055310};
  for (size_t i = 0; i < sizeof special / sizeof special[0]; i++)
    if (!same_bits(f(special[i]), exp(special[i]))) return 0;
  uint64_t s = UINT64_C(0x9E3779B97F4A7C15);
  for (int i = 0; i < 20000; i++) {
    /* xorshift64*: a fixed, cheap spread of arguments */
    s ^= s >> 12;
    s ^= s << 25;
    s ^= s >> 27;
    uint64_t r = s * UINT64_C(0x2545F4914F6CDD1D);
    double u = (double)(r >> 11) * 0x1p-53;   /* [0, 1) */
    double wide = -750.0 + 1465.0 * u;        /* the whole finite range */
    double narrow = -8.0 + 24.0 * u;          /* where lognormals live */
    if (!same_bits(f(wide), exp(wide)) || !same_bits(f(narrow), exp(narrow)))
      return 0;
  }
  return 1;
}

static void choose_exp(void) {
#if defined(__x86_64__) && defined(__GLIBC__)
  void *p = dlvsym(RTLD_DEFAULT, "__exp_finite", "GLIBC_2.15");
  if (p) {
    exp_fn f;
    memcpy(&f, &p, sizeof f); /* object to function pointer, as POSIX allows */
    if (agrees_with_exp(f)) chosen_exp = f;
  }
#endif
}

void fg_exp_lanes(double *x, int n) {
  pthread_once(&exp_once, choose_exp);
  exp_fn f = chosen_exp;
  for (int t = 0; t < n; t++)
    x[t] = f(x[t]);
}

int fg_exp_lanes_direct(void) {
  pthread_once(&exp_once, choose_exp);
  return chosen_exp != exp;
}
