/*
 * tests/unit/engine/test_rowplan.c -- the dense kernels (core/dense.c) and row
 * plans (engine/rowplan.c).
 *
 *  1. Every dispatch path of fg_dense_rows and fg_dense_lower gives the
 *     bits of the plain loop that defines them (dense.h: acc = start; acc
 *     = acc + coef * col, k ascending), on random data and odd lane counts.
 *  2. On random affine models (a multivariate normal of 1..12 elements, a
 *     normal vector, an input no row reads; rows <=, >= and ranges, one
 *     coefficient set by a decision) the plan's row values agree with the
 *     block stream's on the same samples within the rounding bound below,
 *     sample by sample; a row's verdict may differ only where the block
 *     stream's value lies within that bound of 0. The inputs the plan
 *     finishes are the plain draw's bits.
 *     Bound (recursive summation, Higham, Accuracy and Stability of
 *     Numerical Algorithms, 2nd ed., section 3.1: |fl(sum) - sum| <=
 *     gamma_n sum |terms|, gamma_n ~ n u, u = 2^-53): both evaluations
 *     sum at most 2D + 8 rounded terms of the row's magnitude
 *         M = |c| + sum_j |g_j| (|mean_j| + sum_k |L_jk e_k|),
 *     so |folded - plain| <= 2 (2D + 8) u M; the test uses that.
 *  3. A check with a plan: the same counts and row figures on 1, 2 and 3
 *     workers and on the scalar and widest kernel paths; the explained
 *     scenario reports the excess the plan computed, bit for bit.
 *
 * Thread use: the test's main thread (the checks run their own pools).
 */
#include "check.h"
#include "core/dense.h"
#include "engine/engine_internal.h"
#include "modelcheck.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

static uint64_t rng_state = 0x5eed20261202ull;
static uint64_t next_u64(void) { /* splitmix64 (common practice) */
  uint64_t z = (rng_state += 0x9e3779b97f4a7c15ull);
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ull;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebull;
  return z ^ (z >> 31);
}
static double unif(double lo, double hi) {
  return lo + (hi - lo) * ((double)(next_u64() >> 11) * 0x1p-53);
}

/* ---- 1. dispatch paths ---- */

