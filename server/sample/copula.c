/*
 * sample/copula.c -- `dependence` entries: the Gaussian copula.
 *
 * Design: an entry {"kind": "gaussian_copula", "members": [names],
 * "correlation": C} ties the elements of its members, flattened in the
 * listed order, into d copula dimensions. Per sample, one standard normal
 * per tied element is drawn from the slot of that element's own sampler
 * dimension; x = L z with L the Cholesky factor of C; each element is then
 * F^-1(Phi(x)) under its own family, with Phi taken from the tail where it
 * is exact, so every marginal is exactly the declared one (for untruncated
 * normal and lognormal members F^-1(Phi(x)) is an affine map of x, taken
 * directly).
 *
 * C forms and their factors, all O(d) or O(d^2) per sample:
 *   full matrix     d x d, symmetric, unit diagonal, factored by
 *                   fg_family_cholesky (at most FG_TABLE_CELLS_MAX cells)
 *   {"equal": r}    compound symmetry. Its factor has one value per column
 *                   below the diagonal: with s_j = sum_{k<j} c_k^2,
 *                   L_jj = sqrt(1 - s_j) and L_ij = c_j = (r - s_j)/L_jj
 *                   for i > j; the first j with 1 - s_j <= 0 is the first
 *                   leading minor that fails. No matrix is stored.
 *   {"ar1": r}      r^|i-j|, factored by the recursion
 *                   x_0 = z_0, x_i = r x_{i-1} + sqrt(1 - r^2) z_i.
 * Members need an inverse CDF (an icdf in the family table); an input
 * belongs to at most one entry.
 *
 * Thread use: parsing in the building thread; draws read only.
 */
#include "sample/sample_internal.h"

#include "feasgate/limits.h"

#include <cjson/cJSON.h>
#include <gsl/gsl_cdf.h>

#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static fg_status bad(fg_problem *p, fg_status st, const char *ptr,
                     const char *msg) {
  return fg_problem_add(p, st, ptr, 0, "%s", msg);
}

static fg_status parse_members(fg_copula *cop, int index, const cJSON *m,
                               const char *ptr, fg_input *inputs, int ninputs,
                               fg_problem *p) {
  if (!cJSON_IsArray(m) || cJSON_GetArraySize(m) < 1)
    return fg_problem_add(p, FG_EINVAL, ptr, 0,
                          "expected a non-empty array of input names, found "
                          "%s",
                          cJSON_IsArray(m) ? "an empty array"
                                           : fg_family_json_type(m));
  fg_status st = FG_OK;
  long d = 0;
  int k = 0;
  for (const cJSON *x = m->child; x; x = x->next, k++) {
    char eptr[FG_POINTER_MAX];
    fg_pointer_index(eptr, sizeof eptr, ptr, k);
    if (!cJSON_IsString(x)) {
      st = fg_problem_add(p, FG_EINVAL, eptr, 0,
                          "expected the name of an uncertain input, found %s",
                          fg_family_json_type(x));
      continue;
    }
    int i = 0;
    while (i < ninputs && strcmp(inputs[i].name, x->valuestring) != 0)
      i++;
    if (i == ninputs) {
      st = fg_problem_add(p, FG_EINVAL, eptr, 0,
                          "expected the name of an uncertain input, found "
                          "'%.64s'",
                          x->valuestring);
      continue;
    }
    fg_input *in = &inputs[i];
    if (in->copula == index) {
      st = fg_problem_add(p, FG_EINVAL, eptr, 0,
                          "expected each member once, found '%.64s' twice",
                          in->name);
      continue;
    }
    if (in->copula >= 0) {
      st = fg_problem_add(p, FG_EINVAL, eptr, 0,
                          "expected an input in at most one dependence "
                          "entry, found '%.64s' already in entry %d",
                          in->name, in->copula);
      continue;
    }
    in->copula = index;
    if (!in->ok) {
      st = FG_EINVAL; /* its distribution was reported already */
      continue;
    }
    const fg_family_def *def = fg_family_find(in->family);
    if (!def || !def->icdf) {
      st = fg_problem_add(p, FG_EINVAL, eptr, 0,
                          "expected a member whose family has an inverse "
                          "CDF, found '%.64s' of family '%s'",
                          in->name, in->family);
      continue;
    }
    d += in->size;
  }
  if (st != FG_OK) return st;
  cop->d = (int)d;
  cop->dims = malloc((size_t)d * sizeof(int));
  cop->input = malloc((size_t)d * sizeof(int));
  cop->elem = malloc((size_t)d * sizeof(int));
  if (!cop->dims || !cop->input || !cop->elem)
    return fg_problem_set(p, FG_ENOMEM, "out of memory reading %s", ptr);
  int t = 0;
  for (const cJSON *x = m->child; x; x = x->next) {
    int i = 0;
    while (strcmp(inputs[i].name, x->valuestring) != 0)
      i++;
    for (int e = 0; e < inputs[i].size; e++, t++) {
      cop->dims[t] = inputs[i].base + e;
      cop->input[t] = i;
      cop->elem[t] = e;
    }
  }
  return FG_OK;
}

