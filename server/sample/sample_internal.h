/*
 * sample/sample_internal.h -- what the files of sample/ share; nothing
 * outside sample/ includes it (but its unit test, for design internals).
 *
 * How the module is divided:
 *   cipher.c   the Philox4x32-10 cipher over a block's lanes (SSE2, AVX2,
 *              AVX-512F, scalar), and one block for the slow paths.
 *   stream.c   Philox4x32-10 keys and counters, the GSL adaptor, uniforms
 *              and standard normals drawn from one (sample, slot) stream.
 *   param.c    reading distribution parameters from cJSON (scalar or
 *              per-element array, lists, error pointers).
 *   family.c   the family table, parameter checks of the element-wise
 *              families, their draws and inverse CDFs.
 *   mvn.c      matrices, the Cholesky factor with leading-minor reporting,
 *              the multivariate normal family.
 *   copula.c   the `dependence` entries (Gaussian copula).
 *   sampler.c  build, dimensions, column names, the draw loop.
 *   design.c   sampling designs (antithetic, Latin hypercube, Sobol).
 * A new family goes into family.c (element-wise) or its own file (joint).
 *
 * Invariants: after a successful build every parameter is finite and
 * inside its family's domain, so the draw code never checks again; a built
 * sampler is never written to.
 */
#ifndef FG_SAMPLE_INTERNAL_H
#define FG_SAMPLE_INTERNAL_H

#include "sample/sample.h"

#include "feasgate/limits.h"

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

struct cJSON;

/* ---- stream.c ------------------------------------------------------- */

/* Philox key words for (seed, stream); see sample.h for the layout. */
typedef struct fg_stream_key {
  uint32_t k0, k1;
} fg_stream_key;

fg_stream_key fg_stream_key_make(uint64_t seed, fg_stream stream);
/* Set in a counter's sample word (bit 63, bit 31 of word 1) for the
 * blocks that hold two samples' first normal attempts (stream.c); sample
 * indices stay below 2^53, so no sample's own counter has it. */
#define FG_STREAM_PAIR (UINT64_C(1) << 63)
/* A GSL generator backed by Philox; must be reset before each use. */
gsl_rng *fg_stream_rng_new(void);
/* Point r at the sub-stream of (sample, slot): draw counter 0. */
void fg_stream_reset(gsl_rng *r, fg_stream_key key, uint64_t sample,
                     uint32_t slot);
/* One uniform in the open interval (0, 1) with 53 random bits, and its
 * complement; u is exact when u < 1/2, uc is exact when u > 1/2, so
 * inverse CDFs can use whichever tail is accurate. */
void fg_stream_u01(gsl_rng *r, double *u, double *uc);

/* The four Philox output words of each lane of a block. */
typedef struct fg_stream_words {
  uint32_t w[4][FG_BLOCK];
} fg_stream_words;

/* Sets up the normal generator's tables and picks the cipher's code path
 * (also done on first use). */
void fg_stream_init(void);
/* Tests only: level 0 lets the cipher use the widest extension present
 * (the default), 1 at most AVX2, 2 only SSE2 and scalar code. Not
 * thread-safe. */
void fg_stream_force_portable(int level);
/* Picks the cipher's code path (cipher.c): level as for
 * fg_stream_force_portable. Called by fg_stream_init. */
void fg_cipher_select(int level);
/* One block for one (sample, slot, draw): the scalar form, for the slow
 * paths. */
void fg_stream_philox_one(fg_stream_key key, uint64_t sample, uint32_t slot,
                          uint32_t draw, uint32_t out[4]);
/* Philox4x32-10 of counters {first + t, slot, draw}, t < n <= FG_BLOCK. */
void fg_stream_philox(fg_stream_key key, uint64_t first, int n, uint32_t slot,
                      uint32_t draw, fg_stream_words *w);
/* Per lane t < n the uniform of (first + t, slot) that fg_stream_u01
 * gives after fg_stream_reset, and its complement; w is scratch. */
void fg_stream_u01s(fg_stream_key key, uint64_t first, int n, uint32_t slot,
                    fg_stream_words *w, double *u, double *uc);
/* Per lane t < n the standard normal of (first + t, slot) (ziggurat, see
 * stream.c); w is scratch. */
void fg_stream_normals(fg_stream_key key, uint64_t first, int n, uint32_t slot,
                       fg_stream_words *w, double *out);
/* The same normal for one sample. */
double fg_stream_normal_one(fg_stream_key key, uint64_t sample, uint32_t slot);

