/*
 * tests/unit/expr/test_operators.c -- operators, functions and constant
 * folding of the expression language.
 *
 * Covers: precedence and associativity, comparisons and truth values, every
 * function, and which subexpressions are folded at compile time. Values
 * are worked out by hand in the comments beside each check, from closed
 * forms (e = 2.718281828459045, sqrt(9) = 3, log10(1000) = 3, ...); round
 * halves away from zero as the C standard library's round does.
 */
#include "expr_testutil.h"

static void test_operators(void) {
  /* lane 0: a = 2, u = 1.5, v = [1, 4, 9], w = [1, -2, 3.5] */
  CHECK_NEAR(eval1("1 + 2 * 3", 0), 7, 0);
  CHECK_NEAR(eval1("(1 + 2) * 3", 0), 9, 0);
  CHECK_NEAR(eval1("a - u - 1", 0), -0.5, 0); /* left-assoc */
  CHECK_NEAR(eval1("a / 4 / 2", 0), 0.25, 0);
  CHECK_NEAR(eval1("-a ^ 2", 0), -4, 0); /* ^ before unary - */
  CHECK_NEAR(eval1("-2^2", 0), -4, 0);
  CHECK_NEAR(eval1("2 ^ 3 ^ 2", 0), 512, 0); /* right-assoc */
  CHECK_NEAR(eval1("2^-1", 0), 0.5, 0);
  CHECK_NEAR(eval1("u ^ a", 0), 2.25, 1e-15);
  CHECK_NEAR(eval1("--u", 0), 1.5, 0);
  CHECK_NEAR(eval1(".5 + 2.5e-3 + 3", 0), 3.5025, 1e-15);
  CHECK_NEAR(eval1("a < u", 0), 0, 0);
  CHECK_NEAR(eval1("a <= 2", 0), 1, 0);
  CHECK_NEAR(eval1("u > 1", 0), 1, 0);
  CHECK_NEAR(eval1("u >= 1.5", 0), 1, 0);
  CHECK_NEAR(eval1("u == 1.5", 0), 1, 0);
  CHECK_NEAR(eval1("u != 1.5", 0), 0, 0);
  CHECK_NEAR(eval1("u > 1 && a > 3", 0), 0, 0);
  CHECK_NEAR(eval1("u > 1 || a > 3", 0), 1, 0);
  CHECK_NEAR(eval1("u && 2", 0), 1, 0); /* results are 1/0 */
  CHECK_NEAR(eval1("0 || u - 1.5", 0), 0, 0);
  CHECK_NEAR(eval1("!u", 0), 0, 0);
  CHECK_NEAR(eval1("!(u - 1.5)", 0), 1, 0);
  CHECK_NEAR(eval1("u > 1 ? 10 : 20", 0), 10, 0);
  CHECK_NEAR(eval1("u > 2 ? 10 : 20", 0), 20, 0);
  CHECK_NEAR(eval1("u > 2 ? 10 : u > 1 ? 30 : 40", 0), 30, 0); /* right */
  CHECK_NEAR(eval1("u > 2 ? 10 : u > 1 ? 30 : 40", 1), 10, 0); /* u = 2.5 */
  CHECK_NEAR(eval1("1 ? a : u", 0), 2, 0);
  /* lane 2: u = 3.5 */
  CHECK_NEAR(eval1("u * a - 1", 2), 6, 0);

  /* vectors, broadcasting, indexing, slices */
  check_vec("v + 1", (double[]){2, 5, 10}, 3);
  check_vec("2 * v - w", (double[]){1, 10, 14.5}, 3);
  check_vec("v / w", (double[]){1, -2, 9 / 3.5}, 3);
  check_vec("-v", (double[]){-1, -4, -9}, 3);
  check_vec("v ^ 2", (double[]){1, 16, 81}, 3);
  check_vec("2 ^ v", (double[]){2, 16, 512}, 3);
  check_vec("v > 3", (double[]){0, 1, 1}, 3);
  check_vec("w < 0 || v > 8", (double[]){0, 1, 1}, 3);
  check_vec("w > 0 && v > 2", (double[]){0, 0, 1}, 3);
  check_vec("!(v - 4)", (double[]){0, 1, 0}, 3);
  check_vec("w > 0 ? v : -1", (double[]){1, -1, 9}, 3);
  check_vec("w > 0 ? 1 : 0", (double[]){1, 0, 1}, 3);
  check_vec("1 ? v : 0", (double[]){1, 4, 9}, 3);
  check_vec("0 ? w : u", (double[]){1.5, 1.5, 1.5}, 3);
  check_vec("[1, a, u]", (double[]){1, 2, 1.5}, 3);
  check_vec("[1, a, u] * v", (double[]){1, 8, 13.5}, 3);
  check_vec("s5[1:4]", (double[]){70, 150, 230}, 3);
  check_vec("s5[1:4] - w", (double[]){69, 152, 226.5}, 3);
  check_vec("s5[4:5]", (double[]){300}, 1);
  check_vec("(s5 + 1)[2:4]", (double[]){151, 231}, 2);
  check_vec("[u, 2, 3][1:3]", (double[]){2, 3}, 2);
  CHECK_NEAR(eval1("s5[2] + v[0]", 0), 151, 0);
  CHECK_NEAR(eval1("s5[1:4][2]", 0), 230, 0);
  CHECK_NEAR(eval1("(v * w)[2]", 0), 31.5, 0);
  CHECK_NEAR(eval1("[10, 20, u][2]", 0), 1.5, 0);
}

