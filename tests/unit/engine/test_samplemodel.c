/*
 * tests/unit/engine/test_samplemodel.c -- the scenario model export
 * (engine/samplemodel.c, engine/mps.c, the decision forms of
 * expr/affine.c).
 *
 * The big-M constants are checked against the interpreter, not against
 * the affine forms that produced them: for every written scenario row of
 * small models, each corner of the decisions' box is run through the
 * model's program (setup and block streams, the scenario's drawn inputs)
 * and the row's excess read. A row's M must be at least every corner's
 * excess (valid: no plan in the box is cut off when its scenario is
 * dropped; an affine row takes its maximum over a box at a corner) and
 * equal to the largest (tight), to 1e-9 relative (common practice for
 * sums of a few products rounded once each). The row's coefficients read
 * back from the MPS text reproduce the excess at every corner too.
 * Range rows give two half-rows whose excess the program only shows as
 * their maximum, so there the larger M is compared with it. A row left
 * out as always held must have no corner with positive excess.
 *
 * The Campi-Garatti level is compared with the closed form it solves:
 * sum_{i<d} C(s, i) e^i (1-e)^(s-i) = 1 - I_e(d, s-d+1) (the binomial
 * tail as a regularised incomplete beta, Abramowitz & Stegun 26.5.24), so
 * eps is the (1 - beta) quantile of Beta(d, s-d+1) (core/quantile.c).
 */
#include "check.h"
#include "modelcheck.h"

#include "core/quantile.h"
#include "expr/expr.h"
#include "feasgate/limits.h"
#include "feasgate/samplemodel.h"
#include "sample/sample.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#define CORNER_TOL 1e-9

/* ---- the MPS text read back (free format; tests only) ---- */

typedef struct entry {
  char col[32], row[32];
  double v;
} entry;

typedef struct mps {
  entry *e;
  int n, cap;
  entry *rhs; /* col unused */
  int nr, caprhs;
  int integer_cols, bounds, rows;
  bool endata;
} mps;

static void mps_push(entry **a, int *n, int *cap, const char *c,
                     const char *r, double v) {
  if (*n == *cap) {
    *cap = *cap ? 2 * *cap : 256;
    *a = realloc(*a, (size_t)*cap * sizeof **a);
  }
  snprintf((*a)[*n].col, sizeof (*a)[*n].col, "%s", c);
  snprintf((*a)[*n].row, sizeof (*a)[*n].row, "%s", r);
  (*a)[*n].v = v;
  (*n)++;
}

static void mps_read(const char *text, mps *out) {
  memset(out, 0, sizeof *out);
  char *copy = strdup(text), *save = NULL;
  int section = 0; /* 1 rows, 2 columns, 3 rhs, 4 bounds */
  bool in_int = false;
  for (char *line = strtok_r(copy, "\n", &save); line;
       line = strtok_r(NULL, "\n", &save)) {
    if (line[0] == '*') continue;
    if (line[0] != ' ') {
      section = strncmp(line, "ROWS", 4) == 0      ? 1
                : strncmp(line, "COLUMNS", 7) == 0 ? 2
                : strncmp(line, "RHS", 3) == 0     ? 3
                : strncmp(line, "BOUNDS", 6) == 0  ? 4
                                                   : 0;
      if (strncmp(line, "ENDATA", 6) == 0) out->endata = true;
      continue;
    }
    char a[64] = "", b[64] = "", c[64] = "";
    int k = sscanf(line, "%63s %63s %63s", a, b, c);
    if (section == 1) out->rows++;
    if (section == 2 && k == 3) {
      if (strcmp(b, "'MARKER'") == 0) {
        in_int = strcmp(c, "'INTORG'") == 0;
        continue;
      }
      mps_push(&out->e, &out->n, &out->cap, a, b, strtod(c, NULL));
      (void)in_int;
    }
    if (section == 3 && k == 3)
      mps_push(&out->rhs, &out->nr, &out->caprhs, "", b, strtod(c, NULL));
    if (section == 4) out->bounds++;
  }
  free(copy);
}

