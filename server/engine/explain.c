/*
 * engine/explain.c -- one scenario of a check, explained: the uncertain
 * inputs drawn for sample i, the model's definitions in it, and every
 * constraint row's excess, recomputed from the model, the request and the
 * seed. Shared by GET /v1/checks/{id}/scenarios/{index} and
 * `feasgate explain`.
 *
 * Design: the check's workers draw sample i of the validation stream of
 * req->seed with the check's design, in blocks starting at multiples of
 * FG_BLOCK (chunk bounds are multiples of FG_BLOCK, and so are the look
 * points). A draw is a pure function of (seed, stream, dimension, index)
 * for Monte Carlo and of the pair for antithetic sampling (pairs start on
 * even indices, and FG_BLOCK is even), so evaluating the one block that
 * holds i, starting at i rounded down to FG_BLOCK, and taking lane
 * i mod FG_BLOCK gives exactly the values the check counted. Latin
 * hypercube and Sobol designs draw replicate by replicate; their
 * samples are refused (FG_EUNSUPPORTED) rather than explained.
 *
 * Body: {"index", "seed", "stream": "validation", "sampling",
 *        "inputs": {name: value or array}, "definitions": {name: value or
 *        array}, "rows": [{"name", "excess", "holds"}], "holds"}
 * "excess" is the row's left side minus its limit (for a range row the
 * larger of the two sides' excesses): positive, violated by that much;
 * zero or negative, it holds. Rows are in the model's order. Numbers are
 * printed with %.17g (they read back exactly); non-finite values are JSON
 * null (a NaN row does not hold).
 *
 * Invariants: index < the check's samples (whole pairs for antithetic
 * sampling); definitions come from a second program (model/defprog.c)
 * that reads the same decision and uncertain layout.
 *
 * Thread use: any thread; the model is only read, all scratch is local.
 * It evaluates one block: cheap enough for a connection thread.
 */
#include "engine/engine_internal.h"

#include <cJSON.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* A number as %.17g text (cJSON's own printing may drop the last bit:
 * its round-trip test allows a relative epsilon), so every value reads
 * back exactly, like the scenarios endpoint's; null when not finite. */
static cJSON *num_or_null(double v) {
  if (!isfinite(v)) return cJSON_CreateNull();
  char t[40];
  snprintf(t, sizeof t, "%.17g", v);
  return cJSON_CreateRaw(t);
}

/* Run the setup and one block of `prog` with decisions and the drawn
 * uncertain block `draw` (dims * FG_BLOCK); *out: nregs * FG_BLOCK. */
static fg_status run_block(const fg_program *prog, const double *decision,
                           const double *draw, int n, double **out,
                           fg_problem *p) {
  fg_program_info in;
  fg_program_get_info(prog, &in);
  size_t nregs = in.nregs > 0 ? (size_t)in.nregs : 1;
  double *setup = calloc(nregs, sizeof *setup);
  double *regs = calloc(nregs * FG_BLOCK, sizeof *regs);
  if (!setup || !regs) {
    free(setup);
    free(regs);
    return fg_problem_set(p, FG_ENOMEM, "explain: out of memory for %d "
                                        "registers", in.nregs);
  }
  for (int i = 0; i < in.ndecision; i++)
    setup[in.decision_base + i] = decision[i];
  fg_program_run_setup(prog, setup);
  fg_program_broadcast(prog, setup, regs);
  if (in.nuncertain > 0)
    memcpy(regs + (size_t)in.uncertain_base * FG_BLOCK, draw,
           sizeof(double) * (size_t)in.nuncertain * FG_BLOCK);
  fg_program_run_block(prog, regs, n);
  free(setup);
  *out = regs;
  return FG_OK;
}

/* The row plan the check had at these decisions (rowplan.c), with a
 * register file and pointers for it; *plan NULL when it had none. */
static fg_status plan_rows(const fg_model *m, const double *decision,
                           fg_rowplan **plan, double **regs, double ***ptrs,
                           fg_problem *p) {
  fg_program_info in;
  fg_program_get_info(m->program, &in);
  double *setup = calloc(in.nregs > 0 ? (size_t)in.nregs : 1, sizeof *setup);
  bool oom = setup == NULL;
  if (setup) {
    for (int i = 0; i < in.ndecision; i++)
      setup[in.decision_base + i] = decision[i];
    fg_program_run_setup(m->program, setup);
    *plan = fg_rowplan_build(m, setup, &oom);
  }
  free(setup);
  if (*plan) {
    size_t nr = (size_t)in.nregs + (size_t)fg_rowplan_extra_regs(*plan);
    *regs = calloc(nr * FG_BLOCK, sizeof **regs);
    *ptrs = malloc((size_t)fg_rowplan_nptrs(*plan) * sizeof **ptrs);
    oom = !*regs || !*ptrs;
  }
  if (oom)
    return fg_problem_set(p, FG_ENOMEM, "explain: out of memory for the "
                                        "row plan");
  return FG_OK;
}

