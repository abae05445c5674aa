/*
 * engine/scenarios.c -- a model's scenarios as text (JSON or CSV), shared by
 * `feasgate scenarios` and GET /v1/models/{name}/scenarios.
 *
 * Design: the sampler draws scenarios start .. start+count-1 of (seed,
 * stream) in blocks of FG_BLOCK (dimension j of sample t of a block at
 * buf[j * FG_BLOCK + t]); each block is printed row by row into a small
 * staging buffer that is handed to a sink whenever it fills. Because
 * sample i, dimension j is a pure function of (seed, stream, j, i), row i
 * printed alone (start = i, count = 1) is byte for byte row i of any bulk
 * request, and no output depends on how the range is cut into blocks.
 *
 * Formats:
 *   JSON  {"columns": ["dur[0]", ...], "rows": [[...], ...], "seed": S,
 *          "stream": "design", "start": I}
 *   CSV   RFC 4180: a header row of the column names, then one row per
 *          scenario, CRLF line ends, fields quoted only when they hold a
 *          comma, a quote or a line break.
 * Numbers are printed with %.17g (every double reads back exactly);
 * integer-valued dimensions (fg_sampler_integer_valued) print without a
 * decimal part. A non-finite value, which no family should produce, is
 * JSON null and an empty CSV field rather than invalid text.
 *
 * Invariants: seed <= FG_SEED_MAX and start + count <= FG_SEED_MAX + 1, so
 * every index and the echoed seed and start are exact JSON numbers.
 * fg_scenarios_render (one buffer) refuses more than FG_SCENARIO_CELLS_MAX
 * cells; fg_scenarios_write (streaming) has no size limit of its own.
 *
 * Thread use: any thread; the model is only read, and every call draws
 * with its own scratch.
 */
#include "feasgate/engine.h"

#include "sample/sample.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Bytes staged before the sink is called. One printed number is at most
 * 24 characters plus a separator, so a staging flush happens at least every
 * ~600 cells and a row of any width is handled field by field. */
#define SCEN_STAGE 16384
#define SCEN_FIELD_MAX 40

typedef struct stage {
  fg_text_sink *sink;
  void *ctx;
  char buf[SCEN_STAGE];
  size_t n;
  bool failed;
} stage;

static void flush(stage *s) {
  if (s->failed || s->n == 0) return;
  if (!s->sink(s->ctx, s->buf, s->n)) s->failed = true;
  s->n = 0;
}

static void put(stage *s, const char *text, size_t len) {
  while (len > 0 && !s->failed) {
    size_t room = SCEN_STAGE - s->n;
    if (room == 0) {
      flush(s);
      continue;
    }
    size_t k = len < room ? len : room;
    memcpy(s->buf + s->n, text, k);
    s->n += k;
    text += k;
    len -= k;
  }
}

static void puts_(stage *s, const char *text) { put(s, text, strlen(text)); }

/* One number; `csv` selects the non-finite spelling. */
static void put_number(stage *s, double v, bool integer, bool csv) {
  char f[SCEN_FIELD_MAX];
  int n;
  if (!isfinite(v)) {
    if (!csv) puts_(s, "null");
    return;
  }
  if (integer && fabs(v) < 9007199254740992.0)
    n = snprintf(f, sizeof f, "%.0f", v);
  else
    n = snprintf(f, sizeof f, "%.17g", v);
  if (n > 0) put(s, f, (size_t)n);
}

/* A JSON string; column names are plain ASCII names and indices, but
 * quotes, backslashes and control characters are escaped all the same. */
static void put_json_string(stage *s, const char *t) {
  put(s, "\"", 1);
  for (; *t; t++) {
    unsigned char c = (unsigned char)*t;
    if (c == '"' || c == '\\') {
      char e[2] = {'\\', (char)c};
      put(s, e, 2);
    } else if (c < 0x20) {
      char e[8];
      snprintf(e, sizeof e, "\\u%04x", c);
      puts_(s, e);
    } else {
      put(s, (const char *)&c, 1);
    }
  }
  put(s, "\"", 1);
}

/* A CSV field (RFC 4180 section 2, rules 6 and 7). */
static void put_csv_field(stage *s, const char *t) {
  if (!strpbrk(t, ",\"\r\n")) {
    puts_(s, t);
    return;
  }
  put(s, "\"", 1);
  for (; *t; t++) {
    if (*t == '"') put(s, "\"\"", 2);
    else put(s, t, 1);
  }
  put(s, "\"", 1);
}

static fg_status check_params(const fg_scenarios_params *q, fg_problem *p) {
  if (q->seed > FG_SEED_MAX)
    return fg_problem_set(p, FG_EINVAL,
                          "scenarios: seed %llu is above the largest seed "
                          "%llu (2^53-1)",
                          (unsigned long long)q->seed,
                          (unsigned long long)FG_SEED_MAX);
  if (q->start > FG_SEED_MAX || q->count > FG_SEED_MAX + 1 - q->start)
    return fg_problem_set(p, FG_EINVAL,
                          "scenarios: start %llu + count %llu goes beyond "
                          "scenario index 2^53",
                          (unsigned long long)q->start,
                          (unsigned long long)q->count);
  return FG_OK;
}