static void test_dense_paths(void) {
  const int lane_counts[] = {1, 7, 16, 31, 100, 256};
  int widest = fg_dense_force(0);
  printf("dense kernels: widest path %d (3 AVX-512F, 2 AVX2, 1 baseline)\n",
         widest);
  for (int rep = 0; rep < 24; rep++) {
    int nr = 1 + (int)(next_u64() % 13), nc = 1 + (int)(next_u64() % 60);
    int n = lane_counts[rep % 6];
    double *g = malloc(sizeof(double) * (size_t)(nr * nc + nc * nc));
    double *st = malloc(sizeof(double) * (size_t)(nr + nc));
    double *in = malloc(sizeof(double) * (size_t)nc * 256);
    double *out = malloc(sizeof(double) * (size_t)nr * 256 * 5);
    double *low = malloc(sizeof(double) * (size_t)nc * 256 * 5);
    const double **ip = malloc(sizeof(double *) * (size_t)nc);
    double **op = malloc(sizeof(double *) * (size_t)(nr > nc ? nr : nc));
    for (int i = 0; i < nr * nc + nc * nc; i++) g[i] = unif(-3, 3);
    for (int i = 0; i < nr + nc; i++) st[i] = unif(-10, 10);
    for (int i = 0; i < nc * 256; i++) in[i] = unif(-4, 4);
    for (int k = 0; k < nc; k++) ip[k] = in + (size_t)k * 256;
    /* the definition, written out: slot 4 */
    double *ref = out + (size_t)4 * nr * 256;
    for (int h = 0; h < nr; h++)
      for (int t = 0; t < n; t++) {
        double acc = st[h];
        for (int k = 0; k < nc; k++) {
          double prod = g[h * nc + k] * in[k * 256 + t];
          acc = acc + prod;
        }
        ref[h * 256 + t] = acc;
      }
    double *lref = low + (size_t)4 * nc * 256;
    const double *l = g + nr * nc;
    for (int i = 0; i < nc; i++)
      for (int t = 0; t < n; t++) {
        double acc = st[nr + i];
        for (int k = 0; k <= i; k++) {
          double prod = l[i * nc + k] * in[k * 256 + t];
          acc = acc + prod;
        }
        lref[i * 256 + t] = acc;
      }
    for (int level = 0; level < 4; level++) {
      int path = fg_dense_force(level);
      double *o = out + (size_t)level * nr * 256;
      for (int h = 0; h < nr; h++) op[h] = o + (size_t)h * 256;
      fg_dense_rows(g, st, nr, nc, ip, op, n);
      bool same = true;
      for (int h = 0; h < nr; h++)
        same = same && memcmp(o + h * 256, ref + h * 256,
                              sizeof(double) * (size_t)n) == 0;
      CHECK_MSG(same, "rows %dx%d, %d lanes, path %d: not the loop's bits",
                nr, nc, n, path);
      double *lo = low + (size_t)level * nc * 256;
      memcpy(lo, in, sizeof(double) * (size_t)nc * 256);
      for (int k = 0; k < nc; k++) op[k] = lo + (size_t)k * 256;
      fg_dense_lower(l, st + nr, nc, op, n);
      same = true;
      for (int i = 0; i < nc; i++)
        same = same && memcmp(lo + i * 256, lref + i * 256,
                              sizeof(double) * (size_t)n) == 0;
      CHECK_MSG(same, "lower %d, %d lanes, path %d: not the loop's bits", nc,
                n, path);
    }
    free(g), free(st), free(in), free(out), free(low), free(ip), free(op);
  }
  fg_dense_force(0);
}

/* ---- 2. plans against the block stream ---- */

#define NMODELS 14

typedef struct built {
  char doc[16384];
  int d, rows;
  double x, cap[8];
} built;

static int put(char *b, size_t cap, size_t *at, const char *fmt, double v) {
  int k = snprintf(b + *at, cap - *at, fmt, v);
  *at += (size_t)k;
  return k;
}

