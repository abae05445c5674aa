/*
 * engine/rowplan.c -- a check's row plan: when every row that depends on
 * the uncertain inputs is affine in them, and every input those rows read
 * is jointly normal, the rows are evaluated as one dense product straight
 * from the standard normals behind the inputs, instead of drawing the
 * inputs through their factor and running the block stream.
 *
 * Folding (once per check, fg_rowplan_build, on the thread that starts the
 * check): expr/affine.c gives the rows at the check's decisions as
 * half-rows c + g . u <= 0 (a range row two). Every input dimension j with
 * a non-zero coefficient must be jointly normal (sample/'s
 * fg_sampler_gaussian: untruncated `normal`, or `multivariate_normal`,
 * outside any copula): u_j = mean_j + sum_k L_jk e_k with e_k the standard
 * normal of slot k. Then
 *     half-row h = start_h + sum_k G_hk e_k,
 *     start_h = c_h + sum_j g_hj mean_j,   G_hk = sum_j g_hj L_jk,
 * the sums over j ascending (fixed order: the same folded numbers on every
 * worker and run). Per block the folded inputs are drawn raw (their
 * standard normals, fg_sampler_draw_raw), and core/dense.c evaluates all
 * half-rows at once; a range row's excess is then MAX of its two halves
 * with opcodes.h's NaN rule. The Cholesky map of those inputs and the
 * interpreted row sums are skipped. Where the inputs' values are needed
 * after the rows (drivers, "explain": true; the explained scenario), they
 * are finished from the same normals with the same operations as the
 * plain draw (fg_sampler_finish_raw), so they are the plain draw's bits.
 *
 * What changes: the row values round differently from the block stream's
 * (the sums are regrouped), by a few units in the last place of the terms'
 * magnitude; counts can differ only for samples that lie that close to a
 * row's boundary (tests/unit/engine/test_rowplan.c bounds it sample by
 * sample).
 * The random streams do not change.
 *
 * When a check has no plan (fg_rowplan_build returns NULL): an uncertain
 * row that is not affine in the inputs; an input in a row that is not
 * jointly normal (or is a copula member); an objective that depends on
 * the inputs; no uncertain row; sizes beyond FG_EXACT_DIMS_MAX inputs or
 * FG_ROWPLAN_CELLS_MAX coefficients; folded coefficients that are not
 * finite; or a dense product costlier than FG_ROWPLAN_COST_FACTOR times
 * the work it replaces (sparse rows over large factors). The plan is used
 * by Monte Carlo draws only (the validation stream of a monte_carlo check,
 * and the in-sample design stream); designs keep the block stream.
 *
 * Thread use: a built plan is immutable and shared by the check's
 * workers; each binds it to its own registers (fg_rowplan_bind).
 */
#include "engine/engine_internal.h"

#include "core/dense.h"

#include <math.h>
#include <stdatomic.h>
#include <stdlib.h>
#include <string.h>

struct fg_rowplan {
  int nregs;         /* the program's registers; extras follow */
  int ncol, nh;      /* columns (dimensions) and half-rows */
  int *col;          /* dimension of column k, ascending */
  double *g, *start; /* nh x ncol folded coefficients; nh starts */
  int *out_reg;      /* per half-row: its register */
  int npairs;        /* range rows: excess = MAX(half a, half b) */
  int *pair_a, *pair_b, *pair_dest; /* half-rows and excess register */
  unsigned char *raw; /* per dimension: drawn raw (fg_sampler_draw_raw) */
};

static atomic_bool plan_off;

void fg_rowplan_force_off(bool off) {
  atomic_store(&plan_off, off);
}

void fg_rowplan_free(fg_rowplan *p) {
  if (!p) return;
  free(p->col), free(p->g), free(p->start), free(p->out_reg);
  free(p->pair_a), free(p->pair_b), free(p->pair_dest), free(p->raw);
  free(p);
}

