/*
 * expr/lexer.c -- splits expression text into tokens.
 *
 * Design: a hand-written scanner over a NUL-terminated byte string, one
 * token per call, no allocation and no look-behind. White space is space,
 * tab, CR and LF. Numbers are `digits [. digits] [e|E [+|-] digits]` or
 * `. digits [...]`; they are scanned here (not by strtod alone) so that
 * strtod's extras -- hexadecimal, "inf", "nan" -- are never accepted, and a
 * literal that overflows a double is refused rather than becoming an
 * infinity. Names are `[A-Za-z_][A-Za-z0-9_]*`; the length is checked by
 * the compiler, which knows the namespace.
 *
 * Invariants: columns are 1-based byte offsets from the start of the text;
 * every byte is either consumed by a token or reported (including non-ASCII
 * bytes), so hostile input ends in an error, never a loop.
 *
 * Thread use: any thread, one lexer per text.
 */
#include "expr/expr_internal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static bool is_digit(char ch) {
  return ch >= '0' && ch <= '9';
}

static bool is_name_start(char ch) {
  return (ch >= 'A' && ch <= 'Z') || (ch >= 'a' && ch <= 'z') || ch == '_';
}

static bool is_name_char(char ch) {
  return is_name_start(ch) || is_digit(ch);
}

const char *fg_expr_tok_spelling(fg_tok_kind k) {
  switch (k) {
  case FG_TOK_END: return "end of expression";
  case FG_TOK_NUM: return "number";
  case FG_TOK_NAME: return "name";
  case FG_TOK_PLUS: return "+";
  case FG_TOK_MINUS: return "-";
  case FG_TOK_STAR: return "*";
  case FG_TOK_SLASH: return "/";
  case FG_TOK_CARET: return "^";
  case FG_TOK_LPAREN: return "(";
  case FG_TOK_RPAREN: return ")";
  case FG_TOK_LBRACK: return "[";
  case FG_TOK_RBRACK: return "]";
  case FG_TOK_COMMA: return ",";
  case FG_TOK_COLON: return ":";
  case FG_TOK_QUESTION: return "?";
  case FG_TOK_LT: return "<";
  case FG_TOK_LE: return "<=";
  case FG_TOK_GT: return ">";
  case FG_TOK_GE: return ">=";
  case FG_TOK_EQ: return "==";
  case FG_TOK_NE: return "!=";
  case FG_TOK_AND: return "&&";
  case FG_TOK_OR: return "||";
  case FG_TOK_NOT: return "!";
  }
  return "?";
}

void fg_expr_token_describe(const fg_token *tok, char *buf, size_t cap) {
  int len = tok->len > 40 ? 40 : tok->len;
  const char *more = tok->len > 40 ? "..." : "";
  switch (tok->kind) {
  case FG_TOK_END: snprintf(buf, cap, "end of expression"); break;
  case FG_TOK_NUM:
    snprintf(buf, cap, "number '%.*s%s'", len, tok->start, more);
    break;
  case FG_TOK_NAME:
    snprintf(buf, cap, "name '%.*s%s'", len, tok->start, more);
    break;
  default: snprintf(buf, cap, "'%s'", fg_expr_tok_spelling(tok->kind)); break;
  }
}

/* Scans a number starting at s; returns false with a message if it is
 * malformed or out of range. */