/* A random affine model: z ~ MVN(d), w normal[2], q lognormal (no row). */
static void build(built *m, int d, int rows) {
  size_t at = 0, cap = sizeof m->doc;
  char *b = m->doc;
  m->d = d, m->rows = rows, m->x = unif(0.2, 2);
  at += (size_t)snprintf(b, cap,
                         "{\"format\":1,\"name\":\"plan-test\",\"decisions\":"
                         "[{\"name\":\"x\"},{\"name\":\"cap\",\"size\":%d}],"
                         "\"uncertain\":[{\"name\":\"z\",\"size\":%d,"
                         "\"distribution\":{\"family\":\"multivariate_normal\","
                         "\"mean\":[",
                         rows, d);
  for (int i = 0; i < d; i++) put(b, cap, &at, i ? ",%.3f" : "%.3f", unif(-5, 5));
  at += (size_t)snprintf(b + at, cap - at, "],\"covariance\":[");
  double a[12][12], cov[12][12];
  for (int i = 0; i < d; i++)
    for (int j = 0; j < d; j++) a[i][j] = unif(-1, 1);
  for (int i = 0; i < d; i++)
    for (int j = 0; j <= i; j++) {
      double s = i == j ? 0.5 : 0;
      for (int k = 0; k < d; k++) s += a[i][k] * a[j][k];
      cov[i][j] = cov[j][i] = round(s * 1e6) / 1e6;
    }
  for (int i = 0; i < d; i++) {
    at += (size_t)snprintf(b + at, cap - at, i ? ",[" : "[");
    for (int j = 0; j < d; j++) put(b, cap, &at, j ? ",%.6f" : "%.6f", cov[i][j]);
    at += (size_t)snprintf(b + at, cap - at, "]");
  }
  double wmean = unif(-1, 1), wsd = unif(0.2, 3); /* in this order */
  at += (size_t)snprintf(
      b + at, cap - at,
      "]}},{\"name\":\"w\",\"size\":2,\"distribution\":{\"family\":\"normal\","
      "\"mean\":[%.2f,-1.5],\"sd\":[0.5,%.2f]}},{\"name\":\"q\",\"distribution\":"
      "{\"family\":\"lognormal\",\"mean\":3,\"sd\":1}}],\"constraints\":[",
      wmean, wsd);
  for (int r = 0; r < rows; r++) {
    char dot[2048];
    size_t da = 0;
    double spread = 0;
    da += (size_t)snprintf(dot, sizeof dot, "dot([");
    for (int k = 0; k < d; k++) {
      double c = next_u64() % 10 == 0 ? 0 : round(unif(-2, 2) * 100) / 100;
      spread += fabs(c) * sqrt(cov[k][k]);
      put(dot, sizeof dot, &da, k ? ",%.2f" : "%.2f", c);
    }
    da += (size_t)snprintf(dot + da, sizeof dot - da, "], z)");
    m->cap[r] = round((0.8 * spread + unif(-1, 4)) * 100) / 100;
    const char *fmt[3] = {"%s + 2.5 * w[0] <= cap[%d]",
                          "%s - x * w[1] >= -cap[%d]",
                          "-cap[%d] <= %s + 0.5 * w[1] <= cap[%d]"};
    char req[2200];
    if (r % 3 == 2)
      snprintf(req, sizeof req, fmt[2], r, dot, r);
    else
      snprintf(req, sizeof req, fmt[r % 3], dot, r);
    at += (size_t)snprintf(b + at, cap - at,
                           "%s{\"name\":\"r%d\",\"require\":\"%s\"}",
                           r ? "," : "", r, req);
  }
  snprintf(b + at, cap - at, "]}");
}

/* The request body of a built model. */
static void request_of(const built *m, char *buf, size_t cap, uint64_t seed,
                       int samples) {
  size_t at = (size_t)snprintf(buf, cap, "{\"decision\":{\"x\":%.17g,\"cap\":[",
                               m->x);
  for (int r = 0; r < m->rows; r++)
    at += (size_t)snprintf(buf + at, cap - at, r ? ",%.17g" : "%.17g",
                           m->cap[r]);
  snprintf(buf + at, cap - at, "]},\"seed\":%llu,\"samples\":%d}",
           (unsigned long long)seed, samples);
}

static double *aligned(size_t n) {
  void *p = NULL;
  if (posix_memalign(&p, 64, n * sizeof(double) + 64) != 0) return NULL;
  memset(p, 0, n * sizeof(double));
  return p;
}

static int boundary_flips;
static double worst_ratio; /* largest |folded - plain| / bound seen */

/* Plan and block stream on samples [first, first + n) of seed; when
 * `lane_out` is given, the plan's excess of each row at lane `lane`. */
