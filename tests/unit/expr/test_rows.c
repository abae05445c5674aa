/*
 * tests/unit/expr/test_rows.c -- constraint rows as the interpreter runs
 * them.
 *
 * Covers: element-wise rows of a small queue model, row forms and chained
 * comparisons, a partial block (leftover lanes), register reuse in long
 * pipelines, dense rows whose multiply-add chains must give the bits of
 * the plain instruction order, and IEEE 754-2019 semantics of rows and
 * truth values (section 5.11: comparisons of equal infinities, unordered
 * comparisons with NaN). Expected values are worked out by hand or
 * recomputed in the plain order beside each check.
 */
#include "expr_testutil.h"

static double queue_unc(int k, int lane) {
  static const double dur[2][3] = {{15, 5, 8}, {5, 30, 1}};
  return dur[lane % 2][k];
}

static void test_elements_queue(void) {
  /* three jobs booked at start = [0, 10, 20]; a job begins when it is due
   * and the previous one has finished:
   *   finish[k] = max(start[k], finish[k-1]) + dur[k]
   *   wait = above_zero([0, finish[0], finish[1]] - start)
   * lane 0, dur = [15, 5, 8]: finish = [15, 20, 28], wait = [0, 5, 0]
   * lane 1, dur = [5, 30, 1]: finish = [5, 40, 41],  wait = [0, 0, 20] */
  model m;
  m_init(&m);
  fg_expr_declare_decision(m.c, "start", 3, "/decisions/0", &m.p);
  fg_expr_declare_uncertain(m.c, "dur", 3, "/uncertain/0", &m.p);
  const char *fin[] = {"start[0] + dur[0]", "max(start[1], finish[0]) + dur[1]",
                       "max(start[2], finish[1]) + dur[2]"};
  CHECK_INT(fg_expr_define_elements(m.c, "finish", fin, 3,
                                    "/definitions/0/elements", &m.p),
            FG_OK);
  CHECK_INT(fg_expr_define(m.c, "wait",
                           "above_zero([0, finish[0], finish[1]] - start)",
                           "/definitions/1/value", &m.p),
            FG_OK);
  CHECK_INT(fg_expr_constraint(m.c, "patient_wait", "wait <= 5",
                               "/constraints/0/require", &m.p),
            FG_OK);
  CHECK_INT(fg_expr_constraint(m.c, "session_end",
                               "finish[2] <= 30 + sum(finish[0:2]) * 0",
                               "/constraints/1/require", &m.p),
            FG_OK);
  CHECK_INT(fg_expr_objective(m.c, FG_OBJECTIVE_MINIMIZE,
                              "finish[2] + mean(wait)", "/objective", &m.p),
            FG_OK);
  CHECK_INT(m_finish(&m), FG_OK);
  CHECK_INT(m.info.nrows, 4);
  CHECK_STR(m.info.rows[0].name, "patient_wait[0]");
  CHECK_STR(m.info.rows[2].name, "patient_wait[2]");
  CHECK_STR(m.info.rows[3].name, "session_end");
  CHECK_INT(m.info.rows[1].element, 1);
  CHECK_INT(m.info.rows[3].element, -1);
  CHECK_INT(m.info.rows[3].constraint, 1);
  CHECK_INT(m.info.rows[0].kind, FG_ROW_LE);
  /* wait[0] = above_zero(0 - start[0]) needs no uncertain input: element-wise
   * determinism puts it in the setup stream */
  CHECK(m.info.rows[0].deterministic);
  CHECK(!m.info.rows[1].deterministic);
  CHECK_INT(m.info.objective_sense, FG_OBJECTIVE_MINIMIZE);
  CHECK(!m.info.objective_deterministic);
  const double start[] = {0, 10, 20};
  m_run(&m, start, 2, queue_unc);
  const double want[2][4] = {{-5, 0, -5, -2}, {-5, -5, 15, 11}};
  for (int l = 0; l < 2; l++)
    for (int r = 0; r < 4; r++)
      CHECK_NEAR(m_row(&m, r, l), want[l][r], 0);
  const double *obj = m.block + (size_t)m.info.objective_reg * FG_BLOCK;
  CHECK_NEAR(obj[0], 28 + 5.0 / 3.0, 1e-12);
  CHECK_NEAR(obj[1], 41 + 20.0 / 3.0, 1e-12);
  m_free(&m);
}

