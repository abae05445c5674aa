/*
 * sample/sampler.c -- building a sampler and drawing blocks of samples.
 *
 * Design: fg_sampler_build walks `uncertain` (checking each entry
 * defensively although model/ has checked names and sizes), parses every
 * distribution through family.c / mvn.c, lays the inputs' elements out as
 * dimensions in declaration order, then parses `dependence` (copula.c).
 * All errors found are reported, not just the first; on any error nothing
 * is returned.
 *
 * fg_sampler_draw fills a block of samples input by input: element-wise
 * families element by element (slot = dimension), multivariate normals and
 * scenario tables as one joint block each (standard normal k of a
 * multivariate normal from slot base + k; the row of a scenario table from
 * slot base), and copula entries last. Each is drawn for the whole block
 * at once -- the Philox words of every lane, then the transform as a loop
 * over lanes (stream.c, family.c, mvn.c, copula.c) -- with no per-sample
 * function-pointer call except inside GSL's own samplers. Every (sample,
 * slot) sub-stream starts from its own counter, so the values of sample
 * i, dimension j depend only on (seed, stream, j, i) and on nothing drawn
 * before: any chunking of the sample range gives the same numbers. The
 * draw path does not allocate or lock: the generator, the word and lane
 * buffers live in the scratch.
 *
 * Raw draws (engine/rowplan.c): fg_sampler_draw_raw leaves flagged
 * untruncated normal elements and multivariate normal inputs (outside
 * copulas) as their standard normals, from the same slots; a row plan
 * evaluates its folded rows from them. fg_sampler_finish_raw applies the
 * transforms the plain draw would have (m + sd e, the lower map) with the
 * same code, so finished values are the plain draw's bits.
 *
 * GSL's error handler: GSL aborts on errors by default, which a daemon
 * must never do on a client's input. The first build switches it off once
 * for the process (pthread_once); every GSL result used here is checked or
 * guarded by a prior validation.
 *
 * Thread use: a built sampler is immutable; any number of threads may draw
 * from it at once, each with its own scratch.
 */
#include "sample/sample_internal.h"

#include "feasgate/limits.h"

#include <cjson/cJSON.h>
#include <gsl/gsl_errno.h>

#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

struct fg_sampler {
  int ninputs;
  fg_input *inputs;
  int ncopulas;
  fg_copula *copulas;
  int dims;
  char **columns; /* per dimension, into colbuf */
  char *colbuf;
  unsigned char *integer; /* per dimension */
  int joint_max;          /* largest joint block (mvn size, copula d), >= 1 */
};

/* Per-thread draw state: the GSL generator for GSL's samplers, the
 * Philox words of one block, three lane buffers and the column pointers
 * of the largest joint block. About 30 KiB, allocated once per worker. */
struct fg_sample_scratch {
  gsl_rng *rng;
  fg_stream_words *words;
  double *u, *uc, *tmp; /* FG_BLOCK each */
  double **cols;        /* joint_max (also design.c's block mapping) */
};

static pthread_once_t gsl_once = PTHREAD_ONCE_INIT;
static void gsl_quiet(void) {
  gsl_set_error_handler_off();
}

void fg_sampler_free(fg_sampler *s) {
  if (!s) return;
  for (int i = 0; i < s->ninputs; i++)
    fg_family_free(&s->inputs[i]);
  for (int i = 0; i < s->ncopulas; i++)
    fg_sampler_copula_free(&s->copulas[i]);
  free(s->inputs);
  free(s->copulas);
  free(s->columns);
  free(s->colbuf);
  free(s->integer);
  free(s);
}