/* ---- libm_exp.c ----------------------------------------------------- */

/* x[t] = exp(x[t]) for t < n, libm's values bit for bit (see libm_exp.c
 * for the direct entry and the lane kernels, each used only where it is
 * checked to give the same bits). */
void fg_exp_lanes(double *x, int n);
/* x[t] = exp(mu + sd * x[t]) with the product and the sum each rounded:
 * the same bits as that loop followed by fg_exp_lanes, in one pass. */
void fg_exp_lanes_affine(double *x, int n, double mu, double sd);
/* Tests: 1 when fg_exp_lanes calls libm's implementation directly. */
int fg_exp_lanes_direct(void);
/* Tests: level 0 the widest lane kernel that passed its check, 1 at most
 * AVX2, 2 none (the scalar entry per lane). Returns the kernel now used:
 * 2 AVX-512F, 1 AVX2 + FMA, 0 none. Not for use while checks run. */
int fg_exp_lanes_force(int level);

/* What one block draw passes down to the families (sampler.c owns it):
 * the stream, the samples, and per-thread scratch of FG_BLOCK lanes. */
typedef struct fg_draw_ctx {
  fg_stream_key key;
  uint64_t first;
  int n;
  gsl_rng *rng; /* for GSL's samplers */
  fg_stream_words *words;
  double *u, *uc, *tmp; /* FG_BLOCK each */
  double **cols;        /* one column pointer per dimension of a block */
} fg_draw_ctx;

/* ---- the parsed inputs ---------------------------------------------- */

typedef enum fg_family_kind {
  FG_FAM_NORMAL,
  FG_FAM_LOGNORMAL,
  FG_FAM_UNIFORM,
  FG_FAM_TRIANGULAR,
  FG_FAM_PERT,
  FG_FAM_EXPONENTIAL,
  FG_FAM_GAMMA,
  FG_FAM_BETA,
  FG_FAM_WEIBULL,
  FG_FAM_STUDENT_T,
  FG_FAM_POISSON,
  FG_FAM_BINOMIAL,
  FG_FAM_DISCRETE,
  FG_FAM_EMPIRICAL,
  FG_FAM_MVN,
  FG_FAM_SCENARIO_TABLE
} fg_family_kind;

/* Per-element parameter arrays of one input (each `size` long). Their
 * meaning per family is listed in family.c beside the parser. */
#define FG_FAMILY_NPAR 8

typedef struct fg_input {
  char *name;
  int size;      /* elements (1 for a scalar) */
  int is_vector; /* `size` member present: columns are "name[e]" */
  int base;      /* first dimension */
  int ok;        /* distribution parsed and valid */
  fg_family_kind kind;
  const char *family; /* static family name */
  int truncated;      /* normal with lower and/or upper */
  double *par[FG_FAMILY_NPAR];
  double *parbuf;
  /* tables: discrete values, empirical data, scenario rows (row-major,
   * nvalues rows of `size`) */
  double *values;
  int nvalues;
  double *weights; /* normalised, for scenario_table / discrete */
  gsl_ran_discrete_t *alias;
  /* discrete inverse CDF: support sorted ascending with P(X <= v_k) and
   * P(X > v_k) */
  double *sorted, *cdf_lo, *cdf_hi;
  double *chol;           /* mvn: lower Cholesky factor, size x size */
  unsigned char *integer; /* per element: always integer valued */
  int copula;             /* index of its dependence entry, or -1 */
} fg_input;

/* Reading parameters (param.c). */
typedef struct fg_params {
  const struct cJSON *dist; /* the distribution object */
  const char *ptr;          /* its JSON Pointer */
  int size;
  const char *family;
  fg_problem *p;
  fg_status st; /* first error recorded through this context */
} fg_params;

const char *fg_family_json_type(const struct cJSON *v);
/* FG_OK when v is an object, else FG_EINVAL with "expected <what>, found
 * <its type>" at ptr. */
fg_status fg_family_expect_object(const struct cJSON *v, const char *ptr,
                                  const char *what, fg_problem *p);
/* Pointer of parameter `name`, or of its element e when it was given as
 * an array (e < 0: the member itself). */
void fg_family_param_pointer(const fg_params *c, const char *name, int e,
                             char *buf, size_t cap);
void fg_family_param_error(fg_params *c, fg_status st, const char *name, int e,
                           const char *fmt, ...)
    __attribute__((format(printf, 5, 6)));
