/*
 * engine/scenarios.c -- a model's scenarios as text (JSON or CSV), shared by
 * `feasgate scenarios` and GET /v1/models/{name}/scenarios.
 *
 * Design: a stream (fg_scenarios_open) is read piece by piece
 * (fg_scenarios_read): the header is printed at open; each refill draws
 * the next rows of start .. start+count-1 of (seed, stream) when the last
 * draw is used up -- FG_SCENARIO_STREAM_BYTES of values at a time, at
 * most FG_BLOCK rows (dimension j of row t of a draw at buf[j * rows + t])
 * -- and prints rows until the text holds FG_SCENARIO_STAGE_BYTES bytes; the
 * tail follows the last row. A stream's memory is thus the drawn values, the
 * header and FG_SCENARIO_STAGE_BYTES plus one row of text, whatever count is.
 * fg_scenarios_write (the offline command) reads a stream into a sink,
 * and GET .../scenarios hands one to libmicrohttpd, so both print the
 * same bytes. Because
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
 * fg_scenarios_render (one buffer) and the daemon refuse more than
 * FG_SCENARIO_CELLS_MAX cells; fg_scenarios_write has no size limit.
 *
 * Thread use: any thread; the model is only read, and every stream draws
 * with its own scratch. One stream is used by one thread at a time.
 */
#include "core/buf.h"
#include "feasgate/engine.h"

#include "sample/sample.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Longest printed number: %.17g of a double is at most 24 characters
 * ("-1.2345678901234567e-308"); one more for the separator. */
#define SCEN_FIELD_MAX 25

/* The growable text buffer of a stream: `len` bytes, `pos` of them read. */
typedef struct scen_text {
  char *buf;
  size_t len, pos, cap;
  bool failed; /* out of memory; nothing more is appended */
} scen_text;

struct fg_scenarios_stream {
  fg_model *m; /* a reference */
  fg_scenarios_params q;
  int dims;
  int rows_per_draw; /* rows drawn at once (1 .. FG_BLOCK) */
  double *buf;       /* dims x rows_per_draw drawn values */
  unsigned char *integer;
  fg_sample_scratch *w;
  uint64_t done; /* rows printed */
  int blk_n, blk_t; /* rows in buf, next row of buf to print */
  int phase;        /* 0 rows, 1 tail written, 2 finished */
  scen_text t;
};

static bool reserve(scen_text *t, size_t more) {
  if (t->failed) return false;
  if (t->len + more <= t->cap) return true;
  if (fg_buf_grow(&t->buf, &t->cap, t->len + more, FG_SCENARIO_STAGE_BYTES, 0))
    return true;
  t->failed = true;
  return false;
}

static void put(scen_text *t, const char *s, size_t len) {
  if (!reserve(t, len)) return;
  memcpy(t->buf + t->len, s, len);
  t->len += len;
}

static void puts_(scen_text *t, const char *s) { put(t, s, strlen(s)); }

/* One number; `csv` selects the non-finite spelling. */
static void put_number(scen_text *t, double v, bool integer, bool csv) {
  char f[40];
  int n;
  if (!isfinite(v)) {
    if (!csv) puts_(t, "null");
    return;
  }
  if (integer && fabs(v) < 9007199254740992.0)
    n = snprintf(f, sizeof f, "%.0f", v);
  else
    n = snprintf(f, sizeof f, "%.17g", v);
  if (n > 0) put(t, f, (size_t)n);
}

/* A JSON string; column names are plain ASCII names and indices, but
 * quotes, backslashes and control characters are escaped all the same. */
static void put_json_string(scen_text *t, const char *s) {
  put(t, "\"", 1);
  for (; *s; s++) {
    unsigned char c = (unsigned char)*s;
    if (c == '"' || c == '\\') {
      char e[2] = {'\\', (char)c};
      put(t, e, 2);
    } else if (c < 0x20) {
      char e[8];
      snprintf(e, sizeof e, "\\u%04x", c);
      puts_(t, e);
    } else {
      put(t, (const char *)&c, 1);
    }
  }
  put(t, "\"", 1);
}