/* Sampler columns "x" or "x[k]" grouped by name, in order. */
static void add_inputs(cJSON *obj, const fg_sampler *s, const double *draw,
                       int lane) {
  int dims = s ? fg_sampler_dims(s) : 0;
  for (int j = 0; j < dims;) {
    const char *col = fg_sampler_column(s, j);
    const char *br = strchr(col, '[');
    double v = draw[(size_t)j * FG_BLOCK + (size_t)lane];
    if (!br) {
      cJSON_AddItemToObject(obj, col, num_or_null(v));
      j++;
      continue;
    }
    size_t len = (size_t)(br - col);
    char name[FG_ROW_NAME_MAX];
    snprintf(name, sizeof name, "%.*s", (int)len, col);
    cJSON *arr = cJSON_AddArrayToObject(obj, name);
    while (j < dims) {
      const char *cj = fg_sampler_column(s, j);
      if (strncmp(cj, name, len) != 0 || cj[len] != '[') break;
      cJSON_AddItemToArray(
          arr, num_or_null(draw[(size_t)j * FG_BLOCK + (size_t)lane]));
      j++;
    }
  }
}

/* Definitions from the second program's rows (defprog.c). */
static fg_status add_definitions(cJSON *obj, const fg_model *m,
                                 const double *decision, const double *draw,
                                 int n, int lane, fg_problem *p) {
  const cJSON *defs = cJSON_GetObjectItemCaseSensitive(m->document,
                                                       "definitions");
  if (cJSON_GetArraySize(defs) == 0) return FG_OK;
  fg_program *prog = NULL;
  fg_status st = fg_model_definitions_program(m, &prog, p);
  if (st != FG_OK) return st;
  double *regs = NULL;
  st = run_block(prog, decision, draw, n, &regs, p);
  if (st == FG_OK) {
    fg_program_info in;
    fg_program_get_info(prog, &in);
    cJSON *arr = NULL;
    int cur = -1;
    for (int r = 0; r < in.nrows; r++) {
      const fg_row *row = &in.rows[r];
      double v = regs[(size_t)row->excess_reg * FG_BLOCK + (size_t)lane];
      const cJSON *d = cJSON_GetArrayItem(defs, row->constraint);
      const char *name =
          cJSON_GetStringValue(cJSON_GetObjectItemCaseSensitive(d, "name"));
      if (!name) continue;
      if (row->element < 0) {
        cJSON_AddItemToObject(obj, name, num_or_null(v));
        continue;
      }
      if (row->constraint != cur) {
        arr = cJSON_AddArrayToObject(obj, name);
        cur = row->constraint;
      }
      cJSON_AddItemToArray(arr, num_or_null(v));
    }
  }
  free(regs);
  fg_program_free(prog);
  return st;
}

