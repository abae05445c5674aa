/*
 * tests/unit/expr/test_expr.c -- the expression compiler and interpreter.
 *
 * Every test builds a small model through the public interface of
 * expr/expr.h, runs the setup stream once and the block stream on a few
 * lanes, and compares rows (excess registers) with values worked out by
 * hand in the comments. Errors are checked for their column, message and,
 * for limits, the limit's name.
 *
 * The fixed environment of the evaluation helpers:
 *   decisions  a = 2, v = [1, 4, 9], s5 = [0, 70, 150, 230, 300]
 *   uncertain  u = 1.5 + lane, w = [1 + lane, -2 - lane, 3.5]
 */
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

static void m_init(model *m) {
  memset(m, 0, sizeof *m);
  m->c = fg_expr_compiler_new();
  fg_problem_init(&m->p);
}

static void m_std_inputs(model *m) {
  fg_expr_declare_decision(m->c, "a", 0, "/decisions/0", &m->p);
  fg_expr_declare_decision(m->c, "v", 3, "/decisions/1", &m->p);
  fg_expr_declare_decision(m->c, "s5", 5, "/decisions/2", &m->p);
  fg_expr_declare_uncertain(m->c, "u", 0, "/uncertain/0", &m->p);
  fg_expr_declare_uncertain(m->c, "w", 3, "/uncertain/1", &m->p);
}

static void m_free(model *m) {
  fg_program_free(m->prog);
  fg_expr_compiler_free(m->c);
  free(m->setup);
  free(m->block);
  memset(m, 0, sizeof *m);
}

static fg_status m_finish(model *m) {
  fg_status st = fg_expr_finish(m->c, &m->prog, &m->p);
  if (st == FG_OK) fg_program_get_info(m->prog, &m->info);
  return st;
}

/* Runs setup and one block of `lanes` lanes; decisions and uncertain
 * values come from the fixed environment when dec/unc are NULL. */