static void test_rows(void) {
  model m;
  m_init(&m);
  m_std_inputs(&m);
  fg_expr_constraint(m.c, "ge", "w >= v - 3", "/c/0", &m.p);
  fg_expr_constraint(m.c, "range", "1 <= u <= 3", "/c/1", &m.p);
  fg_expr_constraint(m.c, "range2", "3 >= w > 0", "/c/2", &m.p);
  fg_expr_constraint(m.c, "det", "a + 1 <= v", "/c/3", &m.p);
  fg_expr_constraint(m.c, "eq", "v == [1, 4, 8]", "/c/4", &m.p);
  fg_expr_constraint(m.c, "eqs", "a * 2 == 4", "/c/5", &m.p);
  fg_expr_constraint(m.c, "mixed", "[u, a, 1] < 2", "/c/6", &m.p);
  fg_expr_objective(m.c, FG_OBJECTIVE_MAXIMIZE, "a * 3", "/o", &m.p);
  CHECK_INT(m_finish(&m), FG_OK);
  CHECK_INT(m.info.nrows, 3 + 1 + 3 + 3 + 3 + 1 + 3);
  CHECK_INT(m.info.ndeterministic_rows, 3 + 3 + 1 + 2);
  CHECK_STR(m.info.rows[0].name, "ge[0]");
  CHECK_INT(m.info.rows[0].kind, FG_ROW_GE);
  CHECK_STR(m.info.rows[3].name, "range");
  CHECK_INT(m.info.rows[3].kind, FG_ROW_RANGE);
  CHECK_INT(m.info.rows[4].kind, FG_ROW_RANGE);
  CHECK_STR(m.info.rows[7].name, "det[0]");
  CHECK(m.info.rows[7].deterministic && m.info.rows[9].deterministic);
  CHECK_INT(m.info.rows[10].kind, FG_ROW_EQ);
  CHECK_STR(m.info.rows[13].name, "eqs");
  CHECK_INT(m.info.rows[13].constraint, 5);
  CHECK(!m.info.rows[14].deterministic && m.info.rows[15].deterministic);
  CHECK(m.info.objective_deterministic);
  CHECK_INT(m.info.objective_sense, FG_OBJECTIVE_MAXIMIZE);
  m_run(&m, std_dec, LANES, std_unc);
  /* ge: excess = (v - 3) - w; lane 1: w = [2, -3, 3.5] */
  CHECK_NEAR(m_row(&m, 0, 1), -4, 0);
  CHECK_NEAR(m_row(&m, 1, 1), 4, 0);
  CHECK_NEAR(m_row(&m, 2, 1), 2.5, 0);
  /* range: max(1 - u, u - 3): lane 0 u=1.5 -> -0.5; lane 2 u=3.5 -> 0.5 */
  CHECK_NEAR(m_row(&m, 3, 0), -0.5, 0);
  CHECK_NEAR(m_row(&m, 3, 2), 0.5, 0);
  /* range2 in lane 0, w = [1, -2, 3.5]: max(0 - w, w - 3) */
  CHECK_NEAR(m_row(&m, 4, 0), -1, 0);
  CHECK_NEAR(m_row(&m, 5, 0), 2, 0);
  CHECK_NEAR(m_row(&m, 6, 0), 0.5, 0);
  /* det: 3 - v = [2, -1, -6], from the setup stream */
  CHECK_NEAR(m_row(&m, 7, 0), 2, 0);
  CHECK_NEAR(m_row(&m, 8, 0), -1, 0);
  CHECK_NEAR(m_row(&m, 9, 0), -6, 0);
  /* eq: |v - [1, 4, 8]| */
  CHECK_NEAR(m_row(&m, 10, 0), 0, 0);
  CHECK_NEAR(m_row(&m, 12, 0), 1, 0);
  CHECK_NEAR(m_row(&m, 13, 0), 0, 0);
  /* mixed: [u, a, 1] - 2 */
  CHECK_NEAR(m_row(&m, 14, 2), 1.5, 0);
  CHECK_NEAR(m_row(&m, 15, 2), 0, 0);
  CHECK_NEAR(m_row(&m, 16, 2), -1, 0);
  CHECK_NEAR(m.setup[m.info.objective_reg], 6, 0);
  /* deterministic rows are also readable in the block registers */
  CHECK_NEAR(m.block[(size_t)m.info.rows[7].excess_reg * FG_BLOCK + 200], 2, 0);
  m_free(&m);
}

