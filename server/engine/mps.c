/*
 * engine/mps.c -- the free MPS writer (engine/mps.h).
 *
 * MPS is the open column-oriented text format for linear and
 * mixed-integer programs that every solver reads; the free form separates
 * fields by white space (so names carry none) instead of fixed columns.
 * The text written here:
 *
 *   * comment lines
 *   NAME name
 *   ROWS
 *    N  obj                       the objective row (minimised)
 *    L  row                       L: <= rhs, G: >= rhs, E: = rhs
 *   COLUMNS
 *    col  row  value              one entry a line, column by column
 *    M1  'MARKER'  'INTORG'       integer columns between INTORG ...
 *    M1  'MARKER'  'INTEND'       ... and INTEND
 *   RHS
 *    RHS  row  value              nonzero right-hand sides only
 *   BOUNDS
 *    BV / FX / FR / MI / LO / UP / PL  BND  col  [value]
 *   ENDATA
 *
 * Every column gets explicit bounds, because readers disagree on the
 * default upper bound of an integer column (some take 1): 0/1 integer
 * columns are BV, equal bounds FX, no bounds FR, otherwise the lower bound
 * (MI when -infinity, LO) and then the upper bound (UP, or PL when
 * +infinity). A column with no entry is declared by a zero objective
 * entry. Numbers are printed with the fewest digits (15, else 17) that read
 * back as the same double.
 *
 * Design: entries are kept as (row, column, value) triplets in insertion
 * order, then counted by column and placed in a second array (a stable
 * counting sort), so each column's entries come out in row order. Names
 * live in one string pool. The text is appended to one buffer that stops
 * at max_bytes.
 *
 * Thread use: one fg_lp belongs to one caller.
 */
#include "engine/mps.h"

#include "feasgate/limits.h"

#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct lp_entry {
  int row, col;
  double v;
} lp_entry;

typedef struct lp_col {
  size_t name; /* offset into the pool */
  double lower, upper;
  bool integer;
} lp_col;

typedef struct lp_row {
  size_t name;
  char kind;
  double rhs;
} lp_row;

struct fg_lp {
  char *pool;
  size_t pool_len, pool_cap;
  lp_col *cols;
  int ncols, capcols;
  lp_row *rows;
  int nrows, caprows;
  lp_entry *ent;
  size_t nent, capent;
};

static bool grow(void **p, size_t *cap, size_t need, size_t size) {
  if (need <= *cap) return true;
  size_t c = *cap ? *cap : 64;
  while (c < need) c *= 2;
  void *q = realloc(*p, c * size);
  if (!q) return false;
  *p = q;
  *cap = c;
  return true;
}

static bool grow_int(void **p, int *cap, int need, size_t size) {
  size_t c = (size_t)*cap;
  if (!grow(p, &c, (size_t)need, size)) return false;
  *cap = (int)c;
  return true;
}

/* Copy a name into the pool; its offset, or (size_t)-1. */
static size_t intern(fg_lp *lp, const char *name) {
  size_t n = strlen(name) + 1;
  if (!grow((void **)&lp->pool, &lp->pool_cap, lp->pool_len + n, 1))
    return (size_t)-1;
  memcpy(lp->pool + lp->pool_len, name, n);
  lp->pool_len += n;
  return lp->pool_len - n;
}

fg_lp *fg_lp_new(const char *objective) {
  fg_lp *lp = calloc(1, sizeof *lp);
  if (!lp) return NULL;
  if (fg_lp_add_row(lp, objective, 'N', 0) != 0) {
    fg_lp_free(lp);
    return NULL;
  }
  return lp;
}

void fg_lp_free(fg_lp *lp) {
  if (!lp) return;
  free(lp->pool), free(lp->cols), free(lp->rows), free(lp->ent);
  free(lp);
}

int fg_lp_add_col(fg_lp *lp, const char *name, double lower, double upper,
                  bool integer) {
  if (lp->ncols == INT32_MAX - 1 ||
      !grow_int((void **)&lp->cols, &lp->capcols, lp->ncols + 1,
                sizeof *lp->cols))
    return -1;
  size_t at = intern(lp, name);
  if (at == (size_t)-1) return -1;
  lp->cols[lp->ncols] = (lp_col){at, lower, upper, integer};
  return lp->ncols++;
}

int fg_lp_add_row(fg_lp *lp, const char *name, char kind, double rhs) {
  if (lp->nrows == INT32_MAX - 1 ||
      !grow_int((void **)&lp->rows, &lp->caprows, lp->nrows + 1,
                sizeof *lp->rows))
    return -1;
  size_t at = intern(lp, name);
  if (at == (size_t)-1) return -1;
  lp->rows[lp->nrows] = (lp_row){at, kind, rhs};
  return lp->nrows++;
}

bool fg_lp_add_entry(fg_lp *lp, int row, int col, double v) {
  if (v == 0) return true;
  if (!grow((void **)&lp->ent, &lp->capent, lp->nent + 1, sizeof *lp->ent))
    return false;
  lp->ent[lp->nent++] = (lp_entry){row, col, v};
  return true;
}

int fg_lp_rows(const fg_lp *lp) { return lp->nrows; }
size_t fg_lp_entries(const fg_lp *lp) { return lp->nent; }

/* ---- the text ---- */

typedef struct text {
  char *buf;
  size_t len, cap, max;
  bool over, nomem;
} text;

static void put(text *t, const char *s, size_t n) {
  if (t->over || t->nomem) return;
  if (t->len + n > t->max) {
    t->over = true;
    return;
  }
  if (!grow((void **)&t->buf, &t->cap, t->len + n + 1, 1)) {
    t->nomem = true;
    return;
  }
  memcpy(t->buf + t->len, s, n);
  t->len += n;
  t->buf[t->len] = '\0';
}