static fg_status not_pd(fg_problem *p, const char *ptr, int k) {
  return fg_problem_add(p, FG_EINVAL, ptr, 0,
                        "correlation is not positive definite: leading minor "
                        "%d is not positive",
                        k);
}

static fg_status parse_structured(fg_copula *cop, const cJSON *c,
                                  const char *ptr, fg_problem *p) {
  const cJSON *eq = cJSON_GetObjectItemCaseSensitive(c, "equal");
  const cJSON *ar = cJSON_GetObjectItemCaseSensitive(c, "ar1");
  if (cJSON_GetArraySize(c) != 1 || (!eq && !ar))
    return bad(p, FG_EINVAL, ptr,
               "expected a matrix, {\"equal\": r} or {\"ar1\": r}, found an "
               "object with other members");
  const cJSON *v = eq ? eq : ar;
  char vptr[FG_POINTER_MAX];
  fg_pointer_join(vptr, sizeof vptr, ptr, eq ? "equal" : "ar1");
  if (!cJSON_IsNumber(v) || !isfinite(v->valuedouble))
    return fg_problem_add(p, FG_EINVAL, vptr, 0,
                          "expected a correlation in [-1, 1], found %s",
                          fg_family_json_type(v));
  double r = v->valuedouble;
  if (fabs(r) > 1)
    return fg_problem_add(p, FG_EINVAL, vptr, 0,
                          "expected a correlation in [-1, 1], found %.15g", r);
  int d = cop->d;
  if (ar) {
    if (d > 1 && fabs(r) >= 1) return not_pd(p, ptr, 2);
    cop->form = FG_CORR_AR1;
    cop->r = r;
    cop->rc = sqrt((1 - r) * (1 + r));
    return FG_OK;
  }
  cop->form = FG_CORR_EQUAL;
  cop->c = malloc((size_t)d * sizeof(double));
  cop->dd = malloc((size_t)d * sizeof(double));
  if (!cop->c || !cop->dd)
    return fg_problem_set(p, FG_ENOMEM, "out of memory reading %s", ptr);
  double s = 0;
  for (int j = 0; j < d; j++) {
    double piv = 1 - s;
    if (!(piv > 16.0 * DBL_EPSILON * (double)d)) return not_pd(p, ptr, j + 1);
    cop->dd[j] = sqrt(piv);
    cop->c[j] = (r - s) / cop->dd[j];
    s += cop->c[j] * cop->c[j];
  }
  return FG_OK;
}

static fg_status parse_full(fg_copula *cop, const cJSON *c, const char *ptr,
                            fg_problem *p) {
  int d = cop->d;
  if ((double)d * (double)d > FG_TABLE_CELLS_MAX)
    return fg_problem_limit(p, ptr, FG_LIMIT_TABLE_CELLS, FG_TABLE_CELLS_MAX,
                            "expected a matrix of at most %d cells, found %d "
                            "x %d (use {\"equal\": r} or {\"ar1\": r})",
                            FG_TABLE_CELLS_MAX, d, d);
  cop->form = FG_CORR_FULL;
  cop->chol = malloc((size_t)d * (size_t)d * sizeof(double));
  if (!cop->chol)
    return fg_problem_set(p, FG_ENOMEM, "out of memory reading %s", ptr);
  if (fg_family_matrix_read(c, d, ptr, cop->chol, p) != 0) return FG_EINVAL;
  for (int i = 0; i < d; i++)
    for (int j = 0; j < d; j++) {
      double x = cop->chol[(size_t)i * (size_t)d + (size_t)j];
      if (i == j ? fabs(x - 1) <= 1e-12 : fabs(x) <= 1) continue;
      char rptr[FG_POINTER_MAX], eptr[FG_POINTER_MAX];
      fg_pointer_index(rptr, sizeof rptr, ptr, i);
      fg_pointer_index(eptr, sizeof eptr, rptr, j);
      return fg_problem_add(p, FG_EINVAL, eptr, 0,
                            i == j ? "expected 1 on the diagonal of a "
                                     "correlation matrix, found %.15g"
                                   : "expected a correlation in [-1, 1], "
                                     "found %.15g",
                            x);
    }
  if (fg_family_matrix_symmetric(cop->chol, d, ptr, "correlation", p) != 0)
    return FG_EINVAL;
  int k = fg_family_cholesky(cop->chol, d);
  if (k < 0)
    return fg_problem_set(p, FG_ENOMEM, "out of memory factoring %s", ptr);
  if (k > 0) return not_pd(p, ptr, k);
  return FG_OK;
}

