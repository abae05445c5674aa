/*
 * sample/sample.h -- drawing the uncertain inputs (module prefix fg_sampler_,
 * fg_stream_).
 *
 * A sampler is built from the document's `uncertain` array and optional
 * `dependence` array (cJSON, already checked by model/ for names, sizes and
 * member types of the outer objects). It validates every distribution's
 * parameters and dependence entry itself, adding errors with JSON Pointers
 * such as /uncertain/2/distribution/sd, and never clamps a bad value.
 *
 * Dimensions: the elements of all inputs, flattened in declaration order
 * (input 0's elements, then input 1's, ...). Dimension j of the sampler is
 * register uncertain_base + j of the compiled program.
 *
 * Random streams (stream.c): Philox4x32-10 from Random123. The numbers of
 * sample i, dimension j are a pure function of (seed, stream, j, i):
 *   key     = { seed & 0xffffffff, (seed >> 32) | (stream << 24) }
 *   counter = { i & 0xffffffff, i >> 32, slot, draw }
 * where slot identifies the dimension (or a joint block) and draw counts
 * the uniforms one sample needs (rejection samplers use as many as they
 * need). GSL's samplers draw through Random123's GSL adaptor
 * (gsl_microrng.h) reset to that counter. Consequences: results do not
 * depend on worker count or chunking; sample i can be regenerated alone;
 * the design and validation streams never share a scenario.
 *
 * Thread use: a built sampler is immutable and shared; every thread draws
 * with its own fg_sample_scratch.
 */
#ifndef FG_SAMPLE_H
#define FG_SAMPLE_H

#include "feasgate/status.h"

#include <stddef.h>
#include <stdint.h>

struct cJSON;

typedef enum fg_stream {
  FG_STREAM_DESIGN = 1,     /* scenarios handed to a team's optimiser */
  FG_STREAM_VALIDATION = 2  /* out-of-sample checks */
} fg_stream;

typedef struct fg_sampler fg_sampler;
typedef struct fg_sample_scratch fg_sample_scratch;

/* Build and validate. `uncertain` is the document's array (may be empty),
 * `dependence` may be NULL. */
fg_status fg_sampler_build(const struct cJSON *uncertain,
                           const struct cJSON *dependence, fg_sampler **out,
                           fg_problem *p);
void fg_sampler_free(fg_sampler *s);

/* Total dimension (sum of input sizes, scalar = 1). */
int fg_sampler_dims(const fg_sampler *s);
/* Column name of dimension j: "urgent" or "dur[3]". */
const char *fg_sampler_column(const fg_sampler *s, int j);
/* True when dimension j always takes integer values (poisson, discrete
 * with integer values, ...); used by CSV output. */
int fg_sampler_integer_valued(const fg_sampler *s, int j);

/* Dimension j as a coordinate of a jointly normal vector (exact path):
 * 1 when it is an element of a `normal` input without truncation or of a
 * `multivariate_normal` input, outside any copula; then *mean is its mean,
 * its block of jointly normal dimensions is [*group, *group + *gsize) and
 * *lrow its row of the block's lower factor (gsize values: x_j = mean +
 * sum_k lrow[k] e_(group + k), e standard normal). 0 otherwise. A Gaussian
 * copula member with normal margins is jointly normal too, but is not
 * offered here (its factor lives in the copula). */
int fg_sampler_gaussian(const fg_sampler *s, int j, double *mean, int *group,
                        int *gsize, const double **lrow);
/* Dimension j as a coordinate of one jointly normal vector (gaussian.c):
 * 1 when it is an element of an untruncated `normal` input (inside a
 * Gaussian copula or not) or of a `multivariate_normal` input; then
 * x_j = *mean + sum_k row[k] e_k, e_k the independent standard normal of
 * sampler dimension k (row: fg_sampler_dims values, written whole). 0
 * otherwise, with *input the input's index in the document (-1 when j is
 * out of range) and *why a sentence saying why. */
