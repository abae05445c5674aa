/*
 * core/buf.h -- one growable byte buffer for the text the modules build
 * (core/buf.c): a request body as it arrives (http/), a scenario stream's
 * text (engine/), a canonical form (model/), the metrics exposition.
 *
 * Design: the capacity starts at a size the caller names (what its text
 * usually needs) and doubles until the need fits, held to an upper bound
 * where the caller has one. A failed allocation leaves the buffer as it
 * was, so the caller decides whether to stop or to answer without it.
 *
 * Thread use: a buffer belongs to one caller; the functions keep no state.
 */
#ifndef FG_CORE_BUF_H
#define FG_CORE_BUF_H

#include <stdbool.h>
#include <stddef.h>

typedef struct fg_buf {
  char *data; /* malloc'd; NUL-terminated after fg_buf_append */
  size_t len, cap;
} fg_buf;

/* Grows *data (malloc'd or NULL, capacity *cap) to hold at least `need`
 * bytes: the capacity doubles from `first` (when *cap is 0) until it
 * fits, then is held to `most` where that still fits (0: no bound).
 * True at once when it fits already; false when out of memory (or the
 * doubling would overflow), with *data and *cap unchanged. */
bool fg_buf_grow(char **data, size_t *cap, size_t need, size_t first,
                 size_t most);

/* Appends n bytes of s and a NUL after them (not counted in len), growing
 * from `first`. False when out of memory, with the buffer unchanged. */
bool fg_buf_append(fg_buf *b, const char *s, size_t n, size_t first);

#endif