/* The outer members of one `uncertain` entry; parses its distribution. */
static fg_status parse_input(fg_input *in, const cJSON *u, const char *ptr,
                             long *dims, fg_problem *p) {
  char mptr[FG_POINTER_MAX];
  in->copula = -1;
  fg_status st =
      fg_family_expect_object(u, ptr, "an uncertain-input object", p);
  if (st != FG_OK) return st;
  const cJSON *name = cJSON_GetObjectItemCaseSensitive(u, "name");
  fg_pointer_join(mptr, sizeof mptr, ptr, "name");
  if (!cJSON_IsString(name) || !name->valuestring[0])
    return fg_problem_add(p, FG_EINVAL, name ? mptr : ptr, 0,
                          "expected a non-empty name string, found %s",
                          name ? fg_family_json_type(name) : "none");
  in->name = strdup(name->valuestring);
  if (!in->name) return fg_problem_set(p, FG_ENOMEM, "out of memory");
  in->size = 1;
  const cJSON *size = cJSON_GetObjectItemCaseSensitive(u, "size");
  fg_pointer_join(mptr, sizeof mptr, ptr, "size");
  if (size) {
    double v = cJSON_IsNumber(size) ? size->valuedouble : 0;
    if (!cJSON_IsNumber(size) || !(v >= 1) || v != floor(v)) {
      if (cJSON_IsNumber(size))
        return fg_problem_add(p, FG_EINVAL, mptr, 0,
                              "expected an integer size >= 1, found %.15g",
                              size->valuedouble);
      return fg_problem_add(p, FG_EINVAL, mptr, 0,
                            "expected an integer size >= 1, found %s",
                            fg_family_json_type(size));
    }
    if (v > FG_VECTOR_MAX)
      return fg_problem_limit(p, mptr, FG_LIMIT_VECTOR_LENGTH, FG_VECTOR_MAX,
                              "expected a size of at most %d, found %.0f",
                              FG_VECTOR_MAX, v);
    in->size = (int)v;
    in->is_vector = 1;
  }
  *dims += in->size;
  if (*dims > FG_UNCERTAIN_DIMS_MAX)
    return fg_problem_limit(p, size ? mptr : ptr, FG_LIMIT_UNCERTAIN_DIMENSIONS,
                            FG_UNCERTAIN_DIMS_MAX,
                            "expected at most %d uncertain dimensions in "
                            "all, found %ld by this input",
                            FG_UNCERTAIN_DIMS_MAX, *dims);
  const cJSON *dist = cJSON_GetObjectItemCaseSensitive(u, "distribution");
  fg_pointer_join(mptr, sizeof mptr, ptr, "distribution");
  if (!cJSON_IsObject(dist))
    return fg_problem_add(p, FG_EINVAL, dist ? mptr : ptr, 0,
                          "expected a distribution object, found %s",
                          dist ? fg_family_json_type(dist) : "none");
  const cJSON *fam = cJSON_GetObjectItemCaseSensitive(dist, "family");
  char fptr[FG_POINTER_MAX];
  fg_pointer_join(fptr, sizeof fptr, mptr, "family");
  if (!cJSON_IsString(fam))
    return fg_problem_add(p, FG_EINVAL, fam ? fptr : mptr, 0,
                          "expected a family name string, found %s",
                          fam ? fg_family_json_type(fam) : "none");
  const fg_family_def *def = fg_family_find(fam->valuestring);
  if (!def) {
    char names[FG_MESSAGE_MAX];
    fg_family_names(names, sizeof names);
    return fg_problem_add(p, FG_EINVAL, fptr, 0,
                          "unknown family '%.64s' (expected one of: %s)",
                          fam->valuestring, names);
  }
  in->family = def->name;
  if (!def->supported)
    return fg_problem_add(p, FG_EUNSUPPORTED, fptr, 0,
                          "family '%s' is not yet supported", def->name);
  st = fg_family_parse(in, def, dist, mptr, p);
  in->ok = st == FG_OK;
  return st;
}