static double mps_coef(const mps *m, const char *col, const char *row,
                       bool *found) {
  *found = false;
  for (int i = 0; i < m->n; i++)
    if (strcmp(m->e[i].col, col) == 0 && strcmp(m->e[i].row, row) == 0) {
      *found = true;
      return m->e[i].v;
    }
  return 0;
}

static bool mps_has_row(const mps *m, const char *row) {
  for (int i = 0; i < m->n; i++)
    if (strcmp(m->e[i].row, row) == 0) return true;
  return false;
}

static double mps_rhs(const mps *m, const char *row) {
  for (int i = 0; i < m->nr; i++)
    if (strcmp(m->rhs[i].row, row) == 0) return m->rhs[i].v;
  return 0;
}

static void mps_free(mps *m) { free(m->e), free(m->rhs); }

/* ---- running the program at a plan and a scenario ---- */

typedef struct runner {
  const fg_model *m;
  fg_program_info in;
  double *setup, *block;
} runner;

static void runner_init(runner *r, const fg_model *m) {
  r->m = m;
  fg_program_get_info(m->program, &r->in);
  r->setup = calloc((size_t)r->in.nregs + 1, sizeof(double));
  r->block = calloc(((size_t)r->in.nregs + 1) * FG_BLOCK, sizeof(double));
}

static void runner_free(runner *r) { free(r->setup), free(r->block); }

/* The excess of every row at plan x and scenario values u into ex. */
static void run_at(runner *r, const double *x, const double *u, double *ex) {
  const fg_program_info *in = &r->in;
  for (int j = 0; j < in->ndecision; j++) r->setup[in->decision_base + j] = x[j];
  fg_program_run_setup(r->m->program, r->setup);
  fg_program_broadcast(r->m->program, r->setup, r->block);
  for (int j = 0; j < in->nuncertain; j++)
    r->block[(size_t)(in->uncertain_base + j) * FG_BLOCK] = u[j];
  fg_program_run_block(r->m->program, r->block, 1);
  for (int k = 0; k < in->nrows; k++) {
    int reg = in->rows[k].excess_reg;
    ex[k] = in->rows[k].deterministic ? r->setup[reg]
                                      : r->block[(size_t)reg * FG_BLOCK];
  }
}

static int row_index(const fg_program_info *in, const char *label) {
  char name[FG_ROW_NAME_MAX];
  snprintf(name, sizeof name, "%s", label);
  char *colon = strchr(name, ':');
  if (colon) *colon = '\0';
  for (int k = 0; k < in->nrows; k++)
    if (strcmp(in->rows[k].name, name) == 0) return k;
  return -1;
}

/* Export `doc` in the indicator form on `s` scenarios and check every M by
 * the box's corners; returns the number of rows compared. */