fg_status fg_explain_scenario(const fg_model *m, const fg_check_request *req,
                              uint64_t index, struct cJSON **out,
                              fg_problem *p) {
  *out = NULL;
  fg_design design = (fg_design)req->sampling;
  if (design != FG_DESIGN_MONTE_CARLO && design != FG_DESIGN_ANTITHETIC) {
    fg_problem_set(p, FG_EUNSUPPORTED,
                   "explain: the check was drawn with %s sampling, whose "
                   "samples are drawn replicate by replicate; only "
                   "monte_carlo and antithetic checks have scenarios that "
                   "can be explained one by one",
                   fg_sampling_name(req->sampling));
    return FG_EUNSUPPORTED;
  }
  /* exact only: nothing was drawn, so no index is a sample */
  uint64_t samples = req->exact == FG_EXACT_ONLY ? 0 : req->samples;
  if (design == FG_DESIGN_ANTITHETIC) samples &= ~1ull;
  if (index >= samples) {
    fg_problem_add(p, FG_EINVAL, "/index", 0,
                   "index %llu is not a sample of this check: it has %llu "
                   "samples (0 to %llu)",
                   (unsigned long long)index, (unsigned long long)samples,
                   (unsigned long long)(samples ? samples - 1 : 0));
    return FG_EINVAL;
  }
  const fg_sampler *s = m->sampler;
  int dims = s ? fg_sampler_dims(s) : 0;
  uint64_t first = index - index % FG_BLOCK;
  int n = samples - first < FG_BLOCK ? (int)(samples - first) : FG_BLOCK;
  int lane = (int)(index - first);
  double *draw = calloc((size_t)(dims > 0 ? dims : 1) * FG_BLOCK,
                        sizeof *draw);
  fg_sample_scratch *w = dims ? fg_sample_scratch_new(s) : NULL;
  double *regs = NULL;
  fg_rowplan *plan = NULL;
  double *plan_regs = NULL;
  double **plan_ptrs = NULL;
  cJSON *o = cJSON_CreateObject();
  fg_status st = FG_OK;
  if (!draw || !o || (dims && !w)) {
    st = fg_problem_set(p, FG_ENOMEM, "explain: out of memory");
    goto done;
  }
  if (dims && design == FG_DESIGN_MONTE_CARLO) {
    st = plan_rows(m, req->decision, &plan, &plan_regs, &plan_ptrs, p);
    if (st != FG_OK) goto done;
  }
  if (plan) {
    /* the check's own path (rowplan.c): rows from the raw normals, then
     * the inputs finished with the plain draw's operations */
    const unsigned char *raw = fg_rowplan_raw(plan);
    fg_sampler_draw_raw(s, w, req->seed, FG_STREAM_VALIDATION, first, n, raw,
                        draw, FG_BLOCK);
    fg_rowplan_bind(plan, draw, plan_regs, plan_ptrs);
    fg_rowplan_rows(plan, plan_ptrs, n);
    fg_sampler_finish_raw(s, w, n, raw, draw, FG_BLOCK);
  } else if (dims) {
    if (design == FG_DESIGN_MONTE_CARLO)
      fg_sampler_draw(s, w, req->seed, FG_STREAM_VALIDATION, first, n, draw,
                      FG_BLOCK);
    else
      fg_sampler_draw_design(s, w, req->seed, FG_STREAM_VALIDATION, design,
                             0, first, n, draw, FG_BLOCK);
  }
  st = run_block(m->program, req->decision, draw, n, &regs, p);
  if (st != FG_OK) goto done;
  if (plan) {
    fg_program_info pi;
    fg_program_get_info(m->program, &pi);
    for (int r = 0; r < pi.nrows; r++) {
      if (pi.rows[r].deterministic) continue;
      size_t at = (size_t)pi.rows[r].excess_reg * FG_BLOCK + (size_t)lane;
      regs[at] = plan_regs[at];
    }
  }

  char seed[24];
  cJSON_AddNumberToObject(o, "index", (double)index);
  snprintf(seed, sizeof seed, "%llu", (unsigned long long)req->seed);
  cJSON_AddRawToObject(o, "seed", seed);
  cJSON_AddStringToObject(o, "stream", "validation");
  cJSON_AddStringToObject(o, "sampling", fg_sampling_name(req->sampling));
  add_inputs(cJSON_AddObjectToObject(o, "inputs"), s, draw, lane);
  st = add_definitions(cJSON_AddObjectToObject(o, "definitions"), m,
                       req->decision, draw, n, lane, p);
  if (st != FG_OK) goto done;
  fg_program_info in;
  fg_program_get_info(m->program, &in);
  cJSON *rows = cJSON_AddArrayToObject(o, "rows");
  bool all = true;
  for (int r = 0; r < in.nrows; r++) {
    double e = regs[(size_t)in.rows[r].excess_reg * FG_BLOCK + (size_t)lane];
    bool holds = e <= 0; /* NaN does not hold */
    all = all && holds;
    cJSON *row = cJSON_CreateObject();
    cJSON_AddStringToObject(row, "name", in.rows[r].name);
    cJSON_AddItemToObject(row, "excess", num_or_null(e));
    cJSON_AddBoolToObject(row, "holds", holds);
    cJSON_AddItemToArray(rows, row);
  }
  cJSON_AddBoolToObject(o, "holds", all);
  *out = o;
  o = NULL;
done:
  cJSON_Delete(o);
  fg_rowplan_free(plan);
  free(plan_regs);
  free(plan_ptrs);
  free(regs);
  fg_sample_scratch_free(w);
  free(draw);
  return st;
}