fg_status fg_sampler_copula_parse(fg_copula *cop, int index, const cJSON *entry,
                                  const char *ptr, fg_input *inputs,
                                  int ninputs, fg_problem *p) {
  char mptr[FG_POINTER_MAX];
  memset(cop, 0, sizeof *cop);
  fg_status st = fg_family_expect_object(entry, ptr, "a dependence object", p);
  if (st != FG_OK) return st;
  const cJSON *kind = cJSON_GetObjectItemCaseSensitive(entry, "kind");
  fg_pointer_join(mptr, sizeof mptr, ptr, "kind");
  if (!kind)
    return bad(p, FG_EINVAL, ptr,
               "expected a member 'kind' (\"gaussian_copula\"), found none");
  if (!cJSON_IsString(kind))
    return fg_problem_add(p, FG_EINVAL, mptr, 0, "expected a string, found %s",
                          fg_family_json_type(kind));
  if (strcmp(kind->valuestring, "t_copula") == 0)
    return bad(p, FG_EUNSUPPORTED, mptr,
               "dependence kind 't_copula' is not yet supported");
  if (strcmp(kind->valuestring, "gaussian_copula") != 0)
    return fg_problem_add(p, FG_EINVAL, mptr, 0,
                          "unknown dependence kind '%.64s' (expected "
                          "gaussian_copula)",
                          kind->valuestring);
  for (const cJSON *m = entry->child; m; m = m->next) {
    const char *k = m->string ? m->string : "";
    if (!strcmp(k, "kind") || !strcmp(k, "members") ||
        !strcmp(k, "correlation"))
      continue;
    fg_pointer_join(mptr, sizeof mptr, ptr, k);
    st = fg_problem_add(p, FG_EINVAL, mptr, 0,
                        "unknown member '%.64s' of a gaussian_copula entry "
                        "(expected kind, members, correlation)",
                        k);
  }
  fg_pointer_join(mptr, sizeof mptr, ptr, "members");
  const cJSON *members = cJSON_GetObjectItemCaseSensitive(entry, "members");
  if (!members)
    return bad(p, FG_EINVAL, ptr,
               "expected a member 'members' (array of input names), found "
               "none");
  fg_status mst = parse_members(cop, index, members, mptr, inputs, ninputs, p);
  if (mst != FG_OK) return mst;
  const cJSON *c = cJSON_GetObjectItemCaseSensitive(entry, "correlation");
  fg_pointer_join(mptr, sizeof mptr, ptr, "correlation");
  if (!c)
    return bad(p, FG_EINVAL, ptr,
               "expected a member 'correlation' (matrix, {\"equal\": r} or "
               "{\"ar1\": r}), found none");
  fg_status cst = cJSON_IsObject(c) ? parse_structured(cop, c, mptr, p)
                                    : parse_full(cop, c, mptr, p);
  return cst != FG_OK ? cst : st;
}

void fg_sampler_copula_free(fg_copula *cop) {
  free(cop->dims);
  free(cop->input);
  free(cop->elem);
  free(cop->chol);
  free(cop->c);
  free(cop->dd);
  memset(cop, 0, sizeof *cop);
}

/* Correlate d columns of n standard normals in place with the entry's
 * factor (FULL by fg_family_lower_apply; EQUAL and AR1 by their
 * recursions, lane-parallel with one running value per lane in `tmp`).
 * Per lane the arithmetic does not depend on n. */
void fg_sampler_copula_correlate(const fg_copula *cop, double *const *cols,
                                 int n, double *tmp) {
  const int d = cop->d;
  switch (cop->form) {
  case FG_CORR_FULL: fg_family_lower_apply(cop->chol, NULL, d, n, cols); break;
  case FG_CORR_EQUAL: {
    double *restrict acc = tmp;
    for (int t = 0; t < n; t++)
      acc[t] = 0;
    for (int i = 0; i < d; i++) {
      double *restrict x = cols[i];
      const double di = cop->dd[i], ci = cop->c[i];
      for (int t = 0; t < n; t++) {
        double z = x[t];
        x[t] = acc[t] + di * z;
        acc[t] += ci * z;
      }
    }
    break;
  }
  case FG_CORR_AR1:
    for (int i = 1; i < d; i++) {
      const double *restrict prev = cols[i - 1];
      double *restrict x = cols[i];
      for (int t = 0; t < n; t++)
        x[t] = cop->r * prev[t] + cop->rc * x[t];
    }
    break;
  }
}

/* A block at a time: the members' standard normals go straight into
 * their output columns (member k's from the slot of its own dimension),
 * the correlation factor is applied in place over those columns (FULL by
 * fg_family_lower_apply; EQUAL and AR1 by their recursions, lane-parallel
 * with one running value per lane), then each column is mapped through its
 * member's marginal (fg_family_from_normal). Per lane the arithmetic is
 * the same whatever n and the block's position. */
void fg_sampler_copula_draw(const fg_copula *cop, const fg_input *inputs,
                            const fg_draw_ctx *dc, double *out, size_t stride) {
  const int d = cop->d, n = dc->n;
  double **cols = dc->cols;
  for (int k = 0; k < d; k++) {
    cols[k] = out + (size_t)cop->dims[k] * stride;
    fg_stream_normals(dc->key, dc->first, n, (uint32_t)cop->dims[k], dc->words,
                      cols[k]);
  }
  fg_sampler_copula_correlate(cop, cols, n, dc->tmp);
  for (int k = 0; k < d; k++)
    fg_family_from_normal(&inputs[cop->input[k]], cop->elem[k], dc, cols[k]);
}
