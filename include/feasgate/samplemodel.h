/*
 * feasgate/samplemodel.h -- the scenario model of a registered model, for
 * a team's own mixed-integer solver (engine/samplemodel.c; prefix
 * fg_sample_model_).
 *
 * POST /v1/models/{name}/sample-models and `feasgate sample-model` draw s
 * scenarios of the design stream (the same scenarios GET
 * .../scenarios hands out for that seed, from index 0), read every
 * constraint row as an affine form in the decisions at each scenario
 * (expr/affine.c) and write the deterministic scenario program in free
 * MPS (engine/mps.c):
 *   indicator  one binary keep_l per scenario; each row of scenario l:
 *              lhs - rhs <= M(l, r) (1 - keep_l), M(l, r) the largest
 *              value of that row's lhs - rhs over the decisions' bounds in
 *              scenario l; sum keep >= the fewest scenarios whose share
 *              reaches the target;
 *   all        every scenario's rows enforced; the answer states the
 *              violation level the scenario approach guarantees (Campi &
 *              Garatti 2008) for the model's decision components.
 * Decisions keep their bounds and integrality. Deterministic rows are
 * written once, enforced. The objective is the model's (averaged over the
 * scenarios when it depends on them) when affine in the decisions.
 *
 * Thread use: pure; the model is only read.
 */
#ifndef FEASGATE_SAMPLEMODEL_H
#define FEASGATE_SAMPLEMODEL_H

#include "feasgate/model.h"
#include "feasgate/status.h"

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

struct cJSON;

typedef enum fg_sample_form {
  FG_SAMPLE_FORM_INDICATOR = 0,
  FG_SAMPLE_FORM_ALL
} fg_sample_form;

typedef struct fg_sample_model_request {
  uint64_t scenarios; /* 1 .. FG_SAMPLE_MODEL_SCENARIOS_MAX */
  uint64_t seed;
  bool seed_given;    /* false: the caller draws one (fg_seed_draw) */
  fg_sample_form form;
  double target;      /* the model's unless given */
  double confidence;  /* the model's unless given (the all form's
                         statement holds with this confidence) */
} fg_sample_model_request;

/* Validate a body {"scenarios", "seed", "form", "target", "confidence"}
 * (only scenarios is required); faults are named by JSON Pointer. */
fg_status fg_sample_model_parse(const fg_model *m, const struct cJSON *body,
                                fg_sample_model_request *out, fg_problem *p);

/* Build the scenario model. *answer receives the JSON answer without
 * "text" (the caller adds it or sends the text alone), *text the MPS text
 * (malloc'd, *len bytes). FG_ELIMIT past a sample_model_* limit;
 * FG_EUNSUPPORTED (the API's 422) when a row or the model cannot be
 * written: a row not affine in the decisions (named with its term), a
 * coefficient not finite in a scenario, a decision whose missing bound
 * leaves a big-M infinite, a model without decisions. */
fg_status fg_sample_model_build(const fg_model *m,
                                const fg_sample_model_request *q,
                                struct cJSON **answer, char **text,
                                size_t *len, fg_problem *p);

/* Name of decision component j ("pump[2]" or "reserve"). */
void fg_sample_model_component(const fg_model *m, int j, char *buf,
                               size_t cap);

#endif
