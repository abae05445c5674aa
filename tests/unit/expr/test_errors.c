/*
 * tests/unit/expr/test_errors.c -- what the expression compiler refuses.
 *
 * Covers: syntax and semantic errors, each checked for its column (1-based,
 * in characters of the expression text) and its message; hostile texts
 * and random token soup, which either compile and run or are refused with
 * FG_EINVAL and a column, never crash (run under the sanitizers too). The
 * expected columns and messages are the language's own rules, worked out
 * by hand beside each check (no outside reference applies).
 */
#include "expr_testutil.h"

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

int main(void) {
  test_syntax_errors();
  test_semantic_errors();
  test_hostile();
  test_token_soup();
  return fg_test_finish();
}