static void test_partial_block(void) {
  model m;
  m_init(&m);
  m_std_inputs(&m);
  fg_expr_constraint(m.c, "c", "w * u + a <= 4", "/c/0", &m.p);
  CHECK_INT(m_finish(&m), FG_OK);
  const fg_program_info *in = &m.info;
  double *setup = calloc((size_t)in->nregs, sizeof *setup);
  double *block = calloc((size_t)in->nregs * FG_BLOCK, sizeof *block);
  for (int i = 0; i < in->ndecision; i++)
    setup[i] = std_dec[i];
  fg_program_run_setup(m.prog, setup);
  fg_program_broadcast(m.prog, setup, block);
  /* decisions are broadcast to every lane */
  CHECK_NEAR(block[(size_t)in->decision_base * FG_BLOCK + FG_BLOCK - 1], 2, 0);
  const int n = 5;
  for (int k = 0; k < in->nuncertain; k++)
    for (int l = 0; l < n; l++)
      block[(size_t)(in->uncertain_base + k) * FG_BLOCK + l] = std_unc(k, l);
  for (int r = 0; r < in->nrows; r++)
    for (int l = n; l < FG_BLOCK; l++)
      block[(size_t)in->rows[r].excess_reg * FG_BLOCK + l] = 777;
  fg_program_run_block(m.prog, block, n);
  bool untouched = true;
  for (int r = 0; r < in->nrows; r++) {
    const double *ex = block + (size_t)in->rows[r].excess_reg * FG_BLOCK;
    for (int l = 0; l < n; l++) {
      double wv = std_unc(1 + r, l), uv = std_unc(0, l);
      CHECK_NEAR(ex[l], wv * uv + 2 - 4, 1e-12);
    }
    for (int l = n; l < FG_BLOCK; l++)
      untouched &= ex[l] == 777;
  }
  CHECK(untouched);
  free(setup);
  free(block);
  m_free(&m);
}

static double big_unc(int k, int lane) {
  return (double)((k * 7 + lane * 3) % 13) - 6;
}

