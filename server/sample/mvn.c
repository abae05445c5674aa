/*
 * sample/mvn.c -- matrices, Cholesky factors and the multivariate normal.
 *
 * Design: a matrix parameter is an array of n rows of n finite numbers.
 * Covariance and correlation matrices must be symmetric (relative
 * tolerance 1e-12) and positive definite. The factor comes from
 * gsl_linalg_cholesky_decomp1 on a copy; when GSL refuses, an unblocked
 * elimination on the original finds the first leading minor that is not
 * positive, so the error can name it (the k-th pivot is the ratio of the
 * k-th and (k-1)-th leading minors, so the first non-positive pivot is the
 * first non-positive minor).
 *
 * multivariate_normal: `mean` (number or array of size) with either
 * `covariance` (size x size) or `sd` (number or array) with `correlation`
 * (size x size, unit diagonal); the factor of the covariance is then
 * diag(sd) times the factor of the correlation, computed once when the
 * model is built. A draw takes one standard normal per element, element k
 * from slot base + k (its dimension), and returns mean + L z, a whole
 * block of samples at a time (fg_family_lower_apply).
 *
 * Thread use: parsing in the building thread; draws read only.
 */
#include "sample/sample_internal.h"

#include "feasgate/limits.h"

#include <cjson/cJSON.h>
#include <gsl/gsl_linalg.h>

#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int fg_family_matrix_read(const cJSON *m, int n, const char *ptr, double *out,
                          fg_problem *p) {
  if (!cJSON_IsArray(m) || cJSON_GetArraySize(m) != n) {
    if (cJSON_IsArray(m))
      fg_problem_add(p, FG_EINVAL, ptr, 0,
                     "expected a matrix of %d rows of %d numbers, found %d "
                     "rows",
                     n, n, cJSON_GetArraySize(m));
    else
      fg_problem_add(p, FG_EINVAL, ptr, 0,
                     "expected a matrix of %d rows of %d numbers, found %s", n,
                     n, fg_family_json_type(m));
    return -1;
  }
  int i = 0, bad = 0;
  for (const cJSON *row = m->child; row; row = row->next, i++) {
    char rptr[FG_POINTER_MAX];
    fg_pointer_index(rptr, sizeof rptr, ptr, i);
    if (!cJSON_IsArray(row) || cJSON_GetArraySize(row) != n) {
      if (cJSON_IsArray(row))
        fg_problem_add(p, FG_EINVAL, rptr, 0,
                       "expected a row of %d numbers, found %d", n,
                       cJSON_GetArraySize(row));
      else
        fg_problem_add(p, FG_EINVAL, rptr, 0,
                       "expected a row of %d numbers, found %s", n,
                       fg_family_json_type(row));
      bad = 1;
      continue;
    }
    int j = 0;
    for (const cJSON *x = row->child; x; x = x->next, j++) {
      if (cJSON_IsNumber(x) && isfinite(x->valuedouble)) {
        out[(size_t)i * (size_t)n + (size_t)j] = x->valuedouble;
        continue;
      }
      char eptr[FG_POINTER_MAX];
      fg_pointer_index(eptr, sizeof eptr, rptr, j);
      fg_problem_add(
          p, FG_EINVAL, eptr, 0, "expected a finite number, found %s",
          cJSON_IsNumber(x) ? "one out of range" : fg_family_json_type(x));
      bad = 1;
    }
  }
  return bad ? -1 : 0;
}

int fg_family_matrix_symmetric(const double *a, int n, const char *ptr,
                               const char *what, fg_problem *p) {
  for (int i = 0; i < n; i++)
    for (int j = i + 1; j < n; j++) {
      double x = a[(size_t)i * (size_t)n + (size_t)j];
      double y = a[(size_t)j * (size_t)n + (size_t)i];
      double scale = fmax(fabs(x), fabs(y));
      if (fabs(x - y) <= 1e-12 * scale) continue;
      char rptr[FG_POINTER_MAX], eptr[FG_POINTER_MAX];
      fg_pointer_index(rptr, sizeof rptr, ptr, i);
      fg_pointer_index(eptr, sizeof eptr, rptr, j);
      fg_problem_add(p, FG_EINVAL, eptr, 0,
                     "expected a symmetric %s, found %s[%d][%d] = %.15g but "
                     "%s[%d][%d] = %.15g",
                     what, what, i, j, x, what, j, i, y);
      return -1;
    }
  return 0;
}

/* Unblocked elimination: the first k whose pivot is not positive (with a
 * rounding margin relative to the diagonal), or 0. Destroys a. */
static int first_bad_minor(double *a, int n) {
  for (int k = 0; k < n; k++) {
    double *rk = a + (size_t)k * (size_t)n;
    double diag = rk[k];
    double piv = diag;
    for (int j = 0; j < k; j++)
      piv -= rk[j] * rk[j];
    if (!(piv > 16.0 * DBL_EPSILON * (double)n * fabs(diag))) return k + 1;
    double l = sqrt(piv);
    rk[k] = l;
    for (int i = k + 1; i < n; i++) {
      double *ri = a + (size_t)i * (size_t)n;
      double s = ri[k];
      for (int j = 0; j < k; j++)
        s -= ri[j] * rk[j];
      ri[k] = s / l;
    }
  }
  return 0;
}