static int corners_check(const char *doc, int s, uint64_t seed) {
  fg_model *m = fg_test_model(doc);
  if (!m) return 0;
  fg_sample_model_request q = {.scenarios = (uint64_t)s, .seed = seed,
                               .seed_given = true,
                               .form = FG_SAMPLE_FORM_INDICATOR,
                               .target = 0.8, .confidence = 0.95};
  fg_problem p;
  fg_problem_init(&p);
  cJSON *ans = NULL;
  char *text = NULL;
  size_t len = 0;
  fg_status st = fg_sample_model_build(m, &q, &ans, &text, &len, &p);
  CHECK_MSG(st == FG_OK, "build: %s", p.detail);
  if (st != FG_OK) {
    fg_model_unref(m);
    return 0;
  }
  mps t;
  mps_read(text, &t);
  CHECK(t.endata);
  runner r;
  runner_init(&r, m);
  int nd = r.in.ndecision, dims = fg_sampler_dims(m->sampler);
  double *u = calloc((size_t)dims * FG_BLOCK + 1, sizeof(double));
  double *x = calloc((size_t)nd, sizeof(double));
  double *ex = calloc((size_t)r.in.nrows, sizeof(double));
  double *lo = calloc((size_t)nd, sizeof(double)),
         *up = calloc((size_t)nd, sizeof(double));
  for (int k = 0; k < m->ndecisions; k++)
    for (int e = 0; e < m->decisions[k].count; e++) {
      lo[m->decisions[k].offset + e] = m->decisions[k].lower[e];
      up[m->decisions[k].offset + e] = m->decisions[k].upper[e];
    }
  fg_sample_scratch *w = fg_sample_scratch_new(m->sampler);
  double *buf = calloc((size_t)dims * FG_BLOCK + 1, sizeof(double));
  fg_sampler_draw(m->sampler, w, seed, FG_STREAM_DESIGN, 0, s, buf, FG_BLOCK);
  const cJSON *per = cJSON_GetObjectItemCaseSensitive(
      cJSON_GetObjectItemCaseSensitive(ans, "rows"), "per_scenario");
  int compared = 0, dropped = 0;
  for (int l = 0; l < s; l++) {
    for (int j = 0; j < dims; j++) u[j] = buf[(size_t)j * FG_BLOCK + l];
    /* the largest excess of each half-row label over the corners */
    int nl = cJSON_GetArraySize(per);
    double *best = malloc((size_t)nl * sizeof(double));
    double *worst_fit = calloc((size_t)nl, sizeof(double));
    for (int h = 0; h < nl; h++) best[h] = -INFINITY;
    for (long c = 0; c < (1L << nd); c++) {
      for (int j = 0; j < nd; j++) x[j] = (c >> j) & 1 ? up[j] : lo[j];
      run_at(&r, x, u, ex);
      int h = 0;
      for (const cJSON *it = per->child; it; it = it->next, h++) {
        int k = row_index(&r.in, it->valuestring);
        if (ex[k] > best[h]) best[h] = ex[k];
        /* the row as written: c + g.x = g.x + M - rhs */
        char row[32], kcol[32], xc[32];
        snprintf(row, sizeof row, "s%d_%s", l, it->string);
        snprintf(kcol, sizeof kcol, "k%d", l);
        bool found;
        double M = mps_coef(&t, kcol, row, &found);
        if (!found || strchr(it->valuestring, ':')) continue;
        double v = M - mps_rhs(&t, row);
        for (int j = 0; j < nd; j++) {
          snprintf(xc, sizeof xc, "x%d", j);
          v += mps_coef(&t, xc, row, &found) * x[j];
        }
        double err = fabs(v - ex[k]) / (1 + fabs(ex[k]));
        if (err > worst_fit[h]) worst_fit[h] = err;
      }
    }
    /* labels of one row (a range row's two halves) share the row's
     * excess: compare the larger M */
    int h = 0;
    for (const cJSON *it = per->child; it; it = it->next, h++) {
      char row[32], kcol[32];
      snprintf(row, sizeof row, "s%d_%s", l, it->string);
      snprintf(kcol, sizeof kcol, "k%d", l);
      bool found;
      double M = mps_coef(&t, kcol, row, &found);
      bool range = strchr(it->valuestring, ':') != NULL;
      if (!found) {
        CHECK_MSG(!mps_has_row(&t, row), "row %s without its indicator", row);
        if (!range)
          CHECK_MSG(best[h] <= CORNER_TOL, "row %s left out, but a corner "
                    "has excess %.17g", row, best[h]);
        dropped++;
        continue;
      }
      if (range) {
        /* the other half of the same row */
        const cJSON *o = it->next && row_index(&r.in, it->next->valuestring) ==
                                         row_index(&r.in, it->valuestring)
                             ? it->next
                             : NULL;
        double M2 = -INFINITY;
        if (o) {
          char row2[32];
          snprintf(row2, sizeof row2, "s%d_%s", l, o->string);
          M2 = mps_coef(&t, kcol, row2, &found);
          if (!found) M2 = -INFINITY;
        }
        double big = M > M2 ? M : M2;
        if (o) {
          CHECK_MSG(fabs(big - best[h]) <= CORNER_TOL * (1 + fabs(big)),
                    "range row %s: max M %.17g, largest corner excess %.17g",
                    row, big, best[h]);
          compared++;
        }
        continue;
      }
      CHECK_MSG(best[h] <= M + CORNER_TOL * (1 + fabs(M)),
                "row %s: a corner has excess %.17g above M %.17g", row,
                best[h], M);
      CHECK_MSG(best[h] >= M - CORNER_TOL * (1 + fabs(M)),
                "row %s: M %.17g is not attained (largest corner %.17g)", row,
                M, best[h]);
      CHECK_MSG(worst_fit[h] <= CORNER_TOL, "row %s: written coefficients "
                "miss the program's excess by %.3g relative", row,
                worst_fit[h]);
      compared++;
    }
    free(best), free(worst_fit);
  }
  printf("corners: %d rows compared over %d scenarios x %ld corners, %d "
         "left out as always held\n",
         compared, s, 1L << nd, dropped);
  const cJSON *bm = cJSON_GetObjectItemCaseSensitive(ans, "big_m");
  CHECK(cJSON_IsObject(bm));
  fg_sample_scratch_free(w);
  free(buf), free(u), free(x), free(ex), free(lo), free(up);
  runner_free(&r);
  mps_free(&t);
  free(text);
  cJSON_Delete(ans);
  fg_model_unref(m);
  return compared;
}

