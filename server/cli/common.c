/*
 * cli/common.c -- what the commands share: reading a file (or standard
 * input) with the body size cap, printing a problem (malformed JSON by
 * line and column, then each item's JSON Pointer or column), parsing a
 * whole number within a bound, loading a model document.
 *
 * Thread use: the main thread of a command.
 */
#include "cli/cli.h"

#include <cjson/cJSON.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

/* Read a whole file (at most FG_MAX_BODY_HARD bytes). */
char *fg_cli_read_file(const char *path, size_t *len) {
  FILE *f = strcmp(path, "-") == 0 ? stdin : fopen(path, "rb");
  if (!f) {
    fprintf(stderr, "feasgate: cannot open %s: %s\n", path, strerror(errno));
    return NULL;
  }
  size_t cap = 65536, n = 0;
  char *buf = malloc(cap + 1);
  while (buf) {
    size_t r = fread(buf + n, 1, cap - n, f);
    n += r;
    if (r == 0) break;
    if (n == cap) {
      if (cap >= FG_MAX_BODY_HARD) {
        fprintf(stderr, "feasgate: %s is larger than %u bytes\n", path,
                FG_MAX_BODY_HARD);
        free(buf);
        buf = NULL;
        break;
      }
      cap *= 2;
      char *nb = realloc(buf, cap + 1);
      if (!nb) {
        free(buf);
        buf = NULL;
      }
      buf = nb;
    }
  }
  if (f != stdin) fclose(f);
  if (!buf) return NULL;
  buf[n] = '\0';
  *len = n;
  return buf;
}

/* `text`/`len`, when given, is the file the problem is about: a byte
 * offset into it is shown as line and column. */
void fg_cli_print_problem(const char *what, const fg_problem *p,
                          const char *text, size_t len) {
  if (p->byte_offset >= 0 && text) {
    /* Malformed JSON: the file's line and column first, as an editor
     * shows them; the detail repeats the byte offset. */
    int line, col;
    fg_text_position(text, len, p->byte_offset, &line, &col);
    fprintf(stderr, "feasgate: %s: line %d, column %d: %s\n", what, line,
            col, p->detail[0] ? p->detail : p->title);
    return;
  }
  fprintf(stderr, "feasgate: %s: %s%s%s\n", what, p->title,
          p->detail[0] ? ": " : "", p->detail);
  for (int i = 0; i < p->nitems; i++) {
    const fg_problem_item *it = &p->items[i];
    if (it->column > 0)
      fprintf(stderr, "  %s (column %d): %s\n", it->pointer, it->column,
              it->message);
    else
      fprintf(stderr, "  %s: %s\n", it->pointer[0] ? it->pointer : "(body)",
              it->message);
  }
  if (p->dropped) fprintf(stderr, "  ... and %d more\n", p->dropped);
  if (p->byte_offset >= 0) {
    fprintf(stderr, "  (at byte offset %lld)\n", p->byte_offset);
  }
}

bool fg_cli_parse_u64(const char *s, uint64_t max, uint64_t *out) {
  char *end;
  errno = 0;
  if (!s || !*s || *s == '-') return false;
  unsigned long long v = strtoull(s, &end, 10);
  if (errno || *end || v > max) return false;
  *out = v;
  return true;
}

fg_model *fg_cli_load_model(const char *path) {
  size_t len;
  char *text = fg_cli_read_file(path, &len);
  if (!text) return NULL;
  fg_problem p;
  fg_problem_init(&p);
  fg_model *m = NULL;
  if (fg_model_compile(text, len, &m, &p) != FG_OK) {
    fg_cli_print_problem(path, &p, text, len);
    m = NULL;
  }
  free(text);
  return m;
}