int fg_family_cholesky(double *a, int n) {
  size_t cells = (size_t)n * (size_t)n;
  double *f = malloc(cells * sizeof *f);
  if (!f) return -1;
  memcpy(f, a, cells * sizeof *f);
  gsl_matrix_view v = gsl_matrix_view_array(f, (size_t)n, (size_t)n);
  int st = gsl_linalg_cholesky_decomp1(&v.matrix);
  if (st == GSL_SUCCESS) {
    for (int i = 0; i < n; i++)
      for (int j = 0; j < n; j++)
        a[(size_t)i * (size_t)n + (size_t)j] =
            j <= i ? f[(size_t)i * (size_t)n + (size_t)j] : 0.0;
    free(f);
    return 0;
  }
  free(f);
  int k = first_bad_minor(a, n);
  return k > 0 ? k : n; /* GSL failed at rounding level: report the last */
}

/* Check a correlation matrix: unit diagonal, entries in [-1, 1]. */
static int correlation_entries(const double *r, int n, const char *ptr,
                               fg_problem *p) {
  for (int i = 0; i < n; i++)
    for (int j = 0; j < n; j++) {
      double x = r[(size_t)i * (size_t)n + (size_t)j];
      int ok = i == j ? fabs(x - 1.0) <= 1e-12 : fabs(x) <= 1.0;
      if (ok) continue;
      char rptr[FG_POINTER_MAX], eptr[FG_POINTER_MAX];
      fg_pointer_index(rptr, sizeof rptr, ptr, i);
      fg_pointer_index(eptr, sizeof eptr, rptr, j);
      if (i == j)
        fg_problem_add(p, FG_EINVAL, eptr, 0,
                       "expected 1 on the diagonal of a correlation matrix, "
                       "found %.15g",
                       x);
      else
        fg_problem_add(p, FG_EINVAL, eptr, 0,
                       "expected a correlation in [-1, 1], found %.15g", x);
      return -1;
    }
  return 0;
}

fg_status fg_family_mvn_parse(fg_input *in, fg_params *c) {
  int n = in->size;
  if (!in->is_vector) {
    fg_problem_add(c->p, FG_EINVAL, c->ptr, 0,
                   "expected a vector input (with a size) for family "
                   "'multivariate_normal', found a scalar input");
    return c->st = c->st ? c->st : FG_EINVAL;
  }
  fg_family_param_vec(c, "mean", in->par[0], 1, 0);
  int has_cov = fg_family_param_present(c, "covariance");
  int has_sd = fg_family_param_present(c, "sd");
  int has_cor = fg_family_param_present(c, "correlation");
  if (has_cov && (has_sd || has_cor)) {
    fg_problem_add(c->p, FG_EINVAL, c->ptr, 0,
                   "expected either covariance or sd with correlation, "
                   "found both forms");
    return c->st = c->st ? c->st : FG_EINVAL;
  }
  if (!has_cov && !(has_sd && has_cor)) {
    fg_problem_add(c->p, FG_EINVAL, c->ptr, 0,
                   "family 'multivariate_normal' needs 'covariance' or "
                   "both 'sd' and 'correlation', found %s",
                   has_sd    ? "only sd"
                   : has_cor ? "only correlation"
                             : "none");
    return c->st = c->st ? c->st : FG_EINVAL;
  }
  const char *mname = has_cov ? "covariance" : "correlation";
  char mptr[FG_POINTER_MAX];
  fg_pointer_join(mptr, sizeof mptr, c->ptr, mname);
  if ((double)n * (double)n > FG_TABLE_CELLS_MAX) {
    fg_problem_limit(c->p, mptr, FG_LIMIT_TABLE_CELLS, FG_TABLE_CELLS_MAX,
                     "expected a matrix of at most %d cells, found %d x %d",
                     FG_TABLE_CELLS_MAX, n, n);
    return c->st = c->st ? c->st : FG_ELIMIT;
  }
  if (has_sd && fg_family_param_vec(c, "sd", in->par[1], 1, 0) > 0) {
    for (int e = 0; e < n; e++) {
      if (in->par[1][e] > 0) continue;
      fg_family_param_error(c, FG_EINVAL, "sd", e,
                            "expected sd > 0, found %.15g", in->par[1][e]);
      break;
    }
  }
  in->chol = malloc((size_t)n * (size_t)n * sizeof(double));
  if (!in->chol)
    return c->st = fg_problem_set(c->p, FG_ENOMEM, "out of memory reading %s",
                                  mptr);
  const cJSON *m = cJSON_GetObjectItemCaseSensitive(c->dist, mname);
  if (fg_family_matrix_read(m, n, mptr, in->chol, c->p) != 0 ||
      (!has_cov && correlation_entries(in->chol, n, mptr, c->p) != 0) ||
      fg_family_matrix_symmetric(in->chol, n, mptr, mname, c->p) != 0)
    return c->st = c->st ? c->st : FG_EINVAL;
  if (c->st != FG_OK) return c->st;
  int k = fg_family_cholesky(in->chol, n);
  if (k < 0)
    return c->st = fg_problem_set(c->p, FG_ENOMEM, "out of memory factoring %s",
                                  mptr);
  if (k > 0) {
    fg_problem_add(c->p, FG_EINVAL, mptr, 0,
                   "%s is not positive definite: leading minor %d is not "
                   "positive",
                   mname, k);
    return c->st = FG_EINVAL;
  }
  if (!has_cov)
    for (int i = 0; i < n; i++)
      for (int j = 0; j <= i; j++)
        in->chol[(size_t)i * (size_t)n + (size_t)j] *= in->par[1][i];
  return c->st;
}