/* The jointly normal representation of dimension j (see the top). */
typedef struct gauss {
  double mean;
  int group, size;
  const double *lrow;
} gauss;

/* Fold the kept half-rows (form rows `keep`, width nu + 1) into p. */
static bool fold(fg_rowplan *p, const double *form, const int *keep, int nu,
                 const unsigned char *inv, const gauss *gs, const int *colof) {
  int w = nu + 1;
  for (int h = 0; h < p->nh; h++) {
    const double *f = form + (size_t)keep[h] * (size_t)w;
    double *gh = p->g + (size_t)h * (size_t)p->ncol;
    double s = f[0];
    for (int j = 0; j < nu; j++) {
      if (!inv[j] || f[1 + j] == 0) continue;
      double a = f[1 + j];
      s = s + a * gs[j].mean;
      int top = j - gs[j].group; /* L_jk = 0 beyond the diagonal */
      for (int kk = 0; kk <= top; kk++) {
        double *cell = &gh[colof[gs[j].group + kk]];
        *cell = *cell + a * gs[j].lrow[kk];
      }
    }
    p->start[h] = s;
    if (!isfinite(s)) return false;
    for (int k = 0; k < p->ncol; k++)
      if (!isfinite(gh[k])) return false;
  }
  return true;
}

fg_rowplan *fg_rowplan_build(const fg_model *m, const double *setup_regs,
                             bool *oom) {
  *oom = false;
  if (atomic_load(&plan_off) || !m->sampler) return NULL;
  fg_program_info in;
  fg_program_get_info(m->program, &in);
  int nu = in.nuncertain;
  if (nu <= 0 || nu > FG_EXACT_DIMS_MAX) return NULL;
  if (in.objective_reg >= 0 && !in.objective_deterministic) return NULL;
  int nuncert = 0;
  for (int r = 0; r < in.nrows; r++) {
    if (in.rows[r].deterministic) continue;
    if (!fg_program_affine(m->program, r).in_inputs) return NULL;
    nuncert++;
  }
  int cap = 2 * in.nrows;
  if (nuncert == 0 ||
      (double)cap * (double)(nu + 1) > (double)FG_ROWPLAN_CELLS_MAX)
    return NULL;

  fg_rowplan *p = calloc(1, sizeof *p);
  double *form = malloc((size_t)cap * (size_t)(nu + 1) * sizeof(double));
  int *row_of = malloc((size_t)cap * sizeof(int));
  int *keep = malloc((size_t)cap * sizeof(int));
  unsigned char *inv = calloc((size_t)nu, 1);
  gauss *gs = calloc((size_t)nu, sizeof *gs);
  int *colof = malloc((size_t)nu * sizeof(int));
  bool ok = false;
  if (!p || !form || !row_of || !keep || !inv || !gs || !colof) goto nomem;
  p->raw = calloc((size_t)nu, 1);
  if (!p->raw) goto nomem;
  int bad;
  int nall = fg_program_affine_halfrows(m->program, setup_regs, form, row_of,
                                        cap, &bad);
  if (nall == -3) goto nomem;
  if (nall < 0) goto done;
  for (int h = 0; h < nall; h++)
    if (!in.rows[row_of[h]].deterministic) keep[p->nh++] = h;
  /* the inputs the rows read, each with its whole jointly normal block */
  double general = (double)in.nblock_insns;
  for (int h = 0; h < p->nh; h++)
    for (int j = 0; j < nu; j++)
      if (form[(size_t)keep[h] * (size_t)(nu + 1) + 1 + (size_t)j] != 0)
        inv[j] = 1;
  for (int j = 0; j < nu; j++) {
    if (!inv[j]) continue;
    gauss *g = &gs[j];
    if (!fg_sampler_gaussian(m->sampler, j, &g->mean, &g->group, &g->size,
                             &g->lrow))
      goto done;
    if (!p->raw[g->group])
      general += (double)g->size * (g->size + 1) / 2.0;
    for (int k = 0; k < g->size; k++) p->raw[g->group + k] = 1;
  }
  for (int j = 0; j < nu; j++)
    if (p->raw[j]) colof[j] = p->ncol++;
  if ((double)p->nh * (double)p->ncol > FG_ROWPLAN_COST_FACTOR * general)
    goto done;
  p->nregs = in.nregs;
  p->col = malloc((size_t)p->ncol * sizeof(int) + 1); /* ncol may be 0 */
  p->g = calloc((size_t)p->nh * (size_t)p->ncol + 1, sizeof(double));
  p->start = calloc((size_t)p->nh, sizeof(double));
  p->out_reg = malloc((size_t)p->nh * sizeof(int));
  p->pair_a = malloc((size_t)p->nh * sizeof(int));
  p->pair_b = malloc((size_t)p->nh * sizeof(int));
  p->pair_dest = malloc((size_t)p->nh * sizeof(int));
  if (!p->col || !p->g || !p->start || !p->out_reg || !p->pair_a ||
      !p->pair_b || !p->pair_dest)
    goto nomem;
  for (int j = 0; j < nu; j++)
    if (p->raw[j]) p->col[colof[j]] = j;
  if (!fold(p, form, keep, nu, inv, gs, colof)) goto done;
  /* outputs: a row of one half-row writes its excess register; a range
   * row's two halves go to extra registers and MAX writes the excess */
  for (int h = 0; h < p->nh; h++) {
    const fg_row *row = &in.rows[row_of[keep[h]]];
    bool two = h + 1 < p->nh && row_of[keep[h + 1]] == row_of[keep[h]];
    if (!two) {
      p->out_reg[h] = row->excess_reg;
      continue;
    }
    int q = p->npairs++;
    p->out_reg[h] = in.nregs + 2 * q;
    p->out_reg[h + 1] = in.nregs + 2 * q + 1;
    p->pair_a[q] = h, p->pair_b[q] = h + 1, p->pair_dest[q] = row->excess_reg;
    h++;
  }
  ok = true;
  goto done;
nomem:
  *oom = true;
done:
  free(form), free(row_of), free(keep), free(inv), free(gs), free(colof);
  if (!ok) {
    fg_rowplan_free(p);
    return NULL;
  }
  return p;
}

