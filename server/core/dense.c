/*
 * core/dense.c -- register-blocked dense kernels over a block of samples:
 * the lower-triangular map x = mean + L z of multivariate normal and
 * Gaussian copula blocks, and the affine rows of a check's row plan
 * (engine/rowplan.c). See dense.h for the contract.
 *
 * Design: the work is a small matrix (rows x columns, at most a few
 * hundred each) times a block of lanes (FG_BLOCK samples). Lanes go in
 * tiles of two vectors; within a tile, rows go four at a time with their
 * eight accumulators in registers (dense_tile.h), so each column's tile is
 * loaded once per four rows and each coefficient broadcast once per tile.
 * A tile's columns (d x 8 lanes x 8 bytes for AVX2: 3.2 KiB at d = 50) are
 * first copied into one contiguous buffer, which stays in L1 through all
 * row blocks (the columns themselves lie FG_BLOCK doubles apart and would
 * crowd two cache sets). Lanes beyond the last whole tile run the scalar
 * loop below, which is also the reference.
 *
 * Paths: the scalar loop; SSE2 (the x86-64 baseline, 2 lanes a vector);
 * AVX2 and AVX-512F built with target attributes and chosen at first use
 * by __builtin_cpu_supports, as the Philox cipher (sample/cipher.c) is.
 * Every path performs, per lane and row, the same IEEE operations in the
 * same order (dense.h), so all give the same bits; fg_dense_force lets the
 * unit test compare them.
 *
 * Deliberately not done: reordering or splitting the sums (pairwise or
 * several partial accumulators per row would be faster for long rows but
 * would make values depend on the blocking), and skipping zero
 * coefficients (a branch per term; sparse rows stay with the interpreter).
 *
 * Thread use: any thread. The path flag is written once (pthread_once)
 * before any kernel reads it, and by fg_dense_force only in tests.
 */
#include "core/dense.h"
#include "feasgate/limits.h"

#if defined(__x86_64__) && defined(__GNUC__)
#define FG_DENSE_X86 1
#endif

#include <pthread.h>
#include <stdbool.h>
#include <string.h>

typedef struct dense_job {
  const double *g; /* row-major coefficients, row stride ld */
  size_t ld;
  const double *start; /* per row, or NULL (0) */
  int nrows, ncols;    /* ncols unused when lower */
  bool lower;          /* row i uses columns 0 .. i; in == out, in place */
  const double *const *in;
  double *const *out;
} dense_job;

/* The reference: lane by lane, rows from the last (for the in-place lower
 * map, row i reads columns k <= i, none written yet for this lane). */
static void lanes_scalar(const dense_job *j, int t0, int n) {
  for (int t = t0; t < n; t++)
    for (int i = j->nrows - 1; i >= 0; i--) {
      const double *gi = j->g + (size_t)i * j->ld;
      double acc = j->start ? j->start[i] : 0.0;
      int len = j->lower ? i + 1 : j->ncols;
      for (int k = 0; k < len; k++) {
        double prod = gi[k] * j->in[k][t];
        acc = acc + prod;
      }
      j->out[i][t] = acc;
    }
}


/* The baseline vector path (SSE2 on x86-64; plain vector code elsewhere,
 * which the compiler lowers to whatever it has). */
#if defined(FG_DENSE_X86)
#include <immintrin.h>
#endif

#define DT_W 2
#define DT_SUF base
#define DT_ATTR
#if defined(FG_DENSE_X86)
#define DT_SPLATP(p) _mm_load1_pd(p)
#endif
#include "core/dense_tile.h"
#undef DT_W
#undef DT_SUF
#undef DT_ATTR

#if defined(FG_DENSE_X86)
#define DT_W 4
#define DT_SUF avx2
#define DT_ATTR __attribute__((target("avx2")))
#define DT_SPLATP(p) _mm256_broadcast_sd(p)
#include "core/dense_tile.h"
#undef DT_W
#undef DT_SUF
#undef DT_ATTR

#define DT_W 8
#define DT_SUF avx512
#define DT_ATTR __attribute__((target("avx512f")))
#define DT_SPLATP(p) _mm512_set1_pd(*(p))
#include "core/dense_tile.h"
#undef DT_W
#undef DT_SUF
#undef DT_ATTR
#endif

/* 3 AVX-512F, 2 AVX2, 1 baseline vectors, 0 scalar. */
static int path = 1;
static pthread_once_t path_once = PTHREAD_ONCE_INIT;

static int widest(void) {
#if defined(FG_DENSE_X86)
  __builtin_cpu_init();
  if (__builtin_cpu_supports("avx512f")) return 3;
  if (__builtin_cpu_supports("avx2")) return 2;
#endif
  return 1;
}

static void path_init(void) {
  path = widest();
}

int fg_dense_force(int level) {
  pthread_once(&path_once, path_init);
  int w = widest();
  if (level <= 0) path = w;
  else if (level == 1) path = w < 2 ? w : 2;
  else if (level == 2) path = 1;
  else path = 0;
  return path;
}

static void run(const dense_job *j, int n) {
  pthread_once(&path_once, path_init);
  int t0 = 0;
  switch (path) {
#if defined(FG_DENSE_X86)
  case 3: t0 = tiles_avx512(j, n); break;
  case 2: t0 = tiles_avx2(j, n); break;
#endif
  case 1: t0 = tiles_base(j, n); break;
  default: break;
  }
  lanes_scalar(j, t0, n);
}

void fg_dense_lower(const double *l, const double *mean, int d,
                    double *const *cols, int n) {
  if (d <= 0 || n <= 0) return;
  dense_job j = {l, (size_t)d, mean, d, d, true,
                 (const double *const *)cols, cols};
  run(&j, n);
}

void fg_dense_rows(const double *g, const double *start, int nrows, int ncols,
                   const double *const *in, double *const *out, int n) {
  if (nrows <= 0 || n <= 0) return;
  dense_job j = {g, (size_t)(ncols > 0 ? ncols : 1), start, nrows, ncols,
                 false, in, out};
  run(&j, n);
}