/* ---- models (invented, in the project's own settings) ---- */

/* A warehouse week: integer stock of two lines (one may be short), crew
 * overtime whose effect scales with an uncertain picking speed, a
 * transfer either way; a range row, a deterministic row, a division by an
 * uncertain value, a vector row, a definition. */
static const char *WAREHOUSE =
    "{\"format\": 1, \"name\": \"warehouse-week\","
    " \"decisions\": ["
    "  {\"name\": \"stock\", \"size\": 2, \"lower\": [0, -5], \"upper\": [50, 40],"
    "   \"integer\": true},"
    "  {\"name\": \"overtime\", \"lower\": 0, \"upper\": 8},"
    "  {\"name\": \"transfer\", \"lower\": -10, \"upper\": 10}],"
    " \"uncertain\": ["
    "  {\"name\": \"orders\", \"size\": 2, \"distribution\": {\"family\": \"gamma\","
    "   \"shape\": [20, 12], \"scale\": [1.5, 2]}},"
    "  {\"name\": \"speed\", \"distribution\": {\"family\": \"uniform\", \"low\": 0.8,"
    "   \"high\": 1.2}},"
    "  {\"name\": \"returns\", \"distribution\": {\"family\": \"discrete\","
    "   \"values\": [0, 3, 6], \"weights\": [0.6, 0.3, 0.1]}}],"
    " \"definitions\": [{\"name\": \"picked\", \"value\": \"speed * stock[0] - 0.5 * transfer\"}],"
    " \"constraints\": ["
    "  {\"name\": \"cover\", \"require\": \"stock + 3 * overtime * speed >= orders\"},"
    "  {\"name\": \"dock\", \"require\": \"10 <= picked + returns <= 60\"},"
    "  {\"name\": \"budget\", \"require\": \"stock[0] + stock[1] + 4 * overtime <= 100\"},"
    "  {\"name\": \"balance\", \"require\": \"transfer / speed <= 5 + returns\"}],"
    " \"objective\": {\"maximize\": \"2 * sum(stock) - 3 * overtime * speed\"},"
    " \"target\": {\"probability\": 0.8}}";

/* A bus depot morning: buses out on two routes and spare drivers, one
 * joint row per route. */
static const char *DEPOT =
    "{\"format\": 1, \"name\": \"depot-morning\","
    " \"decisions\": [{\"name\": \"buses\", \"size\": 2, \"lower\": 2, \"upper\": 12,"
    "   \"integer\": true},"
    "  {\"name\": \"spare\", \"lower\": 0, \"upper\": 4, \"integer\": true}],"
    " \"uncertain\": [{\"name\": \"riders\", \"size\": 2, \"distribution\":"
    "   {\"family\": \"poisson\", \"mean\": [300, 220]}},"
    "  {\"name\": \"sick\", \"distribution\": {\"family\": \"binomial\", \"trials\": 20,"
    "   \"p\": 0.1}}],"
    " \"constraints\": ["
    "  {\"name\": \"seats\", \"require\": \"60 * buses >= riders\"},"
    "  {\"name\": \"drivers\", \"require\": \"sum(buses) + sick <= 18 + spare\"}],"
    " \"objective\": {\"minimize\": \"100 * sum(buses) + 40 * spare\"}}";

