/*
 * core/dense.h -- register-blocked dense kernels over a block of samples
 * (core/dense.c): the lower-triangular map of normal and copula blocks
 * (sample/) and the affine rows of a check's row plan (engine/).
 *
 * Layout: a "column" is one value per lane, lanes [0, n) consecutive in
 * memory (a register of the block stream, stride FG_BLOCK). Coefficients
 * are row-major.
 *
 * The rule every path keeps (and the unit test checks bit for bit): per
 * lane and row the value is
 *     acc = start;  acc = acc + coef_k * col_k   (k ascending)
 * with the product and the sum each rounded (no fused multiply-add; the
 * build is -ffp-contract=off), so the value of a lane depends neither on
 * the processor's vector width, nor on the tile the lane falls in, nor on
 * n. Blocking over rows and lanes only changes which of these operations
 * run side by side.
 *
 * Thread use: pure functions of their arguments; any thread. The path is
 * chosen once per process (fg_dense_force changes it, for tests only).
 */
#ifndef FG_CORE_DENSE_H
#define FG_CORE_DENSE_H

#include <stddef.h>

/* In place, for lanes [0, n): cols[i] = mean_i + sum_{k <= i} l[i*d + k] *
 * cols[k] (k ascending from the mean; mean may be NULL: 0), l lower d x d
 * row-major. cols[i] must not alias cols[k] for i != k. */
void fg_dense_lower(const double *l, const double *mean, int d,
                    double *const *cols, int n);

/* For lanes [0, n) and rows h < nrows: out[h] = start_h + sum_{k < ncols}
 * g[h*ncols + k] * in[k] (k ascending; start may be NULL: 0). No out[h]
 * may alias an in[k] or another out. */
void fg_dense_rows(const double *g, const double *start, int nrows, int ncols,
                   const double *const *in, double *const *out, int n);

/* Tests only (not while kernels run): level 0 the widest path the
 * processor has, 1 at most AVX2, 2 the baseline vectors (SSE2), 3 the
 * scalar loop alone. Returns the path now used: 3 AVX-512F, 2 AVX2,
 * 1 baseline, 0 scalar. */
int fg_dense_force(int level);

#endif