/* Column names "name" or "name[e]", one buffer for all. */
static int make_columns(fg_sampler *s) {
  size_t total = 0;
  for (int i = 0; i < s->ninputs; i++)
    total += (size_t)s->inputs[i].size * (strlen(s->inputs[i].name) + 16);
  s->colbuf = malloc(total ? total : 1);
  s->columns = calloc((size_t)(s->dims ? s->dims : 1), sizeof(char *));
  s->integer = calloc((size_t)(s->dims ? s->dims : 1), 1);
  if (!s->colbuf || !s->columns || !s->integer) return -1;
  char *w = s->colbuf;
  for (int i = 0; i < s->ninputs; i++) {
    const fg_input *in = &s->inputs[i];
    size_t cap = strlen(in->name) + 16;
    for (int e = 0; e < in->size; e++) {
      int j = in->base + e;
      s->columns[j] = w;
      int len = in->is_vector ? snprintf(w, cap, "%s[%d]", in->name, e)
                              : snprintf(w, cap, "%s", in->name);
      w += len + 1;
      s->integer[j] = in->integer[e];
    }
  }
  return 0;
}

fg_status fg_sampler_build(const cJSON *uncertain, const cJSON *dependence,
                           fg_sampler **out, fg_problem *p) {
  pthread_once(&gsl_once, gsl_quiet);
  *out = NULL;
  fg_status st = FG_OK;
  if (uncertain && !cJSON_IsArray(uncertain))
    return fg_problem_add(p, FG_EINVAL, "/uncertain", 0,
                          "expected an array of uncertain inputs, found %s",
                          fg_family_json_type(uncertain));
  if (dependence && !cJSON_IsArray(dependence) && !cJSON_IsNull(dependence))
    return fg_problem_add(p, FG_EINVAL, "/dependence", 0,
                          "expected an array of dependence entries, found %s",
                          fg_family_json_type(dependence));
  fg_sampler *s = calloc(1, sizeof *s);
  if (!s) return fg_problem_set(p, FG_ENOMEM, "out of memory");
  int n = uncertain ? cJSON_GetArraySize(uncertain) : 0;
  s->inputs = calloc((size_t)(n ? n : 1), sizeof *s->inputs);
  if (!s->inputs) {
    st = fg_problem_set(p, FG_ENOMEM, "out of memory");
    goto fail;
  }
  s->ninputs = n;
  long dims = 0;
  int k = 0;
  for (const cJSON *u = n ? uncertain->child : NULL; u; u = u->next, k++) {
    char ptr[FG_POINTER_MAX];
    fg_pointer_index(ptr, sizeof ptr, "/uncertain", k);
    s->inputs[k].base = (int)dims;
    fg_status ist = parse_input(&s->inputs[k], u, ptr, &dims, p);
    if (ist != FG_OK && st == FG_OK) st = ist;
    if (ist == FG_ELIMIT && dims > FG_UNCERTAIN_DIMS_MAX) break;
  }
  s->ninputs = k < n ? k + 1 : n;
  /* entries without a valid name get "" so copula lookups stay safe */
  for (int i = 0; i < s->ninputs; i++)
    if (!s->inputs[i].name && !(s->inputs[i].name = strdup(""))) {
      st = fg_problem_set(p, FG_ENOMEM, "out of memory");
      goto fail;
    }
  s->dims = (int)dims;
  s->joint_max = 1;
  for (int i = 0; i < s->ninputs; i++)
    if (s->inputs[i].kind == FG_FAM_MVN && s->inputs[i].size > s->joint_max)
      s->joint_max = s->inputs[i].size;

  int nd = cJSON_IsArray(dependence) ? cJSON_GetArraySize(dependence) : 0;
  if (nd > 0 && !(st == FG_ELIMIT && dims > FG_UNCERTAIN_DIMS_MAX)) {
    s->copulas = calloc((size_t)nd, sizeof *s->copulas);
    if (!s->copulas) {
      st = fg_problem_set(p, FG_ENOMEM, "out of memory");
      goto fail;
    }
    int c = 0;
    for (const cJSON *d = dependence->child; d; d = d->next, c++) {
      char ptr[FG_POINTER_MAX];
      fg_pointer_index(ptr, sizeof ptr, "/dependence", c);
      fg_status cst = fg_sampler_copula_parse(&s->copulas[c], c, d, ptr,
                                              s->inputs, s->ninputs, p);
      s->ncopulas = c + 1;
      if (cst != FG_OK && st == FG_OK) st = cst;
      if (s->copulas[c].d > s->joint_max) s->joint_max = s->copulas[c].d;
    }
  }
  if (st != FG_OK) goto fail;
  for (int i = 0; i < s->ninputs; i++)
    if (fg_design_prepare_input(&s->inputs[i]) != 0) {
      st = fg_problem_set(p, FG_ENOMEM, "out of memory");
      goto fail;
    }
  if (make_columns(s) != 0) {
    st = fg_problem_set(p, FG_ENOMEM, "out of memory");
    goto fail;
  }
  *out = s;
  return FG_OK;
fail:
  fg_sampler_free(s);
  return st;
}