static fg_status export(const char *doc, fg_sample_form form, int s,
                        cJSON **ans, char **text, fg_problem *p) {
  fg_model *m = fg_test_model(doc);
  if (!m) return FG_EINTERNAL;
  fg_sample_model_request q = {.scenarios = (uint64_t)s, .seed = 5,
                               .seed_given = true, .form = form,
                               .target = m->target_probability,
                               .confidence = 0.99};
  size_t len;
  fg_problem_init(p);
  fg_status st = fg_sample_model_build(m, &q, ans, text, &len, p);
  fg_model_unref(m);
  return st;
}

static void test_refusals(void) {
  cJSON *ans = NULL;
  char *text = NULL;
  fg_problem p;
  /* a product of two decisions */
  const char *prod =
      "{\"format\": 1, \"name\": \"pumps\", \"decisions\": [{\"name\": \"rate\","
      " \"size\": 2, \"lower\": 0, \"upper\": 9}], \"uncertain\": [{\"name\":"
      " \"need\", \"distribution\": {\"family\": \"uniform\", \"low\": 1, \"high\": 4}}],"
      " \"constraints\": [{\"name\": \"flow\", \"require\": \"rate[0] * rate[1] >= need\"}]}";
  fg_status st = export(prod, FG_SAMPLE_FORM_INDICATOR, 10, &ans, &text, &p);
  CHECK_INT(st, FG_EUNSUPPORTED);
  CHECK(fg_test_has_pointer(&p, "/constraints/0/require"));
  CHECK_INT(p.nitems > 0 ? p.items[0].column : -1, 9); /* the '*' */
  CHECK(strstr(p.detail, "'flow'") != NULL);
  CHECK(strstr(p.detail, "rate[0] * rate[1]") != NULL);
  /* the same through a definition: the term is named there */
  const char *viadef =
      "{\"format\": 1, \"name\": \"pumps\", \"decisions\": [{\"name\": \"rate\","
      " \"size\": 2, \"lower\": 0, \"upper\": 9}], \"uncertain\": [{\"name\":"
      " \"need\", \"distribution\": {\"family\": \"uniform\", \"low\": 1, \"high\": 4}}],"
      " \"definitions\": [{\"name\": \"head\", \"value\": \"sqrt(rate[0]) + need\"}],"
      " \"constraints\": [{\"name\": \"flow\", \"require\": \"head <= 9\"}]}";
  st = export(viadef, FG_SAMPLE_FORM_ALL, 10, &ans, &text, &p);
  CHECK_INT(st, FG_EUNSUPPORTED);
  CHECK(fg_test_has_pointer(&p, "/definitions/0/value"));
  CHECK(strstr(p.detail, "sqrt") != NULL);
  /* no upper bound on a decision a scenario row needs */
  const char *open =
      "{\"format\": 1, \"name\": \"tank\", \"decisions\": [{\"name\": \"fill\","
      " \"lower\": 0}, {\"name\": \"valve\", \"lower\": 0, \"upper\": 1}],"
      " \"uncertain\": [{\"name\": \"use\", \"distribution\": {\"family\":"
      " \"uniform\", \"low\": 1, \"high\": 4}}],"
      " \"constraints\": [{\"name\": \"spill\", \"require\": \"fill - use <= 10 * valve\"}],"
      " \"objective\": {\"maximize\": \"fill\"}}";
  st = export(open, FG_SAMPLE_FORM_INDICATOR, 10, &ans, &text, &p);
  CHECK_INT(st, FG_EUNSUPPORTED);
  CHECK(strstr(p.detail, "decision 'fill' has no upper bound") != NULL);
  st = export(open, FG_SAMPLE_FORM_ALL, 10, &ans, &text, &p);
  CHECK_INT(st, FG_OK);
  if (st == FG_OK) {
    CHECK(strstr(text, " PL  BND x0\n") != NULL);
    CHECK(strstr(text, " LO  BND x0 0\n") != NULL);
    /* maximise fill: written as minimise -fill */
    CHECK(strstr(text, " x0 cost -1\n") != NULL);
    const cJSON *ob = cJSON_GetObjectItemCaseSensitive(ans, "objective");
    CHECK(cJSON_IsTrue(cJSON_GetObjectItemCaseSensitive(ob, "negated")));
    CHECK(cJSON_IsNull(cJSON_GetObjectItemCaseSensitive(ans, "big_m")));
  }
  cJSON_Delete(ans), free(text);
  ans = NULL, text = NULL;
  /* a model without decisions */
  const char *none =
      "{\"format\": 1, \"name\": \"gauge\", \"decisions\": [], \"uncertain\":"
      " [{\"name\": \"level\", \"distribution\": {\"family\": \"uniform\", \"low\": 1,"
      " \"high\": 4}}], \"constraints\": [{\"name\": \"ok\", \"require\": \"level <= 5\"}]}";
  st = export(none, FG_SAMPLE_FORM_ALL, 10, &ans, &text, &p);
  CHECK_INT(st, FG_EUNSUPPORTED);
  /* a non-affine objective is left out with a note */
  const char *obj =
      "{\"format\": 1, \"name\": \"pumps\", \"decisions\": [{\"name\": \"rate\","
      " \"size\": 2, \"lower\": 0, \"upper\": 9}], \"uncertain\": [{\"name\":"
      " \"need\", \"distribution\": {\"family\": \"uniform\", \"low\": 1, \"high\": 4}}],"
      " \"constraints\": [{\"name\": \"flow\", \"require\": \"rate[0] + rate[1] >= need\"}],"
      " \"objective\": {\"minimize\": \"max(rate[0], rate[1])\"}}";
  st = export(obj, FG_SAMPLE_FORM_INDICATOR, 10, &ans, &text, &p);
  CHECK_INT(st, FG_OK);
  if (st == FG_OK) {
    const cJSON *ob = cJSON_GetObjectItemCaseSensitive(ans, "objective");
    CHECK(cJSON_IsFalse(cJSON_GetObjectItemCaseSensitive(ob, "written")));
    CHECK(cJSON_IsString(cJSON_GetObjectItemCaseSensitive(ob, "note")));
    CHECK(strstr(text, " cost ") == NULL || strstr(text, " x0 cost 0\n"));
  }
  cJSON_Delete(ans), free(text);
}