static void compare_block(fg_model *m, const built *b, uint64_t seed,
                          uint64_t first, int n, int lane, double *lane_out) {
  fg_program_info in;
  fg_program_get_info(m->program, &in);
  double *setup = calloc((size_t)in.nregs + 1, sizeof(double));
  setup[in.decision_base] = b->x;
  for (int r = 0; r < b->rows; r++) setup[in.decision_base + 1 + r] = b->cap[r];
  fg_program_run_setup(m->program, setup);
  bool oom = false;
  fg_rowplan *pl = fg_rowplan_build(m, setup, &oom);
  CHECK_MSG(pl != NULL && !oom, "model with %d inputs has no row plan", b->d);
  if (!pl) {
    free(setup);
    return;
  }
  size_t nr = (size_t)in.nregs + (size_t)fg_rowplan_extra_regs(pl);
  int nu = in.nuncertain;
  double *plain = aligned(nr * FG_BLOCK), *folded = aligned(nr * FG_BLOCK);
  double *raw = aligned((size_t)nu * FG_BLOCK), *fin = aligned((size_t)nu * FG_BLOCK);
  double **ptrs = malloc(sizeof(double *) * (size_t)fg_rowplan_nptrs(pl));
  fg_program_broadcast(m->program, setup, plain);
  fg_program_broadcast(m->program, setup, folded);
  fg_sample_scratch *w = fg_sample_scratch_new(m->sampler);
  double *u = plain + (size_t)in.uncertain_base * FG_BLOCK;
  fg_sampler_draw(m->sampler, w, seed, FG_STREAM_VALIDATION, first, n, u,
                  FG_BLOCK);
  fg_program_run_block(m->program, plain, n);
  fg_sampler_draw_raw(m->sampler, w, seed, FG_STREAM_VALIDATION, first, n,
                      fg_rowplan_raw(pl), raw, FG_BLOCK);
  fg_rowplan_bind(pl, raw, folded, ptrs);
  fg_rowplan_rows(pl, ptrs, n);
  memcpy(fin, raw, sizeof(double) * (size_t)nu * FG_BLOCK);
  fg_sampler_finish_raw(m->sampler, w, n, fg_rowplan_raw(pl), fin, FG_BLOCK);
  bool same = true;
  for (int j = 0; j < nu; j++)
    same = same && memcmp(fin + (size_t)j * FG_BLOCK, u + (size_t)j * FG_BLOCK,
                          sizeof(double) * (size_t)n) == 0;
  CHECK_MSG(same, "finished inputs differ from the plain draw (d = %d)", b->d);

  /* the bound, from the half-rows and the normals behind each input */
  int cap = 2 * in.nrows, bad;
  double *form = malloc(sizeof(double) * (size_t)cap * (size_t)(nu + 1));
  int *row_of = malloc(sizeof(int) * (size_t)cap);
  int nh = fg_program_affine_halfrows(m->program, setup, form, row_of, cap, &bad);
  CHECK(nh > 0);
  for (int t = 0; t < n && nh > 0; t++) {
    double mag[16] = {0}; /* per row, the largest M of its halves */
    for (int h = 0; h < nh; h++) {
      const double *f = form + (size_t)h * (size_t)(nu + 1);
      double s = fabs(f[0]);
      for (int j = 0; j < nu; j++) {
        if (f[1 + j] == 0) continue;
        double mean, mj;
        int grp, gs;
        const double *lrow;
        if (!fg_sampler_gaussian(m->sampler, j, &mean, &grp, &gs, &lrow))
          continue;
        mj = fabs(mean);
        for (int k = 0; k < gs; k++)
          mj += fabs(lrow[k]) * fabs(raw[(size_t)(grp + k) * FG_BLOCK + t]);
        s += fabs(f[1 + j]) * mj;
      }
      if (s > mag[row_of[h]]) mag[row_of[h]] = s;
    }
    for (int r = 0; r < in.nrows; r++) {
      size_t at = (size_t)in.rows[r].excess_reg * FG_BLOCK + (size_t)t;
      double pv = plain[at], fv = folded[at];
      double bound = 2.0 * (2.0 * nu + 8.0) * 0x1p-53 * mag[r];
      double diff = fabs(pv - fv);
      if (bound > 0 && diff / bound > worst_ratio) worst_ratio = diff / bound;
      CHECK_MSG(diff <= bound, "d %d row %d lane %d: plain %.17g, folded "
                "%.17g, bound %.3g", b->d, r, t, pv, fv, bound);
      if ((pv <= 0) != (fv <= 0)) {
        boundary_flips++;
        CHECK_MSG(fabs(pv) <= bound, "verdict flipped away from the boundary");
      }
      if (lane_out && t == lane) lane_out[r] = fv;
    }
  }
  free(form), free(row_of), free(setup), free(plain), free(folded), free(raw);
  free(fin), free(ptrs);
  fg_sample_scratch_free(w);
  fg_rowplan_free(pl);
}