int fg_family_param_present(const fg_params *c, const char *name);
/* A number or an array of `size` numbers into out[size]. Returns 1 when
 * read, 0 when absent (out filled with dflt unless required, which is an
 * error), -1 on error. */
int fg_family_param_vec(fg_params *c, const char *name, double *out,
                        int required, double dflt);
/* An array of 1..FG_TABLE_CELLS_MAX numbers, allocated into *out. Returns
 * 1 when read, 0 when absent and not required, -1 on error. */
int fg_family_param_list(fg_params *c, const char *name, int required,
                         double **out, int *n);
/* Members other than "family" and the names in `allowed` are errors. */
void fg_family_param_unknown(fg_params *c, const char *const *allowed);

/* The checks of family_check.c: each reports every failing element of
 * an array parameter, or a scalar once, naming the parameter. */
int fg_param_is_array(const fg_params *c, const char *name);
/* v[e] > 0 (strict) or >= 0 */
void fg_param_positive(fg_params *c, const char *name, const double *v,
                       int strict);
/* lo[e] < hi[e] (strict) or <= */
void fg_param_less(fg_params *c, const char *lo_name, const double *lo,
                   const char *hi_name, const double *hi, int strict);
void fg_param_at_most(fg_params *c, const char *name, const double *v,
                      double max);
void fg_param_integer(fg_params *c, const char *name, const double *v);
/* lo <= v[e] <= hi, the message giving the range and `why` */
void fg_param_range(fg_params *c, const char *name, const double *v,
                    double lo, double hi, const char *why);
/* |loc| + scale * qmax stays below a quarter of the largest double, qmax
 * being the standard quantile at FG_ICDF_P_MIN for element e */
void fg_param_finite_scale(fg_params *c, const char *name,
                           const double *scale, const double *loc,
                           const double *qmax);
/* Whole and exactly representable. */
int fg_param_integral(double v);
/* fg_family_param_vec into in->par[slot]. */
int fg_param_read(fg_params *c, fg_input *in, int slot, const char *name,
                  int required, double dflt);
/* Mark every element integer valued (or not). */
void fg_param_set_integer(fg_input *in, int value);
/* Why the shape parameters have their ranges (limits.h). */
#define FG_PARAM_SHAPE_WHY                                                     \
  "the range where draws and quantiles keep their accuracy"

/* Families (family.c: the table and the dispatch; see its top comment). */
typedef struct fg_family_def {
  const char *name;
  fg_family_kind kind;
  const char *const *params; /* NULL-terminated member names */
  int supported;
  void (*parse)(fg_input *in, fg_params *c);
  /* NULL: cannot be a Gaussian copula member */
  double (*icdf)(const fg_input *in, int e, double u, double uc);
  /* its own block path, or NULL; false: declined for this input */
  bool (*block)(const fg_input *in, int e, uint32_t slot,
                const fg_draw_ctx *dc, double *out);
  /* one sample through GSL on the sub-stream r was reset to, or NULL */
  double (*draw)(const fg_input *in, int e, gsl_rng *r);
} fg_family_def;

/* One entry: fg_family_<id> named "<id>", of kind FG_FAM_<KIND>, with
 * parameter names p_<id> and parser parse_<id> (static in its file). */
#define FG_FAMILY(id, KIND, icdf, block, draw)                                 \
  const fg_family_def fg_family_##id = {#id, FG_FAM_##KIND, p_##id, 1,         \
                                        parse_##id, icdf, block, draw}
/* The entries (family_laws.c, family_tables.c, family.c). */
extern const fg_family_def fg_family_normal, fg_family_lognormal,
    fg_family_uniform, fg_family_triangular, fg_family_pert,
    fg_family_exponential, fg_family_gamma, fg_family_beta,
    fg_family_weibull, fg_family_student_t, fg_family_poisson,
    fg_family_binomial, fg_family_discrete, fg_family_empirical,
    fg_family_multivariate_normal, fg_family_scenario_table;
/* Standard normal quantile from whichever tail is exact (uc = 1 - u). */
double fg_family_std_quantile(double u, double uc);

const fg_family_def *fg_family_find(const char *name);
/* "normal, lognormal, ..." for error messages. */
void fg_family_names(char *buf, size_t cap);
/* Parse and check in->family's parameters; in->size is set. */
fg_status fg_family_parse(fg_input *in, const fg_family_def *def,
                          const struct cJSON *dist, const char *ptr,
                          fg_problem *p);
