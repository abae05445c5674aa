/*
 * expr/expr.h -- the expression compiler's interface (module prefix fg_expr_,
 * fg_program_).
 *
 * The model module declares the model's symbols in document order, then
 * hands over every definition, constraint and the objective as source text.
 * The compiler parses each one (lexer.c, parser.c), checks shapes (scalars
 * broadcast over vectors; vectors combine element by element when lengths
 * match), and emits a straight-line program over registers (compile.c;
 * opcodes.h is the instruction set). Vectors occupy consecutive registers.
 *
 * Register file layout of the finished program:
 *   [decision_base, decision_base + ndecision)   decision elements, flattened
 *                                                in declaration order
 *   [uncertain_base, uncertain_base + nuncertain) uncertain elements, flattened
 *                                                in declaration order
 *   then constants, definitions and temporaries.
 *
 * Two instruction streams:
 *   setup  -- everything that does not depend on an uncertain input
 *             (constants, decision arithmetic, deterministic rows). Run once
 *             per check with one value per register (stride 1).
 *   block  -- everything that does. Run per block of n <= FG_BLOCK samples,
 *             register r at regs + r * FG_BLOCK.
 * Before a worker runs blocks it calls fg_program_broadcast() once to copy
 * every setup-computed register into all FG_BLOCK lanes.
 *
 * A constraint row is represented by one register holding its *excess*,
 * built with EXCESS(a, b) = a - b except 0 where a == b (opcodes.h):
 *   e1 <= e2  ->  EXCESS(e1, e2)        e1 >= e2  ->  EXCESS(e2, e1)
 *   lo <= e <= hi -> max(EXCESS(lo, e), EXCESS(e, hi))
 *   (deterministic) a == b -> |EXCESS(a, b)|
 * so excess <= 0 exactly where the comparison holds by IEEE rules
 * (inf <= inf holds, with excess 0), and the excess is NaN exactly where
 * a side is NaN. The row holds in a sample iff excess <= 0; NaN never
 * holds and is counted apart as non-finite. Reported excess is
 * max(excess, 0).
 *
 * Errors are added to the fg_problem with the JSON Pointer the caller gave
 * and the 1-based column inside the source text.
 *
 * Thread use: compiling is single-threaded; a finished fg_program is
 * immutable and may be run by any number of threads at once, each with its
 * own register file.
 */
#ifndef FG_EXPR_H
#define FG_EXPR_H

#include "feasgate/limits.h"
#include "feasgate/status.h"

#include <stdbool.h>
#include <stddef.h>

typedef struct fg_expr_compiler fg_expr_compiler;

typedef enum fg_row_kind {
  FG_ROW_LE = 0, /* e1 <= e2 (or <) */
  FG_ROW_GE,     /* e1 >= e2 (or >) */
  FG_ROW_RANGE,  /* lo <= e <= hi */
  FG_ROW_EQ      /* a == b, deterministic rows only */
} fg_row_kind;

#define FG_ROW_NAME_MAX (FG_NAME_MAX + 16)

typedef struct fg_row {
  char name[FG_ROW_NAME_MAX]; /* "session_end" or "patient_wait[3]" */
  int constraint;             /* index into the document's constraints */
  int element;                /* element of a vector constraint; -1 scalar */
  fg_row_kind kind;
  int excess_reg;             /* register holding the excess (see above) */
  bool deterministic;         /* computed by the setup stream */
} fg_row;

typedef enum fg_objective_sense {
  FG_OBJECTIVE_NONE = 0,
  FG_OBJECTIVE_MINIMIZE,
  FG_OBJECTIVE_MAXIMIZE
} fg_objective_sense;

typedef struct fg_program fg_program;

/* Read-only view of a finished program's layout. */
typedef struct fg_program_info {
  int nregs;
  int decision_base, ndecision;
  int uncertain_base, nuncertain;
  int nrows;
  const fg_row *rows;
  int ndeterministic_rows;
  fg_objective_sense objective_sense;
  int objective_reg;            /* -1 when there is no objective */
  bool objective_deterministic; /* objective computed by setup */
  int nsetup_insns, nblock_insns;
} fg_program_info;

fg_expr_compiler *fg_expr_compiler_new(void);
void fg_expr_compiler_free(fg_expr_compiler *c);

/* Declare symbols, in document order: all decisions first, then all
 * uncertain inputs (the register layout above depends on that order).
 * size 0 means scalar; otherwise a vector of that length. `pointer` is the
 * member's JSON Pointer, used for errors (duplicate or reserved name). */
