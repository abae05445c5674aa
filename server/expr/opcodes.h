/*
 * expr/opcodes.h -- the instruction set of feasgate's expression programs.
 *
 * This header is the specification. A program is a straight-line list of
 * instructions (no jumps, no calls); every instruction has the same layout:
 *
 *   +--------+------+------+------+------+---------+
 *   | opcode |  d   |  a   |  b   |  c   |  imm    |
 *   +--------+------+------+------+------+---------+
 *     int32    int32  int32  int32  int32  double
 *
 * d is the destination register, a, b, c are source registers (unused ones
 * are 0 and never read), imm is an immediate used by FG_OP_CONST only.
 * Each register is one value per lane; an instruction applies its operation
 * to every lane [0, n) independently, so no instruction reads another lane.
 *
 * Invariants the compiler guarantees and the interpreter relies on:
 *   - d never equals a, b or c (sources and destination do not alias, so
 *     the interpreter may use restrict pointers);
 *   - a source register is written by an earlier instruction of the same
 *     stream, by the setup stream (then broadcast), or is an input register;
 *   - there are no jumps: the cost of a stream is its length times n.
 *
 * Semantics follow IEEE 754 double arithmetic without traps: a division by
 * zero gives an infinity, log of a negative number gives NaN, and so on.
 * Truth values are 1 and 0; a non-zero number counts as true where an
 * operand is read as a truth value, and NaN is neither: NOT, AND, OR and
 * SELECT give NaN (their NaN operand, the first one when both are) where
 * a truth operand is NaN, so an undefined condition stays undefined and
 * a row built on it is counted as non-finite, never as held.
 *
 * Odd cases:
 *   - MIN and MAX propagate NaN (unlike fmin/fmax), so a NaN never hides
 *     inside a maximum and turns a violated row into a satisfied one;
 *   - ABOVE_ZERO(NaN) is NaN for the same reason;
 *   - comparisons with a NaN operand give 0, except NE which gives 1;
 *     comparisons of infinities follow IEEE (inf <= inf is 1);
 *   - EXCESS(a, b) is a - b except 0 where a == b, so two equal
 *     infinities give 0 (not inf - inf = NaN): a row's excess, whose sign
 *     says whether a <= b holds by IEEE rules; NaN only when an operand is
 *     NaN;
 *   - AND and OR read both operands (no short cut): 0 && NaN is NaN;
 *   - ROUND is C round(): halves go away from zero (round(-2.5) = -3);
 *   - CLAMP(x, lo, hi) is MIN(MAX(x, lo), hi): when lo > hi it gives hi;
 *   - MULADD computes a*b + c as two roundings (no fused multiply-add), so
 *     results do not depend on the host's floating-point contraction.
 */
#ifndef FG_EXPR_OPCODES_H
#define FG_EXPR_OPCODES_H

typedef enum fg_opcode {
  FG_OP_CONST = 0, /* d <- imm                                   */
  FG_OP_NEG,       /* d <- -a                                    */
  FG_OP_NOT,       /* d <- (a == 0) ? 1 : 0; NaN stays NaN       */
  FG_OP_ABS,       /* d <- |a|                                   */
  FG_OP_SQRT,      /* d <- sqrt(a)           (NaN for a < 0)     */
  FG_OP_EXP,       /* d <- e^a                                   */
  FG_OP_LOG,       /* d <- natural log of a  (-inf at 0, NaN < 0) */
  FG_OP_LOG10,     /* d <- base-10 log of a                      */
  FG_OP_FLOOR,     /* d <- largest integer <= a                  */
  FG_OP_CEIL,      /* d <- smallest integer >= a                 */
  FG_OP_ROUND,     /* d <- a rounded, halves away from zero      */
  FG_OP_ABOVE_ZERO, /* d <- max(a, 0), NaN stays NaN              */
  FG_OP_ADD,       /* d <- a + b                                 */
  FG_OP_SUB,       /* d <- a - b                                 */
  FG_OP_MUL,       /* d <- a * b                                 */
  FG_OP_DIV,       /* d <- a / b                                 */
  FG_OP_POW,       /* d <- a ^ b  (C pow)                        */
  FG_OP_MIN,       /* d <- smaller of a, b; NaN if either is NaN */
  FG_OP_MAX,       /* d <- larger of a, b; NaN if either is NaN  */
  FG_OP_LT,        /* d <- (a <  b) ? 1 : 0                      */
  FG_OP_LE,        /* d <- (a <= b) ? 1 : 0                      */
  FG_OP_GT,        /* d <- (a >  b) ? 1 : 0                      */
  FG_OP_GE,        /* d <- (a >= b) ? 1 : 0                      */
  FG_OP_EQ,        /* d <- (a == b) ? 1 : 0                      */
  FG_OP_NE,        /* d <- (a != b) ? 1 : 0                      */
  FG_OP_AND,       /* d <- (a != 0 && b != 0) ? 1 : 0; NaN in, NaN */
  FG_OP_OR,        /* d <- (a != 0 || b != 0) ? 1 : 0; NaN in, NaN */
  FG_OP_SELECT,    /* d <- (a != 0) ? b : c; a NaN gives a       */
  FG_OP_CLAMP,     /* d <- MIN(MAX(a, b), c)                     */
  FG_OP_MULADD,    /* d <- a * b + c  (two roundings)            */
  FG_OP_EXCESS,    /* d <- (a == b) ? 0 : a - b                  */
  FG_OP_COUNT
} fg_opcode;

/* Name (for listings) and number of source operands of each opcode, in
 * enum order. */
typedef struct fg_opcode_desc {
  const char *name;
  int nsrc;
} fg_opcode_desc;

static const fg_opcode_desc fg_opcode_table[] = {
    {"const", 0}, {"neg", 1}, {"not", 1},    {"abs", 1},   {"sqrt", 1},
    {"exp", 1},   {"log", 1}, {"log10", 1},  {"floor", 1}, {"ceil", 1},
    {"round", 1}, {"above_zero", 1}, {"add", 2},    {"sub", 2},   {"mul", 2},
    {"div", 2},   {"pow", 2}, {"min", 2},    {"max", 2},   {"lt", 2},
    {"le", 2},    {"gt", 2},  {"ge", 2},     {"eq", 2},    {"ne", 2},
    {"and", 2},   {"or", 2},  {"select", 3}, {"clamp", 3}, {"muladd", 3},
    {"excess", 2},
};

_Static_assert(sizeof fg_opcode_table / sizeof fg_opcode_table[0] ==
                   FG_OP_COUNT,
               "fg_opcode_table must list every opcode, in enum order");

#endif