void fg_family_free(fg_input *in);
/* Element e of an element-wise input for the block's samples, from slot
 * `slot`, into out[0..n). */
void fg_family_draw_block(const fg_input *in, int e, uint32_t slot,
                          const fg_draw_ctx *dc, double *out);
/* Element e given the standard normal x of a Gaussian copula, for the
 * block's samples, in place in col[0..n). */
void fg_family_from_normal(const fg_input *in, int e, const fg_draw_ctx *dc,
                           double *col);
/* Inverse CDF of element e at u (uc = 1 - u, each exact in its own half);
 * families with an icdf only (NaN for the others). */
double fg_family_icdf(const fg_input *in, int e, double u, double uc);
/* Smallest index k of a cumulative table (cdf_lo / cdf_hi, nvalues
 * entries) with P(X <= v_k) >= u, read from whichever tail is exact. */
int fg_family_cdf_index(const fg_input *in, double u, double uc);

/* Matrices and the multivariate normal (mvn.c). */
/* Read an n x n matrix of finite numbers (array of n arrays of n). */
int fg_family_matrix_read(const struct cJSON *m, int n, const char *ptr,
                          double *out, fg_problem *p);
/* 0 when symmetric, else -1 after reporting the first asymmetric pair. */
int fg_family_matrix_symmetric(const double *a, int n, const char *ptr,
                               const char *what, fg_problem *p);
/* Factor a (row-major n x n, symmetric) in place into its lower Cholesky
 * factor (upper triangle zeroed). Returns 0, or the 1-based order of the
 * first leading minor that is not positive. */
int fg_family_cholesky(double *a, int n);
fg_status fg_family_mvn_parse(fg_input *in, fg_params *c);
/* cols[i] = mean_i + sum_{k <= i} L_ik cols[k], in place for lanes
 * [0, n), L lower d x d row-major; mean may be NULL (zero). */
void fg_family_lower_apply(const double *chol, const double *mean, int d,
                           int n, double *const *cols);
void fg_family_mvn_draw(const fg_input *in, const fg_draw_ctx *dc,
                        double *out, size_t stride);

/* Dependence entries (copula.c). */
typedef enum fg_corr_form {
  FG_CORR_FULL,
  FG_CORR_EQUAL,
  FG_CORR_AR1
} fg_corr_form;

typedef struct fg_copula {
  int d;      /* dimensions tied */
  int *dims;  /* their sampler dimensions, in member order */
  int *input; /* input index of each */
  int *elem;  /* element of that input */
  fg_corr_form form;
  double *chol;   /* FULL: d x d lower factor */
  double *c, *dd; /* EQUAL: factor column value and diagonal */
  double r, rc;   /* AR1: r and sqrt(1 - r^2) */
} fg_copula;

fg_status fg_sampler_copula_parse(fg_copula *cop, int index,
                                  const struct cJSON *entry, const char *ptr,
                                  fg_input *inputs, int ninputs, fg_problem *p);
void fg_sampler_copula_free(fg_copula *cop);
void fg_sampler_copula_correlate(const fg_copula *cop, double *const *cols,
                                 int n, double *tmp);
void fg_sampler_copula_draw(const fg_copula *cop, const fg_input *inputs,
                            const fg_draw_ctx *dc, double *out, size_t stride);

/* ---- for the sampling designs (design.c) ----------------------------- */

/* The parsed inputs and dependence entries of a built sampler, and a
 * scratch's two joint-block vectors (sampler.c). */
const fg_input *fg_sampler_inputs(const fg_sampler *s, int *n);
const fg_copula *fg_sampler_copulas(const fg_sampler *s, int *n);
/* The scratch's column pointers (one per dimension) and an FG_BLOCK
 * temporary, for design.c's block-wise mapping. */
void fg_sample_scratch_block(fg_sample_scratch *w, double ***cols,
                             double **tmp);
/* Tables the designs map through, made at build: empirical data sorted
 * into in->sorted; a scenario table's cumulative row weights into
 * in->cdf_lo (P(row <= k)) and in->cdf_hi (P(row > k)). -1 when out of
 * memory. */
int fg_design_prepare_input(fg_input *in);
/* Unshifted Sobol point q of coordinate c as a 53-bit integer (the value
 * is x / 2^53); c < fg_design_sobol_max_dims(). For the unit test. */
uint64_t fg_design_sobol_point(int c, uint64_t q);

#endif
