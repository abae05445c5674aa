/*
 * tests/unit/expr/expr_testutil.h -- what the expr/ unit tests share: a
 * small model built through the public interface of expr/expr.h (compile,
 * run the setup stream once and the block stream on a few lanes, read a
 * row's excess), and evaluation of one expression in a fixed environment.
 *
 * The fixed environment of the evaluation helpers:
 *   decisions  a = 2, v = [1, 4, 9], s5 = [0, 70, 150, 230, 300]
 *   uncertain  u = 1.5 + lane, w = [1 + lane, -2 - lane, 3.5]
 *
 * Header-only with static inline functions, like check.h, since every
 * test program is one file. Thread use: the test program's main thread.
 */
#ifndef FG_TEST_EXPR_TESTUTIL_H
#define FG_TEST_EXPR_TESTUTIL_H

#include "check.h"
#include "expr/expr.h"
#include "expr/opcodes.h"
#include "feasgate/limits.h"
#include "feasgate/status.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define LANES 3

typedef struct model {
  fg_expr_compiler *c;
  fg_problem p;
  fg_program *prog;
  fg_program_info info;
  double *setup, *block;
} model;

static inline void m_init(model *m) {
  memset(m, 0, sizeof *m);
  m->c = fg_expr_compiler_new();
  fg_problem_init(&m->p);
}

static inline void m_std_inputs(model *m) {
  fg_expr_declare_decision(m->c, "a", 0, "/decisions/0", &m->p);
  fg_expr_declare_decision(m->c, "v", 3, "/decisions/1", &m->p);
  fg_expr_declare_decision(m->c, "s5", 5, "/decisions/2", &m->p);
  fg_expr_declare_uncertain(m->c, "u", 0, "/uncertain/0", &m->p);
  fg_expr_declare_uncertain(m->c, "w", 3, "/uncertain/1", &m->p);
}

static inline void m_free(model *m) {
  fg_program_free(m->prog);
  fg_expr_compiler_free(m->c);
  free(m->setup);
  free(m->block);
  memset(m, 0, sizeof *m);
}

static inline fg_status m_finish(model *m) {
  fg_status st = fg_expr_finish(m->c, &m->prog, &m->p);
  if (st == FG_OK) fg_program_get_info(m->prog, &m->info);
  return st;
}

/* Runs setup and one block of `lanes` lanes; decisions and uncertain
 * values come from the fixed environment when dec/unc are NULL. */
static inline void m_run(model *m, const double *dec, int lanes,
                         double (*unc)(int element, int lane)) {
  const fg_program_info *in = &m->info;
  m->setup = calloc((size_t)in->nregs + 1, sizeof(double));
  m->block = calloc(((size_t)in->nregs + 1) * FG_BLOCK, sizeof(double));
  for (int i = 0; i < in->ndecision; i++)
    m->setup[in->decision_base + i] = dec[i];
  fg_program_run_setup(m->prog, m->setup);
  fg_program_broadcast(m->prog, m->setup, m->block);
  for (int k = 0; k < in->nuncertain; k++)
    for (int l = 0; l < FG_BLOCK; l++)
      m->block[(size_t)(in->uncertain_base + k) * FG_BLOCK + l] =
          l < lanes ? unc(k, l) : 0;
  fg_program_run_block(m->prog, m->block, lanes);
  /* the block stream runs once per block after a single broadcast: a
   * second run on the same registers must give the same bits (a setup
   * value overwritten by a block temporary would show here) */
  size_t bytes = (size_t)in->nregs * FG_BLOCK * sizeof(double);
  double *first = malloc(bytes ? bytes : 1);
  if (bytes) memcpy(first, m->block, bytes);
  fg_program_run_block(m->prog, m->block, lanes);
  CHECK(bytes == 0 || memcmp(first, m->block, bytes) == 0);
  free(first);
}

/* Row r's raw excess in lane l. */
static inline double m_row(const model *m, int r, int lane) {
  const fg_row *row = &m->info.rows[r];
  if (row->deterministic) return m->setup[row->excess_reg];
  return m->block[(size_t)row->excess_reg * FG_BLOCK + lane];
}

static const double std_dec[] = {2, 1, 4, 9, 0, 70, 150, 230, 300};

static inline double std_unc(int k, int lane) {
  switch (k) {
  case 0: return 1.5 + lane; /* u */
  case 1: return 1 + lane;   /* w[0] */
  case 2: return -2 - lane;  /* w[1] */
  default: return 3.5;       /* w[2] */
  }
}

/* Evaluates `src` in lane `lane` of the standard environment through the
 * constraint "(src) <= 0", whose excess is the value itself. Returns the
 * number of elements (0 for a scalar) or -1 when compiling fails. */
static inline int eval(const char *src, int lane, double *out) {
  model m;
  m_init(&m);
  m_std_inputs(&m);
  char text[4096];
  snprintf(text, sizeof text, "(%s) <= 0", src);
  fg_expr_constraint(m.c, "r", text, "/constraints/0/require", &m.p);
  if (m_finish(&m) != FG_OK) {
    fprintf(stderr, "eval(%s): %s (col %d)\n", src,
            m.p.nitems ? m.p.items[0].message : "?",
            m.p.nitems ? m.p.items[0].column - 1 : 0);
    m_free(&m);
    return -1;
  }
  m_run(&m, std_dec, LANES, std_unc);
  int n = m.info.nrows;
  for (int r = 0; r < n; r++)
    out[r] = m_row(&m, r, lane);
  int shape = m.info.rows[0].element < 0 ? 0 : n;
  m_free(&m);
  return shape;
}

static inline double eval1(const char *src, int lane) {
  double out[64];
  int n = eval(src, lane, out);
  CHECK_MSG(n == 0, "'%s' should be a scalar (got %d)", src, n);
  return n == 0 ? out[0] : NAN;
}

/* Checks that src evaluates in lane 0 to the vector want[0..n). */
static inline void check_vec(const char *src, const double *want, int n) {
  double out[64];
  int got = eval(src, 0, out);
  CHECK_MSG(got == n, "'%s': %d elements, expected %d", src, got, n);
  for (int i = 0; got == n && i < n; i++)
    CHECK_MSG(fabs(out[i] - want[i]) <= 1e-12 ||
                  (isnan(out[i]) && isnan(want[i])),
              "'%s'[%d] = %.17g, expected %.17g", src, i, out[i], want[i]);
}

/* Compiles one definition (or constraint with `cons`) in the standard
 * environment and returns the first problem item (column, message). */
static inline fg_status compile_error(const char *src, bool cons, int *col,
                                      char *msg, size_t cap) {
  model m;
  m_init(&m);
  m_std_inputs(&m);
  if (cons)
    fg_expr_constraint(m.c, "r", src, "/constraints/0/require", &m.p);
  else
    fg_expr_define(m.c, "d", src, "/definitions/0/value", &m.p);
  fg_status st = m_finish(&m);
  *col = m.p.nitems ? m.p.items[0].column : -1;
  snprintf(msg, cap, "%s", m.p.nitems ? m.p.items[0].message : "");
  m_free(&m);
  return st;
}

#endif