fg_status fg_expr_declare_decision(fg_expr_compiler *c, const char *name,
                                   int size, const char *pointer,
                                   fg_problem *p);
fg_status fg_expr_declare_uncertain(fg_expr_compiler *c, const char *name,
                                    int size, const char *pointer,
                                    fg_problem *p);

/* A definition with a value: `src` is the expression, `pointer` points at
 * its "value" member. */
fg_status fg_expr_define(fg_expr_compiler *c, const char *name,
                         const char *src, const char *pointer, fg_problem *p);

/* A definition built element by element: element k (a scalar expression)
 * may use elements 0..k-1 of `name` itself. `pointer` points at the
 * "elements" array; element k errors go to pointer/k. */
fg_status fg_expr_define_elements(fg_expr_compiler *c, const char *name,
                                  const char *const *srcs, int n,
                                  const char *pointer, fg_problem *p);

/* A constraint: `src` is its require text; a vector constraint expands to
 * rows name[i]. `pointer` points at "require". */
fg_status fg_expr_constraint(fg_expr_compiler *c, const char *name,
                             const char *src, const char *pointer,
                             fg_problem *p);

/* The objective (scalar). */
fg_status fg_expr_objective(fg_expr_compiler *c, fg_objective_sense sense,
                            const char *src, const char *pointer,
                            fg_problem *p);

/* Finish: allocate registers, split setup and block streams, check the
 * program limits. On success *out owns the program; the compiler may then
 * be freed. */
fg_status fg_expr_finish(fg_expr_compiler *c, fg_program **out,
                         fg_problem *p);

/* True when `name` is a function of the expression language (such names
 * are reserved and cannot name a model member). */
bool fg_expr_is_function_name(const char *name);

void fg_program_free(fg_program *prog);
void fg_program_get_info(const fg_program *prog, fg_program_info *info);

/* Run the setup stream on `regs` (info.nregs doubles, stride 1). Decision
 * registers must be filled by the caller first. */
void fg_program_run_setup(const fg_program *prog, double *regs);

/* Copy every register the setup stream defines (including decisions) from
 * `setup_regs` (stride 1) into all FG_BLOCK lanes of `block_regs`. */
void fg_program_broadcast(const fg_program *prog, const double *setup_regs,
                          double *block_regs);

/* Run the block stream on lanes [0, n) of `block_regs` (register r at
 * block_regs + r * FG_BLOCK); uncertain registers must be filled. */
void fg_program_run_block(const fg_program *prog, double *block_regs, int n);

/* Print a readable listing of both streams (one instruction a line with
 * its source span) for debugging and tests. */
void fg_program_dump(const fg_program *prog, void *file /* FILE* */);


/* ---- affine structure (affine.c; see its top comment) ---- */
typedef struct fg_affine_row {
  bool in_inputs;    /* affine in the uncertain inputs (coefficients may
                        depend on decisions) */
  bool in_decisions; /* affine in the decisions (coefficients may depend
                        on uncertain inputs) */
} fg_affine_row;

fg_affine_row fg_program_affine(const fg_program *prog, int row);
void fg_program_affine_counts(const fg_program *prog, int *in_inputs,
                              int *in_decisions, int *both);
/* The rows at fixed decisions as half-rows c + g . u <= 0 (u the flattened
 * uncertain vector): `setup_regs` as left by fg_program_run_setup; `out`
 * receives cap rows of (nuncertain + 1) doubles (c, g), row_of[h] the row
 * of half-row h (a range row gives two; a deterministic row one with g = 0).
 * Returns the number of half-rows; -1 when a row is not affine or not
 * finite at these decisions (*bad_row names it); -2 beyond `cap`,
 * FG_EXACT_DIMS_MAX inputs or FG_EXACT_FORM_CELLS_MAX; -3 out of memory. */
int fg_program_affine_halfrows(const fg_program *prog, const double *setup_regs,
                               double *out, int *row_of, int cap,
                               int *bad_row);
/* For a row that is not affine in the uncertain inputs: the operation
 * where that starts (affine_why.c) -- the source pointer of its
 * expression ("/constraints/0/require", "/definitions/2/value", ...), the
 * 1-based column there and the opcode's name ("mul", "exp", ...).
 * Returns 0 when the row is affine (or out of memory). */
int fg_program_affine_origin(const fg_program *prog, int row,
                             const char **pointer, int *column,
                             const char **op);

#endif