static fg_status parse(fg_model *m, const char *json, fg_check_request *r,
                       fg_problem *p) {
  fg_problem_init(p);
  cJSON *body = cJSON_Parse(json);
  fg_request_limits lim;
  fg_request_limits_default(&lim);
  fg_status st = fg_request_parse(m, body, &lim, r, p);
  cJSON_Delete(body);
  return st;
}

static void test_plans_against_block_stream(void) {
  static built b;
  for (int i = 0; i < NMODELS; i++) {
    int d = 1 + i % 12, rows = 1 + (int)(next_u64() % 8);
    build(&b, d, rows);
    fg_model *m = fg_test_model(b.doc);
    if (!m) continue;
    compare_block(m, &b, 1000 + (uint64_t)i, 0, FG_BLOCK, -1, NULL);
    compare_block(m, &b, 1000 + (uint64_t)i, 7 * FG_BLOCK, 100, -1, NULL);
    if (i == 3) { /* the explained scenario is the plan's, bit for bit */
      double lane_ex[16];
      compare_block(m, &b, 77, 2 * FG_BLOCK, FG_BLOCK, 41, lane_ex);
      char req[1024];
      request_of(&b, req, sizeof req, 77, 4000);
      fg_check_request r;
      fg_problem p;
      CHECK(parse(m, req, &r, &p) == FG_OK);
      cJSON *o = NULL;
      fg_problem_init(&p);
      CHECK(fg_explain_scenario(m, &r, 2 * FG_BLOCK + 41, &o, &p) == FG_OK);
      const cJSON *rs = cJSON_GetObjectItem(o, "rows");
      CHECK_INT(cJSON_GetArraySize(rs), b.rows);
      for (int k = 0; k < b.rows && k < cJSON_GetArraySize(rs); k++) {
        const cJSON *e = cJSON_GetObjectItem(cJSON_GetArrayItem(rs, k), "excess");
        double v = cJSON_IsRaw(e) ? strtod(e->valuestring, NULL)
                                  : cJSON_GetNumberValue(e);
        CHECK_MSG(memcmp(&v, &lane_ex[k], sizeof v) == 0,
                  "explain row %d: %.17g, plan %.17g", k, v, lane_ex[k]);
      }
      cJSON_Delete(o);
      fg_request_free(&r);
    }
    fg_model_unref(m);
  }
  printf("plans: %d models, worst |folded - plain| / bound %.3g, "
         "verdicts flipped at the boundary: %d\n",
         NMODELS, worst_ratio, boundary_flips);
  CHECK(worst_ratio > 0); /* the two really are different sums */
}

/* ---- 3. checks with a plan ---- */

static char *run_check(fg_model *m, const char *req, int workers,
                       uint64_t *sat) {
  fg_check_request r;
  fg_problem p;
  if (parse(m, req, &r, &p) != FG_OK) {
    CHECK_MSG(0, "parse: %s", p.detail);
    return NULL;
  }
  fg_check *c = NULL;
  fg_problem_init(&p);
  CHECK(fg_check_run_sync(m, &r, workers, 4096, &c, &p) == FG_OK);
  fg_request_free(&r);
  if (!c) return NULL;
  uint64_t n;
  fg_check_progress(c, &n, sat);
  fg_check_meta meta = {.id = "chk_test", .created_at = "2026-01-01T00:00:00Z",
                        .finished_at = "2026-01-01T00:00:01Z"};
  cJSON *res = fg_check_result_json(c, &meta);
  char *rows = cJSON_PrintUnformatted(cJSON_GetObjectItem(res, "constraints"));
  cJSON_Delete(res);
  fg_check_unref(c);
  return rows;
}