int fg_sampler_dims(const fg_sampler *s) {
  return s->dims;
}

int fg_sampler_gaussian(const fg_sampler *s, int j, double *mean, int *group,
                        int *gsize, const double **lrow) {
  for (int k = 0; k < s->ninputs; k++) {
    const fg_input *in = &s->inputs[k];
    if (j < in->base || j >= in->base + in->size) continue;
    int e = j - in->base;
    if (in->copula >= 0) return 0;
    if (in->kind == FG_FAM_NORMAL && !in->truncated) {
      *mean = in->par[0][e], *group = j, *gsize = 1, *lrow = &in->par[1][e];
      return 1;
    }
    if (in->kind == FG_FAM_MVN) {
      *mean = in->par[0][e], *group = in->base, *gsize = in->size;
      *lrow = in->chol + (size_t)e * (size_t)in->size;
      return 1;
    }
    return 0;
  }
  return 0;
}

const char *fg_sampler_column(const fg_sampler *s, int j) {
  return j >= 0 && j < s->dims ? s->columns[j] : NULL;
}

int fg_sampler_integer_valued(const fg_sampler *s, int j) {
  return j >= 0 && j < s->dims ? s->integer[j] : 0;
}

fg_sample_scratch *fg_sample_scratch_new(const fg_sampler *s) {
  fg_stream_init();
  fg_sample_scratch *w = calloc(1, sizeof *w);
  if (!w) return NULL;
  w->rng = fg_stream_rng_new();
  void *words = NULL, *lanes = NULL;
  if (posix_memalign(&words, 64, sizeof *w->words) == 0) w->words = words;
  if (posix_memalign(&lanes, 64, 3 * FG_BLOCK * sizeof(double)) == 0) {
    w->u = lanes;
    w->uc = w->u + FG_BLOCK;
    w->tmp = w->uc + FG_BLOCK;
  }
  w->cols = malloc((size_t)s->joint_max * sizeof *w->cols);
  if (!w->rng || !w->words || !w->u || !w->cols) {
    fg_sample_scratch_free(w);
    return NULL;
  }
  return w;
}

void fg_sample_scratch_free(fg_sample_scratch *w) {
  if (!w) return;
  if (w->rng) gsl_rng_free(w->rng);
  free(w->words);
  free(w->u);
  free(w->cols);
  free(w);
}

static void draw_table(const fg_input *in, gsl_rng *r, fg_stream_key key,
                       uint64_t first, int n, double *out, size_t stride) {
  for (int t = 0; t < n; t++) {
    fg_stream_reset(r, key, first + (uint64_t)t, (uint32_t)in->base);
    size_t row = in->alias ? gsl_ran_discrete(r, in->alias)
                           : gsl_rng_uniform_int(r, (unsigned long)in->nvalues);
    const double *src = in->values + row * (size_t)in->size;
    for (int e = 0; e < in->size; e++)
      out[(size_t)(in->base + e) * stride + (size_t)t] = src[e];
  }
}

/* Is input `in` (or its element e) left raw by these flags? */
static int raw_input(const fg_input *in, const unsigned char *raw) {
  if (!raw || in->copula >= 0) return 0;
  if (in->kind == FG_FAM_MVN) return raw[in->base] != 0;
  return 0;
}

static int raw_element(const fg_input *in, int e, const unsigned char *raw) {
  return raw && in->copula < 0 && in->kind == FG_FAM_NORMAL &&
         !in->truncated && raw[in->base + e] != 0;
}