static void test_functions(void) {
  /* lane 0: a = 2, u = 1.5, v = [1, 4, 9], w = [1, -2, 3.5] */
  CHECK_NEAR(eval1("abs(-u)", 0), 1.5, 0);
  CHECK_NEAR(eval1("sqrt(v[2])", 0), 3, 0);
  CHECK_NEAR(eval1("exp(0 * u) + exp(1)", 0), 1 + 2.718281828459045, 1e-15);
  CHECK_NEAR(eval1("log(exp(u))", 0), 1.5, 1e-15);
  CHECK_NEAR(eval1("log10(1000) + log10(u * 0 + 100)", 0), 5, 1e-15);
  CHECK_NEAR(eval1("floor(-u)", 0), -2, 0);
  CHECK_NEAR(eval1("ceil(u)", 0), 2, 0);
  CHECK_NEAR(eval1("round(u - 1)", 0), 1, 0);  /* round(0.5) = 1 */
  CHECK_NEAR(eval1("round(-2.5)", 0), -3, 0);  /* folded */
  CHECK_NEAR(eval1("round(u - 4)", 0), -3, 0); /* -2.5 at run time */
  CHECK_NEAR(eval1("round(2.4999)", 0), 2, 0);
  CHECK_NEAR(eval1("above_zero(u - 3)", 0), 0, 0);
  CHECK_NEAR(eval1("above_zero(u - 1)", 0), 0.5, 0);
  CHECK_NEAR(eval1("min(u, a)", 0), 1.5, 0);
  CHECK_NEAR(eval1("max(u, a, 1)", 0), 2, 0);
  CHECK_NEAR(eval1("min(w)", 0), -2, 0); /* reduction */
  CHECK_NEAR(eval1("max(w)", 0), 3.5, 0);
  CHECK_NEAR(eval1("max(u)", 0), 1.5, 0); /* one scalar */
  CHECK_NEAR(eval1("sum(v)", 0), 14, 0);
  CHECK_NEAR(eval1("sum(w)", 0), 2.5, 0);
  CHECK_NEAR(eval1("sum(u)", 0), 1.5, 0);
  CHECK_NEAR(eval1("mean(v)", 0), 14.0 / 3.0, 1e-15);
  CHECK_NEAR(eval1("mean(w)", 0), 2.5 / 3.0, 1e-15);
  CHECK_NEAR(eval1("dot(v, w)", 0), 1 - 8 + 31.5, 0);
  CHECK_NEAR(eval1("dot(u, a)", 0), 3, 0);
  CHECK_NEAR(eval1("dot(v, 2)", 0), 28, 0);
  CHECK_NEAR(eval1("length(s5) + length(u) + length(w * 2)", 0), 9, 0);
  CHECK_NEAR(eval1("clamp(u, 0, 1)", 0), 1, 0);
  CHECK_NEAR(eval1("clamp(u, 2, 3)", 0), 2, 0);
  CHECK_NEAR(eval1("clamp(u, 1, 3)", 0), 1.5, 0);
  check_vec("abs(w)", (double[]){1, 2, 3.5}, 3);
  check_vec("sqrt(v)", (double[]){1, 2, 3}, 3);
  check_vec("floor(w / 2)", (double[]){0, -1, 1}, 3);
  check_vec("ceil(w / 2)", (double[]){1, -1, 2}, 3);
  check_vec("round(w / 2)", (double[]){1, -1, 2}, 3); /* .5 away from 0 */
  check_vec("above_zero(w)", (double[]){1, 0, 3.5}, 3);
  check_vec("min(v, w)", (double[]){1, -2, 3.5}, 3);
  check_vec("max(v, w, 2)", (double[]){2, 4, 9}, 3);
  check_vec("min(v, u)", (double[]){1, 1.5, 1.5}, 3);
  check_vec("running_sum(v)", (double[]){1, 5, 14}, 3);
  check_vec("running_sum(w)", (double[]){1, -1, 2.5}, 3);
  check_vec("clamp(w, 0, v)", (double[]){1, 0, 3.5}, 3);
  check_vec("clamp(w, -1, 2)", (double[]){1, -1, 2}, 3);
  check_vec("exp(w * 0)", (double[]){1, 1, 1}, 3);
  check_vec("log10(v * 10)", (double[]){1, log10(40), log10(90)}, 3);
  /* NaN propagates through min, max and pos */
  CHECK(isnan(eval1("max(sqrt(0 - u), 0)", 0)));
  CHECK(isnan(eval1("min(1, sqrt(0 - u))", 0)));
  CHECK(isnan(eval1("above_zero(log(0 - u))", 0)));
  CHECK(isnan(eval1("clamp(sqrt(0 - u), 0, 1)", 0)));
}