static void test_register_reuse(void) {
  /* a long vector pipeline keeps few registers: temporaries are recycled
   * after their last use */
  enum { N = 2000 };
  model m;
  m_init(&m);
  fg_expr_declare_decision(m.c, "x", N, "/decisions/0", &m.p);
  fg_expr_declare_uncertain(m.c, "y", N, "/uncertain/0", &m.p);
  fg_expr_define(m.c, "d", "above_zero(x - y) * 2 + y / 3 - abs(y) ^ 2",
                 "/definitions/0/value", &m.p);
  fg_expr_define(m.c, "e", "sqrt(abs(d)) + 1", "/definitions/1/value", &m.p);
  fg_expr_constraint(m.c, "c", "sum(e) + max(d) <= 10", "/c/0", &m.p);
  fg_expr_constraint(m.c, "c2", "e[5] <= 3", "/c/1", &m.p);
  CHECK_INT(m_finish(&m), FG_OK);
  /* ten element-wise ops per element would need 10 N registers beyond
   * the 2 N inputs without reuse; here only d stays live (max(d) comes
   * after sum(e)) and the temporaries of one element die at once */
  CHECK_MSG(m.info.nregs <= 2 * N + N + 64, "nregs = %d", m.info.nregs);
  CHECK(m.info.nblock_insns > 9 * N);
  double *dec = malloc(sizeof *dec * N);
  for (int i = 0; i < N; i++)
    dec[i] = i % 7;
  m_run(&m, dec, 2, big_unc);
  /* reference computed directly in C, lane 1 */
  double sum = 0, mx = -INFINITY, d5 = 0;
  for (int i = 0; i < N; i++) {
    double yv = big_unc(i, 1);
    double dv = fmax(dec[i] - yv, 0) * 2 + yv / 3 - pow(fabs(yv), 2);
    double ev = sqrt(fabs(dv)) + 1;
    sum += ev;
    mx = dv > mx ? dv : mx;
    if (i == 5) d5 = ev;
  }
  CHECK_NEAR(m_row(&m, 0, 1), sum + mx - 10, 1e-9);
  CHECK_NEAR(m_row(&m, 1, 1), d5 - 3, 1e-12);
  free(dec);
  m_free(&m);
}

/* Dense rows (fuse.c / interp.c's multiply-add chains): dot products with
 * literal and with decision coefficients give the bits of the plain
 * instruction order -- acc = k_0 z_0, then acc = k_i z_i + acc, each
 * rounded -- on a full block and on a short one (leftover lanes), and a
 * running sum of the same kind stays readable element by element. */
static double dense_unc(int k, int lane) {
  return sin(0.37 * k + 0.011 * lane) * (1 + k % 3) - 0.1 * lane;
}

static void test_dense_rows(void) {
  static const double lit[12] = {0.3, -1.25, 2.5, 0.01, -0.7, 1e-3,
                                 4.0, -2.0,  0.5, 0.25, 3.3,  -0.9};
  double dec[12];
  for (int i = 0; i < 12; i++) dec[i] = 0.1 * i - 0.45;
  for (int pass = 0; pass < 2; pass++) {
    int lanes = pass ? 37 : FG_BLOCK;
    model m;
    m_init(&m);
    fg_expr_declare_decision(m.c, "c", 12, "/decisions/0", &m.p);
    fg_expr_declare_uncertain(m.c, "z", 12, "/uncertain/0", &m.p);
    char row[512];
    int len = snprintf(row, sizeof row, "dot([");
    for (int i = 0; i < 12; i++)
      len += snprintf(row + len, sizeof row - (size_t)len, "%s%.17g",
                      i ? ", " : "", lit[i]);
    snprintf(row + len, sizeof row - (size_t)len, "], z) <= 5");
    fg_expr_constraint(m.c, "lit", row, "/c/0", &m.p);
    fg_expr_constraint(m.c, "dec", "dot(c, z) + 2 * z[0] <= 1", "/c/1", &m.p);
    fg_expr_constraint(m.c, "run", "running_sum(c * z) <= 3", "/c/2", &m.p);
    CHECK_INT(m_finish(&m), FG_OK);
    m_run(&m, dec, lanes, dense_unc);
    bool same = true;
    for (int l = 0; l < lanes; l++) {
      double a = lit[0] * dense_unc(0, l), b = dec[0] * dense_unc(0, l);
      for (int i = 1; i < 12; i++) {
        double pa = lit[i] * dense_unc(i, l), pb = dec[i] * dense_unc(i, l);
        a = pa + a;
        b = pb + b;
      }
      same &= m_row(&m, 0, l) == a - 5;
      same &= m_row(&m, 1, l) == (b + 2 * dense_unc(0, l)) - 1;
      double r = 0;
      for (int i = 0; i < 12; i++) {
        r = i ? r + dec[i] * dense_unc(i, l) : dec[0] * dense_unc(0, l);
        same &= m_row(&m, 2 + i, l) == r - 3;
      }
    }
    CHECK_MSG(same, "dense rows differ from the plain order (%d lanes)", lanes);
    m_free(&m);
  }
}

