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

fg_sample_scratch *fg_sample_scratch_new(const fg_sampler *s);
void fg_sample_scratch_free(fg_sample_scratch *w);

/* Draw samples first .. first+n-1 (n <= FG_BLOCK) of (seed, stream):
 * dimension j of sample first+t goes to out[j * stride + t]. */
void fg_sampler_draw(const fg_sampler *s, fg_sample_scratch *w, uint64_t seed,
                     fg_stream stream, uint64_t first, int n, double *out,
                     size_t stride);

#endif