/* Counts instructions by opcode name in the listing. */
static int dump_count(const fg_program *prog, const char *what) {
  FILE *f = tmpfile();
  if (!f) return -1;
  fg_program_dump(prog, f);
  rewind(f);
  char line[512];
  int n = 0;
  while (fgets(line, sizeof line, f))
    if (strstr(line, what)) n++;
  fclose(f);
  return n;
}

static void test_folding(void) {
  model m;
  m_init(&m);
  m_std_inputs(&m);
  fg_expr_constraint(m.c, "c", "a <= 2*3+1", "/constraints/0/require", &m.p);
  CHECK_INT(m_finish(&m), FG_OK);
  /* folded: const 7 and the subtraction, nothing else */
  CHECK_INT(m.info.nsetup_insns, 2);
  CHECK_INT(m.info.nblock_insns, 0);
  CHECK_INT(dump_count(m.prog, "= const  7 "), 1);
  CHECK_INT(dump_count(m.prog, "= mul"), 0);
  CHECK_INT(dump_count(m.prog, "/constraints/0/require col"), 2);
  m_run(&m, std_dec, LANES, std_unc);
  CHECK_NEAR(m_row(&m, 0, 0), -5, 0);
  m_free(&m);

  /* nothing that could fault is folded; run time gives IEEE values */
  m_init(&m);
  m_std_inputs(&m);
  fg_expr_define(m.c, "k", "2 * (1 + 2) ^ 2 - sqrt(16) / 4", "/d/0", &m.p);
  fg_expr_constraint(m.c, "z", "u <= 1 / 0", "/c/0", &m.p);
  fg_expr_constraint(m.c, "l", "u <= log(0)", "/c/1", &m.p);
  fg_expr_constraint(m.c, "s", "u <= sqrt(-1)", "/c/2", &m.p);
  fg_expr_constraint(m.c, "o", "u <= 10 ^ 400", "/c/3", &m.p);
  fg_expr_constraint(m.c, "k1", "u <= k", "/c/4", &m.p);
  CHECK_INT(m_finish(&m), FG_OK);
  CHECK_INT(dump_count(m.prog, "= div"), 1);
  CHECK_INT(dump_count(m.prog, "= log "), 1);
  CHECK_INT(dump_count(m.prog, "= sqrt"), 1);
  CHECK_INT(dump_count(m.prog, "= pow"), 1);
  CHECK_INT(dump_count(m.prog, "= const  17 "), 1); /* k folded to 17 */
  m_run(&m, std_dec, LANES, std_unc);
  CHECK(isinf(m_row(&m, 0, 0)) && m_row(&m, 0, 0) < 0); /* u - inf */
  CHECK(isinf(m_row(&m, 1, 0)) && m_row(&m, 1, 0) > 0); /* u - -inf */
  CHECK(isnan(m_row(&m, 2, 0)));
  CHECK(isinf(m_row(&m, 3, 0)) && m_row(&m, 3, 0) < 0);
  CHECK_NEAR(m_row(&m, 4, 0), 1.5 - 17, 0);
  m_free(&m);
}

int main(void) {
  _Static_assert(FG_OP_COUNT == 31, "update the tests for new opcodes");
  test_operators();
  test_functions();
  test_folding();
  return fg_test_finish();
}