int fg_sampler_gaussian_row(const fg_sampler *s, int j, double *mean,
                            double *row, int *input, const char **why);

fg_sample_scratch *fg_sample_scratch_new(const fg_sampler *s);
void fg_sample_scratch_free(fg_sample_scratch *w);

/* Draw samples first .. first+n-1 (n <= FG_BLOCK) of (seed, stream):
 * dimension j of sample first+t goes to out[j * stride + t]. */
void fg_sampler_draw(const fg_sampler *s, fg_sample_scratch *w, uint64_t seed,
                     fg_stream stream, uint64_t first, int n, double *out,
                     size_t stride);

/* Row plans (engine/rowplan.c): like fg_sampler_draw, except that every
 * element j with raw[j] set of an untruncated `normal` input and every
 * `multivariate_normal` input whose first element has raw set (outside
 * any copula, as fg_sampler_gaussian offers them) is left as its standard
 * normal e_j (slot j), without mean or factor. raw has one flag per
 * dimension; flags of other inputs are ignored. */
void fg_sampler_draw_raw(const fg_sampler *s, fg_sample_scratch *w,
                         uint64_t seed, fg_stream stream, uint64_t first, int n,
                         const unsigned char *raw, double *out, size_t stride);
/* Turns what fg_sampler_draw_raw left raw into the values fg_sampler_draw
 * gives (the same operations, so the same bits), in place, lanes [0, n). */
void fg_sampler_finish_raw(const fg_sampler *s, fg_sample_scratch *w, int n,
                           const unsigned char *raw, double *out,
                           size_t stride);

/* ---- sampling designs (design.c) ----
 * A design decides where the uniforms behind each scenario come from;
 * every input is then mapped through its inverse CDF (multivariate normal
 * and copula members through normal quantiles and their factor; empirical
 * and scenario_table by index), so marginals and dependence stay as
 * declared.
 *   FG_DESIGN_ANTITHETIC  samples 2m and 2m+1 are a pair: uniforms u of
 *                         pair m's counter draw and 1 - u.
 *   FG_DESIGN_LATIN_HYPERCUBE  within a replicate of `rep_size` samples,
 *                         every dimension has one sample per stratum
 *                         [k/rep_size, (k+1)/rep_size), strata assigned by
 *                         an independent pseudo-random permutation per
 *                         (replicate, dimension) computed on the fly
 *                         (no tables), jittered inside the stratum.
 *   FG_DESIGN_SOBOL       Sobol points, index i within the replicate, with
 *                         a random digital shift per (replicate,
 *                         dimension); at most fg_design_sobol_max_dims()
 *                         dimensions.
 * Replicate r covers global sample indices [r*rep_size, (r+1)*rep_size).
 * Every value is a pure function of (seed, stream, design, rep_size,
 * global index, dimension), so chunking and workers do not matter. */
typedef enum fg_design {
  FG_DESIGN_MONTE_CARLO = 0,
  FG_DESIGN_ANTITHETIC,
  FG_DESIGN_LATIN_HYPERCUBE,
  FG_DESIGN_SOBOL
} fg_design;

int fg_design_sobol_max_dims(void);
/* FG_OK when sampler s can be drawn with design d (Sobol: dimension
 * limit, reported as a limit "sobol_dimensions"). */
fg_status fg_sampler_design_check(const fg_sampler *s, fg_design d,
                                  fg_problem *p);
/* Like fg_sampler_draw, for design d (FG_DESIGN_MONTE_CARLO falls back to
 * fg_sampler_draw). first..first+n-1 are global sample indices; a call
 * never crosses a replicate boundary (the engine aligns chunks). */
void fg_sampler_draw_design(const fg_sampler *s, fg_sample_scratch *w,
                            uint64_t seed, fg_stream stream, fg_design d,
                            uint64_t rep_size, uint64_t first, int n,
                            double *out, size_t stride);

#endif