/* A CSV field (RFC 4180 section 2, rules 6 and 7). */
static void put_csv_field(scen_text *t, const char *s) {
  if (!strpbrk(s, ",\"\r\n")) {
    puts_(t, s);
    return;
  }
  put(t, "\"", 1);
  for (; *s; s++) {
    if (*s == '"') put(t, "\"\"", 2);
    else put(t, s, 1);
  }
  put(t, "\"", 1);
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

void fg_scenarios_close(fg_scenarios_stream *s) {
  if (!s) return;
  fg_sample_scratch_free(s->w);
  free(s->integer);
  free(s->buf);
  free(s->t.buf);
  if (s->m) fg_model_unref(s->m);
  free(s);
}

fg_status fg_scenarios_open(fg_model *m, const fg_scenarios_params *q,
                            fg_scenarios_stream **out, fg_problem *p) {
  *out = NULL;
  fg_status st = check_params(q, p);
  if (st != FG_OK) return st;
  fg_scenarios_stream *s = calloc(1, sizeof *s);
  if (!s) return fg_problem_set(p, FG_ENOMEM, "scenarios: out of memory");
  s->m = fg_model_ref(m);
  s->q = *q;
  const fg_sampler *smp = m->sampler;
  s->dims = smp ? fg_sampler_dims(smp) : 0;
  size_t row_bytes = sizeof(double) * (size_t)(s->dims ? s->dims : 1);
  size_t rows = FG_SCENARIO_STREAM_BYTES / row_bytes;
  s->rows_per_draw = rows < 1 ? 1 : rows > FG_BLOCK ? FG_BLOCK : (int)rows;
  if (s->dims) {
    s->buf = malloc(row_bytes * (size_t)s->rows_per_draw);
    s->integer = malloc((size_t)s->dims);
    s->w = fg_sample_scratch_new(smp);
  }
  /* The text never holds more than the header, or FG_SCENARIO_STAGE_BYTES bytes
   * plus one row and the tail: reserved now, so reading never allocates. */
  size_t row_max = (size_t)s->dims * SCEN_FIELD_MAX + 8;
  if ((s->dims && (!s->buf || !s->integer || !s->w)) ||
      !reserve(&s->t, FG_SCENARIO_STAGE_BYTES + row_max + 160)) {
    fg_scenarios_close(s);
    return fg_problem_set(p, FG_ENOMEM,
                          "scenarios: out of memory for %d columns", s->dims);
  }
  for (int j = 0; j < s->dims; j++)
    s->integer[j] = fg_sampler_integer_valued(smp, j) ? 1 : 0;
  scen_text *t = &s->t;
  if (q->csv) {
    for (int j = 0; j < s->dims; j++) {
      if (j) put(t, ",", 1);
      put_csv_field(t, fg_sampler_column(smp, j));
    }
    put(t, "\r\n", 2);
  } else {
    puts_(t, "{\"columns\":[");
    for (int j = 0; j < s->dims; j++) {
      if (j) put(t, ",", 1);
      put_json_string(t, fg_sampler_column(smp, j));
    }
    puts_(t, "],\"rows\":[");
  }
  if (t->failed) {
    fg_scenarios_close(s);
    return fg_problem_set(p, FG_ENOMEM,
                          "scenarios: out of memory for %d column names",
                          s->dims);
  }
  *out = s;
  return FG_OK;
}

/* Refill the (fully read) text: rows until it holds FG_SCENARIO_STAGE_BYTES
 * bytes or the rows run out, then the tail. */
static void refill(fg_scenarios_stream *s) {
  scen_text *t = &s->t;
  t->len = t->pos = 0;
  const fg_scenarios_params *q = &s->q;
  fg_stream stream = q->validation ? FG_STREAM_VALIDATION : FG_STREAM_DESIGN;
  while (s->phase == 0 && t->len < FG_SCENARIO_STAGE_BYTES) {
    if (s->blk_t == s->blk_n) {
      uint64_t left = q->count - s->done;
      if (left == 0) {
        if (!q->csv) {
          char tail[160];
          snprintf(tail, sizeof tail,
                   "],\"seed\":%llu,\"stream\":\"%s\",\"start\":%llu}\n",
                   (unsigned long long)q->seed,
                   q->validation ? "validation" : "design",
                   (unsigned long long)q->start);
          puts_(t, tail);
        }
        s->phase = 1;
        break;
      }
      int n = left < (uint64_t)s->rows_per_draw ? (int)left : s->rows_per_draw;
      /* sample i, dimension j depends on (seed, stream, j, i) alone, so
       * the cut into draws never shows in the text */
      if (s->dims)
        fg_sampler_draw(s->m->sampler, s->w, q->seed, stream,
                        q->start + s->done, n, s->buf,
                        (size_t)s->rows_per_draw);
      s->blk_n = n;
      s->blk_t = 0;
    }
    int r = s->blk_t++;
    if (!q->csv) puts_(t, s->done ? ",[" : "[");
    for (int j = 0; j < s->dims; j++) {
      if (j) put(t, ",", 1);
      put_number(t, s->buf[(size_t)j * (size_t)s->rows_per_draw + (size_t)r],
                 s->integer[j], q->csv);
    }
    if (q->csv) put(t, "\r\n", 2);
    else put(t, "]", 1);
    s->done++;
  }
}

bool fg_scenarios_failed(const fg_scenarios_stream *s) {
  return s->t.failed;
}

size_t fg_scenarios_read(fg_scenarios_stream *s, char *buf, size_t cap) {
  size_t n = 0;
  while (n < cap && !s->t.failed) {
    scen_text *t = &s->t;
    if (t->pos == t->len) {
      if (s->phase != 0) {
        s->phase = 2;
        break;
      }
      refill(s);
      continue;
    }
    size_t k = t->len - t->pos;
    if (k > cap - n) k = cap - n;
    memcpy(buf + n, t->buf + t->pos, k);
    t->pos += k;
    n += k;
  }
  return n;
}

fg_status fg_scenarios_write(const fg_model *m, const fg_scenarios_params *q,
                             fg_text_sink *sink, void *ctx, fg_problem *p) {
  fg_scenarios_stream *s = NULL;
  /* the stream takes a reference, which the caller's model outlives */
  fg_status st = fg_scenarios_open((fg_model *)m, q, &s, p);
  if (st != FG_OK) return st;
  char chunk[FG_SCENARIO_STAGE_BYTES];
  size_t n;
  bool ok = true;
  while (ok && (n = fg_scenarios_read(s, chunk, sizeof chunk)) > 0)
    ok = sink(ctx, chunk, n);
  bool oom = fg_scenarios_failed(s);
  fg_scenarios_close(s);
  if (oom)
    return fg_problem_set(p, FG_ENOMEM, "scenarios: out of memory");
  if (!ok)
    return fg_problem_set(p, FG_EIO, "scenarios: the output could not be "
                                     "written");
  return FG_OK;
}

fg_status fg_scenarios_size_check(const fg_model *m, uint64_t count,
                                  fg_problem *p) {
  int dims = m->sampler ? fg_sampler_dims(m->sampler) : 0;
  uint64_t width = dims > 0 ? (uint64_t)dims : 1;
  if (count <= FG_SCENARIO_CELLS_MAX / width) return FG_OK;
  fg_problem_set(p, FG_ELIMIT,
                 "scenarios: %llu scenarios of %d columns exceed "
                 "scenario_cells = %llu values in one response",
                 (unsigned long long)count, dims,
                 (unsigned long long)FG_SCENARIO_CELLS_MAX);
  p->limit_name = fg_limit_name(FG_LIMIT_SCENARIO_CELLS);
  p->limit_value = (double)FG_SCENARIO_CELLS_MAX;
  return FG_ELIMIT;
}

/* ---- into one buffer ---- */

static bool mem_sink(void *ctx, const char *text, size_t len) {
  return fg_buf_append(ctx, text, len, 65536);
}

fg_status fg_scenarios_render(const fg_model *m, const fg_scenarios_params *q,
                              char **out, size_t *len, fg_problem *p) {
  *out = NULL;
  *len = 0;
  fg_status sized = fg_scenarios_size_check(m, q->count, p);
  if (sized != FG_OK) return sized;
  fg_buf b = {0};
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
