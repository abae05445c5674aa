/*
 * core/buf.c -- the growable byte buffer of core/buf.h.
 *
 * Invariants: cap is 0 or the size of the block data points to; after
 * fg_buf_append, len < cap and data[len] is '\0'. The doubling loop runs
 * at most as many times as size_t has bits.
 *
 * Thread use: reentrant.
 */
#include "core/buf.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

bool fg_buf_grow(char **data, size_t *cap, size_t need, size_t first,
                 size_t most) {
  if (need <= *cap) return true;
  size_t c = *cap ? *cap : (first ? first : 1);
  while (c < need) {
    if (c > SIZE_MAX / 2) return false;
    c *= 2;
  }
  if (most && c > most && most >= need) c = most;
  char *grown = realloc(*data, c);
  if (!grown) return false;
  *data = grown;
  *cap = c;
  return true;
}

bool fg_buf_append(fg_buf *b, const char *s, size_t n, size_t first) {
  if (n >= SIZE_MAX - b->len) return false;
  if (!fg_buf_grow(&b->data, &b->cap, b->len + n + 1, first, 0)) return false;
  memcpy(b->data + b->len, s, n);
  b->len += n;
  b->data[b->len] = '\0';
  return true;
}