static void draw(const fg_sampler *s, fg_sample_scratch *w, uint64_t seed,
                 fg_stream stream, uint64_t first, int n,
                 const unsigned char *raw, double *out, size_t stride) {
  if (n > FG_BLOCK) n = FG_BLOCK; /* the lane buffers' size; callers obey */
  fg_draw_ctx dc = {.key = fg_stream_key_make(seed, stream),
                    .first = first,
                    .n = n,
                    .rng = w->rng,
                    .words = w->words,
                    .u = w->u,
                    .uc = w->uc,
                    .tmp = w->tmp,
                    .cols = w->cols};
  for (int i = 0; i < s->ninputs; i++) {
    const fg_input *in = &s->inputs[i];
    if (in->copula >= 0) continue;
    if (in->kind == FG_FAM_MVN) {
      if (raw_input(in, raw))
        for (int k = 0; k < in->size; k++)
          fg_stream_normals(dc.key, first, n, (uint32_t)(in->base + k),
                            dc.words, out + (size_t)(in->base + k) * stride);
      else
        fg_family_mvn_draw(in, &dc, out, stride);
      continue;
    }
    if (in->kind == FG_FAM_SCENARIO_TABLE) {
      draw_table(in, w->rng, dc.key, first, n, out, stride);
      continue;
    }
    for (int e = 0; e < in->size; e++) {
      uint32_t slot = (uint32_t)(in->base + e);
      if (raw_element(in, e, raw))
        fg_stream_normals(dc.key, first, n, slot, dc.words,
                          out + (size_t)slot * stride);
      else
        fg_family_draw_block(in, e, slot, &dc, out + (size_t)slot * stride);
    }
  }
  for (int c = 0; c < s->ncopulas; c++)
    fg_sampler_copula_draw(&s->copulas[c], s->inputs, &dc, out, stride);
}

void fg_sampler_draw(const fg_sampler *s, fg_sample_scratch *w, uint64_t seed,
                     fg_stream stream, uint64_t first, int n, double *out,
                     size_t stride) {
  draw(s, w, seed, stream, first, n, NULL, out, stride);
}

void fg_sampler_draw_raw(const fg_sampler *s, fg_sample_scratch *w,
                         uint64_t seed, fg_stream stream, uint64_t first, int n,
                         const unsigned char *raw, double *out, size_t stride) {
  draw(s, w, seed, stream, first, n, raw, out, stride);
}

/* The transforms fg_family_draw_block (normal: m + sd * e) and
 * fg_family_mvn_draw (the lower map) apply after their normals. */
void fg_sampler_finish_raw(const fg_sampler *s, fg_sample_scratch *w, int n,
                           const unsigned char *raw, double *out,
                           size_t stride) {
  if (n > FG_BLOCK) n = FG_BLOCK;
  for (int i = 0; i < s->ninputs; i++) {
    const fg_input *in = &s->inputs[i];
    if (raw_input(in, raw)) {
      for (int k = 0; k < in->size; k++)
        w->cols[k] = out + (size_t)(in->base + k) * stride;
      fg_family_lower_apply(in->chol, in->par[0], in->size, n, w->cols);
      continue;
    }
    for (int e = 0; e < in->size; e++) {
      if (!raw_element(in, e, raw)) continue;
      double *x = out + (size_t)(in->base + e) * stride;
      double m = in->par[0][e], sd = in->par[1][e];
      for (int t = 0; t < n; t++)
        x[t] = m + sd * x[t];
    }
  }
}

/* ---- for design.c ------------------------------------------------------ */

const fg_input *fg_sampler_inputs(const fg_sampler *s, int *n) {
  *n = s->ninputs;
  return s->inputs;
}

const fg_copula *fg_sampler_copulas(const fg_sampler *s, int *n) {
  *n = s->ncopulas;
  return s->copulas;
}

void fg_sample_scratch_block(fg_sample_scratch *w, double ***cols,
                             double **tmp) {
  *cols = w->cols;
  *tmp = w->tmp;
}