/* x_i = mean_i + sum_{k <= i} L_ik z_k for every lane, in place over the
 * columns that hold z (cols[k] = z_k). The lanes go in tiles of TILE = 8
 * (one cache line per column); within a tile rows go from the last to the
 * first, so row i still finds z_0 .. z_i unchanged, and the row's
 * accumulators stay in vector registers while its factor entries stream
 * past. A tile's d cache lines stay in L1 through all d rows, where a
 * row-by-row sweep over whole columns would stream d^2/2 columns from L2.
 * Per lane the sum runs over k in increasing order from the mean, exactly
 * as a scalar loop would (SSE2's packed multiply and add are the same
 * IEEE operations, and no fused multiply-add is used): the values do not
 * depend on the tile a lane falls in, on n, or on the block's position.
 * Deliberately not done: skipping zero factor entries (sparse factors are
 * rare and the branch would cost the dense case), and sums in another
 * order (they would change the values with the block size). */
#define TILE 8

#if defined(__SSE2__)
#include <emmintrin.h>

static void lower_tile(const double *chol, const double *mean, int d, int t0,
                       double *const *cols) {
  for (int i = d - 1; i >= 0; i--) {
    const double *li = chol + (size_t)i * (size_t)d;
    __m128d acc[TILE / 2];
    for (int h = 0; h < TILE / 2; h++)
      acc[h] = _mm_set1_pd(mean ? mean[i] : 0.0);
    for (int k = 0; k <= i; k++) {
      const double *zk = cols[k] + t0;
      __m128d l = _mm_set1_pd(li[k]);
      for (int h = 0; h < TILE / 2; h++)
        acc[h] = _mm_add_pd(acc[h], _mm_mul_pd(l, _mm_loadu_pd(zk + 2 * h)));
    }
    double *xi = cols[i] + t0;
    for (int h = 0; h < TILE / 2; h++)
      _mm_storeu_pd(xi + 2 * h, acc[h]);
  }
}
#else
static void lower_tile(const double *chol, const double *mean, int d, int t0,
                       double *const *cols) {
  for (int i = d - 1; i >= 0; i--) {
    const double *li = chol + (size_t)i * (size_t)d;
    double acc[TILE];
    for (int q = 0; q < TILE; q++)
      acc[q] = mean ? mean[i] : 0.0;
    for (int k = 0; k <= i; k++)
      for (int q = 0; q < TILE; q++)
        acc[q] += li[k] * cols[k][t0 + q];
    for (int q = 0; q < TILE; q++)
      cols[i][t0 + q] = acc[q];
  }
}
#endif

void fg_family_lower_apply(const double *chol, const double *mean, int d, int n,
                           double *const *cols) {
  int t0 = 0;
  for (; t0 + TILE <= n; t0 += TILE)
    lower_tile(chol, mean, d, t0, cols);
  for (int t = t0; t < n; t++) /* the last lanes of a short block */
    for (int i = d - 1; i >= 0; i--) {
      const double *li = chol + (size_t)i * (size_t)d;
      double acc = mean ? mean[i] : 0.0;
      for (int k = 0; k <= i; k++)
        acc += li[k] * cols[k][t];
      cols[i][t] = acc;
    }
}

void fg_family_mvn_draw(const fg_input *in, const fg_draw_ctx *dc, double *out,
                        size_t stride) {
  int d = in->size;
  for (int k = 0; k < d; k++)
    fg_stream_normals(dc->key, dc->first, dc->n, (uint32_t)(in->base + k),
                      dc->words, out + (size_t)(in->base + k) * stride);
  /* column pointers: at most FG_UNCERTAIN_DIMS_MAX, kept in the scratch */
  double **cols = dc->cols;
  for (int k = 0; k < d; k++)
    cols[k] = out + (size_t)(in->base + k) * stride;
  fg_family_lower_apply(in->chol, in->par[0], d, dc->n, cols);
}