static void m_run(model *m, const double *dec, int lanes,
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
static double m_row(const model *m, int r, int lane) {
  const fg_row *row = &m->info.rows[r];
  if (row->deterministic) return m->setup[row->excess_reg];
  return m->block[(size_t)row->excess_reg * FG_BLOCK + lane];
}

static const double std_dec[] = {2, 1, 4, 9, 0, 70, 150, 230, 300};

static double std_unc(int k, int lane) {
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
static int eval(const char *src, int lane, double *out) {
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

static double eval1(const char *src, int lane) {
  double out[64];
  int n = eval(src, lane, out);
  CHECK_MSG(n == 0, "'%s' should be a scalar (got %d)", src, n);
  return n == 0 ? out[0] : NAN;
}

/* Checks that src evaluates in lane 0 to the vector want[0..n). */
static void check_vec(const char *src, const double *want, int n) {
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
static fg_status compile_error(const char *src, bool cons, int *col, char *msg,
                               size_t cap) {
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

static void expect_error(const char *src, bool cons, int want_col,
                         const char *want_msg) {
  int col;
  char msg[FG_MESSAGE_MAX];
  fg_status st = compile_error(src, cons, &col, msg, sizeof msg);
  CHECK_MSG(st == FG_EINVAL, "'%s': status %d", src, (int)st);
  CHECK_MSG(col == want_col, "'%s': column %d, expected %d (%s)", src, col,
            want_col, msg);
  CHECK_MSG(strstr(msg, want_msg) != NULL, "'%s': message \"%s\" lacks \"%s\"",
            src, msg, want_msg);
}

static void test_syntax_errors(void) {
  expect_error("a + * 2", false, 5,
               "expected a number, a name, '(' or '[' but found '*'");
  expect_error("max(a, 2", false, 9, "expected ',' or ')' but found end");
  expect_error("max(a, 2,)", false, 10, "found ')'");
  expect_error("(a + 2", false, 7, "expected ')' but found end of expression");
  expect_error("a $ 2", false, 3, "unexpected character '$'");
  expect_error("a \x01 2", false, 3, "unexpected byte 0x01");
  expect_error("a = 2", false, 3, "expected '==' (comparison) but found '='");
  expect_error("a & 2", false, 3, "'&&'");
  expect_error("1e+", false, 1, "expected digits after the exponent");
  expect_error("1e999 + a", false, 1, "too large");
  expect_error("a < 2 < 3", false, 7, "comparisons do not chain");
  expect_error("a 2", false, 3,
               "expected an operator or end of expression "
               "but found number '2'");
  expect_error("foo(1)", false, 1, "unknown function 'foo'");
  expect_error("sqrt(1, 2)", false, 1,
               "'sqrt' takes 1 argument but was "
               "given 2");
  expect_error("clamp(a, 1)", false, 1, "'clamp' takes 3 arguments");
  expect_error("min()", false, 1, "'min' takes at least 1 argument");
  expect_error("v[1.5]", false, 3,
               "expected an integer index (0-based) but "
               "found number '1.5'");
  expect_error("v[-1]", false, 3, "found '-'");
  expect_error("v[a]", false, 3, "found name 'a'");
  expect_error("[]", false, 2, "expected a vector element but found ']'");
  expect_error("a ? 1", false, 6, "expected ':' but found end");
  expect_error("nan + 1", false, 1, "unknown name 'nan'");
  expect_error("0x10", false, 2, "found name 'x10'");
  /* constraint top level */
  expect_error("a + 1", true, 6,
               "a constraint must compare two sides (e1 <= e2, e1 >= e2 or "
               "lo <= e <= hi) but found end of expression");
  expect_error("a && 1", true, 3, "a constraint must compare");
  expect_error("a <= 1 && a >= 0", true, 8,
               "expected end of constraint but "
               "found '&&'");
  expect_error("a <= 2 >= 1", true, 8, "a range must read lo <= e <= hi");
  expect_error("0 <= a <= 2 <= 3", true, 13, "at most two comparisons");
  expect_error("a != 1", true, 3, "'!=' cannot be a constraint");
  expect_error("a == 1 == 1", true, 8, "a range must read");
}

static void test_semantic_errors(void) {
  expect_error("a + finsh", false, 5, "unknown name 'finsh'");
  expect_error("s5[7]", false, 4, "index 7 out of range for 's5' (size 5)");
  expect_error("(v + 1)[3]", false, 9,
               "index 3 out of range for a vector "
               "(size 3)");
  expect_error("s5[2:6]", false, 4, "slice [2:6] out of range for 's5'");
  expect_error("s5[3:3]", false, 4, "slice [3:3] out of range");
  expect_error("a[0]", false, 3, "'a' is a scalar and cannot be indexed");
  expect_error("v + s5", false, 3, "vector lengths differ: 3 and 5");
  expect_error("max(v, 1, s5)", false, 1, "vector lengths differ: 3 and 5");
  expect_error("u > 0 ? v : s5", false, 7, "vector lengths differ");
  expect_error("dot(v, s5)", false, 1, "vector lengths differ: 3 and 5");
  expect_error("[1, v, 2]", false, 5,
               "expected a scalar vector item but "
               "item 1 is a vector of 3 elements");
  expect_error("sum + 1", false, 1, "'sum' is a function");
  expect_error("d + 1", false, 1, "'d' cannot refer to itself");
  expect_error("v == w", true, 3, "'==' on an uncertain quantity is refused");
  expect_error("u == 1", true, 3, "probability zero");

  /* a later definition and a typo are told apart */
  model m;
  m_init(&m);
  m_std_inputs(&m);
  CHECK_INT(
      fg_expr_define(m.c, "early", "late + 1", "/definitions/0/value", &m.p),
      FG_OK);
  CHECK_INT(fg_expr_define(m.c, "late", "a", "/definitions/1/value", &m.p),
            FG_OK);
  CHECK_INT(fg_expr_constraint(m.c, "c1", "a <= 1 + finsh",
                               "/constraints/0/require", &m.p),
            FG_OK);
  CHECK_INT(fg_expr_constraint(m.c, "c2", "early <= 1",
                               "/constraints/1/require", &m.p),
            FG_OK);
  CHECK_INT(m_finish(&m), FG_EINVAL);
  /* two errors: the definition and the typo; c2 (which uses the failed
   * definition) is not reported again */
  CHECK_INT(m.p.nitems, 2);
  CHECK_STR(m.p.items[0].pointer, "/definitions/0/value");
  CHECK(strstr(m.p.items[0].message, "'late' is defined later") != NULL);
  CHECK_INT(m.p.items[0].column, 1);
  CHECK_STR(m.p.items[1].pointer, "/constraints/0/require");
  CHECK(strstr(m.p.items[1].message, "unknown name 'finsh'") != NULL);
  CHECK_INT(m.p.items[1].column, 10);
  m_free(&m);

  /* names: duplicates, functions, bad spelling */
  m_init(&m);
  CHECK_INT(fg_expr_declare_decision(m.c, "x", 0, "/decisions/0", &m.p), FG_OK);
  CHECK_INT(fg_expr_declare_uncertain(m.c, "x", 2, "/uncertain/0", &m.p),
            FG_EINVAL);
  CHECK_STR(m.p.items[0].pointer, "/uncertain/0");
  CHECK(strstr(m.p.items[0].message, "duplicate name 'x'") != NULL);
  CHECK_INT(fg_expr_define(m.c, "sqrt", "1", "/definitions/0/value", &m.p),
            FG_EINVAL);
  CHECK(strstr(m.p.items[1].message, "'sqrt' is a function") != NULL);
  CHECK_INT(fg_expr_define(m.c, "2x", "1", "/definitions/1/value", &m.p),
            FG_EINVAL);
  CHECK_INT(fg_expr_constraint(m.c, "x", "1 <= 2", "/constraints/0", &m.p),
            FG_EINVAL);
  CHECK(fg_expr_is_function_name("running_sum"));
  CHECK(fg_expr_is_function_name("log10"));
  CHECK(!fg_expr_is_function_name("start"));
  m_free(&m);

  /* elements: only earlier elements of the definition itself */
  const char *bad1[] = {"1", "q[1] + 1"};
  const char *bad2[] = {"1", "sum(q)"};
  const char *bad3[] = {"q[0]"};
  const char *bad4[] = {"1", "v"};
  const char *const *bads[] = {bad1, bad2, bad3, bad4};
  const int nbad[] = {2, 2, 1, 2};
  const int bad_col[] = {3, 5, 3, 1};
  const char *bad_msg[] = {
      "element 1 of 'q' may use only q[0] to q[0] but found q[1]",
      "'q' can be used here only element by element",
      "element 0 of 'q' cannot use elements of 'q'",
      "expected element 1 of 'q' to be a scalar"};
  for (int i = 0; i < 4; i++) {
    m_init(&m);
    m_std_inputs(&m);
    fg_expr_define_elements(m.c, "q", bads[i], nbad[i],
                            "/definitions/0/elements", &m.p);
    CHECK_INT(m_finish(&m), FG_EINVAL);
    CHECK_INT(m.p.items[0].column, bad_col[i]);
    CHECK_MSG(strstr(m.p.items[0].message, bad_msg[i]) != NULL, "%s",
              m.p.items[0].message);
    char want_ptr[64];
    snprintf(want_ptr, sizeof want_ptr, "/definitions/0/elements/%d",
             nbad[i] - 1);
    CHECK_STR(m.p.items[0].pointer, want_ptr);
    m_free(&m);
  }

  /* the objective must be a scalar */
  m_init(&m);
  m_std_inputs(&m);
  fg_expr_constraint(m.c, "c", "a <= 1", "/constraints/0/require", &m.p);
  fg_expr_objective(m.c, FG_OBJECTIVE_MINIMIZE, "v * u", "/objective/minimize",
                    &m.p);
  CHECK_INT(m_finish(&m), FG_EINVAL);
  CHECK(m.p.nitems == 1 &&
        strstr(m.p.items[0].message, "expected a scalar objective") != NULL);
  m_free(&m);
}

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

static void expect_limit(model *m, const char *name) {
  CHECK_INT(m->p.status, FG_ELIMIT);
  CHECK_MSG(m->p.limit_name && strcmp(m->p.limit_name, name) == 0,
            "limit %s, expected %s", m->p.limit_name ? m->p.limit_name : "-",
            name);
  CHECK(m->p.nitems >= 1 && strstr(m->p.items[0].message, name) != NULL);
}

static void test_limits(void) {
  model m;
  /* expression_length */
  char *longsrc = malloc(FG_EXPR_MAX_LENGTH + 2);
  memset(longsrc, ' ', FG_EXPR_MAX_LENGTH + 1);
  longsrc[0] = '1';
  longsrc[FG_EXPR_MAX_LENGTH + 1] = '\0';
  m_init(&m);
  CHECK_INT(fg_expr_define(m.c, "d", longsrc, "/definitions/0/value", &m.p),
            FG_ELIMIT);
  expect_limit(&m, "expression_length");
  CHECK_STR(m.p.items[0].pointer, "/definitions/0/value");
  m_free(&m);
  longsrc[FG_EXPR_MAX_LENGTH] = '\0'; /* exactly at the limit: fine */
  m_init(&m);
  CHECK_INT(fg_expr_define(m.c, "d", longsrc, "/definitions/0/value", &m.p),
            FG_OK);
  m_free(&m);
  free(longsrc);

  /* expression_depth: parentheses, unary chains, calls, vectors */
  char deep[8 * FG_EXPR_MAX_DEPTH + 64];
  const char *openers[] = {"(", "-", "abs(", "[", "2^"};
  for (int k = 0; k < 5; k++) {
    for (int depth = FG_EXPR_MAX_DEPTH - 2; depth <= FG_EXPR_MAX_DEPTH + 1;
         depth += 3) {
      size_t len = 0;
      for (int i = 0; i < depth; i++)
        len += (size_t)sprintf(deep + len, "%s", openers[k]);
      deep[len++] = '1';
      for (int i = 0; i < depth; i++)
        deep[len++] = k == 0 || k == 2 ? ')' : k == 3 ? ']' : ' ';
      deep[len] = '\0';
      m_init(&m);
      fg_status st = fg_expr_define(m.c, "d", deep, "/d", &m.p);
      if (depth > FG_EXPR_MAX_DEPTH) {
        CHECK_MSG(st == FG_ELIMIT, "opener %s depth %d: %d", openers[k], depth,
                  (int)st);
        expect_limit(&m, "expression_depth");
      } else {
        CHECK_MSG(st == FG_OK, "opener %s depth %d: %s", openers[k], depth,
                  m.p.nitems ? m.p.items[0].message : "");
      }
      m_free(&m);
    }
  }
  /* a long flat sum is not deep */
  char *flat = malloc(FG_EXPR_MAX_LENGTH + 1);
  size_t fl = 0;
  while (fl + 4 < FG_EXPR_MAX_LENGTH)
    fl += (size_t)sprintf(flat + fl, "1+");
  flat[fl++] = '1';
  flat[fl] = '\0';
  m_init(&m);
  fg_expr_declare_decision(m.c, "a", 0, "/x", &m.p);
  CHECK_INT(fg_expr_constraint(m.c, "c", "a <= 0", "/c", &m.p), FG_OK);
  CHECK_INT(fg_expr_define(m.c, "d", flat, "/d", &m.p), FG_OK);
  CHECK_INT(m_finish(&m), FG_OK);
  m_free(&m);
  free(flat);

  /* vector_length */
  m_init(&m);
  CHECK_INT(
      fg_expr_declare_decision(m.c, "big", FG_VECTOR_MAX + 1, "/d/0", &m.p),
      FG_ELIMIT);
  expect_limit(&m, "vector_length");
  m_free(&m);
  m_init(&m);
  const char **els = calloc(FG_VECTOR_MAX + 1, sizeof *els);
  for (int i = 0; i <= FG_VECTOR_MAX; i++)
    els[i] = "1";
  CHECK_INT(
      fg_expr_define_elements(m.c, "q", els, FG_VECTOR_MAX + 1, "/e", &m.p),
      FG_ELIMIT);
  expect_limit(&m, "vector_length");
  free(els);
  m_free(&m);

  /* constraint_rows */
  m_init(&m);
  fg_expr_declare_decision(m.c, "x", FG_ROWS_MAX + 1, "/decisions/0", &m.p);
  fg_expr_constraint(m.c, "c", "x <= 1", "/constraints/0/require", &m.p);
  CHECK_INT(m_finish(&m), FG_ELIMIT);
  expect_limit(&m, "constraint_rows");
  CHECK_STR(m.p.items[0].pointer, "/constraints/0/require");
  m_free(&m);

  /* program_registers */
  m_init(&m);
  fg_expr_declare_decision(m.c, "x1", FG_VECTOR_MAX, "/decisions/0", &m.p);
  fg_expr_declare_decision(m.c, "x2", FG_VECTOR_MAX, "/decisions/1", &m.p);
  fg_expr_declare_uncertain(m.c, "y", 0, "/uncertain/0", &m.p);
  fg_expr_constraint(m.c, "c", "y <= 1", "/constraints/0/require", &m.p);
  CHECK_INT(m_finish(&m),
            2 * FG_VECTOR_MAX + 1 > FG_PROGRAM_MAX_REGS ? FG_ELIMIT : FG_OK);
  if (2 * FG_VECTOR_MAX + 1 > FG_PROGRAM_MAX_REGS)
    expect_limit(&m, "program_registers");
  m_free(&m);

  /* program_instructions: 21 products of a 100000-element vector */
  m_init(&m);
  fg_expr_declare_decision(m.c, "x", FG_VECTOR_MAX, "/decisions/0", &m.p);
  fg_expr_declare_uncertain(m.c, "y", 0, "/uncertain/0", &m.p);
  char prod[512] = "x*y";
  int factors = FG_PROGRAM_MAX_INSNS / FG_VECTOR_MAX + 1;
  for (int i = 0; i < factors; i++)
    strcat(prod, "*x");
  fg_expr_define(m.c, "d", prod, "/definitions/0/value", &m.p);
  fg_expr_constraint(m.c, "c", "y <= 1", "/constraints/0/require", &m.p);
  CHECK_INT(m_finish(&m), FG_ELIMIT);
  expect_limit(&m, "program_instructions");
  CHECK_STR(m.p.items[0].pointer, "/definitions/0/value");
  m_free(&m);

  /* name_length */
  char longname[FG_NAME_MAX + 2];
  memset(longname, 'n', sizeof longname - 1);
  longname[FG_NAME_MAX + 1] = '\0';
  m_init(&m);
  CHECK_INT(fg_expr_declare_decision(m.c, longname, 0, "/decisions/0", &m.p),
            FG_ELIMIT);
  expect_limit(&m, "name_length");
  m_free(&m);
}

static void test_hostile(void) {
  /* garbage never crashes; each gives an error with a column */
  const char *junk[] = {
      "\xff\xfe", "((((", "]]]",     "1 +",    "[1, [2]]", "v[999999999999]",
      "v[0:0]",   "?:",   "a ? : 1", "max(,)", "...",      "a[0][0]",
      "u^^2"};
  for (size_t i = 0; i < sizeof junk / sizeof junk[0]; i++) {
    int col;
    char msg[FG_MESSAGE_MAX];
    fg_status st = compile_error(junk[i], false, &col, msg, sizeof msg);
    CHECK_MSG(st == FG_EINVAL && col >= 1 && msg[0], "junk %zu: %d col %d", i,
              (int)st, col);
  }
  /* 1e-99999 underflows to 0 and is a valid number */
  CHECK_NEAR(eval1("1e-99999 + 1", 0), 1, 0);
}

/* Random token soup: every text either compiles and runs or is refused
 * with FG_EINVAL and a column; nothing crashes (run this under the
 * sanitizers). A fixed generator keeps the test reproducible. */
static void test_token_soup(void) {
  static const char *const toks[] = {
      "a",       "v",    "u",      "w",
      "s5",      "1",    "2.5",    "0",
      "+",       "-",    "*",      "/",
      "^",       "(",    ")",      "[",
      "]",       ",",    ":",      "?",
      "<",       "<=",   ">=",     "==",
      "!=",      "&&",   "||",     "!",
      "max(",    "sum(", "clamp(", "running_sum(",
      "s5[1:3]", "v[0]", "log(",   "dot(",
      " "};
  const int ntoks = (int)(sizeof toks / sizeof toks[0]);
  unsigned long long state = 12345;
  int compiled = 0, refused = 0, other = 0;
  for (int iter = 0; iter < 3000; iter++) {
    char text[512] = "";
    state = state * 6364136223846793005ULL + 1442695040888963407ULL;
    int len = 1 + (int)((state >> 33) % 24);
    for (int i = 0; i < len; i++) {
      state = state * 6364136223846793005ULL + 1442695040888963407ULL;
      strcat(text, toks[(state >> 33) % (unsigned long long)ntoks]);
    }
    model m;
    m_init(&m);
    m_std_inputs(&m);
    fg_expr_define(m.c, "d", iter % 2 ? "a * u" : text, "/d", &m.p);
    fg_expr_constraint(m.c, "keep", "d <= 1", "/k", &m.p);
    if (iter % 2) fg_expr_constraint(m.c, "r", text, "/c", &m.p);
    fg_status st = m_finish(&m);
    if (st == FG_OK) {
      m_run(&m, std_dec, LANES, std_unc);
      compiled++;
    } else if (st == FG_EINVAL && m.p.nitems >= 1 && m.p.items[0].message[0]) {
      refused++;
    } else {
      other++;
      fprintf(stderr, "soup '%s': status %d\n", text, (int)st);
    }
    m_free(&m);
  }
  CHECK_INT(other, 0);
  CHECK_MSG(compiled >= 10 && refused >= 100, "compiled %d, refused %d",
            compiled, refused);
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
  _Static_assert(FG_OP_COUNT == 31, "update the tests for new opcodes");
  test_syntax_errors();
  test_semantic_errors();
  test_operators();
  test_functions();
  test_folding();
  test_elements_queue();
  test_rows();
  test_partial_block();
  test_register_reuse();
  test_limits();
  test_hostile();
  test_token_soup();
  test_dense_rows();
  test_ieee_rows();
  return fg_test_finish();
}
