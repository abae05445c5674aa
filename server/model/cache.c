/*
 * model/cache.c -- a small cache of compiled models keyed by digest.
 *
 * Design: a fixed array of `capacity` slots under one mutex; each slot holds
 * one reference to a model and the tick of its last use. get and put scan
 * the slots (capacity is tens, so a scan is cheaper than keeping a hash and
 * a list in step); eviction takes the slot with the oldest tick. The lock is
 * held only while slots change: the reference an eviction drops is released
 * after unlocking, so freeing a large model never stalls other threads.
 *
 * Contract: get returns a new reference (the caller unrefs it) or NULL.
 * put takes its own reference, so the caller keeps the one it holds; if a
 * model with the same digest is cached already it is kept (same digest,
 * same document) and only marked as used. A capacity of 0 caches nothing.
 *
 * Thread use: any thread, concurrently.
 */
#include "model_internal.h"

#include <pthread.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

typedef struct cache_slot {
  fg_model *model; /* NULL when free */
  uint64_t used;   /* tick of the last get or put */
} cache_slot;

struct fg_model_cache {
  pthread_mutex_t lock;
  int capacity;
  uint64_t tick;
  cache_slot *slots;
};

fg_model_cache *fg_model_cache_new(int capacity) {
  if (capacity < 0) capacity = 0;
  fg_model_cache *c = calloc(1, sizeof *c);
  if (!c) return NULL;
  c->slots = calloc((size_t)(capacity > 0 ? capacity : 1), sizeof *c->slots);
  if (!c->slots || pthread_mutex_init(&c->lock, NULL) != 0) {
    free(c->slots);
    free(c);
    return NULL;
  }
  c->capacity = capacity;
  return c;
}

void fg_model_cache_free(fg_model_cache *c) {
  if (!c) return;
  for (int i = 0; i < c->capacity; i++)
    fg_model_unref(c->slots[i].model);
  pthread_mutex_destroy(&c->lock);
  free(c->slots);
  free(c);
}

static int find(const fg_model_cache *c, const char *digest) {
  for (int i = 0; i < c->capacity; i++)
    if (c->slots[i].model && strcmp(c->slots[i].model->digest, digest) == 0)
      return i;
  return -1;
}

fg_model *fg_model_cache_get(fg_model_cache *c, const char *digest) {
  if (!c || !digest) return NULL;
  fg_model *m = NULL;
  pthread_mutex_lock(&c->lock);
  int i = find(c, digest);
  if (i >= 0) {
    c->slots[i].used = ++c->tick;
    m = fg_model_ref(c->slots[i].model);
  }
  pthread_mutex_unlock(&c->lock);
  return m;
}

void fg_model_cache_put(fg_model_cache *c, fg_model *m) {
  if (!c || !m || c->capacity == 0) return;
  fg_model *evicted = NULL;
  pthread_mutex_lock(&c->lock);
  int i = find(c, m->digest);
  if (i < 0) {
    i = 0;
    for (int k = 0; k < c->capacity; k++) {
      if (!c->slots[k].model) {
        i = k;
        break;
      }
      if (c->slots[k].used < c->slots[i].used) i = k;
    }
    evicted = c->slots[i].model;
    c->slots[i].model = fg_model_ref(m);
  }
  c->slots[i].used = ++c->tick;
  pthread_mutex_unlock(&c->lock);
  fg_model_unref(evicted);
}