static bool scan_number(fg_lexer *lx, fg_token *tok, char *err, size_t errcap) {
  const char *s = lx->src + lx->pos;
  size_t i = 0;
  while (is_digit(s[i]))
    i++;
  if (s[i] == '.') {
    i++;
    while (is_digit(s[i]))
      i++;
  }
  if (s[i] == 'e' || s[i] == 'E') {
    size_t j = i + 1;
    if (s[j] == '+' || s[j] == '-') j++;
    if (!is_digit(s[j])) {
      snprintf(err, errcap,
               "expected digits after the exponent of '%.*s' but found %s",
               (int)(j > 40 ? 40 : j), s,
               s[j] ? "another character" : "end of expression");
      return false;
    }
    while (is_digit(s[j]))
      j++;
    i = j;
  }
  tok->kind = FG_TOK_NUM;
  tok->len = (int)i;
  /* strtod sees exactly the scanned text: copy it (at most the whole
   * expression, which is bounded by FG_EXPR_MAX_LENGTH). */
  char small[64];
  char *buf = i < sizeof small ? small : malloc(i + 1);
  if (!buf) {
    snprintf(err, errcap, "out of memory");
    return false;
  }
  memcpy(buf, s, i);
  buf[i] = '\0';
  double v = strtod(buf, NULL);
  if (buf != small) free(buf);
  if (!isfinite(v)) {
    snprintf(err, errcap, "number '%.*s' is too large for a double",
             (int)(i > 40 ? 40 : i), s);
    return false;
  }
  tok->num = v;
  lx->pos += i;
  return true;
}

/* Two-character operators first, then single characters. */
static bool scan_operator(fg_lexer *lx, fg_token *tok, char *err,
                          size_t errcap) {
  const char *s = lx->src + lx->pos;
  static const struct {
    char text[3];
    fg_tok_kind kind;
  } ops[] = {
      {"<=", FG_TOK_LE},    {">=", FG_TOK_GE},    {"==", FG_TOK_EQ},
      {"!=", FG_TOK_NE},    {"&&", FG_TOK_AND},   {"||", FG_TOK_OR},
      {"+", FG_TOK_PLUS},   {"-", FG_TOK_MINUS},  {"*", FG_TOK_STAR},
      {"/", FG_TOK_SLASH},  {"^", FG_TOK_CARET},  {"(", FG_TOK_LPAREN},
      {")", FG_TOK_RPAREN}, {"[", FG_TOK_LBRACK}, {"]", FG_TOK_RBRACK},
      {",", FG_TOK_COMMA},  {":", FG_TOK_COLON},  {"?", FG_TOK_QUESTION},
      {"<", FG_TOK_LT},     {">", FG_TOK_GT},     {"!", FG_TOK_NOT},
  };
  for (size_t i = 0; i < sizeof ops / sizeof ops[0]; i++) {
    size_t n = strlen(ops[i].text);
    if (strncmp(s, ops[i].text, n) == 0) {
      tok->kind = ops[i].kind;
      tok->len = (int)n;
      lx->pos += n;
      return true;
    }
  }
  unsigned char ch = (unsigned char)s[0];
  if (ch == '=')
    snprintf(err, errcap, "expected '==' (comparison) but found '='");
  else if (ch == '&')
    snprintf(err, errcap, "expected '&&' but found a single '&'");
  else if (ch == '|')
    snprintf(err, errcap, "expected '||' but found a single '|'");
  else if (ch > 32 && ch < 127)
    snprintf(err, errcap, "unexpected character '%c'", ch);
  else
    snprintf(err, errcap, "unexpected byte 0x%02X", ch);
  return false;
}

bool fg_expr_lex(fg_lexer *lx, fg_token *tok, int *err_col, char *err,
                 size_t errcap) {
  const char *src = lx->src;
  while (src[lx->pos] == ' ' || src[lx->pos] == '\t' || src[lx->pos] == '\n' ||
         src[lx->pos] == '\r')
    lx->pos++;
  memset(tok, 0, sizeof *tok);
  tok->start = src + lx->pos;
  tok->col = (int)lx->pos + 1;
  *err_col = tok->col;
  char ch = src[lx->pos];
  if (ch == '\0') {
    tok->kind = FG_TOK_END;
    return true;
  }
  if (is_digit(ch) || (ch == '.' && is_digit(src[lx->pos + 1])))
    return scan_number(lx, tok, err, errcap);
  if (is_name_start(ch)) {
    size_t i = lx->pos;
    while (is_name_char(src[i]))
      i++;
    tok->kind = FG_TOK_NAME;
    tok->len = (int)(i - lx->pos);
    lx->pos = i;
    return true;
  }
  return scan_operator(lx, tok, err, errcap);
}