fg_status fg_scenarios_write(const fg_model *m, const fg_scenarios_params *q,
                             fg_text_sink *sink, void *ctx, fg_problem *p) {
  fg_status st = check_params(q, p);
  if (st != FG_OK) return st;
  const fg_sampler *smp = m->sampler;
  int dims = smp ? fg_sampler_dims(smp) : 0;
  stage *s = malloc(sizeof *s);
  double *buf = dims ? malloc(sizeof(double) * (size_t)dims * FG_BLOCK) : NULL;
  unsigned char *integer = dims ? malloc((size_t)dims) : NULL;
  fg_sample_scratch *w = dims ? fg_sample_scratch_new(smp) : NULL;
  if (!s || (dims && (!buf || !integer || !w))) {
    st = fg_problem_set(p, FG_ENOMEM,
                        "scenarios: out of memory for %d columns", dims);
    goto out;
  }
  s->sink = sink;
  s->ctx = ctx;
  s->n = 0;
  s->failed = false;
  for (int j = 0; j < dims; j++)
    integer[j] = fg_sampler_integer_valued(smp, j) ? 1 : 0;

  /* Header. */
  if (q->csv) {
    for (int j = 0; j < dims; j++) {
      if (j) put(s, ",", 1);
      put_csv_field(s, fg_sampler_column(smp, j));
    }
    put(s, "\r\n", 2);
  } else {
    puts_(s, "{\"columns\":[");
    for (int j = 0; j < dims; j++) {
      if (j) put(s, ",", 1);
      put_json_string(s, fg_sampler_column(smp, j));
    }
    puts_(s, "],\"rows\":[");
  }

  /* Rows, one block of draws at a time. */
  fg_stream stream = q->validation ? FG_STREAM_VALIDATION : FG_STREAM_DESIGN;
  for (uint64_t done = 0; done < q->count && !s->failed;) {
    uint64_t left = q->count - done;
    int n = left < FG_BLOCK ? (int)left : FG_BLOCK;
    if (dims)
      fg_sampler_draw(smp, w, q->seed, stream, q->start + done, n, buf,
                      FG_BLOCK);
    for (int t = 0; t < n; t++) {
      if (!q->csv) puts_(s, done + (uint64_t)t ? ",[" : "[");
      for (int j = 0; j < dims; j++) {
        if (j) put(s, ",", 1);
        put_number(s, buf[(size_t)j * FG_BLOCK + (size_t)t], integer[j],
                   q->csv);
      }
      if (q->csv) put(s, "\r\n", 2);
      else put(s, "]", 1);
    }
    done += (uint64_t)n;
  }

  if (!q->csv) {
    char tail[160];
    snprintf(tail, sizeof tail,
             "],\"seed\":%llu,\"stream\":\"%s\",\"start\":%llu}\n",
             (unsigned long long)q->seed,
             q->validation ? "validation" : "design",
             (unsigned long long)q->start);
    puts_(s, tail);
  }
  flush(s);
  if (s->failed)
    st = fg_problem_set(p, FG_EIO, "scenarios: the output could not be "
                                   "written");
out:
  fg_sample_scratch_free(w);
  free(integer);
  free(buf);
  free(s);
  return st;
}

/* ---- into one buffer ---- */

typedef struct membuf {
  char *data;
  size_t len, cap;
} membuf;

static bool mem_sink(void *ctx, const char *text, size_t len) {
  membuf *b = ctx;
  if (b->len + len + 1 > b->cap) {
    size_t cap = b->cap ? b->cap : 65536;
    while (cap < b->len + len + 1) cap *= 2;
    char *d = realloc(b->data, cap);
    if (!d) return false;
    b->data = d;
    b->cap = cap;
  }
  memcpy(b->data + b->len, text, len);
  b->len += len;
  b->data[b->len] = '\0';
  return true;
}

fg_status fg_scenarios_render(const fg_model *m, const fg_scenarios_params *q,
                              char **out, size_t *len, fg_problem *p) {
  *out = NULL;
  *len = 0;
  int dims = m->sampler ? fg_sampler_dims(m->sampler) : 0;
  uint64_t width = dims > 0 ? (uint64_t)dims : 1;
  if (q->count > FG_SCENARIO_CELLS_MAX / width) {
    fg_problem_set(p, FG_ELIMIT,
                   "scenarios: %llu scenarios of %d columns exceed "
                   "scenario_cells = %llu values in one response",
                   (unsigned long long)q->count, dims,
                   (unsigned long long)FG_SCENARIO_CELLS_MAX);
    p->limit_name = "scenario_cells";
    p->limit_value = (double)FG_SCENARIO_CELLS_MAX;
    return FG_ELIMIT;
  }
  membuf b = {0};
  fg_status st = fg_scenarios_write(m, q, mem_sink, &b, p);
  if (st == FG_EIO) {
    /* The only way the buffer sink fails. */
    fg_problem_init(p);
    st = fg_problem_set(p, FG_ENOMEM,
                        "scenarios: out of memory for %llu scenarios",
                        (unsigned long long)q->count);
  }
  if (st != FG_OK) {
    free(b.data);
    return st;
  }
  *out = b.data;
  *len = b.len;
  return FG_OK;
}
