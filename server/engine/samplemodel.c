/*
 * engine/samplemodel.c -- the scenario model of a registered model for a
 * team's own solver (feasgate/samplemodel.h; the MPS text is written by
 * engine/mps.c).
 *
 * Design: s scenarios of the design stream are drawn FG_BLOCK at a time
 * (scenario l is the row l of GET .../scenarios for that seed, because a
 * draw is a pure function of (seed, stream, column, index)). For each,
 * fg_decision_forms_rows (expr/affine.c) gives every row as half-rows
 * c + g . x <= 0 in the flattened decisions x, with coefficients computed
 * by the interpreter exactly as the simulation computes them.
 *
 * Columns: x0 .. x(d-1) the decision components (bounds and integrality
 * kept; the answer's "columns" maps each component to its column), then in
 * the indicator form k0 .. k(s-1), binary, k_l = 1 when scenario l's rows
 * are enforced. Rows: "cost" (the objective, minimised: a maximised
 * objective is negated, and its constant is reported, not written),
 * f<h> the deterministic half-rows (once, enforced), s<l>_h<h> half-row h
 * of scenario l, and "keep" (indicator form): sum k >= keep_at_least, the
 * fewest scenarios whose share k / s reaches the target.
 *
 * Big-M: M(l, h) = c + sum_j max(g_j lo_j, g_j up_j) (a zero coefficient
 * contributes nothing whatever the bound), the maximum of the half-row
 * over the decisions' box, attained at the corner that takes up_j where
 * g_j > 0 and lo_j where g_j < 0: so no plan within the bounds is cut off
 * when k_l = 0 and no smaller constant would do. The row is written
 *   g . x + M k_l <= M - c.
 * A half-row with M <= 0 holds everywhere in the box and is left out
 * (counted as always_held). A g_j != 0 on a side without a bound makes M
 * infinite: refused (FG_EUNSUPPORTED) naming the decision component.
 *
 * The all form writes g . x <= -c for every half-row of every scenario and
 * reports the Campi-Garatti level: the smallest eps with
 * sum_{i<d} C(s, i) eps^i (1 - eps)^(s-i) <= beta = 1 - confidence, d the
 * decision components (fg_scenario_epsilon, estimate/sizes.c: a bounded
 * bisection). The theorem is for convex programs; with integer decisions
 * the answer says it is not covered.
 *
 * Invariants: everything is bounded before the work starts or as it goes
 * (scenarios, scenario rows, form cells, work, text bytes, all named in
 * feasgate/limits.h); no NaN or infinity is ever written.
 *
 * Thread use: pure; any thread, the model is only read.
 */
#include "engine/engine_internal.h"
#include "engine/mps.h"
#include "feasgate/samplemodel.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Bytes of MPS text an entry or a row costs at least (name, row name, a
 * number and separators): used to stop early, well before the writer's
 * own exact limit. */
#define TEXT_PER_ENTRY 12

static bool whole(const cJSON *v, double lo, double hi, uint64_t *out) {
  if (!cJSON_IsNumber(v)) return false;
  double d = v->valuedouble;
  if (!isfinite(d) || d != floor(d) || d < lo || d > hi) return false;
  *out = (uint64_t)d;
  return true;
}

static void probability(const cJSON *v, const char *ptr, double *out,
                        fg_problem *p) {
  if (!cJSON_IsNumber(v) || !(v->valuedouble > 0 && v->valuedouble < 1))
    fg_problem_add(p, FG_EINVAL, ptr, 0,
                   "%s must be a number strictly between 0 and 1", ptr + 1);
  else
    *out = v->valuedouble;
}