/* The averaged objective, the keep row, the all form's level. */
static void test_warehouse_text(void) {
  cJSON *ans = NULL;
  char *text = NULL;
  fg_problem p;
  int s = 40;
  fg_status st = export(WAREHOUSE, FG_SAMPLE_FORM_INDICATOR, s, &ans, &text, &p);
  CHECK_MSG(st == FG_OK, "%s", p.detail);
  if (st != FG_OK) return;
  mps t;
  mps_read(text, &t);
  /* keep: at least ceil(0.8 * 40) = 32 */
  CHECK_NEAR(mps_rhs(&t, "keep"), 32, 0);
  CHECK_INT(cJSON_GetObjectItemCaseSensitive(ans, "keep_at_least")->valueint,
            32);
  /* maximise 2 sum(stock) - 3 overtime speed: minimise the negation with
   * overtime's coefficient 3 x the mean drawn speed */
  fg_model *m = fg_test_model(WAREHOUSE);
  fg_sample_scratch *w = fg_sample_scratch_new(m->sampler);
  int dims = fg_sampler_dims(m->sampler);
  double *buf = calloc((size_t)dims * FG_BLOCK, sizeof(double));
  fg_sampler_draw(m->sampler, w, 5, FG_STREAM_DESIGN, 0, s, buf, FG_BLOCK);
  double mean = 0;
  for (int l = 0; l < s; l++) mean += 3 * buf[2 * FG_BLOCK + l];
  mean /= s;
  bool found;
  CHECK_NEAR(mps_coef(&t, "x0", "cost", &found), -2, 0);
  CHECK_NEAR(mps_coef(&t, "x2", "cost", &found), mean, 1e-12);
  const cJSON *ob = cJSON_GetObjectItemCaseSensitive(ans, "objective");
  CHECK(cJSON_IsTrue(cJSON_GetObjectItemCaseSensitive(ob, "averaged")));
  /* the deterministic row once, enforced: f0 <= 100 */
  CHECK_NEAR(mps_rhs(&t, "f0"), 100, 0);
  CHECK_NEAR(mps_coef(&t, "x2", "f0", &found), 4, 0);
  /* integer columns inside markers, binaries as BV */
  CHECK(strstr(text, " M1 'MARKER' 'INTORG'\n x0 ") != NULL);
  CHECK(strstr(text, " BV  BND k39\n") != NULL);
  CHECK(strstr(text, " LO  BND x1 -5\n UP  BND x1 40\n") != NULL);
  CHECK(t.endata);
  mps_free(&t);
  cJSON_Delete(ans), free(text);
  fg_sample_scratch_free(w);
  free(buf);
  fg_model_unref(m);

  /* the all form: no indicators, the Campi-Garatti level */
  st = export(DEPOT, FG_SAMPLE_FORM_ALL, 200, &ans, &text, &p);
  CHECK_MSG(st == FG_OK, "%s", p.detail);
  if (st != FG_OK) return;
  CHECK(strstr(text, " k0 ") == NULL);
  const cJSON *g = cJSON_GetObjectItemCaseSensitive(ans, "guarantee");
  double eps = cJSON_GetObjectItemCaseSensitive(g, "epsilon")->valuedouble;
  double beta = 0.01;
  int d = 3, n = 200;
  double ref = fg_q_beta_inv(1 - beta, beta, d, n - d + 1, NULL, NULL);
  printf("all form: epsilon %.12g, Beta(%d, %d) quantile %.12g\n", eps, d,
         n - d + 1, ref);
  CHECK_NEAR(eps, ref, 1e-9 * ref);
  CHECK(strstr(cJSON_GetObjectItemCaseSensitive(g, "note")->valuestring,
               "integer") != NULL);
  cJSON_Delete(ans), free(text);
}