int fg_rowplan_extra_regs(const fg_rowplan *p) {
  return p ? 2 * p->npairs : 0;
}

int fg_rowplan_nptrs(const fg_rowplan *p) {
  return p ? p->ncol + p->nh + p->npairs : 0;
}

const unsigned char *fg_rowplan_raw(const fg_rowplan *p) {
  return p->raw;
}

void fg_rowplan_bind(const fg_rowplan *p, const double *u, double *regs,
                     double **ptrs) {
  for (int k = 0; k < p->ncol; k++)
    ptrs[k] = (double *)(u + (size_t)p->col[k] * FG_BLOCK);
  for (int h = 0; h < p->nh; h++)
    ptrs[p->ncol + h] = regs + (size_t)p->out_reg[h] * FG_BLOCK;
  for (int q = 0; q < p->npairs; q++)
    ptrs[p->ncol + p->nh + q] = regs + (size_t)p->pair_dest[q] * FG_BLOCK;
}

void fg_rowplan_rows(const fg_rowplan *p, double *const *ptrs, int n) {
  double *const *out = ptrs + p->ncol;
  fg_dense_rows(p->g, p->start, p->nh, p->ncol, (const double *const *)ptrs,
                out, n);
  for (int q = 0; q < p->npairs; q++) {
    const double *a = out[p->pair_a[q]], *b = out[p->pair_b[q]];
    double *d = out[p->nh + q];
    for (int t = 0; t < n; t++) { /* FG_OP_MAX: NaN propagates */
      double mx = a[t] > b[t] ? a[t] : b[t];
      d[t] = a[t] != a[t] ? a[t] : mx;
    }
  }
}