static void putf(text *t, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));
static void putf(text *t, const char *fmt, ...) {
  char line[512];
  va_list ap;
  va_start(ap, fmt);
  int n = vsnprintf(line, sizeof line, fmt, ap);
  va_end(ap);
  if (n < 0) return;
  put(t, line, (size_t)n < sizeof line ? (size_t)n : sizeof line - 1);
}

/* The fewest of 15 or 17 significant digits that read back exactly. */
static void number(double v, char *out, size_t cap) {
  snprintf(out, cap, "%.15g", v);
  if (strtod(out, NULL) != v) snprintf(out, cap, "%.17g", v);
}

static const char *nm(const fg_lp *lp, size_t at) { return lp->pool + at; }

static void write_bounds(text *t, const fg_lp *lp, const lp_col *c) {
  const char *n = nm(lp, c->name);
  char a[32], b[32];
  bool lo = isfinite(c->lower), up = isfinite(c->upper);
  if (c->integer && c->lower == 0 && c->upper == 1) {
    putf(t, " BV  BND %s\n", n);
  } else if (lo && up && c->lower == c->upper) {
    number(c->lower, a, sizeof a);
    putf(t, " FX  BND %s %s\n", n, a);
  } else if (!lo && !up) {
    putf(t, " FR  BND %s\n", n);
  } else {
    if (!lo) {
      putf(t, " MI  BND %s\n", n);
    } else {
      number(c->lower, a, sizeof a);
      putf(t, " LO  BND %s %s\n", n, a);
    }
    if (!up) {
      putf(t, " PL  BND %s\n", n);
    } else {
      number(c->upper, b, sizeof b);
      putf(t, " UP  BND %s %s\n", n, b);
    }
  }
}

fg_status fg_lp_write_mps(const fg_lp *lp, const char *name,
                          const char *const *comments, int ncomments,
                          size_t max_bytes, char **out, size_t *len,
                          fg_problem *p) {
  *out = NULL;
  *len = 0;
  /* entries by column, rows in insertion order within a column */
  size_t *start = calloc((size_t)lp->ncols + 1, sizeof *start);
  size_t *order = malloc((lp->nent ? lp->nent : 1) * sizeof *order);
  if (!start || !order) {
    free(start), free(order);
    return fg_problem_set(p, FG_ENOMEM, "sample model: out of memory for "
                                        "%zu matrix entries", lp->nent);
  }
  for (size_t e = 0; e < lp->nent; e++) start[lp->ent[e].col + 1]++;
  for (int c = 0; c < lp->ncols; c++) start[c + 1] += start[c];
  {
    size_t *fill = malloc(((size_t)lp->ncols + 1) * sizeof *fill);
    if (!fill) {
      free(start), free(order);
      return fg_problem_set(p, FG_ENOMEM, "sample model: out of memory");
    }
    memcpy(fill, start, ((size_t)lp->ncols + 1) * sizeof *fill);
    for (size_t e = 0; e < lp->nent; e++) order[fill[lp->ent[e].col]++] = e;
    free(fill);
  }

  text t = {.max = max_bytes};
  char v[32];
  for (int i = 0; i < ncomments; i++) putf(&t, "* %s\n", comments[i]);
  putf(&t, "NAME %s\nROWS\n", name);
  for (int r = 0; r < lp->nrows; r++)
    putf(&t, " %c %s\n", lp->rows[r].kind, nm(lp, lp->rows[r].name));
  put(&t, "COLUMNS\n", 8);
  bool in_int = false;
  int marker = 0;
  for (int c = 0; c < lp->ncols && !t.over && !t.nomem; c++) {
    const lp_col *col = &lp->cols[c];
    if (col->integer != in_int) {
      if (col->integer) marker++;
      putf(&t, " M%d 'MARKER' '%s'\n", marker,
           col->integer ? "INTORG" : "INTEND");
      in_int = col->integer;
    }
    const char *cn = nm(lp, col->name);
    if (start[c] == start[c + 1]) putf(&t, " %s %s 0\n", cn, nm(lp, lp->rows[0].name));
    for (size_t k = start[c]; k < start[c + 1]; k++) {
      const lp_entry *e = &lp->ent[order[k]];
      number(e->v, v, sizeof v);
      putf(&t, " %s %s %s\n", cn, nm(lp, lp->rows[e->row].name), v);
    }
  }
  if (in_int) putf(&t, " M%d 'MARKER' 'INTEND'\n", marker);
  put(&t, "RHS\n", 4);
  for (int r = 1; r < lp->nrows; r++)
    if (lp->rows[r].rhs != 0) {
      number(lp->rows[r].rhs, v, sizeof v);
      putf(&t, " RHS %s %s\n", nm(lp, lp->rows[r].name), v);
    }
  put(&t, "BOUNDS\n", 7);
  for (int c = 0; c < lp->ncols; c++) write_bounds(&t, lp, &lp->cols[c]);
  put(&t, "ENDATA\n", 7);
  free(start), free(order);
  if (t.over) {
    free(t.buf);
    return fg_problem_limit(p, "/scenarios", FG_LIMIT_SAMPLE_MODEL_TEXT_BYTES,
                            (double)max_bytes,
                            "the model's MPS text exceeds "
                            "sample_model_text_bytes = %zu bytes; ask for "
                            "fewer scenarios",
                            max_bytes);
  }
  if (t.nomem) {
    free(t.buf);
    return fg_problem_set(p, FG_ENOMEM, "sample model: out of memory for "
                                        "the MPS text");
  }
  *out = t.buf;
  *len = t.len;
  return FG_OK;
}