fg_status fg_sample_model_parse(const fg_model *m, const cJSON *body,
                                fg_sample_model_request *out, fg_problem *p) {
  memset(out, 0, sizeof *out);
  out->target = m->target_probability;
  out->confidence = m->target_confidence;
  out->form = FG_SAMPLE_FORM_INDICATOR;
  if (!cJSON_IsObject(body))
    return fg_problem_add(p, FG_EINVAL, "", 0,
                          "a sample-model request must be a JSON object");
  int before = p->nitems;
  static const char *const known[] = {"scenarios", "seed", "form", "target",
                                      "confidence"};
  for (const cJSON *it = body->child; it; it = it->next) {
    bool ok = false;
    for (size_t i = 0; i < sizeof known / sizeof *known; i++)
      ok = ok || strcmp(it->string, known[i]) == 0;
    if (!ok) {
      char ptr[FG_POINTER_MAX];
      fg_pointer_join(ptr, sizeof ptr, "", it->string);
      fg_problem_add(p, FG_EINVAL, ptr, 0,
                     "unknown member '%s' (known: scenarios, seed, form, "
                     "target, confidence)",
                     it->string);
    }
  }
  const cJSON *v = cJSON_GetObjectItemCaseSensitive(body, "scenarios");
  if (!v) {
    fg_problem_add(p, FG_EINVAL, "/scenarios", 0, "'scenarios' is required");
  } else if (!whole(v, 1, 1e300, &out->scenarios)) {
    fg_problem_add(p, FG_EINVAL, "/scenarios", 0,
                   "scenarios must be a whole number of at least 1");
  } else if (out->scenarios > FG_SAMPLE_MODEL_SCENARIOS_MAX) {
    fg_problem_limit(p, "/scenarios", FG_LIMIT_SAMPLE_MODEL_SCENARIOS,
                     (double)FG_SAMPLE_MODEL_SCENARIOS_MAX,
                     "scenarios %llu exceeds sample_model_scenarios = %d",
                     (unsigned long long)out->scenarios,
                     FG_SAMPLE_MODEL_SCENARIOS_MAX);
  }
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "seed"))) {
    if (!whole(v, 0, (double)FG_SEED_MAX, &out->seed))
      fg_problem_add(p, FG_EINVAL, "/seed", 0,
                     "seed must be a whole number from 0 to 2^53 - 1");
    else
      out->seed_given = true;
  }
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "form"))) {
    const char *s = cJSON_GetStringValue(v);
    if (s && strcmp(s, "indicator") == 0) out->form = FG_SAMPLE_FORM_INDICATOR;
    else if (s && strcmp(s, "all") == 0) out->form = FG_SAMPLE_FORM_ALL;
    else
      fg_problem_add(p, FG_EINVAL, "/form", 0,
                     "form must be one of indicator, all");
  }
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "target")))
    probability(v, "/target", &out->target, p);
  if ((v = cJSON_GetObjectItemCaseSensitive(body, "confidence")))
    probability(v, "/confidence", &out->confidence, p);
  return p->nitems > before ? p->status : FG_OK;
}

void fg_sample_model_component(const fg_model *m, int j, char *buf,
                               size_t cap) {
  for (int k = 0; k < m->ndecisions; k++) {
    const fg_decision *d = &m->decisions[k];
    if (j < d->offset || j >= d->offset + d->count) continue;
    if (d->size == 0) snprintf(buf, cap, "%s", d->name);
    else snprintf(buf, cap, "%s[%d]", d->name, j - d->offset);
    return;
  }
  snprintf(buf, cap, "?");
}

/* The text of the model member at JSON Pointer `ptr` (tokens are plain
 * names and indices here), or NULL. */
static const char *source_at(const fg_model *m, const char *ptr) {
  const cJSON *v = m->document;
  char tok[FG_POINTER_MAX];
  while (v && *ptr == '/') {
    ptr++;
    size_t n = strcspn(ptr, "/");
    if (n >= sizeof tok) return NULL;
    memcpy(tok, ptr, n);
    tok[n] = '\0';
    ptr += n;
    v = cJSON_IsArray(v) ? cJSON_GetArrayItem(v, atoi(tok))
                         : cJSON_GetObjectItemCaseSensitive(v, tok);
  }
  return v && !*ptr ? cJSON_GetStringValue(v) : NULL;
}

/* The refusal of a row (or the objective) that is not affine or not
 * finite; FG_EUNSUPPORTED. */