static void test_request(void) {
  fg_model *m = fg_test_model(DEPOT);
  if (!m) return;
  fg_problem p;
  fg_problem_init(&p);
  fg_sample_model_request q;
  cJSON *b = cJSON_Parse("{\"scenarios\": 0, \"form\": \"some\", \"x\": 1,"
                         " \"target\": 1}");
  CHECK(fg_sample_model_parse(m, b, &q, &p) == FG_EINVAL);
  CHECK(fg_test_has_pointer(&p, "/scenarios"));
  CHECK(fg_test_has_pointer(&p, "/form"));
  CHECK(fg_test_has_pointer(&p, "/x"));
  CHECK(fg_test_has_pointer(&p, "/target"));
  cJSON_Delete(b);
  fg_problem_init(&p);
  b = cJSON_Parse("{\"scenarios\": 100001}");
  CHECK(fg_sample_model_parse(m, b, &q, &p) == FG_ELIMIT);
  CHECK_STR(p.limit_name, "sample_model_scenarios");
  cJSON_Delete(b);
  fg_problem_init(&p);
  b = cJSON_Parse("{\"scenarios\": 7, \"seed\": 3, \"form\": \"all\"}");
  CHECK(fg_sample_model_parse(m, b, &q, &p) == FG_OK);
  CHECK(q.seed_given && q.seed == 3 && q.form == FG_SAMPLE_FORM_ALL);
  CHECK_NEAR(q.target, 0.9, 0);
  cJSON_Delete(b);
  fg_model_unref(m);
}

int main(void) {
  CHECK(corners_check(WAREHOUSE, 12, 3) > 0);
  CHECK(corners_check(DEPOT, 30, 8) > 0);
  test_refusals();
  test_warehouse_text();
  test_request();
  return fg_test_finish();
}