/* IEEE semantics of rows and truth values (opcodes.h; IEEE 754-2019
 * section 5.11: comparisons of equal infinities are "equal", any
 * comparison with NaN is "unordered"): a <= b holds by IEEE rules, so
 * equal infinities hold with excess 0; a NaN side makes the excess NaN;
 * a NaN truth operand of ?:, &&, ||, ! gives NaN instead of counting as
 * true. In every lane of a full block (the vector loops) and in the setup
 * stream (one lane, the same loop with stride 1). */
static bool same_bits(double x, double y) {
  return memcmp(&x, &y, sizeof x) == 0 || (isnan(x) && isnan(y));
}

static void test_ieee_rows(void) {
  static const struct {
    const char *src;
    double want; /* the excess in every lane */
  } rows[] = {
      {"exp(1000 + u) <= exp(1000 + u)", 0.0},
      {"-exp(1000 + u) >= -exp(1000 + u)", 0.0},
      {"-exp(1000 + u) <= -exp(1000 + u)", 0.0},
      {"exp(1000 + u) <= 1", INFINITY},
      {"-exp(1000 + u) <= 1", -INFINITY},
      {"1 <= exp(1000 + u) <= exp(1000 + u)", 0.0},
      {"exp(1000 + a) <= exp(1000 + a)", 0.0}, /* setup stream */
      {"exp(1000) <= exp(1000)", 0.0},         /* not folded: inf */
      {"u + 0 <= u", 0.0},
      {"sqrt(-u) <= 1", NAN},
      {"(sqrt(-u) ? 1 : 0) <= 2", NAN},
      {"(sqrt(-a) ? 1 : 0) <= 2", NAN}, /* setup stream */
      {"(sqrt(-u) && 1) <= 2", NAN},
      {"(0 && sqrt(-u)) <= 2", NAN},
      {"(1 || sqrt(-u)) <= 2", NAN},
      {"(sqrt(-u) || 0) <= 2", NAN},
      {"!sqrt(-u) <= 2", NAN},
      {"!sqrt(-a) <= 2", NAN},
      {"(sqrt(-u) == 1) <= 0", 0.0}, /* a comparison with NaN is 0 */
      {"(u > 1 && u < 1e9) <= 1", 0.0},
  };
  const int nrows = (int)(sizeof rows / sizeof rows[0]);
  model m;
  m_init(&m);
  m_std_inputs(&m);
  for (int i = 0; i < nrows; i++) {
    char ptr[32], name[16];
    snprintf(ptr, sizeof ptr, "/c/%d", i);
    snprintf(name, sizeof name, "r%d", i);
    fg_expr_constraint(m.c, name, rows[i].src, ptr, &m.p);
  }
  CHECK_INT(m_finish(&m), FG_OK);
  CHECK_INT(m.info.nrows, nrows);
  m_run(&m, std_dec, FG_BLOCK, std_unc);
  for (int i = 0; i < nrows && i < m.info.nrows; i++) {
    bool ok = true;
    for (int l = 0; l < FG_BLOCK; l++)
      ok &= same_bits(m_row(&m, i, l), rows[i].want);
    CHECK_MSG(ok, "row '%s': lane 0 excess %.17g, want %.17g in every lane",
              rows[i].src, m_row(&m, i, 0), rows[i].want);
  }
  m_free(&m);
}

int main(void) {
  test_elements_queue();
  test_rows();
  test_partial_block();
  test_register_reuse();
  test_dense_rows();
  test_ieee_rows();
  return fg_test_finish();
}