static fg_status refuse_row(const fg_model *m, const fg_program_info *in,
                            const fg_affine_fault *f, uint64_t scenario,
                            fg_problem *p) {
  const char *row = f->row >= 0 ? in->rows[f->row].name : "objective";
  if (f->nonfinite)
    return fg_problem_add(p, FG_EUNSUPPORTED, "/scenarios", 0,
                          "row '%s' has a coefficient that is not finite in "
                          "design scenario %llu; the scenario model cannot "
                          "hold it",
                          row, (unsigned long long)scenario);
  char near[64] = "";
  const char *src = f->pointer[0] ? source_at(m, f->pointer) : NULL;
  if (src && f->column >= 1 && (size_t)f->column <= strlen(src)) {
    size_t at = (size_t)f->column - 1, from = at > 16 ? at - 16 : 0;
    snprintf(near, sizeof near, " near '%.40s'", src + from);
  }
  return fg_problem_add(p, FG_EUNSUPPORTED, f->pointer, f->column,
                        "row '%s' is not affine in the decisions: the term "
                        "at column %d of %s (%s)%s combines decisions in a "
                        "way a linear row cannot hold",
                        row, f->column, f->pointer[0] ? f->pointer : "?",
                        f->op ? f->op : "?", near);
}

static int cmp_double(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

/* The state of one build, freed in one place. */
typedef struct build {
  fg_decision_forms *df;
  fg_lp *lp;
  double *hr, *obj, *objsum, *buf, *u, *ms;
  int *row_of, *label;
  size_t nms, capms;
  fg_sample_model_request q;
} build;

static void build_free(build *b) {
  fg_decision_forms_free(b->df);
  fg_lp_free(b->lp);
  free(b->hr), free(b->obj), free(b->objsum), free(b->buf), free(b->u);
  free(b->ms), free(b->row_of), free(b->label);
}

static bool push_m(build *b, double M) {
  if (b->nms == b->capms) {
    size_t cap = b->capms ? 2 * b->capms : 1024;
    double *n = realloc(b->ms, cap * sizeof *n);
    if (!n) return false;
    b->ms = n;
    b->capms = cap;
  }
  b->ms[b->nms++] = M;
  return true;
}

/* The fewest scenarios k with k / s >= target, as doubles compare. */
static uint64_t keep_at_least(double target, uint64_t s) {
  double ds = (double)s;
  double k = ceil(target * ds);
  while (k > 0 && (k - 1) / ds >= target) k -= 1;
  while (k < ds && k / ds < target) k += 1;
  return (uint64_t)k;
}

/* Largest value of c + g . x over the box; *inf_at the first component
 * whose missing bound makes it infinite (-1 when none), *inf_upper its
 * side. */
static double box_max(const double *f, int nd, const double *lo,
                      const double *up, int *inf_at, bool *inf_upper) {
  double M = f[0];
  *inf_at = -1;
  for (int j = 0; j < nd; j++) {
    double g = f[1 + j];
    if (g > 0) {
      if (!isfinite(up[j])) { *inf_at = j, *inf_upper = true; return INFINITY; }
      M += g * up[j];
    } else if (g < 0) {
      if (!isfinite(lo[j])) { *inf_at = j, *inf_upper = false; return INFINITY; }
      M += g * lo[j];
    }
  }
  return M;
}

/* The answer's JSON (without "text"). */
static cJSON *answer_json(const fg_model *m, const build *b, uint64_t keep,
                          int nlabels, const int *label_row,
                          const int *label_side, int nfixed,
                          const int *fixed_row, uint64_t written,
                          uint64_t always_held, uint64_t never_held,
                          int obj_state, bool obj_avg, double obj_const,
                          const char *obj_note, bool any_integer,
                          fg_problem *p) {
  const fg_sample_model_request *q = &b->q;
  bool ind = q->form == FG_SAMPLE_FORM_INDICATOR;
  int nd = m->decision_dims;
  cJSON *o = cJSON_CreateObject();
  if (!o) return NULL;
  cJSON_AddStringToObject(o, "format", "mps");
  cJSON_AddStringToObject(o, "model", m->name);
  cJSON_AddStringToObject(o, "digest", m->digest);
  cJSON_AddStringToObject(o, "form", ind ? "indicator" : "all");
  cJSON_AddNumberToObject(o, "scenarios", (double)q->scenarios);
  char seed[24]; /* exact: a whole number up to 2^53 - 1, never 1e+15 */
  snprintf(seed, sizeof seed, "%llu", (unsigned long long)q->seed);
  cJSON_AddRawToObject(o, "seed", seed);
  cJSON_AddStringToObject(o, "stream", "design");
  cJSON_AddNumberToObject(o, "target", q->target);
  if (ind) cJSON_AddNumberToObject(o, "keep_at_least", (double)keep);
  else cJSON_AddNullToObject(o, "keep_at_least");
  cJSON *cols = cJSON_AddObjectToObject(o, "columns");
  char name[FG_ROW_NAME_MAX + 16], col[32];
  for (int j = 0; cols && j < nd; j++) {
    fg_sample_model_component(m, j, name, sizeof name);
    snprintf(col, sizeof col, "x%d", j);
    cJSON_AddStringToObject(cols, name, col);
  }
  if (ind) cJSON_AddStringToObject(o, "indicator_prefix", "k");
  else cJSON_AddNullToObject(o, "indicator_prefix");
  cJSON *rows = cJSON_AddObjectToObject(o, "rows");
  if (rows) {
    fg_program_info in;
    fg_program_get_info(m->program, &in);
    cJSON *per = cJSON_AddObjectToObject(rows, "per_scenario");
    static const char *const sides[] = {"", ":lower", ":upper"};
    for (int h = 0; per && h < nlabels; h++) {
      char lab[24], what[FG_ROW_NAME_MAX + 8];
      snprintf(lab, sizeof lab, "h%d", h);
      snprintf(what, sizeof what, "%s%s", in.rows[label_row[h]].name,
               sides[label_side[h]]);
      cJSON_AddStringToObject(per, lab, what);
    }
    cJSON *fx = cJSON_AddObjectToObject(rows, "fixed");
    for (int h = 0; fx && h < nfixed; h++) {
      char lab[24];
      snprintf(lab, sizeof lab, "f%d", h);
      cJSON_AddStringToObject(fx, lab, in.rows[fixed_row[h]].name);
    }
    cJSON_AddStringToObject(rows, "scenario_row", "s<scenario>_<label>");
    cJSON_AddStringToObject(rows, "objective", "cost");
    if (ind) cJSON_AddStringToObject(rows, "keep", "keep");
    else cJSON_AddNullToObject(rows, "keep");
    cJSON_AddNumberToObject(rows, "written", (double)written);
    cJSON_AddNumberToObject(rows, "always_held", (double)always_held);
    cJSON_AddNumberToObject(rows, "never_held", (double)never_held);
  }
  cJSON *ob = cJSON_AddObjectToObject(o, "objective");
  if (ob) {
    fg_program_info in;
    fg_program_get_info(m->program, &in);
    bool has = in.objective_reg >= 0;
    if (has)
      cJSON_AddStringToObject(ob, "sense",
                              in.objective_sense == FG_OBJECTIVE_MAXIMIZE
                                  ? "maximize"
                                  : "minimize");
    else
      cJSON_AddNullToObject(ob, "sense");
    cJSON_AddBoolToObject(ob, "written", obj_state == 1);
    cJSON_AddBoolToObject(ob, "negated", obj_state == 1 &&
                                             in.objective_sense ==
                                                 FG_OBJECTIVE_MAXIMIZE);
    cJSON_AddBoolToObject(ob, "averaged", obj_state == 1 && obj_avg);
    if (obj_state == 1) cJSON_AddNumberToObject(ob, "constant", obj_const);
    else cJSON_AddNullToObject(ob, "constant");
    if (obj_note) cJSON_AddStringToObject(ob, "note", obj_note);
    else cJSON_AddNullToObject(ob, "note");
  }
  if (ind && b->nms > 0) {
    cJSON *bm = cJSON_AddObjectToObject(o, "big_m");
    double *ms = b->ms;
    qsort(ms, b->nms, sizeof *ms, cmp_double);
    double med = b->nms % 2 ? ms[b->nms / 2]
                            : ms[b->nms / 2 - 1] / 2 + ms[b->nms / 2] / 2;
    cJSON_AddNumberToObject(bm, "max", ms[b->nms - 1]);
    cJSON_AddNumberToObject(bm, "median", med);
    cJSON_AddNumberToObject(bm, "min", ms[0]);
  } else {
    cJSON_AddNullToObject(o, "big_m");
  }
  if (!ind) {
    cJSON *g = cJSON_AddObjectToObject(o, "guarantee");
    double beta = 1 - q->confidence, eps = NAN;
    fg_problem sub;
    fg_problem_init(&sub);
    bool ok = fg_scenario_epsilon(q->scenarios, beta, (uint64_t)nd, 0, &eps,
                                  &sub) == FG_OK;
    cJSON_AddStringToObject(g, "method", "campi_garatti_2008");
    cJSON_AddNumberToObject(g, "decisions", nd);
    cJSON_AddNumberToObject(g, "confidence", q->confidence);
    if (ok) cJSON_AddNumberToObject(g, "epsilon", eps);
    else cJSON_AddNullToObject(g, "epsilon");
    char note[FG_MESSAGE_MAX + 64];
    if (!ok)
      snprintf(note, sizeof note, "no level: %s", sub.detail);
    else if (any_integer)
      snprintf(note, sizeof note,
               "the theorem covers convex scenario programs; with integer "
               "decisions this level is not guaranteed");
    else
      snprintf(note, sizeof note,
               "with probability at least %g over the design scenarios, "
               "the optimal plan of this program violates the model's "
               "constraints with probability at most epsilon (convex "
               "program, unique optimum)",
               q->confidence);
    cJSON_AddStringToObject(g, "note", note);
  } else {
    cJSON_AddNullToObject(o, "guarantee");
  }
  if (!cJSON_GetObjectItemCaseSensitive(o, "guarantee")) {
    cJSON_Delete(o);
    fg_problem_set(p, FG_ENOMEM, "sample model: out of memory");
    return NULL;
  }
  return o;
}

fg_status fg_sample_model_build(const fg_model *m,
                                const fg_sample_model_request *q,
                                cJSON **answer, char **text, size_t *len,
                                fg_problem *p) {
  *answer = NULL;
  *text = NULL;
  *len = 0;
  fg_program_info in;
  fg_program_get_info(m->program, &in);
  int nd = in.ndecision, w = nd + 1;
  uint64_t s = q->scenarios;
  bool ind = q->form == FG_SAMPLE_FORM_INDICATOR;
  if (nd == 0)
    return fg_problem_add(p, FG_EUNSUPPORTED, "", 0,
                          "model '%s' has no decisions: there is nothing for "
                          "a solver to choose",
                          m->name);
  double work = (double)s * ((double)in.nregs + in.nblock_insns) * w;
  if (work > FG_SAMPLE_MODEL_WORK_MAX)
    return fg_problem_limit(p, "/scenarios", FG_LIMIT_SAMPLE_MODEL_WORK,
                            FG_SAMPLE_MODEL_WORK_MAX,
                            "%llu scenarios of this model take %.3g units "
                            "of work, beyond sample_model_work = %.3g",
                            (unsigned long long)s, work,
                            FG_SAMPLE_MODEL_WORK_MAX);
  build b = {.q = *q};
  fg_status st = FG_OK;
  int err = 0;
  int cap = 2 * in.nrows + 2;
  int dims = m->sampler ? fg_sampler_dims(m->sampler) : 0;
  fg_sample_scratch *scratch = dims ? fg_sample_scratch_new(m->sampler) : NULL;
  b.df = fg_decision_forms_new(m->program, &err);
  b.lp = fg_lp_new("cost");
  b.hr = malloc((size_t)cap * (size_t)w * sizeof(double));
  b.obj = calloc((size_t)w, sizeof(double));
  b.objsum = calloc((size_t)w, sizeof(double));
  b.buf = malloc(((size_t)dims + 1) * FG_BLOCK * sizeof(double));
  b.u = calloc((size_t)dims + 1, sizeof(double));
  b.row_of = malloc((size_t)cap * sizeof(int));
  b.label = malloc((size_t)cap * 3 * sizeof(int));
  double *lo = malloc((size_t)w * 2 * sizeof(double)), *up = lo ? lo + w : NULL;
  bool *integer = calloc((size_t)w, sizeof(bool));
  if (!b.df && err == -2) {
    st = fg_problem_limit(p, "", FG_LIMIT_SAMPLE_MODEL_FORM_CELLS,
                          (double)FG_SAMPLE_MODEL_FORM_CELLS_MAX,
                          "the model's %d registers x %d decision components "
                          "exceed sample_model_form_cells = %u",
                          in.nregs, nd, FG_SAMPLE_MODEL_FORM_CELLS_MAX);
    goto out;
  }
  if (!b.df || !b.lp || !b.hr || !b.obj || !b.objsum || !b.buf || !b.u ||
      !b.row_of || !b.label || !lo || !integer || (dims && !scratch)) {
    st = fg_problem_set(p, FG_ENOMEM, "sample model: out of memory");
    goto out;
  }
  bool any_integer = false;
  for (int k = 0; k < m->ndecisions; k++) {
    const fg_decision *d = &m->decisions[k];
    for (int e = 0; e < d->count; e++) {
      lo[d->offset + e] = d->lower[e];
      up[d->offset + e] = d->upper[e];
      integer[d->offset + e] = d->integer;
    }
    any_integer = any_integer || d->integer;
  }
  char name[64];
  bool ok = true;
  for (int j = 0; j < nd; j++) {
    snprintf(name, sizeof name, "x%d", j);
    ok = ok && fg_lp_add_col(b.lp, name, lo[j], up[j], integer[j]) == j;
  }
  for (uint64_t l = 0; ind && l < s; l++) {
    snprintf(name, sizeof name, "k%llu", (unsigned long long)l);
    ok = ok && fg_lp_add_col(b.lp, name, 0, 1, true) >= 0;
  }
  if (!ok) {
    st = fg_problem_set(p, FG_ENOMEM, "sample model: out of memory");
    goto out;
  }

  /* labels of the half-rows of one scenario: (row, side) by position */
  int *label_row = b.label, *label_side = b.label + cap,
      *fixed_row = b.label + 2 * cap;
  int nlabels = 0, nfixed = 0;
  uint64_t written = 0, always_held = 0, never_held = 0;
  int obj_state = 0; /* 0 none, 1 affine so far, 2 left out */
  char obj_note[FG_MESSAGE_MAX + 64] = "";
  bool obj_avg = !in.objective_deterministic;
  for (uint64_t first = 0; first < s && st == FG_OK; first += FG_BLOCK) {
    int n = s - first < FG_BLOCK ? (int)(s - first) : FG_BLOCK;
    if (dims)
      fg_sampler_draw(m->sampler, scratch, q->seed, FG_STREAM_DESIGN, first, n,
                      b.buf, FG_BLOCK);
    for (int t = 0; t < n && st == FG_OK; t++) {
      uint64_t l = first + (uint64_t)t;
      for (int j = 0; j < dims; j++) b.u[j] = b.buf[(size_t)j * FG_BLOCK + t];
      fg_affine_fault fault;
      int os = 0;
      int nh = fg_decision_forms_rows(b.df, b.u, b.hr, b.row_of, cap, b.obj,
                                      &os, &fault);
      if (nh == -1) { st = refuse_row(m, &in, &fault, l, p); break; }
      if (nh < 0) { st = fg_problem_set(p, FG_EINTERNAL, "sample model: "
                                        "half-rows beyond %d", cap); break; }
      if (l == 0) {
        obj_state = os;
        if (os == 2)
          snprintf(obj_note, sizeof obj_note,
                   "the objective is left out: it is not affine in the "
                   "decisions (the term at column %d of %s, %s)",
                   fault.column, fault.pointer[0] ? fault.pointer : "?",
                   fault.op ? fault.op : "not finite");
      } else if (os == 2 && obj_state == 1) {
        obj_state = 2;
        snprintf(obj_note, sizeof obj_note,
                 "the objective is left out: a coefficient is not finite in "
                 "design scenario %llu", (unsigned long long)l);
      }
      if (obj_state == 1 && obj_avg)
        for (int j = 0; j < w; j++) b.objsum[j] += b.obj[j];
      int h_scen = 0;
      for (int h = 0; h < nh && st == FG_OK; h++) {
        const fg_row *row = &in.rows[b.row_of[h]];
        const double *f = b.hr + (size_t)h * w;
        bool pair = h + 1 < nh && b.row_of[h + 1] == b.row_of[h];
        bool second = h > 0 && b.row_of[h - 1] == b.row_of[h];
        int side = pair ? (row->kind == FG_ROW_EQ ? 2 : 1)
                        : second ? (row->kind == FG_ROW_EQ ? 1 : 2) : 0;
        int inf_at;
        bool inf_upper = false;
        double M = box_max(f, nd, lo, up, &inf_at, &inf_upper);
        if (row->deterministic) {
          if (l != 0) continue;
          if (inf_at < 0 && M <= 0) { always_held++; continue; }
          snprintf(name, sizeof name, "f%d", nfixed);
          fixed_row[nfixed++] = b.row_of[h];
          int r = fg_lp_add_row(b.lp, name, 'L', -f[0]);
          ok = r > 0;
          for (int j = 0; ok && j < nd; j++)
            ok = fg_lp_add_entry(b.lp, r, j, f[1 + j]);
          if (!ok) st = fg_problem_set(p, FG_ENOMEM, "sample model: out of "
                                                     "memory");
          written++;
          continue;
        }
        int lab = h_scen++;
        if (l == 0) {
          label_row[lab] = b.row_of[h];
          label_side[lab] = side;
          nlabels = lab + 1;
        }
        if (ind && inf_at >= 0) {
          char comp[FG_ROW_NAME_MAX + 16];
          fg_sample_model_component(m, inf_at, comp, sizeof comp);
          st = fg_problem_add(p, FG_EUNSUPPORTED, "", 0,
                              "decision '%s' has no %s bound, so row '%s' "
                              "(design scenario %llu) has no finite big-M; "
                              "give it one, or ask for form 'all'",
                              comp, inf_upper ? "upper" : "lower", row->name,
                              (unsigned long long)l);
          break;
        }
        if (ind && (!isfinite(M) || !isfinite(M - f[0]))) {
          st = fg_problem_add(p, FG_EUNSUPPORTED, "", 0,
                              "row '%s' (design scenario %llu) has a big-M "
                              "beyond the range of doubles",
                              row->name, (unsigned long long)l);
          break;
        }
        if (inf_at < 0 && M <= 0) { always_held++; continue; }
        bool zero = true;
        for (int j = 0; j < nd; j++) zero = zero && f[1 + j] == 0;
        if (zero) never_held++;
        snprintf(name, sizeof name, "s%llu_h%d", (unsigned long long)l, lab);
        int r = fg_lp_add_row(b.lp, name, 'L', ind ? M - f[0] : -f[0]);
        ok = r > 0;
        for (int j = 0; ok && j < nd; j++)
          ok = fg_lp_add_entry(b.lp, r, j, f[1 + j]);
        if (ok && ind) ok = fg_lp_add_entry(b.lp, r, nd + (int)l, M) &&
                            push_m(&b, M);
        if (!ok) st = fg_problem_set(p, FG_ENOMEM, "sample model: out of "
                                                   "memory");
        written++;
      }
      if (st != FG_OK) break;
      if (l == 0 && s * (uint64_t)nlabels > FG_SAMPLE_MODEL_ROWS_MAX) {
        st = fg_problem_limit(p, "/scenarios", FG_LIMIT_SAMPLE_MODEL_ROWS,
                              FG_SAMPLE_MODEL_ROWS_MAX,
                              "%llu scenarios x %d rows each exceed "
                              "sample_model_rows = %d",
                              (unsigned long long)s, nlabels,
                              FG_SAMPLE_MODEL_ROWS_MAX);
        break;
      }
      double est = (double)fg_lp_entries(b.lp) * TEXT_PER_ENTRY;
      if (est > (double)FG_SAMPLE_MODEL_TEXT_MAX) {
        st = fg_problem_limit(p, "/scenarios", FG_LIMIT_SAMPLE_MODEL_TEXT_BYTES,
                              (double)FG_SAMPLE_MODEL_TEXT_MAX,
                              "the model's MPS text exceeds "
                              "sample_model_text_bytes = %u bytes; ask for "
                              "fewer scenarios",
                              FG_SAMPLE_MODEL_TEXT_MAX);
        break;
      }
    }
  }
  if (st != FG_OK) goto out;

  uint64_t keep = keep_at_least(q->target, s);
  if (ind) {
    int r = fg_lp_add_row(b.lp, "keep", 'G', (double)keep);
    ok = r > 0;
    for (uint64_t l = 0; ok && l < s; l++)
      ok = fg_lp_add_entry(b.lp, r, nd + (int)l, 1);
  }
  double obj_const = 0;
  if (ok && obj_state == 1) {
    const double *f = obj_avg ? b.objsum : b.obj;
    double sign = in.objective_sense == FG_OBJECTIVE_MAXIMIZE ? -1 : 1;
    for (int j = 0; j < w; j++) {
      double c = obj_avg ? f[j] / (double)s : f[j];
      if (!isfinite(c)) {
        obj_state = 2;
        snprintf(obj_note, sizeof obj_note,
                 "the objective is left out: its average over the scenarios "
                 "is not finite");
        break;
      }
      b.objsum[j] = c;
    }
    for (int j = 0; ok && obj_state == 1 && j < nd; j++)
      ok = fg_lp_add_entry(b.lp, 0, j, sign * b.objsum[1 + j]);
    obj_const = b.objsum[0];
  }
  if (!ok) {
    st = fg_problem_set(p, FG_ENOMEM, "sample model: out of memory");
    goto out;
  }
  char c1[160], c2[160], c3[200];
  snprintf(c1, sizeof c1, "feasgate scenario model of '%s' (%s)", m->name,
           m->digest);
  snprintf(c2, sizeof c2,
           "form %s: %llu design scenarios of seed %llu%s",
           ind ? "indicator" : "all", (unsigned long long)s,
           (unsigned long long)q->seed,
           ind ? "; k<l> = 1 enforces scenario l" : "");
  snprintf(c3, sizeof c3, "objective: %s",
           obj_state != 1 ? "none written (see the answer's note)"
           : in.objective_sense == FG_OBJECTIVE_MAXIMIZE
               ? "the model's maximised objective, negated (minimise); its "
                 "constant is not written"
               : "the model's objective (minimise); its constant is not "
                 "written");
  const char *comments[] = {c1, c2, c3};
  st = fg_lp_write_mps(b.lp, m->name, comments, 3, FG_SAMPLE_MODEL_TEXT_MAX,
                       text, len, p);
  if (st != FG_OK) goto out;
  *answer = answer_json(m, &b, keep, nlabels, label_row, label_side, nfixed,
                        fixed_row, written, always_held, never_held, obj_state,
                        obj_avg, obj_const, obj_note[0] ? obj_note : NULL,
                        any_integer, p);
  if (!*answer) {
    free(*text);
    *text = NULL;
    *len = 0;
    st = p->status != FG_OK ? p->status : FG_ENOMEM;
  }
out:
  fg_sample_scratch_free(scratch);
  free(lo), free(integer);
  build_free(&b);
  return st;
}