static void test_checks(void) {
  static built b;
  build(&b, 9, 6);
  fg_model *m = fg_test_model(b.doc);
  if (!m) return;
  char req[1024];
  request_of(&b, req, sizeof req, 4242, 50000);
  uint64_t k1, k2, k3, ks, koff;
  char *r1 = run_check(m, req, 1, &k1);
  char *r2 = run_check(m, req, 2, &k2);
  char *r3 = run_check(m, req, 3, &k3);
  fg_dense_force(3);
  char *rs = run_check(m, req, 2, &ks);
  fg_dense_force(0);
  fg_rowplan_force_off(true);
  char *roff = run_check(m, req, 2, &koff);
  fg_rowplan_force_off(false);
  CHECK(r1 && r2 && r3 && rs && roff);
  if (r1 && r2 && r3 && rs) {
    CHECK(k1 == k2 && k2 == k3 && k3 == ks);
    CHECK_MSG(strcmp(r1, r2) == 0 && strcmp(r2, r3) == 0,
              "row figures differ with the worker count");
    CHECK_MSG(strcmp(r2, rs) == 0, "row figures differ on the scalar path");
  }
  /* the block stream on the same samples: its verdicts differ from the
   * plan's only at boundaries (part 2), and this seed has none */
  CHECK_MSG(k2 == koff, "joint satisfied: plan %llu, block stream %llu",
            (unsigned long long)k2, (unsigned long long)koff);
  printf("check: satisfied %llu of 50000 with the plan on 1/2/3 workers and "
         "the scalar path, %llu with the block stream\n",
         (unsigned long long)k2, (unsigned long long)koff);
  free(r1), free(r2), free(r3), free(rs), free(roff);
  fg_model_unref(m);
}

/* A row whose coefficients vanish at these decisions (x = 0): the plan
 * has no column at all and the row is its constant; the same counts as
 * the block stream (every sample holds, 0 <= 1; at x = 2 about 69%). */
static void test_vanishing_row(void) {
  static const char *doc =
      "{\"format\":1,\"name\":\"plan-zero\",\"decisions\":[{\"name\":\"x\"}],"
      "\"uncertain\":[{\"name\":\"z\",\"distribution\":{\"family\":"
      "\"normal\",\"mean\":0,\"sd\":1}}],\"constraints\":[{\"name\":"
      "\"a\",\"require\":\"x * z <= 1\"}]}";
  fg_model *m = fg_test_model(doc);
  if (!m) return;
  for (int k = 0; k < 2; k++) {
    double x = k ? 2 : 0;
    fg_program_info in;
    fg_program_get_info(m->program, &in);
    double setup[64] = {0};
    CHECK(in.nregs <= 64);
    setup[in.decision_base] = x;
    fg_program_run_setup(m->program, setup);
    bool oom = false;
    fg_rowplan *pl = fg_rowplan_build(m, setup, &oom);
    CHECK(pl != NULL && !oom);
    fg_rowplan_free(pl);
    char req[128];
    snprintf(req, sizeof req, "{\"decision\":{\"x\":%g},\"seed\":5,"
                              "\"samples\":20000}", x);
    uint64_t kp, ko;
    char *a = run_check(m, req, 2, &kp);
    fg_rowplan_force_off(true);
    char *b = run_check(m, req, 2, &ko);
    fg_rowplan_force_off(false);
    CHECK_MSG(kp == ko, "x = %g: plan %llu, block stream %llu", x,
              (unsigned long long)kp, (unsigned long long)ko);
    if (k == 0) CHECK_INT(kp, 20000);
    /* P(2 z <= 1) = Phi(0.5) = 0.6915 (normal table); 5 s.e. = 0.016 */
    if (k == 1) CHECK_NEAR((double)kp / 20000, 0.6915, 0.016);
    free(a), free(b);
  }
  fg_model_unref(m);
}

int main(void) {
  test_dense_paths();
  test_plans_against_block_stream();
  test_checks();
  test_vanishing_row();
  return fg_test_finish();
}
