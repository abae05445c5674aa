/*
 * engine/mps.h -- a linear or mixed-integer program gathered in memory and
 * written as free MPS text (engine/mps.c; prefix fg_lp_).
 *
 * Used by the scenario model export (engine/samplemodel.c). A program is
 * built row by row (rows, then their entries in any order) and written
 * column by column, which is what MPS's COLUMNS section wants.
 *
 * Thread use: one fg_lp belongs to one caller.
 */
#ifndef FG_ENGINE_MPS_H
#define FG_ENGINE_MPS_H

#include "feasgate/status.h"

#include <stdbool.h>
#include <stddef.h>

typedef struct fg_lp fg_lp;

/* `objective` names the objective row (row 0, kind 'N'). */
fg_lp *fg_lp_new(const char *objective);
void fg_lp_free(fg_lp *lp);

/* A column with bounds (-INFINITY / INFINITY when absent); its index, or
 * -1 when out of memory. Names are MPS names: no white space. */
int fg_lp_add_col(fg_lp *lp, const char *name, double lower, double upper,
                  bool integer);
/* A row `kind` 'L' (<= rhs), 'G' (>= rhs) or 'E' (= rhs); its index (the
 * objective is row 0), or -1 when out of memory. */
int fg_lp_add_row(fg_lp *lp, const char *name, char kind, double rhs);
/* Coefficient v of column col in row row (row 0: the objective). Zeros
 * are skipped. False when out of memory. */
bool fg_lp_add_entry(fg_lp *lp, int row, int col, double v);
int fg_lp_rows(const fg_lp *lp);
size_t fg_lp_entries(const fg_lp *lp);

/* Free MPS text (NAME, ROWS, COLUMNS with integer markers, RHS, BOUNDS,
 * ENDATA) under the name `name`, each comment line prefixed with "* ".
 * FG_ELIMIT (limit sample_model_text_bytes) beyond max_bytes; *text is
 * malloc'd and NUL-terminated. */
fg_status fg_lp_write_mps(const fg_lp *lp, const char *name,
                          const char *const *comments, int ncomments,
                          size_t max_bytes, char **text, size_t *len,
                          fg_problem *p);

#endif
