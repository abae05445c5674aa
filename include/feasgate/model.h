/*
 * feasgate/model.h -- a registered uncertainty model, compiled (prefix
 * fg_model_).
 *
 * fg_model_compile() takes the raw bytes of a model document (format 1),
 * parses them (cJSON), validates every member with JSON Pointers, builds the
 * sampler (sample/) and the program (expr/), and computes the canonical
 * form and its digest: "sha256:" + hex SHA-256 of the canonical text (keys
 * sorted by byte order, no insignificant white space, numbers printed as
 * the shortest text that parses back to the same double).
 *
 * A compiled model is immutable and reference counted, so the HTTP handlers,
 * the cache and running checks can share it across threads; the count is
 * atomic.
 */
#ifndef FEASGATE_MODEL_H
#define FEASGATE_MODEL_H

#include "feasgate/limits.h"
#include "feasgate/status.h"

#include <stdbool.h>
#include <stddef.h>

struct cJSON;
struct fg_program;
struct fg_sampler;

#define FG_DIGEST_MAX 72 /* "sha256:" + 64 hex + NUL */

typedef struct fg_decision {
  char name[FG_NAME_MAX + 1];
  int size;   /* 0 = scalar */
  int offset; /* first element in the flattened decision vector */
  int count;  /* elements: max(size, 1) */
  double *lower, *upper; /* count values each; -INFINITY / +INFINITY if absent */
  bool integer;
} fg_decision;

typedef struct fg_model_summary {
  int decisions, decision_dims;
  int uncertain, uncertain_dims;
  int definitions;
  int constraints, rows, deterministic_rows;
  /* rows affine in the uncertain inputs / in the decisions / in both
   * (expr/affine.c) */
  int affine_in_inputs, affine_in_decisions, affine_in_both;
  bool objective;
} fg_model_summary;

typedef struct fg_model {
  char name[FG_NAME_MAX + 1];
  char *title;       /* NULL when absent */
  char *canonical;   /* canonical text, NUL-terminated */
  size_t canonical_len;
  char digest[FG_DIGEST_MAX];
  struct cJSON *document; /* the parsed document (read-only) */

  int ndecisions;
  fg_decision *decisions;
  int decision_dims;

  double target_probability; /* default 0.9 */
  double target_confidence;  /* default 0.95 */

  fg_model_summary summary;
  struct fg_program *program;
  struct fg_sampler *sampler;

  int refs; /* atomic; use fg_model_ref / fg_model_unref */
} fg_model;

/* A model name: [a-z0-9][a-z0-9_.-]{0,63} (FG_NAME_MAX characters). */
bool fg_model_is_model_name(const char *s);

/* Parse, validate and compile. On success *out holds one reference. */
fg_status fg_model_compile(const char *json, size_t len, fg_model **out,
                           fg_problem *p);
fg_model *fg_model_ref(fg_model *m);
void fg_model_unref(fg_model *m);

/* {"decisions": .., "decision_dims": .., ...} as the API's "summary". */
struct cJSON *fg_model_summary_json(const fg_model *m);

/* A program whose rows read back the model's definitions (model/defprog.c):
 * row k's excess is definition row->constraint, element row->element. */
fg_status fg_model_definitions_program(const fg_model *m,
                                       struct fg_program **out,
                                       fg_problem *p);

/* Canonical text of any JSON value (malloc'd; NULL on out of memory). */
char *fg_json_canonical(const struct cJSON *v, size_t *len);
/* Hex SHA-256 (FIPS 180-4) of data into hex[65]. */
void fg_sha256_hex(const void *data, size_t len, char hex[65]);

/* Parse JSON with feasgate's rules: UTF-8 text, one value, at most
 * FG_JSON_MAX_DEPTH deep, no trailing garbage. On a syntax error the
 * problem gets the byte offset where parsing stopped. */
fg_status fg_json_parse(const char *text, size_t len, struct cJSON **out,
                        fg_problem *p);

/* A small cache of compiled models keyed by digest, shared by threads
 * (mutex inside). get returns a new reference or NULL; put stores a
 * reference (evicting the least recently used beyond `capacity`). */
typedef struct fg_model_cache fg_model_cache;
fg_model_cache *fg_model_cache_new(int capacity);
void fg_model_cache_free(fg_model_cache *c);
fg_model *fg_model_cache_get(fg_model_cache *c, const char *digest);
void fg_model_cache_put(fg_model_cache *c, fg_model *m);

#endif
