/*
 * tests/unit/expr/test_limits.c -- the expression compiler's named limits.
 *
 * Covers: each limit of the expression language (expression_length,
 * expression_depth, name_length, vector_length, constraint_rows,
 * program_instructions, program_registers) refused with FG_ELIMIT, the
 * limit's name in the problem and in its message. The limits and their values are
 * the project's own (include/feasgate/limits.h), so the reference is that
 * header; no outside source applies.
 */
#include "expr_testutil.h"

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

int main(void) {
  test_limits();
  return fg_test_finish();
}
